"""Project and value every member's benefits under one scenario.

The member records of each status are turned into arrays, the benefit rule for the status
(``engine/benefits/``, one module a kind of benefit) says what the members' pensions are and which legs and
lump sums they produce; legs are valued on keys (see ``legs.py``) and multiplied back by each member's
amounts; lump sums come valued. Results are added up by the benefit name each leg or lump sum carries, so
nothing here knows a benefit or a status by name.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   ch. 5 (annuities), ch. 9 (joint lives, reversionary annuities), ch. 10 (pension plans).
.. IAS 19 *Employee Benefits* (IASB), paras 67-69 (projected unit credit), 83 (discount rate).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from datetime import date
from functools import partial
from typing import Any

import numpy as np
import polars as pl
from numpy.typing import NDArray

from valuation.basis.model import Basis
from valuation.engine.benefits import LUMP_BENEFITS, PENSION_BENEFITS, RULES, BenefitRule
from valuation.engine.benefits.base import BenefitContext, Leg, Members
from valuation.engine.benefits.reversion import SPOUSE_AGE_COLUMN
from valuation.engine.context import (
    MAX_AGE,
    Context,
    MortalityRows,
    first_increase_factor,
    increase_index,
    increase_month,
    revaluation_index,
)
from valuation.engine.legs import LegResult, dedupe, sum_by_key, value_leg
from valuation.engine.scenario import BASE, Scenario, curves, mortality_for
from valuation.survival import age_at
from valuation.vocabulary import GROUP_OF_STATUS, GROUPS, SEXES, STATUSES, Benefit


@dataclass
class Projection:
    """Per-member values and scheme cash flows of one scenario, by benefit name."""

    pensions: dict[Benefit, NDArray[np.float64]]  # (N, J) PV of each pension benefit by tranche
    lumps: dict[Benefit, NDArray[np.float64]]  # (N,) PV of each lump-sum benefit
    earned_with_pension: NDArray[np.float64]  # (N,) PV of lump sums that grow with the pension (commutation)
    lump_next_year: NDArray[np.float64]  # (N,) PV of one more year's attribution of lump sums on death
    annuity_factor: NDArray[np.float64]  # (N,) PV of own pension per 1 p.a. at its start
    q_next: NDArray[np.float64]  # (N,) probability of death within a year (NaN: not asked of the valuer)
    amount_now: NDArray[np.float64]  # (N,) pension in payment or accrued today [currency p.a.]
    cashflow: NDArray[np.float64]  # (S, M) expected nominal payments by status and month
    tranches: list[str]
    #: expected payments by tranche and month, per unit of the increase index, of the rules whose every
    #: payment is the amount now times the index (pensions in payment; see ``Valuer.indexed_value``)
    indexed: NDArray[np.float64] | None = None
    indexed_rules: tuple[BenefitRule, ...] = ()

    def benefit_values(self) -> Iterator[tuple[Benefit, NDArray[np.float64]]]:
        """Each benefit's PV per member (pensions summed over tranches), in reporting order."""
        for b, v in self.pensions.items():
            yield b, v.sum(axis=1)
        yield from self.lumps.items()

    def cells(self) -> Iterator[tuple[tuple[str, Benefit], NDArray[np.float64]]]:
        """((tranche, benefit), PV per member): pensions by tranche, lump sums under tranche ``all``."""
        for b, v in self.pensions.items():
            for j, tr in enumerate(self.tranches):
                yield (tr, b), v[:, j]
        for b, lump in self.lumps.items():
            yield ("all", b), lump

    @property
    def liability(self) -> NDArray[np.float64]:
        total: NDArray[np.float64] | None = None
        for _, v in self.benefit_values():  # added in reporting order, so reruns repeat to the bit
            total = v if total is None else total + v
        return total if total is not None else np.zeros(len(self.q_next))

    @staticmethod
    def join(parts: list[Projection]) -> Projection:
        """The projections of consecutive chunks as one."""
        return Projection(
            pensions={b: np.vstack([p.pensions[b] for p in parts]) for b in parts[0].pensions},
            lumps={b: np.concatenate([p.lumps[b] for p in parts]) for b in parts[0].lumps},
            earned_with_pension=np.concatenate([p.earned_with_pension for p in parts]),
            lump_next_year=np.concatenate([p.lump_next_year for p in parts]),
            annuity_factor=np.concatenate([p.annuity_factor for p in parts]),
            q_next=np.concatenate([p.q_next for p in parts]),
            amount_now=np.concatenate([p.amount_now for p in parts]),
            cashflow=sum((p.cashflow for p in parts), np.zeros_like(parts[0].cashflow)),
            tranches=parts[0].tranches,
            indexed=_sum_optional([p.indexed for p in parts]),
            indexed_rules=parts[0].indexed_rules,
        )


