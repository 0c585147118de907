"""Reading one chromatogram (a slice export: x and detector signal) from text or XLSX.

The reader turns a file dialect into plain data: a :class:`Chromatogram` with float64
arrays sorted by increasing x, the kind and unit of x, the chosen columns and the free-text
metadata found above the header. What the signal means (baseline, limits) is decided
later, in :mod:`gpctools.signal`.

How a text file is read
-----------------------
1. The bytes are read once and decoded (BOM, UTF-16 without BOM, UTF-8, cp1252,
   Latin-1, in that order; or the ``encoding`` given).
2. The first :data:`~gpctools.io._text.SCAN_LINES` lines are scanned for the first run of
   numeric lines; the separator (tab, ``;``, ``,``, whitespace) and the decimal mark are
   those that split every sample line into the same number (>= 2) of numbers. The
   non-empty line just above the run is the header if most of its cells are not numbers
   (a units row under the names, e.g. ``min;mV``, is merged into the names). Lines above
   the header are metadata.
3. Footer lines after the block (a text line and what follows it, such as a peak
   table) are set aside with a :class:`ReaderWarning` naming them; rows of numbers right
   after the data are never a footer. The block is parsed in pieces of about 2 MB, each
   by one :func:`pandas.read_csv` call (C engine). Only where that fails does a
   line-by-line pass run over the piece, to name the offending line.

Hostile input: lines, cells and fields are capped (:data:`~gpctools.io._text.MAX_LINE_CHARS`,
:data:`~gpctools.io._text.MAX_CELL_CHARS`, :data:`~gpctools.io._text.MAX_FIELDS`) and every
pattern is linear-time; workbooks are screened by :func:`gpctools.io._xlsx.check_archive`
before the workbook library reads them.
"""

from __future__ import annotations

import io
import math
import os
import re
import warnings as _warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError, GpcWarning, InputFormatError, MethodError
from gpctools.io import _xlsx
from gpctools.io._columns import (
    UNIT_KIND,
    detector_rank,
    normalise_unit,
    split_header,
    x_kind_of,
)
from gpctools.io._files import decode_text, detect_kind, read_bytes
from gpctools.io._text import (
    MAX_CELL_CHARS,
    MAX_FIELDS,
    MAX_LINE_CHARS,
    MIN_RUN,
    SCAN_LINES,
    Dialect,
    Layout,
    find_long_cell,
    find_long_line,
    is_datalike,
    is_number_any_mark,
    locate_block,
    longest_line_bytes,
    number_pattern,
    parse_metadata_line,
    split_cells,
    text_cells_are_text,
    too_many_fields,
)

__all__ = ["Chromatogram", "read_chromatogram", "MIN_POINTS", "ReaderWarning"]

#: Fewest data rows (slices) accepted; fewer cannot describe a peak.
MIN_POINTS = 10
#: Largest slice export read [bytes]: about 2.5 million slices of 25 characters, far
#: beyond any real run (6,000 slices are about 150 kB). The cap keeps the time budget:
#: a file within it is read or refused within 10 s on a 2-core machine (measured by
#: bench/bench_fuzz.py; 2 s for a 39 MB export of 2 million slices).
MAX_EXPORT_BYTES = 64 * 1024 * 1024
#: Footer lines set aside at most; a longer tail is treated as part of the table.
MAX_FOOTER_LINES = 1000


class _NoTableInSheet(InputFormatError):
    """A workbook sheet holds no table of numbers in its scanned rows.

    Raised by :func:`_read_xlsx_sheet` only, so that :func:`_read_xlsx` can try the next
    sheet on this condition and on no other (a structured signal rather than a match on
    the message text). It never leaves this module: :func:`_read_xlsx` re-raises it as a
    plain :class:`~gpctools.errors.InputFormatError` with the same fields.
    """

    def plain(self, suffix: str = "") -> InputFormatError:
        """The same error as a plain :class:`~gpctools.errors.InputFormatError`."""
        return InputFormatError(self.message + suffix, path=self.path, sheet=self.sheet,
                                row=self.row, column=self.column, key=self.key)


class ReaderWarning(GpcWarning):
    """A file was read, but something in it deserves a look (e.g. a unit overridden)."""


