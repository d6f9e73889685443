"""Table readers: CSV, XLSX and XTbML give the same table; select tables; validation messages.

Sources: the file layouts follow the SOA's XTbML standard (root XTbML -> ContentClassification ->
Table with MetaData/AxisDef and Values of nested Axis / Y elements) and the common practice of one row
per age, one column per table for spreadsheets. Fixture rates are invented (tests/data/mortality/README.md).
Select-and-ultimate semantics (q_[x]+d, then q_{x+d}) follow [DHW] Dickson, Hardy & Waters, *Actuarial
Mathematics for Life Contingent Risks*, 2nd ed., section 3.7.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import openpyxl
import pytest

from valuation.errors import TableError
from valuation.mortality import load_table, load_tables

DATA = Path(__file__).parent / "data" / "mortality"
# The rates typed into small.csv (column M), by hand.
SMALL_M = [0.0100, 0.0112, 0.0125, 0.0140, 0.0157, 0.0176, 1.0]
SMALL_F = [0.0070, 0.0078, 0.0087, 0.0098, 0.0110, 0.0123, 1.0]


def write_xlsx(path: Path, rows: list[list]) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    for r in rows:
        ws.append(r)
    wb.save(path)
    return path


def write_csv(path: Path, text: str) -> Path:
    path.write_text(text.strip() + "\n", encoding="utf-8")
    return path


def test_same_table_from_csv_xlsx_and_xtbml(tmp_path):
    csv_tables = load_tables(DATA / "small.csv")
    assert list(csv_tables) == ["M", "F"]
    np.testing.assert_array_equal(csv_tables["M"].qx, SMALL_M)
    np.testing.assert_array_equal(csv_tables["F"].qx, SMALL_F)

    rows = [["age", "M", "F"]] + [[60 + k, m, f] for k, (m, f) in enumerate(zip(SMALL_M, SMALL_F, strict=True))]
    xlsx_tables = load_tables(write_xlsx(tmp_path / "small.xlsx", rows))
    xml = load_table(DATA / "small_ultimate.xml")
    for name in ("M", "F"):
        np.testing.assert_array_equal(xlsx_tables[name].qx, csv_tables[name].qx)
        assert xlsx_tables[name].min_age == 60
    np.testing.assert_array_equal(xml.qx, csv_tables["M"].qx)
    assert (xml.name, xml.min_age, xml.max_age) == ("Small test table M", 60, 66)
    assert "9001" in xml.source


def test_select_and_ultimate_xtbml():
    """Select rates q_[x]+d for ages 60-62, durations 1-2 (d = 0, 1), stored per mille (ScalingFactor 3)."""
    t = load_table(DATA / "small_select.xml")
    np.testing.assert_allclose(t.qx, SMALL_M, rtol=1e-12)
    assert t.select_period == 2
    np.testing.assert_allclose(t.select_qx[:3], [[0.0060, 0.0084], [0.0067, 0.0094], [0.0075, 0.0105]],
                               rtol=1e-12)
    # Selection ages without select rates follow the ultimate q_{x+d} (stated rule in readers.py).
    np.testing.assert_allclose(t.select_qx[3], [0.0140, 0.0157], rtol=1e-12)
    # [DHW] 3.7: after the select period the ultimate rate at the attained age applies.
    np.testing.assert_allclose(t.q_select([60, 60, 60, 61], [0, 1, 2, 3]), [0.0060, 0.0084, 0.0125, 0.0157])


def test_xlsx_sheet_choice(tmp_path):
    wb = openpyxl.Workbook()
    wb.active.append(["ignored"])
    ws = wb.create_sheet("rates")
    for r in [["age", "T"], [0, 0.5], [1, 1.0]]:
        ws.append(r)
    wb.save(tmp_path / "two.xlsx")
    np.testing.assert_array_equal(load_table(tmp_path / "two.xlsx", sheet="rates").qx, [0.5, 1.0])
    with pytest.raises(TableError, match="no sheet named 'nope'"):
        load_tables(tmp_path / "two.xlsx", sheet="nope")


@pytest.mark.parametrize(
    "body, row, age, column, words",
    [
        ("age,M\n60,0.01\n61,\n62,1", 3, 61, "M", "missing value"),
        ("age,M\n60,0.01\n61,abc\n62,1", 3, 61, "M", "non-numeric value 'abc'"),
        ("age,M\n60,0.01\n61,1.5\n62,1", 3, 61, "M", "outside [0, 1]"),
        ("age,M\n60,0.01\n61,-0.1\n62,1", 3, 61, "M", "outside [0, 1]"),
        ("age,M\n60,0.01\n61,0.02\n62,0.5", 4, 62, "M", "no closing age"),
        ("age,M\n60,0.01\n62,0.02\n63,1", 3, 62, "age", "contiguous"),
        ("age,M\n60,0.01\n60,0.02\n61,1", 3, 60, "age", "contiguous"),
        ("age,M\n60,0.01\n60.5,0.02\n61,1", 3, "60.5", "age", "not a whole number"),
    ],
)
def test_csv_validation_messages_name_file_row_age_and_column(tmp_path, body, row, age, column, words):
    path = write_csv(tmp_path / "bad.csv", body)
    with pytest.raises(TableError) as e:
        load_tables(path)
    msg = str(e.value)
    assert "bad.csv" in msg and f"row {row}" in msg and f"column '{column}'" in msg
    assert f"{age}" in msg and words in msg
    assert e.value.row == row and e.value.column == column


def test_xlsx_validation_message(tmp_path):
    path = write_xlsx(tmp_path / "bad.xlsx", [["age", "F"], [70, 0.02], [71, "n/a"], [72, 1]])
    with pytest.raises(TableError, match=r"bad\.xlsx, row 3, column 'F': non-numeric value 'n/a' at age 71"):
        load_tables(path)


def test_closing_rule_set_last_to_one(tmp_path):
    path = write_csv(tmp_path / "open.csv", "age,M\n60,0.01\n61,0.02\n62,0.5")
    t = load_table(path, closing="set_last_to_one", base_year=2019)
    np.testing.assert_array_equal(t.qx, [0.01, 0.02, 1.0])
    assert t.base_year == 2019


def test_table_selection_errors(tmp_path):
    with pytest.raises(TableError, match="holds 2 tables; say which one.*M, F"):
        load_table(DATA / "small.csv")
    with pytest.raises(TableError, match="column 'X': no table named 'X'"):
        load_table(DATA / "small.csv", name="X")
    with pytest.raises(TableError, match="unknown table format '.json'"):
        load_tables(write_csv(tmp_path / "t.json", "{}"))
    with pytest.raises(TableError, match="file not found"):
        load_tables(tmp_path / "missing.csv")


def xtbml_variant(tmp_path: Path, old: str, new: str, src: str = "small_ultimate.xml") -> Path:
    text = (DATA / src).read_text().replace(old, new)
    assert text != (DATA / src).read_text()
    out = tmp_path / "variant.xml"
    out.write_text(text)
    return out


def test_xtbml_rejects_doctype(tmp_path):
    """defusedxml-style protection: no DOCTYPE, so no entity expansion."""
    path = xtbml_variant(tmp_path, "<XTbML>", '<!DOCTYPE x [<!ENTITY a "b">]>\n<XTbML>')
    with pytest.raises(TableError, match="DOCTYPE"):
        load_tables(path)


@pytest.mark.parametrize(
    "old, new, words",
    [
        ('<Y t="63">0.0140</Y>', "", "missing value at age 63"),
        ('<Y t="63">0.0140</Y>', '<Y t="63">x</Y>', "non-numeric value 'x' at Age 63"),
        ('<Y t="63">0.0140</Y>', '<Y t="63">1.4</Y>', "q = 1.4 at age 63 is outside [0, 1]"),
        ('<Y t="66">1</Y>', '<Y t="66">0.3</Y>', "no closing age"),
        ('<Y t="66">1</Y>', '<Y t="66">1</Y><Y t="67">1</Y>', "Age 67 is outside"),
        ("XTbML>", "Other>", "expected 'XTbML'"),
    ],
)
def test_xtbml_validation_messages(tmp_path, old, new, words):
    path = xtbml_variant(tmp_path, old, new)
    with pytest.raises(TableError) as e:
        load_tables(path)
    assert "variant.xml" in str(e.value) and words in str(e.value)


def test_xtbml_y_without_t_uses_axis_minimum(tmp_path):
    """Y elements without a t attribute are placed from MinScaleValue with Increment 1."""
    text = (DATA / "small_ultimate.xml").read_text()
    for a in range(60, 67):
        text = text.replace(f' t="{a}"', "")
    (tmp_path / "no_t.xml").write_text(text)
    np.testing.assert_array_equal(load_table(tmp_path / "no_t.xml").qx, SMALL_M)


def test_ultimate_must_start_by_first_selection_age_plus_select_period(tmp_path):
    """Standard layout ([DHW] 3.7): a life selected at x joins the ultimate table at x + select period, so
    select ages 57-59 with a 2-year period need ultimate rates from 59; the ultimate table starts at 60."""
    text = (DATA / "small_select.xml").read_text()
    text = (text.replace('<Axis t="60">', '<Axis t="57">').replace('<Axis t="61">', '<Axis t="58">')
            .replace('<Axis t="62">', '<Axis t="59">').replace(
        "<MinScaleValue>60</MinScaleValue>\n        <MaxScaleValue>62</MaxScaleValue>",
        "<MinScaleValue>57</MinScaleValue>\n        <MaxScaleValue>59</MaxScaleValue>"))
    path = tmp_path / "sel.xml"
    path.write_text(text)
    with pytest.raises(TableError, match="needs ultimate rates from age 59 .* ultimate table starts at age 60"):
        load_tables(path)


def test_csv_copy_keeps_provenance(tmp_path):
    shutil.copy(DATA / "small.csv", tmp_path / "copy.csv")
    t = load_table(tmp_path / "copy.csv", name="F")
    assert t.source == "CSV file copy.csv, column 'F'"


# ---------------------------------------------------------------- messages written for people


def test_no_closing_age_fix_is_in_terms_of_the_file(tmp_path):
    """The fix names the file's last age, not a Python argument of the reader."""
    path = write_csv(tmp_path / "t.csv", "age,M\n60,0.01\n61,0.02\n62,0.5")
    with pytest.raises(TableError) as e:
        load_tables(path)
    assert e.value.fix.startswith("add a row after age 62 for the closing age, with q = 1 (no life survives it)")
    assert 'closing = "at_last_age"' in e.value.fix  # the basis key, in TOML as a user writes it
    assert "set_last_to_one" not in str(e.value) and "closing=" not in str(e.value)


