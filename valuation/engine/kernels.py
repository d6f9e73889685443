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


@njit(cache=True)
def _next_increase(s: int, first_month: int) -> int:
    """The first increase month strictly after month s (increases on first_month + 12 k)."""
    if s < first_month:
        return first_month
    return first_month + 12 * ((s - first_month) // 12 + 1)


@njit(cache=True)
def _reversion_with_deaths_before_start(
    k: int,
    b: int,
    lx: np.ndarray,
    q: np.ndarray,
    udd: bool,
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
    coef: np.ndarray,
    increase: np.ndarray,
    first_adj: np.ndarray,
    use_adj: bool,
    increase_month: int,
    growth: np.ndarray,
    in_service: np.ndarray,
    left: np.ndarray,
    growth_left: np.ndarray,
    use_exits: bool,
    service: np.ndarray,
    use_service: bool,
    v: np.ndarray,
    weights: np.ndarray,
    acc: np.ndarray,
    cashflow: np.ndarray,
) -> None:
    """A reversion whose member may die before the start month (deferred or active member).

    Months are walked one at a time. A death in month d < start fixes the spouse's pension at G(d) (growth,
    the in-service or leaver mixture, the prospective attribution), which from d on receives the increases
    of a pension starting at d: running sums of (F(d) - F(d-1)) G(d) / increase[d] hold the deaths since the
    last increase month (``new``, and ``new_adj`` times their first-increase factor) and before it (``old``).
    Deaths from the start on receive the member's pension: (F(tau) - F(start - 1)) coef increase[tau].
    """
    J = acc.shape[0]
    inv_freq = 1.0 / frequency
    last = q.shape[1] - 1
    rx = rows_x[k]
    ry = rows_y[k]
    lxr = lx[rx]
    qxr = q[rx]
    lyr = lx[ry]
    qyr = q[ry]
    inv_lx0 = 1.0 / _l_at(lx, q, rx, x0[k], udd)
    inv_ly0 = 1.0 / _l_at(lx, q, ry, y0[k], udd)
    s_k = start[k]
    gk = guar[k]
    f_k = first[k]
    tf_s = _next_increase(s_k, increase_month)
    n_exits = in_service.shape[1]
    svc = service[k] if use_service else 0.0
    old = np.zeros(J)
    new = np.zeros(J)
    new_adj = np.zeros(J)
    ax = x0[k]
    jx = min(int(math.floor(max(ax, 0.0))), last)
    sx = min(max(ax, 0.0) - jx, 1.0)
    ay = y0[k]
    jy = min(int(math.floor(max(ay, 0.0))), last)
    sy = min(max(ay, 0.0) - jy, 1.0)
    ds = 1.0 / 12.0
    f_prev = 0.0
    f_before = 0.0
    for tau in range(1, end[k]):
        sx += ds
        while sx >= 1.0 and jx < last:
            sx -= 1.0
            jx += 1
        if sx > 1.0:
            sx = 1.0
        sy += ds
        while sy >= 1.0 and jy < last:
            sy -= 1.0
            jy += 1
        if sy > 1.0:
            sy = 1.0
        f = 1.0 - _l_js(lxr, qxr, jx, sx, udd) * inv_lx0
        if use_adj and tau >= increase_month and (tau - increase_month) % 12 == 0:
            for j in range(J):
                old[j] += new_adj[j]
                new_adj[j] = 0.0
                new[j] = 0.0
        if tau < s_k:
            df = f - f_prev
            if df != 0.0:
                m = min((tau + 5) // 12, n_exits - 1)  # mid-year exits (months 6, 18, ...) before tau
                for j in range(J):
                    g = growth[j, tau]
                    if use_service:
                        g *= (svc + s_k / 12.0) / (svc + tau / 12.0)
                    if use_exits:
                        g = g * in_service[k, m] + growth_left[j, tau] * left[k, m]
                    u = df * g / increase[j, tau]
                    new[j] += u
                    if use_adj:
                        new_adj[j] += u * first_adj[j, tau]
            if tau == s_k - 1:
                f_before = f
        f_prev = f
        if tau < f_k or (tau - f_k) % step != 0 or tau < gk:
            continue
        py = _l_js(lyr, qyr, jy, sy, udd) * inv_ly0
        if py == 0.0:
            break
        ysurv = py * inv_freq
        post = ysurv * (f - f_before) if tau >= s_k else 0.0
        disc = v[tau]
        for j in range(J):
            inc = increase[j, tau]
            paid = ysurv * inc * (old[j] + new[j])
            if tau >= s_k:
                amount = coef[j] * inc
                if use_adj and tau >= tf_s:
                    amount *= first_adj[j, s_k]
                paid += post * amount
            acc[j] += paid * disc
            cashflow[b, j, tau] += paid * weights[k, j]


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
    first_adj: np.ndarray,
    use_adj: bool,
    increase_month: int,
    growth: np.ndarray,
    use_growth: bool,
    in_service: np.ndarray,
    left: np.ndarray,
    growth_left: np.ndarray,
    use_exits: bool,
    service: np.ndarray,
    use_service: bool,
    v: np.ndarray,
    weights: np.ndarray,
    unit_pv: np.ndarray,
    cashflow: np.ndarray,
) -> None:
    """Fill ``unit_pv`` (K, J) and the weighted expected payments ``cashflow`` (B, J, M), one row a block
    and tranche.

    Own leg: payment at month tau on survival l(x0 + tau/12) / l(x0), certain before ``guar``.
    Reversion: on tp_y (1 - tp_x) from ``guar`` on [DHW section 9.5]. Amount per unit of base:
    at_start * increase[tau] / increase[start], times ``first_adj[start]`` from the first increase after
    the start. A reversion whose member can die before the start (``use_growth`` and start >= 2) is
    valued month by month in :func:`_reversion_with_deaths_before_start`.
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
            s_k = start[k]
            for j in range(J):
                coef[j] = at_start[k, j] / increase[j, s_k]
            if reversion and use_growth and s_k >= 2:
                _reversion_with_deaths_before_start(
                    k, b, lx, q, udd, frequency, step, rows_x, x0, rows_y, y0, first, end, start, guar, coef,
                    increase, first_adj, use_adj, increase_month, growth, in_service, left, growth_left,
                    use_exits, service, use_service, v, weights, acc, cashflow,
                )
                for j in range(J):
                    unit_pv[k, j] = acc[j]
                continue
            rx = rows_x[k]
            lx0 = _l_at(lx, q, rx, x0[k], udd)
            ly0 = 1.0
            ry = rows_y[k]
            if reversion:
                ly0 = _l_at(lx, q, ry, y0[k], udd)
            tf_s = _next_increase(s_k, increase_month)
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
            # a reversion starting at month 1 counts deaths from month 0 on: F(0) = 0 (no pre-start deaths)
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
                    if tau < gk or tau < s_k:
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
                adj_on = use_adj and tau >= tf_s
                for j in range(J):
                    amount = coef[j] * increase[j, tau]
                    if adj_on:
                        amount *= first_adj[j, s_k]
                    paid = surv * amount
                    acc[j] += paid * disc
                    cashflow[b, j, tau] += paid * weights[k, j]
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
