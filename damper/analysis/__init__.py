"""Analyses built on the measures: assess given gains, search, schedule, robustness, responses."""
