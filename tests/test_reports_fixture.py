"""Valuation results for the report tests: a real run of the demo scheme, and a small hand-made one.

``real_run`` values the demo's deliberately broken member file (members_dirty.csv, 40 records, one with
member id ``=1+1`` and a status of ``<script>alert(1)</script>``) on the demo basis, runs the demo
experience analysis, and adds the remaining probes to the member ids and the exceptions. ``make_result``
holds invented figures that need only be internally consistent (the reports must show what a result
holds, whatever it holds) and puts probes in the basis and sensitivity names too. The probes are the
classic spreadsheet formula-injection strings (OWASP, "CSV Injection") and HTML script probes (OWASP XSS
Filter Evasion Cheat Sheet).
"""

from __future__ import annotations

from dataclasses import replace
from datetime import date
from functools import lru_cache
from pathlib import Path

import polars as pl

from valuation.engine.results import ValuationResult
from valuation.experience.analyse import analyse_experience
from valuation.experience.result import TABLE_COLUMNS, ExperienceResult
from valuation.experience.settings import ExperienceSettings
from valuation.pipeline import value_scheme

FORMULA_PROBES = ["=1+1", "+44", "-3", "@SUM(A1)"]
SCRIPT_PROBE = "<script>alert(1)</script>"
#: Runs script in a browser if it ever reaches the page as markup: it would mark the <body>.
IMG_PROBE = "<img src=x onerror=\"document.body.setAttribute('data-pwned','1')\">"


ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "member_data_demo"
BASIS = ROOT / "assumptions" / "demo_basis.toml"


@lru_cache(maxsize=1)
def real_run() -> tuple[ValuationResult, ExperienceResult]:
    """The demo valuation of members_dirty.csv and the demo experience analysis 2022-2025, with probes."""
    result = value_scheme(BASIS, DEMO / "members_dirty.csv")
    ids = result.members["member_id"].to_list()
    others = [i for i, m in enumerate(ids) if m not in FORMULA_PROBES][: len(FORMULA_PROBES)]
    for i, probe in zip(others, FORMULA_PROBES, strict=False):
        if probe not in ids:
            ids[i] = probe
    result.members = result.members.with_columns(pl.Series("member_id", ids, dtype=pl.String))
    extra = pl.DataFrame({
        "file": ["members_dirty.csv"] * 2, "row": [41, 42], "member_id": [SCRIPT_PROBE, IMG_PROBE],
        "column": ["member_id", "sex"], "file_column": ["member_id", "sex"], "value": [SCRIPT_PROBE, IMG_PROBE],
        "reason": ["test probe in a reason: " + SCRIPT_PROBE, "test probe in a reason: " + IMG_PROBE],
        "severity": ["warning", "warning"],
    }).select(result.exceptions.columns).cast(result.exceptions.schema)
    result.exceptions = pl.concat([result.exceptions, extra], how="vertical")
    settings = ExperienceSettings(period_start=date(2022, 3, 31), period_end=date(2025, 3, 31))
    experience = analyse_experience(DEMO / "members_start.csv", DEMO / "deaths.csv", BASIS, settings,
                                    exits_path=DEMO / "exits.csv")
    return result, experience


