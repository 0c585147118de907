"""Reading cell values from .xlsx workbooks, data only, after checking the archive.

Safety: the archive is inspected with :mod:`zipfile` before openpyxl sees it (member
count, total uncompressed size, compression method and ratio, encrypted members), and
every member is read once: a damaged member (bad checksum, truncated data) is refused
here, naming it, and every XML member is scanned for document-type and entity
declarations (refused: a workbook never needs them, and they are the vehicle of entity
expansion and external-entity attacks) and for cell references beyond the format's
limits of :data:`MAX_ROWS` rows and :data:`MAX_COLUMNS` columns (refused before any row
is iterated). The workbook is then opened with ``read_only=True, data_only=True``:
formulas are never evaluated (the value the spreadsheet program saved is used; a formula
without a saved value is an error naming the cell), macros are never loaded or run,
external links are not followed.

Every exception raised by the zip, XML or workbook libraries becomes an
:class:`~gpctools.errors.InputFormatError` that names the file (and the sheet where
known) and says in plain words what is wrong and what to do; the library's own text
follows in parentheses as a detail.
"""

from __future__ import annotations

import io
import os
import re
import warnings
import zipfile
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from gpctools.errors import InputFormatError

__all__ = [
    "MAX_UNCOMPRESSED_BYTES",
    "MAX_MEMBERS",
    "MAX_COMPRESSION_RATIO",
    "MAX_ROWS",
    "MAX_COLUMNS",
    "check_archive",
    "open_workbook",
    "sheet_names",
    "sheet_rows",
    "read_rows",
    "formula_cells",
    "cell_name",
    "explain",
]

#: Largest total uncompressed size of all archive members accepted [bytes].
MAX_UNCOMPRESSED_BYTES = 200 * 1024 * 1024
#: Largest number of archive members accepted (a workbook has a few dozen).
MAX_MEMBERS = 5000
#: Largest uncompressed/compressed ratio of a member larger than 1 MB [-]. Sheet XML of
#: real exports compresses 5-30 fold; ratios in the hundreds are the mark of a zip bomb.
MAX_COMPRESSION_RATIO = 150.0
#: Rows and columns of a worksheet in the Office Open XML format (ECMA-376; 1,048,576
#: rows by 16,384 columns, A to XFD - from memory, as documented by spreadsheet programs).
MAX_ROWS = 1_048_576
MAX_COLUMNS = 16_384
#: Compression methods an Office Open XML package may use: stored (0) and deflate (8)
#: (ECMA-376 Part 2, Open Packaging Conventions, from memory).
_ZIP_METHODS = {zipfile.ZIP_STORED: "stored", zipfile.ZIP_DEFLATED: "deflate"}
#: Encodings an XML member may declare (those the XML parser reads natively or that
#: keep ASCII bytes as they are, so the scan below sees the markup).
_XML_ENCODINGS = {"utf-8", "utf8", "utf-16", "utf16", "us-ascii", "ascii", "iso-8859-1",
                  "latin-1", "latin1", "windows-1252", "cp1252"}
_CHUNK = 1 << 20

# Markup that must not occur in a workbook part: "<!DOCTYPE" and "<!ENTITY", in the
# single-byte/UTF-8 form and in UTF-16 (either byte order), any letter case.
_DECL = re.compile(
    rb"<!(?:doctype|entity)|<\x00!\x00[DdEe]\x00|\x00<\x00!\x00[DdEe]", re.IGNORECASE
)
_ENCODING_DECL = re.compile(rb"""<\?xml[^>]{0,200}?encoding\s*=\s*["']([A-Za-z0-9._-]{1,40})["']""")
# A cell or row reference (attribute r="B12" / r="12", or a dimension/range ref="A1:B9"),
# read only as far as needed to tell that it is out of range: more than 3 column letters
# or more than 7 row digits are out of range whatever follows.
_REF = re.compile(rb"""(?<=\s)(?:r|ref|sqref)\s*=\s*["'][^"']{0,64}""")
_CELL = re.compile(r"\$?([A-Za-z]*)\$?(\d*)")
# A row element with its number (the closing quote is required, so a tag cut by a chunk
# boundary is not read as a shorter number).
_ROW = re.compile(rb"""<(?:[A-Za-z_][\w.-]*:)?row\s[^>]*?\br\s*=\s*["'](\d{1,8})["']""")
# The root element of a sheet part (any namespace prefix).
_SHEET_ROOT = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?(?:worksheet|dialogsheet|chartsheet)[\s>/]")


