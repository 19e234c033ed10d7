"""Stages of a run that compute and write one part of it (used by more than one command)."""
