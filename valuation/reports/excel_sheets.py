"""One function a worksheet of the actuary's workbook. Each takes the workbook's new sheet and the
result, and lays out a title, a short note, then a list written as an Excel table (header frozen), with
headers in plain words, money in the basis's currency, and print settings (A4, fitted to the page width,
the header row repeated on every page).
"""

from __future__ import annotations

import hashlib
import tomllib
from collections.abc import Callable, Mapping
from datetime import date
from pathlib import Path
from typing import Any

import polars as pl
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.worksheet import Worksheet

from valuation.engine.change import AnalysisOfChange
from valuation.engine.results import ValuationResult
from valuation.engine.summary import LUMP_SUMS
from valuation.engine.write import SMALL_SCHEME
from valuation.movements.classify import MovementsResult
from valuation.reports import content
from valuation.reports import excel_cells as xc
from valuation.reports import format as fmt
from valuation.reports.content import movements_words
from valuation.reports.excel_charts import cashflow_chart
from valuation.reports.excel_experience import experience_sheet
from valuation.vocabulary import STATUSES

__all__ = [
    "basis_sheet", "cashflows_sheet", "change_sheet", "deaths_sheet", "exceptions_sheet", "experience_sheet",
    "life_expectancy_sheet", "liabilities_sheet", "manifest_sheet", "members_sheet", "movements_sheet",
    "sensitivities_sheet", "summary_sheet",
]

#: Header row of every list sheet (title in row 1, note in row 2); panes freeze below it.
HEAD = xc.HEAD
#: Most exception rows written to the workbook; all of them are in exceptions.csv.
EXCEPTION_ROWS = SMALL_SCHEME
#: Rows of the long lists (members, exceptions) inside the print area; the rest are on screen and in the
#: run folder's files.
PRINT_ROWS = 100

#: Last parts of basis keys whose numbers are rates or proportions (stored as fractions, shown as %).
BASIS_PERCENT_KEYS = frozenset({"rate", "growth", "cap", "floor", "accrual_rate", "long_term_rate", "percentage",
                                "fraction", "proportion"})
#: Basis keys whose entries (one a sex) are proportions.
BASIS_PERCENT_PARENTS = frozenset({"proportion_married"})
#: Benefits of the liabilities frame in words.
BENEFIT_WORDS = {"member_pension": "member's pension", "spouse_pension": "spouse's pension",
                 "lump_sum": "lump sums"}
#: The by-tranche key of the summary that holds the lump sums (not a tranche).
LUMP_SUMS_KEY = LUMP_SUMS


def member_labels(code: str | None) -> dict[str, str]:
    """Member results' columns in plain words, money in ``code``."""
    return {
        "member_id": "member id", "status": "status", "sex": "sex", "age": "age [years]",
        "pension": fmt.money_label("pension", code, per_year=True),
        "liability": fmt.money_label("liability", code),
        "member_liability": fmt.money_label("member's pension", code),
        "spouse_liability": fmt.money_label("spouse's pension", code),
        "lump_sum_liability": fmt.money_label("lump sums", code),
        "annuity_factor": "annuity factor", "q_next_year": "probability of death next year",
    }


def member_formats(code: str | None) -> dict[str, str]:
    money = xc.money_format(code)
    return {"age": xc.YEARS, "pension": xc.money_format(code, pence=True), "liability": money,
            "member_liability": money, "spouse_liability": money, "lump_sum_liability": money,
            "annuity_factor": xc.FACTOR, "q_next_year": xc.PROBABILITY}


#: Exceptions' columns in plain words.
EXCEPTION_LABELS = {
    "file": "file", "row": "row", "member_id": "member id", "column": "column", "file_column":
    "column as headed in the file", "value": "value as read", "reason": "problem", "severity": "outcome",
}


def sensitivity_labels(code: str | None) -> dict[str, str]:
    """Sensitivity columns in plain words; the change is a fraction of the base liability shown as %."""
    return {"name": "sensitivity", "kind": "assumption changed", "shift": "shift [rate p.a. or years]",
            "liability": fmt.money_label("liability", code), "change": "change in liability [% of base liability]"}


