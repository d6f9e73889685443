"""Membership movements (valuation/movements): each member classified by the stated rules, and the
reconciliation by status balancing exactly (start + movements = end), checked on generated histories whose
true movements are known (hypothesis), on the demo scheme (whose generator, valuation/members/demo.py, says
what happened), and through the command line. The reconciliation of membership is common practice in
valuation reports."""

from __future__ import annotations

import json
from datetime import date, timedelta
from pathlib import Path

import polars as pl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from valuation.movements import MOVEMENTS, classify_movements, membership_movements
from valuation.vocabulary import STATUSES

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "member_data_demo"
START, END = date(2022, 3, 31), date(2025, 3, 31)

#: What can happen to a member of each status over the period, and the movement the rules must find.
EVENTS: dict[str, list[tuple[str, str | None, str]]] = {
    # status at start -> (event, status at end (None: gone), expected movement)
    "active": [("stay", "active", "continuing"), ("withdraw", "deferred", "withdrawal"),
               ("retire", "pensioner", "retirement"), ("die", None, "death"), ("vanish", None, "unexplained"),
               ("odd", "dependant", "unexplained")],
    "deferred": [("stay", "deferred", "continuing"), ("retire", "pensioner", "retirement"),
                 ("rejoin", "active", "reinstated"), ("die", None, "death"),
                 ("transfer", None, "transfer_out"), ("settle", None, "lump_sum_settlement"),
                 ("other", None, "other_exit"), ("vanish", None, "unexplained")],
    "pensioner": [("stay", "pensioner", "continuing"), ("die", None, "death"), ("vanish", None, "unexplained"),
                  ("odd", "active", "unexplained")],
    "dependant": [("stay", "dependant", "continuing"), ("die", None, "death"),
                  ("cease", None, "child_pension_ceased"), ("cease_by_age", None, "child_pension_ceased"),
                  ("vanish", None, "unexplained")],
}
EXIT_REASON = {"transfer": "transfer_out", "settle": "lump_sum", "other": "emigrated", "cease": "child_pension_ended"}


def _history(draw_events: list[tuple[str, int]], joiners: list[str]) -> tuple:
    """Previous and current extracts, deaths and exits, and the true movement of every member."""
    prev, curr, deaths, exits, truth = [], [], [], [], {}
    for i, (status, pick) in enumerate(draw_events):
        event, end_status, movement = EVENTS[status][pick % len(EVENTS[status])]
        mid = f"M{i:05d}"
        dob = date(1950, 1, 1) + timedelta(days=97 * i % 20000)
        end_age = None
        if status == "dependant":
            dob = date(2008, 6, 1) if event == "cease_by_age" else date(2010, 6, 1)
            end_age = 16.0 if event == "cease_by_age" else 23.0  # 16 reached in 2024; 23 not by 2025
        prev.append({"member_id": mid, "row": i + 2, "status": status, "sex": "MF"[i % 2], "date_of_birth": dob,
                     "pension_end_age": end_age})
        if end_status is not None:
            curr.append({"member_id": mid, "row": len(curr) + 2, "status": end_status, "sex": "MF"[i % 2],
                         "date_of_birth": dob, "pension_end_age": end_age})
        if event == "die":
            deaths.append({"member_id": mid, "date": date(2023, 5, 1)})
        if event in EXIT_REASON:
            exits.append({"member_id": mid, "date": date(2023, 6, 1), "reason": EXIT_REASON[event]})
        truth[mid] = movement
    for j, status in enumerate(joiners):
        mid = f"N{j:05d}"
        curr.append({"member_id": mid, "row": len(curr) + 2, "status": status, "sex": "F",
                     "date_of_birth": date(1995, 1, 1), "pension_end_age": None})
        truth[mid] = {"active": "new_entrant", "dependant": "new_dependant"}.get(status, "unexplained")
    schema = {"member_id": pl.String, "row": pl.Int64, "status": pl.String, "sex": pl.String,
              "date_of_birth": pl.Date, "pension_end_age": pl.Float64}
    frames = (pl.DataFrame(prev, schema=schema), pl.DataFrame(curr, schema=schema),
              pl.DataFrame(deaths, schema={"member_id": pl.String, "date": pl.Date}),
              pl.DataFrame(exits, schema={"member_id": pl.String, "date": pl.Date, "reason": pl.String}))
    return (*frames, truth)


