"""Benefit legs: the expected, discounted payments of one kind of benefit for groups of identical lives.

A *leg* is a stream of pension payments on the monthly grid. Two kinds cover every benefit rule:

- ``own``: paid to the member while alive (certain during a guarantee), from a start month (0 for a
  pension in payment, the retirement month for a deferred or active member) until an optional stop month
  (a child's pension end age).
- ``reversion``: paid to a spouse after the member's death while the spouse is alive,
  tp_y (1 - tp_x) [DHW eq. 9.18, independent lives], from the end of any guarantee.

Both are computed on *keys*: the distinct combinations of survival row, exact age and dates. Members that
share a key share every unit value; the engine multiplies by each member's amounts afterwards.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013):
   eq. (5.12) annuity as sum of v^k kp_x; section 9.5 (reversionary annuities a_{x|y} = a_y - a_xy).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from valuation.engine.context import MAX_AGE, Context, MortalityRows
from valuation.survival import lx_at

#: Keys are processed in blocks of at most this many cells (keys x payment dates) to bound memory.
BLOCK_CELLS = 4_000_000


@dataclass
class LegResult:
    """Unit values of a leg per key and its expected nominal payments on the monthly grid.

    ``unit_pv[k, j]``: present value [currency] of 1 p.a. of tranche j's base amount for key k.
    ``cashflow``: expected nominal payments [currency] by month after the valuation date, summed over keys
    weighted by ``weights``.
    """

    unit_pv: NDArray[np.float64]
    cashflow: NDArray[np.float64]


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
    growth: NDArray[np.float64] | None = None,
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
        is base * at_start * increase[tau] / increase[start].
    growth
        Reversions only: the factor on the base amount for a death before ``start`` at month tau, (J, M)
        (revaluation or salary growth to the date of payment); ignored when start is 0.
    stop
        Own legs: the first month with no payment (a child's pension end age), (K,); None for life.
    guarantee
        Month until which an own pension is paid whether or not the member lives, and from which a
        reversion can start, (K,); None for none.
    rows_y, y0
        Reversions: the spouse's survival row and exact age [years], (K,).

    References
    ----------
    [DHW] eq. (5.12) and section 9.5; guaranteed annuities [DHW] section 5.6.
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
        if kind == "own":
            surv = np.where(tau < guar[idx, None], 1.0, px)
        else:
            ly = _l(mrows, rows_y[idx, None], y0[idx, None] + t_years, ctx.fractional)  # type: ignore[index]
            py = ly / ly0[idx, None]  # type: ignore[index]
            surv = py * (1.0 - px) * (tau >= guar[idx, None])
        surv = np.where(valid, surv, 0.0) / ctx.frequency
        disc = ctx.v[tau]
        s_idx = start[idx]
        for jj in range(J):
            inc = increase[jj]
            amount = at_start[idx, jj, None] * inc[tau] / inc[s_idx, None]
            if kind == "reversion" and growth is not None:
                amount = np.where(tau < s_idx[:, None], growth[jj][tau], amount)
            paid = surv * amount
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
    growth: NDArray[np.float64] | None = None,
    stop: NDArray[np.int64] | None = None,
    guarantee: NDArray[np.int64] | None = None,
    rows_y: NDArray[np.int64] | None = None,
    y0: NDArray[np.float64] | None = None,
) -> LegResult:
    """Value a leg with the compiled kernel; same parameters and results as :func:`value_leg_numpy`.

    References
    ----------
    [DHW] eq. (5.12) and section 9.5; guaranteed annuities [DHW] section 5.6.
    """
    from valuation.engine.kernels import leg_kernel

    K, J = weights.shape
    M = ctx.months
    unit_pv = np.zeros((K, J))
    cashflow = np.zeros(M)
    if K == 0:
        return LegResult(unit_pv, cashflow)
    reversion = kind == "reversion"
    guar = np.zeros(K, dtype=np.int64) if guarantee is None else guarantee.astype(np.int64)
    first, end = payment_window(ctx, kind, x0, start, stop, y0)
    ry = rows_y if rows_y is not None else np.zeros(K, dtype=np.int64)
    yy = y0 if y0 is not None else np.zeros(K)
    grow = growth if growth is not None else np.ones((J, M))
    blocks = np.zeros((max(1, min(K // 256, 16)), M))
    leg_kernel(
        mrows.lx, mrows.q_rows, ctx.fractional == "udd", reversion, int(ctx.frequency), int(ctx.step),
        np.ascontiguousarray(rows_x, dtype=np.int64), np.ascontiguousarray(x0, dtype=np.float64),
        np.ascontiguousarray(ry, dtype=np.int64), np.ascontiguousarray(yy, dtype=np.float64),
        first.astype(np.int64), end.astype(np.int64), np.ascontiguousarray(start, dtype=np.int64), guar,
        np.ascontiguousarray(at_start, dtype=np.float64), np.ascontiguousarray(increase, dtype=np.float64),
        np.ascontiguousarray(grow, dtype=np.float64), growth is not None,
        ctx.v, np.ascontiguousarray(weights, dtype=np.float64), unit_pv, blocks,
    )
    return LegResult(unit_pv, blocks.sum(axis=0))


def dedupe(*columns: NDArray) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Distinct rows of the stacked key columns: (index of each key's first member, key of each member).

    Rows are hashed (polars) and the hashes de-duplicated; the result is verified column by column and,
    in the unlikely event of a hash collision, recomputed with an exact row sort.
    """
    import polars as pl

    cols = [np.asarray(c, dtype=float) for c in columns]
    frame = pl.DataFrame({f"c{i}": c for i, c in enumerate(cols)})
    hashes = frame.hash_rows(seed=17).to_numpy()
    _, first, inverse = np.unique(hashes, return_index=True, return_inverse=True)
    inverse = inverse.ravel()
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
