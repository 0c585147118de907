"""The batch sheet: one row per injection (read by :func:`gpctools.batch.read_batch_sheet`).

=====================  ==========================================================
column                 meaning
=====================  ==========================================================
``sample_id``          required (also ``sample id``, ``sample``, ``id``); repeated
                       ids are replicate injections
``file``               required (also ``path``, ``file path``, ``filename``,
                       ``data file``); slice export, relative to the sheet
``role``               optional (also ``type``): ``sample`` (default),
                       ``replicate`` (a repeat injection of a sample: same
                       ``sample_id``), ``check_standard`` (also ``check
                       standard``, ``check``), ``blank``,
                       ``calibration_standard`` (also ``calibration``: narrow
                       standards named in a ``standards`` column or a
                       ``standards file``; used by ``gpctools qc``)
``flow marker [mL]``   optional (also ``flow_marker``, ``marker``): observed
                       marker position of that injection
anything else          free metadata (``product``, ``batch``, ``sequence``,
                       ``assigned Mw [g/mol]``, ...), copied to the results
=====================  ==========================================================

Cell faults do not stop the batch: the reader collects them and the injection becomes an
error row. :data:`ROLE_CHOICES` is also how QC reads the ``role`` column of a results
table.
"""

from __future__ import annotations

from gpctools import columns as C
from gpctools.errors import InputFormatError
from gpctools.sheets.cells import choice_key
from gpctools.sheets.schema import Field, SheetSchema

__all__ = ["ROLES", "ROLE_SAMPLE", "ROLE_CHECK", "ROLE_BLANK", "ROLE_CALIBRATION", "ROLE_REPLICATE",
           "ROLE_CHOICES", "BATCH", "role_of"]

ROLE_SAMPLE = "sample"
ROLE_CHECK = "check_standard"
ROLE_BLANK = "blank"
ROLE_CALIBRATION = "calibration_standard"
ROLE_REPLICATE = "replicate"
#: The roles of an injection.
ROLES = (ROLE_SAMPLE, ROLE_CHECK, ROLE_BLANK, ROLE_CALIBRATION, ROLE_REPLICATE)
#: Accepted spellings (as :func:`~gpctools.sheets.cells.choice_key` gives them) -> role.
ROLE_CHOICES = {
    "sample": ROLE_SAMPLE,
    "check_standard": ROLE_CHECK,
    "checkstandard": ROLE_CHECK,
    "check": ROLE_CHECK,
    "blank": ROLE_BLANK,
    "calibration_standard": ROLE_CALIBRATION, "calibration": ROLE_CALIBRATION,
    "cal_standard": ROLE_CALIBRATION, "calibrationstandard": ROLE_CALIBRATION,
    "replicate": ROLE_REPLICATE,
}


def role_of(value: object) -> str:
    """The role a cell names: ``sample`` for a blank cell, an accepted spelling's role, or
    the cell in compared form (:func:`~gpctools.sheets.cells.choice_key`) when it is none.

    Examples
    --------
    >>> role_of("Check standard"), role_of(None), role_of("Reference")
    ('check_standard', 'sample', 'reference')
    """
    key = choice_key(value)
    if not key:
        return ROLE_SAMPLE
    return ROLE_CHOICES.get(key, key)


#: Schema of the batch sheet.
BATCH = SheetSchema(
    kind="batch sheet",
    row_noun="injection",
    fields=(
        Field("sample_id", C.SAMPLE_ID, kind="id", aliases=("sample id", "sample", "id"),
              required=True, needed=True, hint="give every injection an id",
              meaning="sample identifier"),
        Field("file", C.FILE, kind="path", aliases=("path", "file path", "filename", "data file"),
              required=True, needed=True,
              hint="give the path of the slice export (relative to the batch sheet)",
              meaning="slice export of the injection"),
        Field("role", C.ROLE, kind="choice", aliases=("type",), choices=ROLE_CHOICES,
              default=ROLE_SAMPLE,
              meaning="sample, replicate, check_standard, blank or calibration_standard"),
        Field("flow_marker", C.FLOW_MARKER, aliases=("flow marker", "marker"), unit="mL",
              minimum=0.0, min_open=True, example="23.6",
              meaning="observed flow-marker position of the injection"),
    ),
    template="templates/batch.csv",
    column_error=InputFormatError,
    cell_error=InputFormatError,
)
