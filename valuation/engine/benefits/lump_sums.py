"""Lump sums: cash for the commuted part of a pension at retirement, and a multiple of salary on death in
service.

Both are valued directly (expected amount times survival, discounted on the monthly grid) rather than as
legs. Commutation cash grows with the pension it is taken from; the death-in-service sum does not grow
with service, so it is attributed to service straight-line from joining to the date of death.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   section 10.4 (commutation of pension for cash at retirement), section 10.8 (death-in-service
   benefits).
.. IAS 19 *Employee Benefits* (IASB), para 70 (a benefit not growing with service attributed
   straight-line to the date it is paid).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from valuation.engine.benefits.base import BenefitContext, Lump, Members, PensionTerms
from valuation.engine.kernels import death_in_service_kernel
from valuation.vocabulary import Benefit

#: The benefit name this module's lump sums carry.
BENEFIT: Benefit = "lump_sum"


def keep_after_commutation(bc: BenefitContext) -> float:
    """Share of the pension at retirement kept as pension (the rest is commuted for cash)."""
    return 1.0 - float(bc.basis.commutation.proportion)


def commutation(bc: BenefitContext, m: Members, terms: PensionTerms) -> Lump | None:
    """Cash at retirement for the commuted share: proportion x pension at retirement x commutation factor,
    paid if the member is alive at the start; None when nothing is commuted.

    References
    ----------
    [DHW] section 10.4 (cash sum at retirement in place of part of the pension).
    """
    comm = bc.basis.commutation
    if not comm.proportion > 0:
        return None
    ctx, start = bc.ctx, terms.start
    pens_at_ret = (terms.base * terms.at_start_full).sum(axis=1)
    surv = m.for_survival(bc, "to retirement", lambda: bc.l(m.rows_x, m.x0 + start / 12.0) / m.l_now(bc))
    amount = comm.proportion * pens_at_ret * comm.factor * surv
    cash = np.bincount(start, weights=amount, minlength=ctx.months)[: ctx.months].astype(np.float64)
    return Lump(BENEFIT, pv=amount * ctx.v[start], cashflow=cash, earned_with_pension=True)


@dataclass
class YearsInService:
    """Active members' years to retirement, for a benefit on death in service (key level, K keys x Y years).

    ``inv`` maps members to keys; ``stay_before[k, i]`` is the probability of still being in service at the
    start of year i (withdrawal only), ``in_window[k, i]`` whether year i's mid-point is before retirement;
    ``mid`` the mid-years [years], ``mid_m`` their grid months.
    """

    rows: NDArray[np.int64]  # (K,)
    x0: NDArray[np.float64]  # (K,)
    inv: NDArray[np.int64]  # (N,)
    stay_before: NDArray[np.float64]  # (K, Y)
    in_window: NDArray[np.bool_]  # (K, Y)
    mid: NDArray[np.float64]  # (Y,)
    mid_m: NDArray[np.int64]  # (Y,)
    salary: NDArray[np.float64]  # (N,)
    service: NDArray[np.float64]  # (N,)
    salary_growth: float


def death_in_service(bc: BenefitContext, m: Members, years: YearsInService) -> Lump | None:
    """Lump sum on death in service: the basis's multiple x salary projected to the mid-year of death,
    attributed to service to date: the part earned to date is service / (service + t), and one more year of
    service earns 1 / (service + t) of it (the current service cost). None when the basis has none.

    References
    ----------
    [DHW] section 10.8 (death-in-service benefit as a multiple of salary); IAS 19 para 70 (attribution).
    """
    mult = float(bc.basis.death_in_service_lump_sum)
    n_int = len(years.mid)
    if not (mult > 0 and n_int):
        return None
    ctx = bc.ctx
    mid, g = years.mid, years.salary_growth
    lk = m.for_survival(bc, "in service",
                lambda: bc.l(years.rows[:, None], years.x0[:, None] + np.arange(n_int + 1)[None, :]))
    lk0 = lk[:, :1]
    # expected payment per unit of salary in year i, in service and dying then (key level)
    per_salary = (mult * (lk[:, :-1] - lk[:, 1:]) / lk0 * years.stay_before * years.in_window
                  * (1.0 + g) ** mid[None, :])
    v_mid = ctx.v[years.mid_m]
    flows = np.zeros(n_int)
    n = len(years.inv)
    next_year = np.zeros(n)
    death_in_service_kernel(np.ascontiguousarray(per_salary), years.inv.astype(np.int64), years.salary,
                            years.service, mid, np.ascontiguousarray(v_mid), next_year, flows)
    cash = np.zeros(ctx.months)
    np.add.at(cash, years.mid_m, flows)
    return Lump(BENEFIT, pv=years.service * next_year, cashflow=cash, next_year=next_year)