def _plain(frame: pl.DataFrame, column: str, words: dict[str, str] | None = None) -> pl.DataFrame:
    """``column`` of codes as words: through ``words``, else ``_`` read as a space."""
    if column not in frame.columns:
        return frame
    expr = pl.col(column).cast(pl.String)
    if words:
        expr = expr.replace(words)
    return frame.with_columns(expr.str.replace_all("_", " ").alias(column))


def _list_sheet(ws: Worksheet, heading: str, text: str) -> None:
    xc.title(ws, heading)
    xc.note(ws, 2, text)
    ws.freeze_panes = ws.cell(row=HEAD + 1, column=1)


def summary_sheet(ws: Worksheet, result: ValuationResult) -> str:
    """Headline figures, record counts and key assumptions; returns the cell holding the total liability.

    Labels in column A, figures beside them in column B; the assumptions' sentences span columns B and C,
    wrapped, so that no long text shares the width of the figures' column.
    """
    s = result.summary
    code = fmt.currency_of(s)
    widths = {"A": 50, "B": 19, "C": 48}
    for col, width in widths.items():
        ws.column_dimensions[col].width = width
    xc.title(ws, "Valuation summary")
    notice = content.data_notice(s)
    if notice:  # row 2, above the figures: exclusions are the first thing a reader sees
        cell = xc.put(ws, 2, 1, notice)
        cell.font = xc.WARN_FONT
        cell.fill = xc.WARN_FILL
        cell.alignment = xc.WRAP
        ws.merge_cells("A2:C2")
        ws.row_dimensions[2].height = xc.wrapped_height(notice, sum(widths.values()))
    rec = s.records
    liab = s.liability
    money = xc.money_format(code)
    rows: list[tuple[str, Any, str | None]] = [
        ("Valuation date", s.valuation_date, xc.DATE),
        ("Basis", s.basis_name, None),
        ("Currency", code or "none named in the basis", None),
        (fmt.money_label("Total liability", code), liab.total, money),
    ]
    total_cell = f"$B${3 + len(rows) - 1}"
    rows += [(f"  {content.STATUS_LABELS[st]}", liab.by_status.get(st, 0.0), money) for st in STATUSES]
    rows += [(f"  {content.SEX_LABELS.get(k, k)}", v, money) for k, v in liab.by_sex.items()]
    act = s.active_measures
    dur = s.duration
    deaths = s.expected_deaths_next_year
    rows += [
        (fmt.money_label("Active members: projected obligation", code), act.projected_obligation, money),
        (fmt.money_label("Active members: accrued-benefit obligation", code), act.accrued_benefit_obligation,
         money),
        (fmt.money_label("Current service cost", code, per_year=True), act.current_service_cost, money),
        ("Macaulay duration [years]", dur.macaulay, xc.YEARS),
        ("Modified duration [years]", dur.modified, xc.YEARS),
        ("Effective duration [years]", dur.effective, xc.YEARS),
        ("Single equivalent discount rate [p.a.]", s.single_equivalent_discount_rate, xc.RATE),
        ("Records read", rec.read, xc.COUNT),
        ("Records valued", rec.valued, xc.COUNT),
        ("Records excluded", rec.excluded, xc.COUNT),
        ("Expected deaths next year [lives]", deaths.lives, xc.LIVES),
        (fmt.money_label("Pension ceasing on deaths next year", code, per_year=True), deaths.amounts, money),
    ]
    nxt = xc.key_values(ws, 3, rows)
    xc.put(ws, nxt + 1, 1, "Key assumptions").font = xc.TITLE_FONT
    row = nxt + 2
    for row, (name, words) in enumerate(content.assumption_lines(s), start=nxt + 2):
        xc.put(ws, row, 1, name).alignment = xc.WRAP
        xc.put(ws, row, 2, words).alignment = xc.WRAP
        ws.merge_cells(start_row=row, start_column=2, end_row=row, end_column=3)
        ws.row_dimensions[row].height = xc.wrapped_height(words, widths["B"] + widths["C"])
    xc.print_setup(ws, last_row=row, last_col=3)
    return total_cell


# ---- the basis -----------------------------------------------------------------------------------------


