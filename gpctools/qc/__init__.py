"""Quality control of batch results: spec limits, system suitability, decisions, trends.

Public API
----------
read_specs(path, *, sheet=None) -> SpecSheet
    The spec-limits sheet (one row per product; ``<quantity> min|max|target [unit]``
    columns and ``check-standard tolerance [%]``).
system_suitability(table, calibration, *, specs=None, limits=None,
                   reference_flow_marker=None) -> tuple[SuitabilityResult, ...]
    Per sequence: calibration R² and residuals, check standards, flow-marker drift,
    replicate RSD, mass outside calibration.
decide(table, specs, suitability=()) -> Decisions
    pass / fail / not reportable / no result / no spec, per sample and per batch.
individuals_chart(values, labels=None, *, quantity="", group="", sets_limits=None,
                  rules=WESTERN_ELECTRIC_RULES) -> ControlChart
    Shewhart individuals chart (sigma from the mean moving range) with the Western
    Electric run rules WE1-WE4.
evaluate_qc(table, specs, *, calibration=None, reference_flow_marker=None, history=(),
            settings=None) -> QCResult
    All of the above for one results table (no files written; see
    :func:`gpctools.report.run_qc` for the reports).
role_of(value) -> str;  label_text(value) -> str
    The normalised role of an injection (``ROLE_SAMPLE``, ``ROLE_CHECK``,
    ``ROLE_BLANK``) and a label cell as text, as the QC steps read them.
"""

from __future__ import annotations

from gpctools.qc._table import (
    ROLE_BLANK,
    ROLE_CALIBRATION,
    ROLE_CHECK,
    ROLE_REPLICATE,
    ROLE_SAMPLE,
    SAMPLE_ROLES,
    role_of,
    sample_keys,
)
from gpctools.qc.decisions import (
    FAIL,
    NO_RESULT,
    NO_SPEC,
    NOT_REPORTABLE,
    PASS,
    BatchDecision,
    Decisions,
    InjectionVerdict,
    SampleDecision,
    decide,
)
from gpctools.qc.evaluate import QCResult, QCWarning, TrendPoint, evaluate_qc, trend_points
from gpctools.qc.replicates import ReplicateGroup, ReplicatePrecision, replicate_precision
from gpctools.qc.settings import ProductSettings, QCSettings, TrendBaseline, read_qc_settings
from gpctools.qc.specs import (
    CHECK_STANDARD_TOLERANCE_COLUMN,
    SPEC_QUANTITIES,
    Limit,
    ProductSpec,
    SpecSheet,
    label_text,
    read_specs,
    specs_from_frame,
)
from gpctools.qc.suitability import (
    CheckInjection,
    SuitabilityCheck,
    SuitabilityLimits,
    SuitabilityResult,
    sequence_suitability,
    system_suitability,
)
from gpctools.qc.trends import (
    D2_MOVING_RANGE,
    DEFAULT_RULE_SET,
    NELSON_RULES,
    RULE_SET_NAME,
    RULE_SETS,
    WESTERN_ELECTRIC_RULES,
    ControlChart,
    FalseAlarmRate,
    RunRule,
    TrendWarning,
    Violation,
    false_alarm_rate,
    individuals_chart,
    rule_set,
    rule_violations,
)

__all__ = [
    "InjectionVerdict",
    "TrendPoint",
    "ReplicateGroup",
    "ReplicatePrecision",
    "replicate_precision",
    "ProductSettings",
    "TrendBaseline",
    "read_qc_settings",
    "CheckInjection",
    "DEFAULT_RULE_SET",
    "NELSON_RULES",
    "RULE_SETS",
    "FalseAlarmRate",
    "false_alarm_rate",
    "rule_set",
    "ROLE_CALIBRATION",
    "ROLE_REPLICATE",
    "SAMPLE_ROLES",
    "sample_keys",
    "PASS",
    "FAIL",
    "NOT_REPORTABLE",
    "NO_RESULT",
    "NO_SPEC",
    "BatchDecision",
    "Decisions",
    "SampleDecision",
    "decide",
    "QCResult",
    "QCSettings",
    "QCWarning",
    "evaluate_qc",
    "trend_points",
    "CHECK_STANDARD_TOLERANCE_COLUMN",
    "SPEC_QUANTITIES",
    "Limit",
    "ProductSpec",
    "SpecSheet",
    "read_specs",
    "specs_from_frame",
    "label_text",
    "role_of",
    "ROLE_SAMPLE",
    "ROLE_CHECK",
    "ROLE_BLANK",
    "SuitabilityCheck",
    "SuitabilityLimits",
    "SuitabilityResult",
    "sequence_suitability",
    "system_suitability",
    "D2_MOVING_RANGE",
    "RULE_SET_NAME",
    "WESTERN_ELECTRIC_RULES",
    "ControlChart",
    "RunRule",
    "TrendWarning",
    "Violation",
    "individuals_chart",
    "rule_violations",
]
