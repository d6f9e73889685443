"""Command line. Parses arguments and calls the library; every command is one Python call away.

Exit codes: 0 success; 1 unexpected internal error; 2 usage error (bad arguments, a file named on the
command line that does not exist); 3 fatal input or output error (a data, basis or table file that cannot
be used, or an output path that would destroy something: the message on stderr names the file, row, column
and the fix); 4 more records excluded than the basis allows (``--accept-exclusions`` to value anyway);
130 interrupted. Nothing is left half-written: run folders are written to a temporary folder and moved into
place at the end, and nothing the tool did not write is deleted or overwritten.
"""

from __future__ import annotations

import argparse
import math
import os
import signal
import sys
import tempfile
import textwrap
import threading
from collections.abc import Callable
from datetime import date
from pathlib import Path
from typing import TYPE_CHECKING, Any

from valuation.errors import ValuationError
from valuation.version import __version__

if TYPE_CHECKING:
    from valuation.experience.result import ExperienceResult

if TYPE_CHECKING:
    from valuation.engine.results import ValuationResult

EXIT_OK, EXIT_INTERNAL, EXIT_USAGE, EXIT_INPUT, EXIT_EXCLUSIONS, EXIT_INTERRUPTED = 0, 1, 2, 3, 4, 130

EPILOG_EXIT = """exit codes: 0 ok; 1 internal error; 2 usage error (bad option, missing file); 3 input or
output error (data, basis or table file; an output path that holds other files); 4 more records excluded
than the basis allows (--accept-exclusions to value anyway); 130 interrupted. Messages go to stderr."""


# ----------------------------------------------------------------------------------------------------
# Values checked by the parser: a wrong value is a usage error (exit 2) with a plain message.
# ----------------------------------------------------------------------------------------------------


def iso_date(text: str) -> date:
    """A date given on the command line, in ISO form."""
    try:
        return date.fromisoformat(text.strip())
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"'{text}' is not a date in ISO form YYYY-MM-DD (for example 2025-03-31)") from None


def _number(kind: Callable[[str], Any], what: str, test: Callable[[Any], bool]) -> Callable[[str], Any]:
    def parse(text: str) -> Any:
        try:
            value = kind(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"'{text}' is not {what}") from None
        if value != value or not test(value):  # NaN fails every test
            raise argparse.ArgumentTypeError(f"'{text}' is not {what}")
        return value

    parse.__name__ = what
    return parse


positive_int = _number(int, "a whole number from 1 to 1,000,000,000", lambda v: 1 <= v <= 10**9)
non_negative_int = _number(int, "a whole number from 0 to 1,000,000,000", lambda v: 0 <= v <= 10**9)
probability = _number(float, "a level strictly between 0 and 1 (for example 0.95)", lambda v: 0 < v < 1)
positive_float = _number(float, "a number above 0", lambda v: 0 < v < float("inf"))
non_negative_float = _number(float, "a number of 0 or more", lambda v: 0 <= v < float("inf"))


def new_path(text: str) -> str:
    """An output path: not empty."""
    if not text.strip():
        raise argparse.ArgumentTypeError("an empty path; give a folder or file name")
    return text


def existing_file(text: str) -> Path:
    """A path to an input file that exists."""
    p = Path(text)
    if p.is_dir():
        raise argparse.ArgumentTypeError(f"'{text}' is a folder; give the file inside it")
    if not p.is_file():
        raise argparse.ArgumentTypeError(f"file not found: '{text}'")
    if not os.access(p, os.R_OK):
        raise argparse.ArgumentTypeError(f"no permission to read '{text}'")
    return p


class _Progress:
    """A tqdm progress bar that stays quiet when stderr is not a terminal or --quiet is given."""

    def __init__(self, quiet: bool) -> None:
        self.enabled = not quiet and sys.stderr.isatty()
        self.bar: Any = None

    def __call__(self, label: str, done: int, total: int) -> None:
        if not self.enabled:
            return
        from tqdm import tqdm

        if self.bar is None:
            self.bar = tqdm(total=total, desc=label, unit="step", leave=False)
        if total != self.bar.total:
            self.bar.total = total
        self.bar.set_description(label)
        self.bar.n = done
        self.bar.refresh()

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _print(text: str, *, file: Any = None) -> None:
    """Print, quietly giving up when the reader has gone (output piped into ``head``)."""
    stream = file or sys.stdout
    try:
        print(text, file=stream, flush=True)
    except BrokenPipeError:
        _silence(stream)


