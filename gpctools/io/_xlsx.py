"""Reading cell values from .xlsx workbooks, data only, after checking the archive.

Safety: the archive is inspected with :mod:`zipfile` before openpyxl sees it (member
count, total uncompressed size, compression ratio, encrypted members), and the workbook is
opened with ``read_only=True, data_only=True``: formulas are never evaluated (the value the
spreadsheet program saved is used; a formula without a saved value is an error naming the
cell), macros are never loaded or run, external links are not followed.
"""

from __future__ import annotations

import io
import os
import warnings
import zipfile
from typing import Any

from gpctools.errors import InputFormatError

__all__ = [
    "MAX_UNCOMPRESSED_BYTES",
    "MAX_MEMBERS",
    "MAX_COMPRESSION_RATIO",
    "check_archive",
    "read_rows",
    "formula_cells",
    "cell_name",
]

#: Largest total uncompressed size of all archive members accepted [bytes].
MAX_UNCOMPRESSED_BYTES = 200 * 1024 * 1024
#: Largest number of archive members accepted (a workbook has a few dozen).
MAX_MEMBERS = 5000
#: Largest uncompressed/compressed ratio of a member larger than 1 MB [-]. Sheet XML of
#: real exports compresses 5-30 fold; ratios in the hundreds are the mark of a zip bomb.
MAX_COMPRESSION_RATIO = 150.0


def cell_name(row: int, col: int) -> str:
    """Spreadsheet cell reference such as ``"B12"`` from a 1-based row and 0-based column."""
    letters = ""
    n = col + 1
    while n:
        n, rem = divmod(n - 1, 26)
        letters = chr(65 + rem) + letters
    return f"{letters}{row}"


def check_archive(path: str | os.PathLike[str], data: bytes) -> None:
    """Refuse archives that are not workbooks or that could exhaust memory."""
    try:
        zf = zipfile.ZipFile(io.BytesIO(data))
    except zipfile.BadZipFile as exc:
        raise InputFormatError(
            "the file is not a valid .xlsx workbook (damaged zip archive); "
            "save it again from the spreadsheet program or export CSV",
            path=path,
        ) from exc
    with zf:
        infos = zf.infolist()
        if len(infos) > MAX_MEMBERS:
            raise InputFormatError(
                f"the workbook archive has {len(infos)} parts (limit {MAX_MEMBERS}); "
                "it is not a plain data workbook - save the data as a new .xlsx or CSV",
                path=path,
            )
        total = 0
        for info in infos:
            if info.flag_bits & 0x1:
                raise InputFormatError(
                    "the workbook archive is encrypted; remove the password and save again",
                    path=path,
                )
            total += info.file_size
            if info.file_size > 1_000_000:
                ratio = info.file_size / max(info.compress_size, 1)
                if ratio > MAX_COMPRESSION_RATIO:
                    raise InputFormatError(
                        f"archive part {info.filename!r} expands {ratio:.0f}-fold "
                        f"(limit {MAX_COMPRESSION_RATIO:.0f}); this is not a normal workbook "
                        "and is refused as a possible zip bomb",
                        path=path,
                    )
        if total > MAX_UNCOMPRESSED_BYTES:
            raise InputFormatError(
                f"the workbook expands to {total / 1e6:.0f} MB "
                f"(limit {MAX_UNCOMPRESSED_BYTES / 1e6:.0f} MB); split the data into smaller files",
                path=path,
            )
        names = {info.filename for info in infos}
        if "xl/workbook.xml" not in names and not any(n.startswith("xl/workbook") for n in names):
            raise InputFormatError(
                "the file is a zip archive but not an .xlsx workbook (no xl/workbook.xml); "
                "export the data as .xlsx or CSV",
                path=path,
            )


