"""End-to-end experience analysis from files: the SULT reference basis against the Makeham law directly,
the demo scheme, the liability effect by full re-valuation, and the written files."""

from __future__ import annotations

import json
import math
from datetime import date
from pathlib import Path

import polars as pl
import pytest

from valuation.basis import load_basis
from valuation.experience import ExperienceSettings, analyse_experience, analyse_records
from valuation.experience.events import read_events

from .test_experience_analysis import LawRates, lookup_for

ROOT = Path(__file__).parent.parent
DATA = Path(__file__).parent / "data" / "experience"
DEMO = ROOT / "member_data_demo"
SULT_SETTINGS = ExperienceSettings(period_start=date(2021, 12, 31), period_end=date(2024, 12, 31))
DEMO_SETTINGS = ExperienceSettings(period_start=date(2022, 3, 31), period_end=date(2025, 3, 31))


def test_sult_basis_run_matches_the_makeham_law() -> None:
    """The basis path (bundled SULT, no improvement, 100 %) gives the same expected deaths as q taken
    straight from the SULT Makeham law (DHW Appendix D: A = 0.00022, B = 2.7e-6, c = 1.124)."""
    res = analyse_experience(
        DATA / "sult_start.csv",
        DATA / "sult_deaths.csv",
        ROOT / "assumptions" / "sult_basis.toml",
        SULT_SETTINGS,
        exits_path=DATA / "sult_exits.csv",
    )
    recs = pl.read_csv(DATA / "sult_start.csv", try_parse_dates=True).with_row_index("row", offset=2)
    ref = analyse_records(
        recs,
        read_events(DATA / "sult_deaths.csv", "deaths"),
        read_events(DATA / "sult_exits.csv", "exits"),
        lookup_for(LawRates()),
        SULT_SETTINGS,
    )
    for col in ("exposure_years", "expected_lives", "expected_amounts", "actual_lives", "actual_amounts"):
        assert res.overall()[col] == pytest.approx(ref.overall()[col], rel=1e-12), col
    assert res.overall()["actual_amounts"] == 1250 + 3100
    assert res.implied["implied_percentage"] == pytest.approx(100 * res.overall()["ae_amounts"], rel=1e-12)
    assert res.implied["liability_before"] is None
    assert res.implied["reason"] == "no valuation member file given: liability effect not calculated"


@pytest.fixture(scope="module")
def demo():  # noqa: ANN201
    return analyse_experience(
        DEMO / "members_start.csv",
        DEMO / "deaths.csv",
        ROOT / "assumptions" / "demo_basis.toml",
        DEMO_SETTINGS,
        exits_path=DEMO / "exits.csv",
        valuation_members_path=DEMO / "members.csv",
    )


def test_demo_counts_reconcile_and_bad_rows_are_listed(demo) -> None:  # noqa: ANN001
    """member_data_demo/README.md: two deliberately wrong death rows (unknown GW999999, a death before the
    period); nothing is dropped silently."""
    d = demo.summary["records"]["deaths"]
    assert d["read"] == d["counted"] + d["excluded"]
    assert d["excluded"] == 2
    assert d["counted"] == d["in_cells"]
    reasons = demo.exceptions.filter(pl.col("file").str.ends_with("deaths.csv"))["reason"].to_list()
    assert any("unknown member 'GW999999'" in r for r in reasons)
    assert any("is on or before the period start 2022-03-31" in r for r in reasons)
    x = demo.summary["records"]["exits"]
    assert x["read"] == x["applied"] + x["excluded"]
    assert demo.overall()["actual_lives"] == d["counted"]


def test_demo_deaths_drawn_from_the_basis_give_plausible_ae(demo) -> None:  # noqa: ANN001
    """The demo deaths were drawn from the demo basis's own q (member_data_demo/README.md), so the 95 %
    interval for A/E by lives should contain 100 % (this fails about 1 time in 20 for a fresh draw; the
    committed data is fixed)."""
    o = demo.overall()
    assert o["ae_lives_lower"] <= 1.0 <= o["ae_lives_upper"]
    dims = set(demo.table["dimension"].unique())
    assert dims == {"overall", "sex", "status", "age_band", "pension_band", "calendar_year"}
    years = demo.table.filter(pl.col("dimension") == "calendar_year")["group"].to_list()
    assert years == ["2022", "2023", "2024", "2025"]


def test_liability_effect_is_a_full_revaluation(demo) -> None:  # noqa: ANN001
    """liability_after is value_members at q_multiplier = A/E amounts, not an approximation; heavier
    mortality (multiplier > 1) lowers a pension liability and lighter raises it (common practice)."""
    from valuation.engine.run import value_members
    from valuation.members import read_members

    basis = load_basis(ROOT / "assumptions" / "demo_basis.toml")
    data = read_members(DEMO / "members.csv", basis)
    k = demo.implied["multiplier"]
    direct = value_members(data, basis, q_multiplier=k, sensitivities=False).total_liability
    base = value_members(data, basis, q_multiplier=1.0, sensitivities=False).total_liability
    imp = demo.implied
    assert imp["liability_after"] == pytest.approx(direct, rel=1e-12)
    assert imp["liability_before"] == pytest.approx(base, rel=1e-12)
    assert imp["change_pct"] == pytest.approx(100 * (direct / base - 1), rel=1e-12)
    assert math.copysign(1, imp["change_pct"]) == -math.copysign(1, k - 1)


def test_write_produces_json_csv_and_exceptions(demo, tmp_path: Path) -> None:  # noqa: ANN001
    demo.write(tmp_path)
    summary = json.loads((tmp_path / "experience.json").read_text(encoding="utf-8"))
    assert summary["settings"]["exposure"] == "central"
    assert "central exposed to risk" in summary["settings"]["exposure_method"]
    assert summary["settings"]["late_reporting"].startswith("none")
    assert "365.25" in summary["settings"]["day_count"]
    assert summary["records"]["deaths"]["read"] == demo.summary["records"]["deaths"]["read"]
    assert summary["implied"]["liability_after"] == pytest.approx(demo.implied["liability_after"])
    table = pl.read_csv(tmp_path / "experience.csv")
    assert table.columns[:3] == ["dimension", "group", "exposure_years"]
    assert table.height == demo.table.height
    exc = pl.read_csv(tmp_path / "experience_exceptions.csv", infer_schema=False)
    assert exc.columns == ["file", "row", "member_id", "column", "value", "reason", "severity"]
    # NaN ratios (no expected amounts for actives) are written as JSON null, not NaN
    active = next(r for r in summary["by_group"]["status"] if r["group"] == "active")
    assert active["ae_amounts"] is None