def _silence(stream: Any) -> None:
    """Send the rest of a stream's output nowhere (the reader of a pipe has gone)."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, stream.fileno())
        os.close(devnull)
    except (OSError, ValueError):  # not a real file (a test capture)
        pass


def _say(args: argparse.Namespace, text: str) -> None:
    if not args.quiet:
        _print(text)


def _headline(result: ValuationResult) -> str:
    from valuation.reports.format import currency_of, format_money

    s = result.summary
    code = currency_of(s)
    by_status = s.liability.by_status
    lines = [f"valuation date {s.valuation_date.isoformat()}: liability {format_money(s.liability.total, code)}"]
    width = max((len(format_money(v, code)) for v in by_status.values()), default=0)
    for st, v in by_status.items():
        lines.append(f"  {st:<10} {format_money(v, code):>{max(width, 16)}}")
    sedr = s.single_equivalent_discount_rate
    sedr_text = f"{100 * sedr:.3f} %" if math.isfinite(sedr) else "n/a"
    lines.append(f"duration (Macaulay) {s.duration.macaulay:.2f} years; single equivalent rate {sedr_text}")
    return "\n".join(lines)


def _input_format(args: argparse.Namespace) -> Any:
    """The member file's format from --delimiter, --encoding and --sheet."""
    from valuation.members.readers import InputFormat

    return InputFormat(delimiter=args.delimiter, encoding=args.encoding, sheet=args.sheet)


def text_encoding(text: str) -> str:
    """A text encoding Python knows (``utf-8``, ``cp1252``, ``latin-1``...), not a bytes-to-bytes codec."""
    import codecs

    try:
        info = codecs.lookup(text)
    except LookupError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a known text encoding (for example utf-8, cp1252 or "
                                         "latin-1)") from None
    if not getattr(info, "_is_text_encoding", True):
        raise argparse.ArgumentTypeError(f"'{text}' is not a text encoding (for example utf-8, cp1252 or latin-1)")
    return text


def delimiter(text: str) -> str:
    """A CSV delimiter: one character, or the word ``tab``."""
    value = "\t" if text.lower() in ("tab", "\\t", "\t") else text
    if len(value) != 1 or value in "\"\r\n":
        raise argparse.ArgumentTypeError(f"'{text}' is not one character (for example ';' or tab)")
    return value


def _format_options(sp: argparse.ArgumentParser) -> None:
    g = sp.add_argument_group("member file format (when it is not comma-separated UTF-8, or not the first sheet)")
    g.add_argument("--delimiter", type=delimiter, default=",",
                   help="character between values in a CSV file: ';', '|' or tab (default ',')")
    g.add_argument("--encoding", type=text_encoding, default="utf-8",
                   help="text encoding of a CSV file, e.g. cp1252 or latin-1 (default utf-8)")
    g.add_argument("--sheet", help="worksheet of an XLSX file, by name (default: the first sheet)")


def _default_out(stem: str, when: date) -> Path:
    """``outputs/<stem>-<date>``, or the first free ``-2``, ``-3``... beside it: defaults never collide."""
    from valuation.engine.write import free_folder

    return free_folder(Path("outputs") / f"{stem}-{when.isoformat()}")


def _warn_ignored(args: argparse.Namespace, ignored: list[str]) -> None:
    if ignored:
        _print("valuation: warning: columns not used by the valuation (neither ours nor mapped in the basis's "
               f"[mapping.columns]): {', '.join(ignored)}", file=sys.stderr)


def _warn(text: str) -> None:
    _print(f"valuation: {text}", file=sys.stderr)


def cmd_run(args: argparse.Namespace) -> int:
    from valuation import pipeline
    from valuation.basis import load_basis

    progress = _Progress(args.quiet)
    basis = load_basis(args.basis)
    out = Path(args.out) if args.out else _default_out(Path(args.members).stem, basis.valuation_date)
    experience = None
    if args.deaths:
        experience = pipeline.ExperienceInputs(start_members=args.start_members, deaths=args.deaths,
                                               settings=_experience_settings(args), exits=args.exits)
    try:
        outcome = pipeline.run(
            basis, args.members, out=out, overwrite=args.overwrite, fmt=_input_format(args),
            sensitivities=not args.no_sensitivities, reports=not args.no_reports, chunk_size=args.chunk_size,
            stream=args.stream, accept_exclusions=args.accept_exclusions, experience=experience,
            previous_basis=args.previous_basis, progress=progress,
            say=lambda text: _say(args, text), warn=_warn)
    finally:
        progress.close()
    _say(args, _headline(outcome.result))
    if outcome.experience is not None:
        _say(args, _experience_line(outcome.experience))
    if outcome.movements is not None:
        from valuation.reports.content import movements_words

        words = movements_words(outcome.movements.result)
        _say(args, "membership " + words[0].lower() + words[1:])
    if outcome.change is not None:
        from valuation.reports.content import change_words

        _say(args, "change since the last valuation: " + change_words(outcome.change.analysis, basis.currency))
    _say(args, f"written to {out}/")
    return EXIT_OK


