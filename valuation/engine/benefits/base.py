"""What a benefit rule is: the members it applies to, the terms of the member's pension, and the legs and
lump sums it produces.

A rule (one module per kind of benefit in this package) never values anything itself. It describes:

- :class:`PensionTerms`: the member's own pension (base amounts by tranche, start month, the factor on
  them at the start, an optional stop or guarantee, the first-increase rule, and what a spouse's pension
  would be on a death before the start);
- :class:`Leg`: a stream of pension payments, valued on keys by the compiled kernel (``legs.value_leg``)
  and multiplied back by each member's amounts;
- :class:`Lump`: a lump sum whose expected present value and cash flows the rule computes directly.

The engine (``project.Valuer``) runs every rule on its members and adds the results up by the benefit
name each leg and lump sum carries (``vocabulary.BENEFITS``); it knows no benefit by name.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   ch. 5 (annuities), ch. 9 (reversionary annuities), ch. 10 (pension plans).
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, ClassVar, Literal, TypeVar

import numpy as np
import polars as pl
from numpy.typing import NDArray

from valuation.basis.model import Basis
from valuation.engine.context import Context, MortalityRows
from valuation.engine.legs import Exits
from valuation.survival import lx_at
from valuation.vocabulary import SEXES, Benefit, Group, Sex, Status, tranche_column

LegKind = Literal["own", "reversion"]
T = TypeVar("T")

#: The member's own pension (every status has one).
MEMBER_PENSION: Benefit = "member_pension"


@dataclass
class BenefitContext:
    """Everything a rule needs that does not depend on the member, under one scenario."""

    basis: Basis
    ctx: Context
    mrows: MortalityRows
    tranches: list[str]
    valuation_date: np.datetime64
    year: int
    increase: NDArray[np.float64]  # (J, M) increase index in payment per tranche
    first_increase: NDArray[np.float64] | None  # (J, M) first-increase factor per start month; None: full
    revalue: NDArray[np.float64]  # (J, M) revaluation index in deferment per tranche
    mort_ids: dict[tuple[Group, Sex], int]
    #: names the survival in use when several scenarios share it: what depends on survival alone is then
    #: kept under it for all of them (:meth:`Members.for_survival`); None: not shared, nothing kept
    survival_key: str | None = None

    def rows(self, group: Group | NDArray, sex: NDArray, age: NDArray[np.float64]) -> NDArray[np.int64]:
        """Survival row of each life: the (group, sex) mortality for the cohort of its age now."""
        mid = np.zeros(len(sex), dtype=np.int64)
        if isinstance(group, str):  # one group: a look-up by sex
            for s in SEXES:
                mid[sex == s] = self.mort_ids[(group, s)]
        else:
            for (g, s), i in self.mort_ids.items():
                mid[(group == g) & (sex == s)] = i
        cohort = self.year - np.floor(age).astype(np.int64)
        return self.mrows.rows(mid, cohort)

    def l(self, rows: NDArray[np.int64], ages: NDArray[np.float64]) -> NDArray[np.float64]:  # noqa: E743
        """l at exact ages on survival rows (see :func:`valuation.survival.lx_at`)."""
        return lx_at(self.mrows.lx, self.mrows.q_rows, rows, ages, self.ctx.fractional)  # type: ignore[arg-type]

    def months(self, years: NDArray[np.float64]) -> NDArray[np.int64]:
        """Years after the valuation date rounded to the monthly grid."""
        return np.clip(np.rint(years * 12.0), 0, self.ctx.months - 1).astype(np.int64)

    def base_amounts(self, m: Members) -> NDArray[np.float64]:
        """Each member's pension by tranche [currency p.a.], (N, J)."""
        return m.once("base", lambda: np.column_stack([
            m.frame[tranche_column(t)].fill_null(0.0).to_numpy().astype(float) for t in self.tranches]))


@dataclass
class Members:
    """One rule's records in a chunk as arrays: ages and survival rows (the same under every scenario),
    and l at the age now under the scenario being valued (``lx0``).

    ``once`` keeps what does not depend on the scenario (keys, spouse ages, amounts) for every scenario
    that values the same chunk (see ``project.Valuer.prepare``).
    """

    frame: pl.DataFrame
    status: Status
    sex: NDArray[np.str_]
    dob: NDArray[np.datetime64]
    x0: NDArray[np.float64]  # exact age at the valuation date [years]
    rows_x: NDArray[np.int64]
    cache: dict[str, Any] = field(default_factory=dict)

    @property
    def n(self) -> int:
        return self.frame.height

    def once(self, name: str, make: Callable[[], T]) -> T:
        """``make()``, computed the first time a scenario asks and shared by the others."""
        if name not in self.cache:
            self.cache[name] = make()
        return self.cache[name]  # type: ignore[no-any-return]

    def for_survival(self, bc: BenefitContext, name: str, make: Callable[[], T]) -> T:
        """``make()`` for what depends on the survival in use alone: kept for the scenarios sharing it."""
        return make() if bc.survival_key is None else self.once(f"{bc.survival_key} {name}", make)

    def l_now(self, bc: BenefitContext) -> NDArray[np.float64]:
        """l at each member's age now on the survival in use."""
        return self.for_survival(bc, "lx0", lambda: bc.l(self.rows_x, self.x0))

    def column(self, name: str, fill: float | None = None) -> NDArray[np.float64] | None:
        """A numeric column as floats (nulls as ``fill``, or NaN), or None where the frame lacks it."""
        if name not in self.frame.columns:
            return None
        col = self.frame[name]
        if fill is not None:
            col = col.fill_null(fill)
        return col.to_numpy().astype(float)


