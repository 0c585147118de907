"""gpctools: SEC/GPC slice exports to calibrated molar-mass averages and chain-transfer analysis.

The science lives in small modules named after what a chemist looks for:
:mod:`gpctools.io` (reading exports), :mod:`gpctools.signal` (baseline, limits),
:mod:`gpctools.calibration`, :mod:`gpctools.distribution` (averages), :mod:`gpctools.batch`,
:mod:`gpctools.transfer` (Mayo and related fits), :mod:`gpctools.kinetics` (recipe
prediction and diagnosis), :mod:`gpctools.qc` and :mod:`gpctools.report`.
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__"]
