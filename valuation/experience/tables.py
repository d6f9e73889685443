"""A/E tables: actual and expected deaths by lives and amounts, overall and by one dimension at a time."""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
import polars as pl

from valuation.experience.intervals import ae_amounts_interval, ae_lives_interval
from valuation.experience.result import TABLE_COLUMNS

#: Dimensions of the A/E table, in output order.
DIMENSIONS: tuple[str, ...] = ("overall", "sex", "status", "age_band", "pension_band", "calendar_year")

_STATUS_ORDER: dict[str, float] = {"pensioner": 0, "dependant": 1, "deferred": 2, "active": 3}


def _round2(x: float) -> float:
    """Round to two significant figures (for readable band edges)."""
    if x <= 0:
        return x
    return round(x, 1 - int(math.floor(math.log10(x))))


def default_band_edges(pension: pl.Series) -> tuple[float, ...]:
    """Upper edges of five pension-size bands: quintiles of the non-zero pensions, two significant figures.

    Common practice (size bands chosen from the data so each holds a similar number of lives).
    """
    positive = pension.drop_nulls().filter(pension.drop_nulls() > 0).to_numpy()
    if positive.size == 0:
        return ()
    q = np.quantile(positive, [0.2, 0.4, 0.6, 0.8])
    return tuple(sorted({_round2(float(v)) for v in q if v > 0}))


def pension_band_labels(pension: pl.Series, edges: tuple[float, ...]) -> tuple[pl.Series, dict[str, int]]:
    """Band label of each pension [currency p.a.] and each label's sort order.

    Bands: ``nil`` (0 or missing), ``under E1``, ``E1 to E2``, ..., ``Ek and over`` (lower edge included).
    """
    labels = ["nil"]
    if edges:
        labels.append(f"under {edges[0]:,.0f}")
        labels += [f"{a:,.0f} to {b:,.0f}" for a, b in zip(edges[:-1], edges[1:], strict=True)]
        labels.append(f"{edges[-1]:,.0f} and over")
    else:
        labels.append("over 0")
    p = pension.fill_null(0.0).to_numpy()
    pos = np.searchsorted(np.asarray(edges, dtype=float), p, side="right") + 1
    pos = np.where(p > 0, pos, 0)
    out = pl.Series("pension_band", np.asarray(labels, dtype=object)[pos].astype(str))
    return out, {label: i for i, label in enumerate(labels)}


_SUMS: tuple[tuple[str, str], ...] = (
    ("exposure", "exposure_years"),
    ("actual_lives", "actual_lives"),
    ("expected_lives", "expected_lives"),
    ("actual_amounts", "actual_amounts"),
    ("expected_amounts", "expected_amounts"),
    ("var_amounts", "var_amounts"),
)


def _factorize(keys: pl.Series) -> tuple[list[str], np.ndarray]:
    """Distinct values (as text, in sorted order for numbers) and each row's index into them."""
    if keys.dtype.is_numeric():
        labels, inverse = np.unique(keys.to_numpy(), return_inverse=True)
        return [str(v) for v in labels.tolist()], inverse
    codes = keys.cast(pl.Categorical).to_physical().to_numpy()
    _, first, inverse = np.unique(codes, return_index=True, return_inverse=True)
    return [str(v) for v in keys.gather(first).to_list()], inverse


def _grouped(
    sums: dict[str, np.ndarray], dimension: str, keys: pl.Series, order: Mapping[str, float] | None
) -> pl.DataFrame:
    """Sum the cell columns by ``keys`` (numpy bincount); groups sorted by ``order`` (default: the key)."""
    names, inverse = _factorize(keys)
    data: dict[str, object] = {"dimension": [dimension] * len(names), "group": names}
    for source, target in _SUMS:
        data[target] = np.bincount(inverse, weights=sums[source], minlength=len(names))
    frame = pl.DataFrame(data)
    if order is not None:
        rank = [order.get(n, len(order)) for n in names]  # one entry a group, never one a member
        frame = (
            frame.with_columns(pl.Series("_rank", rank, dtype=pl.Float64))
            .sort("_rank", "group")
            .drop("_rank")
        )
    return frame