def _experience_line(res: ExperienceResult) -> str:
    if res.table.filter(res.table["dimension"] == "overall").height == 0:
        return "deaths: no exposure in the period"
    o = res.overall()
    d, m = res.summary["records"]["deaths"], res.summary["records"]["members"]
    counted = (f"start membership read {m['read']:,} = used {m['valued']:,} + excluded {m['excluded']:,}\n"
               f"deaths read {d['read']:,} = counted {d['counted']:,} + excluded {d['excluded']:,}\n")

    def pct(ratio: float | None) -> str:
        return "n/a" if ratio is None else f"{100 * ratio:.1f} %"

    return counted + (f"deaths: A/E by lives {pct(o['ae_lives'])} ({pct(o['ae_lives_lower'])} to "
                      f"{pct(o['ae_lives_upper'])}); by amounts {pct(o['ae_amounts'])} "
                      f"({pct(o['ae_amounts_lower'])} to {pct(o['ae_amounts_upper'])})")


#: Experience options and their defaults (``None`` on the parser, so that a value given without the
#: experience analysis is noticed rather than ignored).
EXPERIENCE_DEFAULTS: dict[str, Any] = {"exits": None, "exposure": "central", "confidence": 0.95,
                                       "overdispersion": 1.0, "late_months": 0, "late_uplift": 0.0,
                                       "credibility_probability": 0.90, "credibility_tolerance": 0.05}


def _experience_settings(args: argparse.Namespace) -> Any:
    from valuation.experience import ExperienceSettings

    opt = {k: (getattr(args, k) if getattr(args, k) is not None else v) for k, v in EXPERIENCE_DEFAULTS.items()}
    return ExperienceSettings(
        period_start=args.period_start, period_end=args.period_end,
        exposure=opt["exposure"], confidence=opt["confidence"], overdispersion=opt["overdispersion"],
        late_months=opt["late_months"], late_uplift=opt["late_uplift"],
        credibility_probability=opt["credibility_probability"], credibility_tolerance=opt["credibility_tolerance"],
    )


def cmd_check(args: argparse.Namespace) -> int:
    from valuation.basis import load_basis
    from valuation.csvout import write_csv
    from valuation.engine.write import atomic_file, check_output_file
    from valuation.members import read_members

    if args.exceptions:
        check_output_file(args.exceptions, overwrite=args.overwrite, inputs=[args.basis, args.members])
    basis = load_basis(args.basis)
    data = read_members(args.members, basis, _input_format(args))
    _say(args, data.reconciliation_text())
    _warn_ignored(args, data.ignored_columns)
    if data.exceptions.height:
        counts = (data.exceptions.group_by(["severity", "reason"]).len()
                  .sort(["severity", "len", "reason"], descending=[False, True, False]))
        for sev, reason, n in counts.iter_rows():
            _say(args, f"  {sev:<8} {n:>6}  {reason}")
    if args.exceptions:
        with atomic_file(args.exceptions, overwrite=args.overwrite, inputs=[args.basis, args.members]) as tmp:
            write_csv(data.exceptions, tmp)
        _say(args, f"exceptions written to {args.exceptions}")
    # the verdict `valuation run` would reach on this file: nothing to value (3), too many exclusions (4)
    from valuation.engine.gate import check_exclusions

    check_exclusions(read=data.read, valued=data.valued, excluded=data.excluded, path=data.path,
                     max_share=basis.thresholds.max_excluded_share, accept=args.accept_exclusions)
    return EXIT_OK


def cmd_synth(args: argparse.Namespace) -> int:
    from valuation.engine.write import atomic_file, check_output_file
    from valuation.members.synth import synth_scheme, write_scheme

    if Path(args.out).suffix.lower() not in (".csv", ".parquet", ".xlsx"):
        raise ValuationError("the output file must end in .csv, .parquet or .xlsx", file=args.out,
                             fix="for example --out outputs/synth.parquet")
    check_output_file(args.out, overwrite=args.overwrite)
    df = synth_scheme(args.members, seed=args.seed, valuation_date=args.valuation_date)
    with atomic_file(args.out, overwrite=args.overwrite) as tmp:
        write_scheme(df, tmp)
    _say(args, f"{df.height:,} synthetic members written to {args.out}")
    return EXIT_OK


