"""The spec-limits sheet: one row per product (grade) with its limits (read by
:func:`gpctools.qc.read_specs`).

=================================  ==========================================================
column                             meaning
=================================  ==========================================================
``product``                        product (grade) code as in the batch sheet; unique
``description``                    free text
``<quantity> <min|max|target>      a limit on the results column ``<quantity> [<unit>]``;
[<unit>]``                         quantities :data:`SPEC_QUANTITIES`, unit ``g/mol``
                                   (``-`` for dispersity), always in square brackets
``check-standard tolerance [%]``   allowed deviation of a check standard from its assigned
                                   value (Mw and Mn); ``check-standard tolerance Mw [%]``
                                   and ``... Mn [%]`` set one of them
other columns without a unit       kept as text
=================================  ==========================================================

Quantities (:func:`quantity_column`): the averages :data:`SPEC_QUANTITIES`, any numeric
results column of :mod:`gpctools.columns` (``outside calibration [% mass]``), the mass
fractions ``mass below <M> g/mol [%]`` / ``mass above <M> g/mol [%]`` and per-peak results
(a quantity naming a ``peak``), each as ``<quantity> [<unit>]`` in the results table.
Molar-mass limits may be written in ``[kg/mol]``.

An empty cell means "no limit". A limit header without its unit in brackets, with an
unknown quantity, or any other header with a unit in brackets is refused: a limit that
silently applied to nothing would pass every sample.

The long form (:data:`SPEC_LIMITS_LONG`) has one row per product and quantity::

    product | quantity   | min    | max    | target | unit   | description
    LC-110  | Mw [g/mol] | 90000  | 112000 | 100000 |        |
    LC-110  | dispersity | 1.4    | 1.9    |        |        |
    CHK     | check-standard tolerance |  | 5 |     | %      |

The unit comes from the quantity's brackets, else the ``unit`` column, else the
quantity's own unit (``g/mol`` for averages, ``-`` for dispersity).

Molar-mass limits must be positive and dispersity limits at least 1; the positivity of
molar-mass limits is checked by :func:`gpctools.qc.specs.specs_from_frame` (its message
names the limit as "not a molar mass"), the dispersity bound here.
"""

from __future__ import annotations

import re

from gpctools import columns as C
from gpctools.errors import InputFormatError
from gpctools.sheets.cells import Header, canonical_unit
from gpctools.sheets.schema import Field, FieldFamily, HeaderError, SheetSchema

__all__ = ["SPEC_LIMITS", "SPEC_LIMITS_LONG", "SPEC_QUANTITIES", "LIMIT_KINDS", "quantity_unit",
           "quantity_column", "TOLERANCE_QUANTITIES"]

#: Quantities a limit can be put on: name -> results-table column (unit in the name).
SPEC_QUANTITIES: dict[str, str] = {
    "Mn": C.MN,
    "Mw": C.MW,
    "Mz": C.MZ,
    "Mz+1": C.MZ1,
    "Mp": C.MP,
    "Mp (dw/dlogM)": C.MP_DWDLOGM,
    "dispersity": C.DISPERSITY,
}
#: Kinds of limit a header can give.
LIMIT_KINDS = ("min", "max", "target")
_KNOWN = {k.casefold(): k for k in SPEC_QUANTITIES}


def quantity_unit(quantity: str) -> str:
    """The unit limits on ``quantity`` are written in: ``-`` for dispersity, else ``g/mol``."""
    return "-" if quantity == "dispersity" else "g/mol"


#: Quantities of the long form that set check-standard tolerances [%] (the ``max`` cell).
TOLERANCE_QUANTITIES = {"check-standard tolerance": "tolerance",
                        "check-standard tolerance mw": "tolerance_Mw",
                        "check-standard tolerance mn": "tolerance_Mn"}
_GENERIC = re.compile(r"(mass\s+(below|above)\s+.+|.*\bpeak\b.*|u\(.+\))", re.IGNORECASE)


def quantity_column(quantity: str, unit: str | None) -> tuple[str, str, str] | None:
    """Resolve a spec quantity: ``(quantity, results column, unit)`` or None when unknown.

    Parameters
    ----------
    quantity : str
        As written (``"Mw"``, ``"mass below 1000 g/mol"``, ``"peak 2 Mw"``).
    unit : str or None
        The unit written with it (canonical spelling), None when none was given.

    Examples
    --------
    >>> quantity_column("mw", None)
    ('Mw', 'Mw [g/mol]', 'g/mol')
    >>> quantity_column("mass below 1000 g/mol", "%")
    ('mass below 1000 g/mol', 'mass below 1000 g/mol [%]', '%')
    """
    q = " ".join(quantity.split())
    known = _KNOWN.get(q.casefold())
    if known is not None:
        return known, SPEC_QUANTITIES[known], quantity_unit(known)
    if unit is None:
        return None
    column = f"{q} [{unit}]"
    if column in C.COLUMNS and C.COLUMNS[column].unit:
        return q, column, unit
    if _GENERIC.fullmatch(q):
        return q, column, unit
    return None