@dataclass(frozen=True, eq=False, repr=False)
class Chromatogram(Display):
    """One detector trace as exported: x (volume or time) and signal, sorted by x.

    Parameters
    ----------
    path : str
        The file it was read from (as given).
    x : numpy.ndarray
        Elution volume [mL] or retention time [min] or [s] (see ``x_unit``), float64,
        strictly increasing.
    signal : numpy.ndarray
        Detector response [detector units], float64, same length as ``x``.
    x_kind : str
        ``"volume"`` or ``"time"``.
    x_unit : str
        ``"mL"`` (volume), ``"min"`` or ``"s"`` (time).
    x_column, signal_column : str
        Header of the columns used (``"column 0"`` ... for files without a header).
    metadata : dict of str to str
        Free-text ``key: value`` lines (or cells) above the header, in file order.
    header_row : int
        1-based line (text) or row (XLSX) of the header; 0 when the file has no header.
    sheet : str or None
        Sheet read, for workbooks.
    warnings : tuple of str
        Messages of the :class:`ReaderWarning` issued while reading.
    channels : dict of str to numpy.ndarray
        Further columns read on request (``channels=`` of :func:`read_chromatogram`:
        light-scattering angles, viscometer pressures, a UV trace), by header, each
        float64 in the order of ``x``; empty unless asked for.

    Raises
    ------
    gpctools.errors.DataError
        If the arrays are not 1-D, of equal length, finite, or x is not strictly
        increasing, or kind and unit disagree.
    """

    path: str
    x: np.ndarray
    signal: np.ndarray
    x_kind: str
    x_unit: str
    x_column: str
    signal_column: str
    metadata: dict[str, str] = field(default_factory=dict)
    header_row: int = 0
    sheet: str | None = None
    warnings: tuple[str, ...] = ()
    channels: dict[str, np.ndarray] = field(default_factory=dict)

    def __post_init__(self) -> None:
        x = np.array(self.x, dtype=np.float64, copy=True)
        y = np.array(self.signal, dtype=np.float64, copy=True)
        where: dict[str, Any] = {"path": self.path}
        if x.ndim != 1 or y.ndim != 1 or x.shape != y.shape:
            raise DataError(
                f"x and signal must be 1-D arrays of equal length (got {x.shape} and {y.shape})",
                **where,
            )
        if x.size < 2:
            raise DataError("a chromatogram needs at least two points", **where)
        if not (np.isfinite(x).all() and np.isfinite(y).all()):
            raise DataError("x and signal must be finite numbers (no NaN or inf)", **where)
        if not (np.diff(x) > 0).all():
            raise DataError("x must be strictly increasing (sort it, remove duplicates)", **where)
        if UNIT_KIND.get(self.x_unit) != self.x_kind:
            raise DataError(
                f"x_unit {self.x_unit!r} does not fit x_kind {self.x_kind!r}; use 'mL' for "
                "volume, 'min' or 's' for time",
                **where,
            )
        chans: dict[str, np.ndarray] = {}
        for name, values in dict(self.channels).items():
            c = np.array(values, dtype=np.float64, copy=True)
            if c.shape != x.shape or not np.isfinite(c).all():
                raise DataError(f"channel {name!r} must be finite numbers, one per slice", **where)
            c.setflags(write=False)
            chans[name] = c
        object.__setattr__(self, "channels", chans)
        x.setflags(write=False)
        y.setflags(write=False)
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "signal", y)
        object.__setattr__(self, "metadata", dict(self.metadata))
        object.__setattr__(self, "warnings", tuple(self.warnings))

    def __len__(self) -> int:
        return int(self.x.size)

    def to_volume(self, flow_rate: float | None = None) -> np.ndarray:
        """Elution volume of each slice [mL].

        Parameters
        ----------
        flow_rate : float, optional
            Nominal pump flow rate [mL/min]; required when x is a time.

        Returns
        -------
        numpy.ndarray
            ``x`` for volumes; ``t [min] * flow_rate`` or ``t [s] / 60 * flow_rate`` for
            times (a new array either way).

        Raises
        ------
        gpctools.errors.MethodError
            Key ``"flow.rate"``: x is a time and no positive, finite flow rate was given.

        Examples
        --------
        >>> import numpy as np
        >>> c = Chromatogram("a.csv", np.arange(10.0), np.ones(10), "time", "min", "t", "RI")
        >>> c.to_volume(0.5)[:3]
        array([0. , 0.5, 1. ])
        """
        if self.x_kind == "volume":
            return np.array(self.x, dtype=np.float64, copy=True)
        if flow_rate is None:
            raise MethodError(
                f"x is a retention time [{self.x_unit}]; give the flow rate [mL/min] to "
                "convert it to elution volume",
                path=self.path,
                key="flow.rate",
            )
        try:
            f = float(flow_rate)
        except (TypeError, ValueError):
            f = float("nan")
        if not math.isfinite(f) or f <= 0:
            raise MethodError(
                f"flow rate must be a positive number [mL/min], got {flow_rate!r}",
                path=self.path,
                key="flow.rate",
            )
        minutes = self.x / 60.0 if self.x_unit == "s" else self.x
        return minutes * f

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe description (no arrays)."""
        return {
            "path": self.path,
            "sheet": self.sheet,
            "points": len(self),
            "x_kind": self.x_kind,
            "x_unit": self.x_unit,
            "x_column": self.x_column,
            "signal_column": self.signal_column,
            "x_min": float(self.x[0]),
            "x_max": float(self.x[-1]),
            "header_row": self.header_row,
            "metadata": dict(self.metadata),
            "channels": list(self.channels),
            "warnings": list(self.warnings),
        }


# ============================================================================ public


def read_chromatogram(
    path: str | os.PathLike[str],
    *,
    sheet: str | int | None = None,
    x_column: str | int | None = None,
    signal_column: str | int | None = None,
    x_unit: str | None = None,
    decimal: str | None = None,
    separator: str | None = None,
    encoding: str | None = None,
    channels: Any = None,
) -> Chromatogram:
    r"""Read one chromatogram export (CSV/TXT/TSV/DAT/ASC text or XLSX).

    Parameters
    ----------
    path : str or os.PathLike
        The export. Text and workbooks are told apart by content, checked against the
        extension.
    sheet : str or int, optional
        Workbook sheet by name or 0-based index (default: the first sheet that holds a
        table of numbers); ignored for text.
    x_column, signal_column : str or int, optional
        Header (case-insensitive; the name without its unit also matches) or 0-based
        column index. Default: the x column is the first volume column, else the first
        time column, recognised by header words and units; the signal is the best
        detector column (refractive index, then UV/IR, then generic signal words, then
        the first other numeric column).
    x_unit : {"mL", "min", "s"}, optional
        Unit of x; overrides the header. Required for files without a header (unless a
        metadata line such as ``X unit: min`` gives it) and for time columns whose header
        has no unit.
    decimal : {".", ","}, optional
        Force the decimal mark (default: detected).
    separator : {"\t", ";", ",", " "}, optional
        Force the separator; ``" "`` (or ``"whitespace"``) means runs of blanks; ``"tab"``
        is accepted for ``"\t"``. Default: detected.
    encoding : str, optional
        Force the text encoding (default: detected).
    channels : sequence of str or int, or "all", optional
        Further columns to carry through as :attr:`Chromatogram.channels` (headers,
        matched like ``signal_column``, or 0-based numbers), for multi-detector
        exports; ``"all"`` takes every numeric column but x. Each must hold a finite
        number in every data row (the same checks as the signal).

    Returns
    -------
    Chromatogram

    Raises
    ------
    gpctools.errors.InputFormatError
        Naming the file and line/row: no numeric table, fewer than :data:`MIN_POINTS`
        rows, x not monotonic (or repeated), text or an empty cell inside the table,
        non-finite values, unknown column, unknown unit, wrong sheet, a file that is not
        what its extension says.
    gpctools.errors.MethodError
        For a bad argument (unknown ``x_unit``, ``decimal`` or ``separator``).
    """
    unit_arg = _unit_argument(x_unit)
    sep = _separator_argument(separator)
    dec = _decimal_argument(decimal)
    data = read_bytes(path, MAX_EXPORT_BYTES)
    kind = detect_kind(path, data)
    if kind == "xlsx":
        return _read_xlsx(path, data, sheet, x_column, signal_column, unit_arg, dec, channels)
    text = decode_text(path, data, encoding)
    return _read_text(path, text, x_column, signal_column, unit_arg, sep, dec, channels)


# ============================================================================ arguments


def _unit_argument(x_unit: str | None) -> str | None:
    if x_unit is None:
        return None
    unit = normalise_unit(str(x_unit))
    if unit is None:
        raise MethodError(
            f"x_unit {x_unit!r} is not known; use 'mL' (elution volume), 'min' or 's' "
            "(retention time)",
            key="x_unit",
        )
    return unit


def _separator_argument(separator: str | None) -> str | None:
    if separator is None:
        return None
    aliases = {
        "\t": "\t",
        "tab": "\t",
        "\\t": "\t",
        ";": ";",
        "semicolon": ";",
        ",": ",",
        "comma": ",",
        " ": " ",
        "space": " ",
        "whitespace": " ",
        r"\s+": " ",
    }
    key = separator if separator in aliases else str(separator).strip().lower()
    if key not in aliases:
        raise MethodError(
            f"separator {separator!r} is not supported; use '\\t', ';', ',' or ' ' "
            "(whitespace), or leave it unset to detect it",
            key="separator",
        )
    return aliases[key]


def _decimal_argument(decimal: str | None) -> str | None:
    if decimal is None:
        return None
    if decimal not in (".", ","):
        raise MethodError(
            f"decimal mark {decimal!r} is not supported; use '.' or ','", key="decimal"
        )
    return decimal


# ============================================================================ columns


def _display(names: tuple[str, ...] | list[str], j: int) -> str:
    return names[j] if j < len(names) and names[j] else f"column {j}"


def _available(names: tuple[str, ...] | list[str], has_header: bool) -> str:
    if not has_header:
        return f"the file has no header; columns are numbered 0 to {len(names) - 1}"
    return "available columns: " + ", ".join(
        f"{j}: {_display(names, j)!r}" for j in range(len(names))
    )


def _resolve_column(
    spec: str | int,
    role: str,
    names: tuple[str, ...],
    has_header: bool,
    err: dict[str, Any],
) -> int:
    width = len(names)
    if isinstance(spec, bool) or not isinstance(spec, (int, np.integer, str)):
        raise InputFormatError(
            f"{role} must be a header or a 0-based column number, not {spec!r}; "
            + _available(names, has_header),
            **err,
        )
    if isinstance(spec, (int, np.integer)):
        j = int(spec)
        if not 0 <= j < width:
            raise InputFormatError(
                f"{role} {j} is out of range: the table has {width} columns (0 to "
                f"{width - 1}); " + _available(names, has_header),
                **err,
            )
        return j
    if not has_header:
        raise InputFormatError(
            f"{role} {spec!r} cannot be found because the file has no header row; "
            f"give a 0-based column number (0 to {width - 1})",
            **err,
        )
    want = spec.strip().casefold()
    for j, n in enumerate(names):
        if n.strip().casefold() == want:
            return j
    for j, n in enumerate(names):
        if n and split_header(n)[0].strip().casefold() == want:
            return j
    raise InputFormatError(
        f"no column named {spec!r} for {role}; " + _available(names, has_header),
        column=spec,
        **err,
    )


def _channel_columns(
    channels: Any,
    names: tuple[str, ...],
    has_header: bool,
    numeric_cols: set[int],
    xi: int,
    err: dict[str, Any],
) -> list[int]:
    """0-based indices of the extra channels asked for (x never; no repeats)."""
    if channels is None:
        return []
    if isinstance(channels, str) and channels.strip().lower() == "all":
        return [j for j in sorted(numeric_cols) if j != xi]
    specs = [channels] if isinstance(channels, (str, int)) else list(channels)
    out: list[int] = []
    for spec in specs:
        j = _resolve_column(spec, "channel", names, has_header, err)
        if j == xi:
            raise InputFormatError(
                f"channel {spec!r} is the x column; name detector columns only", **err
            )
        if j not in out:
            out.append(j)
    return out


_META_UNIT_KEY = re.compile(
    r"(?:\bx\b|abscissa|x[-_ ]?axis|time|volume).*\bunits?\b|\bunits?\b.*(?:\bx\b|x[-_ ]?axis)"
    r"|^x[-_ ]?axis$|^abscissa$",
    re.IGNORECASE,
)


def _unit_from_metadata(metadata: dict[str, str]) -> tuple[str | None, str | None]:
    """(unit, key) from a metadata line that names the x unit, e.g. ``X unit: min``."""
    for key, value in metadata.items():
        if _META_UNIT_KEY.search(key):
            unit = normalise_unit(value) or x_kind_of(value)[1]
            if unit is not None:
                return unit, key
    return None, None


def _choose_columns(
    names: tuple[str, ...],
    has_header: bool,
    numeric_cols: set[int],
    x_column: str | int | None,
    signal_column: str | int | None,
    unit_arg: str | None,
    metadata: dict[str, str],
    err: dict[str, Any],
) -> tuple[int, int, str, str, list[str]]:
    """(x index, signal index, x_kind, x_unit, warning messages)."""
    notes: list[str] = []
    if x_column is not None:
        xi = _resolve_column(x_column, "import.x_column", names, has_header, err)
    elif has_header:
        found = [(j, x_kind_of(n)) for j, n in enumerate(names) if j in numeric_cols]
        vols = [j for j, (k, _) in found if k == "volume"]
        times = [j for j, (k, _) in found if k == "time"]
        if vols or times:
            xi = (vols or times)[0]
        elif unit_arg is not None:
            xi = min(numeric_cols)
        else:
            raise InputFormatError(
                "cannot tell which column is the elution volume or retention time from the "
                "headers; name it with import.x_column and give import.x_unit (\"mL\", "
                "\"min\" or \"s\") in the method file; "
                + _available(names, has_header),
                **err,
            )
    else:
        xi = min(numeric_cols)
    header_kind, header_unit = x_kind_of(names[xi]) if has_header else (None, None)
    if unit_arg is not None:
        unit = unit_arg
        if header_unit is not None and header_unit != unit_arg:
            notes.append(
                f"x column {_display(names, xi)!r} says {header_unit!r} but the method "
                f"sets import.x_unit = \"{unit_arg}\" (x_unit={unit_arg!r}); using {unit_arg!r}"
            )
    elif header_unit is not None:
        unit = header_unit
    else:
        meta_unit, meta_key = _unit_from_metadata(metadata)
        if meta_unit is not None and (header_kind is None or UNIT_KIND[meta_unit] == header_kind):
            unit = meta_unit
        elif not has_header:
            raise InputFormatError(
                "the file has no header row, so the unit of x (column 0) is unknown; set "
                "import.x_unit in the method file: \"mL\" for elution volume, \"min\" "
                "or \"s\" for retention time (x_unit='mL', 'min' or 's' in Python)",
                **err,
            )
        elif header_kind == "time":
            unit = _TIME_UNIT_FROM_RANGE  # decided in _finish from the values, or refused
        else:
            raise InputFormatError(
                f"the unit of the x column {_display(names, xi)!r} is not known; give "
                "import.x_unit = \"mL\", \"min\" or \"s\" in the method file (or write "
                "it in the header, e.g. 'Volume (mL)')",
                column=_display(names, xi),
                **err,
            )
    if signal_column is not None:
        yi = _resolve_column(signal_column, "import.signal_column", names, has_header, err)
    else:
        options = [j for j in sorted(numeric_cols) if j != xi]
        ranked = [(detector_rank(names[j]) if has_header else 1, -j) for j in options]
        best = max(range(len(options)), key=lambda k: ranked[k], default=None)
        if best is None or ranked[best][0] < 0:
            raise InputFormatError(
                "no detector signal column found besides the x column; name it with "
                "import.signal_column in the method file; " + _available(names, has_header),
                **err,
            )
        yi = options[best]
    if yi == xi:
        raise InputFormatError(
            f"import.x_column and import.signal_column name the same column "
            f"({_display(names, xi)!r}); choose two different columns",
            **err,
        )
    kind = "time" if unit == _TIME_UNIT_FROM_RANGE else UNIT_KIND[unit]
    return xi, yi, kind, unit, notes


# ============================================================================ text


def _metadata_from_lines(lines: list[str]) -> dict[str, str]:
    meta: dict[str, str] = {}
    for line in lines:
        if not line.strip():
            continue
        kv = parse_metadata_line(line)
        if kv is None:
            continue
        _put(meta, *kv)
    return meta


def _put(meta: dict[str, str], key: str, value: str) -> None:
    if key in meta:
        n = 2
        while f"{key} ({n})" in meta:
            n += 1
        key = f"{key} ({n})"
    meta[key] = value


def _tail_kind(line: str, d: Dialect, width: int) -> str:
    """``"data"``, ``"wide"`` (numbers only, more fields than the table) or ``"text"``.

    Numbers are recognised with either decimal mark: a row written with the other mark
    is data gone wrong (reported at its line), never a footer.
    """
    datalike = is_datalike(line)
    if too_many_fields(line, d.sep):
        return "wide" if datalike else "text"
    cells = split_cells(line, d.sep)
    filled = [c for c in cells if c]
    numeric = sum(1 for c in filled if is_number_any_mark(c))
    if filled and numeric == len(filled) and len(cells) <= width:
        return "data"
    if (len(cells) == width and numeric >= 2 and 2 * numeric >= len(filled)
            and text_cells_are_text(cells, number_pattern(d.decimal))):
        return "data"  # a table with a text column (e.g. a flag)
    # Digits, marks and separators only (another width, separator or decimal mark):
    # part of a footer only under a text line, else data gone wrong.
    return "wide" if datalike else "text"


def _footer_start(text: str, offset: int, d: Dialect, width: int) -> int:
    """Character offset where trailing footer lines start (``len(text)`` if none).

    A footer is what follows the table and starts with a text line ("End of data",
    "Peak table"); rows of numbers wider than the table (a peak table) belong to it only
    under such a line. Rows of numbers right after the data, whatever their decimal mark
    or width, stay in the table and are checked there, so nothing is dropped silently.
    A tail of more than :data:`MAX_FOOTER_LINES` lines is treated as part of the table.
    """
    footer = len(text)
    end = len(text)
    for _ in range(MAX_FOOTER_LINES):
        e = end
        while e > offset and text[e - 1] in " \t\n":
            e -= 1
        if e <= offset:
            return footer
        b = max(text.rfind("\n", offset, e) + 1, offset)
        kind = _tail_kind(text[b:e], d, width)
        if kind == "data":
            return footer
        if kind == "text":
            footer = b
        end = b
    return len(text)


def _note_footer(text: str, end: int, notes: list[str]) -> None:
    """Say which lines after the table were set aside as a footer (never silently)."""
    tail = text[end:]
    if not tail.strip():
        return
    first = text.count("\n", 0, end) + 1
    lines = tail.rstrip("\n").split("\n")
    first += next(k for k, ln in enumerate(lines) if ln.strip())
    last = text.count("\n", 0, end) + len(lines)
    shown = next(ln for ln in lines if ln.strip()).strip()
    shown = shown if len(shown) <= 40 else shown[:37] + "..."
    span = f"line {first}" if first == last else f"lines {first} to {last}"
    notes.append(
        f"{span} after the data table (starting {shown!r}) are a footer and were not "
        "read as slices; if they are slices, the table is damaged there"
    )


def _refuse_long_lines(text: str, err: dict[str, Any]) -> None:
    """Refuse a file with a line longer than :data:`MAX_LINE_CHARS`, naming the line."""
    found = find_long_line(text)
    if found is not None:
        n, length = found
        raise InputFormatError(
            f"line {n} is {length:,} characters long; lines of a slice export are at most "
            f"{MAX_LINE_CHARS:,} characters, so the file is damaged or not a table export "
            "(perhaps its line ends were lost) - export the chromatogram again",
            row=n,
            **err,
        )


def _refuse_long_cells(text: str, start: int, end: int, first_line: int, d: Dialect,
                       err: dict[str, Any]) -> None:
    """Refuse a header or data cell longer than :data:`MAX_CELL_CHARS`, naming the line."""
    found = find_long_cell(text[start:end], d.sep)
    if found is not None:
        k, length = found
        n = first_line + k - 1
        raise InputFormatError(
            f"line {n} holds a value {length:,} characters long; a number or column name "
            f"has at most {MAX_CELL_CHARS:,} characters - correct the value or export the "
            "chromatogram again",
            row=n,
            **err,
        )


def _no_table_error(
    head: list[str], text: str, sep: str | None, dec: str | None, err: dict[str, Any]
) -> InputFormatError:
    """The most specific reason why no table of numbers was found in ``head``."""
    if sep is not None or dec is not None:
        free = locate_block(head, text)
        if free is not None:
            given = []
            if sep is not None:
                given.append(f"import.separator = {_SEP_NAMES[sep]!r}")
            if dec is not None:
                given.append(f"import.decimal = {dec!r}")
            line = head[free.good].strip()[:60]
            return InputFormatError(
                f"no table of numbers found with the separator/decimal mark given "
                f"({' and '.join(given)}): the table in this file is "
                f"{free.dialect.label} (line {free.good + 1}: {line!r}); set these keys to "
                '"auto" in the method file (or to the values of this file)',
                **err,
            )
    for k, line in enumerate(head):
        if any(too_many_fields(line, s) for s in (";", ",", "\t")):
            return InputFormatError(
                f"line {k + 1} has more than {MAX_FIELDS:,} fields; a slice export has a "
                "few columns (x and one or more detector signals) - export the "
                "chromatogram again, one slice per line",
                row=k + 1,
                **err,
            )
    singles = [k for k, line in enumerate(head) if _single_number(line)]
    if len(singles) >= MIN_RUN:
        return InputFormatError(
            f"only one column of numbers found (lines {singles[0] + 1} to {singles[-1] + 1}, "
            f"{len(singles)} lines with one number each); a slice export needs two columns, "
            "x (elution volume or retention time) and the detector signal, separated by "
            "tab, ';', ',' or blanks - export both columns",
            row=singles[0] + 1,
            **err,
        )
    forced = " with the separator/decimal mark given" if (sep or dec) else ""
    return InputFormatError(
        f"no table of numbers found{forced} in the first {len(head)} lines: expected "
        "rows with at least two numbers (x and signal) separated by tab, ';', ',' or "
        "spaces, under a header row such as 'Volume (mL);RI (mV)'; check that this is "
        "the slice export (not a report or another file) and export it again",
        **err,
    )


_SEP_NAMES = {"\t": "tab", ";": ";", ",": ",", " ": "whitespace"}


def _single_number(line: str) -> bool:
    """True for a line holding one number (a trailing separator allowed)."""
    s = line.strip().strip(";,\t").strip()
    return bool(s) and len(s) <= MAX_CELL_CHARS and is_number_any_mark(s)


def _read_text(
    path: str | os.PathLike[str],
    text: str,
    x_column: str | int | None,
    signal_column: str | int | None,
    unit_arg: str | None,
    sep: str | None,
    dec: str | None,
    channels: Any = None,
) -> Chromatogram:
    """Read a decoded text export (steps in the module docstring)."""
    err: dict[str, Any] = {"path": path}
    longest = longest_line_bytes(text)  # bytes >= characters: within a limit, nothing exceeds it
    if longest > MAX_LINE_CHARS:
        _refuse_long_lines(text, err)
    parts = text.split("\n", SCAN_LINES)
    head = parts[:SCAN_LINES]
    layout = locate_block(head, text, sep=sep, decimal=dec)
    if layout is None:
        raise _no_table_error(head, text, sep, dec, err)
    d = layout.dialect
    has_header = layout.header is not None
    meta_end = layout.header if has_header else layout.start
    metadata = _metadata_from_lines(head[:meta_end])
    pat = number_pattern(d.decimal)
    first = split_cells(head[layout.good], d.sep)
    numeric_cols = {j for j, c in enumerate(first) if pat.fullmatch(c)}
    xi, yi, x_kind, x_unit, notes = _choose_columns(
        layout.names, has_header, numeric_cols, x_column, signal_column, unit_arg, metadata, err
    )
    extra = _channel_columns(channels, layout.names, has_header, numeric_cols, xi, err)
    cols = (xi, yi, *[j for j in extra if j not in (xi, yi)])
    offset = sum(len(ln) + 1 for ln in head[: layout.start])
    end = _footer_start(text, offset, d, layout.width)
    _note_footer(text, end, notes)
    table_start = layout.header if layout.header is not None else layout.start
    table_offset = sum(len(ln) + 1 for ln in head[:table_start])
    if longest > MAX_CELL_CHARS:
        _refuse_long_cells(text, table_offset, end, table_start + 1, d, err)
    block = text[offset:end]
    first_line = layout.start + 1
    table, lines_arr = _parse_block(block, first_line, d, cols, layout.names,
                                    layout.width, err)
    x, y = table[:, 0], table[:, 1]
    chans = {_display(layout.names, j): (y if j == yi else table[:, cols.index(j)]) for j in extra}

    def line_of(k: int) -> int:
        """Line number of data row ``k``."""
        return int(lines_arr[k])

    return _finish(
        path,
        x,
        y,
        x_kind,
        x_unit,
        layout.names,
        has_header,
        xi,
        yi,
        metadata,
        (layout.header + 1) if layout.header is not None else 0,
        None,
        notes,
        line_of,
        "line",
        chans,
    )


#: The data block is parsed in pieces of about this many characters, so that a bad line
#: costs a line-by-line pass over one piece only (a few hundred milliseconds), not over
#: the whole file.
_PIECE_CHARS = 1 << 21


def _parse_block(
    block: str,
    first_line: int,
    d: Dialect,
    cols: tuple[int, ...],
    names: tuple[str, ...],
    width: int,
    err: dict[str, Any],
) -> tuple[np.ndarray, np.ndarray]:
    """(values of ``cols`` per row (n, len(cols)), line number of each row) of the data
    block; raises at the first bad line.

    Each piece (cut at a line end) is parsed by :func:`_parse_fast`; a piece that fails
    there goes through :func:`_parse_lines`, which names the offending line.
    """
    ts: list[np.ndarray] = []
    ns: list[np.ndarray] = []
    pos, line, n = 0, first_line, len(block)
    while pos < n:
        cut = block.find("\n", min(pos + _PIECE_CHARS, n))
        end = n if cut < 0 else cut + 1
        part = block[pos:end]
        breaks = part.count("\n")
        count = breaks + (0 if part.endswith("\n") else 1)
        t = _parse_fast(part, d, cols, width)
        nums: np.ndarray | None = None
        if t is not None:
            if t.shape[0] == count:
                nums = np.arange(line, line + count)
            else:  # blank lines were skipped: number the rows by their lines
                filled = [k for k, ln in enumerate(part.split("\n")) if ln.strip()]
                if len(filled) == t.shape[0]:
                    nums = line + np.asarray(filled, dtype=np.int64)
        if t is None or nums is None:
            t, nums = _parse_lines(part, line, d, cols, names, width, err)
        ts.append(t)
        ns.append(nums)
        line += breaks
        pos = end
    if not ts:
        return np.zeros((0, len(cols))), np.zeros(0, dtype=np.int64)
    return np.concatenate(ts), np.concatenate(ns)


def _parse_fast(
    block: str, d: Dialect, cols: tuple[int, ...], width: int
) -> np.ndarray | None:
    """The ``cols`` of the block (n, len(cols)) by one :func:`pandas.read_csv` call, or
    None when anything is off (then the line-by-line pass names the line).

    The table is accepted only if every used column is finite numbers and no row has
    more fields than the table: the parser takes its column count from the first row, so
    a wider row there shows as extra columns that must be empty (a trailing separator).
    """
    import pandas as pd

    try:
        # No dtype and no usecols: letting the C parser infer types is the fastest way;
        # the two columns used are checked to be numeric right after. low_memory=False
        # types each column once per piece (pieces are small), so mixed types give an
        # object column, not a warning for the caller.
        frame = pd.read_csv(
            io.StringIO(block),
            sep=d.pandas_sep,
            decimal=d.decimal,
            header=None,
            na_filter=False,
            engine="c",
            skip_blank_lines=True,
            low_memory=False,
        )
        for j in range(width, frame.shape[1]):
            extra = frame[j]
            if extra.dtype.kind in "fiu" and not extra.isna().all():
                return None
            if extra.dtype.kind not in "fiu" and not (extra.astype(str) == "").all():
                return None
        used = [frame[j] for j in cols]
        if all(c.dtype.kind in "fiu" for c in used):
            t = np.column_stack([c.to_numpy(dtype=np.float64) for c in used])
            if np.isfinite(t).all():
                return t
    except (ValueError, IndexError, KeyError, OverflowError, pd.errors.ParserError,
            pd.errors.EmptyDataError):
        pass
    return None


def _parse_lines(
    block: str,
    first_line: int,
    d: Dialect,
    cols: tuple[int, ...],
    names: tuple[str, ...],
    width: int,
    err: dict[str, Any],
) -> tuple[np.ndarray, np.ndarray]:
    """Line-by-line parse of the data block; raises at the first bad line.

    The slow path, taken only when the fast parse refuses a piece: its length (about 85
    lines) is the list of faults a line can have, each with its own message naming the
    line and the field, checked in the order a reader would look for them.
    """
    pat = number_pattern(d.decimal)
    rows: list[list[float]] = []
    nums: list[int] = []
    other = "decimal point" if d.decimal == "," else "decimal comma"
    mark = "comma" if d.decimal == "," else "point"
    for k, line in enumerate(block.split("\n")):
        n = first_line + k
        if not line.strip():
            continue
        if too_many_fields(line, d.sep):
            raise _extra_fields_error(n, None, width, d, err)
        cells = split_cells(line, d.sep, quoted=d.sep != " ")
        if len(cells) > width:
            raise _extra_fields_error(n, len(cells), width, d, err)
        vals = []
        for j in cols:
            cell = cells[j] if j < len(cells) else ""
            col = _display(names, j)
            if cell == "":
                if not any(pat.fullmatch(c) for c in cells):
                    raise InputFormatError(
                        f"line {n} holds text {line.strip()[:60]!r} inside the data table "
                        f"(rows of numbers follow); delete that line or correct it",
                        row=n,
                        **err,
                    )
                raise InputFormatError(
                    f"line {n}: the value in column {col!r} is missing (empty cell); fill it "
                    "in or delete the line",
                    row=n,
                    column=col,
                    **err,
                )
            if not pat.fullmatch(cell):
                alt = number_pattern("." if d.decimal == "," else ",")
                if alt.fullmatch(cell):
                    raise InputFormatError(
                        f"line {n}: {cell!r} in column {col!r} is written with a {other}, "
                        f"but the file is read with a decimal {mark} (detected from its "
                        "first data lines, or set by import.decimal in the method file); "
                        "a file must use one decimal mark throughout - make them agree",
                        row=n,
                        column=col,
                        **err,
                    )
                low = cell.lower().lstrip("+-")
                if low in {"nan", "inf", "infinity", "-inf", "1.#inf", "1.#qnan", "#num!"} or (
                    low.startswith(("nan", "inf"))
                ):
                    raise InputFormatError(
                        f"line {n}: {cell!r} in column {col!r} is not a finite number; "
                        "replace it with a number or delete the line",
                        row=n,
                        column=col,
                        **err,
                    )
                if not any(pat.fullmatch(c) for c in cells):
                    raise InputFormatError(
                        f"line {n} holds text {line.strip()[:60]!r} inside the data table "
                        f"(rows of numbers follow); delete that line or correct it",
                        row=n,
                        **err,
                    )
                raise InputFormatError(
                    f"line {n}: {cell!r} in column {col!r} is not a number; correct "
                    "the value or delete the line",
                    row=n,
                    column=col,
                    **err,
                )
            value = float(cell.replace(",", ".")) if d.decimal == "," else float(cell)
            if not math.isfinite(value):
                raise InputFormatError(
                    f"line {n}: {cell[:40]!r} in column {col!r} is too large a number "
                    "(beyond ±1.8e308, the largest a computer can hold); correct the value "
                    "or delete the line",
                    row=n,
                    column=col,
                    **err,
                )
            vals.append(value)
        rows.append(vals)
        nums.append(n)
    table = np.asarray(rows, dtype=np.float64).reshape(len(rows), len(cols))
    return table, np.asarray(nums)


def _extra_fields_error(
    n: int, count: int | None, width: int, d: Dialect, err: dict[str, Any]
) -> InputFormatError:
    """A data line with more fields than the table: refused, never read in part."""
    many = f"{count}" if count is not None else f"more than {MAX_FIELDS:,}"
    hint = ""
    if d.sep == "," and d.decimal == ".":
        hint = (
            " (if its numbers are written with a decimal comma, the file mixes decimal "
            "marks: make them agree)"
        )
    return InputFormatError(
        f"line {n} has {many} fields but the data table has {width}; a row with extra "
        f"values cannot be read safely{hint} - correct the line or delete it",
        row=n,
        **err,
    )


# ============================================================================ shared


_TIME_UNIT_FROM_RANGE = "time unit from range"


def _time_unit_from_range(x: np.ndarray, xcol: str, notes: list[str], err: dict[str, Any]) -> str:
    """Unit of a time column whose header gives none, from the retention times themselves.

    SEC runs last minutes to about an hour: a last slice at or below 100 is read as
    minutes, one at or above 300 as seconds (100 min and 5 min are the plausible ends of a
    run, so the two readings cannot both fit). In between the file is refused rather than
    guessed, since the wrong guess is a factor of 60 in volume. The choice is reported as
    a :class:`ReaderWarning` (common practice: say what was assumed).
    """
    last = float(np.max(x))
    if last <= 100.0:
        notes.append(
            f"the time column {xcol!r} has no unit; retention times up to {last:g} read as "
            "minutes (set import.x_unit in the method file, or write the unit in the "
            "header, to be explicit)"
        )
        return "min"
    if last >= 300.0:
        notes.append(
            f"the time column {xcol!r} has no unit; retention times up to {last:g} read as "
            "seconds (set import.x_unit in the method file, or write the unit in the "
            "header, to be explicit)"
        )
        return "s"
    raise InputFormatError(
        f"the time column {xcol!r} has no unit and its last value {last:g} fits neither "
        "minutes nor seconds of an SEC run; set import.x_unit = \"min\" or \"s\" in the "
        "method file (x_unit='min' or x_unit='s' in Python), or write the "
        "unit in the header, e.g. 'Time (min)'",
        column=xcol,
        **err,
    )


def _finish(
    path: str | os.PathLike[str],
    x: np.ndarray,
    y: np.ndarray,
    x_kind: str,
    x_unit: str,
    names: tuple[str, ...],
    has_header: bool,
    xi: int,
    yi: int,
    metadata: dict[str, str],
    header_row: int,
    sheet: str | None,
    notes: list[str],
    line_of: Any,
    word: str,
    channels: dict[str, np.ndarray] | None = None,
) -> Chromatogram:
    err: dict[str, Any] = {"path": path, "sheet": sheet}
    channels = dict(channels or {})
    xcol = _display(names, xi)
    if x.size < MIN_POINTS:
        raise InputFormatError(
            f"the data table has only {x.size} rows; at least {MIN_POINTS} slices are "
            "needed - export the whole chromatogram",
            **err,
        )
    dx = np.diff(x)
    if not (dx > 0).all():
        if (dx < 0).all():
            x = x[::-1]
            y = y[::-1]
            channels = {k: v[::-1] for k, v in channels.items()}
        else:
            increasing = x[-1] >= x[0]
            bad = int(np.flatnonzero(dx <= 0 if increasing else dx >= 0)[0])
            here, before = line_of(bad + 1), line_of(bad)
            if dx[bad] == 0:
                msg = (
                    f"{word} {here}: x value {x[bad + 1]:g} in column {xcol!r} repeats the "
                    f"value of {word} {before}; every slice needs its own x - delete the "
                    "duplicate"
                )
            else:
                trend = "increase" if increasing else "decrease"
                msg = (
                    f"{word} {here}: x in column {xcol!r} goes from {x[bad]:g} ({word} "
                    f"{before}) to {x[bad + 1]:g}, but it must {trend} throughout; keep one "
                    "chromatogram per file with its slices in order"
                )
            raise InputFormatError(msg, row=here, column=xcol, **err)
    if x_unit == _TIME_UNIT_FROM_RANGE:
        x_unit = _time_unit_from_range(x, xcol, notes, err)
    for note in notes:
        _warnings.warn(f"{path}: {note}", ReaderWarning, stacklevel=3)
    return Chromatogram(
        path=str(path),
        x=x,
        signal=y,
        x_kind=x_kind,
        x_unit=x_unit,
        x_column=xcol,
        signal_column=_display(names, yi),
        metadata=metadata,
        header_row=header_row,
        sheet=sheet,
        warnings=tuple(notes),
        channels=channels,
    )


# ============================================================================ xlsx


def _cell_number(v: Any, decimal: str | None) -> float | None:
    """Float of a numeric cell or numeric text, else None (also for a number too large
    for a float, see :func:`_too_large`).
    """
    if isinstance(v, bool) or v is None:
        return None
    try:
        if isinstance(v, (int, float)):
            f = float(v)
            return f if math.isfinite(f) else None
        if isinstance(v, str):
            s = v.strip()
            if len(s) > MAX_CELL_CHARS:
                return None
            if decimal != "," and number_pattern(".").fullmatch(s):
                f = float(s)
            elif decimal != "." and number_pattern(",").fullmatch(s):
                f = float(s.replace(",", "."))
            else:
                return None
            return f if math.isfinite(f) else None
    except OverflowError:  # an integer cell with hundreds of digits
        return None
    return None


def _too_large(v: Any) -> bool:
    """True for a cell holding a number beyond the float range (or infinite)."""
    if isinstance(v, bool):
        return False
    if isinstance(v, int):
        return v.bit_length() > 1024
    if isinstance(v, float):
        return not math.isfinite(v)
    if isinstance(v, str) and len(v) <= MAX_CELL_CHARS and is_number_any_mark(v.strip()):
        return not math.isfinite(float(v.strip().replace(",", ".")))
    return False


def _safe_str(v: Any) -> str:
    """``str(v)``, also for integers longer than Python converts to text by default."""
    try:
        return str(v)
    except ValueError:
        return f"<a number of about {int(v.bit_length() * 0.30103)} digits>"


def _cell_text(v: Any, decimal: str | None) -> str:
    if v is None:
        return ""
    f = _cell_number(v, decimal)
    if f is not None:
        return repr(f)
    return _safe_str(v).replace("\t", " ").replace("\n", " ").strip()


def _meta_text(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return str(int(v))
    if hasattr(v, "isoformat"):
        return str(v.isoformat())
    return _safe_str(v).strip()


def _read_xlsx(
    path: str | os.PathLike[str],
    data: bytes,
    sheet: str | int | None,
    x_column: str | int | None,
    signal_column: str | int | None,
    unit_arg: str | None,
    dec: str | None,
    channels: Any = None,
) -> Chromatogram:
    """Read a workbook; with no sheet chosen, the first sheet that holds a table of numbers.

    Instrument workbooks often put a title or information sheet first; taking the first
    sheet with an x/signal table saves naming the sheet in every method.
    """
    with _xlsx.open_workbook(path, data) as wb:
        try:
            return _read_xlsx_sheet(
                path, data, wb, sheet, x_column, signal_column, unit_arg, dec, channels
            )
        except _NoTableInSheet as first_error:
            if sheet is not None:
                raise first_error.plain() from None
            count = len(_xlsx.sheet_names(path, wb))
            for index in range(1, count):
                try:
                    return _read_xlsx_sheet(
                        path, data, wb, index, x_column, signal_column, unit_arg, dec, channels
                    )
                except _NoTableInSheet:
                    continue
            suffix = f" (nor in any of the other {count - 1} sheet(s))" if count > 1 else ""
            raise first_error.plain(suffix) from None


def _read_xlsx_sheet(
    path: str | os.PathLike[str],
    data: bytes,
    wb: Any,
    sheet: str | int | None,
    x_column: str | int | None,
    signal_column: str | int | None,
    unit_arg: str | None,
    dec: str | None,
    channels: Any = None,
) -> Chromatogram:
    """One worksheet as a chromatogram: header row, columns, cells, units and checks.

    Long (about 100 lines) because it is the workbook twin of the text reader's steps in
    one place, each with the message that names the sheet and cell; the steps share the
    row list and the error context, and split apart they would only pass them around.
    """
    name, raw = _xlsx.sheet_rows(path, wb, sheet)
    err: dict[str, Any] = {"path": path, "sheet": name}
    head_rows = raw[:SCAN_LINES]
    lines = ["\t".join(_cell_text(v, dec) for v in r) for r in head_rows]
    layout: Layout | None = locate_block(lines, "\n".join(lines), sep="\t", decimal=".")
    if layout is None:
        raise _NoTableInSheet(
            f"no table of numbers found in the first {len(lines)} rows: expected rows with "
            "at least two numbers (x and signal) under a header row such as "
            "'Volume (mL)' | 'RI (mV)'; check that this is the slice export and choose "
            "the sheet that holds the slices (import.sheet in the method file)",
            **err,
        )
    has_header = layout.header is not None
    meta_end = layout.header if has_header else layout.start
    metadata: dict[str, str] = {}
    for r in head_rows[:meta_end]:
        cells = [_meta_text(v) for v in r]
        cells = [c for c in cells if c]
        if not cells:
            continue
        if len(cells) == 1:
            kv = parse_metadata_line(cells[0])
            if kv is not None:
                _put(metadata, *kv)
        else:
            _put(metadata, cells[0].rstrip(":=").strip(), " ".join(cells[1:]))
    first = raw[layout.good]
    numeric_cols = {j for j, v in enumerate(first) if _cell_number(v, dec) is not None}
    xi, yi, x_kind, x_unit, notes = _choose_columns(
        layout.names, has_header, numeric_cols, x_column, signal_column, unit_arg, metadata, err
    )
    extra = _channel_columns(channels, layout.names, has_header, numeric_cols, xi, err)
    cols = (xi, yi, *[j for j in extra if j not in (xi, yi)])
    table: list[list[float]] = []
    rows: list[int] = []
    n_rows = len(raw)
    for i in range(layout.start, n_rows):
        r = raw[i]
        if not any(v is not None and v != "" for v in r):
            continue
        vals = [_cell_number(r[j], dec) if j < len(r) else None for j in cols]
        if all(v is not None for v in vals):
            table.append([float(v) for v in vals])  # type: ignore[arg-type]
            rows.append(i + 1)
            continue
        # A bad row: the footer if no data row follows, else an error.
        if not any(_is_xy_row(raw[k], xi, yi, dec) for k in range(i + 1, n_rows)):
            break
        j = cols[next(k for k, v in enumerate(vals) if v is None)]
        value = r[j] if j < len(r) else None
        cell = _xlsx.cell_name(i + 1, j)
        col = _display(layout.names, j)
        if value is None or value == "":
            if _xlsx.formula_cells(path, data, name, {(i + 1, j)}):
                msg = (
                    f"row {i + 1}: cell {cell} holds a formula whose value was never saved "
                    "(gpctools does not calculate formulas); open and save the workbook in a "
                    "spreadsheet program, or paste values"
                )
            else:
                msg = (
                    f"row {i + 1}: cell {cell} (column {col!r}) is empty inside the data "
                    "table; fill it in or delete the row"
                )
        elif _too_large(value):
            msg = (
                f"row {i + 1}: cell {cell} (column {col!r}) holds a number too large to "
                "compute with (beyond ±1.8e308); correct it or delete the row"
            )
        else:
            shown = _safe_str(value) if not isinstance(value, str) else value
            shown = shown if len(shown) <= 60 else shown[:57] + "..."
            msg = (
                f"row {i + 1}: cell {cell} (column {col!r}) holds {shown!r}, not a number, "
                "inside the data table; correct it or delete the row"
            )
        raise InputFormatError(msg, row=i + 1, column=col, **err)
    rows_arr = np.asarray(rows)
    arr = np.asarray(table, dtype=np.float64).reshape(len(table), len(cols))
    chans = {_display(layout.names, j): arr[:, cols.index(j)] for j in extra}
    return _finish(
        path,
        arr[:, 0],
        arr[:, 1],
        x_kind,
        x_unit,
        layout.names,
        has_header,
        xi,
        yi,
        metadata,
        (layout.header + 1) if layout.header is not None else 0,
        name,
        notes,
        lambda k: int(rows_arr[k]),
        "row",
        chans,
    )


def _is_xy_row(r: tuple[Any, ...], xi: int, yi: int, dec: str | None) -> bool:
    return (
        xi < len(r)
        and yi < len(r)
        and _cell_number(r[xi], dec) is not None
        and _cell_number(r[yi], dec) is not None
    )
