"""Complete and curtate expectation of life, cohort or period, from a fractional starting age.

Cohort expectancy passes cohort q rows (q along the member's future calendar years); period expectancy
passes a period q row (one calendar year's rates at every age). The arithmetic is the same.

References
----------
.. [DHW] Dickson, D.C.M., Hardy, M.R. and Waters, H.R., *Actuarial Mathematics for Life Contingent
   Risks*, 2nd ed., Cambridge University Press, 2013: section 2.6 (curtate and complete expectation of
   life) and section 3.3 (fractional age assumptions).
.. [BGHJN] Bowers, N.L., Gerber, H.U., Hickman, J.C., Jones, D.A. and Nesbitt, C.J., *Actuarial
   Mathematics*, 2nd ed., Society of Actuaries, 1997: sections 3.5 and 3.6.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from valuation.survival import FractionalAge, _as_q_rows, _check_option, cohort_lx, lx_at

_FRACTIONAL: tuple[str, ...] = ("udd", "constant_force")
#: Largest number of (life x age) cells evaluated at once.
_CHUNK_CELLS = 250_000


def _start(q_rows: ArrayLike, rows: ArrayLike, x0: ArrayLike) -> tuple[np.ndarray, ...]:
    q = _as_q_rows(q_rows)
    lx = cohort_lx(q)
    r, x = np.broadcast_arrays(
        np.atleast_1d(np.asarray(rows, dtype=np.intp)), np.atleast_1d(np.asarray(x0, dtype=np.float64))
    )
    r = r.reshape(-1)
    x = np.maximum(x.reshape(-1), 0.0)
    n_ages = q.shape[1]
    j0 = np.minimum(np.floor(x), n_ages - 1).astype(np.intp)
    s0 = np.minimum(x - j0, 1.0)
    return q, lx, r, x, j0, s0


def _year_integrals(q: NDArray[np.float64], lx: NDArray[np.float64], fractional: str) -> NDArray[np.float64]:
    """Integral of l over each year of age [j, j + 1], shape (n_rows, n_ages)."""
    lj = lx[:, :-1]
    if fractional == "udd":
        return 0.5 * (lj + lx[:, 1:])  # l linear over the year
    p = 1.0 - q
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where((p > 0.0) & (p < 1.0), (p - 1.0) / np.log(np.where(p > 0, p, 0.5)), 0.0)
    ratio = np.where(p == 1.0, 1.0, ratio)  # limit of (p - 1)/ln p as p -> 1 (and 0 as p -> 0)
    return lj * ratio


def complete_expectancy(
    q_rows: ArrayLike, rows: ArrayLike, x0: ArrayLike, fractional: FractionalAge = "udd"
) -> NDArray[np.float64]:
    """Complete expectation of life e°_x0 = integral of tp_x0 dt [years], from an exact (fractional) age.

    Exact under each fractional-age assumption: over a whole year of age the integral of l is
    (l_j + l_{j+1}) / 2 under UDD and l_j (p_j - 1) / ln p_j under a constant force; the part-year from
    x0 = j + s to j + 1 is (1 - s)(l(x0) + l_{j+1}) / 2 under UDD and l_j (p_j - p_j^s) / ln p_j under a
    constant force. A life at or past the closing age has e° = 0.

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
        e°_x0 [years].

    References
    ----------
    [DHW] section 2.6, e°_x = integral_0^inf tp_x dt, and section 3.3; [BGHJN] sections 3.5 and 3.6.
    """
    _check_option(fractional, _FRACTIONAL, "fractional")
    q, lx, r, x, j0, s0 = _start(q_rows, rows, x0)
    years = _year_integrals(q, lx, fractional)
    # tail[r, j] = integral of l from age j to the end of the table
    tail = np.zeros_like(lx)
    tail[:, :-1] = np.cumsum(years[:, ::-1], axis=1)[:, ::-1]
    l_x0 = lx_at(lx, q, r, x, fractional)
    l_next = lx[r, j0 + 1]
    if fractional == "udd":
        part = (1.0 - s0) * 0.5 * (l_x0 + l_next)
    else:
        p = 1.0 - q[r, j0]
        with np.errstate(divide="ignore", invalid="ignore"):
            inside = (p > 0.0) & (p < 1.0)
            safe = np.where(inside, p, 0.5)
            part_cf = lx[r, j0] * (safe - safe**s0) / np.log(safe)
        part = np.where(inside, part_cf, np.where(p == 1.0, lx[r, j0] * (1.0 - s0), 0.0))
    total = part + tail[r, j0 + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(l_x0 > 0.0, total / np.where(l_x0 > 0.0, l_x0, 1.0), 0.0)
