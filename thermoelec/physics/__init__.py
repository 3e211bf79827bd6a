"""Physics: cell laws and tables, the thermal network and its correlations; pure functions and parameter holders."""
