"""The per-table experience in the trustees' HTML and the actuary's workbook: each table's own figures as
the analysis computed them, and none (a dash) for a table whose members have no pension at risk.

The analysis is the hand-checked one of tests/test_experience_by_table.py (pensioners, dependants and
actives, each with its own table; actives have no pension at risk).
"""

from __future__ import annotations

import html
import re
from pathlib import Path

import pytest
from openpyxl import load_workbook

from valuation.reports.excel import write_workbook
from valuation.reports.html import render_html

from .test_experience_by_table import _run
from .test_reports_fixture import make_result

DASH = "\u2014"


def _cells(row_html: str) -> list[str]:
    cells = re.findall(r"<t[dh][^>]*>(.*?)</t[dh]>", row_html, flags=re.S)
    return [html.unescape(re.sub(r"<[^>]+>", "", c)).strip() for c in cells]


def _by_table_rows(page: str) -> list[list[str]]:
    table = re.search(r'<table id="experience-by-table">(.*?)</table>', page, flags=re.S)
    assert table, "the per-table experience is on the page"
    return [_cells(r) for r in re.findall(r"<tr[^>]*>(.*?)</tr>", table.group(1), flags=re.S)]


def test_html_shows_each_tables_own_figures_and_a_dash_for_actives() -> None:
    experience = _run()
    rows = _by_table_rows(render_html(make_result(), experience))
    header, body = rows[0], {(r[0], r[1]): r for r in rows[1:]}
    assert header == ["Members", "Sex", "Now", "Actual", "Expected", "A/E", "Range", "Credibility",
                      "Points to"]
    pens = next(t for t in experience.implied["by_table"] if t["table"] == "mortality.pensioner.M")
    # formatted independently of the report's helpers: whole percent, as the page prints them
    assert body[("Pensioners", "Men")][2:] == [
        "100%", f"{pens['actual_amounts']:,.0f}", f"{pens['expected_amounts']:,.0f}",
        f"{100 * pens['ae_amounts']:.0f}%",
        f"{100 * pens['ae_amounts_lower']:.0f}% to {100 * pens['ae_amounts_upper']:.0f}%",
        f"{100 * pens['credibility']:.0f}%", f"{pens['implied_percentage']:.0f}%",
    ]
    active = body[("Active members", "Men")]
    assert active[2] == "90%" and active[3:5] == ["0", "0"]
    assert active[5:] == [DASH] * 4
    assert body[("All members", "All")][2] == DASH  # the tables' current percentages differ
    text = html.unescape(re.sub(r"<[^>]+>", " ", render_html(make_result(), experience)))
    assert "No pension is at risk for Active members, men" in " ".join(text.split())


def test_workbook_shows_each_tables_own_figures_and_a_dash_for_actives(tmp_path: Path) -> None:
    experience = _run()
    ws = load_workbook(write_workbook(make_result(), tmp_path / "w.xlsx", experience=experience))["Experience"]
    header_row = next(c.row for c in ws["A"] if c.value == "members")
    header = [c.value for c in ws[header_row] if c.value is not None]
    assert header[:3] == ["members", "sex", "current percentage of table"]
    for label in ("A/E by amounts", "A/E lower", "A/E upper", "credibility factor", "implied percentage of table"):
        assert label in header
    rows = {}
    r = header_row + 1
    while ws.cell(row=r, column=1).value:
        rows[(ws.cell(row=r, column=1).value, ws.cell(row=r, column=2).value)] = {
            h: ws.cell(row=r, column=j + 1).value for j, h in enumerate(header)
        }
        r += 1
    pens = next(t for t in experience.implied["by_table"] if t["table"] == "mortality.pensioner.M")
    got = rows[("Pensioners", "Men")]
    assert got["A/E by amounts"] == pytest.approx(pens["ae_amounts"], rel=1e-12)
    assert got["credibility factor"] == pytest.approx(pens["credibility"], rel=1e-12)
    # the analysis holds percent; the sheet holds fractions (its one percent format)
    assert got["implied percentage of table"] == pytest.approx(pens["implied_percentage"] / 100, rel=1e-12)
    active = rows[("Active members", "Men")]
    for label in ("A/E by amounts", "A/E lower", "A/E upper", "credibility factor", "implied percentage of table"):
        assert active[label] == DASH, label
    assert "no pension at risk" in active["note"]
    assert ("All members", "All") in rows
