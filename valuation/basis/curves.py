"""Rate curves of the basis: a flat rate or a spot-curve CSV file (columns ``term``, ``rate``)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import polars as pl

from valuation.basis.rules import RateSpec
from valuation.csvtext import csv_problem, head_problem
from valuation.errors import BasisError


def read_curve_file(path: Path, key: str) -> tuple[np.ndarray, np.ndarray]:
    """Terms [years] and spot rates [per annum, effective] from a CSV with headers ``term`` and ``rate``.

    Rows are numbered as in a spreadsheet (header = row 1). Terms must be positive and strictly
    increasing; rates must lie in (-0.5, 0.5).
    """
    fix = f"point '{key}' at a CSV file with columns term, rate (path relative to the basis file)"
    if not path.is_file():
        raise BasisError(f"curve file for '{key}' not found", file=path, fix=fix)
    try:
        df = pl.read_csv(path, infer_schema=False)
    except (pl.exceptions.PolarsError, OSError, UnicodeDecodeError) as exc:
        problem = csv_problem(path)
        if problem is None:
            raise BasisError(f"cannot read the curve file for '{key}' as CSV", file=path, fix=fix) from exc
        raise BasisError(f"curve file for '{key}': {problem.reason}", file=path, fix=problem.fix) from exc
    with path.open("rb") as fh:
        found = head_problem(fh.read(4096))
    if found is not None:
        raise BasisError(f"curve file for '{key}': {found.reason}", file=path, fix=found.fix)
    df = df.rename({c: c.strip().lower() for c in df.columns})
    for col in ("term", "rate"):
        if col not in df.columns:
            raise BasisError(
                f"curve file has no '{col}' column (found: {', '.join(df.columns)})",
                file=path, column=col, fix=fix,
            )
    if df.height == 0:
        raise BasisError("curve file has no rows", file=path, fix=fix)
    values = {}
    for col in ("term", "rate"):
        raw = df.get_column(col).str.strip_chars()
        num = raw.cast(pl.Float64, strict=False)
        bad = (num.is_null() | ~num.is_finite().fill_null(False)).arg_true()
        if bad.len() > 0:
            i = int(bad[0])
            raise BasisError(
                f"'{raw[i]}' is not a number", file=path, row=i + 2, column=col, fix="give a decimal number"
            )
        values[col] = num.to_numpy()
    terms, rates = values["term"], values["rate"]
    if terms[0] <= 0 or np.any(np.diff(terms) <= 0):
        i = 0 if terms[0] <= 0 else int(np.argmax(np.diff(terms) <= 0)) + 1
        raise BasisError(
            f"term {terms[i]} is not positive and above the previous term",
            file=path, row=i + 2, column="term", fix="list terms [years] in strictly increasing order",
        )
    out = (rates <= -0.5) | (rates >= 0.5)
    if out.any():
        i = int(np.argmax(out))
        raise BasisError(
            f"rate {rates[i]} is outside (-0.5, 0.5)", file=path, row=i + 2, column="rate",
            fix="give annual effective rates as decimals, e.g. 0.045 for 4.5 %",
        )
    return terms, rates


def build_curve(spec: RateSpec, base_dir: Path, key: str) -> object:
    """A :class:`valuation.discounting.RateCurve` for a ``[discount]`` or ``[inflation]`` entry."""
    from valuation.discounting import RateCurve

    if spec.rate is not None:
        return RateCurve.flat(spec.rate)
    assert spec.curve is not None
    terms, rates = read_curve_file(base_dir / spec.curve, f"{key}.curve")
    return RateCurve.from_spot(terms, rates, extrapolation=spec.extrapolation)