def cmd_batch(args: argparse.Namespace) -> int:
    from valuation.batch import index_text, run_batch

    progress = _Progress(args.quiet)
    try:
        index = run_batch(args.batch, out_root=Path(args.out) if args.out else None, progress=progress,
                          overwrite=args.overwrite, accept_exclusions=args.accept_exclusions, say=_warn)
    finally:
        progress.close()
    _say(args, index_text(index))
    return EXIT_OK


def cmd_experience(args: argparse.Namespace) -> int:
    from valuation import pipeline
    from valuation.basis import load_basis
    from valuation.engine.run import input_hashes
    from valuation.engine.write import atomic_folder, check_output_folder
    from valuation.manifest import dump_json

    basis = load_basis(args.basis)
    out = Path(args.out) if args.out else _default_out("experience", args.period_end)
    inputs = [p for p in (args.basis, args.members, args.deaths, args.exits, args.valuation_members) if p]
    check_output_folder(out, overwrite=args.overwrite, inputs=inputs)
    request = pipeline.ExperienceInputs(start_members=args.members, deaths=args.deaths,
                                        settings=_experience_settings(args), exits=args.exits)
    res = pipeline.experience_only(basis, request, valuation_members=args.valuation_members,
                                   accept_exclusions=args.accept_exclusions, warn=_warn)
    with atomic_folder(out, overwrite=args.overwrite, inputs=inputs) as tmp:
        res.write(tmp)
        dump_json({"tool_version": __version__, "command": "experience", "inputs": input_hashes(inputs),
                   "settings": {k: str(v) for k, v in vars(args).items() if k not in ("func", "parser")}},
                  tmp / "manifest.json")
    _say(args, _experience_line(res))
    _say(args, f"written to {out}/")
    return EXIT_OK


def cmd_movements(args: argparse.Namespace) -> int:
    from valuation import pipeline

    out = Path(args.out) if args.out else _default_out("movements", args.period_end)
    found = pipeline.movements(
        args.basis, args.previous, args.current, period_start=args.period_start, period_end=args.period_end,
        deaths=args.deaths, exits=args.exits, out=out, overwrite=args.overwrite, fmt=_input_format(args),
        settings={k: str(v) for k, v in vars(args).items() if k not in ("func", "parser")},
        accept_exclusions=args.accept_exclusions, warn=_warn,
    )
    _say(args, found.text())
    _say(args, f"written to {out}/")
    return EXIT_OK


def cmd_rollforward(args: argparse.Namespace) -> int:
    from valuation import pipeline
    from valuation.basis import load_basis
    from valuation.reports.format import format_money

    basis = load_basis(args.basis)
    out = Path(args.out) if args.out else _default_out("rollforward", args.to)
    run = pipeline.rollforward(basis, args.members, to=args.to, new_basis=args.new_basis, out=out,
                               overwrite=args.overwrite, fmt=_input_format(args),
                               accept_exclusions=args.accept_exclusions, warn=_warn)
    _say(args, run.text(lambda v: format_money(v, basis.currency)))
    _say(args, f"written to {out}/")
    return EXIT_OK


def cmd_change(args: argparse.Namespace) -> int:
    from valuation import pipeline
    from valuation.basis import load_basis
    from valuation.reports.format import format_money

    current = load_basis(args.current_basis)
    out = Path(args.out) if args.out else _default_out("change", current.valuation_date)
    run = pipeline.change(args.previous_basis, args.previous_members, current, args.current_members,
                          benefits_paid=args.benefits_paid, deaths=args.deaths, exits=args.exits, order=args.order, out=out,
                          overwrite=args.overwrite,
                          fmt=_input_format(args), accept_exclusions=args.accept_exclusions, warn=_warn)
    _say(args, run.text(lambda v: format_money(v, current.currency)))
    for note in run.analysis.notes:
        _say(args, note)
    _say(args, f"written to {out}/")
    return EXIT_OK


def _step_order(text: str) -> tuple[str, ...]:
    from valuation.engine.change import STEPS

    steps = tuple(s.strip() for s in text.split(","))
    if sorted(steps) != sorted(STEPS):
        raise argparse.ArgumentTypeError(f"name each of {', '.join(STEPS)} once, separated by commas")
    return steps


def cmd_table(args: argparse.Namespace) -> int:
    from valuation.engine.write import atomic_file, check_output_file
    from valuation.mortality.inspect import describe_tables, table_chart

    if args.chart:
        if Path(args.chart).suffix.lower() != ".png":
            raise ValuationError("the chart file must end in .png", file=args.chart, fix="for example --chart q.png")
        check_output_file(args.chart, overwrite=args.overwrite, inputs=[args.file])
    elif args.overwrite:
        args.parser.error("--overwrite applies to --chart only")
    _print(describe_tables(args.file, args.name))
    if args.chart:
        with atomic_file(args.chart, overwrite=args.overwrite, inputs=[args.file]) as tmp:
            table_chart(args.file, args.name, tmp)
        _say(args, f"chart written to {args.chart}")
    return EXIT_OK


