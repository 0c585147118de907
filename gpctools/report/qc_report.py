"""run_qc: read the inputs, evaluate QC, write the workbook, the HTML report and the plots.

Outputs in ``outdir`` (every file written atomically):

``qc_report.xlsx``
    sheets summary, batches, samples, injections (each with its verdict, verdict against
    spec and every reason), specs, calibration, suitability, replicates, trends, trend
    signals; for a sequence run (:func:`gpctools.qc.run_sequence`) also sequence
    calibration, standards located and blanks; transfer (when transfer results are
    given), audit.
``qc_report.html``
    one self-contained page (plots embedded) with the same content, printable, with one
    page per sample (chromatogram, distribution, averages, spec verdicts, sign-off).
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
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.display import Display
from gpctools.errors import DataError, InputFormatError
from gpctools.formatting import clean_json
from gpctools.qc import (
    FAIL,
    NO_RESULT,
    NO_SPEC,
    NOT_REPORTABLE,
    PASS,
    ROLE_CHECK,
    ROLE_REPLICATE,
    ROLE_SAMPLE,
    QCResult,
    QCSettings,
    SpecSheet,
    evaluate_qc,
    label_text,
    read_specs,
    role_of,
)
from gpctools.qc.decisions import SEVERITY
from gpctools.report.audit import AuditTrail, build_audit
from gpctools.report.files import safe_name, unique_name, write_bytes, write_text

__all__ = ["QCReport", "run_qc", "EXIT_OK", "EXIT_FINDINGS", "history_paths"]

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


@dataclass(frozen=True, eq=False, repr=False)
class QCReport(Display):
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
    #: The SequenceRun (None for a plain batch or a results table).
    run: Any = None
    #: Per-sequence calibrations built from the sequence's own standards.
    calibrations: dict[str, Any] = field(default_factory=dict)
    #: Every method used, by label.
    methods: dict[str, Any] = field(default_factory=dict)
    #: The per-injection results (for review figures), by results-table row.
    injections: dict[int, Any] = field(default_factory=dict)


_LABEL_DTYPES = {c: str for c in ("sample_id", "file", "role", "product", "batch", "sequence", "status",
                                  "warnings", "error", "molar-mass scale")}


def _read_results_table(path: Path) -> pd.DataFrame:
    if not path.exists():
        raise InputFormatError("results table not found; give results.csv written by 'gpctools batch'",
                               path=path)
    from gpctools.io import file_kind

    file_kind(path)  # folder, empty file, image or binary: clear message
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
    names = (label_text(v) for v in table["file"].tolist())
    return [("chromatogram", str(base / f)) for f in names if f]


def _from_batch(results: Any, method: Any, calibration: Any) -> _Inputs:
    """Inputs from a :class:`gpctools.batch.BatchResult` (curves of samples and check standards)."""
    inp = _Inputs(table=results.table, method=method or results.method, source=str(results.sheet))
    inp.files.append(("batch sheet", str(results.sheet)))
    inp.files.extend(("chromatogram", str(e.path)) for e in results.entries if e.file)
    for k, (entry, res) in enumerate(zip(results.entries, results.injections or [], strict=False)):
        if res is None:
            continue
        inp.injections[k] = res
        role = role_of(entry.role)
        if role in (ROLE_SAMPLE, ROLE_CHECK, ROLE_REPLICATE):
            group = "check standards" if role == ROLE_CHECK else (
                label_text(entry.metadata.get("product")) or "(no product)")
            d = res.distribution
            inp.curves.append((group, entry.sample_id, np.asarray(d.M), np.asarray(d.dwdlogM)))
    inp.calibration = calibration if calibration is not None else results.calibration
    return inp


def _read_manifest(path: Path) -> dict[str, Any]:
    """``manifest.json`` beside a results table (empty when there is none)."""
    if not path.exists():
        return {}
    try:
        info = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise InputFormatError(f"cannot read the batch manifest: {exc}", path=path) from None
    if not isinstance(info, dict):
        raise InputFormatError(
            "the batch manifest is not a JSON object; write it again with 'gpctools batch' "
            "or remove it", path=path)
    return info


def _folder_curves(folder: Path) -> list[tuple[str, str, np.ndarray, np.ndarray]]:
    """Distribution tables written beside a results table (unreadable ones are skipped)."""
    curves = []
    if folder.is_dir():
        for f in sorted(folder.glob("*.csv")):
            try:
                d = pd.read_csv(f)
                curves.append(("all injections", f.stem, d["M [g/mol]"].to_numpy(float),
                               d["dw/dlogM [-]"].to_numpy(float)))
            except (OSError, KeyError, ValueError, pd.errors.ParserError):
                continue
    return curves


def _long_form_curves(path: Path) -> list[tuple[str, str, np.ndarray, np.ndarray]]:
    """The curves of a batch's long-form ``distributions.csv`` (skipped when unreadable)."""
    if not path.is_file():
        return []
    try:
        d = pd.read_csv(path)
        curves = []
        for (sid, _, _), part in d.groupby(["sample_id", "file", "sheet row [-]"], sort=False):
            row = int(part["sheet row [-]"].iloc[0])
            curves.append(("all injections", f"{sid}_row{row}", part["M [g/mol]"].to_numpy(float),
                           part["dw/dlogM [-]"].to_numpy(float)))
        return curves
    except (OSError, KeyError, ValueError, TypeError, pd.errors.ParserError):
        return []


