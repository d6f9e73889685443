"""The one pipeline: load the basis, read the members once, check them, value each scenario once, analyse the
experience, write the run folder. ``valuation run``, ``valuation batch``, streaming and the Python API
(:func:`valuation.value_scheme`, :func:`valuation.write_run`) all come through here, so a feature added here
is added everywhere.

The experience analysis never reads or values member files itself: it is handed the base liability and a
way to value the records already read on another basis (:class:`~valuation.experience.implied.ValuedScheme`).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import Any

import polars as pl

from valuation.basis import load_basis
from valuation.basis.model import Basis
from valuation.csvout import write_csv
from valuation.engine.change import STEPS, AnalysisOfChange, ChangeLine, Step, fields_of, with_fields
from valuation.engine.gate import check_exclusions
from valuation.engine.results import ValuationResult
from valuation.engine.rollforward import CAUTION as ROLL_FORWARD_CAUTION
from valuation.engine.rollforward import RollForward, roll_forward
from valuation.engine.run import DEFAULT_CHUNK, Progress, input_hashes, value_members
from valuation.engine.stream import value_file_streaming
from valuation.engine.summary import Records
from valuation.engine.write import MANIFEST, ExtraWriter, atomic_folder, check_output_folder, write_into
from valuation.errors import BasisError, DataError, ValuationError
from valuation.experience import ExperienceSettings, analyse_experience
from valuation.experience.implied import ValuedScheme
from valuation.experience.result import ExperienceResult
from valuation.manifest import dump_json
from valuation.members.data import MemberData, MemberInput, members_from_frame, read_members
from valuation.members.readers import DEFAULT_FORMAT, InputFormat
from valuation.members.validate import UNKNOWN_STATUS
from valuation.movements import CONTINUING, MOVEMENTS, MovementsResult, MovementsRun, membership_movements
from valuation.reports import write_html, write_workbook
from valuation.version import __version__

Say = Callable[[str], None]
_MEMBER_SUFFIXES = (".csv", ".txt", ".xlsx", ".parquet")


@dataclass(frozen=True)
class ExperienceInputs:
    """The experience analysis of a run: the membership at the period start, the deaths (and other exits)
    in the period, and its settings (period, exposure, intervals, credibility)."""

    start_members: Path
    deaths: Path
    settings: ExperienceSettings
    exits: Path | None = None

    @property
    def files(self) -> list[Path]:
        return [p for p in (self.start_members, self.deaths, self.exits) if p is not None]


@dataclass
class Outcome:
    """What a run produced: the valuation, the experience analysis (if asked for), the folder written."""

    result: ValuationResult
    experience: ExperienceResult | None = None
    folder: Path | None = None
    #: the membership movements from the start membership to the valued members (with the experience)
    movements: MovementsRun | None = None
    #: the analysis of change from the previous valuation (with the experience and a previous basis)
    change: ChangeRun | None = None
    data: MemberData | None = field(default=None, repr=False)


def _quiet(_text: str) -> None:
    """A ``say`` that says nothing."""


def _check_exposure(res: ExperienceResult, start_members: Path, basis: Basis | None = None, accept: bool = True,
                    warn: Say = _quiet) -> ExperienceResult:
    """An experience analysis with no exposure (no start member alive and in the scheme during the period)
    tells nothing: an input error, before anything is written. The start membership passes the same
    exclusion limit as the valuation's member file."""
    members = res.summary["records"]["members"]
    if basis is not None:
        gate(basis, start_members, members["read"], members["valued"], members["excluded"], accept, warn)
    overall = res.table.filter(pl.col("dimension") == "overall")
    if overall.height == 0 or not float(overall["exposure_years"].fill_null(0.0).sum()) > 0.0:
        raise DataError("the experience analysis has no exposure: no member of the start membership was in the "
                        "scheme during the period", file=start_members,
                        fix="check the start membership file and the period dates (--period-start, --period-end)")
    return res


def as_basis(basis: Basis | str | Path) -> Basis:
    """A loaded basis, from itself or from its TOML file."""
    return basis if isinstance(basis, Basis) else load_basis(basis)


def read(basis: Basis, members: MemberInput, fmt: InputFormat = DEFAULT_FORMAT) -> MemberData:
    """The member records, read once: from a file (CSV, XLSX, Parquet), a polars or pandas data frame, or
    records already read."""
    if isinstance(members, MemberData):
        return members
    if isinstance(members, (str, Path)):
        return read_members(members, basis, fmt)
    return members_from_frame(members, basis)


