"""Small typed pieces of the assumptions basis: benefit rules, spouse, payment, commutation, sensitivities.

Each class is a frozen pydantic v2 model with unknown keys forbidden, so a misspelt key in the TOML file is
reported instead of silently ignored. Rates are annual effective decimals (0.05 = 5 % p.a.).
"""

from __future__ import annotations

import calendar
from typing import Any, Literal, get_args

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from valuation.vocabulary import SEXES, SensitivityKind, Sex

#: Every basis model: unknown keys refused, frozen, no NaN or infinity, and no true/false where a number
#: belongs (TOML's booleans are not numbers).
STRICT = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)


def _numeric(annotation: Any) -> bool:
    """True for a number field (float, int, their optional forms, or a Literal of numbers)."""
    if annotation in (float, int):
        return True
    args = get_args(annotation)
    return bool(args) and bool not in args and any(
        a in (float, int) or (isinstance(a, (int, float)) and not isinstance(a, bool)) for a in args)


class BasisModel(BaseModel):
    """Base of every basis model: TOML's ``true``/``false`` is refused where a number or a text belongs
    (pydantic would read ``rate = false`` as a rate of 0)."""

    @model_validator(mode="before")
    @classmethod
    def _no_boolean_for_other_types(cls, data: Any) -> Any:
        """A boolean given for a number is handed on as its TOML text, so that the key's own check refuses it
        (``got true``) at the key's place; pydantic alone would read ``true`` as 1."""
        if not isinstance(data, dict):
            return data
        out = dict(data)
        for name, field in cls.model_fields.items():
            key = field.alias or name
            value = out.get(key)
            if isinstance(value, bool) and _numeric(field.annotation):
                out[key] = str(value).lower()
        return out
        for name, field in cls.model_fields.items():
            key = field.alias or name
            value = data.get(key)
            if isinstance(value, bool) and field.annotation is not bool and bool not in get_args(field.annotation):
                raise ValueError(f"key '{key}': got {str(value).lower()}, which is not a value of this key "
                                 "(a number or a text)")
        return data

IndexKind = Literal["none", "fixed", "inflation"]


class _IndexRule(BasisModel):
    """Shared shape of pension increases and deferred revaluation.

    ``kind = "none"``: no indexation; ``"fixed"``: ``rate`` [per annum]; ``"inflation"``: the basis's price
    inflation, limited below by ``floor`` and above by ``cap`` [per annum] (limited price indexation,
    common practice in UK schemes).
    """

    model_config = STRICT
    kind: IndexKind = "none"
    rate: float = Field(default=0.0, ge=-0.5, le=0.5)
    floor: float = Field(default=0.0, ge=-0.5, le=0.5)
    cap: float | None = Field(default=None, ge=-0.5, le=0.5)

    @model_validator(mode="after")
    def _consistent(self) -> _IndexRule:
        if self.kind != "fixed" and self.rate != 0.0:
            raise ValueError(f"'rate' applies only to kind = \"fixed\" (kind is \"{self.kind}\")")
        if self.kind != "inflation" and (self.floor != 0.0 or self.cap is not None):
            raise ValueError(f"'floor' and 'cap' apply only to kind = \"inflation\" (kind is \"{self.kind}\")")
        if self.cap is not None and self.cap < self.floor:
            raise ValueError(f"cap {self.cap} is below floor {self.floor}")
        return self


class IncreaseRule(_IndexRule):
    """Increases to a pension in payment [per annum]."""


class RevaluationRule(_IndexRule):
    """Revaluation of a deferred pension between leaving and retirement [per annum], compounded over the
    whole deferment (common practice)."""


class TrancheRule(BasisModel):
    """The indexation of one slice (tranche) of pension, e.g. benefits earned before a given date."""

    model_config = STRICT
    increase: IncreaseRule = IncreaseRule()
    revaluation: RevaluationRule = RevaluationRule()


def _no_spouse() -> dict[Sex, float]:
    """Default ``proportion_married``: no member is married [fraction]."""
    return {"M": 0.0, "F": 0.0}


