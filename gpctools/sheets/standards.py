"""The standards table: narrow standards of a calibration, one row per standard.

==================  ===========================================================
column              meaning
==================  ===========================================================
``name``            label of the standard (also ``standard``, ``standard name``,
                    ``label``, ``sample``); optional
``Mp [g/mol]``      peak molar mass (also ``Mp``, ``M``, ``M_p``, ``M peak``,
                    ``peak M``, ``peak molar mass``, ``molar mass``, ``peak
                    molecular weight``); ``[kg/mol]``, ``[Da]``, ``[kDa]`` accepted
``volume [mL]``     peak elution volume (also ``V``, ``Ve``, ``Vp``, ``Vr``, ``vol``,
                    ``elution volume``, ``retention volume``, ``peak volume``);
                    ``[µL]`` accepted; or
``time [min]``      peak retention time (also ``retention time``, ``RT``,
                    ``t``, ``tR``, ``elution time``, ``peak time``); ``[s]``
                    accepted, converted with the method's flow rate
==================  ===========================================================

The unit may stand in brackets (``Mp [kg/mol]``), parentheses (``Mp (kDa)``), after a
comma or ``in`` (``volume, mL``, ``time in min``) or after a slash (``Ve/mL``,
``Mp/(g/mol)``); a header without a unit is in the unit of the first column above.
``Mw`` is never taken for Mp (certificates list both). A missing column is refused with
the columns found and every name accepted.

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
        Field("name", "name", kind="text", aliases=("standard", "standard name", "label", "sample"),
              meaning="label of the standard"),
        Field("Mp", "Mp [g/mol]",
              aliases=("M", "M_p", "M peak", "Mpeak", "peak M", "peak molar mass", "molar mass",
                       "peak molecular weight", "molecular weight", "peak MW", "MW peak", "Mp value"),
              unit="g/mol", conversions={"kg/mol": (1000.0, 0.0)}, minimum=0.0, min_open=True,
              required=True, needed=True, example="96000", meaning="peak molar mass"),
        Field("volume", "volume [mL]",
              aliases=("V", "Ve", "Vp", "Vr", "V peak", "vol", "elution volume", "retention volume",
                       "peak volume", "peak elution volume", "elution vol"),
              unit="mL", conversions={"µL": (0.001, 0.0)}, minimum=0.0, min_open=True,
              example="15.0", meaning="peak elution volume"),
        Field("time", "time [min]",
              aliases=("retention time", "RT", "t", "tR", "t_R", "elution time", "peak time",
                       "peak retention time"),
              unit="min", conversions={"s": (1.0 / 60.0, 0.0)}, minimum=0.0, min_open=True,
              example="15.0", meaning="peak retention time"),
    ),
    one_of=(("volume", "time"),),
    template="templates/standards.csv",
    column_error=MethodError,
    cell_error=MethodError,
    row_hint=_ROW_HINT,
)