def make_result(n_members: int = 6) -> ValuationResult:
    ids = (FORMULA_PROBES + [f"M{i:04d}" for i in range(n_members)])[:n_members]
    members = pl.DataFrame({
        "member_id": ids,
        "status": (["pensioner", "deferred", "active"] * n_members)[:n_members],
        "sex": (["M", "F"] * n_members)[:n_members],
        "age": [70.25, 55.5, 40.0, 81.0, 66.0, 35.75][: n_members] + [50.0] * max(0, n_members - 6),
        "pension": [12000.0, 5000.0, 3000.0, 8000.0, 9000.0, 1000.0][:n_members] + [2000.0] * max(0, n_members - 6),
        "liability": [180000.0, 60000.0, 30000.0, 80000.0, 150000.0, 8000.0][:n_members]
        + [20000.0] * max(0, n_members - 6),
        "member_liability": [1.0] * n_members, "spouse_liability": [0.5] * n_members,
        "lump_sum_liability": [0.0] * n_members, "annuity_factor": [15.0] * n_members,
        "q_next_year": [0.01] * n_members,
    })
    exceptions = pl.DataFrame({
        "file": ["members.csv"] * 7,
        "row": [2, 3, 4, 5, 6, 7, 8],
        "member_id": FORMULA_PROBES + [SCRIPT_PROBE, "X9", IMG_PROBE],
        "column": ["date_of_birth", "pension", "sex", "status", "member_id", "pension", "sex"],
        "value": ["=HYPERLINK(\"x\")", "+1", "-", "@", SCRIPT_PROBE, "70000", IMG_PROBE],
        "reason": ["date of birth is not a date", "pension is negative", "sex code unknown",
                   "status code unknown", "duplicate member id " + SCRIPT_PROBE,
                   "pension above the large-pension threshold", "sex code unknown: " + IMG_PROBE],
        "severity": ["excluded"] * 5 + ["warning", "excluded"],
    })
    liabilities = pl.DataFrame({
        "status": ["pensioner", "pensioner", "deferred", "active"],
        "sex": ["M", "F", "F", "M"],
        "tranche": ["post2005", "post2005", "pre2005", "all"],
        "benefit": ["member_pension", "spouse_pension", "member_pension", "lump_sum"],
        "liability": [300000.0, 110000.0, 68000.0, 30000.0],
    })
    cashflows = pl.DataFrame({
        "year": [1, 2, 3],
        "pensioner": [20000.0, 19500.0, 19000.0], "dependant": [0.0, 100.0, 200.0],
        "deferred": [0.0, 1000.0, 2000.0], "active": [0.0, 0.0, 500.0],
        "total": [20000.0, 20600.0, 21700.0], "discount_factor": [0.9768, 0.9320, 0.8893],
        "discounted_total": [19536.0, 19199.2, 19297.8],
    })
    sens = pl.DataFrame({
        "name": ["Discount rate +0.5% p.a.", "Life expectancy +1 year " + SCRIPT_PROBE],
        "kind": ["discount_rate", "life_expectancy"], "shift": [0.005, 1.0],
        "liability": [470000.0, 525000.0], "change_pct": [-7.48, 3.35],
    })
    le = pl.DataFrame({"sex": ["M", "M", "M", "F"], "age_now": [65, 45, 65, 65], "at_age": [65, 65, 65, 65],
                       "basis": ["cohort", "cohort", "period", "cohort"], "years": [21.4, 23.1, 20.2, 23.9]})
    deaths = pl.DataFrame({"status": ["pensioner", "deferred"], "sex": ["M", "F"], "lives": [0.05, 0.01],
                           "amounts": [600.0, 50.0]})
    total = 508000.0
    summary = {
        "valuation_date": "2025-03-31",
        "basis_name": "Test basis " + SCRIPT_PROBE,
        "records": {"read": 12, "valued": 6, "excluded": 6,
                    "by_status": {"pensioner": {"read": 4, "valued": 2, "excluded": 2},
                                  "deferred": {"read": 4, "valued": 2, "excluded": 2},
                                  "active": {"read": 4, "valued": 2, "excluded": 2}},
                    "ignored_columns": []},
        "liability": {"total": total,
                      "by_status": {"pensioner": 410000.0, "dependant": 0.0, "deferred": 68000.0, "active": 30000.0},
                      "by_sex": {"M": 330000.0, "F": 178000.0},
                      "by_tranche": {"pre2005": 68000.0, "post2005": 410000.0, "lump_sums": 30000.0}},
        "active_measures": {"projected_obligation": 30000.0, "accrued_benefit_obligation": 25000.0,
                            "current_service_cost": 1500.0},
        "duration": {"macaulay": 14.237, "modified": 13.585, "effective": 13.6},
        "single_equivalent_discount_rate": 0.048,
        "cashflow_present_value": total,
        "sensitivities": sens.to_dicts(),
        "life_expectancy": le.to_dicts(),
        "expected_deaths_next_year": {"lives": 0.06, "amounts": 650.0, "by_group": deaths.to_dicts()},
        "assumptions": {"discount_rate_flat": 0.048, "inflation_rate_flat": 0.03, "salary_growth": 0.035,
                        "retirement_age": 65.0, "payment_frequency": 12, "payment_timing": "advance",
                        "proportion_married": {"M": 0.8, "F": 0.7}, "spouse_age_difference": 3.0,
                        "spouse_fraction": 0.5, "commutation_proportion": 0.2, "fractional_age": "udd",
                        "age_convention": "exact"},
        "manifest": {
            "tool_version": "0.1.0", "inputs": {"members.csv": "ab" * 32},
            "basis": {"name": "=cmd|' /C calc'!A0", "discount": {"rate": 0.048},
                      "mortality": {"default": {"M": {"table": SCRIPT_PROBE, "percentage": 0.95, "age_rating": 0,
                                                      "improvement": {"kind": "constant", "rate": 0.01}}}},
                      "withdrawal": {"rates": [[18.0, 0.1], [30.0, 0.05]]},
                      "sensitivities": [{"name": "+0.5%", "kind": "discount_rate", "shift": 0.005}]},
            "settings": {"sensitivities": True, "q_multiplier": 1.0, "chunk_size": 1_000_000},
            "ignored_columns": [], "started_at": "2025-04-01T09:00:00+00:00", "run_seconds": 0.5,
        },
    }
    return ValuationResult(summary=summary, liabilities=liabilities, cashflows=cashflows, members=members,
                           sensitivities=sens, life_expectancy=le, expected_deaths=deaths, exceptions=exceptions)


