"""A whole batch: one batch sheet plus one method gives one result row per injection.

The batch sheet (CSV or XLSX) has one row per injection:

=====================  ==========================================================
column                 meaning
=====================  ==========================================================
``sample_id``          required; repeated ids are replicate injections
``file``               required; slice export, path relative to the sheet
``role``               optional: ``sample`` (default), ``check_standard``, ``blank``
``flow marker [mL]``   optional: observed marker position of that injection
anything else          free metadata (``product``, ``batch``, ``sequence``,
                       ``assigned Mw [g/mol]``, ...), copied to the results
=====================  ==========================================================

One failing injection does not stop the batch: it gets a row with ``status = "error"``
and its message, and :attr:`BatchResult.failed` counts it. Inputs are only read; this
module writes nothing: :func:`gpctools.report.write_batch` writes the outputs, and
``on_result=`` (e.g. :class:`gpctools.report.DistributionWriter`) receives each injection
as it finishes, so a long batch can stream its distribution tables to disk.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from . import columns as C
from .distribution import (
    Distribution,
    averages,
    compute_distribution,
    peak_position,
    slice_widths,
)
from .errors import DataError, GpcError, GpcWarning
from .method import Method
from .sheets import batch as _sheet
from .signal import CorrectedSignal, correct_signal

__all__ = [
    "InjectionResult",
    "BatchEntry",
    "BatchResult",
    "process_injection",
    "process_trace",
    "read_batch_sheet",
    "run_batch",
    "iter_batch",
    "ResultSink",
    "RESULT_COLUMNS",
]

ROLES = _sheet.ROLES

#: Result columns in order (metadata columns of the sheet are inserted after ``role``);
#: names, units and meanings in :mod:`gpctools.columns`.
RESULT_COLUMNS = (
    C.STATUS,
    C.MN,
    C.MW,
    C.MZ,
    C.MZ1,
    C.MP,
    C.MP_DWDLOGM,
    C.DISPERSITY,
    C.OUTSIDE_CALIBRATION,
    C.BASELINE_WINDOWS,
    C.LIMITS,
    C.FLOW_MARKER,
    C.FLOW_FACTOR,
    C.MN_SHIFT_LOW_M,
    C.MW_SHIFT_LOW_M,
    C.LIMIT_SHIFT,
    C.SCALE,
    C.WARNINGS,
    C.ERROR,
)


@dataclass(frozen=True)
class InjectionResult:
    """Everything computed for one injection.

    Attributes
    ----------
    sample_id, file : str
    distribution : Distribution
    corrected : CorrectedSignal
        Baseline-corrected trace on the flow-corrected volume axis.
    marker_observed : float or None
        Observed flow-marker position [mL] (from the sheet or found in the search window).
    flow_factor : float
        Volume correction factor reference/observed [-] (1 without a marker).
    Mn_shift_pct, Mw_shift_pct : float
        Change of Mn and Mw when the low-M (high-volume) integration limit is moved
        ``limit_shift`` mL earlier [%]; a large Mn change with a small Mw change points
        to a low-M tail or system peak inside the limits (SCIENCE.md section 9).
    limit_shift : float
        That move of the low-M limit [mL] (method key ``thresholds.limit_shift``).
    scale : str
        Molar-mass scale (absolute or standard-equivalent).
    warnings : tuple of str
    metadata : dict
        Free-text metadata of the export file.
    """

    sample_id: str
    file: str
    distribution: Distribution
    corrected: CorrectedSignal
    marker_observed: float | None
    flow_factor: float
    Mn_shift_pct: float
    Mw_shift_pct: float
    limit_shift: float
    scale: str
    warnings: tuple[str, ...] = ()
    metadata: dict[str, str] = field(default_factory=dict)

    def row(self) -> dict[str, Any]:
        """Result-table row; columns as in :data:`RESULT_COLUMNS` (:mod:`gpctools.columns`).

        Headers never depend on a setting: the low-M limit move is its own column,
        ``low-M limit shift [mL]``.
        """
        d = self.distribution
        bw = self.corrected.baseline.windows
        lim = self.corrected.limits
        return {
            C.SAMPLE_ID: self.sample_id,
            C.FILE: self.file,
            C.STATUS: "ok",
            C.MN: d.Mn,
            C.MW: d.Mw,
            C.MZ: d.Mz,
            C.MZ1: d.Mz1,
            C.MP: d.Mp,
            C.MP_DWDLOGM: d.Mp_dwdlogM,
            C.DISPERSITY: d.dispersity,
            C.OUTSIDE_CALIBRATION: 100.0 * d.outside_fraction,
            C.BASELINE_WINDOWS: (
                f"{bw[0][0]:.3f}-{bw[0][1]:.3f}; {bw[1][0]:.3f}-{bw[1][1]:.3f}"
                + (" (auto)" if self.corrected.baseline.automatic else "")
            ),
            C.LIMITS: f"{lim[0]:.3f}-{lim[1]:.3f}" + (" (auto)" if self.corrected.automatic_limits else ""),
            C.FLOW_MARKER: self.marker_observed if self.marker_observed is not None else float("nan"),
            C.FLOW_FACTOR: self.flow_factor,
            C.MN_SHIFT_LOW_M: self.Mn_shift_pct,
            C.MW_SHIFT_LOW_M: self.Mw_shift_pct,
            C.LIMIT_SHIFT: self.limit_shift,
            C.SCALE: self.scale,
            C.WARNINGS: "; ".join(self.warnings),
            C.ERROR: "",
        }

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe description of the injection and its results."""
        return {
            C.SAMPLE_ID: self.sample_id,
            C.FILE: self.file,
            "distribution": self.distribution.summary(),
            "signal": self.corrected.summary(),
            C.FLOW_MARKER: self.marker_observed,
            C.FLOW_FACTOR: self.flow_factor,
            "Mn shift [%]": self.Mn_shift_pct,
            "Mw shift [%]": self.Mw_shift_pct,
            C.LIMIT_SHIFT: self.limit_shift,
            C.SCALE: self.scale,
            C.WARNINGS: list(self.warnings),
        }