def basis_as_given(basis: dict[str, Any], inputs: dict[str, Any]) -> dict[str, Any] | None:
    """The basis file's own values (its TOML as written: ``"1/60"`` stays ``1/60``), read again from the
    file the run used, or None when that file is gone or has changed since (its SHA-256 is not among the
    run's inputs)."""
    path = basis.get("source_path")
    if not path:
        return None
    try:
        data = Path(path).read_bytes()
    except OSError:
        return None
    if hashlib.sha256(data).hexdigest() not in {str(v) for v in (inputs or {}).values()}:
        return None
    try:
        return tomllib.loads(data.decode("utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError):
        return None


def basis_sheet(ws: Worksheet, result: ValuationResult) -> None:
    """Every setting of the basis: as given in its file (the file's own form) and as the valuation used it
    (defaults filled in, rates shown as percentages)."""
    manifest = result.summary.manifest
    basis = dict(manifest.basis)
    source = basis.pop("source_path", None)
    given = basis_as_given({"source_path": source}, dict(manifest.inputs))
    where = f"the basis file {source}" if source else "the basis file"
    if given is None:
        text = (f"Every setting of the basis as the valuation used it; {where} could not be read again as it "
                "was at the run (moved or changed since), so its own form is not shown.")
    else:
        text = (f"Every setting of {where}: as written in the file, and as the valuation used it (defaults "
                "filled in, rates as percentages). A setting with nothing as given took its default.")
    _list_sheet(ws, "Basis as given", text)
    used = dict(content.flatten(basis))
    raw = dict(content.flatten(given)) if given is not None else {}
    keys = list(used) + [k for k in raw if k not in used]
    xc.header(ws, HEAD, 1, ["setting (key in the basis file)", "as given in the basis file", "as used"])
    for i, key in enumerate(keys, start=HEAD + 1):
        xc.put(ws, i, 1, key)
        if key in raw:
            xc.put(ws, i, 2, _scalar_text(raw[key]))
        if key in used:
            xc.put(ws, i, 3, _scalar_text(used[key]), _basis_format(key))
    if keys:
        xc.add_table(ws, "Basis", f"A{HEAD}:C{HEAD + len(keys)}")
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, header_row=HEAD)


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


def _write_pairs(ws: Worksheet, rows: list[tuple[str, Any]], table: str, heads: tuple[str, str],
                 number_format: Callable[[str], str | None] = lambda key: None) -> None:
    """Label/value rows whose values mix numbers, dates and text (each kept as its own type)."""
    xc.header(ws, HEAD, 1, list(heads))
    for i, (k, v) in enumerate(rows, start=HEAD + 1):
        xc.put(ws, i, 1, k)
        xc.put(ws, i, 2, _scalar_text(v), number_format(k))
    if rows:
        xc.add_table(ws, table, f"A{HEAD}:B{HEAD + len(rows)}")


# ---- lists -----------------------------------------------------------------------------------------------


def liabilities_sheet(ws: Worksheet, result: ValuationResult) -> None:
    code = fmt.currency_of(result.summary)
    money = xc.money_format(code)
    _list_sheet(ws, "Liabilities", "By status, sex, tranche and benefit; totals on the right. Lump sums (cash "
                "at retirement, death in service) belong to no tranche.")
    frame = result.liabilities
    if {"benefit", "tranche"} <= set(frame.columns):
        frame = frame.with_columns(
            pl.when(pl.col("benefit") == "lump_sum").then(None).otherwise(pl.col("tranche")).alias("tranche"))
    frame = _plain(frame, "benefit", BENEFIT_WORDS)
    labels = {"liability": fmt.money_label("liability", code)}
    xc.write_frame(ws, frame, top=HEAD, formats={"liability": money}, labels=labels, table="LiabilityCells")
    liab = result.summary.liability
    by_benefit: dict[str, float] = {}
    if {"benefit", "liability"} <= set(result.liabilities.columns):
        sums = result.liabilities.group_by("benefit", maintain_order=True).agg(pl.col("liability").sum())
        by_benefit = {BENEFIT_WORDS.get(b, b): float(v) for b, v in sums.iter_rows()}
    col = result.liabilities.width + 2
    row = HEAD
    groups: tuple[tuple[str, Mapping[str, float], Mapping[str, str]], ...] = (
        ("by status", {k: v for k, v in liab.by_status.items()}, content.STATUS_LABELS),
        ("by sex", {k: v for k, v in liab.by_sex.items()}, content.SEX_LABELS),
        ("pensions by tranche", liab.tranches, {}),
        ("by benefit", by_benefit, {}),
    )
    for heading, values, words in groups:
        xc.header(ws, row, col, [heading, fmt.money_label("liability", code)])
        for i, (g, v) in enumerate(values.items(), start=row + 1):
            xc.put(ws, i, col, words.get(g, g))
            xc.put(ws, i, col + 1, v, money)
        row += len(values) + 2
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, landscape=True, header_row=HEAD, last_col=col + 1)


