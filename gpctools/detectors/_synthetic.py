"""Synthetic multi-detector injections for tests (private).

A true separated profile W(y) [g/mL] and a calibration log10 M(y) define what reaches the
detectors; every detector X then shows its own response density spread by its own total
band spreading G_X and moved downstream by its offset Δ_X:

    S_X(V) = [G_X ⊗ (W·r_X)](V − Δ_X) / gain_X + noise

with r_RI = k_RI·dn/dc, r_UV = response, r_LS(θ) = K*·M·P(θ, Rg(M)) (random coil,
Rg = Q·M^ν; the A2 term is left out), and for the viscometer u = G ⊗ (W·[η]),
η_sp = u + k_H·u² with [η] = K·M^a (dilute Huggins form). This is the exact model under
which docs/detectors.md derives the lead, the matching rule and the area relations, so tests
pair its output with those closed forms; it is not a check of itself.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from .broadening import convolve
from .instrument import (
    ConcentrationDetector,
    DetectorSetup,
    LightScatteringDetector,
    Viscometer,
)
from .scattering import coil_scattering_function, optical_constant
from .traces import DetectorTraces
from .viscometry import bridge_pressure

#: Inlet pressure of the synthetic bridge viscometer [kPa] (any positive value).
INLET_PRESSURE = 100.0


@dataclass(frozen=True)
class Polymer:
    """Sample properties that shape the detector responses.

    Attributes
    ----------
    rg_Q, rg_nu : float
        Rg = Q·M^ν [nm].
    K, a : float
        Mark-Houwink constants, K in dL/g.
    huggins : float
        k_H [-].
    """

    rg_Q: float = 0.014
    rg_nu: float = 0.585
    K: float = 1.14e-4
    a: float = 0.716
    huggins: float = 0.35


def gaussian_profile(V0: float, sigma: float, mass: float) -> Callable[[np.ndarray], np.ndarray]:
    """W(y) = mass·N(y; V0, σ²) [g/mL] (area = mass [g])."""
    def w(y: np.ndarray) -> np.ndarray:
        return np.asarray(mass * np.exp(-0.5 * ((y - V0) / sigma) ** 2) / (sigma * math.sqrt(2 * math.pi)))
    return w


def linear_log_M(A: float, B: float) -> Callable[[np.ndarray], np.ndarray]:
    """log10 M = A − B·V."""
    def f(y: np.ndarray) -> np.ndarray:
        return np.asarray(A - B * np.asarray(y, dtype=float))
    return f


def _shift(volume: np.ndarray, y: np.ndarray, offset: float) -> np.ndarray:
    # the detector sees at V what the concentration detector saw at V − Δ
    return np.interp(volume - offset, volume, y, left=y[0], right=y[-1]) if offset else y


def injection(setup: DetectorSetup, volume: np.ndarray, profile: Callable[[np.ndarray], np.ndarray],
              log_M: Callable[[np.ndarray], np.ndarray], *, polymer: Polymer | None = None,
              noise: Mapping[str, float] | None = None, seed: int = 0,
              name: str = "synthetic") -> DetectorTraces:
    """Traces of every detector of ``setup`` for the profile W and calibration log M.

    Parameters
    ----------
    noise : mapping
        Detector name -> white-noise s.d. as a fraction of that channel's maximum.
    """
    p = polymer or Polymer()
    V = np.asarray(volume, dtype=float)
    W = profile(V)
    M = 10.0 ** log_M(V)
    rng = np.random.default_rng(seed)
    noise = noise or {}
    signals: dict[str, np.ndarray] = {}
    for d in setup.detectors:
        if isinstance(d, ConcentrationDetector):
            resp = W * (d.factor if d.factor is not None else 1.0)
            out = _shift(V, convolve(V, resp, d.broadening), d.offset)
        elif isinstance(d, LightScatteringDetector):
            assert d.dn_dc is not None and d.wavelength is not None and d.solvent_refractive_index is not None
            K = optical_constant(d.dn_dc, d.wavelength, d.solvent_refractive_index)
            rg = p.rg_Q * M**p.rg_nu
            cols = []
            for theta, norm in zip(d.angles, d.normalisation):
                P = coil_scattering_function(theta, rg, d.wavelength, d.solvent_refractive_index)
                R = convolve(V, K * W * M * P, d.broadening)
                cols.append(_shift(V, R, d.offset) / ((d.constant or 1.0) * norm))
            out = np.column_stack(cols)
        elif isinstance(d, Viscometer):
            eta_ml = 100.0 * p.K * M**p.a
            u = _shift(V, convolve(V, W * eta_ml, d.broadening), d.offset)
            eta_sp = u + p.huggins * u * u
            if d.design == "specific viscosity":
                out = eta_sp / d.constant
            elif d.design == "bridge":
                out = np.column_stack([bridge_pressure(eta_sp, INLET_PRESSURE) / d.constant,
                                       np.full(V.size, INLET_PRESSURE)])
            else:
                out = np.column_stack([eta_sp * INLET_PRESSURE / d.constant, np.full(V.size, INLET_PRESSURE)])
        else:  # pragma: no cover - every kind is handled above
            continue
        sd = noise.get(d.name, 0.0)
        if sd:
            if out.ndim == 2 and d.kind == "viscometer":
                out = out.copy()
                out[:, 0] += rng.normal(0.0, sd * np.max(np.abs(out[:, 0])), V.size)
            else:
                out = out + rng.normal(0.0, sd * np.max(np.abs(out)), out.shape)
        signals[d.name] = out
    return DetectorTraces(volume=V, signals=signals, name=name)
