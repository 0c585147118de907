"""The QC settings: acceptance limits and choices of ``gpctools qc`` (read by
:func:`gpctools.qc.read_qc_settings`).

The same settings come from a TOML file (``templates/qc_settings.toml``; sections
``[suitability]``, ``[samples]``, ``[trends]``, ``[products.<code>]``), from a
``[qc]`` table of the method file, or from a key/value sheet (CSV/XLSX) with the columns
``setting`` and ``value`` (and ``product`` for per-product rows). Every scalar setting is
a :class:`~gpctools.sheets.schema.Field` of :data:`QC_SETTINGS`: in TOML it is written
by its key (``max_calibration_residual_pct = 5``), in a sheet by its label with the unit
in brackets (``calibration residual max [%]``) or by its key; the one cell parser reads
the value either way.

=================================  ============================  =========================
key                                sheet label                   meaning (default)
=================================  ============================  =========================
min_r_squared                      calibration R² min [-]        0.999
max_calibration_residual_pct       calibration residual max [%]  5
check_standard_tolerance_pct       check-standard tolerance [%]  5 (Mw and Mn)
check_standard_tolerance_Mw_pct    check-standard tolerance Mw   Mw only
                                   [%]
check_standard_tolerance_Mn_pct    check-standard tolerance Mn   Mn only
                                   [%]
max_flow_marker_drift_pct          flow-marker drift max [%]     0.3
replicate_rule                     replicate rule                pooled | pairs | worst
max_replicate_rsd_Mw_pct           replicate RSD Mw max [%]      3
max_replicate_rsd_Mn_pct           replicate RSD Mn max [%]      5
repeatability_Mw_pct               repeatability Mw [%]          1.5
repeatability_Mn_pct               repeatability Mn [%]          2.5
max_outside_calibration_pct        outside calibration max [%]   1
max_blank_peak_pct                 blank peak max [%]            1 (of the product peak)
require_check_standard             check standard required       yes
judge                              sample judgement              injections and mean
blank_subtraction                  blank subtraction             no
chart_check_standards              chart check standards         yes
false_alarm_simulations            false-alarm simulations       4000
=================================  ============================  =========================

Per-product keys (``[products.<code>]`` or sheet rows with a ``product``):
``limits`` [g/mol] (two molar masses; sheet rows ``limits low [g/mol]`` and ``limits high
[g/mol]``), ``method`` (a method file), ``reference`` (a distribution table). Trend keys
that are lists (``columns``, ``rules``, ``baseline``) are read by
:mod:`gpctools.qc.settings`.
"""

from __future__ import annotations

from gpctools.errors import MethodError
from gpctools.sheets.schema import Field, SheetSchema

__all__ = ["QC_SETTINGS", "QC_PRODUCT", "REPLICATE_RULES", "JUDGEMENTS", "SECTIONS"]

#: Replicate-precision rules: pooled RSD over all groups, the repeatability limit per pair
#: (or per group), or the worst single group.
REPLICATE_RULES = {"pooled": "pooled", "pooled_rsd": "pooled", "pairs": "pairs",
                   "repeatability_limit": "pairs", "r": "pairs", "worst": "worst",
                   "worst_group": "worst"}
#: How samples are judged against the spec.
JUDGEMENTS = {"injections_and_mean": "injections and mean", "each_injection": "injections and mean",
              "injections": "injections and mean", "mean": "mean"}


def _pct(name: str, header: str, meaning: str, example: str = "5") -> Field:
    return Field(name, header, aliases=(name,), unit="%", minimum=0.0, min_open=True,
                 example=example, meaning=meaning)


