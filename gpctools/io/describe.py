"""How a slice export is read: its dialect, every column and what the reader would use.

:func:`describe_export` is what ``gpctools inspect`` shows: the file kind, the text
encoding, the separator and decimal mark, the header line, every column with the kind of
detector or axis its header names (:func:`column_kind`), which columns the reader takes as
x and signal (with the options of a method file, if given), the x range, the slice count
and the metadata lines. It reads with the same functions as
:func:`~gpctools.io.read_chromatogram` and calls that reader for the columns, so what it
shows is what a batch would do; a file the reader refuses is still described as far as
it goes, with the refusal in :attr:`ExportDescription.problem`.

:func:`response_note` is the warning for a concentration trace taken from a UV or an
evaporative light-scattering detector (docs/science.md, section 13.1).
"""

from __future__ import annotations

import os
import re
import warnings
from dataclasses import dataclass, field
from typing import Any

from gpctools.display import Display
from gpctools.errors import GpcError, GpcWarning
from gpctools.io import _files, _xlsx
from gpctools.io._columns import detector_rank, split_header, x_kind_of
from gpctools.io._text import SCAN_LINES, locate_block, number_pattern, split_cells

__all__ = [
    "COLUMN_KINDS",
    "ColumnInfo",
    "ExportDescription",
    "column_kind",
    "describe_export",
    "response_note",
]

#: The kinds :func:`column_kind` gives, in the order ``inspect`` explains them.
COLUMN_KINDS = (
    "x (volume)",
    "x (time)",
    "RI",
    "UV",
    "IR",
    "ELSD",
    "light scattering",
    "viscometer",
    "pressure",
    "fluorescence",
    "signal",
    "not a signal",
    "other",
)

_TOKEN = re.compile(r"[a-zäöüéèàçµ0-9]+", re.IGNORECASE)
_PRESSURE = {"pressure", "druck", "pression", "psi", "bar", "mbar", "kpa", "mpa", "pa"}
_ELSD = {"elsd", "evaporative", "cad", "aerosol"}
_LS = re.compile(r"(?:ls|mals|lals|rals|dls)\d*|light|scattering|laser|streulicht")
_VISC = {"visc", "viscometer", "viscosimeter", "viscosity", "viskosität", "viskosimeter", "dp", "ip"}
_FLUORESCENCE = {"fluorescence", "fluoreszenz", "fl", "fld"}
_IR = {"ir", "ftir", "infrared"}
_UV = re.compile(r"uv\d*|uvvis|vis|dad|pda|absorbance|abs|mau|au|a\d{3}")
_RI = {"ri", "dri", "rid", "riu", "nriu", "refractive", "refractometer", "refraction", "brechungsindex"}


def _tokens(header: str) -> list[str]:
    name, unit = split_header(header)
    return [t.lower() for t in _TOKEN.findall(f"{name} {unit or ''}")]


def column_kind(header: str) -> str:
    """What a column of a slice export holds, from its header (one of :data:`COLUMN_KINDS`).

    The x axis is recognised as the reader does (:func:`~gpctools.io._columns.x_kind_of`);
    detectors by the words and units of the header: refractive index (``RI``, ``dRI``,
    ``RIU``), UV/visible (``UV254``, ``DAD``, ``mAU``), infrared, evaporative
    light scattering (``ELSD``), light scattering (``LS``, ``MALS``, ``LALS``, ``RALS``),
    viscometer (``visc``, ``DP``, ``IP``), pressure (``pressure``, ``bar``, ``psi``) and
    fluorescence. Headers of generic signal words (``signal``, ``mV``) are ``"signal"``;
    slice numbers, molar masses and derived curves are ``"not a signal"``.

    Examples
    --------
    >>> [column_kind(h) for h in ("Volume (mL)", "dRI (mV)", "UV254 (mAU)", "LS 90", "DP (Pa)")]
    ['x (volume)', 'RI', 'UV', 'light scattering', 'viscometer']
    >>> column_kind("Pump pressure (bar)"), column_kind("log M"), column_kind("Signal")
    ('pressure', 'not a signal', 'signal')
    """
    kind, _ = x_kind_of(header)
    if kind is not None:
        return f"x ({kind})"
    toks = _tokens(header)
    rank = detector_rank(header)
    if any(t in _ELSD for t in toks):
        return "ELSD"
    if any(_LS.fullmatch(t) for t in toks):
        return "light scattering"
    if any(t in _VISC for t in toks):
        return "viscometer"
    if any(t in _PRESSURE for t in toks):
        return "pressure"
    if any(t in _FLUORESCENCE for t in toks):
        return "fluorescence"
    if rank == 4 or any(t in _RI for t in toks):
        return "RI"
    if any(t in _IR for t in toks):
        return "IR"
    if any(_UV.fullmatch(t) for t in toks):
        return "UV"
    if rank == 2:
        return "signal"
    if rank < 0:
        return "not a signal"
    return "other"