def cell_name(row: int, col: int) -> str:
    """Spreadsheet cell reference such as ``"B12"`` from a 1-based row and 0-based column."""
    letters = ""
    n = col + 1
    while n:
        n, rem = divmod(n - 1, 26)
        letters = chr(65 + rem) + letters
    return f"{letters}{row}"


def _column_number(letters: str) -> int:
    n = 0
    for ch in letters.upper():
        n = n * 26 + (ord(ch) - 64)
    return n


# ---------------------------------------------------------------------------- errors

_ADVICE = "open it in a spreadsheet program and save it again as .xlsx, or export CSV"


def explain(exc: BaseException) -> str:
    """Plain words for an exception of the zip, XML or workbook layers.

    The result says what is wrong in the user's terms; the library's own text is
    appended in parentheses as a detail (it helps a developer, not the user).
    """
    import zlib
    from xml.etree.ElementTree import ParseError

    name = type(exc).__name__
    if isinstance(exc, (zipfile.BadZipFile, zlib.error, EOFError)):
        plain = "the zip archive that holds the workbook is damaged or cut short"
    elif isinstance(exc, NotImplementedError):
        plain = "the archive uses a compression method or feature that workbooks do not use"
    elif isinstance(exc, (ParseError, SyntaxError)) or "XMLSyntaxError" in name:
        plain = "a part of the workbook is not well-formed XML (damaged or hand-edited)"
    elif isinstance(exc, KeyError):
        plain = (
            "the workbook refers to a part or relationship that is missing from the "
            "archive (damaged or incompletely written)"
        )
    elif isinstance(exc, OverflowError):
        plain = "a cell holds a number too large to read"
    elif isinstance(exc, RuntimeError) and "password" in str(exc).lower():
        plain = "a part of the archive is encrypted"
    elif isinstance(exc, MemoryError):
        plain = "the workbook is too large to read"
    elif isinstance(exc, (ValueError, TypeError, AttributeError, IndexError, LookupError)):
        plain = (
            "the workbook holds a value or structure that the .xlsx format does not "
            "allow (damaged, or written by a faulty program)"
        )
    else:
        plain = "the workbook cannot be read"
    detail = f"{name}: {exc}" if str(exc) else name
    if len(detail) > 160:
        detail = detail[:157] + "..."
    return f"{plain}; {_ADVICE} (detail from the reading library: {detail})"


def _refuse(exc: BaseException, path: Any, sheet: str | None = None) -> InputFormatError:
    err = InputFormatError(explain(exc), path=path, sheet=sheet)
    err.__cause__ = exc
    return err


# ---------------------------------------------------------------------------- archive


def check_archive(path: str | os.PathLike[str], data: bytes) -> None:
    """Refuse archives that are not workbooks, are damaged, or could exhaust memory.

    Every member is read once (so a damaged member is found here, not inside the
    workbook library) and every XML member is scanned by :func:`_scan_member`.
    """
    try:
        zf = zipfile.ZipFile(io.BytesIO(data))
    except zipfile.BadZipFile as exc:
        raise InputFormatError(
            "the file is not a valid .xlsx workbook (damaged zip archive); "
            "save it again from the spreadsheet program or export CSV",
            path=path,
        ) from exc
    except Exception as exc:  # the zip layer raises several types on damaged input
        raise _refuse(exc, path) from exc
    with zf:
        infos = zf.infolist()
        _check_members(path, infos)
        for info in infos:
            if info.is_dir():
                continue
            try:
                _scan_member(path, zf, info)
            except InputFormatError:
                raise
            except Exception as exc:  # damaged member: checksum, truncation, method
                raise InputFormatError(
                    f"archive part {info.filename[:80]!r}: " + explain(exc), path=path
                ) from exc


