"""Looking at a table file before valuing with it: the description and the chart.

Sources: the fixture files in tests/data/mortality (invented rates, see its README.md) and, where the
test extra is installed, the public table repository's XTbML files (table identities named beside each
check, values as printed in the files).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.xtbml_repository import needs_repository, table_file
from valuation.errors import TableError
from valuation.mortality.inspect import describe_tables, table_chart

DATA = Path(__file__).parent / "data" / "mortality"
PNG = b"\x89PNG\r\n\x1a\n"


def test_describe_select_xtbml_fixture():
    """small_select.xml: identity 9002, select ages 60-62 with durations 1-2, stored per mille."""
    text = describe_tables(DATA / "small_select.xml")
    assert "small_select.xml: XTbML, table identity 9002" in text
    assert "name: Small select test table" in text
    assert "scaling factor: 3 (stored values are divided by 10 to that power)" in text
    assert "select and ultimate: selection ages 60-62, select period 2 years, ultimate ages 60-66" in text
    assert "closes at age 66 (q = 1)" in text
    assert "60  0.006  0.0084  0.0125" in text  # q_[60], q_[60]+1, then q_62 (ultimate)
    assert 'table = "small_select.xml"' in text


def test_describe_csv_with_an_open_column(tmp_path):
    path = tmp_path / "two.csv"
    path.write_text("age,Closed,Open\n60,0.01,0.02\n61,0.02,0.03\n62,1,0.5\n", encoding="utf-8")
    text = describe_tables(path)
    assert "two.csv: CSV, 2 tables (a column each), ages 60-62" in text
    closed, open_ = text.split("\n\n")[1:]
    assert "closes at age 62 (q = 1)" in closed and 'table_name = "Closed"' in closed
    assert "does not close: no closing age: q = 0.5 at the last age 62" in open_
    assert "not as it stands: a basis needs a closing age" in open_
    only = describe_tables(path, "Open")
    assert "'Closed'" not in only and "'Open'" in only
    with pytest.raises(TableError, match="no table named 'X'.*use one of Closed, Open"):
        describe_tables(path, "X")


def test_describe_says_why_a_table_cannot_be_used(tmp_path):
    path = tmp_path / "abridged.xml"
    path.write_text(
        "<XTbML><ContentClassification><TableName>Five-year steps</TableName></ContentClassification><Table>"
        "<MetaData><ScalingFactor>0</ScalingFactor><AxisDef><ScaleType>Age</ScaleType><AxisName>Age</AxisName>"
        "<MinScaleValue>0</MinScaleValue><MaxScaleValue>10</MaxScaleValue><Increment>5</Increment></AxisDef>"
        '</MetaData><Values><Axis><Y t="0">0.01</Y><Y t="5">0.02</Y><Y t="10">1</Y></Axis></Values></Table>'
        "</XTbML>", encoding="utf-8")
    text = describe_tables(path)
    assert "1. 'Five-year steps'" in text and "cannot be used:" in text and "is abridged" in text


@pytest.mark.parametrize("name, table", [("small.csv", "M"), ("small_select.xml", None),
                                         ("small_ultimate.xml", None)])
def test_chart_is_a_png(tmp_path, name, table):
    out = table_chart(DATA / name, table, tmp_path / "chart.png")
    data = out.read_bytes()
    assert data[:8] == PNG and 5_000 < len(data) < 200_000


@needs_repository
def test_describe_rp2014_file_of_three_tables():
    """Identity 3123, RP-2014 Rates-Total Dataset: employee (18-80, open), healthy annuitant (50-120) and
    disabled retiree (18-120) tables; healthy annuitant male q_65 = 0.011013 as printed."""
    text = describe_tables(table_file(3123))
    assert "table identity 3123" in text and "content type: Annuitant Mortality" in text
    assert "provider: Retirement Plans Experience Committee" in text and "reference: Society of Actuaries" in text
    assert "3 tables" in text
    ha = describe_tables(table_file(3123), "RP-2014 Rates-Total Dataset-Healthy Annuitant-Male")
    assert "ultimate by age: ages 50-120" in ha and "65 0.011013" in ha
    assert 'table_name = "RP-2014 Rates-Total Dataset-Healthy Annuitant-Male"' in ha
    assert "does not close: no closing age: q = 0.038811 at the last age 80" in text


@needs_repository
def test_describe_scale_and_period_table(tmp_path):
    """Identity 3135, Scale MP-2014 Male (20-120 x 1951-2030); identity 1501, SSA period rates 1900-2007
    (q(65, 2007) = 0.016723 as printed)."""
    scale = describe_tables(table_file(3135))
    assert "improvement rates by age and calendar year: ages 20-120, years 1951-2030" in scale
    assert 'improvement = { kind = "table", file = "t3135.xml" }' in scale
    period = describe_tables(table_file(1501))
    assert "mortality by age and calendar year (a period table): ages 0-119, years 1900-2007" in period
    assert "0.016723" in period
    for identity in (3135, 1501, 1453):
        assert table_chart(table_file(identity), None, tmp_path / f"{identity}.png").read_bytes()[:8] == PNG