def report_writers(experience: ExperienceResult | None = None, movements: MovementsResult | None = None,
                   analysis: AnalysisOfChange | None = None) -> list[ExtraWriter]:
    """Writers of the actuary's workbook (``valuation.xlsx``) and the trustees' summary (``summary.html``),
    with an experience analysis and the membership movements in both when they are given."""

    def workbook(result: ValuationResult, folder: Path) -> None:
        write_workbook(result, folder / "valuation.xlsx", experience=experience, movements=movements,
                       analysis=analysis)

    def html(result: ValuationResult, folder: Path) -> None:
        write_html(result, folder / "summary.html", experience=experience, movements=movements, analysis=analysis)

    return [workbook, html]


def writers_for(outcome: Outcome, *, reports: bool) -> list[ExtraWriter]:
    """Every writer a run folder needs beyond the tables: reports, and the experience files."""
    moved = outcome.movements
    changed = outcome.change
    writers = (report_writers(outcome.experience, moved.result if moved else None,
                              changed.analysis if changed else None) if reports else [])
    if changed is not None:
        writers.append(lambda _res, folder: changed.write(folder))
    experience = outcome.experience
    if experience is not None:
        writers.append(lambda _res, folder: experience.write(folder))
    if moved is not None:
        writers.append(lambda _res, folder: moved.write(folder, inputs_listed=False))
    return writers


def gate(basis: Basis, path: str | Path, read_n: int, valued: int, excluded: int, accept: bool, say: Say,
         listed_in: str = "exceptions.csv and at the top of the reports") -> None:
    """Stop a run that values nothing or leaves out too many records (:func:`check_exclusions`); say where
    the excluded records are listed."""
    check_exclusions(read=read_n, valued=valued, excluded=excluded, path=path,
                     max_share=basis.thresholds.max_excluded_share, accept=accept)
    if excluded:
        say(f"warning: {excluded:,} of {read_n:,} records were excluded and are not in the liability; they are "
            f"listed in {listed_in}")


def _reconcile(
    basis: Basis, path: str | Path, text: str, read_n: int, valued: int, excluded: int, ignored: Sequence[str],
    accept: bool, say: Say, warn: Say,
) -> None:
    """Say the reconciliation, warn of the columns not used, and stop at the exclusion gate."""
    say(text)
    if ignored:
        warn("warning: columns not used by the valuation (neither ours nor mapped in the basis's [mapping.columns]): "
             + ", ".join(ignored))
    gate(basis, path, read_n, valued, excluded, accept, warn)


def valued_scheme(basis: Basis, data: MemberData, liability: float, chunk_size: int = DEFAULT_CHUNK) -> ValuedScheme:
    """The base liability and a re-valuation of the same records on another basis, for the experience."""
    return ValuedScheme(
        liability=liability,
        revalue=lambda other: value_members(other, data, sensitivities=False, chunk_size=chunk_size).total_liability,
    )


