"""Output: figures, the HTML report and terminal tables (the only layer that draws).

Reads what analysis/ computed; imports from analysis/ and below only, never
from fit/, the API or the command line.
"""
