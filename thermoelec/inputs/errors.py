"""The project's input error: one message naming the file, the key and, where known, the line.

Owns :class:`ScenarioError`; imports nothing from thermoelec.
"""

from __future__ import annotations

__all__ = ["ScenarioError"]


class ScenarioError(ValueError):
    """An invalid scenario or profile: one message naming the file and the key.

    ``form`` is False for a value that was read well but is out of range or at odds
    with another key (a sweep records such a scenario as invalid and goes on), True
    for everything else (a wrong unit, an unknown key, an unreadable file).
    """

    def __init__(self, file: str, key: str, message: str, line: int | None = None, form: bool = True):
        self.file, self.key, self.message, self.line, self.form = file, key, message, line, form
        where = f"{file}, line {line}" if line else file
        super().__init__(f"{where}: {key}: {message}" if key else f"{where}: {message}")
