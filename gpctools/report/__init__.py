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
markdown in :mod:`gpctools.report.markdown`. matplotlib and xlsxwriter are imported only
inside the functions that draw or write, and each public name here only on first use.
"""

from __future__ import annotations

import importlib
from typing import Any

# Public names and the module that defines each. They are imported on first use (PEP 562),
# so that `gpctools batch` does not load the QC, HTML and transfer writers it never calls.
_WHERE = {
    "write_batch": "batch",
    "DistributionWriter": "batch",
    "DistributionsTable": "batch",
    "write_transfer": "transfer",
    "write_transfer_plots": "transfer",
    "write_diagnosis": "diagnosis",
    "run_qc": "qc_report",
    "QCReport": "qc_report",
    "EXIT_OK": "qc_report",
    "EXIT_FINDINGS": "qc_report",
    "write_workbook": "xlsx",
    "inert_cell": "xlsx",
    "FORMULA_START": "xlsx",
    "build_audit": "audit",
    "AuditTrail": "audit",
    "InputFile": "audit",
    "sha256_file": "audit",
}


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'gpctools.report' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"gpctools.report.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted([*globals(), *_WHERE])


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
