"""Benchmark: a synthetic scheme valued end to end as ``valuation run`` does it, beside the I/O floor.

Usage::

    .venv/bin/python benchmarks/bench_valuation.py --members 1000000                     # nine sensitivities
    .venv/bin/python benchmarks/bench_valuation.py --members 1000000 --no-sensitivities
    .venv/bin/python benchmarks/bench_valuation.py --members 10000000 --no-sensitivities --stream
    .venv/bin/python benchmarks/bench_valuation.py --members 1000000 --pensioners-with-spouses --loop-sample 200

What is timed, in one process, after the scheme is generated in a child process (not counted):

- the **I/O floor**: a plain polars read of the member file, and a Parquet write of one row a member (id
  and one number) — what any tool must spend to read the file and write per-member results (timed in a
  child process, so that holding the whole file does not count in the run's peak memory);
- the **run**, through the same pipeline as ``valuation run`` (:func:`valuation.pipeline.run`) into a run
  folder with every output file, the workbook and the HTML summary included, split into its stages
  (read + validate, value, write) from the pipeline's progress calls, each with its ratio to the I/O floor;
- with ``--loop-sample N``, a straightforward per-member loop (``benchmarks/per_member_loop.py``: monthly
  steps, UDD, survival updated step by step) on N members of the same scheme, and the ratio of its time a
  member to the pipeline's value stage a member.

The synthetic scheme comes from ``valuation synth``'s generator with a fixed seed (all four statuses,
spouses, tranches, guarantees); ``--pensioners-with-spouses`` makes every record a pensioner with a known
spouse. The basis is ``assumptions/demo_basis.toml`` (monthly payments, exact ages, generational
improvement, nine sensitivities). Peak memory is this process's maximum resident set size. Nothing here is
run by the test suite: speed is measured by this script only.
"""

from __future__ import annotations

import argparse
import multiprocessing
import resource
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "benchmarks"))


def peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux reports KiB


def generate(members: int, seed: int, basis_path: str, path: Path, pensioners_with_spouses: bool) -> None:
    """Write the synthetic scheme to ``path`` (run in a child process)."""
    import polars as pl

    from valuation.basis import load_basis
    from valuation.members.synth import synth_scheme, write_scheme

    basis = load_basis(basis_path)
    df = synth_scheme(members, seed=seed, valuation_date=basis.valuation_date)
    if pensioners_with_spouses:
        vd = basis.valuation_date
        age = (pl.lit(vd) - pl.col("date_of_birth")).dt.total_days() / 365.25
        df = df.with_columns(
            status=pl.lit("pensioner"),
            pension=pl.when(pl.col("pension").is_null() | (pl.col("pension") <= 0)).then(6000.0)
            .otherwise(pl.col("pension")),
            date_of_birth=pl.when(age < 55).then(pl.col("date_of_birth") - pl.duration(days=int(20 * 365.25)))
            .otherwise(pl.col("date_of_birth")),
        ).with_columns(
            spouse_date_of_birth=pl.col("date_of_birth") + pl.duration(days=int(3 * 365.25)),
            pension_end_age=pl.lit(None, dtype=pl.Float64),
            salary=pl.lit(None, dtype=pl.Float64), service_years=pl.lit(None, dtype=pl.Float64),
        )
        tranches = [c for c in df.columns if c.startswith("pension_") and c != "pension_end_age"]
        df = df.with_columns(pl.lit(None, dtype=pl.Float64).alias(c) for c in tranches)
    write_scheme(df, path)


class StageClock:
    """Times the pipeline's stages from its progress calls: reading, valuing, writing."""

    def __init__(self) -> None:
        self.start = time.perf_counter()
        self.marks: dict[str, float] = {}

    def __call__(self, label: str, done: int, total: int) -> None:
        stage = "read" if label == "reading" else "write" if label == "writing" else "value"
        self.marks.setdefault(stage, time.perf_counter())

    def stages(self, end: float) -> dict[str, float]:
        t_value = self.marks.get("value", end)
        t_write = self.marks.get("write", end)
        return {"read + validate": t_value - self.start, "value": t_write - t_value, "write": end - t_write}


def io_floor_in_child(path: Path, tmp: Path) -> dict[str, float]:
    """:func:`io_floor` in a child process, so that its memory does not count in this process's peak."""
    ctx = multiprocessing.get_context("spawn")
    queue = ctx.Queue()
    child = ctx.Process(target=_io_floor_to, args=(path, tmp, queue))
    child.start()
    result = queue.get()
    child.join()
    return result


def _io_floor_to(path: Path, tmp: Path, queue: multiprocessing.Queue) -> None:  # type: ignore[type-arg]
    queue.put(io_floor(path, tmp))


def io_floor(path: Path, tmp: Path) -> dict[str, float]:
    """A plain polars read of the file, and a Parquet write of one row a member [s]."""
    import polars as pl

    t0 = time.perf_counter()
    df = pl.read_parquet(path) if path.suffix == ".parquet" else pl.read_csv(path, infer_schema=False)
    t1 = time.perf_counter()
    ids = df.get_column(df.columns[0])
    pl.DataFrame({"member_id": ids, "liability": pl.Series([1.0] * df.height)}).write_parquet(tmp / "floor.parquet")
    t2 = time.perf_counter()
    return {"read": t1 - t0, "write": t2 - t1, "total": t2 - t0}