def test_grid_file_problems_say_where(tmp_path):
    """RFC 4180 layout: every row has the header's number of values; the file is UTF-8 (RFC 3629), so a
    Latin-1 byte (0xE9, e-acute in ISO 8859-1) is named with its line."""
    path = write_csv(tmp_path / "t.csv", "age,M,F\n60,0.01,0.02\n61,0.02,0.03,0.9\n62,1,1")
    with pytest.raises(TableError) as e:
        load_tables(path)
    assert (e.value.row, e.value.reason) == (3, "row 3 has 4 values but the header names 3 columns")
    path = write_csv(tmp_path / "d.csv", "age,M,M\n60,0.01,0.02\n61,1,1")
    with pytest.raises(TableError) as e:
        load_tables(path)
    assert e.value.reason == "the header row names 'M' twice (columns 2 and 3)" and "['M']" not in str(e.value)
    (tmp_path / "l.csv").write_bytes("age,M\n60,0.01\n61,1 \xe9\n".encode("latin-1"))
    with pytest.raises(TableError, match="line 3 holds the byte 0xE9"):
        load_tables(tmp_path / "l.csv")
    (tmp_path / "u.csv").write_bytes("age,M\n60,0.01\n61,1\n".encode("utf-16"))
    with pytest.raises(TableError, match="the file is UTF-16 text, not UTF-8"):
        load_tables(tmp_path / "u.csv")
    (tmp_path / "x.xlsx").write_bytes(b"not a workbook")
    with pytest.raises(TableError) as e:
        load_tables(tmp_path / "x.xlsx")
    assert e.value.reason.startswith("cannot be read as an XLSX workbook (it may be damaged")
    assert "zip" not in str(e.value).lower()
