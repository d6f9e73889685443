"""The assumptions basis: a TOML file validated into typed models (:func:`load_basis`)."""

from valuation.basis.loader import load_basis
from valuation.basis.mapping import ColumnMapping
from valuation.basis.model import Basis, BenefitDesign, Conventions, SalaryAssumption, WithdrawalSpec
from valuation.basis.mortality_entries import MortalityEntry
from valuation.basis.rules import (
    CommutationAssumption,
    IncreaseRule,
    PaymentAssumption,
    RateSpec,
    RevaluationRule,
    Sensitivity,
    SpouseAssumption,
    Thresholds,
    TrancheRule,
)

__all__ = [
    "Basis",
    "BenefitDesign",
    "ColumnMapping",
    "CommutationAssumption",
    "Conventions",
    "IncreaseRule",
    "MortalityEntry",
    "PaymentAssumption",
    "RateSpec",
    "RevaluationRule",
    "SalaryAssumption",
    "Sensitivity",
    "SpouseAssumption",
    "Thresholds",
    "TrancheRule",
    "WithdrawalSpec",
    "load_basis",
]