def run(
    basis: Basis | str | Path,
    members: MemberInput,
    *,
    out: str | Path | None = None,
    overwrite: bool = False,
    fmt: InputFormat = DEFAULT_FORMAT,
    sensitivities: bool = True,
    reports: bool = True,
    chunk_size: int = DEFAULT_CHUNK,
    stream: bool = False,
    accept_exclusions: bool = False,
    experience: ExperienceInputs | None = None,
    previous_basis: Basis | str | Path | None = None,
    progress: Progress | None = None,
    say: Say = _quiet,
    warn: Say = _quiet,
) -> Outcome:
    """Value a scheme from start to finish, and write its run folder when ``out`` is given.

    Parameters
    ----------
    basis : Basis, str or Path
        The assumptions basis, loaded or as a TOML file.
    members : str, Path, polars or pandas DataFrame, or MemberData
        The member records.
    out : str or Path, optional
        The run folder: new, empty, or (with ``overwrite``) a previous run. Checked before any work.
    fmt : InputFormat
        A member file's delimiter, encoding or sheet.
    sensitivities, reports : bool
        Value the basis's sensitivities; write the workbook and the HTML summary.
    chunk_size : int
        Members valued at a time (and, with ``stream``, read at a time) [records].
    stream : bool
        Read, check and value a CSV or Parquet file chunk by chunk; per-member rows go straight to the run
        folder (needs ``out``; no experience analysis).
    accept_exclusions : bool
        Value the remaining records when more are excluded than the basis allows.
    experience : ExperienceInputs, optional
        Add the experience analysis, with the liability effect of the implied mortality, and the membership
        movements over its period.
    previous_basis : Basis, str or Path, optional
        With ``experience``: the previous valuation's basis, dated the period start, for the analysis of
        change from the previous valuation (the start membership on it) to this one.
    progress : callable, optional
        ``progress(stage, done, total)``.
    say, warn : callable, optional
        Where the reconciliation and warnings go (the command line prints them).

    Raises
    ------
    ValuationError
        Any input or output problem (DataError, BasisError, TableError, OutputError), or ExclusionsError.
    """
    loaded = as_basis(basis)
    previous = as_basis(previous_basis) if previous_basis is not None else None
    if previous is not None and (experience is None or previous.valuation_date != experience.settings.period_start):
        start_text = experience.settings.period_start.isoformat() if experience else "not given"
        raise BasisError(f"the analysis of change needs the start membership and a previous basis dated the period "
                         f"start (the basis is dated {previous.valuation_date.isoformat()}, the period starts "
                         f"{start_text})", file=previous.source_path,
                         fix="give --start-members, --deaths and the period, and a previous basis whose "
                             "valuation_date is --period-start")
    member_file = members if isinstance(members, (str, Path)) else None
    inputs: list[Any] = [p for p in (loaded.source_path, member_file) if p is not None]
    inputs += experience.files if experience else []
    inputs += [previous.source_path] if previous is not None else []
    if out is not None:
        check_output_folder(out, overwrite=overwrite, inputs=inputs)
    if stream:
        if out is None or member_file is None or experience is not None:
            raise ValuationError("streaming reads a member file and writes per-member rows into a run folder, "
                                 "without the experience analysis",
                                 fix="give a member file and an output folder, and run the experience separately")
        return _run_streaming(loaded, Path(member_file), Path(out), overwrite=overwrite, fmt=fmt,
                              sensitivities=sensitivities, reports=reports, chunk_size=chunk_size,
                              accept_exclusions=accept_exclusions, progress=progress, say=say, warn=warn,
                              inputs=inputs)
    if progress:
        progress("reading", 0, 1)
    data = read(loaded, members, fmt)
    _reconcile(loaded, data.path, data.reconciliation_text(), data.read, data.valued, data.excluded,
               data.ignored_columns, accept_exclusions, say, warn)
    result = value_members(loaded, data, sensitivities=sensitivities, chunk_size=chunk_size, progress=progress,
                           input_files=experience.files if experience else [])
    outcome = Outcome(result=result, data=data)
    if experience is not None:
        period = experience.settings
        start = read_members(experience.start_members, loaded.model_copy(update={"valuation_date": period.period_start}))
        outcome.experience = _check_exposure(analyse_experience(
            experience.start_members, experience.deaths, loaded, experience.settings, exits_path=experience.exits,
            valued=valued_scheme(loaded, data, result.total_liability, chunk_size), start_data=start),
            experience.start_members, loaded, accept_exclusions, warn)
        outcome.movements = membership_movements(
            loaded, start, data, period_start=period.period_start, period_end=period.period_end,
            deaths_path=experience.deaths, exits_path=experience.exits)
        if previous is not None:  # the start membership read again on the previous basis's own rules
            outcome.change = change(previous, experience.start_members, loaded, data, deaths=experience.deaths,
                                    exits=experience.exits, accept_exclusions=accept_exclusions, warn=warn,
                                    current_liability=result.total_liability)
    if out is not None:
        if progress:
            progress("writing", 0, 1)
        with atomic_folder(out, overwrite=overwrite, inputs=inputs) as tmp:
            write_into(result, tmp, writers_for(outcome, reports=reports))
        outcome.folder = Path(out)
    return outcome


def _run_streaming(
    basis: Basis, path: Path, out: Path, *, overwrite: bool, fmt: InputFormat, sensitivities: bool, reports: bool,
    chunk_size: int, accept_exclusions: bool, progress: Progress | None, say: Say, warn: Say, inputs: list[Any],
) -> Outcome:
    with atomic_folder(out, overwrite=overwrite, inputs=inputs) as tmp:
        result = value_file_streaming(basis, path, chunk_rows=chunk_size, member_results_path=tmp / "members.parquet",
                                      sensitivities=sensitivities, progress=progress, fmt=fmt)
        r = result.summary.records
        _reconcile(basis, path, _reconciliation(r), r.read, r.valued, r.excluded, r.ignored_columns,
                   accept_exclusions, say, warn)
        if progress:
            progress("writing", 0, 1)
        write_into(result, tmp, report_writers() if reports else [])
    return Outcome(result=result, folder=out)


def _reconciliation(r: Records) -> str:
    """records read = valued + excluded, then by status, as :meth:`MemberData.reconciliation_text` says it."""
    lines = [f"records read {r.read:,} = valued {r.valued:,} + excluded {r.excluded:,}"]
    for status, c in r.by_status.items():
        lines.append(f"  {status}: read {c.read:,} = valued {c.valued:,} + excluded {c.excluded:,}")
    unknown = r.read - sum(c.read for c in r.by_status.values())
    if unknown:
        lines.append(f"  {UNKNOWN_STATUS}: read {unknown:,} = valued 0 + excluded {unknown:,}")
    return "\n".join(lines)


