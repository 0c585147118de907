"""Batch outputs: the results table, the calibration, the manifest and one distribution table per injection.

Files written by :func:`write_batch` into the output folder (each atomically):

``results.csv`` and ``results.xlsx``
    one row per injection (:data:`gpctools.batch.RESULT_COLUMNS`, sheet metadata kept).
``calibration.csv``
    the standards with their fitted molar mass and residual.
``distributions.csv``
    every processed injection's distribution in one long-form table: ``sample_id``,
    ``file``, ``sheet row [-]`` and :data:`gpctools.distribution.CURVE_COLUMNS` (log10 M, M,
    dw/dlogM, cumulative mass fraction), binned on a log10 M grid of 0.01
    (:func:`gpctools.distribution.distribution_curve`); written by
    :class:`DistributionsTable` while the batch runs (the CLI default).
``distributions/<sample_id>_row<n>.csv``
    the slice table of each processed injection (:data:`gpctools.distribution.TABLE_COLUMNS`);
    ``n`` is the batch-sheet row, so replicate injections keep their own file (opt-in on
    the command line: ``gpctools batch --injection-tables``).
``manifest.json``
    gpctools version, batch sheet, counts, method settings and calibration summary (what
    ``gpctools qc`` reads back beside ``results.csv``).

A long batch writes its distribution tables while it runs: pass a
:class:`DistributionsTable` as ``on_curve`` (and, for the per-injection tables, a
:class:`DistributionWriter` as ``on_result``) to :func:`gpctools.batch.run_batch` and call
:func:`write_batch` with ``distributions=False, curves=False`` afterwards.
"""

from __future__ import annotations

import json
import os
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO

import numpy as np

from gpctools.distribution import CURVE_COLUMNS, TABLE_COLUMNS, distribution_curve
from gpctools.formatting import clean_json
from gpctools.report.files import atomic_path, safe_name, write_csv, write_text
from gpctools.report.xlsx import write_workbook

if TYPE_CHECKING:  # pragma: no cover
    from gpctools.batch import BatchEntry, BatchResult, InjectionResult
    from gpctools.distribution import Distribution, DistributionCurve
    from gpctools.qc.sequence import SequenceRun

__all__ = ["write_batch", "write_distribution", "distribution_name", "DistributionWriter", "Sinks",
           "DistributionsTable", "DISTRIBUTIONS_TABLE", "CURVES_HEADER"]

#: Sub-folder of the batch outputs that holds the per-injection distribution tables.
DISTRIBUTIONS = "distributions"
#: The long-form distributions table of a batch (one row per injection and log M bin).
DISTRIBUTIONS_TABLE = "distributions.csv"
#: Its columns: the injection (sample id, export file as written in the batch sheet,
#: batch-sheet row), then the binned curve.
CURVES_HEADER = ("sample_id", "file", "sheet row [-]", *CURVE_COLUMNS)


def distribution_name(entry: BatchEntry) -> str:
    """File name of an injection's distribution table: ``<sample_id>_row<n>.csv``.

    Parameters
    ----------
    entry : gpctools.batch.BatchEntry
        The batch-sheet row (its ``sample_id`` and 1-based ``row``).

    Returns
    -------
    str
        Unique per sheet row, so replicate injections of one sample never share a file.
    """
    return f"{safe_name(entry.sample_id, default='sample')}_row{entry.row}.csv"


