"""The assumptions basis: one TOML file validated into typed, frozen pydantic models.

The TOML layout (every section optional unless marked):

- ``name``, ``valuation_date`` (required); ``currency``: the ISO 4217 code of the money amounts (e.g.
  ``"GBP"``), shown beside every amount in the reports; left out, amounts are shown without a currency;
- ``[discount]`` and ``[inflation]`` (required): ``rate`` or ``curve`` (+ ``extrapolation``);
- ``[salary]`` ``growth``; ``[benefits]`` ``design``, ``accrual_rate``, ``retirement_age``,
  ``death_in_service_lump_sum``, ``default_tranche``;
- ``[tranches.<name>]`` ``increase`` / ``revaluation`` rules (default: one tranche ``main``, no indexation);
- ``[mortality.<group>.<sex>]`` (required: every member group and sex must resolve, see
  :mod:`valuation.basis.mortality_entries` for the fallback rule);
- ``[conventions]``, ``[withdrawal]``, ``[spouse]``, ``[payment]``, ``[commutation]``,
  ``[[sensitivities]]``, ``[mapping]``, ``[thresholds]``.

File paths inside the basis are relative to the TOML file.
"""

from __future__ import annotations

import re
from datetime import date
from fractions import Fraction
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from pydantic import ConfigDict, Field, PrivateAttr, field_validator, model_validator

from valuation.basis.curves import build_curve
from valuation.basis.mapping import ColumnMapping
from valuation.basis.mortality_entries import (
    MortalityEntries,
    build_improvement,
    entry_key,
)
from valuation.basis.rules import (
    STRICT,
    BasisModel,
    CommutationAssumption,
    PaymentAssumption,
    RateSpec,
    Sensitivity,
    SpouseAssumption,
    Thresholds,
    TrancheRule,
)
from valuation.errors import BasisError, ValuationError, describe
from valuation.vocabulary import GROUPS, OUR_COLUMNS, SEXES, Group, Sex, known_columns, tranche_column

if TYPE_CHECKING:
    from valuation.discounting import RateCurve
    from valuation.mortality.basis import MortalityBasis

_TRANCHE_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
_CURRENCY = re.compile(r"[A-Z]{3}")


class SalaryAssumption(BasisModel):
    """Salary growth [per annum, effective], used to project actives' salaries (projected unit credit)."""

    model_config = STRICT
    growth: float = Field(default=0.0, gt=-0.5, lt=0.5)


class BenefitDesign(BasisModel):
    """The scheme's benefit design.

    ``accrual_rate`` is the pension earned per year of service as a fraction of salary, written as a number
    (0.0166667) or a fraction string ("1/60"); ``retirement_age`` the normal retirement age [years];
    ``death_in_service_lump_sum`` a multiple of salary (0 = none); ``default_tranche`` the tranche a pension
    without a split belongs to (may be left out when only one tranche is declared).
    """

    model_config = STRICT
    design: Literal["final_salary", "career_average"] = "final_salary"
    accrual_rate: float = Field(default=1 / 60, gt=0.0, le=1.0)
    retirement_age: float = Field(default=65.0, ge=40.0, le=80.0)
    death_in_service_lump_sum: float = Field(default=0.0, ge=0.0, le=20.0)
    default_tranche: str | None = None

    @field_validator("accrual_rate", mode="before")
    @classmethod
    def _fraction(cls, v: Any) -> Any:
        if isinstance(v, str):
            try:
                return float(Fraction(v.replace(" ", "")))
            except (ValueError, ZeroDivisionError):
                raise ValueError("not a number or a fraction like \"1/60\"") from None
        return v


class Conventions(BasisModel):
    """Calculation conventions: survival between integer ages and how ages are counted."""

    model_config = STRICT
    fractional_age: Literal["udd", "constant_force"] = "udd"
    age_convention: Literal["exact", "last_birthday", "nearest_birthday"] = "exact"


class WithdrawalSpec(BasisModel):
    """Withdrawal (leaving service before retirement) as steps: ``rates = [[from_age, rate], ...]`` with
    ages [years] increasing and rates [per annum] in [0, 1]."""

    model_config = STRICT
    rates: list[tuple[float, float]] = Field(min_length=1)

    @field_validator("rates")
    @classmethod
    def _steps(cls, v: list[tuple[float, float]]) -> list[tuple[float, float]]:
        ages = [a for a, _ in v]
        if any(b <= a for a, b in zip(ages, ages[1:], strict=False)):
            raise ValueError(f"from-ages must increase, got {ages}")
        bad = [r for _, r in v if not 0.0 <= r <= 1.0]
        if bad:
            raise ValueError(f"withdrawal rates must lie in [0, 1], got {bad}")
        return v


