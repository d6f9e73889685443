"""A spouse's pension on a death before retirement is fixed at the death, then increases in payment.

Each engine figure is checked against an independent computation written here: a loop over the months of
payment, summing over the month of the member's death, for one member at a time. Survival in both comes
from the SULT's Makeham law (A = 0.00022, B = 2.7e-6, c = 1.124; Dickson, Hardy & Waters, *Actuarial
Mathematics for Life Contingent Risks*, 2nd ed., Appendix D), q_x = 1 - 1p_x at integer ages with q_120 = 1,
and uniform distribution of deaths between integer ages [DHW section 3.3.1]. The reversionary payment is
paid while the spouse lives after the member's death, independent lives [DHW section 9.5].

The rule (common practice in UK defined-benefit scheme rules): the amount is set at the date of death
(deferred: the pension revalued to the death; active: the pension accrued to the death on salary at death,
or the prospective pension with service to normal retirement age attributed straight-line from joining to
the death, IAS 19 para 70), and from then on receives the increases in payment of its tranche. A death in
month (d - 1, d] fixes the amount at grid month d; withdrawals happen at mid-year.

Tolerance: the two computations add the same ~10^5 terms in a different order, so they agree to about
1e-13 relative; 1e-11 is asserted.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from tests.engine_helpers import dob_for_age, members, sult_toml, write_basis
from valuation.engine.run import project_records
from valuation.mortality.laws import SULT_LAW

VD = dt.date(2025, 1, 1)
RATE = 0.05  # discount rate [per annum]
REV = 0.03  # fixed revaluation in deferment [per annum]
INC = 0.02  # fixed increase in payment [per annum]
RTOL = 1e-11


def _l(age: np.ndarray) -> np.ndarray:
    """l at fractional ages from the SULT's Makeham law, UDD between integer ages [DHW 3.3.1]."""
    ages = np.arange(121)
    q = np.where(ages >= 120, 1.0, SULT_LAW.qx(np.maximum(ages, 20).astype(float)))
    l_int = np.concatenate([[1.0], np.cumprod(1.0 - q)])
    a = np.clip(np.asarray(age, dtype=float), 0.0, 121.0)
    j = np.minimum(np.floor(a).astype(int), 120)
    return l_int[j] * (1.0 - (a - j) * q[j])


def _steps_between(a: int, b: int, first_month: int) -> int:
    """Increase months first_month + 12 k in (a, b]."""
    return sum(1 for t in range(first_month, b + 1, 12) if t > a)


def _increase(start: int, tau: int, first_month: int = 12, rule: str = "full") -> float:
    """Increases in payment of a pension that starts in month ``start``, to month ``tau``."""
    n_steps = _steps_between(start, tau, first_month)
    if n_steps == 0:
        return 1.0
    first = next(t for t in range(first_month, tau + 1, 12) if t > start)
    months_paid = first - start
    if rule == "proportionate":
        return (1.0 + INC * months_paid / 12.0) * (1.0 + INC) ** (n_steps - 1)
    if rule == "none_until_full_year" and months_paid < 12:
        return (1.0 + INC) ** (n_steps - 1)
    return (1.0 + INC) ** n_steps


def _reversion(x0, y0, start, at_death, at_start, first_month=12, rule="full", months=1464):
    """PV per unit of base of a spouse's pension paid monthly in advance.

    at_death(d): amount fixed at a death in month d < start; at_start: the member's pension at the start,
    which a death from the start on passes to the spouse with the member's own increases.
    """
    d = np.arange(months)
    dead = 1.0 - _l(x0 + d / 12.0) / _l(np.array(x0))  # F(d), member dead by month d
    alive_y = _l(y0 + d / 12.0) / _l(np.array(y0))
    fixed = np.array([at_death(k) if 1 <= k < start else 0.0 for k in range(months)])
    pv = 0.0
    for tau in range(months):
        if alive_y[tau] == 0.0:
            break
        expected = 0.0
        for k in range(1, min(tau, start - 1) + 1):  # deaths before the start: fixed at k, increased from k
            expected += (dead[k] - dead[k - 1]) * fixed[k] * _increase(k, tau, first_month, rule)
        if tau >= start:  # deaths from the start on: the member's pension
            before = dead[start - 1] if start >= 1 else 0.0
            expected += (dead[tau] - before) * at_start * _increase(start, tau, first_month, rule)
        pv += (1 + RATE) ** (-tau / 12.0) * alive_y[tau] * expected / 12.0
    return pv


def _basis(tmp_path, extra="", payment=""):
    text = sult_toml(frequency=12, increase=f'kind = "fixed", rate = {INC}',
                     revaluation=f'kind = "fixed", rate = {REV}',
                     spouse="proportion_married = { M = 0.0, F = 0.0 }\nage_difference = 3.0\nfraction = 0.5",
                     extra=extra)
    return write_basis(tmp_path, text.replace("[payment]", f"[payment]\n{payment}"))


