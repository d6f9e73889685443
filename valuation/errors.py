"""Exceptions raised on fatal input problems.

Every message names the file and, where it applies, the row, the column (or key, or age) and what was
expected, so a user can fix the input without reading the code.
"""

from __future__ import annotations

from pathlib import Path


class ValuationError(Exception):
    """Base class of the tool's fatal errors (the CLI turns these into a non-zero exit)."""

    def __init__(
        self,
        message: str,
        *,
        file: str | Path | None = None,
        row: int | None = None,
        column: str | None = None,
        fix: str | None = None,
    ) -> None:
        self.file = str(file) if file is not None else None
        self.row = row
        self.column = column
        self.fix = fix
        self.reason = message
        parts = []
        if self.file is not None:
            parts.append(f"{self.file}")
        if row is not None:
            parts.append(f"row {row}")
        if column is not None:
            parts.append(f"column '{column}'")
        where = ", ".join(parts)
        text = f"{where}: {message}" if where else message
        if fix:
            text += f" (fix: {fix})"
        super().__init__(text)


class TableError(ValuationError):
    """A mortality or improvement table file is broken (bad q, gaps in ages, no closing age...)."""


class DataError(ValuationError):
    """A member data file cannot be read at all (missing, unreadable, required column absent)."""


class BasisError(ValuationError):
    """The assumptions basis is invalid (unknown key, value out of range, missing file)."""