def _experience_options(sp: Any) -> None:
    sp.add_argument("--exits", type=existing_file, help=EXITS_HELP)
    sp.add_argument("--exposure", choices=["central", "initial"], default=None,
                    help="central exposed-to-risk with mu (default) or initial exposure with q")
    sp.add_argument("--confidence", type=probability, default=None,
                    help="confidence level of the intervals, between 0 and 1 (default 0.95)")
    sp.add_argument("--overdispersion", type=positive_float, default=None,
                    help="variance factor for amounts, above 0 (default 1)")
    sp.add_argument("--late-months", type=non_negative_int, default=None,
                    help="final months with late-reported deaths (default 0)")
    sp.add_argument("--late-uplift", type=non_negative_float, default=None,
                    help="uplift to deaths in those months, e.g. 0.05 (default 0)")
    sp.add_argument("--credibility-probability", type=probability, default=None,
                    help="limited-fluctuation credibility: probability of being within the tolerance for full "
                         "credibility (default 0.90)")
    sp.add_argument("--credibility-tolerance", type=probability, default=None,
                    help="limited-fluctuation credibility: relative tolerance for full credibility (default 0.05; "
                         "with 0.90, 1,082 expected deaths)")


def _period_options(sp: argparse.ArgumentParser, start_note: str = "", end_note: str = "") -> None:
    sp.add_argument("--period-start", "--start", dest="period_start", type=iso_date, required=True,
                    help=f"period start{start_note} (ISO date YYYY-MM-DD)")
    sp.add_argument("--period-end", "--end", dest="period_end", type=iso_date, required=True,
                    help=f"period end{end_note} (ISO date YYYY-MM-DD)")


#: Help of the period's event files, the same in every command that takes them.
DEATHS_HELP = "deaths file: member_id, date_of_death[, pension_at_death]"
EXITS_HELP = "other exits: member_id, exit_date, reason"


def _folder_options(sp: argparse.ArgumentParser, what: str, default: str, accept_help: str) -> None:
    """--out, --overwrite and --accept-exclusions of a command that writes one folder."""
    sp.add_argument("--out", type=new_path, help="folder to write: new, empty, or a previous one with --overwrite "
                                  f"(default: outputs/{default}, never an existing folder)")
    _overwrite(sp, f"a previous {what} folder in --out")
    sp.add_argument("--accept-exclusions", action="store_true", help=accept_help)


def _overwrite(sp: argparse.ArgumentParser, what: str) -> None:
    sp.add_argument("--overwrite", action="store_true", help=f"replace {what}")