def write_distribution(path: str | os.PathLike[str], dist: Distribution,
                       extra: Mapping[str, Any] | None = None) -> Path:
    """Write one distribution table as CSV (8 significant digits), atomically.

    Columns are :data:`gpctools.distribution.TABLE_COLUMNS`: volume [mL], M [g/mol],
    log10 M [-], mass fraction w [-], dw/dlogM [-] and the cumulative mass fraction [-],
    one row per slice inside the limits.

    Formatting all numbers with one %-format over a flat tuple is several times faster
    than a DataFrame writer, which matters when a batch writes thousands of tables.

    Parameters
    ----------
    path : str or os.PathLike
        Destination ``.csv`` (its folder is created).
    dist : gpctools.distribution.Distribution
    extra : mapping, optional
        Further per-slice columns on the same slices (header -> values), written after
        the distribution's: the detector quantities of an injection whose method has
        ``[detectors]`` (``M LS [g/mol]``, ``Rg [nm]``, ``[eta] [dL/g]``, composition;
        :meth:`gpctools.detectors.DetectorResult.on_volume`), empty cells where a slice
        has none.

    Returns
    -------
    pathlib.Path
    """
    cols = np.column_stack([dist.volume, dist.M, np.log10(dist.M), dist.w, dist.dwdlogM, dist.cumulative])
    line = ",".join(["%.8g"] * cols.shape[1]) + "\n"
    body = (line * cols.shape[0]) % tuple(cols.ravel().tolist())
    if not extra:
        return write_text(path, ",".join(TABLE_COLUMNS) + "\n" + body)
    names = list(extra)
    more = [np.char.mod("%.8g", np.asarray(extra[n], dtype=float)) for n in names]
    more = [np.where(np.char.find(m, "nan") >= 0, "", m) for m in more]
    rows = [a + "," + ",".join(t) for a, t in zip(body.splitlines(), zip(*more))]
    header = ",".join([*TABLE_COLUMNS, *(f'"{n}"' if "," in n else n for n in names)])
    return write_text(path, header + "\n" + "\n".join(rows) + "\n")


@dataclass(frozen=True)
class DistributionWriter:
    """Writes each injection's distribution table as the batch runs (an ``on_result`` sink).

    Picklable, so worker processes of a parallel batch write their own tables and send
    back only the result row; with ``keep_distributions=False`` the memory of a batch
    then does not grow with its length.

    Parameters
    ----------
    folder : str or os.PathLike
        Folder of the tables, usually ``<outdir>/distributions`` (created when needed).

    Examples
    --------
    >>> from gpctools.batch import run_batch                          # doctest: +SKIP
    >>> run_batch("batch.csv", method, on_result=DistributionWriter("out/distributions"))  # doctest: +SKIP
    """

    folder: str | os.PathLike[str]

    def __call__(self, entry: BatchEntry, result: InjectionResult) -> None:
        """Write ``result``'s distribution to ``folder/<sample_id>_row<n>.csv``."""
        det = getattr(result, "detectors", None)
        extra = det.on_volume(result.distribution.volume) if det is not None else None
        write_distribution(Path(self.folder) / distribution_name(entry), result.distribution, extra)


@dataclass(frozen=True)
class Sinks:
    """Several ``on_result`` sinks as one (called in order; picklable when they are).

    Examples
    --------
    >>> from gpctools.report.review import ReviewSink                  # doctest: +SKIP
    >>> run_batch(sheet, method, on_result=Sinks((DistributionWriter("out/distributions"),
    ...                                            ReviewSink("out/.review-parts"))))  # doctest: +SKIP
    """

    sinks: tuple

    def __call__(self, entry: BatchEntry, result: InjectionResult) -> None:
        """Call every sink in order with ``entry`` and ``result``."""
        for sink in self.sinks:
            sink(entry, result)


def _csv_text(value: object) -> str:
    """A CSV field (quoted when it holds a separator, quote or line break), ``%`` doubled
    for the %-format it goes into.
    """
    text = str(value)
    if any(ch in text for ch in ',"\r\n') or text != text.strip():
        text = '"' + text.replace('"', '""') + '"'
    return text.replace("%", "%%")


def _curve_lines(entry: BatchEntry, curve: DistributionCurve) -> str:
    """Rows of one injection in the long-form table (6 significant digits, CSV-quoted id)."""
    cols = np.column_stack(curve.columns())
    if cols.shape[0] == 0:
        return ""
    sid, file = _csv_text(entry.sample_id), _csv_text(entry.file)
    line = f"{sid},{file},{int(entry.row)}," + ",".join(["%.6g"] * cols.shape[1]) + "\n"
    return (line * cols.shape[0]) % tuple(cols.ravel().tolist())


