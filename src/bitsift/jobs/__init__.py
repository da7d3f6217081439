"""Scheduled runs: job files, the results history, drift between runs, model cards."""
