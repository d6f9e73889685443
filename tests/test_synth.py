"""The synthetic member-data generator: reproducible, the documented mix, consistent splits, writers.

Sources: the status mix is the generator's own documented parameter (STATUS_MIX); the binomial tolerance
and the exact Poisson interval for actual deaths (Garwood 1936, Biometrika 28:437, via scipy.stats.chi2)
are standard statistics.
"""

from __future__ import annotations

from datetime import date
from pathlib import Path

import numpy as np
import polars as pl
import pytest
from scipy.stats import chi2

from valuation.basis import load_basis
from valuation.members import read_members, synth_scheme, write_scheme
from valuation.members import synth as synth_mod

ROOT = Path(__file__).resolve().parents[1]
VAL = date(2025, 3, 31)


def test_same_seed_same_frame() -> None:
    a = synth_scheme(500, seed=3, valuation_date=VAL)
    assert a.equals(synth_scheme(500, seed=3, valuation_date=VAL))
    assert not a.equals(synth_scheme(500, seed=4, valuation_date=VAL))
    d = synth_scheme(300, seed=3, valuation_date=VAL, dirty=0.3)
    assert d.equals(synth_scheme(300, seed=3, valuation_date=VAL, dirty=0.3))
    assert all(t == pl.String for t in d.dtypes)


def test_status_mix_and_ranges() -> None:
    n = 20_000
    df = synth_scheme(n, seed=1, valuation_date=VAL)
    for status, p in synth_mod.STATUS_MIX.items():
        k = df.filter(pl.col("status") == status).height
        assert abs(k - n * p) <= 4 * np.sqrt(n * p * (1 - p))  # binomial, 4 standard deviations
    assert df["member_id"].n_unique() == n and df["member_id"][0] == "GW000001"
    assert (df["date_of_birth"] < VAL).all()
    act = df.filter(pl.col("status") == "active")
    assert (act["salary"] > 0).all() and (act["service_years"] >= 0).all() and act["pension"].null_count() == act.height
    paid = df.filter(pl.col("status") != "active")
    assert ((paid["pension_pre2005"] + paid["pension_post2005"] - paid["pension"]).abs() <= 0.01 + 1e-9).all()


def test_three_tranches_sum_to_pension() -> None:
    df = synth_scheme(2_000, seed=5, valuation_date=VAL, tranches=("a", "b", "c"))
    paid = df.filter(pl.col("pension").is_not_null())
    gap = (paid["pension_a"] + paid["pension_b"] + paid["pension_c"] - paid["pension"]).abs()
    assert (gap <= 0.01 + 1e-9).all()


def test_xlsx_keeps_text_and_has_a_size_limit(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    df = pl.DataFrame({"member_id": ["=1+1", "@x"], "pension": [1.5, 2.0]})
    p = write_scheme(df, tmp_path / "m.xlsx")
    back = pl.read_excel(p, infer_schema_length=0)
    assert back["member_id"].to_list() == ["=1+1", "@x"]
    monkeypatch.setattr(synth_mod, "XLSX_LIMIT", 1)
    with pytest.raises(ValueError, match="too many for XLSX"):
        write_scheme(df, tmp_path / "n.xlsx")
    with pytest.raises(ValueError, match="unknown extension"):
        write_scheme(df, tmp_path / "n.ods")


def test_demo_deaths_are_plausible_under_the_demo_basis() -> None:
    """Actual deaths in deaths.csv lie inside the exact 99.9 % Poisson interval around expected deaths
    computed from the demo basis's q on members_start.csv (three whole years, initial exposure)."""
    basis = load_basis(ROOT / "assumptions" / "demo_basis.toml")
    start = read_members(ROOT / "member_data_demo" / "members_start.csv", basis).records
    deaths = pl.read_csv(ROOT / "member_data_demo" / "deaths.csv", try_parse_dates=True)
    actual = deaths.filter(pl.col("member_id").is_in(start["member_id"].implode())
                           & (pl.col("date_of_death") >= date(2022, 3, 31))).height
    age = (np.datetime64("2022-03-31") - start["date_of_birth"].to_numpy()).astype(float) / 365.25
    alive = np.ones(start.height)
    expected = 0.0
    for k in range(3):
        q = np.zeros(start.height)
        for st in ("active", "deferred", "pensioner", "dependant"):
            for sx in ("M", "F"):
                m = ((start["status"] == st) & (start["sex"] == sx)).to_numpy()
                q[m] = basis.mortality(st, sx).q(np.floor(age[m] + k).astype(int), 2022 + k)
        expected += float((alive * q).sum())
        alive *= 1 - q
    lower = chi2.ppf(0.0005, 2 * actual) / 2
    upper = chi2.ppf(0.9995, 2 * actual + 2) / 2
    assert lower <= expected <= upper, (actual, expected)
