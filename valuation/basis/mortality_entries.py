"""Mortality entries of the basis: a table, its adjustments and an improvement scale, per group and sex.

An entry is written in the TOML file as ``[mortality.<group>.<sex>]`` with ``<group>`` one of
``default``, ``pensioner``, ``deferred``, ``active``, ``dependant``, ``spouse`` and ``<sex>`` ``M`` or ``F``.

Fallback rule (stated here and in :meth:`valuation.basis.Basis.mortality`): a member group without its own
entry for a sex uses ``default`` for that sex; ``spouse`` first falls back to ``dependant`` (a surviving
spouse becomes a dependant), then to ``default``.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Literal

import numpy as np
from pydantic import Field, model_validator

from valuation.basis.rules import STRICT, BasisModel
from valuation.vocabulary import EntryGroup, Sex

#: Fallback chain of each member group (first entry found wins).
FALLBACK: dict[str, tuple[str, ...]] = {
    "pensioner": ("pensioner", "default"),
    "deferred": ("deferred", "default"),
    "active": ("active", "default"),
    "dependant": ("dependant", "default"),
    "spouse": ("spouse", "dependant", "default"),
}


class NoImprovementSpec(BasisModel):
    """No improvement after the table's base year (a static table)."""

    model_config = STRICT
    kind: Literal["none"]


class ConstantImprovementSpec(BasisModel):
    """The same improvement ``rate`` [per annum] at every age and year."""

    model_config = STRICT
    kind: Literal["constant"]
    rate: float = Field(ge=-0.1, le=0.1)


def _knots_increase(ages: list[int], what: str) -> None:
    if any(b <= a for a, b in zip(ages, ages[1:], strict=False)):
        raise ValueError(f"'{what}' must increase strictly, got {ages}")


def interpolate_knots(ages: list[int], rates: list[float]) -> tuple[list[int], list[float]]:
    """Rates at every integer age from the first to the last knot, linear between knots (stated rule).

    Outside the knots the scale takes the nearest age's rate (the improvement module's rule).
    """
    full = np.arange(ages[0], ages[-1] + 1)
    return full.tolist(), np.interp(full, ages, rates).tolist()


class ByAgeImprovementSpec(BasisModel):
    """Improvement rates [per annum] at knot ``ages``, linear between knots, the same in every year."""

    model_config = STRICT
    kind: Literal["by_age"]
    ages: list[int] = Field(min_length=1)
    rates: list[float] = Field(min_length=1)

    @model_validator(mode="after")
    def _same_length(self) -> ByAgeImprovementSpec:
        if len(self.ages) != len(self.rates):
            raise ValueError(f"'ages' has {len(self.ages)} values but 'rates' has {len(self.rates)}")
        _knots_increase(self.ages, "ages")
        return self


class TableImprovementSpec(BasisModel):
    """Improvement rates in a file, relative to the TOML file.

    A CSV / XLSX file holds a two-dimensional table (ages in rows, calendar years as column headers). An
    XTbML file (as downloaded from a table repository) holds rates by age and calendar year, used like
    the CSV form with the same ``after_last_year`` rules, or rates by age alone, used like ``by_age``;
    ``table_name`` picks a table in an XTbML file with several.
    """

    model_config = STRICT
    kind: Literal["table"]
    file: str
    table_name: str | None = None
    after_last_year: Literal["hold_last", "long_term", "zero"] = "hold_last"
    long_term_rate: float = Field(default=0.0, ge=-0.1, le=0.1)


class ConvergenceImprovementSpec(BasisModel):
    """Initial improvement rates by age moving to a ``long_term_rate`` over ``convergence_years``.

    ``initial_ages`` are knot ages: initial rates are linear between them. ``shape``: ``"linear"`` or
    ``"smooth"`` path from initial to long-term rates.
    """

    model_config = STRICT
    kind: Literal["convergence"]
    initial_ages: list[int] = Field(min_length=1)
    initial_rates: list[float] = Field(min_length=1)
    long_term_rate: float = Field(ge=-0.1, le=0.1)
    start_year: int = Field(ge=1800, le=2300)
    convergence_years: int = Field(ge=1, le=100)
    shape: Literal["linear", "smooth"] = "linear"

    @model_validator(mode="after")
    def _same_length(self) -> ConvergenceImprovementSpec:
        if len(self.initial_ages) != len(self.initial_rates):
            raise ValueError(
                f"'initial_ages' has {len(self.initial_ages)} values but 'initial_rates' has "
                f"{len(self.initial_rates)}"
            )
        _knots_increase(self.initial_ages, "initial_ages")
        return self


