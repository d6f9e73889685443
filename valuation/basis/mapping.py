"""How an administrator's member file maps onto our columns and codes (the basis ``[mapping]`` table)."""

from __future__ import annotations

from pydantic import Field, ValidationInfo, field_validator

from valuation.basis.rules import STRICT, BasisModel
from valuation.vocabulary import SEXES, STATUSES


class ColumnMapping(BasisModel):
    """Renames and recodes applied to a member file before validation.

    Attributes
    ----------
    columns
        Their header -> our column name (headers compared case-insensitively after trimming).
    status_codes
        Their status code -> one of ``active``, ``deferred``, ``pensioner``, ``dependant``.
    sex_codes
        Their sex code -> ``M`` or ``F``.
    date_format
        ``strftime`` pattern of their dates, e.g. ``"%d/%m/%Y"``; ``None`` means ISO ``%Y-%m-%d``. ISO dates
        (and Excel date cells) are accepted as well whatever the pattern.

    Codes are compared after trimming, ignoring case; our own codes are always accepted too.
    """

    model_config = STRICT
    columns: dict[str, str] = Field(default_factory=dict)
    status_codes: dict[str, str] = Field(default_factory=dict)
    sex_codes: dict[str, str] = Field(default_factory=dict)
    date_format: str | None = None

    @field_validator("status_codes", "sex_codes")
    @classmethod
    def _codes(cls, v: dict[str, str], info: ValidationInfo) -> dict[str, str]:
        allowed, what = (STATUSES, "status") if info.field_name == "status_codes" else (SEXES, "sex")
        bad = sorted({s for s in v.values() if s not in allowed})
        if bad:
            raise ValueError(f"{what} codes must map to one of {', '.join(allowed)}; got {', '.join(bad)}")
        return v

    @field_validator("date_format")
    @classmethod
    def _format(cls, v: str | None) -> str | None:
        if v is None:
            return v
        if "%d" not in v or "%m" not in v or "%Y" not in v:
            raise ValueError("needs day (%d), month (%m) and four-digit year (%Y) directives, e.g. \"%d/%m/%Y\" "
                             "(two-digit years, %y, would put a 1925 birth in 2025)")
        return v
