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


@njit(cache=True)
def _one_key(
    k: int, b: int, lx: np.ndarray, q: np.ndarray, udd: bool, reversion: bool, frequency: int, step: int,
    rows_x: np.ndarray, x0: np.ndarray, rows_y: np.ndarray, y0: np.ndarray, first: np.ndarray, end: np.ndarray,
    start: np.ndarray, guar: np.ndarray, at_start: np.ndarray, increase: np.ndarray, first_adj: np.ndarray,
    use_adj: bool, increase_month: int, growth: np.ndarray, use_growth: bool, in_service: np.ndarray,
    left: np.ndarray, growth_left: np.ndarray, use_exits: bool, service: np.ndarray, use_service: bool,
    v: np.ndarray, weights: np.ndarray, unit_pv: np.ndarray, cashflow: np.ndarray, coef: np.ndarray,
    acc: np.ndarray,
) -> None:
    """One key of :func:`leg_kernel` (``coef`` and ``acc`` are work arrays of length J)."""
    J = unit_pv.shape[1]
    inv_freq = 1.0 / frequency
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
        return
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
    for b in prange(B):
        lo = (K * b) // B
        hi = (K * (b + 1)) // B
        coef = np.empty(J)
        acc = np.empty(J)
        for k in range(lo, hi):
            _one_key(k, b, lx, q, udd, reversion, frequency, step, rows_x, x0, rows_y, y0, first, end, start,
                     guar, at_start, increase, first_adj, use_adj, increase_month, growth, use_growth, in_service,
                     left, growth_left, use_exits, service, use_service, v, weights, unit_pv, cashflow, coef, acc)


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


# ---------------------------------------------------------------------------------------------------------
# Classes of keys under UDD: one walk over the months for every key of a class.
#
# Between integer ages UDD makes l linear in age, so for a life of exact age x0 = a + k/12 + delta (a whole
# years, k whole months, 0 <= delta <= 1/12) the survivors at grid month t are
#     l(x0 + t/12) = A(t) - delta D(t),
#     A(t) = l_j (1 - m/12 q_j),  D(t) = l_j q_j,  j = a + (k + t) // 12,  m = (k + t) % 12,
# with A and D independent of delta [DHW section 3.3; Bowers et al. 3.6]. Keys that share the survival row,
# a, k and every date (start, guarantee, first and last payment, and what fixes a spouse's pension on a
# death before the start) differ only in delta and in their amounts, and every value of theirs is a linear
# form (bilinear for a member and a spouse) in the deltas: one walk over the months gives the coefficients
# for the whole class, and each key's value is a few multiplications. The results equal
# :func:`leg_kernel`'s to rounding (the same sums, grouped differently).
# ---------------------------------------------------------------------------------------------------------


@njit(cache=True, inline="always")
def _a_of(lxr: np.ndarray, qxr: np.ndarray, a: int, k: int, t: int, last: int) -> float:
    """A(t) of the class (see above); past the last age, l there (the closing value), as _l_at gives."""
    j = a + (k + t) // 12
    if j > last:
        return lxr[last] * (1.0 - qxr[last])
    return lxr[j] - ((k + t) % 12) / 12.0 * (lxr[j] * qxr[j])


@njit(cache=True, inline="always")
def _d_of(lxr: np.ndarray, qxr: np.ndarray, a: int, k: int, t: int, last: int) -> float:
    """D(t) of the class: l_j q_j (0 past the last age, where l no longer changes)."""
    j = a + (k + t) // 12
    if j > last:
        return 0.0
    return lxr[j] * qxr[j]