def cashflows_sheet(ws: Worksheet, result: ValuationResult) -> None:
    cf = result.cashflows
    code = fmt.currency_of(result.summary)
    _list_sheet(ws, "Expected benefit payments by year",
                "Nominal expected payments in each year after the valuation date, the year's discount factor "
                "(payment-weighted) and the discounted total.")
    money = xc.money_format(code)
    formats = {c: money for c in cf.columns if c != "year"}
    formats["discount_factor"] = xc.FACTOR
    labels = {"year": "year after the valuation date", "total": fmt.money_label("total", code),
              "discount_factor": "discount factor", "discounted_total": fmt.money_label("discounted total", code)}
    labels |= {s: fmt.money_label(content.STATUS_LABELS[s].lower(), code) for s in STATUSES}
    last = xc.write_frame(ws, cf, top=HEAD, formats=formats, labels=labels, table="CashFlows")
    xc.fit_widths(ws, HEAD)
    statuses = [c for c in STATUSES if c in cf.columns]
    chart_cols = 0
    if cf.height and statuses and "year" in cf.columns:
        cols = [cf.columns.index(c) + 1 for c in statuses]
        cashflow_chart(ws, header_row=HEAD, last_row=last, first_col=min(cols), last_col=max(cols),
                       year_col=cf.columns.index("year") + 1, anchor=f"{get_column_letter(cf.width + 2)}{HEAD}",
                       y_title=fmt.money_label("Payments", code))
        chart_cols = 10  # the chart is 22 cm wide: about ten columns of the default width
    xc.print_setup(ws, landscape=True, header_row=HEAD, last_col=cf.width + 1 + chart_cols)


def sensitivities_sheet(ws: Worksheet, result: ValuationResult) -> None:
    sens = result.sensitivities
    code = fmt.currency_of(result.summary)
    _list_sheet(ws, "Sensitivities", "Each row values the whole scheme again with one assumption changed "
                "(IAS 19 para 145). Shifts are rates [p.a.] or years of life expectancy at 65; the change is "
                "against the total liability on the Summary sheet.")
    frame = sens.with_columns((pl.col("change_pct") / 100.0).alias("change")).drop("change_pct") \
        if "change_pct" in sens.columns else sens
    kinds = frame["kind"].to_list() if "kind" in frame.columns else []
    frame = _plain(frame, "kind")
    xc.write_frame(ws, frame, top=HEAD, formats={"liability": xc.money_format(code), "change": xc.RATIO},
                   labels=sensitivity_labels(code), table="Sensitivities")
    if kinds and "shift" in frame.columns:
        scol = frame.columns.index("shift") + 1
        for i, kind in enumerate(kinds, start=HEAD + 1):
            ws.cell(row=i, column=scol).number_format = '0.0 "years"' if kind == "life_expectancy" else xc.RATE
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, landscape=True, header_row=HEAD)


LIFE_LABELS = {"sex": "sex", "age_now": "age now [years]", "at_age": "from age [years]",
               "basis": "cohort or period", "years": "expectation of life [years]"}


def life_expectancy_sheet(ws: Worksheet, result: ValuationResult) -> None:
    _list_sheet(ws, "Life expectancy", "Complete expectation of life [years] at age 65: cohort for members aged "
                "65 and 45 now, and period (this year's rates).")
    xc.write_frame(ws, result.life_expectancy, top=HEAD, formats={"years": xc.YEARS}, labels=LIFE_LABELS,
                   table="LifeExpectancy")
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, header_row=HEAD)


