"""Writing output safely: run folders appear whole or not at all, and nothing the tool did not create is
ever deleted or overwritten.

Rules (README, "Where results are written"):

- A run folder is written into a temporary folder beside the target, named ``<target>.incomplete-<pid>``
  (visible, so that a run killed outright leaves something a person recognises), and renamed into place
  when every file is complete. SIGINT and SIGTERM remove it; a later run removes one left by a process
  that no longer exists.
- The target may be a path that does not exist, an empty folder, or a folder that holds a previous run
  of this tool (its ``manifest.json`` lists every file the run wrote, and the folder holds nothing else).
  A previous run is replaced only when the user says so (``overwrite``); anything else at the path (a
  file, a folder of other files, a folder holding the input files) is refused with :class:`OutputError`.
- Single output files (an exceptions list, a synthetic scheme) are written to a temporary file and
  renamed; an existing file is replaced only with ``overwrite``.
- CSV files that people open in spreadsheets are formula-safe (:func:`valuation.csvout.write_csv`).
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import tempfile
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

from valuation.csvout import formula_safe, write_csv
from valuation.engine.results import ValuationResult
from valuation.errors import ValuationError
from valuation.manifest import dump_json
from valuation.version import __version__

#: Per-member results are also written as CSV (and to the workbook) up to this many members.
SMALL_SCHEME = 50_000
#: The file every folder written by the tool carries; it lists the files the tool wrote there.
MANIFEST = "manifest.json"
#: Marker inside a temporary folder, so that a stale one is recognised as the tool's own.
_WRITING = "WRITING-IN-PROGRESS"

ExtraWriter = Callable[[ValuationResult, Path], None]

class OutputError(ValuationError):
    """The output location cannot be used without destroying something, or cannot be written."""


# ----------------------------------------------------------------------------------------------------
# Checking an output location before any work is done
# ----------------------------------------------------------------------------------------------------


def _manifest(folder: Path) -> dict | None:
    try:
        data = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None


def foreign_entries(folder: Path) -> list[str]:
    """What ``folder`` holds that this tool did not write (paths relative to ``folder``): everything, when
    it has no manifest of ours; else what its manifest does not list, looking into run folders inside."""
    m = _manifest(folder)
    entries = sorted(folder.iterdir())
    if m is None or m.get("tool") != "valuation" or not isinstance(m.get("files"), list):
        return [e.name for e in entries]
    listed = {str(f) for f in m["files"]}
    out: list[str] = []
    for entry in entries:
        if entry.name not in listed or entry.is_symlink():
            out.append(entry.name)
        elif entry.is_dir():
            out += [f"{entry.name}/{inner}" for inner in foreign_entries(entry)]
    return out


def is_previous_run(folder: Path) -> bool:
    """True when ``folder`` holds only what a run of this tool wrote there, as its manifest lists."""
    m = _manifest(folder)
    if m is None or m.get("tool") != "valuation" or not isinstance(m.get("files"), list):
        return False
    return not foreign_entries(folder)


def _inside(path: Path, folder: Path) -> bool:
    try:
        path.resolve().relative_to(folder.resolve())
        return True
    except ValueError:
        return False


def _writable_parent(target: Path) -> None:
    """Raise unless the nearest existing folder above ``target`` lets us create it."""
    parent = target.parent
    while not parent.exists():
        if parent.parent == parent:
            break
        parent = parent.parent
    if parent.exists() and not parent.is_dir():
        raise OutputError(f"'{parent}' is a file, so no folder can be made under it", file=target,
                          fix="choose an output path in a folder")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise OutputError(f"no permission to write in '{parent}'", file=target,
                          fix="choose an output folder you can write to")
    try:  # permissions alone do not tell (root, read-only or special file systems): try it
        Path(tempfile.mkdtemp(prefix=".valuation-probe-", dir=parent)).rmdir()
    except OSError as exc:
        raise OutputError(f"cannot write in '{parent}' ({(exc.strerror or 'not allowed').lower()})", file=target,
                          fix="choose an output folder you can write to") from None


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale(target: Path) -> None:
    """Remove temporary folders beside ``target`` left by a run of this tool that was killed outright.

    Only folders named ``<target>.incomplete-<pid>`` or ``<target>.replaced-<pid>`` that carry the tool's
    marker and whose process no longer exists are touched. A replaced previous run is put back when the
    target is missing (the process died between the two renames).
    """
    parent = target.parent
    if not parent.is_dir():
        return
    for kind in ("incomplete", "replaced"):
        for p in parent.glob(f"{target.name}.{kind}-*"):
            pid = p.name.rsplit("-", 1)[-1]
            if not pid.isdigit() or _pid_alive(int(pid)) or not p.is_dir() or p.is_symlink():
                continue
            if kind == "incomplete" and (p / _WRITING).exists():
                shutil.rmtree(p, ignore_errors=True)
            elif kind == "replaced" and is_previous_run(p):
                if not target.exists():
                    p.rename(target)
                else:
                    shutil.rmtree(p, ignore_errors=True)


def check_output_folder(target: str | Path, *, overwrite: bool = False, inputs: Iterable[str | Path] = ()) -> None:
    """Raise :class:`OutputError` unless a run folder can be written at ``target`` destroying nothing.

    Call it before any valuation work, so that a bad output path fails at once.
    """
    target = Path(os.path.abspath(target))
    if target.is_symlink():
        raise OutputError("the output path is a link; the tool writes only real folders", file=target,
                          fix="give a new folder with --out")
    if target.exists() and not target.is_dir():
        raise OutputError("the output path is a file, not a folder; it is left as it is", file=target,
                          fix="give a new folder with --out")
    for inp in inputs:
        if Path(inp).exists() and _inside(Path(inp), target):
            raise OutputError(f"the output folder holds the input file '{inp}'; writing there could destroy it",
                              file=target, fix="give a new folder with --out")
    _writable_parent(target)
    remove_stale(target)
    if target.is_dir() and any(target.iterdir()):
        if not is_previous_run(target):
            others = foreign_entries(target)
            shown = ", ".join(others[:5]) + (f" and {len(others) - 5} more" if len(others) > 5 else "")
            raise OutputError(f"the output folder already holds files the tool did not write ({shown}); "
                              "they are left as they are", file=target,
                              fix="give a new folder with --out")
        if not overwrite:
            raise OutputError("the output folder holds a previous run", file=target,
                              fix="add --overwrite to replace it, or give a new folder with --out")
    elif target.is_dir() and not os.access(target, os.W_OK | os.X_OK):
        raise OutputError("no permission to write in the output folder", file=target,
                          fix="choose an output folder you can write to")


def free_folder(base: Path) -> Path:
    """``base`` if nothing is there, else the first of ``base-2``, ``base-3``, ... that is free.

    Default output folders use it, so two runs never write into the same default folder.
    """
    if not base.exists() and not base.is_symlink():
        return base
    n = 2
    while True:
        candidate = base.with_name(f"{base.name}-{n}")
        if not candidate.exists() and not candidate.is_symlink():
            return candidate
        n += 1


def check_output_file(target: str | Path, *, overwrite: bool = False, inputs: Iterable[str | Path] = ()) -> None:
    """Raise :class:`OutputError` unless a single output file can be written at ``target``; an input file is
    never overwritten, ``overwrite`` or not."""
    target = Path(os.path.abspath(target))
    for inp in inputs:
        if Path(inp).exists() and Path(inp).resolve() == target.resolve():
            raise OutputError(f"the output file is the input file '{inp}'; it is left as it is", file=target,
                              fix="give a new file name")
    if target.is_dir():
        raise OutputError("the output path is a folder, not a file", file=target, fix="give a file name")
    if target.exists() and not overwrite:
        raise OutputError("the output file already exists; it is left as it is", file=target,
                          fix="give a new file name, or add --overwrite to replace it")
    _writable_parent(target)


def _make_parents(target: Path) -> list[Path]:
    """Create the folders above ``target`` that are missing; return them, deepest first, so that a failed
    run can remove what it made."""
    made = []
    parent = target.parent
    while not parent.exists():
        made.append(parent)
        parent = parent.parent
    target.parent.mkdir(parents=True, exist_ok=True)
    return made


def _remove_made(made: list[Path]) -> None:
    """Remove the folders a failed run made, deepest first, as long as they are empty."""
    for folder in made:
        try:
            folder.rmdir()
        except OSError:
            break


@contextmanager
def atomic_file(target: str | Path, *, overwrite: bool = False, inputs: Iterable[str | Path] = ()) -> Iterator[Path]:
    """Yield a temporary path beside ``target`` that is renamed onto it when the block succeeds."""
    target = Path(os.path.abspath(target))
    check_output_file(target, overwrite=overwrite, inputs=inputs)
    made = _make_parents(target)
    fd, name = tempfile.mkstemp(prefix=f"{target.stem}.incomplete-", suffix=target.suffix, dir=target.parent)
    os.close(fd)
    tmp = Path(name)
    done = False
    try:
        yield tmp
        if target.exists() and not overwrite:  # appeared while we were working
            raise OutputError("the output file appeared while the tool was writing; it is left as it is",
                              file=target, fix="give a new file name")
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # as an ordinary new file (mkstemp makes it private)
        os.replace(tmp, target)
        done = True
    finally:
        tmp.unlink(missing_ok=True)
        if not done:
            _remove_made(made)


# ----------------------------------------------------------------------------------------------------
# Atomic run folders
# ----------------------------------------------------------------------------------------------------


def mark_files(folder: Path) -> None:
    """Record in the folder's manifest that the tool wrote it, and which files it holds."""
    m = _manifest(folder) or {"tool_version": __version__}
    files = sorted(p.name for p in folder.iterdir() if p.name != _WRITING)
    if MANIFEST not in files:
        files.append(MANIFEST)
    dump_json({"tool": "valuation", **{k: v for k, v in m.items() if k not in ("tool", "files")},
               "files": sorted(files)}, folder / MANIFEST)


