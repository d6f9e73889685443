"""The experience analysis's summary as typed dictionaries: what experience.json holds, key by key.

The analysis builds these and writes them as they are (``ExperienceResult.write``); the reports, the
command line and the pipeline read them through these types, so a key read anywhere is a key the analysis
writes (the type checker sees to it). Percentages are in % where named so (``*_percentage``, ``lower``,
``upper``, ``change_pct``), A/E as ratios (1 = 100 %), exposure [years], amounts [currency p.a.],
liabilities [currency].

The classes are declared without postponed annotations, so that ``NotRequired`` keys are told apart at run
time too (``__optional_keys__``; the test of experience.json's keys reads them).
"""

from typing import NotRequired, TypedDict

#: A setting's value as experience.json echoes it (dates as ISO text).
SettingValue = str | float | int | bool | list[float] | None


class AEMeasures(TypedDict):
    """Exposure, actual and expected deaths and A/E with its interval, by lives and by amounts."""

    exposure_years: float
    actual_lives: float
    expected_lives: float
    ae_lives: float | None
    ae_lives_lower: float | None
    ae_lives_upper: float | None
    actual_amounts: float
    expected_amounts: float
    ae_amounts: float | None
    ae_amounts_lower: float | None
    ae_amounts_upper: float | None


class AERow(AEMeasures):
    """One row of the A/E table (``ExperienceResult.table``, experience.csv): a dimension and group and
    their measures."""

    dimension: NotRequired[str]
    group: str


class TableLine(AEMeasures):
    """One mortality table entry's own experience (or the overall line): A/E by amounts with interval,
    limited-fluctuation credibility and the credibility-weighted implied percentage [% of the table]."""

    table: str
    group: str
    sex: str
    members: list[str]
    current_percentage: float | None
    expected_lives_at_risk: float
    credibility: float | None
    implied_percentage: float | None
    lower: float | None
    upper: float | None
    note: str | None


class CredibilityStandard(TypedDict):
    """Full credibility at ``full_expected_deaths`` expected deaths: within ``tolerance`` of the truth with
    ``probability``."""

    probability: float
    tolerance: float
    full_expected_deaths: float
    text: str


#: A mortality entry's percentage of its table before (``from``) and after (``to``) [%].
PercentageChange = TypedDict("PercentageChange", {"from": float, "to": float})


class LiabilityEffect(TypedDict):
    """The liability on the basis as it stands and with each table at its implied percentage."""

    liability_before: float | None
    liability_after: float | None
    change_pct: float | None
    basis_changes: dict[str, PercentageChange]
    reason: str | None


class ImpliedSummary(TypedDict):
    """Each table's implied percentage, the overall line and the headline, and (once the pipeline has
    re-valued) the liability effect."""

    credibility_standard: CredibilityStandard
    by_table: list[TableLine]
    overall: TableLine | None
    multiplier: float | None
    multiplier_lower: float | None
    multiplier_upper: float | None
    implied_percentage: float | None
    lower: float | None
    upper: float | None
    note: str | None
    liability_before: NotRequired[float | None]
    liability_after: NotRequired[float | None]
    change_pct: NotRequired[float | None]
    basis_changes: NotRequired[dict[str, PercentageChange]]
    reason: NotRequired[str | None]


class RecordCounts(TypedDict):
    """Start-membership records: read = valued + excluded."""

    read: int
    valued: int
    excluded: int


class DeathCounts(TypedDict):
    """Deaths file records: read, counted, excluded, and where the counted ones went."""

    read: int
    counted: int
    excluded: int
    in_cells: int
    no_amounts_weight: int
    left_out_at_closing_age: int


class ExitCounts(TypedDict):
    """Exits file records: read, applied, excluded."""

    read: int
    applied: int
    excluded: int


class ExperienceRecords(TypedDict):
    """The reconciliation of every input file of the analysis."""

    members: RecordCounts
    deaths: DeathCounts
    exits: ExitCounts


class ExceptionCounts(TypedDict):
    """Exceptions listed, and how many exclude a record or only warn."""

    total: int
    excluded: int
    warning: int


class ExperienceSummary(TypedDict):
    """experience.json."""

    settings: dict[str, SettingValue]
    pension_band_edges: list[float]
    amounts_weight: str
    records: ExperienceRecords
    overall: AERow | None
    by_group: dict[str, list[AERow]]
    implied: ImpliedSummary
    exceptions: ExceptionCounts


__all__ = ["AEMeasures", "AERow", "CredibilityStandard", "DeathCounts", "ExceptionCounts", "ExitCounts", "ExperienceRecords",
           "ExperienceSummary", "ImpliedSummary", "LiabilityEffect", "PercentageChange", "RecordCounts",
           "SettingValue", "TableLine"]
