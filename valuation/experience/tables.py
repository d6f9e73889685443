"""A/E tables: actual and expected deaths by lives and amounts, overall and by one dimension at a time."""

from __future__ import annotations

import math

import numpy as np
import polars as pl

from valuation.experience.intervals import ae_amounts_interval, ae_lives_interval

#: Dimensions of the A/E table, in output order.
DIMENSIONS: tuple[str, ...] = ("overall", "sex", "status", "age_band", "pension_band", "calendar_year")

_STATUS_ORDER = {"pensioner": 0, "dependant": 1, "deferred": 2, "active": 3}


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


def _grouped(cells: pl.DataFrame, dimension: str, key: pl.Expr, order: pl.Expr) -> pl.DataFrame:
    return (
        cells.with_columns(key.alias("group"), order.alias("_order"))
        .group_by("group", "_order")
        .agg(
            pl.col("exposure").sum().alias("exposure_years"),
            pl.col("actual_lives").sum(),
            pl.col("expected_lives").sum(),
            pl.col("actual_amounts").sum(),
            pl.col("expected_amounts").sum(),
            pl.col("var_amounts").sum(),
        )
        .sort("_order", "group")
        .with_columns(pl.lit(dimension).alias("dimension"))
    )


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
    band_floor = (pl.col("age") // 5) * 5
    parts = [
        _grouped(cells, "overall", pl.lit("all"), pl.lit(0)),
        _grouped(cells, "sex", pl.col("sex"), pl.col("sex").replace_strict({"M": 0, "F": 1}, default=2)),
        _grouped(cells, "status", pl.col("group"), pl.col("group").replace_strict(_STATUS_ORDER, default=9)),
        _grouped(
            cells,
            "age_band",
            pl.format("{}-{}", band_floor, band_floor + 4),
            band_floor,
        ),
        _grouped(
            cells,
            "pension_band",
            pl.col("pension_band"),
            pl.col("pension_band").replace_strict(band_order, default=len(band_order)),
        ),
        _grouped(cells, "calendar_year", pl.col("year").cast(pl.String), pl.col("year")),
    ]
    table = pl.concat([p.with_columns(pl.col("_order").cast(pl.Int64)) for p in parts], how="vertical")
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
    ).select(
        "dimension",
        "group",
        "exposure_years",
        "actual_lives",
        "expected_lives",
        "ae_lives",
        "ae_lives_lower",
        "ae_lives_upper",
        "actual_amounts",
        "expected_amounts",
        "ae_amounts",
        "ae_amounts_lower",
        "ae_amounts_upper",
        "var_amounts",
    )