@njit(cache=True)
def _class_own(
    p0: int, p1: int, b: int, order: np.ndarray, bucket: int, lx: np.ndarray, q: np.ndarray, inv_freq: float,
    step: int, rows_x: np.ndarray, x0: np.ndarray, first: np.ndarray, end: np.ndarray, start: np.ndarray,
    guar: np.ndarray, at_start: np.ndarray, increase: np.ndarray, first_adj: np.ndarray, use_adj: bool,
    increase_month: int, v: np.ndarray, weights: np.ndarray, unit_pv: np.ndarray, cashflow: np.ndarray,
) -> None:
    """The own leg of one class: certain before the guarantee's end, then on l(x0 + tau/12) / l(x0)."""
    J = unit_pv.shape[1]
    last = q.shape[1] - 1
    rep = order[p0]
    rx = rows_x[rep]
    a = int(math.floor(x0[rep]))
    lxr = lx[rx]
    qxr = q[rx]
    s = start[rep]
    g = guar[rep]
    tf = _next_increase(s, increase_month)
    n = p1 - p0
    inv_l = np.empty(n)
    dl = np.empty(n)
    w0 = np.zeros(J)
    w1 = np.zeros(J)
    w2 = np.zeros(J)
    for p in range(n):
        k = order[p0 + p]
        inv_l[p] = 1.0 / _l_at(lx, q, rx, x0[k], True)
        dl[p] = x0[k] - a - bucket / 12.0
        for j in range(J):
            w = weights[k, j] * at_start[k, j] / increase[j, s] * inv_freq
            w0[j] += w
            w1[j] += w * inv_l[p]
            w2[j] += w * inv_l[p] * dl[p]
    pc = np.zeros(J)
    pa = np.zeros(J)
    pd = np.zeros(J)
    for tau in range(first[rep], end[rep], step):
        disc = v[tau]
        adj_on = use_adj and tau >= tf
        if tau < g:
            for j in range(J):
                amount = increase[j, tau]
                if adj_on:
                    amount *= first_adj[j, s]
                pc[j] += amount * disc
                cashflow[b, j, tau] += amount * w0[j]
            continue
        big_a = _a_of(lxr, qxr, a, bucket, tau, last)
        big_d = _d_of(lxr, qxr, a, bucket, tau, last)
        if big_a == 0.0 and big_d == 0.0:
            break
        for j in range(J):
            amount = increase[j, tau]
            if adj_on:
                amount *= first_adj[j, s]
            pa[j] += amount * disc * big_a
            pd[j] += amount * disc * big_d
            cashflow[b, j, tau] += amount * (w1[j] * big_a - w2[j] * big_d)
    for p in range(n):
        k = order[p0 + p]
        for j in range(J):
            coef = at_start[k, j] / increase[j, s] * inv_freq
            unit_pv[k, j] = coef * (pc[j] + inv_l[p] * (pa[j] - dl[p] * pd[j]))


