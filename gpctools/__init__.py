"""gpctools: SEC/GPC slice exports to calibrated molar-mass averages and chain-transfer analysis.

The science lives in small modules named after what a chemist looks for:
:mod:`gpctools.io` (reading exports), :mod:`gpctools.signal` (baseline, limits),
:mod:`gpctools.calibration`, :mod:`gpctools.distribution` (averages), :mod:`gpctools.batch`,
:mod:`gpctools.transfer` (Mayo and related fits), :mod:`gpctools.kinetics` (recipe
prediction and diagnosis), :mod:`gpctools.qc` and :mod:`gpctools.report`.

In a notebook, ``import gpctools as gpc`` gives the main entry points by name
(:data:`ENTRY_POINTS`): ``gpc.load_method``, ``gpc.run_batch``, ``gpc.process_injection``,
``gpc.analyse_series``, ``gpc.diagnose_recipe``, ``gpc.write_review``, ``gpc.plots``, ...
They are loaded on first use (PEP 562 module ``__getattr__``), so ``import gpctools``
itself stays cheap (no numpy, pandas or matplotlib) and the command line starts fast.
"""

from __future__ import annotations

from importlib import import_module
from typing import Any

__version__ = "0.1.0"

#: Name -> "module:attribute" (or "module" for a whole module) of the entry points that
#: ``gpctools.<name>`` gives. A facade only: they are looked up at first use, by name, so
#: this package's ``__init__`` imports nothing of the layers above it (see DEVELOPERS.md).
ENTRY_POINTS: dict[str, str] = {
    # reading and one injection
    "read_chromatogram": "gpctools.io:read_chromatogram",
    "describe_export": "gpctools.io.describe:describe_export",
    "load_method": "gpctools.method:load_method",
    "fit_calibration": "gpctools.calibration:fit_calibration",
    "compute_distribution": "gpctools.distribution:compute_distribution",
    "process_injection": "gpctools.batch:process_injection",
    "process_trace": "gpctools.batch:process_trace",
    # batches
    "read_batch_sheet": "gpctools.batch:read_batch_sheet",
    "run_batch": "gpctools.batch:run_batch",
    # run series, recipes, QC
    "read_run_series": "gpctools.transfer:read_run_series",
    "analyse_series": "gpctools.transfer:analyse_series",
    "load_recipe": "gpctools.kinetics:load_recipe",
    "predict": "gpctools.kinetics:predict",
    "diagnose_recipe": "gpctools.kinetics.inputs:diagnose_recipe",
    "run_sequence": "gpctools.qc.sequence:run_sequence",
    "run_qc": "gpctools.report:run_qc",
    # files and plots
    "write_batch": "gpctools.report:write_batch",
    "write_review": "gpctools.report.review:write_review",
    "write_transfer": "gpctools.report:write_transfer",
    "write_diagnosis": "gpctools.report:write_diagnosis",
    "plots": "gpctools.report.plots",
    "columns": "gpctools.columns",
    "errors": "gpctools.errors",
}

__all__ = ["__version__", "ENTRY_POINTS", *ENTRY_POINTS]


def __getattr__(name: str) -> Any:
    """Load an entry point of :data:`ENTRY_POINTS` on first use (PEP 562)."""
    target = ENTRY_POINTS.get(name)
    if target is None:
        raise AttributeError(f"module 'gpctools' has no attribute {name!r}")
    module, _, attr = target.partition(":")
    value = import_module(module)
    if attr:
        value = getattr(value, attr)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(ENTRY_POINTS))
