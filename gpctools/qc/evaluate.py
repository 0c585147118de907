"""One QC evaluation: spec limits, system suitability, decisions and trends together.

:func:`evaluate_qc` is pure computation on tables (nothing is read or written); the
report layer (:func:`gpctools.report.run_qc`) reads inputs, calls it and writes the
workbook, the HTML report, the plots and the audit trail.

Trend points
------------
One point per product and batch: the mean over the batch's samples of that product (each
sample the mean of its usable injections). Check standards get their own charts, one
point per sequence. Points come from the history tables first (in the order given, rows
in table order), then from the current table; a batch or sequence label that appears
again replaces the earlier point (with a warning). Samples of a sequence that failed
system suitability are not charted. With ``trend_limits_from="auto"`` the centre line and
sigma come from the history points when there are at least two, else from all points.
"""

from __future__ import annotations

import warnings as _warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.errors import MethodError
from gpctools.qc import _table as T
from gpctools.qc._table import QCWarning
from gpctools.qc.decisions import Decisions, decide
from gpctools.qc.specs import SpecSheet
from gpctools.qc.suitability import SuitabilityLimits, SuitabilityResult, system_suitability
from gpctools.qc.trends import (
    RULE_SET_NAME,
    WESTERN_ELECTRIC_RULES,
    ControlChart,
    RunRule,
    individuals_chart,
)

__all__ = ["QCSettings", "QCResult", "QCWarning", "evaluate_qc", "trend_points"]

_LIMITS_FROM = ("auto", "all", "history")


@dataclass(frozen=True)
class QCSettings:
    """Settings of a QC evaluation (recorded in the audit trail).

    Attributes
    ----------
    suitability : SuitabilityLimits
    trend_columns : tuple of str
        Results columns charted across batches (default Mw and dispersity).
    trend_limits_from : str
        ``"auto"`` (history points when there are two or more, else all), ``"all"`` or
        ``"history"``.
    rules : tuple of RunRule
        Run rules (default the Western Electric rules).
    chart_check_standards : bool
        Also chart each check standard across sequences.
    """

    suitability: SuitabilityLimits = field(default_factory=SuitabilityLimits)
    trend_columns: tuple[str, ...] = (C.MW, C.DISPERSITY)
    trend_limits_from: str = "auto"
    rules: tuple[RunRule, ...] = WESTERN_ELECTRIC_RULES
    chart_check_standards: bool = True

    def __post_init__(self) -> None:
        if self.trend_limits_from not in _LIMITS_FROM:
            raise MethodError(
                f"trend_limits_from must be one of {', '.join(_LIMITS_FROM)}, got {self.trend_limits_from!r}",
                key="trend_limits_from",
            )
        object.__setattr__(self, "trend_columns", tuple(self.trend_columns))
        object.__setattr__(self, "rules", tuple(self.rules))

    @classmethod
    def from_method(cls, method: Any = None, *, require_check_standard: bool = True) -> QCSettings:
        """Default settings, with a method's thresholds as the matching suitability limits.

        Parameters
        ----------
        method : gpctools.method.Method, optional
            Its ``residual_limit_pct`` (``thresholds.standard_residual_pct``) and
            ``outside_warn_pct`` (``thresholds.outside_calibration_pct``) become the
            calibration-residual and outside-calibration limits.
        require_check_standard : bool
            See :class:`SuitabilityLimits`.
        """
        kw: dict[str, Any] = {"require_check_standard": bool(require_check_standard)}
        if method is not None:
            kw["max_calibration_residual_pct"] = float(method.residual_limit_pct)
            kw["max_outside_calibration_pct"] = float(method.outside_warn_pct)
        return cls(suitability=SuitabilityLimits(**kw))

    def summary(self) -> dict[str, Any]:
        """JSON-safe copy."""
        return {
            "suitability": self.suitability.summary(),
            "trend columns": list(self.trend_columns),
            "trend limits from": self.trend_limits_from,
            "run rules": [r.code for r in self.rules],
            "rule set": RULE_SET_NAME if self.rules == WESTERN_ELECTRIC_RULES else "custom",
            "chart check standards": self.chart_check_standards,
        }


