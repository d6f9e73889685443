"""Membership movements between two valuations: the two member extracts and the period's deaths and exits
read and checked, every member classified (:mod:`valuation.movements.classify`), and the files written."""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import date
from pathlib import Path

import polars as pl

from valuation.basis.model import Basis
from valuation.csvout import write_csv
from valuation.experience.checks import check_events
from valuation.experience.events import read_events_with_headers
from valuation.members.data import MemberData, read_members
from valuation.members.readers import DEFAULT_FORMAT, InputFormat
from valuation.members.validate import EXCEPTION_SCHEMA
from valuation.movements.classify import (
    CONTINUING,
    EXIT_REASONS,
    MOVEMENTS,
    STATUS_CHANGES,
    Movement,
    MovementsResult,
    classify_movements,
)


@dataclass(frozen=True)
class MovementsRun:
    """A movements analysis with its inputs' reconciliation: the classification, each extract's records
    read = valued + excluded, the deaths and exits counts, and every exception of every input."""

    result: MovementsResult
    previous: MemberData
    current: MemberData
    events: dict[str, dict[str, int]]
    exceptions: pl.DataFrame

    def summary(self) -> dict[str, object]:
        """What movements.json holds."""
        r = self.result
        return {
            "period_start": r.period_start.isoformat(),
            "period_end": r.period_end.isoformat(),
            "records": {
                "previous": {"read": self.previous.read, "valued": self.previous.valued,
                             "excluded": self.previous.excluded},
                "current": {"read": self.current.read, "valued": self.current.valued,
                            "excluded": self.current.excluded},
                **self.events,
            },
            "movements": r.counts(),
            "by_status": r.table.to_dicts(),
            "balances": r.balances(),
            "deaths_reconciliation": r.deaths,
            "exceptions": {"total": self.exceptions.height,
                           "excluded": int((self.exceptions["severity"] == "excluded").sum()),
                           "warning": int((self.exceptions["severity"] == "warning").sum())},
        }

    def write(self, folder: Path, *, inputs_listed: bool = True) -> None:
        """movements.json, movements.csv (the reconciliation by status), movement_members.csv (one row a
        member) and movements_exceptions.csv into ``folder`` (formula-safe CSV). ``inputs_listed`` False:
        the exceptions file holds the movements' own (unexplained cases, data changes) only, for a run
        folder whose other exceptions files already list the inputs' problems."""
        (folder / "movements.json").write_text(json.dumps(self.summary(), indent=2) + "\n", encoding="utf-8")
        write_csv(self.result.table, folder / "movements.csv")
        write_csv(self.result.members, folder / "movement_members.csv")
        write_csv(self.exceptions if inputs_listed else self.result.exceptions, folder / "movements_exceptions.csv")

    def text(self) -> str:
        """The reconciliation as the command line prints it."""
        t = self.result.table
        lines = [f"membership movements {self.result.period_start.isoformat()} to {self.result.period_end.isoformat()}",
                 f"previous extract: read {self.previous.read:,} = valued {self.previous.valued:,} + excluded "
                 f"{self.previous.excluded:,}; current extract: read {self.current.read:,} = valued "
                 f"{self.current.valued:,} + excluded {self.current.excluded:,}"]
        shown = [m for m in MOVEMENTS if (t[m] != 0).any()]
        head = ["status", "start", *shown, "end"]
        rows = [[str(v) for v in r] for r in t.select(head).iter_rows()]
        widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(head)]
        lines.append("  ".join(h.rjust(w) for h, w in zip(head, widths, strict=True)))
        lines += ["  ".join(v.rjust(w) for v, w in zip(r, widths, strict=True)) for r in rows]
        d = self.result.deaths
        lines.append(f"deaths: {d['matched']:,} in the deaths file and gone from the extracts; "
                     f"{d['deaths_file_only']:,} in the deaths file only; {d['extracts_only']:,} gone from the "
                     "extracts with no death or exit record")
        for kind, counts in self.events.items():
            if counts.get("excluded"):
                lines.append(f"warning: {counts['excluded']:,} of {counts['read']:,} {kind} rows were excluded (see "
                             "movements_exceptions.csv)")
        unexplained = self.result.counts()["unexplained"]
        if unexplained:
            lines.append(f"warning: {unexplained:,} unexplained movements, listed in movements_exceptions.csv")
        return "\n".join(lines)


def membership_movements(
    basis: Basis,
    previous_path: str | Path | MemberData,
    current_path: str | Path | MemberData,
    *,
    period_start: date,
    period_end: date,
    deaths_path: str | Path | None = None,
    exits_path: str | Path | None = None,
    fmt: InputFormat = DEFAULT_FORMAT,
) -> MovementsRun:
    """Read the two extracts (each checked as at its own date: the previous at ``period_start``, the current
    at ``period_end``; an extract already read is taken as it is) and the deaths and exits files (checked
    against the previous extract and the period), and classify every member.

    References
    ----------
    Common practice (see :mod:`valuation.movements.classify`).
    """
    previous = (previous_path if isinstance(previous_path, MemberData)
                else read_members(previous_path, basis.model_copy(update={"valuation_date": period_start}), fmt))
    current = (current_path if isinstance(current_path, MemberData)
               else read_members(current_path, basis.model_copy(update={"valuation_date": period_end}), fmt))
    previous_path, current_path = previous.path, current.path
    mapping = basis.mapping
    column_map = dict(mapping.columns)
    empty_deaths = pl.DataFrame(schema={"row": pl.Int64, "member_id": pl.String, "date_text": pl.String,
                                        "date": pl.Date, "pension_text": pl.String, "pension_at_death": pl.Float64})
    deaths, d_headers = (read_events_with_headers(deaths_path, "deaths", date_format=mapping.date_format,
                                                  column_map=column_map, fmt=fmt)
                         if deaths_path else (empty_deaths, {}))
    exits, x_headers = (read_events_with_headers(exits_path, "exits", date_format=mapping.date_format,
                                                 column_map=column_map, fmt=fmt)
                        if exits_path else (None, {}))
    excluded = previous.exceptions.filter(pl.col("severity") == "excluded")["member_id"]
    checked = check_events(
        deaths, exits, valued_ids=previous.records["member_id"], excluded_ids=excluded,
        period_start=period_start, period_end=period_end, deaths_file=str(deaths_path or ""),
        exits_file=str(exits_path or ""), members_file=str(previous_path), date_format=mapping.date_format,
        deaths_headers=d_headers, exits_headers=x_headers,
    )
    result = classify_movements(
        previous.records, current.records, deaths=checked.deaths if deaths_path else None,
        exits=checked.exits if exits_path else None, period_start=period_start, period_end=period_end,
        previous_file=str(previous_path), current_file=str(current_path),
        age_convention=basis.age_convention,
        excluded_ids=pl.concat([
            frame.filter(pl.col("severity") == "excluded")["member_id"].cast(pl.String)
            for frame in (previous.exceptions, current.exceptions)]).drop_nulls(),
    )
    events = {k: v for k, v in checked.counts.items() if (k == "deaths" and deaths_path) or (k == "exits" and exits_path)}
    exceptions = pl.concat([
        frame.select([pl.col(c).cast(t) for c, t in EXCEPTION_SCHEMA.items()])
        for frame in (previous.exceptions, current.exceptions, checked.exceptions, result.exceptions)
    ])
    return MovementsRun(result=result, previous=previous, current=current, events=events, exceptions=exceptions)


__all__ = ["CONTINUING", "EXIT_REASONS", "MOVEMENTS", "STATUS_CHANGES", "Movement", "MovementsResult", "MovementsRun",
           "classify_movements", "membership_movements"]
