"""A base mortality table: one-year death probabilities q_x at integer ages, with provenance.

References
----------
.. [DHW] Dickson, D.C.M., Hardy, M.R. and Waters, H.R., *Actuarial Mathematics for Life Contingent
   Risks*, 2nd ed., Cambridge University Press, 2013, chapter 3 (life tables, select and ultimate
   tables).
.. [BGHJN] Bowers, N.L., Gerber, H.U., Hickman, J.C., Jones, D.A. and Nesbitt, C.J., *Actuarial
   Mathematics*, 2nd ed., Society of Actuaries, 1997, chapter 3.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray


def as_int_ages(ages: ArrayLike) -> NDArray[np.int64]:
    """Integer ages [years] from any array-like; non-integer ages are floored (age last birthday)."""
    a = np.asarray(ages)
    if a.dtype.kind in "iu":
        return a.astype(np.int64, copy=False)
    return np.floor(a.astype(float)).astype(np.int64)


def _frozen(a: ArrayLike | None, ndim: int) -> NDArray[np.float64] | None:
    if a is None:
        return None
    out = np.array(a, dtype=np.float64, copy=True)
    if out.ndim != ndim:
        raise ValueError(f"expected a {ndim}-dimensional array of q, got shape {out.shape}")
    out.flags.writeable = False
    return out


@dataclass(frozen=True)
class MortalityTable:
    """One-year death probabilities q_x at integer ages ``min_age .. max_age``.

    The last age is the closing age: ``qx[-1] == 1`` (the readers check it, see
    :func:`valuation.mortality.readers.validate_table`). Arrays are copied and made read-only so a
    table can be shared and cached safely.

    Parameters
    ----------
    name : str
        Table name (a column header, an XTbML TableName or a bundled name).
    min_age : int
        First age of ``qx`` [years].
    qx : array of float
        q_x at ages ``min_age .. max_age`` [probability per year of age].
    base_year : int or None
        Calendar year the rates describe; improvement applies from it. ``None`` for a static table.
    source : str
        Provenance note: where the rates came from.
    select_qx : array of float, shape (n_selection_ages, select_period), optional
        Select rates q_[x]+d for selection ages x = ``select_min_age .. max_age`` and durations
        d = 0 .. select_period - 1; after the select period the ultimate rates q_{x+d} apply.
    select_min_age : int, optional
        First selection age of ``select_qx`` [years]; defaults to ``min_age``. In the standard
        select-and-ultimate layout the ultimate rates start at the first selection age plus the select
        period, so the select rows start before ``min_age``.
    year_qx : array of float, shape (n_ages, n_years), optional
        A period table: q at ages ``min_age .. max_age`` (rows) in calendar years ``first_year ..``
        (columns). ``qx`` then holds the column of ``base_year`` (or of the last year when
        ``base_year`` is None), and :meth:`q_in_year` looks rates up by calendar year.
    first_year : int, optional
        Calendar year of the first column of ``year_qx``.

    References
    ----------
    [DHW] sections 3.2 (life tables) and 3.7-3.9 (select and ultimate tables); [BGHJN] section 3.3.
    """

    name: str
    min_age: int
    qx: np.ndarray
    base_year: int | None = None
    source: str = ""
    select_qx: np.ndarray | None = None
    select_min_age: int | None = None
    year_qx: np.ndarray | None = None
    first_year: int | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "min_age", int(self.min_age))
        object.__setattr__(self, "qx", _frozen(self.qx, 1))
        object.__setattr__(self, "select_qx", _frozen(self.select_qx, 2))
        object.__setattr__(self, "year_qx", _frozen(self.year_qx, 2))
        if self.qx.size == 0:
            raise ValueError(f"table '{self.name}' has no rates")
        sel_min = self.min_age if self.select_min_age is None else int(self.select_min_age)
        object.__setattr__(self, "select_min_age", sel_min)
        if self.select_qx is not None and self.select_qx.shape[0] != self.max_age - sel_min + 1:
            raise ValueError(
                f"table '{self.name}': select_qx has {self.select_qx.shape[0]} selection ages, expected "
                f"{self.max_age - sel_min + 1} (ages {sel_min}..{self.max_age})"
            )
        if (self.year_qx is None) != (self.first_year is None):
            raise ValueError(f"table '{self.name}': year_qx and first_year go together")
        if self.year_qx is not None:
            object.__setattr__(self, "first_year", int(self.first_year))  # type: ignore[arg-type]
            if self.year_qx.shape[0] != self.qx.size or self.year_qx.shape[1] == 0:
                raise ValueError(
                    f"table '{self.name}': year_qx has shape {self.year_qx.shape}, expected ({self.qx.size}, n_years)"
                )

    def _key(self) -> tuple[object, ...]:
        sel = None if self.select_qx is None else (self.select_qx.shape, self.select_qx.tobytes())
        per = None if self.year_qx is None else (self.year_qx.shape, self.year_qx.tobytes(), self.first_year)
        return (self.name, self.min_age, self.base_year, self.source, self.qx.tobytes(), sel,
                self.select_min_age, per)

    def __eq__(self, other: object) -> bool:
        """Value equality (arrays compared element by element), so tables can be compared and hashed."""
        if not isinstance(other, MortalityTable):
            return NotImplemented
        return self._key() == other._key()

    def __hash__(self) -> int:
        return hash(self._key())

    @property
    def max_age(self) -> int:
        """Closing age [years]: the last age of the table, where q = 1."""
        return self.min_age + self.qx.size - 1

    @property
    def ages(self) -> NDArray[np.int64]:
        """Integer ages ``min_age .. max_age`` [years]."""
        return np.arange(self.min_age, self.max_age + 1, dtype=np.int64)

    @property
    def select_period(self) -> int:
        """Select period [years]; 0 for an ultimate-only table."""
        return 0 if self.select_qx is None else int(self.select_qx.shape[1])

    @property
    def years(self) -> NDArray[np.int64] | None:
        """Calendar years of a period table's columns; ``None`` for a table without a year axis."""
        if self.year_qx is None or self.first_year is None:
            return None
        return np.arange(self.first_year, self.first_year + self.year_qx.shape[1], dtype=np.int64)

    def q_in_year(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        """q at integer ``ages`` [years] in calendar ``years`` (broadcast) from a period table.

        Stated rules: years before the table's first year take the first year's rates, years after its
        last year the last year's rates (a basis projects beyond them with an improvement scale, see
        :class:`valuation.mortality.basis.MortalityBasis`); ages as in :meth:`q`. A table without a year
        axis gives :meth:`q` whatever the year.

        References
        ----------
        [DHW] section 2.6 (period rates: one calendar year's q at each age).
        """
        if self.year_qx is None or self.first_year is None:
            a = as_int_ages(ages)
            return self.q(np.broadcast_to(a, np.broadcast_shapes(a.shape, np.shape(years))))
        a, y = np.broadcast_arrays(as_int_ages(ages), np.asarray(years, dtype=np.int64))
        row = np.clip(a - self.min_age, 0, self.qx.size - 1)
        col = np.clip(y - self.first_year, 0, self.year_qx.shape[1] - 1)
        return np.where(a > self.max_age, 1.0, self.year_qx[row, col])

    def q(self, ages: ArrayLike) -> NDArray[np.float64]:
        """Ultimate q_x at integer ``ages`` [years] of any shape.

        Stated rules: ages above the closing age give q = 1; ages below ``min_age`` take q at
        ``min_age``; non-integer ages are floored (age last birthday).
        """
        a = as_int_ages(ages)
        idx = np.clip(a - self.min_age, 0, self.qx.size - 1)
        return np.where(a > self.max_age, 1.0, self.qx[idx])

    def q_select(self, ages: ArrayLike, durations: ArrayLike) -> NDArray[np.float64]:
        """Select rate q_[x]+d for selection age ``x`` [years] and duration ``d`` [years] (broadcast).

        Durations at or past the select period, and tables without select rates, give the ultimate
        q_{x+d}. Selection ages outside ``select_min_age .. max_age`` take the nearest age's select rates
        (stated rule).

        References
        ----------
        [DHW] section 3.7, select and ultimate survival models.
        """
        a, d = np.broadcast_arrays(as_int_ages(ages), as_int_ages(durations))
        ult = self.q(a + d)
        if self.select_qx is None:
            return ult
        row = np.clip(a - int(self.select_min_age or 0), 0, self.select_qx.shape[0] - 1)
        col = np.clip(d, 0, self.select_period - 1)
        sel = self.select_qx[row, col]
        return np.where((d >= 0) & (d < self.select_period), sel, ult)

    def lx(self, radix: float = 100_000.0) -> NDArray[np.float64]:
        """Survivors l_x at ages ``min_age .. max_age + 1`` from ``radix`` at ``min_age`` [lives].

        l_{x+1} = l_x (1 - q_x); l at ``max_age + 1`` is 0 because q = 1 at the closing age.

        References
        ----------
        [DHW] section 3.2, eq. (3.1); [BGHJN] section 3.3.
        """
        return radix * np.concatenate(([1.0], np.cumprod(1.0 - self.qx)))
