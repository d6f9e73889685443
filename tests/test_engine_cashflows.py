"""cashflows.csv reconciles by hand: on every row total x discount_factor = discounted_total, and the
discounted totals add up to the liability.

Source: the present value of cash flows is sum_t v^t CF_t (Dickson, Hardy & Waters, AMLCR, 2nd ed.,
section 2.2); a year's factor is the payment-weighted average of its monthly discount factors, so it
reproduces that year's discounted payments exactly. Tolerances: a product and a quotient of two floats
(a few ulps, rtol 1e-12); the liability and the cash flows are the same sum taken member by member and
month by month (rtol 1e-12).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import polars as pl
import pytest

from tests.engine_helpers import dob_for_age, members, sult_toml, write_basis
from valuation.basis import load_basis
from valuation.engine.results import ValuationResult
from valuation.engine.run import RunAccumulator
from valuation.members import read_members
from valuation.pipeline import write_run

ROOT = Path(__file__).resolve().parents[1]


def _value(basis, records: pl.DataFrame) -> ValuationResult:
    acc = RunAccumulator(basis, sensitivities=False)
    acc.add(records)
    n = records.height
    counts = pl.DataFrame({"status": ["all"], "read": [n], "valued": [n], "excluded": [0]})
    return acc.finish(read=n, valued=n, excluded=0, counts=counts, exceptions=pl.DataFrame(), inputs={},
                      started=dt.datetime.now(dt.timezone.utc), run_seconds=0.0, settings={})


def test_demo_cashflows_file_reconciles(tmp_path):
    basis = load_basis(ROOT / "assumptions" / "demo_basis.toml")
    res = _value(basis, read_members(ROOT / "member_data_demo" / "members.csv", basis).records)
    out = write_run(res, tmp_path / "run")
    cf = pl.read_csv(out / "cashflows.csv")
    assert cf.columns == ["year", "pensioner", "dependant", "deferred", "active", "total", "discount_factor",
                          "discounted_total"]
    total, factor, disc = (cf[c].to_numpy() for c in ("total", "discount_factor", "discounted_total"))
    np.testing.assert_allclose(total * factor, disc, rtol=1e-12, atol=0)
    assert disc.sum() == pytest.approx(res.summary.liability.total, rel=1e-12)
    # the payment-weighted factor lies between the year's first and last monthly factors
    v = 1.048 ** -np.arange(len(cf))
    assert np.all((factor <= v) & (factor >= v / 1.048))


def test_year_without_payments_shows_the_mid_year_factor(tmp_path):
    """A deferred member retiring in three years: years 1 to 3 have no payments; their factor is the
    mid-year factor v^(k - 1/2) and their discounted total is 0."""
    basis = write_basis(tmp_path, sult_toml(frequency=12, valuation_date="2025-01-01"))
    recs = members([{"status": "deferred", "sex": "M", "date_of_birth": dob_for_age(dt.date(2025, 1, 1), 62),
                     "pension": 1200.0}])
    res = _value(basis, recs)
    cf = res.cashflows
    np.testing.assert_allclose(cf["discount_factor"][:3].to_numpy(), 1.05 ** -(np.arange(3) + 0.5), rtol=1e-14)
    assert cf["discounted_total"][:3].to_list() == [0.0, 0.0, 0.0]
    total, factor, disc = (cf[c].to_numpy() for c in ("total", "discount_factor", "discounted_total"))
    np.testing.assert_allclose(total * factor, disc, rtol=1e-12, atol=0)
    assert disc.sum() == pytest.approx(res.summary.liability.total, rel=1e-12)
