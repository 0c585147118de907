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
again replaces the earlier point (with a warning). When every point has a date (a
``date`` column, or any column named ``... date``), the points are ordered by date (the
earliest date of the point's rows; ties keep their order). Samples of a sequence that
failed system suitability are not charted.

The limits are frozen on a baseline period (:class:`gpctools.qc.settings.TrendBaseline`):
by default the first 20 history points when there are that many, else all history
points; later points are judged against them.
"""

from __future__ import annotations

import datetime as _dt
import warnings as _warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.qc import _table as T
from gpctools.qc._table import QCWarning
from gpctools.qc.decisions import Decisions, decide
from gpctools.qc.settings import AUTO_BASELINE_POINTS, QCSettings, TrendBaseline
from gpctools.qc.specs import SpecSheet, find_column
from gpctools.qc.suitability import SuitabilityResult, system_suitability
from gpctools.qc.trends import ControlChart, individuals_chart
from gpctools.sheets import cells

__all__ = ["QCSettings", "QCResult", "QCWarning", "evaluate_qc", "trend_points", "TrendPoint"]

@dataclass(frozen=True, eq=False, repr=False)
class QCResult(Display):
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
    calibrations : dict
        Sequence label -> summary of the calibration that sequence used, when it was
        built from the sequence's own standard injections.
    """

    table: pd.DataFrame
    specs: SpecSheet
    suitability: tuple[SuitabilityResult, ...]
    decisions: Decisions
    trends: tuple[ControlChart, ...]
    calibration: dict[str, Any] | None
    settings: QCSettings
    warnings: tuple[str, ...] = field(default=())
    calibrations: dict[str, dict[str, Any]] = field(default_factory=dict)

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
                    "date": c.dates[i] if c.dates else "",
                    "value": float(c.values[i]),
                    "centre line": c.centre,
                    "lower control limit": c.lcl,
                    "upper control limit": c.ucl,
                    "sigma": c.sigma,
                    "z [sigma]": float(z[i]),
                    "sets limits": "yes" if c.sets_limits[i] else "no",
                    "rules broken": ", ".join(c.rules_at(i)),
                })
        cols = ["group", "quantity", "point", "date", "value", "centre line", "lower control limit",
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
            "sequence calibrations": self.calibrations,
        }


@dataclass(frozen=True)
class TrendPoint:
    """One point of a control chart.

    Attributes
    ----------
    group, label : str
        Product (or ``check standard <name>``) and batch (or sequence).
    value : float
    date : datetime.datetime or None
        Earliest date of the point's rows.
    flag : bool
        A row of the point says yes in the baseline flag column.
    """

    group: str
    label: str
    value: float
    date: _dt.datetime | None = None
    flag: bool = False


def _flags(table: pd.DataFrame, column: str | None) -> np.ndarray:
    if column is None:
        return np.zeros(len(table), dtype=bool)
    head = next((c for c in table.columns if cells.normalise_name(str(c)) == cells.normalise_name(column)), None)
    if head is None:
        return np.zeros(len(table), dtype=bool)
    out = []
    for i, v in enumerate(table[head].tolist()):
        try:
            out.append(bool(cells.parse_bool(v)))
        except cells.CellError:
            raise DataError(f"row {i + 1}: {T.label_text(v)!r} is not yes/no; write yes or no in the "
                            "baseline flag column", column=str(head), row=i + 1) from None
    return np.array(out, dtype=bool)


