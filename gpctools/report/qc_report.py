"""run_qc: read the inputs, evaluate QC, write the workbook, the HTML report and the plots.

Outputs in ``outdir`` (every file written atomically):

``qc_report.xlsx``
    sheets summary, batches, samples, injections, specs, calibration, suitability,
    trends, trend signals, transfer (when transfer results are given), audit.
``qc_report.html``
    one self-contained page (plots embedded) with the same content, printable.
``plots/*.png``
    calibration curve with residuals, distribution overlays (one per product, when
    slice-level distributions are available), control charts, Mayo plots.
``qc_summary.json``
    the QC findings as JSON (``QCResult.summary()``).
``audit.json``
    the audit trail (versions, method file and its hash, input hashes, settings, time).
"""

from __future__ import annotations

import json
import math
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from gpctools.errors import DataError, InputFormatError
from gpctools.qc import _table as T
from gpctools.qc.decisions import FAIL, NO_RESULT, NO_SPEC, NOT_REPORTABLE, PASS, SEVERITY
from gpctools.qc.evaluate import QCResult, QCSettings, evaluate_qc
from gpctools.qc.specs import SpecSheet, read_specs
from gpctools.qc.trends import RULE_SET_NAME
from gpctools.report.audit import AuditTrail, build_audit
from gpctools.report.files import write_bytes, write_text

__all__ = ["QCReport", "run_qc", "EXIT_OK", "EXIT_FINDINGS"]

#: Exit status of ``gpctools qc``: report written (findings are results, not errors).
EXIT_OK = 0
#: Exit status with ``--strict`` when any batch is not ``pass``.
EXIT_FINDINGS = 1

_INJECTION_COLUMNS = (
    "sample_id", "role", "product", "batch", "sequence", "status", "Mn [g/mol]", "Mw [g/mol]",
    "Mp [g/mol]", "dispersity [-]", "outside calibration [% mass]", "flow marker [mL]", "warnings", "error",
)


#: Columns left out of the HTML samples table (they are in the workbook).
_HTML_SAMPLE_HIDDEN = ("Mz [g/mol]", "Mz+1 [g/mol]", "Mp (dw/dlogM) [g/mol]", "usable injections [-]")


@dataclass(frozen=True, eq=False)
class QCReport:
    """What :func:`run_qc` found and wrote.

    Attributes
    ----------
    result : QCResult
        Decisions, suitability, trends.
    audit : AuditTrail
    files : dict of str to Path
        Written files by name (empty when no ``outdir`` was given).
    sheets : dict of str to pandas.DataFrame
        The workbook's tables (also when nothing was written).
    """

    result: QCResult
    audit: AuditTrail
    files: dict[str, Path] = field(default_factory=dict)
    sheets: dict[str, pd.DataFrame] = field(default_factory=dict)

    @property
    def reportable(self) -> bool:
        """Every sequence passed system suitability."""
        return self.result.reportable

    @property
    def all_pass(self) -> bool:
        """Every batch passed."""
        return self.result.all_pass

    @property
    def warnings(self) -> tuple[str, ...]:
        """Warnings collected while evaluating."""
        return self.result.warnings

    def exit_code(self, *, strict: bool = False) -> int:
        """``0``; with ``strict``, ``1`` when any batch is not ``pass``.

        Trend signals never change the exit code (they are shown in the report).
        """
        if strict and not self.all_pass:
            return EXIT_FINDINGS
        return EXIT_OK

    def summary(self) -> dict[str, Any]:
        """JSON-safe description: QC findings, audit, files."""
        return {
            "qc": self.result.summary(),
            "audit": self.audit.summary(),
            "files": {k: str(v) for k, v in self.files.items()},
        }


# ----------------------------------------------------------------------------- inputs


@dataclass
class _Inputs:
    table: pd.DataFrame
    method: Any = None
    calibration: Any = None
    reference_flow_marker: float | None = None
    files: list[tuple[str, str]] = field(default_factory=list)
    curves: list[tuple[str, str, np.ndarray, np.ndarray]] = field(default_factory=list)
    source: str = ""


