"""The JSON documents and the terminal tables of every command (design, schedule, robustness,
responses, failures, sweep, compare, assess), built from analysis results."""