def _find_marker(volume: np.ndarray, signal: np.ndarray, window: tuple[float, float]) -> float:
    """Flow-marker peak position inside ``window`` [mL].

    A straight line through the window's end points is removed and the largest
    deviation (positive or negative: refractive-index markers are often negative) is
    refined with a parabola.
    """
    m = (volume >= window[0]) & (volume <= window[1])
    if m.sum() < 5:
        raise DataError(
            f"flow-marker search window {window[0]:g}-{window[1]:g} mL holds too few slices; "
            "set flow_marker.search around the marker peak"
        )
    V = volume[m]
    h = signal[m]
    k = max(1, V.size // 20)
    line = np.interp(V, [V[:k].mean(), V[-k:].mean()], [h[:k].mean(), h[-k:].mean()])
    dev = h - line
    if abs(dev.min()) > abs(dev.max()):
        dev = -dev
    return peak_position(V, dev)


def process_trace(
    volume: Any,
    signal: Any,
    method: Method,
    *,
    sample_id: str = "",
    file: str = "",
    marker_observed: float | None = None,
    metadata: dict[str, str] | None = None,
) -> InjectionResult:
    """Process one trace already on the volume axis (see :func:`process_injection`)."""
    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GpcWarning)
        factor = 1.0
        if marker_observed is None and method.marker_search is not None:
            marker_observed = _find_marker(V, h, method.marker_search)
        if marker_observed is not None:
            if method.marker_reference is None:
                raise DataError(
                    "a flow-marker position was given but the method has no flow_marker.reference"
                )
            if not (math.isfinite(marker_observed) and marker_observed > 0):
                raise DataError(f"flow-marker position must be a positive volume, got {marker_observed!r}")
            factor = method.marker_reference / marker_observed
            if abs(factor - 1.0) > 0.05:
                raise DataError(
                    f"flow marker at {marker_observed:.3f} mL is more than 5 % from the reference "
                    f"{method.marker_reference:.3f} mL: check the marker peak or the search window"
                )
            V = V * factor
        cs = correct_signal(V, h, windows=method.windows, limits=method.limits, exclusions=method.exclusions)
        dist = compute_distribution(
            V, cs.signal, method.calibration, mask=cs.mask,
            outside=method.outside, outside_warn_pct=method.outside_warn_pct,
        )
        # Sensitivity of Mn and Mw to the low-M (late) integration limit.
        shifted = cs.mask & (V <= cs.limits[1] - method.limit_shift)
        try:
            # Widths need increasing volumes; give them back in the caller's slice order.
            order = np.argsort(V, kind="stable")
            dV = np.empty_like(V)
            dV[order] = slice_widths(V[order])
            wts = cs.signal[shifted] * dV[shifted]
            alt = averages(method.calibration.M(V[shifted]), wts)
            mn_shift = 100.0 * (alt["Mn"] / dist.Mn - 1.0)
            mw_shift = 100.0 * (alt["Mw"] / dist.Mw - 1.0)
        except DataError:
            mn_shift = mw_shift = float("nan")
    notes = tuple(dict.fromkeys(str(w.message) for w in caught if issubclass(w.category, GpcWarning)))
    for w in caught:
        if not issubclass(w.category, GpcWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return InjectionResult(
        sample_id=sample_id,
        file=file,
        distribution=dist,
        corrected=cs,
        marker_observed=marker_observed,
        flow_factor=factor,
        Mn_shift_pct=mn_shift,
        Mw_shift_pct=mw_shift,
        limit_shift=method.limit_shift,
        scale=method.calibration.scale_label(),
        warnings=notes,
        metadata=dict(metadata or {}),
    )


def process_injection(
    path: str | Path,
    method: Method,
    *,
    sample_id: str | None = None,
    marker_observed: float | None = None,
) -> InjectionResult:
    """Read and process one slice export.

    Steps: read (:func:`gpctools.io.read_chromatogram` with the method's import options),
    convert time to volume with the flow rate, correct volumes with the flow marker
    (V_corr = V·V_ref/V_obs, SCIENCE.md section 2), subtract the baseline, apply limits
    and exclusions (:func:`gpctools.signal.correct_signal`), compute the distribution and
    averages (:func:`gpctools.distribution.compute_distribution`) and the Mn/Mw
    sensitivity to the low-M limit.

    Parameters
    ----------
    path : str or Path
        The export file.
    method : Method
    sample_id : str, optional
        Defaults to the file stem.
    marker_observed : float, optional
        Observed flow-marker position [mL]; otherwise searched for when the method has
        ``flow_marker.search``.

    Raises
    ------
    GpcError
        Any reading or processing problem, with the file named.
    """
    from .io import read_chromatogram

    p = Path(path)
    chrom = read_chromatogram(p, **method.import_options.as_kwargs())
    V = chrom.to_volume(method.flow_rate)
    try:
        return process_trace(
            V, chrom.signal, method,
            sample_id=sample_id if sample_id is not None else p.stem,
            file=str(path), marker_observed=marker_observed, metadata=chrom.metadata,
        )
    except GpcError as exc:
        if exc.path is None:
            exc.path = str(path)
        raise


# -- the batch sheet ----------------------------------------------------------------------
@dataclass(frozen=True)
class BatchEntry:
    """One row of the batch sheet, checked.

    Attributes
    ----------
    row : int
        The sheet row (1-based, as the user counts).
    sample_id, file : str
        As written (``sample_id`` is ``"(row N)"`` when the cell is empty).
    path : Path
        The export, resolved against the sheet's folder.
    role : str
        ``sample``, ``check_standard`` or ``blank``.
    marker_observed : float or None
        Observed flow-marker position [mL].
    metadata : dict
        The sheet's other columns (``None`` for blank cells).
    problem : str or None
        Why the row cannot be processed (it becomes an error row of the batch).
    """

    row: int
    sample_id: str
    file: str
    path: Path
    role: str
    marker_observed: float | None
    metadata: dict[str, Any]
    problem: str | None = None


def read_batch_sheet(path: str | Path, *, sheet: str | int | None = None) -> list[BatchEntry]:
    """Read and check a batch sheet (schema :data:`gpctools.sheets.BATCH`).

    Parameters
    ----------
    path : str or Path
        The batch sheet (CSV or XLSX); export paths are relative to its folder.
    sheet : str or int, optional
        Workbook sheet (name or 0-based index).

    Returns
    -------
    list of BatchEntry
        One per injection row, in sheet order.

    Raises
    ------
    InputFormatError
        The sheet cannot be read, lacks the ``sample_id`` or ``file`` column, or has no
        rows. Problems of single rows (empty file cell, unknown role, bad marker value) do
        not raise: the entry carries a ``problem`` and becomes an error row of the batch.
    """
    from .sheets import BATCH, read_file

    p = Path(path)
    table = read_file(p, BATCH, sheet=sheet, collect=True)
    entries = []
    for row in table.rows:
        sid = row["sample_id"] or f"(row {row.row})"
        f = row["file"]
        fp = (p.parent / f) if f else p.parent
        entries.append(BatchEntry(row.row, sid, f, fp, row.get("role", _sheet.ROLE_SAMPLE),
                                  row.get("flow_marker"), dict(row.metadata), row.problem))
    return entries


# -- running a batch ----------------------------------------------------------------------
#: Receives each processed injection: ``on_result(entry, result)``, called in the process
#: that computed it (a worker process when ``workers > 1``, so it must then be picklable:
#: a module-level function or an instance of a module-level class).
ResultSink = Callable[[BatchEntry, InjectionResult], None]


def _error_row(entry: BatchEntry, message: str) -> dict[str, Any]:
    row = {C.SAMPLE_ID: entry.sample_id, C.FILE: entry.file, C.ROLE: entry.role, **entry.metadata}
    for c in RESULT_COLUMNS:
        row.setdefault(c, float("nan") if C.describe(c).unit else "")
    row[C.STATUS] = "error"
    row[C.ERROR] = message
    return row


def _run_entry(
    entry: BatchEntry, method: Method, on_result: ResultSink | None, keep: bool
) -> tuple[dict[str, Any], InjectionResult | None]:
    """Process one entry; returns (row, result-or-None). Never raises for bad data.

    ``on_result`` is called with each processed injection (not for failed rows); what it
    raises (e.g. a full disk) stops the batch.
    """
    if entry.problem:
        return _error_row(entry, entry.problem), None
    try:
        res = process_injection(entry.path, method, sample_id=entry.sample_id, marker_observed=entry.marker_observed)
    except GpcError as exc:
        return _error_row(entry, str(exc)), None
    except Exception as exc:  # one bad injection must not sink the batch
        return _error_row(entry, f"{entry.path}: unexpected {type(exc).__name__}: {exc}"), None
    row = {C.SAMPLE_ID: entry.sample_id, C.FILE: entry.file, C.ROLE: entry.role, **entry.metadata}
    row.update(res.row())
    row[C.FILE] = entry.file
    if on_result is not None:
        on_result(entry, res)
    return row, (res if keep else None)


def _worker(
    args: tuple[BatchEntry, Method, ResultSink | None, bool],
) -> tuple[dict[str, Any], InjectionResult | None]:
    entry, method, on_result, keep = args
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return _run_entry(entry, method, on_result, keep)


@dataclass
class BatchResult:
    """Results of a batch: the table, the per-injection results and the inputs.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per injection, in sheet order (see :data:`RESULT_COLUMNS`).
    injections : list of InjectionResult or None
        Same order as the table; None for failed rows (or when not kept).
    entries : list of BatchEntry
    method : Method
    sheet : str
        Path of the batch sheet.
    """

    table: Any
    injections: list[InjectionResult | None]
    entries: list[BatchEntry]
    method: Method
    sheet: str

    @property
    def calibration(self):
        return self.method.calibration

    @property
    def failed(self) -> int:
        return int((self.table[C.STATUS] == "error").sum())

    def summary(self) -> dict[str, Any]:
        return {
            "sheet": self.sheet,
            "injections": len(self.entries),
            "failed": self.failed,
            "method": self.method.summary(),
        }


def _order_columns(df, meta_cols):
    front = [C.SAMPLE_ID, C.FILE, C.ROLE, *meta_cols]
    rest = [c for c in df.columns if c not in front]
    return df[[c for c in front if c in df.columns] + rest]


def iter_batch(
    entries: Iterable[BatchEntry],
    method: Method,
    *,
    workers: int | None = 1,
    on_result: ResultSink | None = None,
    keep: bool = True,
) -> Iterator[tuple[dict[str, Any], InjectionResult | None]]:
    """Yield (row, result) per entry in order; parallel over processes when workers > 1.

    ``workers=None`` chooses: one process for fewer than 16 injections (starting worker
    processes costs about a second), otherwise one per core, at most 4. ``on_result`` is
    called as ``on_result(entry, result)`` for every processed injection, in the process
    that computed it (see :data:`ResultSink`); ``keep=False`` then yields ``None`` results
    so that nothing but the rows reaches this process.
    """
    import os

    entries = list(entries)
    if workers is None:
        workers = min(os.cpu_count() or 1, 4) if len(entries) >= 16 else 1
    if workers <= 1 or len(entries) < 4:
        for e in entries:
            yield _run_entry(e, method, on_result, keep)
        return
    from concurrent.futures import ProcessPoolExecutor

    with ProcessPoolExecutor(max_workers=workers) as pool:
        chunk = max(1, min(32, len(entries) // (workers * 4) or 1))
        yield from pool.map(_worker, [(e, method, on_result, keep) for e in entries], chunksize=chunk)


def run_batch(
    sheet_path: str | Path,
    method: Method,
    *,
    sheet: str | int | None = None,
    workers: int | None = 1,
    keep_distributions: bool = True,
    progress: Callable[[int, int], None] | None = None,
    on_result: ResultSink | None = None,
) -> BatchResult:
    """Process every injection of a batch sheet.

    Parameters
    ----------
    sheet_path : str or Path
        The batch sheet (CSV or XLSX).
    method : Method
        From :func:`gpctools.method.load_method`.
    sheet : str or int, optional
        Workbook sheet of the batch sheet.
    workers : int or None
        Processes to use (1 = in this process, None = choose from the batch size and
        the number of cores).
    keep_distributions : bool
        Keep each :class:`InjectionResult` in memory (for plots and reports).
    progress : callable, optional
        Called as ``progress(done, total)`` after each injection.
    on_result : callable, optional
        Called as ``on_result(entry, result)`` as each injection finishes, in the process
        that computed it (see :data:`ResultSink`). Pass
        ``gpctools.report.DistributionWriter(folder)`` to write each distribution table
        while the batch runs; with ``keep_distributions=False`` memory then stays flat.

    Returns
    -------
    BatchResult
        Nothing is written; see :func:`gpctools.report.write_batch`.
    """
    import pandas as pd

    entries = read_batch_sheet(sheet_path, sheet=sheet)
    rows, results = [], []
    total = len(entries)
    for i, (row, res) in enumerate(iter_batch(entries, method, workers=workers, on_result=on_result,
                                              keep=keep_distributions), start=1):
        rows.append(row)
        results.append(res)
        if progress is not None:
            progress(i, total)
    meta_cols = list(entries[0].metadata) if entries else []
    table = _order_columns(pd.DataFrame(rows), meta_cols)
    return BatchResult(table=table, injections=results, entries=entries, method=method, sheet=str(sheet_path))

