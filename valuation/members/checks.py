"""Record-level checks of member data: each check is a polars mask plus the reason it reports.

A record that fails any ``excluded`` check is left out of the valuation; ``warning`` checks only list it.
Every problem of a record is listed, but the record is counted once (read = valued + excluded).

A reason is a template: every record with the same problem gets the same text, so a summary grouped by
reason has one line a kind of problem. The record's own figures go in the exception's ``value`` column
(the value as written, or, where a check compares figures, e.g. ``tranches 7897.18; pension 14276.89``).

Stated rules (common practice in valuation data audits, no single published source):

- duplicate ``member_id``: every copy is excluded, and the administrator asked which is right;
- a pensioner, dependant or deferred member needs a pension above 0; an active member needs a salary
  above 0 and a service_years value (0 is allowed for a new joiner);
- ``pension_<tranche>`` values, where any are given, must sum to ``pension`` within 0.01 (a cent);
- a life is beyond its mortality table when its age in whole years (under the basis's age convention)
  exceeds the table's closing age less the age rating (:meth:`valuation.basis.Basis.closing_age`);
- a number that is infinite, NaN or too large for a double (``inf``, ``nan``, ``1e400``) is excluded;
- plausibility, with limits in the basis's ``[thresholds]``: service_years longer than the exact age
  less ``min_working_age`` is excluded; a pension above ``max_pension`` or a salary above ``max_salary``
  is excluded (an amount that size is a data error, and would overflow later sums); a salary above
  ``large_salary`` is a warning; a known spouse younger than ``min_spouse_age`` at the valuation date is
  excluded (no one that young is a plausible partner: the date is likely a child's or mistyped), and an
  age gap between member and known spouse above ``max_spouse_age_gap`` is a warning; a dependant whose
  ``pension_end_age`` is already reached is excluded (the pension has stopped);
- an active or deferred member whose retirement age (the record's, or the basis's where the record gives
  none) is below the exact age at the valuation date is a warning: the engine values the pension as
  starting at the valuation date (no further revaluation, salary growth or withdrawal before it), which
  is what the reason says.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

import polars as pl

from valuation.basis.rules import Thresholds
from valuation.members.parse import as_float, parsed
from valuation.vocabulary import PAID_STATUSES

TOLERANCE = 0.01  # [currency p.a.]: tranches must sum to the pension within a cent



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
    """An amount as text with two decimals (``-250.00``); amounts too large for cents as plain numbers."""
    cents = (e * 100).round(0).cast(pl.Int64, strict=False)
    whole = cents.abs() // 100
    text = pl.concat_str([
        pl.when(cents < 0).then(pl.lit("-")).otherwise(pl.lit("")),
        whole.cast(pl.String), pl.lit("."), (cents.abs() % 100).cast(pl.String).str.zfill(2),
    ])
    return pl.when(cents.is_not_null()).then(text).otherwise(e.cast(pl.String))


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


def _not_finite(col: str) -> pl.Expr:
    """Text that reads as a number but not a finite one: ``inf``, ``nan``, ``1e400`` (beyond a double)."""
    value = pl.col(as_float(col))
    return value.is_not_null() & ~value.is_finite()


def _bad_number(col: str) -> pl.Expr:
    """Text that does not read as a number at all."""
    return pl.col(col).is_not_null() & pl.col(as_float(col)).is_null()


def _number_checks(col: str, what: str, low: float | None = 0.0, high: float | None = None) -> list[Check]:
    checks = [
        Check(col, _bad_number(col), f"not a number (expected {what})"),
        Check(col, _not_finite(col), f"not a finite number: infinite, NaN or too large (expected {what})"),
    ]
    if low is not None and high is None:
        checks.append(Check(col, _v(col) < low, f"negative value (expected {what}, {low:g} or more)"))
    if low is not None and high is not None:
        checks.append(Check(col, ~_v(col).is_between(low, high),
                            f"out of range (expected {what} between {low:g} and {high:g})"))
    return checks


def _date_checks(col: str, fmt_text: str) -> list[Check]:
    return [Check(col, pl.col(col).is_not_null() & _v(col).is_null(), f"not a valid date (expected {fmt_text})")]


def _years(e: pl.Expr) -> pl.Expr:
    """An age or a term [years] as text with one decimal."""
    return e.round(1).cast(pl.String)


def build_checks(
    *, tranche_cols: list[str], fmt_text: str, valuation_date: date, thresholds: Thresholds,
    retirement_age: float, status_codes: str, sex_codes: str,
) -> list[Check]:
    """All checks, in the order their reasons are listed for a record.

    Parameters
    ----------
    tranche_cols : list of str
        The ``pension_<tranche>`` columns the file has.
    fmt_text : str
        The date formats accepted, in words.
    valuation_date : date
    thresholds : Thresholds
        The basis's ``[thresholds]`` (warning and exclusion limits).
    retirement_age : float
        The basis's normal retirement age [years], used where a record gives none.
    status_codes, sex_codes : str
        The codes accepted, in words.

    Notes
    -----
    The frame they run on carries helper columns: ``<column>__f`` (each number column read as a double,
    :func:`~valuation.members.parse.as_float`), ``_dup`` (the member id is written more than once in
    the file), and, on the rows that fail a check, ``_dup_n`` / ``_dup_rows`` (its copies and their rows),
    ``_age`` / ``_closing`` (age in whole years and the table's closing age), ``_exact_age`` [years],
    ``_sp_age`` / ``_sp_closing`` / ``_sp_exact_age`` (the same for a known spouse), ``_tr_given`` /
    ``_tr_sum`` (tranche split) and ``_pension`` (the pension, or the tranches' sum when the pension cell
    is empty).
    """
    th = thresholds
    pension, salary = _v("pension"), _v("salary")
    status = _v("status")
    age = pl.col("_exact_age")
    ret_age = _v("retirement_age").fill_null(retirement_age)
    checks = [
        Check("member_id", pl.col("member_id").is_null(), "member_id is missing (expected a unique reference)"),
        Check(
            "member_id", pl.col("_dup"),
            "member_id appears more than once; every copy is excluded: ask the administrator which record "
            "is right",
            value=_fmt("{} copies: rows {}", pl.col("_dup_n"), pl.col("_dup_rows")),
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
              "age is beyond the mortality table's closing age for this status and sex",
              value=_fmt("age {}; closing age {}", pl.col("_age").cast(pl.Int64), pl.col("_closing"))),
        *_number_checks("pension", "a pension amount [currency p.a.]"),
        *(c for t in tranche_cols for c in _number_checks(t, "a pension amount [currency p.a.]")),
        Check(
            "pension",
            pl.col("_tr_given") & pension.is_not_null() & ((pl.col("_tr_sum") - pension).abs() > TOLERANCE + 1e-9),
            "pension_<tranche> columns do not sum to the pension (expected equal within 0.01)",
            value=_fmt("tranches {}; pension {}", _money(pl.col("_tr_sum")), _money(pension)),
        ),
        Check("pension", status.is_in(PAID_STATUSES) & (pl.col("_pension").fill_null(0.0) == 0)
              & ~_bad_number("pension") & ~_not_finite("pension"),
              "no pension (a pensioner, dependant or deferred member needs a pension above 0)"),
        Check("pension", pl.col("_pension") > th.max_pension,
              f"pension above {th.max_pension:,.0f}, beyond any plausible amount (the thresholds.max_pension "
              "limit): correct the amount", value=_money(pl.col("_pension"))),
        *_number_checks("salary", "a salary [currency p.a.]"),
        Check("salary", (status == "active") & (salary.is_null() | (salary == 0)) & ~_bad_number("salary")
              & ~_not_finite("salary"),
              "active member with no salary (expected a salary above 0)"),
        Check("salary", salary > th.max_salary,
              f"salary above {th.max_salary:,.0f}, beyond any plausible amount (the thresholds.max_salary "
              "limit): correct the amount"),
        *_number_checks("service_years", "pensionable service [years]"),
        Check("service_years", (status == "active") & pl.col("service_years").is_null(),
              "active member with no service_years (expected pensionable service [years])"),
        Check("service_years", _v("service_years") > age - th.min_working_age,
              f"service_years longer than the member's age allows (more than age less "
              f"{th.min_working_age:g}, the thresholds.min_working_age)",
              value=_fmt("service {}; age {}", _years(_v("service_years")), _years(age))),
        *_number_checks("retirement_age", "a retirement age [years]", 40.0, 80.0),
        Check("retirement_age", status.is_in(("active", "deferred")) & ~_bad_number("retirement_age")
              & ~_not_finite("retirement_age") & ret_age.is_between(40.0, 80.0) & (ret_age < age),
              "retirement age below the member's current age: valued as retiring at the valuation date "
              "(pension from the valuation date, no further revaluation or salary growth)",
              "warning", value=_fmt("retirement age {}{}; age {}", _years(ret_age),
                                    pl.when(_v("retirement_age").is_null()).then(pl.lit(" (the basis's)"))
                                    .otherwise(pl.lit("")), _years(age))),
        *_number_checks("spouse_fraction", "a spouse's fraction of pension", 0.0, 1.0),
        *_number_checks("pension_end_age", "the age a dependant's pension stops [years]"),
        Check("pension_end_age", (status == "dependant") & (_v("pension_end_age") <= age),
              "dependant's pension_end_age already reached: the pension has stopped (remove the record or "
              "correct the end age)",
              value=_fmt("end age {}; age {}", _years(_v("pension_end_age")), _years(age))),
        *_date_checks("spouse_date_of_birth", fmt_text),
        Check("spouse_date_of_birth", _v("spouse_date_of_birth") > pl.lit(valuation_date),
              f"spouse's date of birth is after the valuation date {valuation_date.isoformat()}"),
        Check("spouse_date_of_birth", pl.col("_sp_exact_age") < th.min_spouse_age,
              f"spouse younger than {th.min_spouse_age:g} at the valuation date (the thresholds.min_spouse_age): "
              "not a plausible partner; check the spouse's date of birth",
              value=_fmt("spouse's age {}", _years(pl.col("_sp_exact_age")))),
        Check("spouse_date_of_birth", pl.col("_sp_age") > pl.col("_sp_closing"),
              "spouse's age is beyond the spouse mortality table's closing age",
              value=_fmt("spouse's age {}; closing age {}", pl.col("_sp_age").cast(pl.Int64),
                         pl.col("_sp_closing"))),
        *_date_checks("guarantee_end", fmt_text),
        Check("pension", (pl.col("_pension") > th.large_pension) & (pl.col("_pension") <= th.max_pension),
              f"unusually large pension (above {th.large_pension:,.2f}): please confirm", "warning"),
        Check("pension", (pl.col("_pension") > 0) & (pl.col("_pension") < th.tiny_pension),
              f"tiny pension (below {th.tiny_pension:,.2f}): please confirm", "warning"),
        Check("salary", (salary > th.large_salary) & (salary <= th.max_salary),
              f"unusually large salary (above {th.large_salary:,.2f}): please confirm", "warning"),
        Check("spouse_date_of_birth",
              ((age - pl.col("_sp_exact_age")).abs() > th.max_spouse_age_gap)
              & (pl.col("_sp_exact_age") >= th.min_spouse_age),
              f"member and spouse ages differ by more than {th.max_spouse_age_gap:g} years (the "
              "thresholds.max_spouse_age_gap): please confirm the spouse's date of birth", "warning",
              value=_fmt("age {}; spouse's age {}", _years(age), _years(pl.col("_sp_exact_age")))),
        Check("date_of_birth", age > th.old_age,
              f"member over {th.old_age:g}: please confirm the date of birth", "warning",
              value=_fmt("age {}", age.floor().cast(pl.Int64))),
    ]
    return checks
