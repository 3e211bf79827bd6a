"""The project's input error: one message naming the file, the key and, where known, the line.

Owns :class:`ScenarioError`; imports nothing from thermoelec.
"""

from __future__ import annotations

__all__ = ["ScenarioError"]


class ScenarioError(ValueError):
    """An invalid scenario or profile: one message naming the file and the key."""

    def __init__(self, file: str, key: str, message: str, line: int | None = None):
        self.file, self.key, self.message, self.line = file, key, message, line
        where = f"{file}, line {line}" if line else file
        super().__init__(f"{where}: {key}: {message}" if key else f"{where}: {message}")
