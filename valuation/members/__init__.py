"""Member data: schema, readers (CSV/XLSX/Parquet), mapping, validation and a synthetic generator."""

from __future__ import annotations

from valuation.members.data import MemberData, members_from_frame, read_members, write_exceptions
from valuation.members.synth import synth_scheme, to_admin_format, write_scheme

__all__ = ["MemberData", "members_from_frame", "read_members", "synth_scheme", "to_admin_format",
           "write_exceptions", "write_scheme"]
