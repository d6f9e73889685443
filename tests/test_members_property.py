"""Property: for any generated messy member file, read = valued + excluded, overall and by status, and
every excluded record has at least one 'excluded' exception (reconciliation identity; common practice)."""

from __future__ import annotations

import tempfile
from pathlib import Path

import polars as pl
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from valuation.basis import load_basis
from valuation.members import read_members, synth_scheme, write_scheme

BASIS = load_basis(Path(__file__).parent / "data" / "members" / "basis.toml")


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(n=st.integers(1, 80), seed=st.integers(0, 10_000), dirty=st.floats(0.0, 1.0),
       ext=st.sampled_from(["csv", "parquet"]))
def test_read_equals_valued_plus_excluded(n: int, seed: int, dirty: float, ext: str) -> None:
    df = synth_scheme(n, seed=seed, valuation_date=BASIS.valuation_date, dirty=dirty)
    with tempfile.TemporaryDirectory() as tmp:
        md = read_members(write_scheme(df, Path(tmp) / f"m.{ext}"), BASIS)
    assert md.read == n == md.valued + md.excluded
    c = md.counts_by_status().filter(pl.col("status") != "total")
    assert (c["read"] == c["valued"] + c["excluded"]).all() and c["read"].sum() == n
    excluded_rows = set(md.exceptions.filter(pl.col("severity") == "excluded")["row"])
    assert len(excluded_rows) == md.excluded
    assert excluded_rows.isdisjoint(set(md.records["row"]))