def _from_file(path: Path, method: Any, calibration: Any) -> _Inputs:
    """Inputs from ``results.csv`` and what ``gpctools batch`` wrote beside it."""
    table = _read_results_table(path)
    inp = _Inputs(table=table, method=method, source=str(path))
    inp.files.append(("results table", str(path)))
    manifest = path.parent / "manifest.json"
    info = _read_manifest(manifest)
    if manifest.exists():
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
    folder_curves = _folder_curves(path.parent / "distributions")
    inp.curves.extend(folder_curves or _long_form_curves(path.parent / "distributions.csv"))
    return inp


def _from_sequence(run: Any, method: Any, calibration: Any) -> _Inputs:
    """Inputs from a :class:`gpctools.qc.SequenceRun`: its calibrations, methods, traces."""
    inp = _from_batch(run, method or run.method, calibration if calibration is not None else run.method.calibration)
    inp.run = run
    inp.calibrations = dict(run.calibrations)
    inp.methods = dict(run.methods)
    for label, m in run.methods.items():
        if getattr(m, "source", None):
            inp.files.append((f"method ({label})", str(m.source)))
    folder = Path(run.sheet).parent
    for e in run.entries:
        f = label_text({str(k).casefold(): v for k, v in e.metadata.items()}.get("standards file"))
        if f:
            inp.files.append(("standards mix", str(folder / f)))
    return inp


def _resolve_results(results: Any, method: Any, calibration: Any) -> _Inputs:
    method = _method_from(method)
    if hasattr(results, "calibrations") and hasattr(results, "standards"):  # gpctools.qc.SequenceRun
        inp = _from_sequence(results, method, calibration)
    elif hasattr(results, "table") and hasattr(results, "entries"):  # gpctools.batch.BatchResult
        inp = _from_batch(results, method, calibration)
    elif isinstance(results, pd.DataFrame):
        inp = _Inputs(table=results, method=method, source="results table (in memory)")
        inp.calibration = calibration if calibration is not None else (
            method.calibration if method is not None else None)
    elif isinstance(results, (str, os.PathLike)):
        inp = _from_file(Path(results), method, calibration)
    else:
        raise DataError(
            f"run_qc needs a BatchResult, a results DataFrame or the path of results.csv, "
            f"got {type(results).__name__}"
        )
    if inp.method is not None and inp.reference_flow_marker is None:
        inp.reference_flow_marker = getattr(inp.method, "marker_reference", None)
    return inp


