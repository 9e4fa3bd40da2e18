"""`AgreeError`, the one error for bad input, and how every message names a cell.

Kept apart from the data model (which needs numpy and pandas) so that the command line can
catch and print errors without loading either.
"""

from __future__ import annotations

from typing import Sequence


class AgreeError(ValueError):
    """Bad input or an impossible request. The message is one line meant for the user.

    Parameters
    ----------
    message : the problem, in one sentence.
    hint : what to do about it.
    where : the location, e.g. ``"coding.xlsx, sheet 'Round 1', row 14, column 'coder_b'"``.
    code : a stable machine-readable code such as ``"unknown-code"``.
    """

    def __init__(self, message: str, *, hint: str | None = None, where: str | None = None,
                 code: str = "bad-input", problems: Sequence["AgreeError"] = ()):
        self.message = message
        self.hint = hint
        self.where = where
        self.code = code
        self.problems = tuple(problems)
        super().__init__(self.one_line())

    def one_line(self) -> str:
        text = f"{self.where}: {self.message}" if self.where else self.message
        if self.hint:
            text += f" (hint: {self.hint})"
        return text


def cell_location(file: str | None, sheet: str | None = None, row: int | None = None,
                  column: str | None = None) -> str:
    """Format a cell location the way every error message names it."""
    parts = []
    if file:
        parts.append(str(file))
    if sheet:
        parts.append(f"sheet '{sheet}'")
    if row is not None and row >= 0:
        parts.append(f"row {row}")
    if column is not None:
        parts.append(f"column '{column}'")
    return ", ".join(parts)
