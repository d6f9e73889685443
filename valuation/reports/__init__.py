"""Reports of a valuation run: the actuary's Excel workbook and the trustees' HTML summary."""

from valuation.reports.excel import write_workbook
from valuation.reports.html import write_html

__all__ = ["write_workbook", "write_html"]
