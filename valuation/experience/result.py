"""The result of an experience analysis and its files (experience.json, experience.csv, exceptions)."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import polars as pl

from valuation.experience.settings import ExperienceSettings

#: Columns of ``ExperienceResult.table`` (and experience.csv).
TABLE_COLUMNS: tuple[str, ...] = (
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
)


def clean_json(value: Any) -> Any:
    """Replace NaN/inf by None, recursively, so the summary is valid JSON."""
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: clean_json(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [clean_json(v) for v in value]
    return value


@dataclass
class ExperienceResult:
    """Everything an experience analysis produced.

    Attributes
    ----------
    settings
        The settings used.
    table
        One row a (dimension, group): see :data:`TABLE_COLUMNS`. Ratios are decimals (1 = 100 %),
        exposure [years], amounts [currency p.a.].
    implied
        ``implied_percentage``, ``lower``, ``upper`` [% of the base table] (or None with ``note``),
        ``multiplier`` (A/E amounts) and its limits, ``by_table``, ``liability_before``,
        ``liability_after`` [currency], ``change_pct`` [%] (or None with ``reason``).
    exceptions
        ``file, row, member_id, column, value, reason, severity`` for the start membership, deaths and exits.
    summary
        The content of experience.json.
    cells
        The (member, age, calendar year) cells behind the table.
    """

    settings: ExperienceSettings
    table: pl.DataFrame
    implied: dict[str, Any]
    exceptions: pl.DataFrame
    summary: dict[str, Any]
    cells: pl.DataFrame | None = None

    def overall(self) -> dict[str, Any]:
        """The overall row of the table as a dict."""
        return self.table.filter(pl.col("dimension") == "overall").row(0, named=True)

    def write(self, out_dir: str | Path) -> None:
        """Write experience.json, experience.csv and (when there are any) experience_exceptions.csv."""
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        (out / "experience.json").write_text(
            json.dumps(clean_json(self.summary), indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
        )
        self.table.select(TABLE_COLUMNS).write_csv(out / "experience.csv")
        if self.exceptions.height:
            self.exceptions.write_csv(out / "experience_exceptions.csv")