@contextmanager
def atomic_folder(
    target: str | Path, *, overwrite: bool = False, inputs: Iterable[str | Path] = (),
) -> Iterator[Path]:
    """Yield a temporary folder that becomes ``target`` when the block ends without an exception.

    ``target`` is checked first (:func:`check_output_folder`): it may be new, empty, or (with
    ``overwrite``) a previous run, which is replaced atomically. On any exception, or SIGINT/SIGTERM, the
    temporary folder is removed and ``target`` is as it was.
    """
    target = Path(os.path.abspath(target))
    check_output_folder(target, overwrite=overwrite, inputs=inputs)
    held = {signal.SIGINT, signal.SIGTERM}
    tmp = target.with_name(f"{target.name}.incomplete-{os.getpid()}")
    old = target.with_name(f"{target.name}.replaced-{os.getpid()}")
    made: list[Path] = []
    done = False
    # Signals are held while the folder is created and while it is swapped in. Holding them stops their
    # delivery to this thread only: another thread of the process (a compiled kernel's worker) may still
    # take one, and Python then raises KeyboardInterrupt here at once. So everything from the first folder
    # made to the swap sits in one block that undoes it all on any exception.
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        try:
            made = _make_parents(target)
            if tmp.exists():
                shutil.rmtree(tmp)
            tmp.mkdir()
            (tmp / _WRITING).touch()
        finally:
            # a signal held until now is delivered here, inside the block that removes the folder
            signal.pthread_sigmask(signal.SIG_SETMASK, previous)
        yield tmp
        mark_files(tmp)
        (tmp / _WRITING).unlink()
        # The swap itself runs with signals held: it either happens whole or not at all.
        previous = signal.pthread_sigmask(signal.SIG_BLOCK, held)
        try:
            if target.is_dir() and any(target.iterdir()):
                if not (overwrite and is_previous_run(target)):  # something arrived while we were working
                    raise OutputError("the output folder was filled by something else while the tool was "
                                      "working; it is left as it is", file=target, fix="give a new folder with --out")
                target.rename(old)
                tmp.rename(target)
                done = True
                shutil.rmtree(old, ignore_errors=True)
            elif target.is_dir():  # an empty folder of the user's: kept, and filled from the temporary one
                moved = []
                try:
                    for entry in sorted(tmp.iterdir()):
                        entry.rename(target / entry.name)
                        moved.append(target / entry.name)
                except BaseException:
                    for path in moved:
                        shutil.rmtree(path) if path.is_dir() else path.unlink()
                    raise
                done = True
                tmp.rmdir()
            else:
                tmp.rename(target)
                done = True
        finally:
            signal.pthread_sigmask(signal.SIG_SETMASK, previous)
    except BaseException:
        if not done:
            shutil.rmtree(tmp, ignore_errors=True)
            if old.exists() and not target.exists():
                old.rename(target)  # put the previous run back
            _remove_made(made)
        raise


