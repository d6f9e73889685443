"""Bundled tables and life-table identities, checked against published values and formulas.

Sources: [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed.,
Appendix D (Standard Ultimate Life Table, SULT) and chapters 2-3; the same SULT values are printed in the
SOA long-term actuarial mathematics exam tables. ``actuarialmath`` (PyPI) is a test-only cross-check.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from valuation.errors import TableError
from valuation.mortality import BUNDLED, MortalityTable, bundled_table, resolve_table
from valuation.mortality.bundled import write_bundled_files

DATA = Path(__file__).parent / "data" / "mortality"

# SULT Makeham parameters as printed in [DHW] Appendix D.
A, B, C = 0.00022, 2.7e-6, 1.124

#: q = 1 - p with p close to 1: a few ulps of 1.0 of absolute error, on any machine (IEEE 754 double,
#: machine epsilon 2.2e-16).
Q_ATOL = 8 * np.finfo(float).eps


def makeham_tpx(x, t):
    """[DHW] eq. (2.29): tp_x = exp(-A t - B c^x (c^t - 1) / ln c), typed in here from the book."""
    x = np.asarray(x, dtype=float)
    return np.exp(-A * t - B * C**x * (C**t - 1.0) / np.log(C))


@pytest.mark.parametrize(
    "age, published",
    # [DHW] Appendix D, SULT l_x column (printed to 0.1); also the SOA LTAM exam tables.
    [(60, 96_634.1), (65, 94_579.7), (70, 91_082.4)],
)
def test_sult_lx_matches_published_table(age, published):
    lx = bundled_table("SULT").lx(100_000.0)
    assert lx[age - 20] == pytest.approx(published, abs=0.05)


def test_sult_annuity_due_65_matches_published_value():
    """[DHW] Appendix D: a-due_65 = 13.5498 at i = 5 % (printed to 4 decimals)."""
    lx = bundled_table("SULT").lx()
    l65 = lx[65 - 20 :]
    v = 1.05 ** -np.arange(l65.size)
    assert np.sum(v * l65) / l65[0] == pytest.approx(13.5498, abs=5e-5)


def test_sult_qx_is_makeham_closed_form_with_closing_rule():
    """q_x = 1 - 1p_x from [DHW] eq. (2.29) at ages 20..119; q_120 = 1 is the stated closing rule."""
    t = bundled_table("SULT")
    ages = np.arange(20, 120)
    assert t.min_age == 20 and t.max_age == 120
    # q = 1 - p: p is within a few ulps of 1, so the absolute error is a few ulps of 1 whatever q is
    np.testing.assert_allclose(t.qx[:-1], 1.0 - makeham_tpx(ages, 1.0), rtol=1e-12, atol=Q_ATOL)
    assert t.qx[-1] == 1.0
    assert t.base_year is None
    assert "Appendix D" in t.source and "q_120 = 1" in t.source


def test_sult_lx_agrees_with_actuarialmath():
    """Cross-check against actuarialmath's SULT (test-only library), ages 20..100, to 1e-9 relative."""
    am = pytest.importorskip("actuarialmath")
    ref = am.SULT()
    lx = bundled_table("SULT").lx()
    ages = np.arange(20, 101)
    np.testing.assert_allclose(lx[ages - 20], [ref.l_x(int(a)) for a in ages], rtol=1e-9)


def _read_table_csv(path: Path) -> tuple[list[str], np.ndarray, np.ndarray]:
    """Header, ages and rate columns of a bundled table file (age in the first column)."""
    lines = path.read_text(encoding="utf-8").splitlines()
    rows = [line.split(",") for line in lines[1:] if line]
    ages = np.array([int(r[0]) for r in rows])
    rates = np.array([[float(v) for v in r[1:]] for r in rows])
    return lines[0].split(","), ages, rates


def test_bundled_files_match_their_laws(tmp_path):
    """The shipped CSV files hold what the laws produce (provenance in data/README.md): same headers and
    ages exactly, rates value by value to a few ulps. The laws go through exp and pow, whose last bits
    differ between CPUs and numpy builds, so the files are not compared byte by byte."""
    for fresh in write_bundled_files(tmp_path):
        shipped = Path(__file__).parents[1] / "valuation" / "mortality" / "data" / fresh.name
        s_head, s_ages, s_q = _read_table_csv(shipped)
        f_head, f_ages, f_q = _read_table_csv(fresh)
        assert s_head == f_head, fresh.name
        np.testing.assert_array_equal(s_ages, f_ages)
        np.testing.assert_allclose(s_q, f_q, rtol=1e-12, atol=Q_ATOL, err_msg=fresh.name)


