"""Exceptions raised on fatal input problems.

Every message names the file and, where it applies, the row, the column (or key, or age) and what was
expected, so a user can fix the input without reading the code. The text reads
``[context: ]file, row R, column 'C': reason (fix: what to do)``; the fix is said once, however often the
error is passed on with more context (:meth:`ValuationError.with_context`).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Self


class ValuationError(Exception):
    """Base class of the tool's fatal errors (the CLI turns these into a non-zero exit).

    Attributes
    ----------
    reason : str
        What is wrong, without the place or the fix.
    file, row, column : optional
        Where it is wrong: the file, the file's row (header = row 1) and the column as headed in the file
        (or the basis key).
    fix : str or None
        What to do, in terms of the input files or the command line.
    context : tuple of str
        Outer context, outermost first (e.g. ``"batch.toml: run 'north'"``), led before the place.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | Path | None = None,
        row: int | None = None,
        column: str | None = None,
        fix: str | None = None,
        context: Sequence[str] = (),
    ) -> None:
        self.file = str(file) if file is not None else None
        self.row = row
        self.column = column
        self.fix = fix or None
        self.reason = _without_fix(message, self.fix)
        self.context = tuple(context)
        super().__init__(self._text())

    @property
    def where(self) -> str:
        """``file, row R, column 'C'`` (the parts that are known), or an empty string."""
        parts = []
        if self.file is not None:
            parts.append(self.file)
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column is not None:
            parts.append(f"column '{self.column}'")
        return ", ".join(parts)

    def without_fix(self) -> str:
        """The message without its ``(fix: ...)`` part: context, place and reason."""
        where = self.where
        text = f"{where}: {self.reason}" if where else self.reason
        return ": ".join([*self.context, text])

    def _text(self) -> str:
        text = self.without_fix()
        return f"{text} (fix: {self.fix})" if self.fix else text

    def with_context(self, prefix: str) -> Self:
        """The same error (same class, place, reason and fix) led by ``prefix``, for re-raising.

        ``raise exc.with_context(f"{batch_file}: run '{name}'") from None`` gives
        ``batch_file: run 'name': members.csv, row 4: ... (fix: ...)``, with the fix said once.
        """
        new = self.__class__.__new__(self.__class__)
        new.__dict__.update(self.__dict__)
        new.context = (prefix, *self.context)
        Exception.__init__(new, new._text())
        return new


def _without_fix(message: str, fix: str | None) -> str:
    """``message`` without a trailing ``(fix: <fix>)`` it may already carry (text of an error passed on)."""
    if fix:
        tail = f" (fix: {fix})"
        while message.endswith(tail):
            message = message[: -len(tail)]
    return message


def describe(exc: BaseException) -> str:
    """An error's text for a message that adds its own fix: a :class:`ValuationError` without its fix."""
    return exc.without_fix() if isinstance(exc, ValuationError) else str(exc)


class TableError(ValuationError):
    """A mortality or improvement table file is broken (bad q, gaps in ages, no closing age...)."""


class DataError(ValuationError):
    """A member data file cannot be read at all (missing, unreadable, required column absent)."""


class BasisError(ValuationError):
    """The assumptions basis is invalid (unknown key, value out of range, missing file)."""


class ExclusionsError(ValuationError):
    """More records were excluded than the basis allows (``[thresholds] max_excluded_share``).

    The command line exits with 4 (not 3): the input could be read, but valuing without the excluded
    records needs the user's explicit acceptance (``--accept-exclusions``).
    """

    exit_code = 4
