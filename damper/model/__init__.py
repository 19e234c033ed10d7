"""Loop models: bare airframe, hardware elements and the assembled pitch-rate loop (batched)."""