@pytest.mark.parametrize("name", BUNDLED)
def test_life_table_identities(name):
    """[DHW] ch. 3 / [BGHJN] ch. 3 : d_x = l_x - l_{x+1}, q_x = d_x / l_x,
    tp_x = l_{x+t} / l_x = prod of p, u|tq_x = (l_{x+u} - l_{x+u+t}) / l_x = up_x * tq_{x+u}."""
    t = bundled_table(name)
    lx = t.lx(100_000.0)
    dx = lx[:-1] - lx[1:]
    np.testing.assert_allclose(dx / lx[:-1], t.qx, rtol=1e-12)
    assert lx[-1] == 0.0  # q = 1 at the closing age
    n = t.qx.size
    x = np.arange(0, n - 30)
    for tt in (1, 5, 10, 30):
        tpx_l = lx[x + tt] / lx[x]
        tpx_prod = np.array([np.prod(1.0 - t.qx[i : i + tt]) for i in x])  # definition, not cumprod
        np.testing.assert_allclose(tpx_l, tpx_prod, rtol=1e-12)
    u, tt = 7, 4
    lhs = (lx[x + u] - lx[x + u + tt]) / lx[x]
    rhs = (lx[x + u] / lx[x]) * (1.0 - lx[x + u + tt] / lx[x + u])
    np.testing.assert_allclose(lhs, rhs, rtol=1e-12)


def test_sult_tpx_matches_makeham_survival_function():
    """tp_x = l_{x+t} / l_x against [DHW] eq. (2.29) for t up to 40 years (before the closing age)."""
    lx = bundled_table("SULT").lx()
    x = np.arange(20, 80)
    for tt in (1, 10, 40):
        np.testing.assert_allclose(lx[x + tt - 20] / lx[x - 20], makeham_tpx(x, tt), rtol=1e-12)


def test_demo_tables_are_illustrative_with_base_year():
    m, f = bundled_table("DEMO_M"), bundled_table("DEMO_F")
    for t in (m, f):
        assert (t.min_age, t.max_age, t.base_year) == (0, 120, 2020)
        assert "not fitted to any population" in t.source
        assert np.all(np.diff(t.qx) > 0)  # Makeham with B > 0, c > 1 is increasing in age ([DHW] 2.7)
    assert np.all(f.qx[:-1] < m.qx[:-1])  # the female law has smaller A and B (laws.py parameters)


def test_table_q_lookup_rules():
    """Stated rules of MortalityTable.q: past the closing age q = 1; below min_age q at min_age;
    any shape; non-integer ages floored."""
    t = MortalityTable("T", 60, [0.1, 0.2, 1.0])
    got = t.q(np.array([[50, 60], [61, 62], [63, 200]]))
    np.testing.assert_array_equal(got, [[0.1, 0.1], [0.2, 1.0], [1.0, 1.0]])
    np.testing.assert_array_equal(t.q([60.9, 61.2]), [0.1, 0.2])
    np.testing.assert_allclose(t.lx(1000.0), [1000.0, 900.0, 720.0, 0.0], rtol=1e-12)  # by hand
    assert t.max_age == 62
    with pytest.raises(ValueError):
        t.qx[0] = 0.5  # arrays are read-only so cached tables cannot be changed
    # Value equality and hashing, so tables (and bases holding them) can be cache keys.
    same = MortalityTable("T", 60, np.array([0.1, 0.2, 1.0]))
    assert same == t and hash(same) == hash(t) and MortalityTable("T", 60, [0.1, 0.3, 1.0]) != t


def test_bundled_names_are_case_insensitive_and_cached():
    assert bundled_table("sult") is bundled_table("SULT")
    with pytest.raises(TableError, match="unknown bundled table 'XYZ'"):
        bundled_table("XYZ")


def test_resolve_table_bundled_or_file():
    assert resolve_table("DEMO_F").name == "DEMO_F"
    t = resolve_table("small.csv", base_dir=DATA, name="F")
    assert (t.name, t.min_age, t.max_age) == ("F", 60, 66)
    with pytest.raises(TableError, match="neither a bundled table nor an existing file") as e:
        resolve_table("nope.csv", base_dir=DATA)
    assert "nope.csv" in str(e.value)


def test_demo_tables_give_life_expectancies_a_trustee_would_recognise():
    """The invented DEMO_M/DEMO_F laws, on the demo basis's pensioner mortality with its improvements, give
    cohort life expectancy at 65 in the ranges practitioners see for occupational pension schemes today
    (common practice: men 21 to 23.5 years, women 23 to 25.5 years, women 1.5 to 3.5 years longer)."""
    from valuation.basis import load_basis
    from valuation.engine.run import life_expectancies

    root = Path(__file__).resolve().parents[1]
    le = life_expectancies(load_basis(root / "assumptions" / "demo_basis.toml"))
    cohort = {r["sex"]: r["years"] for r in le.iter_rows(named=True) if r["age_now"] == 65 and r["basis"] == "cohort"}
    assert 21.0 <= cohort["M"] <= 23.5
    assert 23.0 <= cohort["F"] <= 25.5
    assert 1.5 <= cohort["F"] - cohort["M"] <= 3.5
