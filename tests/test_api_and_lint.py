"""The public API stays put (STYLE.md habit: a test pins the public API) and the code stays lint-clean."""

from __future__ import annotations

import inspect
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

import valuation

ROOT = Path(__file__).resolve().parents[1]


def test_public_api():
    assert set(valuation.__all__) >= {"value_scheme", "value_members", "load_basis", "read_members", "write_run"}
    params = inspect.signature(valuation.value_scheme).parameters
    assert list(params)[:2] == ["members_path", "basis_path"]
    kw = inspect.signature(valuation.value_members).parameters
    assert {"q_multiplier", "sensitivities", "chunk_size", "progress"} <= set(kw)


def test_ruff_is_clean():
    ruff = shutil.which("ruff") or str(Path(sys.executable).with_name("ruff"))
    if not Path(ruff).exists():
        pytest.skip("ruff is not installed (it is in the test extra)")
    proc = subprocess.run([ruff, "check", "valuation", "tests", "benchmarks"], cwd=ROOT, capture_output=True,
                          text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
