"""Mortality improvement scales and generational projection factors.

A scale gives annual improvement rates i(x, s) [per annum] at integer age x and calendar year s. The
rates project a base table from its base year b generationally:

    q(x, y) = q(x, b) * prod_{s=b+1..y} (1 - i(x, s))      for y >= b,
    q(x, y) = q(x, b) / prod_{s=y+1..b} (1 - i(x, s))      for y < b (backcast; the caller caps q at 1).

Cumulative factors are precomputed on an (age x year) grid with ``numpy.cumprod`` and cached per scale,
so a lookup for any array of ages and years is two fancy-indexing operations.

References
----------
.. [MP2014] Society of Actuaries, Retirement Plans Experience Committee, *Mortality Improvement Scale
   MP-2014 Report*, 2014 (generational projection with a two-dimensional age x year scale) and its
   yearly successors.
.. [CFR] US 26 CFR 1.430(h)(3)-1, mortality tables with generational projection.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from pathlib import Path
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from valuation.errors import BasisError, TableError
from valuation.mortality.readers import XTBML_SUFFIXES, read_grid
from valuation.mortality.table import as_int_ages

AfterLastYear = Literal["hold_last", "long_term", "zero"]
Shape = Literal["linear", "smooth"]

# Grids are built at least this wide so that most later lookups hit the cache [years of age].
_GRID_AGES = (0, 130)


def _check_rates(rates: np.ndarray, what: str) -> None:
    bad = ~np.isfinite(rates) | (rates <= -1.0) | (rates >= 1.0)
    if bad.any():
        v = rates.flat[int(np.argmax(bad))]
        raise BasisError(
            f"{what}: improvement rate {float(v):g} is not a number strictly between -1 and 1",
            column=what, fix="give rates as decimals per annum, e.g. 0.015 for 1.5 %",
        )


def _nearest(ages: NDArray[np.int64], first_age: int, n: int) -> NDArray[np.int64]:
    """Row index of integer ``ages`` in a contiguous age range; outside ages take the nearest age."""
    return np.clip(ages - first_age, 0, n - 1)


class ImprovementScale(ABC):
    """Annual mortality improvement rates i(x, s) by age and calendar year, with cached projection.

    References
    ----------
    [MP2014] section 2 (generational projection); [CFR].
    """

    _grid: tuple[int, int, int, int, NDArray[np.float64]] | None = None

    @abstractmethod
    def rates(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        """Improvement rate i(x, s) [per annum] at integer ``ages`` [years] and ``years`` (broadcast)."""

    def with_long_term_rate(self, rate: float) -> ImprovementScale:
        """The same scale with another long-term rate [per annum], where the scale has one."""
        raise BasisError(
            f"a {type(self).__name__} has no long-term rate to change",
            fix="use a constant, two-dimensional or convergence scale for a long-term-rate sensitivity",
        )

    def _cum_grid(self, a0: int, a1: int, y0: int, y1: int) -> tuple[int, int, NDArray[np.float64]]:
        """C[i, j] = prod_{s=gy0+1..gy0+j} (1 - i(ga0+i, s)), C[:, 0] = 1, covering the request."""
        g = self._grid
        if g is not None and g[0] <= a0 and a1 <= g[1] and g[2] <= y0 and y1 <= g[3]:
            return g[0], g[2], g[4]
        if g is not None:  # widen to the union so the cache only grows
            a0, a1, y0, y1 = min(a0, g[0]), max(a1, g[1]), min(y0, g[2]), max(y1, g[3])
        a0, a1 = min(a0, _GRID_AGES[0]), max(a1, _GRID_AGES[1])
        ages = np.arange(a0, a1 + 1, dtype=np.int64)[:, None]
        years = np.arange(y0 + 1, y1 + 1, dtype=np.int64)[None, :]
        r = np.broadcast_to(self.rates(ages, years), (ages.shape[0], years.shape[1]))
        cum = np.concatenate([np.ones((ages.shape[0], 1)), np.cumprod(1.0 - r, axis=1)], axis=1)
        cum.flags.writeable = False
        self._grid = (a0, a1, y0, y1, cum)
        return a0, y0, cum

    def cumulative_factor(self, ages: ArrayLike, from_year: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        """F(x, b, y) = prod_{s=b+1..y} (1 - i(x, s)), inverted for y < b; 1 for y = b.

        Parameters
        ----------
        ages : array of int
            Age x [years] at which the rates apply (the member's actual age).
        from_year : int or array of int
            Base year b [calendar year].
        years : array of int
            Target calendar year y [calendar year]. ``ages``, ``from_year`` and ``years`` broadcast.

        Returns
        -------
        ndarray
            The multiplier on q(x, b) [dimensionless].

        References
        ----------
        [MP2014] section 2; the SOA Mortality Improvement Scale MP-2014 report (generational projection).
        """
        a, b, y = np.broadcast_arrays(
            as_int_ages(ages), np.asarray(from_year, dtype=np.int64), np.asarray(years, dtype=np.int64)
        )
        if a.size == 0:
            return np.ones(a.shape)
        lo = int(min(b.min(), y.min()))
        hi = int(max(b.max(), y.max()))
        ga0, gy0, cum = self._cum_grid(int(a.min()), int(a.max()), lo, hi)
        i = a - ga0
        return cum[i, y - gy0] / cum[i, b - gy0]


class NoImprovement(ImprovementScale):
    """No improvement: i(x, s) = 0 and every factor is 1."""

    def rates(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        return np.zeros(np.broadcast_shapes(np.shape(ages), np.shape(years)))

    def cumulative_factor(self, ages: ArrayLike, from_year: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        return np.ones(np.broadcast_shapes(np.shape(ages), np.shape(from_year), np.shape(years)))

    def with_long_term_rate(self, rate: float) -> ImprovementScale:
        return ConstantImprovement(rate)

    def __repr__(self) -> str:
        return "NoImprovement()"


class ConstantImprovement(ImprovementScale):
    """One rate r [per annum] at every age and year: q(x, y) = q(x, b) (1 - r)^(y - b).

    References
    ----------
    the SOA Mortality Improvement Scale MP-2014 report (generational projection) (constant improvement); [MP2014] section 2.
    """

    def __init__(self, rate: float) -> None:
        _check_rates(np.asarray([rate], dtype=float), "improvement rate")
        self.rate = float(rate)

    def rates(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        return np.full(np.broadcast_shapes(np.shape(ages), np.shape(years)), self.rate)

    def with_long_term_rate(self, rate: float) -> ImprovementScale:
        return ConstantImprovement(rate)

    def __repr__(self) -> str:
        return f"ConstantImprovement(rate={self.rate!r})"


class AgeImprovement(ImprovementScale):
    """Rates by age, the same in every year. Ages outside the given range take the nearest age's rate.

    The constructor keeps the contract's ``rates=`` keyword; the array is held as ``rate_values``
    because ``rates(ages, years)`` is the scale's lookup method.

    Parameters
    ----------
    ages : array of int
        Contiguous ascending ages [years].
    rates : array of float
        Improvement rate at each age [per annum].
    """

    def __init__(self, ages: ArrayLike, rates: ArrayLike) -> None:
        self.ages = np.asarray(ages, dtype=np.int64)
        self.rate_values = np.asarray(rates, dtype=np.float64)
        if self.ages.ndim != 1 or self.ages.shape != self.rate_values.shape or self.ages.size == 0:
            raise BasisError("improvement by age needs equal-length, non-empty ages and rates")
        if (np.diff(self.ages) != 1).any():
            raise BasisError("improvement ages must be contiguous and ascending", column="ages")
        _check_rates(self.rate_values, "improvement rates by age")

    def rates(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        a = as_int_ages(ages)
        r = self.rate_values[_nearest(a, int(self.ages[0]), self.ages.size)]
        return np.broadcast_to(r, np.broadcast_shapes(a.shape, np.shape(years))).copy()

    def __repr__(self) -> str:
        return f"AgeImprovement(ages {self.ages[0]}..{self.ages[-1]})"


class TwoDimensionalScale(ImprovementScale):
    """A table of rates by age (rows) and calendar year (columns).

    Stated rules: ages outside the table take the nearest age's rates; years before the first year take
    the first year's rates; years after the last year follow ``after_last_year``: ``"hold_last"`` (the
    last year's rates), ``"long_term"`` (``long_term_rate`` at every age) or ``"zero"``.

    The constructor keeps the contract's ``rates=`` keyword; the array is held as ``rate_values``
    because ``rates(ages, years)`` is the scale's lookup method.

    Parameters
    ----------
    min_age : int
        Age of the first row [years]; rows are contiguous ages.
    years : array of int
        Contiguous ascending calendar years of the columns.
    rates : array of float, shape (n_ages, n_years)
        Improvement rates [per annum].
    after_last_year : {"hold_last", "long_term", "zero"}
    long_term_rate : float
        Rate past the last year under ``"long_term"`` [per annum].

    References
    ----------
    [MP2014] (a two-dimensional age x year scale).
    """

    def __init__(
        self,
        min_age: int,
        years: ArrayLike,
        rates: ArrayLike,
        after_last_year: AfterLastYear = "hold_last",
        long_term_rate: float = 0.0,
    ) -> None:
        self.min_age = int(min_age)
        self.years = np.asarray(years, dtype=np.int64)
        self.rate_values = np.asarray(rates, dtype=np.float64)
        if after_last_year not in ("hold_last", "long_term", "zero"):
            raise BasisError(
                f"after_last_year must be \"hold_last\", \"long_term\" or \"zero\", not \"{after_last_year}\""
            )
        if self.years.ndim != 1 or self.years.size == 0 or (np.diff(self.years) != 1).any():
            raise BasisError("improvement years must be contiguous and ascending", column="years")
        if self.rate_values.ndim != 2 or self.rate_values.shape[1] != self.years.size:
            raise BasisError(
                f"rates must have shape (n_ages, {self.years.size}), got {self.rate_values.shape}"
            )
        _check_rates(self.rate_values, "two-dimensional improvement rates")
        _check_rates(np.asarray([long_term_rate], dtype=float), "long-term improvement rate")
        self.after_last_year: AfterLastYear = after_last_year
        self.long_term_rate = float(long_term_rate)

    @property
    def max_age(self) -> int:
        return self.min_age + self.rate_values.shape[0] - 1

    def rates(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        a, y = np.broadcast_arrays(as_int_ages(ages), np.asarray(years, dtype=np.int64))
        r = self.rate_values[
            _nearest(a, self.min_age, self.rate_values.shape[0]),
            np.clip(y - self.years[0], 0, self.years.size - 1),
        ]
        past = y > self.years[-1]
        if self.after_last_year == "long_term":
            r = np.where(past, self.long_term_rate, r)
        elif self.after_last_year == "zero":
            r = np.where(past, 0.0, r)
        return r

    def with_long_term_rate(self, rate: float) -> ImprovementScale:
        """Same table; past its last year the given long-term rate applies (``after_last_year="long_term"``)."""
        return TwoDimensionalScale(self.min_age, self.years, self.rate_values, "long_term", rate)

    def __repr__(self) -> str:
        return (
            f"TwoDimensionalScale(ages {self.min_age}..{self.max_age}, years {self.years[0]}..{self.years[-1]}, "
            f"after_last_year={self.after_last_year!r}, long_term_rate={self.long_term_rate!r})"
        )


class ConvergenceScale(ImprovementScale):
    """Initial rates by age converging to a long-term rate over ``convergence_years`` from ``start_year``.

    i(x, s) = L + (i0(x) - L) * w(u),  u = clip((s - start_year) / N, 0, 1),

    with L the long-term rate, i0 the initial rate (ages outside ``initial_ages`` take the nearest age's
    rate) and N = ``convergence_years``. Shapes:

    - ``"linear"``: w(u) = 1 - u.
    - ``"smooth"``: the cubic taper w(u) = (1 - u)^2 (1 + 2u) = 1 - 3u^2 + 2u^3, which is 1 with zero
      slope at the start and 0 with zero slope at the end (a cubic Hermite blend).

    So i(x, start_year) = i0(x), i(x, s) = L for s >= start_year + N, and years before the start use i0.
    The long-term rate applies at every age (no taper by age).

    References
    ----------
    the SOA Mortality Improvement Scale MP-2014 report (generational projection): convergence from initial rates to a long-term rate over a chosen
    period with a chosen shape is common practice for UK schemes; the cubic taper is our stated choice.
    """

    def __init__(
        self,
        initial_ages: ArrayLike,
        initial_rates: ArrayLike,
        long_term_rate: float,
        start_year: int,
        convergence_years: int,
        shape: Shape = "linear",
    ) -> None:
        self.initial_ages = np.asarray(initial_ages, dtype=np.int64)
        self.initial_rates = np.asarray(initial_rates, dtype=np.float64)
        if self.initial_ages.ndim != 1 or self.initial_ages.shape != self.initial_rates.shape or self.initial_ages.size == 0:
            raise BasisError("convergence scale needs equal-length, non-empty initial ages and rates")
        if (np.diff(self.initial_ages) != 1).any():
            raise BasisError("initial improvement ages must be contiguous and ascending", column="initial_ages")
        if shape not in ("linear", "smooth"):
            raise BasisError(f"convergence shape must be \"linear\" or \"smooth\", not \"{shape}\"", column="shape")
        if int(convergence_years) < 1:
            raise BasisError(
                f"convergence period must be at least 1 year, got {convergence_years}", column="convergence_years"
            )
        _check_rates(self.initial_rates, "initial improvement rates")
        _check_rates(np.asarray([long_term_rate], dtype=float), "long-term improvement rate")
        self.long_term_rate = float(long_term_rate)
        self.start_year = int(start_year)
        self.convergence_years = int(convergence_years)
        self.shape: Shape = shape

    def weight(self, years: ArrayLike) -> NDArray[np.float64]:
        """Weight w on the initial rate in calendar ``years`` [dimensionless, 1 at start, 0 at the end]."""
        u = np.clip((np.asarray(years, dtype=float) - self.start_year) / self.convergence_years, 0.0, 1.0)
        if self.shape == "linear":
            return 1.0 - u
        return (1.0 - u) ** 2 * (1.0 + 2.0 * u)

    def rates(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]:
        a = as_int_ages(ages)
        i0 = self.initial_rates[_nearest(a, int(self.initial_ages[0]), self.initial_ages.size)]
        return self.long_term_rate + (i0 - self.long_term_rate) * self.weight(years)

    def with_long_term_rate(self, rate: float) -> ConvergenceScale:
        return ConvergenceScale(
            self.initial_ages, self.initial_rates, rate, self.start_year, self.convergence_years, self.shape
        )

    def __repr__(self) -> str:
        return (
            f"ConvergenceScale(long_term_rate={self.long_term_rate!r}, start_year={self.start_year}, "
            f"convergence_years={self.convergence_years}, shape={self.shape!r})"
        )


def load_improvement_table(
    path: str | Path,
    *,
    after_last_year: AfterLastYear = "hold_last",
    long_term_rate: float = 0.0,
    sheet: str | None = None,
    name: str | None = None,
    rules_given: bool = False,
) -> ImprovementScale:
    """Read an improvement scale from CSV, XLSX or XTbML.

    CSV / XLSX layout: header row ``age, <year>, <year>, ...`` with contiguous calendar years; one row per
    contiguous integer age; rates as decimals per annum (0.015 for 1.5 %). This gives a
    :class:`TwoDimensionalScale`.

    XTbML (``.xml``): a table by age and calendar year gives a :class:`TwoDimensionalScale` with the same
    ``after_last_year`` rules; a table by age alone gives an :class:`AgeImprovement` (the same rates every
    year; ``rules_given`` says the caller set ``after_last_year`` or ``long_term_rate``, which such a
    scale refuses). ``name`` picks a table in a file with several (see
    :func:`valuation.mortality.xtbml.improvement_scale`).

    Raises
    ------
    TableError
        Naming the file, row, age and column for a bad cell, a non-year header, non-contiguous years, or
        a rate not strictly between -1 and 1; for XTbML, naming the file and the table.

    References
    ----------
    [MP2014] (layout of a two-dimensional scale: ages by calendar years).
    """
    p = Path(path)
    if p.suffix.lower() in XTBML_SUFFIXES:
        from valuation.mortality.xtbml import improvement_scale, read_xtbml

        return improvement_scale(read_xtbml(p), name, after_last_year=after_last_year,
                                 long_term_rate=long_term_rate, rules_given=rules_given)
    if name is not None:
        raise TableError(
            f"a table name ('{name}') was given, but a CSV or XLSX improvement file holds one table", file=p,
            fix="remove table_name from the improvement, or point it at an XTbML file",
        )
    grid = read_grid(p, sheet=sheet, key="age")
    years = []
    for col in grid.columns:
        try:
            y = float(col)
            if y != int(y):
                raise ValueError(col)
        except ValueError as exc:
            raise TableError(
                f"column header '{col}' is not a calendar year", file=grid.file, row=grid.first_row - 1,
                column=col, fix="headers after the age column must be calendar years, e.g. 2021",
            ) from exc
        years.append(int(y))
    ys = np.asarray(years, dtype=np.int64)
    if (np.diff(ys) != 1).any():
        k = int(np.argmax(np.diff(ys) != 1)) + 1
        raise TableError(
            f"year {ys[k]} follows year {ys[k - 1]}; calendar years must be contiguous and ascending",
            file=grid.file, column=grid.columns[k],
        )
    v = grid.values
    bad = (v <= -1.0) | (v >= 1.0)
    if bad.any():
        i, j = (int(t) for t in np.unravel_index(int(np.argmax(bad)), v.shape))
        raise TableError(
            f"improvement rate {v[i, j]:g} at age {grid.keys[i]} is not strictly between -1 and 1",
            file=grid.file, row=grid.first_row + i, column=grid.columns[j],
            fix="give rates as decimals per annum, e.g. 0.015 for 1.5 %",
        )
    return TwoDimensionalScale(int(grid.keys[0]), ys, v, after_last_year, long_term_rate)
