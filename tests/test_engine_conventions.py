"""The engine's timing conventions, each pinned by a hand computation (the README's "Conventions" table
links here).

Survival is computed here from the SULT's Makeham law (A = 0.00022, B = 2.7e-6, c = 1.124; Dickson, Hardy &
Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed., Appendix D, and eq. (2.29) for the
closed form at whole years), with uniform distribution of deaths between integer ages [DHW section 3.3.1].
Rounding dates to the month and withdrawal at mid-year are the tool's stated conventions (common practice).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from tests.engine_helpers import dob_for_age, members, sult_toml, write_basis
from tests.test_engine_spouse_before_retirement import _l
from valuation.engine.run import project_records
from valuation.mortality.laws import SULT_LAW

VD = dt.date(2025, 1, 1)


@pytest.mark.parametrize("retirement_age,first_month", [(63 + 14.4 / 12, 14), (63 + 14.6 / 12, 15)])
def test_retirement_month_is_the_nearest_month(tmp_path, retirement_age, first_month):
    """A deferred aged exactly 63 retiring 14.4 (14.6) months later is paid from grid month 14 (15)."""
    basis = write_basis(tmp_path, sult_toml(frequency=12))
    recs = members([{"status": "deferred", "sex": "M", "date_of_birth": dob_for_age(VD, 63), "pension": 1200.0,
                     "retirement_age": retirement_age}])
    cash = project_records(recs, basis).cashflow.sum(axis=0)
    assert np.flatnonzero(cash)[0] == first_month
    assert cash[first_month] == pytest.approx(100.0 * _l(np.array(63 + first_month / 12)) / _l(np.array(63.0)),
                                              rel=1e-12)


@pytest.mark.parametrize("end,certain_to", [(dt.date(2030, 1, 20), 61), (dt.date(2030, 1, 10), 60)])
def test_guarantee_end_is_the_nearest_month(tmp_path, end, certain_to):
    """Guarantee ends 1,845 (1,835) days after the valuation date: 1845 / 365.25 x 12 = 60.6 months -> 61;
    1835 / 365.25 x 12 = 60.3 -> 60. Payments before that month are certain, from it on they need survival."""
    basis = write_basis(tmp_path, sult_toml(frequency=12))
    recs = members([{"status": "pensioner", "sex": "F", "date_of_birth": dob_for_age(VD, 70), "pension": 1200.0,
                     "guarantee_end": end}])
    cash = project_records(recs, basis).cashflow.sum(axis=0)
    assert np.all(cash[:certain_to] == 100.0)
    surv = _l(np.array(70 + certain_to / 12)) / _l(np.array(70.0))
    assert cash[certain_to] == pytest.approx(100.0 * surv, rel=1e-12)


def test_withdrawal_at_mid_year_on_the_rate_for_the_age_at_the_start_of_the_year(tmp_path):
    """Projected unit credit with withdrawal [DHW 10.5-10.6]: an active aged 45, retiring in n = 20 years,
    leaves in projection year i (at i + 1/2) with the rate for age 45 + i (5 % to age 50, then 2 %), keeping
    the pension on salary at exit, revalued at r = 3 % to retirement; stayers' salary grows at g = 4 %:

        factor = prod_i (1 - w_i) (1 + g)^n + sum_i prod_{k<i} (1 - w_k) w_i (1 + g)^(i + 1/2) (1 + r)^(n - i - 1/2).

    Paid annually in advance from 65 with no increases: P x factor x 20|a-due_45 (Makeham closed form)."""
    extra = ('[salary]\ngrowth = 0.04\n[benefits]\naccrual_rate = "1/60"\nretirement_age = 65\n'
             '[withdrawal]\nrates = [[18, 0.05], [50, 0.02]]\n')
    basis = write_basis(tmp_path, sult_toml(extra=extra, revaluation='kind = "fixed", rate = 0.03'))
    recs = members([{"status": "active", "sex": "M", "date_of_birth": dob_for_age(VD, 45), "pension": 0.0,
                     "salary": 30000.0, "service_years": 15.0}])
    own = project_records(recs, basis).pensions["member_pension"].sum()
    i = np.arange(20)
    w = np.where(45 + i < 50, 0.05, 0.02)
    stay_before = np.concatenate([[1.0], np.cumprod(1 - w)[:-1]])
    factor = np.prod(1 - w) * 1.04**20 + (stay_before * w * 1.04 ** (i + 0.5) * 1.03 ** (20 - i - 0.5)).sum()
    k = np.arange(20, 121)
    annuity = ((1.05 ** -k) * SULT_LAW.tpx(45.0, k.astype(float)) * (45 + k < 120)).sum()
    assert own == pytest.approx(30000.0 * 15.0 / 60.0 * factor * annuity, rel=1e-10)


def test_first_projection_year_uses_the_valuation_years_rates(tmp_path):
    """Constant improvement 2 % a year from base year 2020 (SOA MP-2014 report, generational form):
    q(x, y) = q(x, 2020) 0.98^(y - 2020). A woman of exact age 70.5 on 1 January 2025 (born 1 July 1954:
    184 / 365 of a year past her birthday) uses q(70, 2025) for the rest of her year of age 70, then
    q(71, 2026), q(72, 2027), ...: the year of age holding the valuation date takes the valuation year's
    rates. Annual payments in advance; survival to 71.5 and 72.5 by UDD within each year of age."""
    basis = write_basis(tmp_path, sult_toml(improvement='{ kind = "constant", rate = 0.02 }'))
    recs = members([{"status": "pensioner", "sex": "F", "date_of_birth": dt.date(1954, 7, 1), "pension": 1.0}])
    cash = project_records(recs, basis).cashflow.sum(axis=0)
    x0 = 70 + 184 / 365
    s = x0 - 70

    def q(age, year):
        return float(SULT_LAW.qx(float(age))) * 0.98 ** (year - 2020)

    p1 = (1 - q(70, 2025)) / (1 - s * q(70, 2025)) * (1 - s * q(71, 2026))
    p2 = p1 * (1 - q(71, 2026)) / (1 - s * q(71, 2026)) * (1 - s * q(72, 2027))
    assert cash[0] == pytest.approx(1.0, rel=1e-15)
    assert cash[12] == pytest.approx(p1, rel=1e-12)
    assert cash[24] == pytest.approx(p2, rel=1e-12)
