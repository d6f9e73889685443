"""Our member-data columns, their types and the allowed codes.

The administrator's file may use other headers and codes; a basis ``[mapping]`` renames and recodes them
to these. Headers are matched case-insensitively after trimming spaces.
"""

from __future__ import annotations

from typing import Final, Literal

Status = Literal["active", "deferred", "pensioner", "dependant"]

STATUSES: Final[tuple[str, ...]] = ("active", "deferred", "pensioner", "dependant")
SEXES: Final[tuple[str, ...]] = ("M", "F")

#: Columns a file must have (after mapping).
REQUIRED: Final[tuple[str, ...]] = ("member_id", "status", "sex", "date_of_birth")

#: Optional columns holding dates (ISO ``YYYY-MM-DD`` or the mapping's ``date_format``).
DATE_COLUMNS: Final[tuple[str, ...]] = ("date_of_birth", "spouse_date_of_birth", "guarantee_end")

#: Optional numeric columns [currency p.a.] / [years] / [fraction]; ``pension_<tranche>`` come on top.
NUMERIC_COLUMNS: Final[tuple[str, ...]] = (
    "pension",
    "salary",
    "service_years",
    "retirement_age",
    "spouse_fraction",
    "pension_end_age",
)

#: Every column we know, apart from the per-tranche ``pension_<tranche>`` columns.
OUR_COLUMNS: Final[tuple[str, ...]] = (
    "member_id",
    "status",
    "sex",
    *DATE_COLUMNS,
    *NUMERIC_COLUMNS,
)

TRANCHE_PREFIX: Final[str] = "pension_"

#: The mortality group used for a member of each status (``valuation.basis.Basis.mortality``).
GROUP_OF_STATUS: Final[dict[str, str]] = {
    "active": "active",
    "deferred": "deferred",
    "pensioner": "pensioner",
    "dependant": "dependant",
}


def tranche_column(name: str) -> str:
    """The data column holding the pension of tranche ``name``, e.g. ``pension_pre2005``."""
    return f"{TRANCHE_PREFIX}{name}"


def known_columns(tranches: tuple[str, ...] | list[str]) -> tuple[str, ...]:
    """All our column names for a basis with these tranche names."""
    return (*OUR_COLUMNS, *(tranche_column(t) for t in tranches))
