"""experience.json against its declared types (valuation/experience/summary.py): the reports and the command
line read the analysis's summary through those types, so the keys the analysis writes must be exactly the
keys declared, level by level (a project contract, checked on the demo's analysis as written to disk)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any, get_args, get_origin, get_type_hints, is_typeddict

from valuation.experience.summary import ExperienceSummary

from .test_experience_run import DEMO, DEMO_SETTINGS, ROOT


def _declared(tp: Any) -> Any:
    """The TypedDict behind a field's type (through ``X | None`` and ``NotRequired[X]``), or None."""
    if is_typeddict(tp):
        return tp
    for arg in get_args(tp):
        found = _declared(arg)
        if found is not None and get_origin(tp) is not dict:
            return found
    return None


def _check(value: Any, tp: type, where: str, problems: list[str]) -> None:
    keys = set(value)
    required, optional = set(tp.__required_keys__), set(tp.__optional_keys__)  # type: ignore[attr-defined]
    problems += [f"{where}: '{k}' is written but not declared" for k in sorted(keys - required - optional)]
    problems += [f"{where}: '{k}' is declared but not written" for k in sorted(required - keys)]
    hints = get_type_hints(tp)
    for key in keys & (required | optional):
        inner = _declared(hints[key])
        item = value[key]
        if inner is not None and isinstance(item, dict):
            _check(item, inner, f"{where}.{key}", problems)
        elif isinstance(item, list):
            args = get_args(hints[key])
            inner = next((_declared(a) for a in args if _declared(a) is not None), None)
            for i, element in enumerate(item):
                if inner is not None and isinstance(element, dict):
                    _check(element, inner, f"{where}.{key}[{i}]", problems)
        elif get_origin(hints[key]) is dict and isinstance(item, dict):  # by_group: dict[str, list[AERow]]
            (value_tp,) = get_args(hints[key])[1:]
            inner = _declared(get_args(value_tp)[0]) if get_args(value_tp) else None
            for name, rows in item.items():
                for i, element in enumerate(rows if isinstance(rows, list) else []):
                    if inner is not None:
                        _check(element, inner, f"{where}.{key}.{name}[{i}]", problems)


def test_demo_experience_json_has_exactly_the_declared_keys(tmp_path: Path) -> None:
    from valuation.pipeline import ExperienceInputs, experience_only

    inputs = ExperienceInputs(start_members=DEMO / "members_start.csv", deaths=DEMO / "deaths.csv",
                              settings=DEMO_SETTINGS, exits=DEMO / "exits.csv")
    res = experience_only(ROOT / "assumptions" / "demo_basis.toml", inputs, valuation_members=DEMO / "members.csv")
    res.write(tmp_path)
    written = json.loads((tmp_path / "experience.json").read_text(encoding="utf-8"))
    problems: list[str] = []
    _check(written, ExperienceSummary, "experience.json", problems)
    assert not problems, "\n".join(problems)
    assert written["implied"]["by_table"], "the demo has mortality tables to check"


def test_a_key_off_the_declaration_is_reported() -> None:
    """The check itself finds a key written but not declared, and one declared but missing."""
    problems: list[str] = []
    _check({"total": 1, "excluded": 0, "extra": 2}, get_type_hints(ExperienceSummary)["exceptions"],
           "exceptions", problems)
    assert problems == ["exceptions: 'extra' is written but not declared",
                        "exceptions: 'warning' is declared but not written"]
