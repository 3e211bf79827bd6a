"""Output: figures, the HTML report and terminal tables (the only layer that draws)."""
