"""Membership movements between two member extracts: each member classified by a stated rule, and the
reconciliation of the counts by status (start + movements = end, for every status).

Rules, in the order they are applied (each member gets exactly one movement; the README lists them too):

* in both extracts with the same status: ``continuing`` (no movement);
* in both, active then deferred: ``withdrawal``; active or deferred then pensioner: ``retirement``;
  deferred then active: ``reinstated``; any other change of status: ``unexplained``;
* in the previous extract only, with a death in the period in the deaths file: ``death``; with an exit in
  the exits file: by its reason, ``transfer_out``, ``lump_sum_settlement`` (reasons ``lump_sum``,
  ``settlement``, ``trivial_commutation``), ``child_pension_ceased`` (``child_pension_ended``), or
  ``other_exit`` (any other reason, kept in ``detail``); a dependant whose pension's end age falls by the
  end of the period: ``child_pension_ceased``; otherwise ``unexplained`` (gone without a death or exit
  record: possibly an unreported death);
* in the current extract only: an active member ``new_entrant``, a dependant ``new_dependant``; a deferred
  member or a pensioner ``unexplained`` (appeared without being a new entrant).

Every ``unexplained`` member is an exception with its reason, and so is a member whose date of birth or sex
differs between the extracts (counted by its status movement, flagged as ``data changed``), and a member the
deaths file says died who is still in the current extract. Deaths are reconciled three ways: in the deaths
file and gone from the extracts (``matched``), in the deaths file only (still in the current extract), and
gone from the extracts only (no death or exit record).

References
----------
Common practice: the reconciliation of membership (numbers at the start, movements, numbers at the end) that
opens the data section of a scheme valuation report, with each movement told from the administrator's two
extracts and the period's deaths and exits.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Final, Literal, get_args

import numpy as np
import polars as pl

from valuation.members.validate import EXCEPTION_SCHEMA
from valuation.survival import AgeConvention, age_at
from valuation.vocabulary import STATUSES

Movement = Literal[
    "withdrawal", "retirement", "reinstated", "death", "transfer_out", "lump_sum_settlement", "other_exit",
    "child_pension_ceased", "new_entrant", "new_dependant", "unexplained",
]
#: The movements, in the reconciliation table's column order.
MOVEMENTS: Final[tuple[Movement, ...]] = get_args(Movement)
#: A member in both extracts in the same status.
CONTINUING: Final = "continuing"

#: Exit reasons (exits file) and the movement each is.
EXIT_REASONS: Final[dict[str, Movement]] = {
    "transfer_out": "transfer_out",
    "lump_sum": "lump_sum_settlement",
    "settlement": "lump_sum_settlement",
    "trivial_commutation": "lump_sum_settlement",
    "child_pension_ended": "child_pension_ceased",
}

#: Status changes between the extracts that a movement explains.
STATUS_CHANGES: Final[dict[tuple[str, str], Movement]] = {
    ("active", "deferred"): "withdrawal",
    ("active", "pensioner"): "retirement",
    ("deferred", "pensioner"): "retirement",
    ("deferred", "active"): "reinstated",
}

GONE_UNEXPLAINED: Final = "in the previous extract but not in the current one, with no death or exit record"
APPEARED_UNEXPLAINED: Final = "in the current extract but not in the previous one, and not a new active member or dependant"
STATUS_UNEXPLAINED: Final = "status changed between the extracts in a way no movement explains"
DOB_CHANGED: Final = "date of birth differs between the extracts (data changed)"
SEX_CHANGED: Final = "sex differs between the extracts (data changed)"
DEAD_BUT_PRESENT: Final = "the deaths file records a death in the period, but the member is in the current extract"
EXCLUDED_OTHER: Final = ("the record is valid in one extract and excluded from the other for its data problems (see "
                          "that file's exceptions): its movement cannot be told")
EXIT_BUT_PRESENT: Final = "the exits file records an exit in the period, but the member is in the current extract"


@dataclass(frozen=True)
class MovementsResult:
    """Every member's movement, the reconciliation by status, the deaths reconciliation and the exceptions.

    Attributes
    ----------
    members
        One row a member of either extract: ``member_id``, ``status_start`` and ``status_end`` (null where
        absent), ``movement`` (one of :data:`MOVEMENTS` or ``continuing``), ``detail`` (the exit reason as
        given, or the data change), ``data_changed`` (date of birth or sex differ).
    table
        One row a status, then ``total``: ``start``, one column a movement (the signed change in the status's
        count), ``end``; start + the movements = end on every row.
    deaths
        ``matched``, ``deaths_file_only``, ``extracts_only`` (counts).
    exceptions
        Every unexplained member and data change, in the members' exceptions schema.
    """

    members: pl.DataFrame
    table: pl.DataFrame
    deaths: dict[str, int]
    exceptions: pl.DataFrame
    period_start: date
    period_end: date

    def balances(self) -> bool:
        """start + movements = end on every row of the table (always true; checked by the tests)."""
        moved = self.table.select(pl.sum_horizontal(*MOVEMENTS)).to_series()
        return bool(((self.table["start"] + moved) == self.table["end"]).all())

    def counts(self) -> dict[str, int]:
        """Members by movement (``continuing`` included)."""
        by = self.members.group_by("movement").len()
        found = dict(zip(by["movement"].to_list(), by["len"].to_list(), strict=True))
        return {m: int(found.get(m, 0)) for m in (CONTINUING, *MOVEMENTS)}


def _side(records: pl.DataFrame, suffix: str) -> pl.DataFrame:
    cols = ["member_id", "row", "status", "sex", "date_of_birth"]
    extra = [c for c in ("pension_end_age",) if c in records.columns]
    return records.select(*cols, *extra).rename({c: f"{c}{suffix}" for c in cols[1:] + extra})


def classify_movements(
    previous: pl.DataFrame,
    current: pl.DataFrame,
    *,
    deaths: pl.DataFrame | None = None,
    exits: pl.DataFrame | None = None,
    period_start: date,
    period_end: date,
    previous_file: str = "previous",
    current_file: str = "current",
    excluded_ids: pl.Series | None = None,
    age_convention: AgeConvention = "exact",
) -> MovementsResult:
    """Classify every member of two extracts (valid records, as :func:`~valuation.members.read_members`
    returns them) by the module's rules; vectorised with polars joins (no per-member Python loop).

    Parameters
    ----------
    previous, current
        The member records at the start and at the end of the period (``member_id``, ``row``, ``status``,
        ``sex``, ``date_of_birth``, and ``pension_end_age`` where given).
    deaths, exits
        Checked deaths and exits in the period (``member_id``, ``date``; exits also ``reason``), as
        :func:`~valuation.experience.checks.check_events` returns them; None for none.
    period_start, period_end
        The period between the two extracts.
    previous_file, current_file
        The files' names, for the exceptions.
    excluded_ids
        Members whose record either extract excluded for its data problems: a member valid in one extract and
        excluded from the other is ``unexplained`` with that reason (its movement cannot be told), never
        counted as a death or a new entrant.
    age_convention
        How the age at the period end is counted for a child's pension's end age (the basis's convention).

    References
    ----------
    Common practice (see the module docstring).
    """
    both = _side(previous, "_start").join(_side(current, "_end"), on="member_id", how="full", coalesce=True)
    d = (deaths.select("member_id", pl.lit(True).alias("_died")) if deaths is not None and deaths.height
         else pl.DataFrame(schema={"member_id": pl.String, "_died": pl.Boolean}))
    # an exit's reason compared as words: case, spaces and hyphens aside ("Transfer out" is transfer_out)
    reason = (pl.col("reason").cast(pl.String).str.strip_chars().str.to_lowercase()
              .str.replace_all(r"[\s\-]+", "_") if exits is not None and "reason" in exits.columns
              else pl.lit(None, dtype=pl.String))
    x = (exits.select("member_id", reason.alias("_exit"), pl.lit(True).alias("_exited"))
         if exits is not None and exits.height
         else pl.DataFrame(schema={"member_id": pl.String, "_exit": pl.String, "_exited": pl.Boolean}))
    both = both.join(d.unique("member_id"), on="member_id", how="left").join(
        x.unique("member_id", keep="first"), on="member_id", how="left")
    bad = excluded_ids.unique() if excluded_ids is not None else pl.Series("member_id", [], pl.String)
    both = both.with_columns(pl.col("member_id").is_in(bad.implode()).alias("_excluded"))
    start, end = pl.col("status_start"), pl.col("status_end")
    in_start, in_end = start.is_not_null(), end.is_not_null()
    died = pl.col("_died").fill_null(False)
    exit_reason = pl.col("_exit")
    exited = pl.col("_exited").fill_null(False)
    end_age_reached = pl.lit(False)
    if "pension_end_age_start" in both.columns:
        # the age at the period end by the basis's age convention, as the member checks count it
        dob = np.asarray(both["date_of_birth_start"].to_numpy(), dtype="datetime64[D]")
        age = np.asarray(age_at(dob, np.datetime64(period_end, "D"), age_convention), dtype=float)
        both = both.with_columns(pl.Series("_age_at_end", age))
        end_age_reached = (start == "dependant") & (pl.col("pension_end_age_start") <= pl.col("_age_at_end")).fill_null(False)
    change = pl.concat_str([start, pl.lit(">"), end])
    explained = pl.lit(None, dtype=pl.String)
    for (a, b), name in STATUS_CHANGES.items():
        explained = pl.when(change == f"{a}>{b}").then(pl.lit(name)).otherwise(explained)
    one_side_excluded = (in_start ^ in_end) & pl.col("_excluded")
    movement = (
        pl.when(in_start & in_end & (start == end)).then(pl.lit(CONTINUING))
        .when(one_side_excluded).then(pl.lit("unexplained"))
        .when(in_start & in_end).then(explained.fill_null("unexplained"))
        .when(in_start & died).then(pl.lit("death"))
        .when(in_start & exited).then(
            exit_reason.replace_strict(EXIT_REASONS, default="other_exit", return_dtype=pl.String).fill_null("other_exit"))
        .when(in_start & end_age_reached).then(pl.lit("child_pension_ceased"))
        .when(in_start).then(pl.lit("unexplained"))
        .when(end == "active").then(pl.lit("new_entrant"))
        .when(end == "dependant").then(pl.lit("new_dependant"))
        .otherwise(pl.lit("unexplained"))
    )
    dob_changed = in_start & in_end & (pl.col("date_of_birth_start") != pl.col("date_of_birth_end"))
    sex_changed = in_start & in_end & (pl.col("sex_start") != pl.col("sex_end"))
    members = both.with_columns(
        movement.alias("movement"),
        pl.when(in_start & ~in_end & ~died & exited).then(exit_reason.fill_null("(no reason given)"))
        .when(dob_changed).then(pl.lit("date of birth changed"))
        .when(sex_changed).then(pl.lit("sex changed"))
        .otherwise(pl.lit(None, dtype=pl.String)).alias("detail"),
        (dob_changed | sex_changed).alias("data_changed"),
        (died & in_end).alias("_dead_but_present"),
        (exited & ~died & in_end).alias("_exit_but_present"),
    ).sort("member_id")
    table = _table(members)
    deaths_rec = {
        "matched": int(members.filter(pl.col("movement") == "death").height),
        "deaths_file_only": int(members.filter(pl.col("_dead_but_present")).height),
        "extracts_only": int(members.filter(in_start & ~in_end & ~pl.col("_excluded")
                                            & (pl.col("movement") == "unexplained")).height),
    }
    exceptions = _exceptions(members, previous_file, current_file)
    out = members.select("member_id", "status_start", "status_end", "movement", "detail", "data_changed")
    return MovementsResult(members=out, table=table, deaths=deaths_rec, exceptions=exceptions,
                           period_start=period_start, period_end=period_end)


def _table(members: pl.DataFrame) -> pl.DataFrame:
    """The reconciliation: for each status its count at the start, the signed change from each movement, and
    its count at the end; a ``total`` row last."""
    rows = []
    for status in STATUSES:
        start_n = members.filter(pl.col("status_start") == status).height
        end_n = members.filter(pl.col("status_end") == status).height
        row: dict[str, object] = {"status": status, "start": start_n}
        for m in MOVEMENTS:
            moved = members.filter(pl.col("movement") == m)
            row[m] = (moved.filter(pl.col("status_end") == status).height
                      - moved.filter(pl.col("status_start") == status).height)
        row["end"] = end_n
        rows.append(row)
    schema: dict[str, type[pl.DataType]] = {"status": pl.String, "start": pl.Int64,
                                            **dict.fromkeys(MOVEMENTS, pl.Int64), "end": pl.Int64}
    table = pl.DataFrame(rows, schema=schema)
    total = table.select(pl.lit("total").alias("status"), pl.exclude("status").sum())
    return pl.concat([table, total])


def _exceptions(members: pl.DataFrame, previous_file: str, current_file: str) -> pl.DataFrame:
    """One row a problem: unexplained members, data changes, deaths or exits of members still present."""
    parts = []

    def add(mask: pl.Expr, file: str, row: str, column: str | None, value: pl.Expr, reason: str,
            severity: str) -> None:
        parts.append(members.filter(mask).select(
            pl.lit(file).alias("file"), pl.col(row).cast(pl.Int64).alias("row"), pl.col("member_id"),
            pl.lit(column, dtype=pl.String).alias("column"), pl.lit(column, dtype=pl.String).alias("file_column"),
            value.cast(pl.String).alias("value"), pl.lit(reason).alias("reason"), pl.lit(severity).alias("severity"),
        ))

    unexplained = pl.col("movement") == "unexplained"
    in_start, in_end = pl.col("status_start").is_not_null(), pl.col("status_end").is_not_null()
    excluded = pl.col("_excluded")
    add(unexplained & in_start & ~in_end & excluded, previous_file, "row_start", "status", pl.col("status_start"),
        EXCLUDED_OTHER, "warning")
    add(unexplained & ~in_start & in_end & excluded, current_file, "row_end", "status", pl.col("status_end"),
        EXCLUDED_OTHER, "warning")
    add(unexplained & in_start & ~in_end & ~excluded, previous_file, "row_start", "status", pl.col("status_start"),
        GONE_UNEXPLAINED, "warning")
    add(unexplained & ~in_start & in_end & ~excluded, current_file, "row_end", "status", pl.col("status_end"),
        APPEARED_UNEXPLAINED, "warning")
    add(unexplained & in_start & in_end, current_file, "row_end", "status",
        pl.concat_str([pl.col("status_start"), pl.lit(" then "), pl.col("status_end")]), STATUS_UNEXPLAINED,
        "warning")
    add(pl.col("data_changed") & (pl.col("date_of_birth_start") != pl.col("date_of_birth_end")), current_file,
        "row_end", "date_of_birth",
        pl.concat_str([pl.col("date_of_birth_start").cast(pl.String), pl.lit(" then "),
                       pl.col("date_of_birth_end").cast(pl.String)]), DOB_CHANGED, "warning")
    add(pl.col("data_changed") & (pl.col("sex_start") != pl.col("sex_end")), current_file, "row_end", "sex",
        pl.concat_str([pl.col("sex_start"), pl.lit(" then "), pl.col("sex_end")]), SEX_CHANGED, "warning")
    add(pl.col("_dead_but_present"), current_file, "row_end", None, pl.col("status_end"), DEAD_BUT_PRESENT,
        "warning")
    add(pl.col("_exit_but_present"), current_file, "row_end", None, pl.col("status_end"), EXIT_BUT_PRESENT,
        "warning")
    frame = pl.concat(parts) if parts else pl.DataFrame(schema=EXCEPTION_SCHEMA)
    return frame.select([pl.col(c).cast(t) for c, t in EXCEPTION_SCHEMA.items()]).sort("file", "row", "member_id")


__all__ = ["CONTINUING", "EXIT_REASONS", "MOVEMENTS", "STATUS_CHANGES", "Movement", "MovementsResult",
           "classify_movements"]
