"""Fitting cells from test logs: logs, fits, cell files, synthetic logs."""
