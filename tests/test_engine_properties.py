"""Properties every valuation must have, on generated schemes (hypothesis, modest example counts).

Sources: monotonicity of present values in the discount rate and of escalating annuities in the escalation
rate follows from PV = sum v^t CF_t with non-negative cash flows [DHW 2013, ch. 5]; additivity over members
and independence of member order are properties of a sum (common practice checks for valuation systems).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import polars as pl
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from valuation.basis import load_basis
from valuation.engine.run import project_records
from valuation.engine.scenario import Scenario, life_expectancy_scenario
from valuation.members import read_members
from valuation.members.synth import synth_scheme, write_scheme

ROOT = Path(__file__).resolve().parents[1]
BASIS = load_basis(ROOT / "assumptions" / "demo_basis.toml")
SETTINGS = settings(max_examples=4, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def scheme(tmp_path: Path, seed: int, n: int = 150) -> pl.DataFrame:
    path = tmp_path / f"s{seed}.parquet"
    write_scheme(synth_scheme(n, seed=seed, valuation_date=BASIS.valuation_date), path)
    return read_members(path, BASIS).records


@SETTINGS
@given(seed=st.integers(0, 10_000), shift=st.floats(0.001, 0.02))
def test_liability_falls_as_discount_rate_rises(tmp_path, seed, shift):
    recs = scheme(tmp_path, seed)
    base = project_records(recs, BASIS).liability
    up = project_records(recs, BASIS, Scenario(discount_shift=shift)).liability
    assert np.all(up <= base + 1e-9)
    assert up.sum() < base.sum()


@SETTINGS
@given(seed=st.integers(0, 10_000), shift=st.floats(0.001, 0.01))
def test_liability_rises_with_inflation_for_linked_tranches(tmp_path, seed, shift):
    """Every tranche of the demo basis is inflation-linked (capped): higher inflation never lowers a
    member's liability and raises the scheme's."""
    recs = scheme(tmp_path, seed)
    base = project_records(recs, BASIS).liability
    up = project_records(recs, BASIS, Scenario(inflation_shift=shift)).liability
    assert np.all(up >= base - 1e-9)
    assert up.sum() > base.sum()


def test_one_more_year_of_life_expectancy_raises_every_pensioner(tmp_path):
    recs = scheme(tmp_path, 3, n=300)
    sc = life_expectancy_scenario(BASIS, BASIS.valuation_date.year, 1.0, "le+1", BASIS.fractional_age)
    base = project_records(recs, BASIS)
    longer = project_records(recs, BASIS, sc)
    pens = (recs["status"] == "pensioner").to_numpy()
    assert pens.sum() > 10
    assert np.all(longer.pensions["member_pension"].sum(axis=1)[pens] > base.pensions["member_pension"].sum(axis=1)[pens])


@SETTINGS
@given(seed=st.integers(0, 10_000), cut=st.integers(1, 149))
def test_split_scheme_sums_to_whole_and_order_does_not_matter(tmp_path, seed, cut):
    recs = scheme(tmp_path, seed)
    whole = project_records(recs, BASIS)
    a = project_records(recs[:cut], BASIS)
    b = project_records(recs[cut:], BASIS)
    assert np.isclose(a.liability.sum() + b.liability.sum(), whole.liability.sum(), rtol=1e-12)
    np.testing.assert_allclose(a.cashflow + b.cashflow, whole.cashflow, rtol=1e-10, atol=1e-6)
    perm = np.random.default_rng(seed).permutation(recs.height)
    shuffled = project_records(recs[perm], BASIS)
    np.testing.assert_allclose(shuffled.liability, whole.liability[perm], rtol=1e-12)
    np.testing.assert_allclose(shuffled.cashflow, whole.cashflow, rtol=1e-10, atol=1e-6)


def test_chunk_size_does_not_change_results(tmp_path):
    recs = scheme(tmp_path, 11, n=400)
    one = project_records(recs, BASIS)
    many = project_records(recs, BASIS, chunk_size=37)
    np.testing.assert_allclose(many.liability, one.liability, rtol=1e-12)
