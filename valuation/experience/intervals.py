"""Confidence intervals for actual-versus-expected ratios.

References
----------
.. [G] Garwood, F. (1936), "Fiducial limits for the Poisson distribution", *Biometrika* 28(3/4), 437-442.
.. [U] Ulm, K. (1990), "A simple method to calculate the confidence interval of a standardized mortality
   ratio (SMR)", *American Journal of Epidemiology* 131(2), 373-375.
.. [BP] Benjamin, B. and Pollard, J.H., *The Analysis of Mortality and Other Actuarial Statistics*,
   3rd ed., Institute and Faculty of Actuaries, 1993, chapters on exposed to risk and graduation tests
   (deaths as Poisson variables).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.stats import chi2, norm


def _check_confidence(confidence: float) -> float:
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must lie strictly between 0 and 1, got {confidence!r}")
    return 1.0 - confidence


def poisson_limits(
    actual: ArrayLike, confidence: float = 0.95
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Exact (Garwood) two-sided limits for the mean of a Poisson count.

    lower = chi2.ppf(alpha/2, 2A) / 2 (0 when A = 0), upper = chi2.ppf(1 - alpha/2, 2A + 2) / 2.
    A need not be an integer (a late-reporting uplift makes it fractional); the chi-square form is then
    the continuous extension of the same limits.

    Parameters
    ----------
    actual
        Observed deaths A [lives], >= 0.
    confidence
        Two-sided confidence level, e.g. 0.95.

    Returns
    -------
    (lower, upper)
        Limits for the Poisson mean [lives].

    References
    ----------
    [G] eq. for the fiducial limits; [U] eq. (1)-(2).
    """
    alpha = _check_confidence(confidence)
    a = np.asarray(actual, dtype=float)
    if np.any(a < 0):
        raise ValueError("actual deaths must be >= 0")
    with np.errstate(invalid="ignore"):
        lower = np.where(a > 0, chi2.ppf(alpha / 2.0, 2.0 * np.maximum(a, 1e-300)) / 2.0, 0.0)
    upper = chi2.ppf(1.0 - alpha / 2.0, 2.0 * a + 2.0) / 2.0
    return np.asarray(lower, dtype=float), np.asarray(upper, dtype=float)


def ae_lives_interval(
    actual: ArrayLike, expected: ArrayLike, confidence: float = 0.95
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Exact Poisson interval for A/E by lives: the Garwood limits for A divided by E.

    Parameters
    ----------
    actual
        Actual deaths A [lives].
    expected
        Expected deaths E [lives], > 0 (NaN is returned where E <= 0).
    confidence
        Two-sided confidence level.

    Returns
    -------
    (lower, upper)
        Limits for A/E [ratio, 1 = 100 %].

    References
    ----------
    [U] p. 374: the SMR interval is the Poisson interval for the observed count divided by the expected.
    """
    lower, upper = poisson_limits(actual, confidence)
    e = np.asarray(expected, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        safe = np.where(e > 0, e, np.nan)
        return lower / safe, upper / safe


def ae_amounts_interval(
    actual: ArrayLike,
    expected: ArrayLike,
    variance: ArrayLike,
    confidence: float = 0.95,
    overdispersion: float = 1.0,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Normal-approximation interval for A/E by amounts.

    With deaths Poisson, the amounts-weighted count A_w = sum w_i D_i has variance sum w_i^2 E_i; the
    interval is A_w/E_w +/- z sqrt(phi * sum w_i^2 E_i) / E_w, with phi the overdispersion factor, and the
    lower limit floored at 0.

    Parameters
    ----------
    actual
        Actual amounts A_w [currency p.a.].
    expected
        Expected amounts E_w [currency p.a.].
    variance
        sum w_i^2 E_i [currency^2].
    confidence
        Two-sided confidence level.
    overdispersion
        Variance multiplier phi >= 1 for the amounts (1 = pure Poisson).

    Returns
    -------
    (lower, upper)
        Limits for A/E by amounts [ratio].

    References
    ----------
    [BP] deaths as independent Poisson variables, so Var(sum w D) = sum w^2 E. The overdispersion factor
    is common practice for amounts (a few large pensions dominate the variance).
    """
    alpha = _check_confidence(confidence)
    if overdispersion <= 0:
        raise ValueError(f"overdispersion must be > 0, got {overdispersion!r}")
    z = float(norm.ppf(1.0 - alpha / 2.0))
    a = np.asarray(actual, dtype=float)
    e = np.asarray(expected, dtype=float)
    v = np.asarray(variance, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        safe = np.where(e > 0, e, np.nan)
        ratio = a / safe
        half = z * np.sqrt(overdispersion * v) / safe
    return np.maximum(ratio - half, 0.0), ratio + half
