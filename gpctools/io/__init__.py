"""Readers: slice exports (chromatograms) and user sheets, turned into plain data.

Readers only turn a file dialect into plain data (arrays, a DataFrame); meaning is checked
by the callers. Every problem with a file raises
:class:`gpctools.errors.InputFormatError` naming the file, the line/row and what to change.

Public API
----------
read_chromatogram(path, *, sheet=None, x_column=None, signal_column=None, x_unit=None,
                  decimal=None, separator=None, encoding=None) -> Chromatogram
read_sheet(path, *, sheet=None) -> pandas.DataFrame
sheet_row_number(df, label) -> int
file_kind(path) -> str
    ``"xlsx"`` or ``"text"`` after the checks every reader makes (exists, not empty, not
    an image or binary file, content agrees with the extension).
"""

from __future__ import annotations

from gpctools.io._files import file_kind
from gpctools.io.chromatogram import MIN_POINTS, Chromatogram, ReaderWarning, read_chromatogram
from gpctools.io.sheets import read_sheet, sheet_row_number

__all__ = [
    "Chromatogram",
    "MIN_POINTS",
    "ReaderWarning",
    "file_kind",
    "read_chromatogram",
    "read_sheet",
    "sheet_row_number",
]
