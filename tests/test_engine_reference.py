"""The valuation engine against outside references.

Sources:
- [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
  Appendix D (Standard Ultimate Life Table, SULT) — published a-due values at 5 %, printed to 4 decimals;
  section 9.5 (reversionary annuity a_{x|y} = a_y - a_xy); eq. (2.29) Makeham survival.
- the SOA Mortality Improvement Scale MP-2014 report (generational projection): constant improvement q(x, y) = q(x, b)(1 - r)^(y - b).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from tests.engine_helpers import dob_for_age, members, sult_toml, write_basis
from valuation.engine.run import cashflow_measures, project_records
from valuation.mortality.laws import SULT_LAW

VD = dt.date(2025, 1, 1)


def test_pensioners_on_sult_equal_published_annuity_factors(tmp_path):
    """Level pensions paid annually in advance on the SULT at 5 %: liability = sum of P x a-due_x.

    Published values [DHW Appendix D]: a-due_60 = 14.9041, a-due_65 = 13.5498 (printed to 4 decimals).
    """
    basis = write_basis(tmp_path, sult_toml())
    recs = members([
        {"status": "pensioner", "sex": "M", "date_of_birth": dob_for_age(VD, 60), "pension": 1000.0},
        {"status": "pensioner", "sex": "F", "date_of_birth": dob_for_age(VD, 65), "pension": 2500.0},
        {"status": "pensioner", "sex": "M", "date_of_birth": dob_for_age(VD, 65), "pension": 100.0},
    ])
    proj = project_records(recs, basis)
    published = np.array([14.9041, 13.5498, 13.5498])
    pensions = np.array([1000.0, 2500.0, 100.0])
    np.testing.assert_allclose(proj.annuity_factor, published, atol=5e-5)
    assert proj.liability.sum() == pytest.approx((pensions * published).sum(), abs=5e-5 * pensions.sum())


def _closed_form_annuity_due(ages_x, ages_y, i, n=121):
    """a-due_y - a-due_xy from Makeham's closed-form survival [DHW eq. 2.29], independent of the engine."""
    k = np.arange(n)
    v = (1 + i) ** -k
    px = SULT_LAW.tpx(ages_x, k) * (ages_x + k < 120)
    py = SULT_LAW.tpx(ages_y, k) * (ages_y + k < 120)
    return (v * py).sum() - (v * px * py).sum()


def test_known_spouse_reversion_equals_f_p_ay_minus_axy(tmp_path):
    """A spouse's pension f x P after the member's death = f x P x (a-due_y - a-due_xy) [DHW 9.5]."""
    basis = write_basis(tmp_path, sult_toml())
    recs = members([
        {"status": "pensioner", "sex": "M", "date_of_birth": dob_for_age(VD, 70), "pension": 12000.0,
         "spouse_date_of_birth": dob_for_age(VD, 66), "spouse_fraction": 0.5},
    ])
    proj = project_records(recs, basis)
    expected = 0.5 * 12000.0 * _closed_form_annuity_due(70.0, 66.0, 0.05)
    # the table stops at 120 (q_120 = 1); the closed form is truncated the same way
    assert proj.pensions["spouse_pension"].sum() == pytest.approx(expected, rel=1e-9)


def test_constant_improvement_against_hand_formula(tmp_path):
    """Constant improvement r: q(x, y) = q(x, b)(1 - r)^(y - b) (SOA MP-2014 report, generational form), valued by hand.

    A member aged 70 in 2025 uses q(70 + k, 2025 + k) in projection year k (the cohort convention).
    """
    r = 0.02
    basis = write_basis(tmp_path, sult_toml(improvement=f'{{ kind = "constant", rate = {r} }}'))
    recs = members([{"status": "pensioner", "sex": "F", "date_of_birth": dob_for_age(VD, 70), "pension": 1.0}])
    proj = project_records(recs, basis)
    ages = np.arange(70, 121)
    q_base = SULT_LAW.qx(ages.astype(float))
    q = np.minimum(1.0, q_base * (1 - r) ** (2025 + (ages - 70) - 2020))
    q[ages >= 120] = 1.0
    surv = np.concatenate([[1.0], np.cumprod(1 - q)])[: len(ages)]
    by_hand = (surv * 1.05 ** -np.arange(len(ages))).sum()
    assert proj.annuity_factor[0] == pytest.approx(by_hand, rel=1e-10)


