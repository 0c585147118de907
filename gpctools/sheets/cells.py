"""The one cell parser of the input sheets: numbers, text, blanks, booleans, header units.

Every sheet gpctools reads (standards table, batch sheet, run series, spec limits) turns
its cells into values here, so the same cell means the same thing in every sheet.
:func:`gpctools.io.read_sheet` has already turned the file into a table (dialect,
encoding, the decimal mark of ``;``/tab text files); this module decides what each cell
means.

Blank cells
-----------
``None``, NaN, empty or whitespace-only text, and the placeholders ``-``, ``–``, ``—``,
``n/a``, ``na``, ``nan``, ``none``, ``null``, ``#n/a`` (any case) are blank: "no value".
The CSV reader already turns most of these words into NaN, so a workbook and a CSV of the
same sheet give the same rows.

Numbers
-------
Numbers from the reader (int, float, numpy) are taken as they are; NaN is blank, an
infinite value is refused. Text is read as a number when it is one of:

* a plain number: ``150000``, ``-0.5``, ``1.5e5`` (a Unicode minus ``−`` counts as ``-``);
* a number with a decimal comma: ``90000,5``, ``0,25``, ``12,3456``;
* a number with thousands grouping and a decimal mark: ``1.234,5`` and ``1.234.567``
  (point groups, comma decimal), ``1,234.5`` and ``1,234,567`` (comma groups, point
  decimal), ``150 000`` and ``150 000,5`` (space groups, as in SI style); groups must be
  of three digits.

**Ambiguous text.** One separator followed by exactly three digits after one to three
leading digits (``90,000``, ``1.234``) can be read two ways. The rule:

1. the column decides: when the other text cells of the same column show unambiguously
   which mark is the decimal mark (``12,5`` or ``1.234,5`` -> comma; ``12.5`` or
   ``1,234.5`` -> point), that reading is used (:func:`column_decimal`);
2. otherwise a point is a decimal point (``1.234`` = 1.234), as it is for every number
   the reader parsed and for CSV itself;
3. otherwise a comma is refused (``90,000`` has no default): the message says how to
   write the number (``90000`` or ``90.0``).

A unit or any other text in a number cell is refused (``1.1 M``, ``5 %``): units belong
in the header.

Header units
------------
:func:`split_header` takes the unit of a header from square brackets (``Mn [kg/mol]``),
from parentheses holding a known unit (``Mp (g/mol)``), after a comma or `` in ``
(``Mn, kg/mol``, ``time in s``), or after a slash in quantity-calculus style (``Ve/mL``,
``Mp/(g/mol)``; a single capital letter after the slash is a ratio, not a unit).
:func:`canonical_unit` spells units one way (``ml`` -> ``mL``, ``degC`` -> ``°C``,
``g mol-1`` and ``Da`` -> ``g/mol``).

Also here: :func:`finite_or_none`, the one converter of a number to "finite float or
None" for JSON summaries.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

__all__ = [
    "BLANK_WORDS",
    "CellError",
    "Header",
    "is_blank",
    "text",
    "plain",
    "parse_number",
    "number_or_none",
    "column_decimal",
    "parse_bool",
    "choice_key",
    "finite_or_none",
    "split_header",
    "canonical_unit",
    "normalise_name",
]

#: Cell texts that mean "no value" (compared case-insensitively, after stripping).
BLANK_WORDS = frozenset({"", "-", "\u2013", "\u2014", "n/a", "na", "nan", "none", "null", "#n/a"})


class CellError(ValueError):
    """A cell cannot be read as what its column holds.

    Parameters
    ----------
    found : str
        The cell as written.
    problem : str
        What is wrong, in words (``"'lots' is not a number"``).
    advice : str
        What to write instead (may be empty).

    Notes
    -----
    The sheet layer (:mod:`gpctools.sheets.schema`) turns it into the sheet's error class
    with the file, row and column.
    """

    def __init__(self, found: str, problem: str, advice: str = "") -> None:
        self.found = found
        self.problem = problem
        self.advice = advice
        super().__init__(f"{problem}; {advice}" if advice else problem)


# ------------------------------------------------------------------------------- blanks


def is_blank(value: Any) -> bool:
    """True for a cell that holds no value (see the module documentation).

    Parameters
    ----------
    value : Any
        A cell as the reader gives it.

    Returns
    -------
    bool

    Examples
    --------
    >>> [is_blank(v) for v in (None, float("nan"), "  ", "-", "n/a", 0, "0")]
    [True, True, True, True, True, False, False]
    """
    if value is None:
        return True
    if isinstance(value, str):
        return value.strip().casefold() in BLANK_WORDS
    if isinstance(value, float):
        return math.isnan(value)
    if isinstance(value, (list, tuple, dict, set)):
        return False
    try:
        import pandas as pd

        return bool(pd.isna(value))
    except (TypeError, ValueError):
        return False


def text(value: Any) -> str:
    """A cell as label text: stripped; ``""`` when blank; ``200.0`` becomes ``"200"``.

    Parameters
    ----------
    value : Any
        A cell as the reader gives it.

    Returns
    -------
    str

    Examples
    --------
    >>> text(200.0), text(" PA-20 "), text(None), text("-")
    ('200', 'PA-20', '', '')
    """
    if is_blank(value):
        return ""
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    try:
        import numpy as np

        if isinstance(value, np.floating) and float(value).is_integer():
            return str(int(value))
    except ImportError:  # pragma: no cover - numpy is a dependency
        pass
    return str(value).strip()


def plain(value: Any) -> Any:
    """A cell with numpy scalars turned into Python numbers and text stripped.

    Parameters
    ----------
    value : Any

    Returns
    -------
    Any
        ``int``, ``float``, ``str`` or the value unchanged.
    """
    import numpy as np

    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    if isinstance(value, str):
        return value.strip()
    return value


def finite_or_none(value: Any) -> float | None:
    """A number as a finite ``float``, or ``None`` where it is missing, NaN or infinite.

    The one converter for JSON summaries (JSON has no NaN).

    Parameters
    ----------
    value : int, float, numpy number or None

    Returns
    -------
    float or None

    Raises
    ------
    TypeError
        ``value`` is not a number (text, bool, a container): a summary that passes text
        here has a bug worth seeing.

    Examples
    --------
    >>> finite_or_none(2), finite_or_none(float("nan")), finite_or_none(None)
    (2.0, None, None)
    """
    if value is None:
        return None
    if isinstance(value, (bool, str, bytes)):
        raise TypeError(f"finite_or_none needs a number, got {value!r}")
    try:
        f = float(value)
    except (TypeError, ValueError):
        raise TypeError(f"finite_or_none needs a number, got {value!r}") from None
    return f if math.isfinite(f) else None


# ------------------------------------------------------------------------------ numbers

_SIGN = r"[+-]?"
_EXP = r"(?:[eE][+-]?\d+)?"
_INT = re.compile(rf"{_SIGN}\d+{_EXP}")
_POINT = re.compile(rf"{_SIGN}(?:\d+\.\d*|\.\d+){_EXP}")
_COMMA = re.compile(rf"{_SIGN}(?:\d+,\d*|,\d+){_EXP}")
_AMBIGUOUS = re.compile(rf"{_SIGN}[1-9]\d{{0,2}}[.,]\d{{3}}")
_GROUPED = {
    # (group mark, decimal mark): pattern
    (".", ","): re.compile(rf"{_SIGN}\d{{1,3}}(?:\.\d{{3}})+(?:,\d+)?"),
    (",", "."): re.compile(rf"{_SIGN}\d{{1,3}}(?:,\d{{3}})+(?:\.\d+)?"),
    (" ", ","): re.compile(rf"{_SIGN}\d{{1,3}}(?: \d{{3}})+(?:,\d+)?"),
    (" ", "."): re.compile(rf"{_SIGN}\d{{1,3}}(?: \d{{3}})+(?:\.\d+)?"),
}
_SPACES = re.compile(r"[\u00a0\u202f\u2009 ]+")


@dataclass(frozen=True)
class _Reading:
    """How a text cell reads: its value(s) and the decimal mark it shows (if any)."""

    value: float | None  # None when ambiguous
    evidence: str | None  # "," or "." when the cell shows the decimal mark unambiguously
    alternatives: tuple[float, float] | None = None  # (thousands reading, decimal reading)


def _read_text(raw: str) -> _Reading | None:
    """Classify one text cell; None when it is not a number at all."""
    s = _SPACES.sub(" ", raw.strip().replace("\u2212", "-"))
    if _INT.fullmatch(s):
        return _Reading(float(s), None)
    if _AMBIGUOUS.fullmatch(s):
        mark = "," if "," in s else "."
        thousands = float(s.replace(mark, ""))
        decimal = float(s.replace(mark, "."))
        return _Reading(None, None, (thousands, decimal))
    if _POINT.fullmatch(s):
        return _Reading(float(s), ".")
    if _COMMA.fullmatch(s):
        return _Reading(float(s.replace(",", ".")), ",")
    for (group, dec), pattern in _GROUPED.items():
        if pattern.fullmatch(s):
            body = s.replace(group, "")
            value = float(body.replace(dec, ".")) if dec in body else float(body)
            shows = dec if (dec in body or group in ".,") else None
            if group in ".," and dec not in body:
                # 1.234.567 or 1,234,567: the group mark repeats, so the other mark is decimal
                shows = "," if group == "." else "."
            return _Reading(value, shows)
    return None


def column_decimal(values: Iterable[Any]) -> str | None:
    """The decimal mark that the text cells of one column show, if they agree.

    Parameters
    ----------
    values : iterable
        The cells of one column.

    Returns
    -------
    str or None
        ``","`` or ``"."`` when at least one text cell shows that decimal mark
        unambiguously and none shows the other; ``None`` otherwise.

    Examples
    --------
    >>> column_decimal(["12,5", "90,000"]), column_decimal(["1,234.5", "90,000"])
    (',', '.')
    >>> column_decimal([90000.0, "90,000"]) is None
    True
    """
    seen: set[str] = set()
    for v in values:
        if isinstance(v, str):
            reading = _read_text(v)
            if reading is not None and reading.evidence is not None:
                seen.add(reading.evidence)
    return seen.pop() if len(seen) == 1 else None


def parse_number(value: Any, *, decimal: str | None = None) -> float | None:
    """Read a cell as a number (see the module documentation for the rules).

    Parameters
    ----------
    value : Any
        A cell as the reader gives it.
    decimal : {",", ".", None}
        The decimal mark the cell's column shows (:func:`column_decimal`); decides
        ambiguous text such as ``"90,000"``.

    Returns
    -------
    float or None
        ``None`` for a blank cell.

    Raises
    ------
    CellError
        Text that is not a number, an ambiguous number the column cannot decide, a bool,
        an infinite value.

    Examples
    --------
    >>> parse_number("90000,5"), parse_number("1.234,5"), parse_number("1,234.5")
    (90000.5, 1234.5, 1234.5)
    >>> parse_number("90,000", decimal="."), parse_number("90,000", decimal=",")
    (90000.0, 90.0)
    >>> parse_number("1.234"), parse_number("1.234", decimal=",")
    (1.234, 1234.0)
    """
    if is_blank(value):
        return None
    if isinstance(value, bool):
        raise CellError(repr(value), f"{value!r} is not a number",
                        "write a number, or leave the cell empty")
    if isinstance(value, str):
        reading = _read_text(value)
        shown = value.strip()
        if reading is None:
            if shown.casefold().lstrip("+-") in ("inf", "infinity", "\u221e"):
                raise CellError(shown, f"{shown!r} is not a finite number",
                                "write a number, or leave the cell empty")
            raise CellError(shown, f"{shown!r} is not a number",
                            "write a plain number (the unit belongs in the header)")
        if reading.alternatives is not None:
            thousands, dec = reading.alternatives
            mark = "," if "," in shown else "."
            if decimal == ",":
                return dec if mark == "," else thousands
            if decimal == "." or mark == ".":
                return thousands if mark == "," else dec
            raise CellError(
                shown,
                f"{shown!r} is ambiguous: ',' may separate thousands ({thousands:.0f}) or be "
                f"a decimal comma ({_g(dec)})",
                f"write {thousands:.0f} or {_dotted(dec)}",
            )
        assert reading.value is not None
        return reading.value
    try:
        f = float(value)
    except (TypeError, ValueError):
        raise CellError(repr(value), f"{value!r} is not a number",
                        "write a plain number (the unit belongs in the header)") from None
    if math.isnan(f):
        return None
    if not math.isfinite(f):
        raise CellError(repr(value), f"{value!r} is not a finite number",
                        "write a number, or leave the cell empty")
    return f


def _g(x: float) -> str:
    return f"{x:.12g}"


def _dotted(x: float) -> str:
    """A decimal reading written so that it cannot be taken for thousands (``90.0``)."""
    t = _g(x)
    return t if "." in t else t + ".0"


def number_or_none(value: Any, *, decimal: str | None = None) -> float | None:
    """Like :func:`parse_number`, but ``None`` where the cell is not a usable number.

    For reading tables the project wrote itself (results tables), where a bad cell is
    reported by the caller in its own terms.

    Parameters
    ----------
    value : Any
    decimal : {",", ".", None}

    Returns
    -------
    float or None
    """
    try:
        return parse_number(value, decimal=decimal)
    except CellError:
        return None


# ------------------------------------------------------------------------ text choices

_TRUE = frozenset({"true", "yes", "y", "1", "x", "on"})
_FALSE = frozenset({"false", "no", "n", "0", "off"})


def parse_bool(value: Any) -> bool | None:
    """Read a yes/no cell: ``true/yes/y/1/x/on`` or ``false/no/n/0/off``; ``None`` when blank.

    Raises
    ------
    CellError
        Any other text or number.

    Examples
    --------
    >>> parse_bool("Yes"), parse_bool(0), parse_bool("")
    (True, False, None)
    """
    if is_blank(value):
        return None
    if isinstance(value, bool):
        return value
    key = text(value).casefold()
    if key in _TRUE:
        return True
    if key in _FALSE:
        return False
    raise CellError(text(value), f"{text(value)!r} is not yes or no", "write yes or no")


def choice_key(value: Any) -> str:
    """A choice cell in the form choices are compared in: case-folded, ``-`` and spaces as ``_``.

    Examples
    --------
    >>> choice_key(" Check standard"), choice_key("check-standard")
    ('check_standard', 'check_standard')
    """
    return re.sub(r"[\s\-]+", "_", text(value).casefold())


# ------------------------------------------------------------------------------ headers

#: Unit spellings -> the one spelling used in headers and messages.
_UNITS = {
    "g/mol": "g/mol",
    "kg/mol": "kg/mol",
    "da": "g/mol",
    "kda": "kg/mol",
    "dalton": "g/mol",
    "daltons": "g/mol",
    "g mol-1": "g/mol",
    "g mol^-1": "g/mol",
    "g mol⁻¹": "g/mol",
    "g·mol-1": "g/mol",
    "g·mol⁻¹": "g/mol",
    "g/mole": "g/mol",
    "kg mol-1": "kg/mol",
    "kg mol^-1": "kg/mol",
    "kg mol⁻¹": "kg/mol",
    "kg·mol-1": "kg/mol",
    "kg·mol⁻¹": "kg/mol",
    "kg/mole": "kg/mol",
    "mol/l": "mol/L",
    "mmol/l": "mmol/L",
    "m": "mol/L",
    "mm": "mmol/L",
    "ml": "mL",
    "cm3": "mL",
    "cm³": "mL",
    "cm^3": "mL",
    "l": "L",
    "µl": "µL",
    "μl": "µL",
    "ul": "µL",
    "min": "min",
    "min.": "min",
    "mins": "min",
    "minutes": "min",
    "s": "s",
    "sec": "s",
    "sec.": "s",
    "seconds": "s",
    "h": "h",
    "°c": "°C",
    "degc": "°C",
    "deg c": "°C",
    "c": "°C",
    "k": "K",
    "%": "%",
    "% mass": "% mass",
    "-": "-",
    "mol/mol": "mol/mol",
    "ppm": "ppm",
    "dl/g": "dL/g",
    "ml/min": "mL/min",
    "l/mol/s": "L/mol/s",
    "1/s": "1/s",
    "kj/mol": "kJ/mol",
    "g/ml": "g/mL",
}


def canonical_unit(unit: str) -> str | None:
    """The one spelling of a unit (``"ML"`` -> ``"mL"``, ``"degC"`` -> ``"°C"``), or None.

    Parameters
    ----------
    unit : str

    Returns
    -------
    str or None
        ``None`` for a unit this module does not know.
    """
    key = re.sub(r"\s+", " ", unit.strip()).casefold()
    return _UNITS.get(key) or _UNITS.get(key.replace(" ", ""))


@dataclass(frozen=True)
class Header:
    """A header split into a name and a unit.

    Attributes
    ----------
    text : str
        The header as written (stripped).
    name : str
        The header without its unit.
    unit : str or None
        The unit as written (``None`` when the header has none).
    style : str or None
        Where the unit was: ``"brackets"``, ``"parentheses"``, ``"suffix"``, ``"slash"``
        or None.
    """

    text: str
    name: str
    unit: str | None
    style: str | None

    @property
    def key(self) -> str:
        """The name in the form names are compared in (:func:`normalise_name`)."""
        return normalise_name(self.name)


_BRACKET = re.compile(r"^(?P<name>.*\S)\s+\[(?P<unit>[^\[\]]*)\]$|^(?P<name2>.*[^\s/\]])\[(?P<unit2>[^\[\]]*)\]$")
_PAREN = re.compile(r"^(?P<name>.*?\S)\s*\((?P<unit>[^()]*)\)$")
_SUFFIX = re.compile(r"^(?P<name>.*?\S)(?:\s*,\s*|\s+in\s+)(?P<unit>[^,\s][^,]*?)$", re.IGNORECASE)


def split_header(header: Any) -> Header:
    """Split a header into its name and unit.

    A trailing ``[unit]`` is a unit when a name stands before it (``[M]`` alone is a
    name, and so is the ``[M]`` of ``ratio [A]/[M]``); a trailing ``(unit)``, ``, unit``
    or `` in unit`` only when the unit is known to :func:`canonical_unit`
    (``Mp (dw/dlogM)`` keeps its parentheses).

    Parameters
    ----------
    header : Any
        A column header.

    Returns
    -------
    Header

    Examples
    --------
    >>> split_header("Mn [kg/mol]").unit, split_header("Mp (g/mol)").unit
    ('kg/mol', 'g/mol')
    >>> split_header("ratio [A]/[M]").unit is None, split_header("[M]").name
    (True, '[M]')
    >>> split_header("u(residual [A]) [mol/L]").name
    'u(residual [A])'
    """
    raw = re.sub(r"\s+", " ", text(header))
    m = _BRACKET.match(raw)
    if m:
        name = m.group("name") or m.group("name2")
        unit = m.group("unit") if m.group("name") else m.group("unit2")
        if name.strip() and (m.group("name") or canonical_unit(unit) is not None):
            return Header(raw, name.strip(), unit.strip(), "brackets")
    m = _PAREN.match(raw)
    if m and canonical_unit(m.group("unit")) is not None:
        name = m.group("name").strip()
        style = "parentheses"
        if name.endswith("/") and name[:-1].strip():  # "Mp/(g mol-1)"
            name, style = name[:-1].strip(), "slash"
        return Header(raw, name, m.group("unit").strip(), style)
    m = _SUFFIX.match(raw)
    if m and canonical_unit(m.group("unit")) is not None:
        return Header(raw, m.group("name").strip(), m.group("unit").strip(), "suffix")
    slash = _slash_unit(raw)
    if slash is not None:
        return Header(raw, slash[0], slash[1], "slash")
    return Header(raw, raw, None, None)


def _slash_unit(raw: str) -> tuple[str, str] | None:
    """``(name, unit)`` of a quantity-calculus header (``Ve/mL``, ``Mp/(g/mol)``), or None.

    The first ``/`` after which the rest is a known unit splits the header. A single
    capital letter after the slash (``[A]/M``, ``C/S``) is not taken for a unit: those
    headers are ratios more often than units.
    """
    for k in (i for i, ch in enumerate(raw) if ch == "/"):
        name, unit = raw[:k].strip(), raw[k + 1:].strip()
        if unit.startswith("(") and unit.endswith(")"):
            unit = unit[1:-1].strip()
        if not name or name.endswith(("]", "/")) or canonical_unit(unit) is None:
            continue
        if len(unit) == 1 and unit not in ("s", "K"):
            continue
        return name, unit
    return None


def normalise_name(name: str) -> str:
    """A header name in the form names are compared in.

    Case-folded; ``_`` as a space; runs of spaces as one; the degree sign dropped.

    Examples
    --------
    >>> normalise_name(" Sample_ID "), normalise_name("Flow  marker")
    ('sample id', 'flow marker')
    """
    s = name.replace("_", " ").replace("°", "")
    return re.sub(r"\s+", " ", s).strip().casefold()
