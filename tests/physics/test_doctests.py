"""The examples in the docstrings of thermoelec.physics run and give what they show.

The examples reproduce published worked values (Incropera's examples as quoted
by ``ht``, the project's validation notes) and closed forms; running them here
keeps them true. Every ``>>>`` line of a module must be collected, so an example
the doctest finder does not reach (a wrapped function, say) fails the test
instead of passing unseen.
"""

import doctest
import inspect
import io

import pytest

from ..docstrings import modules

PACKAGES = ["thermoelec.physics"]
MODULES = list(modules(PACKAGES))


@pytest.mark.parametrize("module", MODULES, ids=lambda m: m.__name__)
def test_docstring_examples(module):
    runner = doctest.DocTestRunner(optionflags=doctest.NORMALIZE_WHITESPACE)
    report = io.StringIO()
    for test in doctest.DocTestFinder().find(module):
        runner.run(test, out=report.write)
    failed, attempted = runner.summarize(verbose=False)
    assert failed == 0, report.getvalue()
    assert attempted == inspect.getsource(module).count(">>> "), "an example was not collected"


def test_the_physics_modules_have_examples():
    counts = {m.__name__.rsplit(".", 1)[1]: inspect.getsource(m).count(">>> ") for m in MODULES}
    assert all(counts[name] > 0 for name in ("cell", "correlations", "loads", "tables", "thermal")), counts
