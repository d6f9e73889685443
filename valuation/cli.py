"""Command line. Parses arguments and calls the library; every command is one Python call away.

Exit codes: 0 success; 1 unexpected internal error; 2 usage error (bad arguments); 3 fatal input error
(a data, basis or table file that cannot be used: the message on stderr names the file, row, column and
the fix). Nothing is left half-written: run folders are written to a temporary folder and moved into
place at the end.
"""

from __future__ import annotations

import argparse
import signal
import sys
import textwrap
import threading
from datetime import date
from pathlib import Path
from typing import Any

from valuation import __version__
from valuation.errors import ValuationError

EXIT_OK, EXIT_INTERNAL, EXIT_USAGE, EXIT_INPUT = 0, 1, 2, 3

EPILOG_EXIT = """exit codes: 0 ok; 1 internal error; 2 usage error; 3 input error (data, basis or table file),
with the message on stderr."""


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


def _say(args: argparse.Namespace, text: str) -> None:
    if not args.quiet:
        print(text)


def _report_writers(experience: Any = None) -> list:
    try:
        from valuation.reports import write_html, write_workbook
    except ImportError:  # pragma: no cover - reports are part of the package
        return []

    def wb(result: Any, folder: Path) -> None:
        write_workbook(result, folder / "valuation.xlsx", experience=experience)

    def html(result: Any, folder: Path) -> None:
        write_html(result, folder / "summary.html", experience=experience)

    return [wb, html]


def _headline(result: Any) -> str:
    s = result.summary
    lines = [
        f"valuation date {s['valuation_date']}: liability {s['liability']['total']:,.0f}",
    ]
    for st, v in s["liability"]["by_status"].items():
        lines.append(f"  {st:<10} {v:>16,.0f}")
    d = s["duration"]
    sedr = s["single_equivalent_discount_rate"]
    sedr_text = f"{100 * sedr:.3f} %" if sedr is not None and sedr == sedr else "n/a"
    lines.append(f"duration (Macaulay) {d['macaulay']:.2f} years; single equivalent rate {sedr_text}")
    return "\n".join(lines)


def cmd_run(args: argparse.Namespace) -> int:
    from valuation.basis import load_basis
    from valuation.engine.run import value_members
    from valuation.engine.write import write_run
    from valuation.members import read_members

    progress = _Progress(args.quiet)
    basis = load_basis(args.basis)
    if args.stream:
        return _run_streaming(args, basis, progress)
    progress("reading", 0, 1)
    data = read_members(args.members, basis)
    _say(args, data.reconciliation_text())
    experience = None
    extra_inputs: list[str] = []
    if args.deaths:
        if not (args.start_members and args.period_start and args.period_end):
            raise ValuationError("--deaths needs --start-members, --period-start and --period-end",
                                 fix="give the membership at the start of the period and the period's dates")
        experience = _experience(args, basis)
        extra_inputs = [p for p in (args.start_members, args.deaths, args.exits) if p]
    result = value_members(data, basis, sensitivities=not args.no_sensitivities, chunk_size=args.chunk_size,
                           progress=progress, input_files=extra_inputs)
    progress("writing", 0, 1)
    out = Path(args.out) if args.out else Path("outputs") / Path(args.members).stem
    writers = [] if args.no_reports else _report_writers(experience)
    if experience is not None:
        writers.append(lambda _res, folder: experience.write(folder))
    write_run(result, out, extra=writers)
    progress.close()
    _say(args, _headline(result))
    if experience is not None:
        _say(args, _experience_line(experience))
    _say(args, f"written to {out}/")
    return EXIT_OK


def _run_streaming(args: argparse.Namespace, basis: Any, progress: _Progress) -> int:
    """Very large files: read, validate and value in chunks; per-member rows go straight to disk."""
    import os
    import shutil

    from valuation.engine.stream import value_file_streaming
    from valuation.engine.write import write_run

    if args.deaths:
        raise ValuationError("--stream does not combine with the experience analysis",
                             fix="run `valuation experience` separately")
    out = Path(args.out) if args.out else Path("outputs") / Path(args.members).stem
    out.parent.mkdir(parents=True, exist_ok=True)
    members_tmp = out.parent / f".{out.name}.members-{os.getpid()}.parquet"
    try:
        result = value_file_streaming(args.members, basis, chunk_rows=args.chunk_size,
                                      member_results_path=members_tmp,
                                      sensitivities=not args.no_sensitivities, progress=progress)
        progress.close()
        _say(args, f"records read {result.summary['records']['read']:,} = valued "
                   f"{result.summary['records']['valued']:,} + excluded {result.summary['records']['excluded']:,}")

        def move_members(_res: Any, folder: Path) -> None:
            shutil.move(str(members_tmp), folder / "members.parquet")

        writers = ([] if args.no_reports else _report_writers()) + [move_members]
        write_run(result, out, extra=writers)
    finally:
        members_tmp.unlink(missing_ok=True)
    _say(args, _headline(result))
    _say(args, f"written to {out}/")
    return EXIT_OK