@dataclass
class PensionTerms:
    """The member's own pension, and what a spouse's pension on a death before its start would be."""

    base: NDArray[np.float64]  # (N, J) pension in payment or accrued today [currency p.a.]
    start: NDArray[np.int64]  # (N,) grid month the pension starts (0: in payment)
    at_start: NDArray[np.float64]  # (N, J) factor on base at the start, after any commutation
    at_start_full: NDArray[np.float64]  # (N, J) factor on base at the start, before commutation
    stop: NDArray[np.int64] | None = None  # (N,) first month with no payment; None: for life
    guarantee: NDArray[np.int64] | None = None  # (N,) month to which payment is certain; None: none
    starts_later: bool = False  # True: the first-increase rule applies (the pension is not yet in payment)
    growth: NDArray[np.float64] | None = None  # (J, M) spouse's pension fixed at a death before the start
    exits: tuple[Exits, NDArray[np.int64]] | None = None  # withdrawal before the start (by key, member's key)
    service: NDArray[np.float64] | None = None  # (N,) service to date for a prospective spouse's pension


@dataclass
class Leg:
    """A stream of pension payments for each member, valued on keys by :func:`legs.value_leg`.

    ``amount`` (N, J) multiplies the leg's unit values (PV of 1 p.a. of base) member by member. The other
    fields are as :func:`valuation.engine.legs.value_leg_numpy` documents them, one a member.
    """

    benefit: Benefit
    kind: LegKind
    amount: NDArray[np.float64]
    rows_x: NDArray[np.int64]
    x0: NDArray[np.float64]
    start: NDArray[np.int64]
    at_start: NDArray[np.float64]
    first_increase: NDArray[np.float64] | None = None
    stop: NDArray[np.int64] | None = None
    guarantee: NDArray[np.int64] | None = None
    growth: NDArray[np.float64] | None = None
    exits: tuple[Exits, NDArray[np.int64]] | None = None
    service: NDArray[np.float64] | None = None
    rows_y: NDArray[np.int64] | None = None
    y0: NDArray[np.float64] | None = None

    def key_columns(self) -> list[NDArray]:
        """Columns whose distinct rows are the leg's keys (members sharing one share its unit values)."""
        cols: list[NDArray] = [self.rows_x, self.x0]
        if self.rows_y is not None and self.y0 is not None:
            cols += [self.rows_y, self.y0]
        cols.append(self.start)
        cols += [self.at_start[:, j] for j in range(self.at_start.shape[1])]
        cols += [c for c in (self.stop, self.guarantee, self.service) if c is not None]
        return cols


@dataclass
class Lump:
    """A lump sum: its expected present value per member and its expected payments on the monthly grid.

    ``earned_with_pension``: the sum grows with the pension (cash commuted from it), so a year's service
    cost counts it with the pension; otherwise ``next_year`` is the PV of what one more year of service
    earns of it (None: nothing).
    """

    benefit: Benefit
    pv: NDArray[np.float64]  # (N,)
    cashflow: NDArray[np.float64]  # (M,)
    earned_with_pension: bool = False
    next_year: NDArray[np.float64] | None = None


class BenefitRule(ABC):
    """One kind of benefit: the members it applies to, their pension's terms, its legs and lump sums.

    Subclasses name the ``status`` whose members they value, the ``pensions`` (leg benefit names) and
    ``lump_sums`` they can produce, and whether they depend on salary (``uses_salary``: the accrued-benefit
    measure and the salary-growth sensitivity re-value only those members).
    """

    status: ClassVar[Status]
    pensions: ClassVar[tuple[Benefit, ...]] = ()
    lump_sums: ClassVar[tuple[Benefit, ...]] = ()
    uses_salary: ClassVar[bool] = False

    def applies_to(self, status: pl.Series) -> NDArray[np.bool_]:
        """Mask of the records this rule values (by the status column)."""
        return (status == self.status).to_numpy()

    @abstractmethod
    def terms(self, bc: BenefitContext, m: Members) -> PensionTerms:
        """The terms of each member's own pension."""

    @abstractmethod
    def legs(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Leg]:
        """The pension legs the members' benefits consist of."""

    def lumps(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Lump]:
        """The lump sums (none unless the rule says so)."""
        return []


def own_leg(bc: BenefitContext, m: Members, terms: PensionTerms, benefit: Benefit = MEMBER_PENSION) -> Leg:
    """The member's own pension as a leg: from its start, certain to any guarantee, to any stop.

    References
    ----------
    [DHW] eq. (5.12) (annuity as a sum of v^k kp_x), section 5.6 (guaranteed annuities).
    """
    return Leg(
        benefit=benefit, kind="own", amount=terms.base, rows_x=m.rows_x, x0=m.x0, start=terms.start,
        at_start=terms.at_start, first_increase=bc.first_increase if terms.starts_later else None,
        stop=terms.stop, guarantee=terms.guarantee,
    )


__all__ = ["MEMBER_PENSION", "BenefitContext", "BenefitRule", "Leg", "LegKind", "Lump", "Members", "PensionTerms", "own_leg"]
