"""Benchmark: value a synthetic scheme and print wall time, peak memory and members per second.

Usage::

    .venv/bin/python benchmarks/bench_valuation.py --members 1000000            # with all sensitivities
    .venv/bin/python benchmarks/bench_valuation.py --members 1000000 --no-sensitivities
    .venv/bin/python benchmarks/bench_valuation.py --members 10000000 --no-sensitivities --stream
    .venv/bin/python benchmarks/bench_valuation.py --members 10000000 --no-sensitivities --stream

``--stream`` reads, validates and values the file chunk by chunk (``value_file_streaming``) and writes the
per-member results to a Parquet file, so memory stays flat whatever the scheme size; reading and valuing
are interleaved, so their times are reported together.

The synthetic scheme (all four statuses, spouses, tranches, guarantees) comes from ``valuation synth``'s
generator with a fixed seed; the basis is ``assumptions/demo_basis.toml`` (monthly payments,
generational improvement, every sensitivity). The scheme is generated and written in a child process, so
the peak memory printed (this process's maximum resident set size) is that of reading and valuing alone.
Results go to stdout only; nothing is timed inside the test suite.
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


def peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux reports KiB


def generate(members: int, seed: int, basis_path: str, path: Path) -> None:
    """Write the synthetic scheme to ``path`` (run in a child process)."""
    from valuation.basis import load_basis
    from valuation.members.synth import synth_scheme, write_scheme

    basis = load_basis(basis_path)
    write_scheme(synth_scheme(members, seed=seed, valuation_date=basis.valuation_date), path)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--members", type=int, default=1_000_000)
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--basis", default=str(ROOT / "assumptions" / "demo_basis.toml"))
    ap.add_argument("--no-sensitivities", action="store_true")
    ap.add_argument("--chunk-size", type=int, default=1_000_000)
    ap.add_argument("--stream", action="store_true", help="read and value chunk by chunk (flat memory)")
    args = ap.parse_args()

    from valuation.basis import load_basis
    from valuation.engine.run import value_members
    from valuation.engine.stream import value_file_streaming
    from valuation.members import read_members

    basis = load_basis(args.basis)
    sens = not args.no_sensitivities
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "scheme.parquet"
        child = multiprocessing.get_context("spawn").Process(
            target=generate, args=(args.members, args.seed, args.basis, path))
        child.start()
        child.join()
        if child.exitcode != 0:
            print(f"generating the scheme failed (exit code {child.exitcode})", file=sys.stderr)
            return 1
        t_gen = time.perf_counter() - t0
        t1 = time.perf_counter()
        if args.stream:
            res = value_file_streaming(basis, path, chunk_rows=args.chunk_size, sensitivities=sens,
                                       member_results_path=Path(tmp) / "members.parquet")
            t_read, t_value = float("nan"), time.perf_counter() - t1
        else:
            data = read_members(path, basis)
            t_read = time.perf_counter() - t1
            t2 = time.perf_counter()
            res = value_members(basis, data, sensitivities=sens, chunk_size=args.chunk_size)
            t_value = time.perf_counter() - t2
    records = res.summary["records"]
    total = t_value if args.stream else t_read + t_value
    read_line = "   (streamed: inside value)" if args.stream else f"{t_read:8.1f} s"
    print(f"members          {args.members:,} (valued {records['valued']:,}, excluded {records['excluded']:,})")
    print(f"sensitivities    {len(res.summary['sensitivities']) if sens else 0}")
    print(f"generate+write   {t_gen:8.1f} s (not counted)")
    print(f"read+validate    {read_line}")
    print(f"value            {t_value:8.1f} s")
    print(f"wall (read+value){total:8.1f} s")
    print(f"members/second   {args.members / total:,.0f}")
    print(f"peak memory      {peak_mb():,.0f} MB")
    print(f"liability        {res.summary['liability']['total']:,.0f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
