"""Handling-qualities measures computed from frequency responses (batched, numpy)."""
