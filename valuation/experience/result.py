"""The result of an experience analysis and its files (experience.json, experience.csv, exceptions)."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import polars as pl

from valuation.csvout import write_csv
from valuation.experience.settings import ExperienceSettings
from valuation.experience.summary import AERow, ExperienceSummary, ImpliedSummary

#: Exposure, actual and expected deaths and A/E with its interval, by lives and by amounts: the measures of
#: every row of the experience tables.
AE_COLUMNS: tuple[str, ...] = (
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

#: Columns of ``ExperienceResult.table`` (and experience.csv).
TABLE_COLUMNS: tuple[str, ...] = ("dimension", "group", *AE_COLUMNS)

#: Columns experience.csv adds for the mortality-table rows (and the overall row): each table's own
#: A/E by amounts with its credibility and implied percentage [%].
TABLE_EXTRA_COLUMNS: tuple[str, ...] = (
    "sex",
    "table",
    "members",
    "current_percentage",
    "expected_lives_at_risk",
    "credibility",
    "implied_percentage",
    "implied_percentage_lower",
    "implied_percentage_upper",
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
        ``by_table``: for each mortality table entry, its own A/E by amounts with interval, credibility
        factor and credibility-weighted ``implied_percentage`` [% of the base table] (None where its
        members have no pension at risk); ``overall``, the same for all members; ``credibility_standard``;
        ``multiplier`` (overall A/E amounts) and its limits; ``implied_percentage``, ``lower``, ``upper``
        of the overall line (None with ``note`` when the tables' current percentages differ);
        ``liability_before``, ``liability_after`` [currency], ``change_pct`` [%], ``basis_changes`` (or
        None with ``reason``). See :mod:`valuation.experience.implied`.
    exceptions
        ``file, row, member_id, column, file_column, value, reason, severity`` for the start membership,
        deaths and exits.
    summary
        The content of experience.json.
    cells
        The (member, age, calendar year) cells behind the table.
    by_table
        ``implied["by_table"]`` as a frame (see :data:`valuation.experience.implied.BY_TABLE_COLUMNS`).
    """

    settings: ExperienceSettings
    table: pl.DataFrame
    implied: ImpliedSummary
    exceptions: pl.DataFrame
    summary: ExperienceSummary
    cells: pl.DataFrame | None = None
    by_table: pl.DataFrame | None = None

    def overall(self) -> AERow:
        """The overall row of the table."""
        row: AERow = self.table.filter(pl.col("dimension") == "overall").row(0, named=True)  # type: ignore[assignment]
        return row

    def csv_frame(self) -> pl.DataFrame:
        """What experience.csv holds: the overall row, one row a mortality table (dimension
        ``mortality_table``), then the other dimensions; :data:`TABLE_COLUMNS` then
        :data:`TABLE_EXTRA_COLUMNS` (blank where they do not apply)."""
        schema: dict[str, Any] = dict(self.table.select(TABLE_COLUMNS).schema)
        schema.update(dict.fromkeys(TABLE_EXTRA_COLUMNS, pl.Float64))
        schema.update(sex=pl.String, table=pl.String, members=pl.String)
        rename = {"lower": "implied_percentage_lower", "upper": "implied_percentage_upper"}

        def rows_of(line: Mapping[str, Any], dimension: str, group: str) -> dict[str, Any]:
            d = {rename.get(k, k): v for k, v in line.items()}
            if isinstance(d.get("members"), list):
                d["members"] = ", ".join(d["members"])
            return {c: d.get(c) for c in schema} | {"dimension": dimension, "group": group}

        base = self.table.select(TABLE_COLUMNS)
        overall = base.filter(pl.col("dimension") == "overall").to_dicts()
        o: Mapping[str, Any] = self.implied.get("overall") or {}
        head = [rows_of(r | {k: v for k, v in o.items() if k in schema or k in rename}, "overall", r["group"])
                for r in overall]
        by_table = [rows_of(t, "mortality_table", t["group"]) for t in self.implied.get("by_table") or []]
        first = pl.DataFrame(head + by_table, schema=schema)
        rest = base.filter(pl.col("dimension") != "overall")
        return pl.concat([first, rest], how="diagonal_relaxed").select(list(schema))

    def write(self, out_dir: str | Path) -> None:
        """Write experience.json, experience.csv and (when there are any) experience_exceptions.csv.

        The CSV files are formula-safe (:func:`valuation.csvout.write_csv`).
        """
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        (out / "experience.json").write_text(
            json.dumps(clean_json(self.summary), indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
        )
        write_csv(self.csv_frame(), out / "experience.csv")
        if self.exceptions.height:
            write_csv(self.exceptions, out / "experience_exceptions.csv")