def history_paths(item: str | os.PathLike[str]) -> list[Path]:
    """The results tables one ``--history`` value names: a file, a folder (its ``*.csv`` and
    ``*.xlsx`` files, sorted by name) or a glob pattern (sorted).

    Raises
    ------
    InputFormatError
        Nothing matches.
    """
    import glob

    p = Path(item)
    if p.is_dir():
        found = sorted(q for q in p.iterdir() if q.suffix.lower() in (".csv", ".xlsx") and q.is_file())
        if not found:
            raise InputFormatError("the history folder holds no .csv or .xlsx results table", path=p)
        return found
    if any(ch in str(item) for ch in "*?["):
        found = sorted(Path(x) for x in glob.glob(str(item)) if Path(x).is_file())
        if not found:
            raise InputFormatError("no file matches this history pattern", path=str(item))
        return found
    return [p]


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
            for p in history_paths(h):
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
    points: dict[str, Any] = {"fit": title, "run": list(getattr(fit, "run_ids", ()))}
    for j, t in enumerate(getattr(fit, "terms", ())):
        if design.shape[0] == len(points["run"]) and j < design.shape[1]:
            points[f"{t} column [-]"] = design[:, j]
    points["1/DPn observed [-]"] = np.asarray(getattr(fit, "y", []), float)
    points["1/DPn fitted [-]"] = np.asarray(getattr(fit, "fitted", []), float)
    return pd.DataFrame(rows), pd.DataFrame(points)


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
    rows.append(("points breaking a run rule [-]", result.trend_signals, result.settings.rule_set_name))
    cal = result.calibration or {}
    if cal:
        rows.append(("calibration R² [-]", cal.get("R^2 [-]"), ""))
        rows.append(("calibration worst residual [%]", cal.get("worst residual [%]"), ""))
        rows.append(("molar-mass scale", cal.get("molar-mass scale"), ""))
    for b in result.decisions.batches:
        rows.append((f"batch {b.batch}", b.decision, "; ".join(b.reasons)))
    for v in result.decisions.injections:
        if v.verdict != PASS:
            rows.append((f"injection {v.sample_id} (row {v.position + 1}, {v.role})", v.verdict, "; ".join(v.reasons)))
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
    ev = _evaluate(results, specs, method=method, calibration=calibration, history=history,
                   transfer=transfer, settings=settings, timestamp=timestamp)
    sheets = _workbook_sheets(ev)
    if outdir is None:
        return QCReport(ev.result, ev.audit, {}, sheets)
    written = _write_reports(ev, sheets, Path(outdir), title=title, plots=plots)
    return QCReport(ev.result, ev.audit, written, sheets)


@dataclass(frozen=True)
class _Evaluated:
    """Everything :func:`run_qc` knows before it writes."""

    inp: _Inputs
    spec_sheet: SpecSheet
    settings: QCSettings
    result: QCResult
    audit: AuditTrail
    #: Transfer fits by title, and their (constants, points) tables in the same order.
    items: list[tuple[str, Any]]
    transfer_tables: list[tuple[pd.DataFrame, pd.DataFrame]]


