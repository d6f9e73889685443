"""Expected against actual deaths (experience analysis): exposure cells, A/E with intervals, implied level."""

from valuation.experience.analyse import analyse_experience, analyse_records
from valuation.experience.result import ExperienceResult
from valuation.experience.settings import ExperienceSettings

__all__ = ["ExperienceResult", "ExperienceSettings", "analyse_experience", "analyse_records"]
