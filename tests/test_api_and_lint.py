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
    assert set(valuation.__all__) >= {"value_scheme", "value_members", "load_basis", "read_members", "write_run",
                                      "movements", "change", "rollforward"}
    # the basis first, as on the command line (`valuation run BASIS MEMBERS`)
    assert list(inspect.signature(valuation.value_scheme).parameters)[:2] == ["basis", "members"]
    kw = inspect.signature(valuation.value_members).parameters
    assert list(kw)[:2] == ["basis", "member_data"]
    assert {"q_multiplier", "sensitivities", "chunk_size", "progress"} <= set(kw)
    assert list(inspect.signature(valuation.value_file_streaming).parameters)[:2] == ["basis", "members_path"]
    assert {"reports", "experience", "overwrite"} <= set(inspect.signature(valuation.write_run).parameters)


def test_ruff_is_clean():
    ruff = shutil.which("ruff") or str(Path(sys.executable).with_name("ruff"))
    if not Path(ruff).exists():
        pytest.skip("ruff is not installed (it is in the test extra)")
    proc = subprocess.run([ruff, "check", "valuation", "tests", "benchmarks"], cwd=ROOT, capture_output=True,
                          text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