def response_note(header: str) -> str | None:
    """The warning for a concentration trace from a UV or ELSD column, else None.

    gpctools takes the signal as proportional to the mass concentration of polymer in
    each slice (docs/science.md, section 13.1). For a refractive-index detector that holds
    when dn/dc is the same along the distribution; a UV detector sees chromophores, whose
    content per gram differs with composition and end groups, and an evaporative
    light-scattering detector responds non-linearly to mass (a power law with an exponent
    that depends on the conditions, from memory) [common practice].

    Parameters
    ----------
    header : str
        Header of the signal column used.

    Returns
    -------
    str or None
    """
    kind = column_kind(header)
    if kind == "UV":
        return (f"the signal column {header!r} is a UV detector: it is taken as proportional to "
                "the polymer's mass concentration, which holds only when every chain absorbs "
                "alike per gram (the response differs with composition and end groups; "
                "docs/science.md, section 13.1); use the RI trace (import.signal_column) for "
                "mass-based averages")
    if kind == "ELSD":
        return (f"the signal column {header!r} is an evaporative light-scattering detector: "
                "it is taken as proportional to the polymer's mass concentration, but its "
                "response is not linear in mass (docs/science.md, section 13.1), so mass "
                "fractions and averages are distorted unless the response is calibrated; use "
                "the RI trace (import.signal_column) where there is one")
    return None


@dataclass(frozen=True)
class ColumnInfo:
    """One column of an export as ``inspect`` shows it.

    Attributes
    ----------
    index : int
        0-based column number (workbooks: A = 0).
    header : str
        As written (``"column 3"`` when the file has no header).
    kind : str
        One of :data:`COLUMN_KINDS`.
    numeric : bool
        The first data row holds a number in this column.
    use : str
        ``"x"``, ``"signal"`` or ``""``: what the reader takes it for.
    """

    index: int
    header: str
    kind: str
    numeric: bool
    use: str = ""


