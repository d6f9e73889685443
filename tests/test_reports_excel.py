"""The actuary's workbook, opened back with openpyxl.

Most checks use a real run of the demo scheme (tests.test_reports_fixture.real_run) written through the
engine's own run-folder writer, so the workbook and summary.json come from the same run. Sources: the results contract (valuation.engine.results.ValuationResult and summary.json, written by
valuation.manifest.dump_json); ECMA-376 Part 1 (Office Open XML SpreadsheetML): a cell formula is stored
in an ``<f>`` element and an inline string cell has ``t="inlineStr"`` (from memory: section 18.3.1.40 for
``f``, 18.18.11 for the cell types); OWASP "CSV Injection" for the formula probes (=, +, -, @).
Number formats: ECMA-376 Part 1, 18.8.30 numFmt (from memory): a ``%`` in a format code multiplies the
stored value by 100 for display, so a cell shown as a percentage holds a fraction; dates are stored as
serial day numbers (18.17.4.1, 1900 date system, from memory: serial = days since 1899-12-30 for dates
after 1900-02-28) and read as dates only through a date format code.
"""

from __future__ import annotations

import json
import math
import re
import zipfile
from datetime import date, datetime
from pathlib import Path

import polars as pl
import pytest
from openpyxl import load_workbook

from tests.test_reports_fixture import (
    FORMULA_PROBES,
    make_empty_result,
    make_experience,
    make_result,
    real_run,
)
from valuation.engine import write as engine_write
from valuation.pipeline import write_run
from valuation.reports import excel_sheets, write_workbook
from valuation.reports.excel import SHEETS


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    from datetime import date

    from valuation.basis import load_basis
    from valuation.movements import membership_movements

    result, experience = real_run()
    root = Path(__file__).resolve().parents[1]
    moved = membership_movements(load_basis(root / "assumptions" / "demo_basis.toml"),
                                 root / "member_data_demo" / "members_start.csv", root / "member_data_demo" / "members.csv",
                                 period_start=date(2022, 3, 31), period_end=date(2025, 3, 31),
                                 deaths_path=root / "member_data_demo" / "deaths.csv",
                                 exits_path=root / "member_data_demo" / "exits.csv").result

    from valuation.pipeline import change

    analysis = change(root / "assumptions" / "demo_basis_2022.toml", root / "member_data_demo" / "members_start.csv",
                      root / "assumptions" / "demo_basis.toml", root / "member_data_demo" / "members.csv").analysis

    def workbook(res, folder: Path) -> None:
        write_workbook(res, folder / "valuation.xlsx", experience=experience, movements=moved, analysis=analysis)

    return write_run(result, tmp_path_factory.mktemp("xlsx") / "run", extra=[workbook])


@pytest.fixture(scope="module")
def book(run_folder: Path) -> tuple[Path, object]:
    return run_folder / "valuation.xlsx", real_run()[0]


def _find(ws, label: str, column: int = 2):
    """The cell in ``column`` (B by default) of the row whose column A holds ``label``."""
    for row in ws.iter_rows(min_col=1, max_col=column):
        if row[0].value == label:
            return row[column - 1]
    raise AssertionError(f"{label!r} not on sheet {ws.title}")


#: The demo basis's currency (assumptions/demo_basis.toml: currency = "GBP") as a number-format element:
#: ``[$GBP]`` shows the text GBP before the figure (ECMA-376 Part 1, 18.8.31, from memory).
GBP_MONEY = "[$GBP] #,##0"


def test_all_sheets_present_in_order(book) -> None:
    path, _ = book
    assert load_workbook(path).sheetnames == list(SHEETS)


def test_experience_sheet_only_when_analysis_run(tmp_path: Path) -> None:
    path = write_workbook(make_result(), tmp_path / "v.xlsx")
    assert load_workbook(path).sheetnames == [s for s in SHEETS if s not in ("Experience", "Movements", "Change")]