def experience_only(
    basis: Basis | str | Path,
    inputs: ExperienceInputs,
    *,
    valuation_members: str | Path | None = None,
    fmt: InputFormat = DEFAULT_FORMAT,
    chunk_size: int = DEFAULT_CHUNK,
    accept_exclusions: bool = False,
    warn: Say = _quiet,
) -> ExperienceResult:
    """The experience analysis on its own; with ``valuation_members``, the liability effect too (the members
    read once and valued on the basis, then on the basis at the implied percentages)."""
    loaded = as_basis(basis)
    valued = None
    if valuation_members is not None:
        data = read(loaded, valuation_members, fmt)
        base = value_members(loaded, data, sensitivities=False, chunk_size=chunk_size).total_liability
        valued = valued_scheme(loaded, data, base, chunk_size)
    return _check_exposure(analyse_experience(inputs.start_members, inputs.deaths, loaded, inputs.settings,
                                              exits_path=inputs.exits, valued=valued), inputs.start_members,
                           loaded, accept_exclusions, warn)


def movements(
    basis: Basis | str | Path,
    previous: str | Path,
    current: str | Path,
    *,
    period_start: date,
    period_end: date,
    deaths: str | Path | None = None,
    exits: str | Path | None = None,
    out: str | Path | None = None,
    overwrite: bool = False,
    fmt: InputFormat = DEFAULT_FORMAT,
    settings: dict[str, str] | None = None,
    accept_exclusions: bool = False,
    warn: Say = _quiet,
) -> MovementsRun:
    """Membership movements between two member extracts (:mod:`valuation.movements`), and its folder when
    ``out`` is given: movements.json, movements.csv, movement_members.csv, movements_exceptions.csv and the
    manifest (input hashes, tool version, ``settings``). The output folder is checked before any work. Each
    extract passes the exclusion limit a valuation's member file does (``accept_exclusions`` lets more by)."""
    loaded = as_basis(basis)
    if Path(previous).resolve() == Path(current).resolve():
        raise DataError("the previous and the current extract are the same file", file=previous,
                        fix="give the member extract at the period start, then the one at the period end")
    inputs: list[Any] = [p for p in (loaded.source_path, previous, current, deaths, exits) if p is not None]
    if out is not None:
        check_output_folder(out, overwrite=overwrite, inputs=inputs)
    found = membership_movements(loaded, previous, current, period_start=period_start, period_end=period_end,
                                 deaths_path=deaths, exits_path=exits, fmt=fmt)
    for data in (found.previous, found.current):
        gate(loaded, data.path, data.read, data.valued, data.excluded, accept_exclusions, warn,
             listed_in="movements_exceptions.csv")
    if out is not None:
        _write_folder(out, overwrite, inputs, "movements", settings or {
            "period_start": period_start.isoformat(), "period_end": period_end.isoformat()}, found.write)
    return found


@dataclass(frozen=True)
class RollForwardRun:
    """A roll-forward and what it was made from."""

    rolled: RollForward
    valuation_date: date
    to: date
    previous_basis: str
    new_basis: str | None
    notes: list[str]
    #: the member data's exceptions (exceptions.csv of the folder)
    exceptions: pl.DataFrame = field(default_factory=pl.DataFrame)

    def summary(self) -> dict[str, object]:
        """What rollforward.json holds."""
        r = self.rolled
        return {"valuation_date": self.valuation_date.isoformat(), "rolled_to": self.to.isoformat(),
                "months": r.months, "previous_basis": self.previous_basis, "new_basis": self.new_basis,
                "opening": r.opening, "benefits_expected": r.benefits_expected, "interest": r.interest,
                "service_cost": r.service_cost, "financial_assumptions": r.financial_assumptions,
                "liability": r.liability, "approximate": True, "caution": ROLL_FORWARD_CAUTION, "notes": self.notes}

    def text(self, money: Callable[[float], str]) -> str:
        lines = [f"roll-forward from {self.valuation_date.isoformat()} to {self.to.isoformat()} "
                 f"({self.rolled.months} months)"]
        width = max(len(label) for label, _ in self.rolled.lines())
        lines += [f"  {label:<{width}}  {money(value)}" for label, value in self.rolled.lines()]
        return "\n".join([*lines, ROLL_FORWARD_CAUTION])


def _write_folder(out: str | Path, overwrite: bool, inputs: list[Any], command: str, settings: dict[str, Any],
                  write: Callable[[Path], None]) -> None:
    """A command's folder, written whole or not at all: its files and the manifest (input hashes, tool
    version, the settings)."""
    with atomic_folder(out, overwrite=overwrite, inputs=inputs) as tmp:
        write(tmp)
        dump_json({"tool_version": __version__, "command": command, "inputs": input_hashes(inputs),
                   "settings": settings}, tmp / MANIFEST)


