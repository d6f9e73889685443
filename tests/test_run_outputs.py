"""The run folder contract (summary.json keys, CSV files, manifest) and reproducibility.

The keys are the stable contract for automation listed in the valuation-run specification; the hashes are
SHA-256 (FIPS 180-4) checked against Python's hashlib.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import polars as pl
import pytest

from valuation.batch import run_batch
from valuation.pipeline import value_scheme, write_run

ROOT = Path(__file__).resolve().parents[1]
BASIS = ROOT / "assumptions" / "demo_basis.toml"
MEMBERS = ROOT / "member_data_demo" / "members.csv"
DIRTY = ROOT / "member_data_demo" / "members_dirty.csv"


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    res = value_scheme(BASIS, MEMBERS)
    out = write_run(res, tmp_path_factory.mktemp("run") / "demo")
    return res, out


def test_summary_json_has_the_contract_keys(demo_run):
    res, out = demo_run
    s = json.loads((out / "summary.json").read_text())
    assert s["valuation_date"] == "2025-03-31"
    assert set(s["records"]) >= {"read", "valued", "excluded"}
    assert set(s["liability"]["by_status"]) == {"pensioner", "dependant", "deferred", "active"}
    assert s["liability"]["total"] == pytest.approx(sum(s["liability"]["by_status"].values()), rel=1e-12)
    assert set(s["duration"]) >= {"macaulay", "modified"}
    assert isinstance(s["single_equivalent_discount_rate"], float)
    assert {"name", "liability", "change_pct"} <= set(s["sensitivities"][0])
    assert {"sex", "age_now", "at_age", "basis", "years"} <= set(s["life_expectancy"][0])
    assert set(s["expected_deaths_next_year"]) >= {"lives", "amounts"}
    m = s["manifest"]
    assert {"tool_version", "inputs", "basis", "started_at", "run_seconds"} <= set(m)
    for path, digest in m["inputs"].items():
        assert hashlib.sha256(Path(path).read_bytes()).hexdigest() == digest


def test_cashflows_and_exceptions_files(demo_run):
    res, out = demo_run
    cf = pl.read_csv(out / "cashflows.csv")
    assert {"year", "pensioner", "dependant", "deferred", "active", "total"} <= set(cf.columns)
    assert cf["total"].to_numpy() == pytest.approx(
        cf.select(pl.sum_horizontal("pensioner", "dependant", "deferred", "active")).to_series().to_numpy())
    # discounted payments add back to the liability (PV of the expected cash flows)
    assert cf["discounted_total"].sum() == pytest.approx(res.summary.liability.total, rel=1e-9)
    assert (out / "exceptions.csv").exists()
    assert pl.read_parquet(out / "members.parquet").height == res.summary.records.valued


def test_sensitivity_signs_and_durations(demo_run):
    """Rates up lower the liability, inflation/salary/longevity up raise it; 0.5 % p.a. on the discount
    rate moves a typical obligation by several per cent (common practice sanity check: 25 bp ~ 2-4 %)."""
    res, _ = demo_run
    by = {s.kind + ("+" if s.shift > 0 else "-"): s.change_pct for s in res.summary.sensitivities}
    assert by["discount_rate+"] < 0 < by["discount_rate-"]
    assert by["inflation+"] > 0 and by["salary_growth+"] > 0 and by["life_expectancy+"] > 0
    assert 4.0 < -by["discount_rate+"] < 12.0
    d = res.summary.duration
    # effective duration from +/- 0.1 % shifts is close to the modified duration (first-order identity)
    assert d.effective == pytest.approx(d.modified, rel=0.01)


def test_same_inputs_same_numbers(demo_run, tmp_path):
    res, out = demo_run
    again = write_run(value_scheme(BASIS, MEMBERS), tmp_path / "again")
    a = json.loads((out / "summary.json").read_text())
    b = json.loads((again / "summary.json").read_text())
    for s in (a, b):
        s["manifest"].pop("started_at")
        s["manifest"].pop("run_seconds")
    assert a == b
    assert (out / "cashflows.csv").read_bytes() == (again / "cashflows.csv").read_bytes()


def test_dirty_file_reconciles(tmp_path):
    res = value_scheme(BASIS, DIRTY, sensitivities=False)
    r = res.summary.records
    assert r.read == r.valued + r.excluded
    assert r.excluded > 0
    assert res.exceptions.filter(pl.col("severity") == "excluded")["row"].n_unique() == r.excluded


def test_batch_writes_each_run_and_an_index(tmp_path):
    """One scheme on two bases: the higher discount rate gives the lower liability."""
    higher = tmp_path / "higher_rate.toml"
    higher.write_text(BASIS.read_text().replace("rate = 0.048", "rate = 0.055", 1))
    batch = tmp_path / "batch.toml"
    batch.write_text(f"""
out = "runs"
[[run]]
name = "central"
basis = "{BASIS.as_posix()}"
members = "{MEMBERS.as_posix()}"
sensitivities = false
[[run]]
name = "reference"
basis = "higher_rate.toml"
members = "{MEMBERS.as_posix()}"
sensitivities = false
""")
    index = run_batch(batch)
    assert index.height == 2
    for name in ("central", "reference"):
        assert (tmp_path / "runs" / name / "summary.json").exists()
    assert index["liability"][1] < index["liability"][0]
    saved = pl.read_csv(tmp_path / "runs" / "index.csv")
    assert saved["liability"].to_list() == pytest.approx(index["liability"].to_list())
