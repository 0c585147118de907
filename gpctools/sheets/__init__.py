"""Input sheets: one cell parser, one declarative schema per sheet kind, one reader.

:func:`gpctools.io.read_sheet` turns a CSV/XLSX file into a raw table (the file dialect);
this package gives the table its meaning, the same way for every sheet:

* :mod:`gpctools.sheets.cells` - the one cell parser (numbers with either decimal mark,
  blanks, text, yes/no, units in headers) and :func:`~gpctools.sheets.cells.finite_or_none`;
* :mod:`gpctools.sheets.schema` - :class:`Field`, :class:`FieldFamily`,
  :class:`SheetSchema` and the reader :func:`read_table` / :func:`read_file`, with one
  set of messages for the same faults in every sheet;
* one module per sheet kind with its schema: :mod:`~gpctools.sheets.standards`
  (:data:`STANDARDS`), :mod:`~gpctools.sheets.batch` (:data:`BATCH`),
  :mod:`~gpctools.sheets.run_series` (:data:`RUN_SERIES`),
  :mod:`~gpctools.sheets.spec_limits` (:data:`SPEC_LIMITS`, :data:`SPEC_LIMITS_LONG`),
  :mod:`~gpctools.sheets.qc_settings` (:data:`QC_SETTINGS`, :data:`QC_PRODUCT`),
  :mod:`~gpctools.sheets.standard_mix` (:data:`STANDARD_MIX`),
  :mod:`~gpctools.sheets.recipe` (:data:`RECIPE`, one row per recipe key).

The domain readers build their results from the checked rows:
:func:`gpctools.batch.read_batch_sheet`, :func:`gpctools.method.load_method` (standards
file), :func:`gpctools.transfer.read_run_series`, :func:`gpctools.qc.read_specs`,
:func:`gpctools.kinetics.load_recipe` (recipe sheets).
"""

from __future__ import annotations

from gpctools.sheets.batch import BATCH
from gpctools.sheets.cells import CellError, finite_or_none, parse_number, split_header
from gpctools.sheets.qc_settings import QC_PRODUCT, QC_SETTINGS
from gpctools.sheets.recipe import RECIPE
from gpctools.sheets.run_series import RUN_SERIES
from gpctools.sheets.schema import (
    CheckedSheet,
    Field,
    FieldFamily,
    SheetRow,
    SheetSchema,
    read_file,
    read_table,
)
from gpctools.sheets.spec_limits import SPEC_LIMITS, SPEC_LIMITS_LONG
from gpctools.sheets.standard_mix import STANDARD_MIX
from gpctools.sheets.standards import STANDARDS

__all__ = [
    "BATCH",
    "RECIPE",
    "RUN_SERIES",
    "SPEC_LIMITS",
    "SPEC_LIMITS_LONG",
    "QC_SETTINGS",
    "QC_PRODUCT",
    "STANDARD_MIX",
    "STANDARDS",
    "CellError",
    "CheckedSheet",
    "Field",
    "FieldFamily",
    "SheetRow",
    "SheetSchema",
    "finite_or_none",
    "parse_number",
    "read_file",
    "read_table",
    "split_header",
]