def _experience_line(res: Any) -> str:
    o = res.table.filter(res.table["dimension"] == "overall").row(0, named=True)
    d = res.summary.get("records", {}).get("deaths", {})
    counted = (f"deaths read {d['read']:,} = counted {d['counted']:,} + excluded {d['excluded']:,}\n"
               if {"read", "counted", "excluded"} <= set(d) else "")
    return counted + (f"deaths: A/E by lives {100 * o['ae_lives']:.1f} % ({100 * o['ae_lives_lower']:.1f} % to "
            f"{100 * o['ae_lives_upper']:.1f} %); by amounts {100 * o['ae_amounts']:.1f} % "
            f"({100 * o['ae_amounts_lower']:.1f} % to {100 * o['ae_amounts_upper']:.1f} %)")


def _experience(args: argparse.Namespace, basis: Any) -> Any:
    from valuation.experience import ExperienceSettings, analyse_experience

    settings = ExperienceSettings(
        period_start=date.fromisoformat(args.period_start), period_end=date.fromisoformat(args.period_end),
        exposure=args.exposure, confidence=args.confidence, overdispersion=args.overdispersion,
        late_months=args.late_months, late_uplift=args.late_uplift,
    )
    return analyse_experience(args.start_members, args.deaths, basis, settings, exits_path=args.exits,
                              valuation_members_path=args.members)


def cmd_check(args: argparse.Namespace) -> int:
    from valuation.basis import load_basis
    from valuation.members import read_members

    basis = load_basis(args.basis)
    data = read_members(args.members, basis)
    print(data.reconciliation_text())
    if data.exceptions.height:
        counts = data.exceptions.group_by(["severity", "reason"]).len().sort(["severity", "len"], descending=[False, True])
        for sev, reason, n in counts.iter_rows():
            print(f"  {sev:<8} {n:>6}  {reason}")
    if args.exceptions:
        data.exceptions.write_csv(args.exceptions)
        print(f"exceptions written to {args.exceptions}")
    return EXIT_OK


def cmd_synth(args: argparse.Namespace) -> int:
    from valuation.members.synth import synth_scheme, write_scheme

    if args.members < 1:
        raise ValuationError("--members must be a whole number of at least 1", fix="e.g. --members 10000")
    if Path(args.out).suffix.lower() not in (".csv", ".parquet", ".xlsx"):
        raise ValuationError("the output file must end in .csv, .parquet or .xlsx", file=args.out)

    vd = date.fromisoformat(args.valuation_date)
    df = synth_scheme(args.members, seed=args.seed, valuation_date=vd)
    write_scheme(df, Path(args.out))
    _say(args, f"{df.height:,} synthetic members written to {args.out}")
    return EXIT_OK


def cmd_batch(args: argparse.Namespace) -> int:
    from valuation.engine.batch import run_batch

    progress = _Progress(args.quiet)
    index = run_batch(args.batch, out_root=Path(args.out) if args.out else None, progress=progress,
                      writers=_report_writers)
    progress.close()
    from valuation.engine.batch import index_text

    _say(args, index_text(index))
    return EXIT_OK


def cmd_experience(args: argparse.Namespace) -> int:
    from valuation.basis import load_basis
    from valuation.engine.write import atomic_folder

    basis = load_basis(args.basis)
    args.start_members, args.period_start, args.period_end = args.members, args.start, args.end
    args.members = args.valuation_members
    res = _experience(args, basis)
    out = Path(args.out) if args.out else Path("outputs") / "experience"
    with atomic_folder(out) as tmp:
        res.write(tmp)
    _say(args, _experience_line(res))
    _say(args, f"written to {out}/")
    return EXIT_OK