_LABEL_DTYPES = {c: str for c in ("sample_id", "file", "role", "product", "batch", "sequence", "status",
                                  "warnings", "error", "molar-mass scale")}


def _read_results_table(path: Path) -> pd.DataFrame:
    if not path.exists():
        raise InputFormatError("results table not found; give results.csv written by 'gpctools batch'",
                               path=path)
    from gpctools.io._files import detect_kind, read_bytes

    detect_kind(path, read_bytes(path))  # folder, empty file, image or binary: clear message
    if path.suffix.lower() == ".csv":
        try:
            header = pd.read_csv(path, nrows=0).columns
            dtypes = {c: _LABEL_DTYPES[c] for c in header if c in _LABEL_DTYPES}
            df = pd.read_csv(path, dtype=dtypes, keep_default_na=True)
        except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as exc:
            raise InputFormatError(f"cannot read the results table: {exc}", path=path) from None
    else:
        from gpctools.io import read_sheet

        df = read_sheet(path)
    if not {"status", "Mn [g/mol]", "Mw [g/mol]"} & {str(c) for c in df.columns}:
        raise InputFormatError(
            "not a results table (no 'status', 'Mn [g/mol]' or 'Mw [g/mol]' column); give the "
            "results.csv written by 'gpctools batch', or give a batch sheet together with "
            "--method METHOD.toml", path=path)
    return df


def _method_from(method: Any) -> Any:
    if method is None or hasattr(method, "calibration"):
        return method
    from gpctools.method import load_method

    return load_method(method)


def _chromatogram_files(table: pd.DataFrame, sheet: str | os.PathLike[str] | None) -> list[tuple[str, str]]:
    if sheet is None or "file" not in table.columns:
        return []
    base = Path(sheet).parent
    out = []
    for f in T.labels(table, "file"):
        if f:
            out.append(("chromatogram", str(base / f)))
    return out


def _resolve_results(results: Any, method: Any, calibration: Any) -> _Inputs:
    method = _method_from(method)
    if hasattr(results, "table") and hasattr(results, "entries"):  # gpctools.batch.BatchResult
        method = method or results.method
        inp = _Inputs(table=results.table, method=method, source=str(results.sheet))
        inp.files.append(("batch sheet", str(results.sheet)))
        inp.files.extend(("chromatogram", str(e.path)) for e in results.entries if e.file)
        for entry, res in zip(results.entries, results.injections or [], strict=False):
            if res is not None:
                d = res.distribution
                role = T.role_of(entry.role)
                group = "check standards" if role == T.ROLE_CHECK else (
                    T.label_text(entry.metadata.get("product")) or "(no product)")
                if role in (T.ROLE_SAMPLE, T.ROLE_CHECK):
                    inp.curves.append((group, entry.sample_id, np.asarray(d.M), np.asarray(d.dwdlogM)))
        inp.calibration = calibration if calibration is not None else results.calibration
    elif isinstance(results, pd.DataFrame):
        inp = _Inputs(table=results, method=method, source="results table (in memory)")
        inp.calibration = calibration if calibration is not None else (
            method.calibration if method is not None else None)
    elif isinstance(results, (str, os.PathLike)):
        path = Path(results)
        table = _read_results_table(path)
        inp = _Inputs(table=table, method=method, source=str(path))
        inp.files.append(("results table", str(path)))
        manifest = path.parent / "manifest.json"
        info: dict[str, Any] = {}
        if manifest.exists():
            try:
                info = json.loads(manifest.read_text(encoding="utf-8"))
            except (OSError, ValueError) as exc:
                raise InputFormatError(f"cannot read the batch manifest: {exc}", path=manifest) from None
            if not isinstance(info, dict):
                raise InputFormatError(
                    "the batch manifest is not a JSON object; write it again with 'gpctools batch' "
                    "or remove it", path=manifest)
            inp.files.append(("batch manifest", str(manifest)))
        sheet = info.get("batch sheet")
        if sheet and Path(sheet).exists():
            inp.files.append(("batch sheet", str(sheet)))
            inp.files.extend(_chromatogram_files(table, sheet))
        if inp.method is None and isinstance(info.get("method"), Mapping):
            src = info["method"].get("source")
            if src and Path(src).exists():
                inp.method = _method_from(src)
            elif isinstance(info["method"].get("settings"), Mapping):
                ref = info["method"]["settings"].get("flow marker reference [mL]")
                inp.reference_flow_marker = float(ref) if ref is not None else None
        if calibration is not None:
            inp.calibration = calibration
        elif inp.method is not None:
            inp.calibration = inp.method.calibration
        elif isinstance(info.get("calibration"), Mapping):
            inp.calibration = info["calibration"]
        dist = path.parent / "distributions"
        if dist.is_dir():
            for f in sorted(dist.glob("*.csv")):
                try:
                    d = pd.read_csv(f)
                    inp.curves.append(("all injections", f.stem, d["M [g/mol]"].to_numpy(float),
                                       d["dw/dlogM [-]"].to_numpy(float)))
                except (OSError, KeyError, ValueError, pd.errors.ParserError):
                    continue
    else:
        raise DataError(
            f"run_qc needs a BatchResult, a results DataFrame or the path of results.csv, "
            f"got {type(results).__name__}"
        )
    if inp.method is not None and inp.reference_flow_marker is None:
        inp.reference_flow_marker = getattr(inp.method, "marker_reference", None)
    return inp