def _evaluate(results: Any, specs: SpecSheet | str | os.PathLike[str], *, method: Any,
              calibration: Any, history: Any, transfer: Any, settings: QCSettings | None,
              timestamp: str | None) -> _Evaluated:
    """Step 1: read the inputs, evaluate QC and build the audit trail (nothing written)."""
    inp = _resolve_results(results, method, calibration)
    if settings is None:
        settings = inp.run.settings if inp.run is not None else QCSettings.from_method(inp.method)
    spec_sheet = specs if isinstance(specs, SpecSheet) else read_specs(specs)
    hist_tables, hist_files = _history_tables(history)
    result = evaluate_qc(inp.table, spec_sheet, calibration=inp.calibration,
                         reference_flow_marker=inp.reference_flow_marker, history=hist_tables,
                         settings=settings, calibrations=inp.calibrations or None)
    files = list(inp.files)
    if spec_sheet.path:
        files.append(("spec sheet", spec_sheet.path))
    if settings.source:
        files.append(("QC settings", settings.source))
    files.extend(("reference distribution", p.reference) for p in settings.products if p.reference)
    files.extend(hist_files)
    audit_settings = {
        "qc": settings.summary(),
        "reference flow marker [mL]": inp.reference_flow_marker,
        "history tables": len(hist_tables),
        "method settings": dict(getattr(inp.method, "settings", {}) or {}),
        "methods used": {label: {"path": getattr(m, "source", None), "sha256": getattr(m, "sha256", None)}
                         for label, m in inp.methods.items()},
        "sequence calibrations": {k: {"standards": len(c.Mp), "order": c.order, "R^2 [-]": c.r_squared}
                                  for k, c in inp.calibrations.items()},
    }
    audit = build_audit(inputs=files, method=inp.method, settings=audit_settings, timestamp=timestamp)
    items = _transfer_items(transfer)
    return _Evaluated(inp, spec_sheet, settings, result, audit, items,
                      [_transfer_tables(t, f) for t, f in items])


def _workbook_sheets(ev: _Evaluated) -> dict[str, pd.DataFrame]:
    """Step 2: the workbook's tables by sheet name (also returned when nothing is written)."""
    from gpctools.report import qc_pages as Q

    result = ev.result
    sheets: dict[str, pd.DataFrame] = {
        "summary": _summary_frame(result, ev.audit, ev.inp.source),
        "batches": result.decisions.batches_frame(),
        "samples": result.decisions.samples_frame(),
        "injections": Q.injections_sheet(ev.inp.table, result.decisions),
        "specs": ev.spec_sheet.to_frame(),
        "calibration": _calibration_frame(result.calibration),
        "suitability": _suitability_sheet(result),
        "replicates": Q.replicates_frame(result),
        "trends": _trends_sheet(result),
        "trend signals": result.trend_violations_frame(),
    }
    if result.calibrations:
        sheets["sequence calibration"] = Q.sequence_calibration_frame(result)
        sheets["standards located"] = Q.standards_frame(ev.inp.run)
    if ev.inp.run is not None and ev.inp.run.blanks:
        sheets["blanks"] = Q.blanks_frame(ev.inp.run, ev.inp.table)
    if ev.items:
        sheets["transfer"] = pd.concat([c for c, _ in ev.transfer_tables], ignore_index=True)
        sheets["transfer points"] = pd.concat([p for _, p in ev.transfer_tables], ignore_index=True)
    sheets["audit"] = ev.audit.to_frame()
    return sheets


@dataclass
class _Figures:
    """PNG figures for the HTML page (``html.figure`` dicts), by section."""

    calibration: list[dict[str, str]] = field(default_factory=list)
    distributions: list[dict[str, str]] = field(default_factory=list)
    transfer: list[dict[str, str]] = field(default_factory=list)
    #: One entry per control chart (None when it was not drawn).
    charts: list[dict[str, str] | None] = field(default_factory=list)
    #: Review figure of each sample injection, by results-table row.
    reviews: dict[int, dict[str, str]] = field(default_factory=dict)
    #: Calibration-standard injections with their located peaks; blanks.
    standards: list[dict[str, str]] = field(default_factory=list)
    blanks: list[dict[str, str]] = field(default_factory=list)


