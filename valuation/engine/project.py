"""Project and value every member's benefits under one scenario.

The member records are turned into arrays, each status into its legs (see ``legs.py``), and the legs'
unit values multiplied back by each member's amounts. Benefit rules by status:

- pensioner: own pension per tranche with its increase rule, certain to the guarantee end; a spouse's
  reversionary pension (known spouse, or proportion married with the assumed age difference), starting
  after the guarantee.
- dependant: own pension for life, or to ``pension_end_age`` (a child's pension).
- deferred: pension revalued to retirement per tranche, part commuted for cash at retirement, then paid for
  life with increases; a spouse's pension on death before or after retirement. On a death before
  retirement the spouse's pension is fixed at the death (the pension revalued to the date of death) and
  then receives the increases in payment of its tranche.
- active: projected unit credit (IAS 19 paras 67-69): accrued service times accrual rate times salary
  projected to the date of exit (or the accrued pension for career-average designs), exits by withdrawal
  (to a deferred pension revalued to retirement) or retirement; a spouse's pension and an optional lump sum
  on death in service. A spouse's pension on a death before retirement is fixed at the death: for a member
  who has left, the deferred pension revalued to the death; in service, the pension accrued to death on
  salary at death, or (basis choice) the prospective pension with service to normal retirement age
  attributed straight-line from joining to the death (IAS 19 para 70); then increases in payment.
- increases in payment fall on the scheme's increase date; the first increase of a pension that starts
  after the valuation date (a retirement, or a spouse's pension on a death before retirement) is full,
  proportionate to the months in payment, or none until a full year (basis choice). Pensions in payment
  at the valuation date (and their spouses' pensions) receive full increases.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   ch. 5 (annuities), ch. 9 (joint lives, reversionary annuities), ch. 10 (pension plans: salary scales,
   accrued benefits, projected unit credit, withdrawal decrements).
.. IAS 19 *Employee Benefits* (IASB), paras 67-69 (projected unit credit), 83 (discount rate).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Any

import numpy as np
import polars as pl
from numpy.typing import NDArray

from valuation.engine.context import (
    MAX_AGE,
    Context,
    MortalityRows,
    first_increase_factor,
    increase_index,
    increase_month,
    revaluation_index,
)
from valuation.engine.kernels import death_in_service_kernel
from valuation.engine.legs import Exits, dedupe, sum_by_key, value_leg
from valuation.engine.scenario import BASE, Scenario, curves, mortality_for
from valuation.survival import age_at, lx_at
from valuation.vocabulary import GROUPS, SEXES, STATUSES


@dataclass
class Projection:
    """Per-member values and scheme cash flows of one scenario."""

    own: NDArray[np.float64]  # (N, J) PV of the member's own pension by tranche
    spouse: NDArray[np.float64]  # (N, J) PV of the spouse's pension by tranche
    lump: NDArray[np.float64]  # (N,) PV of lump sums (commutation cash, death-in-service)
    lump_commutation: NDArray[np.float64]  # (N,) PV of commutation cash (part of ``lump``)
    dis_next_unit: NDArray[np.float64]  # (N,) PV of one more year's attribution of the death-in-service sum
    annuity_factor: NDArray[np.float64]  # (N,) PV of own pension per 1 p.a. at its start
    q_next: NDArray[np.float64]  # (N,) probability of death within a year
    amount_now: NDArray[np.float64]  # (N,) pension in payment or accrued today [currency p.a.]
    cashflow: NDArray[np.float64]  # (4, M) expected nominal payments by status and month
    tranches: list[str]

    @property
    def liability(self) -> NDArray[np.float64]:
        return self.own.sum(axis=1) + self.spouse.sum(axis=1) + self.lump


#: Columns a caller may add so that ages are computed once for every scenario (see :func:`with_ages`).
AGE_COLUMN = "_age_at_valuation"
SPOUSE_AGE_COLUMN = "_spouse_age_at_valuation"


def with_ages(records: pl.DataFrame, basis: Any) -> pl.DataFrame:
    """Add the member's and the known spouse's age at the valuation date [years] under the basis's
    age convention, so that every scenario's valuer reuses them."""
    at = np.datetime64(basis.valuation_date, "D")
    dob = _days(records["date_of_birth"].to_numpy())
    x0 = np.asarray(age_at(dob, at, basis.age_convention), dtype=float)
    cols = [pl.Series(AGE_COLUMN, x0)]
    if "spouse_date_of_birth" in records.columns:
        sp = _days(records["spouse_date_of_birth"].to_numpy())
        known = ~np.isnat(sp)
        y = np.asarray(age_at(np.where(known, sp, dob), at, basis.age_convention), dtype=float)
        cols.append(pl.Series(SPOUSE_AGE_COLUMN, np.where(known, y, np.nan)))
    return records.with_columns(cols)


