"""Member data: schema, readers (CSV/XLSX/Parquet), mapping, validation and a synthetic generator."""

from __future__ import annotations

from valuation.members.data import (
    EXCEPTION_SCHEMA,
    CheckedFrame,
    MemberData,
    iter_checked,
    members_from_frame,
    read_members,
    write_exceptions,
)
from valuation.members.readers import InputFormat
from valuation.members.synth import synth_scheme, to_admin_format, write_scheme

__all__ = ["EXCEPTION_SCHEMA", "CheckedFrame", "InputFormat", "MemberData", "iter_checked", "members_from_frame",
           "read_members", "synth_scheme", "to_admin_format", "write_exceptions", "write_scheme"]
