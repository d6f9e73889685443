"""XTbML layouts as the public table repository distributes them, on small invented files.

Sources: the file structure is the SOA's XTbML standard (root XTbML -> ContentClassification -> Table
with MetaData/AxisDef and Values of nested Axis / Y elements). The layouts are those of the repository's
files (see tests/test_xtbml_published.py for the real files): select-and-ultimate with the ultimate table
starting at the first selection age plus the select period, select periods cut short by empty cells,
the UK 92 series' rows by attained age ("values of q[x-t]+t"), age x calendar year tables, abridged
tables in 5-year age steps. Select-and-ultimate semantics (q_[x]+d for d < select period, then
q_{x+d}) follow [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd
ed., section 3.7; generational projection q(x, y) = q(x, b) prod_{s=b+1..y} (1 - i(x, s)) the SOA
*Mortality Improvement Scale MP-2014 Report* (2014). Every rate here is invented.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from valuation.basis import load_basis
from valuation.errors import BasisError, TableError
from valuation.mortality import (
    AgeImprovement,
    ConstantImprovement,
    MortalityBasis,
    TwoDimensionalScale,
    load_improvement_table,
    load_table,
    load_tables,
)

DATA = Path(__file__).parent / "data" / "mortality"


def axis(name: str, lo: int, hi: int, scale: str | None = None, inc: int = 1) -> str:
    scale = scale or {"Age": "Age", "Duration": "Ordinal Date", "Year": "Ordinal Date"}.get(name, name)
    return (f"<AxisDef><ScaleType>{scale}</ScaleType><AxisName>{name}</AxisName><MinScaleValue>{lo}"
            f"</MinScaleValue><MaxScaleValue>{hi}</MaxScaleValue><Increment>{inc}</Increment></AxisDef>")


def table(axes: list[str], values: dict, desc: str = "", scaling: int = 0) -> str:
    """``values``: {age: q} for one axis, {row: {col: q or None}} for two (None = an empty cell)."""
    def y(t, v):
        return f'<Y t="{t}"/>' if v is None else f'<Y t="{t}">{v!r}</Y>'
    if all(not isinstance(v, dict) for v in values.values()):
        body = "<Axis>" + "".join(y(a, v) for a, v in values.items()) + "</Axis>"
    else:
        body = "".join(f'<Axis t="{r}"><Axis>' + "".join(y(c, v) for c, v in row.items()) + "</Axis></Axis>"
                       for r, row in values.items())
    d = f"<TableDescription>{desc}</TableDescription>" if desc else ""
    return (f"<Table><MetaData><ScalingFactor>{scaling}</ScalingFactor>{d}{''.join(axes)}</MetaData>"
            f"<Values>{body}</Values></Table>")


def write(tmp_path: Path, tables: list[str], name: str = "Test table", content: str = "Annuitant Mortality",
          fname: str = "t.xml") -> Path:
    text = (f'<?xml version="1.0" encoding="utf-8"?><XTbML><ContentClassification><TableIdentity>9100'
            f"</TableIdentity><ContentType>{content}</ContentType><TableName>{name}</TableName>"
            f"</ContentClassification>{''.join(tables)}</XTbML>")
    path = tmp_path / fname
    path.write_text(text, encoding="utf-8")
    return path


def ultimate(lo: int, hi: int, start: float = 0.01, desc: str = "") -> tuple[dict, str]:
    """Invented ultimate rates rising 10 % a year of age, closing at ``hi`` (q = 1)."""
    q = {a: round(start * 1.1 ** (a - lo), 6) for a in range(lo, hi)}
    q[hi] = 1.0
    return q, table([axis("Age", lo, hi)], q, desc)


# --- select and ultimate -----------------------------------------------------------------------------


def test_standard_layout_ultimate_from_first_selection_age_plus_select_period(tmp_path):
    """Select ages 60-62 with a 3-year select period; the ultimate table starts at 63 = 60 + 3.

    [DHW] 3.7: q_[x]+d for d = 0, 1, 2, then the ultimate q_{x+d}: a life selected at 60 joins the
    ultimate table at 63.
    """
    sel = {x: {d: round(0.001 * x + 0.0001 * d, 6) for d in (1, 2, 3)} for x in (60, 61, 62)}
    q, ult = ultimate(63, 70)
    path = write(tmp_path, [table([axis("Age", 60, 62), axis("Duration", 1, 3)], sel), ult])
    t = load_table(path)
    assert (t.min_age, t.max_age, t.select_period, t.select_min_age) == (63, 70, 3, 60)
    # published select cells (duration axis 1-3 = d 0-2)
    assert t.q_select(60, 0) == sel[60][1] and t.q_select(60, 2) == sel[60][3]
    # joins the ultimate table at 60 + 3 = 63, and follows it
    np.testing.assert_array_equal(t.q_select([60, 60, 61, 62], [3, 4, 3, 3]), [q[63], q[64], q[64], q[65]])


def test_select_period_cut_short_by_empty_cells_means_ultimate_from_there(tmp_path):
    """Selection age 62 has rates for durations 1-2 only: from d = 2 it is on the ultimate q_{62+d}."""
    sel = {60: {1: 0.002, 2: 0.003, 3: 0.004}, 61: {1: 0.0021, 2: 0.0031, 3: 0.0041},
           62: {1: 0.0022, 2: 0.0032, 3: None}}
    q, ult = ultimate(63, 70)
    t = load_table(write(tmp_path, [table([axis("Age", 60, 62), axis("Duration", 1, 3)], sel), ult]))
    assert t.q_select(62, 1) == 0.0032
    assert t.q_select(62, 2) == q[64]  # empty cell: ultimate at the attained age 64
    assert t.q_select(61, 2) == 0.0041


def test_empty_cells_at_ages_below_the_table_take_the_rows_first_rate(tmp_path):
    """Rows of young selection ages start empty where the ultimate table does not reach (as in the
    repository's 2001 CSO preferred tables, ultimate from 16); those cells take the row's first rate,
    as ages below a table's first age take its first rate (stated rule in xtbml.py)."""
    sel = {14: {1: None, 2: None, 3: 0.0012}, 15: {1: None, 2: 0.0011, 3: 0.0013}, 16: {1: 0.001, 2: 0.0012, 3: 0.0014}}
    q, ult = ultimate(16, 25)
    t = load_table(write(tmp_path, [table([axis("Age", 14, 16), axis("Duration", 1, 3)], sel), ult]))
    np.testing.assert_array_equal(t.q_select(14, [0, 1, 2, 3]), [0.0012, 0.0012, 0.0012, q[17]])
    np.testing.assert_array_equal(t.q_select(15, [0, 1, 2, 3]), [0.0011, 0.0011, 0.0013, q[18]])


@pytest.mark.parametrize(
    "sel, words",
    [
        ({60: {1: 0.002, 2: None, 3: 0.004}}, "empty cell at age 60, duration 2 between rates of the same row"),
        ({60: {1: None, 2: 0.003, 3: 0.004}}, "empty cell at age 60, duration 1 before the first rate of its "
                                              "row, at attained age 60, which the ultimate table covers"),
    ],
)
def test_empty_cells_inside_a_row_are_refused(tmp_path, sel, words):
    _, ult = ultimate(60, 70)
    path = write(tmp_path, [table([axis("Age", 60, 60), axis("Duration", 1, 3)], sel), ult])
    with pytest.raises(TableError) as e:
        load_tables(path)
    assert "t.xml" in str(e.value) and "table 1 of 2" in str(e.value) and words in str(e.value)


def test_ultimate_starting_after_the_select_period_is_refused(tmp_path):
    sel = {x: {1: 0.002, 2: 0.003} for x in (60, 61)}
    _, ult = ultimate(63, 70)
    path = write(tmp_path, [table([axis("Age", 60, 61), axis("Duration", 1, 2)], sel), ult], name="Gap table")
    with pytest.raises(TableError, match=r"t\.xml: table 1 of 2 \('Gap table'\) needs ultimate rates from age "
                                         r"62 \(selection age 60 with a select period of 2 years\), but the "
                                         r"ultimate table starts at age 63"):
        load_tables(path)


def test_rows_by_attained_age_are_turned_to_selection_ages(tmp_path):
    """The UK 92 series store q_[x-t]+t in the row of attained age x (said in the description, "values of
    q[x-t]+t"); the cell (x, t) belongs to selection age x - t."""
    rows = {60: {1: 0.0030, 2: 0.0040}, 61: {1: 0.0033, 2: 0.0044}, 62: {1: None, 2: 0.0048}}
    q, ult = ultimate(60, 70)
    path = write(tmp_path, [table([axis("Age", 60, 62), axis("Duration", 1, 2)], rows,
                                  desc="AF92 two years select: values of q[x-t]+t"), ult])
    t = load_table(path)
    assert t.q_select(60, 0) == 0.0030 and t.q_select(60, 1) == 0.0044  # q_[60], q_[60]+1 (row 61)
    assert t.q_select(61, 1) == 0.0048  # q_[61]+1 is stored at attained age 62
    assert t.q_select(62, 0) == q[62]  # no q_[62] published: ultimate from selection


def test_one_value_duration_axis_marks_an_ultimate_table(tmp_path):
    """UK layout: the ultimate table carries a duration axis with the single value 3 ("3 and over")."""
    sel = {x: {1: 0.001, 2: 0.002} for x in (17, 18)}
    q, _ = ultimate(19, 25)
    ult = table([axis("Age", 19, 25), axis("Duration", 3, 3, inc=0)], q)
    t = load_table(write(tmp_path, [table([axis("Age", 17, 18), axis("Duration", 1, 2)], sel), ult]))
    assert (t.min_age, t.select_period) == (19, 2) and t.q_select(17, 2) == q[19]


def test_misspelt_duration_axis_is_read_as_duration(tmp_path):
    """"Duation" is how one published file spells it."""
    sel = {60: {1: 0.002, 2: 0.003}}
    q, ult = ultimate(60, 70)
    t = load_table(write(tmp_path, [table([axis("Age", 60, 60), axis("Duation", 1, 2, "Ordinal Date")], sel), ult]))
    assert t.select_period == 2 and t.q_select(60, 1) == 0.003


# --- refusals ------------------------------------------------------------------------------------------


def test_abridged_table_is_refused_saying_why_and_what_to_do(tmp_path):
    q = {a: 0.01 * (a / 50) for a in range(50, 100, 5)}
    path = write(tmp_path, [table([axis("Age", 50, 95, inc=5)], q)], name="Abridged 5-year table")
    with pytest.raises(TableError) as e:
        load_tables(path)
    msg = str(e.value)
    assert msg.startswith(str(path)) and "table 'Abridged 5-year table' is abridged" in msg
    assert "steps of 5 (AxisDef Increment 5)" in msg and "needs a rate at every age" in msg
    assert "yearly ages" in msg and "CSV" in msg and msg.count("fix:") == 1


@pytest.mark.parametrize(
    "axes, words",
    [
        ([axis("Age", 0, 1), axis("Year", 1900, 1901, scale="Age")],
         "axis named 'Year' whose scale type is Age"),
        ([axis("Age", 0, 1), axis("Gender", 1, 2, scale="Unknown")],
         "has axes 'Age' (Age) x 'Gender' (Unknown): supported are age, age x duration (select) and age x "
         "calendar year"),
        ([axis("Age", 0, 1), axis("Year", 0, 1)], "year axis 'Year' running 0..1, which are not calendar years"),
    ],
)
def test_unsupported_axes_are_refused_naming_file_and_table(tmp_path, axes, words):
    path = write(tmp_path, [table(axes, {0: {1900: 0.1}})], name="Odd table")  # refused on its axes
    with pytest.raises(TableError) as e:
        load_tables(path)
    assert str(e.value).startswith(str(path)) and "table 'Odd table'" in str(e.value) and words in str(e.value)


def test_improvement_file_as_a_table_and_mortality_file_as_improvement_are_refused(tmp_path):
    imp = write(tmp_path, [table([axis("Age", 60, 61)], {60: 0.01, 61: 0.01})], content="Projection Scale",
                fname="scale.xml")
    with pytest.raises(TableError, match=r"scale\.xml: the file holds improvement rates \(content type "
                                         r"Projection Scale\), not mortality rates.*kind = \"table\""):
        load_tables(imp)
    _, ult = ultimate(60, 70)
    mort = write(tmp_path, [ult], fname="mort.xml")
    with pytest.raises(TableError, match=r"mort\.xml: the file holds mortality rates"):
        load_improvement_table(mort)


def test_doctype_is_refused_also_in_utf16(tmp_path):
    """Entity expansion is refused whatever the encoding (the protection defusedxml gives)."""
    _, ult = ultimate(60, 70)
    text = write(tmp_path, [ult]).read_text(encoding="utf-8").replace(
        '<?xml version="1.0" encoding="utf-8"?>', '<?xml version="1.0" encoding="utf-16"?><!DOCTYPE x [<!ENTITY a "b">]>')
    path = tmp_path / "u16.xml"
    path.write_bytes(text.encode("utf-16"))
    with pytest.raises(TableError, match="DOCTYPE or ENTITY declaration is refused"):
        load_tables(path)


def test_one_table_of_a_file_can_be_read_when_another_cannot(tmp_path):
    """A file of an employee table that stops at 80 (no closing age) and a retiree table to 120: the
    retiree table is usable on its own by name."""
    emp = table([axis("Age", 18, 80)], {a: 0.001 for a in range(18, 81)}, desc="Employee")
    q, ret = ultimate(50, 120, start=0.0001, desc="Retiree")
    path = write(tmp_path, [emp, ret])
    with pytest.raises(TableError, match="Employee.*no closing age"):
        load_tables(path)
    t = load_table(path, "Retiree")
    assert (t.min_age, t.max_age, t.qx[0]) == (50, 120, q[50])
    with pytest.raises(TableError, match="no table named 'Nope'.*use one of Employee, Retiree"):
        load_table(path, "Nope")


# --- period tables (age x calendar year) ---------------------------------------------------------------

PERIOD = {a: {y: round(0.01 * (1.1 ** (a - 60)) * (0.98 ** (y - 2020)), 6) for y in (2020, 2021, 2022)}
          for a in (60, 61, 62)}


def period_file(tmp_path: Path) -> Path:
    rows = {a: dict(r) for a, r in PERIOD.items()}
    rows[63] = {2020: 1.0, 2021: 1.0, 2022: 1.0}
    return write(tmp_path, [table([axis("Age", 60, 63), axis("Year", 2020, 2022)], rows)],
                 name="Period table", content="Generational Mortality")


def test_period_table_by_calendar_year(tmp_path):
    t = load_table(period_file(tmp_path))
    assert t.years.tolist() == [2020, 2021, 2022] and (t.min_age, t.max_age) == (60, 63)
    np.testing.assert_array_equal(t.qx[:3], [PERIOD[a][2022] for a in (60, 61, 62)])  # the last year
    # stated rules: before the first year the first year's rates, after the last the last year's
    np.testing.assert_array_equal(t.q_in_year([61, 61, 61, 61], [2019, 2020, 2021, 2030]),
                                  [PERIOD[61][2020], PERIOD[61][2020], PERIOD[61][2021], PERIOD[61][2022]])


def test_period_table_in_a_basis_by_year_then_improved_past_the_last_year(tmp_path):
    """Without a base year each calendar year uses its own rates; after 2022, q(x, 2022) (1 - r)^(y - 2022)
    (constant improvement r: the SOA MP-2014 report's generational form)."""
    t = load_table(period_file(tmp_path))
    mb = MortalityBasis(t, improvement=ConstantImprovement(0.02))
    got = mb.q([60, 60, 60, 61], [2020, 2021, 2022, 2025])
    want = [PERIOD[60][2020], PERIOD[60][2021], PERIOD[60][2022], PERIOD[61][2022] * 0.98**3]
    np.testing.assert_allclose(got, want, rtol=1e-14)
    # no improvement: the last year's rates held
    assert MortalityBasis(t).q(60, 2040) == PERIOD[60][2022]
    # a base year: that year's rates, improved from it
    static = MortalityBasis(t, base_year=2021, improvement=ConstantImprovement(0.02))
    np.testing.assert_allclose(static.q([60, 60], [2021, 2023]), [PERIOD[60][2021], PERIOD[60][2021] * 0.98**2],
                               rtol=1e-14)
    with pytest.raises(TableError, match="base year 2019 is outside the years 2020..2022 of the period table"):
        MortalityBasis(t, base_year=2019)


BASIS = """
name = "t"
valuation_date = 2025-03-31
[discount]
rate = 0.05
[inflation]
rate = 0.02
[mortality.default.M]
table = "{table}"
{extra}
[mortality.default.F]
table = "SULT"
"""


def test_period_table_through_the_basis_file(tmp_path):
    period_file(tmp_path)
    b = load_basis(_basis(tmp_path, "t.xml", 'improvement = { kind = "constant", rate = 0.02 }'))
    np.testing.assert_allclose(b.mortality("pensioner", "M").q([60, 61], [2021, 2024]),
                               [PERIOD[60][2021], PERIOD[61][2022] * 0.98**2], rtol=1e-14)
    with pytest.raises(BasisError, match="mortality.default.M.*base year 2030 is outside the years 2020..2022"):
        load_basis(_basis(tmp_path, "t.xml", "base_year = 2030"))


def _basis(tmp_path: Path, table_file: str, extra: str) -> Path:
    p = tmp_path / "basis.toml"
    p.write_text(BASIS.format(table=table_file, extra=extra), encoding="utf-8")
    return p


def test_period_table_missing_a_cell_is_refused(tmp_path):
    rows = {a: dict(r) for a, r in PERIOD.items()}
    rows[61][2021] = None
    path = write(tmp_path, [table([axis("Age", 60, 62), axis("Year", 2020, 2022)], rows)], name="Holey")
    with pytest.raises(TableError, match=r"table 'Holey' has no rate at age 61 in year 2021"):
        load_tables(path, closing="set_last_to_one")


# --- improvement scales ----------------------------------------------------------------------------------


def test_two_dimensional_scale_from_xtbml_equals_the_same_scale_from_csv(tmp_path):
    """tests/data/mortality/improvement_2d.csv written as XTbML gives the same scale and rules."""
    csv = load_improvement_table(DATA / "improvement_2d.csv")
    assert isinstance(csv, TwoDimensionalScale)
    rows = {60 + i: {int(y): float(csv.rate_values[i, j]) for j, y in enumerate(csv.years)} for i in range(3)}
    path = write(tmp_path, [table([axis("Age", 60, 62), axis("Year", 2021, 2023)], rows)],
                 content="Projection Scale")
    for rule in ("hold_last", "long_term", "zero"):
        a = load_improvement_table(path, after_last_year=rule, long_term_rate=0.012)
        b = load_improvement_table(DATA / "improvement_2d.csv", after_last_year=rule, long_term_rate=0.012)
        ages, years = np.meshgrid(np.arange(58, 65), np.arange(2019, 2030), indexing="ij")
        np.testing.assert_array_equal(a.rates(ages, years), b.rates(ages, years))


def test_scale_by_age_from_xtbml(tmp_path):
    path = write(tmp_path, [table([axis("Age", 60, 62)], {60: 0.01, 61: 0.012, 62: 0.014})],
                 content="Projection Scale", name="Scale by age")
    s = load_improvement_table(path)
    assert isinstance(s, AgeImprovement)
    np.testing.assert_array_equal(s.rates([59, 61, 70], [2000, 2050, 2100]), [0.01, 0.012, 0.014])
    with pytest.raises(TableError, match="table 'Scale by age' holds improvement rates by age only.*"
                                         "after_last_year and long_term_rate do not apply"):
        load_improvement_table(path, long_term_rate=0.01, rules_given=True)


def test_scale_by_name_in_a_file_of_several_and_in_the_basis(tmp_path):
    male = table([axis("Age", 60, 62)], {60: 0.01, 61: 0.01, 62: 0.01}, desc="Male")
    female = table([axis("Age", 60, 62)], {60: 0.02, 61: 0.02, 62: 0.02}, desc="Female")
    write(tmp_path, [male, female], content="Projection Scale", fname="scales.xml")
    with pytest.raises(TableError, match="holds 2 tables; say which one.*table_name.*Male, Female"):
        load_improvement_table(tmp_path / "scales.xml")
    assert load_improvement_table(tmp_path / "scales.xml", name="Female").rates(61, 2030) == 0.02
    b = load_basis(_basis(tmp_path, "SULT", 'base_year = 2020\nimprovement = { kind = "table", file = '
                                            '"scales.xml", table_name = "Female" }'))
    sult = load_basis(_basis(tmp_path, "SULT", ""))
    np.testing.assert_allclose(b.mortality("pensioner", "M").q(61, 2022),
                               sult.mortality("pensioner", "M").q(61, 2022) * 0.98**2, rtol=1e-14)
    with pytest.raises(TableError, match="a table name .'Male'. was given, but a CSV or XLSX improvement file"):
        load_improvement_table(DATA / "improvement_2d.csv", name="Male")


def test_an_axis_no_table_spans_is_refused_before_reading(tmp_path):
    path = write(tmp_path, [table([axis("Age", 0, 10**9)], {0: 0.1, 1: 1.0})], name="Broken")
    with pytest.raises(TableError, match="table 'Broken' has an axis 'Age' running 0..1000000000, which no table"):
        load_tables(path)
