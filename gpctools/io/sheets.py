"""Reading user sheets (batch, run-series, recipe, spec limits) into a DataFrame.

A sheet is a table with one header row. :func:`read_sheet` finds the header in the first
non-empty row, strips whitespace from headers and cells, drops fully empty rows and
columns, and keeps the values as pandas (CSV) or the workbook (XLSX) gives them: it does
not coerce types. Meaning (required columns, units, ranges) is checked by the caller.

Every returned frame carries where each row came from, so callers can name the row in
their messages:

``df.attrs["source_rows"]``
    list of 1-based line numbers (text) or row numbers (workbook), one per row of ``df``,
    in the order of the original ``RangeIndex`` (use :func:`sheet_row_number`).
``df.attrs["path"]``, ``df.attrs["sheet"]``, ``df.attrs["header_row"]``
    the file as given, the sheet name (``None`` for text files) and the header's row.

pandas keeps ``attrs`` through most operations but not all (e.g. ``concat`` of frames
with different attrs); take what you need right after reading.
"""

from __future__ import annotations

import csv
import io
import os
import re
from collections.abc import Hashable
from typing import Any

import pandas as pd

from gpctools.errors import InputFormatError
from gpctools.io import _text, _xlsx
from gpctools.io._files import decode_text, detect_kind, read_bytes

__all__ = ["read_sheet", "sheet_row_number"]

_DELIMITERS = ("\t", ";", ",")
_COMMA_NUMBER = re.compile(r"^[+-]?\d+,\d+(?:[eE][+-]?\d+)?$")
_POINT_NUMBER = re.compile(r"^[+-]?\d*\.\d+(?:[eE][+-]?\d+)?$")


def sheet_row_number(df: pd.DataFrame, label: Hashable) -> int:
    """The 1-based source line/row of the row labelled ``label`` in a frame from :func:`read_sheet`.

    Parameters
    ----------
    df : pandas.DataFrame
        A frame returned by :func:`read_sheet` (or a slice of it that kept its ``attrs``
        and the original integer index labels).
    label : hashable
        Index label of the row (the original ``RangeIndex`` position).

    Returns
    -------
    int
        Line number (text files) or spreadsheet row number (workbooks), as a user counts.

    Examples
    --------
    >>> import pandas as pd
    >>> df = pd.DataFrame({"a": [1, 2]})
    >>> df.attrs["source_rows"] = [3, 5]
    >>> sheet_row_number(df, 1)
    5
    """
    rows = df.attrs.get("source_rows")
    if rows is None:
        raise KeyError("this DataFrame has no 'source_rows' in attrs (not from read_sheet?)")
    return int(rows[int(label)])  # type: ignore[call-overload]


def read_sheet(path: str | os.PathLike[str], *, sheet: str | int | None = None) -> pd.DataFrame:
    """Read a user sheet from CSV/text or XLSX into a DataFrame.

    Parameters
    ----------
    path : str or os.PathLike
        ``.csv``/``.txt``/``.tsv`` (comma, semicolon or tab, sniffed; UTF-8, UTF-8 with
        BOM, UTF-16 with BOM, cp1252) or ``.xlsx``. Other extensions are decided by
        the content.
    sheet : str or int, optional
        Workbook sheet by name or 0-based index; default the first sheet. Ignored for
        text files.

    Returns
    -------
    pandas.DataFrame
        One column per header, one row per non-empty data row. ``attrs`` holds
        ``source_rows``, ``path``, ``sheet`` and ``header_row`` (see the module docs).
        Semicolon- or tab-separated text whose numbers use a decimal comma (and no
        decimal point anywhere) is read with ``decimal=","``.

    Raises
    ------
    gpctools.errors.InputFormatError
        Missing or empty file, unknown sheet (the message lists the sheets), a file that
        is not what its extension says, no header, duplicate or missing headers, a formula
        without a saved value.
    """
    data = read_bytes(path)
    kind = detect_kind(path, data)
    if kind == "xlsx":
        return _read_xlsx_sheet(path, data, sheet)
    return _read_text_sheet(path, decode_text(path, data))


# ----------------------------------------------------------------------------- text


def _sniff_delimiter(lines: list[str]) -> str:
    """Pick tab, semicolon or comma: the one giving >1 field consistently from the header."""
    best = ","
    best_score = (0, 0)
    for delim in _DELIMITERS:
        counts = [len(r) for r in csv.reader(lines, delimiter=delim)]
        if not counts or counts[0] < 2:
            continue
        score = (sum(1 for c in counts if c == counts[0]), counts[0])
        if score > best_score:
            best, best_score = delim, score
    return best