def deaths_sheet(ws: Worksheet, result: ValuationResult) -> None:
    code = fmt.currency_of(result.summary)
    money = xc.money_format(code)
    _list_sheet(ws, "Expected deaths next year", "Lives and pensions expected to cease in the year after the "
                "valuation date, by status and sex.")
    labels = {"status": "status", "sex": "sex", "lives": "deaths [lives]",
              "amounts": fmt.money_label("pension ceasing", code, per_year=True)}
    last = xc.write_frame(ws, result.expected_deaths, top=HEAD, formats={"lives": xc.LIVES, "amounts": money},
                          labels=labels, table="ExpectedDeaths")
    tot = result.summary.expected_deaths_next_year
    xc.key_values(ws, last + 2, [("Total lives", tot.lives, xc.LIVES),
                                 (fmt.money_label("Total pension ceasing", code, per_year=True), tot.amounts,
                                  money)])
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, header_row=HEAD)


def movements_sheet(ws: Worksheet, movements: MovementsResult) -> None:
    """The membership reconciliation: each status's count at the start, the change from each movement, and
    its count at the end (start + movements = end), and the deaths reconciled with the deaths file."""
    _list_sheet(ws, "Membership movements", f"From {movements.period_start.isoformat()} to "
                f"{movements.period_end.isoformat()}: members at the start, the change from each movement "
                "(a minus leaves the status, a plus joins it), and members at the end. " + movements_words(movements))
    table = movements.table
    shown = [c for c in table.columns if c in ("status", "start", "end") or (table[c] != 0).any()]
    labels = {c: c.replace("_", " ") for c in shown}
    last = xc.write_frame(ws, table.select(shown), top=HEAD, formats={c: xc.COUNT for c in shown if c != "status"},
                          labels=labels, table="Movements")
    d = movements.deaths
    xc.key_values(ws, last + 2, [("Deaths in the deaths file and gone from the extracts", d["matched"], xc.COUNT),
                                 ("Deaths in the deaths file only (still in the current extract)",
                                  d["deaths_file_only"], xc.COUNT),
                                 ("Gone from the extracts with no death or exit record", d["extracts_only"], xc.COUNT)])
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, landscape=True, header_row=HEAD)


def change_sheet(ws: Worksheet, analysis: AnalysisOfChange, currency: str | None) -> None:
    """The analysis of change: each line, its amount and the valuation behind it; the lines add up."""
    _list_sheet(ws, "Analysis of change", "From the previous valuation's liability to this one's: each step is "
                "a full valuation (the basis and data named beside it); the items add up to closing minus opening.")
    frame = pl.DataFrame({"line": [x.label for x in analysis.lines], "amount": [x.amount for x in analysis.lines],
                          "valuation": [x.valuation for x in analysis.lines]})
    last = xc.write_frame(ws, frame, top=HEAD, formats={"amount": xc.money_format(currency)},
                          labels={"line": "line", "amount": fmt.money_label("amount", currency), "valuation": "valued"},
                          table="AnalysisOfChange")
    note_row = last + 2
    xc.note(ws, note_row, "The same lines as a disclosure note reconciles the defined benefit obligation (IAS 19 "
            "paras 140-141; gains negative, losses positive):")
    disclosure = pl.DataFrame({"line": [label for label, _ in analysis.disclosure()],
                               "amount": [amount for _, amount in analysis.disclosure()]})
    last = xc.write_frame(ws, disclosure, top=note_row + 1, formats={"amount": xc.money_format(currency)},
                          labels={"line": "reconciliation of the obligation",
                                  "amount": fmt.money_label("amount", currency)},
                          table="ObligationReconciliation")
    if analysis.experience_split:
        xc.note(ws, last + 2, "The experience line by what happened to the members: each group's value now (previous "
                "basis, current date) less its expected value now; the lines add up to the experience line:")
        split = pl.DataFrame({"line": [x.label for x in analysis.experience_split],
                              "amount": [x.amount for x in analysis.experience_split]})
        xc.write_frame(ws, split, top=last + 3, formats={"amount": xc.money_format(currency)},
                       labels={"line": "experience by movement", "amount": fmt.money_label("amount", currency)},
                       table="ExperienceByMovement")
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, landscape=True, header_row=HEAD)