def _history_tables(history: Any) -> tuple[list[pd.DataFrame], list[tuple[str, str]]]:
    if history is None:
        return [], []
    if isinstance(history, (str, os.PathLike, pd.DataFrame)) or hasattr(history, "entries"):
        history = [history]
    tables, files = [], []
    for h in history:
        if isinstance(h, pd.DataFrame):
            tables.append(h)
        elif hasattr(h, "table") and hasattr(h, "entries"):
            tables.append(h.table)
        else:
            p = Path(h)
            tables.append(_read_results_table(p))
            files.append(("history results table", str(p)))
    return tables, files


def _transfer_items(transfer: Any) -> list[tuple[str, Any]]:
    if transfer is None:
        return []
    if isinstance(transfer, Mapping) and not {"x", "y"} <= set(transfer):
        return [(str(k), v) for k, v in transfer.items()]
    if isinstance(transfer, (list, tuple)):
        return [(f"fit {i + 1}" if not hasattr(f, "estimator") else f"estimator {f.estimator}", f)
                for i, f in enumerate(transfer)]
    fits = getattr(transfer, "fits", None)
    if fits is not None:
        return _transfer_items(fits)
    title = f"estimator {transfer.estimator}" if hasattr(transfer, "estimator") else "transfer fit"
    return [(title, transfer)]


