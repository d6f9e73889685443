"""Checks of the deaths and exits rows against the start membership and the period.

Nothing is dropped silently: every row that is not used becomes an exception with severity ``excluded``,
and a row that is used with a caveat gets severity ``warning``. A row with several problems is counted once
but every problem is listed. Invariants: deaths read = counted + excluded; exits read = applied + excluded.

Rules (common practice in mortality investigations, stated here once):

* a death or exit must name a member of the start membership that was valued (not excluded);
* its date must parse and fall in the period: after ``period_start`` and on or before ``period_end``;
* two deaths (or two exits) for one member: the earliest (then the first row) is kept, the others excluded;
* a member with both a death and an exit: if the exit comes first, the death is excluded (the member had
  left observation); otherwise the exit is excluded (the death ends observation);
* a pension at death that is blank is fine (the record's pension is used); one that is not a number >= 0
  is a warning and the record's pension is used.

Each reason is the same text for every row with the same problem (so exceptions can be counted by
reason); the row's own values (its date, the other record it clashes with) are in the ``value`` column.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import TypedDict

import polars as pl

from valuation.members.checks import Check
from valuation.members.validate import EXCEPTION_SCHEMA, empty_exceptions

__all__ = ["EXCEPTION_SCHEMA", "Check", "CheckedEvents", "check_events", "empty_exceptions"]

@dataclass
class CheckedEvents:
    """Deaths and exits that passed the checks, and the exceptions raised by the others."""

    deaths: pl.DataFrame  # member_id, row, date, pension_at_death (f64 or null)
    exits: pl.DataFrame  # member_id, row, date, reason
    exceptions: pl.DataFrame
    counts: dict[str, dict[str, int]]


def _problems(
    df: pl.DataFrame, file: str, checks: list[Check], headers: dict[str, str] | None = None
) -> pl.DataFrame:
    headers = headers or {}
    frames = []
    for c in checks:
        hit = df.filter(c.mask.fill_null(False))
        if hit.height:
            frames.append(
                hit.select(
                    pl.lit(file).alias("file"),
                    pl.col("row"),
                    pl.col("member_id"),
                    pl.lit(c.column).alias("column"),
                    pl.lit(headers.get(c.column, c.column)).alias("file_column"),
                    (c.value if c.value is not None else pl.col(c.column)).cast(pl.String).alias("value"),
                    (pl.lit(c.reason) if isinstance(c.reason, str) else c.reason).cast(pl.String).alias("reason"),
                    pl.lit(c.severity).alias("severity"),
                )
            )
    return pl.concat(frames, how="vertical") if frames else empty_exceptions()


class _Common(TypedDict):
    """Keyword arguments :func:`_basic_checks` takes for both deaths and exits."""

    valued: pl.Series
    excluded: pl.Series
    start: date
    end: date
    members_file: str
    date_format: str | None


def _basic_checks(
    df: pl.DataFrame,
    *,
    what: str,
    date_column: str,
    valued: pl.Series,
    excluded: pl.Series,
    start: date,
    end: date,
    members_file: str,
    date_format: str | None,
    headers: dict[str, str],
) -> tuple[pl.DataFrame, list[Check]]:
    expected = "YYYY-MM-DD" + (f" or the basis date format {date_format}" if date_format else "")
    id_header = headers.get("member_id", "member_id").strip()
    date_header = headers.get(date_column, date_column).strip()
    flags = df.with_columns(
        (pl.col("member_id").is_null()).alias("_no_id"),
        (pl.col("date").is_null()).alias("_bad_date"),
        (
            pl.col("member_id").is_not_null() & pl.col("member_id").is_in(excluded.implode()).fill_null(False)
        ).alias("_excluded_member"),
    ).with_columns(
        (
            pl.col("member_id").is_not_null()
            & ~pl.col("member_id").is_in(valued.implode()).fill_null(False)
            & ~pl.col("_excluded_member")
        ).alias("_unknown"),
        (pl.col("date") <= start).fill_null(False).alias("_before"),
        (pl.col("date") > end).fill_null(False).alias("_after"),
    )
    s, e = start.isoformat(), end.isoformat()
    members = f" ({members_file})" if members_file else ""
    checks: list[Check] = [
        Check(
            "member_id",
            pl.col("_no_id"),
            f"{what} row has no {id_header}: not counted",
            "excluded",
            value=pl.lit(""),
        ),
        Check(
            date_column,
            pl.col("_bad_date"),
            f"{date_header} is not a date (expected {expected}): not counted",
            "excluded",
            value=pl.col("date_text").fill_null(""),
        ),
        Check(
            "member_id",
            pl.col("_unknown"),
            f"{what} for a member not in the start membership{members}: not counted",
            "excluded",
            value=pl.col("member_id"),
        ),
        Check(
            "member_id",
            pl.col("_excluded_member"),
            f"{what} for a member who was excluded from the start membership{members}; see its "
            "exceptions: not counted",
            "excluded",
            value=pl.col("member_id"),
        ),
        Check(
            date_column,
            pl.col("_before"),
            f"{what} on or before the period start {s}: the member should not be in the start "
            "membership; not counted",
            "excluded",
            value=pl.col("date_text"),
        ),
        Check(
            date_column,
            pl.col("_after"),
            f"{what} after the period end {e} (period {s} to {e}): not counted",
            "excluded",
            value=pl.col("date_text"),
        ),
    ]
    flags = flags.with_columns(
        (
            pl.col("_no_id")
            | pl.col("_bad_date")
            | pl.col("_unknown")
            | pl.col("_excluded_member")
            | pl.col("_before")
            | pl.col("_after")
        ).alias("_fail")
    )
    return flags, checks


def _duplicates(ok: pl.DataFrame, what: str, date_column: str) -> tuple[pl.DataFrame, list[Check]]:
    ranked = ok.sort(["member_id", "date", "row"]).with_columns(
        pl.col("row").first().over("member_id").alias("_kept_row"),
        pl.col("date").first().over("member_id").dt.to_string("%Y-%m-%d").alias("_kept_date"),
        (pl.int_range(pl.len()).over("member_id") > 0).alias("_dup"),
    )
    check: Check = Check(
                       date_column,
                       pl.col("_dup"),
                       f"second {what} record for the same member (the earliest is kept, the first row on a tie): "
        "not counted",
                       "excluded",
                       value=pl.format(
            "{}; kept: row {} on {}", pl.col("date_text").fill_null(""), pl.col("_kept_row"), pl.col("_kept_date")
        ),
                   )
    return ranked, [check]


def check_events(
    deaths: pl.DataFrame,
    exits: pl.DataFrame | None,
    *,
    valued_ids: pl.Series,
    excluded_ids: pl.Series,
    period_start: date,
    period_end: date,
    deaths_file: str,
    exits_file: str = "",
    members_file: str = "",
    date_format: str | None = None,
    deaths_headers: dict[str, str] | None = None,
    exits_headers: dict[str, str] | None = None,
) -> CheckedEvents:
    """Apply the rules in the module docstring; vectorised with polars (no per-row Python loops).

    Parameters
    ----------
    deaths, exits
        Frames from :func:`valuation.experience.events.read_events` (``exits`` may be None).
    valued_ids, excluded_ids
        Member ids valued from, and excluded from, the start membership.
    period_start, period_end
        The investigation period: events on days after ``period_start`` up to ``period_end`` count.
    deaths_file, exits_file, members_file
        Names written into the exceptions and messages.
    date_format
        The accepted non-ISO date pattern, quoted in messages.
    deaths_headers, exits_headers
        Our column name -> the file's header as written (``file_column`` of the exceptions); a column
        not listed is named by our name.
    """
    valued_ids = valued_ids.cast(pl.String)
    excluded_ids = excluded_ids.cast(pl.String).drop_nulls().unique()
    excluded_ids = excluded_ids.filter(~excluded_ids.is_in(valued_ids.implode()))
    common = _Common(
        valued=valued_ids,
        excluded=excluded_ids,
        start=period_start,
        end=period_end,
        members_file=members_file,
        date_format=date_format,
    )
    d_flags, d_checks = _basic_checks(
        deaths, what="death", date_column="date_of_death", headers=deaths_headers or {}, **common
    )
    d_ranked, d_dup = _duplicates(d_flags.filter(~pl.col("_fail")), "death", "date_of_death")
    d_first = d_ranked.filter(~pl.col("_dup"))

    if exits is None:
        exits = pl.DataFrame(
            schema={
                "row": pl.Int64,
                "member_id": pl.String,
                "date_text": pl.String,
                "date": pl.Date,
                "reason": pl.String,
            }
        )
    x_flags, x_checks = _basic_checks(
        exits, what="exit", date_column="exit_date", headers=exits_headers or {}, **common
    )
    x_ranked, x_dup = _duplicates(x_flags.filter(~pl.col("_fail")), "exit", "exit_date")
    x_first = x_ranked.filter(~pl.col("_dup"))

    # A member with a death and an exit: the earlier event stands (death wins a tie).
    both = d_first.select(
        "member_id", pl.col("date").alias("_death"), pl.col("row").alias("_death_row")
    ).join(
        x_first.select("member_id", pl.col("date").alias("_exit"), pl.col("row").alias("_exit_row")),
        on="member_id",
        how="inner",
    )
    d_first = d_first.join(
        both.select("member_id", "_exit", "_exit_row"), on="member_id", how="left"
    ).with_columns((pl.col("_exit") < pl.col("date")).fill_null(False).alias("_after_exit"))
    x_first = x_first.join(
        both.select("member_id", "_death", "_death_row"), on="member_id", how="left"
    ).with_columns((pl.col("_death") <= pl.col("date")).fill_null(False).alias("_after_death"))
    after_exit: Check = Check(
                            "date_of_death",
                            pl.col("_after_exit"),
                            "death after the member's exit: the member had left observation; not counted",
                            "excluded",
                            value=pl.format(
            "{}; exit on {} ({} row {})",
            pl.col("date_text"),
            pl.col("_exit").dt.to_string("%Y-%m-%d"),
            pl.lit(exits_file),
            pl.col("_exit_row"),
        ),
                        )
    after_death: Check = Check(
                             "exit_date",
                             pl.col("_after_death"),
                             "exit on or after the member's death: the death ends observation; exit ignored",
                             "excluded",
                             value=pl.format(
            "{}; death on {} ({} row {})",
            pl.col("date_text"),
            pl.col("_death").dt.to_string("%Y-%m-%d"),
            pl.lit(deaths_file),
            pl.col("_death_row"),
        ),
                         )
    bad_pension = (
        pl.col("pension_text").is_not_null()
        & (pl.col("pension_text") != "")
        & (pl.col("pension_at_death").is_null() | (pl.col("pension_at_death") < 0))
    )
    pension_warning: Check = Check(
                                 "pension_at_death",
                                 pl.col("_bad_pension"),
                                 f"{(deaths_headers or {}).get('pension_at_death', 'pension_at_death').strip()} is not a number "
        ">= 0: the record's pension is used",
                                 "warning",
                                 value=pl.col("pension_text"),
                             )
    d_counted = d_first.filter(~pl.col("_after_exit")).with_columns(bad_pension.alias("_bad_pension"))
    x_applied = x_first.filter(~pl.col("_after_death"))

    exceptions = pl.concat(
        [
            _problems(d_flags, deaths_file, d_checks, deaths_headers),
            _problems(d_ranked, deaths_file, d_dup, deaths_headers),
            _problems(d_first, deaths_file, [after_exit], deaths_headers),
            _problems(d_counted, deaths_file, [pension_warning], deaths_headers),
            _problems(x_flags, exits_file, x_checks, exits_headers),
            _problems(x_ranked, exits_file, x_dup, exits_headers),
            _problems(x_first, exits_file, [after_death], exits_headers),
        ],
        how="vertical",
    ).sort(["file", "row"], maintain_order=True)

    deaths_out = d_counted.select(
        "member_id",
        "row",
        "date",
        pl.when(pl.col("_bad_pension"))
        .then(None)
        .otherwise(pl.col("pension_at_death"))
        .alias("pension_at_death"),
    )
    exits_out = x_applied.select("member_id", "row", "date", "reason")
    counts = {
        "deaths": {
            "read": deaths.height,
            "counted": deaths_out.height,
            "excluded": deaths.height - deaths_out.height,
        },
        "exits": {
            "read": exits.height,
            "applied": exits_out.height,
            "excluded": exits.height - exits_out.height,
        },
    }
    return CheckedEvents(deaths=deaths_out, exits=exits_out, exceptions=exceptions, counts=counts)
