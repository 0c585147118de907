"""Reports a lab can file: XLSX workbook, self-contained HTML, PNG plots, audit trail.

Public API
----------
run_qc(results, specs, outdir=None, *, method=None, calibration=None, history=None,
       transfer=None, settings=None, title=None, timestamp=None, plots=True) -> QCReport
    Evaluate QC (:mod:`gpctools.qc`) for one batch and write ``qc_report.xlsx``,
    ``qc_report.html``, ``plots/*.png``, ``qc_summary.json`` and ``audit.json``.
write_workbook(path, sheets) -> Path
    Tables to XLSX with numbers kept numeric and formula-like text made inert.
build_audit(*, inputs=(), method=None, settings=None, timestamp=None) -> AuditTrail
sha256_file(path) -> str

matplotlib and openpyxl are imported only inside the functions that draw or write.
"""

from __future__ import annotations

from gpctools.report.audit import AuditTrail, InputFile, build_audit, sha256_file
from gpctools.report.qc_report import EXIT_FINDINGS, EXIT_OK, QCReport, run_qc
from gpctools.report.xlsx import FORMULA_START, inert_cell, write_workbook

__all__ = [
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
