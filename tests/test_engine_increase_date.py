"""Pension increases fall on the scheme's increase date; the first increase after a pension starts.

Hand computations: with a fixed increase r granted on the increase date, a pension in payment at the
valuation date is multiplied by (1 + r) at each increase date after the valuation date (payments on or
after the date carry it). A pension that starts later has its first increase on the first increase date
after it starts, n months later: full (1 + r), proportionate (1 + r n / 12: one twelfth of the increase for
each month in payment) or none until a full year has passed; the later increases are full. These scheme
rules are common practice in UK defined-benefit schemes (no single published source). Deferred
revaluation runs from the valuation date to retirement, (1 + r)^t for a fixed rate (common practice).

Survival, where a check needs it, is computed here from the SULT's Makeham law (A = 0.00022,
B = 2.7e-6, c = 1.124; Dickson, Hardy & Waters, AMLCR, 2nd ed., Appendix D) with uniform distribution of
deaths between integer ages [DHW section 3.3.1].
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from tests.engine_helpers import members, sult_toml, write_basis
from tests.test_engine_spouse_before_retirement import _l
from valuation.engine.context import increase_month
from valuation.engine.run import project_records
from valuation.errors import BasisError

VD = dt.date(2025, 1, 1)


def _basis(tmp_path, payment="", rate=0.03, revaluation='kind = "none"', name="basis.toml"):
    text = sult_toml(frequency=12, increase=f'kind = "fixed", rate = {rate}', revaluation=revaluation)
    return write_basis(tmp_path, text.replace("[payment]", f"[payment]\n{payment}"), name=name)


@pytest.mark.parametrize("valuation,month_day,expected", [
    (dt.date(2025, 1, 1), (4, 1), 3),     # 1 January -> 1 April: the payment on 1 April carries it
    (dt.date(2025, 3, 31), (4, 1), 1),    # 31 March -> 1 April: the next grid date is 30 April
    (dt.date(2025, 4, 1), (4, 1), 12),    # on the valuation date: the data already includes it
    (dt.date(2025, 1, 15), (1, 10), 12),  # 10 January 2026: first grid date on or after it, 15 January
    (dt.date(2025, 1, 5), (1, 10), 1),    # 10 January 2025: the grid date 5 February carries it
    (dt.date(2025, 1, 31), (2, 28), 1),   # 31 January + 1 month = 28 February (month end)
    (dt.date(2025, 1, 31), (3, 1), 2),    # 28 February is before 1 March; 31 March carries it
    (dt.date(2025, 6, 30), None, 12),     # no increase date: anniversaries of the valuation date
])
def test_first_increase_month_by_hand(valuation, month_day, expected):
    """Grid date tau = valuation date + tau calendar months; an increase steps at the first grid date on
    or after the increase date that follows the valuation date (hand-counted calendar months)."""
    assert increase_month(valuation, month_day) == expected


def test_pensioner_increases_on_the_increase_date_not_the_valuation_anniversary(tmp_path):
    """Valuation 1 January 2025, increases of 3 % on 1 April, monthly in advance, payments certain for
    5 years (guarantee to 1 January 2030 = 60 months): the payment in month tau is P/12 x 1.03^k with k
    the number of 1 Aprils from 2025 to the payment date (months 3, 15, 27, 39, 51)."""
    basis = _basis(tmp_path, 'increase_date = "04-01"')
    recs = members([{"status": "pensioner", "sex": "M", "date_of_birth": dt.date(1955, 1, 1), "pension": 1200.0,
                     "guarantee_end": dt.date(2030, 1, 1)}])
    cash = project_records(recs, basis).cashflow.sum(axis=0)
    tau = np.arange(60)
    k = (tau >= 3).astype(int) + (tau >= 15) + (tau >= 27) + (tau >= 39) + (tau >= 51)
    np.testing.assert_allclose(cash[:60], 100.0 * 1.03**k, rtol=1e-14)
    # without an increase date, increases fall on the anniversaries (months 12, 24, ...): today's rule
    plain = project_records(recs, _basis(tmp_path, name="plain.toml")).cashflow.sum(axis=0)
    np.testing.assert_allclose(plain[:60], 100.0 * 1.03 ** (tau // 12), rtol=1e-14)
    # an increase date on the valuation date's month and day is the same rule, to the bit
    same = project_records(recs, _basis(tmp_path, 'increase_date = "01-01"', name="same.toml")).cashflow
    assert np.array_equal(same.sum(axis=0), plain)


@pytest.mark.parametrize("rule,at_15,at_27", [
    ("full", 1.03, 1.03**2),
    ("proportionate", 1 + 0.03 * 9 / 12, (1 + 0.03 * 9 / 12) * 1.03),
    ("none_until_full_year", 1.0, 1.03),
])
def test_deferred_first_increase_after_retirement(tmp_path, rule, at_15, at_27):
    """Deferred born 1 July 1960: exact age 64 + 184/365 on 1 January 2025, retiring at 65 in grid month
    rint(0.496 x 12) = 6 (1 July 2025). Revaluation 3 % a year to retirement: 1.03^(6/12). Increases of
    3 % on 1 April: the first after retirement is 1 April 2026 (month 15), after 9 months in payment."""
    basis = _basis(tmp_path, f'increase_date = "04-01"\nfirst_increase = "{rule}"',
                   revaluation='kind = "fixed", rate = 0.03')
    recs = members([{"status": "deferred", "sex": "F", "date_of_birth": dt.date(1960, 7, 1), "pension": 1200.0}])
    cash = project_records(recs, basis).cashflow.sum(axis=0)
    x0 = 64 + 184 / 365
    tau = np.arange(6, 39)
    surv = _l(x0 + tau / 12.0) / _l(np.array(x0))
    steps = np.where(tau < 15, 1.0, np.where(tau < 27, at_15, at_27))
    expected = 100.0 * 1.03**0.5 * steps * surv
    assert np.all(cash[:6] == 0.0)
    np.testing.assert_allclose(cash[6:39], expected, rtol=1e-12)


@pytest.mark.parametrize("value,words", [
    ('"13-01"', "MM-DD"), ('"02-29"', "29 February"), ('"4-1"', "MM-DD"), ('"April"', "MM-DD"),
])
def test_bad_increase_date_is_named(tmp_path, value, words):
    text = sult_toml().replace("[payment]", f"[payment]\nincrease_date = {value}")
    with pytest.raises(BasisError) as err:
        write_basis(tmp_path, text)
    assert "payment.increase_date" in str(err.value) and words in str(err.value)


def test_bad_first_increase_rule_is_named(tmp_path):
    text = sult_toml().replace("[payment]", '[payment]\nfirst_increase = "pro_rata"')
    with pytest.raises(BasisError) as err:
        write_basis(tmp_path, text)
    msg = str(err.value)
    assert "payment.first_increase" in msg and "proportionate" in msg and "none_until_full_year" in msg