def trend_points(
    table: pd.DataFrame,
    column: str,
    *,
    exclude_sequences: frozenset[str] | set[str] = frozenset(),
    check_standards: bool = True,
    flag_column: str | None = None,
    default_product: str = "",
) -> list[TrendPoint]:
    """Trend points of one results table, in order of appearance.

    Parameters
    ----------
    table : pandas.DataFrame
        A results table (not modified). Without a ``sample_id`` column each row is one
        sample (a history table of reported batch values); without ``status`` every row
        is usable.
    column : str
        Results column, e.g. ``"Mw [g/mol]"``.
    exclude_sequences : set of str
        Sequences whose rows are left out (failed suitability).
    check_standards : bool
        Include check-standard points (group ``"check standard <name>"``, one per sequence).
    flag_column : str, optional
        A yes/no column marking the baseline period.
    default_product : str
        Product of every row when the table has no ``product`` column (a history table of
        one product).

    Returns
    -------
    list of TrendPoint
        Samples: group = product code (``"(no product)"`` when empty), label = batch.
    """
    head = find_column(table.columns, column)
    if head is None:
        return []
    ok = T.ok_mask(table)
    role = T.roles(table)
    sid = T.labels(table, C.SAMPLE_ID) if C.SAMPLE_ID in table.columns else \
        np.array([f"row {i + 1}" for i in range(len(table))], dtype=object)
    product = T.labels(table, C.PRODUCT, default_product)
    batch = T.labels(table, C.BATCH, "(no batch)")
    if C.BATCH not in table.columns:  # one row per batch: its sample id (or row) names it
        batch = sid
    seq = T.labels(table, C.SEQUENCE, T.ALL_SEQUENCES)
    when = T.dates(table, T.date_column(table), strict=False)
    flag = _flags(table, flag_column)
    values = T.numbers(table, head)
    use = ok & np.isfinite(values) & np.array([s not in exclude_sequences for s in seq], dtype=bool)
    per_sample: dict[tuple[str, str, str], list[int]] = {}
    for i in np.flatnonzero(use):
        if role[i] in T.SAMPLE_ROLES:
            key = (product[i] or "(no product)", batch[i], sid[i])
        elif role[i] == T.ROLE_CHECK and check_standards:
            key = (f"check standard {product[i] or sid[i]}", seq[i], "")
        else:
            continue
        per_sample.setdefault(key, []).append(int(i))
    grouped: dict[tuple[str, str], list[list[int]]] = {}
    for (g, label, _s), idx in per_sample.items():
        grouped.setdefault((g, label), []).append(idx)
    out = []
    for (g, label), samples in grouped.items():
        v = float(np.mean([np.mean(values[idx]) for idx in samples]))
        rows = [i for idx in samples for i in idx]
        dated = [d for d in (when[i] for i in rows) if d is not None]
        out.append(TrendPoint(g, label, v, min(dated) if dated else None, bool(flag[rows].any())))
    return out


def _baseline_mask(points: list[tuple[TrendPoint, str]], baseline: TrendBaseline) -> np.ndarray:
    """Which points of one chart set its limits (``points`` in chart order)."""
    hist = np.array([phase == "history" for _, phase in points], dtype=bool)
    n = len(points)
    if baseline.kind == "all":
        return np.ones(n, dtype=bool)
    if baseline.kind == "history":
        return hist
    if baseline.kind == "count":
        return np.arange(n) < int(baseline.count or 0)
    if baseline.kind == "dates":
        assert baseline.start is not None and baseline.end is not None
        end = baseline.end + _dt.timedelta(days=1) if baseline.end.time() == _dt.time() else baseline.end
        return np.array([p.date is not None and baseline.start <= p.date < end for p, _ in points], dtype=bool)
    if baseline.kind == "flag":
        return np.array([p.flag for p, _ in points], dtype=bool)
    if hist.sum() >= AUTO_BASELINE_POINTS:
        return hist & (np.cumsum(hist) <= AUTO_BASELINE_POINTS)
    return hist if hist.sum() >= 2 else np.ones(n, dtype=bool)


def _ordered(pts: dict[str, tuple[TrendPoint, str]]) -> list[tuple[TrendPoint, str]]:
    """Chart order: by date when every point has one (stable), else as collected."""
    items = list(pts.values())
    if items and all(p.date is not None for p, _ in items):
        items.sort(key=lambda t: t[0].date)  # type: ignore[arg-type,return-value]
    return items