def make_experience() -> ExperienceResult:
    groups = [("overall", "all"), ("sex", "M"), ("age_band", "60-64"), ("age_band", "65-69"), ("age_band", "70-74")]
    n = len(groups)
    table = pl.DataFrame({
        "dimension": [g[0] for g in groups], "group": [g[1] for g in groups],
        "exposure_years": [300.0, 150.0, 100.0, 120.0, 80.0], "actual_lives": [9.0, 5.0, 2.0, 3.0, 4.0],
        "expected_lives": [10.0, 5.5, 2.5, 3.5, 4.0], "ae_lives": [0.9, 0.909, 0.8, 0.857, 1.0],
        "ae_lives_lower": [0.41, 0.30, 0.10, 0.18, 0.27], "ae_lives_upper": [1.71, 2.12, 2.89, 2.50, 2.56],
        "actual_amounts": [90000.0, 50000.0, 20000.0, 30000.0, 40000.0],
        "expected_amounts": [95000.0, 52000.0, 24000.0, 33000.0, 38000.0],
        "ae_amounts": [0.947, 0.96, 0.83, 0.91, 1.05], "ae_amounts_lower": [0.5] * n, "ae_amounts_upper": [1.5] * n,
    }).select(TABLE_COLUMNS)
    implied = {"implied_percentage": 90.0, "lower": 47.5, "upper": 142.5, "multiplier": 0.947,
               "multiplier_lower": 0.5, "multiplier_upper": 1.5, "by_table": [], "note": None,
               "liability_before": None, "liability_after": None, "change_pct": None,
               "reason": "no valuation member file given: liability effect not calculated"}
    settings = ExperienceSettings(period_start=date(2022, 3, 31), period_end=date(2025, 3, 31))
    return ExperienceResult(settings=settings, table=table, implied=implied, exceptions=pl.DataFrame(),
                            summary={"overall": table.row(0, named=True)})


def make_empty_result() -> ValuationResult:
    """A scheme where nothing could be valued: empty frames, zero liabilities, undefined measures."""
    r = make_result()
    for name in ("exceptions", "sensitivities", "cashflows", "members", "expected_deaths", "liabilities"):
        setattr(r, name, getattr(r, name).clear())
    s = r.summary
    nan = float("nan")
    r.summary = replace(s, liability=replace(s.liability, by_status={k: 0.0 for k in s.liability.by_status}),
                        duration=replace(s.duration, macaulay=nan, modified=nan, effective=nan),
                        single_equivalent_discount_rate=nan)
    return r