def _days(d: Any) -> NDArray[np.datetime64]:
    return np.asarray(d, dtype="datetime64[D]")


class Valuer:
    """Builds the context for one scenario and values frames of member records under it."""

    def __init__(self, basis: Any, scenario: Scenario = BASE, base_multiplier: float = 1.0) -> None:
        self.basis = basis
        self.scenario = scenario
        vd: date = basis.valuation_date
        self.valuation_date = np.datetime64(vd, "D")
        self.year = vd.year
        disc, infl, growth = curves(basis, scenario)
        first_month = increase_month(vd, basis.payment.increase_month_day)
        self.ctx = Context(
            valuation_year=self.year,
            frequency=int(basis.payment.frequency),
            advance=basis.payment.timing == "advance",
            discount=disc,
            inflation=infl,
            salary_growth=growth,
            fractional=basis.fractional_age,
            increase_month=first_month,
        )
        self.tranches = list(basis.tranches)
        M = self.ctx.months
        self.increase = np.vstack(
            [increase_index(r.increase.kind, r.increase.rate, r.increase.floor, r.increase.cap, infl, M,
                            first_month)
             for r in basis.tranches.values()]
        )
        #: factor from the first increase on, for pensions starting after the valuation date (None: full)
        self.first_increase = first_increase_factor(self.increase, first_month, basis.payment.first_increase)
        self.revalue = np.vstack(
            [revaluation_index(r.revaluation.kind, r.revaluation.rate, r.revaluation.floor, r.revaluation.cap, infl, M)
             for r in basis.tranches.values()]
        )
        # survival rows: every (group, sex) over every cohort alive
        self.mort_ids = {(g, s): i for i, (g, s) in enumerate((g, s) for g in GROUPS for s in SEXES)}
        bases = [mortality_for(basis, g, s, scenario, base_multiplier) for (g, s) in self.mort_ids]
        rng = (self.year - MAX_AGE - 2, self.year + 1)
        self.mrows = MortalityRows.build(bases, [rng] * len(bases))

    # ------------------------------------------------------------------ helpers
    def _rows(self, group: str | NDArray, sex: NDArray, age: NDArray[np.float64]) -> NDArray[np.int64]:
        if isinstance(group, str):
            group = np.full(len(sex), group)
        mid = np.zeros(len(sex), dtype=np.int64)
        for (g, s), i in self.mort_ids.items():
            mid[(group == g) & (sex == s)] = i
        cohort = self.year - np.floor(age).astype(np.int64)
        return self.mrows.rows(mid, cohort)

    def _l(self, rows: NDArray[np.int64], ages: NDArray[np.float64]) -> NDArray[np.float64]:
        return lx_at(self.mrows.lx, self.mrows.q_rows, rows, ages, self.ctx.fractional)  # type: ignore[arg-type]

    def _months(self, years: NDArray[np.float64]) -> NDArray[np.int64]:
        return np.clip(np.rint(years * 12.0), 0, self.ctx.months - 1).astype(np.int64)

    # ------------------------------------------------------------------ main
    def value(self, records: pl.DataFrame) -> Projection:
        """Value every record (one status at a time) and return per-member values and cash flows."""
        n = records.height
        J = len(self.tranches)
        own = np.zeros((n, J))
        spouse = np.zeros((n, J))
        lump = np.zeros(n)
        comm = np.zeros(n)
        dis_unit = np.zeros(n)
        factor = np.zeros(n)
        q_next = np.zeros(n)
        amount_now = np.zeros(n)
        cash = np.zeros((len(STATUSES), self.ctx.months))
        status = records["status"].to_numpy()
        for si, st in enumerate(STATUSES):
            sel = np.flatnonzero(status == st)
            if len(sel) == 0:
                continue
            part = records[sel]
            o, s, lp, lc, du, f, q, a, cf = self._value_status(st, part)
            own[sel], spouse[sel], lump[sel], factor[sel], q_next[sel], amount_now[sel] = o, s, lp, f, q, a
            comm[sel], dis_unit[sel] = lc, du
            cash[si] = cf
        return Projection(own, spouse, lump, comm, dis_unit, factor, q_next, amount_now, cash, self.tranches)

    def _value_status(self, status: str, df: pl.DataFrame) -> tuple:
        basis, ctx = self.basis, self.ctx
        N, J = df.height, len(self.tranches)
        sex = df["sex"].to_numpy().astype(str)
        dob = _days(df["date_of_birth"].to_numpy())
        if AGE_COLUMN in df.columns:  # computed once a chunk by the caller (see with_ages)
            x0 = df[AGE_COLUMN].to_numpy()
        else:
            x0 = np.asarray(age_at(dob, self.valuation_date, basis.age_convention), dtype=float)
        rows_x = self._rows(status, sex, x0)
        base = np.column_stack([df[f"pension_{t}"].fill_null(0.0).to_numpy().astype(float) for t in self.tranches])
        cash = np.zeros(ctx.months)
        lump = np.zeros(N)
        lump_comm = np.zeros(N)
        dis_unit = np.zeros(N)

        # expected deaths in the next year
        lx0 = self._l(rows_x, x0)
        q_next = 1.0 - self._l(rows_x, x0 + 1.0) / lx0

        start = np.zeros(N, dtype=np.int64)
        stop: NDArray[np.int64] | None = None
        guar: NDArray[np.int64] | None = None
        at_start = np.ones((N, J))
        at_start_sp = np.ones((N, J))
        growth: NDArray[np.float64] | None = None
        exits: tuple[Exits, NDArray[np.int64]] | None = None
        service: NDArray[np.float64] | None = None
        with_spouse = status != "dependant"
        # pensions that start after the valuation date take the first-increase rule; those in payment do not
        first_inc = self.first_increase if status in ("deferred", "active") else None

        if status == "pensioner":
            if "guarantee_end" in df.columns:
                g_end = _days(df["guarantee_end"].to_numpy())
                g_years = (g_end - self.valuation_date).astype("timedelta64[D]").astype(float) / 365.25
                guar = np.where(np.isnan(g_years), 0, self._months(np.nan_to_num(g_years, nan=0.0)))
        elif status == "dependant":
            if "pension_end_age" in df.columns:
                end_age = df["pension_end_age"].to_numpy().astype(float)
                stop = np.where(np.isnan(end_age), ctx.months, self._months(np.nan_to_num(end_age) - x0))
        else:
            nra = df["retirement_age"].to_numpy().astype(float)
            start = self._months(np.maximum(nra - x0, 0.0))
            comm = basis.commutation
            keep = 1.0 - float(comm.proportion)
            if status == "deferred":
                at_start_sp = self.revalue[:, start].T  # (N, J)
                growth = self.revalue
            else:
                base, at_start_sp, growth, exits, dis_lump, dis_cf, dis_unit = self._active(df, x0, rows_x, start)
                if basis.spouse.pre_retirement_active == "prospective_to_nra":
                    service = df["service_years"].fill_null(0.0).to_numpy().astype(float)
                lump += dis_lump
                cash += dis_cf
            at_start = at_start_sp * keep
            if comm.proportion > 0:
                # cash at retirement for the commuted share: proportion x pension x factor [DHW 10.4]
                pens_at_ret = (base * at_start_sp).sum(axis=1)
                surv = self._l(rows_x, x0 + start / 12.0) / lx0
                amount = comm.proportion * pens_at_ret * comm.factor * surv
                lump_comm = amount * ctx.v[start]
                lump += lump_comm
                cash += np.bincount(start, weights=amount, minlength=ctx.months)[: ctx.months]

        # own pension
        keycols = [rows_x, x0, start] + [at_start[:, j] for j in range(J)]
        if stop is not None:
            keycols.append(stop)
        if guar is not None:
            keycols.append(guar)
        first, inv = dedupe(*keycols)
        res = value_leg(
            ctx, self.mrows, kind="own", rows_x=rows_x[first], x0=x0[first], start=start[first],
            weights=sum_by_key(inv, len(first), base), at_start=at_start[first], increase=self.increase,
            first_increase=first_inc, stop=None if stop is None else stop[first],
            guarantee=None if guar is None else guar[first],
        )
        own = base * res.unit_pv[inv]
        cash += res.cashflow
        at_start_total = (base * at_start).sum(axis=1)
        factor = np.divide(own.sum(axis=1), at_start_total, out=np.zeros(N), where=at_start_total > 0)

        spouse = np.zeros((N, J))
        if with_spouse:
            sp_sex = np.where(sex == "M", "F", "M")
            sp_dob = _days(df["spouse_date_of_birth"].to_numpy()) if "spouse_date_of_birth" in df.columns else None
            diff = float(basis.spouse.age_difference)
            assumed = np.where(sex == "M", x0 - diff, x0 + diff)
            if sp_dob is not None:
                known = ~np.isnat(sp_dob)
                if SPOUSE_AGE_COLUMN in df.columns:
                    y_known = np.nan_to_num(df[SPOUSE_AGE_COLUMN].to_numpy().astype(float))
                else:
                    y_known = np.asarray(age_at(np.where(known, sp_dob, dob), self.valuation_date,
                                                basis.age_convention), dtype=float)
                y0 = np.where(known, y_known, assumed)
            else:
                known = np.zeros(N, dtype=bool)
                y0 = assumed
            y0 = np.clip(y0, 0.0, MAX_AGE + 0.999)
            pm = np.where(known, 1.0, np.where(sex == "M", basis.spouse.proportion_married["M"],
                                               basis.spouse.proportion_married["F"]))
            frac = df["spouse_fraction"].to_numpy().astype(float) if "spouse_fraction" in df.columns else np.full(N, np.nan)
            frac = np.where(np.isnan(frac), float(basis.spouse.fraction), frac)
            rows_y = self._rows("spouse", sp_sex, y0)
            weight = base * (pm * frac)[:, None]
            keycols = [rows_x, x0, rows_y, y0, start] + [at_start_sp[:, j] for j in range(J)]
            if guar is not None:
                keycols.append(guar)
            if service is not None:
                keycols.append(service)
            first, inv = dedupe(*keycols)
            res = value_leg(
                ctx, self.mrows, kind="reversion", rows_x=rows_x[first], x0=x0[first], start=start[first],
                weights=sum_by_key(inv, len(first), weight), at_start=at_start_sp[first], increase=self.increase,
                first_increase=first_inc, growth=growth,
                exits=None if exits is None else exits[0].take(exits[1][first]),
                service=None if service is None else service[first],
                guarantee=None if guar is None else guar[first], rows_y=rows_y[first], y0=y0[first],
            )
            spouse = weight * res.unit_pv[inv]
            cash += res.cashflow
        return own, spouse, lump, lump_comm, dis_unit, factor, q_next, base.sum(axis=1), cash

    def _active(self, df: pl.DataFrame, x0: NDArray, rows_x: NDArray, start: NDArray) -> tuple:
        """Projected unit credit for actives.

        Returns the base amounts (N, J), the factor on them at retirement (N, J), the factor on them for a
        spouse's pension fixed at a death in service before retirement (J, M), the withdrawal before a death
        (:class:`~valuation.engine.legs.Exits` by key, and each member's key; None for career-average
        designs), and the death-in-service lump sums (PV per member, cash flows, next year's unit).

        Withdrawal and death are independent decrements: the member survives on the mortality table alone,
        and the withdrawal hazard decides the form of the benefit (common practice). A leaver in year i (at
        mid-year) keeps accrual x service x salary projected to i + 1/2, revalued in deferment to retirement,
        or to an earlier death for the spouse's pension, with the default tranche's rule [DHW 10.5-10.6].
        A member still in service at death leaves a spouse's pension on the pension accrued to date on
        salary at death (the unit credit, IAS 19 paras 67-70). Career-average pensions revalue alike in and
        out of service, so withdrawal does not change them.
        """
        basis, ctx = self.basis, self.ctx
        N, J = df.height, len(self.tranches)
        dj = self.tranches.index(basis.default_tranche)
        salary = df["salary"].fill_null(0.0).to_numpy().astype(float)
        service = df["service_years"].fill_null(0.0).to_numpy().astype(float)
        g = ctx.salary_growth
        n_int = int(np.ceil(start.max() / 12.0)) if N else 0
        yrs = np.arange(n_int)
        mid = yrs + 0.5
        mid_m = np.clip(np.rint(mid * 12).astype(np.int64), 0, ctx.months - 1)
        # everything that depends on age, survival row and retirement date alone is done once a key
        first, inv = dedupe(rows_x, x0, start)
        kx, kstart, krows = x0[first], start[first], rows_x[first]
        K = len(first)
        n_years = kstart / 12.0
        in_window = mid[None, :] < n_years[:, None]  # (K, Y)
        if basis.withdrawal:
            steps = sorted(basis.withdrawal)
            ages_from = np.array([a for a, _ in steps])
            rates = np.array([r for _, r in steps])
            pos = np.searchsorted(ages_from, kx[:, None] + yrs[None, :], side="right") - 1
            w = np.where(pos >= 0, rates[np.clip(pos, 0, None)], 0.0) * in_window
        else:
            w = np.zeros((K, n_int))
        stay = np.cumprod(1.0 - w, axis=1)  # in service at the end of year i (withdrawal only)
        stay_before = np.column_stack([np.ones(K), stay[:, :-1]]) if n_int else np.ones((K, 0))
        stay_to_ret = stay[:, -1] if n_int else np.ones(K)

        exits: tuple[Exits, NDArray[np.int64]] | None = None
        if basis.benefit_design == "career_average":
            base = np.column_stack([df[f"pension_{t}"].fill_null(0.0).to_numpy().astype(float) for t in self.tranches])
            at_ret = self.revalue[:, start].T
            growth = self.revalue
        else:
            base = np.zeros((N, J))
            base[:, dj] = float(basis.accrual_rate) * service * salary
            rev = self.revalue[dj]
            rev_to_ret = rev[kstart][:, None] / rev[mid_m][None, :]
            leavers = (stay_before * w * (1.0 + g) ** mid[None, :] * rev_to_ret).sum(axis=1)
            factor = stay_to_ret * (1.0 + g) ** n_years + leavers
            at_ret = np.zeros((N, J))
            at_ret[:, dj] = factor[inv]
            growth = np.vstack([ctx.salary_index()] * J)
            # a death in month d follows m = exits_before(d) exit dates: in service with stay after m
            # exits; a leaver's pension revalued from exit to the death
            in_service = np.column_stack([np.ones(K), stay])
            left_unit = stay_before * w * (1.0 + g) ** mid[None, :] / rev[mid_m][None, :]
            left = np.column_stack([np.zeros(K), np.cumsum(left_unit, axis=1)])
            exits = (Exits(in_service, left, np.vstack([rev] * J)), inv)

        # Lump sum on death in service: multiple x salary projected to the mid-year of death [DHW 10.8].
        # It does not grow with service, so it is attributed to service straight-line from joining to the
        # date of death (IAS 19 para 70): the part earned to date is service / (service + t), and one more
        # year of service earns 1 / (service + t) of it (the current service cost).
        mult = float(basis.death_in_service_lump_sum)
        dis_pv = np.zeros(N)
        dis_unit = np.zeros(N)
        dis_cf = np.zeros(ctx.months)
        if mult > 0 and n_int:
            lk = self._l(krows[:, None], kx[:, None] + np.arange(n_int + 1)[None, :])
            lk0 = lk[:, :1]
            # expected payment per unit of salary in year i, in service and dying then (key level)
            per_salary = mult * (lk[:, :-1] - lk[:, 1:]) / lk0 * stay_before * in_window * (1.0 + g) ** mid[None, :]
            v_mid = ctx.v[mid_m]
            flows = np.zeros(n_int)
            death_in_service_kernel(np.ascontiguousarray(per_salary), inv.astype(np.int64), salary, service,
                                    mid, np.ascontiguousarray(v_mid), dis_unit, flows)
            dis_pv = service * dis_unit  # the attributed part: service / (s + t) of each amount
            np.add.at(dis_cf, mid_m, flows)
        return base, at_ret, growth, exits, dis_pv, dis_cf, dis_unit
