"""Analysis of change of the liability between two valuations: the opening liability carried to the closing
date as expected (service cost, interest, benefits paid), then each change a full valuation of its own in a
stated order: the experience (the current members on the previous basis at the current date), the
demographic assumptions, the financial assumptions, and any other change of the basis (benefit rules,
payment conventions). The closing figure is the current valuation exactly; the items add up to closing -
opening by construction, and the order of the assumption steps changes the split, never the total.

References
----------
IAS 19 *Employee Benefits* paras 140-141 (reconciliation of the opening and closing obligation: service
cost, interest, remeasurements from demographic and financial assumptions and from experience, benefits
paid) and 123 (interest at the opening discount rate); Dickson, Hardy & Waters, AMLCR, ch. 7 (the
expected closing value by the policy-value recursion). A stepwise analysis is order-dependent (common
practice: experience first on the old basis, then demographic, then financial assumptions).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final, Literal, get_args

from valuation.basis.model import Basis

Step = Literal["demographic", "financial", "other"]
#: The assumption steps, in their default order.
STEPS: Final[tuple[Step, ...]] = get_args(Step)

#: Basis fields each assumption step takes from the current basis. ``other``: every field the other two do
#: not name, but the date, the name, the file's own place and the mapping of the data.
DEMOGRAPHIC_FIELDS: Final[tuple[str, ...]] = ("mortality_entries", "withdrawal_spec", "spouse", "commutation")
FINANCIAL_FIELDS: Final[tuple[str, ...]] = ("discount", "inflation", "salary")
NOT_A_CHANGE: Final[tuple[str, ...]] = ("source_path", "name", "valuation_date", "mapping", "thresholds",
                                        "sensitivities", "currency")


def fields_of(step: Step) -> tuple[str, ...]:
    """The basis fields a step moves from the previous basis to the current one."""
    if step == "demographic":
        return DEMOGRAPHIC_FIELDS
    if step == "financial":
        return FINANCIAL_FIELDS
    named = set(DEMOGRAPHIC_FIELDS) | set(FINANCIAL_FIELDS) | set(NOT_A_CHANGE)
    return tuple(f for f in Basis.model_fields if f not in named)


def with_fields(basis: Basis, source: Basis, fields: tuple[str, ...]) -> Basis:
    """``basis`` with ``fields`` taken from ``source`` (a copy; neither is changed)."""
    return basis.model_copy(update={f: getattr(source, f) for f in fields})


@dataclass(frozen=True)
class ChangeLine:
    """One line of the analysis: what moved the liability, by how much [currency], and the valuation behind
    it (the basis and the data valued; empty for the lines worked out from the opening valuation)."""

    key: str
    label: str
    amount: float
    valuation: str = ""


@dataclass(frozen=True)
class AnalysisOfChange:
    """The lines from the opening to the closing liability, in order; ``lines[-1]`` is the closing liability
    and every other amount adds up to it from ``lines[0]``."""

    lines: tuple[ChangeLine, ...]
    order: tuple[Step, ...]
    notes: tuple[str, ...] = ()
    #: the experience line split by what happened to the members (each group's value now on the previous
    #: basis less its expected value, and the benefits paid against expected); they add up to it
    experience_split: tuple[ChangeLine, ...] = ()

    def amount(self, key: str) -> float:
        return next(line.amount for line in self.lines if line.key == key)

    def disclosure(self) -> list[tuple[str, float]]:
        """The lines as a disclosure note reconciles the defined benefit obligation (IAS 19 paras 140-141):
        opening, current service cost, interest expense, remeasurements (gains negative, losses positive:
        from demographic assumptions, from financial assumptions, experience adjustments), other changes of
        the basis, benefits paid, closing."""
        return [
            ("Defined benefit obligation at the start of the period", self.amount("opening")),
            ("Current service cost", self.amount("service_cost")),
            ("Interest expense", self.amount("interest")),
            ("Remeasurement: actuarial (gains)/losses from changes in demographic assumptions",
             self.amount("demographic")),
            ("Remeasurement: actuarial (gains)/losses from changes in financial assumptions", self.amount("financial")),
            ("Remeasurement: experience adjustments", self.amount("experience")),
            ("Other changes of the basis (benefit rules, conventions)", self.amount("other")),
            ("Benefits paid", self.amount("benefits_paid")),
            ("Defined benefit obligation at the end of the period", self.amount("closing")),
        ]

    def check(self) -> float:
        """Closing - (opening + every item): 0 to rounding."""
        return self.lines[-1].amount - sum(line.amount for line in self.lines[:-1] if line.key != "expected_closing")


__all__ = ["AnalysisOfChange", "ChangeLine", "DEMOGRAPHIC_FIELDS", "FINANCIAL_FIELDS", "STEPS", "Step", "fields_of",
           "with_fields"]