def _draw_plots(ev: _Evaluated, out: Path) -> tuple[dict[str, Path], _Figures]:
    """Step 3: draw and write ``plots/*.png``; returns the files and the HTML figures."""
    from gpctools.report import html as H
    from gpctools.report import plots as P

    written: dict[str, Path] = {}
    figs = _Figures(charts=[None] * len(ev.result.trends))

    def save(name: str, png: bytes) -> None:
        written[f"plots/{name}.png"] = write_bytes(out / "plots" / f"{name}.png", png)

    if ev.result.calibration:
        cal = ev.inp.calibration if hasattr(ev.inp.calibration, "standards_table") else ev.result.calibration
        png = P.png_bytes(P.calibration_figure(
            cal, residual_limit_pct=ev.settings.suitability.max_calibration_residual_pct))
        save("calibration", png)
        figs.calibration.append(H.figure(png, "Calibration curve (standards and fit) with the "
                                              "residual of each standard; band: acceptance limit."))
    groups: dict[str, list[tuple[str, np.ndarray, np.ndarray]]] = {}
    for g, label, M, y in ev.inp.curves:
        groups.setdefault(g, []).append((label, M, y))
    seen: set[str] = set()
    for g, curves in groups.items():
        png = P.png_bytes(P.plot_distributions(curves, title=f"Distributions: {g}").figure)
        save(unique_name(f"distributions_{safe_name(g, 'plot')}", seen), png)
        figs.distributions.append(H.figure(png, f"dw/dlogM of each injection, {g}."))
    for k, chart in enumerate(ev.result.trends):
        png = P.png_bytes(P.plot_control_chart(chart).figure)
        save(f"control_{k + 1:02d}_{safe_name(chart.group, 'plot')}_{safe_name(chart.quantity, 'plot')}", png)
        figs.charts[k] = H.figure(png, f"Individuals chart of {chart.quantity} for {chart.group}: "
                                       "centre line, ±1/2/3 sigma; circled points break a run rule.")
    for k, (t, f) in enumerate(ev.items):
        png = P.png_bytes(P.plot_mayo(f, title=f"Mayo plot: {t}").figure)
        save(f"mayo_{k + 1:02d}_{safe_name(t, 'plot')}", png)
        figs.transfer.append(H.figure(png, f"1/DPn against the agent ratio with the fitted line, {t}."))
    _sequence_plots(ev, figs, save, seen)
    return written, figs


def _sequence_plots(ev: _Evaluated, figs: _Figures, save: Any, seen: set[str]) -> None:
    """Sequence calibrations, located standards, blanks and one review per sample injection."""
    from gpctools.report import html as H
    from gpctools.report import plots as P
    from gpctools.report import qc_pages as Q

    for seq, cal in ev.inp.calibrations.items():
        png = P.png_bytes(P.calibration_figure(cal, residual_limit_pct=ev.settings.suitability.max_calibration_residual_pct))
        save(unique_name(f"calibration_{safe_name(seq, 'sequence')}", seen), png)
        figs.calibration.append(H.figure(png, f"Calibration of sequence {seq} from its own standard injections "
                                              "(located peak volumes) with each standard's residual; band: limit."))
    run = ev.inp.run
    table = ev.inp.table
    if run is not None:
        for pos, (V, h) in run.traces.items():
            sid = label_text(table[C.SAMPLE_ID].iloc[pos])
            peaks = [(s.name, s.peak.volume) for s in run.standards if s.position == pos]
            if peaks:
                png = P.png_bytes(P.plot_standard_peaks(V, h, peaks, title=f"{sid}: located standards").figure)
                save(unique_name(f"standards_{safe_name(sid, 'injection')}", seen), png)
                figs.standards.append(H.figure(png, f"{sid}: each standard's peak top located by a parabola "
                                                    "through the slices above 80 % of its height."))
            elif pos in run.blanks:
                windows = [f.window for f in run.blanks[pos]]
                lim = (min(w[0] for w in windows), max(w[1] for w in windows)) if windows else None
                png = P.png_bytes(P.plot_trace_review(V, h, limits=lim, exclusions=run.method.exclusions,
                                                      title=f"{sid}: blank").figure)
                save(unique_name(f"blank_{safe_name(sid, 'injection')}", seen), png)
                figs.blanks.append(H.figure(png, f"{sid}: blank trace with the widest product window."))
    refs = {p.product.casefold(): p.reference for p in ev.settings.products if p.reference}
    roles = [role_of(v) for v in table[C.ROLE].tolist()] if C.ROLE in table.columns else []
    for pos, res in sorted(ev.inp.injections.items()):
        if roles and roles[pos] not in (ROLE_SAMPLE, ROLE_REPLICATE):
            continue
        product = label_text(table[C.PRODUCT].iloc[pos]) if C.PRODUCT in table.columns else ""
        ref = refs.get(product.casefold())
        sid = label_text(table[C.SAMPLE_ID].iloc[pos])
        trace, dist = Q.review_inputs(res, title=sid, reference=Q.read_reference(ref) if ref else None,
                                      reference_label=f"reference {product}")
        png = P.png_bytes(P.review_figure(trace, dist))
        save(unique_name(f"review_{safe_name(sid, 'sample')}_row{pos + 1}", seen), png)
        figs.reviews[pos] = H.figure(png, f"{sid}, results row {pos + 1}: raw trace with fitted baseline, "
                                          "baseline windows (green), limits, excluded regions (hatched) and flow "
                                          "marker; below, dw/dlogM with Mn, Mw and Mp"
                                          + (" and the product's reference distribution." if ref else "."))