@dataclass(frozen=True, eq=False)
class QCResult:
    """Everything a QC evaluation found.

    Attributes
    ----------
    table : pandas.DataFrame
        The current results table (a copy).
    specs : SpecSheet
    suitability : tuple of SuitabilityResult
        One per sequence.
    decisions : Decisions
    trends : tuple of ControlChart
    calibration : dict or None
        Calibration summary used by the suitability checks.
    settings : QCSettings
    warnings : tuple of str
    """

    table: pd.DataFrame
    specs: SpecSheet
    suitability: tuple[SuitabilityResult, ...]
    decisions: Decisions
    trends: tuple[ControlChart, ...]
    calibration: dict[str, Any] | None
    settings: QCSettings
    warnings: tuple[str, ...] = field(default=())

    @property
    def reportable(self) -> bool:
        """True when every sequence passed system suitability."""
        return all(s.passed for s in self.suitability)

    @property
    def all_pass(self) -> bool:
        """True when every batch passed."""
        return self.decisions.all_pass

    @property
    def trend_signals(self) -> int:
        """Number of points breaking a run rule, over all charts."""
        return sum(len({v.index for v in c.violations}) for c in self.trends)

    def suitability_frame(self) -> pd.DataFrame:
        """All suitability checks of all sequences."""
        frames = [s.to_frame() for s in self.suitability]
        if not frames:
            return pd.DataFrame(columns=["sequence", "check", "value", "comparison", "limit", "result",
                                         "reason", "source of limit"])
        return pd.concat(frames, ignore_index=True)

    def trends_frame(self) -> pd.DataFrame:
        """All chart points in one long table (chart, point, value, limits, z, rules)."""
        rows = []
        for c in self.trends:
            z = c.z
            for i, label in enumerate(c.labels):
                rows.append({
                    "group": c.group,
                    "quantity": c.quantity,
                    "point": label,
                    "value": float(c.values[i]),
                    "centre line": c.centre,
                    "lower control limit": c.lcl,
                    "upper control limit": c.ucl,
                    "sigma": c.sigma,
                    "z [sigma]": float(z[i]),
                    "sets limits": "yes" if c.sets_limits[i] else "no",
                    "rules broken": ", ".join(c.rules_at(i)),
                })
        cols = ["group", "quantity", "point", "value", "centre line", "lower control limit",
                "upper control limit", "sigma", "z [sigma]", "sets limits", "rules broken"]
        return pd.DataFrame(rows, columns=cols)

    def trend_violations_frame(self) -> pd.DataFrame:
        """One row per (point, rule) that broke a run rule."""
        rows = [
            {"group": c.group, "quantity": c.quantity, "point": v.label, "value": v.value,
             "rule": v.rule, "side": v.side, "description": v.description}
            for c in self.trends for v in c.violations
        ]
        return pd.DataFrame(rows, columns=["group", "quantity", "point", "value", "rule", "side", "description"])

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "reportable": self.reportable,
            "all_pass": self.all_pass,
            "trend signals": self.trend_signals,
            "decisions": self.decisions.summary(),
            "suitability": [s.summary() for s in self.suitability],
            "trends": [c.summary() for c in self.trends],
            "specs": self.specs.summary(),
            "settings": self.settings.summary(),
            "warnings": list(self.warnings),
        }


def trend_points(
    table: pd.DataFrame,
    column: str,
    *,
    exclude_sequences: frozenset[str] | set[str] = frozenset(),
    check_standards: bool = True,
) -> list[tuple[str, str, float]]:
    """Trend points of one results table: ``(group, label, value)`` in order of appearance.

    Parameters
    ----------
    table : pandas.DataFrame
        A results table (not modified).
    column : str
        Results column, e.g. ``"Mw [g/mol]"``.
    exclude_sequences : set of str
        Sequences whose rows are left out (failed suitability).
    check_standards : bool
        Include check-standard points (group ``"check standard <name>"``, one per sequence).

    Returns
    -------
    list of (str, str, float)
        Samples: group = product code (``"(no product)"`` when empty), label = batch.
    """
    if column not in table.columns or C.SAMPLE_ID not in table.columns:
        return []
    ok = T.ok_mask(table)
    role = T.roles(table)
    sid = T.labels(table, C.SAMPLE_ID)
    product = T.labels(table, C.PRODUCT)
    batch = T.labels(table, C.BATCH, "(no batch)")
    seq = T.labels(table, C.SEQUENCE, T.ALL_SEQUENCES)
    values = T.numbers(table, column)
    use = ok & np.isfinite(values) & np.array([s not in exclude_sequences for s in seq], dtype=bool)
    # sample means first (replicates), then the mean over samples per (group, label)
    per_sample: dict[tuple[str, str, str], list[float]] = {}
    for i in np.flatnonzero(use):
        if role[i] == T.ROLE_SAMPLE:
            key = (product[i] or "(no product)", batch[i], sid[i])
        elif role[i] == T.ROLE_CHECK and check_standards:
            key = (f"check standard {product[i] or sid[i]}", seq[i], "")
        else:
            continue
        per_sample.setdefault(key, []).append(float(values[i]))
    grouped: dict[tuple[str, str], list[float]] = {}
    for (g, label, _s), v in per_sample.items():
        grouped.setdefault((g, label), []).append(float(np.mean(v)))
    return [(g, label, float(np.mean(v))) for (g, label), v in grouped.items()]


