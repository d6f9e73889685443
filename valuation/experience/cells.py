"""Actual and expected deaths in (member, age last birthday, calendar year) cells.

References
----------
.. [BP] Benjamin, B. and Pollard, J.H., *The Analysis of Mortality and Other Actuarial Statistics*,
   3rd ed., 1993, chapters on exposed to risk: central exposure pairs with the force of mortality mu
   (Poisson model), initial exposure with q (binomial model).
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed., ch. 3:
   E[D_x] = l_x q_x for l_x lives observed over a whole year of age.
"""

from __future__ import annotations

from datetime import date
from typing import TYPE_CHECKING, Protocol

import numpy as np
import polars as pl
from numpy.typing import ArrayLike, NDArray

from valuation.experience.checks import empty_exceptions
from valuation.experience.exposure import DAYS_PER_YEAR, explode_exposure, initial_extension_days
from valuation.experience.settings import ExperienceSettings

if TYPE_CHECKING:
    from valuation.basis.rules import Sex
    from valuation.vocabulary import Group


class Rates(Protocol):
    """What the analysis needs of a mortality basis (``valuation.mortality.basis.MortalityBasis``)."""

    def q(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]: ...

    def mu(self, ages: ArrayLike, years: ArrayLike) -> NDArray[np.float64]: ...


class RateLookup(Protocol):
    """``lookup(group, sex)`` -> the mortality of a member group and sex (``Basis.mortality`` fits)."""

    def __call__(self, group: Group, sex: Sex) -> Rates: ...


#: Reason of the warning for exposure left out at a table's closing age (the same for every member).
CLOSING_AGE_REASON = (
    "member reaches the closing age of their mortality table (q = 1) in the period: the exposure and "
    "deaths from that age are left out of the analysis"
)


def late_cutoff(settings: ExperienceSettings) -> date:
    """Deaths after this date are in the final ``late_months`` months of the period."""
    return (
        pl.select(pl.lit(settings.period_end).dt.offset_by(f"-{settings.late_months}mo")).item()
        if settings.late_months
        else settings.period_end
    )


def _rates_by_group(
    cells: pl.DataFrame, lookup: RateLookup, method: str
) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    rate = np.full(cells.height, np.nan)
    ages = cells["age"].to_numpy()
    years = cells["year"].to_numpy()
    groups = cells.select("group", "sex").unique().sort(["group", "sex"]).iter_rows()
    for group, sex in groups:  # a handful of (group, sex) pairs, never one per member
        mask = ((cells["group"] == group) & (cells["sex"] == sex)).to_numpy()
        basis = lookup(group, sex)
        fn = basis.mu if method == "central" else basis.q
        rate[mask] = np.asarray(fn(ages[mask], years[mask]), dtype=float)
    bad = ~np.isfinite(rate) | (rate < 0)
    return rate, bad