def _series(column: str, sources: list[tuple[pd.DataFrame, frozenset[str], str]], settings: QCSettings,
            notes: list[str]) -> dict[str, dict[str, tuple[TrendPoint, str]]]:
    """Trend points of one column from every table, by group and label (later replaces earlier)."""
    assert settings.baseline is not None
    series: dict[str, dict[str, tuple[TrendPoint, str]]] = {}
    current = sources[-1][0]
    role = T.roles(current)
    products = {p for p, r in zip(T.labels(current, C.PRODUCT).tolist(), role, strict=True)
                if p and r in T.SAMPLE_ROLES}
    single = products.pop() if len(products) == 1 else ""
    for tab, excl, phase in sources:
        default = single if (phase == "history" and C.PRODUCT not in tab.columns) else ""
        if default:
            notes.append(f"a history table has no 'product' column: its points are charted as "
                         f"product {default}, the only product of the current run")
        for p in trend_points(tab, column, exclude_sequences=excl, check_standards=settings.chart_check_standards,
                              flag_column=settings.baseline.column, default_product=default):
            pts = series.setdefault(p.group, {})
            if p.label in pts:
                msg = (f"trend {p.group} {column}: point {p.label!r} appears again ({phase}); "
                       "the later value replaces the earlier one")
                notes.append(msg)
                _warnings.warn(msg, QCWarning, stacklevel=3)
                del pts[p.label]
            pts[p.label] = (p, phase)
    return series


def _charts(table: pd.DataFrame, history: Sequence[pd.DataFrame], failed: frozenset[str],
            settings: QCSettings, notes: list[str]) -> list[ControlChart]:
    """Control charts of every trend column and group, limits frozen on the baseline."""
    assert settings.baseline is not None
    charts: list[ControlChart] = []
    short: dict[str, list[str]] = {}
    sources: list[tuple[pd.DataFrame, frozenset[str], str]] = [(h, frozenset(), "history") for h in history]
    sources.append((table, failed, "current"))
    for column in settings.trend_columns:
        for g, pts in _series(column, sources, settings, notes).items():
            items = _ordered(pts)
            mask = _baseline_mask(items, settings.baseline)
            if mask.sum() < 2:
                short.setdefault(column, []).append(g)
                continue
            with _warnings.catch_warnings(record=True) as caught:
                _warnings.simplefilter("always")
                chart = individuals_chart(
                    [p.value for p, _ in items], [p.label for p, _ in items], quantity=column, group=g,
                    sets_limits=mask, rules=settings.rules, rule_set_name=settings.rule_set_name,
                    false_alarm_simulations=settings.false_alarm_simulations,
                    dates=[p.date.strftime("%Y-%m-%d") if p.date else "" for p, _ in items]
                    if any(p.date for p, _ in items) else (),
                    baseline=f"{settings.baseline.describe()}: {int(mask.sum())} of {len(items)} points")
            for w in caught:
                _warnings.warn(w.message, w.category, stacklevel=3)
            notes.extend(chart.warnings)
            charts.append(chart)
    for column, groups in short.items():
        notes.append(f"no control chart of {column} for {', '.join(groups)}: fewer than two points "
                     "(batches, or sequences for check standards) to set limits")
    return charts


def evaluate_qc(
    table: pd.DataFrame,
    specs: SpecSheet,
    *,
    calibration: Any = None,
    reference_flow_marker: float | None = None,
    history: Sequence[pd.DataFrame] = (),
    settings: QCSettings | None = None,
    calibrations: Mapping[str, Any] | None = None,
) -> QCResult:
    """Verdicts, system suitability and trends of one batch results table.

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
    calibrations : mapping, optional
        Sequence label -> calibration built from that sequence's own standard injections.

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
    for h in history:
        T.check_roles(h, "a history table")
    suit = system_suitability(table, calibration, specs=specs, limits=settings.suitability,
                              reference_flow_marker=reference_flow_marker, calibrations=calibrations)
    for s in suit:
        notes.extend(s.warnings)
    decisions: Decisions = decide(table, specs, suit, judge=settings.judge, limits=settings.suitability)
    failed = frozenset(s.sequence for s in suit if not s.passed)
    charts = _charts(table, history, failed, settings, notes)

    def summary(cal: Any) -> dict[str, Any] | None:
        if cal is None:
            return None
        return cal if isinstance(cal, dict) else cal.summary()

    cals = {k: summary(v) for k, v in (calibrations or {}).items()}
    return QCResult(
        table=table.copy(), specs=specs, suitability=suit, decisions=decisions, trends=tuple(charts),
        calibration=summary(calibration), settings=settings, warnings=tuple(dict.fromkeys(notes)),
        calibrations={k: v for k, v in cals.items() if v is not None},
    )
