"""The one XLSX writer of gpctools: batch, transfer and QC workbooks (openpyxl, imported inside the functions).

Every cell is written so that the workbook opens cleanly in any spreadsheet program:

* numbers stay numbers (numpy scalars become Python ``int``/``float``; NaN and ±inf
  become empty cells);
* text that a spreadsheet would run as a formula - anything starting with ``=``, ``+``,
  ``-``, ``@``, a tab or a carriage return - is stored as text with a leading apostrophe
  and the cell's quote-prefix flag set (OWASP guidance on formula injection, common
  practice), header cells included;
* characters that XML forbids (control characters other than tab, newline, CR) are removed;
* the file is written to a temporary name and moved into place (:mod:`gpctools.report.files`).
"""

from __future__ import annotations

import datetime as _dt
import math
import os
import re
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from gpctools.report.files import atomic_path

__all__ = ["FORMULA_START", "inert_cell", "write_workbook"]

#: Leading characters that make a spreadsheet treat text as a formula.
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_ILLEGAL_XML = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")
_MAX_COL_WIDTH = 60


def inert_cell(value: Any) -> Any:
    """A value ready for a workbook cell: numbers as numbers, text made inert.

    Parameters
    ----------
    value : Any

    Returns
    -------
    int, float, bool, str or None

    Examples
    --------
    >>> inert_cell("=HYPERLINK(\\"http://x\\")")
    '\\'=HYPERLINK("http://x")'
    >>> inert_cell(np.float64(2.5)), inert_cell(float("nan")), inert_cell("-2")
    (2.5, None, "'-2")
    """
    if value is None:
        return None
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        f = float(value)
        return f if math.isfinite(f) else None
    if isinstance(value, (_dt.datetime, _dt.date)):
        return value.isoformat()
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    text = _ILLEGAL_XML.sub("", str(value))
    if text == "":
        return None
    if text.startswith(FORMULA_START):
        text = "'" + text
    return text


def _number_format(header: str) -> str | None:
    h = header.strip()
    if h.endswith("[g/mol]"):
        return "#,##0"
    if h.endswith("[%]") or h.endswith("[% mass]"):
        return "0.00"
    if h.endswith("[-]") or h.endswith("[sigma]"):
        return "0.0000"
    if h.endswith("[mL]"):
        return "0.000"
    return None


def _write_cell(ws: Any, row: int, col: int, value: Any, *, bold: bool = False) -> Any:
    from openpyxl.styles import Font

    v = inert_cell(value)
    cell = ws.cell(row=row, column=col)
    cell.value = v
    if isinstance(v, str):
        cell.data_type = "s"  # never a formula, whatever the text
        if v.startswith("'"):
            cell.quotePrefix = True
    if bold:
        cell.font = Font(bold=True)
    return cell


def write_workbook(
    path: str | os.PathLike[str],
    sheets: Mapping[str, pd.DataFrame],
    *,
    created: _dt.datetime | None = None,
) -> Path:
    """Write tables to an XLSX workbook, one sheet per table, atomically.

    Parameters
    ----------
    path : str or os.PathLike
        Destination ``.xlsx``.
    sheets : mapping of str to pandas.DataFrame
        Sheet name (at most 31 characters, none of ``[]:*?/\\``) to table; the header
        row is bold and frozen, number formats follow the unit in each header.
    created : datetime, optional
        Creation time stored in the workbook properties (default now, UTC).

    Returns
    -------
    pathlib.Path
    """
    from openpyxl import Workbook
    from openpyxl.utils import get_column_letter

    wb = Workbook()
    for blank in list(wb.worksheets):  # a new workbook starts with one empty sheet
        wb.remove(blank)
    from gpctools.formatting import clean_frame

    for name, frame in sheets.items():
        frame = clean_frame(frame)  # stored numbers without float noise (12 significant digits)
        title = re.sub(r"[\[\]:*?/\\]", "_", str(name))[:31]
        ws = wb.create_sheet(title=title)
        headers = [str(c) for c in frame.columns]
        widths = [min(_MAX_COL_WIDTH, max(8, len(h) + 2)) for h in headers]
        for j, h in enumerate(headers, start=1):
            _write_cell(ws, 1, j, h, bold=True)
        formats = [_number_format(h) for h in headers]
        for i, rec in enumerate(frame.itertuples(index=False, name=None), start=2):
            for j, value in enumerate(rec, start=1):
                cell = _write_cell(ws, i, j, value)
                if formats[j - 1] and isinstance(cell.value, float):
                    cell.number_format = formats[j - 1]
                if isinstance(cell.value, str):
                    widths[j - 1] = min(_MAX_COL_WIDTH, max(widths[j - 1], len(cell.value) + 2))
                elif isinstance(cell.value, (int, float)):
                    widths[j - 1] = max(widths[j - 1], 12)
        for j, w in enumerate(widths, start=1):
            ws.column_dimensions[get_column_letter(j)].width = w
        ws.freeze_panes = "A2"
    when = created or _dt.datetime.now(_dt.timezone.utc).replace(tzinfo=None, microsecond=0)
    wb.properties.creator = "gpctools"
    wb.properties.created = when
    wb.properties.modified = when
    with atomic_path(path) as tmp:
        wb.save(tmp)
    return Path(path)
