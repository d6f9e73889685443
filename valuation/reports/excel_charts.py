"""Native Excel charts (openpyxl.chart) for the workbook: the payments profile and the A/E by age band."""

from __future__ import annotations

from openpyxl.chart import BarChart, LineChart, Reference
from openpyxl.worksheet.worksheet import Worksheet


def cashflow_chart(ws: Worksheet, *, header_row: int, last_row: int, first_col: int, last_col: int,
                   year_col: int, anchor: str, y_title: str = "Payments") -> None:
    """Stacked columns of expected payments by year, one series a status column."""
    chart = BarChart()
    chart.type = "col"
    chart.grouping = "stacked"
    chart.overlap = 100
    chart.title = "Expected benefit payments by year"
    chart.y_axis.title = y_title
    chart.x_axis.title = "Year after the valuation date"
    chart.y_axis.numFmt = "#,##0"
    data = Reference(ws, min_col=first_col, max_col=last_col, min_row=header_row, max_row=last_row)
    cats = Reference(ws, min_col=year_col, min_row=header_row + 1, max_row=last_row)
    chart.add_data(data, titles_from_data=True)
    chart.set_categories(cats)
    chart.height, chart.width = 9, 22
    ws.add_chart(chart, anchor)


def ae_chart(ws: Worksheet, *, header_row: int, last_row: int, group_col: int, ae_col: int,
             lower_col: int, upper_col: int, anchor: str, what: str = "lives", y_max: float | None = None) -> None:
    """A/E by age band as columns, with the lower and upper limits of its interval as lines."""
    bars = BarChart()
    bars.type = "col"
    bars.title = f"Actual / expected deaths by age band ({what})"
    bars.y_axis.title = "A/E"
    bars.y_axis.numFmt = "0%"
    bars.y_axis.scaling.min = 0.0
    if y_max is not None:
        bars.y_axis.scaling.max = y_max
    bars.x_axis.title = "Age band [years]"
    bars.add_data(Reference(ws, min_col=ae_col, min_row=header_row, max_row=last_row), titles_from_data=True)
    cats = Reference(ws, min_col=group_col, min_row=header_row + 1, max_row=last_row)
    bars.set_categories(cats)
    limits = LineChart()
    for col in (lower_col, upper_col):
        limits.add_data(Reference(ws, min_col=col, min_row=header_row, max_row=last_row), titles_from_data=True)
    for s in limits.series:
        s.marker.symbol = "dash"
        s.graphicalProperties.line.noFill = True
    limits.set_categories(cats)
    bars += limits
    bars.height, bars.width = 9, 18
    ws.add_chart(bars, anchor)
