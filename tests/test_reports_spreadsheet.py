"""The actuary's workbook of the README's demo run, opened in a real spreadsheet application.

LibreOffice Calc (headless, Debian's libreoffice-calc-nogui) opens valuation.xlsx and prints it to PDF
(``soffice --headless --convert-to pdf``, which applies each sheet's page setup: paper size,
orientation, fit to width, print area, repeated rows); poppler's ``pdftotext`` reads the pages back. Page 1
is the Summary sheet and must show the headline as the workbook formats it (``[$GBP] #,##0``: the code,
a space, whole units with thousands separators; ECMA-376 Part 1, 18.8.31, from memory), beside its
label; the whole workbook prints to a few pages, not hundreds (the per-member list prints its first rows).

Skipped, saying what to install, where LibreOffice or poppler-utils are missing (.ci/run installs both).
"""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import pytest

from tests.reports_tools import PDFINFO, PDFTOTEXT, SOFFICE, demo_run, pdf_pages, pdf_text

pytestmark = [
    pytest.mark.skipif(SOFFICE is None, reason="LibreOffice is not installed (apt-get install libreoffice-calc-nogui)"),
    pytest.mark.skipif(PDFINFO is None or PDFTOTEXT is None,
                       reason="pdfinfo/pdftotext are not installed (apt-get install poppler-utils)"),
]

#: Most pages the demo workbook may print to: a page or two a sheet (before: 242).
MAX_PAGES = 30


@pytest.fixture(scope="module")
def printed(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    run = demo_run()
    tmp = tmp_path_factory.mktemp("calc")
    profile = tmp / "profile"  # a profile of its own: no clash with another LibreOffice running
    proc = subprocess.run([str(SOFFICE), f"-env:UserInstallation={profile.as_uri()}", "--headless",
                           "--convert-to", "pdf", "--outdir", str(tmp), str(run / "valuation.xlsx")],
                          capture_output=True, text=True, timeout=300, check=False)
    pdf = tmp / "valuation.pdf"
    assert pdf.exists(), proc.stdout[-2000:] + proc.stderr[-2000:]
    return pdf, run


def test_page_one_shows_the_headline_beside_its_label(printed: tuple[Path, Path]) -> None:
    pdf, run = printed
    summary = json.loads((run / "summary.json").read_text(encoding="utf-8"))
    first = pdf_text(pdf, 1, layout=True)  # a label and its figure on one line
    assert "Valuation summary" in first
    assert f"Total liability [GBP] GBP {round(summary['liability']['total']):,}" in first
    assert f"Records valued {summary['records']['valued']:,}" in first


def test_prints_to_a_few_pages(printed: tuple[Path, Path]) -> None:
    pdf, _ = printed
    assert pdf_pages(pdf) <= MAX_PAGES