def test_change_sheet_lines_add_up(book) -> None:
    """The Change sheet: every line of the analysis of change with its amount; opening + the items =
    closing (the lines of a reconciliation of the obligation, IAS 19 paras 140-141)."""
    path, _ = book
    ws = load_workbook(path)["Change"]
    rows = [r for r in ws.iter_rows(values_only=True) if r and r[0] is not None]
    cut = next(i for i, r in enumerate(rows) if str(r[0]).startswith("The same lines"))
    steps = {r[0]: r[1] for r in rows[:cut] if isinstance(r[1], float)}
    end = next((i for i, r in enumerate(rows) if str(r[0]).startswith("The experience line by")), len(rows))
    disclosure = [r[1] for r in rows[cut:end] if isinstance(r[1], float)]
    by_movement = [r[1] for r in rows[end:] if isinstance(r[1], float)]
    assert sum(by_movement) == pytest.approx(steps["experience (membership and data against expected)"], rel=1e-9)
    items = [v for k, v in steps.items() if k not in ("opening liability", "expected closing liability",
                                                      "closing liability")]
    assert steps["opening liability"] + sum(items) == pytest.approx(steps["closing liability"], rel=1e-9)
    assert sum(disclosure[:-1]) == pytest.approx(disclosure[-1], rel=1e-9)  # the note's lines reconcile too


def test_movements_sheet_balances(book) -> None:
    """The Movements sheet of the demo run: start + each movement = end on every status row (the
    reconciliation of membership, common practice), and the total row is the extracts' record counts."""
    path, _ = book
    ws = load_workbook(path)["Movements"]
    rows = [r for r in ws.iter_rows(values_only=True) if r and r[0] in ("pensioner", "dependant", "deferred",
                                                                        "active", "total")]
    assert len(rows) == 5
    for row in rows:
        numbers = [v for v in row[1:] if isinstance(v, int | float)]
        assert numbers[0] + sum(numbers[1:-1]) == numbers[-1]
    assert rows[-1][1] == 3000 and [v for v in rows[-1] if isinstance(v, int)][-1] == 2869


# openpyxl stores numbers with 16 significant digits (openpyxl.compat.strings.safe_string, "%.16g"); Excel
# itself keeps 15 (Microsoft, "Excel specifications and limits": number precision 15 digits).
STORED = 1e-15


def test_headline_equals_summary_json(book, run_folder: Path) -> None:
    """The headline figures in the workbook are the numbers in the same run's summary.json."""
    path, _ = book
    summary = json.loads((run_folder / "summary.json").read_text(encoding="utf-8"))
    wb = load_workbook(path)
    cell = _find(wb["Summary"], "Total liability [GBP]")
    assert cell.value == pytest.approx(summary["liability"]["total"], rel=STORED)
    assert cell.number_format == GBP_MONEY
    dest = next(iter(wb.defined_names["TotalLiability"].destinations))
    assert wb[dest[0]][dest[1].replace("$", "")].value == cell.value
    assert _find(wb["Summary"], "Records read").value == summary["records"]["read"]
    assert _find(wb["Summary"], "Records valued").value == summary["records"]["valued"]
    assert _find(wb["Summary"], "Records excluded").value == summary["records"]["excluded"]
    sedr = _find(wb["Summary"], "Single equivalent discount rate [p.a.]")
    assert sedr.value == pytest.approx(summary["single_equivalent_discount_rate"], rel=STORED)
    assert sedr.number_format == "0.00%"
    for status, value in summary["liability"]["by_status"].items():
        label = {"pensioner": "Pensioners", "dependant": "Dependants", "deferred": "Deferred members",
                 "active": "Active members"}[status]
        assert _find(wb["Summary"], f"  {label}").value == pytest.approx(value, rel=STORED, abs=1e-9)


# members_dirty.csv holds =1+1 as a member id and these values in rows the checks reject.
DIRTY_VALUES = ['=HYPERLINK("x")', "-250.00", "-1"]


@pytest.mark.parametrize(("sheet", "column", "probes"),
                         [("Members", "member id", FORMULA_PROBES), ("Exceptions", "value as read", DIRTY_VALUES)])
def test_formula_like_member_text_stays_literal(book, sheet: str, column: str, probes: list[str]) -> None:
    """OWASP CSV-injection probes from member data come back as the same literal strings, not formulas."""
    path, _ = book
    ws = load_workbook(path)[sheet]
    header = [c.value for c in ws[excel_sheets.HEAD]]
    col = header.index(column) + 1
    found = {}
    for row in range(excel_sheets.HEAD + 1, ws.max_row + 1):
        cell = ws.cell(row=row, column=col)
        if cell.value in probes:
            found[cell.value] = cell
    assert set(found) == set(probes)
    for value, cell in found.items():
        assert cell.data_type == "s" and cell.data_type != "f", value
        assert cell.quotePrefix, value


