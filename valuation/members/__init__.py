"""Member data: schema, readers (CSV/XLSX/Parquet), mapping, validation and a synthetic generator.

Names are imported lazily so that :mod:`valuation.basis` can use :mod:`valuation.members.schema`
without a circular import.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

_EXPORTS = {
    "MemberData": "valuation.members.data",
    "read_members": "valuation.members.data",
    "members_from_frame": "valuation.members.data",
    "write_exceptions": "valuation.members.data",
    "synth_scheme": "valuation.members.synth",
    "to_admin_format": "valuation.members.synth",
    "write_scheme": "valuation.members.synth",
}

__all__ = list(_EXPORTS)


def __getattr__(name: str) -> Any:
    if name in _EXPORTS:
        return getattr(import_module(_EXPORTS[name]), name)
    raise AttributeError(f"module 'valuation.members' has no attribute {name!r}")
