"""Discounting: flat or spot-curve discount factors, present values, durations and the SEDR.

Rates are annual effective [per annum, effective]; times and terms are in years from the valuation date.

References
----------
.. [Kellison] Kellison, S.G., *The Theory of Interest*, 3rd ed., McGraw-Hill, 2009: chapter 10 (spot
   rates, forward rates, term structure) and chapter 11 (Macaulay and modified duration).
.. [IAS19] IAS 19 *Employee Benefits*, paragraph 83 (discount rate by reference to high quality corporate
   bond yields matching the currency and term of the obligations).
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import brentq

from valuation.errors import BasisError

Extrapolation = Literal["flat_spot", "flat_forward"]
_EXTRAPOLATION: tuple[str, ...] = ("flat_spot", "flat_forward")


class RateCurve:
    """Annual effective spot rates s(t) by term t [per annum, effective].

    Between the given terms the spot rate is interpolated linearly in the spot rate. Before the first
    term the spot rate is held flat at the first rate. Beyond the last term:

    - ``"flat_spot"`` (default): the spot rate is held flat at the last rate;
    - ``"flat_forward"``: the annual effective forward rate over the last interval between given terms
      is held constant, so (1 + s(t))^t = (1 + s_n)^{t_n} (1 + f)^{t - t_n} for t > t_n, with
      f = ((1 + s_n)^{t_n} / (1 + s_{n-1})^{t_{n-1}})^{1 / (t_n - t_{n-1})} - 1 (f = s_n if only one
      term is given).

    Build with :meth:`flat` or :meth:`from_spot`.

    References
    ----------
    [Kellison] chapter 10 (spot and forward rates); the interpolation and extrapolation rules are common
    practice and are stated above.
    """

    def __init__(
        self,
        terms: NDArray[np.float64],
        rates: NDArray[np.float64],
        extrapolation: Extrapolation = "flat_spot",
        is_flat: bool = False,
    ) -> None:
        self.terms = terms
        self.rates = rates
        self.extrapolation: Extrapolation = extrapolation
        self.is_flat = is_flat

    def __repr__(self) -> str:
        if self.is_flat:
            return f"RateCurve.flat({float(self.rates[0])!r})"
        return (
            f"RateCurve.from_spot(terms={self.terms.tolist()!r}, rates={self.rates.tolist()!r}, "
            f"extrapolation={self.extrapolation!r})"
        )

    @classmethod
    def flat(cls, rate: float) -> RateCurve:
        """A flat curve: s(t) = ``rate`` for every term [per annum, effective]."""
        r = float(rate)
        if not np.isfinite(r) or r <= -1.0:
            raise BasisError(
                f"discount rate {float(rate):g} is not a rate above -100%",
                column="rate",
                fix="give an annual effective rate such as 0.045",
            )
        return cls(np.array([1.0]), np.array([r]), "flat_spot", is_flat=True)

    @classmethod
    def from_spot(
        cls, terms: ArrayLike, rates: ArrayLike, *, extrapolation: Extrapolation = "flat_spot"
    ) -> RateCurve:
        """A curve from spot rates [per annum, effective] at terms [years].

        Raises
        ------
        BasisError
            If the terms are not positive and strictly increasing, the lengths differ, or a rate is not
            finite and above -100%.
        """
        if extrapolation not in _EXTRAPOLATION:
            raise BasisError(
                f"extrapolation \"{extrapolation}\" is not one of {', '.join(_EXTRAPOLATION)}",
                column="extrapolation",
                fix="use 'flat_spot' or 'flat_forward'",
            )
        t = np.atleast_1d(np.asarray(terms, dtype=np.float64))
        r = np.atleast_1d(np.asarray(rates, dtype=np.float64))
        if t.ndim != 1 or t.shape != r.shape or t.size == 0:
            raise BasisError(
                f"the curve has {t.size} terms and {r.size} rates; expected the same non-zero number",
                column="rates",
                fix="give one spot rate for each term",
            )
        bad_t = ~np.isfinite(t) | (t <= 0)
        if bad_t.any():
            k = int(np.flatnonzero(bad_t)[0])
            raise BasisError(
                f"term {float(t[k]):g} is not a positive number of years", row=k, column="terms", fix="use terms > 0"
            )
        if (np.diff(t) <= 0).any():
            k = int(np.flatnonzero(np.diff(t) <= 0)[0]) + 1
            raise BasisError(
                f"term {float(t[k]):g} does not increase on the previous term {float(t[k - 1]):g}",
                row=k,
                column="terms",
                fix="list the terms in strictly increasing order without repeats",
            )
        bad_r = ~np.isfinite(r) | (r <= -1.0)
        if bad_r.any():
            k = int(np.flatnonzero(bad_r)[0])
            raise BasisError(
                f"spot rate {float(r[k]):g} at term {float(t[k]):g} is not a rate above -100%",
                row=k,
                column="rates",
                fix="give annual effective rates as decimals, e.g. 0.045 for 4.5%",
            )
        return cls(t, r, extrapolation, is_flat=False)

    def _last_forward(self) -> float:
        if self.terms.size == 1:
            return float(self.rates[-1])
        t1, t2 = self.terms[-2], self.terms[-1]
        g1 = (1.0 + self.rates[-2]) ** t1
        g2 = (1.0 + self.rates[-1]) ** t2
        return float((g2 / g1) ** (1.0 / (t2 - t1)) - 1.0)

    def spot(self, t: ArrayLike) -> NDArray[np.float64]:
        """Spot rate s(t) [per annum, effective] at terms ``t`` [years] (any shape)."""
        tt = np.asarray(t, dtype=np.float64)
        s = np.interp(tt, self.terms, self.rates)
        if self.extrapolation == "flat_forward" and not self.is_flat:
            tn, sn = self.terms[-1], self.rates[-1]
            f = self._last_forward()
            beyond = tt > tn
            if np.any(beyond):
                tb = np.where(beyond, tt, tn)
                log_growth = tn * np.log1p(sn) + (tb - tn) * np.log1p(f)
                s = np.where(beyond, np.expm1(log_growth / tb), s)
        return s

    def discount_factors(self, t: ArrayLike) -> NDArray[np.float64]:
        """Discount factors v(t) = (1 + s(t))^-t [per unit of currency] at times ``t`` [years].

        References
        ----------
        [Kellison] chapter 10 (present values from spot rates).
        """
        tt = np.asarray(t, dtype=np.float64)
        return np.exp(-tt * np.log1p(self.spot(tt)))

    def growth_factors(self, t: ArrayLike) -> NDArray[np.float64]:
        """Accumulation factors (1 + s(t))^t at times ``t`` [years] (e.g. an inflation index path).

        References
        ----------
        [Kellison] chapter 10.
        """
        tt = np.asarray(t, dtype=np.float64)
        return np.exp(tt * np.log1p(self.spot(tt)))

    def shifted(self, h: float) -> RateCurve:
        """The curve with every given spot rate moved by ``h`` [per annum, effective] (parallel shift)."""
        return RateCurve(self.terms.copy(), self.rates + float(h), self.extrapolation, self.is_flat)


def _cf_and_times(cf: ArrayLike, t: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    c = np.asarray(cf, dtype=np.float64)
    tt = np.asarray(t, dtype=np.float64)
    if tt.ndim != 1 or c.shape[-1:] != tt.shape:
        raise ValueError(
            f"cash flows of shape {c.shape} do not match times of shape {tt.shape}; "
            "expected cf (..., T) with t (T,)"
        )
    return c, tt


def _scalar(x: NDArray[np.float64]) -> float | NDArray[np.float64]:
    return float(x) if np.ndim(x) == 0 else x


def present_value(cf: ArrayLike, t: ArrayLike, curve: RateCurve) -> float | NDArray[np.float64]:
    """Present value sum_k CF_k v(t_k) [currency].

    Parameters
    ----------
    cf : array_like, shape (T,) or (..., T)
        Cash flows [currency] at times ``t``.
    t : array_like, shape (T,)
        Payment times [years].
    curve : RateCurve
        Discount curve [per annum, effective].

    Returns
    -------
    float or numpy.ndarray of shape (...)
        Present value [currency].

    References
    ----------
    [Kellison] chapter 10; [IAS19] paragraph 83.
    """
    c, tt = _cf_and_times(cf, t)
    return _scalar(c @ curve.discount_factors(tt))


def macaulay_duration(cf: ArrayLike, t: ArrayLike, curve: RateCurve) -> float | NDArray[np.float64]:
    """Macaulay duration sum t v(t) CF_t / sum v(t) CF_t [years], with the curve's discount factors.

    References
    ----------
    [Kellison] chapter 11 (Macaulay duration).
    """
    c, tt = _cf_and_times(cf, t)
    v = curve.discount_factors(tt)
    return _scalar((c @ (tt * v)) / (c @ v))


def modified_duration(cf: ArrayLike, t: ArrayLike, rate: float) -> float | NDArray[np.float64]:
    """Modified duration = Macaulay duration at a flat rate i / (1 + i) [years].

    Parameters
    ----------
    rate : float
        Flat annual effective rate [per annum, effective].

    References
    ----------
    [Kellison] chapter 11 (volatility, or modified duration).
    """
    return macaulay_duration(cf, t, RateCurve.flat(rate)) / (1.0 + float(rate))


def effective_duration(
    cf: ArrayLike, t: ArrayLike, curve: RateCurve, h: float = 0.001
) -> float | NDArray[np.float64]:
    """Effective duration (PV(-h) - PV(+h)) / (2 h PV) [years] for a parallel shift ``h`` of the spot
    rates [per annum, effective].

    References
    ----------
    [Kellison] chapter 11 (the derivative definition of duration, here by central differences);
    common practice for liability sensitivities.
    """
    pv = np.asarray(present_value(cf, t, curve))
    down = np.asarray(present_value(cf, t, curve.shifted(-h)))
    up = np.asarray(present_value(cf, t, curve.shifted(h)))
    return _scalar((down - up) / (2.0 * h * pv))


def single_equivalent_rate(cf: ArrayLike, t: ArrayLike, curve: RateCurve) -> float:
    """Single equivalent discount rate: the flat rate i with sum CF_k (1 + i)^-t_k = PV on ``curve``.

    Solved with Brent's method (scipy.optimize.brentq) to 1e-12.

    Parameters
    ----------
    cf : array_like, shape (T,)
        Cash flows [currency]; their present value must change sign with the rate (e.g. all >= 0 and not
        all zero).
    t : array_like, shape (T,)
        Payment times [years].
    curve : RateCurve
        The spot curve [per annum, effective].

    Returns
    -------
    float
        The single equivalent rate [per annum, effective].

    References
    ----------
    [IAS19] paragraph 83 and its basis for conclusions (a single weighted average rate reflecting timing
    and amount of payments); Brent, R.P., *Algorithms for Minimization without Derivatives*, 1973,
    chapter 4 (the root finder).
    """
    c, tt = _cf_and_times(cf, t)
    if c.ndim != 1:
        raise ValueError(f"single_equivalent_rate takes one cash-flow vector; got shape {c.shape}")
    target = float(c @ curve.discount_factors(tt))
    if not np.any(c):
        raise ValueError("all cash flows are zero; the single equivalent rate is undefined")
    def gap(i: float) -> float:
        return float(c @ np.exp(-tt * np.log1p(i))) - target

    # for cash flows of one sign the answer lies between the smallest and largest spot rate used
    s = curve.spot(tt[c != 0])
    lo, hi = float(np.min(s)) - 1e-4, float(np.max(s)) + 1e-4
    for _ in range(60):
        if gap(lo) * gap(hi) <= 0:
            break
        lo = max(-0.99, lo - 0.05)
        hi = hi + 0.05
    else:
        raise ValueError("no single equivalent rate found: the cash flows' present value never matches")
    return float(brentq(gap, lo, hi, xtol=1e-14, rtol=1e-13, maxiter=200))
