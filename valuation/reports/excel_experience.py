"""The Experience sheet of the actuary's workbook: actual against expected deaths over the period.

Every percentage on the sheet (A/E ratios, implied percentages of the table, the change in liability) is
stored as a fraction (1.07, not 107) with the one percent format :data:`PERCENT`, so a reader can use the
cells in formulas without dividing by 100. The analysis itself reports implied percentages and the change
in percent; they are divided by 100 here.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, cast

import polars as pl
from openpyxl.worksheet.worksheet import Worksheet

from valuation.experience.result import ExperienceResult
from valuation.experience.summary import ImpliedSummary, TableLine
from valuation.reports import content
from valuation.reports import excel_cells as xc
from valuation.reports import format as fmt
from valuation.reports.content import AE_AXIS_MAX, MIN_EXPECTED, chart_bands
from valuation.reports.excel_charts import ae_chart

#: The sheet's one percent format (fractions shown as %).
PERCENT = xc.RATIO
#: Number formats of the experience table's columns.
EXPERIENCE_FORMATS = {
    "exposure_years": xc.LIVES, "actual_lives": xc.LIVES, "expected_lives": xc.LIVES,
    "ae_lives": PERCENT, "ae_lives_lower": PERCENT, "ae_lives_upper": PERCENT,
    "actual_amounts": xc.MONEY, "expected_amounts": xc.MONEY,
    "ae_amounts": PERCENT, "ae_amounts_lower": PERCENT, "ae_amounts_upper": PERCENT,
    "current_percentage": PERCENT, "expected_lives_at_risk": xc.LIVES, "credibility": PERCENT,
    "implied_percentage": PERCENT, "implied_percentage_lower": PERCENT, "implied_percentage_upper": PERCENT,
}
#: The experience table's columns in plain words.
EXPERIENCE_LABELS = {
    "dimension": "grouped by", "group": "group", "exposure_years": "exposure [years]",
    "actual_lives": "actual deaths [lives]", "expected_lives": "expected deaths [lives]",
    "ae_lives": "A/E lives", "ae_lives_lower": "A/E lives lower", "ae_lives_upper": "A/E lives upper",
    "actual_amounts": "actual deaths: pension [p.a.]",
    "expected_amounts": "expected deaths: pension [p.a.]",
    "ae_amounts": "A/E amounts", "ae_amounts_lower": "A/E amounts lower", "ae_amounts_upper": "A/E amounts upper",
    "sex": "sex", "table": "mortality table (basis entry)", "members": "members",
    "current_percentage": "current percentage of table", "expected_lives_at_risk": "expected deaths of lives with a pension",
    "credibility": "credibility factor", "implied_percentage": "implied percentage of table",
    "implied_percentage_lower": "implied percentage lower", "implied_percentage_upper": "implied percentage upper",
}
#: What the experience table's rows are grouped by, in words.
DIMENSION_WORDS = {"overall": "all members", "mortality_table": "mortality table", "age_band": "age band"}
#: Columns of the experience table held in percent by the analysis (divided by 100 on the sheet).
_TABLE_IN_PERCENT = ("current_percentage", "implied_percentage", "implied_percentage_lower",
                     "implied_percentage_upper")
#: Each mortality table's row, in plain words (the analysis's keys -> the sheet's headers).
BY_TABLE_LABELS = {
    "group": "members", "sex": "sex", "current_percentage": "current percentage of table",
    "actual_amounts": "actual deaths: pension [p.a.]",
    "expected_amounts": "expected deaths: pension [p.a.]",
    "ae_amounts": "A/E by amounts", "ae_amounts_lower": "A/E lower", "ae_amounts_upper": "A/E upper",
    "expected_lives_at_risk": "expected deaths of lives with a pension",
    "credibility": "credibility factor", "implied_percentage": "implied percentage of table",
    "lower": "lower", "upper": "upper", "note": "note",
}
_BY_TABLE_SCHEMA = {"group": pl.String, "sex": pl.String, "current_percentage": pl.Float64,
                    "actual_amounts": pl.Float64, "expected_amounts": pl.Float64, "ae_amounts": pl.Float64,
                    "ae_amounts_lower": pl.Float64, "ae_amounts_upper": pl.Float64,
                    "expected_lives_at_risk": pl.Float64, "credibility": pl.Float64,
                    "implied_percentage": pl.Float64, "lower": pl.Float64, "upper": pl.Float64,
                    "note": pl.String}
#: Columns held in percent by the analysis (divided by 100 on the sheet).
_IN_PERCENT = ("current_percentage", "implied_percentage", "lower", "upper")
_BY_TABLE_FORMATS = {
    **dict.fromkeys(_IN_PERCENT, PERCENT), "actual_amounts": xc.MONEY, "expected_amounts": xc.MONEY,
    "ae_amounts": PERCENT, "ae_amounts_lower": PERCENT, "ae_amounts_upper": PERCENT,
    "expected_lives_at_risk": xc.LIVES, "credibility": PERCENT,
}
#: Shown in place of a figure that does not exist (no pension at risk).
NONE_SHOWN = "\u2014"
#: The note on a row whose members have no pension at risk.
NO_AMOUNTS_TEXT = "no pension at risk: no A/E by amounts; table percentage kept"


def _in_currency(labels: dict[str, str], formats: dict[str, str], code: str | None) -> tuple[dict[str, str],
                                                                                             dict[str, str]]:
    """Labels and formats with the amounts in ``code`` (``[p.a.]`` becomes ``[GBP p.a.]``)."""
    money = xc.money_format(code)
    return ({k: v.replace("[p.a.]", f"[{fmt.money_unit(code, per_year=True)}]") for k, v in labels.items()},
            {k: money if v == xc.MONEY else v for k, v in formats.items()})


def _fraction(percent: Any) -> float | None:
    """A figure in percent (107.4) as a fraction (1.074); None stays None."""
    return None if percent is None else float(percent) / 100.0


def headline_rows(implied: ImpliedSummary, code: str | None = None) -> list[tuple[str, Any, str | None]]:
    """The overall A/E by amounts, the implied percentage of the table (when the tables share one), the
    credibility standard and the liability effect, as (label, value, number format) rows; percentages as
    fractions."""
    std: Mapping[str, Any] = implied.get("credibility_standard") or {}
    rows: list[tuple[str, Any, str | None]] = [
        ("A/E by amounts (weighted by pension)", implied.get("multiplier"), PERCENT),
        ("  lower", implied.get("multiplier_lower"), PERCENT),
        ("  upper", implied.get("multiplier_upper"), PERCENT),
        ("Implied percentage of table", _fraction(implied.get("implied_percentage")), PERCENT),
        ("  lower", _fraction(implied.get("lower")), PERCENT),
        ("  upper", _fraction(implied.get("upper")), PERCENT),
        ("Full credibility at [expected deaths]", std.get("full_expected_deaths"), xc.LIVES),
        (fmt.money_label("Liability on the valuation basis", code), implied.get("liability_before"),
         xc.money_format(code)),
        (fmt.money_label("Liability, each table at its implied percentage", code), implied.get("liability_after"),
         xc.money_format(code)),
        ("Change in liability", _fraction(implied.get("change_pct")), PERCENT),
    ]
    return [r for r in rows if r[1] is not None]


def by_table_frame(implied: ImpliedSummary) -> pl.DataFrame:
    """One row a mortality table, then the overall line: who it covers in words, its own A/E by amounts
    and interval, credibility factor and implied percentage; percentages as fractions."""
    rows: list[TableLine] = [*implied.get("by_table", []), *([o] if (o := implied.get("overall")) else [])]
    frame = pl.DataFrame(
        [{c: r.get(c) for c in _BY_TABLE_SCHEMA}
         | {"group": content.table_members(r), "sex": content.SEX_LABELS.get(str(r.get("sex")), "All"),
            "note": NO_AMOUNTS_TEXT if r.get("ae_amounts") is None else None}
         for r in rows],
        schema=_BY_TABLE_SCHEMA,
    )
    return frame.with_columns(*[(pl.col(c) / 100.0) for c in _IN_PERCENT])


def _mark_missing(ws: Worksheet, frame: pl.DataFrame, top: int) -> None:
    """Write :data:`NONE_SHOWN` where a figure does not exist: no pension at risk (no A/E by amounts), or
    no single current percentage on the overall line."""
    for j, name in enumerate(frame.columns, start=1):
        if frame.schema[name] != pl.Float64:
            continue
        for i, missing in enumerate(frame[name].is_null().to_list(), start=top + 1):
            if missing:
                xc.put(ws, i, j, NONE_SHOWN)


def experience_sheet(ws: Worksheet, experience: ExperienceResult, currency: str | None = None) -> None:
    """Write the experience analysis: period, headline A/E and its effect, implied percentages by table,
    A/E by age band with a chart, and every group; amounts in ``currency`` (an ISO 4217 code)."""
    head = xc.HEAD
    settings = experience.settings
    xc.title(ws, "Experience analysis: actual against expected deaths")
    amounts = f"pensions in {currency} a year" if currency else "pensions a year"
    xc.note(ws, 2, f"A/E is actual deaths divided by those expected on the valuation basis (100% = as expected), "
            f"using {settings.exposure} exposure; intervals at {settings.confidence:.0%} confidence; amounts are "
            f"{amounts}.")
    exp_labels, exp_formats = _in_currency(EXPERIENCE_LABELS, EXPERIENCE_FORMATS, currency)
    table_labels, table_formats = _in_currency(BY_TABLE_LABELS, _BY_TABLE_FORMATS, currency)
    ws.freeze_panes = ws.cell(row=head, column=1)
    implied = experience.implied
    rows: list[tuple[str, Any, str | None]] = [
        ("Period start", settings.period_start, xc.DATE),
        ("Period end", settings.period_end, xc.DATE),
        *headline_rows(implied, currency),
    ]
    top = xc.key_values(ws, head, rows)
    for text in content.implied_notes(implied):
        xc.note(ws, top, text)
        top += 1
    top += 1
    by_table = by_table_frame(implied)
    if implied.get("by_table"):
        xc.put(ws, top, 1, "Each mortality table's own experience, credibility and implied percentage"
               ).font = xc.TITLE_FONT
        last = xc.write_frame(ws, by_table, top=top + 1, formats=table_formats, labels=table_labels,
                              table="ImpliedByTable")
        _mark_missing(ws, by_table, top + 1)
        top = last + 2
    ages = chart_bands(content.ae_by_age(experience)).select(
        "group", "exposure_years", "actual_lives", "expected_lives", "ae_lives", "ae_lives_lower", "ae_lives_upper")
    xc.put(ws, top, 1, f"By age band (bands with at least {MIN_EXPECTED:g} expected death; all bands below)"
           ).font = xc.TITLE_FONT
    last = xc.write_frame(ws, ages, top=top + 1, formats=exp_formats, table="AEByAge",
                          labels=exp_labels | {"group": "age band"})
    if ages.height:
        upper = ages["ae_lives_upper"].fill_nan(None).drop_nulls()
        y_max = min(AE_AXIS_MAX / 100.0, 1.05 * float(cast(float, upper.max()))) if upper.len() else None
        ae_chart(ws, header_row=top + 1, last_row=last, group_col=1, ae_col=5, lower_col=6, upper_col=7,
                 anchor=f"I{head}", y_max=y_max)
    top = max(last + 3, head + 22)
    xc.put(ws, top - 1, 1, "All groups").font = xc.TITLE_FONT
    table = experience.table.with_columns(
        *[(pl.col(c) / 100.0) for c in _TABLE_IN_PERCENT if c in experience.table.columns],
        *([pl.col("dimension").cast(pl.String).replace(DIMENSION_WORDS).str.replace_all("_", " ")]
          if "dimension" in experience.table.columns else []))
    last = xc.write_frame(ws, table, top=top, formats=exp_formats, labels=exp_labels, table="Experience")
    xc.fit_widths(ws, head)
    xc.print_setup(ws, landscape=True, last_row=last, last_col=max(ws.max_column, 17))
