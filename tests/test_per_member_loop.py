"""The straightforward per-member loop (benchmarks/per_member_loop.py), which the benchmark times the
engine against, values the same pensioners with known spouses as the engine does.

Both compute [DHW] eq. (5.12) and section 9.5 (Dickson, Hardy & Waters, *Actuarial Mathematics for Life
Contingent Risks*, 2nd ed., 2013) on the same monthly grid with the same l under uniform deaths between
ages [DHW section 3.3]: one month by month for one member, the other on keys in a compiled kernel. They
must agree to rounding (rel 1e-9 allows for the loop's step-by-step survival products).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import polars as pl
import pytest

from benchmarks.per_member_loop import LoopBasis, value_pensioner_with_spouse
from tests.engine_helpers import members
from valuation.basis import load_basis
from valuation.engine.run import project_records
from valuation.vocabulary import tranche_column

ROOT = Path(__file__).resolve().parents[1]

ROWS = [
    {"status": "pensioner", "sex": "M", "date_of_birth": dt.date(1955, 7, 19), "pension": 12000.0,
     "spouse_date_of_birth": dt.date(1958, 2, 3)},
    {"status": "pensioner", "sex": "F", "date_of_birth": dt.date(1940, 12, 31), "pension": 5400.0,
     "spouse_date_of_birth": dt.date(1936, 6, 15), "spouse_fraction": 0.6},
    {"status": "pensioner", "sex": "M", "date_of_birth": dt.date(1960, 3, 1), "pension": 20000.0,
     "spouse_date_of_birth": dt.date(1990, 9, 9), "guarantee_end": dt.date(2029, 4, 30)},
    {"status": "pensioner", "sex": "F", "date_of_birth": dt.date(1925, 2, 28), "pension": 800.0,
     "spouse_date_of_birth": dt.date(1922, 1, 1)},
]


def test_loop_agrees_with_engine_on_demo_basis():
    """Monthly in advance, generational improvement, two tranches with increase rules, an increase date:
    the demo basis as it stands."""
    basis = load_basis(ROOT / "assumptions" / "demo_basis.toml")
    tranches = tuple(basis.tranches)
    recs = members(ROWS, tranches)
    # a second tranche (another increase rule) on every record: a quarter of the first
    recs = recs.with_columns((pl.col(tranche_column(tranches[0])) * 0.25).alias(tranche_column(tranches[1])))
    engine = project_records(recs, basis).liability
    lb = LoopBasis.from_basis(basis)
    for i, row in enumerate(recs.iter_rows(named=True)):
        assert value_pensioner_with_spouse(lb, row) == pytest.approx(engine[i], rel=1e-9)
