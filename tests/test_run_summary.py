"""The typed run summary (valuation/engine/summary.py) against the summary.json contract.

Sources: the contract is the README's list of summary.json keys (section "Outputs") and summary.json as
the tool writes it; JSON values and text per RFC 8259 (Python's ``json`` module). Reading a summary and
writing it again is an identity, checked exactly: same keys, same order (compared as the JSON text the
tool writes), same values (the numbers are read and written unchanged, with no arithmetic, so equality is
exact).
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path
from typing import Any

import pytest

from valuation.basis import load_basis
from valuation.engine.results import ValuationResult
from valuation.engine.stream import value_file_streaming
from valuation.engine.summary import RunSummary
from valuation.members import synth_scheme, to_admin_format, write_scheme
from valuation.pipeline import value_scheme, write_run

ROOT = Path(__file__).resolve().parents[1]
BASIS = ROOT / "assumptions" / "demo_basis.toml"
MEMBERS = ROOT / "member_data_demo" / "members.csv"


def _text(d: Any) -> str:
    """The JSON text the tool writes (indented, keys in their order)."""
    return json.dumps(d, indent=2, sort_keys=False)


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> tuple[ValuationResult, dict[str, Any]]:
    res = value_scheme(BASIS, MEMBERS)
    out = write_run(res, tmp_path_factory.mktemp("run") / "demo")
    return res, json.loads((out / "summary.json").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def streamed(tmp_path_factory: pytest.TempPathFactory) -> tuple[ValuationResult, dict[str, Any]]:
    """A synthetic scheme (all four statuses, 5 % of records with a data problem) in the administrator's
    layout, streamed in chunks of 400 records."""
    basis = load_basis(BASIS)
    tmp = tmp_path_factory.mktemp("stream")
    frame = synth_scheme(1500, seed=41, valuation_date=basis.valuation_date, dirty=0.05)
    path = write_scheme(to_admin_format(frame, basis.mapping), tmp / "members.csv")
    res = value_file_streaming(basis, path, chunk_rows=400, member_results_path=tmp / "members_out.parquet")
    out = write_run(res, tmp / "run")
    return res, json.loads((out / "summary.json").read_text(encoding="utf-8"))


@pytest.mark.parametrize("which", ["demo", "streamed"])
def test_summary_json_reads_and_writes_back_unchanged(which: str, request: pytest.FixtureRequest) -> None:
    """to_json(from_json(d)) is d: the same keys in the same order, the same values."""
    res, written = request.getfixturevalue(which)
    again = RunSummary.from_json(written).to_json()
    assert again == written
    assert _text(again) == _text(written)
    # and the result's own summary is what was written
    assert _text(json.loads(json.dumps(res.summary.to_json()))) == _text(written)
    assert RunSummary.from_json(written) == res.summary


def test_streamed_run_has_exclusions_and_the_streaming_setting(streamed: tuple[ValuationResult, dict]) -> None:
    res, written = streamed
    assert res.summary.records.excluded > 0
    assert res.summary.records.read == res.summary.records.valued + res.summary.records.excluded == 1500
    assert written["manifest"]["settings"]["streaming"] is True


def _readme_keys() -> list[tuple[str, ...]]:
    """The key paths the README lists for summary.json: ``key {a, b}`` nests a and b in key's object,
    ``key [{a, b}]`` in each item of key's list (a list item is written ``[]`` in the path)."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    start = readme.index("`summary.json` holds at least")
    sentence = readme[start + len("`summary.json` holds at least"):readme.index("\n\n", start)]
    tokens = re.findall(r"`(\w+)`|([{}\[\]])", sentence)
    paths: list[tuple[str, ...]] = []
    stack: list[tuple[str, ...]] = [()]
    last: tuple[str, ...] = ()
    previous = ""
    for name, bracket in tokens:
        if name:
            last = (*stack[-1], name)
            paths.append(last)
        elif bracket == "[":
            stack.append((*last, "[]"))
        elif bracket == "{":
            stack.append(stack[-1] if previous == "[" else last)
        else:
            stack.pop()
        previous = bracket
    return paths


