"""The one error type of the io layer: a sentence naming the file, the variable, the problem."""

from __future__ import annotations

import os

__all__ = ["CaseError"]


class CaseError(ValueError):
    """Bad input: printed as one sentence, exit status 2, never a traceback.

    Parameters
    ----------
    message : str
        What is wrong and, where it helps, what would be accepted.
    path : str, optional
        The file (shown by its name).
    variable : str, optional
        The variable or coordinate concerned.
    """

    def __init__(self, message: str, path=None, variable: str | None = None):
        self.path = None if path is None else str(path)
        self.variable = variable
        self.reason = message
        where = []
        if self.path:
            where.append(os.path.basename(self.path))
        if variable:
            where.append(f"variable {variable!r}")
        prefix = ", ".join(where)
        text = f"{prefix}: {message}" if prefix else message
        if not text.endswith("."):
            text += "."
        super().__init__(text)