def write_tables(result: ValuationResult, folder: Path) -> None:
    """summary.json, cashflows.csv, exceptions.csv, liabilities.csv, sensitivities.csv, members.parquet...

    CSV files are formula-safe (:func:`valuation.csvout.write_csv`); Parquet keeps every text exactly.
    """
    summary = result.summary.to_json()
    dump_json(summary, folder / "summary.json")
    dump_json(summary["manifest"], folder / MANIFEST)
    write_csv(result.cashflows, folder / "cashflows.csv")
    write_csv(result.exceptions, folder / "exceptions.csv")
    write_csv(result.liabilities, folder / "liabilities.csv")
    write_csv(result.sensitivities, folder / "sensitivities.csv")
    write_csv(result.life_expectancy, folder / "life_expectancy.csv")
    write_csv(result.expected_deaths, folder / "expected_deaths.csv")
    if result.members.width:  # streaming runs write their per-member rows elsewhere
        result.members.write_parquet(folder / "members.parquet")
        if result.members.height <= SMALL_SCHEME:
            write_csv(result.members, folder / "members.csv")


def write_into(result: ValuationResult, folder: Path, extra: list[ExtraWriter] | None = None) -> None:
    """Write every file of a run into ``folder`` (a temporary folder from :func:`atomic_folder`)."""
    write_tables(result, folder)
    for writer in extra or []:
        writer(result, folder)


__all__ = ["OutputError", "atomic_file", "atomic_folder", "check_output_file", "check_output_folder",
           "formula_safe", "free_folder", "is_previous_run", "mark_files", "remove_stale", "write_csv", "write_into",
           "write_tables", "SMALL_SCHEME"]