def build_parser() -> argparse.ArgumentParser:
    fmt = argparse.RawDescriptionHelpFormatter
    p = argparse.ArgumentParser(
        prog="valuation", formatter_class=fmt,
        description="Value defined-benefit pension schemes: liabilities, cash flows, sensitivities, experience.",
        epilog=EPILOG_EXIT,
    )
    p.add_argument("--version", action="version", version=f"valuation {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    def common(sp: argparse.ArgumentParser) -> None:
        sp.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors; no progress bars")

    r = sub.add_parser("run", help="value a scheme on a basis and write a run folder", formatter_class=fmt,
                       epilog=textwrap.dedent("""\
        examples:
          valuation run assumptions/demo_basis.toml member_data_demo/members.csv --out outputs/demo
          valuation run basis.toml members.parquet --no-sensitivities --quiet
          valuation run assumptions/demo_basis.toml member_data_demo/members.csv --out outputs/demo \\
              --overwrite --deaths member_data_demo/deaths.csv --start-members member_data_demo/members_start.csv \\
              --period-start 2022-03-31 --period-end 2025-03-31 --exits member_data_demo/exits.csv
        """) + EPILOG_EXIT)
    r.add_argument("basis", type=existing_file, help="assumptions basis (TOML)")
    r.add_argument("members", type=existing_file, help="member data file (CSV, XLSX or Parquet)")
    r.add_argument("--out", type=new_path, help="run folder to write: new, empty, or a previous run with --overwrite "
                                 "(default: outputs/<member file name>-<valuation date>, never an existing folder)")
    _overwrite(r, "the previous run in --out (only a folder this tool wrote, holding nothing else)")
    r.add_argument("--no-sensitivities", action="store_true", help="skip the sensitivity re-valuations")
    r.add_argument("--no-reports", action="store_true", help="skip the workbook and HTML summary")
    r.add_argument("--accept-exclusions", action="store_true",
                   help="value the remaining records even when more are excluded than the basis's "
                        "[thresholds] max_excluded_share allows")
    r.add_argument("--chunk-size", type=positive_int, default=1_000_000,
                   help="members valued at a time: larger chunks share more survival curves, smaller ones use less memory")
    r.add_argument("--stream", action="store_true",
                   help="read, validate and value the file in chunks (flat memory for very large schemes)")
    g = r.add_argument_group("experience analysis (optional): deaths since the last valuation, in the reports")
    g.add_argument("--deaths", type=existing_file, help=DEATHS_HELP)
    g.add_argument("--start-members", type=existing_file, help="member data at the start of the period")
    g.add_argument("--period-start", type=iso_date, help="period start (ISO date YYYY-MM-DD)")
    g.add_argument("--period-end", type=iso_date, help="period end (ISO date YYYY-MM-DD), usually the valuation date")
    _experience_options(g)
    g.add_argument("--previous-basis", type=existing_file,
                   help="the previous valuation's basis, dated --period-start: adds the analysis of change from it "
                        "(the start membership on it) to this valuation")
    _format_options(r)
    common(r)
    r.set_defaults(parser=r, func=cmd_run)

    c = sub.add_parser("check", help="validate member data and basis without valuing", formatter_class=fmt,
                       epilog="example:\n  valuation check assumptions/demo_basis.toml member_data_demo/members_dirty.csv"
                              " --exceptions exceptions.csv\n" + EPILOG_EXIT)
    c.add_argument("basis", type=existing_file, help="assumptions basis (TOML)")
    c.add_argument("members", type=existing_file, help="member data file (CSV, XLSX or Parquet)")
    c.add_argument("--exceptions", type=new_path, help="write the exceptions list to this new CSV file")
    _overwrite(c, "an existing --exceptions file")
    c.add_argument("--accept-exclusions", action="store_true",
                   help="exit 0 even when more records are excluded than the basis allows (as run would accept)")
    _format_options(c)
    common(c)
    c.set_defaults(parser=c, func=cmd_check)

    b = sub.add_parser("batch", help="run every valuation listed in a batch file", formatter_class=fmt,
                       epilog="example:\n  valuation batch assumptions/demo_batch.toml\n" + EPILOG_EXIT)
    b.add_argument("batch", type=existing_file, help="batch file (TOML) listing runs")
    b.add_argument("--out", type=new_path, help="folder for the run folders and the index (default: the batch file's `out`); "
                                 "new, empty, or a previous batch with --overwrite")
    _overwrite(b, "a previous batch in the output folder")
    b.add_argument("--accept-exclusions", action="store_true",
                   help="value every run even when more records are excluded than its basis allows")
    common(b)
    b.set_defaults(parser=b, func=cmd_batch)

    s = sub.add_parser("synth", help="write a synthetic scheme of any size, reproducibly", formatter_class=fmt,
                       epilog="example:\n  valuation synth --members 1000000 --seed 7 --out outputs/synth.parquet\n"
                              + EPILOG_EXIT)
    s.add_argument("--members", type=positive_int, required=True, help="number of member records, 1 or more")
    s.add_argument("--seed", type=non_negative_int, default=1, help="random seed, 0 or more (same seed, same file)")
    s.add_argument("--valuation-date", type=iso_date, default=date(2026, 12, 31),
                   help="ISO date YYYY-MM-DD the ages refer to (default 2026-12-31)")
    s.add_argument("--out", type=new_path, required=True, help="new output file: .csv, .parquet or .xlsx")
    _overwrite(s, "an existing --out file")
    common(s)
    s.set_defaults(parser=s, func=cmd_synth)

    e = sub.add_parser("experience", help="actual against expected deaths over a period", formatter_class=fmt,
                       epilog=textwrap.dedent("""\
        example:
          valuation experience assumptions/demo_basis.toml member_data_demo/members_start.csv \\
              member_data_demo/deaths.csv --period-start 2022-03-31 --period-end 2025-03-31 \\
              --exits member_data_demo/exits.csv --valuation-members member_data_demo/members.csv
        """) + EPILOG_EXIT)
    e.add_argument("basis", type=existing_file, help="assumptions basis (TOML)")
    e.add_argument("members", type=existing_file, help="member data at the start of the period")
    e.add_argument("deaths", type=existing_file, help=DEATHS_HELP)
    _period_options(e)
    e.add_argument("--valuation-members", type=existing_file,
                   help="member data at the valuation date, to re-value at the implied table")
    _experience_options(e)
    e.add_argument("--out", type=new_path, help="folder to write: new, empty, or a previous one with --overwrite "
                                 "(default: outputs/experience-<period end>, never an existing folder)")
    _overwrite(e, "a previous experience folder in --out")
    e.add_argument("--accept-exclusions", action="store_true",
                   help="analyse even when more start-membership records are excluded than the basis allows")
    common(e)
    e.set_defaults(parser=e, func=cmd_experience)
    mv = sub.add_parser("movements", help="membership movements between two member extracts", formatter_class=fmt,
                        epilog=textwrap.dedent("""\
        example:
          valuation movements assumptions/demo_basis.toml member_data_demo/members_start.csv \\
              member_data_demo/members.csv --period-start 2022-03-31 --period-end 2025-03-31 \\
              --deaths member_data_demo/deaths.csv --exits member_data_demo/exits.csv
        """) + EPILOG_EXIT)
    mv.add_argument("basis", type=existing_file, help="assumptions basis (TOML): its [mapping] reads both extracts")
    mv.add_argument("previous", type=existing_file, help="member data at the start of the period")
    mv.add_argument("current", type=existing_file, help="member data at the end of the period")
    _period_options(mv, ": the previous extract's date", ": the current extract's date")
    mv.add_argument("--deaths", type=existing_file, help=DEATHS_HELP)
    mv.add_argument("--exits", type=existing_file, help=EXITS_HELP)
    _format_options(mv)
    _folder_options(mv, "movements", "movements-<period end>",
                    "classify even when an extract has more excluded records than the basis allows")
    common(mv)
    mv.set_defaults(parser=mv, func=cmd_movements)
    rf = sub.add_parser("rollforward", help="roll a valuation forward to a later date (approximate)",
                        formatter_class=fmt, epilog=textwrap.dedent("""\
        example:
          valuation rollforward assumptions/demo_basis.toml member_data_demo/members.csv --to 2026-03-31 \\
              --new-basis assumptions/demo_basis_2026.toml
        """) + EPILOG_EXIT)
    rf.add_argument("basis", type=existing_file, help="the basis of the valuation to roll forward (TOML)")
    rf.add_argument("members", type=existing_file, help="the member data of that valuation")
    rf.add_argument("--to", type=iso_date, required=True,
                    help="the new date: whole months after the valuation date (ISO date YYYY-MM-DD)")
    rf.add_argument("--new-basis", type=existing_file,
                    help="a basis dated --to whose discount, inflation and salary growth are used")
    _format_options(rf)
    _folder_options(rf, "roll-forward", "rollforward-<date>",
                    "roll forward even when more records are excluded than the basis allows")
    common(rf)
    rf.set_defaults(parser=rf, func=cmd_rollforward)
    ch = sub.add_parser("change", help="analysis of change of the liability between two valuations",
                        formatter_class=fmt, epilog=textwrap.dedent("""\
        example:
          valuation change assumptions/demo_basis_2022.toml member_data_demo/members_start.csv \\
              assumptions/demo_basis.toml member_data_demo/members.csv
        """) + EPILOG_EXIT)
    ch.add_argument("previous_basis", type=existing_file, help="the previous valuation's basis (TOML)")
    ch.add_argument("previous_members", type=existing_file, help="the previous valuation's member data")
    ch.add_argument("current_basis", type=existing_file, help="the current valuation's basis (TOML)")
    ch.add_argument("current_members", type=existing_file, help="the current valuation's member data")
    ch.add_argument("--benefits-paid", type=non_negative_float,
                    help="benefits actually paid in the period [currency] (default: those the previous valuation "
                         "expected)")
    ch.add_argument("--deaths", type=existing_file, help=DEATHS_HELP + " (tells deaths from other departures in "
                    "the experience split)")
    ch.add_argument("--exits", type=existing_file, help=EXITS_HELP)
    ch.add_argument("--order", type=_step_order, default=("demographic", "financial", "other"),
                    help="order of the assumption steps (default demographic,financial,other)")
    _format_options(ch)
    _folder_options(ch, "analysis", "change-<current date>",
                    "analyse even when more records are excluded than the basis allows")
    common(ch)
    ch.set_defaults(parser=ch, func=cmd_change)
    t = sub.add_parser("table", help="look at a mortality table or improvement scale file before using it",
                       formatter_class=fmt, epilog=textwrap.dedent("""\
        examples:
          valuation table tables/downloaded.xml
          valuation table tables/downloaded.xml --name "My table" --chart q.png
        """) + EPILOG_EXIT)
    t.add_argument("file", type=existing_file, help="table file: XTbML (.xml), CSV or XLSX")
    t.add_argument("--name", help="only this table of a file with several (as listed)")
    t.add_argument("--chart", type=new_path, help="also draw the table's rates by age to this new PNG file")
    _overwrite(t, "an existing --chart file")
    common(t)
    t.set_defaults(parser=t, func=cmd_table)
    return p


def _validate(parser: argparse.ArgumentParser, args: argparse.Namespace) -> None:
    """Checks across options; a failure is a usage error (exit 2) naming the options."""
    sub: argparse.ArgumentParser = args.parser
    start, end = getattr(args, "period_start", None), getattr(args, "period_end", None)
    if start is not None and end is not None and start >= end:
        sub.error(f"the period start {start.isoformat()} must be before the period end {end.isoformat()}")
    if args.command != "run":
        return
    period = {"--deaths": args.deaths, "--start-members": args.start_members,
              "--period-start": args.period_start, "--period-end": args.period_end}
    given = [k for k, v in period.items() if v is not None]
    if given and len(given) < len(period):
        missing = [k for k in period if k not in given]
        sub.error(f"the experience analysis needs {', '.join(period)} together; missing: {', '.join(missing)}")
    options = [f"--{k.replace('_', '-')}" for k in EXPERIENCE_DEFAULTS if getattr(args, k) is not None]
    if options and not given:
        sub.error(f"{', '.join(options)} only apply to the experience analysis; add --deaths, --start-members, "
                  "--period-start and --period-end, or leave them out")
    if args.stream and given:
        sub.error("--stream does not combine with the experience analysis; run `valuation experience` separately")
    if args.previous_basis is not None and not given:
        sub.error("--previous-basis needs the experience inputs (--deaths, --start-members, --period-start, "
                  "--period-end): the start membership is the previous valuation's")


def _terminate(signum: int, frame: Any) -> None:
    """SIGTERM ends the run through the normal exception path, so temporary output is removed."""
    raise KeyboardInterrupt


def _crash_report(exc: BaseException) -> str:
    """Write the details of an unexpected error to a file and return its path (for a bug report)."""
    import traceback

    fd, name = tempfile.mkstemp(prefix="valuation-error-", suffix=".txt")
    with os.fdopen(fd, "w", encoding="utf-8") as fh:
        fh.write(f"valuation {__version__}\nargs: {sys.argv!r}\n\n")
        fh.write("".join(traceback.format_exception(exc)))
    return name


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    _validate(parser, args)
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, _terminate)
    try:
        return int(args.func(args))
    except Exception as exc:
        if _interrupted(exc):  # a library caught the interrupt and raised its own error
            return _stop("valuation: interrupted; nothing was written", EXIT_INTERRUPTED)
        return _failure(exc)
    except KeyboardInterrupt:
        return _stop("valuation: interrupted; nothing was written", EXIT_INTERRUPTED)


