"""Our member-data columns, their types and the allowed codes (defined in :mod:`valuation.vocabulary`).

The administrator's file may use other headers and codes; a basis ``[mapping]`` renames and recodes them
to these. Headers are matched case-insensitively after trimming spaces.
"""

from __future__ import annotations

from valuation.vocabulary import (
    DATE_COLUMNS,
    GROUP_OF_STATUS,
    NUMERIC_COLUMNS,
    OUR_COLUMNS,
    REQUIRED,
    SEXES,
    STATUSES,
    TRANCHE_PREFIX,
    Status,
    known_columns,
    tranche_column,
)

__all__ = ["DATE_COLUMNS", "GROUP_OF_STATUS", "NUMERIC_COLUMNS", "OUR_COLUMNS", "REQUIRED", "SEXES", "STATUSES",
           "TRANCHE_PREFIX", "Status", "known_columns", "tranche_column"]