def _write_reports(ev: _Evaluated, sheets: dict[str, pd.DataFrame], out: Path, *,
                   title: str | None, plots: bool) -> dict[str, Path]:
    """Step 4: plots, workbook, HTML page, QC summary and audit trail into ``out``."""
    from gpctools.report import html as H
    from gpctools.report.xlsx import write_workbook

    out.mkdir(parents=True, exist_ok=True)
    written: dict[str, Path] = {}
    figs = _Figures(charts=[None] * len(ev.result.trends))
    if plots:
        written, figs = _draw_plots(ev, out)
    written["qc_report.xlsx"] = write_workbook(out / "qc_report.xlsx", sheets)
    written["qc_report.html"] = H.write_html(out / "qc_report.html", _html_context(ev, title, figs))
    written["qc_summary.json"] = write_text(
        out / "qc_summary.json",
        json.dumps(clean_json(ev.result.summary()), indent=2, ensure_ascii=False, default=str) + "\n")
    written["audit.json"] = write_text(out / "audit.json", ev.audit.to_json())
    return written


def _suitability_context(result: QCResult) -> list[dict[str, Any]]:
    from gpctools.report import html as H

    suit = []
    for s in result.suitability:
        df = s.to_frame().drop(columns=["sequence", "comparison"]).rename(
            columns={"value": "value [unit as in check]", "limit": "limit [unit as in check]"})
        notes = [f"Replicate precision of {r.quantity} ({r.rule} rule): {r.false_fail_text()}."
                 for r in s.replicates if r.groups]
        suit.append({"sequence": s.sequence, "tag": "pass" if s.passed else "fail",
                     "text": "pass" if s.passed else "fail", "notes": notes,
                     # each row's value and limit formatted as the quantity its check names
                     "table": H.table_context(df, unit_from="check")})
    return suit


def _charts_context(result: QCResult, figs: _Figures) -> list[dict[str, Any]]:
    from gpctools.report import html as H

    charts = []
    for chart, fig in zip(result.trends, figs.charts, strict=False):
        rows = [{"point": v.label, chart.quantity: v.value, "rule": v.rule, "side": v.side,
                 "description": v.description} for v in chart.violations]
        df = pd.DataFrame(rows, columns=["point", chart.quantity, "rule", "side", "description"])
        limits = (f"centre {H.format_value(chart.centre, chart.quantity)[0]}, sigma "
                  f"{H.format_value(chart.sigma, chart.quantity)[0]} "
                  f"(limits frozen on {int(chart.sets_limits.sum())} of {len(chart.labels)} points)")
        notes = [f"Baseline: {chart.baseline or 'all points'}.", f"Rules: {chart.rule_set}."]
        if chart.false_alarm is not None:
            notes.append(chart.false_alarm.text()[0].upper() + chart.false_alarm.text()[1:] + ".")
        charts.append({"title": f"{chart.group}: {chart.quantity}; {limits}",
                       "note": " ".join(notes),
                       "figure": fig or {"src": "", "caption": "plot not drawn", "alt": "no plot"},
                       "table": H.table_context(df, empty="No run rule broken.")})
    return charts