def _load(path: str | os.PathLike[str], data: bytes, *, data_only: bool) -> Any:
    import openpyxl  # heavy import, only when a workbook is read

    try:
        with warnings.catch_warnings():
            # openpyxl warns about unsupported extensions (validation, styles); they do not
            # affect cell values and the library must not spam the caller.
            warnings.simplefilter("ignore")
            return openpyxl.load_workbook(
                io.BytesIO(data),
                read_only=True,
                data_only=data_only,
                keep_vba=False,
                keep_links=False,
            )
    except Exception as exc:  # openpyxl raises many types for damaged files
        raise InputFormatError(
            f"the workbook cannot be read ({type(exc).__name__}: {exc}); "
            "open it in a spreadsheet program and save it again as .xlsx, or export CSV",
            path=path,
        ) from exc


def _select(path: str | os.PathLike[str], wb: Any, sheet: str | int | None) -> str:
    names = list(wb.sheetnames)
    if not names:
        raise InputFormatError("the workbook has no sheets", path=path)
    available = ", ".join(repr(n) for n in names)
    if sheet is None:
        name = names[0]
    elif isinstance(sheet, bool) or not isinstance(sheet, (int, str)):
        raise InputFormatError(
            f"sheet must be a sheet name or a 0-based index, not {sheet!r}; "
            f"available sheets: {available}",
            path=path,
        )
    elif isinstance(sheet, int):
        if not -len(names) <= sheet < len(names):
            raise InputFormatError(
                f"sheet index {sheet} is out of range: the workbook has {len(names)} "
                f"sheet(s) ({available}); indices start at 0",
                path=path,
            )
        name = names[sheet]
    else:
        if sheet in names:
            name = sheet
        else:
            folded = [n for n in names if n.strip().casefold() == sheet.strip().casefold()]
            if len(folded) != 1:
                raise InputFormatError(
                    f"no sheet named {sheet!r}; available sheets: {available}",
                    path=path,
                )
            name = folded[0]
    ws = wb[name]
    if not hasattr(ws, "iter_rows"):
        raise InputFormatError(
            f"sheet {name!r} is a chart, not a table of cells; choose another sheet ({available})",
            path=path,
            sheet=name,
        )
    return name


def read_rows(
    path: str | os.PathLike[str], data: bytes, sheet: str | int | None
) -> tuple[str, list[tuple[Any, ...]]]:
    """Return ``(sheet_name, rows)``; ``rows[i]`` holds the values of spreadsheet row ``i + 1``.

    Values are what openpyxl gives for stored values: ``int``, ``float``, ``str``,
    ``bool``, ``datetime`` or ``None`` for an empty cell (or a formula with no saved value;
    see :func:`formula_cells`). Rows may have different lengths.
    """
    check_archive(path, data)
    wb = _load(path, data, data_only=True)
    try:
        name = _select(path, wb, sheet)
        ws = wb[name]
        # The stored dimension can be missing or wrong (some writers store "A1"); reading
        # without it makes openpyxl scan all rows actually present.
        ws.reset_dimensions()
        rows = list(ws.iter_rows(values_only=True))
    except InputFormatError:
        raise
    except Exception as exc:
        raise InputFormatError(
            f"the workbook cannot be read ({type(exc).__name__}: {exc}); "
            "save it again as .xlsx or export CSV",
            path=path,
        ) from exc
    finally:
        wb.close()
    return name, rows


def formula_cells(
    path: str | os.PathLike[str], data: bytes, sheet_name: str, positions: set[tuple[int, int]]
) -> list[tuple[int, int]]:
    """Those of ``positions`` (1-based row, 0-based column) that hold a formula.

    Used only on the error path, to tell "empty cell" from "formula whose value was never
    saved" (a workbook written by a program that does not calculate formulas).
    """
    if not positions:
        return []
    last_row = max(r for r, _ in positions)
    wb = _load(path, data, data_only=False)
    found: list[tuple[int, int]] = []
    try:
        ws = wb[sheet_name]
        ws.reset_dimensions()
        for r, row in enumerate(ws.iter_rows(values_only=True, max_row=last_row), start=1):
            for c, value in enumerate(row):
                if (r, c) in positions and isinstance(value, str) and value.startswith("="):
                    found.append((r, c))
    finally:
        wb.close()
    return sorted(found)
