"""Benefit rules, one module a kind of benefit; the engine values whatever ``RULES`` lists.

To add a benefit: write a module with a :class:`~valuation.engine.benefits.base.BenefitRule` (the members
it applies to, their pension's terms, its legs and lump sums, each carrying a benefit name from
``valuation.vocabulary.BENEFITS``), add it to ``RULES``, and test it against a published closed form.
"""

from __future__ import annotations

import numpy as np
import polars as pl
from numpy.typing import NDArray

from valuation.engine.benefits.active import ActivePension
from valuation.engine.benefits.base import BenefitContext, BenefitRule, Leg, Lump, Members, PensionTerms
from valuation.engine.benefits.deferred import DeferredPension
from valuation.engine.benefits.dependant import DependantPension
from valuation.engine.benefits.pensioner import PensionInPayment
from valuation.vocabulary import BENEFITS, STATUSES, Benefit

#: Every rule the engine applies, in the order of the statuses they value.
RULES: tuple[BenefitRule, ...] = tuple(sorted(
    (PensionInPayment(), DependantPension(), DeferredPension(), ActivePension()),
    key=lambda r: STATUSES.index(r.status)))

#: The rules whose benefits depend on salary.
SALARY_RULES: tuple[BenefitRule, ...] = tuple(r for r in RULES if r.uses_salary)

#: Benefits paid as pensions (legs, split by tranche) and as lump sums, in reporting order.
PENSION_BENEFITS: tuple[Benefit, ...] = tuple(b for b in BENEFITS if any(b in r.pensions for r in RULES))
LUMP_BENEFITS: tuple[Benefit, ...] = tuple(b for b in BENEFITS if any(b in r.lump_sums for r in RULES))


def salary_dependent(status: pl.Series) -> NDArray[np.bool_]:
    """Mask of the records whose benefits depend on salary (the accrued-benefit measure, the service cost
    and the salary-growth sensitivity re-value only these)."""
    mask = np.zeros(len(status), dtype=bool)
    for rule in SALARY_RULES:
        mask |= rule.applies_to(status)
    return mask


def liability_column(benefit: Benefit) -> str:
    """The per-member results column holding a benefit's liability (``member_liability``, ...)."""
    return f"{benefit.removesuffix('_pension')}_liability"


__all__ = [
    "LUMP_BENEFITS", "PENSION_BENEFITS", "RULES", "SALARY_RULES", "BenefitContext", "BenefitRule", "Leg", "Lump", "Members",
    "PensionTerms", "liability_column", "salary_dependent",
]
