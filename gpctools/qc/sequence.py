"""A whole QC sequence in one run: calibration standards, blanks, check standards, samples.

:func:`run_sequence` reads a batch sheet whose ``role`` column describes the sequence as
a lab runs it and processes each injection by its role:

``calibration_standard``
    its narrow standards are located (:mod:`gpctools.qc.standards_run`) and every such
    injection of a sequence together builds **that sequence's calibration**, which then
    processes the sequence's other injections (the method's calibration otherwise);
``blank``
    never processed as a sample (no averages of noise, no failed row): it is checked
    for peaks inside each product's integration window (:mod:`gpctools.qc.blanks`), and
    with ``blank_subtraction`` it is subtracted from the sequence's other injections;
``check_standard``, ``sample``, ``replicate``
    processed by :func:`gpctools.batch.iter_batch` with the method of their row: the QC
    settings may give a product an integration window in molar mass or a method file of
    its own (check standards included); these are expanded into the rows' overrides
    (:class:`gpctools.method.MethodOverrides`) and ``method file`` unless the batch sheet
    sets them for that row itself. Limits in molar mass are converted with the sequence's
    calibration. Every method used is recorded with its SHA-256 (``method file``,
    ``method SHA-256`` and ``overrides`` of each row).

Nothing is written: :func:`gpctools.report.run_qc` writes the reports. The result has the
attributes of a :class:`gpctools.batch.BatchResult` (``table``, ``injections``,
``entries``, ``method``, ``sheet``), so :func:`gpctools.report.write_batch` writes its
results table too.

A sequence's own calibration replaces the calibration of every method its rows use
(:func:`dataclasses.replace`; the order, polymers and Mark-Houwink conversion stay each
method's, :func:`gpctools.qc.standards_run.calibration_from_standards`).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.batch import (
    RESULT_COLUMNS,
    BatchEntry,
    InjectionResult,
    iter_batch,
    load_batch_methods,
    process_trace,
    read_batch_sheet,
)
from gpctools.calibration import Calibration
from gpctools.display import Display
from gpctools.errors import CalibrationError, GpcError, InputFormatError
from gpctools.method import Method, MethodOverrides
from gpctools.qc import _table as T
from gpctools.qc.blanks import BlankFinding, ProductWindow, check_blank, subtract_blank
from gpctools.qc.settings import QCSettings
from gpctools.qc.standards_run import (
    LocatedStandard,
    calibration_from_standards,
    injection_standards,
    locate_marker,
    locate_peaks,
)
from gpctools.sheets import batch as _roles
from gpctools.sheets import cells

__all__ = ["SequenceRun", "run_sequence", "method_label", "expand_products"]


def method_label(method: Method) -> str:
    """``"<file name> (SHA-256 <first 12 hex digits>)"`` of a method, for tables."""
    name = Path(method.source).name if method.source else (method.name or "method (in memory)")
    return f"{name} (SHA-256 {method.sha256[:12]})" if method.sha256 else name


@dataclass(repr=False)
class SequenceRun(Display):
    """Everything :func:`run_sequence` computed (nothing written).

    Attributes
    ----------
    table : pandas.DataFrame
        One row per injection, in sheet order: the batch result columns for processed
        injections; ``blank peak [% of product peak]`` and ``blank check`` for blanks;
        ``standards located`` and ``worst standard residual [%]`` for calibration
        standards; ``calibration`` and ``sheet row [-]`` for all (``method file``,
        ``method SHA-256`` and ``overrides`` for processed rows).
    injections : list of InjectionResult or None
        Same order; None for blanks, calibration standards and failed rows.
    entries : list of BatchEntry
    method : Method
        The method the run was started with.
    sheet : str
    calibrations : dict
        Sequence -> the calibration built from its own standard injections.
    methods : dict
        Label (:func:`method_label`) -> every method used.
    standards : tuple of LocatedStandard
    blanks : dict
        Row position -> the blank's findings per product.
    traces : dict
        Row position -> (flow-corrected volume [mL], raw signal) of blanks and
        calibration standards (for review plots).
    settings : QCSettings
    warnings : tuple of str
    """

    table: pd.DataFrame
    injections: list[InjectionResult | None]
    entries: list[BatchEntry]
    method: Method
    sheet: str
    calibrations: dict[str, Calibration] = field(default_factory=dict)
    methods: dict[str, Method] = field(default_factory=dict)
    standards: tuple[LocatedStandard, ...] = ()
    blanks: dict[int, list[BlankFinding]] = field(default_factory=dict)
    traces: dict[int, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)
    settings: QCSettings = field(default_factory=QCSettings)
    warnings: tuple[str, ...] = ()

    @property
    def calibration(self) -> Calibration:
        """The first sequence's own calibration, else the method's."""
        return next(iter(self.calibrations.values()), self.method.calibration)

    @property
    def failed(self) -> int:
        """Failed sample, replicate and check-standard injections (blanks and calibration
        standards are judged, not counted here).
        """
        role = T.roles(self.table)
        bad = ~T.ok_mask(self.table) & np.isin(role, (*T.SAMPLE_ROLES, T.ROLE_CHECK))
        return int(bad.sum())

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"sheet": self.sheet, "injections": len(self.entries), "failed": self.failed,
                "methods": {k: m.sha256 for k, m in self.methods.items()},
                "sequence calibrations": {k: c.summary() for k, c in self.calibrations.items()},
                "standards located": [s.summary() for s in self.standards],
                "warnings": list(self.warnings)}


@dataclass
class _State:
    """Work in progress of one run (rows and results by position)."""

    entries: list[BatchEntry]
    method: Method
    settings: QCSettings
    folder: Path
    sequence: list[str]
    rows: dict[int, dict[str, Any]] = field(default_factory=dict)
    results: dict[int, InjectionResult | None] = field(default_factory=dict)
    traces: dict[int, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)
    markers: dict[int, float | None] = field(default_factory=dict)
    calibrations: dict[str, Calibration] = field(default_factory=dict)
    standards: list[LocatedStandard] = field(default_factory=list)
    methods: dict[str, Method] = field(default_factory=dict)
    blanks: dict[int, list[BlankFinding]] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)

    def positions(self, *roles: str) -> list[int]:
        return [i for i, e in enumerate(self.entries) if _roles.role_of(e.role) in roles]


def _base_row(e: BatchEntry) -> dict[str, Any]:
    row: dict[str, Any] = {C.SAMPLE_ID: e.sample_id, C.FILE: e.file, C.ROLE: e.role, **e.metadata}
    for c in RESULT_COLUMNS:
        row.setdefault(c, math.nan if C.describe(c).unit else "")
    row[C.STATUS] = "ok"
    row[C.SHEET_ROW] = e.row
    return row


def _error(row: dict[str, Any], message: str) -> dict[str, Any]:
    row[C.STATUS] = "error"
    row[C.ERROR] = message
    return row


def _refuse_unknown_roles(entries: list[BatchEntry]) -> None:
    for e in entries:
        if e.problem and "unknown role" in e.problem:
            raise InputFormatError(e.problem)


def _trace(st: _State, i: int, method: Method) -> tuple[np.ndarray, np.ndarray, float | None]:
    """Raw trace of one entry on the flow-corrected volume axis, and its observed marker."""
    from gpctools.io import read_chromatogram

    e = st.entries[i]
    if e.problem:
        raise InputFormatError(e.problem)
    chrom = read_chromatogram(e.path, **method.import_options.as_kwargs())
    V = np.asarray(chrom.to_volume(method.flow_rate), dtype=float)
    h = np.asarray(chrom.signal, dtype=float)
    marker = e.marker_observed
    if marker is None and method.marker_search is not None:
        marker = locate_marker(V, h, method.marker_search)
        if marker is None:
            st.warnings.append(f"{e.sample_id} (row {e.row}): no flow-marker peak in "
                               f"{method.marker_search[0]:g}-{method.marker_search[1]:g} mL; its volumes "
                               "are not corrected")
    if marker is not None and method.marker_reference is not None:
        factor = method.marker_reference / marker
        if abs(factor - 1.0) > 0.05:
            raise InputFormatError(f"flow marker at {marker:.3f} mL is more than 5 % from the reference "
                                   f"{method.marker_reference:.3f} mL: check the marker peak or the search window",
                                   path=e.path)
        V = V * factor
    return V, h, marker


def _standards(st: _State) -> None:
    """Locate the standards of every calibration-standard injection; fit each sequence."""
    m = st.method
    by_seq: dict[str, list[LocatedStandard]] = {}
    for i in st.positions(_roles.ROLE_CALIBRATION):
        e = st.entries[i]
        row = st.rows[i] = _base_row(e)
        try:
            stds = injection_standards(e.metadata, e.sample_id, m.calibration, st.folder)
            V, h, marker = _trace(st, i, m)
            cal = m.calibration
            skip = (*m.exclusions, *((m.marker_search,) if m.marker_search else ()))
            peaks = locate_peaks(V, h, len(stds), windows=m.windows, exclusions=skip,
                                 search=(cal.v_min - 1.5, cal.v_max + 1.5))
        except GpcError as exc:
            _error(row, str(exc) if exc.path else f"{e.path}: {exc}")
            continue
        st.traces[i] = (V, h)
        row[C.FLOW_MARKER] = math.nan if marker is None else marker
        stds = sorted(stds, key=lambda s: -s[1])  # elution order: highest Mp first
        loc = [LocatedStandard(n, mp, p, e.sample_id, i, st.sequence[i]) for (n, mp), p in zip(stds, peaks, strict=True)]
        by_seq.setdefault(st.sequence[i], []).extend(loc)
        row[C.STANDARDS_LOCATED] = "; ".join(f"{s.name} {s.peak.volume:.3f} mL" for s in loc)
    for seq, loc in by_seq.items():
        try:
            cal = calibration_from_standards(loc, m)
        except CalibrationError as exc:
            st.warnings.append(f"sequence {seq}: its calibration-standard injections cannot build a "
                               f"calibration ({exc.message}); the method's calibration is used")
            continue
        st.calibrations[seq] = cal
        st.standards.extend(loc)
        resid = dict(zip(range(len(loc)), cal.residuals_pct, strict=False))
        order = np.argsort([s.peak.volume for s in loc], kind="stable")  # fit_calibration sorts by volume
        by_pos: dict[int, list[float]] = {}
        for k, j in enumerate(order):
            by_pos.setdefault(loc[int(j)].position, []).append(resid[k])
        for pos, rs in by_pos.items():
            st.rows[pos][C.WORST_STANDARD_RESIDUAL] = max(rs, key=abs)


def expand_products(entries: list[BatchEntry], settings: QCSettings) -> list[BatchEntry]:
    """Per-product settings as per-row overrides: a product's molar-mass window becomes the
    row's ``limits_M`` and its method file the row's ``method file``, unless the batch sheet
    gives that row limits or a method file itself (the row wins).
    """
    out = []
    for e in entries:
        ps = settings.product(cells.text(e.metadata.get(C.PRODUCT)))
        if ps is None or _roles.role_of(e.role) not in (*T.SAMPLE_ROLES, T.ROLE_CHECK):
            out.append(e)
            continue
        if ps.limits and e.overrides.limits is None and e.overrides.limits_M is None:
            e = replace(e, overrides=MethodOverrides(limits_M=ps.limits, windows=e.overrides.windows))
        if ps.method and e.method_path is None:
            e = replace(e, method_file=ps.method, method_path=Path(ps.method))
        out.append(e)
    return out


def _sequence_methods(st: _State, seq: str, methods: dict[str, Method]) -> tuple[Method, dict[str, Method]]:
    """The run's method and the row methods with the sequence's own calibration, if it has one."""
    if seq not in st.calibrations:
        return st.method, methods
    located = [s for s in st.standards if s.sequence == seq]
    own = {k: replace(m, calibration=calibration_from_standards(located, m)) for k, m in methods.items()}
    return replace(st.method, calibration=st.calibrations[seq]), own


def _blank_traces(st: _State) -> dict[str, list[tuple[np.ndarray, np.ndarray]]]:
    """Read every blank (flow-corrected); error rows for those that cannot be read."""
    out: dict[str, list[tuple[np.ndarray, np.ndarray]]] = {}
    for i in st.positions(_roles.ROLE_BLANK):
        e = st.entries[i]
        row = st.rows[i] = _base_row(e)
        try:
            V, h, marker = _trace(st, i, st.method)
        except GpcError as exc:
            _error(row, str(exc) if exc.path else f"{e.path}: {exc}")
            continue
        row[C.FLOW_MARKER] = math.nan if marker is None else marker
        st.traces[i] = (V, h)
        out.setdefault(st.sequence[i], []).append((V, h))
    return out


def _subtracted(st: _State, items: list[tuple[int, BatchEntry]], method: Method, methods: dict[str, Method],
                blank: tuple[np.ndarray, np.ndarray], on_result: Any) -> None:
    """Process entries with the sequence's blank subtracted first (each with its row's method)."""
    for i, e in items:
        m = methods.get(str(e.method_path), method) if e.method_path is not None else method
        used = m.with_overrides(e.overrides)
        try:
            V, h, marker = _trace(st, i, used)
            h2 = subtract_blank(V, h, *blank)
            factor = (used.marker_reference / marker) if (marker is not None and used.marker_reference) else 1.0
            res = process_trace(V / factor, h2, used, sample_id=e.sample_id, file=e.file,
                                marker_observed=marker if used.marker_reference else None)
        except GpcError as exc:
            st.rows[i] = _error(_base_row(e), str(exc) if exc.path else f"{e.path}: {exc}")
            st.results[i] = None
            continue
        row = _base_row(e)
        row.update(res.row())
        lo, hi = res.corrected.limits
        M_lo, M_hi = (float(x) for x in used.calibration.M([lo, hi]))
        row.update({C.FILE: e.file, C.INTEGRATION_START: lo, C.INTEGRATION_END: hi,
                    C.M_AT_INTEGRATION_START: M_lo, C.M_AT_INTEGRATION_END: M_hi,
                    C.METHOD_FILE: e.method_file or m.label, C.METHOD_SHA256: m.sha256 or "",
                    C.OVERRIDES: e.overrides.describe()})
        row[C.WARNINGS] = "; ".join(filter(None, [row.get(C.WARNINGS, ""), "blank subtracted"]))
        st.rows[i] = row
        st.results[i] = res
        if on_result is not None:
            on_result(e, res)


def _process(st: _State, blanks: dict[str, list[tuple[np.ndarray, np.ndarray]]], *, workers: int | None,
             on_result: Any, progress: Callable[[int, int], None] | None) -> None:
    """Samples, replicates and check standards, sequence by sequence, each with its row's
    method (per-product settings expanded into the rows' overrides and method files).
    """
    idx_all = st.positions(*T.SAMPLE_ROLES, T.ROLE_CHECK)
    rows = expand_products([st.entries[i] for i in idx_all], st.settings)
    rows, methods = load_batch_methods(rows, st.method, "the batch sheet")
    for m in methods.values():
        st.methods.setdefault(method_label(m), m)
    by_seq: dict[str, list[tuple[int, BatchEntry]]] = {}
    for i, e in zip(idx_all, rows, strict=True):
        by_seq.setdefault(st.sequence[i], []).append((i, e))
    done, total = 0, len(st.entries)
    for seq, items in by_seq.items():
        m, ms = _sequence_methods(st, seq, methods)
        calib = (f"sequence {seq}: own standards ({sum(s.sequence == seq for s in st.standards)})"
                 if seq in st.calibrations else "method's standards table")
        if st.settings.blank_subtraction and blanks.get(seq):
            _subtracted(st, items, m, ms, blanks[seq][0], on_result)
        else:
            for (i, _), (row, res) in zip(items, iter_batch([e for _, e in items], m, methods=ms, workers=workers,
                                                            on_result=on_result, keep=True), strict=True):
                st.rows[i] = {**row, C.SHEET_ROW: st.entries[i].row}
                st.results[i] = res
        for i, _ in items:
            st.rows[i][C.SEQUENCE_CALIBRATION] = calib
        done += len(items)
        if progress is not None:
            progress(done, total)


def _product_windows(st: _State, seq: str) -> list[ProductWindow]:
    """Each product's limits, baseline windows and peak height in one sequence."""
    by_product: dict[str, list[InjectionResult]] = {}
    for i, res in st.results.items():
        if res is not None and st.sequence[i] == seq:
            product = cells.text(st.entries[i].metadata.get(C.PRODUCT)) or st.entries[i].sample_id
            by_product.setdefault(product, []).append(res)
    out = []
    for product, results in by_product.items():
        cs = [r.corrected for r in results]
        lo = min(c.limits[0] for c in cs)
        hi = max(c.limits[1] for c in cs)
        height = float(np.mean([np.max(c.signal[c.mask]) for c in cs]))
        out.append(ProductWindow(product, (lo, hi), cs[0].baseline.windows, height))
    return out


def _check_blanks(st: _State) -> None:
    for i in st.positions(_roles.ROLE_BLANK):
        if i not in st.traces:
            continue
        row = st.rows[i]
        windows = _product_windows(st, st.sequence[i])
        if not windows:
            row[C.BLANK_DETAILS] = "no processed injection in this sequence to compare with"
            continue
        found = check_blank(*st.traces[i], windows, exclusions=st.method.exclusions)
        st.blanks[i] = found
        if found:
            worst = max(found, key=lambda f: f.peak_pct)
            row[C.BLANK_PEAK] = worst.peak_pct
            row[C.BLANK_DETAILS] = "; ".join(f.text() for f in found)


def _table(st: _State) -> pd.DataFrame:
    rows = [st.rows[i] for i in range(len(st.entries))]
    meta = list(st.entries[0].metadata) if st.entries else []
    front = [C.SAMPLE_ID, C.FILE, C.ROLE, *meta]
    qc_cols = [C.SEQUENCE_CALIBRATION, C.STANDARDS_LOCATED, C.WORST_STANDARD_RESIDUAL,
               C.BLANK_PEAK, C.BLANK_DETAILS, C.SHEET_ROW]
    df = pd.DataFrame(rows)
    for c in qc_cols:
        if c not in df.columns:
            df[c] = math.nan if C.describe(c).unit else ""
    rest = [c for c in df.columns if c not in front and c not in qc_cols]
    return df[[c for c in front if c in df.columns] + rest + qc_cols]


def run_sequence(sheet: str | Path, method: Method, settings: QCSettings | None = None, *,
                 sheet_name: str | int | None = None, workers: int | None = 1, on_result: Any = None,
                 progress: Callable[[int, int], None] | None = None) -> SequenceRun:
    """Process a QC sequence described by a batch sheet (see the module documentation).

    Parameters
    ----------
    sheet : str or Path
        The batch sheet (CSV or XLSX); roles ``calibration_standard``, ``blank``,
        ``check_standard``, ``sample``, ``replicate``.
    method : Method
        The method of the run (calibration order and standards table, baseline,
        integration, flow marker).
    settings : QCSettings, optional
        Per-product windows and methods, blank subtraction.
    sheet_name : str or int, optional
        Workbook sheet of the batch sheet.
    workers : int or None
        Processes per product group (see :func:`gpctools.batch.iter_batch`).
    on_result : callable, optional
        ``on_result(entry, result)`` for every processed sample and check standard (e.g.
        :class:`gpctools.report.DistributionWriter`).
    progress : callable, optional
        ``progress(done, total)``.

    Returns
    -------
    SequenceRun

    Raises
    ------
    InputFormatError
        An unknown role (the message lists the known ones), an unreadable sheet.
    """
    settings = settings or QCSettings()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        entries = read_batch_sheet(sheet, sheet=sheet_name)
    for w in caught:  # repeated ids are the sequence's replicates and check standards: expected here
        if "sample ids on more than one row" not in str(w.message):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    _refuse_unknown_roles(entries)
    seqs = [cells.text(e.metadata.get(C.SEQUENCE)) or T.ALL_SEQUENCES for e in entries]
    st = _State(entries, method, settings, Path(sheet).parent, seqs)
    st.methods[method_label(method)] = method
    _standards(st)
    blanks = _blank_traces(st)
    _process(st, blanks, workers=workers, on_result=on_result, progress=progress)
    _check_blanks(st)
    return SequenceRun(
        table=_table(st), injections=[st.results.get(i) for i in range(len(entries))], entries=entries,
        method=method, sheet=str(sheet), calibrations=dict(st.calibrations), methods=dict(st.methods),
        standards=tuple(st.standards), blanks=dict(st.blanks), traces=dict(st.traces), settings=settings,
        warnings=tuple(st.warnings))
