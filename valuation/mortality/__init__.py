"""Mortality: base tables, published laws, adjustments and improvement scales."""

from valuation.mortality.basis import MortalityBasis
from valuation.mortality.bundled import BUNDLED, bundled_table, resolve_table
from valuation.mortality.improvement import (
    AgeImprovement,
    ConstantImprovement,
    ConvergenceScale,
    ImprovementScale,
    NoImprovement,
    TwoDimensionalScale,
    load_improvement_table,
)
from valuation.mortality.laws import DEMO_LAW_FEMALE, DEMO_LAW_MALE, SULT_LAW, Makeham
from valuation.mortality.readers import load_table, load_tables, validate_table
from valuation.mortality.table import MortalityTable

__all__ = [
    "BUNDLED",
    "DEMO_LAW_FEMALE",
    "DEMO_LAW_MALE",
    "SULT_LAW",
    "AgeImprovement",
    "ConstantImprovement",
    "ConvergenceScale",
    "ImprovementScale",
    "Makeham",
    "MortalityBasis",
    "MortalityTable",
    "NoImprovement",
    "TwoDimensionalScale",
    "bundled_table",
    "load_improvement_table",
    "load_table",
    "load_tables",
    "resolve_table",
    "validate_table",
]
