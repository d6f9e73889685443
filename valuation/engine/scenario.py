"""Scenarios: the base assumptions and the exact re-valuations behind each sensitivity.

A scenario changes the basis in one place and the whole scheme is valued again with it (no
approximation by duration or by an age rating).

References
----------
IAS 19 *Employee Benefits*, para 145 (sensitivity of the obligation to each significant assumption).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.optimize import brentq

from valuation.basis.model import Basis
from valuation.discounting import RateCurve
from valuation.expectancy import complete_expectancy
from valuation.mortality.basis import MortalityBasis
from valuation.mortality.improvement import ImprovementScale
from valuation.vocabulary import SEXES, Group, Sex


@dataclass(frozen=True)
class Scenario:
    """A set of changes to the basis; the default changes nothing."""

    name: str = "base"
    kind: str = "base"
    shift: float = 0.0
    discount_shift: float = 0.0
    inflation_shift: float = 0.0
    salary_shift: float = 0.0
    long_term_improvement_shift: float = 0.0
    q_multiplier: tuple[tuple[str, float], ...] = field(default_factory=tuple)
    # used by the accrued-benefit measure: salary held at today's level
    no_salary_growth: bool = False

    def multiplier(self, sex: str) -> float:
        return dict(self.q_multiplier).get(sex, 1.0)

    @property
    def changes_mortality(self) -> bool:
        """Whether the scenario changes any mortality rate (then every survival probability is worked out
        again; otherwise the base's survival holds)."""
        return bool(self.q_multiplier) or bool(self.long_term_improvement_shift)


#: The base scenario: the basis as it stands.
BASE = Scenario()


def _long_term_rate(scale: ImprovementScale) -> float:
    for attr in ("long_term_rate", "rate"):
        if hasattr(scale, attr):
            return float(getattr(scale, attr))
    return 0.0


def mortality_for(
    basis: Basis, group: Group, sex: Sex, scenario: Scenario, base_multiplier: float = 1.0,
) -> MortalityBasis:
    """The basis's mortality for (group, sex) with the scenario's changes applied."""
    mb: MortalityBasis = basis.mortality(group, sex)
    changes: dict[str, Any] = {}
    mult = scenario.multiplier(sex) * base_multiplier
    if mult != 1.0:
        changes["q_multiplier"] = mb.q_multiplier * mult
    if scenario.long_term_improvement_shift:
        scale = mb.improvement
        changes["improvement"] = scale.with_long_term_rate(_long_term_rate(scale) + scenario.long_term_improvement_shift)
    return dataclasses.replace(mb, **changes) if changes else mb


def curves(basis: Basis, scenario: Scenario) -> tuple[RateCurve, RateCurve, float]:
    """Discount curve, inflation curve and salary growth [per annum] under the scenario."""
    disc = basis.discount_curve()
    infl = basis.inflation_curve()
    if scenario.discount_shift:
        disc = disc.shifted(scenario.discount_shift)
    if scenario.inflation_shift:
        infl = infl.shifted(scenario.inflation_shift)
    growth = 0.0 if scenario.no_salary_growth else basis.salary_growth + scenario.salary_shift
    return disc, infl, growth


def cohort_expectancy_at(mb: MortalityBasis, valuation_year: int, age_now: float, at_age: float, fractional: str) -> float:
    """Complete cohort life expectancy [years] at ``at_age`` for a life aged ``age_now`` at the valuation year.

    References
    ----------
    Dickson, Hardy & Waters (2013), section 2.6 (complete expectation of life), with cohort rates as in
    the SOA improvement scale reports (generational projection).
    """
    cohort = valuation_year - int(np.floor(age_now))
    q_rows = np.asarray(mb.cohort_q(np.array([cohort]), max_age=120), dtype=float)
    return float(complete_expectancy(q_rows, np.array([0]), np.array([float(at_age)]), fractional)[0])  # type: ignore[arg-type]


def period_expectancy_at(mb: MortalityBasis, year: int, at_age: float, fractional: str) -> float:
    """Complete period life expectancy [years] at ``at_age`` on one calendar year's rates.

    References
    ----------
    Dickson, Hardy & Waters (2013), section 2.6; period versus cohort: one calendar year's rates against the cohort's own.
    """
    q_rows = np.asarray(mb.period_q(year, max_age=120), dtype=float)[None, :]
    return float(complete_expectancy(q_rows, np.array([0]), np.array([float(at_age)]), fractional)[0])  # type: ignore[arg-type]


def life_expectancy_scenario(basis: Basis, valuation_year: int, years: float, name: str, fractional: str) -> Scenario:
    """The scenario that adds ``years`` to cohort life expectancy at 65 for a pensioner aged 65 now.

    A multiplier on q is solved for each sex (scipy's brentq) so that the cohort expectancy at 65 rises by
    exactly ``years``; every mortality table of that sex is then scaled by it. IAS 19 para 145 asks for the
    effect of a reasonably possible change; +1 year at 65 is the usual presentation (common practice).
    """
    mults = []
    for sex in SEXES:
        mb = basis.mortality("pensioner", sex)
        target = cohort_expectancy_at(mb, valuation_year, 65.0, 65.0, fractional) + years

        def gap(k: float, mb: MortalityBasis = mb, target: float = target) -> float:
            scaled = dataclasses.replace(mb, q_multiplier=mb.q_multiplier * k)
            return cohort_expectancy_at(scaled, valuation_year, 65.0, 65.0, fractional) - target

        mults.append((sex, float(brentq(gap, 0.05, 3.0, xtol=1e-10))))
    return Scenario(name=name, kind="life_expectancy", shift=years, q_multiplier=tuple(mults))


def scenarios_from_basis(basis: Basis, valuation_year: int) -> list[Scenario]:
    """One scenario for each sensitivity the basis names."""
    out: list[Scenario] = []
    for s in basis.sensitivities:
        kind, shift = s.kind, float(s.shift)
        if kind == "discount_rate":
            out.append(Scenario(name=s.name, kind=kind, shift=shift, discount_shift=shift))
        elif kind == "inflation":
            out.append(Scenario(name=s.name, kind=kind, shift=shift, inflation_shift=shift))
        elif kind == "salary_growth":
            out.append(Scenario(name=s.name, kind=kind, shift=shift, salary_shift=shift))
        elif kind == "long_term_improvement":
            out.append(Scenario(name=s.name, kind=kind, shift=shift, long_term_improvement_shift=shift))
        elif kind == "life_expectancy":
            out.append(life_expectancy_scenario(basis, valuation_year, shift, s.name, basis.fractional_age))
        else:  # pragma: no cover - the basis model only admits the kinds above
            raise ValueError(f"unknown sensitivity kind {kind!r}")
    return out
