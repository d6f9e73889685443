"""The basis's currency: an ISO 4217 code (``currency = "GBP"``), shown beside every amount.

ISO 4217 (Codes for the representation of currencies): alphabetic codes are three capital letters, e.g.
GBP, EUR, USD, JPY (from memory). A basis without ``currency`` names none, and the amounts are shown
without a code. Rounding money in prose to three significant figures ("about GBP 24.6m") is common
practice in reports for lay readers.
"""

from __future__ import annotations

import shutil
from dataclasses import replace
from pathlib import Path

import pytest
from openpyxl import load_workbook

from tests.test_reports_fixture import make_experience, make_result
from valuation.basis import load_basis
from valuation.errors import BasisError
from valuation.reports import write_workbook
from valuation.reports.format import about_money, currency_of, format_money, money_label
from valuation.reports.html import render_html

ROOT = Path(__file__).resolve().parents[1]
DEMO_BASIS = ROOT / "assumptions" / "demo_basis.toml"


def _basis_with(tmp_path: Path, line: str | None) -> Path:
    """The demo basis (its folder copied: it names files beside it) with its currency line replaced."""
    folder = tmp_path / "assumptions"
    shutil.copytree(DEMO_BASIS.parent, folder)
    path = folder / DEMO_BASIS.name
    lines = path.read_text(encoding="utf-8").splitlines()
    out = [(line if line is not None else None) if x.startswith("currency") else x for x in lines]
    path.write_text("\n".join(x for x in out if x is not None) + "\n", encoding="utf-8")
    return path


def test_the_demo_basis_is_in_pounds_sterling() -> None:
    assert load_basis(DEMO_BASIS).currency == "GBP"


def test_without_currency_the_basis_names_none(tmp_path: Path) -> None:
    assert load_basis(_basis_with(tmp_path, None)).currency is None


@pytest.mark.parametrize("given", ['"gbp"', '"£"', '"GBPX"', '"GB"', '""', "826"])
def test_a_currency_that_is_not_a_code_is_refused(tmp_path: Path, given: str) -> None:
    """Not three capital letters (lower case, a symbol, four or two letters, ISO 4217's numeric code)."""
    with pytest.raises(BasisError) as err:
        load_basis(_basis_with(tmp_path, f"currency = {given}"))
    text = str(err.value)
    assert "currency" in text and "demo_basis.toml" in text
    if given != "826":
        assert "ISO 4217" in text and "three capital letters" in text


@pytest.mark.parametrize("code", ["EUR", "USD", "JPY", "CHF"])
def test_any_three_letter_code_is_taken(tmp_path: Path, code: str) -> None:
    assert load_basis(_basis_with(tmp_path, f'currency = "{code}"')).currency == code


def test_money_formats() -> None:
    assert format_money(358_032_135.25, "GBP") == "GBP 358,032,135"
    assert format_money(358_032_135.25, None) == "358,032,135"
    assert format_money(float("nan"), "GBP") == "n/a"
    assert money_label("Total liability", "GBP") == "Total liability [GBP]"
    assert money_label("Pension", "EUR", per_year=True) == "Pension [EUR p.a.]"
    assert money_label("Total liability", None) == "Total liability"


@pytest.mark.parametrize(("value", "words"), [
    (24_611_809, "GBP 24.6m"), (358_032_135, "GBP 358m"), (1_250_000_000, "GBP 1.25bn"), (904_784, "GBP 905,000"),
    (9_999_999, "GBP 10m"), (1_200_000, "GBP 1.2m"), (512.4, "GBP 512"), (-55_247_104, "GBP -55.2m"),
])
def test_money_in_prose_is_rounded_to_three_figures(value: float, words: str) -> None:
    assert about_money(value, "GBP") == words


def _with_currency(code: str | None):
    result = make_result()
    manifest = result.summary.manifest
    result.summary = replace(result.summary, manifest=replace(manifest, basis={**manifest.basis, "currency": code}))
    return result


def test_the_code_is_read_from_the_run() -> None:
    assert currency_of(_with_currency("EUR").summary) == "EUR"
    assert currency_of(make_result().summary) is None


@pytest.mark.parametrize("code", ["EUR", None])
def test_no_placeholder_is_left_in_the_reports(tmp_path: Path, code: str | None) -> None:
    """"[currency]" appears nowhere: the code where the basis names one, no unit where it names none."""
    result = _with_currency(code)
    page = render_html(result, make_experience())
    assert "[currency]" not in page and "currency p.a." not in page
    assert (f"Amounts in {code}" in page) if code else ("The basis names no currency" in page)
    if code:
        assert f"Liability [{code}]" in page and f"About {code} 508,000" in page  # the total, 508,000
    wb = load_workbook(write_workbook(result, tmp_path / "w.xlsx", experience=make_experience()))
    texts = [c.value for ws in wb.worksheets for row in ws.iter_rows() for c in row if isinstance(c.value, str)]
    assert not [t for t in texts if "[currency" in t or "currency p.a." in t]
    formats = {c.number_format for ws in wb.worksheets for row in ws.iter_rows() for c in row
               if isinstance(c.value, float) and "#,##0" in c.number_format}
    if code:
        assert f"[${code}] #,##0" in formats
    else:
        assert not [f for f in formats if "[$" in f]