def build_cells(
    members: pl.DataFrame,
    deaths: pl.DataFrame,
    exits: pl.DataFrame,
    lookup: RateLookup,
    settings: ExperienceSettings,
    *,
    members_file: str = "",
    date_of_birth_header: str = "date_of_birth",
) -> tuple[pl.DataFrame, pl.DataFrame]:
    """Explode members into cells and attach actual and expected deaths.

    Parameters
    ----------
    members
        One row a member: ``row, member_id, group, sex, date_of_birth, pension`` [currency p.a.],
        ``pension_band``.
    deaths
        Counted deaths: ``member_id, date, pension_at_death`` (null = use the record's pension). A member
        whose record pension is 0 (an active) weighs 0 in actual amounts as in expected amounts.
    exits
        Applied exits: ``member_id, date``.
    lookup
        ``lookup(group, sex)`` -> rates with ``q(ages, years)`` and ``mu(ages, years)``.
    settings
        Period, exposure method and late-reporting allowance.
    members_file, date_of_birth_header
        The start membership file and its date-of-birth header as written (named in the warnings).

    Returns
    -------
    (cells, warnings)
        ``cells``: ``member_id, group, sex, pension_band, age, year, exposure`` [years], ``rate``
        (mu or q) [per annum], ``actual_lives``, ``actual_amounts`` [currency p.a.], ``expected_lives``,
        ``expected_amounts`` [currency p.a.], ``var_amounts`` [currency^2] (= w^2 x expected lives);
        ``warnings``: exceptions for cells left out because the table has q = 1 there (closing age).

    References
    ----------
    [BP] expected deaths = sum mu E^c (central) or sum q E (initial); [DHW] ch. 3, E[D_x] = l_x q_x.
    """
    start = np.datetime64(settings.period_start, "D")
    cutoff = late_cutoff(settings)
    m = (
        members.join(
            deaths.select("member_id", pl.col("date").alias("_death"), "pension_at_death"),
            on="member_id",
            how="left",
        )
        .join(exits.select("member_id", pl.col("date").alias("_exit")), on="member_id", how="left")
        .with_columns(
            pl.min_horizontal(pl.lit(settings.period_end), pl.col("_death"), pl.col("_exit")).alias("_end"),
            pl.col("_death").is_not_null().alias("_died"),
        )
    )
    dob = m["date_of_birth"].to_numpy().astype("datetime64[D]")
    end = m["_end"].to_numpy().astype("datetime64[D]")
    x = explode_exposure(dob, np.full(m.height, start), end)
    idx = x["member"]
    days = x["days"].astype(float)
    died = m["_died"].to_numpy()
    last = np.r_[idx[1:] != idx[:-1], True] if idx.size else np.zeros(0, dtype=bool)
    death_cell = last & died[idx]
    if settings.exposure == "initial":
        extension = initial_extension_days(dob[idx[death_cell]], end[idx[death_cell]])
        days[death_cell] += extension
    late = m["_death"].to_numpy().astype("datetime64[D]")[idx] > np.datetime64(cutoff, "D")
    factor = np.where(death_cell, 1.0 + np.where(late, settings.late_uplift, 0.0), 0.0)
    pension = m["pension"].fill_null(0.0).to_numpy()
    # Amounts weight: the pension at death when given, else the record's pension. A life with no pension
    # in the start data (an active member) has no weight in expected amounts, so it has none in actual
    # amounts either: A and E are weighted alike.
    at_death = np.where(
        pension > 0, m["pension_at_death"].fill_null(m["pension"]).fill_null(0.0).to_numpy(), 0.0
    )

    cells = pl.DataFrame(
        {
            "row": m["row"].to_numpy()[idx],
            "member_id": m["member_id"].to_numpy()[idx],
            "group": m["group"].to_numpy()[idx],
            "sex": m["sex"].to_numpy()[idx],
            "pension_band": m["pension_band"].to_numpy()[idx],
            "age": x["age"],
            "year": x["year"],
            "exposure": days / DAYS_PER_YEAR,
            "deaths": death_cell.astype(np.int64),
            "actual_lives": factor,
            "actual_amounts": factor * at_death[idx],
            "_w": pension[idx],
        }
    )
    rate, bad = _rates_by_group(cells, lookup, settings.exposure)
    warnings = empty_exceptions()
    if bad.any():
        left_out = (
            cells.filter(pl.Series(bad))
            .group_by("row", "member_id", "group", "sex")
            .agg(pl.col("age").min(), pl.col("exposure").sum(), pl.col("deaths").sum())
            .sort("row")
        )
        warnings = left_out.select(
            pl.lit(members_file).alias("file"),
            pl.col("row").cast(pl.Int64),
            pl.col("member_id").cast(pl.String),
            pl.lit("date_of_birth").alias("column"),
            pl.lit(date_of_birth_header).alias("file_column"),
            pl.format(
                "age {} ({} {} table); {} years of exposure and {} deaths left out",
                pl.col("age"),
                pl.col("group"),
                pl.col("sex"),
                pl.col("exposure").round(3),
                pl.col("deaths"),
            ).alias("value"),
            pl.lit(CLOSING_AGE_REASON).alias("reason"),
            pl.lit("warning").alias("severity"),
        )
    cells = (
        cells.with_columns(pl.Series("rate", rate))
        .filter(pl.Series(~bad))
        .with_columns((pl.col("rate") * pl.col("exposure")).alias("expected_lives"))
        .with_columns(
            (pl.col("_w") * pl.col("expected_lives")).alias("expected_amounts"),
            (pl.col("_w") ** 2 * pl.col("expected_lives")).alias("var_amounts"),
        )
        .drop("_w")
    )
    return cells, warnings
