"""Outputs: JSON structures, terminal tables, files, plots and the report. No measure is computed here."""
