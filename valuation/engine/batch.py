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

import re
import tomllib
from collections.abc import Callable
from pathlib import Path
from typing import Any

import polars as pl
from pydantic import BaseModel, ConfigDict, Field, ValidationError

from valuation.errors import BasisError
from valuation.manifest import dump_json

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
        err = exc.errors()[0]
        key = ".".join(str(p) for p in err["loc"])
        raise BasisError(f"key '{key}': {err['msg']}", file=path,
                         fix="each [[run]] needs name (letters, digits, _ . -), basis and members") from None
    names = [r.name for r in batch.run]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise BasisError(f"run names must be unique; repeated: {', '.join(dupes)}", file=path)
    return batch


def run_batch(
    path: str | Path,
    *,
    out_root: Path | None = None,
    progress: Callable[[str, int, int], None] | None = None,
    writers: Callable[[], list] | None = None,
) -> pl.DataFrame:
    """Run every valuation in the batch file and return the index of headline results."""
    from valuation.basis import load_basis
    from valuation.engine.run import value_members
    from valuation.engine.write import write_run
    from valuation.members import read_members

    path = Path(path)
    batch = load_batch(path)
    root = out_root if out_root is not None else (path.parent / batch.out)
    rows: list[dict[str, Any]] = []
    for k, run in enumerate(batch.run):
        if progress:
            progress(f"run {run.name}", k, len(batch.run))
        basis = load_basis(path.parent / run.basis)
        data = read_members(path.parent / run.members, basis)
        result = value_members(data, basis, sensitivities=run.sensitivities)
        folder = write_run(result, root / run.name, extra=writers() if writers else None)
        s = result.summary
        rows.append({
            "run": run.name, "folder": str(folder), "valuation_date": s["valuation_date"],
            "basis": str(run.basis), "members": str(run.members),
            "records_read": s["records"]["read"], "records_valued": s["records"]["valued"],
            "records_excluded": s["records"]["excluded"], "liability": s["liability"]["total"],
            **{f"liability_{k2}": v for k2, v in s["liability"]["by_status"].items()},
            "duration_macaulay": s["duration"]["macaulay"],
            "single_equivalent_discount_rate": s["single_equivalent_discount_rate"],
        })
    index = pl.DataFrame(rows)
    root.mkdir(parents=True, exist_ok=True)
    index.write_csv(root / "index.csv")
    dump_json({"batch": str(path), "runs": rows}, root / "index.json")
    return index
