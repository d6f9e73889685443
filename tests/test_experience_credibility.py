"""Limited-fluctuation credibility: the full-credibility standard and the square-root rule against
published values, and a cross-check of the normal quantile with scipy.

Sources:
- Longley-Cook, L.H. (1962), "An introduction to credibility theory", PCAS 49: full credibility at
  1,082 expected claims for a 90 % probability of being within 5 % (from memory), and the table of
  standards reprinted in
- Mahler, H.C. and Dean, C.G., "Credibility", ch. 8 of Foundations of Casualty Actuarial Science, 4th ed.
  (CAS, 2001), Table 2.2.1 (standards for full credibility by P and k, whole claims) and section 2.5 (the
  square-root rule, e.g. 300 claims against a standard of 683 give Z = 66.3 %) (from memory).
"""

from __future__ import annotations

import math
from datetime import date

import numpy as np
import pytest
from scipy.stats import norm

from valuation.errors import BasisError
from valuation.experience import ExperienceSettings
from valuation.experience.credibility import (
    credibility_factor,
    credibility_weighted,
    full_credibility_standard,
    standard_text,
)

EPS = np.finfo(float).eps

#: Standards for full credibility [expected claims], printed to whole claims (Longley-Cook 1962;
#: Mahler & Dean Table 2.2.1; from memory). Rows: probability P; columns: tolerance k.
PRINTED = {
    0.90: {0.30: 30, 0.20: 68, 0.10: 271, 0.075: 481, 0.05: 1082, 0.025: 4329},
    0.95: {0.30: 43, 0.20: 96, 0.10: 384, 0.075: 683, 0.05: 1537, 0.025: 6147},
    0.99: {0.30: 74, 0.20: 166, 0.10: 664, 0.075: 1180, 0.05: 2654, 0.025: 10616},
}


@pytest.mark.parametrize(
    ("p", "k", "printed"), [(p, k, n) for p, row in PRINTED.items() for k, n in row.items()]
)
def test_full_credibility_standard_matches_the_published_table(p: float, k: float, printed: int) -> None:
    """n_F = (z_{(1+p)/2} / k)^2 to the table's printed precision. The table was computed with z rounded
    to three decimals (1.645, 1.960, 2.576), which moves n_F by up to 2 x 0.0005 / z of itself, so the
    tolerance is half a claim plus that."""
    n_full = full_credibility_standard(p, k)
    z = norm.ppf((1 + p) / 2)
    assert abs(n_full - printed) <= 0.5 + n_full * 2 * 0.0005 / z


def test_the_usual_standard_is_1082() -> None:
    """p = 90 %, k = 5 %: 1,082 expected deaths (Longley-Cook 1962, from memory); with z rounded to 1.645,
    (1.645 / 0.05)^2 = 1,082.41; with the exact quantile 1.6448536... it is 1,082.22."""
    n_full = full_credibility_standard()
    assert round(n_full) == 1082
    assert n_full == pytest.approx(1082.41, abs=1082.41 * 2 * 0.0005 / 1.645)
    settings = ExperienceSettings(period_start=date(2021, 1, 1), period_end=date(2022, 1, 1))
    assert (settings.credibility_probability, settings.credibility_tolerance) == (0.90, 0.05)
    assert "1,082 expected deaths" in standard_text(0.90, 0.05)
    assert "90% probability" in standard_text(0.90, 0.05) and "within 5%" in standard_text(0.90, 0.05)


@pytest.mark.parametrize("p", [0.5, 0.8, 0.9, 0.95, 0.99, 0.999])
@pytest.mark.parametrize("k", [0.3, 0.1, 0.05, 0.025, 0.01])
def test_standard_agrees_with_scipy_normal_quantile(p: float, k: float) -> None:
    """Cross-check: the quantile from scipy.stats.norm.ppf gives the same standard to a few ulps (the two
    inverse-normal algorithms differ in the last bits; squaring doubles the relative error)."""
    expected = (norm.ppf((1 + p) / 2) / k) ** 2
    assert full_credibility_standard(p, k) == pytest.approx(expected, rel=32 * EPS, abs=0)


def test_partial_credibility_square_root_rule() -> None:
    """Mahler & Dean section 2.5 (from memory): 300 claims against a standard of 683 give
    Z = sqrt(300 / 683) = 66.3 %; Z is 0 with no claims, 1 at and above the standard."""
    assert float(credibility_factor(300, 683)) == pytest.approx(0.663, abs=5e-4)
    z = credibility_factor([0.0, 683 / 4, 683.0, 5000.0], 683)
    np.testing.assert_allclose(z, [0.0, 0.5, 1.0, 1.0], rtol=4 * EPS, atol=0)
    assert math.isnan(float(credibility_factor(float("nan"), 683)))
    with pytest.raises(ValueError):
        credibility_factor(1.0, 0.0)


def test_credibility_weighted_estimate() -> None:
    """Z x own + (1 - Z) x prior (Mahler & Dean section 2.5): the ends give the prior and the own figure."""
    assert float(credibility_weighted(0.65, 1.0, 0.0)) == 1.0
    assert float(credibility_weighted(0.65, 1.0, 1.0)) == 0.65
    assert float(credibility_weighted(0.65, 1.0, 0.2)) == pytest.approx(0.2 * 0.65 + 0.8, rel=4 * EPS)


@pytest.mark.parametrize(
    ("kwargs", "text"),
    [
        ({"credibility_probability": 1.0}, "credibility_probability is 1: it must be a probability strictly"),
        ({"credibility_tolerance": 0.0}, "credibility_tolerance is 0: it must be a proportion strictly"),
    ],
)
def test_credibility_settings_are_checked(kwargs: dict, text: str) -> None:
    with pytest.raises(BasisError) as info:
        ExperienceSettings(period_start=date(2021, 1, 1), period_end=date(2022, 1, 1), **kwargs)
    assert text in str(info.value)
    assert str(info.value).count("(fix:") == 1
