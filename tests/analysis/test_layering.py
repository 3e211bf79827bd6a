"""The analysis and output layers import only downwards, and keep their functions short.

The layer order is the project's (physics < inputs < engine < scenario <
analysis < output < fit < api, cli); a lazy import inside a function counts
too, so the source is read, not the import graph at run time. Only output/
draws: analysis/ imports no matplotlib.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import thermoelec

PACKAGE = Path(thermoelec.__file__).parent
#: What each layer must not import (the layers above it, and the drawing library below output/).
FORBIDDEN = {
    "analysis": ("thermoelec.output", "thermoelec.fit", "thermoelec.api", "thermoelec.cli", "matplotlib"),
    "output": ("thermoelec.fit", "thermoelec.api", "thermoelec.cli"),
}
#: The longest function allowed in these layers and at the top [lines].
MAX_FUNCTION_LINES = 80


def _imports(path: Path) -> list[str]:
    names = []
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom) and node.module:
            names.append(node.module)
        elif isinstance(node, ast.Import):
            names += [alias.name for alias in node.names]
    return names


@pytest.mark.parametrize("layer", sorted(FORBIDDEN))
def test_no_upward_import(layer):
    found = [f"{path.relative_to(PACKAGE)} imports {name}"
             for path in sorted((PACKAGE / layer).rglob("*.py")) for name in _imports(path)
             if name.startswith(FORBIDDEN[layer])]
    assert not found, "\n".join(found)


def test_functions_are_short():
    files = [*(PACKAGE / "analysis").rglob("*.py"), *(PACKAGE / "output").rglob("*.py"),
             PACKAGE / "cli.py", PACKAGE / "api.py"]
    long = [f"{path.relative_to(PACKAGE)}:{node.lineno} {node.name} ({node.end_lineno - node.lineno + 1} lines)"
            for path in files for node in ast.walk(ast.parse(path.read_text()))
            if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef)
            and node.end_lineno - node.lineno + 1 > MAX_FUNCTION_LINES]
    assert not long, "\n".join(long)
