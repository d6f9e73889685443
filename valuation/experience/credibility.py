"""Limited-fluctuation credibility: how far a group's own experience is trusted against the table.

The standard for full credibility is the expected number of deaths n_F at which the observed ratio lies
within a proportion ``k`` of its true value with probability ``p``. With deaths approximately normal
around their Poisson mean E (variance E), P(|A - E| <= k E) = p gives k sqrt(E) = z_{(1+p)/2}, so

    n_F = (z_{(1+p)/2} / k)^2,

1,082 expected deaths for p = 90 %, k = 5 %. Below it the square-root rule gives partial credibility
Z = min(1, sqrt(E / n_F)), and the credibility-weighted estimate is Z x own + (1 - Z) x prior; here the
prior is the table as it stands (A/E = 1).

References
----------
.. [LC] Longley-Cook, L.H. (1962), "An introduction to credibility theory", *Proceedings of the Casualty
   Actuarial Society* 49, 194-221 (the full-credibility standard and its table of values; from memory).
.. [MD] Mahler, H.C. and Dean, C.G., "Credibility", chapter 8 of *Foundations of Casualty Actuarial
   Science*, 4th ed., Casualty Actuarial Society, 2001, sections 2.2 (standards for full credibility)
   and 2.5 (partial credibility, Z = sqrt(n / n_F)) (from memory).
"""

from __future__ import annotations

from statistics import NormalDist

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: Defaults of the standard: probability p and tolerance k (1,082 expected deaths).
DEFAULT_PROBABILITY: float = 0.90
DEFAULT_TOLERANCE: float = 0.05


def full_credibility_standard(
    probability: float = DEFAULT_PROBABILITY, tolerance: float = DEFAULT_TOLERANCE
) -> float:
    """Expected deaths needed for full credibility, n_F = (z_{(1+p)/2} / k)^2.

    Parameters
    ----------
    probability
        p: the probability that the observed A/E lies within ``tolerance`` of the true ratio, 0 < p < 1.
    tolerance
        k: the allowed relative departure, 0 < k < 1 (0.05 = within 5 %).

    Returns
    -------
    float
        n_F [expected deaths, lives]: 1,082.2 for p = 0.90, k = 0.05 (printed as 1,082 in [LC]).

    References
    ----------
    [LC] the full-credibility standard for claim counts (Poisson, normal approximation); [MD] 2.2.
    """
    if not 0.0 < probability < 1.0:
        raise ValueError(f"credibility probability must lie strictly between 0 and 1, got {probability}")
    if not 0.0 < tolerance < 1.0:
        raise ValueError(f"credibility tolerance must lie strictly between 0 and 1, got {tolerance}")
    z = NormalDist().inv_cdf((1.0 + probability) / 2.0)
    return (z / tolerance) ** 2


def credibility_factor(expected: ArrayLike, full_standard: float) -> NDArray[np.float64]:
    """Partial credibility by the square-root rule, Z = min(1, sqrt(E / n_F)).

    Parameters
    ----------
    expected
        E: expected deaths [lives], >= 0 (NaN where undefined stays NaN).
    full_standard
        n_F from :func:`full_credibility_standard` [lives], > 0.

    Returns
    -------
    numpy.ndarray
        Z in [0, 1].

    References
    ----------
    [MD] 2.5: Z = sqrt(n / n_F) for n below the standard, 1 at or above it; [LC].
    """
    if not full_standard > 0.0:
        raise ValueError(f"the full-credibility standard must be > 0, got {full_standard}")
    e = np.asarray(expected, dtype=float)
    return np.minimum(1.0, np.sqrt(np.maximum(e, 0.0) / full_standard))  # NaN stays NaN


def credibility_weighted(own: ArrayLike, prior: ArrayLike, z: ArrayLike) -> NDArray[np.float64]:
    """The credibility-weighted estimate Z x own + (1 - Z) x prior.

    References
    ----------
    [MD] 2.5 (the credibility-weighted estimate); [LC].
    """
    zz = np.asarray(z, dtype=float)
    return zz * np.asarray(own, dtype=float) + (1.0 - zz) * np.asarray(prior, dtype=float)


def standard_text(probability: float, tolerance: float) -> str:
    """The standard used, in words (for the outputs)."""
    n_full = full_credibility_standard(probability, tolerance)
    return (
        f"limited-fluctuation credibility (Longley-Cook 1962): full credibility at {n_full:,.0f} expected "
        f"deaths, the number that gives a {probability:.0%} probability of the observed A/E lying within "
        f"{tolerance:.0%} of the true ratio; below it, credibility = square root of (expected deaths / "
        f"{n_full:,.0f}), counting the expected deaths of lives with a pension at risk; implied "
        "percentage = current percentage x (credibility x A/E by amounts + (1 - credibility) x 100%)"
    )