def test_monthly_annuity_close_to_woolhouse(tmp_path):
    """Monthly in advance on the SULT at 5 %: the exact sum is close to Woolhouse's three-term value.

    [DHW] eq. (5.11) and Example 5.11: the three-term approximation agrees with the exact monthly annuity
    to about 3 decimals for SULT at 5 %.
    """
    basis = write_basis(tmp_path, sult_toml(frequency=12))
    recs = members([{"status": "pensioner", "sex": "M", "date_of_birth": dob_for_age(VD, 65), "pension": 1.0}])
    exact = project_records(recs, basis).annuity_factor[0]
    delta = np.log(1.05)
    mu65 = float(SULT_LAW.force(65.0))
    wool = 13.5498 - 11 / 24 - 143 / 1728 * (mu65 + delta)  # a-due_65 published [DHW App. D]
    assert exact == pytest.approx(wool, abs=2e-3)


def test_cashflows_at_single_equivalent_rate_reproduce_curve_pv(tmp_path):
    """Discounting the expected cash flows at the single equivalent rate gives the curve's PV.

    Definition of the single equivalent discount rate: IAS 19 para 83 (a single rate in place of a curve).
    """
    curve = tmp_path / "curve.csv"
    curve.write_text("term,rate\n1,0.03\n5,0.035\n10,0.04\n20,0.045\n30,0.047\n", encoding="utf-8")
    text = sult_toml().replace('[discount]\nrate = 0.05', '[discount]\ncurve = "curve.csv"')
    basis = write_basis(tmp_path, text)
    recs = members([
        {"status": "pensioner", "sex": "M", "date_of_birth": dob_for_age(VD, a), "pension": 1000.0 + a}
        for a in range(55, 95, 3)
    ])
    proj = project_records(recs, basis)
    cash = proj.cashflow.sum(axis=0)
    m = cashflow_measures(cash, basis.discount_curve())
    # the cash-flow vector's PV on the curve equals the member-by-member liability
    assert m["present_value"] == pytest.approx(proj.liability.sum(), rel=1e-10)
    t = np.arange(len(cash)) / 12.0
    flat_pv = (cash * (1 + m["single_equivalent_discount_rate"]) ** -t).sum()
    assert flat_pv == pytest.approx(m["present_value"], rel=1e-9)
    assert 0.03 < m["single_equivalent_discount_rate"] < 0.047


def _a_due(x, i=0.05, start=0, stop=None, guarantee=0):
    """Annual annuity-due from Makeham's closed form [DHW eq. 2.29 and ch. 5], independent of the engine.

    Payments at k = start, start+1, ... (< stop), certain before ``guarantee``, otherwise on survival.
    """
    k = np.arange(start, 121 if stop is None else stop)
    surv = SULT_LAW.tpx(float(x), k) * (x + k < 120)
    surv = np.where(k < guarantee, 1.0, surv)
    return float(((1 + i) ** -k * surv).sum())


def test_deferred_pension_is_a_deferred_annuity(tmp_path):
    """A deferred pension with no revaluation: P x n|a-due_x = P v^n np_x a-due_{x+n} [DHW section 5.8]."""
    basis = write_basis(tmp_path, sult_toml())
    recs = members([{"status": "deferred", "sex": "M", "date_of_birth": dob_for_age(VD, 50), "pension": 3000.0}])
    proj = project_records(recs, basis)
    assert proj.liability[0] == pytest.approx(3000.0 * _a_due(50, start=15), rel=1e-10)
    # and against the published value: 15|a-due_50 = v^15 15p50 a-due_65 [DHW App. D, a-due_65 = 13.5498]
    pub = 1.05 ** -15 * float(SULT_LAW.tpx(50.0, 15.0)) * 13.5498
    assert proj.liability[0] / 3000.0 == pytest.approx(pub, abs=5e-5)


