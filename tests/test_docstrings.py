"""Every public function documents its parameters with units, in the signature's order, and its return.

The rule of the project's style (numpydoc, a ``[unit]`` for every parameter and
return, docstrings that agree with the signature), checked by the reader of
:mod:`tests.docstrings`. Add a package or a module to :data:`CHECKED`
to hold it to the same rule.
"""

import inspect

import pytest

from .docstrings import modules, problems, public_functions

#: Packages (each of their modules) and modules whose public functions are checked.
CHECKED = ["thermoelec.physics", "thermoelec.engine"]

FUNCTIONS = [f for module in modules(CHECKED) for f in public_functions(module)]


def test_the_physics_functions_are_found():
    names = {f"{f.__module__}.{f.__name__}" for f in FUNCTIONS}
    assert {"thermoelec.physics.cell.bernardi_heat", "thermoelec.physics.thermal.biot_number",
            "thermoelec.physics.correlations.nusselt_cylinder_churchill_bernstein",
            "thermoelec.physics.loads.pack_current", "thermoelec.physics.tables.interpolate_2d"} <= names


@pytest.mark.parametrize("function", FUNCTIONS, ids=lambda f: f"{f.__module__}.{f.__name__}")
def test_docstring_documents_parameters_with_units_and_the_return(function):
    assert problems(function) == []


# The reader itself, on docstrings that break each rule (so the check above can fail).

def _speed(distance: float, time: float) -> float:
    """Speed.

    Parameters
    ----------
    distance : float
        Distance [m].
    time : float
        Duration.

    Returns
    -------
    float
        Speed.
    """
    return distance / time


def _swapped(distance: float, time: float) -> float:
    """Speed.

    Parameters
    ----------
    time : float
        Duration [s].
    distance : float
        Distance [m].

    Returns
    -------
    float
        Speed [m/s].
    """
    return distance / time


def _no_returns(name: str, first: float, second: float) -> float:
    """Sum.

    Parameters
    ----------
    name : str
        A label, not a quantity: no unit.
    first, second : float
        Terms [J].
    """
    return first + second


def _index_is_no_unit(values: list, i: int) -> float:
    """Element.

    Parameters
    ----------
    values : array of float
        Read as ``values[i]``, which is an index, not a unit.
    i : int
        Index [-].

    Returns
    -------
    float
        ``values[i]`` [unit of ``values``].
    """
    return values[i]


def test_the_reader_finds_each_broken_rule():
    assert problems(_speed) == ["_speed: parameter 'time' has no [unit]", "_speed: return 'float' has no [unit]"]
    assert problems(_swapped) == [
        "_swapped: documents parameters ['time', 'distance'], the signature has ['distance', 'time']"]
    assert problems(_no_returns) == ["_no_returns: no Returns section"]
    assert problems(_index_is_no_unit) == ["_index_is_no_unit: parameter 'values' has no [unit]"]
    assert inspect.getdoc(_no_returns)  # the docstring is there; only its Returns is missing
