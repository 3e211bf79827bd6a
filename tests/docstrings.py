"""A small numpydoc reader for the docstring rules of the project's style.

Reads the ``Parameters`` and ``Returns`` sections of a numpydoc docstring (a
title underlined with dashes, entries ``name : type`` at the left margin, their
description indented below) and reports where a docstring breaks the rules:
every parameter documented, in the signature's order, each quantity with its
unit in brackets (``[K]``, ``[W/(m² K)]``, ``[-]`` for a dimensionless number),
and a ``Returns`` section whose quantities carry their unit too. Parameters
and returns that are not quantities (a name, a flag, an object) need no unit.
"""

from __future__ import annotations

import ast
import importlib
import inspect
import pkgutil
import re
import textwrap
from collections.abc import Callable, Iterator
from types import ModuleType

#: A unit in brackets, not an index: ``[K]`` after a space or an opening parenthesis, ``grid[i]`` is no unit.
UNIT = re.compile(r"(?:^|(?<=[\s(]))\[[^\[\]]+\]")
_RULE = re.compile(r"^-{3,}$")
#: Types of parameters that are not quantities (the first word of the type, or its first character).
_NOT_QUANTITIES = ("str", "bool", "callable", "list of str", "tuple of str", "{")


def sections(doc: str) -> dict[str, list[str]]:
    """The lines of each numpydoc section, by title."""
    lines = inspect.cleandoc(doc).splitlines()
    found: dict[str, list[str]] = {}
    current = None
    i = 0
    while i < len(lines):
        if (i + 1 < len(lines) and lines[i].strip() and not lines[i].startswith(" ")
                and _RULE.match(lines[i + 1].strip())):
            current = lines[i].strip()
            found[current] = []
            i += 2
            continue
        if current is not None:
            found[current].append(lines[i])
        i += 1
    return found


def entries(lines: list[str]) -> list[tuple[str, str, str]]:
    """``(head, type, description)`` of each entry: ``head`` is the names (or the type of an unnamed return)."""
    found: list[list[str]] = []
    for line in lines:
        if not line.strip():
            continue
        if not line.startswith(" "):
            head, _, kind = line.partition(" : ")
            found.append([head.strip(), kind.strip(), ""])
        elif found:
            found[-1][2] += " " + line.strip()
    return [(head, kind, text.strip()) for head, kind, text in found]


def is_quantity(kind: str) -> bool:
    """True for a numeric type (float, int, array ...); a class of the package (capitalized) is not one."""
    kind = kind.strip()
    return bool(kind) and not kind[0].isupper() and not kind.lower().startswith(_NOT_QUANTITIES)


def problems(function: Callable) -> list[str]:
    """What breaks the rules in the docstring of ``function`` (empty when none)."""
    name = function.__qualname__
    doc = inspect.getdoc(function)
    if not doc:
        return [f"{name}: no docstring"]
    found = sections(doc)
    signature = inspect.signature(function)
    wanted = [p for p in signature.parameters if p not in ("self", "cls")]
    documented: list[str] = []
    issues = []
    for head, kind, text in entries(found.get("Parameters", [])):
        names = [n.strip() for n in head.split(",")]
        documented += names
        if is_quantity(kind) and not UNIT.search(f"{kind} {text}"):
            issues.append(f"{name}: parameter {head!r} has no [unit]")
    if documented != wanted:
        issues.append(f"{name}: documents parameters {documented}, the signature has {wanted}")
    if _returns_a_value(function, signature):
        returns = entries(found.get("Returns", []))
        if not returns:
            issues.append(f"{name}: no Returns section")
        for head, kind, text in returns:
            kind = kind or head  # an unnamed return is its type
            if is_quantity(kind) and not UNIT.search(f"{kind} {text}"):
                issues.append(f"{name}: return {head!r} has no [unit]")
    return issues


def _returns_a_value(function: Callable, signature: inspect.Signature) -> bool:
    """Whether the function returns something: by its annotation, else (a numba kernel has none) by its source."""
    if signature.return_annotation is not inspect.Signature.empty:
        return signature.return_annotation not in (None, "None")
    tree = ast.parse(textwrap.dedent(inspect.getsource(function)))
    body = tree.body[0]
    inner = [n for n in ast.walk(body) if isinstance(n, (ast.FunctionDef, ast.Lambda)) and n is not body]
    nested = {id(n) for f in inner for n in ast.walk(f)}
    return any(isinstance(n, ast.Return) and n.value is not None and id(n) not in nested for n in ast.walk(body))


def modules(names: list[str]) -> Iterator[ModuleType]:
    """The modules named, a package standing for each of its modules."""
    for name in names:
        module = importlib.import_module(name)
        if hasattr(module, "__path__"):
            for info in pkgutil.iter_modules(module.__path__):
                yield importlib.import_module(f"{name}.{info.name}")
        else:
            yield module


def public_functions(module: ModuleType) -> list[Callable]:
    """The public functions defined in ``module`` (numba kernels by their Python function) and the public
    methods of its public classes; re-exports are checked at home, properties by their one-line summary."""
    found: list[Callable] = []
    for name, obj in vars(module).items():
        if name.startswith("_"):
            continue
        obj = getattr(obj, "py_func", obj)  # a numba dispatcher holds the function it compiles
        if inspect.isfunction(obj) and obj.__module__ == module.__name__:
            found.append(obj)
        elif inspect.isclass(obj) and obj.__module__ == module.__name__:
            found += [member for key, member in vars(obj).items()
                      if inspect.isfunction(member) and not key.startswith("_")]
    return found
