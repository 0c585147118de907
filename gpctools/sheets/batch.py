"""The batch sheet: one row per injection (read by :func:`gpctools.batch.read_batch_sheet`).

=========================  ======================================================
column                     meaning
=========================  ======================================================
``sample_id``              required (also ``sample id``, ``sample``, ``id``);
                           repeated ids are replicate injections (a warning names
                           them)
``file``                   required (also ``path``, ``file path``, ``filename``,
                           ``data file``); slice export, relative to the sheet
``role``                   optional (also ``type``): ``sample`` (default),
                           ``replicate`` (a repeat injection of a sample: same
                           ``sample_id``), ``check_standard`` (also ``check
                           standard``, ``check``), ``blank``,
                           ``calibration_standard`` (also ``calibration``: narrow
                           standards named in a ``standards`` column or a
                           ``standards file``; used by ``gpctools qc``)
``flow marker [mL]``       optional (also ``flow_marker``, ``marker``): observed
                           marker position of that injection
``method file``            optional (also ``method path``): the method (TOML) of
                           that injection, relative to the sheet; blank = the
                           ``--method`` given on the command line
``limit start [mL]``,      optional pair: integration limits of that injection in
``limit end [mL]``         mL (start < end)
``limit low M [g/mol]``,   optional pair: integration limits in molar mass
``limit high M [g/mol]``   (``[kg/mol]`` accepted), converted through the
                           calibration; not in the same row as limits in mL
``baseline 1 start [mL]``, optional, all four or none: the two baseline windows
``baseline 1 end [mL]``,   of that injection
``baseline 2 start [mL]``,
``baseline 2 end [mL]``
``injected mass [mg]``     optional (also ``mass injected``; ``[µg]``, ``[g]``
                           accepted): polymer mass injected, for ``mass
                           recovery [%]`` of a method with ``[detectors]``
``concentration [mg/mL]``  optional pair instead of the injected mass (also
``injection volume [µL]``  ``sample concentration``, ``[g/L]``; ``injection
                           volume`` also ``[mL]``): mass = c·V_inj; with both
                           ways in one row they must agree within 1 %
anything else              free metadata (``product``, ``batch``, ``sequence``,
                           ``assigned Mw [g/mol]``, ...), copied to the results
=========================  ======================================================

Overrides take one number per cell, so a decimal comma (``14,5``), grouping
(``1 000 000``) and a unit in the header (``[kg/mol]``) are read by the one cell parser
and no cell needs a separator of its own (``1000-1e6`` would be ambiguous with a minus
sign, an exponent or a decimal comma). A blank cell means "as the method says". Cell
faults do not stop the batch: the reader collects them and the injection becomes an
error row. :data:`ROLE_CHOICES` is also how QC reads the ``role`` column of a results
table.
"""

from __future__ import annotations

from gpctools import columns as C
from gpctools.errors import InputFormatError
from gpctools.sheets.cells import choice_key
from gpctools.sheets.schema import Field, SheetSchema

__all__ = ["ROLES", "ROLE_SAMPLE", "ROLE_CHECK", "ROLE_BLANK", "ROLE_CALIBRATION", "ROLE_REPLICATE",
           "ROLE_CHOICES", "BATCH", "role_of", "OVERRIDE_PAIRS", "INJECTED_MASS_PAIR"]

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
        Field("method_file", C.METHOD_FILE, kind="path", aliases=("method path", "method toml"),
              hint="give the method file (TOML) of the injection, relative to the batch sheet",
              meaning="method file of the injection (blank: the --method of the command line)"),
        Field("limit_start", "limit start [mL]", aliases=("limits start", "integration limit start"),
              unit="mL", minimum=0.0, example="14.5",
              meaning="integration limit, start (early, high-M side) of the injection"),
        Field("limit_end", "limit end [mL]", aliases=("limits end", "integration limit end"),
              unit="mL", minimum=0.0, example="19.5",
              meaning="integration limit, end (late, low-M side) of the injection"),
        Field("limit_low_M", "limit low M [g/mol]", aliases=("limits low M", "M limit low"),
              unit="g/mol", conversions={"kg/mol": (1000.0, 0.0)}, minimum=0.0, min_open=True,
              example="1000", meaning="integration limit in molar mass, low-M end"),
        Field("limit_high_M", "limit high M [g/mol]", aliases=("limits high M", "M limit high"),
              unit="g/mol", conversions={"kg/mol": (1000.0, 0.0)}, minimum=0.0, min_open=True,
              example="1000000", meaning="integration limit in molar mass, high-M end"),
        Field("baseline_1_start", "baseline 1 start [mL]", aliases=("baseline window 1 start",),
              unit="mL", minimum=0.0, example="10.0", meaning="first baseline window, start"),
        Field("baseline_1_end", "baseline 1 end [mL]", aliases=("baseline window 1 end",),
              unit="mL", minimum=0.0, example="11.0", meaning="first baseline window, end"),
        Field("baseline_2_start", "baseline 2 start [mL]", aliases=("baseline window 2 start",),
              unit="mL", minimum=0.0, example="21.0", meaning="second baseline window, start"),
        Field("baseline_2_end", "baseline 2 end [mL]", aliases=("baseline window 2 end",),
              unit="mL", minimum=0.0, example="22.0", meaning="second baseline window, end"),
        Field("injected_mass", "injected mass [mg]", aliases=("mass injected", "injected mass"),
              unit="mg", conversions={"µg": (1e-3, 0.0), "g": (1e3, 0.0)}, minimum=0.0, min_open=True,
              example="0.2", meaning="polymer mass injected (for the mass recovery of [detectors])"),
        Field("sample_concentration", "concentration [mg/mL]",
              aliases=("sample concentration", "concentration"), unit="mg/mL",
              conversions={"g/L": (1.0, 0.0)}, minimum=0.0, min_open=True, example="2.0",
              meaning="polymer concentration of the injected solution (with the injection volume)"),
        Field("injection_volume", "injection volume [µL]", aliases=("injection volume", "inj volume"),
              unit="µL", conversions={"mL": (1e3, 0.0)}, minimum=0.0, min_open=True, example="100",
              meaning="volume injected (with the concentration)"),
    ),
    template="batch.csv",
    column_error=InputFormatError,
    cell_error=InputFormatError,
)


#: Override columns that go together: (what they give, the fields, in order).
OVERRIDE_PAIRS = (
    ("integration limits in mL", ("limit_start", "limit_end")),
    ("integration limits in molar mass", ("limit_low_M", "limit_high_M")),
    ("baseline windows", ("baseline_1_start", "baseline_1_end", "baseline_2_start",
                          "baseline_2_end")),
)

#: Columns that give the injected mass together (concentration [mg/mL] x volume [µL] / 1000 = mg).
INJECTED_MASS_PAIR = ("sample_concentration", "injection_volume")