def _has(tree: Any, path: tuple[str, ...]) -> bool:
    if not path:
        return True
    head, rest = path[0], path[1:]
    if head == "[]":
        return isinstance(tree, list) and bool(tree) and all(_has(item, rest) for item in tree)
    return isinstance(tree, dict) and head in tree and _has(tree[head], rest)


def test_the_readme_keys_are_all_in_to_json(demo: tuple[ValuationResult, dict]) -> None:
    """Every key the README promises (README.md, "summary.json holds at least ...") is in to_json()."""
    paths = _readme_keys()
    assert ("valuation_date",) in paths and ("records", "by_status") in paths
    assert ("sensitivities", "[]", "change_pct") in paths and ("expected_deaths_next_year", "by_group") in paths
    assert len(paths) >= 30
    d = demo[0].summary.to_json()
    missing = [".".join(p) for p in paths if not _has(d, p)]
    assert missing == []


def test_attributes_hold_the_json_values(demo: tuple[ValuationResult, dict]) -> None:
    res, d = demo
    s = res.summary
    assert s.valuation_date.isoformat() == d["valuation_date"] == "2025-03-31"
    assert s.liability.total == d["liability"]["total"]
    assert dict(s.liability.by_status) == d["liability"]["by_status"]
    assert s.liability.tranches | {"lump_sums": s.liability.lump_sums} == d["liability"]["by_tranche"]
    assert [r.change_pct for r in s.sensitivities] == [r["change_pct"] for r in d["sensitivities"]]
    assert s.records.by_status["active"].valued == d["records"]["by_status"]["active"]["valued"]
    assert s.currency == d["manifest"]["basis"]["currency"] == "GBP"
    assert s.assumptions.rate("discount") == (d["assumptions"]["discount_rate_flat"], True)
    assert res.total_liability == s.liability.total


def test_an_undefined_figure_is_nan_here_and_null_in_the_json(demo: tuple[ValuationResult, dict]) -> None:
    """The single equivalent rate of a scheme with no payments is undefined: null in JSON (RFC 8259 has no
    NaN), NaN on the object, and null again when written."""
    d = json.loads(json.dumps(demo[1]))
    d["single_equivalent_discount_rate"] = None
    s = RunSummary.from_json(d)
    assert math.isnan(s.single_equivalent_discount_rate)
    assert s.to_json()["single_equivalent_discount_rate"] is None
    assert s.to_json() == d


@pytest.mark.parametrize(("change", "message"), [
    (lambda d: d["liability"]["by_status"].update(retired=1.0),
     "liability.by_status should be one of pensioner, dependant, deferred, active, not retired"),
    (lambda d: d["duration"].pop("modified"), "duration.modified is missing"),
    (lambda d: d["records"].update(read="2869"), "records.read should be a whole number, not text"),
    (lambda d: d["sensitivities"][2].update(colour="red"), "sensitivities[2].colour is not part of the summary"),
    (lambda d: d.update(valuation_date="31/03/2025"), "valuation_date should be an ISO date (YYYY-MM-DD)"),
])
def test_a_summary_off_the_contract_is_refused_naming_the_key(demo: tuple[ValuationResult, dict], change: Any,
                                                                message: str) -> None:
    d = json.loads(json.dumps(demo[1]))
    change(d)
    with pytest.raises(ValueError, match=re.escape(message)):
        RunSummary.from_json(d)


def test_the_result_reads_a_dictionary_once_and_keeps_a_summary(demo: tuple[ValuationResult, dict]) -> None:
    res, d = demo
    frames = {name: getattr(res, name) for name in ValuationResult.FRAMES}
    from_dict = ValuationResult(summary=d, **frames)
    assert isinstance(from_dict.summary, RunSummary) and from_dict.summary == res.summary
    assert ValuationResult(summary=res.summary, **frames).summary is res.summary
