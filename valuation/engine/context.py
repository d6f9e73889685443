"""The valuation context: everything a projection needs that does not depend on the member.

All time-dependent quantities live on one monthly grid anchored at the valuation date: index ``tau``
(months after the valuation date) stands for time ``tau / 12`` [years]. Payment dates, retirement dates and
guarantee ends are rounded to that grid (to the nearest month; common practice), which makes the
expected cash-flow vector exact on the grid, so present values, durations and the single equivalent
discount rate of the cash flows agree with the member-by-member values to rounding. Pension increases step
once a year on the grid month of the scheme's increase date (:func:`increase_month`); revaluation in
deferment runs continuously from the valuation date.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   ch. 4-5 (annuities as sums of discounted, survival-weighted payments).
"""

from __future__ import annotations

import calendar
from dataclasses import dataclass, field
from datetime import date
from typing import Literal

import numpy as np
from numpy.typing import NDArray

from valuation.discounting import RateCurve
from valuation.mortality.basis import MortalityBasis

#: Closing age used for every survival row [years]: q = 1 at this age.
MAX_AGE = 120
#: Months on the projection grid (ages from 0 to the closing age fit in it).
GRID_MONTHS = 12 * (MAX_AGE + 1) + 12


def increase_month(valuation_date: date, increase_date: tuple[int, int] | None) -> int:
    """Grid month [months after the valuation date] of the first pension increase after the valuation date.

    Increases fall on the scheme's increase date (month, day) every year; ``None`` means the anniversary of
    the valuation date. The pension in the data includes any increase falling on the valuation date itself,
    so the first increase is the first increase date strictly after it. Payments sit on the grid dates
    valuation date + tau calendar months (the day kept, or the month's last day); an increase applies to
    every payment on or after its date, so it steps at the first grid date on or after it, in months
    1 to 12.

    References
    ----------
    Common practice (annual increases to pensions in payment on a fixed date, paid from that date on).
    """
    if increase_date is None:
        return 12
    month, day = increase_date
    vy, vm, vd = valuation_date.year, valuation_date.month, valuation_date.day
    year = vy if (month, day) > (vm, vd) else vy + 1
    months = (year - vy) * 12 + (month - vm)
    grid_day = min(vd, calendar.monthrange(year, month)[1])
    return months if grid_day >= day else months + 1


def increase_steps(first_month: int, months: int) -> NDArray[np.int64]:
    """Grid months on which increases fall: ``first_month``, then every 12 months, within the grid."""
    return np.arange(first_month, months, 12, dtype=np.int64)


def increase_index(
    kind: str,
    rate: float,
    floor: float,
    cap: float | None,
    inflation: RateCurve,
    months: int,
    first_month: int = 12,
) -> NDArray[np.float64]:
    """Index of a pension increasing in payment, on the monthly grid (1 at the valuation date).

    Increases are granted once a year on the grid months ``first_month``, ``first_month + 12``, ... (see
    :func:`increase_month`; 12 = the anniversaries of the valuation date). A fixed rule grows by ``rate``
    each time; an inflation-linked rule grows by the inflation of the year before the increase date, the
    forward rate over [T - 1, T] from the inflation curve for an increase at T [years] (over the first year
    [0, 1] when that year would start before the valuation date: the tool has no past inflation), limited
    to [floor, cap] (the usual form of limited price indexation: common practice).

    References
    ----------
    Forward rates from a spot curve: f = (1 + s_b)^b / (1 + s_a)^a - 1 over [a, b], [DHW] section 11.3.
    """
    steps = increase_steps(first_month, months)
    if kind == "none":
        yearly = np.ones(len(steps) + 1)
    elif kind == "fixed":
        yearly = (1.0 + rate) ** np.arange(len(steps) + 1, dtype=float)
    else:
        begin = np.maximum(steps - 12, 0) / 12.0
        points, where = np.unique(np.concatenate([begin, begin + 1.0]), return_inverse=True)
        growth = inflation.growth_factors(points)
        fwd = growth[where[len(steps):]] / growth[where[: len(steps)]] - 1.0
        fwd = np.maximum(fwd, floor)
        if cap is not None:
            fwd = np.minimum(fwd, cap)
        yearly = np.concatenate([[1.0], np.cumprod(1.0 + fwd)])
    tau = np.arange(months)
    return yearly[(tau - first_month) // 12 + 1]


FirstIncrease = Literal["full", "proportionate", "none_until_full_year"]


def first_increase_factor(
    index: NDArray[np.float64], first_month: int, rule: FirstIncrease
) -> NDArray[np.float64] | None:
    """Factor on a pension starting at grid month s from its first increase on, per start month.

    ``index`` is :func:`increase_index` for each tranche, (J, M). A pension that starts at s has its first
    increase on the first increase month T after s, having been paid for n = T - s months (1 to 12):

    - ``full``: the whole year's increase (1 + r); no factor (``None`` is returned);
    - ``proportionate``: n/12 of the year's increase, 1 + r n / 12, i.e. the factor (1 + r n / 12) / (1 + r);
    - ``none_until_full_year``: no increase until a full year in payment, i.e. 1 / (1 + r) when n < 12.

    The later increases are the scheme's full yearly increases. r is the increase the index grants at T.

    References
    ----------
    Common practice (scheme rules on the first increase after retirement: a full increase, one twelfth of
    the increase for each month in payment, or none until the pension has been paid for a year).
    """
    if rule == "full":
        return None
    J, M = index.shape
    s = np.arange(M)
    nxt = np.where(s < first_month, first_month, first_month + 12 * ((s - first_month) // 12 + 1))
    n = nxt - s
    on_grid = nxt < M
    at = np.minimum(nxt, M - 1)
    ratio = np.where(on_grid, index[:, at] / index[:, at - 1], 1.0)  # 1 + r at the first increase
    if rule == "proportionate":
        factor = (1.0 + (ratio - 1.0) * n / 12.0) / ratio
    else:
        factor = np.where(n < 12, 1.0 / ratio, 1.0)
    return np.asarray(factor, dtype=np.float64)


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
    #: Grid month of the first pension increase (see :func:`increase_month`); later ones every 12 months.
    increase_month: int = 12

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

