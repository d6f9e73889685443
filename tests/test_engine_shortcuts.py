"""The run's shortcuts give what valuing everything again would give.

A sensitivity that changes only the inflation curve values pensions in payment from the base's expected
payments per unit of the increase index (PV = sum_t v^t CF_t, Dickson, Hardy & Waters 2013 section 2.2,
with CF_t the base's expected payment times the ratio of the two indices); salary-growth sensitivities
re-value only the members whose benefits depend on salary; keys are worked out once a chunk and shared by
every scenario. Each must equal the full re-valuation to rounding (an identity, so rel 1e-12).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from valuation.basis import load_basis
from valuation.engine.run import RunAccumulator, project_records
from valuation.engine.scenario import scenarios_from_basis
from valuation.members import read_members

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def demo():
    basis = load_basis(ROOT / "assumptions" / "demo_basis.toml")
    data = read_members(ROOT / "member_data_demo" / "members.csv", basis)
    return basis, data.records


def test_sensitivities_equal_full_revaluation(demo):
    basis, records = demo
    acc = RunAccumulator(basis, sensitivities=True)
    acc.add(records)
    checked = 0
    for sc in scenarios_from_basis(basis, basis.valuation_date.year):
        if sc.kind == "discount_rate":
            continue  # from the cash flows (tests/test_engine_reference.py)
        full = project_records(records, basis, sc).liability.sum()
        assert acc.scenario_totals[sc.name] == pytest.approx(full, rel=1e-12), sc.name
        checked += 1
    assert checked >= 3  # inflation, salary growth and a mortality change at least, in the demo basis
