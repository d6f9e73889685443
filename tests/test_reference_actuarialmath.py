"""Cross-checks against actuarialmath (PyPI, 1.1.0; test-only) on its Standard Ultimate Life Table.

actuarialmath builds the SULT from the same Makeham law (DHW Appendix D) with l at whole ages 20..130 and
i = 5% by default; our table closes at 120. Survival beyond 120 from the ages used here is below 1e-10,
so the two agree to floating-point accuracy: tolerances 1e-9 relative (its values are unrounded floats).
Its API was read by introspection (SULT, UDD, Mthly, Woolhouse; p_r / l_r for fractional ages).
"""

from __future__ import annotations

import numpy as np
import pytest

am = pytest.importorskip("actuarialmath")

from tests.oracles import annuity_factor, curtate_expectancy, tpx, woolhouse  # noqa: E402
from valuation.discounting import RateCurve  # noqa: E402
from valuation.mortality.laws import SULT_LAW  # noqa: E402

Q = np.zeros((1, 121))
Q[0, 20:] = SULT_LAW.qx(np.arange(20, 121))
Q[0, 120] = 1.0
FIVE = RateCurve.flat(0.05)
REL = 1e-9


@pytest.fixture(scope="module")
def sult():  # type: ignore[no-untyped-def]
    return am.SULT()


@pytest.fixture(scope="module")
def sult_cf():  # type: ignore[no-untyped-def]
    return am.SULT(udd=False)


def test_whole_life_annuity_65_printed(sult) -> None:  # type: ignore[no-untyped-def]
    """actuarialmath SULT().whole_life_annuity(65) = 13.549790 at 5% (its documented result, 6 dp)."""
    assert sult.whole_life_annuity(65) == pytest.approx(13.549790, abs=5e-7)
    ours = annuity_factor(Q, [0], [65.0], FIVE)[0]
    assert ours == pytest.approx(13.549790, abs=5e-7)


@pytest.mark.parametrize("x", [20, 45, 60, 65, 80, 100])
def test_whole_life_annuity_and_insurance(sult, x: int) -> None:  # type: ignore[no-untyped-def]
    ours = annuity_factor(Q, [0], [float(x)], FIVE)[0]
    assert ours == pytest.approx(sult.whole_life_annuity(x), rel=REL)
    assert 1 - 0.05 / 1.05 * ours == pytest.approx(sult.whole_life_insurance(x), rel=REL)


def test_temporary_and_deferred_annuities(sult) -> None:  # type: ignore[no-untyped-def]
    ours_temp = annuity_factor(Q, [0], [65.0], FIVE, term=10.0)[0]
    ours_def = annuity_factor(Q, [0], [65.0], FIVE, deferral=10.0)[0]
    assert ours_temp == pytest.approx(sult.temporary_annuity(65, t=10), rel=REL)
    assert ours_def == pytest.approx(sult.deferred_annuity(65, u=10), rel=REL)
    # certain-and-life: 10 years guaranteed then for life
    ours_guar = annuity_factor(Q, [0], [65.0], FIVE, guarantee=10.0)[0]
    assert ours_guar == pytest.approx(sult.certain_life_annuity(65, u=10), rel=REL)


@pytest.mark.parametrize(("x", "r", "t"), [(65, 0.25, 2.5), (40, 0.5, 0.3), (88, 0.9, 7.75), (70, 0.0, 0.5)])
def test_fractional_survival_udd_and_constant_force(sult, sult_cf, x: int, r: float, t: float) -> None:  # type: ignore[no-untyped-def]
    """t p_{x+r} from actuarialmath's Fractional.p_r with udd=True and udd=False (constant force)."""
    ours_udd = tpx(Q, [0], [x + r], [t], "udd")[0, 0]
    ours_cf = tpx(Q, [0], [x + r], [t], "constant_force")[0, 0]
    assert ours_udd == pytest.approx(sult.p_r(x, r=r, t=t), rel=REL)
    assert ours_cf == pytest.approx(sult_cf.p_r(x, r=r, t=t), rel=REL)


def test_monthly_survival_grid(sult) -> None:  # type: ignore[no-untyped-def]
    """Mthly(12).p_m(x, s_m, t_m): survival over t_m months from s_m months after age x (UDD)."""
    mthly = am.Mthly(12, sult)
    ours = tpx(Q, [0], [65.0 + 5 / 12], np.arange(1, 40) / 12)[0]
    theirs = [mthly.p_m(65, s_m=5, t_m=k) for k in range(1, 40)]
    np.testing.assert_allclose(ours, theirs, rtol=REL)


def test_monthly_annuity_under_udd(sult) -> None:  # type: ignore[no-untyped-def]
    """actuarialmath UDD(12).whole_life_annuity(65) (alpha/beta form, exact under UDD) equals our exact
    monthly sum on the monthly grid under UDD."""
    ours = annuity_factor(Q, [0], [65.0], FIVE, frequency=12)[0]
    assert ours == pytest.approx(am.UDD(12, sult).whole_life_annuity(65), rel=REL)


def test_woolhouse_three_term(sult) -> None:  # type: ignore[no-untyped-def]
    """actuarialmath Woolhouse(12, three_term=True) with the same mu_65 (from the law) as ours."""
    mu = float(SULT_LAW.force(65.0))
    theirs = am.Woolhouse(12, sult, three_term=True).whole_life_annuity(65, mu=mu)
    ours = float(woolhouse(annuity_factor(Q, [0], [65.0], FIVE)[0], 12, mu, np.log(1.05)))
    assert ours == pytest.approx(theirs, rel=REL)


@pytest.mark.parametrize("x", [30, 65, 90])
def test_curtate_expectancy(sult, x: int) -> None:  # type: ignore[no-untyped-def]
    assert curtate_expectancy(Q, [0], [float(x)])[0] == pytest.approx(sult.e_x(x), rel=REL)