#: Schema of the scalar QC settings (one "row" of values keyed by setting).
QC_SETTINGS = SheetSchema(
    kind="QC settings",
    row_noun="setting",
    fields=(
        Field("min_r_squared", "calibration R² min [-]", aliases=("min_r_squared", "calibration R2 min"),
              unit="-", minimum=0.0, maximum=1.0, example="0.999",
              meaning="lowest acceptable R² of the calibration fit"),
        _pct("max_calibration_residual_pct", "calibration residual max [%]",
             "largest acceptable |residual| of a standard"),
        _pct("check_standard_tolerance_pct", "check-standard tolerance [%]",
             "allowed |value/assigned - 1| of a check standard, Mw and Mn"),
        _pct("check_standard_tolerance_Mw_pct", "check-standard tolerance Mw [%]",
             "allowed |Mw/assigned - 1| of a check standard"),
        _pct("check_standard_tolerance_Mn_pct", "check-standard tolerance Mn [%]",
             "allowed |Mn/assigned - 1| of a check standard"),
        _pct("max_flow_marker_drift_pct", "flow-marker drift max [%]",
             "largest acceptable |V_obs/V_ref - 1| of the flow marker", "0.3"),
        Field("replicate_rule", "replicate rule", kind="choice", aliases=("replicate_rule",),
              choices=REPLICATE_RULES, meaning="pooled, pairs or worst"),
        _pct("max_replicate_rsd_Mw_pct", "replicate RSD Mw max [%]", "replicate RSD limit of Mw", "3"),
        _pct("max_replicate_rsd_Mn_pct", "replicate RSD Mn max [%]", "replicate RSD limit of Mn"),
        _pct("repeatability_Mw_pct", "repeatability Mw [%]",
             "repeatability SD of Mw of a sound system (r rule, false-fail rate)", "1.5"),
        _pct("repeatability_Mn_pct", "repeatability Mn [%]",
             "repeatability SD of Mn of a sound system", "2.5"),
        _pct("max_outside_calibration_pct", "outside calibration max [%]",
             "largest acceptable mass outside the calibrated range", "1"),
        _pct("max_blank_peak_pct", "blank peak max [%]",
             "largest peak of a blank in a product's window, % of the product peak", "1"),
        Field("require_check_standard", "check standard required", kind="bool",
              aliases=("require_check_standard",), meaning="a sequence needs a check standard"),
        Field("judge", "sample judgement", kind="choice", aliases=("judge", "sample_judgement"),
              choices=JUDGEMENTS, meaning="'injections and mean' or 'mean'"),
        Field("blank_subtraction", "blank subtraction", kind="bool", aliases=("blank_subtraction",),
              meaning="subtract the sequence's blank from every injection"),
        Field("chart_check_standards", "chart check standards", kind="bool",
              aliases=("chart_check_standards",), meaning="chart each check standard"),
        Field("false_alarm_simulations", "false-alarm simulations", aliases=("false_alarm_simulations",),
              unit="-", minimum=0.0, maximum=1e6, example="4000",
              meaning="simulated charts for the false-alarm rate (0: none)"),
    ),
    extras="refuse",
    template="templates/qc_settings.toml",
    column_error=MethodError,
    cell_error=MethodError,
)

#: Schema of one product's processing settings in a key/value sheet.
QC_PRODUCT = SheetSchema(
    kind="QC settings (product rows)",
    row_noun="product setting",
    fields=(
        Field("low", "limits low [g/mol]", aliases=("limit low", "low M", "M low"), unit="g/mol",
              conversions={"kg/mol": (1000.0, 0.0)}, minimum=0.0, min_open=True, example="2000",
              meaning="lowest molar mass integrated"),
        Field("high", "limits high [g/mol]", aliases=("limit high", "high M", "M high"), unit="g/mol",
              conversions={"kg/mol": (1000.0, 0.0)}, minimum=0.0, min_open=True, example="2000000",
              meaning="highest molar mass integrated"),
        Field("method", "method", kind="path", meaning="method file of the product"),
        Field("reference", "reference", kind="path", meaning="reference distribution table"),
    ),
    extras="refuse",
    template="templates/qc_settings.toml",
    column_error=MethodError,
    cell_error=MethodError,
)

#: TOML sections and the scalar keys each may hold.
SECTIONS: dict[str, tuple[str, ...]] = {
    "suitability": ("min_r_squared", "max_calibration_residual_pct", "check_standard_tolerance_pct",
                    "check_standard_tolerance_Mw_pct", "check_standard_tolerance_Mn_pct",
                    "max_flow_marker_drift_pct", "replicate_rule", "max_replicate_rsd_Mw_pct",
                    "max_replicate_rsd_Mn_pct", "repeatability_Mw_pct", "repeatability_Mn_pct",
                    "max_outside_calibration_pct", "max_blank_peak_pct", "require_check_standard"),
    "samples": ("judge", "blank_subtraction"),
    "trends": ("chart_check_standards", "false_alarm_simulations"),
}