class SpouseAssumption(BasisModel):
    """Spouse's (partner's) pension on the member's death.

    ``proportion_married`` by member sex [fraction]; ``age_difference``: the male partner is older by this
    many years [years]; ``fraction``: spouse's pension / member's pension. The spouse is of the opposite
    sex (common practice). The default is no spouse's pension.

    On a death before retirement the spouse's pension is fixed at the date of death and then receives the
    increases in payment of its tranche. ``pre_retirement_active`` sets it for a member in service:
    ``"accrued_to_death"`` (default), the pension accrued to the death on salary at death;
    ``"prospective_to_nra"``, the pension with service to normal retirement age on salary at death,
    attributed to service straight-line from joining to the death (final-salary designs only). A deferred
    member's (and a leaver's) is the deferred pension revalued to the date of death.
    """

    model_config = STRICT
    proportion_married: dict[Sex, float] = Field(default_factory=_no_spouse)
    age_difference: float = Field(default=3.0, ge=-20.0, le=20.0)
    fraction: float = Field(default=0.0, ge=0.0, le=1.0)
    pre_retirement_active: Literal["accrued_to_death", "prospective_to_nra"] = "accrued_to_death"

    @field_validator("proportion_married")
    @classmethod
    def _both_sexes(cls, v: dict[str, float]) -> dict[str, float]:
        missing = [s for s in SEXES if s not in v]
        if missing:
            raise ValueError(f"give a proportion for both sexes M and F (missing: {', '.join(missing)})")
        bad = {s: p for s, p in v.items() if not 0.0 <= p <= 1.0}
        if bad:
            raise ValueError(f"proportions must lie between 0 and 1, got {bad}")
        return v


class PaymentAssumption(BasisModel):
    """How pensions are paid and increased.

    ``frequency`` payments a year, in ``advance`` or in ``arrears``. ``increase_date``: the scheme's annual
    pension increase date as "MM-DD" (e.g. "04-01" for 1 April); left out, increases fall on the
    anniversaries of the valuation date. ``first_increase``: the first increase after a pension starts
    (a retirement after the valuation date, or a spouse's pension on a death before retirement): ``"full"``
    (default), ``"proportionate"`` (one twelfth of the increase for each month in payment) or
    ``"none_until_full_year"``. Pensions already in payment receive full increases.
    """

    model_config = STRICT
    frequency: Literal[1, 2, 4, 12] = 12
    timing: Literal["advance", "arrears"] = "advance"
    increase_date: str | None = None
    first_increase: Literal["full", "proportionate", "none_until_full_year"] = "full"

    @field_validator("increase_date")
    @classmethod
    def _month_day(cls, v: str | None) -> str | None:
        if v is None:
            return v
        text = v.strip()
        parts = text.split("-")
        ok = len(parts) == 2 and all(p.isdigit() and len(p) == 2 for p in parts)
        month, day = (int(parts[0]), int(parts[1])) if ok else (0, 0)
        if not ok or not 1 <= month <= 12 or not 1 <= day <= calendar.monthrange(2001, month)[1]:
            raise ValueError('give the month and day as "MM-DD", e.g. "04-01" for 1 April '
                             "(29 February is not allowed: it is missing in most years)")
        return text

    @property
    def increase_month_day(self) -> tuple[int, int] | None:
        """The increase date as (month, day), or None for the anniversary of the valuation date."""
        if self.increase_date is None:
            return None
        month, day = self.increase_date.split("-")
        return int(month), int(day)


class CommutationAssumption(BasisModel):
    """Cash taken at retirement: ``proportion`` of pension given up [fraction], ``factor`` cash per 1 p.a.
    of pension given up [currency per currency p.a.]."""

    model_config = STRICT
    proportion: float = Field(default=0.0, ge=0.0, le=1.0)
    factor: float = Field(default=0.0, ge=0.0, le=100.0)

    @model_validator(mode="after")
    def _factor_needed(self) -> CommutationAssumption:
        if self.proportion > 0 and self.factor <= 0:
            raise ValueError("a commutation 'proportion' above 0 needs a positive 'factor'")
        return self


