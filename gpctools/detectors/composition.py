"""Copolymer composition per slice from a UV and an RI detector.

Each component X contributes to each detector in proportion to its concentration, with
response factors f_X^RI = k_RI·(dn/dc)_X and f_X^UV (signal per g/mL) (docs/science.md, section 16):

    S_RI = c_A f_A^RI + c_B f_B^RI                                                   (K1)
    S_UV = c_A f_A^UV + c_B f_B^UV                                                   (K2)
    det = f_A^UV f_B^RI − f_B^UV f_A^RI
    c_A = (S_UV f_B^RI − S_RI f_B^UV)/det,  c_B = (S_RI f_A^UV − S_UV f_A^RI)/det      (K3)
    w_A = c_A/(c_A + c_B)                                                            (K4)
    (dn/dc) = w_A (dn/dc)_A + (1 − w_A)(dn/dc)_B                                      (K5)
    log M = w_A log M_A(V) + w_B log M_B(V)                                          (K7)

References
----------
Runyon, Barnes, Rudd and Tung, J. Appl. Polym. Sci. 13 (1969) 2359 (from memory); Mori and
Barth, Size Exclusion Chromatography, Springer 1999 (from memory). IUPAC Purple Book 2.1
("compositional heterogeneity").
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none

from ._common import as_array, positive
from ._slices import widths as slice_widths
from ._slices import window_mask
from .instrument import ConcentrationDetector, Copolymer, DetectorSetup
from .traces import DetectorTraces, matched_pair

__all__ = [
    "Composition",
    "composition",
    "analyse_composition",
    "copolymer_dn_dc",
    "copolymer_log_M",
]


@dataclass(frozen=True, repr=False)
class Composition(Display):
    """Per-slice composition of a two-component copolymer.

    Attributes
    ----------
    c_A, c_B : numpy.ndarray
        Component concentrations [g/mL] (in the signals' concentration unit).
    w_A : numpy.ndarray
        Mass fraction of A [-]; NaN where either signal is below ``threshold`` of its
        maximum (offset and broadening make w_A drift artificially at both peak ends).
    dn_dc : numpy.ndarray
        Composition-weighted dn/dc at the RI wavelength [mL/g] (NaN like w_A).
    overall_w_A : float
        Σc_A/Σ(c_A + c_B) from the signal areas [-]: free of offsets and broadening.
    names : tuple of str
    """

    c_A: np.ndarray
    c_B: np.ndarray
    w_A: np.ndarray
    dn_dc: np.ndarray
    overall_w_A: float
    names: tuple[str, str]
    threshold: float
    warnings: tuple[str, ...] = field(default=())

    @property
    def concentration(self) -> np.ndarray:
        """c = c_A + c_B [g/mL] (K4)."""
        return self.c_A + self.c_B

    def table(self) -> dict[str, np.ndarray]:
        """Per-slice composition and concentrations, one array per column (units in the keys)."""
        a, b = self.names
        return {
            f"c {a} [g/mL]": self.c_A,
            f"c {b} [g/mL]": self.c_B,
            f"w {a} [-]": self.w_A,
            "dn/dc [mL/g]": self.dn_dc,
        }

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        a, b = self.names
        return {
            "components": [a, b],
            f"overall mass fraction {a} [-]": finite_or_none(self.overall_w_A),
            "signal threshold [-]": self.threshold,
            "warnings": list(self.warnings),
        }


def composition(ri_signal: Any, uv_signal: Any, copolymer: Copolymer, ri_constant: float, *,
                widths: Any = None, threshold: float = 0.05) -> Composition:
    """Solve K1-K2 for c_A, c_B in every slice.

    Parameters
    ----------
    ri_signal, uv_signal : array_like
        Baseline-corrected RI and UV traces, aligned and equally broadened
        [detector units].
    copolymer : Copolymer
        Component dn/dc (RI wavelength) and UV responses.
    ri_constant : float
        k_RI [signal units per RIU].
    widths : array_like, optional
        Slice widths ΔV [mL] for the overall composition (default: equal widths).
    threshold : float
        w_A is reported only where both signals exceed this fraction of their maxima
        (docs/science.md, section 16 suggests 5-10 %).

    Examples
    --------
    The check slice of docs/science.md, section 16 (derived): k_RI 10⁴, dn/dc 0.185/0.084,
    f^UV 2000/50, S_RI 0.2286, S_UV 0.127 → w_A = 0.300:

    >>> cp = Copolymer(("A", "B"), (0.185, 0.084), (2000.0, 50.0))
    >>> r = composition([0.2286], [0.127], cp, 1e4, threshold=0.0)
    >>> round(float(r.w_A[0]), 6), f"{r.c_A[0]:.4g}", f"{r.c_B[0]:.4g}"
    (0.3, '6e-05', '0.00014')
    """
    S_ri = as_array(ri_signal, "RI signal")
    S_uv = as_array(uv_signal, "UV signal")
    if S_ri.shape != S_uv.shape:
        raise DataError("RI and UV traces must have the same number of slices")
    k = positive(ri_constant, "RI constant")
    fA_ri, fB_ri = k * copolymer.dn_dc[0], k * copolymer.dn_dc[1]
    fA_uv, fB_uv = copolymer.uv_response
    det = fA_uv * fB_ri - fB_uv * fA_ri
    scale = abs(fA_uv * fB_ri) + abs(fB_uv * fA_ri)
    if scale == 0 or abs(det) < 1e-6 * scale:
        raise DataError(
            "the two components respond in the same ratio on UV and RI: their composition cannot be told "
            "apart (choose a UV wavelength where only one absorbs)",
            key="detectors.copolymer.uv_response",
        )
    c_A = (S_uv * fB_ri - S_ri * fB_uv) / det
    c_B = (S_ri * fA_uv - S_uv * fA_ri) / det
    c = c_A + c_B
    ok = (S_ri >= threshold * np.max(S_ri)) & (S_uv >= threshold * np.max(S_uv)) & (c > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        w_A = np.where(ok, c_A / c, np.nan)
    dn = copolymer_dn_dc(w_A, *copolymer.dn_dc)
    dv = np.ones_like(S_ri) if widths is None else as_array(widths, "slice widths")
    tot_A, tot = float(np.sum(c_A * dv)), float(np.sum(c * dv))
    overall = tot_A / tot if tot > 0 else math.nan
    warns = []
    if np.any(ok) and (np.nanmin(w_A) < -0.05 or np.nanmax(w_A) > 1.05):
        warns.append("some slices give a mass fraction outside 0-1: check the UV responses, the RI constant and "
                     "the UV/RI offset")
    return Composition(c_A=c_A, c_B=c_B, w_A=w_A, dn_dc=dn, overall_w_A=overall, names=copolymer.names,
                       threshold=float(threshold), warnings=tuple(warns))


def copolymer_dn_dc(w_A: Any, dn_dc_A: float, dn_dc_B: float) -> np.ndarray:
    """(dn/dc) = w_A (dn/dc)_A + (1 − w_A)(dn/dc)_B [mL/g] (K5, additivity).

    Examples
    --------
    w_A 0.30 with 0.185 and 0.084 mL/g gives 0.1143 mL/g (docs/science.md, section 16, derived):

    >>> round(float(copolymer_dn_dc(0.3, 0.185, 0.084)), 4)
    0.1143
    """
    w = np.asarray(w_A, dtype=float)
    return np.asarray(w * dn_dc_A + (1.0 - w) * dn_dc_B)


def copolymer_log_M(w_A: Any, log_M_A: Any, log_M_B: Any) -> np.ndarray:
    """Conventional calibration of a copolymer: log M = w_A log M_A + (1 − w_A) log M_B (K7).

    ``log_M_A``, ``log_M_B`` are the homopolymer calibrations (each through universal
    calibration) at the slice volumes [-].

    Examples
    --------
    w_A 0.3, M_A 1.00×10⁵, M_B 1.09×10⁵ → 106 218 g/mol (docs/science.md, section 16):

    >>> round(float(10 ** copolymer_log_M(0.3, 5.0, math.log10(1.09e5))))
    106218
    """
    w = np.asarray(w_A, dtype=float)
    return np.asarray(w * np.asarray(log_M_A, dtype=float) + (1.0 - w) * np.asarray(log_M_B, dtype=float))


def analyse_composition(traces: DetectorTraces, setup: DetectorSetup, *, uv: str | None = None,
                        limits: tuple[float, float] | None = None, threshold: float = 0.05,
                        match_broadening: bool = True) -> Composition:
    """Composition of one injection: the UV trace aligned and broadening-matched to the RI.

    Parameters
    ----------
    traces : DetectorTraces
        Baseline-corrected RI and UV traces.
    setup : DetectorSetup
        Needs an RI concentration detector with its ``constant``, a UV detector and
        ``detectors.copolymer``.
    uv : str, optional
        Name of the UV detector (default: the only one).
    limits : (float, float), optional
        Integration limits on the RI axis [mL]; slices outside are dropped.
    threshold, match_broadening
        As in :func:`composition` and the light-scattering analysis.
    """
    ri = setup.concentration_detector
    if ri.kind != "RI" or ri.constant is None:
        raise DataError("composition needs an RI concentration detector with its constant "
                        f"(detectors.{ri.name}.constant)")
    if setup.copolymer is None:
        raise DataError("composition needs the component constants: add [detectors.copolymer]",
                        key="detectors.copolymer")
    cands = [d for d in setup.detectors if isinstance(d, ConcentrationDetector) and d.kind == "UV"
             and (uv is None or d.name == uv)]
    if len(cands) != 1:
        raise DataError(f"no UV detector named {uv!r}" if uv else "name the UV detector to use"
                        if cands else "the set-up has no UV detector")
    det = cands[0]
    traces.check(setup, (ri.name, det.name))
    V = traces.volume
    s_ri, s_uv = matched_pair(V, traces[ri.name], traces[det.name], ri, det, match=match_broadening)
    inside = window_mask(V, limits)
    return composition(s_ri[inside], s_uv[inside], setup.copolymer, ri.constant,
                       widths=slice_widths(V)[inside], threshold=threshold)
