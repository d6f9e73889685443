"""Compiled kernels for the benefit legs (numba).

They compute exactly what :func:`valuation.engine.legs.value_leg_numpy` computes (the readable array
version, kept as the reference and checked against these in the tests), one key at a time without
building (keys x payment dates) temporaries, which makes a monthly valuation of a million members fit in
seconds and in flat memory.

References
----------
Interpolation of l between integer ages: Dickson, Hardy & Waters (2013) section 3.3 (UDD and constant
force); Bowers et al. (1997) section 3.6.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


@njit(cache=True, inline="always")
def _l_at(lx: np.ndarray, q: np.ndarray, r: int, age: float, udd: bool) -> float:
    n_ages = q.shape[1]
    y = age if age > 0.0 else 0.0
    j = math.floor(y)
    if j > n_ages - 1:
        j = n_ages - 1
    s = y - j
    if s > 1.0:
        s = 1.0
    return _l_js(lx[r], q[r], j, s, udd)


@njit(cache=True, inline="always")
def _l_js(lxr: np.ndarray, qr: np.ndarray, j: int, s: float, udd: bool) -> float:
    """l at age j + s on one row: l_j (1 - s q_j) for UDD, l_j p_j^s for constant force."""
    l_j = lxr[j]
    q_j = qr[j]
    if udd:
        return l_j * (1.0 - s * q_j)
    p_j = 1.0 - q_j
    if p_j <= 0.0:
        return l_j if s == 0.0 else 0.0
    return l_j * p_j**s


@njit(cache=True, parallel=True)
def leg_kernel(
    lx: np.ndarray,
    q: np.ndarray,
    udd: bool,
    reversion: bool,
    frequency: int,
    step: int,
    rows_x: np.ndarray,
    x0: np.ndarray,
    rows_y: np.ndarray,
    y0: np.ndarray,
    first: np.ndarray,
    end: np.ndarray,
    start: np.ndarray,
    guar: np.ndarray,
    at_start: np.ndarray,
    increase: np.ndarray,
    growth: np.ndarray,
    use_growth: bool,
    v: np.ndarray,
    weights: np.ndarray,
    unit_pv: np.ndarray,
    cashflow: np.ndarray,
) -> None:
    """Fill ``unit_pv`` (K, J) and the weighted expected payments ``cashflow`` (B, M), one row a block.

    Own leg: payment at month tau on survival l(x0 + tau/12) / l(x0), certain before ``guar``.
    Reversion: on tp_y (1 - tp_x) from ``guar`` on [DHW section 9.5]. Amount per unit of base:
    at_start * increase[tau] / increase[start], or growth[tau] before ``start`` for a reversion.
    Keys are split into B blocks valued in parallel, each adding to its own cash-flow row.
    """
    K, J = unit_pv.shape
    B = cashflow.shape[0]
    inv_freq = 1.0 / frequency
    for b in prange(B):
        lo = (K * b) // B
        hi = (K * (b + 1)) // B
        coef = np.empty(J)
        acc = np.empty(J)
        for k in range(lo, hi):
            acc[:] = 0.0
            rx = rows_x[k]
            lx0 = _l_at(lx, q, rx, x0[k], udd)
            ly0 = 1.0
            ry = rows_y[k]
            if reversion:
                ly0 = _l_at(lx, q, ry, y0[k], udd)
            s_k = start[k]
            for j in range(J):
                coef[j] = at_start[k, j] / increase[j, s_k]
            inv_lx0 = 1.0 / lx0
            inv_ly0 = 1.0 / ly0
            gk = guar[k]
            lxr = lx[rx]
            qxr = q[rx]
            lyr = lx[ry]
            qyr = q[ry]
            last = q.shape[1] - 1
            # ages advance by step/12 a payment: carry their integer and fractional parts along
            ax = x0[k] + first[k] / 12.0
            jx = min(int(math.floor(ax)), last)
            sx = min(ax - jx, 1.0)
            ay = y0[k] + first[k] / 12.0
            jy = min(int(math.floor(ay)), last) if reversion else 0
            sy = min(ay - jy, 1.0) if reversion else 0.0
            ds = step / 12.0
            for tau in range(first[k], end[k], step):
                if tau > first[k]:
                    sx += ds
                    while sx >= 1.0 and jx < last:
                        sx -= 1.0
                        jx += 1
                    if sx > 1.0:
                        sx = 1.0
                    if reversion:
                        sy += ds
                        while sy >= 1.0 and jy < last:
                            sy -= 1.0
                            jy += 1
                        if sy > 1.0:
                            sy = 1.0
                px = _l_js(lxr, qxr, jx, sx, udd) * inv_lx0
                if reversion:
                    if tau < gk:
                        continue
                    py = _l_js(lyr, qyr, jy, sy, udd) * inv_ly0
                    if py == 0.0:
                        break
                    surv = py * (1.0 - px)
                else:
                    if tau < gk:
                        surv = 1.0
                    else:
                        if px == 0.0:
                            break
                        surv = px
                if surv == 0.0:
                    continue
                surv *= inv_freq
                disc = v[tau]
                pre = reversion and use_growth and tau < s_k
                flow = 0.0
                for j in range(J):
                    if pre:
                        amount = growth[j, tau]
                    else:
                        amount = coef[j] * increase[j, tau]
                    paid = surv * amount
                    acc[j] += paid * disc
                    flow += paid * weights[k, j]
                cashflow[b, tau] += flow
            for j in range(J):
                unit_pv[k, j] = acc[j]


@njit(cache=True)
def death_in_service_kernel(
    per_salary: np.ndarray,
    inv: np.ndarray,
    salary: np.ndarray,
    service: np.ndarray,
    mid: np.ndarray,
    v_mid: np.ndarray,
    dis_unit: np.ndarray,
    flows: np.ndarray,
) -> None:
    """Death-in-service lump sums attributed to service (see ``project.Valuer._active``).

    For member n (key k = inv[n]) and year i: the full expected payment is per_salary[k, i] * salary[n];
    one year of service earns 1 / (service[n] + mid[i]) of it (``dis_unit``, discounted), and the part
    earned to date, service[n] / (service[n] + mid[i]), is paid out in ``flows[i]`` (not discounted).
    """
    N = inv.shape[0]
    Y = mid.shape[0]
    for n in range(N):
        k = inv[n]
        s = service[n]
        sal = salary[n]
        acc = 0.0
        for i in range(Y):
            p = per_salary[k, i]
            if p == 0.0:
                continue
            paid = p * sal / (s + mid[i])
            acc += paid * v_mid[i]
            flows[i] += paid * s
        dis_unit[n] = acc
