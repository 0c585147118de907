"""QC workbook writer: the shared, formula-safe writer of :mod:`gpctools._workbook`.

It lives below the batch layer so that batch results, transfer tables and QC reports all
write workbooks the same way; this module keeps the report-level import path.
"""

from gpctools._workbook import FORMULA_START, inert_cell, write_workbook

__all__ = ["FORMULA_START", "inert_cell", "write_workbook"]
