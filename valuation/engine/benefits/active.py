"""An active member's pension by projected unit credit, with withdrawal, a spouse's pension and lump sums.

Final salary: accrual rate x service to date x salary projected to the date of exit (retirement, or the
mid-year of a withdrawal, the leaver's pension then revalued in deferment to retirement with the default
tranche's rule); career average: the accrued pension revalued as a deferred pension is (withdrawal does not
change it). Part is commuted for cash at retirement and the rest paid for life with increases
(``deferred.py``'s rules). A spouse's pension is paid on a death before or after retirement
(``reversion.py``); on a death in service it is the pension accrued to the death on salary at death, or
(basis choice) the prospective pension to retirement attributed straight-line from joining to the death;
for a member who has left, the leaver's pension revalued to the death. A lump sum on death in service
(``lump_sums.py``).

Withdrawal and death are independent decrements: the member survives on the mortality table alone, and
the withdrawal hazard decides the form of the benefit (common practice).

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   sections 10.3-10.6 (salary scales, accrued benefits, projected unit credit, withdrawal).
.. IAS 19 *Employee Benefits* (IASB), paras 67-70 (projected unit credit, attribution to service).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from valuation.engine.benefits.base import (
    MEMBER_PENSION,
    BenefitContext,
    BenefitRule,
    Leg,
    Lump,
    Members,
    PensionTerms,
    own_leg,
)
from valuation.engine.benefits.deferred import retirement_month
from valuation.engine.benefits.lump_sums import BENEFIT as LUMP_SUM
from valuation.engine.benefits.lump_sums import (
    YearsInService,
    commutation,
    death_in_service,
    keep_after_commutation,
)
from valuation.engine.benefits.reversion import BENEFIT as SPOUSE_PENSION
from valuation.engine.benefits.reversion import spouse_leg
from valuation.engine.legs import Exits, dedupe


@dataclass
class ActiveTerms(PensionTerms):
    """The pension's terms plus the years in service to retirement (for the death-in-service sum)."""

    years: YearsInService | None = None


def _on_tranche(n: int, n_tranches: int, j: int, values: NDArray[np.float64]) -> NDArray[np.float64]:
    """(n, n_tranches) zeros with ``values`` in tranche column ``j``."""
    out = np.zeros((n, n_tranches))
    out[:, j] = values
    return out


def withdrawal(
    rates: list[tuple[float, float]] | None, x0: NDArray[np.float64], years_to_retirement: NDArray[np.float64],
    mid: NDArray[np.float64],
) -> tuple[NDArray[np.bool_], NDArray[np.float64], NDArray[np.float64]]:
    """Withdrawal at the mid-years ``mid`` [years] of lives aged ``x0`` now: whether each year's mid-point
    is before retirement (K, Y), the rate of leaving then (the basis's step rates by age at the start of
    the year, 0 from retirement on) and the probability of being in service at the end of each year
    (withdrawal alone), (K, Y).

    References
    ----------
    [DHW] section 10.5 (withdrawal as a decrement before retirement; service table).
    """
    n_int = len(mid)
    in_window = mid[None, :] < years_to_retirement[:, None]
    if rates:
        steps = sorted(rates)
        ages_from = np.array([a for a, _ in steps])
        step_rates = np.array([r for _, r in steps])
        pos = np.searchsorted(ages_from, x0[:, None] + np.arange(n_int)[None, :], side="right") - 1
        w: NDArray[np.float64] = np.where(pos >= 0, step_rates[np.clip(pos, 0, None)], 0.0) * in_window
    else:
        w = np.zeros((len(x0), n_int))
    stay = np.cumprod(1.0 - w, axis=1).astype(np.float64, copy=False)
    return in_window, w, stay