def _interrupted(exc: BaseException) -> bool:
    """True when ``exc`` was raised while handling an interrupt (Ctrl-C or SIGTERM)."""
    seen: set[int] = set()
    cur: BaseException | None = exc
    while cur is not None and id(cur) not in seen:
        if isinstance(cur, KeyboardInterrupt):
            return True
        seen.add(id(cur))
        cur = cur.__cause__ or cur.__context__
    return False


def _stop(message: str, code: int) -> int:
    """Say ``message`` on stderr, a further Ctrl-C or SIGTERM ignored while it is said, and return ``code``."""
    if threading.current_thread() is not threading.main_thread():
        _print(message, file=sys.stderr)
        return code
    previous = {sig: signal.signal(sig, signal.SIG_IGN) for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        _print(message, file=sys.stderr)
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    return code


def _failure(exc: Exception) -> int:
    """The message and exit code for an error that ended a command."""
    if isinstance(exc, ValuationError):
        return _stop(f"valuation: error: {exc}", int(getattr(exc, "exit_code", EXIT_INPUT)))
    if isinstance(exc, BrokenPipeError):
        _silence(sys.stdout)
        return EXIT_OK
    if isinstance(exc, MemoryError):
        return _stop("valuation: error: not enough memory (for a very large scheme, `valuation run --stream` "
                     "with a smaller --chunk-size)", EXIT_INPUT)
    if isinstance(exc, OSError):  # a file that cannot be read or written: disk full, permission, vanished file
        where = exc.filename or "a file"
        return _stop(f"valuation: error: {where}: {exc.strerror or exc}; nothing was written", EXIT_INPUT)
    report = _crash_report(exc)  # an internal error: said plainly, the details kept for a bug report
    return _stop(f"valuation: internal error ({type(exc).__name__}); nothing was written. This is a bug in the "
                 f"tool, not in your data: please report it with the details saved in {report}", EXIT_INTERNAL)


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