def _html_context(ev: _Evaluated, title: str | None, figs: _Figures) -> dict[str, Any]:
    """The template's context: every section of the page as plain values."""
    from gpctools.report import html as H
    from gpctools.report import qc_pages as Q

    result, audit, inp, spec_sheet = ev.result, ev.audit, ev.inp, ev.spec_sheet
    overall = _overall(result)
    counts = result.decisions.counts()
    inj_cols = [c for c in _INJECTION_COLUMNS if c in inp.table.columns]
    transfer = []
    for k, (t, _f) in enumerate(ev.items):
        consts, _pts = ev.transfer_tables[k]
        transfer.append({"title": t, "figure": figs.transfer[k] if k < len(figs.transfer) else None,
                         "table": H.table_context(consts)})
    audit_df = audit.to_frame()
    audit_df = audit_df[audit_df["section"] != "method text"]
    samples = result.decisions.samples_frame()
    keep = [c for c in samples.columns if c not in _HTML_SAMPLE_HIDDEN]
    if "notes" in samples.columns and not samples["notes"].astype(str).str.len().any():
        keep.remove("notes")
    samples = samples[keep]
    inj = Q.injections_sheet(inp.table, result.decisions)
    inj_cols = [c for c in (C.SAMPLE_ID, C.ROLE, C.PRODUCT, C.BATCH, C.SEQUENCE, C.STATUS, C.MN, C.MW,
                            C.DISPERSITY, C.VERDICT, C.SPEC_VERDICT, C.VERDICT_REASONS) if c in inj.columns]
    return {
        "verdicts": H.table_context(inj[inj_cols]),
        "sequence_calibrations": [{"sequence": k, "table": H.table_context(pd.DataFrame(v.get("standards_table", [])))}
                                  for k, v in result.calibrations.items()],
        "standards_located": H.table_context(Q.standards_frame(inp.run), empty=""),
        "standards_figures": figs.standards,
        "blanks": H.table_context(Q.blanks_frame(inp.run, inp.table),
                                  empty="No blank in this run (role 'blank')."),
        "blank_figures": figs.blanks,
        "blank_limit": ev.settings.suitability.max_blank_peak_pct,
        "sample_pages": Q.sample_pages(result, figs.reviews),
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
        "injections": H.table_context(inp.table[[c for c in _INJECTION_COLUMNS if c in inp.table.columns]]),
        "suitability": _suitability_context(result),
        "calibration_items": H.table_context(_calibration_items(result.calibration), unit_from="item",
                                             empty="No calibration was supplied."),
        "calibration_figures": figs.calibration,
        "standards": H.table_context(_calibration_frame(result.calibration)),
        "distribution_figures": figs.distributions,
        "rule_set_note": (f"Shewhart individuals charts, sigma = mean moving range / 1.128, limits frozen on a "
                          f"baseline period ({ev.settings.baseline.describe() if ev.settings.baseline else 'auto'}); "
                          f"run rules: {ev.settings.rule_set_name}: "
                          + "; ".join(f"{r.code} {r.description}" for r in ev.settings.rules) + "."),
        "charts": _charts_context(result, figs),
        "transfer": transfer,
        "audit": H.table_context(audit_df),
        "method_text": audit.method_text or "",
    }