_LIMIT_PATTERN = r"(?P<q>.+?)\s+(?P<kind>min|max|target)(?:\s*\(.*\))?"
_KNOWN_TEXT = (f"{', '.join(SPEC_QUANTITIES)}, a numeric results column, 'mass below <M> g/mol' "
               "[%], 'mass above <M> g/mol' [%] or a per-peak result")


def _limit(m: re.Match[str], h: Header) -> tuple[str, Field] | None:
    kind = m.group("kind").casefold()
    again = re.fullmatch(_LIMIT_PATTERN, " ".join(h.name.replace("_", " ").split()), re.IGNORECASE)
    q_text = (again.group("q") if again else m.group("q")).strip()  # as written, case kept
    header_unit = (canonical_unit(h.unit) or h.unit.strip()) if h.unit else None
    resolved = quantity_column(q_text, header_unit)
    if resolved is None:
        if h.style == "brackets":
            raise HeaderError(f"unknown quantity {q_text!r}; limits can be set on {_KNOWN_TEXT}")
        return None  # free text such as "notes min"
    q, column, unit = resolved
    if h.style != "brackets":  # without its unit the limit would silently be dropped
        raise HeaderError(f"a limit header needs its unit in square brackets; write "
                          f"'{q} {kind} [{unit}]'")
    dispersity = q == "dispersity"
    return f"{q}|{kind}", Field(
        f"{q} {kind}", f"{q} {kind} [{unit}]", unit=unit,
        conversions={"kg/mol": (1000.0, 0.0)} if unit == "g/mol" else {},
        minimum=1.0 if dispersity else None, example="1.8" if dispersity else "150000",
        hint="no sample has a dispersity below 1; check the value" if dispersity else "",
        meaning=f"{kind} of {column}")


def _refuse_unit_header(h: Header) -> str | None:
    if h.style != "brackets":
        return None
    return ("a header with a unit must read '<quantity> <min|max|target> [<unit>]' "
            f"(quantities: {', '.join(SPEC_QUANTITIES)}) or '{C.CHECK_STANDARD_TOLERANCE}'; "
            "rename the column or remove its unit")


#: Schema of the spec-limits sheet.
SPEC_LIMITS = SheetSchema(
    kind="spec sheet",
    row_noun="product",
    fields=(
        Field("product", C.PRODUCT, kind="id", required=True, needed=True, unique=True,
              hint="an empty product code matches no sample: give every row the product "
                   "(grade) code used in the batch sheet, or delete the row",
              meaning="product (grade) code"),
        Field("description", "description", kind="text", meaning="free text"),
        Field("tolerance", C.CHECK_STANDARD_TOLERANCE, unit="%", minimum=0.0, min_open=True,
              example="5", meaning="allowed deviation of a check standard"),
        Field("tolerance_Mw", "check-standard tolerance Mw [%]", unit="%", minimum=0.0, min_open=True,
              example="5", meaning="allowed deviation of a check standard's Mw"),
        Field("tolerance_Mn", "check-standard tolerance Mn [%]", unit="%", minimum=0.0, min_open=True,
              example="5", meaning="allowed deviation of a check standard's Mn"),
    ),
    families=(
        FieldFamily("limit", _LIMIT_PATTERN, _limit,
                    "'<quantity> <min|max|target> [<unit>]'"),
    ),
    template="spec_limits.csv",
    column_error=InputFormatError,
    cell_error=InputFormatError,
    check_extra=_refuse_unit_header,
)

#: Schema of the long-form spec sheet: one row per product and quantity.
SPEC_LIMITS_LONG = SheetSchema(
    kind="spec sheet (long form)",
    row_noun="limit",
    fields=(
        Field("product", C.PRODUCT, kind="id", required=True, needed=True,
              hint="give every row the product (grade) code used in the batch sheet, or delete "
                   "the row", meaning="product (grade) code"),
        Field("quantity", "quantity", kind="text", required=True, needed=True,
              hint="name the quantity limited, e.g. 'Mw [g/mol]' or 'dispersity'",
              meaning="the quantity limited, unit in brackets"),
        Field("min", "min", example="90000", meaning="lower limit, in the quantity's unit"),
        Field("max", "max", example="112000", meaning="upper limit, in the quantity's unit"),
        Field("target", "target", example="100000", meaning="target value, in the quantity's unit"),
        Field("unit", "unit", kind="text", meaning="unit of min, max and target"),
        Field("description", "description", kind="text", meaning="free text"),
    ),
    template="templates/spec_limits_long.csv",
    column_error=InputFormatError,
    cell_error=InputFormatError,
)