def test_no_formula_element_anywhere(book) -> None:
    """ECMA-376: formulas are <f> elements; the workbook holds none, and the probes are inline strings."""
    path, _ = book
    with zipfile.ZipFile(path) as z:
        sheets = [n for n in z.namelist() if n.startswith("xl/worksheets/sheet")]
        xml = "".join(z.read(n).decode("utf-8") for n in sheets)
    assert "<f>" not in xml and "<f " not in xml
    assert 't="inlineStr"><is><t>=1+1</t></is>' in xml


def test_basis_sheet_is_the_basis_as_given_and_as_used(book) -> None:
    """Values of assumptions/demo_basis.toml, flattened to dotted keys: column B as written in the file
    (``accrual_rate = "1/60"`` stays 1/60), column C as the valuation used them (defaults filled in)."""
    path, _ = book
    ws = load_workbook(path)["Basis"]
    assert [c.value for c in ws[excel_sheets.HEAD]][:3] == [
        "setting (key in the basis file)", "as given in the basis file", "as used"]
    assert _find(ws, "discount.rate").value == 0.048
    assert _find(ws, "benefits.accrual_rate").value == "1/60"
    assert _find(ws, "benefits.accrual_rate", 3).value == pytest.approx(1 / 60, rel=1e-15)
    assert _find(ws, "mortality.pensioner.M.percentage").value == 1.05
    assert _find(ws, "mortality.default.M.improvement.initial_ages").value == "40, 60, 80, 100"
    assert _find(ws, "sensitivities[0].name").value == "Discount rate +0.5% p.a."
    assert _find(ws, "mapping.columns.Ref No").value == "member_id"
    assert _find(ws, "currency").value == "GBP"
    assert _find(ws, "discount.extrapolation").value is None  # not in the file: its default was used
    assert _find(ws, "discount.extrapolation", 3).value == "flat_spot"
    day = _find(ws, "valuation_date")
    assert day.is_date and day.number_format == "yyyy-mm-dd" and day.value == datetime(2025, 3, 31)
    rate = _find(ws, "discount.rate", 3)
    assert rate.number_format == "0.00%"  # a rate stored as a fraction, shown as % (ECMA-376 18.8.30)


def test_basis_sheet_keeps_formula_like_basis_text(tmp_path: Path) -> None:
    result = make_result()
    ws = load_workbook(write_workbook(result, tmp_path / "b.xlsx"))["Basis"]
    cell = _find(ws, "name", 3)  # no basis file to read again: only the values as used
    assert cell.value == result.summary.manifest.basis["name"] and cell.data_type == "s"
    assert _find(ws, "sensitivities[0].name", 3).value == "+0.5%"


def test_lists_are_tables_with_frozen_headers_and_formats(book) -> None:
    path, result = book
    wb = load_workbook(path)
    for sheet, table in [("Liabilities", "LiabilityCells"), ("Cash flows", "CashFlows"),
                         ("Sensitivities", "Sensitivities"), ("Exceptions", "Exceptions"), ("Members", "Members")]:
        ws = wb[sheet]
        assert ws.freeze_panes == "A4", sheet
        assert table in ws.tables, sheet
    ws = wb["Members"]
    header = [c.value for c in ws[excel_sheets.HEAD]]
    row = excel_sheets.HEAD + 1
    assert ws.cell(row=row, column=header.index("liability [GBP]") + 1).number_format == GBP_MONEY
    assert ws.cell(row=row, column=header.index("annuity factor") + 1).number_format == "0.0000"
    assert ws.cell(row=row, column=header.index("liability [GBP]") + 1).value == pytest.approx(
        result.members["liability"][0], rel=STORED)
    assert ws.column_dimensions["A"].width >= 8