@pytest.mark.parametrize("payment,first_month,rule", [
    ("", 12, "full"),  # increases on the anniversaries of the valuation date, first increase in full
    ('increase_date = "04-01"\nfirst_increase = "proportionate"', 3, "proportionate"),  # 1 April: 3 months on
    ('increase_date = "10-01"\nfirst_increase = "none_until_full_year"', 9, "none_until_full_year"),
])
def test_deferred_spouse_pension_fixed_at_death(tmp_path, payment, first_month, rule):
    """Deferred, aged 50, retiring at 65 (month 180); known spouse aged 47; 3 % revaluation, 2 % increases.

    The spouse's pension on a death in month d < 180 is f P 1.03^(d/12), then increases from d."""
    basis = _basis(tmp_path, payment=payment)
    recs = members([{"status": "deferred", "sex": "M", "date_of_birth": dob_for_age(VD, 50), "pension": 3000.0,
                     "spouse_date_of_birth": dob_for_age(VD, 47), "spouse_fraction": 0.5}])
    proj = project_records(recs, basis)
    unit = _reversion(50.0, 47.0, 180, lambda d: (1 + REV) ** (d / 12.0), (1 + REV) ** 15.0, first_month, rule)
    assert proj.pensions["spouse_pension"].sum() == pytest.approx(0.5 * 3000.0 * unit, rel=RTOL)


def _active_reference(x0, n, salary, service, g, w, accrual, prospective):
    """(amount fixed at a death in month d, pension at retirement), per unit of accrual x service x salary.

    Withdrawal w a year at each mid-year i + 1/2 < n; a leaver keeps the pension on salary at exit,
    revalued at REV to retirement or to an earlier death [DHW 10.5-10.6]; in service at death, salary at
    death (times (service + n) / (service + t) for the prospective pension attributed to service to date).
    """
    exits = [i for i in range(n + 1) if i + 0.5 < n]

    def at_death(d):
        t = d / 12.0
        gone = [i for i in exits if 12 * i + 6 < d]
        stay = (1 - w) ** len(gone)
        in_service = (1 + g) ** t * ((service + n) / (service + t) if prospective else 1.0)
        leavers = sum((1 - w) ** i * w * (1 + g) ** (i + 0.5) * (1 + REV) ** (t - i - 0.5) for i in gone)
        return stay * in_service + leavers

    at_ret = (1 - w) ** len(exits) * (1 + g) ** n + sum(
        (1 - w) ** i * w * (1 + g) ** (i + 0.5) * (1 + REV) ** (n - i - 0.5) for i in exits)
    return at_death, at_ret


@pytest.mark.parametrize("choice", ["accrued_to_death", "prospective_to_nra"])
def test_active_spouse_pension_fixed_at_death_after_withdrawal(tmp_path, choice):
    """Active, aged 45 with 10 years' service on 40,000, retiring at 65; salary growth 3.5 %, withdrawal 4 %
    a year; known spouse aged 43. A leaver's spouse follows the deferred rule."""
    extra = ('[salary]\ngrowth = 0.035\n[benefits]\naccrual_rate = "1/60"\nretirement_age = 65\n'
             '[withdrawal]\nrates = [[18, 0.04]]\n')
    basis = _basis(tmp_path, extra=extra)
    text = basis.source_path.read_text().replace("fraction = 0.5", f'fraction = 0.5\npre_retirement_active = "{choice}"')
    basis = write_basis(tmp_path, text, name="b2.toml")
    recs = members([{"status": "active", "sex": "F", "date_of_birth": dob_for_age(VD, 45), "pension": 0.0,
                     "salary": 40000.0, "service_years": 10.0, "spouse_date_of_birth": dob_for_age(VD, 43),
                     "spouse_fraction": 0.5}])
    proj = project_records(recs, basis)
    at_death, at_ret = _active_reference(45.0, 20, 40000.0, 10.0, 0.035, 0.04, 1 / 60, choice != "accrued_to_death")
    unit = _reversion(45.0, 43.0, 240, at_death, at_ret)
    base = 40000.0 * 10.0 / 60.0
    assert proj.pensions["spouse_pension"].sum() == pytest.approx(0.5 * base * unit, rel=RTOL)


def test_prospective_spouse_pension_refused_for_career_average(tmp_path):
    """A prospective pension counts service to retirement, which a career-average design does not use."""
    from valuation.errors import BasisError

    text = sult_toml(extra='[benefits]\ndesign = "career_average"\n').replace(
        "fraction = 0.5", 'fraction = 0.5\npre_retirement_active = "prospective_to_nra"')
    with pytest.raises(BasisError, match="spouse.pre_retirement_active.*career-average"):
        write_basis(tmp_path, text)
