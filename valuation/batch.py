"""Batch runs: several schemes, or one scheme on several bases, from one TOML file.

A batch file lists runs; each writes its own folder, and the batch writes ``index.csv`` and
``index.json`` with every run's headline results::

    out = "../outputs/demo_batch"        # relative to the batch file

    [[run]]
    name = "demo_central"
    basis = "demo_basis.toml"
    members = "../member_data_demo/members.csv"

    [[run]]
    name = "demo_reference"
    basis = "sult_basis.toml"
    members = "../member_data_demo/members.csv"
    sensitivities = false
"""

from __future__ import annotations

import os
import re
import tomllib
from collections.abc import Callable
from pathlib import Path
from typing import Any

import polars as pl
from pydantic import BaseModel, ConfigDict, Field, ValidationError

from valuation import pipeline
from valuation.basis import load_basis
from valuation.csvout import write_csv
from valuation.engine.run import input_hashes
from valuation.engine.write import atomic_folder, check_output_folder
from valuation.errors import BasisError, ValuationError
from valuation.manifest import dump_json
from valuation.version import __version__

_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


class BatchRun(BaseModel):
    model_config = ConfigDict(extra="forbid")
    name: str = Field(pattern=_NAME.pattern)
    basis: str
    members: str
    sensitivities: bool = True


class BatchFile(BaseModel):
    model_config = ConfigDict(extra="forbid")
    out: str = "outputs/batch"
    run: list[BatchRun]


def load_batch(path: str | Path) -> BatchFile:
    """Read and validate a batch file; names must be unique and folder-safe."""
    path = Path(path)
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise BasisError("batch file not found", file=path) from None
    except tomllib.TOMLDecodeError as exc:
        raise BasisError(f"not valid TOML: {exc}", file=path) from None
    try:
        batch = BatchFile.model_validate(raw)
    except ValidationError as exc:
        problems = []
        for err in exc.errors():
            loc = list(err["loc"])
            where = f"[[run]] number {loc[1] + 1}" if len(loc) > 1 and loc[0] == "run" and isinstance(loc[1], int) else "top level"
            key = str(loc[-1]) if loc else "?"
            if err["type"] == "extra_forbidden":
                allowed = "name, basis, members, sensitivities" if where != "top level" else "out, run"
                problems.append(f"{where}: unknown key '{key}' (allowed: {allowed}; misspelt?)")
            elif err["type"] == "missing":
                problems.append(f"{where}: key '{key}' is missing")
            elif err["type"] == "string_pattern_mismatch":
                problems.append(f"{where}: key '{key}': expected letters, digits, '_', '.' or '-' only, starting with "
                                f"a letter or digit (a run's name becomes its folder's name)")
            else:
                problems.append(f"{where}: key '{key}': {err['msg'].removeprefix('Input should be ')}")
        raise BasisError("; ".join(problems), file=path,
                         fix="each [[run]] needs name (letters, digits, _ . -), basis and members; "
                             "sensitivities = true/false is optional") from None
    names = [r.name for r in batch.run]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise BasisError(f"run names must be unique; repeated: {', '.join(dupes)}", file=path)
    return batch


def index_text(index: pl.DataFrame) -> str:
    """One readable line a run: name, records, liability, duration."""
    lines = []
    for r in index.iter_rows(named=True):
        lines.append(f"{r['run']}: {r['valuation_date']}  records {r['records_read']:,} = {r['records_valued']:,}"
                     f" + {r['records_excluded']:,}  liability {r['liability']:,.0f}  duration "
                     f"{r['duration_macaulay']:.2f} years  -> {r['folder']}")
    return "\n".join(lines)


def _prefixed(say: Callable[[str], None] | None, label: str) -> Callable[[str], None]:
    """``say`` with every message led by ``label``; a no-op when there is no ``say``."""

    def warn(text: str) -> None:
        if say is not None:
            say(f"{label}: {text}")

    return warn


def run_batch(
    path: str | Path,
    *,
    out_root: Path | None = None,
    overwrite: bool = False,
    accept_exclusions: bool = False,
    progress: Callable[[str, int, int], None] | None = None,
    say: Callable[[str], None] | None = None,
) -> pl.DataFrame:
    """Run every valuation in the batch file and return the index of headline results.

    Each run goes through the one pipeline (:func:`valuation.pipeline.run`) with its workbook and HTML
    summary. The batch folder (run folders, ``index.csv``, ``index.json``, ``manifest.json``) is written whole
    or not at all: a run that fails stops the batch and leaves nothing behind. Every run's inputs are checked
    before any is valued. ``overwrite`` replaces a previous batch folder of this tool; ``accept_exclusions``
    values runs whose excluded share exceeds their basis's threshold.
    """
    path = Path(path)
    batch = load_batch(path)
    root = out_root if out_root is not None else Path(os.path.normpath(path.parent / batch.out))
    # check every run's inputs before valuing any, so a bad run stops the batch before it writes anything
    bases = {}
    inputs: list[Path] = [path]
    for run in batch.run:
        try:
            bases[run.name] = load_basis(path.parent / run.basis)
            members = path.parent / run.members
            if not members.is_file():
                raise BasisError("member file not found", file=members,
                                 fix="paths in a batch file are relative to the batch file")
        except ValuationError as exc:
            raise exc.with_context(f"{path}: run '{run.name}'") from None
        inputs += [path.parent / run.basis, members]
    check_output_folder(root, overwrite=overwrite, inputs=inputs)
    rows: list[dict[str, Any]] = []
    with atomic_folder(root, overwrite=overwrite, inputs=inputs) as tmp_root:
        for k, run in enumerate(batch.run):
            if progress:
                progress(f"run {run.name}", k, len(batch.run))
            warn = _prefixed(say, f"run '{run.name}'")
            try:
                outcome = pipeline.run(bases[run.name], path.parent / run.members, out=tmp_root / run.name,
                                       sensitivities=run.sensitivities, accept_exclusions=accept_exclusions, warn=warn)
            except ValuationError as exc:
                raise exc.with_context(f"{path}: run '{run.name}'") from None
            s = outcome.result.summary
            rows.append({
                "run": run.name, "folder": str(root / run.name), "valuation_date": s.valuation_date.isoformat(),
                "basis": str(run.basis), "members": str(run.members),
                "records_read": s.records.read, "records_valued": s.records.valued,
                "records_excluded": s.records.excluded, "liability": s.liability.total,
                **{f"liability_{status}": v for status, v in s.liability.by_status.items()},
                "duration_macaulay": s.duration.macaulay,
                "single_equivalent_discount_rate": s.single_equivalent_discount_rate,
            })
        index = pl.DataFrame(rows)
        write_csv(index, tmp_root / "index.csv")
        dump_json({"batch": str(path), "runs": rows}, tmp_root / "index.json")
        dump_json({"tool_version": __version__, "command": "batch", "inputs": input_hashes(inputs),
                   "settings": {"overwrite": overwrite, "accept_exclusions": accept_exclusions}},
                  tmp_root / "manifest.json")
    return index
