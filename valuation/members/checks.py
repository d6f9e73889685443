"""Record-level checks of member data: each check is a polars mask plus the reason it reports.

A record that fails any ``excluded`` check is left out of the valuation; ``warning`` checks only list it.
Every problem of a record is listed, but the record is counted once (read = valued + excluded).

Stated rules (common practice):

- duplicate ``member_id``: every copy is excluded, and the administrator asked which is right;
- a pensioner, dependant or deferred member needs a pension above 0; an active member needs a salary
  above 0 and a service_years value (0 is allowed for a new joiner);
- ``pension_<tranche>`` values, where any are given, must sum to ``pension`` within 0.01 (a cent);
- a life is beyond its mortality table when its age in whole years (under the basis's age convention)
  exceeds the table's closing age less the age rating (:meth:`valuation.basis.Basis.closing_age`).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

import polars as pl

from valuation.members.parse import parsed

TOLERANCE = 0.01  # [currency p.a.]: tranches must sum to the pension within a cent

#: Statuses that must have a pension above 0.
PAID_STATUSES = ("pensioner", "dependant", "deferred")


@dataclass(frozen=True)
class Check:
    """One record-level check: rows where ``mask`` is true are reported against ``column``."""

    column: str
    mask: pl.Expr
    reason: pl.Expr | str
    severity: str = "excluded"
    value: pl.Expr | None = None


def _v(col: str) -> pl.Expr:
    return pl.col(parsed(col))


def _money(e: pl.Expr) -> pl.Expr:
    """An amount as text, rounded to cents."""
    return e.round(2).cast(pl.String)


def _fmt(template: str, *args: pl.Expr) -> pl.Expr:
    """``template`` with each ``{}`` replaced by an expression's text.

    Built with ``pl.concat_str`` (``pl.format`` panicked on large filtered frames under polars 2.1).
    """
    pieces = template.split("{}")
    assert len(pieces) == len(args) + 1
    parts: list[pl.Expr] = [pl.lit(pieces[0])]
    for arg, text in zip(args, pieces[1:], strict=True):
        parts += [arg.cast(pl.String), pl.lit(text)]
    return pl.concat_str(parts)


def _bad_number(col: str) -> pl.Expr:
    return pl.col(col).is_not_null() & _v(col).is_null()


def _number_checks(col: str, what: str, low: float | None = 0.0, high: float | None = None) -> list[Check]:
    checks = [Check(col, _bad_number(col), f"not a number (expected {what})")]
    if low is not None and high is None:
        checks.append(Check(col, _v(col) < low, f"negative value (expected {what}, {low:g} or more)"))
    if low is not None and high is not None:
        checks.append(Check(col, ~_v(col).is_between(low, high),
                            f"out of range (expected {what} between {low:g} and {high:g})"))
    return checks


def _date_checks(col: str, fmt_text: str) -> list[Check]:
    return [Check(col, pl.col(col).is_not_null() & _v(col).is_null(), f"not a valid date (expected {fmt_text})")]


def build_checks(
    *, tranche_cols: list[str], fmt_text: str, valuation_date: date, large: float, tiny: float, old: float,
    status_codes: str, sex_codes: str,
) -> list[Check]:
    """All checks, in the order their reasons are listed for a record.

    The frame they run on carries helper columns: ``_dup_n`` / ``_dup_rows`` (copies of the member id),
    ``_age`` / ``_closing`` (age in whole years and the table's closing age), ``_exact_age`` [years],
    ``_sp_age`` / ``_sp_closing`` (the same for a known spouse), ``_tr_given`` / ``_tr_sum`` (tranche split)
    and ``_pension`` (the pension, or the tranches' sum when the pension cell is empty).
    """
    pension, salary = _v("pension"), _v("salary")
    status = _v("status")
    checks = [
        Check("member_id", pl.col("member_id").is_null(), "member_id is missing (expected a unique reference)"),
        Check(
            "member_id", pl.col("_dup_n") > 1,
            _fmt("member_id appears {} times (rows {}); every copy is excluded: ask the administrator "
                      "which record is right", pl.col("_dup_n"), pl.col("_dup_rows")),
        ),
        Check("status", pl.col("status").is_null(), "status is missing"),
        Check("status", pl.col("status").is_not_null() & status.is_null(),
              f"unknown status code (expected one of {status_codes})"),
        Check("sex", pl.col("sex").is_null(), "sex is missing"),
        Check("sex", pl.col("sex").is_not_null() & _v("sex").is_null(),
              f"unknown sex code (expected one of {sex_codes})"),
        Check("date_of_birth", pl.col("date_of_birth").is_null(), "date of birth is missing"),
        *_date_checks("date_of_birth", fmt_text),
        Check("date_of_birth", _v("date_of_birth") > pl.lit(valuation_date),
              f"date of birth is after the valuation date {valuation_date.isoformat()}"),
        Check("date_of_birth", pl.col("_age") > pl.col("_closing"),
              _fmt("age {} is beyond the mortality table's closing age {} for this status and sex",
                        pl.col("_age").cast(pl.Int64), pl.col("_closing"))),
        *_number_checks("pension", "a pension amount [currency p.a.]"),
        *(c for t in tranche_cols for c in _number_checks(t, "a pension amount [currency p.a.]")),
        Check(
            "pension",
            pl.col("_tr_given") & pension.is_not_null() & ((pl.col("_tr_sum") - pension).abs() > TOLERANCE + 1e-9),
            _fmt("tranches sum to {} but pension is {} (expected equal within 0.01)",
                      _money(pl.col("_tr_sum")), _money(pension)),
            value=pl.col("pension"),
        ),
        Check("pension", status.is_in(PAID_STATUSES) & (pl.col("_pension").fill_null(0.0) == 0)
              & ~_bad_number("pension"),
              _fmt("{} with no pension (expected a pension above 0)", status)),
        *_number_checks("salary", "a salary [currency p.a.]"),
        Check("salary", (status == "active") & (salary.is_null() | (salary == 0)) & ~_bad_number("salary"),
              "active member with no salary (expected a salary above 0)"),
        *_number_checks("service_years", "pensionable service [years]"),
        Check("service_years", (status == "active") & pl.col("service_years").is_null(),
              "active member with no service_years (expected pensionable service [years])"),
        *_number_checks("retirement_age", "a retirement age [years]", 40.0, 80.0),
        *_number_checks("spouse_fraction", "a spouse's fraction of pension", 0.0, 1.0),
        *_number_checks("pension_end_age", "the age a dependant's pension stops [years]"),
        *_date_checks("spouse_date_of_birth", fmt_text),
        Check("spouse_date_of_birth", _v("spouse_date_of_birth") > pl.lit(valuation_date),
              f"spouse's date of birth is after the valuation date {valuation_date.isoformat()}"),
        Check("spouse_date_of_birth", pl.col("_sp_age") > pl.col("_sp_closing"),
              _fmt("spouse's age {} is beyond the spouse mortality table's closing age {}",
                        pl.col("_sp_age").cast(pl.Int64), pl.col("_sp_closing"))),
        *_date_checks("guarantee_end", fmt_text),
        Check("pension", pl.col("_pension") > large, f"unusually large pension (above {large:,.2f}): please confirm",
              "warning"),
        Check("pension", (pl.col("_pension") > 0) & (pl.col("_pension") < tiny), f"tiny pension (below {tiny:,.2f}): please confirm",
              "warning"),
        Check("date_of_birth", pl.col("_exact_age") > old,
              _fmt(f"member aged {{}} is over {old:g}: please confirm the date of birth",
                        pl.col("_exact_age").floor().cast(pl.Int64)), "warning"),
    ]
    return checks
