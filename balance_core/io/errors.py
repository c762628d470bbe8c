"""The one error type of the io layer: a sentence naming the file, the variable, the problem."""

from __future__ import annotations

import os

__all__ = ["CaseError", "printable"]


def printable(text: str) -> str:
    """Text on one line: control characters (newlines too) and undecodable bytes escaped."""
    out = []
    for ch in str(text):
        if ch.isprintable():
            out.append(ch)
        elif 0xDC80 <= ord(ch) <= 0xDCFF:  # a byte that was not UTF-8 (surrogate escape)
            out.append(f"\\x{ord(ch) - 0xDC00:02x}")
        else:
            out.append(ch.encode("unicode_escape").decode("ascii"))
    return "".join(out)


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
            where.append(printable(os.path.basename(self.path.rstrip("/")) or self.path))
        if variable:
            where.append(f"variable {printable(repr(str(variable)))}")
        prefix = ", ".join(where)
        message = printable(message)
        text = f"{prefix}: {message}" if prefix else message
        if not text.endswith("."):
            text += "."
        super().__init__(text)
