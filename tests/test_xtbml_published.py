"""The real XTbML files of the public table repository: coverage, printed values, projection, select.

Source of every value below: the XTbML files of the SOA's public mortality and other rate tables
repository, as shipped in the test extra's package ``pymort`` (tests/xtbml_repository.py). Each check
names the table identity (``TableIdentity``, the file t<identity>.xml) and the table; the values are
as printed in the file. ``pymort``'s own XML reader is a test-only cross-check of the values read.
Generational projection q(x, y) = q(x, b) prod_{s=b+1..y} (1 - i(x, s)): the SOA *Mortality Improvement
Scale MP-2014 Report* (2014); select and ultimate q_[x]+d: [DHW] Dickson, Hardy & Waters, *Actuarial
Mathematics for Life Contingent Risks*, 2nd ed., section 3.7.
"""

from __future__ import annotations

import re
import time
from collections import Counter
from pathlib import Path

import numpy as np
import pytest

from tests.xtbml_repository import REPOSITORY, needs_repository, table_file
from valuation.basis import load_basis
from valuation.errors import TableError
from valuation.mortality import (
    AgeImprovement,
    TwoDimensionalScale,
    load_improvement_table,
    load_table,
    load_tables,
)
from valuation.mortality.xtbml import mortality_tables, read_xtbml

pytestmark = needs_repository

#: Content types of mortality tables (annuitant, healthy lives, insured lives, standard ordinary,
#: population, disabled lives), as written in the files' ContentType.
MORTALITY_CONTENT = {
    "Annuitant Mortality", "Healthy Lives Mortality", "Disabled Lives Mortality", "Insured Lives Mortality",
    "CSO/CET", "CSO / CET", "Population Mortality",
}

#: The share of mortality tables with yearly ages that must be read (the issue's target).
TARGET = 0.97

RP2014 = "RP-2014 Rates-Total Dataset-Healthy Annuitant-Male"  # identity 3123, table 2 of 3


def _reason(path: Path, exc: TableError) -> str:
    """A refusal message without file, table name and figures, to count refusals by reason."""
    text = exc.reason
    text = re.sub(r"^table (\d+ of \d+ \('[^']*'\)|'[^']*') ", "", text)
    text = re.sub(r"'[^']*'", "'...'", text)
    return re.sub(r"-?\d+(\.\d+)?", "N", text)


@pytest.fixture(scope="module")
def walk() -> dict:
    """Read every mortality file of the repository once: (file, yearly ages?, refusal or None)."""
    assert REPOSITORY is not None
    start = time.perf_counter()
    rows = []
    for path in sorted(REPOSITORY.glob("t*.xml")):
        try:
            xf = read_xtbml(path)
        except TableError as exc:
            rows.append((path, True, exc))
            continue
        if xf.content_type not in MORTALITY_CONTENT:
            continue
        yearly = all(a.increment in (None, 1) for t in xf.tables for a in t.axes if a.kind == "age")
        try:  # what load_tables(path, closing="set_last_to_one") does, on the file parsed once
            mortality_tables(xf, closing="set_last_to_one")
            rows.append((path, yearly, None))
        except TableError as exc:
            rows.append((path, yearly, exc))
    return {"rows": rows, "seconds": time.perf_counter() - start}


def test_coverage_of_the_repositorys_mortality_tables(walk):
    """At least 97 % of the mortality tables with yearly ages are read (closing rule: the last age given
    becomes the closing age, as a user reading an open table would state); every refusal is one message
    that names the file and the table; the refusals are listed by reason."""
    rows = walk["rows"]
    yearly = [r for r in rows if r[1]]
    read = sum(r[2] is None for r in yearly)
    share = read / len(yearly)
    reasons = Counter(_reason(p, e) for p, _, e in yearly if e is not None)
    abridged = [(p, e) for p, y, e in rows if not y]
    summary = "\n".join(
        [f"{read} of {len(yearly)} mortality tables with yearly ages read ({share:.1%}) in {walk['seconds']:.1f} s; "
         f"{len(abridged)} abridged tables refused", "refusals by reason:"]
        + [f"  {n:4d}  {why}" for why, n in reasons.most_common()]
    )
    print(summary)
    assert len(yearly) > 1500, summary  # the copy holds about 1,700 such files
    assert share >= TARGET, summary
    for p, _, e in [r for r in rows if r[2] is not None]:
        msg = str(e)
        assert msg.startswith(str(p)), msg
        assert "table" in e.reason or e.column is not None, msg
        assert "None" not in e.reason and "nan" not in e.reason, msg
    assert abridged and all("is abridged: its ages go up in steps of" in str(e) for _, e in abridged)