def months_between(start: date, end: date) -> int:
    """Whole calendar months from ``start`` to ``end``, where ``end`` is ``start`` moved that many months (the
    day kept, or the month's last day, as the payment grid's dates are); else a :class:`DataError`."""
    import calendar

    if end <= start:
        raise DataError(f"the roll-forward date {end.isoformat()} is not after the valuation date {start.isoformat()}",
                        fix="give a later date (--to)")
    months = (end.year - start.year) * 12 + (end.month - start.month)
    day = min(start.day, calendar.monthrange(end.year, end.month)[1])
    on_grid = months > 0 and end.day == day
    if start.day == calendar.monthrange(start.year, start.month)[1]:  # a month end stays a month end
        on_grid = months > 0 and end.day == calendar.monthrange(end.year, end.month)[1]
    if not on_grid:
        raise DataError(f"the roll-forward date {end.isoformat()} is not a whole number of months after the "
                        f"valuation date {start.isoformat()}",
                        fix="give a date (--to) on the same day of a later month (a month end for a month end)")
    return months


def rollforward(
    basis: Basis | str | Path,
    members: MemberInput,
    *,
    to: date,
    new_basis: Basis | str | Path | None = None,
    out: str | Path | None = None,
    overwrite: bool = False,
    fmt: InputFormat = DEFAULT_FORMAT,
    accept_exclusions: bool = False,
    warn: Say = _quiet,
    listed_in: str = "exceptions.csv",
) -> RollForwardRun:
    """Roll the valuation of ``members`` on ``basis`` forward to the date ``to``
    (:mod:`valuation.engine.rollforward`), on ``new_basis``'s financial assumptions (discount curve,
    inflation, salary growth) where given; its valuation date must be ``to``. Anything else the new basis
    changes is not used, and a warning says so. With ``out``, writes rollforward.json and the manifest.
    """
    loaded = as_basis(basis)
    new = as_basis(new_basis) if new_basis is not None else None
    months = months_between(loaded.valuation_date, to)
    if new is not None and new.valuation_date != to:
        raise BasisError(f"the new basis is dated {new.valuation_date.isoformat()}, not the roll-forward date "
                         f"{to.isoformat()}", file=new.source_path, fix="set its valuation_date to the new date")
    inputs: list[Any] = [p for p in (loaded.source_path, new.source_path if new else None,
                                     members if isinstance(members, (str, Path)) else None) if p is not None]
    if out is not None:
        check_output_folder(out, overwrite=overwrite, inputs=inputs)
    notes: list[str] = []
    if new is not None:
        kept = ("discount", "inflation", "salary", "valuation_date", "name", "source_path", "sensitivities")
        old_d = {k: v for k, v in loaded.as_dict().items() if k not in kept}
        new_d = {k: v for k, v in new.as_dict().items() if k not in kept}
        differ = sorted(k for k in set(old_d) | set(new_d) if old_d.get(k) != new_d.get(k))
        if differ:
            notes.append("warning: the new basis also changes " + ", ".join(differ) + "; a roll-forward keeps the "
                         "previous valuation's demographic assumptions and benefit rules, so these are not used "
                         "(run a full valuation to use them)")
            warn(notes[-1])
    data = read(loaded, members, fmt)
    gate(loaded, data.path, data.read, data.valued, data.excluded, accept_exclusions, warn, listed_in=listed_in)
    base = value_members(loaded, data, sensitivities=False)
    assert base.monthly is not None
    cash_old = base.monthly.sum(axis=0)
    cash_new = cash_old
    if new is not None and (new.inflation != loaded.inflation or new.salary != loaded.salary):
        projected = loaded.model_copy(update={"inflation": new.inflation, "salary": new.salary})
        again = value_members(projected, data, sensitivities=False)
        assert again.monthly is not None
        cash_new = again.monthly.sum(axis=0)
    rolled = roll_forward(base.total_liability, cash_old, cash_new, months, loaded.discount_curve(),
                          (new or loaded).discount_curve(), base.summary.active_measures.current_service_cost)
    run = RollForwardRun(rolled=rolled, valuation_date=loaded.valuation_date, to=to,
                         previous_basis=str(loaded.source_path), new_basis=str(new.source_path) if new else None,
                         notes=notes, exceptions=data.exceptions)

    def write(folder: Path) -> None:
        dump_json(run.summary(), folder / "rollforward.json")
        write_csv(run.exceptions, folder / "exceptions.csv")

    if out is not None:
        _write_folder(out, overwrite, inputs, "rollforward", {"to": to.isoformat(), "new_basis": run.new_basis}, write)
    return run