@dataclass
class Prepared:
    """A chunk of records made ready for valuing under any scenario (see :meth:`Valuer.prepare`)."""

    n: int
    parts: list[tuple[BenefitRule, NDArray[np.int64], Members]]


def _indexed_from_now(leg: Leg) -> bool:
    """Whether every payment of the leg is its amount now times the increase index at the payment."""
    return (leg.first_increase is None and leg.growth is None and leg.exits is None and leg.service is None
            and not leg.start.any() and bool(np.all(leg.at_start == 1.0)))


def leg_keys(m: Members, legs: list[Leg], i: int) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """The keys of leg ``i`` of a rule's members (each key's first member, each member's key), found once
    a chunk. The leg with the most key columns is keyed first; another leg's keys are then found among its
    keys' first members alone, and kept where every member's columns agree with its key's (a leg's columns
    that follow from the first leg's, as a member's own pension's do from the spouse's pension's), else
    found afresh."""
    def find() -> tuple[NDArray[np.int64], NDArray[np.int64]]:
        widest = max(range(len(legs)), key=lambda j: len(legs[j].key_columns()))
        if i == widest:
            return dedupe(*legs[i].key_columns())
        fine_first, fine_inv = leg_keys(m, legs, widest)
        cols = legs[i].key_columns()
        local_first, local_inv = dedupe(*[np.asarray(c)[fine_first] for c in cols])
        first, inv = fine_first[local_first], local_inv[fine_inv]
        if all(np.array_equal(np.asarray(c, dtype=float), np.asarray(c, dtype=float)[first][inv], equal_nan=True)
               for c in cols):
            return first, inv
        return dedupe(*cols)

    return m.once(f"leg {i} keys", find)


def _sum_optional(arrays: list[NDArray[np.float64] | None]) -> NDArray[np.float64] | None:
    present = [a for a in arrays if a is not None]
    return sum(present[1:], present[0].copy()) if present else None


#: Columns a caller may add so that ages are computed once for every scenario (see :func:`with_ages`).
AGE_COLUMN = "_age_at_valuation"