def bench_change(args: argparse.Namespace) -> int:
    """The analysis of change of a synthetic scheme, whole: the previous extract valued and rolled forward,
    the current one valued on the previous basis at the current date, then on each step's basis, then on its
    own (about six valuations, no sensitivities)."""
    from valuation import pipeline
    from valuation.basis import load_basis

    basis = load_basis(args.basis)
    previous = load_basis(ROOT / "assumptions" / "demo_basis_2022.toml")
    with tempfile.TemporaryDirectory() as folder:
        tmp = Path(folder)
        cur, prev = tmp / "current.parquet", tmp / "previous.parquet"
        t0 = time.perf_counter()
        for seed, bas, path in ((args.seed, args.basis, cur), (args.seed + 1, str(previous.source_path), prev)):
            child = multiprocessing.get_context("spawn").Process(target=generate,
                                                                 args=(args.members, seed, bas, path, False))
            child.start()
            child.join()
        t_gen = time.perf_counter() - t0
        start = time.perf_counter()
        run = pipeline.change(previous, prev, basis, cur, accept_exclusions=True)
        wall = time.perf_counter() - start
    print(f"members            {args.members:,} in each extract")
    print(f"generate (child)   {t_gen:8.2f} s (not counted)")
    print(f"analysis of change {wall:8.2f} s (read both extracts, about six valuations, the movements and the "
          "experience split)")
    print(f"peak memory        {peak_mb():,.0f} MB")
    print(f"closing liability  {run.analysis.amount('closing'):,.0f}; check {run.analysis.check():.3g}")
    return 0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--members", type=int, default=1_000_000)
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--basis", default=str(ROOT / "assumptions" / "demo_basis.toml"))
    ap.add_argument("--no-sensitivities", action="store_true")
    ap.add_argument("--no-reports", action="store_true", help="leave out the workbook and the HTML summary")
    ap.add_argument("--chunk-size", type=int, default=1_000_000)
    ap.add_argument("--stream", action="store_true", help="read and value chunk by chunk (flat memory)")
    ap.add_argument("--pensioners-with-spouses", action="store_true",
                    help="every record a pensioner with a known spouse")
    ap.add_argument("--loop-sample", type=int, default=0,
                    help="time a straightforward per-member loop on this many members, for the ratio")
    ap.add_argument("--change", action="store_true",
                    help="time the analysis of change instead: a previous extract three years earlier (the same "
                         "generator, another seed) on assumptions/demo_basis_2022.toml, then the scheme on the basis")
    args = ap.parse_args()
    if args.change:
        return bench_change(args)

    from valuation import pipeline
    from valuation.basis import load_basis

    basis = load_basis(args.basis)
    sens = not args.no_sensitivities
    with tempfile.TemporaryDirectory() as folder:
        tmp = Path(folder)
        path = tmp / "scheme.parquet"
        t0 = time.perf_counter()
        child = multiprocessing.get_context("spawn").Process(
            target=generate, args=(args.members, args.seed, args.basis, path, args.pensioners_with_spouses))
        child.start()
        child.join()
        if child.exitcode != 0:
            print(f"generating the scheme failed (exit code {child.exitcode})", file=sys.stderr)
            return 1
        t_gen = time.perf_counter() - t0
        floor = io_floor_in_child(path, tmp)
        clock = StageClock()
        outcome = pipeline.run(basis, path, out=tmp / "run", sensitivities=sens, reports=not args.no_reports,
                               chunk_size=args.chunk_size, stream=args.stream, accept_exclusions=True,
                               progress=clock)
        end = time.perf_counter()
        stages = clock.stages(end)
        total = end - clock.start
        loop = None
        if args.loop_sample:
            from per_member_loop import time_per_member

            loop = time_per_member(basis, path, args.loop_sample)
    res = outcome.result
    records = res.summary.records
    print(f"members            {args.members:,} (valued {records.valued:,}, excluded {records.excluded:,})")
    print(f"sensitivities      {len(res.summary.sensitivities) if sens else 0}"
          f"{'' if args.no_reports else '; workbook and HTML written'}{'; streamed' if args.stream else ''}")
    print(f"generate (child)   {t_gen:8.2f} s (not counted)")
    print(f"I/O floor          {floor['total']:8.2f} s (polars read {floor['read']:.2f} s + Parquet write "
          f"{floor['write']:.2f} s)")
    for name, secs in stages.items():
        shown = "(inside value)" if args.stream and name == "read + validate" else f"{secs:8.2f} s"
        print(f"{name:<18} {shown}   x{secs / floor['total']:,.1f} the I/O floor")
    print(f"wall (end to end)  {total:8.2f} s   x{total / floor['total']:,.1f} the I/O floor")
    print(f"members/second     {args.members / total:,.0f}")
    print(f"peak memory        {peak_mb():,.0f} MB")
    print(f"liability          {res.summary.liability.total:,.0f}")
    if loop is not None:
        engine_per_member = stages["value"] / max(records.valued, 1)
        print(f"per-member loop    {loop:.4f} s a member ({args.loop_sample} members); pipeline value stage "
              f"{engine_per_member * 1e6:,.1f} us a member; ratio x{loop / engine_per_member:,.0f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
