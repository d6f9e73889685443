"""A mortality basis: base table, percentage, age rating and improvement, giving q(x, y) vectorised.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed., CUP, 2013,
   chapter 3 (life tables) and section 2.3 (force of mortality).
.. [MP2014] Society of Actuaries, *Mortality Improvement Scale MP-2014 Report*, 2014 (generational
   projection).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from valuation.errors import TableError
from valuation.mortality.improvement import ImprovementScale, NoImprovement
from valuation.mortality.table import MortalityTable, as_int_ages


@dataclass(frozen=True)
class MortalityBasis:
    """Table + adjustments + improvement for one sex / member group.

    q(x, y) = min(1, percentage * q_multiplier * q_table(x + age_rating) * F(x, b, y)),

    where F(x, b, y) = prod_{s=b+1..y} (1 - i(x, s)) (inverted for y < b) is the improvement factor at
    the member's actual age x from the base year b.

    Stated rules: ages at or past the closing age (x + age_rating >= table.max_age, or x >= table.max_age
    when the rating is negative) give q = 1 whatever the percentage or improvement, so the table stays
    closed; ages below the table's first age
    use q at the first age; non-integer ages are floored.

    Period tables (a table with a calendar-year axis, ``table.year_qx``): without a base year, each
    calendar year y uses that year's rates, q_table(x, y); years before the table's first year use the
    first year's rates; years after its last year L use the last year's rates improved by the scale,
    q_table(x, L) * F(x, L, y) (with no improvement they stay at year L). With a base year b (from the
    basis or the table), the rates of year b apply as a static table, improved from b like any other table.

    Parameters
    ----------
    table : MortalityTable
    percentage : float
        Multiplier on q [fraction of table, 1.0 = 100 %].
    age_rating : int
        Years added to the age for the base-table lookup [years]; positive = set forward = heavier.
    improvement : ImprovementScale
    base_year : int, optional
        Year the table's rates describe [calendar year]; defaults to ``table.base_year``. Required when
        ``improvement`` is not :class:`NoImprovement`.
    q_multiplier : float
        Extra multiplier on q, used by life-expectancy sensitivities [dimensionless].

    References
    ----------
    [MP2014] section 2 (generational projection); percentage of table and age rating are common practice.
    """

    table: MortalityTable
    percentage: float = 1.0
    age_rating: int = 0
    improvement: ImprovementScale = NoImprovement()
    base_year: int | None = None
    q_multiplier: float = 1.0

    def __post_init__(self) -> None:
        if self.base_year is None and self.table.base_year is not None:
            object.__setattr__(self, "base_year", int(self.table.base_year))
        years = self.table.years
        if years is not None and self.base_year is not None and not years[0] <= self.base_year <= years[-1]:
            raise TableError(
                f"base year {self.base_year} is outside the years {years[0]}..{years[-1]} of the period "
                f"table '{self.table.name}'", column=self.table.name,
                fix="give a base year within the table's years to use that year's rates, or leave the base "
                    "year out to use each calendar year's own rates",
            )
        if not np.isfinite(self.percentage) or self.percentage < 0:
            raise TableError(f"percentage of table must be >= 0, got {self.percentage}", column=self.table.name)
        if not np.isfinite(self.q_multiplier) or self.q_multiplier < 0:
            raise TableError(f"q multiplier must be >= 0, got {self.q_multiplier}", column=self.table.name)
        if int(self.age_rating) != self.age_rating:
            raise TableError(f"age rating must be a whole number of years, got {self.age_rating}",
                             column=self.table.name)
        object.__setattr__(self, "age_rating", int(self.age_rating))
        if self.base_year is None and years is None and not isinstance(self.improvement, NoImprovement):
            raise TableError(
                f"table '{self.table.name}' has no base year, so improvement cannot be applied",
                column=self.table.name, fix="give a base year for the table in the basis",
            )

    def q(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        """q(x, y) at integer ``ages`` [years] and calendar ``years`` (broadcasting) [probability].

        References
        ----------
        [MP2014] section 2; the SOA Mortality Improvement Scale MP-2014 report (generational projection);
        [DHW] section 2.6 (period rates by calendar year).
        """
        a, y = np.broadcast_arrays(as_int_ages(ages), np.asarray(years, dtype=np.int64))
        rated = a + self.age_rating
        improve = not isinstance(self.improvement, NoImprovement)
        table_years = self.table.years
        if table_years is not None and self.base_year is None:
            # period table by calendar year; past its last year L: q(x, L) * F(x, L, y) (class docstring)
            last = int(table_years[-1])
            q = self.percentage * self.q_multiplier * self.table.q_in_year(rated, y)
            if improve:
                q = q * self.improvement.cumulative_factor(a, last, np.maximum(y, last))
        else:
            if table_years is None or self.base_year is None:
                base = self.table.q(rated)
            else:  # a period table used at its base year's rates
                base = self.table.q_in_year(rated, self.base_year)
            q = self.percentage * self.q_multiplier * base
            if self.base_year is not None and improve:
                q = q * self.improvement.cumulative_factor(a, self.base_year, y)
        closed = (rated >= self.table.max_age) | (a >= self.table.max_age)
        return np.where(closed, 1.0, np.minimum(q, 1.0))

    def cohort_q(self, cohorts: ArrayLike, max_age: int = 120) -> NDArray[np.float64]:
        """Cohort rows: shape (len(cohorts), max_age + 1); [r, j] = q(j, cohorts[r] + j); column max_age = 1.

        ``cohorts`` are birth years [calendar year]; column index = age [years].

        References
        ----------
        [MP2014] section 2 (generational, cohort rates: a life aged x in year Y uses q(x + t, Y + t)).
        """
        c = np.asarray(cohorts, dtype=np.int64).reshape(-1, 1)
        ages = np.arange(max_age + 1, dtype=np.int64)[None, :]
        q = self.q(ages, c + ages)
        q[:, max_age] = 1.0
        return q

    def period_q(self, year: int, max_age: int = 120) -> NDArray[np.float64]:
        """Period rates q(j, year) for ages j = 0 .. max_age [probability]; the last entry is 1.

        References
        ----------
        [DHW] section 2.6 : period rates use one calendar year's q.
        """
        ages = np.arange(max_age + 1, dtype=np.int64)
        q = self.q(ages, np.full_like(ages, int(year)))
        q[max_age] = 1.0
        return q

    def mu(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        """Central force of mortality mu = -ln(1 - q(x, y)) [per annum], constant within the year of age.

        Infinite where q = 1.

        References
        ----------
        [DHW] section 3.3 (constant force of mortality between integer ages: p_x = exp(-mu)).
        """
        q = self.q(ages, years)
        with np.errstate(divide="ignore"):
            return -np.log1p(-q)
