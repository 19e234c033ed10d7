"""Requirements: bands and limits from the case or from published presets, slack and levels."""
