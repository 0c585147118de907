"""The vocabulary of result columns: one name, one unit, one meaning for every column.

Every table gpctools writes (batch results, QC decisions, and in time the transfer and
kinetics tables) names its columns with the constants below, so a column is spelled the
same wherever it appears and a reader of one table can find it in another. The name is
the header as it appears in tables, with the unit in square brackets (``Mn [g/mol]``);
text columns have no unit.

Rules
-----
* A header never depends on a setting: a setting's value gets its own column (the Mn
  shift at the low-M limit is ``Mn shift at low-M limit [%]``, and the size of the move
  is in ``low-M limit shift [mL]``).
* The unit is part of the name; a change of unit is a new column.
* Old headers that earlier builds wrote are listed in :data:`LEGACY_NAMES` (as regular
  expressions); readers of results tables find a column under either name with
  :func:`find`.
* One family is named by a value on purpose: the mass fractions below or above a molar
  mass, ``mass below 1000 g/mol [%]``. The cut-off is part of what the quantity *is*
  (the mass below 500 g/mol and below 1000 g/mol are different quantities, specified
  separately by QC), not a processing setting, so it belongs in the name; the same
  cut-off always gives the same header (:func:`format_molar_mass`), and :func:`describe`
  knows every member of the family.

Use the constants as plain strings (``row[columns.MN]``); :func:`describe` gives the
unit and meaning of a column, for documentation and report legends.

Examples
--------
>>> from gpctools import columns
>>> columns.MN
'Mn [g/mol]'
>>> columns.describe(columns.MN).unit
'g/mol'
>>> columns.find(["sample_id", "Mn shift, low-M limit -0.2 mL [%]"], columns.MN_SHIFT_LOW_M)
'Mn shift, low-M limit -0.2 mL [%]'
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass

__all__ = [
    "ResultColumn",
    "COLUMNS",
    "LEGACY_NAMES",
    "describe",
    "find",
    # identification and sheet metadata
    "SAMPLE_ID",
    "FILE",
    "ROLE",
    "PRODUCT",
    "BATCH",
    "SEQUENCE",
    "ASSIGNED_MN",
    "ASSIGNED_MW",
    # batch results
    "STATUS",
    "MN",
    "MW",
    "MZ",
    "MZ1",
    "MP",
    "MP_DWDLOGM",
    "DISPERSITY",
    "OUTSIDE_CALIBRATION",
    "BASELINE_1_START",
    "BASELINE_1_END",
    "BASELINE_2_START",
    "BASELINE_2_END",
    "BASELINE_COLUMNS",
    "BASELINE_CHOICE",
    "LIMITS_CHOICE",
    "INTEGRATION_START",
    "INTEGRATION_END",
    "M_AT_INTEGRATION_START",
    "M_AT_INTEGRATION_END",
    "METHOD_FILE",
    "METHOD_SHA256",
    "OVERRIDES",
    "FLOW_MARKER",
    "FLOW_MARKER_STATUS",
    "FLOW_FACTOR",
    "MN_SHIFT_LOW_M",
    "MW_SHIFT_LOW_M",
    "LIMIT_SHIFT",
    "SCALE",
    "WARNINGS",
    "ERROR",
    "AVERAGE_COLUMNS",
    # uncertainty, peaks, fractions
    "UNCERTAINTY_PARTS",
    "uncertainty_column",
    "UNCERTAINTY_COLUMNS",
    "PEAKS",
    "PEAK_SPLIT_COLUMNS",
    "peak_split_column",
    "MAX_PEAK_COLUMNS",
    "PEAK_QUANTITIES",
    "peak_column",
    "PEAK_COLUMNS",
    "DETECTOR_COLUMNS",
    "LS_SCALE_LABEL",
    "mass_fraction_column",
    "is_mass_fraction_column",
    "format_molar_mass",
    # QC
    "INJECTIONS",
    "USABLE_INJECTIONS",
    "DECISION",
    "REASONS",
    "NOTES",
    "CHECK_STANDARD_TOLERANCE",
    "DATE",
    "VERDICT",
    "VERDICT_REASONS",
    "SPEC_VERDICT",
    "BLANK_PEAK",
    "BLANK_DETAILS",
    "WORST_STANDARD_RESIDUAL",
    "STANDARDS_LOCATED",
    "SEQUENCE_CALIBRATION",
    "SHEET_ROW",
]


@dataclass(frozen=True)
class ResultColumn:
    """One column of a result table.

    Attributes
    ----------
    name : str
        The header as written in tables, unit in square brackets (``"Mn [g/mol]"``).
    unit : str
        The unit (``"g/mol"``, ``"-"`` for dimensionless numbers, ``""`` for text).
    meaning : str
        One sentence: what the value is.
    """

    name: str
    unit: str
    meaning: str


#: Every column by its name.
COLUMNS: dict[str, ResultColumn] = {}

#: Headers written by earlier versions (regular expressions) -> the column that replaced them.
LEGACY_NAMES: dict[str, str] = {}
_LEGACY: list[tuple[re.Pattern[str], str]] = []


def _column(name: str, unit: str, meaning: str) -> str:
    if name in COLUMNS:  # pragma: no cover - guards the table below
        raise ValueError(f"column {name!r} defined twice")
    COLUMNS[name] = ResultColumn(name, unit, meaning)
    return name


#: Headers named by a cut-off molar mass (see :func:`mass_fraction_column`).
_FRACTION_PATTERN = re.compile(r"mass (below|above) (\d+(?:\.\d+)?) g/mol \[%\]")


def format_molar_mass(M: float) -> str:
    """A molar mass [g/mol] as it appears in a column name: plain digits, no grouping.

    Whole numbers print without a decimal point (``1000``, ``1000000``), others with
    up to 10 significant digits (``2500.5``), so one cut-off always gives one header.

    >>> format_molar_mass(1e6), format_molar_mass(500.0), format_molar_mass(2500.5)
    ('1000000', '500', '2500.5')
    """
    M = float(M)
    if not (M > 0 and M < 1e15):
        raise ValueError(f"a cut-off molar mass must be positive and below 1e15 g/mol, got {M!r}")
    if M == round(M):
        return str(int(round(M)))
    text = f"{M:.10f}".rstrip("0").rstrip(".")
    return text


def is_mass_fraction_column(name: object) -> bool:
    """True for a header of the mass-fraction family (``mass below 1000 g/mol [%]``)."""
    return isinstance(name, str) and _FRACTION_PATTERN.fullmatch(name) is not None


def mass_fraction_column(side: str, M: float) -> str:
    """Header of the mass fraction below or above a cut-off: ``mass below 1000 g/mol [%]``.

    Parameters
    ----------
    side : {"below", "above"}
    M : float
        The cut-off [g/mol].
    """
    if side not in ("below", "above"):
        raise ValueError(f"side must be 'below' or 'above', got {side!r}")
    return f"mass {side} {format_molar_mass(M)} g/mol [%]"


def describe(name: str) -> ResultColumn:
    """Unit and meaning of a result column.

    Parameters
    ----------
    name : str
        A column name (or a header matching one of :data:`LEGACY_NAMES`).

    Returns
    -------
    ResultColumn

    Raises
    ------
    KeyError
        The name is not in the vocabulary.
    """
    if name in COLUMNS:
        return COLUMNS[name]
    m = _FRACTION_PATTERN.fullmatch(name)
    if m:
        return ResultColumn(name, "%", f"mass fraction of the distribution with M {m.group(1)} "
                                        f"{m.group(2)} g/mol (within the integration limits)")
    for pattern, new in _LEGACY:
        if pattern.fullmatch(name):
            return COLUMNS[new]
    raise KeyError(name)


def find(available: Iterable[object], name: str) -> str:
    """The header under which a table holds the column ``name``.

    Parameters
    ----------
    available : iterable
        The table's headers (e.g. ``frame.columns``).
    name : str
        The column wanted, by its current name.

    Returns
    -------
    str
        ``name`` when the table has it, else a legacy header of the same column that the
        table has, else ``name`` (so that a lookup then finds nothing, as for any missing
        column).
    """
    headers = [str(c) for c in available]
    if name in headers:
        return name
    for pattern, new in _LEGACY:
        if new == name:
            for h in headers:
                if pattern.fullmatch(h):
                    return h
    return name


# -- identification and sheet metadata ---------------------------------------------------
SAMPLE_ID = _column("sample_id", "", "sample identifier; replicate injections share it")
FILE = _column("file", "", "slice export of the injection, as written in the batch sheet")
ROLE = _column("role", "", "sample, check_standard or blank")
PRODUCT = _column("product", "", "product (grade) code, the key into the spec sheet")
BATCH = _column("batch", "", "production lot the sample comes from")
SEQUENCE = _column("sequence", "", "instrument sequence (run) the injection belongs to")
ASSIGNED_MN = _column("assigned Mn [g/mol]", "g/mol", "assigned Mn of a check standard")
ASSIGNED_MW = _column("assigned Mw [g/mol]", "g/mol", "assigned Mw of a check standard")

# -- batch results ----------------------------------------------------------------------
STATUS = _column("status", "", "ok; error when the injection could not be processed; not processed "
                 "for blanks and calibration standards, which gpctools qc judges")
MN = _column("Mn [g/mol]", "g/mol", "number-average molar mass")
MW = _column("Mw [g/mol]", "g/mol", "mass-average molar mass")
MZ = _column("Mz [g/mol]", "g/mol", "z-average molar mass")
MZ1 = _column("Mz+1 [g/mol]", "g/mol", "z+1-average molar mass")
MP = _column("Mp [g/mol]", "g/mol", "molar mass at the peak of the detector trace")
MP_DWDLOGM = _column("Mp (dw/dlogM) [g/mol]", "g/mol",
                     "molar mass at the peak of the dw/dlogM distribution")
DISPERSITY = _column("dispersity [-]", "-", "Mw/Mn")
OUTSIDE_CALIBRATION = _column("outside calibration [% mass]", "% mass",
                              "mass eluting outside the calibrated volume range")
BASELINE_1_START = _column("baseline window 1 start [mL]", "mL",
                           "start of the first (early) baseline window used, flow-corrected volume")
BASELINE_1_END = _column("baseline window 1 end [mL]", "mL", "end of the first baseline window used")
BASELINE_2_START = _column("baseline window 2 start [mL]", "mL",
                           "start of the second (late) baseline window used")
BASELINE_2_END = _column("baseline window 2 end [mL]", "mL", "end of the second baseline window used")
BASELINE_CHOICE = _column("baseline windows chosen", "",
                          "automatic (found by gpctools) or set (method file or batch-sheet override)")
LIMITS_CHOICE = _column("integration limits chosen", "",
                        "automatic (found by gpctools) or set (method file or batch-sheet override); "
                        "the limits are 'integration start [mL]' and 'integration end [mL]'")
#: The baseline windows as numbers, in table order.
BASELINE_COLUMNS = (BASELINE_1_START, BASELINE_1_END, BASELINE_2_START, BASELINE_2_END)
INTEGRATION_START = _column("integration start [mL]", "mL",
                            "early (high-M) integration limit used, on the flow-corrected "
                            "volume axis")
INTEGRATION_END = _column("integration end [mL]", "mL",
                          "late (low-M) integration limit used, on the flow-corrected volume axis")
M_AT_INTEGRATION_START = _column("M at integration start [g/mol]", "g/mol",
                                 "molar mass the calibration gives at the integration start")
M_AT_INTEGRATION_END = _column("M at integration end [g/mol]", "g/mol",
                               "molar mass the calibration gives at the integration end")
METHOD_FILE = _column("method file", "",
                      "method file used for the injection (batch-sheet cell, or the --method "
                      "given for rows without one)")
METHOD_SHA256 = _column("method SHA-256", "", "SHA-256 of the method file as read")
OVERRIDES = _column("overrides", "",
                    "method settings changed for this injection by batch-sheet columns "
                    "(empty when none)")
FLOW_MARKER = _column("flow marker [mL]", "mL",
                      "observed flow-marker position of the injection (empty when none was found or given)")
FLOW_MARKER_STATUS = _column("flow marker status", "",
                             "found (fitted in flow_marker.search), given (batch sheet), not found "
                             "(no correction applied) or not used (no marker in the method)")
FLOW_FACTOR = _column("flow correction factor [-]", "-",
                      "volume correction V_ref/V_obs from the flow marker (1 without one)")
MN_SHIFT_LOW_M = _column("Mn shift at low-M limit [%]", "%",
                         "change of Mn when the low-M integration limit moves earlier by "
                         "the 'low-M limit shift [mL]' of the same row")
MW_SHIFT_LOW_M = _column("Mw shift at low-M limit [%]", "%",
                         "change of Mw when the low-M integration limit moves earlier by "
                         "the 'low-M limit shift [mL]' of the same row")
LIMIT_SHIFT = _column("low-M limit shift [mL]", "mL",
                      "how far the low-M limit was moved for the two shift columns "
                      "(method key thresholds.limit_shift)")
SCALE = _column("molar-mass scale", "", "absolute, or relative to the standard polymer")
WARNINGS = _column("warnings", "", "warnings raised while processing, joined by '; '")
ERROR = _column("error", "", "why the injection failed (empty when status is ok)")

#: The molar-mass averages and dispersity, in table order.
AVERAGE_COLUMNS = (MN, MW, MZ, MZ1, MP, MP_DWDLOGM, DISPERSITY)

# -- uncertainty ------------------------------------------------------------------------
#: Parts of a standard uncertainty, as they appear in the headers ("" = combined).
UNCERTAINTY_PARTS = ("calibration", "noise", "limits", "")
_PART_MEANING = {
    "calibration": "from the calibration-coefficient covariance (common to every injection on "
                   "that calibration)",
    "noise": "from white baseline noise and the baseline line's own error",
    "limits": "half the change when the low-M limit moves by 'low-M limit shift [mL]'",
    "": "combined in quadrature from the calibration, noise and limits parts",
}


def uncertainty_column(average: str, part: str = "") -> str:
    """Header of a relative standard uncertainty: ``u(Mn) [%]``, ``u(Mn) calibration [%]``."""
    if part not in UNCERTAINTY_PARTS:
        raise ValueError(f"part must be one of {UNCERTAINTY_PARTS}, got {part!r}")
    return f"u({average}) {part} [%]".replace("  ", " ")


#: Relative standard uncertainty columns of Mn, Mw and Mz, combined first.
UNCERTAINTY_COLUMNS = tuple(
    _column(uncertainty_column(avg, part), "%",
            f"relative standard uncertainty of {avg} [%], {_PART_MEANING[part]}")
    for avg in ("Mn", "Mw", "Mz") for part in ("", "calibration", "noise", "limits")
)

# -- peaks ------------------------------------------------------------------------------
PEAKS = _column("peaks [-]", "-", "number of peaks in the trace by the valley criterion of [peaks]")
#: Peaks reported in columns (a constant, not a setting, so that headers never change);
#: further parts are in the injection's summary.
MAX_PEAK_COLUMNS = 3
#: Per-peak quantities: name in the header -> (unit, meaning).
PEAK_QUANTITIES = {
    "Mn": ("g/mol", "number-average molar mass of the part"),
    "Mw": ("g/mol", "mass-average molar mass of the part"),
    "Mp": ("g/mol", "molar mass at the part's maximum of the detector trace"),
    "area": ("%", "share of the part in the mass of the distribution"),
}


def peak_column(number: int, quantity: str) -> str:
    """Header of a per-peak value: ``peak 1 Mn [g/mol]``, ``peak 2 area [%]`` (1 = highest M)."""
    unit, _ = PEAK_QUANTITIES[quantity]
    return f"peak {int(number)} {quantity} [{unit}]"


#: Per-peak columns for peaks 1 ... MAX_PEAK_COLUMNS, numbered from high to low M.
PEAK_COLUMNS = tuple(
    _column(peak_column(n, q), unit, f"peak {n} (counted from high M): {meaning}")
    for n in range(1, MAX_PEAK_COLUMNS + 1) for q, (unit, meaning) in PEAK_QUANTITIES.items()
)


def peak_split_column(number: int) -> str:
    """``peak split 1 [g/mol]``: the molar mass where peak ``number`` (counted from high M)
    ends and the next one starts (numbers 1 to ``MAX_PEAK_COLUMNS - 1``).
    """
    if not 1 <= number < MAX_PEAK_COLUMNS:
        raise ValueError(f"peak split columns are numbered 1 to {MAX_PEAK_COLUMNS - 1}, got {number}")
    return f"peak split {number} [g/mol]"


#: The split points as numbers (empty when the trace is not split), in table order.
PEAK_SPLIT_COLUMNS = tuple(
    _column(peak_split_column(n), "g/mol", f"molar mass at which the trace was split between peak {n} and "
                                          f"peak {n + 1} (empty when not split there)")
    for n in range(1, MAX_PEAK_COLUMNS)
)

# -- more detectors (issue 16; docs/detectors.md) -------------------------------------------
#: The molar-mass scale of the light-scattering columns (transfer and diagnosis read it).
LS_SCALE_LABEL = "absolute, light scattering"
MN_LS = _column("Mn LS [g/mol]", "g/mol",
                "absolute number-average molar mass by light scattering: the concentration trace "
                "through the log M(V) fit over the slices with good signal (shaped like the "
                "calibration curve by default), corrected for band broadening (docs/detectors.md)")
MW_LS = _column("Mw LS [g/mol]", "g/mol",
                "absolute mass-average molar mass by light scattering from the fitted log M(V), "
                "corrected for band broadening")
MZ_LS = _column("Mz LS [g/mol]", "g/mol", "absolute z-average molar mass by light scattering")
DISPERSITY_LS = _column("dispersity LS [-]", "-", "Mw LS / Mn LS")
U_MN_LS = _column("u(Mn LS) [g/mol]", "g/mol",
                  "standard uncertainty of Mn LS from the noise of the slice molar masses: the covariance "
                  "of the log M(V) fit propagated to Mn (delta method; without dn/dc, constants and offsets)")
U_MW_LS = _column("u(Mw LS) [g/mol]", "g/mol",
                  "standard uncertainty of Mw LS from the same fit covariance (noise part only)")
MW_LS_AREAS = _column("Mw LS from areas [g/mol]", "g/mol",
                      "Mw from the light-scattering channel areas over the eluted mass, extrapolated "
                      "to zero angle: free of offsets, broadening and calibration")
U_MW_LS_AREAS = _column("u(Mw LS from areas) [%]", "%",
                        "relative standard uncertainty of the angular extrapolation of Mw from areas "
                        "(without the uncertainty of dn/dc and the detector constants)")
MN_LS_OBSERVED = _column("Mn LS before broadening correction [g/mol]", "g/mol",
                         "Mn by light scattering before the band-broadening correction")
MW_LS_OBSERVED = _column("Mw LS before broadening correction [g/mol]", "g/mol",
                         "Mw by light scattering before the band-broadening correction")
LS_FIT_START = _column("LS fit start [mL]", "mL", "first slice of the log M(V) fit (good signal)")
LS_FIT_END = _column("LS fit end [mL]", "mL", "last slice of the log M(V) fit (good signal)")
RG_Z = _column("Rg z [nm]", "nm", "z-average radius of gyration over the slices where Rg is measurable")
RG_W = _column("Rg w [nm]", "nm", "mass-average radius of gyration over the same slices")
CONFORMATION_SLOPE = _column("conformation slope [-]", "-",
                             "slope of log Rg against log M (about 0.58 for a coil in a good solvent)")
MASS_ELUTED = _column("mass eluted [mg]", "mg",
                      "mass seen by the concentration detector inside the limits (its constant and dn/dc)")
INJECTED_MASS = _column("injected mass [mg]", "mg",
                        "polymer mass injected, from the batch sheet ('injected mass [mg]', or "
                        "'concentration [mg/mL]' x 'injection volume [uL]')")
MASS_RECOVERY = _column("mass recovery [%]", "%",
                        "100 x mass eluted / injected mass (docs/detectors.md, section \"Light scattering\", step 7); "
                        "below 95 % or above 105 % is flagged")
INTRINSIC_VISCOSITY = _column("[eta] w [dL/g]", "dL/g",
                              "weight-average intrinsic viscosity, sum of eta_sp dV over the eluted mass "
                              "(offset- and broadening-free)")
MV = _column("Mv [g/mol]", "g/mol",
             "viscosity-average molar mass ([eta]w/K)^(1/a) with the Mark-Houwink pair of 'Mark-Houwink K "
             "[dL/g]' and 'Mark-Houwink a [-]'")
MH_K = _column("Mark-Houwink K [dL/g]", "dL/g",
               "K of log[eta] = log K + a log M fitted over the good slices (light-scattering or "
               "universal-calibration M), or the method's [mark_houwink] K_sample")
MH_A = _column("Mark-Houwink a [-]", "-", "the exponent a of the same fit")
MH_A_SE = _column("u(Mark-Houwink a) [-]", "-", "standard error of the fitted a (absolute)")
MN_UNIVERSAL = _column("Mn universal [g/mol]", "g/mol",
                       "Mn by universal calibration with the measured [eta] (M = J(V)/[eta] per slice, "
                       "fitted log M(V), corrected for band broadening)")
MW_UNIVERSAL = _column("Mw universal [g/mol]", "g/mol",
                       "Mw by universal calibration with the measured [eta] (fitted log M(V))")
G_PRIME = _column("g' [-]", "-",
                  "branching ratio [eta]w over the linear reference's mass-average K M^a at the same "
                  "molar masses (1 for a linear polymer)")
COMPOSITION_A = _column("mass fraction A [%]", "%",
                        "overall mass fraction of copolymer component A (the first of "
                        "detectors.copolymer.names) from the UV and RI areas")
MN_BROADENING = _column("Mn broadening-corrected [g/mol]", "g/mol",
                        "conventional Mn divided by the band-broadening factor of the concentration "
                        "detector's spreading at the calibration slope of the peak")
MW_BROADENING = _column("Mw broadening-corrected [g/mol]", "g/mol",
                        "conventional Mw corrected the same way")
DISPERSITY_BROADENING = _column("dispersity broadening-corrected [-]", "-",
                                "Mw/Mn after the band-broadening correction")
DETECTOR_SCALE = _column("detector scale", "",
                         "molar-mass scale of the detector columns: 'absolute, light scattering', "
                         "'absolute, universal calibration with measured [eta]' or empty")

#: Detector columns in table order (present when the method has [detectors]).
DETECTOR_COLUMNS = (MN_LS, MW_LS, MZ_LS, DISPERSITY_LS, U_MN_LS, U_MW_LS, MW_LS_AREAS, U_MW_LS_AREAS, MN_LS_OBSERVED,
                    MW_LS_OBSERVED, LS_FIT_START, LS_FIT_END, RG_Z, RG_W, CONFORMATION_SLOPE,
                    MASS_ELUTED, INJECTED_MASS, MASS_RECOVERY, INTRINSIC_VISCOSITY, MV, MH_K, MH_A, MH_A_SE, MN_UNIVERSAL,
                    MW_UNIVERSAL, G_PRIME, COMPOSITION_A, MN_BROADENING, MW_BROADENING,
                    DISPERSITY_BROADENING, DETECTOR_SCALE)

# Earlier builds wrote the setting into the shift headers: "Mn shift, low-M limit -0.2 mL [%]".
LEGACY_NAMES[r"Mn shift, low-M limit -\S+ mL \[%\]"] = MN_SHIFT_LOW_M
LEGACY_NAMES[r"Mw shift, low-M limit -\S+ mL \[%\]"] = MW_SHIFT_LOW_M
_LEGACY.extend((re.compile(old), new) for old, new in LEGACY_NAMES.items())

# -- QC -------------------------------------------------------------------------------
INJECTIONS = _column("injections [-]", "-", "number of injections of the sample")
USABLE_INJECTIONS = _column("usable injections [-]", "-", "injections with status ok")
DECISION = _column("decision", "", "pass, fail, not reportable, no result or no spec")
REASONS = _column("reasons", "", "why the decision was taken, joined by '; '")
NOTES = _column("notes", "", "things to know that do not change the decision")
CHECK_STANDARD_TOLERANCE = _column("check-standard tolerance [%]", "%",
                                   "allowed |average/assigned - 1| of a check standard")
DATE = _column("date", "", "date (and time) of the injection or analysis, ISO 8601")
VERDICT = _column("verdict", "",
                  "judgement of one injection: pass, fail, not reportable, no result or no spec")
VERDICT_REASONS = _column("verdict reasons", "", "every criterion behind the verdict, joined by '; '")
SPEC_VERDICT = _column("verdict against spec", "",
                       "what the decision would be against the spec limits alone (shown also when "
                       "system suitability failed)")
BLANK_PEAK = _column("blank peak [% of product peak]", "% of product peak",
                     "largest peak of a blank inside a product's integration window, relative to "
                     "that product's peak height in the same sequence")
BLANK_DETAILS = _column("blank check", "", "per product: window and largest blank peak, in words")
WORST_STANDARD_RESIDUAL = _column("worst standard residual [%]", "%",
                                  "largest |residual| 100·(M_fit/Mp - 1) of the standards located "
                                  "in a calibration-standard injection, signed")
STANDARDS_LOCATED = _column("standards located", "",
                            "the standards of a calibration-standard injection and their fitted "
                            "peak volumes")
SEQUENCE_CALIBRATION = _column("calibration", "",
                               "which calibration processed the injection (the method's, or the "
                               "sequence's own standards)")
SHEET_ROW = _column("sheet row [-]", "-", "row of the batch sheet the injection came from")
