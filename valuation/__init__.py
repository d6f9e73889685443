"""valuation: batch valuation of defined-benefit pension schemes.

One call for notebook users::

    from valuation import value_scheme
    res = value_scheme("assumptions/demo_basis.toml", "member_data_demo/members.csv")

See README.md for the commands and DEVELOPERS.md for the architecture.
"""

from __future__ import annotations

from typing import Any

__version__ = "0.1.0"

__all__ = ["__version__", "value_scheme", "value_members", "value_file_streaming", "load_basis", "members_from_frame",
           "read_members", "write_run"]


def __getattr__(name: str) -> Any:
    # imported on first use, so `import valuation` stays light and free of import cycles
    if name in ("value_scheme", "value_members"):
        from valuation.engine import run

        return getattr(run, name)
    if name == "value_file_streaming":
        from valuation.engine.stream import value_file_streaming

        return value_file_streaming
    if name == "load_basis":
        from valuation.basis import load_basis

        return load_basis
    if name in ("read_members", "members_from_frame"):
        from valuation.members import data

        return getattr(data, name)
    if name == "write_run":
        from valuation.engine.write import write_run

        return write_run
    raise AttributeError(f"module 'valuation' has no attribute {name!r}")