def exceptions_sheet(ws: Worksheet, result: ValuationResult) -> None:
    exc = result.exceptions
    shown = exc.head(EXCEPTION_ROWS)
    text = "Records left out of the valuation (excluded) or valued with a warning; each kind of problem counted " \
           "on the right."
    if exc.height > shown.height:
        text += f" First {shown.height:,} of {exc.height:,} shown; all are in exceptions.csv."
    if shown.height > PRINT_ROWS:
        text += f" Printing shows the first {PRINT_ROWS} rows."
    _list_sheet(ws, "Exceptions", text)
    reasons = content.exception_reasons(exc)
    xc.write_frame(ws, shown, top=HEAD, formats={"row": xc.COUNT}, labels=EXCEPTION_LABELS, table="Exceptions")
    col = shown.width + 2
    xc.write_frame(ws, reasons, top=HEAD, left=col, formats={"records": xc.COUNT},
                   labels={"severity": "outcome", "reason": "problem", "records": "records"},
                   table="ExceptionReasons")
    if exc.height == 0:
        xc.note(ws, HEAD + 1, "No exceptions: every record was valued without a warning.")
    xc.fit_widths(ws, HEAD)
    for letter in (get_column_letter(shown.width - 1), get_column_letter(col + 1)):  # the problem columns wrap
        ws.column_dimensions[letter].width = 48
    for row in ws.iter_rows(min_row=HEAD + 1, max_row=min(ws.max_row, HEAD + PRINT_ROWS)):
        for cell in row:
            if isinstance(cell.value, str) and len(cell.value) > 48:
                cell.alignment = xc.WRAP
    xc.print_setup(ws, landscape=True, header_row=HEAD,
                   last_row=max(HEAD + reasons.height, min(ws.max_row, HEAD + PRINT_ROWS)), last_col=col + 2)


def members_sheet(ws: Worksheet, result: ValuationResult) -> None:
    m = result.members
    code = fmt.currency_of(result.summary)
    if m.height > SMALL_SCHEME:
        xc.title(ws, "Member results")
        xc.note(ws, 2, f"{m.height:,} members: more than the workbook limit of {SMALL_SCHEME:,}. Per-member "
                "results are in members.parquet in the run folder.")
        ws.column_dimensions["A"].width = 100
        xc.print_setup(ws, last_row=2, last_col=1)
        return
    text = "One row a valued member."
    if m.height > PRINT_ROWS:
        text += f" Printing shows the first {PRINT_ROWS} members; all are here and in the run folder's members files."
    _list_sheet(ws, "Member results", text)
    xc.write_frame(ws, m, top=HEAD, formats=member_formats(code), labels=member_labels(code), table="Members")
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, landscape=True, header_row=HEAD, last_row=min(ws.max_row, HEAD + PRINT_ROWS))


#: The manifest's keys in words.
MANIFEST_WORDS = {"tool": "tool", "tool_version": "tool version", "started_at": "started at",
                  "run_seconds": "run time [seconds]", "ignored_columns": "member file columns not used",
                  "files": "files written"}


def _manifest_rows(manifest: dict[str, Any]) -> list[tuple[str, Any]]:
    rows: list[tuple[str, Any]] = []
    for key, value in manifest.items():
        if key == "inputs" and isinstance(value, dict):
            rows += [(f"SHA-256 of {name}", sha) for name, sha in value.items()]
        elif key == "settings" and isinstance(value, dict):
            rows += [(f"setting: {k.replace('_', ' ')}", v) for k, v in content.flatten(value)]
        else:
            label = MANIFEST_WORDS.get(key, key.replace("_", " "))
            rows += [(label if not k[len(key):] else f"{label}{k[len(key):]}", v)
                     for k, v in content.flatten(value, key)]
    return rows


def manifest_sheet(ws: Worksheet, result: ValuationResult) -> None:
    manifest = {k: v for k, v in result.summary.manifest.to_json().items() if k != "basis"}
    _list_sheet(ws, "Run manifest", "Tool version, input files with their SHA-256, settings and timing. The "
                "basis is on the Basis sheet.")
    _write_pairs(ws, _manifest_rows(manifest), "Manifest", ("item", "value"))
    xc.fit_widths(ws, HEAD)
    xc.print_setup(ws, header_row=HEAD)