@njit(cache=True)
def _class_reversion(
    p0: int, p1: int, b: int, order: np.ndarray, bucket_x: int, bucket_y: int, lx: np.ndarray, q: np.ndarray,
    inv_freq: float, step: int, rows_x: np.ndarray, x0: np.ndarray, rows_y: np.ndarray, y0: np.ndarray,
    first: np.ndarray, end: np.ndarray, start: np.ndarray, guar: np.ndarray, at_start: np.ndarray,
    increase: np.ndarray, first_adj: np.ndarray, use_adj: bool, increase_month: int, growth: np.ndarray,
    in_service: np.ndarray, left: np.ndarray, growth_left: np.ndarray, use_exits: bool, service: np.ndarray,
    use_service: bool, pre_start: bool, v: np.ndarray, weights: np.ndarray, unit_pv: np.ndarray,
    cashflow: np.ndarray,
) -> None:
    """A reversion of one class: tp_y times the member's deaths [DHW section 9.5].

    The member's side is a linear form in delta_x with the parts (X_a, X_d), weighed per key by
    (1 / l(x0), -delta_x / l(x0)); the spouse's side (A_y, D_y) by (1 / l(y0), -delta_y / l(y0)) [/ frequency].
    Without deaths before the start (``pre_start`` False) the member's side is 1 - tp_x =
    (l(x0) - l(x0 + tau/12)) / l(x0) = [(A(0) - A(tau)) - delta_x (D(0) - D(tau))] / l(x0), paid from the
    start and the guarantee's end on, as :func:`leg_kernel` pays it. With them, as
    :func:`_reversion_with_deaths_before_start` walks them: the running sums of deaths since and before the
    last increase month carry the two parts (pensions fixed at the death, ``pre``), and deaths from the
    start on are F(tau) - F(start - 1) times the member's pension (``post``, per unit of ``at_start``).
    """
    J = unit_pv.shape[1]
    last = q.shape[1] - 1
    rep = order[p0]
    rx = rows_x[rep]
    ry = rows_y[rep]
    ax = int(math.floor(x0[rep]))
    ay = int(math.floor(y0[rep]))
    lxr = lx[rx]
    qxr = q[rx]
    lyr = lx[ry]
    qyr = q[ry]
    s = start[rep]
    g = guar[rep]
    f_k = first[rep]
    tf = _next_increase(s, increase_month)
    n_exits = in_service.shape[1]
    svc = service[rep] if use_service else 0.0
    n = p1 - p0
    kap = np.empty((n, 2, 2))  # key weights of the parts (x part, y part)
    for p in range(n):
        k = order[p0 + p]
        ix = 1.0 / _l_at(lx, q, rx, x0[k], True)
        iy = 1.0 / _l_at(lx, q, ry, y0[k], True) * inv_freq
        dx = x0[k] - ax - bucket_x / 12.0
        dy = y0[k] - ay - bucket_y / 12.0
        kap[p, 0, 0] = ix * iy
        kap[p, 0, 1] = -ix * iy * dy
        kap[p, 1, 0] = -ix * dx * iy
        kap[p, 1, 1] = ix * dx * iy * dy
    # cash-flow weights: pensions fixed at a death before the start (w_pre), and per unit of at_start (w_post)
    w_pre = np.zeros((J, 2, 2))
    w_post = np.zeros((J, 2, 2))
    for p in range(n):
        k = order[p0 + p]
        for j in range(J):
            coef = at_start[k, j] / increase[j, s]
            for u in range(2):
                for e in range(2):
                    w_pre[j, u, e] += weights[k, j] * kap[p, u, e]
                    w_post[j, u, e] += weights[k, j] * coef * kap[p, u, e]
    p_pre = np.zeros((J, 2, 2))
    p_post = np.zeros((J, 2, 2))
    xs = np.empty(2)
    ys = np.empty(2)
    if not pre_start:
        a0 = _a_of(lxr, qxr, ax, bucket_x, 0, last)
        d0 = _d_of(lxr, qxr, ax, bucket_x, 0, last)
        t0 = max(g, s)
        if t0 > f_k:  # the first payment month on the grid from the guarantee's end and the start on
            f_k += step * ((t0 - f_k + step - 1) // step)
        for tau in range(f_k, end[rep], step):
            ya = _a_of(lyr, qyr, ay, bucket_y, tau, last)
            yd = _d_of(lyr, qyr, ay, bucket_y, tau, last)
            if ya == 0.0 and yd == 0.0:
                break
            xa = a0 - _a_of(lxr, qxr, ax, bucket_x, tau, last)
            xd = d0 - _d_of(lxr, qxr, ax, bucket_x, tau, last)
            q00 = xa * ya
            q01 = xa * yd
            q10 = xd * ya
            q11 = xd * yd
            disc = v[tau]
            adj_on = use_adj and tau >= tf
            for j in range(J):
                amount = increase[j, tau]
                if adj_on:
                    amount *= first_adj[j, s]
                ad = amount * disc
                p_post[j, 0, 0] += q00 * ad
                p_post[j, 0, 1] += q01 * ad
                p_post[j, 1, 0] += q10 * ad
                p_post[j, 1, 1] += q11 * ad
                cashflow[b, j, tau] += amount * (q00 * w_post[j, 0, 0] + q01 * w_post[j, 0, 1]
                                                 + q10 * w_post[j, 1, 0] + q11 * w_post[j, 1, 1])
    else:
        old = np.zeros((J, 2))
        new = np.zeros((J, 2))
        new_adj = np.zeros((J, 2))
        a_prev = _a_of(lxr, qxr, ax, bucket_x, 0, last)
        d_prev = _d_of(lxr, qxr, ax, bucket_x, 0, last)
        a_before = 0.0
        d_before = 0.0
        for tau in range(1, end[rep]):
            big_a = _a_of(lxr, qxr, ax, bucket_x, tau, last)
            big_d = _d_of(lxr, qxr, ax, bucket_x, tau, last)
            if use_adj and tau >= increase_month and (tau - increase_month) % 12 == 0:
                for j in range(J):
                    for u in range(2):
                        old[j, u] += new_adj[j, u]
                        new_adj[j, u] = 0.0
                        new[j, u] = 0.0
            if tau < s:
                da = a_prev - big_a
                dd = d_prev - big_d
                m = min((tau + 5) // 12, n_exits - 1)  # mid-year exits (months 6, 18, ...) before tau
                for j in range(J):
                    gj = growth[j, tau]
                    if use_service:
                        gj *= (svc + s / 12.0) / (svc + tau / 12.0)
                    if use_exits:
                        gj = gj * in_service[rep, m] + growth_left[j, tau] * left[rep, m]
                    unit = gj / increase[j, tau]
                    new[j, 0] += da * unit
                    new[j, 1] += dd * unit
                    if use_adj:
                        new_adj[j, 0] += da * unit * first_adj[j, tau]
                        new_adj[j, 1] += dd * unit * first_adj[j, tau]
                if tau == s - 1:
                    a_before = big_a
                    d_before = big_d
            a_prev = big_a
            d_prev = big_d
            if tau < f_k or (tau - f_k) % step != 0 or tau < g:
                continue
            ys[0] = _a_of(lyr, qyr, ay, bucket_y, tau, last)
            ys[1] = _d_of(lyr, qyr, ay, bucket_y, tau, last)
            if ys[0] == 0.0 and ys[1] == 0.0:
                break
            disc = v[tau]
            after = tau >= s
            xs[0] = a_before - big_a
            xs[1] = d_before - big_d
            for j in range(J):
                inc = increase[j, tau]
                amount = inc
                if use_adj and tau >= tf:
                    amount *= first_adj[j, s]
                cf = 0.0
                for u in range(2):
                    fixed = inc * (old[j, u] + new[j, u])
                    for e in range(2):
                        paid = ys[e] * fixed
                        p_pre[j, u, e] += paid * disc
                        cf += paid * w_pre[j, u, e]
                        if after:
                            paid = xs[u] * ys[e] * amount
                            p_post[j, u, e] += paid * disc
                            cf += paid * w_post[j, u, e]
                cashflow[b, j, tau] += cf
    for p in range(n):
        k = order[p0 + p]
        for j in range(J):
            coef = at_start[k, j] / increase[j, s]
            total = 0.0
            for u in range(2):
                for e in range(2):
                    total += kap[p, u, e] * (p_pre[j, u, e] + coef * p_post[j, u, e])
            unit_pv[k, j] = total


@njit(cache=True)
def _single_reversion(
    k: int, b: int, lx: np.ndarray, q: np.ndarray, inv_freq: float, step: int, rows_x: np.ndarray,
    x0: np.ndarray, rows_y: np.ndarray, y0: np.ndarray, first: np.ndarray, end: np.ndarray, start: np.ndarray,
    guar: np.ndarray, at_start: np.ndarray, increase: np.ndarray, first_adj: np.ndarray, use_adj: bool,
    increase_month: int, wv: np.ndarray, weights: np.ndarray, unit_pv: np.ndarray, cashflow: np.ndarray,
    surv: np.ndarray,
) -> None:
    """One key's reversion with no deaths before the start, as :func:`leg_kernel` pays it (tp_y (1 - tp_x)
    from the start and the guarantee's end on, UDD): the survival at each payment month first, into
    ``surv`` (a work array of the grid's length), then each tranche's sums over it (``wv``: the increase
    index times the discount factor, (J, M))."""
    J = unit_pv.shape[1]
    rx = rows_x[k]
    ry = rows_y[k]
    ix = 1.0 / _l_at(lx, q, rx, x0[k], True)
    iy = 1.0 / _l_at(lx, q, ry, y0[k], True) * inv_freq
    f_k = first[k]
    s = start[k]
    t0 = max(guar[k], s)
    if t0 > f_k:
        f_k += step * ((t0 - f_k + step - 1) // step)
    stop = f_k
    for tau in range(f_k, end[k], step):
        py = _l_at(lx, q, ry, y0[k] + tau / 12.0, True)
        if py == 0.0:
            break
        surv[tau] = py * iy * (1.0 - _l_at(lx, q, rx, x0[k] + tau / 12.0, True) * ix)
        stop = tau + step
    tf = _next_increase(s, increase_month)
    for j in range(J):
        coef = at_start[k, j] / increase[j, s]
        w = weights[k, j] * coef
        adj = first_adj[j, s] if use_adj else 1.0
        total = 0.0
        for tau in range(f_k, stop, step):
            factor = adj if use_adj and tau >= tf else 1.0
            paid = surv[tau] * factor
            total += paid * wv[j, tau]
            cashflow[b, j, tau] += paid * increase[j, tau] * w
        unit_pv[k, j] = coef * total


@njit(cache=True, parallel=True)
def class_leg_kernel(
    order: np.ndarray,
    bounds: np.ndarray,
    bucket_x: np.ndarray,
    bucket_y: np.ndarray,
    lx: np.ndarray,
    q: np.ndarray,
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
    """:func:`leg_kernel` under UDD on classes of keys: class c holds the keys ``order[bounds[c]:bounds[c+1]]``,
    whose survival rows, whole years and months of age (``bucket_x``, ``bucket_y``) and dates are the same.
    Classes are split into blocks valued in parallel, each adding to its own cash-flow row."""
    C = bounds.shape[0] - 1
    B = cashflow.shape[0]
    inv_freq = 1.0 / frequency
    J = unit_pv.shape[1]
    M = v.shape[0]
    wv = np.empty((J, M))
    for j in range(J):
        for tau in range(M):
            wv[j, tau] = increase[j, tau] * v[tau]
    for b in prange(B):
        coef = np.empty(J)
        acc = np.empty(J)
        surv = np.empty(M)
        for c in range((C * b) // B, (C * (b + 1)) // B):
            p0 = bounds[c]
            p1 = bounds[c + 1]
            if p1 - p0 == 1 and reversion and not (use_growth and start[order[p0]] >= 2):
                _single_reversion(order[p0], b, lx, q, inv_freq, step, rows_x, x0, rows_y, y0, first, end, start,
                                  guar, at_start, increase, first_adj, use_adj, increase_month, wv, weights,
                                  unit_pv, cashflow, surv)
            elif p1 - p0 == 1:  # a class of one: the walk of one key is shorter
                _one_key(order[p0], b, lx, q, True, reversion, frequency, step, rows_x, x0, rows_y, y0, first,
                         end, start, guar, at_start, increase, first_adj, use_adj, increase_month, growth,
                         use_growth, in_service, left, growth_left, use_exits, service, use_service, v, weights,
                         unit_pv, cashflow, coef, acc)
            elif not reversion:
                _class_own(p0, p1, b, order, bucket_x[c], lx, q, inv_freq, step, rows_x, x0, first, end, start,
                           guar, at_start, increase, first_adj, use_adj, increase_month, v, weights, unit_pv,
                           cashflow)
            else:
                pre = use_growth and start[order[p0]] >= 2
                _class_reversion(p0, p1, b, order, bucket_x[c], bucket_y[c], lx, q, inv_freq, step, rows_x, x0,
                                 rows_y, y0, first, end, start, guar, at_start, increase, first_adj, use_adj,
                                 increase_month, growth, in_service, left, growth_left, use_exits, service,
                                 use_service, pre, v, weights, unit_pv, cashflow)


@njit(cache=True)
def distinct_in_order(h: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct values of ``h`` (int64, e.g. row hashes) in the order they first appear: (index of each
    distinct value's first occurrence, number of each element's distinct value). One pass over an
    open-addressing table of twice the length (linear probing)."""
    n = h.shape[0]
    size = 2
    while size < 2 * n:
        size *= 2
    mask = size - 1
    slots = np.full(size, -1, np.int64)
    seen = np.empty(n, np.int64)
    first = np.empty(n, np.int64)
    inverse = np.empty(n, np.int64)
    count = 0
    for i in range(n):
        x = h[i]
        s = x & mask
        while True:
            k = slots[s]
            if k == -1:
                slots[s] = count
                seen[count] = x
                first[count] = i
                inverse[i] = count
                count += 1
                break
            if seen[k] == x:
                inverse[i] = k
                break
            s = (s + 1) & mask
    return first[:count].copy(), inverse
