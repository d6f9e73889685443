"""Each mortality table's own A/E by amounts, interval, credibility and implied percentage, against a hand
computation on a small constructed data set.

The data: a calendar-year period (31 Dec 2020 to 31 Dec 2021) with initial exposure and every member born
on 1 January, so each life is exposed for the whole year at one age: 365 / 365.25 years (the stated day
count), and expected deaths are q x 365 / 365.25 whether or not the member died (Benjamin & Pollard,
initial exposed to risk; DHW ch. 3, E[D_x] = l_x q_x). Rates are the SULT Makeham law (Dickson, Hardy &
Waters, AMLCR, Appendix D) times each group's percentage. The amounts interval is A/E +/- z sqrt(sum w^2 E)
/ sum w E (Poisson deaths; z from scipy); credibility is Z = min(1, sqrt(E / n_F)), n_F = (z_0.95 / 0.05)^2
(Longley-Cook 1962, from memory), on the expected deaths of lives with a pension.
"""

from __future__ import annotations

import math
from datetime import date

import polars as pl
import pytest
from scipy.stats import norm

from valuation.experience import ExperienceSettings, analyse_records
from valuation.experience.implied import NO_AMOUNTS_NOTE
from valuation.mortality.laws import SULT_LAW

from .test_experience_analysis import LawRates, deaths_frame

SETTINGS = ExperienceSettings(period_start=date(2020, 12, 31), period_end=date(2021, 12, 31), exposure="initial")
YEAR = 365 / 365.25
N_FULL = (norm.ppf(0.95) / 0.05) ** 2
Z95 = norm.ppf(0.975)

#: (status, sex, age on 1 Jan 2021, pension) of each member; the percentage of each group's table.
MEMBERS = [
    ("pensioner", "M", 70, 1000.0),
    ("pensioner", "M", 70, 2000.0),
    ("pensioner", "M", 70, 3000.0),
    ("pensioner", "M", 70, 4000.0),
    ("dependant", "F", 80, 500.0),
    ("dependant", "F", 80, 500.0),
    ("dependant", "F", 80, 1000.0),
    ("active", "M", 40, 0.0),
    ("active", "M", 40, 0.0),
]
PERCENT = {"pensioner": 1.0, "dependant": 1.2, "active": 0.9}
#: A pensioner (pension 4,000) and an active die; no dependant does.
DEATHS = [("M00003", "2021-06-30", None), ("M00007", "2021-03-03", None)]


def _records() -> pl.DataFrame:
    return pl.DataFrame(
        {
            "row": list(range(2, len(MEMBERS) + 2)),
            "member_id": [f"M{i:05d}" for i in range(len(MEMBERS))],
            "status": [m[0] for m in MEMBERS],
            "sex": [m[1] for m in MEMBERS],
            "date_of_birth": [date(2021 - m[2], 1, 1) for m in MEMBERS],
            "pension": [m[3] for m in MEMBERS],
        }
    )


def _lookup(group: str, sex: str) -> LawRates:
    return LawRates(PERCENT[group])


def _run(**kwargs: object):  # noqa: ANN202
    return analyse_records(_records(), deaths_frame(DEATHS), None, _lookup, SETTINGS, **kwargs)  # type: ignore[arg-type]


def _hand(group: str, dead: list[float]) -> dict[str, float]:
    """The table's figures worked by hand from the member list."""
    lives = [m for m in MEMBERS if m[0] == group]
    e = [PERCENT[group] * float(SULT_LAW.qx(float(m[2]))) * YEAR for m in lives]
    w = [m[3] for m in lives]
    e_w = sum(wi * ei for wi, ei in zip(w, e, strict=True))
    var = sum(wi**2 * ei for wi, ei in zip(w, e, strict=True))
    ae = sum(dead) / e_w
    half = Z95 * math.sqrt(var) / e_w
    z = min(1.0, math.sqrt(sum(e) / N_FULL))
    pct = 100 * PERCENT[group]
    return {
        "expected_amounts": e_w, "ae_amounts": ae, "ae_amounts_lower": max(ae - half, 0.0),
        "ae_amounts_upper": ae + half, "credibility": z, "implied_percentage": pct * (z * ae + 1 - z),
        "lower": pct * (z * max(ae - half, 0.0) + 1 - z), "upper": pct * (z * (ae + half) + 1 - z),
        "expected_lives_at_risk": sum(e),
    }


