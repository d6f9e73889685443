"""Benefit legs: the expected, discounted payments of one kind of benefit for groups of identical lives.

A *leg* is a stream of pension payments on the monthly grid. Two kinds cover every benefit rule:

- ``own``: paid to the member while alive (certain during a guarantee), from a start month (0 for a
  pension in payment, the retirement month for a deferred or active member) until an optional stop month
  (a child's pension end age).
- ``reversion``: paid to a spouse after the member's death while the spouse is alive,
  tp_y (1 - tp_x) [DHW eq. 9.18, independent lives], from the end of any guarantee. For a death at or after
  the start month the spouse's pension follows the member's pension; for a death before it (a deferred or
  active member), the amount is fixed at the death and from then on receives the increases in payment of
  its tranche, so the expected payment at tau sums over the month of death d:
  tp_y [sum_{d < start, d <= tau} (F(d) - F(d-1)) G(d) I(d, tau) + (F(tau) - F(start - 1)) A I(start, tau)],
  F(t) = 1 - tp_x, G the amount fixed at death, A the amount at the start, I(s, tau) the increases of a
  pension starting at s.

Both are computed on *keys*: the distinct combinations of survival row, exact age and dates. Members that
share a key share every unit value; the engine multiplies by each member's amounts afterwards.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013):
   eq. (5.12) annuity as sum of v^k kp_x; section 9.5 (reversionary annuities a_{x|y} = a_y - a_xy).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from valuation.engine.context import MAX_AGE, Context, MortalityRows
from valuation.survival import lx_at

#: Keys are processed in blocks of at most this many cells (keys x payment dates) to bound memory.
BLOCK_CELLS = 4_000_000
#: Withdrawals happen at mid-year: grid months 6, 18, 30, ... (see ``project.Valuer._active``).
EXIT_OFFSET = 6


def exits_before(d: NDArray[np.int64] | int) -> NDArray[np.int64] | int:
    """Number of mid-year exit dates strictly before grid month ``d`` (d >= 0)."""
    return (d + (12 - EXIT_OFFSET - 1)) // 12


def next_increase(s: NDArray[np.int64], first_month: int) -> NDArray[np.int64]:
    """The first increase month strictly after grid month ``s`` (increases on ``first_month`` + 12 k)."""
    return np.where(s < first_month, first_month, first_month + 12 * ((s - first_month) // 12 + 1))


@dataclass
class Exits:
    """Withdrawal before the start, for the amount of a spouse's pension on a death before it (actives).

    A member who dies in grid month d has passed ``m = exits_before(d)`` exit dates. ``in_service[k, m]``
    is the probability of being still in service then; the spouse's pension is then ``growth[j, d]`` (per
    unit of the member's base amount). ``left[k, m]`` sums, over those exit dates, the probability of
    leaving on it times the leaver's pension factor at exit divided by ``growth_left`` at exit; the spouse of
    a leaver gets that pension revalued to the death: ``left[k, m] * growth_left[j, d]``.
    """

    in_service: NDArray[np.float64]  # (K, S)
    left: NDArray[np.float64]  # (K, S)
    growth_left: NDArray[np.float64]  # (J, M)

    def take(self, idx: NDArray[np.int64]) -> "Exits":
        return Exits(self.in_service[idx], self.left[idx], self.growth_left)


class KeyClasses(NamedTuple):
    """Keys grouped into classes (see :func:`key_classes`): class c holds ``order[bounds[c]:bounds[c + 1]]``."""

    order: NDArray[np.int64]  # keys in class order
    bounds: NDArray[np.int64]  # (C + 1,)
    month_x: NDArray[np.int64]  # (C,) the member's month of age (0-11) in each class
    month_y: NDArray[np.int64]  # (C,) the spouse's (0 for an own leg)


@dataclass
class LegResult:
    """Unit values of a leg per key and its expected nominal payments on the monthly grid.

    ``unit_pv[k, j]``: present value [currency] of 1 p.a. of tranche j's base amount for key k.
    ``cashflow``: expected nominal payments [currency] by month after the valuation date, summed over keys
    weighted by ``weights``.
    """

    unit_pv: NDArray[np.float64]
    cashflow: NDArray[np.float64]
    #: the same payments by tranche, (J, M) (the compiled kernel's result; None from the array version)
    cashflow_by_tranche: NDArray[np.float64] | None = None


def _l(mrows: MortalityRows, rows: NDArray[np.int64], ages: NDArray[np.float64], fractional: str) -> NDArray:
    return lx_at(mrows.lx, mrows.q_rows, rows, ages, fractional)  # type: ignore[arg-type]


def payment_window(
    ctx: Context,
    kind: str,
    x0: NDArray[np.float64],
    start: NDArray[np.int64],
    stop: NDArray[np.int64] | None,
    y0: NDArray[np.float64] | None,
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """First payment month and the first month past the last possible payment, for each key.

    Own legs run from the start (plus one period in arrears) until the member passes the closing age or
    the stop month; reversions from the valuation date until the spouse passes the closing age.
    """
    if kind == "own":
        first = start + ctx.offset
        end = np.ceil((MAX_AGE + 1 - x0) * 12.0).astype(np.int64)
        if stop is not None:
            end = np.minimum(end, stop)
    else:
        assert y0 is not None, "a reversion needs the spouse's age"
        first = np.full(len(x0), ctx.offset, dtype=np.int64)
        end = np.ceil((MAX_AGE + 1 - y0) * 12.0).astype(np.int64)
    return first.astype(np.int64), np.minimum(end, ctx.months)


def _death_amount(
    growth: NDArray[np.float64], j: int, d: NDArray[np.int64], s: NDArray[np.int64],
    exits: Exits | None, service: NDArray[np.float64] | None, idx: NDArray[np.int64],
) -> NDArray[np.float64]:
    """Spouse's pension fixed at a death in grid month d before the start, per unit of base, (Kb, D)."""
    g = growth[j][d][None, :] * np.ones((len(idx), 1))
    if service is not None:
        # prospective pension to the start, attributed straight-line from joining to the death
        svc = service[idx, None]
        g = g * (svc + s[:, None] / 12.0) / (svc + np.maximum(d, 1)[None, :] / 12.0)
    if exits is not None:
        m = np.minimum(exits_before(d), exits.in_service.shape[1] - 1)
        g = g * exits.in_service[idx][:, m] + exits.growth_left[j][d][None, :] * exits.left[idx][:, m]
    return g