def _read_text_sheet(path: str | os.PathLike[str], text: str) -> pd.DataFrame:
    long_line = _text.find_long_line(text)
    if long_line is not None:
        line, length = long_line
        raise InputFormatError(
            f"line {line} is {length:,} characters long (at most {_text.MAX_LINE_CHARS:,} are "
            "read); a sheet row is far shorter: check that this is the sheet you meant",
            path=path, row=line,
        )
    lines = text.split("\n")
    nonblank = [ln for ln in lines[:200] if ln.strip()][:20]
    if not nonblank:
        raise InputFormatError("file has no text rows; export the sheet again", path=path)
    delim = _sniff_delimiter(nonblank)
    reader = csv.reader(io.StringIO(text), delimiter=delim)
    rows: list[list[str]] = []
    row_numbers: list[int] = []
    start = 1
    try:
        for record in reader:
            if reader.line_num > start:
                # A quote left open swallows the following lines into one cell without a
                # word from the csv module; a sheet cell never spans lines, so refuse.
                raise InputFormatError(
                    f"line {start}: a quote (\") opened on this line is not closed before its "
                    f"end, so lines {start} to {reader.line_num} would be read as one row; "
                    "remove the stray quote, or the line break inside the quoted cell",
                    path=path, row=start,
                )
            rows.append([cell.strip() for cell in record])
            row_numbers.append(start)
            start = reader.line_num + 1
    except csv.Error as exc:
        raise InputFormatError(
            f"line {reader.line_num}: cannot split the line ({exc}); check the quotes",
            path=path,
            row=reader.line_num,
        ) from exc
    names, _, body, body_rows, header_row = _table(path, None, rows, row_numbers)
    decimal = "."
    if delim != ",":
        comma = point = 0
        for r in body:
            for cell in r:
                if _COMMA_NUMBER.match(cell):
                    comma += 1
                elif _POINT_NUMBER.match(cell):
                    point += 1
        if comma and not point:
            decimal = ","
    buf = io.StringIO()
    csv.writer(buf, delimiter=delim, lineterminator="\n").writerows(body)
    if body:
        buf.seek(0)
        df = pd.read_csv(
            buf,
            sep=delim,
            decimal=decimal,
            header=None,
            names=list(range(len(names))),
            engine="c",
            skip_blank_lines=False,
        )
        df.columns = names
    else:
        df = pd.DataFrame({n: pd.Series([], dtype=object) for n in names})
    return _finish(df, path, None, body_rows, header_row)


# ----------------------------------------------------------------------------- xlsx


def _read_xlsx_sheet(
    path: str | os.PathLike[str], data: bytes, sheet: str | int | None
) -> pd.DataFrame:
    name, raw = _xlsx.read_rows(path, data, sheet)
    rows: list[list[Any]] = []
    for r in raw:
        rows.append([v.strip() if isinstance(v, str) else v for v in r])
    row_numbers = list(range(1, len(rows) + 1))
    names, kept, body, body_rows, header_row = _table(path, name, rows, row_numbers)
    # A formula whose value was never saved reads as empty: find out and say so.
    holes = {
        (rn, c)
        for rn, r in zip(body_rows, body, strict=True)
        for c, v in zip(kept, r, strict=True)
        if v is None
    }
    bad = _xlsx.formula_cells(path, data, name, holes) if holes else []
    if bad:
        cells = ", ".join(_xlsx.cell_name(r, c) for r, c in bad[:5])
        raise InputFormatError(
            f"cell(s) {cells} hold a formula whose value was never saved (gpctools does not "
            "calculate formulas); open the file in a spreadsheet program and save it, or "
            "paste the values",
            path=path,
            sheet=name,
            row=bad[0][0],
        )
    if body:
        df = pd.DataFrame(
            {
                n: pd.Series([None if r[j] == "" else r[j] for r in body])
                for j, n in enumerate(names)
            }
        )
    else:
        df = pd.DataFrame({n: pd.Series([], dtype=object) for n in names})
    return _finish(df, path, name, body_rows, header_row)


# ----------------------------------------------------------------------------- common


def _empty(v: Any) -> bool:
    return v is None or v == ""


def _header_text(v: Any) -> str:
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v).strip()


def _table(
    path: str | os.PathLike[str],
    sheet: str | None,
    rows: list[list[Any]],
    row_numbers: list[int],
) -> tuple[list[str], list[int], list[list[Any]], list[int], int]:
    """Header names, kept column positions, body rows, their source rows, the header row."""
    nonempty = [i for i, r in enumerate(rows) if any(not _empty(v) for v in r)]
    if not nonempty:
        raise InputFormatError(
            "the sheet has no values; fill in a header row", path=path, sheet=sheet
        )
    h = nonempty[0]
    header_row = row_numbers[h]
    data_idx = [i for i in nonempty if i > h]
    width = max(len(rows[i]) for i in nonempty)
    header = list(rows[h]) + [None] * (width - len(rows[h]))
    kept: list[int] = []
    for c in range(width):
        has_header = not _empty(header[c])
        has_data = any(c < len(rows[i]) and not _empty(rows[i][c]) for i in data_idx)
        if has_header:
            kept.append(c)
        elif has_data:
            first = next(i for i in data_idx if c < len(rows[i]) and not _empty(rows[i][c]))
            where = _xlsx.cell_name(row_numbers[first], c) if sheet else f"field {c + 1}"
            raise InputFormatError(
                f"{where} (row {row_numbers[first]}) has a value but its column has no header "
                f"in row {header_row}; add a header or delete the value",
                path=path,
                sheet=sheet,
                row=row_numbers[first],
            )
    names = [_header_text(header[c]) for c in kept]
    seen: dict[str, str] = {}
    for n in names:
        key = n.casefold()
        if key in seen:
            same = "the same header" if seen[key] == n else f"headers {seen[key]!r} and"
            raise InputFormatError(
                f"{same} {n!r} appears twice in the header row; give each column its own name",
                path=path,
                sheet=sheet,
                row=header_row,
                column=n,
            )
        seen[key] = n
    body: list[list[Any]] = []
    body_rows: list[int] = []
    for i in data_idx:
        r = rows[i]
        vals = [r[c] if c < len(r) else None for c in kept]
        if all(_empty(v) for v in vals):
            continue
        body.append(vals)
        body_rows.append(row_numbers[i])
    return names, kept, body, body_rows, header_row


def _finish(
    df: pd.DataFrame,
    path: str | os.PathLike[str],
    sheet: str | None,
    body_rows: list[int],
    header_row: int,
) -> pd.DataFrame:
    df = df.reset_index(drop=True)
    df.attrs["source_rows"] = list(body_rows)
    df.attrs["path"] = str(path)
    df.attrs["sheet"] = sheet
    df.attrs["header_row"] = header_row
    return df
