"""Every file gpctools writes and every plot it draws.

The science packages (:mod:`gpctools.batch`, :mod:`gpctools.transfer`,
:mod:`gpctools.kinetics`, :mod:`gpctools.qc`) return results with ``summary()`` and
tables; this package turns them into files: CSV and XLSX tables, JSON summaries,
markdown, the self-contained HTML QC report, PNG figures and the audit trail. Every file
is written atomically (:mod:`gpctools.report.files`).

Public API
----------
write_batch(result, outdir, *, distributions=True, curves=True) -> dict of paths
    ``results.csv``, ``results.xlsx``, ``calibration.csv``, ``manifest.json``,
    ``distributions.csv`` (long form) and ``distributions/*.csv`` of a
    :class:`gpctools.batch.BatchResult`.
DistributionsTable(path)
    ``on_curve`` sink for :func:`gpctools.batch.run_batch`: the long-form
    ``distributions.csv`` written while the batch runs (a context manager).
DistributionWriter(folder)
    ``on_result`` sink for :func:`gpctools.batch.run_batch`: writes each distribution
    table while the batch runs.
write_transfer(result, outdir, *, plots=True) -> dict of paths
    Tables, ``summary.json`` and plots of a :class:`gpctools.transfer.TransferResult`;
    :func:`write_transfer_plots` draws the plots alone.
write_diagnosis(diagnosis, outdir, *, xlsx=True) -> dict of paths
    ``diagnosis.md``, ``diagnosis.json``, the tables and ``diagnosis.xlsx``.
run_qc(results, specs, outdir=None, *, method=None, calibration=None, history=None,
       transfer=None, settings=None, title=None, timestamp=None, plots=True) -> QCReport
    Evaluate QC (:mod:`gpctools.qc`) for one batch and write ``qc_report.xlsx``,
    ``qc_report.html``, ``plots/*.png``, ``qc_summary.json`` and ``audit.json``.
write_workbook(path, sheets) -> Path
    Tables to XLSX with numbers kept numeric and formula-like text made inert.
build_audit(*, inputs=(), method=None, settings=None, timestamp=None) -> AuditTrail
sha256_file(path) -> str

Figures live in :mod:`gpctools.report.plots` (Figure + Agg canvas, never pyplot),
markdown in :mod:`gpctools.report.markdown`. matplotlib and openpyxl are imported only
inside the functions that draw or write.
"""

from __future__ import annotations

from gpctools.report.audit import AuditTrail, InputFile, build_audit, sha256_file
from gpctools.report.batch import DistributionsTable, DistributionWriter, write_batch
from gpctools.report.diagnosis import write_diagnosis
from gpctools.report.qc_report import EXIT_FINDINGS, EXIT_OK, QCReport, run_qc
from gpctools.report.transfer import write_transfer, write_transfer_plots
from gpctools.report.xlsx import FORMULA_START, inert_cell, write_workbook

__all__ = [
    "write_batch",
    "DistributionWriter",
    "DistributionsTable",
    "write_transfer",
    "write_transfer_plots",
    "write_diagnosis",
    "run_qc",
    "QCReport",
    "EXIT_OK",
    "EXIT_FINDINGS",
    "write_workbook",
    "inert_cell",
    "FORMULA_START",
    "build_audit",
    "AuditTrail",
    "InputFile",
    "sha256_file",
]
