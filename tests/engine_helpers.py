"""Helpers shared by the engine tests: small bases written as TOML and member frames built in code."""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

import polars as pl

from valuation.basis import load_basis

SCHEMA: dict[str, Any] = {
    "member_id": pl.Utf8, "status": pl.Utf8, "sex": pl.Utf8, "date_of_birth": pl.Date, "pension": pl.Float64,
    "salary": pl.Float64, "service_years": pl.Float64, "retirement_age": pl.Float64,
    "spouse_date_of_birth": pl.Date, "spouse_fraction": pl.Float64, "guarantee_end": pl.Date,
    "pension_end_age": pl.Float64,
}


def sult_toml(
    *,
    valuation_date: str = "2025-01-01",
    rate: float = 0.05,
    frequency: int = 1,
    timing: str = "advance",
    improvement: str = "",
    extra: str = "",
    increase: str = 'kind = "none"',
    revaluation: str = 'kind = "none"',
    inflation: float = 0.0,
    spouse: str = "proportion_married = { M = 0.0, F = 0.0 }\nage_difference = 3.0\nfraction = 0.5",
) -> str:
    """A basis on the SULT with no increases (the reference basis of Dickson, Hardy & Waters, App. D)."""
    imp = f"improvement = {improvement}\nbase_year = 2020\n" if improvement else ""
    return f"""
name = "test basis"
valuation_date = {valuation_date}
[discount]
rate = {rate}
[inflation]
rate = {inflation}
[tranches.main]
increase = {{ {increase} }}
revaluation = {{ {revaluation} }}
[mortality.default.M]
table = "SULT"
{imp}
[mortality.default.F]
table = "SULT"
{imp}
[payment]
frequency = {frequency}
timing = "{timing}"
[spouse]
{spouse}
{extra}
"""


def write_basis(tmp_path: Path, text: str, name: str = "basis.toml") -> Any:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return load_basis(path)


def members(rows: list[dict[str, Any]], tranches: tuple[str, ...] = ("main",)) -> pl.DataFrame:
    """A typed member frame as read_members returns it; every tranche column filled from ``pension``."""
    full = []
    for i, r in enumerate(rows):
        base = {k: None for k in SCHEMA}
        base.update({"member_id": f"m{i}", "retirement_age": 65.0})
        base.update(r)
        full.append(base)
    df = pl.DataFrame(full, schema=SCHEMA)
    for t in tranches:
        col = f"pension_{t}"
        if col not in df.columns:
            df = df.with_columns(pl.col("pension").fill_null(0.0).alias(col) if t == tranches[0] else pl.lit(0.0).alias(col))
    return df.with_row_index("row", offset=2).with_columns(pl.col("row").cast(pl.Int64))


def dob_for_age(valuation_date: dt.date, age: int) -> dt.date:
    """Date of birth that gives an exact integer age at the valuation date."""
    return valuation_date.replace(year=valuation_date.year - age)