@dataclass(frozen=True)
class ChangeRun:
    """An analysis of change and the dates it spans."""

    analysis: AnalysisOfChange
    previous_date: date
    current_date: date
    #: both valuations' member-data exceptions (exceptions.csv of the folder)
    exceptions: pl.DataFrame = field(default_factory=pl.DataFrame)

    def summary(self) -> dict[str, object]:
        """What change.json holds (keys stable: previous_date, current_date, order, lines, disclosure, check,
        notes)."""
        a = self.analysis
        return {"previous_date": self.previous_date.isoformat(), "current_date": self.current_date.isoformat(),
                "order": list(a.order),
                "lines": [{"key": x.key, "label": x.label, "amount": x.amount, "valuation": x.valuation}
                          for x in a.lines],
                "disclosure": [{"line": label, "amount": amount} for label, amount in a.disclosure()],
                "experience_split": [{"key": x.key, "label": x.label, "amount": x.amount}
                                     for x in a.experience_split],
                "check": a.check(), "notes": list(a.notes)}

    def write(self, folder: Path) -> None:
        dump_json(self.summary(), folder / "change.json")
        write_csv(pl.DataFrame([{"key": x.key, "label": x.label, "amount": x.amount, "valuation": x.valuation}
                                for x in self.analysis.lines]), folder / "change.csv")
        if self.exceptions.width:
            write_csv(self.exceptions, folder / "change_exceptions.csv")

    def text(self, money: Callable[[float], str]) -> str:
        lines = [f"analysis of change {self.previous_date.isoformat()} to {self.current_date.isoformat()}"]
        width = max(len(x.label) for x in self.analysis.lines)
        for x in self.analysis.lines:
            lines.append(f"  {x.label:<{width}}  {money(x.amount)}")
            if x.key == "experience":
                lines += [f"      {y.label}: {money(y.amount)}" for y in self.analysis.experience_split
                          if abs(y.amount) >= 0.5]
        return "\n".join(lines)