# --- printed values -----------------------------------------------------------------------------------


def test_rp2014_healthy_annuitant_male_printed_rates():
    """Identity 3123, RP-2014 Rates-Total Dataset, table 2 'Healthy Annuitant-Male' (ages 50-120):
    q_65 = 0.011013, q_80 = 0.044722, q_100 = 0.313988, q_120 = 1 as printed in the file."""
    t = load_table(table_file(3123), RP2014)
    assert (t.min_age, t.max_age) == (50, 120)
    np.testing.assert_array_equal(t.q([65, 80, 100, 120]), [0.011013, 0.044722, 0.313988, 1.0])
    assert "table identity 3123" in t.source


def test_mp2014_male_printed_rates():
    """Identity 3135, Scale MP-2014 Male (ages 20-120, years 1951-2030): i(65, 2015) = 0.0105,
    i(65, 2016) = 0.0103, i(65, 2017) = 0.0104, i(80, 2015) = 0.022, i(65, 2030) = 0.01."""
    s = load_improvement_table(table_file(3135))
    assert isinstance(s, TwoDimensionalScale) and s.min_age == 20 and s.max_age == 120
    assert (s.years[0], s.years[-1]) == (1951, 2030)
    np.testing.assert_array_equal(s.rates([65, 65, 65, 80, 65], [2015, 2016, 2017, 2015, 2030]),
                                  [0.0105, 0.0103, 0.0104, 0.022, 0.01])


def test_scale_aa_female_by_age():
    """Identity 923, 1994 Mortality Improvement Projection Scale AA - Female (one age axis, 1-120):
    i(65) = 0.005, i(80) = 0.007, the same in every year."""
    s = load_improvement_table(table_file(923))
    assert isinstance(s, AgeImprovement)
    np.testing.assert_array_equal(s.rates([65, 80, 80], [2000, 2000, 2100]), [0.005, 0.007, 0.007])


def test_ssa_period_table_by_calendar_year():
    """Identity 1501, SSA Mortality Rates for the period 1900-2007 - Male (ages 0-119 x years 1900-2007):
    q(65, 1950) = 0.034871 and q(65, 2007) = 0.016723 as printed."""
    t = load_table(table_file(1501), closing="set_last_to_one")
    assert (t.years[0], t.years[-1], t.min_age, t.max_age) == (1900, 2007, 0, 119)
    np.testing.assert_array_equal(t.q_in_year([65, 65], [1950, 2007]), [0.034871, 0.016723])


# --- generational projection by hand --------------------------------------------------------------------

BASIS = """
name = "RP-2014 with MP-2014"
valuation_date = 2017-12-31
[discount]
rate = 0.04
[inflation]
rate = 0.02
[mortality.default.M]
table = "{table}"
table_name = "{name}"
base_year = 2014
improvement = {{ kind = "table", file = "{scale}" {rule} }}
[mortality.default.F]
table = "SULT"
"""


def _basis(tmp_path: Path, rule: str = "") -> Path:
    p = tmp_path / "basis.toml"
    p.write_text(BASIS.format(table=table_file(3123), name=RP2014, scale=table_file(3135), rule=rule),
                 encoding="utf-8")
    return p


def test_generational_rates_by_hand(tmp_path):
    """RP-2014 Healthy Annuitant Male (identity 3123, base year 2014) projected with Scale MP-2014 Male
    (identity 3135), both as downloaded, through a basis file. By hand from the printed values:

    q(65, 2017) = 0.011013 (1 - 0.0105)(1 - 0.0103)(1 - 0.0104) = 0.0106729554...
    q(80, 2016) = 0.044722 (1 - 0.022)(1 - 0.0206) = 0.0428371108...
    q(65, 2014) = 0.011013 (the base year).
    """
    mb = load_basis(_basis(tmp_path)).mortality("pensioner", "M")
    got = mb.q([65, 80, 65], [2017, 2016, 2014])
    np.testing.assert_allclose(got, [0.01067295540112812, 0.0428371108104, 0.011013], rtol=1e-13)


@pytest.mark.parametrize("rule, factor", [("", 0.99**2), (', after_last_year = "long_term", long_term_rate = 0.005',
                                                            0.995**2), (', after_last_year = "zero"', 1.0)])