@settings(max_examples=60, deadline=None)
@given(
    draw_events=st.lists(st.tuples(st.sampled_from(STATUSES), st.integers(0, 20)), min_size=0, max_size=80),
    joiners=st.lists(st.sampled_from(STATUSES), max_size=10),
)
def test_generated_histories_are_classified_and_balance(draw_events, joiners):
    """Every generated member gets the movement its history implies; the table balances on every status
    (start + movements = end), its start and end columns count the extracts, and every unexplained member
    is an exception."""
    prev, curr, deaths, exits, truth = _history(draw_events, joiners)
    res = classify_movements(prev, curr, deaths=deaths, exits=exits, period_start=START, period_end=END)
    found = dict(zip(res.members["member_id"].to_list(), res.members["movement"].to_list(), strict=True))
    assert found == truth
    assert res.balances()
    table = res.table.filter(pl.col("status") != "total")
    for row in table.iter_rows(named=True):
        s = row["status"]
        assert row["start"] == prev.filter(pl.col("status") == s).height
        assert row["end"] == curr.filter(pl.col("status") == s).height
        assert row["start"] + sum(row[m] for m in MOVEMENTS) == row["end"]
    total = res.table.filter(pl.col("status") == "total").row(0, named=True)
    assert total["start"] == prev.height and total["end"] == curr.height
    unexplained = {m for m, v in truth.items() if v == "unexplained"}
    assert set(res.exceptions["member_id"].to_list()) >= unexplained
    assert res.deaths["matched"] == sum(v == "death" for v in truth.values())


def test_changed_date_of_birth_is_flagged_not_absorbed():
    prev, curr, _, _, _ = _history([("pensioner", 0), ("active", 0)], [])
    curr = curr.with_columns(pl.when(pl.col("member_id") == "M00000").then(date(1960, 2, 2))
                             .otherwise(pl.col("date_of_birth")).alias("date_of_birth"))
    res = classify_movements(prev, curr, period_start=START, period_end=END)
    row = res.members.filter(pl.col("member_id") == "M00000").row(0, named=True)
    assert row["movement"] == "continuing" and row["data_changed"]
    exc = res.exceptions.filter(pl.col("member_id") == "M00000").row(0, named=True)
    assert exc["column"] == "date_of_birth" and "1960-02-02" in exc["value"]


def test_a_death_of_a_member_still_present_is_an_exception():
    prev, curr, _, _, _ = _history([("pensioner", 0)], [])
    deaths = pl.DataFrame({"member_id": ["M00000"], "date": [date(2023, 1, 1)]})
    res = classify_movements(prev, curr, deaths=deaths, period_start=START, period_end=END)
    assert res.members["movement"].to_list() == ["continuing"]
    assert res.deaths == {"matched": 0, "deaths_file_only": 1, "extracts_only": 0}
    assert res.exceptions.height == 1


@pytest.fixture(scope="module")
def demo_run():
    from valuation.basis import load_basis

    return membership_movements(load_basis(ROOT / "assumptions" / "demo_basis.toml"), DEMO / "members_start.csv",
                                DEMO / "members.csv", period_start=START, period_end=END,
                                deaths_path=DEMO / "deaths.csv", exits_path=DEMO / "exits.csv")


def test_demo_movements_match_how_the_demo_was_made(demo_run):
    """member_data_demo/README.md and valuation/members/demo.py: over the three years members died with the
    basis's q, deferreds transferred out, children's pensions ended (the exits file), actives and deferreds
    past 65 retired, and 60 young actives joined; nothing else happened, so nothing is unexplained."""
    res = demo_run.result
    counts = res.counts()
    assert res.balances()
    assert counts["unexplained"] == 0 and counts["withdrawal"] == 0 and counts["reinstated"] == 0
    assert counts["death"] == demo_run.events["deaths"]["counted"]
    assert counts["transfer_out"] + counts["child_pension_ceased"] == demo_run.events["exits"]["applied"]
    assert counts["new_entrant"] == 60
    total = res.table.filter(pl.col("status") == "total").row(0, named=True)
    assert (total["start"], total["end"]) == (demo_run.previous.valued, demo_run.current.valued)
    pensioner = res.table.filter(pl.col("status") == "pensioner").row(0, named=True)
    assert pensioner["retirement"] == counts["retirement"] > 0
    assert res.deaths == {"matched": counts["death"], "deaths_file_only": 0, "extracts_only": 0}


def test_movements_command_writes_its_folder(tmp_path):
    from valuation.cli import main

    out = tmp_path / "mv"
    code = main(["movements", str(ROOT / "assumptions" / "demo_basis.toml"), str(DEMO / "members_start.csv"),
                 str(DEMO / "members.csv"), "--period-start", "2022-03-31", "--period-end", "2025-03-31",
                 "--deaths", str(DEMO / "deaths.csv"), "--exits", str(DEMO / "exits.csv"), "--out", str(out), "-q"])
    assert code == 0
    assert {p.name for p in out.iterdir()} == {"manifest.json", "movements.json", "movements.csv",
                                               "movement_members.csv", "movements_exceptions.csv"}
    summary = json.loads((out / "movements.json").read_text(encoding="utf-8"))
    assert summary["balances"] is True
    assert summary["records"]["previous"]["read"] == 3000
    table = pl.read_csv(out / "movements.csv")
    assert table.columns == ["status", "start", *MOVEMENTS, "end"]
    manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
    assert manifest["command"] == "movements" and len(manifest["inputs"]) == 5
    # a second run into the same folder is refused without --overwrite, and nothing is changed
    before = (out / "movements.json").read_bytes()
    code = main(["movements", str(ROOT / "assumptions" / "demo_basis.toml"), str(DEMO / "members_start.csv"),
                 str(DEMO / "members.csv"), "--period-start", "2022-03-31", "--period-end", "2025-03-31",
                 "--out", str(out), "-q"])
    assert code == 3 and (out / "movements.json").read_bytes() == before