def _experience_options(sp: argparse.ArgumentParser) -> None:
    sp.add_argument("--exits", help="other exits: member_id, exit_date, reason")
    sp.add_argument("--exposure", choices=["central", "initial"], default="central",
                    help="central exposed-to-risk with mu (default) or initial exposure with q")
    sp.add_argument("--confidence", type=float, default=0.95, help="confidence level of the intervals")
    sp.add_argument("--overdispersion", type=float, default=1.0, help="variance factor for amounts")
    sp.add_argument("--late-months", type=int, default=0, help="final months with late-reported deaths")
    sp.add_argument("--late-uplift", type=float, default=0.0, help="uplift to deaths in those months, e.g. 0.05")


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
              --deaths member_data_demo/deaths.csv --start-members member_data_demo/members_start.csv \\
              --period-start 2022-03-31 --period-end 2025-03-31 --exits member_data_demo/exits.csv
        """) + EPILOG_EXIT)
    r.add_argument("basis", help="assumptions basis (TOML)")
    r.add_argument("members", help="member data file (CSV, XLSX or Parquet)")
    r.add_argument("--out", help="run folder to write (default: outputs/<member file name>)")
    r.add_argument("--no-sensitivities", action="store_true", help="skip the sensitivity re-valuations")
    r.add_argument("--no-reports", action="store_true", help="skip the workbook and HTML summary")
    r.add_argument("--chunk-size", type=int, default=1_000_000,
                   help="members valued at a time: larger chunks share more survival curves, smaller ones use less memory")
    r.add_argument("--stream", action="store_true",
                   help="read, validate and value the file in chunks (flat memory for very large schemes)")
    g = r.add_argument_group("experience analysis (optional): deaths since the last valuation, in the reports")
    g.add_argument("--deaths", help="deaths file: member_id, date_of_death[, pension_at_death]")
    g.add_argument("--start-members", help="member data at the start of the period")
    g.add_argument("--period-start", help="period start (ISO date)")
    g.add_argument("--period-end", help="period end (ISO date), usually the valuation date")
    _experience_options(g)  # type: ignore[arg-type]
    common(r)
    r.set_defaults(func=cmd_run)

    c = sub.add_parser("check", help="validate member data and basis without valuing", formatter_class=fmt,
                       epilog="example:\n  valuation check assumptions/demo_basis.toml member_data_demo/members_dirty.csv"
                              " --exceptions exceptions.csv\n" + EPILOG_EXIT)
    c.add_argument("basis")
    c.add_argument("members")
    c.add_argument("--exceptions", help="write the exceptions list to this CSV file")
    common(c)
    c.set_defaults(func=cmd_check)

    b = sub.add_parser("batch", help="run every valuation listed in a batch file", formatter_class=fmt,
                       epilog="example:\n  valuation batch assumptions/demo_batch.toml\n" + EPILOG_EXIT)
    b.add_argument("batch", help="batch file (TOML) listing runs")
    b.add_argument("--out", help="folder for the run folders and the index (default: from the batch file)")
    common(b)
    b.set_defaults(func=cmd_batch)

    s = sub.add_parser("synth", help="write a synthetic scheme of any size, reproducibly", formatter_class=fmt,
                       epilog="example:\n  valuation synth --members 1000000 --seed 7 --out outputs/synth.parquet\n"
                              + EPILOG_EXIT)
    s.add_argument("--members", type=int, required=True, help="number of member records")
    s.add_argument("--seed", type=int, default=1, help="random seed (same seed, same file)")
    s.add_argument("--valuation-date", default="2026-12-31", help="ISO date the ages refer to")
    s.add_argument("--out", required=True, help="output file: .csv, .parquet or .xlsx")
    common(s)
    s.set_defaults(func=cmd_synth)

    e = sub.add_parser("experience", help="actual against expected deaths over a period", formatter_class=fmt,
                       epilog=textwrap.dedent("""\
        example:
          valuation experience assumptions/demo_basis.toml member_data_demo/members_start.csv \\
              member_data_demo/deaths.csv --start 2022-03-31 --end 2025-03-31 \\
              --exits member_data_demo/exits.csv --valuation-members member_data_demo/members.csv
        """) + EPILOG_EXIT)
    e.add_argument("basis")
    e.add_argument("members", help="member data at the start of the period")
    e.add_argument("deaths", help="deaths file: member_id, date_of_death[, pension_at_death]")
    e.add_argument("--start", required=True, help="period start (ISO date)")
    e.add_argument("--end", required=True, help="period end (ISO date)")
    e.add_argument("--valuation-members", help="member data at the valuation date, to re-value at the implied table")
    _experience_options(e)
    e.add_argument("--out", help="folder to write (default: outputs/experience)")
    common(e)
    e.set_defaults(func=cmd_experience)
    return p


def _terminate(signum: int, frame: Any) -> None:
    """SIGTERM ends the run through the normal exception path, so temporary output is removed."""
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, _terminate)
    try:
        return int(args.func(args))
    except ValuationError as exc:
        print(f"valuation: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except FileNotFoundError as exc:
        print(f"valuation: error: {exc.filename or exc}: file not found", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print("valuation: interrupted; no partial output was kept", file=sys.stderr)
        return 130
    except Exception as exc:  # an internal error: say so plainly, keep the traceback for a bug report
        import traceback

        traceback.print_exc()
        print(f"valuation: internal error: {exc!r}; no partial output was kept", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
