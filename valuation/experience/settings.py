"""Settings of an experience analysis (the period, the exposure method, intervals, late reporting)."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from datetime import date
from typing import Any, Literal

from valuation.errors import BasisError

ExposureMethod = Literal["central", "initial"]

#: How each exposure method is described in the output.
EXPOSURE_TEXT: dict[str, str] = {
    "central": (
        "central exposed to risk: each life counts from the period start until death, exit or the period "
        "end; expected deaths = sum of mu x exposure (Poisson model), mu = -ln(1 - q)"
    ),
    "initial": (
        "initial exposed to risk: as central, but each death carries exposure to the end of its year of "
        "age (added to the cell of death); expected deaths = sum of q x exposure (binomial model)"
    ),
}

#: The day count, stated in the output.
DAY_COUNT_TEXT: str = (
    "exposed days are those after the period start up to and including the period end (or the date of "
    "death or exit); exposure [years] = days / 365.25; cells by age last birthday and calendar year"
)


@dataclass
class ExperienceSettings:
    """What an experience analysis does.

    Attributes
    ----------
    period_start, period_end
        The investigation period (usually two valuation dates); days after ``period_start`` up to and
        including ``period_end`` are observed.
    exposure
        ``"central"`` (pairs with mu) or ``"initial"`` (pairs with q).
    confidence
        Two-sided confidence level of the intervals, e.g. 0.95.
    overdispersion
        Variance multiplier for the amounts interval (1 = Poisson).
    late_months, late_uplift
        Deaths in the final ``late_months`` months of the period count as ``1 + late_uplift`` deaths, an
        allowance for deaths not yet reported (default none).
    pension_band_edges
        Upper edges of the pension-size bands [currency p.a.]; None = quintiles of the non-zero pensions
        rounded to two significant figures. Zero pensions form a band of their own ("nil").
    """

    period_start: date
    period_end: date
    exposure: ExposureMethod = "central"
    confidence: float = 0.95
    overdispersion: float = 1.0
    late_months: int = 0
    late_uplift: float = 0.0
    pension_band_edges: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        def bad(column: str, value: object, expected: str) -> BasisError:
            return BasisError(
                f"experience setting {column} = {value!r}: expected {expected}",
                column=column,
                fix=f"give {column} as {expected}",
            )

        if not self.period_start < self.period_end:
            raise bad("period_end", self.period_end, f"a date after period_start {self.period_start}")
        if self.exposure not in ("central", "initial"):
            raise bad("exposure", self.exposure, "'central' or 'initial'")
        if not 0.0 < self.confidence < 1.0:
            raise bad("confidence", self.confidence, "a number strictly between 0 and 1 (e.g. 0.95)")
        if not self.overdispersion > 0.0:
            raise bad("overdispersion", self.overdispersion, "a number > 0 (1 = Poisson)")
        if self.late_months < 0:
            raise bad("late_months", self.late_months, "a whole number of months >= 0")
        if self.late_uplift < 0.0:
            raise bad("late_uplift", self.late_uplift, "a proportion >= 0 (e.g. 0.05 for 5 %)")
        if self.pension_band_edges is not None:
            edges = list(self.pension_band_edges)
            if not edges or any(e <= 0 for e in edges) or edges != sorted(set(edges)):
                raise bad("pension_band_edges", self.pension_band_edges, "increasing amounts > 0")

    def late_text(self) -> str:
        """The late-reporting allowance in words."""
        if self.late_months == 0 or self.late_uplift == 0.0:
            return "none: deaths counted as reported"
        return (
            f"deaths in the final {self.late_months} months of the period uplifted by "
            f"{self.late_uplift:.1%} for deaths not yet reported"
        )

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready settings, with the exposure method and late-reporting allowance stated in words."""
        out = asdict(self)
        out["period_start"] = self.period_start.isoformat()
        out["period_end"] = self.period_end.isoformat()
        out["pension_band_edges"] = list(self.pension_band_edges) if self.pension_band_edges else None
        out["exposure_method"] = EXPOSURE_TEXT[self.exposure]
        out["day_count"] = DAY_COUNT_TEXT
        out["late_reporting"] = self.late_text()
        return out