def test_rules_after_the_scales_last_year(tmp_path, rule, factor):
    """Past 2030 (the scale's last year, i(65, 2030) = 0.01 as printed): hold_last gives (1 - 0.01) a year,
    long_term 0.005 gives (1 - 0.005), zero gives no change, the same rules as the CSV form."""
    mb = load_basis(_basis(tmp_path, rule)).mortality("pensioner", "M")
    assert mb.q(65, 2032) / mb.q(65, 2030) == pytest.approx(factor, rel=1e-13)


# --- select and ultimate --------------------------------------------------------------------------------


def test_select_life_joins_the_ultimate_table_where_the_layout_says():
    """Identity 1453, 1997-04 CIA - Male Smoker, ANB: select ages 16-80 with durations 0-14 (a 15-year
    select period) and the ultimate table from age 31 = 16 + 15. Printed: q_[16]+13 = 0.001,
    q_[16]+14 = 0.00103, ultimate q_31 = 0.00106, q_32 = 0.00107."""
    t = load_table(table_file(1453))
    assert (t.min_age, t.select_min_age, t.select_period) == (31, 16, 15)
    np.testing.assert_array_equal(t.q_select(16, [13, 14, 15, 16]), [0.001, 0.00103, 0.00106, 0.00107])
    assert t.q_select(17, 14) != t.q(31)  # selected at 17: still select at 31, ultimate from 32
    assert t.q_select(17, 15) == t.q(32) == 0.00107


def test_select_period_cut_at_the_end_of_the_table():
    """Identity 1148, 2001 VBT Select and Ultimate - Male Composite, ANB: select ages 0-100, durations
    1-25, ultimate from 25. Printed: q_[0]+24 (duration 25) = 0.00093, ultimate q_25 = 0.00095. Row 100
    has rates for durations 1-21 only (attained ages to 120, the closing age); past them the table is
    closed (q = 1)."""
    t = load_table(table_file(1148))
    assert (t.min_age, t.select_min_age, t.select_period) == (25, 0, 25)
    np.testing.assert_array_equal(t.q_select(0, [24, 25]), [0.00093, 0.00095])
    np.testing.assert_array_equal(t.q_select(100, [21, 22]), [1.0, 1.0])


# --- cross-check with pymort's own reader ----------------------------------------------------------------


@pytest.mark.filterwarnings("ignore")  # pymort's own deprecation warnings (pandas, importlib)
@pytest.mark.parametrize("identity", [3123, 1453, 1148, 3135, 923, 1501])
def test_values_agree_with_pymorts_reader(identity):
    """Every value that pymort's XML reader (a test-only reference) gives for the table agrees with ours."""
    pymort = pytest.importorskip("pymort")
    x = pymort.MortXML.from_id(identity)
    content = x.ContentClassification.ContentType
    path = table_file(identity)
    if content == "Projection Scale":
        s = load_improvement_table(path)
        v = x.Tables[0].Values
        if v.index.nlevels == 1:
            got = s.rates(v.index.to_numpy(), 2000)
        else:
            got = s.rates(v.index.get_level_values(0).to_numpy(), v.index.get_level_values(1).to_numpy())
        np.testing.assert_array_equal(got, v["vals"].to_numpy())
        return
    if identity == 1501:
        t = load_table(path, closing="set_last_to_one")
        v = x.Tables[0].Values
        a, y = v.index.get_level_values(0).to_numpy(), v.index.get_level_values(1).to_numpy()
        ok = a < t.max_age  # the last age is made the closing age
        np.testing.assert_array_equal(t.q_in_year(a[ok], y[ok]), v["vals"].to_numpy()[ok])
        return
    tables = load_tables(path, closing="set_last_to_one")
    if len(x.Tables) == 2 and x.Tables[0].Values.index.nlevels == 2:  # select + ultimate
        (t,) = tables.values()
        sel, ult = x.Tables[0].Values, x.Tables[1].Values
        a, d = sel.index.get_level_values(0).to_numpy(), sel.index.get_level_values(1).to_numpy()
        d0 = min(d)  # durations counted from 0 or from 1 in the file
        np.testing.assert_array_equal(t.q_select(a, d - d0), sel["vals"].to_numpy())
        ages = ult.index.to_numpy()
        np.testing.assert_array_equal(t.q(ages[:-1]), ult["vals"].to_numpy()[:-1])
        return
    for t, pt in zip(tables.values(), x.Tables, strict=True):
        ages = pt.Values.index.to_numpy()
        np.testing.assert_array_equal(t.q(ages[:-1]), pt.Values["vals"].to_numpy()[:-1])
