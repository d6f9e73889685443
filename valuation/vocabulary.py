"""The words of the trade the whole tool shares, once: member statuses, sexes, mortality groups, benefit
names, sensitivity kinds, and our member-data columns, each in its reporting order.

This module is the bottom floor: it imports nothing from the rest of the package, and no other module
spells these names out. ``Literal`` types serve the type checker; the tuples give the order in which
reports list them.
"""

from __future__ import annotations

from typing import Final, Literal, get_args

#: A member record's status, in reporting order: in payment first, then deferred, then active.
Status = Literal["pensioner", "dependant", "deferred", "active"]
STATUSES: Final[tuple[Status, ...]] = get_args(Status)

#: Statuses whose records must carry a pension above 0.
PAID_STATUSES: Final[tuple[Status, ...]] = ("pensioner", "dependant", "deferred")

Sex = Literal["M", "F"]
SEXES: Final[tuple[Sex, ...]] = get_args(Sex)

#: Mortality groups of the basis (``[mortality.<group>.<sex>]``): one a status, and the spouse.
Group = Literal["pensioner", "dependant", "deferred", "active", "spouse"]
GROUPS: Final[tuple[Group, ...]] = get_args(Group)
#: The basis may also give a ``default`` entry, which every group without its own falls back to.
EntryGroup = Literal["default", "pensioner", "dependant", "deferred", "active", "spouse"]
ENTRY_GROUPS: Final[tuple[EntryGroup, ...]] = get_args(EntryGroup)

#: The mortality group used for a member of each status.
GROUP_OF_STATUS: Final[dict[Status, Group]] = {s: s for s in STATUSES}

#: Benefits a liability is split into (liabilities.csv ``benefit``), in reporting order.
Benefit = Literal["member_pension", "spouse_pension", "lump_sum"]
BENEFITS: Final[tuple[Benefit, ...]] = get_args(Benefit)

#: Sensitivity kinds of the basis's ``[[sensitivities]]``.
SensitivityKind = Literal["discount_rate", "inflation", "salary_growth", "life_expectancy", "long_term_improvement"]
SENSITIVITY_KINDS: Final[tuple[SensitivityKind, ...]] = get_args(SensitivityKind)

# ----------------------------------------------------------------------------------------------------
# Our member-data columns (a basis's [mapping] renames an administrator's headers to these)
# ----------------------------------------------------------------------------------------------------

#: Columns a file must have (after mapping).
REQUIRED: Final[tuple[str, ...]] = ("member_id", "status", "sex", "date_of_birth")

#: Optional columns holding dates (ISO ``YYYY-MM-DD`` or the mapping's ``date_format``).
DATE_COLUMNS: Final[tuple[str, ...]] = ("date_of_birth", "spouse_date_of_birth", "guarantee_end")

#: Optional numeric columns [currency p.a.] / [years] / [fraction]; ``pension_<tranche>`` come on top.
NUMERIC_COLUMNS: Final[tuple[str, ...]] = (
    "pension", "salary", "service_years", "retirement_age", "spouse_fraction", "pension_end_age",
)

#: Every column we know, apart from the per-tranche ``pension_<tranche>`` columns.
OUR_COLUMNS: Final[tuple[str, ...]] = ("member_id", "status", "sex", *DATE_COLUMNS, *NUMERIC_COLUMNS)

TRANCHE_PREFIX: Final[str] = "pension_"


def tranche_column(name: str) -> str:
    """The data column holding the pension of tranche ``name``, e.g. ``pension_pre2005``."""
    return f"{TRANCHE_PREFIX}{name}"


def known_columns(tranches: tuple[str, ...] | list[str]) -> tuple[str, ...]:
    """All our column names for a basis with these tranche names."""
    return (*OUR_COLUMNS, *(tranche_column(t) for t in tranches))


__all__ = [
    "BENEFITS", "DATE_COLUMNS", "ENTRY_GROUPS", "GROUPS", "GROUP_OF_STATUS", "NUMERIC_COLUMNS", "OUR_COLUMNS",
    "PAID_STATUSES", "REQUIRED", "SENSITIVITY_KINDS", "SEXES", "STATUSES", "TRANCHE_PREFIX", "Benefit",
    "EntryGroup", "Group", "SensitivityKind", "Sex", "Status", "known_columns", "tranche_column",
]
