"""The analysis of change (valuation/engine/change.py, pipeline.change) against its defining properties and
the policy-value recursion: the expected closing liability of a closed group of pensioners on an unchanged
basis is (V_0 - B)(1 + i) = p V_1 (Dickson, Hardy & Waters, AMLCR, ch. 7; Bowers et al., ch. 8); with both
bases equal and experience exactly as expected every item is zero; the items add up to closing - opening;
swapping the order of two assumption steps changes the split but not the total (common practice: a stepwise
analysis is order-dependent, its total is not); IAS 19 paras 140-141 name the lines."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from tests.test_rollforward import T0, T1, _basis, _pensioners, members
from valuation.pipeline import change

ROOT = Path(__file__).resolve().parents[1]
DEMO_ARGS = (ROOT / "assumptions" / "demo_basis_2022.toml", ROOT / "member_data_demo" / "members_start.csv",
             ROOT / "assumptions" / "demo_basis.toml", ROOT / "member_data_demo" / "members.csv")


def _expected_survivors(b0, start):
    import numpy as np
    import polars as pl

    from valuation.engine.project import Valuer
    from valuation.survival import age_at

    valuer = Valuer(b0)
    x0 = np.asarray(age_at(np.asarray(start["date_of_birth"].to_numpy(), dtype="datetime64[D]"),
                           np.datetime64(T0, "D"), "exact"), dtype=float)
    rows = valuer.bc.rows("pensioner", start["sex"].to_numpy().astype(str), x0)
    p = valuer.bc.l(rows, x0 + 1.0) / valuer.bc.l(rows, x0)
    return start.with_columns((pl.col("pension") * 1.02 * pl.Series(p)).alias("pension")).with_columns(
        pl.col("pension").alias("pension_main"))


def test_experience_as_expected_on_an_unchanged_basis_leaves_nothing_to_explain(tmp_path):
    b0, b1 = _basis(tmp_path, T0, "b0.toml"), _basis(tmp_path, T1, "b1.toml")
    start = members(_pensioners())
    run = change(b0, start, b1, _expected_survivors(b0, start))
    a = run.analysis
    opening = a.amount("opening")
    assert a.amount("experience") == pytest.approx(0.0, abs=1e-9 * opening)
    for step in ("demographic", "financial", "other"):
        assert a.amount(step) == 0.0
    # the expected closing liability is the recursion's p V_1: the closing valuation of the survivors
    assert a.amount("expected_closing") == pytest.approx(a.amount("closing"), rel=1e-10)
    assert a.amount("service_cost") == 0.0


def test_the_demo_items_add_up_and_the_order_moves_only_the_split():
    first = change(*DEMO_ARGS).analysis
    swapped = change(*DEMO_ARGS, order=("financial", "demographic", "other")).analysis
    for a in (first, swapped):
        assert abs(a.check()) <= 1e-9 * a.amount("closing")
        assert a.amount("closing") == pytest.approx(362_582_929.78, rel=1e-10)  # the demo valuation (README)
    assert first.amount("financial") != pytest.approx(swapped.amount("financial"), rel=1e-6)
    assert (first.amount("financial") + first.amount("demographic")
            == pytest.approx(swapped.amount("financial") + swapped.amount("demographic"), rel=1e-12))
    for key in ("opening", "service_cost", "interest", "benefits_paid", "experience", "demographic", "financial"):
        assert first.amount(key) != 0.0, key
    # yields rose from 3.2 % to 4.8 % and expected inflation fell: the financial change lowers the liability
    assert first.amount("financial") < 0


def test_benefits_paid_replace_the_expected_payments_and_the_difference_is_experience():
    expected = change(*DEMO_ARGS).analysis
    given = change(*DEMO_ARGS, benefits_paid=30_000_000.0).analysis
    assert given.amount("benefits_paid") == -30_000_000.0
    moved = expected.amount("benefits_paid") - given.amount("benefits_paid")
    assert given.amount("experience") - expected.amount("experience") == pytest.approx(moved, rel=1e-9)
    assert given.amount("closing") == expected.amount("closing")
    assert not any("benefits paid" in n for n in given.notes)
    assert any("benefits paid" in n for n in expected.notes)


def test_change_command_writes_change_json_and_csv(tmp_path):
    from valuation.cli import main

    out = tmp_path / "ch"
    assert main(["change", *map(str, DEMO_ARGS), "--out", str(out), "-q"]) == 0
    saved = json.loads((out / "change.json").read_text(encoding="utf-8"))
    assert [x["key"] for x in saved["lines"]] == ["opening", "service_cost", "interest", "benefits_paid",
                                                  "expected_closing", "experience", "demographic", "financial",
                                                  "other", "closing"]
    assert abs(saved["check"]) < 1e-3
    assert (out / "change.csv").read_text(encoding="utf-8").startswith("key,label,amount,valuation")
    # the bases in the wrong order are refused
    assert main(["change", str(DEMO_ARGS[2]), str(DEMO_ARGS[3]), str(DEMO_ARGS[0]), str(DEMO_ARGS[1]),
                 "--out", str(tmp_path / "no"), "-q"]) == 3
    assert not (tmp_path / "no").exists()


def test_the_disclosure_note_reconciles_the_obligation():
    """IAS 19 para 140-141: opening DBO + service cost + interest + remeasurements + other - benefits = closing
    DBO, each remeasurement from its own step."""
    a = change(*DEMO_ARGS).analysis
    rows = a.disclosure()
    assert rows[0][1] == a.amount("opening") and rows[-1][1] == a.amount("closing")
    assert sum(v for _, v in rows[:-1]) == pytest.approx(rows[-1][1], rel=1e-12)
    assert dict(rows)["Remeasurement: experience adjustments"] == a.amount("experience")


def test_run_with_a_previous_basis_values_the_opening_on_that_basis(tmp_path):
    """Review finding: the run's analysis of change reads the start membership on the previous basis's own
    rules (here its retirement age 62), so its opening equals the stand-alone analysis's."""
    from valuation.pipeline import ExperienceInputs, run

    text = DEMO_ARGS[0].read_text(encoding="utf-8").replace("retirement_age = 65", "retirement_age = 62")
    assert "retirement_age = 62" in text
    prev62 = tmp_path / "prev62.toml"
    prev62.write_text(text, encoding="utf-8")
    alone = change(prev62, DEMO_ARGS[1], DEMO_ARGS[2], DEMO_ARGS[3]).analysis
    from datetime import date

    from valuation.experience import ExperienceSettings

    inputs = ExperienceInputs(start_members=DEMO_ARGS[1], deaths=ROOT / "member_data_demo" / "deaths.csv",
                              settings=ExperienceSettings(period_start=date(2022, 3, 31), period_end=date(2025, 3, 31)),
                              exits=ROOT / "member_data_demo" / "exits.csv")
    outcome = run(DEMO_ARGS[2], DEMO_ARGS[3], sensitivities=False, reports=False, experience=inputs,
                  previous_basis=prev62)
    assert outcome.change is not None
    assert outcome.change.analysis.amount("opening") == pytest.approx(alone.amount("opening"), rel=1e-12)
    assert outcome.change.analysis.amount("experience") == pytest.approx(alone.amount("experience"), rel=1e-9)