def evaluate_qc(
    table: pd.DataFrame,
    specs: SpecSheet,
    *,
    calibration: Any = None,
    reference_flow_marker: float | None = None,
    history: Sequence[pd.DataFrame] = (),
    settings: QCSettings | None = None,
) -> QCResult:
    """Spec decisions, system suitability and trends of one batch results table.

    Parameters
    ----------
    table : pandas.DataFrame
        The batch results table (one row per injection; not modified).
    specs : SpecSheet
    calibration : Calibration or dict, optional
        The calibration the batch used (object or its ``summary()``).
    reference_flow_marker : float, optional
        Reference flow-marker position of the method [mL].
    history : sequence of pandas.DataFrame
        Earlier results tables, oldest first, for the trend charts.
    settings : QCSettings, optional

    Returns
    -------
    QCResult

    Warns
    -----
    QCWarning, TrendWarning
        Duplicate trend labels, provisional control limits, short series.
    """
    settings = settings or QCSettings()
    notes: list[str] = []
    suit = system_suitability(table, calibration, specs=specs, limits=settings.suitability,
                              reference_flow_marker=reference_flow_marker)
    for s in suit:
        notes.extend(s.warnings)
    decisions: Decisions = decide(table, specs, suit)
    failed = frozenset(s.sequence for s in suit if not s.passed)

    charts: list[ControlChart] = []
    short: dict[str, list[str]] = {}
    for column in settings.trend_columns:
        series: dict[str, dict[str, tuple[float, str]]] = {}
        sources = [(h, frozenset(), "history") for h in history] + [(table, failed, "current")]
        for tab, excl, phase in sources:
            for g, label, v in trend_points(tab, column, exclude_sequences=excl,
                                            check_standards=settings.chart_check_standards):
                pts = series.setdefault(g, {})
                if label in pts:
                    msg = (f"trend {g} {column}: point {label!r} appears again ({phase}); "
                           "the later value replaces the earlier one")
                    notes.append(msg)
                    _warnings.warn(msg, QCWarning, stacklevel=2)
                    del pts[label]
                pts[label] = (v, phase)
        for g, pts in series.items():
            labels = list(pts)
            vals = [pts[k][0] for k in labels]
            phases = [pts[k][1] for k in labels]
            hist = np.array([p == "history" for p in phases])
            if settings.trend_limits_from == "all":
                mask = np.ones(len(vals), dtype=bool)
            elif settings.trend_limits_from == "history":
                mask = hist
            else:
                mask = hist if hist.sum() >= 2 else np.ones(len(vals), dtype=bool)
            if mask.sum() < 2:
                short.setdefault(column, []).append(g)
                continue
            with _warnings.catch_warnings(record=True) as caught:
                _warnings.simplefilter("always")
                chart = individuals_chart(vals, labels, quantity=column, group=g, sets_limits=mask,
                                          rules=settings.rules)
            for w in caught:
                _warnings.warn(w.message, w.category, stacklevel=2)
            notes.extend(chart.warnings)
            charts.append(chart)

    for column, groups in short.items():
        notes.append(f"no control chart of {column} for {', '.join(groups)}: fewer than two points "
                     "(batches, or sequences for check standards) to set limits")
    cal_summary = None
    if calibration is not None:
        cal_summary = calibration if isinstance(calibration, dict) else calibration.summary()
    return QCResult(
        table=table.copy(), specs=specs, suitability=suit, decisions=decisions, trends=tuple(charts),
        calibration=cal_summary, settings=settings, warnings=tuple(dict.fromkeys(notes)),
    )