def _check_members(path: Any, infos: list[zipfile.ZipInfo]) -> None:
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
        if info.compress_type not in _ZIP_METHODS:
            raise InputFormatError(
                f"archive part {info.filename[:80]!r} is compressed with zip method "
                f"{info.compress_type}, which .xlsx workbooks never use (only stored and "
                "deflate); the file was not written by a spreadsheet program - "
                + _ADVICE,
                path=path,
            )
        total += info.file_size
        if info.file_size > 1_000_000:
            ratio = info.file_size / max(info.compress_size, 1)
            if ratio > MAX_COMPRESSION_RATIO:
                raise InputFormatError(
                    f"archive part {info.filename!r} expands {ratio:.0f}-fold "
                    f"(limit {MAX_COMPRESSION_RATIO:.0f}); this is not a normal workbook "
                    "and is refused as a possible zip bomb (or its size fields are "
                    "damaged); " + _ADVICE,
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


def _scan_member(path: Any, zf: zipfile.ZipFile, info: zipfile.ZipInfo) -> None:
    """Read one member to its end (checksum verified); scan it if it is XML.

    The scan refuses entity or document-type declarations, an XML encoding that would
    hide markup from it, and cell references beyond :data:`MAX_ROWS` x
    :data:`MAX_COLUMNS`. Linear: fixed-size chunks, with a short overlap so that a
    pattern cut by a chunk boundary is still seen.
    """
    part = info.filename[:80]
    tail = b""
    first = True
    is_xml = False
    is_sheet = False
    last_row = 0
    with zf.open(info) as member:
        while True:
            chunk = member.read(_CHUNK)
            if not chunk:
                break
            if first:
                first = False
                is_xml = _looks_like_xml(info.filename, chunk)
                if is_xml:
                    _check_encoding(path, part, chunk)
                    # Cell references are checked in sheet parts only: in drawings and
                    # themes an attribute "r" means something else (a right edge).
                    is_sheet = _SHEET_ROOT.search(chunk[:4096].replace(b"\x00", b"")) is not None
            if is_xml:
                window = tail + chunk
                if _DECL.search(window):
                    raise InputFormatError(
                        f"archive part {part!r} declares a document type or entities "
                        "(<!DOCTYPE>/<!ENTITY>); workbooks never need them and they can be "
                        "used to attack the reader (entity expansion, external files), so "
                        "the file is refused - " + _ADVICE,
                        path=path,
                    )
                if is_sheet:
                    _check_refs(path, part, window)
                    last_row = _check_row_order(path, part, window, len(tail), last_row)
                tail = window[-96:]


def _looks_like_xml(name: str, head: bytes) -> bool:
    if name.lower().endswith((".xml", ".rels", ".vml")):
        return True
    h = head.lstrip(b"\xef\xbb\xbf\xff\xfe \t\r\n")
    return h.startswith((b"<", b"\x00<")) or head.startswith((b"\xfe\xff", b"\xff\xfe"))


def _check_encoding(path: Any, part: str, head: bytes) -> None:
    m = _ENCODING_DECL.search(head[:256])
    if m and m.group(1).decode("ascii").lower() not in _XML_ENCODINGS:
        raise InputFormatError(
            f"archive part {part!r} declares the XML encoding "
            f"{m.group(1).decode('ascii')!r}, which workbooks do not use (UTF-8 or UTF-16); "
            + _ADVICE,
            path=path,
        )


def _check_row_order(path: Any, part: str, window: bytes, seen: int, last: int) -> int:
    """Refuse row numbers that do not increase; return the last row number seen.

    The workbook library skips a row whose number is not above the one before without a
    word, so a damaged row number would silently drop a slice. Matches ending inside the
    first ``seen`` bytes of ``window`` were checked with the previous chunk.
    """
    for m in _ROW.finditer(window):
        if m.end() <= seen:
            continue
        r = int(m.group(1))
        if r <= last:
            raise InputFormatError(
                f"archive part {part!r}: row {r} comes after row {last}; rows must be "
                "stored in increasing order, and a row out of order would be lost - the "
                "file is damaged; " + _ADVICE,
                path=path,
                row=r,
            )
        last = r
    return last


def _check_refs(path: Any, part: str, window: bytes) -> None:
    for m in _REF.finditer(window):
        value = m.group().split(b"=", 1)[1].strip()[1:].decode("latin-1")
        for ref in re.split(r"[: ]", value):
            cm = _CELL.fullmatch(ref)
            if cm is None or not cm.group(2):
                continue  # not a cell or row reference (only those can be out of range)
            letters, digits = cm.groups()
            too_far = (len(letters) > 3 or (letters and _column_number(letters) > MAX_COLUMNS)
                       or len(digits) > 7 or (digits and int(digits) > MAX_ROWS))
            if too_far:
                shown = ref if len(ref) <= 30 else ref[:27] + "..."
                raise InputFormatError(
                    f"archive part {part!r} refers to cell or row {shown!r}, beyond the "
                    f"last row ({MAX_ROWS:,}) or column (XFD = {MAX_COLUMNS:,}) a workbook "
                    "can have; the file is damaged - " + _ADVICE,
                    path=path,
                )


# ---------------------------------------------------------------------------- workbook


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
        raise _refuse(exc, path) from exc


@contextmanager
def open_workbook(path: str | os.PathLike[str], data: bytes) -> Iterator[Any]:
    """The workbook (read-only, stored values), after :func:`check_archive`; closed on exit."""
    check_archive(path, data)
    wb = _load(path, data, data_only=True)
    try:
        yield wb
    finally:
        try:
            wb.close()
        except Exception:  # closing a damaged archive must not hide the real error
            pass


def sheet_names(path: str | os.PathLike[str], wb: Any) -> list[str]:
    """Names of the sheets, in workbook order."""
    try:
        return list(wb.sheetnames)
    except Exception as exc:
        raise _refuse(exc, path) from exc


def _select(path: str | os.PathLike[str], wb: Any, sheet: str | int | None) -> str:
    names = list(wb.sheetnames)
    if not names:
        raise InputFormatError(
            "the workbook has no readable sheets (a sheet part may be missing from the "
            "archive, which happens when a file is damaged or cut short); " + _ADVICE,
            path=path,
        )
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


def sheet_rows(
    path: str | os.PathLike[str], wb: Any, sheet: str | int | None
) -> tuple[str, list[tuple[Any, ...]]]:
    """Return ``(sheet_name, rows)`` of an open workbook (see :func:`read_rows`).

    Rows are read up to :data:`MAX_ROWS` (openpyxl stops there, so a damaged row number
    cannot make it walk empty rows without end); a row wider than :data:`MAX_COLUMNS` is
    refused.
    """
    try:
        name = _select(path, wb, sheet)
    except InputFormatError:
        raise
    except Exception as exc:
        raise _refuse(exc, path) from exc
    rows: list[tuple[Any, ...]] = []
    try:
        ws = wb[name]
        # The stored dimension can be missing or wrong (some writers store "A1"); reading
        # without it makes openpyxl scan all rows actually present.
        ws.reset_dimensions()
        for r in ws.iter_rows(values_only=True, max_row=MAX_ROWS + 1):
            if len(rows) == MAX_ROWS:
                raise InputFormatError(
                    f"the sheet has rows beyond row {MAX_ROWS:,}, the last a workbook can "
                    "have; the file is damaged - " + _ADVICE,
                    path=path,
                    sheet=name,
                )
            if len(r) > MAX_COLUMNS:
                raise InputFormatError(
                    f"row {len(rows) + 1} has {len(r):,} cells, more than the {MAX_COLUMNS:,} "
                    "columns a workbook can have; the file is damaged - " + _ADVICE,
                    path=path,
                    sheet=name,
                    row=len(rows) + 1,
                )
            rows.append(r)
    except InputFormatError:
        raise
    except Exception as exc:
        raise _refuse(exc, path, name) from exc
    return name, rows


def read_rows(
    path: str | os.PathLike[str], data: bytes, sheet: str | int | None
) -> tuple[str, list[tuple[Any, ...]]]:
    """Return ``(sheet_name, rows)``; ``rows[i]`` holds the values of spreadsheet row ``i + 1``.

    Values are what openpyxl gives for stored values: ``int``, ``float``, ``str``,
    ``bool``, ``datetime`` or ``None`` for an empty cell (or a formula with no saved value;
    see :func:`formula_cells`). Rows may have different lengths. The archive is checked
    first (:func:`check_archive`).
    """
    with open_workbook(path, data) as wb:
        return sheet_rows(path, wb, sheet)


def formula_cells(
    path: str | os.PathLike[str], data: bytes, sheet_name: str, positions: set[tuple[int, int]]
) -> list[tuple[int, int]]:
    """Those of ``positions`` (1-based row, 0-based column) that hold a formula.

    Used only on the error path, to tell "empty cell" from "formula whose value was never
    saved" (a workbook written by a program that does not calculate formulas).
    """
    if not positions:
        return []
    last_row = min(max(r for r, _ in positions), MAX_ROWS)
    wb = _load(path, data, data_only=False)
    found: list[tuple[int, int]] = []
    try:
        ws = wb[sheet_name]
        ws.reset_dimensions()
        for r, row in enumerate(ws.iter_rows(values_only=True, max_row=last_row), start=1):
            for c, value in enumerate(row):
                if (r, c) in positions and isinstance(value, str) and value.startswith("="):
                    found.append((r, c))
    except Exception as exc:
        raise _refuse(exc, path, sheet_name) from exc
    finally:
        try:
            wb.close()
        except Exception:
            pass
    return sorted(found)
