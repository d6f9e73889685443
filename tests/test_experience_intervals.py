"""Confidence intervals of the experience analysis against published limits and scipy."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from valuation.experience.intervals import ae_amounts_interval, ae_lives_interval, poisson_limits

# Exact two-sided 95 % Poisson limits for small counts, as tabulated in standard statistical tables of
# confidence limits for the Poisson mean (e.g. Pearson & Hartley, Biometrika Tables for Statisticians,
# vol. 1; the same values appear in Ulm 1990, Am J Epidemiol 131:373). Values from memory, printed to
# 3 decimals (4 significant figures for x = 1).
PUBLISHED_95 = [
    (0, 0.0, 3.689),
    (1, 0.0253, 5.572),
    (5, 1.623, 11.668),
    (10, 4.795, 18.390),
]


@pytest.mark.parametrize(("x", "lower", "upper"), PUBLISHED_95)
def test_poisson_limits_match_published_table(x: int, lower: float, upper: float) -> None:
    lo, hi = poisson_limits(x, 0.95)
    assert float(lo) == pytest.approx(lower, abs=5e-4 if x != 1 else 5e-5)
    assert float(hi) == pytest.approx(upper, abs=5e-4)


@pytest.mark.parametrize("x", [1, 2, 7, 40, 250])
@pytest.mark.parametrize("confidence", [0.90, 0.95, 0.99])
def test_poisson_limits_solve_the_poisson_tail_equations(x: int, confidence: float) -> None:
    """Garwood (1936): P(X >= x | lower) = alpha/2 and P(X <= x | upper) = alpha/2 (scipy.stats.poisson)."""
    alpha = 1 - confidence
    lo, hi = poisson_limits(x, confidence)
    assert stats.poisson.sf(x - 1, float(lo)) == pytest.approx(alpha / 2, rel=1e-8)
    assert stats.poisson.cdf(x, float(hi)) == pytest.approx(alpha / 2, rel=1e-8)


def test_zero_deaths_upper_limit_is_minus_log_alpha_over_two() -> None:
    """For x = 0, P(X = 0 | upper) = exp(-upper) = alpha/2 (Poisson probability function)."""
    lo, hi = poisson_limits(0, 0.9)
    assert float(lo) == 0.0
    assert float(hi) == pytest.approx(-np.log(0.05), rel=1e-12)


def test_ae_lives_interval_is_count_limits_over_expected() -> None:
    """Ulm (1990): the SMR interval is the Poisson interval of the observed count divided by E."""
    lo, hi = ae_lives_interval([10, 5], [8.0, 0.0], 0.95)
    assert lo[0] == pytest.approx(4.795 / 8.0, abs=5e-4 / 8)  # table value above, from memory
    assert hi[0] == pytest.approx(18.390 / 8.0, abs=5e-4 / 8)
    assert np.isnan(lo[1]) and np.isnan(hi[1])


def test_amounts_interval_normal_with_poisson_variance_and_overdispersion() -> None:
    """Normal interval A/E +/- z sqrt(phi sum w^2 E)/E_w, z = scipy.stats.norm.ppf(0.975)."""
    a, e, v = 120_000.0, 100_000.0, 4.0e8
    z = stats.norm.ppf(0.975)
    lo, hi = ae_amounts_interval(a, e, v, 0.95)
    assert float(lo) == pytest.approx(1.2 - z * 2e4 / 1e5, rel=1e-12)
    assert float(hi) == pytest.approx(1.2 + z * 2e4 / 1e5, rel=1e-12)
    lo2, hi2 = ae_amounts_interval(a, e, v, 0.95, overdispersion=4.0)
    assert float(hi2) - 1.2 == pytest.approx(2 * (float(hi) - 1.2), rel=1e-12)
    assert float(lo2) == pytest.approx(max(0.0, 1.2 - 2 * z * 0.2), rel=1e-12)


def test_bad_confidence_rejected() -> None:
    with pytest.raises(ValueError, match="confidence must lie strictly between 0 and 1"):
        poisson_limits(3, 1.0)