def change(
    previous_basis: Basis | str | Path,
    previous_members: MemberInput,
    current_basis: Basis | str | Path,
    current_members: MemberInput,
    *,
    benefits_paid: float | None = None,
    deaths: str | Path | None = None,
    exits: str | Path | None = None,
    order: Sequence[Step] = STEPS,
    out: str | Path | None = None,
    overwrite: bool = False,
    fmt: InputFormat = DEFAULT_FORMAT,
    accept_exclusions: bool = False,
    warn: Say = _quiet,
    current_liability: float | None = None,
) -> ChangeRun:
    """The analysis of change from the previous valuation to the current one (:mod:`valuation.engine.change`).

    The opening liability is carried to the current date on the previous basis (the roll-forward: service
    cost, interest at the opening discount curve, the payments expected in the period), with the benefits
    actually paid in its place where ``benefits_paid`` [currency] is given (the interest stays that on the
    expected payments: the difference in timing falls in the experience). Then every step is a full
    valuation: the current members on the previous basis at the current date (experience), and the basis
    moved to the current one step by step in ``order``. The closing line is the current valuation
    (``current_liability`` when the caller has valued it already, else valued here); a test of
    that is made (the steps must reproduce it), so a basis whose files cannot be found from a mixed step is
    refused rather than mis-valued. With ``out``, writes change.json, change.csv and the manifest.
    """
    b0, b1 = as_basis(previous_basis), as_basis(current_basis)
    if b1.valuation_date <= b0.valuation_date:
        raise BasisError(f"the current basis is dated {b1.valuation_date.isoformat()}, not after the previous "
                         f"one ({b0.valuation_date.isoformat()})", file=b1.source_path,
                         fix="give the previous valuation's basis and members first, then the current ones")
    try:
        months_between(b0.valuation_date, b1.valuation_date)
    except DataError as exc:
        raise BasisError(f"the current valuation date {b1.valuation_date.isoformat()} is not a whole number of months "
                         f"after the previous one {b0.valuation_date.isoformat()}", file=b1.source_path,
                         fix="date the two bases on the same day of the month (month ends for month ends)") from exc
    if isinstance(previous_members, (str, Path)) and isinstance(current_members, (str, Path)) and (
            Path(previous_members).resolve() == Path(current_members).resolve()):
        raise DataError("the previous and the current member data are the same file", file=current_members,
                        fix="give the previous valuation's members, then the current valuation's")
    if b0.currency and b1.currency and b0.currency != b1.currency:
        raise BasisError(f"the previous basis counts in {b0.currency} and the current one in {b1.currency}",
                         file=b1.source_path, fix="value both valuations in one currency")
    if sorted(order) != sorted(STEPS):
        raise BasisError(f"the order of the steps must name each of {', '.join(STEPS)} once; got {', '.join(order)}",
                         fix="for example: financial,demographic,other")
    inputs: list[Any] = [p for p in (b0.source_path, b1.source_path,
                                     previous_members if isinstance(previous_members, (str, Path)) else None,
                                     current_members if isinstance(current_members, (str, Path)) else None)
                         if p is not None]
    if out is not None:
        check_output_folder(out, overwrite=overwrite, inputs=inputs)
    previous_data = read(b0, previous_members, fmt)
    opening_run = rollforward(b0, previous_data, to=b1.valuation_date, fmt=fmt,
                              accept_exclusions=accept_exclusions, warn=warn, listed_in="change_exceptions.csv")
    rolled = opening_run.rolled
    notes: list[str] = []
    paid = rolled.benefits_expected if benefits_paid is None else float(benefits_paid)
    if benefits_paid is None:
        notes.append("benefits paid: none given, so the payments the previous valuation expected in the period")
    expected = rolled.opening + rolled.service_cost + rolled.interest - paid
    data = read(b1, current_members, fmt)
    gate(b1, data.path, data.read, data.valued, data.excluded, accept_exclusions, warn,
         listed_in="change_exceptions.csv")
    d1 = b1.valuation_date.isoformat()

    def value(basis: Basis) -> float:
        return value_members(basis, data, sensitivities=False).total_liability

    step_basis = b0.model_copy(update={"valuation_date": b1.valuation_date})
    on_previous = value_members(step_basis, data, sensitivities=False)
    level = on_previous.total_liability
    moved = membership_movements(b1, previous_data, data, period_start=b0.valuation_date,
                                 period_end=b1.valuation_date, deaths_path=deaths, exits_path=exits, fmt=fmt)
    split = _experience_split(b0, previous_data, on_previous, moved.result, b1.valuation_date,
                              paid - rolled.benefits_expected)
    if deaths is None:
        notes.append("no deaths file: members gone from the extracts are unexplained movements, not deaths")
    lines = [
        ChangeLine("opening", "opening liability", rolled.opening,
                   f"previous members, previous basis, {b0.valuation_date.isoformat()}"),
        ChangeLine("service_cost", "current service cost", rolled.service_cost),
        ChangeLine("interest", "interest cost (opening discount rate)", rolled.interest),
        ChangeLine("benefits_paid", "benefits paid", -paid),
        ChangeLine("expected_closing", "expected closing liability", expected),
        ChangeLine("experience", "experience (membership and data against expected)", level - expected,
                   f"current members, previous basis, {d1}"),
    ]
    labels = {"demographic": "change in demographic assumptions", "financial": "change in financial assumptions",
              "other": "other changes of the basis (benefit rules, conventions)"}
    done: list[str] = []
    for step in order:
        step_basis = with_fields(step_basis, b1, fields_of(step))
        done.append(step)
        now = value(step_basis)
        lines.append(ChangeLine(step, labels[step], now - level,
                                f"current members, previous basis with the current {' and '.join(done)} assumptions, {d1}"))
        level = now
    closing = value(b1) if current_liability is None else current_liability  # a run has valued it already
    if abs(closing - level) > 1e-9 * max(abs(closing), 1.0):
        raise BasisError("the steps of the analysis do not reproduce the current valuation (a table or curve file "
                         "of one basis is not found from the other's folder)", file=b1.source_path,
                         fix="keep both bases, and the files they name, in one folder")
    lines.append(ChangeLine("closing", "closing liability", closing, f"current members, current basis, {d1}"))
    run = ChangeRun(AnalysisOfChange(tuple(lines), tuple(order), tuple(notes), split), b0.valuation_date,
                    b1.valuation_date,
                    exceptions=pl.concat([opening_run.exceptions, data.exceptions], how="vertical_relaxed"))
    if out is not None:
        _write_folder(out, overwrite, inputs, "change", {"order": list(order), "benefits_paid": benefits_paid},
                      run.write)
    return run


#: The experience split's lines, by movement (see :mod:`valuation.movements.classify`).
SPLIT_LABELS: dict[str, str] = {
    CONTINUING: "members in the same status (survival, increases, salaries, data)",
    "death": "members who died (their expected value released)", "retirement": "members who retired",
    "withdrawal": "members who left service", "reinstated": "members who rejoined",
    "transfer_out": "members who transferred out", "lump_sum_settlement": "members who took a lump sum",
    "other_exit": "members who left for other reasons", "child_pension_ceased": "children's pensions that ended",
    "new_entrant": "new members", "new_dependant": "new dependants", "unexplained": "unexplained movements",
}