def test_sensitivity_change_is_a_fraction_shown_as_percent(book, run_folder: Path) -> None:
    """summary.json holds change_pct in percent; the sheet stores change_pct / 100 with a % format (ECMA-376
    18.8.30, from memory), under a header that says it is a percentage of the base liability. The change is
    also liability / total - 1 (the definition of a relative change)."""
    path, _ = book
    summary = json.loads((run_folder / "summary.json").read_text(encoding="utf-8"))
    ws = load_workbook(path)["Sensitivities"]
    header = [c.value for c in ws[excel_sheets.HEAD]]
    label = next(h for h in header if h.startswith("change in liability"))
    assert "%" in label and "base liability" in label
    col, liab = header.index(label) + 1, header.index("liability [GBP]") + 1
    assert len(summary["sensitivities"]) > 1
    for i, sens in enumerate(summary["sensitivities"], start=excel_sheets.HEAD + 1):
        cell = ws.cell(row=i, column=col)
        assert cell.value == pytest.approx(sens["change_pct"] / 100.0, rel=1e-12), sens["name"]
        assert cell.number_format == "0.0%"
        assert cell.value == pytest.approx(ws.cell(row=i, column=liab).value / summary["liability"]["total"] - 1,
                                           rel=1e-9)


def test_charts_on_cashflow_and_experience_sheets(book) -> None:
    path, _ = book
    wb = load_workbook(path)
    assert len(wb["Cash flows"]._charts) == 1
    assert len(wb["Experience"]._charts) == 1