class Basis(BasisModel):
    """A validated assumptions basis (see the module docstring for the TOML layout).

    Build it with :func:`valuation.basis.load_basis`. Curves and mortality bases are built once and cached
    (keyed on the entries they come from, so ``model_copy(update=...)`` variants stay correct).
    """

    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True, allow_inf_nan=False)

    source_path: Path
    name: str = Field(min_length=1)
    valuation_date: date
    #: ISO 4217 currency code of every amount (three capital letters); None: amounts carry no currency.
    currency: str | None = None
    discount: RateSpec
    inflation: RateSpec
    salary: SalaryAssumption = SalaryAssumption()
    benefits: BenefitDesign = BenefitDesign()
    tranches: dict[str, TrancheRule] = Field(default_factory=lambda: {"main": TrancheRule()})
    mortality_entries: MortalityEntries = Field(alias="mortality")
    conventions: Conventions = Conventions()
    withdrawal_spec: WithdrawalSpec | None = Field(default=None, alias="withdrawal")
    spouse: SpouseAssumption = SpouseAssumption()
    payment: PaymentAssumption = PaymentAssumption()
    commutation: CommutationAssumption = CommutationAssumption()
    sensitivities: list[Sensitivity] = Field(default_factory=list)
    mapping: ColumnMapping = ColumnMapping()
    thresholds: Thresholds = Thresholds()

    _cache: dict[Any, Any] = PrivateAttr(default_factory=dict)

    # ---- cross-section checks ------------------------------------------------------------------------

    @field_validator("currency")
    @classmethod
    def _currency_code(cls, v: str | None) -> str | None:
        if v is not None and not _CURRENCY.fullmatch(v):
            raise ValueError('give the ISO 4217 code of the currency, three capital letters such as "GBP", '
                             '"EUR" or "USD"')
        return v

    @field_validator("tranches")
    @classmethod
    def _tranche_names(cls, v: dict[str, TrancheRule]) -> dict[str, TrancheRule]:
        if not v:
            raise ValueError("declare at least one tranche, or leave [tranches] out for a single one")
        for name in v:
            if not _TRANCHE_NAME.match(name):
                raise ValueError(
                    f"tranche name '{name}' must be lower-case letters, digits and '_' starting with a letter"
                )
            if tranche_column(name) in OUR_COLUMNS:
                raise ValueError(f"tranche name '{name}' clashes with column '{tranche_column(name)}'")
        return v

    @model_validator(mode="after")
    def _cross_checks(self) -> Basis:
        names = list(self.tranches)
        chosen = self.benefits.default_tranche
        if chosen is None and len(names) > 1:
            raise ValueError(
                f"benefits.default_tranche is required when several tranches are declared "
                f"(allowed: {', '.join(names)})"
            )
        if chosen is not None and chosen not in self.tranches:
            raise ValueError(f"benefits.default_tranche \"{chosen}\" is not a declared tranche "
                             f"(allowed: {', '.join(names)})")
        if self.spouse.pre_retirement_active == "prospective_to_nra" and self.benefits.design == "career_average":
            raise ValueError(
                'spouse.pre_retirement_active = "prospective_to_nra" counts service to normal retirement age, '
                'which a career-average design (benefits.design) does not use: set it to "accrued_to_death"'
            )
        for group in GROUPS:
            for sex in SEXES:
                if entry_key(self.mortality_entries, group, sex) is None:
                    raise ValueError(
                        f"no mortality for group '{group}' sex {sex}: add [mortality.default.{sex}] "
                        f"or [mortality.{group}.{sex}]"
                    )
        ours = set(known_columns(names))
        bad = sorted({v for v in self.mapping.columns.values() if v not in ours})
        if bad:
            raise ValueError(
                f"mapping.columns maps to unknown column(s) {', '.join(bad)}; allowed: {', '.join(sorted(ours))}"
            )
        seen = [s.name for s in self.sensitivities]
        dup = sorted({s for s in seen if seen.count(s) > 1})
        if dup:
            raise ValueError(f"sensitivity names must be unique; repeated: {', '.join(dup)}")
        return self

    # ---- the flat Python surface the engine uses -----------------------------------------------------

    @property
    def default_tranche(self) -> str:
        """Tranche that a plain ``pension`` without a split belongs to."""
        return self.benefits.default_tranche or next(iter(self.tranches))

    @property
    def retirement_age(self) -> float:
        """Normal retirement age [years]."""
        return self.benefits.retirement_age

    @property
    def accrual_rate(self) -> float:
        """Pension per year of service as a fraction of salary [per year of service]."""
        return self.benefits.accrual_rate

    @property
    def benefit_design(self) -> Literal["final_salary", "career_average"]:
        """Final salary or career average revalued earnings."""
        return self.benefits.design

    @property
    def death_in_service_lump_sum(self) -> float:
        """Lump sum on death in service as a multiple of salary (0 = none)."""
        return self.benefits.death_in_service_lump_sum

    @property
    def salary_growth(self) -> float:
        """Salary growth [per annum, effective]."""
        return self.salary.growth

    @property
    def fractional_age(self) -> Literal["udd", "constant_force"]:
        """Survival between integer ages: uniform distribution of deaths or constant force."""
        return self.conventions.fractional_age

    @property
    def age_convention(self) -> Literal["exact", "last_birthday", "nearest_birthday"]:
        """How ages at the valuation date are counted."""
        return self.conventions.age_convention

    @property
    def withdrawal(self) -> list[tuple[float, float]] | None:
        """Withdrawal steps ``(from_age [years], rate [per annum])``; ``None`` = no withdrawals."""
        return None if self.withdrawal_spec is None else list(self.withdrawal_spec.rates)

    @property
    def base_dir(self) -> Path:
        """Folder that relative paths in the basis are resolved against."""
        return self.source_path.parent

    def discount_curve(self) -> RateCurve:
        """The discount :class:`~valuation.discounting.RateCurve` (flat rate or spot curve file)."""
        key = ("discount", self.discount, self.base_dir)
        if key not in self._cache:
            self._cache[key] = build_curve(self.discount, self.base_dir, "discount")
        curve: RateCurve = self._cache[key]
        return curve

    def inflation_curve(self) -> RateCurve:
        """The price-inflation :class:`~valuation.discounting.RateCurve` (flat rate or curve file)."""
        key = ("inflation", self.inflation, self.base_dir)
        if key not in self._cache:
            self._cache[key] = build_curve(self.inflation, self.base_dir, "inflation")
        curve: RateCurve = self._cache[key]
        return curve

    def mortality_key(self, group: Group, sex: Sex) -> str:
        """Dotted key of the entry a member group and sex use, e.g. ``"mortality.default.M"``.

        Fallback rule: the group's own entry, else (spouse only) the dependant entry, else ``default``.
        """
        if group not in GROUPS:
            raise BasisError(f"unknown mortality group '{group}' (allowed: {', '.join(GROUPS)})",
                             file=self.source_path)
        if sex not in SEXES:
            raise BasisError(f"unknown sex '{sex}' (allowed: M, F)", file=self.source_path)
        found = entry_key(self.mortality_entries, group, sex)
        assert found is not None  # guaranteed by validation
        return f"mortality.{found}.{sex}"

    def mortality(self, group: Group, sex: Sex) -> MortalityBasis:
        """The :class:`~valuation.mortality.basis.MortalityBasis` for a member group and sex (cached).

        A group without its own entry falls back to ``default`` for that sex; ``spouse`` first falls back
        to ``dependant``. Groups sharing an entry share one object.
        """
        key = self.mortality_key(group, sex)
        _, g, s = key.split(".")
        entry = self.mortality_entries[g][s]  # type: ignore[index]
        # keyed on the entry object too, so a model_copy with other entries (which shares this cache
        # dict) never sees a stale table
        cache_key = (key, id(entry), self.base_dir)
        if cache_key not in self._cache:
            from valuation.mortality.basis import MortalityBasis
            from valuation.mortality.bundled import resolve_table

            try:
                closing = {"closing": "set_last_to_one"} if entry.closing == "at_last_age" else {}
                table = resolve_table(entry.table, self.base_dir, entry.table_name, **closing)
                improvement = build_improvement(entry.improvement, self.base_dir)
                mb = MortalityBasis(
                    table,
                    percentage=entry.percentage,
                    age_rating=entry.age_rating,
                    improvement=improvement,  # type: ignore[arg-type]
                    base_year=entry.base_year,
                )
            except (ValuationError, FileNotFoundError, KeyError, ValueError) as exc:
                fix = getattr(exc, "fix", None) or (
                    "give a bundled table name (SULT, DEMO_M, DEMO_F) or a table file path relative to the "
                    "basis file, and a valid improvement")
                said = str(exc.args[0]) if isinstance(exc, KeyError) and exc.args else describe(exc)
                raise BasisError(f"key '{key}': {said}", file=self.source_path, fix=fix) from exc
            self._cache[cache_key] = (entry, mb)  # holding the entry keeps its id unique
        found_basis: MortalityBasis = self._cache[cache_key][1]
        return found_basis

    def closing_age(self, group: Group, sex: Sex) -> int:
        """Oldest integer age [years] the group's table can value after its age rating.

        A life whose age (under the basis's age convention, whole years) exceeds it is beyond the table.
        At this age q = 1 (the table is closed); a negative rating does not extend the table
        (:class:`~valuation.mortality.basis.MortalityBasis` rule).
        """
        entry_k = self.mortality_key(group, sex)
        _, g, s = entry_k.split(".")
        rating = self.mortality_entries[g][s].age_rating  # type: ignore[index]
        return int(self.mortality(group, sex).table.max_age) - max(rating, 0)

    def as_dict(self) -> dict[str, Any]:
        """The basis as loaded, JSON-serialisable (TOML key names), for a run's manifest."""
        return self.model_dump(mode="json", by_alias=True)
