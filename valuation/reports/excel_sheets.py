"""One function a worksheet of the actuary's workbook. Each takes the workbook's new sheet and the
result, and lays out a title, a short note, then a list written as an Excel table (header frozen).
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import date
from typing import Any

import polars as pl
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.worksheet import Worksheet

from valuation.engine.results import ValuationResult
from valuation.engine.write import SMALL_SCHEME
from valuation.reports import content
from valuation.reports import excel_cells as xc
from valuation.reports.excel_charts import cashflow_chart
from valuation.reports.excel_experience import experience_sheet
from valuation.vocabulary import STATUSES

__all__ = [
    "basis_sheet", "cashflows_sheet", "deaths_sheet", "exceptions_sheet", "experience_sheet",
    "life_expectancy_sheet", "liabilities_sheet", "manifest_sheet", "members_sheet", "sensitivities_sheet",
    "summary_sheet",
]

#: Header row of every list sheet (title in row 1, note in row 2); panes freeze below it.
HEAD = xc.HEAD
#: Most exception rows written to the workbook; all of them are in exceptions.csv.
EXCEPTION_ROWS = SMALL_SCHEME

MEMBER_FORMATS = {
    "age": xc.YEARS, "pension": xc.MONEY_2DP, "liability": xc.MONEY, "member_liability": xc.MONEY,
    "spouse_liability": xc.MONEY, "lump_sum_liability": xc.MONEY, "annuity_factor": xc.FACTOR,
    "q_next_year": xc.PROBABILITY,
}
#: Last parts of basis keys whose numbers are rates or proportions (stored as fractions, shown as %).
BASIS_PERCENT_KEYS = frozenset({"rate", "growth", "cap", "floor", "accrual_rate", "long_term_rate", "percentage",
                                "fraction", "proportion"})
#: Basis keys whose entries (one a sex) are proportions.
BASIS_PERCENT_PARENTS = frozenset({"proportion_married"})
#: Sensitivity columns in plain words; the change is a fraction of the base liability shown as %.
SENSITIVITY_LABELS = {
    "name": "sensitivity", "kind": "assumption changed", "shift": "shift [rate p.a. or years]",
    "liability": "liability [currency]", "change": "change in liability [% of base liability]",
}


def _list_sheet(ws: Worksheet, heading: str, text: str) -> None:
    xc.title(ws, heading)
    xc.note(ws, 2, text)
    ws.freeze_panes = ws.cell(row=HEAD + 1, column=1)


def summary_sheet(ws: Worksheet, result: ValuationResult) -> str:
    """Headline figures, record counts and key assumptions; returns the cell holding the total liability."""
    s = result.summary
    xc.title(ws, "Valuation summary")
    notice = content.data_notice(s)
    if notice:  # row 2, above the figures: exclusions are the first thing a reader sees
        cell = xc.put(ws, 2, 1, notice)
        cell.font = xc.WARN_FONT
        cell.fill = xc.WARN_FILL
    rec = s["records"]
    rows: list[tuple[str, Any, str | None]] = [
        ("Valuation date", xc.as_date(s.get("valuation_date")), xc.DATE),
        ("Basis", s.get("basis_name"), None),
        ("Total liability [currency]", s["liability"]["total"], xc.MONEY),
    ]
    total_cell = f"$B${3 + len(rows) - 1}"
    rows += [(f"  {content.STATUS_LABELS[st]}", s["liability"]["by_status"].get(st, 0.0), xc.MONEY)
             for st in STATUSES]
    rows += [(f"  {content.SEX_LABELS.get(k, k)}", v, xc.MONEY) for k, v in s["liability"].get("by_sex", {}).items()]
    act = s.get("active_measures", {})
    dur = s.get("duration", {})
    rows += [
        ("Active members: projected obligation", act.get("projected_obligation"), xc.MONEY),
        ("Active members: accrued-benefit obligation", act.get("accrued_benefit_obligation"), xc.MONEY),
        ("Current service cost [currency p.a.]", act.get("current_service_cost"), xc.MONEY),
        ("Macaulay duration [years]", dur.get("macaulay"), xc.YEARS),
        ("Modified duration [years]", dur.get("modified"), xc.YEARS),
        ("Effective duration [years]", dur.get("effective"), xc.YEARS),
        ("Single equivalent discount rate [p.a.]", s.get("single_equivalent_discount_rate"), xc.RATE),
        ("Records read", rec["read"], xc.COUNT),
        ("Records valued", rec["valued"], xc.COUNT),
        ("Records excluded", rec["excluded"], xc.COUNT),
        ("Expected deaths next year [lives]", s.get("expected_deaths_next_year", {}).get("lives"), xc.LIVES),
        ("Expected deaths next year [pension, currency p.a.]",
         s.get("expected_deaths_next_year", {}).get("amounts"), xc.MONEY),
    ]
    nxt = xc.key_values(ws, 3, rows)
    xc.put(ws, nxt + 1, 1, "Key assumptions").font = xc.TITLE_FONT
    for i, (name, words) in enumerate(content.assumption_lines(s), start=nxt + 2):
        xc.put(ws, i, 1, name)
        xc.put(ws, i, 2, words).alignment = xc.WRAP
    ws.column_dimensions["A"].width = 48
    ws.column_dimensions["B"].width = 90
    return total_cell


def basis_sheet(ws: Worksheet, result: ValuationResult) -> None:
    basis = result.summary.get("manifest", {}).get("basis") or {}
    _list_sheet(ws, "Basis as loaded", "Every setting of the assumptions basis used for this run.")
    _write_pairs(ws, content.flatten(basis), "Basis", _basis_format)
    xc.fit_widths(ws, HEAD)


def _basis_format(key: str) -> str | None:
    """Rates and proportions of the basis are fractions: shown as %. Other numbers as they are."""
    parts = key.replace("[", ".").split(".")
    if parts[-1] in BASIS_PERCENT_KEYS or (len(parts) > 1 and parts[-2] in BASIS_PERCENT_PARENTS):
        return xc.RATE
    return None


def _scalar_text(value: Any) -> Any:
    """Numbers and text as they are, ISO dates as dates, anything else as text."""
    value = xc.as_date(value)
    return value if isinstance(value, (int, float, str, date)) or value is None else str(value)


def _write_pairs(ws: Worksheet, rows: list[tuple[str, Any]], table: str,
                 number_format: Callable[[str], str | None] = lambda key: None) -> None:
    """Key/value rows whose values mix numbers, dates and text (each kept as its own type)."""
    xc.header(ws, HEAD, 1, ["Key", "Value"])
    for i, (k, v) in enumerate(rows, start=HEAD + 1):
        xc.put(ws, i, 1, k)
        xc.put(ws, i, 2, _scalar_text(v), number_format(k))
    if rows:
        xc.add_table(ws, table, f"A{HEAD}:B{HEAD + len(rows)}")


def liabilities_sheet(ws: Worksheet, result: ValuationResult) -> None:
    _list_sheet(ws, "Liabilities", "By status, sex, tranche and benefit [currency]; totals by group on the right.")
    xc.write_frame(ws, result.liabilities, top=HEAD, formats={"liability": xc.MONEY}, table="LiabilityCells")
    liab = result.summary["liability"]
    col = result.liabilities.width + 2
    row = HEAD
    for heading, values, labels in (
        ("By status", liab.get("by_status", {}), content.STATUS_LABELS),
        ("By sex", liab.get("by_sex", {}), content.SEX_LABELS),
        ("By tranche", liab.get("by_tranche", {}), {}),
    ):
        frame = pl.DataFrame({"group": [labels.get(k, k) for k in values], "liability": list(values.values())},
                             schema={"group": pl.String, "liability": pl.Float64})
        xc.header(ws, row, col, [heading, "Liability"])
        for i, (g, v) in enumerate(frame.iter_rows(), start=row + 1):
            xc.put(ws, i, col, g)
            xc.put(ws, i, col + 1, v, xc.MONEY)
        row += frame.height + 2
    xc.fit_widths(ws, HEAD)


def cashflows_sheet(ws: Worksheet, result: ValuationResult) -> None:
    cf = result.cashflows
    _list_sheet(ws, "Expected benefit payments by year",
                "Nominal expected payments [currency] in each year after the valuation date; discount factor at "
                "mid-year.")
    formats = {c: xc.MONEY for c in cf.columns if c != "year"}
    formats["discount_factor"] = xc.FACTOR
    last = xc.write_frame(ws, cf, top=HEAD, formats=formats, table="CashFlows")
    xc.fit_widths(ws, HEAD)
    statuses = [c for c in STATUSES if c in cf.columns]
    if cf.height and statuses and "year" in cf.columns:
        cols = [cf.columns.index(c) + 1 for c in statuses]
        cashflow_chart(ws, header_row=HEAD, last_row=last, first_col=min(cols), last_col=max(cols),
                       year_col=cf.columns.index("year") + 1, anchor=f"{get_column_letter(cf.width + 2)}{HEAD}")


def sensitivities_sheet(ws: Worksheet, result: ValuationResult) -> None:
    sens = result.sensitivities
    _list_sheet(ws, "Sensitivities", "Each row values the whole scheme again with one assumption changed "
                "(IAS 19 para 145). Shifts are rates [p.a.] or years of life expectancy at 65; the change is "
                "against the total liability on the Summary sheet.")
    frame = sens.with_columns((pl.col("change_pct") / 100.0).alias("change")).drop("change_pct") \
        if "change_pct" in sens.columns else sens
    xc.write_frame(ws, frame, top=HEAD, formats={"liability": xc.MONEY, "change": xc.RATIO},
                   labels=SENSITIVITY_LABELS, table="Sensitivities")
    if "kind" in frame.columns and "shift" in frame.columns:
        scol = frame.columns.index("shift") + 1
        for i, kind in enumerate(frame["kind"].to_list(), start=HEAD + 1):
            ws.cell(row=i, column=scol).number_format = '0.0 "years"' if kind == "life_expectancy" else xc.RATE
    xc.fit_widths(ws, HEAD)


def life_expectancy_sheet(ws: Worksheet, result: ValuationResult) -> None:
    _list_sheet(ws, "Life expectancy", "Complete expectation of life [years] at age 65: cohort for members aged "
                "65 and 45 now, and period (this year's rates).")
    xc.write_frame(ws, result.life_expectancy, top=HEAD, formats={"years": xc.YEARS}, table="LifeExpectancy")
    xc.fit_widths(ws, HEAD)


def deaths_sheet(ws: Worksheet, result: ValuationResult) -> None:
    _list_sheet(ws, "Expected deaths next year", "Lives and pension amounts [currency p.a.] expected to cease "
                "in the year after the valuation date, by status and sex.")
    last = xc.write_frame(ws, result.expected_deaths, top=HEAD, formats={"lives": xc.LIVES, "amounts": xc.MONEY},
                          table="ExpectedDeaths")
    tot = result.summary.get("expected_deaths_next_year", {})
    xc.key_values(ws, last + 2, [("Total lives", tot.get("lives"), xc.LIVES),
                                 ("Total amounts", tot.get("amounts"), xc.MONEY)])
    xc.fit_widths(ws, HEAD)


def exceptions_sheet(ws: Worksheet, result: ValuationResult) -> None:
    exc = result.exceptions
    shown = exc.head(EXCEPTION_ROWS)
    text = "Records left out of the valuation (excluded) or valued with a warning."
    if exc.height > shown.height:
        text += f" First {shown.height:,} of {exc.height:,} shown; all are in exceptions.csv."
    _list_sheet(ws, "Exceptions", text)
    reasons = content.exception_reasons(exc)
    xc.write_frame(ws, shown, top=HEAD, formats={"row": xc.COUNT}, table="Exceptions")
    col = shown.width + 2
    xc.write_frame(ws, reasons, top=HEAD, left=col, formats={"records": xc.COUNT}, table="ExceptionReasons")
    if exc.height == 0:
        xc.note(ws, HEAD + 1, "No exceptions: every record was valued without a warning.")
    xc.fit_widths(ws, HEAD)


def members_sheet(ws: Worksheet, result: ValuationResult) -> None:
    m = result.members
    if m.height > SMALL_SCHEME:
        xc.title(ws, "Member results")
        xc.note(ws, 2, f"{m.height:,} members: more than the workbook limit of {SMALL_SCHEME:,}. Per-member "
                "results are in members.parquet in the run folder.")
        ws.column_dimensions["A"].width = 100
        return
    _list_sheet(ws, "Member results", "One row a valued member; money [currency], ages [years].")
    xc.write_frame(ws, m, top=HEAD, formats=MEMBER_FORMATS, table="Members")
    xc.fit_widths(ws, HEAD)


def manifest_sheet(ws: Worksheet, result: ValuationResult) -> None:
    manifest = {k: v for k, v in (result.summary.get("manifest") or {}).items() if k != "basis"}
    _list_sheet(ws, "Run manifest", "Tool version, input files with their SHA-256, settings and timing. The "
                "basis is on the Basis sheet.")
    _write_pairs(ws, content.flatten(manifest), "Manifest")
    xc.fit_widths(ws, HEAD)
