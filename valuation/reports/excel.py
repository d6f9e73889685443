"""The actuary's workbook: one .xlsx a run, written with openpyxl.

Sheets: Summary, Basis (as given in the basis file and as used), Liabilities, Cash flows (with a chart),
Sensitivities, Life expectancy, Expected deaths, Experience (when an analysis was run, with a chart),
Movements (the membership movements over the same period, with it), Change (the analysis of change
from a previous valuation, when its basis is given),
Exceptions, Members (up to :data:`valuation.engine.write.SMALL_SCHEME` members; above it the sheet points
to members.parquet) and Manifest. The headline total is also the workbook name ``TotalLiability``. Money
is in the basis's currency (number formats ``[$GBP] #,##0``); headers are plain words; every sheet prints
on A4, fitted to the page width, with its header row repeated.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from openpyxl import Workbook
from openpyxl.workbook.defined_name import DefinedName

from valuation.engine.results import ValuationResult
from valuation.reports import excel_sheets as sheets
from valuation.reports.format import currency_of

if TYPE_CHECKING:
    from valuation.engine.change import AnalysisOfChange
    from valuation.experience.result import ExperienceResult
    from valuation.movements.classify import MovementsResult

#: Sheet names in workbook order (Experience only when an analysis was run).
SHEETS: tuple[str, ...] = (
    "Summary", "Basis", "Liabilities", "Cash flows", "Sensitivities", "Life expectancy", "Expected deaths",
    "Experience", "Movements", "Change", "Exceptions", "Members", "Manifest",
)


def write_workbook(result: ValuationResult, path: Path, experience: ExperienceResult | None = None,
                   movements: MovementsResult | None = None, analysis: AnalysisOfChange | None = None) -> Path:
    """Write the valuation workbook to ``path`` and return the path.

    Parameters
    ----------
    result
        The valuation run's results.
    path
        Target .xlsx file; its folder is created when missing.
    experience
        An experience analysis to include (optional).
    movements
        The membership movements over the experience period (optional).
    analysis
        The analysis of change from the previous valuation (optional).

    Returns
    -------
    Path
        ``path``.
    """
    path = Path(path)
    wb = Workbook()
    wb.remove(wb.active)
    total_cell = sheets.summary_sheet(wb.create_sheet("Summary"), result)
    wb.defined_names["TotalLiability"] = DefinedName("TotalLiability", attr_text=f"'Summary'!{total_cell}")
    sheets.basis_sheet(wb.create_sheet("Basis"), result)
    sheets.liabilities_sheet(wb.create_sheet("Liabilities"), result)
    sheets.cashflows_sheet(wb.create_sheet("Cash flows"), result)
    sheets.sensitivities_sheet(wb.create_sheet("Sensitivities"), result)
    sheets.life_expectancy_sheet(wb.create_sheet("Life expectancy"), result)
    sheets.deaths_sheet(wb.create_sheet("Expected deaths"), result)
    if experience is not None:
        sheets.experience_sheet(wb.create_sheet("Experience"), experience, currency_of(result.summary))
    if movements is not None:
        sheets.movements_sheet(wb.create_sheet("Movements"), movements)
    if analysis is not None:
        sheets.change_sheet(wb.create_sheet("Change"), analysis, currency_of(result.summary))
    sheets.exceptions_sheet(wb.create_sheet("Exceptions"), result)
    sheets.members_sheet(wb.create_sheet("Members"), result)
    sheets.manifest_sheet(wb.create_sheet("Manifest"), result)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb.save(path)
    return path
