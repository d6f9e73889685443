"""The valuation context: everything a projection needs that does not depend on the member.

All time-dependent quantities live on one monthly grid anchored at the valuation date: index ``tau``
(months after the valuation date) stands for time ``tau / 12`` [years]. Payment dates, retirement dates and
guarantee ends are rounded to that grid (to the nearest month; common practice), which makes the
expected cash-flow vector exact on the grid, so present values, durations and the single equivalent
discount rate of the cash flows agree with the member-by-member values to rounding.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   ch. 4-5 (annuities as sums of discounted, survival-weighted payments).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from valuation.discounting import RateCurve
from valuation.mortality.basis import MortalityBasis

#: Closing age used for every survival row [years]: q = 1 at this age.
MAX_AGE = 120
#: Months on the projection grid (ages from 0 to the closing age fit in it).
GRID_MONTHS = 12 * (MAX_AGE + 1) + 12


def increase_index(
    kind: str, rate: float, floor: float, cap: float | None, inflation: RateCurve, months: int
) -> NDArray[np.float64]:
    """Index of a pension increasing in payment, on the monthly grid (1 at the valuation date).

    Increases are granted at each anniversary of the valuation date. A fixed rule grows by ``rate`` each
    year; an inflation-linked rule grows by the year's forward inflation rate from the inflation curve,
    limited to [floor, cap] year by year (the usual form of limited price indexation: common practice).

    References
    ----------
    Forward rates from a spot curve: f_k = (1 + s_k)^k / (1 + s_{k-1})^(k-1) - 1, [DHW] section 11.3.
    """
    years = np.arange(0, months // 12 + 2)
    if kind == "none":
        yearly = np.ones(len(years))
    elif kind == "fixed":
        yearly = (1.0 + rate) ** years.astype(float)
    else:
        growth = inflation.growth_factors(years.astype(float))
        fwd = growth[1:] / growth[:-1] - 1.0
        fwd = np.maximum(fwd, floor)
        if cap is not None:
            fwd = np.minimum(fwd, cap)
        yearly = np.concatenate([[1.0], np.cumprod(1.0 + fwd)])
    tau = np.arange(months)
    return yearly[tau // 12]


def revaluation_index(
    kind: str, rate: float, floor: float, cap: float | None, inflation: RateCurve, months: int
) -> NDArray[np.float64]:
    """Revaluation factor of a deferred pension over ``tau`` months of deferment (1 at tau = 0).

    Fixed: (1 + rate)^t. Inflation-linked: the inflation index over the whole period, limited to
    (1 + floor)^t from below and (1 + cap)^t from above, compounded over the whole deferment (the usual form
    of statutory revaluation: common practice).

    References
    ----------
    Common practice (revaluation in deferment, compounded over the whole period).
    """
    t = np.arange(months) / 12.0
    if kind == "none":
        return np.ones(months)
    if kind == "fixed":
        return (1.0 + rate) ** t
    idx = inflation.growth_factors(t)
    idx = np.maximum(idx, (1.0 + floor) ** t)
    if cap is not None:
        idx = np.minimum(idx, (1.0 + cap) ** t)
    return idx


@dataclass
class MortalityRows:
    """Cohort q rows for every (mortality basis, birth cohort) pair a run uses.

    Row ``offset[k] + (cohort - first[k])`` holds q(j, cohort + j) for j = 0..MAX_AGE under basis ``k``.
    """

    q_rows: NDArray[np.float64]
    lx: NDArray[np.float64]
    offset: NDArray[np.int64]
    first: NDArray[np.int64]
    count: NDArray[np.int64]

    @classmethod
    def build(
        cls, bases: list[MortalityBasis], cohort_ranges: list[tuple[int, int]]
    ) -> "MortalityRows":
        from valuation.survival import cohort_lx

        blocks = []
        offsets, firsts, counts = [], [], []
        pos = 0
        for mb, (lo, hi) in zip(bases, cohort_ranges, strict=True):
            cohorts = np.arange(lo, hi + 1)
            block = np.asarray(mb.cohort_q(cohorts, max_age=MAX_AGE), dtype=float)
            blocks.append(block)
            offsets.append(pos)
            firsts.append(lo)
            counts.append(len(cohorts))
            pos += len(cohorts)
        q_rows = np.vstack(blocks) if blocks else np.ones((1, MAX_AGE + 1))
        return cls(
            q_rows=q_rows,
            lx=cohort_lx(q_rows),
            offset=np.asarray(offsets, dtype=np.int64),
            first=np.asarray(firsts, dtype=np.int64),
            count=np.asarray(counts, dtype=np.int64),
        )

    def rows(self, basis_id: NDArray[np.int64], cohort: NDArray[np.int64]) -> NDArray[np.int64]:
        """Row index of each (basis id, cohort) pair."""
        return self.offset[basis_id] + (cohort - self.first[basis_id])


@dataclass
class Context:
    """Curves and indices on the monthly grid, plus payment settings, for one valuation."""

    valuation_year: int
    frequency: int
    advance: bool
    discount: RateCurve
    inflation: RateCurve
    salary_growth: float
    fractional: str
    v: NDArray[np.float64] = field(init=False)
    months: int = GRID_MONTHS

    def __post_init__(self) -> None:
        self.v = self.discount.discount_factors(np.arange(self.months) / 12.0)

    @property
    def step(self) -> int:
        """Months between payments."""
        return 12 // self.frequency

    @property
    def offset(self) -> int:
        """Months from the start of payment to the first payment (0 in advance, one period in arrears)."""
        return 0 if self.advance else self.step

    def salary_index(self) -> NDArray[np.float64]:
        """(1 + salary growth)^t on the monthly grid."""
        return (1.0 + self.salary_growth) ** (np.arange(self.months) / 12.0)