def test_the_same_members_twice_and_two_currencies_are_refused(tmp_path):
    from valuation.errors import BasisError, DataError

    with pytest.raises(DataError, match="same file"):
        change(DEMO_ARGS[0], DEMO_ARGS[1], DEMO_ARGS[2], DEMO_ARGS[1])
    eur = tmp_path / "eur.toml"
    eur.write_text(DEMO_ARGS[2].read_text(encoding="utf-8").replace('currency = "GBP"', 'currency = "EUR"'),
                   encoding="utf-8")
    with pytest.raises(BasisError, match="GBP and the current one in EUR"):
        change(DEMO_ARGS[0], DEMO_ARGS[1], eur, DEMO_ARGS[3])


def test_the_experience_is_split_by_what_happened_to_the_members():
    """Valuations add up over members, so each movement group's value now less its expected value now (its
    own roll-forward) adds up to the experience line; the deaths file only moves the dead members' amount
    from 'unexplained' to 'died' (the same members, the same values)."""
    demo = ROOT / "member_data_demo"
    told = change(*DEMO_ARGS, deaths=demo / "deaths.csv", exits=demo / "exits.csv").analysis
    split = {x.key: x.amount for x in told.experience_split}
    assert sum(split.values()) == pytest.approx(told.amount("experience"), rel=1e-9)
    assert split["experience:death"] < 0 < split["experience:new_entrant"]
    assert split["experience:benefits_paid"] == 0.0
    untold = change(*DEMO_ARGS, exits=demo / "exits.csv").analysis
    loose = {x.key: x.amount for x in untold.experience_split}
    assert "experience:death" not in loose
    assert loose["experience:unexplained"] == pytest.approx(split["experience:death"], rel=1e-9)
    assert untold.amount("experience") == pytest.approx(told.amount("experience"), rel=1e-12)


def test_as_expected_the_split_is_empty_too(tmp_path):
    b0, b1 = _basis(tmp_path, T0, "b0.toml"), _basis(tmp_path, T1, "b1.toml")
    start = members(_pensioners())
    a = change(b0, start, b1, _expected_survivors(b0, start)).analysis
    for line in a.experience_split:
        assert line.amount == pytest.approx(0.0, abs=1e-9 * a.amount("opening")), line.key


def test_the_trustees_words_name_the_largest_parts_of_the_experience():
    from valuation.engine.change import AnalysisOfChange
    from valuation.reports.content import change_words, experience_words

    demo = ROOT / "member_data_demo"
    a = change(*DEMO_ARGS, deaths=demo / "deaths.csv", exits=demo / "exits.csv").analysis
    words = change_words(a, "GBP")
    assert "members who died (down GBP" in words and "financial assumptions (down GBP" in words
    assert experience_words(AnalysisOfChange(a.lines, a.order), "GBP") == ""


def test_bases_not_a_whole_number_of_months_apart_are_refused(tmp_path):
    from valuation.errors import BasisError

    odd = tmp_path / "odd.toml"
    odd.write_text(DEMO_ARGS[2].read_text(encoding="utf-8").replace("valuation_date = 2025-03-31",
                                                                     "valuation_date = 2025-03-15"), encoding="utf-8")
    with pytest.raises(BasisError, match="not a whole number of months after the previous one"):
        change(DEMO_ARGS[0], DEMO_ARGS[1], odd, DEMO_ARGS[3])
