"""Delimited-text dialects: finding the numeric block, its separator and decimal mark.

Detection works on the first :data:`SCAN_LINES` lines only; the numeric block itself is
parsed by :func:`pandas.read_csv` (C engine). Python loops over data lines happen only on
the error path, to name the offending line. Every pattern here is unambiguous, so that
matching costs time linear in the length of the text, and lines, cells and fields are
capped (:data:`MAX_LINE_CHARS`, :data:`MAX_CELL_CHARS`, :data:`MAX_FIELDS`).
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass

import numpy as np

from gpctools.io._columns import is_unit_cell, x_kind_of

__all__ = [
    "SCAN_LINES",
    "MAX_LINE_CHARS",
    "MAX_CELL_CHARS",
    "MAX_FIELDS",
    "too_many_fields",
    "find_long_line",
    "longest_line_bytes",
    "find_long_cell",
    "is_number_any_mark",
    "is_datalike",
    "text_cells_are_text",
    "Dialect",
    "DIALECTS",
    "Layout",
    "locate_block",
    "number_pattern",
    "split_cells",
    "parse_metadata_line",
]

#: Lines inspected to find the header, the separator and the decimal mark.
SCAN_LINES = 200
#: A run of numeric lines at least this long is taken as the data block without looking
#: further (shorter runs are accepted only if nothing longer is found).
MIN_RUN = 5

#: Longest line accepted [characters]. A slice export's lines are tens of characters; a
#: wide header with a few hundred detector columns stays far below this. Longer lines
#: are refused before any parsing, naming the line (a multi-megabyte single line is the
#: mark of a damaged or hostile file, and would cost memory and time for nothing).
MAX_LINE_CHARS = 65_536
#: Longest cell accepted in the header and data lines [characters]. A number needs a few
#: dozen characters at most and a column name far fewer.
MAX_CELL_CHARS = 1_000
#: Most fields (columns) in one line of the table. A slice export has a handful; lines
#: with more are never taken as data rows while the dialect is detected (so a hostile
#: line cannot make the scan slow) and are refused inside the data block.
MAX_FIELDS = 1_000

# Plain numbers. Every pattern is unambiguous (each character can be matched in one way
# only), so a failed match costs time linear in the length of the cell: the integer part
# is one run of digits and the fraction starts only at the mark. (The former form
# "\d+\.?\d*" could split a run of digits between its two "\d" in n ways and took
# quadratic time on a long cell of digits.)
_POINT = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_COMMA = re.compile(r"[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?")
_ANY_MARK = re.compile(r"[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?")
# Quick pre-filter: a line made only of digits, signs, marks, separators and exponents.
_DATALIKE = re.compile(r"(?=[^\d\n]*\d)[\d.,;\t +\-eE\"]+\Z")


def number_pattern(decimal: str) -> re.Pattern[str]:
    """Compiled full-match pattern of a plain number with the given decimal mark."""
    return _COMMA if decimal == "," else _POINT


def text_cells_are_text(cells: list[str], pat: re.Pattern[str]) -> bool:
    """True if every non-number cell holds real text (e.g. a flag), not digits and marks.

    A cell such as ``"004800;3"`` is numbers split by the wrong separator or decimal
    mark; a row holding one is not a row of a table with a text column.
    """
    return not any(c and not pat.fullmatch(c) and _DATALIKE.match(c) for c in cells)


def is_datalike(line: str) -> bool:
    """True for a line of digits, signs, decimal marks, separators and exponents only."""
    return _DATALIKE.match(line) is not None


def is_number_any_mark(cell: str) -> bool:
    """True if ``cell`` is a plain number with a decimal point or a decimal comma."""
    return _ANY_MARK.fullmatch(cell) is not None


def _first_long_run(data: bytes, stops: bytes, limit: int, start: int = 0) -> int:
    """Offset of the first run of bytes longer than ``limit`` holding none of ``stops``.

    -1 when there is none. Vectorised in chunks of 8 MB, so memory stays small and the
    time is linear in ``len(data)`` (one comparison per byte and stop character).
    """
    arr = np.frombuffer(data, dtype=np.uint8)
    last = start - 1  # absolute offset of the last stop seen
    chunk = 1 << 23
    for c0 in range(start, arr.size, chunk):
        part = arr[c0 : c0 + chunk]
        mask = part == stops[0]
        for v in stops[1:]:
            mask |= part == v
        pos = np.flatnonzero(mask) + c0
        if pos.size == 0:
            if c0 + part.size - 1 - last > limit:
                return last + 1
            continue
        prev = np.empty_like(pos)
        prev[0] = last
        prev[1:] = pos[:-1]
        big = np.flatnonzero(pos - prev - 1 > limit)
        if big.size:
            return int(prev[big[0]]) + 1
        last = int(pos[-1])
    if arr.size - 1 - last > limit:
        return last + 1
    return -1


def _long_run(text: str, stops: str, limit: int) -> tuple[int, int] | None:
    """``(line number, length [characters])`` of the first run longer than ``limit``.

    Runs are measured in UTF-8 bytes first (fast) and confirmed in characters, so text
    with many multi-byte characters is never refused for its byte length alone.
    """
    data = text.encode("utf-8", "surrogatepass")
    stop_bytes = stops.encode("ascii")
    pos = 0
    while True:
        at = _first_long_run(data, stop_bytes, limit, pos)
        if at < 0:
            return None
        m = re.compile(b"[" + re.escape(stop_bytes) + b"]").search(data, at)
        end = m.start() if m else len(data)
        length = len(data[at:end].decode("utf-8", "surrogatepass"))
        if length > limit:
            return data.count(b"\n", 0, at) + 1, length
        pos = end


def longest_line_bytes(text: str) -> int:
    """Length of the longest line of ``text`` in UTF-8 bytes (never less than in characters).

    One vectorised pass: when it is within a limit, no line (and so no cell, which lies
    inside a line) can exceed that limit, and :func:`find_long_line` /
    :func:`find_long_cell` need not run (issue 14: they cost about a tenth of reading a
    typical export).
    """
    arr = np.frombuffer(text.encode("utf-8", "surrogatepass"), dtype=np.uint8)
    breaks = np.flatnonzero(arr == 10)
    if breaks.size == 0:
        return int(arr.size)
    longest = max(int(breaks[0]), int(arr.size - 1 - breaks[-1]))
    if breaks.size > 1:
        longest = max(longest, int(np.diff(breaks).max()) - 1)
    return longest


def find_long_line(text: str, limit: int = MAX_LINE_CHARS) -> tuple[int, int] | None:
    """``(line number, length [characters])`` of the first line longer than ``limit``.

    None when every line is short enough. Linear in the length of ``text``.
    """
    return _long_run(text, "\n", limit)


def find_long_cell(text: str, sep: str, limit: int = MAX_CELL_CHARS) -> tuple[int, int] | None:
    """``(line number within text, length)`` of the first cell longer than ``limit``.

    Cells end at a line end, a tab, a blank or the separator ``sep``. None when every
    cell is short enough. Linear in the length of ``text``.
    """
    return _long_run(text, "\n\t " + ("" if sep in "\t " else sep), limit)


@dataclass(frozen=True)
class Dialect:
    """Separator (``" "`` means runs of whitespace) and decimal mark of a text table."""

    sep: str
    decimal: str

    @property
    def pandas_sep(self) -> str:
        return r"\s+" if self.sep == " " else self.sep

    @property
    def label(self) -> str:
        name = {"\t": "tab", ";": "semicolon", ",": "comma", " ": "whitespace"}[self.sep]
        mark = "decimal comma" if self.decimal == "," else "decimal point"
        return f"{name}-separated, {mark}"


#: Candidate dialects in order of preference when several fit equally well.
DIALECTS = (
    Dialect("\t", "."),
    Dialect("\t", ","),
    Dialect(";", "."),
    Dialect(";", ","),
    Dialect(",", "."),
    Dialect(" ", "."),
    Dialect(" ", ","),
)


def too_many_fields(line: str, sep: str) -> bool:
    """True if ``line`` has more than :data:`MAX_FIELDS` fields (counted without splitting)."""
    if sep == " ":
        return len(line) > 2 * MAX_FIELDS and len(line.split()) > MAX_FIELDS
    return line.count(sep) >= MAX_FIELDS


def split_cells(line: str, sep: str, *, quoted: bool = False) -> list[str]:
    """Cells of one line, stripped of blanks and quotes, trailing empty cells removed."""
    if sep == " ":
        cells = line.split()
    elif quoted and '"' in line:
        cells = next(csv.reader([line], delimiter=sep), [])
    else:
        cells = line.split(sep)
    out = [c.strip().strip('"').strip() for c in cells]
    while out and out[-1] == "":
        out.pop()
    return out


@dataclass(frozen=True)
class Layout:
    """Where things are in the scanned lines (0-based indices into the line list)."""

    dialect: Dialect
    start: int  # first data line
    good: int  # first data line that splits cleanly (a representative row)
    width: int  # cells per data line
    header: int | None  # header line, None when the file has no header
    units: int | None  # units line under the header, if any
    names: tuple[str, ...]  # one name per column ("" when unnamed)


def _is_num_row(cells: list[str], pat: re.Pattern[str]) -> tuple[int, int]:
    """(numeric cells, non-empty cells)."""
    num = 0
    nonempty = 0
    for c in cells:
        if c:
            nonempty += 1
            if pat.fullmatch(c):
                num += 1
    return num, nonempty


def _fit(lines: list[str], d: Dialect, need: int = 1) -> tuple[int, int, int]:
    """(lines that split into >= 2 numbers, their common width, index of the first one).

    The width is the most frequent one among the fitting lines; (0, 0, 0) if none fit or
    if fewer than ``need`` lines can still fit (early exit).
    """
    pat = number_pattern(d.decimal)
    counts: dict[int, int] = {}
    first: dict[int, int] = {}
    misses = 0
    allowed = len(lines) - need
    for k, line in enumerate(lines):
        if misses > allowed:
            return 0, 0, 0
        if too_many_fields(line, d.sep):
            misses += 1
            continue
        cells = split_cells(line, d.sep)
        if len(cells) < 2:
            misses += 1
            continue
        for c in cells:
            if not pat.fullmatch(c):
                misses += 1
                break
        else:
            w = len(cells)
            counts[w] = counts.get(w, 0) + 1
            first.setdefault(w, k)
    if not counts:
        return 0, 0, 0
    w = max(counts, key=lambda v: (counts[v], v))
    return counts[w], w, first[w]


def _fast_block(lines: list[str], candidates: list[Dialect]) -> tuple[Dialect, int, int] | None:
    """Block of lines made only of numbers and separators (the common case).

    Only the lines up to the first long enough run, plus a 20-line sample of it, are
    looked at. The dialect is the one splitting most sample lines alike, so one bad line
    in the sample does not hide the block.
    """
    datalike = _DATALIKE.match
    n = len(lines)
    a = 0
    short: list[tuple[int, int]] = []
    while a < n:
        if not datalike(lines[a]):
            a += 1
            continue
        b = a + 1
        while b < n and b < a + 20 and datalike(lines[b]):
            b += 1
        if b - a >= MIN_RUN:
            found = _sample_dialect(lines, a, b, candidates)
            if found is not None:
                return found
        else:
            short.append((a, b))
        a = b
    if not short or _general_block(lines, candidates) is not None:
        return None
    # Only short runs (a tiny file): take the longest, to report "too few rows".
    a, b = max(short, key=lambda r: r[1] - r[0])
    return _sample_dialect(lines, a, b, candidates)


def _sample_dialect(
    lines: list[str], a: int, b: int, candidates: list[Dialect]
) -> tuple[Dialect, int, int] | None:
    sample = lines[a:b]
    need = max(2, (len(sample) + 1) // 2) if len(sample) >= 2 else 1
    best: tuple[int, Dialect, int, int] | None = None
    joined = "".join(sample)
    for d in candidates:
        if d.sep != " " and d.sep not in joined:
            continue  # cannot split into two cells
        if d.decimal == "," and "," not in joined:
            continue  # would tie with the decimal point, which is preferred
        count, width, first = _fit(sample, d, need)
        if width and count >= need and (best is None or count > best[0]):
            best = (count, d, width, first)
    if best is None:
        return None
    return best[1], a + best[3], best[2]


def _general_block(lines: list[str], candidates: list[Dialect]) -> tuple[Dialect, int, int] | None:
    """Block of rows with >= 2 numeric cells, numbers in the majority (e.g. a flag column)."""
    n = len(lines)
    best: tuple[tuple[int, int, int], Dialect, int, int] | None = None
    for k, d in enumerate(candidates):
        pat = number_pattern(d.decimal)
        widths = []
        for ln in lines:
            if too_many_fields(ln, d.sep):
                widths.append(0)
                continue
            cells = split_cells(ln, d.sep)
            num, nonempty = _is_num_row(cells, pat)
            ok = num >= 2 and 2 * num >= nonempty and text_cells_are_text(cells, pat)
            widths.append(len(cells) if ok else 0)
        runs = []
        i = 0
        while i < n:
            if widths[i]:
                j = i
                while j < n and widths[j]:
                    j += 1
                runs.append((i, j))
                i = j
            else:
                i += 1
        run = _pick_run(runs)
        if run is None:
            continue
        a, b = run
        score = (min(b - a, MIN_RUN), -a, -k)
        if best is None or score > best[0]:
            # Trailing empty cells are trimmed, so rows of one table may differ in width.
            best = (score, d, a, max(widths[a:b]))
    if best is None:
        return None
    return best[1], best[2], best[3]


def _pick_run(runs: list[tuple[int, int]]) -> tuple[int, int] | None:
    """The first run of at least :data:`MIN_RUN` rows, else the longest (first of equals)."""
    for a, b in runs:
        if b - a >= MIN_RUN:
            return a, b
    if runs:
        return max(runs, key=lambda r: r[1] - r[0])
    return None


def _extend_back(lines: list[str], start: int, width: int, d: Dialect) -> int:
    """Move the block start up over damaged data lines (first cell a number).

    A bad value in the first rows (a wrong decimal mark, an empty or non-finite cell)
    must be reported at its line, not turn the rows above it into metadata.
    """
    pat = number_pattern(d.decimal)

    def damaged_row(i: int) -> bool:
        if too_many_fields(lines[i], d.sep):
            return bool(_DATALIKE.match(lines[i]))
        cells = split_cells(lines[i], d.sep)
        first = next((c for c in cells if c), "")
        if len(cells) <= width:
            # First cell a number; or every cell a number with the other decimal mark (a
            # file whose mark changes: refused at its line, not read as metadata).
            return bool(pat.fullmatch(first)) or (
                len(cells) >= 2 and all(is_number_any_mark(c) for c in cells if c)
            )
        # A row of numbers only, wider than the table: a data row with extra fields (or
        # another decimal mark), to be refused at its line rather than read as metadata.
        return all(is_number_any_mark(c) for c in cells if c)

    def above(i: int) -> int | None:
        i -= 1
        while i >= 0 and not lines[i].strip():
            i -= 1
        return i if i >= 0 else None

    new_start = start
    skips = 0
    i = above(start)
    while i is not None:
        if damaged_row(i):
            new_start = i
        else:
            # A text line with data rows above it is inside the block (reported later).
            j = above(i)
            if j is not None and _bad_first_row(lines[i], lines[j], width, d, pat):
                return i  # a damaged first row right under the header
            if skips >= 3 or j is None or not damaged_row(j):
                break
            skips += 1
            new_start = i
        i = above(i)
    return new_start


def _bad_first_row(line: str, above: str, width: int, d: Dialect, pat: re.Pattern[str]) -> bool:
    """True for a row with a number and text in ``width`` cells right under a line that
    names the columns (``width`` cells, none a number): the table's first row, damaged.
    """
    if width < 2 or too_many_fields(line, d.sep) or too_many_fields(above, d.sep):
        return False
    cells = split_cells(line, d.sep)
    names = split_cells(above, d.sep, quoted=True)
    return (
        len(cells) == width
        and any(pat.fullmatch(c) for c in cells)
        and len(names) == width
        and all(c and not is_number_any_mark(c) for c in names)
    )


def locate_block(
    lines: list[str],
    text: str,
    *,
    sep: str | None = None,
    decimal: str | None = None,
) -> Layout | None:
    r"""Find the numeric block, dialect and header in the scanned ``lines``.

    Parameters
    ----------
    lines : list of str
        The first lines of the file (at most :data:`SCAN_LINES`).
    text : str
        The whole text (used only to settle the decimal mark when the first data lines
        hold integers only).
    sep, decimal : str, optional
        Forced separator (``"\t"``, ``";"``, ``","`` or ``" "``) and decimal mark.

    Returns
    -------
    Layout or None
        None when no block of at least two numeric columns is found.
    """
    candidates = [
        d
        for d in DIALECTS
        if (sep is None or d.sep == sep) and (decimal is None or d.decimal == decimal)
    ]
    found = _fast_block(lines, candidates) or _general_block(lines, candidates)
    if found is None:
        return None
    d, good, width = found
    offset = sum(len(ln) + 1 for ln in lines[:good])
    d = _settle_decimal(d, lines[good : good + 20], text, offset, candidates)
    start = _extend_back(lines, good, width, d)
    header, units, names = _find_header(lines, start, width, d)
    return Layout(d, start, good, width, header, units, names)


def _settle_decimal(
    d: Dialect, sample: list[str], text: str, offset: int, candidates: list[Dialect]
) -> Dialect:
    """Integer-only first lines fit both marks; look for a comma further down."""
    if d.sep == "," or any(("." in ln or "," in ln) for ln in sample):
        return d
    alt = Dialect(d.sep, ",")
    if alt in candidates and text.find(",", offset) >= 0 and text.find(".", offset) < 0:
        return alt
    return d


def _find_header(
    lines: list[str], start: int, width: int, d: Dialect
) -> tuple[int | None, int | None, tuple[str, ...]]:
    pat = number_pattern(d.decimal)

    def previous(i: int) -> int | None:
        i -= 1
        while i >= 0 and not lines[i].strip():
            i -= 1
        return i if i >= 0 else None

    def header_cells(i: int) -> list[str]:
        line = lines[i]
        if line.lstrip(" ").startswith("#"):
            line = line.lstrip(" ")[1:]  # "# Time  Signal": a commented header
        if d.sep == " ":
            cells = [c.strip() for c in re.split(r"\t+|\s{2,}", line.strip())]
            if len(cells) != width:
                cells = line.split()
            return [c.strip('"') for c in cells]
        return split_cells(line, d.sep, quoted=True)

    def is_texty(i: int) -> bool:
        cells = header_cells(i)
        if len(cells) < 2 and width > 1:
            return False
        if d.sep == " " and len(cells) != width:
            # Blank-separated: only a line splitting into exactly one name per column.
            return False
        num, nonempty = _is_num_row(cells, pat)
        if nonempty and all(is_number_any_mark(c) for c in cells if c):
            return False  # numbers with the other decimal mark are not a header
        return nonempty > 0 and 2 * num < nonempty

    h = previous(start)
    if h is None or not is_texty(h):
        return None, None, tuple("" for _ in range(width))
    cells = header_cells(h)
    units = None
    above = previous(h)
    if all(is_unit_cell(c) for c in cells) and above is not None and is_texty(above):
        names_above = header_cells(above)
        # A units row under the names: same cell count, and the names say time/volume.
        if len(names_above) == len(cells) and any(
            x_kind_of(nm)[0] is not None for nm in names_above
        ):
            units = h
            h = above
            merged = []
            for j in range(max(len(names_above), len(cells))):
                name = names_above[j] if j < len(names_above) else ""
                unit = cells[j] if j < len(cells) else ""
                unit = unit.strip("()[]{} ")
                merged.append(f"{name} ({unit})" if unit and name else name or unit)
            cells = merged
    names = [cells[j] if j < len(cells) else "" for j in range(width)]
    return h, units, tuple(names)


_META_SEPARATOR = re.compile(r"[:=\t;,]")


def parse_metadata_line(line: str) -> tuple[str, str] | None:
    """``(key, value)`` of a free-text line above the header, or None for separator-only lines.

    The key ends at the first ``:``, ``=``, tab, ``;`` or ``,``; a line with none of
    these is a key with an empty value. Surrounding quotes and trailing separators are
    removed.

    Examples
    --------
    >>> parse_metadata_line("Flow rate: 1.0 mL/min")
    ('Flow rate', '1.0 mL/min')
    >>> parse_metadata_line('"Sample";"PS 12";;')
    ('Sample', 'PS 12')
    >>> parse_metadata_line("[Raw data]")
    ('[Raw data]', '')
    """
    s = line.strip()
    if s.startswith(("#", "!")):
        s = s[1:].strip()
    # One separator character, found by a single-character search (linear); blanks
    # around it are stripped with the key and value.
    m = _META_SEPARATOR.search(s)
    if m:
        key, value = s[: m.start()], s[m.end() :]
    else:
        key, value = s, ""
    key = key.strip().strip('"').strip()
    if m and key.isdigit() and m.group() == ":":
        key, value = s, ""  # a clock time such as "12:30" is not a key
    value = value.strip().rstrip(";,\t").strip()
    if len(value) >= 2 and value[0] == value[-1] == '"':
        value = value[1:-1]
    value = value.replace('";"', "; ").replace('","', ", ").replace('"\t"', " ")
    if not key:
        return None if not value else ("", value)
    return key, value