def _transfer_tables(title: str, fit: Any) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(constants, points) tables of one transfer fit."""
    if isinstance(fit, Mapping):
        pts = pd.DataFrame({"fit": title, "[A]/[M] [-]": np.asarray(fit["x"], float),
                            "1/DPn [-]": np.asarray(fit["y"], float)})
        rows = []
        for k in ("slope", "intercept"):
            if k in fit:
                rows.append({"fit": title, "constant": k, "value [-]": float(fit[k]),
                             "standard error [-]": float(fit.get(f"{k} stderr", math.nan)),
                             "95 % CI low [-]": math.nan, "95 % CI high [-]": math.nan})
        return pd.DataFrame(rows), pts
    rows = []
    values = [*getattr(fit, "constants", ()), getattr(fit, "intercept", None)]
    for c in values:
        if c is None:
            continue
        unit = getattr(c, "unit", "-") or "-"
        rows.append({"fit": title, "constant": c.name, f"value [{unit}]" if unit != "-" else "value [-]": c.value,
                     "standard error [-]": c.stderr,
                     f"{round(100 * getattr(c, 'confidence', 0.95))} % CI low [-]": c.ci_low,
                     f"{round(100 * getattr(c, 'confidence', 0.95))} % CI high [-]": c.ci_high})
    design = np.atleast_2d(np.asarray(getattr(fit, "design", np.empty((0, 0))), dtype=float))
    pts = {"fit": title, "run": list(getattr(fit, "run_ids", ()))}
    for j, t in enumerate(getattr(fit, "terms", ())):
        if design.shape[0] == len(pts["run"]) and j < design.shape[1]:
            pts[f"{t} column [-]"] = design[:, j]
    pts["1/DPn observed [-]"] = np.asarray(getattr(fit, "y", []), float)
    pts["1/DPn fitted [-]"] = np.asarray(getattr(fit, "fitted", []), float)
    return pd.DataFrame(rows), pd.DataFrame(pts)


# ----------------------------------------------------------------------------- tables


def _summary_frame(result: QCResult, audit: AuditTrail, source: str) -> pd.DataFrame:
    counts = result.decisions.counts()
    overall = _overall(result)
    rows: list[tuple[str, Any, str]] = [
        ("overall", overall, _overall_text(result)),
        ("results", source, ""),
        ("generated (UTC)", audit.timestamp, f"gpctools {audit.tool_version}"),
        ("system suitability", "pass" if result.reportable else "fail",
         "; ".join(f"{s.sequence}: {'pass' if s.passed else 'fail'}" for s in result.suitability)),
    ]
    for k in SEVERITY:
        rows.append((f"batches {k} [-]", counts[k], ""))
    rows.append(("points breaking a run rule [-]", result.trend_signals, RULE_SET_NAME))
    cal = result.calibration or {}
    if cal:
        rows.append(("calibration R² [-]", cal.get("R^2 [-]"), ""))
        rows.append(("calibration worst residual [%]", cal.get("worst residual [%]"), ""))
        rows.append(("molar-mass scale", cal.get("molar-mass scale"), ""))
    for b in result.decisions.batches:
        rows.append((f"batch {b.batch}", b.decision, "; ".join(b.reasons)))
    for w in result.warnings:
        rows.append(("warning", w, ""))
    return pd.DataFrame(rows, columns=["item", "value", "details"])


def _overall(result: QCResult) -> str:
    if not result.decisions.batches:
        return NO_RESULT
    worst = min(SEVERITY.index(b.decision) for b in result.decisions.batches)
    return SEVERITY[worst]


def _overall_text(result: QCResult) -> str:
    o = _overall(result)
    return {
        PASS: "every batch passed",
        FAIL: "at least one batch failed its limits",
        NOT_REPORTABLE: "system suitability failed: results not reportable",
        NO_RESULT: "at least one batch has no result",
        NO_SPEC: "at least one batch has no spec limits",
    }[o]


def _calibration_frame(cal: dict[str, Any] | None) -> pd.DataFrame:
    if not cal:
        return pd.DataFrame(columns=["standard", "Mp [g/mol]", "volume [mL]", "fitted M [g/mol]", "residual [%]"])
    return pd.DataFrame(cal.get("standards_table", []))


def _calibration_items(cal: dict[str, Any] | None) -> pd.DataFrame:
    if not cal:
        return pd.DataFrame(columns=["item", "value"])
    rng_v = cal.get("calibrated range [mL]") or [math.nan, math.nan]
    rng_m = cal.get("calibrated range [g/mol]") or [math.nan, math.nan]
    rows = [
        ("polynomial order [-]", cal.get("order")),
        ("standards [-]", cal.get("standards")),
        ("R² [-]", cal.get("R^2 [-]")),
        ("worst residual [%]", cal.get("worst residual [%]")),
        ("calibrated range, low [mL]", rng_v[0]),
        ("calibrated range, high [mL]", rng_v[1]),
        ("calibrated range, low [g/mol]", rng_m[0]),
        ("calibrated range, high [g/mol]", rng_m[1]),
        ("standard polymer", cal.get("standard polymer")),
        ("molar-mass scale", cal.get("molar-mass scale")),
    ]
    return pd.DataFrame(rows, columns=["item", "value"])


def _suitability_sheet(result: QCResult) -> pd.DataFrame:
    df = result.suitability_frame()
    return df.rename(columns={"value": "value [unit as in check]", "limit": "limit [unit as in check]"})


def _trends_sheet(result: QCResult) -> pd.DataFrame:
    df = result.trends_frame()
    ren = {c: f"{c} [unit as in quantity]" for c in ("value", "centre line", "lower control limit",
                                                       "upper control limit", "sigma")}
    return df.rename(columns=ren)


def _safe(text: str) -> str:
    s = re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._")
    return s or "plot"


# ----------------------------------------------------------------------------- run_qc


def run_qc(
    results: Any,
    specs: SpecSheet | str | os.PathLike[str],
    outdir: str | os.PathLike[str] | None = None,
    *,
    method: Any = None,
    calibration: Any = None,
    history: Any = None,
    transfer: Any = None,
    settings: QCSettings | None = None,
    title: str | None = None,
    timestamp: str | None = None,
    plots: bool = True,
) -> QCReport:
    """Evaluate QC for one batch and write the reports.

    Parameters
    ----------
    results : BatchResult, pandas.DataFrame, str or os.PathLike
        A :class:`gpctools.batch.BatchResult`, a results table, or the path of
        ``results.csv`` (its ``manifest.json`` and ``distributions/`` next to it are used
        when present: calibration, method, batch sheet and chromatogram hashes, curves).
    specs : SpecSheet or path
        Spec-limits sheet.
    outdir : path, optional
        Folder for the outputs (created). ``None`` evaluates without writing.
    method : gpctools.method.Method or path, optional
        The method (reference flow marker, calibration, audit); default the batch's.
    calibration : Calibration or dict, optional
        Overrides the method's calibration for the suitability checks.
    history : sequence of (DataFrame or path of results.csv or BatchResult), optional
        Earlier results tables, oldest first, for the control charts.
    transfer : optional
        Transfer (Mayo) fits to include: a fit object with ``design``, ``y``, ``terms``,
        ``constants`` and ``predict`` (as returned by :func:`gpctools.transfer.mayo.fit_mayo`),
        a sequence or mapping of them, or a mapping with ``x``, ``y``, ``slope`` and
        ``intercept``.
    settings : QCSettings, optional
        Default :class:`QCSettings`, with the method's ``thresholds.standard_residual_pct``
        and ``thresholds.outside_calibration_pct`` as the calibration-residual and
        outside-calibration suitability limits when a method is known.
    title : str, optional
        Report title.
    timestamp : str, optional
        Override the UTC timestamp (the only value that differs between repeated runs).
    plots : bool
        Make the PNG plots (and embed them in the HTML).

    Returns
    -------
    QCReport

    Raises
    ------
    gpctools.errors.GpcError
        Unreadable inputs (spec sheet, results table, method) with file/row/column.
    """
    inp = _resolve_results(results, method, calibration)
    if settings is None:
        settings = QCSettings.from_method(inp.method)
    if isinstance(specs, SpecSheet):
        spec_sheet = specs
    else:
        spec_sheet = read_specs(specs)
    hist_tables, hist_files = _history_tables(history)
    result = evaluate_qc(inp.table, spec_sheet, calibration=inp.calibration,
                         reference_flow_marker=inp.reference_flow_marker, history=hist_tables,
                         settings=settings)
    files = list(inp.files)
    if spec_sheet.path:
        files.append(("spec sheet", spec_sheet.path))
    files.extend(hist_files)
    audit_settings = {
        "qc": settings.summary(),
        "reference flow marker [mL]": inp.reference_flow_marker,
        "history tables": len(hist_tables),
        "method settings": dict(getattr(inp.method, "settings", {}) or {}),
    }
    audit = build_audit(inputs=files, method=inp.method, settings=audit_settings, timestamp=timestamp)
    items = _transfer_items(transfer)

    sheets: dict[str, pd.DataFrame] = {
        "summary": _summary_frame(result, audit, inp.source),
        "batches": result.decisions.batches_frame(),
        "samples": result.decisions.samples_frame(),
        "injections": inp.table,
        "specs": spec_sheet.to_frame(),
        "calibration": _calibration_frame(result.calibration),
        "suitability": _suitability_sheet(result),
        "trends": _trends_sheet(result),
        "trend signals": result.trend_violations_frame(),
    }
    transfer_tables = [_transfer_tables(t, f) for t, f in items]
    if items:
        sheets["transfer"] = pd.concat([c for c, _ in transfer_tables], ignore_index=True)
        sheets["transfer points"] = pd.concat([p for _, p in transfer_tables], ignore_index=True)
    sheets["audit"] = audit.to_frame()

    written: dict[str, Path] = {}
    if outdir is None:
        return QCReport(result, audit, written, sheets)

    from gpctools.report import html as H
    from gpctools.report.xlsx import write_workbook

    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    figures: dict[str, list[dict[str, str]]] = {"calibration": [], "distributions": [], "transfer": []}
    chart_figs: list[dict[str, str] | None] = [None] * len(result.trends)
    if plots:
        from gpctools.report import plots as P

        if result.calibration:
            cal_obj = inp.calibration if hasattr(inp.calibration, "standards_table") else result.calibration
            png = P.png_bytes(P.calibration_figure(
                cal_obj, residual_limit_pct=settings.suitability.max_calibration_residual_pct))
            written["plots/calibration.png"] = write_bytes(out / "plots" / "calibration.png", png)
            figures["calibration"].append(H.figure(png, "Calibration curve (standards and fit) with the "
                                                   "residual of each standard; band: acceptance limit."))
        groups: dict[str, list[tuple[str, np.ndarray, np.ndarray]]] = {}
        for g, label, M, y in inp.curves:
            groups.setdefault(g, []).append((label, M, y))
        for g, curves in groups.items():
            png = P.png_bytes(P.plot_distributions(curves, title=f"Distributions: {g}").figure)
            name = f"plots/distributions_{_safe(g)}.png"
            written[name] = write_bytes(out / name, png)
            figures["distributions"].append(H.figure(png, f"dw/dlogM of each injection, {g}."))
        for k, chart in enumerate(result.trends):
            png = P.png_bytes(P.plot_control_chart(chart).figure)
            name = f"plots/control_{k + 1:02d}_{_safe(chart.group)}_{_safe(chart.quantity)}.png"
            written[name] = write_bytes(out / name, png)
            chart_figs[k] = H.figure(png, f"Individuals chart of {chart.quantity} for {chart.group}: "
                                          "centre line, ±1/2/3 sigma; circled points break a run rule.")
        for k, (t, f) in enumerate(items):
            png = P.png_bytes(P.plot_mayo(f, title=f"Mayo plot: {t}").figure)
            name = f"plots/mayo_{k + 1:02d}_{_safe(t)}.png"
            written[name] = write_bytes(out / name, png)
            figures["transfer"].append(H.figure(png, f"1/DPn against the agent ratio with the fitted line, {t}."))

    written["qc_report.xlsx"] = write_workbook(out / "qc_report.xlsx", sheets)
    context = _html_context(result, audit, spec_sheet, inp, title, figures, chart_figs, items,
                            transfer_tables)
    written["qc_report.html"] = H.write_html(out / "qc_report.html", context)
    written["qc_summary.json"] = write_text(
        out / "qc_summary.json", json.dumps(result.summary(), indent=2, ensure_ascii=False, default=str) + "\n")
    written["audit.json"] = write_text(out / "audit.json", audit.to_json())
    return QCReport(result, audit, written, sheets)


def _html_context(result, audit, spec_sheet, inp, title, figures, chart_figs, items, transfer_tables):
    from gpctools.report import html as H

    overall = _overall(result)
    counts = result.decisions.counts()
    inj_cols = [c for c in _INJECTION_COLUMNS if c in inp.table.columns]
    suit = []
    for s in result.suitability:
        df = s.to_frame().drop(columns=["sequence", "comparison"]).rename(
            columns={"value": "value [unit as in check]", "limit": "limit [unit as in check]"})
        suit.append({"sequence": s.sequence, "tag": "pass" if s.passed else "fail",
                     "text": "pass" if s.passed else "fail",
                     "table": H.table_context(df, formats={"value [unit as in check]": "[-]",
                                                           "limit [unit as in check]": "[-]"})})
    charts = []
    for chart, fig in zip(result.trends, chart_figs, strict=False):
        rows = [{"point": v.label, chart.quantity: v.value, "rule": v.rule, "side": v.side,
                 "description": v.description} for v in chart.violations]
        df = pd.DataFrame(rows, columns=["point", chart.quantity, "rule", "side", "description"])
        limits = (f"centre {H.format_value(chart.centre, chart.quantity)[0]}, sigma "
                  f"{H.format_value(chart.sigma, chart.quantity)[0]} "
                  f"(limits from {int(chart.sets_limits.sum())} of {len(chart.labels)} points)")
        charts.append({"title": f"{chart.group}: {chart.quantity}; {limits}",
                       "figure": fig or {"src": "", "caption": "plot not drawn", "alt": "no plot"},
                       "table": H.table_context(df, empty="No run rule broken.")})
    transfer = []
    for k, (t, _f) in enumerate(items):
        consts, _pts = transfer_tables[k]
        transfer.append({"title": t, "figure": figures["transfer"][k] if k < len(figures["transfer"]) else None,
                         "table": H.table_context(consts)})
    audit_df = audit.to_frame()
    audit_df = audit_df[audit_df["section"] != "method text"]
    samples = result.decisions.samples_frame()
    keep = [c for c in samples.columns if c not in _HTML_SAMPLE_HIDDEN]
    if "notes" in samples.columns and not samples["notes"].astype(str).str.len().any():
        keep.remove("notes")
    samples = samples[keep]
    return {
        "title": title or "SEC/GPC quality-control report",
        "subtitle": f"results: {inp.source}",
        "timestamp": audit.timestamp,
        "tool_version": audit.tool_version,
        "overall": {"tag": overall.replace(" ", "-"), "text": overall},
        "counts": [{"n": counts[k], "label": k} for k in SEVERITY if counts[k]],
        "trend_signals": result.trend_signals,
        "batches": H.table_context(result.decisions.batches_frame(), empty="No samples to decide."),
        "warnings": list(result.warnings),
        "samples": H.table_context(samples, empty="No samples."),
        "specs_source": f"spec sheet: {spec_sheet.path or '(in memory)'}"
                        + (f", SHA-256 {spec_sheet.sha256}" if spec_sheet.sha256 else ""),
        "specs": H.table_context(spec_sheet.to_frame(), formats={
            "min [unit of quantity]": "", "max [unit of quantity]": "", "target [unit of quantity]": ""}),
        "injections": H.table_context(inp.table[inj_cols]),
        "suitability": suit,
        "calibration_items": H.table_context(_calibration_items(result.calibration), unit_from="item",
                                             empty="No calibration was supplied."),
        "calibration_figures": figures["calibration"],
        "standards": H.table_context(_calibration_frame(result.calibration)),
        "distribution_figures": figures["distributions"],
        "rule_set_note": (f"Shewhart individuals charts, sigma = mean moving range / 1.128; run rules: "
                          f"{RULE_SET_NAME} - WE1 one point beyond 3 sigma, WE2 2 of 3 beyond 2 sigma, "
                          "WE3 4 of 5 beyond 1 sigma (same side), WE4 8 in a row on one side."),
        "charts": charts,
        "transfer": transfer,
        "audit": H.table_context(audit_df),
        "method_text": audit.method_text or "",
    }
