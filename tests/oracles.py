"""Test oracles: straightforward closed forms and grid sums the engine's results are checked against.

These are the textbook formulas (annuities-certain, life annuities on survival grids, Woolhouse's
formula, survival probabilities tp_x on any time grid, joint life and last survivor, the curtate
expectation of life), written plainly and each with its published source. The engine does not call them:
it computes the same quantities on its monthly grid (``valuation/engine``), and the tests compare the two.

References
----------
.. [DHW] Dickson, D.C.M., Hardy, M.R. and Waters, H.R., *Actuarial Mathematics for Life Contingent
   Risks*, 2nd ed., Cambridge University Press, 2013: sections 2.2, 2.6, 3.3 (survival, expectation of
   life, fractional ages), chapter 5 (annuities; section 5.11 Woolhouse's formula) and chapter 9 (joint
   life and last survivor).
.. [BGHJN] Bowers, N.L., Gerber, H.U., Hickman, J.C., Jones, D.A. and Nesbitt, C.J., *Actuarial
   Mathematics*, 2nd ed., Society of Actuaries, 1997: chapters 3, 5 and 9.
.. [Kellison] Kellison, S.G., *The Theory of Interest*, 3rd ed., McGraw-Hill, 2009: chapters 3 and 4
   (annuities-certain, payable m-thly).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from valuation.discounting import RateCurve
from valuation.expectancy import _start
from valuation.survival import _FRACTIONAL, FractionalAge, _as_q_rows, _check_option, cohort_lx, lx_at

Timing = Literal["advance", "arrears"]
_TIMINGS: tuple[str, ...] = ("advance", "arrears")

#: Largest number of (life x payment) cells evaluated at once; lives are processed in chunks below it.
_CHUNK_CELLS = 250_000
_EPS = 1e-9


def _check(frequency: int, timing: str) -> int:
    if timing not in _TIMINGS:
        raise ValueError(f"timing must be 'advance' or 'arrears'; got {timing!r}")
    m = int(frequency)
    if m < 1 or m != frequency:
        raise ValueError(f"frequency must be a whole number of payments a year >= 1; got {frequency!r}")
    return m


def payment_times(term: float, frequency: int, timing: Timing) -> NDArray[np.float64]:
    """Payment times [years] of an annuity-certain of ``term`` years paid ``frequency`` times a year.

    In advance: 0, 1/m, ..., term - 1/m. In arrears: 1/m, 2/m, ..., term. The number of payments is the
    whole part of term x m.

    References
    ----------
    [Kellison] chapter 4 (annuities payable more frequently than interest is convertible).
    """
    m = _check(frequency, timing)
    n_pay = int(np.floor(float(term) * m + _EPS))
    k = np.arange(n_pay, dtype=np.float64)
    return (k if timing == "advance" else k + 1.0) / m


def annuity_certain(
    n: ArrayLike, i: ArrayLike, frequency: int = 1, timing: Timing = "advance"
) -> NDArray[np.float64]:
    """Annuity-certain of 1 [currency p.a.] for ``n`` years, closed form [currency].

    a-due^(m)_n = (1 - v^n) / d^(m) with d^(m) = m (1 - v^(1/m)); a^(m)_n = (1 - v^n) / i^(m) with
    i^(m) = m ((1 + i)^(1/m) - 1); at i = 0 both equal n.

    Parameters
    ----------
    n : array_like
        Term [years], a multiple of 1/m.
    i : array_like
        Interest rate [per annum, effective]; broadcasts with ``n``.
    frequency : int
        Payments a year, m.
    timing : {"advance", "arrears"}
        Payments at the start or the end of each 1/m period.

    References
    ----------
    [Kellison] chapters 3 and 4: a-due_n = (1 - v^n)/d and the m-thly forms (1 - v^n)/d^(m),
    (1 - v^n)/i^(m); [DHW] chapter 5 (review of annuities-certain).
    """
    m = _check(frequency, timing)
    nn = np.asarray(n, dtype=np.float64)
    ii = np.asarray(i, dtype=np.float64)
    v_n = np.exp(-nn * np.log1p(ii))
    if timing == "advance":
        nominal = m * (1.0 - np.exp(-np.log1p(ii) / m))  # d^(m)
    else:
        nominal = m * np.expm1(np.log1p(ii) / m)  # i^(m)
    zero = nominal == 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(zero, nn, (1.0 - v_n) / np.where(zero, 1.0, nominal))
    return np.asarray(out, dtype=np.float64)


def life_annuity_from_survival(
    tp: ArrayLike,
    t: ArrayLike,
    discount: ArrayLike | RateCurve,
    amounts: ArrayLike | None = None,
    frequency: int = 1,
) -> NDArray[np.float64]:
    """Value of a life annuity from a survival grid: sum_k (1/m) amount_k v_k tp[..., k] [currency].

    Parameters
    ----------
    tp : array_like, shape (..., T)
        Survival probabilities to each payment time.
    t : array_like, shape (T,)
        Payment times [years].
    discount : array_like broadcasting to (..., T), or RateCurve
        Discount factors v_k at the payment times, or a curve to compute them from ``t``.
    amounts : array_like broadcasting to (..., T), optional
        Annual rate of payment at each time [currency p.a.]; 1 if omitted.
    frequency : int
        Payments a year, m (each payment is amount / m).

    Returns
    -------
    numpy.ndarray, shape tp.shape[:-1]
        Annuity value [currency].

    References
    ----------
    [DHW] chapter 5 (annuities payable m times a year, as sums of pure endowments), a-due^(m)_x = (1/m) sum_k v^(k/m) k/m p_x.
    """
    p = np.asarray(tp, dtype=np.float64)
    tt = np.asarray(t, dtype=np.float64)
    if p.shape[-1:] != tt.shape:
        raise ValueError(f"survival grid of shape {p.shape} does not match times of shape {tt.shape}")
    v = discount.discount_factors(tt) if isinstance(discount, RateCurve) else np.asarray(discount, float)
    w = p * v
    if amounts is not None:
        w = w * np.asarray(amounts, dtype=np.float64)
    return np.asarray(w.sum(axis=-1) / float(frequency))


def _per_life(value: float | ArrayLike, n: int, name: str) -> NDArray[np.float64]:
    a = np.asarray(value, dtype=np.float64)
    if a.ndim == 0:
        return np.full(n, float(a))
    a = a.reshape(-1)
    if a.shape != (n,):
        raise ValueError(f"{name} must be a scalar or one value per life ({n}); got shape {a.shape}")
    return a


SurvivalFn = Callable[[slice, NDArray[np.float64]], NDArray[np.float64]]


def _value_on_grid(
    n: int,
    survival: SurvivalFn,
    max_remaining: NDArray[np.float64],
    curve: RateCurve,
    frequency: int,
    timing: Timing,
    escalation: float | ArrayLike,
    index_path: Callable[[NDArray[np.float64]], NDArray[np.float64]] | None,
    deferral: float | ArrayLike,
    term: float | ArrayLike | None,
    guarantee: float | ArrayLike,
    max_term: float,
) -> NDArray[np.float64]:
    """Sum of (1/m) v(t) amount(t) P(t) over the m-thly payment grid, in chunks of lives."""
    m = _check(frequency, timing)
    d = _per_life(deferral, n, "deferral")
    g = _per_life(escalation, n, "escalation")
    guar = _per_life(guarantee, n, "guarantee")
    span = _per_life(np.inf if term is None else term, n, "term")
    if (d < 0).any() or (guar < 0).any() or (span < 0).any():
        raise ValueError("deferral, term and guarantee must be >= 0 [years]")
    # payments beyond the last possible survival date only count while guaranteed
    horizons = np.minimum(np.maximum(max_remaining - d, guar), span)
    horizon = float(min(max_term, np.max(horizons, initial=0.0)))
    n_max = np.floor(max_term * m + _EPS)  # payments within max_term years of the start of payment
    n_grid = int(min(np.ceil(horizon * m - _EPS) + 1, n_max))
    k = np.arange(n_grid, dtype=np.float64)
    offsets = (k if timing == "advance" else k + 1.0) / m
    n_pay = np.floor(span * m + _EPS)  # number of payments of a temporary annuity
    n_guar = np.floor(guar * m + _EPS)  # number of guaranteed payments
    # with one deferral and one escalation for all lives, discounting and amounts are one row
    shared = n > 0 and bool(np.all(d == d[0]) and np.all(g == g[0]))
    weight_1d = _weights(d[0] + offsets, curve, g[0], index_path)[None, :] if shared else None
    limited = bool(np.any(n_pay < n_grid))
    guaranteed = bool(np.any(n_guar > 0))

    out = np.empty(n)
    chunk = max(1, _CHUNK_CELLS // max(n_grid, 1))
    for start in range(0, n, chunk):
        sl = slice(start, min(n, start + chunk))
        times = d[sl, None] + offsets[None, :]
        prob = survival(sl, times)
        if guaranteed:
            prob = np.where(k[None, :] < n_guar[sl, None], survival(sl, d[sl, None]), prob)
        if limited:
            prob = np.where(k[None, :] < n_pay[sl, None], prob, 0.0)
        weight = weight_1d if weight_1d is not None else _weights(times, curve, g[sl, None], index_path)
        out[sl] = np.einsum("ij,ij->i", prob, np.broadcast_to(weight, prob.shape)) / m
    return out


def _weights(
    times: NDArray[np.float64],
    curve: RateCurve,
    g: float | NDArray[np.float64],
    index_path: Callable[[NDArray[np.float64]], NDArray[np.float64]] | None,
) -> NDArray[np.float64]:
    """Discount factor x amount at payment times [currency per 1 p.a.]."""
    w = curve.discount_factors(times)
    if np.any(g != 0):
        w = w * np.exp(times * np.log1p(g))
    if index_path is not None:
        w = w * np.asarray(index_path(times), dtype=np.float64)
    return w


def _lives(
    q_rows: ArrayLike, rows: ArrayLike, x0: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.intp], NDArray[np.float64]]:
    q = _as_q_rows(q_rows)
    lx = cohort_lx(q)
    r, x = np.broadcast_arrays(
        np.atleast_1d(np.asarray(rows, dtype=np.intp)), np.atleast_1d(np.asarray(x0, dtype=np.float64))
    )
    return q, lx, r.reshape(-1), x.reshape(-1).astype(np.float64)


def annuity_factor(
    q_rows: ArrayLike,
    rows: ArrayLike,
    x0: ArrayLike,
    curve: RateCurve,
    *,
    frequency: int = 1,
    timing: Timing = "advance",
    escalation: float | ArrayLike = 0.0,
    index_path: Callable[[NDArray[np.float64]], NDArray[np.float64]] | None = None,
    deferral: float | ArrayLike = 0.0,
    term: float | ArrayLike | None = None,
    guarantee: float | ArrayLike = 0.0,
    fractional: FractionalAge = "udd",
    max_term: float = 121.0,
) -> NDArray[np.float64]:
    """Value [currency] of 1 [currency p.a.] payable m-thly to a life of exact age x0 while alive.

    The exact m-thly annuity: sum over payment times t_k of (1/m) v(t_k) a(t_k) P_k, where

    - payment times are t_k = n + k/m (advance, k = 0, 1, ...) or n + (k+1)/m (arrears) for a deferral
      of n years (first payment at n in advance, n + 1/m in arrears);
    - a(t) = (1 + g)^t x index_path(t) is the amount, with t measured from the valuation date (so an
      escalation that starts only with payment is ``factor x (1 + g)^-n``); (1 + g)^t is smooth between
      annual increase dates and equals the stepped amount at whole years;
    - P_k = tp_x0 at t_k, or np_x0 (survival to the start of payment) for the payments in the first
      ``guarantee`` years of payment;
    - a temporary annuity (``term``) stops after ``term`` years of payment (term x m payments), e.g. a
      child's pension to a given age.

    Parameters
    ----------
    q_rows : array_like, shape (n_rows, n_ages)
        Cohort q rows (column j = q at integer age j; last column 1.0).
    rows : array_like of int, shape (n,)
        Cohort row of each life.
    x0 : array_like of float, shape (n,)
        Exact age of each life [years].
    curve : RateCurve
        Discount curve [per annum, effective].
    frequency : int
        Payments a year, m.
    timing : {"advance", "arrears"}
        Payments at the start or the end of each 1/m period.
    escalation : float or array_like of shape (n,)
        Fixed escalation rate g [per annum, effective], from the valuation date.
    index_path : callable, optional
        Index growth factor at times [years] from the valuation date, elementwise on an array (e.g.
        ``RateCurve.growth_factors`` of an inflation curve).
    deferral : float or array_like of shape (n,)
        Years until payment starts, n [years].
    term : float or array_like of shape (n,), optional
        Years of payment for a temporary annuity [years]; whole life if omitted.
    guarantee : float or array_like of shape (n,)
        Guaranteed period from the start of payment [years].
    fractional : {"udd", "constant_force"}
        Fractional-age assumption for survival between integer ages.
    max_term : float
        Longest payment period considered [years] from the start of payment.

    Returns
    -------
    numpy.ndarray, shape (n,)
        Annuity factor [currency per 1 currency p.a.].

    References
    ----------
    [DHW] chapter 5: a-due^(m)_x as a sum of m-thly pure endowments, temporary, deferred
    (n|a_x = v^n np_x a_{x+n}) and guaranteed annuities (a-due_{n-certain} + n|a-due_x);
    [BGHJN] chapter 5. Escalation by (1 + g)^t is common practice.
    """
    q, lx, r, x = _lives(q_rows, rows, x0)

    def survival(sl: slice, times: NDArray[np.float64]) -> NDArray[np.float64]:
        return _survival(q, lx, r[sl, None], x[sl, None], times, fractional)

    remaining = q.shape[1] - x
    return _value_on_grid(
        x.size, survival, remaining, curve, frequency, timing, escalation, index_path, deferral, term,
        guarantee, max_term,
    )


def joint_life_annuity_factor(
    q_rows_x: ArrayLike,
    rows_x: ArrayLike,
    x0: ArrayLike,
    q_rows_y: ArrayLike,
    rows_y: ArrayLike,
    y0: ArrayLike,
    curve: RateCurve,
    **options: Any,
) -> NDArray[np.float64]:
    """Joint-life annuity factor a_xy [currency]: paid while both independent lives survive.

    Takes the keyword options of :func:`annuity_factor`; survival is tp_xy = tp_x tp_y.

    References
    ----------
    [DHW] chapter 9 (joint life annuities); [BGHJN] chapter 9.
    """
    fractional = options.pop("fractional", "udd")
    qx_, lx_x, rx, x = _lives(q_rows_x, rows_x, x0)
    qy_, lx_y, ry, y = _lives(q_rows_y, rows_y, y0)
    rx, x, ry, y = np.broadcast_arrays(rx, x, ry, y)

    def survival(sl: slice, times: NDArray[np.float64]) -> NDArray[np.float64]:
        px = _survival(qx_, lx_x, rx[sl, None], x[sl, None], times, fractional)
        py = _survival(qy_, lx_y, ry[sl, None], y[sl, None], times, fractional)
        return px * py

    remaining = np.minimum(qx_.shape[1] - x, qy_.shape[1] - y)
    return _value_on_grid(x.size, survival, remaining, curve, **_grid_options(options))


def _grid_options(options: dict[str, Any]) -> dict[str, Any]:
    allowed = {
        "frequency": 1, "timing": "advance", "escalation": 0.0, "index_path": None, "deferral": 0.0,
        "term": None, "guarantee": 0.0, "max_term": 121.0,
    }
    unknown = set(options) - set(allowed)
    if unknown:
        raise TypeError(f"unexpected option(s): {', '.join(sorted(unknown))}")
    return {**allowed, **options}


def reversionary_annuity_factor(
    q_rows_x: ArrayLike,
    rows_x: ArrayLike,
    x0: ArrayLike,
    q_rows_y: ArrayLike,
    rows_y: ArrayLike,
    y0: ArrayLike,
    curve: RateCurve,
    **same: Any,
) -> NDArray[np.float64]:
    """Reversionary annuity a_{x|y} = a_y - a_xy [currency]: paid to y after x's death.

    Both terms are valued on the same payment grid with the same keyword options as
    :func:`annuity_factor`, so each payment at time t is made if y is alive and x has died by t:
    sum (1/m) v(t) a(t) tp_y (1 - tp_x). With a ``deferral`` n this covers deaths of x before n as well
    as after. A guarantee has no meaning here and is refused.

    References
    ----------
    [DHW] chapter 9 (reversionary annuities); [BGHJN] chapter 9.
    """
    if np.any(np.asarray(same.get("guarantee", 0.0)) != 0):
        raise ValueError("a reversionary annuity takes no guarantee period")
    n = np.broadcast(np.atleast_1d(rows_x), np.atleast_1d(x0), np.atleast_1d(rows_y), np.atleast_1d(y0))
    ry = np.broadcast_to(np.asarray(rows_y), n.shape).reshape(-1)
    y = np.broadcast_to(np.asarray(y0, dtype=np.float64), n.shape).reshape(-1)
    a_y = annuity_factor(q_rows_y, ry, y, curve, **same)
    a_xy = joint_life_annuity_factor(q_rows_x, rows_x, x0, q_rows_y, rows_y, y0, curve, **same)
    return a_y - a_xy


def woolhouse(
    a_due_annual: ArrayLike, m: int, mu: ArrayLike, delta: ArrayLike
) -> NDArray[np.float64]:
    """Woolhouse's three-term approximation to the m-thly whole-life annuity-due [currency].

    a-due^(m)_x ~ a-due_x - (m - 1) / (2m) - (m^2 - 1) / (12 m^2) (mu_x + delta).

    Parameters
    ----------
    a_due_annual : array_like
        Annual whole-life annuity-due a-due_x [currency].
    m : int
        Payments a year.
    mu : array_like
        Force of mortality at x, mu_x [per annum].
    delta : array_like
        Force of interest, delta = ln(1 + i) [per annum].

    References
    ----------
    [DHW] section 5.11 (Woolhouse's formula, three terms).
    """
    a = np.asarray(a_due_annual, dtype=np.float64)
    mm = float(m)
    third = (mm**2 - 1.0) / (12.0 * mm**2) * (np.asarray(mu, float) + np.asarray(delta, float))
    return woolhouse_two_term(a, m) - third


def woolhouse_two_term(a_due_annual: ArrayLike, m: int) -> NDArray[np.float64]:
    """Woolhouse's two-term approximation a-due^(m)_x ~ a-due_x - (m - 1) / (2m) [currency].

    References
    ----------
    [DHW] section 5.11 (Woolhouse's formula, first two terms).
    """
    mm = float(m)
    return np.asarray(a_due_annual, dtype=np.float64) - (mm - 1.0) / (2.0 * mm)


# --------------------------------------------------------------------------------------------------
# Survival on any time grid (moved from valuation/survival.py)
# --------------------------------------------------------------------------------------------------

def _survival(
    q: NDArray[np.float64],
    lx: NDArray[np.float64],
    rows: NDArray[np.intp],
    x0: NDArray[np.float64],
    t: NDArray[np.float64],
    fractional: FractionalAge,
) -> NDArray[np.float64]:
    """tp_x0 for broadcastable rows/x0 (shape (n, 1)) and times t (shape (T,) or (n, T))."""
    l0 = lx_at(lx, q, rows, x0, fractional)
    lt = lx_at(lx, q, rows, x0 + t, fractional)
    with np.errstate(divide="ignore", invalid="ignore"):
        tp = np.where(l0 > 0.0, lt / np.where(l0 > 0.0, l0, 1.0), 0.0)
    return np.clip(tp, 0.0, 1.0)


def tpx(
    q_rows: ArrayLike,
    rows: ArrayLike,
    x0: ArrayLike,
    t: ArrayLike,
    fractional: FractionalAge = "udd",
) -> NDArray[np.float64]:
    """Survival probabilities tp_x0 = l(x0 + t) / l(x0) on a time grid.

    Parameters
    ----------
    q_rows : array_like, shape (n_rows, n_ages)
        Cohort q rows (column j = q at integer age j; last column 1.0).
    rows : array_like of int, shape (n,)
        Cohort row of each life.
    x0 : array_like of float, shape (n,)
        Exact age of each life [years].
    t : array_like of float, shape (T,)
        Times from now, t >= 0 [years]; any grid (annual, monthly, ...).
    fractional : {"udd", "constant_force"}
        Fractional-age assumption between integer ages.

    Returns
    -------
    numpy.ndarray, shape (n, T)
        tp_x0 for each life and time; 0 past the closing age (and for a life already past it).

    References
    ----------
    [DHW] sections 2.2 and 3.3, tp_x = l_{x+t} / l_x; [BGHJN] sections 3.3 and 3.6.
    """
    q = _as_q_rows(q_rows)
    lx = cohort_lx(q)
    r = np.atleast_1d(np.asarray(rows, dtype=np.intp))
    x = np.atleast_1d(np.asarray(x0, dtype=np.float64))
    tt = np.atleast_1d(np.asarray(t, dtype=np.float64))
    if tt.ndim != 1:
        raise ValueError(f"t must be 1-D (a time grid); got shape {tt.shape}")
    if (tt < 0).any():
        raise ValueError("t must be >= 0 [years]")
    r, x = np.broadcast_arrays(r, x)
    return _survival(q, lx, r[:, None], x[:, None], tt[None, :], fractional)


def joint_life(tp_x: ArrayLike, tp_y: ArrayLike) -> NDArray[np.float64]:
    """Joint-life survival tp_xy = tp_x tp_y of two independent lives [probability].

    References
    ----------
    [DHW] chapter 9 (independent future lifetimes); [BGHJN] section 9.3.
    """
    return np.asarray(tp_x, dtype=np.float64) * np.asarray(tp_y, dtype=np.float64)


def last_survivor(tp_x: ArrayLike, tp_y: ArrayLike) -> NDArray[np.float64]:
    """Last-survivor survival tp_{xy-bar} = tp_x + tp_y - tp_x tp_y of independent lives [probability].

    References
    ----------
    [DHW] chapter 9 (independent future lifetimes); [BGHJN] section 9.4.
    """
    a = np.asarray(tp_x, dtype=np.float64)
    b = np.asarray(tp_y, dtype=np.float64)
    return a + b - a * b


# --------------------------------------------------------------------------------------------------
# Curtate expectation of life (moved from valuation/expectancy.py)
# --------------------------------------------------------------------------------------------------

def curtate_expectancy(
    q_rows: ArrayLike, rows: ArrayLike, x0: ArrayLike, fractional: FractionalAge = "udd"
) -> NDArray[np.float64]:
    """Curtate expectation of life e_x0 = sum_{k>=1} kp_x0 [years], from an exact (fractional) age.

    kp_x0 = l(x0 + k) / l(x0) with l interpolated under the fractional-age assumption (it matters only
    when x0 is not a whole age).

    Parameters
    ----------
    q_rows : array_like, shape (n_rows, n_ages)
        Cohort q rows (or a period q row); last column 1.0.
    rows : array_like of int, shape (n,)
        Row of each life.
    x0 : array_like of float, shape (n,)
        Exact age [years].
    fractional : {"udd", "constant_force"}
        Fractional-age assumption.

    Returns
    -------
    numpy.ndarray, shape (n,)
        e_x0 [years].

    References
    ----------
    [DHW] section 2.6, e_x = sum_{k>=1} kp_x; [BGHJN] section 3.5.
    """
    _check_option(fractional, _FRACTIONAL, "fractional")
    q, lx, r, x, _, _ = _start(q_rows, rows, x0)
    n_ages = q.shape[1]
    k = np.arange(1, n_ages + 1, dtype=np.float64)
    l_x0 = lx_at(lx, q, r, x, fractional)
    total = np.empty(x.shape)
    chunk = max(1, _CHUNK_CELLS // k.size)
    for start in range(0, x.size, chunk):
        sl = slice(start, start + chunk)
        total[sl] = lx_at(lx, q, r[sl, None], x[sl, None] + k[None, :], fractional).sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(l_x0 > 0.0, total / np.where(l_x0 > 0.0, l_x0, 1.0), 0.0)
