"""Input files at the edge: the input error, quantities with units, CSV reading.

Shared by every reader of user files (the scenario format, test logs, cell
files, the command line). Imports only from :mod:`thermoelec.physics` and below.
"""

from thermoelec.inputs.csvfiles import check_increasing, numeric_column, read_csv_frame
from thermoelec.inputs.errors import ScenarioError
from thermoelec.inputs.units import from_si, to_si

__all__ = ["ScenarioError", "check_increasing", "from_si", "numeric_column", "read_csv_frame", "to_si"]