ImprovementSpec = Annotated[
    NoImprovementSpec
    | ConstantImprovementSpec
    | ByAgeImprovementSpec
    | TableImprovementSpec
    | ConvergenceImprovementSpec,
    Field(discriminator="kind"),
]


class MortalityEntry(BasisModel):
    """One mortality assumption: ``percentage`` x table rates at age + ``age_rating``, improved.

    ``table`` is a bundled name (``SULT``, ``DEMO_M``, ``DEMO_F``) or a file path relative to the TOML file
    (CSV, XLSX or XTbML as downloaded); ``table_name`` picks a column / table inside a file. ``percentage``
    is a multiplier (0.95 = 95 % of the table's q) and ``age_rating`` whole years added to age (+1 = rated
    one year older). ``base_year`` overrides the table's own base year for improvement. ``closing`` says
whether a table that stops short of q = 1 is refused (``"require"``, the default) or closed at its last age.

    Period tables (an XTbML table by age and calendar year): without ``base_year`` each calendar year uses
    its own rates, years before the table its first year's rates, and years after the table its last
    year's rates carried forward by ``improvement`` (with no improvement they stay at the last year's
    rates); with ``base_year`` (a year of the table) that year's rates apply as a static table, improved
    from that year. See :class:`valuation.mortality.basis.MortalityBasis`.
    """

    model_config = STRICT
    table: str = Field(min_length=1)
    table_name: str | None = None
    percentage: float = Field(default=1.0, gt=0.0, le=5.0)
    age_rating: int = Field(default=0, ge=-20, le=20)
    improvement: ImprovementSpec = NoImprovementSpec(kind="none")
    base_year: int | None = Field(default=None, ge=1800, le=2300)
    #: ``"require"``: the table must end with q = 1 at its last age (a closed table). ``"at_last_age"``: many
    #: downloaded tables stop before anyone is certain to have died; the table is then closed at its last
    #: age (q set to 1 there, everyone alive at that age dies within the year). Stated in the run's basis.
    closing: Literal["require", "at_last_age"] = "require"


MortalityEntries = dict[EntryGroup, dict[Sex, MortalityEntry]]


def entry_key(entries: MortalityEntries, group: str, sex: str) -> str | None:
    """The ``<group>`` whose entry a member group and sex use under the fallback rule, or ``None``."""
    for g in FALLBACK[group]:
        if sex in entries.get(g, {}):  # type: ignore[call-overload]
            return g
    return None


def build_improvement(spec: ImprovementSpec, base_dir: Path) -> object:
    """The improvement scale object for an entry (see :mod:`valuation.mortality.improvement`)."""
    from valuation.mortality import improvement as imp

    if isinstance(spec, NoImprovementSpec):
        return imp.NoImprovement()
    if isinstance(spec, ConstantImprovementSpec):
        return imp.ConstantImprovement(spec.rate)
    if isinstance(spec, ByAgeImprovementSpec):
        return imp.AgeImprovement(*interpolate_knots(spec.ages, spec.rates))
    if isinstance(spec, TableImprovementSpec):
        return imp.load_improvement_table(
            base_dir / spec.file, after_last_year=spec.after_last_year, long_term_rate=spec.long_term_rate,
            name=spec.table_name,
            rules_given=bool({"after_last_year", "long_term_rate"} & spec.model_fields_set),
        )
    ages, rates = interpolate_knots(spec.initial_ages, spec.initial_rates)
    return imp.ConvergenceScale(
        ages,
        rates,
        spec.long_term_rate,
        spec.start_year,
        spec.convergence_years,
        shape=spec.shape,
    )
