"""Static type check of the package: mypy over ``valuation`` with the ``[tool.mypy]`` settings in
pyproject.toml (the package ships ``py.typed``, PEP 561, so its annotations are part of its interface)."""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.skipif(
    importlib.util.find_spec("mypy") is None,
    reason="mypy is not installed in this environment (install the 'test' extra to run the type check)",
)
def test_package_type_checks_clean() -> None:
    """mypy (https://mypy.readthedocs.io) reports no errors on the package."""
    proc = subprocess.run(
        [sys.executable, "-m", "mypy", "--config-file", str(ROOT / "pyproject.toml")],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, f"mypy failed (exit {proc.returncode}):\n{proc.stdout}\n{proc.stderr}"