class ActivePension(BenefitRule):
    """Active members: projected unit credit pension with withdrawal; spouse's reversion; commutation cash
    and a lump sum on death in service."""

    status = "active"
    pensions = (MEMBER_PENSION, SPOUSE_PENSION)
    lump_sums = (LUMP_SUM,)
    uses_salary = True

    def terms(self, bc: BenefitContext, m: Members) -> ActiveTerms:
        """Base amounts (N, J) and their factor at retirement (N, J); the spouse's pension fixed at a death
        in service (J, M) and the withdrawal before a death (:class:`~valuation.engine.legs.Exits` by key,
        and each member's key; None for career-average designs).

        A leaver in year i (at mid-year) keeps accrual x service x salary projected to i + 1/2, revalued in
        deferment to retirement, or to an earlier death for the spouse's pension, with the default
        tranche's rule [DHW 10.5-10.6]. A member still in service at death leaves a spouse's pension on the
        pension accrued to date on salary at death (the unit credit, IAS 19 paras 67-70).

        References
        ----------
        [DHW] sections 10.3-10.6; IAS 19 paras 67-70.
        """
        basis, ctx = bc.basis, bc.ctx
        N, J = m.n, len(bc.tranches)
        start = retirement_month(bc, m)
        dj = bc.tranches.index(basis.default_tranche)
        salary = m.once("salary", lambda: m.frame["salary"].fill_null(0.0).to_numpy().astype(float))
        service = m.once("service", lambda: m.frame["service_years"].fill_null(0.0).to_numpy().astype(float))
        g = ctx.salary_growth
        n_int = int(np.ceil(start.max() / 12.0)) if N else 0
        yrs = np.arange(n_int)
        mid = (yrs + 0.5).astype(np.float64)
        mid_m = np.clip(np.rint(mid * 12).astype(np.int64), 0, ctx.months - 1)
        # everything that depends on age, survival row and retirement date alone is done once a key, and
        # once a chunk for every scenario
        first, inv = m.once("keys", lambda: dedupe(m.rows_x, m.x0, start))
        kx, kstart, krows = m.x0[first], start[first], m.rows_x[first]
        K = len(first)
        n_years = kstart / 12.0
        in_window, w, stay = m.once("withdrawal", lambda: withdrawal(basis.withdrawal, kx, n_years, mid))
        stay_before = m.once("in service before", lambda: np.column_stack([np.ones(K), stay[:, :-1]])
                             if n_int else np.ones((K, 0)))
        stay_to_ret = stay[:, -1] if n_int else np.ones(K)

        exits: tuple[Exits, NDArray[np.int64]] | None = None
        if basis.benefit_design == "career_average":
            base = bc.base_amounts(m)
            at_ret = bc.revalue[:, start].T
            growth = bc.revalue
        else:
            base = m.once("base", lambda: _on_tranche(N, J, dj, float(basis.accrual_rate) * service * salary))
            rev = bc.revalue[dj]
            rev_to_ret = rev[kstart][:, None] / rev[mid_m][None, :]
            leavers = (stay_before * w * (1.0 + g) ** mid[None, :] * rev_to_ret).sum(axis=1)
            factor = stay_to_ret * (1.0 + g) ** n_years + leavers
            at_ret = np.zeros((N, J))
            at_ret[:, dj] = factor[inv]
            growth = np.vstack([ctx.salary_index()] * J)
            # a death in month d follows m = exits_before(d) exit dates: in service with stay after m
            # exits; a leaver's pension revalued from exit to the death
            in_service = m.once("in service", lambda: np.column_stack([np.ones(K), stay]))
            left_unit = stay_before * w * (1.0 + g) ** mid[None, :] / rev[mid_m][None, :]
            left = np.column_stack([np.zeros(K), np.cumsum(left_unit, axis=1)])
            exits = (Exits(in_service, left, np.vstack([rev] * J)), inv)
        prospective = basis.spouse.pre_retirement_active == "prospective_to_nra"
        years = YearsInService(rows=krows, x0=kx, inv=inv, stay_before=stay_before, in_window=in_window, mid=mid,
                               mid_m=mid_m, salary=salary, service=service, salary_growth=g)
        return ActiveTerms(base=base, start=start, at_start=at_ret * keep_after_commutation(bc), at_start_full=at_ret,
                           starts_later=True, growth=growth, exits=exits, service=service if prospective else None,
                           years=years)

    def legs(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Leg]:
        return [own_leg(bc, m, terms), spouse_leg(bc, m, terms)]

    def lumps(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Lump]:
        out = []
        if isinstance(terms, ActiveTerms) and terms.years is not None:
            dis = death_in_service(bc, m, terms.years)
            if dis is not None:
                out.append(dis)
        comm = commutation(bc, m, terms)
        if comm is not None:
            out.append(comm)
        return out