def ae_table(
    cells: pl.DataFrame,
    *,
    confidence: float,
    overdispersion: float,
    band_order: dict[str, int],
) -> pl.DataFrame:
    """Aggregate cells into the A/E table with intervals.

    Parameters
    ----------
    cells
        From :func:`valuation.experience.cells.build_cells`.
    confidence
        Two-sided confidence level.
    overdispersion
        Variance multiplier of the amounts interval.
    band_order
        Sort order of the pension-band labels.

    Returns
    -------
    polars.DataFrame
        ``dimension, group, exposure_years, actual_lives, expected_lives, ae_lives, ae_lives_lower,
        ae_lives_upper, actual_amounts, expected_amounts, ae_amounts, ae_amounts_lower, ae_amounts_upper,
        var_amounts``; ratios are decimals (1 = 100 %), NaN where the expected is 0.

    References
    ----------
    Garwood (1936) exact Poisson limits for lives; normal interval with Var = phi sum w^2 E for amounts
    (see :mod:`valuation.experience.intervals`).
    """
    sums = {source: cells[source].to_numpy().astype(float) for source, _ in _SUMS}
    floor = (cells["age"] // 5) * 5
    ages = {f"{b}-{b + 4}": float(b) for b in floor.unique().to_list()}
    parts = [
        _grouped(sums, "overall", pl.Series(np.zeros(cells.height, dtype=np.int64)), None),
        _grouped(sums, "sex", cells["sex"], {"M": 0, "F": 1}),
        _grouped(sums, "status", cells["group"], _STATUS_ORDER),
        _grouped(sums, "age_band", floor, None),
        _grouped(sums, "pension_band", cells["pension_band"], band_order),
        _grouped(sums, "calendar_year", cells["year"], None),
    ]
    # age bands are labelled after grouping (numeric keys sort numerically)
    parts[3] = parts[3].with_columns(
        pl.col("group").replace_strict({str(int(v)): k for k, v in ages.items()})
    )
    table = pl.concat(parts, how="vertical")
    table = table.with_columns(
        pl.when(pl.col("dimension") == "overall")
        .then(pl.lit("all"))
        .otherwise(pl.col("group"))
        .alias("group")
    )
    return with_ratios(table, confidence=confidence, overdispersion=overdispersion).select(
        *TABLE_COLUMNS,
        "var_amounts",
    )


def with_ratios(table: pl.DataFrame, *, confidence: float, overdispersion: float) -> pl.DataFrame:
    """Add A/E by lives and by amounts with their intervals to summed rows (see :func:`ae_table`).

    References
    ----------
    Garwood (1936) exact Poisson limits for lives; normal interval with Var = phi sum w^2 E for amounts
    (see :mod:`valuation.experience.intervals`).
    """
    a = table["actual_lives"].to_numpy()
    e = table["expected_lives"].to_numpy()
    lo, hi = ae_lives_interval(a, e, confidence)
    aw = table["actual_amounts"].to_numpy()
    ew = table["expected_amounts"].to_numpy()
    wlo, whi = ae_amounts_interval(aw, ew, table["var_amounts"].to_numpy(), confidence, overdispersion)
    with np.errstate(divide="ignore", invalid="ignore"):
        ae = np.where(e > 0, a / np.where(e > 0, e, 1.0), np.nan)
        aew = np.where(ew > 0, aw / np.where(ew > 0, ew, 1.0), np.nan)
    return table.with_columns(
        pl.Series("ae_lives", ae),
        pl.Series("ae_lives_lower", lo),
        pl.Series("ae_lives_upper", hi),
        pl.Series("ae_amounts", aew),
        pl.Series("ae_amounts_lower", wlo),
        pl.Series("ae_amounts_upper", whi),
    )


def ae_by_table(
    cells: pl.DataFrame, table_of: pl.Series, *, confidence: float, overdispersion: float
) -> pl.DataFrame:
    """A/E for each mortality table entry of the basis: the cells of every group and sex that use it.

    Parameters
    ----------
    cells
        From :func:`valuation.experience.cells.build_cells`.
    table_of
        The entry each cell's (group, sex) uses, e.g. ``"mortality.pensioner.M"`` (text, one a cell).
    confidence, overdispersion
        As for :func:`ae_table`.

    Returns
    -------
    polars.DataFrame
        One row an entry, in the order of the entry keys: ``table`` and the sums and ratios of
        :func:`ae_table`, plus ``expected_lives_at_risk`` [lives]: the expected deaths of lives with a
        pension at risk (those that weigh in the amounts), the count credibility is judged on.

    References
    ----------
    As :func:`ae_table`: the same sums, the same intervals, on a different partition of the cells.
    """
    sums = {source: cells[source].to_numpy().astype(float) for source, _ in _SUMS}
    at_risk = np.where(sums["expected_amounts"] > 0, sums["expected_lives"], 0.0)
    names, inverse = _factorize(table_of)
    data: dict[str, object] = {"table": names}
    for source, target in _SUMS:
        data[target] = np.bincount(inverse, weights=sums[source], minlength=len(names))
    data["expected_lives_at_risk"] = np.bincount(inverse, weights=at_risk, minlength=len(names))
    frame = pl.DataFrame(data, schema_overrides={"table": pl.String})
    return with_ratios(frame.sort("table"), confidence=confidence, overdispersion=overdispersion)


def ae_overall_at_risk(cells: pl.DataFrame) -> float:
    """Expected deaths of all lives with a pension at risk [lives] (credibility of the overall line)."""
    e = cells["expected_lives"].to_numpy().astype(float)
    w = cells["expected_amounts"].to_numpy().astype(float)
    return float(np.where(w > 0, e, 0.0).sum())