def test_large_scheme_points_to_parquet(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Above the engine's SMALL_SCHEME the per-member sheet only points to members.parquet."""
    assert excel_sheets.SMALL_SCHEME == engine_write.SMALL_SCHEME
    monkeypatch.setattr(excel_sheets, "SMALL_SCHEME", 3)
    ws = load_workbook(write_workbook(make_result(), tmp_path / "big.xlsx"))["Members"]
    texts = [c.value for row in ws.iter_rows() for c in row if isinstance(c.value, str)]
    assert any("members.parquet" in t for t in texts)
    assert ws.max_row <= 3


def test_awkward_values_do_not_break_the_file(tmp_path: Path) -> None:
    """Control characters (not allowed in XML 1.0) and NaN/inf are written as safe values."""
    result = make_result()
    result.members = result.members.with_columns(
        pl.Series("member_id", ["bell\x07", "tab\tok", "M3", "M4", "M5", "M6"]),
        pl.Series("annuity_factor", [math.nan, math.inf, 1.0, 2.0, 3.0, 4.0]),
    )
    ws = load_workbook(write_workbook(result, tmp_path / "odd.xlsx"))["Members"]
    row = excel_sheets.HEAD + 1
    header = [c.value for c in ws[excel_sheets.HEAD]]
    assert ws.cell(row=row, column=1).value == "bell\ufffd"
    assert ws.cell(row=row + 1, column=1).value == "tab\tok"
    assert ws.cell(row=row, column=header.index("annuity factor") + 1).value is None


def test_empty_result_gives_a_valid_workbook(tmp_path: Path) -> None:
    """Nothing valued: lists have a header and no Excel table (a table needs a data row); NaN is empty."""
    wb = load_workbook(write_workbook(make_empty_result(), tmp_path / "empty.xlsx"))
    assert wb["Members"].tables == {} and wb["Members"].max_row == excel_sheets.HEAD
    assert _find(wb["Summary"], "Single equivalent discount rate [p.a.]").value is None
    assert len(wb["Cash flows"]._charts) == 0


def _serial(day: date) -> int:
    """Excel 1900-system serial of a date after 1900-02-28 (ECMA-376 18.17.4.1, from memory)."""
    return (day - date(1899, 12, 30)).days


def _cell_xml(path: Path, sheet: str, ref: str) -> str:
    wb = load_workbook(path)
    index = wb.sheetnames.index(sheet) + 1
    with zipfile.ZipFile(path) as z:
        xml = z.read(f"xl/worksheets/sheet{index}.xml").decode("utf-8")
    match = re.search(rf'<c r="{ref}"[^>]*>.*?</c>', xml)
    assert match, ref
    return match.group(0)


def test_dates_are_date_cells(tmp_path: Path) -> None:
    """The valuation date (Summary, Basis) and the experience period are numeric date serials with a date
    format, not text (ECMA-376: a date is a number shown through a date format code)."""
    result = make_result()
    experience = make_experience()
    path = write_workbook(result, tmp_path / "dates.xlsx", experience=experience)
    wb = load_workbook(path)
    expected = result.summary.valuation_date
    for sheet, label, day in [("Summary", "Valuation date", expected),
                              ("Experience", "Period start", experience.settings.period_start),
                              ("Experience", "Period end", experience.settings.period_end)]:
        cell = _find(wb[sheet], label)
        assert cell.is_date and cell.number_format == "yyyy-mm-dd", (sheet, label)
        assert cell.value == datetime(day.year, day.month, day.day), (sheet, label)
        xml = _cell_xml(path, sheet, cell.coordinate)
        assert 't="s"' not in xml and "inlineStr" not in xml, xml
        assert f"<v>{_serial(day)}</v>" in xml, xml
    assert _serial(date(2025, 3, 31)) == 45747  # from memory: 2025-01-01 is serial 45658, plus 89 days


def test_manifest_start_time_stays_text(book) -> None:
    path, result = book
    cell = _find(load_workbook(path)["Manifest"], "started at")
    assert cell.data_type == "s" and cell.value == result.summary.manifest.started_at


def _percent_cells(ws):
    return [c for row in ws.iter_rows() for c in row if isinstance(c.value, (int, float)) and "%" in c.number_format]


def test_experience_percentages_are_fractions_with_one_format(tmp_path: Path) -> None:
    """Implied percentages (in percent in the analysis) are stored / 100; A/E ratios as they are; every %
    cell on the sheet has the same format (ECMA-376 18.8.30, from memory: % multiplies by 100)."""
    experience = make_experience()
    implied = experience.implied
    ws = load_workbook(write_workbook(make_result(), tmp_path / "exp.xlsx", experience=experience))["Experience"]
    assert _find(ws, "Implied percentage of table").value == pytest.approx(implied["implied_percentage"] / 100)
    assert _find(ws, "A/E by amounts (weighted by pension)").value == pytest.approx(implied["multiplier"])
    assert {c.number_format for c in _percent_cells(ws)} == {"0.0%"}
    labels = [c.value for c in ws["A"] if isinstance(c.value, str)]
    assert not [t for t in labels if "[%]" in t]
    # A/E = actual / expected (Benjamin & Pollard, The Analysis of Mortality, ch. on comparing with a table).
    header_row = next(c.row for c in ws["A"] if c.value == "grouped by")
    header = [c.value for c in ws[header_row]]
    row = header_row + 1
    actual = ws.cell(row=row, column=header.index("actual deaths [lives]") + 1).value
    expected = ws.cell(row=row, column=header.index("expected deaths [lives]") + 1).value
    ae = ws.cell(row=row, column=header.index("A/E lives") + 1).value
    assert ae == pytest.approx(actual / expected, abs=5e-4)  # the fixture's A/E is printed to 3 decimals


def test_experience_change_in_liability_is_a_fraction(tmp_path: Path) -> None:
    """The analysis gives change_pct in percent (100 x (after / before - 1)); the sheet holds the fraction."""
    experience = make_experience()
    before, after = 1_000_000.0, 954_000.0
    experience.implied.update(liability_before=before, liability_after=after,
                              change_pct=100.0 * (after / before - 1.0), reason=None)
    ws = load_workbook(write_workbook(make_result(), tmp_path / "chg.xlsx", experience=experience))["Experience"]
    cell = _find(ws, "Change in liability")
    assert cell.value == pytest.approx(-0.046, rel=1e-12) and cell.number_format == "0.0%"
    assert _find(ws, "Liability on the valuation basis").number_format == "#,##0"  # no currency in the basis


def test_experience_by_table_is_fractions_and_notes_are_plain(book) -> None:
    """Real run (current percentages differ by group): each implied percentage by table is / 100 (the
    analysis, like experience.json, holds percent); all % cells share one format; notes are plain words
    with no JSON keys."""
    path, _ = book
    implied = real_run()[1].implied
    ws = load_workbook(path)["Experience"]
    assert implied["implied_percentage"] is None and implied["by_table"]
    header_row = next(c.row for c in ws["A"] if c.value == "members")
    header = [c.value for c in ws[header_row]]
    first = implied["by_table"][0]
    for key, label in [("current_percentage", "current percentage of table"),
                       ("implied_percentage", "implied percentage of table"), ("lower", "lower"), ("upper", "upper")]:
        value = ws.cell(row=header_row + 1, column=header.index(label) + 1).value
        assert value == pytest.approx(first[key] / 100.0, rel=1e-12), key
    assert {c.number_format for c in _percent_cells(ws)} == {"0.0%"}
    texts = [c.value for row in ws.iter_rows(max_row=header_row) for c in row if isinstance(c.value, str)]
    assert not [t for t in texts if re.search(r"[a-z]_[a-z]", t)]
    assert any("differ by group and sex" in t for t in texts)


def test_figures_sit_beside_their_labels_and_long_text_elsewhere(book) -> None:
    """Summary: labels in A, figures in their own narrow column B; the assumption sentences are wrapped
    in cells that span B and C (merged), so no sentence sets the width of the figures' column."""
    path, _ = book
    ws = load_workbook(path)["Summary"]
    assert ws.column_dimensions["B"].width <= 20
    total = _find(ws, "Total liability [GBP]")
    assert total.column_letter == "B" and isinstance(total.value, float)
    merged = {str(r) for r in ws.merged_cells.ranges}
    start = next(c.row for c in ws["A"] if c.value == "Key assumptions")
    sentences = [ws.cell(row=r, column=2) for r in range(start + 1, ws.max_row + 1) if ws.cell(row=r, column=2).value]
    assert len(sentences) >= 5
    for cell in sentences:
        assert f"B{cell.row}:C{cell.row}" in merged and cell.alignment.wrap_text
        assert ws.row_dimensions[cell.row].height  # spreadsheets do not grow merged wrapped rows themselves


def test_headers_are_plain_words(book) -> None:
    """No header cell of any sheet is a snake_case code (a letter, an underscore, a letter)."""
    path, _ = book
    wb = load_workbook(path)
    seen = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                if cell.fill is not None and cell.fill.fgColor.rgb and str(cell.fill.fgColor.rgb).endswith("2F5D62"):
                    seen += 1
                    assert not re.search(r"[a-z]_[a-z]", str(cell.value)), (ws.title, cell.coordinate, cell.value)
    assert seen > 40


def test_lump_sums_are_not_a_tranche(book) -> None:
    """Liabilities: the lump-sum rows have no tranche, and the totals by tranche are pensions only; the
    lump sums are a benefit (summary.json's by_tranche keeps them under lump_sums)."""
    path, result = book
    ws = load_workbook(path)["Liabilities"]
    header = [c.value for c in ws[excel_sheets.HEAD]]
    tranche, benefit = header.index("tranche") + 1, header.index("benefit") + 1
    rows = range(excel_sheets.HEAD + 1, excel_sheets.HEAD + 1 + result.liabilities.height)
    lumps = [r for r in rows if ws.cell(row=r, column=benefit).value == "lump sums"]
    assert lumps and all(ws.cell(row=r, column=tranche).value is None for r in lumps)
    block = next(c for row in ws.iter_rows() for c in row if c.value == "pensions by tranche")
    names = []
    r = block.row + 1
    while ws.cell(row=r, column=block.column).value:
        names.append(ws.cell(row=r, column=block.column).value)
        r += 1
    assert sorted(names) == ["post2005", "pre2005"]  # the demo basis's [tranches]


def test_every_sheet_has_print_settings(book) -> None:
    """A4, an orientation, fitted to one page wide (any number tall), a print area; list sheets repeat their
    header row; the per-member list prints only its first rows (ECMA-376 pageSetup, from memory)."""
    path, result = book
    wb = load_workbook(path)
    for ws in wb.worksheets:
        assert ws.page_setup.orientation in ("portrait", "landscape"), ws.title
        assert ws.page_setup.fitToWidth == 1 and ws.page_setup.fitToHeight == 0, ws.title
        assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title
        assert ws.print_area, ws.title
    for name in ("Basis", "Liabilities", "Cash flows", "Sensitivities", "Exceptions", "Members", "Manifest"):
        assert wb[name].print_title_rows.replace("$", "") == f"{excel_sheets.HEAD}:{excel_sheets.HEAD}", name
    area = wb["Members"].print_area
    last = int(re.search(r"(\d+)$", area[0] if isinstance(area, list) else area).group(1))
    assert last == excel_sheets.HEAD + min(excel_sheets.PRINT_ROWS, result.members.height)


def test_without_a_currency_money_has_no_code(tmp_path: Path) -> None:
    """A basis without ``currency``: plain ``#,##0`` and labels without a unit."""
    wb = load_workbook(write_workbook(make_result(), tmp_path / "nocode.xlsx"))
    cell = _find(wb["Summary"], "Total liability")
    assert cell.number_format == "#,##0"
    assert _find(wb["Summary"], "Currency").value == "none named in the basis"