class Sensitivity(BasisModel):
    """One sensitivity (IAS 19 para 145): ``shift`` is absolute for rates (0.005 = +0.5 % p.a.) and in
    years of life expectancy at 65 for ``life_expectancy``."""

    model_config = STRICT
    name: str = Field(min_length=1)
    kind: SensitivityKind
    shift: float

    @model_validator(mode="after")
    def _plausible_shift(self) -> Sensitivity:
        limit = SHIFT_LIMITS[self.kind]
        if not -limit <= self.shift <= limit:
            unit = "years" if self.kind == "life_expectancy" else "(a rate: 0.005 = 0.5 % a year)"
            raise ValueError(f"shift {self.shift:g} for a {self.kind} sensitivity is outside -{limit:g} to {limit:g} "
                             f"{unit}")
        return self


#: Largest shift of each sensitivity kind that still describes a sensitivity, not another basis.
SHIFT_LIMITS: dict[str, float] = {"discount_rate": 0.05, "inflation": 0.05, "salary_growth": 0.05,
                                  "long_term_improvement": 0.05, "life_expectancy": 10.0}


class Thresholds(BasisModel):
    """Plausibility limits for member data (common practice in valuation data audits; the defaults are
    our choice, stated in the README).

    Warnings (the record is still valued, but listed): ``large_pension`` and ``large_salary``
    [currency p.a.], a pension above 0 but below ``tiny_pension`` [currency p.a.], a member older than
    ``old_age`` [years], member and known spouse ages more than ``max_spouse_age_gap`` [years] apart.

    Exclusions (the record is left out and listed): a pension above ``max_pension`` or a salary above
    ``max_salary`` [currency p.a.] (absurd amounts); service_years above the member's age less
    ``min_working_age`` [years]; a known spouse younger than ``min_spouse_age`` [years] at the valuation
    date.
    """

    model_config = STRICT
    large_pension: float = Field(default=100_000.0, gt=0)
    tiny_pension: float = Field(default=100.0, ge=0)
    old_age: float = Field(default=100.0, gt=0)
    large_salary: float = Field(default=500_000.0, gt=0)
    max_pension: float = Field(default=1e9, gt=0)
    max_salary: float = Field(default=1e9, gt=0)
    min_working_age: float = Field(default=15.0, ge=0, le=30)
    min_spouse_age: float = Field(default=16.0, ge=0, le=30)
    max_spouse_age_gap: float = Field(default=30.0, gt=0, le=100)
    #: Largest share of the records read that may be excluded before a run stops (exit 4) unless the user
    #: accepts it (``--accept-exclusions``); 0.05 = 5 % (common practice: a data set losing more than a few
    #: per cent of its records needs the administrator's answer before it is valued).
    max_excluded_share: float = Field(default=0.05, ge=0, le=1)

    @model_validator(mode="after")
    def _limits_above_warnings(self) -> Thresholds:
        for warn, limit in (("large_pension", "max_pension"), ("large_salary", "max_salary")):
            if getattr(self, limit) <= getattr(self, warn):
                raise ValueError(f"'{limit}' ({getattr(self, limit):,.2f}) must be above '{warn}' "
                                 f"({getattr(self, warn):,.2f})")
        if self.tiny_pension >= self.large_pension:
            raise ValueError(f"'tiny_pension' ({self.tiny_pension:,.2f}) must be below 'large_pension' "
                             f"({self.large_pension:,.2f})")
        return self


class RateSpec(BasisModel):
    """A flat ``rate`` [per annum, effective] or a spot ``curve`` file (CSV: term, rate), exactly one.

    ``extrapolation`` applies beyond the curve's last term.
    """

    model_config = STRICT
    rate: float | None = Field(default=None, gt=-0.5, lt=0.5)
    curve: str | None = None
    extrapolation: Literal["flat_spot", "flat_forward"] = "flat_spot"

    @model_validator(mode="after")
    def _exactly_one(self) -> RateSpec:
        if (self.rate is None) == (self.curve is None):
            raise ValueError("give exactly one of 'rate' (a flat rate) or 'curve' (a CSV file of term, rate)")
        return self
