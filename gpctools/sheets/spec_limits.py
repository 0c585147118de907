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
                                   value
other columns without a unit       kept as text
=================================  ==========================================================

An empty cell means "no limit". A limit header without its unit in brackets, with an
unknown quantity, or any other header with a unit in brackets is refused: a limit that
silently applied to nothing would pass every sample.

Molar-mass limits must be positive and dispersity limits at least 1; the positivity of
molar-mass limits is checked by :func:`gpctools.qc.specs.specs_from_frame` (its message
names the limit as "not a molar mass"), the dispersity bound here.
"""

from __future__ import annotations

import re

from gpctools import columns as C
from gpctools.errors import InputFormatError
from gpctools.sheets.cells import Header
from gpctools.sheets.schema import Field, FieldFamily, HeaderError, SheetSchema

__all__ = ["SPEC_LIMITS", "SPEC_QUANTITIES", "LIMIT_KINDS", "quantity_unit"]

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


def _limit(m: re.Match[str], h: Header) -> tuple[str, Field] | None:
    q_text, kind = m.group("q").strip(), m.group("kind").casefold()
    q = _KNOWN.get(q_text.casefold())
    if q is None:
        if h.style == "brackets":
            raise HeaderError(f"unknown quantity {q_text!r}; limits can be set on "
                              f"{', '.join(SPEC_QUANTITIES)}")
        return None  # free text such as "notes min"
    unit = quantity_unit(q)
    if h.style != "brackets":  # without its unit the limit would silently be dropped
        raise HeaderError(f"a limit header needs its unit in square brackets; write "
                          f"'{q} {kind} [{unit}]'")
    dispersity = q == "dispersity"
    return f"{q}|{kind}", Field(
        f"{q} {kind}", f"{q} {kind} [{unit}]", unit=unit,
        minimum=1.0 if dispersity else None, example="1.8" if dispersity else "150000",
        hint="no sample has a dispersity below 1; check the value" if dispersity else "",
        meaning=f"{kind} of {SPEC_QUANTITIES[q]}")


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
    ),
    families=(
        FieldFamily("limit", r"(?P<q>.+?)\s+(?P<kind>min|max|target)(?:\s*\(.*\))?", _limit,
                    "'<quantity> <min|max|target> [<unit>]'"),
    ),
    template="spec_limits.csv",
    column_error=InputFormatError,
    cell_error=InputFormatError,
    check_extra=_refuse_unit_header,
)