@dataclass(frozen=True, repr=False)
class ExportDescription(Display):
    """What :func:`describe_export` found in one export.

    Attributes
    ----------
    path : str
    file_kind : str
        ``"text"`` or ``"workbook"``.
    encoding : str or None
        Text encoding used (None for workbooks).
    separator, decimal : str or None
        Separator (``"tab"``, ``";"``, ``","``, ``"whitespace"``) and decimal mark of a
        text table (None for workbooks or when no table was found).
    header_row : int
        1-based line (text) or row (workbook) of the header; 0 when there is none.
    units_row : int
        1-based line of a units row under the header (0 when there is none).
    sheet : str or None
        Sheet read; ``sheets`` all sheets of a workbook.
    columns : tuple of ColumnInfo
    x_column, signal_column, x_kind, x_unit : str or None
        What the reader used (None when it refused the file).
    x_first, x_last : float or None
        First and last x [x_unit]; ``points`` the number of slices.
    metadata : dict
        Lines above the header.
    options : dict
        Reader options given (from the method's ``[import]`` section).
    warnings : tuple of str
        Reader warnings, and :func:`response_note` for a UV or ELSD signal.
    problem : str or None
        The reader's refusal, when it refused the file.
    """

    path: str
    file_kind: str
    encoding: str | None = None
    separator: str | None = None
    decimal: str | None = None
    header_row: int = 0
    units_row: int = 0
    sheet: str | None = None
    sheets: tuple[str, ...] = ()
    columns: tuple[ColumnInfo, ...] = ()
    x_column: str | None = None
    signal_column: str | None = None
    x_kind: str | None = None
    x_unit: str | None = None
    x_first: float | None = None
    x_last: float | None = None
    points: int = 0
    metadata: dict[str, str] = field(default_factory=dict)
    options: dict[str, Any] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    problem: str | None = None

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe description."""
        return {
            "path": self.path,
            "file kind": self.file_kind,
            "encoding": self.encoding,
            "separator": self.separator,
            "decimal mark": self.decimal,
            "header row": self.header_row,
            "units row": self.units_row,
            "sheet": self.sheet,
            "sheets": list(self.sheets),
            "columns": [c.__dict__.copy() for c in self.columns],
            "x column": self.x_column,
            "signal column": self.signal_column,
            "x kind": self.x_kind,
            "x unit": self.x_unit,
            "x first": self.x_first,
            "x last": self.x_last,
            "points": self.points,
            "metadata": dict(self.metadata),
            "options": dict(self.options),
            "warnings": list(self.warnings),
            "problem": self.problem,
        }


_SEPARATORS = {"\t": "tab", ";": ";", ",": ",", " ": "whitespace"}
_SEPARATOR_ARGS = {"\t": "\t", "tab": "\t", "\\t": "\t", ";": ";", "semicolon": ";", ",": ",",
                   "comma": ",", " ": " ", "space": " ", "whitespace": " ", r"\s+": " "}


def _encoding_used(data: bytes, encoding: str | None) -> str:
    """The codec :func:`gpctools.io._files.decode_text` decodes ``data`` with (same order)."""
    if encoding is not None:
        return encoding
    for bom, codec in _files._BOMS:
        if data.startswith(bom):
            return f"{codec.replace('-sig', '')} (byte-order mark)"
    codec16 = _files._utf16_without_bom(data[:4096])
    for codec in ([codec16] if codec16 else []) + ["utf-8", "cp1252", "latin-1"]:
        try:
            data.decode(codec)
        except UnicodeDecodeError:
            continue
        return codec
    return "latin-1"  # pragma: no cover - latin-1 decodes any bytes


def describe_export(
    path: str | os.PathLike[str],
    *,
    sheet: str | int | None = None,
    x_column: str | int | None = None,
    signal_column: str | int | None = None,
    x_unit: str | None = None,
    decimal: str | None = None,
    separator: str | None = None,
    encoding: str | None = None,
) -> ExportDescription:
    """Describe how one slice export is read (what ``gpctools inspect`` shows).

    Parameters
    ----------
    path : str or os.PathLike
        The export.
    sheet, x_column, signal_column, x_unit, decimal, separator, encoding : optional
        Reader options, as for :func:`~gpctools.io.read_chromatogram` (a method's
        ``[import]`` section gives them).

    Returns
    -------
    ExportDescription
        With :attr:`~ExportDescription.problem` set when the reader refuses the file
        (the dialect and columns found up to that point are still given).

    Raises
    ------
    gpctools.errors.InputFormatError
        The file cannot be read at all (missing, empty, an image or binary file, a
        damaged workbook archive).
    """
    import gpctools.io as gio  # looked up at call time: the reader the rest of the tool uses

    options: dict[str, Any] = {k: v for k, v in {"sheet": sheet, "x_column": x_column, "signal_column": signal_column,
                                 "x_unit": x_unit, "decimal": decimal, "separator": separator,
                                 "encoding": encoding}.items() if v is not None}
    data = _files.read_bytes(path)
    kind = _files.detect_kind(path, data)
    problem: str | None = None
    chrom = None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GpcWarning)
        try:
            chrom = gio.read_chromatogram(path, **options)
        except GpcError as exc:
            problem = str(exc)
    notes = [str(w.message) for w in caught if issubclass(w.category, GpcWarning)]
    for w in caught:
        if not issubclass(w.category, GpcWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if kind == "xlsx":
        desc = _describe_workbook(path, data, sheet, chrom)
    else:
        desc = _describe_text(path, data, encoding, separator, decimal, chrom)
    desc["options"] = options
    if chrom is not None:
        note = response_note(chrom.signal_column)
        if note is not None:
            notes.append(note)
        desc.update(x_column=chrom.x_column, signal_column=chrom.signal_column,
                    x_kind=chrom.x_kind, x_unit=chrom.x_unit, x_first=float(chrom.x[0]),
                    x_last=float(chrom.x[-1]), points=len(chrom), metadata=dict(chrom.metadata),
                    header_row=chrom.header_row, sheet=chrom.sheet)
        desc["columns"] = _mark_uses(desc.get("columns", ()), chrom.x_column, chrom.signal_column)
    return ExportDescription(path=str(path), warnings=tuple(dict.fromkeys(notes)), problem=problem,
                             **desc)


def _mark_uses(columns: tuple[ColumnInfo, ...], x: str, signal: str) -> tuple[ColumnInfo, ...]:
    """Mark the x and signal columns (each once: the first column of that name)."""
    wanted = {"x": x, "signal": signal}
    out = []
    for c in columns:
        use = next((u for u, h in wanted.items() if h == c.header), "")
        if use:
            del wanted[use]
        out.append(ColumnInfo(c.index, c.header, c.kind, c.numeric, use))
    return tuple(out)


def _columns(names: tuple[str, ...] | list[str], numeric: set[int], has_header: bool) -> tuple[ColumnInfo, ...]:
    out = []
    for j, n in enumerate(names):
        header = n if (has_header and n) else f"column {j}"
        kind = column_kind(n) if (has_header and n) else ("other" if j in numeric else "not a signal")
        out.append(ColumnInfo(j, header, kind, j in numeric))
    return tuple(out)


def _describe_text(
    path: str | os.PathLike[str], data: bytes, encoding: str | None, separator: str | None,
    decimal: str | None, chrom: Any,
) -> dict[str, Any]:
    desc: dict[str, Any] = {"file_kind": "text", "encoding": _encoding_used(data, encoding)}
    try:
        text = _files.decode_text(path, data, encoding)
    except GpcError:
        return desc
    sep = _SEPARATOR_ARGS.get(separator if separator in _SEPARATOR_ARGS else str(separator).strip().lower()) \
        if separator is not None else None
    dec = decimal if decimal in (".", ",") else None
    head = text.split("\n", SCAN_LINES)[:SCAN_LINES]
    layout = locate_block(head, text, sep=sep, decimal=dec)
    if layout is None and (sep is not None or dec is not None):
        # The forced dialect does not fit (the reader says so): show the file's own.
        layout = locate_block(head, text)
    if layout is None:
        return desc
    d = layout.dialect
    pat = number_pattern(d.decimal)
    first = split_cells(head[layout.good], d.sep)
    numeric = {j for j, c in enumerate(first) if pat.fullmatch(c)}
    has_header = layout.header is not None
    desc.update(
        separator=_SEPARATORS[d.sep], decimal=d.decimal,
        header_row=(layout.header + 1) if layout.header is not None else 0,
        units_row=(layout.units + 1) if layout.units is not None else 0,
        columns=_columns(layout.names, numeric, has_header),
    )
    return desc


def _describe_workbook(
    path: str | os.PathLike[str], data: bytes, sheet: str | int | None, chrom: Any,
) -> dict[str, Any]:
    desc: dict[str, Any] = {"file_kind": "workbook"}
    _xlsx.check_archive(path, data)
    wb = _xlsx._load(path, data, data_only=True)
    try:
        desc["sheets"] = tuple(str(n) for n in wb.sheetnames)
    finally:
        wb.close()
    if chrom is None:
        return desc
    _, rows = _xlsx.read_rows(path, data, chrom.sheet)
    header = chrom.header_row
    start = header  # 0-based index of the first row under the header
    body = [r for r in rows[start:start + 50] if sum(_is_number(v) for v in r) >= 2]
    first = body[0] if body else ()
    numeric = {j for j, v in enumerate(first) if _is_number(v)}
    if header:
        names = [("" if v is None else str(v).strip()) for v in rows[header - 1]]
    else:
        names = ["" for _ in first]
    width = max(len(names), len(first))
    names += [""] * (width - len(names))
    desc["columns"] = _columns(names, numeric, bool(header))
    return desc


def _is_number(v: Any) -> bool:
    if isinstance(v, bool) or v is None:
        return False
    if isinstance(v, (int, float)):
        return True
    return isinstance(v, str) and bool(number_pattern(".").fullmatch(v.strip())
                                       or number_pattern(",").fullmatch(v.strip()))
