"""The trustees' summary of the README's demo run, printed and read as a person would.

Printed to PDF on A4 by headless Chromium (its ``--print-to-pdf``, which applies the page's CSS Paged Media
rules: ``@page { size: A4 }``), read back with poppler's ``pdfinfo`` and ``pdftotext``, and checked with
axe-core (Deque's accessibility engine, the rules tagged WCAG 2.0, 2.1 and 2.2 levels A and AA, and its best
practices, which include the landmark rules: one ``<main>``, all content inside landmarks) in the same
browser. The limits are the issue's: at most five pages; page 1 carries the headline figures, their
meaning and a short caution; no table is split across pages; no accessibility violation.

Skipped, saying what to install, where Chromium, poppler-utils or axe-core are missing (.ci/run installs
them: the first two from Debian, axe-core from npm into a cache folder outside the repository).
"""

from __future__ import annotations

import json
from html.parser import HTMLParser
from pathlib import Path

import pytest

from tests.reports_tools import (
    CHROMIUM,
    PDFINFO,
    PDFTOTEXT,
    axe_script,
    axe_violations,
    chromium,
    demo_run,
    pdf_pages,
    pdf_text,
)

needs_chromium = pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (apt-get install chromium)")
needs_poppler = pytest.mark.skipif(PDFINFO is None or PDFTOTEXT is None,
                                   reason="pdfinfo/pdftotext are not installed (apt-get install poppler-utils)")

#: Most A4 pages the demo's summary may print to (issue 14, point 6).
MAX_PAGES = 5


@pytest.fixture(scope="module")
def demo() -> Path:
    return demo_run()


@pytest.fixture(scope="module")
def printed(demo: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    if CHROMIUM is None:
        pytest.skip("chromium is not installed (apt-get install chromium)")
    tmp = tmp_path_factory.mktemp("print")
    pdf = tmp / "summary.pdf"
    proc = chromium(tmp, "--no-pdf-header-footer", f"--print-to-pdf={pdf}", (demo / "summary.html").as_uri())
    assert pdf.exists(), proc.stderr[-2000:]
    return pdf


class _Tables(HTMLParser):
    """The first cell's text of the first and the last body row of every table."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: list[list[str]] = []
        self._in_body = False
        self._cell: list[str] | None = None
        self._row_first: str | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        if tag == "tbody":
            self._in_body = True
            self.tables.append([])
        elif tag == "tr" and self._in_body:
            self._row_first = None
        elif tag == "td" and self._in_body and self._row_first is None:
            self._cell = []

    def handle_endtag(self, tag: str) -> None:
        if tag == "tbody":
            self._in_body = False
        elif tag == "td" and self._cell is not None:
            self._row_first = " ".join("".join(self._cell).split())
            self.tables[-1].append(self._row_first)
            self._cell = None

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)


@needs_poppler
def test_prints_on_at_most_five_a4_pages(printed: Path) -> None:
    assert pdf_pages(printed) <= MAX_PAGES


@needs_poppler
def test_page_one_has_the_headline_its_meaning_and_a_caution(printed: Path, demo: Path) -> None:
    """The total as the page formats it (whole units, thousands separated; formatted here independently),
    the obligation beside the accrued-benefit measure, what they mean, and the short caution."""
    summary = json.loads((demo / "summary.json").read_text(encoding="utf-8"))
    first = pdf_text(printed, 1)
    total = summary["liability"]["total"]
    assert f"{round(total):,}" in first
    # the demo basis has currency = "GBP"; the total in words to three significant figures, in millions
    assert f"About GBP {float(f'{total:.3g}') / 1e6:g}m" in first
    act = summary["active_measures"]
    assert f"{round(act['projected_obligation']):,}" in first
    assert f"{round(act['accrued_benefit_obligation']):,}" in first
    assert "projected unit credit" in first and "today's salaries" in first
    assert "Please bear in mind" in first and "not advice" in first
    assert "Liability by member group" in first  # page 1 is not near-empty
    assert "Please bear in mind" in pdf_text(printed, pdf_pages(printed))  # the full cautions at the end


@needs_poppler
def test_no_table_is_split_across_pages(printed: Path, demo: Path) -> None:
    """Every table's first and last body rows are printed on the same page."""
    parser = _Tables()
    parser.feed((demo / "summary.html").read_text(encoding="utf-8"))
    pages = [pdf_text(printed, n) for n in range(1, pdf_pages(printed) + 1)]
    assert len(parser.tables) >= 8
    for rows in parser.tables:
        first, last = rows[0], rows[-1]
        on = [n for n, text in enumerate(pages, start=1) if first in text and last in text]
        assert on, f"table from {first!r} to {last!r} is split across pages"


@needs_chromium
@pytest.mark.skipif(axe_script() is None, reason="axe-core is not installed (npm install axe-core in "
                    "~/.cache/valuation-axe, or set VALUATION_AXE_JS to its axe.min.js; .ci/run does this)")
def test_accessibility_rules_pass(demo: Path, tmp_path: Path) -> None:
    """axe-core: no violation of its WCAG 2 A/AA rules or best practices (text alternatives for the SVG
    charts, landmarks, contrast, table headers, heading order)."""
    violations, passed = axe_violations(demo / "summary.html", tmp_path)
    assert passed > 10  # the rules ran
    assert violations == [], json.dumps(violations, indent=1)
