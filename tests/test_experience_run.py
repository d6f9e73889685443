"""End-to-end experience analysis from files: the SULT reference basis against the Makeham law directly,
the demo scheme, the liability effect by full re-valuation, and the written files."""

from __future__ import annotations

import json
import math
import re
from datetime import date
from pathlib import Path

import polars as pl
import pytest

from valuation.basis import load_basis
from valuation.experience import ExperienceSettings, analyse_experience, analyse_records
from valuation.experience.credibility import full_credibility_standard
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
    # one table (default, both sexes at 100 %): implied = 100 % x (Z x A/E + 1 - Z), Z = sqrt(E / 1,082.2)
    # on the expected deaths of the lives with a pension (all six here) (Longley-Cook 1962, from memory)
    o = res.implied["overall"]
    z = math.sqrt(res.overall()["expected_lives"] / full_credibility_standard(0.90, 0.05))
    assert o["credibility"] == pytest.approx(z, rel=1e-12)
    assert res.implied["implied_percentage"] == pytest.approx(
        100 * (z * res.overall()["ae_amounts"] + 1 - z), rel=1e-12
    )
    assert res.implied["liability_before"] is None
    assert res.implied["reason"] == "no valuation member file given: liability effect not calculated"


@pytest.fixture(scope="module")
def demo():  # noqa: ANN201
    from valuation.pipeline import ExperienceInputs, experience_only

    inputs = ExperienceInputs(start_members=DEMO / "members_start.csv", deaths=DEMO / "deaths.csv",
                              settings=DEMO_SETTINGS, exits=DEMO / "exits.csv")
    return experience_only(ROOT / "assumptions" / "demo_basis.toml", inputs, valuation_members=DEMO / "members.csv")


def test_demo_counts_reconcile_and_bad_rows_are_listed(demo) -> None:  # noqa: ANN001
    """member_data_demo/README.md: two deliberately wrong death rows (unknown GW999999, a death before the
    period); nothing is dropped silently."""
    d = demo.summary["records"]["deaths"]
    assert d["read"] == d["counted"] + d["excluded"]
    assert d["excluded"] == 2
    assert d["counted"] == d["in_cells"]
    deaths = demo.exceptions.filter(pl.col("file").str.ends_with("deaths.csv"))
    values = dict(zip(deaths["reason"], deaths["value"], strict=True))
    assert values["death for a member not in the start membership (" + str(DEMO / "members_start.csv")
                  + "): not counted"] == "GW999999"
    before = "death on or before the period start 2022-03-31: the member should not be in the start membership"
    assert any(r.startswith(before) for r in values)
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


def _basis_with_percentages(source: Path, target: Path, percentages: dict[str, float]) -> Path:
    """A copy of a basis file with ``percentage`` of each named ``[mortality.<group>.<sex>]`` section
    replaced (text edit of the TOML, so the copy is read by the public loader like any user's file)."""
    out, section = [], ""
    for line in source.read_text(encoding="utf-8").splitlines():
        head = re.match(r"\s*\[([^\]]+)\]", line)
        if head:
            section = head.group(1).strip()
        if section in percentages and re.match(r"\s*percentage\s*=", line):
            line = f"percentage = {percentages[section]!r}"
        out.append(line)
    target.write_text("\n".join(out) + "\n", encoding="utf-8")
    return target


def test_liability_effect_uses_each_tables_own_implied_percentage(demo, tmp_path: Path) -> None:  # noqa: ANN001
    """liability_after is the liability valued, through the public API, on the basis file with each
    mortality table's percentage replaced by its own credibility-weighted implied percentage; the
    tables' own A/E differ, so one overall multiplier gives another figure. Heavier mortality on balance
    lowers a pension liability (common practice)."""
    from valuation import value_scheme
    from valuation.engine.run import value_members
    from valuation.members import read_members

    imp = demo.implied
    rows = {r["table"]: r for r in imp["by_table"]}
    assert set(rows) == {"mortality.pensioner.M", "mortality.dependant.F", "mortality.default.M",
                         "mortality.default.F"}
    ae = [r["ae_amounts"] for r in rows.values()]
    assert max(ae) - min(ae) > 0.3  # dependant women below 100 %, male pensioners above
    new = {key: r["implied_percentage"] / 100 for key, r in rows.items()}
    basis_file = ROOT / "assumptions" / "demo_basis.toml"
    changed = _basis_with_percentages(basis_file, tmp_path / "implied_basis.toml", new)
    direct = value_scheme(changed, DEMO / "members.csv", sensitivities=False).total_liability
    base = value_scheme(basis_file, DEMO / "members.csv", sensitivities=False).total_liability
    assert imp["liability_after"] == pytest.approx(direct, rel=1e-12)
    assert imp["liability_before"] == pytest.approx(base, rel=1e-12)
    assert imp["change_pct"] == pytest.approx(100 * (direct / base - 1), rel=1e-12)
    assert {k: v["to"] for k, v in imp["basis_changes"].items()} == {
        k: r["implied_percentage"] for k, r in rows.items()
    }
    basis = load_basis(basis_file)
    overall = value_members(basis, read_members(DEMO / "members.csv", basis), q_multiplier=imp["multiplier"],
                            sensitivities=False).total_liability
    assert abs(overall - direct) > 1e-4 * base


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
    assert table.height == demo.table.height + len(demo.implied["by_table"])
    by_table = table.filter(pl.col("dimension") == "mortality_table")
    assert by_table["implied_percentage"].to_list() == pytest.approx(
        [r["implied_percentage"] for r in demo.implied["by_table"]], rel=1e-12
    )
    assert {"sex", "current_percentage", "credibility", "implied_percentage"} <= set(table.columns)
    assert summary["implied"]["by_table"][0]["credibility"] == pytest.approx(demo.implied["by_table"][0]["credibility"])
    assert "1,082 expected deaths" in summary["implied"]["credibility_standard"]["text"]
    exc = pl.read_csv(tmp_path / "experience_exceptions.csv", infer_schema=False)
    assert exc.columns == ["file", "row", "member_id", "column", "file_column", "value", "reason", "severity"]
    # NaN ratios (no expected amounts for actives) are written as JSON null, not NaN
    active = next(r for r in summary["by_group"]["status"] if r["group"] == "active")
    assert active["ae_amounts"] is None
