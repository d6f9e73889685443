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
    select_qx : array of float, shape (n_ages, select_period), optional
        Select rates q_[x]+d for selection ages x = ``min_age .. max_age`` and durations
        d = 0 .. select_period - 1; after the select period the ultimate rates q_{x+d} apply.

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

    def __post_init__(self) -> None:
        object.__setattr__(self, "min_age", int(self.min_age))
        object.__setattr__(self, "qx", _frozen(self.qx, 1))
        object.__setattr__(self, "select_qx", _frozen(self.select_qx, 2))
        if self.qx.size == 0:
            raise ValueError(f"table '{self.name}' has no rates")
        if self.select_qx is not None and self.select_qx.shape[0] != self.qx.size:
            raise ValueError(
                f"table '{self.name}': select_qx has {self.select_qx.shape[0]} ages, qx has {self.qx.size}"
            )

    def _key(self) -> tuple[object, ...]:
        sel = None if self.select_qx is None else (self.select_qx.shape, self.select_qx.tobytes())
        return (self.name, self.min_age, self.base_year, self.source, self.qx.tobytes(), sel)

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
        q_{x+d}. Selection ages outside the table take the nearest age's select rates (stated rule).

        References
        ----------
        [DHW] section 3.7, select and ultimate survival models.
        """
        a, d = np.broadcast_arrays(as_int_ages(ages), as_int_ages(durations))
        ult = self.q(a + d)
        if self.select_qx is None:
            return ult
        row = np.clip(a - self.min_age, 0, self.qx.size - 1)
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