def test_guaranteed_pension(tmp_path):
    """Guaranteed 5 years: a-due_{5-certain} + 5|a-due_x [DHW section 5.6, guaranteed annuities]."""
    basis = write_basis(tmp_path, sult_toml())
    recs = members([{"status": "pensioner", "sex": "F", "date_of_birth": dob_for_age(VD, 66), "pension": 1.0,
                     "guarantee_end": VD.replace(year=2030)}])
    proj = project_records(recs, basis)
    certain = (1 - 1.05 ** -5) / (0.05 / 1.05)  # a-due_5 = (1 - v^5)/d
    expected = certain + _a_due(66, start=5)
    assert proj.liability[0] == pytest.approx(expected, rel=1e-10)
    assert _a_due(66, guarantee=5) == pytest.approx(expected, rel=1e-12)


def test_child_pension_is_temporary(tmp_path):
    """A child's pension to age 23: the temporary annuity a-due_{x:n} [DHW section 5.5]."""
    basis = write_basis(tmp_path, sult_toml())
    recs = members([{"status": "dependant", "sex": "M", "date_of_birth": dob_for_age(VD, 20), "pension": 1.0,
                     "pension_end_age": 23.0}])
    proj = project_records(recs, basis)
    assert proj.liability[0] == pytest.approx(_a_due(20, stop=3), rel=1e-10)


def test_active_with_no_growth_is_a_deferred_annuity_whatever_the_withdrawal(tmp_path):
    """Projected unit credit with no salary growth and no revaluation: the accrued pension
    accrual x service x salary is paid from retirement whether the member stays or leaves, so the
    obligation is B v^n np_x a-due_65 [DHW ch. 10, accrued benefit; IAS 19 paras 67-69], and withdrawal
    rates cannot change it (the exit probabilities sum to one).
    """
    extra = '[benefits]\naccrual_rate = "1/60"\nretirement_age = 65\n[withdrawal]\nrates = [[18, 0.05], [45, 0.02]]\n'
    basis = write_basis(tmp_path, sult_toml(extra=extra))
    recs = members([{"status": "active", "sex": "M", "date_of_birth": dob_for_age(VD, 40), "pension": 0.0,
                     "salary": 36000.0, "service_years": 12.0}])
    proj = project_records(recs, basis)
    b = 36000.0 * 12.0 / 60.0
    assert proj.liability[0] == pytest.approx(b * _a_due(40, start=25), rel=1e-9)


def test_active_salary_growth_without_withdrawal(tmp_path):
    """With salary growth g and no exits but death, the projected benefit is B (1 + g)^n
    [DHW ch. 10, projected unit credit]."""
    extra = '[salary]\ngrowth = 0.03\n[benefits]\naccrual_rate = "1/60"\nretirement_age = 65\n'
    basis = write_basis(tmp_path, sult_toml(extra=extra))
    recs = members([{"status": "active", "sex": "F", "date_of_birth": dob_for_age(VD, 45), "pension": 0.0,
                     "salary": 50000.0, "service_years": 10.0}])
    proj = project_records(recs, basis)
    b = 50000.0 * 10.0 / 60.0 * 1.03**20
    assert proj.liability[0] == pytest.approx(b * _a_due(45, start=20), rel=1e-9)


