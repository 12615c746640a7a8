"""The item-level nonresponse workbook (Excel).

:func:`write_item_report` classifies (or takes a classification), computes the
report's figures (:mod:`skipwise.report.tables`, :mod:`skipwise.report.patterns`)
and writes the sheets (``sheets_*`` modules) in openpyxl's streaming mode.
"""

from skipwise.report.patterns import PatternTable, nonresponse_patterns, pick_items
from skipwise.report.workbook import DEFAULT_FAULT_ROWS, SHEETS, write_item_report

__all__ = ["write_item_report", "nonresponse_patterns", "pick_items", "PatternTable", "SHEETS",
           "DEFAULT_FAULT_ROWS"]