def with_ages(records: pl.DataFrame, basis: Basis) -> pl.DataFrame:
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

    def __init__(
        self, basis: Basis, scenario: Scenario = BASE, base_multiplier: float = 1.0, *,
        survival_of: Valuer | None = None, deaths_next_year: bool = True,
    ) -> None:
        """``survival_of``: a valuer on the same basis whose survival this scenario keeps (it changes no
        mortality): its survival rows are reused, and what depends on them alone is worked out once a
        chunk for both. ``deaths_next_year``: work out each member's probability of death within a year
        (``Projection.q_next``; NaN otherwise, for a scenario whose expected deaths nobody reports)."""
        self.basis = basis
        self.deaths_next_year = deaths_next_year
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
        self.mrows: MortalityRows
        shared = survival_of is not None and not scenario.changes_mortality
        if survival_of is not None and shared:
            self.mrows = survival_of.mrows
        else:
            bases = [mortality_for(basis, g, s, scenario, base_multiplier) for (g, s) in self.mort_ids]
            rng = (self.year - MAX_AGE - 2, self.year + 1)
            self.mrows = MortalityRows.build(bases, [rng] * len(bases))
        self.bc = BenefitContext(
            basis=basis, ctx=self.ctx, mrows=self.mrows, tranches=self.tranches,
            valuation_date=self.valuation_date, year=self.year, increase=self.increase,
            first_increase=self.first_increase, revalue=self.revalue, mort_ids=self.mort_ids,
        )
        if survival_of is not None and shared:
            if survival_of.bc.survival_key is None:
                survival_of.bc.survival_key = f"survival {id(self.mrows)}"
            self.bc.survival_key = survival_of.bc.survival_key

    # ------------------------------------------------------------------ main
    def prepare(self, records: pl.DataFrame) -> Prepared:
        """What valuing ``records`` needs that no scenario changes: each rule's records, ages and survival
        rows (every scenario's survival rows have the same layout), and, filled in as the first scenario
        asks, their keys. Value the result under as many scenarios as needed (:meth:`value`)."""
        status = records["status"]
        parts = []
        for rule in RULES:
            sel = np.flatnonzero(rule.applies_to(status))
            if len(sel):
                parts.append((rule, sel, self._members(rule, records[sel])))
        return Prepared(records.height, parts)

    def value(self, records: pl.DataFrame | Prepared, rules: Sequence[BenefitRule] | None = None) -> Projection:
        """Value every record (one benefit rule at a time; only ``rules`` if given, the others left at 0)
        and return per-member values and cash flows."""
        prepared = records if isinstance(records, Prepared) else self.prepare(records)
        n = prepared.n
        J = len(self.tranches)
        pensions = {b: np.zeros((n, J)) for b in PENSION_BENEFITS}
        lumps = {b: np.zeros(n) for b in LUMP_BENEFITS}
        earned = np.zeros(n)
        next_year = np.zeros(n)
        factor = np.zeros(n)
        q_next = np.zeros(n)
        amount_now = np.zeros(n)
        cash = np.zeros((len(STATUSES), self.ctx.months))
        indexed = np.zeros((J, self.ctx.months))
        indexed_rules: list[BenefitRule] = []
        for rule, sel, members in prepared.parts:
            if rules is not None and rule not in rules:
                continue
            part = self._value_rule(rule, members)
            if part.indexed is not None:
                indexed += part.indexed
                indexed_rules.append(rule)
            for b, v in part.pensions.items():
                pensions[b][sel] = v
            for b, lump in part.lumps.items():
                lumps[b][sel] = lump
            earned[sel], next_year[sel] = part.earned_with_pension, part.lump_next_year
            factor[sel], q_next[sel], amount_now[sel] = part.annuity_factor, part.q_next, part.amount_now
            cash[STATUSES.index(rule.status)] += part.cashflow[0]
        with np.errstate(divide="ignore", invalid="ignore"):
            per_unit = np.where(self.increase > 0, indexed / self.increase, 0.0)
        return Projection(pensions, lumps, earned, next_year, factor, q_next, amount_now, cash, self.tranches,
                          per_unit, tuple(indexed_rules))

    def indexed_value(self, base: Projection) -> float:
        """Present value under this valuer's scenario of the payments ``base.indexed`` describes: exact
        for a scenario that keeps mortality and changes only the curves, since those payments are the
        base's expected payments per unit of the increase index, times this scenario's index, discounted.

        References
        ----------
        PV = sum_t v^t CF_t [DHW 2013, section 2.2], CF_t the expected payment in month t.
        """
        if base.indexed is None:
            return 0.0
        return float(((base.indexed * self.increase).sum(axis=0) * self.ctx.v).sum())

    def _members(self, rule: BenefitRule, df: pl.DataFrame) -> Members:
        """One rule's records as arrays: sex, date of birth, age now and survival row (l now left empty)."""
        sex = np.asarray(SEXES)[df["sex"].cast(pl.Enum(list(SEXES))).to_physical().to_numpy()]
        dob = _days(df["date_of_birth"].to_numpy())
        if AGE_COLUMN in df.columns:  # computed once a chunk by the caller (see with_ages)
            x0 = df[AGE_COLUMN].to_numpy()
        else:
            x0 = np.asarray(age_at(dob, self.valuation_date, self.basis.age_convention), dtype=float)
        rows_x = self.bc.rows(GROUP_OF_STATUS[rule.status], sex, x0)
        return Members(frame=df, status=rule.status, sex=sex, dob=dob, x0=x0, rows_x=rows_x)

    def _value_rule(self, rule: BenefitRule, shared: Members) -> Projection:
        bc = self.bc
        m = shared
        N, J = m.n, len(self.tranches)
        # expected deaths in the next year
        q_next = (m.for_survival(bc, "q_next", lambda: 1.0 - bc.l(m.rows_x, m.x0 + 1.0) / m.l_now(bc))
                  if self.deaths_next_year else np.full(N, np.nan))
        terms = rule.terms(bc, m)
        cash = np.zeros(self.ctx.months)
        lumps: dict[Benefit, NDArray[np.float64]] = {}
        earned = np.zeros(N)
        next_year = np.zeros(N)
        for lump in rule.lumps(bc, m, terms):
            lumps[lump.benefit] = lumps.get(lump.benefit, np.zeros(N)) + lump.pv
            cash += lump.cashflow
            if lump.earned_with_pension:
                earned += lump.pv
            if lump.next_year is not None:
                next_year += lump.next_year
        pensions: dict[Benefit, NDArray[np.float64]] = {}
        own = np.zeros(N)
        legs = rule.legs(bc, m, terms)
        # payments that are the amount now times the increase index (no lump sums, nothing deferred)
        indexed: NDArray[np.float64] | None = np.zeros((J, self.ctx.months)) if not lumps and all(
            m.once(f"leg {i} indexed", partial(_indexed_from_now, leg)) for i, leg in enumerate(legs)) else None
        for i, leg in enumerate(legs):
            values, flows, by_tranche = self.value_leg(leg, leg_keys(m, legs, i), m.once(f"leg {i} kept", dict))
            pensions[leg.benefit] = pensions.get(leg.benefit, np.zeros((N, J))) + values
            cash += flows
            if indexed is not None:
                indexed += by_tranche
            if leg.kind == "own":
                own += values.sum(axis=1)
        at_start_total = (terms.base * terms.at_start).sum(axis=1)
        factor = np.divide(own, at_start_total, out=np.zeros(N), where=at_start_total > 0)
        return Projection(pensions, lumps, earned, next_year, factor, q_next, terms.base.sum(axis=1), cash[None, :],
                          self.tranches, indexed)

    def value_leg(
        self, leg: Leg, keys: tuple[NDArray[np.int64], NDArray[np.int64]] | None = None,
        kept: dict[str, object] | None = None,
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
        """Per-member PV (N, J) of a leg and its expected payments on the monthly grid, in all (M,) and by
        tranche (J, M), valued on keys (``keys``: each key's first member and each member's key, from
        :func:`legs.dedupe`; ``kept``: what :func:`legs.value_leg` keeps for the next scenario on the same
        keys)."""
        first, inv = keys if keys is not None else dedupe(*leg.key_columns())
        res, _ = self._leg_on_keys(leg, first, inv, kept)
        by_tranche = res.cashflow_by_tranche if res.cashflow_by_tranche is not None else res.cashflow[None, :]
        return leg.amount * res.unit_pv[inv], res.cashflow, by_tranche

    def _leg_on_keys(
        self, leg: Leg, first: NDArray[np.int64], inv: NDArray[np.int64], kept: dict[str, object] | None,
    ) -> tuple[LegResult, NDArray[np.float64]]:
        """The leg valued on its keys, and each key's amounts (the sum of its members' amounts), (K, J)."""

        def at(a: NDArray | None) -> NDArray | None:
            return None if a is None else a[first]

        weights = sum_by_key(inv, len(first), leg.amount)
        res = value_leg(
            self.ctx, self.mrows, kind=leg.kind, rows_x=leg.rows_x[first], x0=leg.x0[first], start=leg.start[first],
            weights=weights, at_start=leg.at_start[first], increase=self.increase,
            first_increase=leg.first_increase, growth=leg.growth,
            exits=None if leg.exits is None else leg.exits[0].take(leg.exits[1][first]),
            service=at(leg.service), stop=at(leg.stop), guarantee=at(leg.guarantee), rows_y=at(leg.rows_y),
            y0=at(leg.y0), kept=kept,
        )
        return res, weights

    def total(self, records: Prepared, rules: Sequence[BenefitRule] | None = None) -> float:
        """The liability [currency] of the records (of ``rules``' members only, if given): what
        ``value(records, rules).liability.sum()`` gives, added up by key instead of by member, for a
        scenario of which only the total is reported (a sensitivity).

        References
        ----------
        PV of a group = sum over keys of (the key's amounts x its PV per unit) [DHW 2013, section 2.2;
        the keys are lives with identical survival and dates].
        """
        bc = self.bc
        total = 0.0
        for rule, _, m in records.parts:
            if rules is not None and rule not in rules:
                continue
            terms = rule.terms(bc, m)
            for lump in rule.lumps(bc, m, terms):
                total += float(lump.pv.sum())
            legs = rule.legs(bc, m, terms)
            for i, leg in enumerate(legs):
                first, inv = leg_keys(m, legs, i)
                res, weights = self._leg_on_keys(leg, first, inv, m.once(f"leg {i} kept", dict))
                total += float((weights * res.unit_pv).sum())
        return total
