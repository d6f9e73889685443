"""Settings of an experience analysis (the period, the exposure method, intervals, late reporting)."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from datetime import date
from typing import Any, Literal

from valuation.errors import BasisError
from valuation.experience.credibility import DEFAULT_PROBABILITY, DEFAULT_TOLERANCE, standard_text

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


#: The command-line option of each setting that has one.
_OPTION: dict[str, str] = {
    "period_start": "--period-start",
    "period_end": "--period-end",
    "exposure": "--exposure",
    "confidence": "--confidence",
    "overdispersion": "--overdispersion",
    "late_months": "--late-months",
    "late_uplift": "--late-uplift",
}


def _shown(value: object) -> str:
    """A setting's value as a person writes it (dates in ISO form, lists with commas), never a repr."""
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, tuple | list):
        return ", ".join(_shown(v) for v in value)
    if isinstance(value, float):
        return f"{value:g}"
    return str(value)


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
    credibility_probability, credibility_tolerance
        The limited-fluctuation standard: full credibility when the expected deaths are enough for a
        ``credibility_probability`` chance that A/E lies within ``credibility_tolerance`` of its true
        value (defaults 0.90 and 0.05: 1,082 expected deaths; see :mod:`valuation.experience.credibility`).
    """

    period_start: date
    period_end: date
    exposure: ExposureMethod = "central"
    confidence: float = 0.95
    overdispersion: float = 1.0
    late_months: int = 0
    late_uplift: float = 0.0
    pension_band_edges: tuple[float, ...] | None = None
    credibility_probability: float = DEFAULT_PROBABILITY
    credibility_tolerance: float = DEFAULT_TOLERANCE

    def __post_init__(self) -> None:
        def bad(setting: str, value: object, rule: str, example: str) -> BasisError:
            option = _OPTION.get(setting)
            where = f" ({option} on the command line)" if option else ""
            return BasisError(
                f"experience setting {setting}{where} is {_shown(value)}: it must be {rule}",
                column=setting,
                fix=f"give {example}",
            )

        if not self.period_start < self.period_end:
            raise bad(
                "period_end", self.period_end, f"a date after the period start {_shown(self.period_start)}",
                "the period end as a later date, for example the valuation date",
            )
        if self.exposure not in ("central", "initial"):
            raise bad("exposure", self.exposure, "central or initial", "central (the default) or initial")
        if not 0.0 < self.confidence < 1.0:
            raise bad("confidence", self.confidence, "a number strictly between 0 and 1", "0.95 for 95 %")
        if not self.overdispersion > 0.0:
            raise bad("overdispersion", self.overdispersion, "a number above 0", "1 for none (Poisson)")
        if self.late_months < 0:
            raise bad("late_months", self.late_months, "a whole number of months, 0 or more", "0 for none")
        if self.late_uplift < 0.0:
            raise bad("late_uplift", self.late_uplift, "a proportion, 0 or more", "0.05 for 5 %")
        if not 0.0 < self.credibility_probability < 1.0:
            raise bad(
                "credibility_probability", self.credibility_probability,
                "a probability strictly between 0 and 1", "0.90 for 90 % (the usual standard)",
            )
        if not 0.0 < self.credibility_tolerance < 1.0:
            raise bad(
                "credibility_tolerance", self.credibility_tolerance,
                "a proportion strictly between 0 and 1", "0.05 for within 5 % (the usual standard)",
            )
        if self.pension_band_edges is not None:
            edges = list(self.pension_band_edges)
            if not edges or any(e <= 0 for e in edges) or edges != sorted(set(edges)):
                raise bad(
                    "pension_band_edges", self.pension_band_edges, "increasing amounts above 0",
                    "the upper edges of the bands in increasing order, for example 1000, 5000, 20000",
                )

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
        out["credibility_standard"] = standard_text(self.credibility_probability, self.credibility_tolerance)
        return out
