"""The standards table: narrow standards of a calibration, one row per standard.

==================  ===========================================================
column              meaning
==================  ===========================================================
``name``            label of the standard (also ``standard``); optional
``Mp [g/mol]``      peak molar mass (also ``Mp``, ``M``; ``[kg/mol]`` accepted)
``volume [mL]``     peak elution volume (also ``V``, ``elution volume``), or
``time [min]``      peak retention time (also ``retention time``; ``[s]``
                    accepted), converted with the method's flow rate
==================  ===========================================================

Read by :func:`gpctools.method.load_method` when ``calibration.standards`` names a file.
Other columns are ignored. Faults raise :class:`~gpctools.errors.MethodError` (the table
is part of the method).
"""

from __future__ import annotations

from gpctools.errors import MethodError
from gpctools.sheets.schema import Field, SheetSchema

__all__ = ["STANDARDS"]

_ROW_HINT = ("give every standard its Mp [g/mol] and its peak volume [mL] or time [min], or "
             "delete the row")

#: Schema of the standards table.
STANDARDS = SheetSchema(
    kind="standards table",
    row_noun="standard",
    fields=(
        Field("name", "name", kind="text", aliases=("standard",), meaning="label of the standard"),
        Field("Mp", "Mp [g/mol]", aliases=("M",), unit="g/mol",
              conversions={"kg/mol": (1000.0, 0.0)}, minimum=0.0, min_open=True,
              required=True, needed=True, example="96000", meaning="peak molar mass"),
        Field("volume", "volume [mL]", aliases=("V", "elution volume"), unit="mL",
              minimum=0.0, min_open=True, example="15.0", meaning="peak elution volume"),
        Field("time", "time [min]", aliases=("retention time",), unit="min",
              conversions={"s": (1.0 / 60.0, 0.0)}, minimum=0.0, min_open=True,
              example="15.0", meaning="peak retention time"),
    ),
    one_of=(("volume", "time"),),
    template="templates/standards.csv",
    column_error=MethodError,
    cell_error=MethodError,
    row_hint=_ROW_HINT,
)