def value_leg_numpy(
    ctx: Context,
    mrows: MortalityRows,
    *,
    kind: str,
    rows_x: NDArray[np.int64],
    x0: NDArray[np.float64],
    start: NDArray[np.int64],
    weights: NDArray[np.float64],
    at_start: NDArray[np.float64],
    increase: NDArray[np.float64],
    first_increase: NDArray[np.float64] | None = None,
    growth: NDArray[np.float64] | None = None,
    exits: Exits | None = None,
    service: NDArray[np.float64] | None = None,
    stop: NDArray[np.int64] | None = None,
    guarantee: NDArray[np.int64] | None = None,
    rows_y: NDArray[np.int64] | None = None,
    y0: NDArray[np.float64] | None = None,
) -> LegResult:
    """Value a leg for K keys and J tranches.

    Parameters
    ----------
    kind
        ``"own"`` or ``"reversion"``.
    rows_x, x0
        Survival row and exact age [years] of the member, shape (K,).
    start
        Month in which the member's pension starts (0 in payment; retirement month otherwise), (K,).
    weights
        Sum of members' base amounts [currency p.a.] for each key and tranche, (K, J): used for the cash flows.
    at_start
        Factor on the base amount at the start month (revaluation or salary projection to retirement,
        times any share kept after commutation), (K, J).
    increase
        In-payment increase index per tranche on the monthly grid, (J, M); the amount at month tau >= start
        is base * at_start * increase[tau] / increase[start] (times ``first_increase``).
    first_increase
        Factor on a pension starting at month s from its first increase (the first increase month after s,
        ``ctx.increase_month`` + 12 k) on, per tranche and start month, (J, M); None for a full first
        increase. Applies to the pension from ``start`` and to a spouse's pension starting at a death
        before ``start``.
    growth
        Reversions only: the spouse's pension, per unit of base, fixed at a death in month d < start (d is
        the grid month ending the month of death), (J, M): revaluation, or salary growth, to the death.
        From d on it receives the increases in payment of its tranche. None when no start is after 0.
    exits
        Reversions only: withdrawal before the start (actives), see :class:`Exits`; None for none.
    service
        Reversions only: service to date [years], (K,), for a prospective spouse's pension on a death in
        service: the amount ``growth`` is multiplied by (service + start / 12) / (service + d / 12), the
        pension with service to the start attributed straight-line from joining to the death; None for the
        pension accrued to date.
    stop
        Own legs: the first month with no payment (a child's pension end age), (K,); None for life.
    guarantee
        Month until which an own pension is paid whether or not the member lives, and from which a
        reversion can start, (K,); None for none.
    rows_y, y0
        Reversions: the spouse's survival row and exact age [years], (K,).

    References
    ----------
    [DHW] eq. (5.12) and section 9.5; guaranteed annuities [DHW] section 5.6; attribution of a benefit on
    death to service, IAS 19 *Employee Benefits* para 70.
    """
    K, J = weights.shape
    M = ctx.months
    step = ctx.step
    unit_pv = np.zeros((K, J))
    cashflow = np.zeros(M)
    if K == 0:
        return LegResult(unit_pv, cashflow)
    guar = np.zeros(K, dtype=np.int64) if guarantee is None else guarantee
    first, end = payment_window(ctx, kind, x0, start, stop, y0)
    count = np.maximum(0, -(-(end - first) // step))  # ceil division
    order = np.argsort(count, kind="stable")
    lx0 = _l(mrows, rows_x, x0, ctx.fractional)
    ly0 = _l(mrows, rows_y, y0, ctx.fractional) if kind == "reversion" else None  # type: ignore[arg-type]
    e = ctx.increase_month

    sorted_count = count[order]
    pos = 0
    while pos < K:
        # keys are sorted by payment count, so a block's width is its last key's count
        cells = np.arange(1, K - pos + 1) * np.maximum(sorted_count[pos:], 1)
        hi = pos + max(1, int(np.searchsorted(cells, BLOCK_CELLS, side="right")))
        idx = order[pos:hi]
        width = int(sorted_count[hi - 1])
        pos = hi
        if width == 0:
            continue
        j = np.arange(width)
        tau = first[idx, None] + step * j[None, :]
        valid = tau < end[idx, None]
        tau = np.where(valid, tau, 0)
        t_years = tau / 12.0
        lx = _l(mrows, rows_x[idx, None], x0[idx, None] + t_years, ctx.fractional)
        px = lx / lx0[idx, None]
        s_idx = start[idx]
        pre_start = None
        if kind == "own":
            surv = np.where(tau < guar[idx, None], 1.0, px)
        else:
            ly = _l(mrows, rows_y[idx, None], y0[idx, None] + t_years, ctx.fractional)  # type: ignore[index]
            py = ly / ly0[idx, None]  # type: ignore[index]
            # deaths from the start month on: F(tau) - F(start - 1), F(t) = 1 - tp_x, F(-1) = F(0) = 0
            l_before = _l(mrows, rows_x[idx], x0[idx] + np.maximum(s_idx - 1, 0) / 12.0, ctx.fractional)
            f_before = np.where(s_idx >= 1, 1.0 - l_before / lx0[idx], 0.0)
            after = (tau >= s_idx[:, None]) * (tau >= guar[idx, None])
            surv = py * ((1.0 - px) - f_before[:, None]) * after
            if growth is not None and np.any(s_idx >= 2):
                pre_start = np.where(valid, py * (tau >= guar[idx, None]), 0.0) / ctx.frequency
        surv = np.where(valid, surv, 0.0) / ctx.frequency
        disc = ctx.v[tau]
        if first_increase is not None:
            from_first = tau >= next_increase(s_idx, e)[:, None]
        if pre_start is not None:
            # deaths in months d = 1 .. start - 1, fixed at G(d), increased from d on
            D = int(s_idx.max())
            d = np.arange(D)
            l_d = _l(mrows, rows_x[idx, None], x0[idx, None] + d[None, :] / 12.0, ctx.fractional)
            f_d = 1.0 - l_d / lx0[idx, None]
            dF = np.zeros_like(f_d)
            dF[:, 1:] = np.diff(f_d, axis=1)
            dF *= (d[None, :] >= 1) & (d[None, :] < s_idx[:, None])
            last_pre = np.minimum(tau, s_idx[:, None] - 1)  # deaths d <= tau and d < start
            prev_step = np.where(tau >= e, e + 12 * ((tau - e) // 12), -1)  # last increase month <= tau
            had_first = np.minimum(prev_step - 1, s_idx[:, None] - 1)  # deaths before it had their first
        for jj in range(J):
            inc = increase[jj]
            amount = at_start[idx, jj, None] * inc[tau] / inc[s_idx, None]
            if first_increase is not None:
                amount = np.where(from_first, amount * first_increase[jj][s_idx][:, None], amount)
            paid = surv * amount
            if pre_start is not None:
                unit = dF * _death_amount(growth, jj, d, s_idx, exits, service, idx) / inc[d][None, :]  # type: ignore[arg-type]
                cum = np.column_stack([np.zeros(len(idx)), np.cumsum(unit, axis=1)])  # cum[:, n] = sum d < n
                pre = np.take_along_axis(cum, np.maximum(last_pre, -1) + 1, axis=1)
                if first_increase is not None:
                    cum_adj = np.column_stack([np.zeros(len(idx)),
                                               np.cumsum(unit * (first_increase[jj][d] - 1.0), axis=1)])
                    pre = pre + np.take_along_axis(cum_adj, np.maximum(had_first, -1) + 1, axis=1)
                paid = paid + pre_start * inc[tau] * pre
            unit_pv[idx, jj] = (paid * disc).sum(axis=1)
            w = weights[idx, jj]
            if np.any(w):
                cashflow += np.bincount(tau.ravel(), weights=(paid * w[:, None]).ravel(), minlength=M)[:M]
    return LegResult(unit_pv, cashflow)


def value_leg(
    ctx: Context,
    mrows: MortalityRows,
    *,
    kind: str,
    rows_x: NDArray[np.int64],
    x0: NDArray[np.float64],
    start: NDArray[np.int64],
    weights: NDArray[np.float64],
    at_start: NDArray[np.float64],
    increase: NDArray[np.float64],
    first_increase: NDArray[np.float64] | None = None,
    growth: NDArray[np.float64] | None = None,
    exits: Exits | None = None,
    service: NDArray[np.float64] | None = None,
    stop: NDArray[np.int64] | None = None,
    guarantee: NDArray[np.int64] | None = None,
    rows_y: NDArray[np.int64] | None = None,
    y0: NDArray[np.float64] | None = None,
    kept: dict[str, object] | None = None,
) -> LegResult:
    """Value a leg with the compiled kernels; same parameters and results as :func:`value_leg_numpy`.

    Under UDD the keys are valued by classes (:func:`key_classes`, one walk over the months a class);
    otherwise one walk a key. ``kept``: a dictionary kept by the caller for every scenario valued on the
    same keys (a chunk's): the classes found are kept in it, since they depend on the keys' ages, rows and
    dates alone.

    References
    ----------
    [DHW] eq. (5.12) and section 9.5; guaranteed annuities [DHW] section 5.6; attribution of a benefit on
    death to service, IAS 19 *Employee Benefits* para 70.
    """
    from valuation.engine.kernels import class_leg_kernel, leg_kernel

    K, J = weights.shape
    M = ctx.months
    unit_pv = np.zeros((K, J))
    if K == 0:
        return LegResult(unit_pv, np.zeros(M), np.zeros((J, M)))
    reversion = kind == "reversion"
    guar = np.zeros(K, dtype=np.int64) if guarantee is None else guarantee.astype(np.int64)
    first, end = payment_window(ctx, kind, x0, start, stop, y0)
    ry = rows_y if rows_y is not None else np.zeros(K, dtype=np.int64)
    yy = y0 if y0 is not None else np.zeros(K)
    dummy = np.ones((1, 1))
    grow = growth if growth is not None else dummy
    adj = first_increase if first_increase is not None else dummy
    in_service = exits.in_service if exits is not None else dummy
    left = exits.left if exits is not None else dummy
    grow_left = exits.growth_left if exits is not None else dummy
    svc = service if service is not None else np.zeros(1)
    f64 = np.float64
    common = (
        reversion, int(ctx.frequency), int(ctx.step),
        np.ascontiguousarray(rows_x, dtype=np.int64), np.ascontiguousarray(x0, dtype=f64),
        np.ascontiguousarray(ry, dtype=np.int64), np.ascontiguousarray(yy, dtype=f64),
        first.astype(np.int64), end.astype(np.int64), np.ascontiguousarray(start, dtype=np.int64), guar,
        np.ascontiguousarray(at_start, dtype=f64), np.ascontiguousarray(increase, dtype=f64),
        np.ascontiguousarray(adj, dtype=f64), first_increase is not None, int(ctx.increase_month),
        np.ascontiguousarray(grow, dtype=f64), growth is not None,
        np.ascontiguousarray(in_service, dtype=f64), np.ascontiguousarray(left, dtype=f64),
        np.ascontiguousarray(grow_left, dtype=f64), exits is not None,
        np.ascontiguousarray(svc, dtype=f64), service is not None,
        ctx.v, np.ascontiguousarray(weights, dtype=f64), unit_pv,
    )
    classes: KeyClasses | None
    if kept is not None and "classes" in kept:
        classes = kept["classes"]  # type: ignore[assignment]
    else:
        classes = key_classes(ctx, kind, rows_x, x0, first, end, start, guar, rows_y=rows_y, y0=y0, exits=exits,
                              service=service)
        if kept is not None:
            kept["classes"] = classes
    if classes is None:  # constant force, or an age below 0: one walk a key
        blocks = np.zeros((max(1, min(K // 256, 16)), J, M))
        leg_kernel(mrows.lx, mrows.q_rows, ctx.fractional == "udd", *common, blocks)
    else:
        blocks = np.zeros((max(1, min((len(classes.bounds) - 1) // 4, 16)), J, M))
        class_leg_kernel(classes.order, classes.bounds, classes.month_x, classes.month_y, mrows.lx, mrows.q_rows, *common, blocks)
    by_tranche = blocks.sum(axis=0)
    return LegResult(unit_pv, by_tranche.sum(axis=0), by_tranche)


def key_classes(
    ctx: Context,
    kind: str,
    rows_x: NDArray[np.int64],
    x0: NDArray[np.float64],
    first: NDArray[np.int64],
    end: NDArray[np.int64],
    start: NDArray[np.int64],
    guar: NDArray[np.int64],
    *,
    rows_y: NDArray[np.int64] | None = None,
    y0: NDArray[np.float64] | None = None,
    exits: Exits | None = None,
    service: NDArray[np.float64] | None = None,
) -> KeyClasses | None:
    """Keys grouped into classes that one walk over the months values together (UDD only; see
    :func:`valuation.engine.kernels.class_leg_kernel`): the same survival rows, whole years and months of
    age, first and last payment month, start, guarantee end and, for a spouse's pension on a death before
    the start, the same withdrawal row and service. None where classes do not apply (constant force between
    ages, or an age below 0).

    References
    ----------
    UDD: l(x + s) = l_x - s d_x for 0 <= s <= 1, linear in s [DHW section 3.3; Bowers et al. section 3.6].
    """
    reversion = kind == "reversion"
    if ctx.fractional != "udd" or np.any(x0 < 0) or (reversion and y0 is not None and np.any(y0 < 0)):
        return None

    def month_of_age(age: NDArray[np.float64]) -> NDArray[np.int64]:
        return np.clip(np.floor((age - np.floor(age)) * 12.0), 0, 11).astype(np.int64)

    bx = month_of_age(x0)
    cols: list[NDArray] = [rows_x, bx, first, end, start, guar]
    by = np.zeros(len(x0), dtype=np.int64)
    if reversion:
        assert rows_y is not None and y0 is not None, "a reversion needs the spouse's row and age"
        by = month_of_age(y0)
        cols += [rows_y, by]
        if service is not None:
            cols.append(service)
        if exits is not None:
            cols.append(dedupe(*exits.in_service.T, *exits.left.T)[1])
    _, cls = dedupe(*cols)
    order = np.argsort(cls, kind="stable").astype(np.int64)
    bounds = np.concatenate([[0], np.cumsum(np.bincount(cls))]).astype(np.int64)
    heads = order[bounds[:-1]]
    return KeyClasses(order, bounds, bx[heads], by[heads])


def dedupe(*columns: NDArray) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Distinct rows of the stacked key columns: (index of each key's first member, key of each member).

    Rows are hashed (polars) and the hashes de-duplicated in one pass, keys numbered in the order they first
    appear; the result is verified column by column and, in the unlikely event of a hash collision,
    recomputed with an exact row sort.
    """
    import polars as pl

    from valuation.engine.kernels import distinct_in_order

    cols = [np.asarray(c, dtype=float) for c in columns]
    frame = pl.DataFrame({f"c{i}": c for i, c in enumerate(cols)})
    hashes = frame.hash_rows(seed=17).to_numpy()
    first, inverse = distinct_in_order(np.ascontiguousarray(hashes).view(np.int64))
    same = all(np.array_equal(c, c[first][inverse], equal_nan=True) for c in cols)
    if not same:  # pragma: no cover - a 64-bit hash collision
        _, first, inverse = np.unique(np.column_stack(cols), axis=0, return_index=True, return_inverse=True)
        inverse = inverse.ravel()
    return first, inverse


def sum_by_key(inverse: NDArray[np.int64], n_keys: int, values: NDArray[np.float64]) -> NDArray[np.float64]:
    """Sum member values (N, J) into their keys (K, J)."""
    out = np.zeros((n_keys, values.shape[1]))
    for j in range(values.shape[1]):
        out[:, j] = np.bincount(inverse, weights=values[:, j], minlength=n_keys)
    return out