def test_a_member_excluded_from_one_extract_is_not_taken_for_a_death_or_a_joiner():
    """A record the current extract excluded for its data problems is absent from the valid records: it is
    unexplained with that reason, not a death, an exit or a new entrant, and not an 'extracts only' death."""
    prev, curr, _, _, _ = _history([("pensioner", 0), ("active", 0)], ["active"])
    curr = curr.filter(pl.col("member_id") != "M00000")
    prev = prev.filter(pl.col("member_id") != "N00000")
    res = classify_movements(prev, curr, period_start=START, period_end=END,
                             excluded_ids=pl.Series(["M00000", "N00000"]))
    moves = dict(zip(res.members["member_id"].to_list(), res.members["movement"].to_list(), strict=True))
    assert moves == {"M00000": "unexplained", "M00001": "continuing", "N00000": "unexplained"}
    assert res.deaths["extracts_only"] == 0
    assert set(res.exceptions["reason"].to_list()) == {
        "the record is valid in one extract and excluded from the other for its data problems (see that file's "
        "exceptions): its movement cannot be told"}


def test_careless_calls_are_refused(tmp_path):
    """The same file twice is a mistake (exit 3); an extract with more exclusions than the basis allows
    stops as a valuation does (exit 4, demo_dirty: 20 of 40 records excluded) unless accepted."""
    from valuation.cli import main

    basis = str(ROOT / "assumptions" / "demo_basis.toml")
    dates = ["--period-start", "2022-03-31", "--period-end", "2025-03-31", "-q"]
    assert main(["movements", basis, str(DEMO / "members.csv"), str(DEMO / "members.csv"), *dates,
                 "--out", str(tmp_path / "a")]) == 3
    assert main(["movements", basis, str(DEMO / "members_start.csv"), str(DEMO / "members_dirty.csv"), *dates,
                 "--out", str(tmp_path / "b")]) == 4
    assert not (tmp_path / "a").exists() and not (tmp_path / "b").exists()
    assert main(["movements", basis, str(DEMO / "members_start.csv"), str(DEMO / "members_dirty.csv"), *dates,
                 "--out", str(tmp_path / "c"), "--accept-exclusions"]) == 0


def test_an_exit_without_a_reason_is_still_an_exit_and_reasons_are_read_as_words():
    """Review finding: the exits file's reason is optional; an exit with none is an ``other_exit`` (kept with
    '(no reason given)'), never a departure with no record; 'Transfer out' reads as transfer_out."""
    prev, curr, _, _, _ = _history([("deferred", 0), ("deferred", 0), ("deferred", 0)], [])
    curr = curr.filter(pl.col("member_id") == "M00002")
    exits = pl.DataFrame({"member_id": ["M00000", "M00001"], "date": [date(2023, 1, 1)] * 2,
                          "reason": [None, " Transfer out "]}, schema={"member_id": pl.String, "date": pl.Date,
                                                                        "reason": pl.String})
    res = classify_movements(prev, curr, exits=exits, period_start=START, period_end=END)
    moves = dict(zip(res.members["member_id"].to_list(), res.members["movement"].to_list(), strict=True))
    assert moves == {"M00000": "other_exit", "M00001": "transfer_out", "M00002": "continuing"}
    assert res.deaths["extracts_only"] == 0 and res.exceptions.height == 0
    no_column = exits.drop("reason").head(1)
    res = classify_movements(prev.head(1), curr.head(0), exits=no_column, period_start=START, period_end=END)
    assert res.members["movement"].to_list() == ["other_exit"]


def test_a_childs_pension_ending_on_the_period_end_is_seen_by_the_age_convention():
    """Review finding: a dependant born 2000-03-31 with an end age of 25 is exactly 25 on 2025-03-31 (exact
    age, the member checks' count), so the pension has ceased; days / 365.25 said 24.997."""
    schema = {"member_id": pl.String, "row": pl.Int64, "status": pl.String, "sex": pl.String,
              "date_of_birth": pl.Date, "pension_end_age": pl.Float64}
    prev = pl.DataFrame([{"member_id": "X1", "row": 2, "status": "dependant", "sex": "F",
                          "date_of_birth": date(2000, 3, 31), "pension_end_age": 25.0}], schema=schema)
    res = classify_movements(prev, prev.head(0), period_start=START, period_end=END)
    assert res.members["movement"].to_list() == ["child_pension_ceased"]
