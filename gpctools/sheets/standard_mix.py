"""A standards mix: the narrow standards one calibration-standard injection holds.

Named in the batch sheet's ``standards file`` column for an injection of role
``calibration_standard`` (read by :func:`gpctools.qc.standards_run.read_standard_mix`).

==================  ===========================================================
column              meaning
==================  ===========================================================
``name``            label of the standard (also ``standard``); optional
``Mp [g/mol]``      peak molar mass (also ``Mp``, ``M``; ``[kg/mol]`` accepted)
``injection``       optional: which injection of a shared file the row belongs
                    to (the batch sheet's ``sample_id``); rows without one
                    belong to every injection naming the file
==================  ===========================================================

Peak volumes are not given: they are measured in the injection. Other columns (a volume
from an earlier calibration, a lot number) are kept as notes.
"""

from __future__ import annotations

from gpctools.errors import InputFormatError
from gpctools.sheets.schema import Field, SheetSchema

__all__ = ["STANDARD_MIX"]

#: Schema of a standards-mix table.
STANDARD_MIX = SheetSchema(
    kind="standards mix",
    row_noun="standard",
    fields=(
        Field("name", "name", kind="text", aliases=("standard",), meaning="label of the standard"),
        Field("Mp", "Mp [g/mol]", aliases=("M",), unit="g/mol", conversions={"kg/mol": (1000.0, 0.0)},
              minimum=0.0, min_open=True, required=True, needed=True, example="96000",
              hint="give every standard its peak molar mass, or delete the row",
              meaning="peak molar mass"),
        Field("injection", "injection", kind="id", aliases=("sample_id", "sample id"),
              meaning="the injection (sample_id) the row belongs to"),
    ),
    template="templates/standards_mix.csv",
    column_error=InputFormatError,
    cell_error=InputFormatError,
)
