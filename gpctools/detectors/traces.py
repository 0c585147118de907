"""The traces of one injection on all detectors, and how they are put on one axis.

All channels of a slice export share one x column. :class:`DetectorTraces` holds that
volume axis and, per detector name of the :class:`~.instrument.DetectorSetup`, the
baseline-corrected signal:

- RI / UV: shape (n,);
- light scattering: shape (n, m), one column per angle in the order of the set-up's
  ``angles`` (shape (n,) for one angle);
- viscometer: shape (n, 2) [differential, reference] for the pressure designs or (n,)
  for ``"specific viscosity"`` (see :func:`.viscometry.specific_viscosity`).

Combining slices (docs/science.md, section 13-1.3):

1. **Offset.** Detector X sees the fluid element of concentration slice V at V + Δ_X,
   so its trace is read there (linear interpolation; beyond the ends the end value).
2. **Broadening.** Traces are made equally broad before ratios are formed: the less
   broadened of the two is convolved with the difference, a Gaussian of variance
   σ²_more − σ²_less (C6) and, when only the more broadened one has an exponential
   tail τ, with that tail too (exact: a Gaussian convolved with an exponential is the
   EMG). The noisier trace is never deconvolved. When both have tails the extra tail is
   approximated by an exponential of the same added variance, √(τ²_more − τ²_less).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.errors import DataError

from ._common import as_array
from .broadening import Spreading, convolve
from .instrument import (
    ConcentrationDetector,
    Detector,
    DetectorSetup,
    LightScatteringDetector,
    Viscometer,
)

__all__ = ["DetectorTraces", "align", "matching_spreading", "concentration"]


@dataclass(frozen=True)
class DetectorTraces:
    """One injection: a common volume axis and a signal array per detector.

    Parameters
    ----------
    volume : array_like
        Elution volume of each slice [mL] (time exports are converted with the flow rate
        before). Unsorted or decreasing axes are sorted, the signals with them.
    signals : mapping
        Detector name -> baseline-corrected signal [detector units] (shapes above).
    name : str
        Sample or injection name for messages.
    """

    volume: np.ndarray
    signals: Mapping[str, np.ndarray]
    name: str = "injection"
    warnings: tuple[str, ...] = field(default=())

    def __post_init__(self) -> None:
        V = as_array(self.volume, f"{self.name}: volume")
        if V.size < 10:
            raise DataError(f"{self.name}: at least 10 slices are needed, got {V.size}")
        order = np.argsort(V, kind="stable")
        V = V[order]
        if np.any(np.diff(V) <= 0):
            raise DataError(f"{self.name}: the volume axis repeats a value; each slice needs its own volume")
        sig: dict[str, np.ndarray] = {}
        for key, arr in self.signals.items():
            a = as_array(arr, f"{self.name}: signal of detector {key!r}", ndim=None)
            if a.ndim not in (1, 2) or a.shape[0] != V.size:
                raise DataError(
                    f"{self.name}: detector {key!r} has {a.shape[0] if a.ndim else 0} rows, the volume "
                    f"axis {V.size}"
                )
            a = a[order]
            a.setflags(write=False)
            sig[key] = a
        V.setflags(write=False)
        object.__setattr__(self, "volume", V)
        object.__setattr__(self, "signals", sig)

    def __getitem__(self, name: str) -> np.ndarray:
        try:
            return self.signals[name]
        except KeyError:
            raise DataError(
                f"{self.name}: no trace for detector {name!r} (traces given: "
                f"{', '.join(self.signals) or 'none'})"
            ) from None

    def check(self, setup: DetectorSetup, names: tuple[str, ...] | None = None) -> None:
        """Refuse traces whose shape does not fit the set-up's detectors ``names``."""
        for d in (setup[n] for n in (names or tuple(self.signals))):
            a = self[d.name]
            if isinstance(d, ConcentrationDetector) and a.ndim != 1:
                raise DataError(f"{self.name}: the {d.kind} trace {d.name!r} must be one column")
            if isinstance(d, LightScatteringDetector):
                m = 1 if a.ndim == 1 else a.shape[1]
                if m != len(d.angles):
                    raise DataError(
                        f"{self.name}: light-scattering trace {d.name!r} has {m} channels but the set-up "
                        f"lists {len(d.angles)} angles (detectors.{d.name}.angles)"
                    )
            if isinstance(d, Viscometer):
                m = 1 if a.ndim == 1 else a.shape[1]
                if m != d.channels:
                    raise DataError(
                        f"{self.name}: viscometer trace {d.name!r} has {m} columns; design "
                        f"{d.design!r} needs {d.channels} (detectors.{d.name}.design)"
                    )


def align(volume: np.ndarray, signal: np.ndarray, offset: float) -> np.ndarray:
    """Read a trace at V + Δ for each concentration slice V (docs/science.md, section 13).

    Parameters
    ----------
    volume : numpy.ndarray
        Increasing volume axis [mL].
    signal : numpy.ndarray
        Shape (n,) or (n, m) [detector units].
    offset : float
        Δ = V_detector − V_concentration [mL].
    """
    if offset == 0.0:
        return np.array(signal, dtype=float)
    x = volume + offset
    if signal.ndim == 1:
        return np.interp(x, volume, signal)
    return np.column_stack([np.interp(x, volume, signal[:, j]) for j in range(signal.shape[1])])


def matching_spreading(less: Spreading, more: Spreading) -> Spreading:
    """Extra spreading that makes ``less`` as broad as ``more`` (C6).

    σ_extra² = σ²_more − σ²_less (zero if negative); τ_extra = τ_more when ``less`` has
    no tail, else √(τ²_more − τ²_less) (a variance-matching approximation).
    """
    s2 = max(more.sigma**2 - less.sigma**2, 0.0)
    t2 = max(more.tau**2 - less.tau**2, 0.0)
    tau = more.tau if less.tau == 0.0 else math.sqrt(t2)
    return Spreading(math.sqrt(s2), tau)


def _spread(volume: np.ndarray, signal: np.ndarray, g: Spreading) -> np.ndarray:
    if g.is_zero():
        return signal
    if signal.ndim == 1:
        return convolve(volume, signal, g)
    return np.column_stack([convolve(volume, signal[:, j], g) for j in range(signal.shape[1])])


def matched_pair(volume: np.ndarray, conc: np.ndarray, other: np.ndarray, conc_det: Detector,
                 det: Detector, *, match: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Concentration and another detector's trace on the same axis and equally broad.

    The exponential tail of a matching kernel is applied with its mean shift (an
    exponential mixing volume delays the peak); the offset Δ is applied before.
    """
    x = align(volume, other, det.offset)
    c = np.array(conc, dtype=float)
    if match:
        c = _spread(volume, c, matching_spreading(conc_det.broadening, det.broadening))
        x = _spread(volume, x, matching_spreading(det.broadening, conc_det.broadening))
    return c, x


def concentration(detector: ConcentrationDetector, signal: Any) -> np.ndarray:
    """Mass concentration per slice, c = S/(k_RI·dn/dc) or S/response [g/mL] (C1-C2, C5)."""
    f = detector.factor
    if f is None or f == 0.0:
        missing = ("constant and dn_dc" if detector.kind == "RI" else "response")
        raise DataError(
            f"the {detector.kind} detector {detector.name!r} has no {missing}: give "
            f"detectors.{detector.name}.{missing.split(' ')[0]} or calibrate it with a narrow standard "
            "of known injected mass"
        )
    return np.asarray(signal, dtype=float) / f
