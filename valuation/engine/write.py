"""Writing a run folder atomically: everything goes to a temporary folder beside the target, which is
renamed into place only when every file is complete, so an interrupted run leaves no half-written folder.
"""

from __future__ import annotations

import os
import shutil
import signal
import tempfile
from collections.abc import Callable
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from valuation.engine.results import ValuationResult
from valuation.manifest import dump_json

#: Per-member results are also written as CSV (and to the workbook) up to this many members.
SMALL_SCHEME = 50_000

ExtraWriter = Callable[[ValuationResult, Path], None]


@contextmanager
def atomic_folder(target: str | Path, *, overwrite: bool = True) -> Iterator[Path]:
    """Yield a temporary folder that replaces ``target`` when the block ends without an exception."""
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    # Hold SIGINT/SIGTERM while the folder is created, so a signal cannot land between its creation and
    # the cleanup handler below; it is delivered as soon as the handler is in place.
    held = {signal.SIGINT, signal.SIGTERM}
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}.partial-", dir=target.parent))
    try:
        signal.pthread_sigmask(signal.SIG_SETMASK, previous)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o777 & ~umask)
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    old = target.with_name(f".{target.name}.old-{tmp.name.rsplit('-', 1)[-1]}")
    try:
        if target.exists():
            if not overwrite:
                raise FileExistsError(f"{target} already exists")
            target.rename(old)
        tmp.rename(target)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        if old.exists() and not target.exists():
            old.rename(target)  # put the previous run back
        raise
    shutil.rmtree(old, ignore_errors=True)


def write_tables(result: ValuationResult, folder: Path) -> None:
    """summary.json, cashflows.csv, exceptions.csv, liabilities.csv, sensitivities.csv, members.parquet..."""
    dump_json(result.summary, folder / "summary.json")
    dump_json(result.summary["manifest"], folder / "manifest.json")
    result.cashflows.write_csv(folder / "cashflows.csv")
    result.exceptions.write_csv(folder / "exceptions.csv")
    result.liabilities.write_csv(folder / "liabilities.csv")
    result.sensitivities.write_csv(folder / "sensitivities.csv")
    result.life_expectancy.write_csv(folder / "life_expectancy.csv")
    result.expected_deaths.write_csv(folder / "expected_deaths.csv")
    if result.members.width:  # streaming runs write their per-member rows elsewhere
        result.members.write_parquet(folder / "members.parquet")
        if result.members.height <= SMALL_SCHEME:
            result.members.write_csv(folder / "members.csv")


def write_run(result: ValuationResult, out_dir: str | Path, *, extra: list[ExtraWriter] | None = None) -> Path:
    """Write the run folder ``out_dir`` atomically and return its path.

    ``extra`` writers (the Excel workbook, the HTML summary) run inside the same temporary folder.
    """
    out_dir = Path(out_dir)
    with atomic_folder(out_dir) as tmp:
        write_tables(result, tmp)
        for writer in extra or []:
            writer(result, tmp)
    return out_dir


__all__ = ["atomic_folder", "write_run", "write_tables", "SMALL_SCHEME"]