def _experience_split(
    previous: Basis, previous_data: MemberData, on_previous: ValuationResult, moved: MovementsResult, to: date,
    paid_over_expected: float,
) -> tuple[ChangeLine, ...]:
    """The experience line by what happened to the members: for each movement, the value now (previous basis,
    current date) of the members it leaves in the current extract, less the expected value now of the
    previous members it took (their own roll-forward, so the groups' expected values add up to the whole's);
    and the benefits paid against those expected. Valuations are additive over members, so the lines add
    up to the experience line (to rounding)."""
    value_now = on_previous.members.select("member_id", "liability").join(
        moved.members.select("member_id", "movement"), on="member_id", how="left").group_by("movement").agg(
        pl.col("liability").sum())
    now = dict(zip(value_now["movement"].to_list(), value_now["liability"].to_list(), strict=True))
    lines = []
    for movement in (CONTINUING, *MOVEMENTS):
        ids = moved.members.filter((pl.col("movement") == movement) & pl.col("status_start").is_not_null())["member_id"]
        expected = 0.0
        if ids.len():
            r = rollforward(previous, previous_data.subset(ids), to=to, accept_exclusions=True).rolled
            expected = r.opening + r.service_cost + r.interest - r.benefits_expected
        amount = float(now.get(movement, 0.0)) - expected
        if ids.len() or movement in now:
            lines.append(ChangeLine(f"experience:{movement}", SPLIT_LABELS[movement], amount,
                                    f"{movement.replace('_', ' ')}: value now less expected value now"))
    lines.append(ChangeLine("experience:benefits_paid", "benefits paid against expected", paid_over_expected))
    return tuple(lines)


def value_scheme(basis: Basis | str | Path, members: MemberInput, *, fmt: InputFormat | None = None, sensitivities: bool = True,
                 chunk_size: int = DEFAULT_CHUNK, progress: Progress | None = None) -> ValuationResult:
    """Value a scheme: the basis first (a TOML path or a loaded ``Basis``), then the members.

    Parameters
    ----------
    basis : str, Path or Basis
        The assumptions basis file, or a basis from :func:`valuation.basis.load_basis`.
    members : str, Path, polars.DataFrame, pandas.DataFrame or MemberData
        A member file (CSV, XLSX or Parquet), a data frame with the same columns (mapped through the
        basis's ``[mapping]`` as a file's headers are), or records already read with ``read_members``.
    fmt : InputFormat, optional
        A member file's delimiter and encoding, or sheet, where they are not the usual ones.
    sensitivities, chunk_size, progress
        As for :func:`run`.

    Returns the results without writing anything; records excluded for data problems are in
    ``result.exceptions`` and counted in ``result.summary.records`` (the exclusion limit that stops a
    command-line run is not applied here; a file with no valued record is still an error).

    Example
    -------
    >>> from valuation import value_scheme                      # doctest: +SKIP
    >>> res = value_scheme("assumptions/demo_basis.toml", "member_data_demo/members.csv")  # doctest: +SKIP
    >>> res.summary.liability.total                             # doctest: +SKIP
    """
    if (isinstance(basis, (str, Path)) and Path(basis).suffix.lower() in _MEMBER_SUFFIXES
            and isinstance(members, (str, Path)) and Path(members).suffix.lower() == ".toml"):
        raise ValuationError("the basis comes first: value_scheme(basis, members), as on the command line",
                             file=basis, fix=f"call value_scheme('{members}', '{basis}')")
    return run(basis, members, fmt=fmt or DEFAULT_FORMAT, sensitivities=sensitivities, chunk_size=chunk_size,
               progress=progress, accept_exclusions=True, reports=False).result


def write_run(
    result: ValuationResult, out_dir: str | Path, *, reports: bool = False, experience: ExperienceResult | None = None,
    extra: Sequence[ExtraWriter] = (), overwrite: bool = False,
) -> Path:
    """Write the run folder ``out_dir`` atomically and return its path.

    Parameters
    ----------
    result : ValuationResult
        What to write: summary.json, the CSV tables, members.parquet, manifest.json.
    out_dir : str or Path
        New, empty, or (with ``overwrite``) a previous run of the tool.
    reports : bool
        Also write the workbook and the trustees' HTML summary, as ``valuation run`` does.
    experience : ExperienceResult, optional
        An experience analysis: its files are written, and the reports include it.
    extra : sequence of callables
        More writers ``writer(result, folder)``, run inside the same temporary folder.
    overwrite : bool
        Replace a previous run of the tool at ``out_dir``.
    """
    out_dir = Path(out_dir)
    outcome = Outcome(result=result, experience=experience)
    with atomic_folder(out_dir, overwrite=overwrite) as tmp:
        write_into(result, tmp, [*writers_for(outcome, reports=reports), *extra])
    return out_dir


__all__ = ["ExperienceInputs", "Outcome", "as_basis", "experience_only", "read", "report_writers", "run",
           "value_scheme", "write_run"]