def test_discount_sensitivity_from_cash_flows_equals_full_revaluation(tmp_path):
    """A discount-rate sensitivity taken as the PV of the (rate-independent) nominal cash flows on the
    shifted curve equals a full re-valuation on the shifted basis (PV = sum v^t CF_t; [DHW] ch. 2)."""
    from tests.engine_helpers import members as mk
    from valuation.engine.run import discounted_total
    from valuation.engine.scenario import Scenario

    extra = ('[salary]\ngrowth = 0.03\n[benefits]\nretirement_age = 65\ndeath_in_service_lump_sum = 2.0\n'
             '[commutation]\nproportion = 0.25\nfactor = 16.0\n')
    basis = write_basis(tmp_path, sult_toml(frequency=12, extra=extra, inflation=0.025,
                                            increase='kind = "inflation", floor = 0.0, cap = 0.05',
                                            spouse="proportion_married = { M = 0.8, F = 0.7 }\n"
                                                   "age_difference = 3.0\nfraction = 0.5"))
    recs = mk([
        {"status": "pensioner", "sex": "M", "date_of_birth": dt.date(1950, 7, 9), "pension": 9000.0},
        {"status": "deferred", "sex": "F", "date_of_birth": dt.date(1977, 2, 1), "pension": 2000.0},
        {"status": "active", "sex": "M", "date_of_birth": dt.date(1985, 11, 30), "salary": 40000.0,
         "service_years": 8.5, "pension": 0.0},
    ])
    base = project_records(recs, basis)
    cash = base.cashflow.sum(axis=0)
    assert discounted_total(cash, basis.discount_curve()) == pytest.approx(base.liability.sum(), rel=1e-10)
    shifted = project_records(recs, basis, Scenario(discount_shift=0.005)).liability.sum()
    assert discounted_total(cash, basis.discount_curve().shifted(0.005)) == pytest.approx(shifted, rel=1e-10)


def test_service_cost_is_one_year_of_accrual_including_commutation(tmp_path):
    """Projected unit credit (IAS 19 paras 67-69): with a benefit linear in service, next year's unit is
    the obligation divided by service, commutation cash included (the cash is a share of the pension)."""
    from tests.engine_helpers import members as mk
    from valuation.engine.run import RunAccumulator

    extra = ('[salary]\ngrowth = 0.03\n[benefits]\naccrual_rate = "1/60"\nretirement_age = 65\n'
             '[commutation]\nproportion = 0.2\nfactor = 18.0\n')
    basis = write_basis(tmp_path, sult_toml(extra=extra))
    recs = mk([{"status": "active", "sex": "M", "date_of_birth": dob_for_age(VD, 45), "pension": 0.0,
                "salary": 40000.0, "service_years": 8.0}])
    acc = RunAccumulator(basis, sensitivities=False)
    acc.add(recs)
    assert acc.service_cost == pytest.approx(acc.active_total / 8.0, rel=1e-12)


def test_death_in_service_lump_sum_attributed_to_service(tmp_path):
    """A lump sum of k x salary on death in service, attributed straight-line from joining to the date of
    death (IAS 19 para 70): PV = sum_i (l_{x+i} - l_{x+i+1})/l_x k S (1+g)^(i+1/2) v^(i+1/2) s/(s+i+1/2),
    with Makeham's closed-form survival [DHW eq. 2.29]; one more year of service earns 1/(s+i+1/2)."""
    from tests.engine_helpers import members as mk
    from valuation.engine.run import RunAccumulator

    extra = ('[salary]\ngrowth = 0.02\n[benefits]\naccrual_rate = "1/60"\nretirement_age = 60\n'
             'death_in_service_lump_sum = 3.0\n')
    basis = write_basis(tmp_path, sult_toml(extra=extra))
    recs = mk([{"status": "active", "sex": "F", "date_of_birth": dob_for_age(VD, 50), "pension": 0.0,
                "salary": 30000.0, "service_years": 5.0, "retirement_age": 60.0}])
    proj = project_records(recs, basis)
    i = np.arange(10)
    mid = i + 0.5
    p = SULT_LAW.tpx(50.0, np.arange(11).astype(float))
    deaths = p[:-1] - p[1:]
    full = 3.0 * 30000.0 * 1.02**mid * deaths * 1.05**-mid
    assert proj.lumps["lump_sum"][0] == pytest.approx((full * 5.0 / (5.0 + mid)).sum(), rel=1e-9)
    assert proj.lump_next_year[0] == pytest.approx((full / (5.0 + mid)).sum(), rel=1e-9)
    acc = RunAccumulator(basis, sensitivities=False)
    acc.add(recs)
    pension_part = proj.pensions["member_pension"].sum() + proj.pensions["spouse_pension"].sum()
    assert acc.service_cost == pytest.approx(pension_part / 5.0 + proj.lump_next_year[0], rel=1e-12)