def test_each_tables_own_ae_credibility_and_implied_percentage_by_hand() -> None:
    rows = {r["table"]: r for r in _run().implied["by_table"]}
    assert set(rows) == {"mortality.pensioner.M", "mortality.dependant.F", "mortality.active.M"}
    for key, dead in (("mortality.pensioner.M", [4000.0]), ("mortality.dependant.F", [])):
        got, hand = rows[key], _hand(key.split(".")[1], dead)
        for name, value in hand.items():
            assert got[name] == pytest.approx(value, rel=1e-12), (key, name)
        assert got["actual_amounts"] == sum(dead)
    pens = rows["mortality.pensioner.M"]
    assert (pens["group"], pens["sex"], pens["members"], pens["current_percentage"]) == (
        "pensioner", "M", ["pensioner"], 100.0
    )
    assert rows["mortality.dependant.F"]["current_percentage"] == pytest.approx(120.0, rel=1e-12)
    # its own A/E, not the overall one: the dependants' implied percentage moves the other way from the
    # pensioners' because their own A/E is below 100 % and the pensioners' above
    assert rows["mortality.dependant.F"]["ae_amounts"] < 1 < pens["ae_amounts"]
    assert rows["mortality.dependant.F"]["implied_percentage"] < 120.0
    assert pens["implied_percentage"] > 100.0


def test_actives_have_no_amounts_at_risk_and_show_none() -> None:
    """Actives' pension at risk is 0: no A/E by amounts, no credibility, no implied percentage (the
    table percentage is kept), though their deaths are counted by lives."""
    res = _run()
    act = next(r for r in res.implied["by_table"] if r["table"] == "mortality.active.M")
    for name in ("ae_amounts", "ae_amounts_lower", "ae_amounts_upper", "credibility", "implied_percentage",
                 "lower", "upper"):
        assert act[name] is None, name
    assert act["note"] == NO_AMOUNTS_NOTE
    assert act["actual_lives"] == 1.0 and act["expected_amounts"] == 0.0
    row = res.by_table.filter(pl.col("table") == "mortality.active.M").row(0, named=True)
    assert row["implied_percentage"] is None and row["credibility"] is None


def test_overall_line_credibility_counts_only_lives_with_a_pension() -> None:
    """The overall line keeps the overall A/E by amounts; its credibility uses the expected deaths of the
    lives with a pension (the actives' weigh nothing in amounts, so they add no credibility). With
    different current percentages there is no single implied percentage, and the note says why."""
    res = _run()
    o = res.implied["overall"]
    at_risk = _hand("pensioner", [4000.0])["expected_lives_at_risk"] + _hand("dependant", [])[
        "expected_lives_at_risk"
    ]
    assert o["expected_lives_at_risk"] == pytest.approx(at_risk, rel=1e-12)
    assert o["credibility"] == pytest.approx(math.sqrt(at_risk / N_FULL), rel=1e-12)
    assert o["ae_amounts"] == pytest.approx(res.overall()["ae_amounts"], rel=1e-15)
    assert res.implied["multiplier"] == o["ae_amounts"]
    assert o["implied_percentage"] is None and "differ by group and sex" in res.implied["note"]


def test_groups_that_share_an_entry_are_judged_together() -> None:
    """With a basis-like key (pensioners and actives both use the default table for men, as under the
    fallback rule of the basis), the table's row holds both groups' cells: the pensioners' amounts, and
    the actives' lives."""

    def key(group: str, sex: str) -> str:
        return f"mortality.default.{sex}" if group in ("pensioner", "active") else f"mortality.{group}.{sex}"

    def lookup(group: str, sex: str) -> LawRates:
        return LawRates(1.0 if group in ("pensioner", "active") else 1.2)

    res = analyse_records(_records(), deaths_frame(DEATHS), None, lookup, SETTINGS, table_key=key)  # type: ignore[arg-type]
    rows = {r["table"]: r for r in res.implied["by_table"]}
    assert set(rows) == {"mortality.default.M", "mortality.dependant.F"}
    default = rows["mortality.default.M"]
    assert default["members"] == ["pensioner", "active"] and default["group"] == "default"
    hand = _hand("pensioner", [4000.0])
    assert default["ae_amounts"] == pytest.approx(hand["ae_amounts"], rel=1e-12)
    assert default["credibility"] == pytest.approx(hand["credibility"], rel=1e-12)
    assert default["actual_lives"] == 2.0  # the pensioner's death and the active's
    # the two tables now have different current percentages (100 % and 120 %)
    assert res.implied["implied_percentage"] is None


def test_credibility_standard_follows_the_settings() -> None:
    """p = 95 %, k = 10 % gives n_F = (1.95996 / 0.1)^2 = 384.1 (Longley-Cook's table: 384, from memory)."""
    settings = ExperienceSettings(
        period_start=SETTINGS.period_start, period_end=SETTINGS.period_end, exposure="initial",
        credibility_probability=0.95, credibility_tolerance=0.10,
    )
    res = analyse_records(_records(), deaths_frame(DEATHS), None, _lookup, settings)  # type: ignore[arg-type]
    std = res.implied["credibility_standard"]
    assert round(std["full_expected_deaths"]) == 384
    pens = next(r for r in res.implied["by_table"] if r["table"] == "mortality.pensioner.M")
    e = _hand("pensioner", [4000.0])["expected_lives_at_risk"]
    assert pens["credibility"] == pytest.approx(math.sqrt(e / std["full_expected_deaths"]), rel=1e-12)
    assert "384 expected deaths" in std["text"]
