"""Run manifests: input file hashes and JSON-safe conversion, so every run can be reproduced."""

from __future__ import annotations

import hashlib
import json
import math
from datetime import date, datetime
from pathlib import Path
from typing import Any

import numpy as np


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes (hex)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def json_safe(obj: Any) -> Any:
    """Convert numpy scalars, dates, paths and NaN into plain JSON values (NaN and inf become None)."""
    if isinstance(obj, dict):
        return {str(k): json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_safe(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        x = float(obj)
        return x if math.isfinite(x) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (date, datetime)):
        return obj.isoformat()
    if isinstance(obj, Path):
        return str(obj)
    return obj


def dump_json(obj: Any, path: str | Path) -> None:
    """Write ``obj`` as indented, key-ordered JSON (stable across runs)."""
    Path(path).write_text(json.dumps(json_safe(obj), indent=2, sort_keys=False) + "\n", encoding="utf-8")