class DistributionsTable:
    """Writes the long-form distributions table as the batch runs (an ``on_curve`` sink).

    Use as a context manager around :func:`gpctools.batch.run_batch`: rows go to a
    temporary file in the output folder as each injection arrives (in sheet order), and
    the file is moved onto ``path`` only when the block ends without an exception, so a
    reader never sees half a table. Memory does not grow with the batch.

    Columns are :data:`CURVES_HEADER`. Tables of several runs (one per folder or
    machine) concatenate cleanly: same header, one row per injection and bin, the
    sample id, export file and sheet row on every row (the file, as in ``results.csv``,
    tells injections of different sheets apart).

    Examples
    --------
    >>> with DistributionsTable("out/distributions.csv") as table:    # doctest: +SKIP
    ...     run_batch("batch.csv", method, on_curve=table)
    """

    def __init__(self, path: str | os.PathLike[str]) -> None:
        self.path = Path(path)
        self._context: Any = None
        self._file: TextIO | None = None

    def __enter__(self) -> DistributionsTable:
        self._context = atomic_path(self.path)
        tmp = self._context.__enter__()
        self._file = open(tmp, "w", encoding="utf-8", newline="")  # noqa: SIM115 - closed in __exit__
        self._file.write(",".join(CURVES_HEADER) + "\n")
        return self

    def __call__(self, entry: BatchEntry, curve: DistributionCurve) -> None:
        """Append ``curve``'s rows for ``entry``."""
        if self._file is None:
            raise RuntimeError("DistributionsTable is written inside a 'with' block")
        self._file.write(_curve_lines(entry, curve))

    def __exit__(self, *exc: object) -> bool:
        assert self._file is not None and self._context is not None
        self._file.close()
        self._file = None
        context, self._context = self._context, None
        return bool(context.__exit__(*exc))


def write_batch(
    result: BatchResult | SequenceRun, outdir: str | os.PathLike[str], *, distributions: bool = True,
    curves: bool = True,
) -> dict[str, Path]:
    """Write the outputs of a batch atomically (see the module docstring for the files).

    Parameters
    ----------
    result : gpctools.batch.BatchResult or gpctools.qc.sequence.SequenceRun
    outdir : str or os.PathLike
        Output folder (created).
    distributions : bool
        Also write ``distributions/*.csv`` for the injections kept in ``result``; pass
        False when a :class:`DistributionWriter` already wrote them during the batch.
    curves : bool
        Also write the long-form ``distributions.csv`` for the injections kept in
        ``result`` (when there are any); pass False when a :class:`DistributionsTable`
        already wrote it during the batch.

    Returns
    -------
    dict of str to pathlib.Path
        Written files by name relative to ``outdir`` (``"results.csv"``,
        ``"distributions/<name>.csv"``, ...).
    """
    import pandas as pd

    from gpctools import __version__

    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    paths: dict[str, Path] = {}
    paths["results.csv"] = write_csv(out / "results.csv", result.table)
    paths["results.xlsx"] = write_workbook(out / "results.xlsx", {"results": result.table})
    cal = pd.DataFrame(result.calibration.standards_table())
    paths["calibration.csv"] = write_csv(out / "calibration.csv", cal)
    if distributions:
        for entry, res in zip(result.entries, result.injections):
            if res is not None:
                name = distribution_name(entry)  # unique per row: replicates keep their own key
                det = getattr(res, "detectors", None)
                extra = det.on_volume(res.distribution.volume) if det is not None else None
                paths[f"{DISTRIBUTIONS}/{name}"] = write_distribution(out / DISTRIBUTIONS / name,
                                                                      res.distribution, extra)
    kept = [(e, r) for e, r in zip(result.entries, result.injections) if r is not None]
    if curves and kept:
        with DistributionsTable(out / DISTRIBUTIONS_TABLE) as table:
            for entry, res in kept:
                table(entry, distribution_curve(res.distribution))
        paths[DISTRIBUTIONS_TABLE] = out / DISTRIBUTIONS_TABLE
    manifest = {
        "gpctools": __version__,
        "batch sheet": result.sheet,
        "injections": len(result.entries),
        "failed": result.failed,
        "method": {k: v for k, v in result.method.summary().items() if k != "calibration"},
        # every method the batch used (a sheet may name one per row), with its hash
        "methods": [{"method file": label, "method SHA-256": m.sha256, "name": m.name}
                    for label, m in getattr(result, "methods", {}).items()],
        "warnings": list(getattr(result, "warnings", ())),
        "calibration": result.calibration.summary(),
    }
    paths["manifest.json"] = write_text(out / "manifest.json", json.dumps(clean_json(manifest), indent=2, default=str) + "\n")
    return paths
