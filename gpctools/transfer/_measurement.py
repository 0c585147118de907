"""Each run's measurement uncertainty of its chain length, and its calibration gradients.

TO BE REPLACED by the per-injection standard uncertainties of issue 10 (noise, limit and
calibration parts of Mn, Mw and Mz carried on ``gpctools.batch.InjectionResult``). Until
that lands, :func:`injection_uncertainty` computes, from one processed injection, what the
transfer analysis needs:

- the relative standard uncertainty of Mn and Mw from the baseline noise (white noise of
  standard deviation σ_h on every slice height, first-order propagation through the
  averages) and from the sensitivity to the low-M integration limit (the change when the
  limit moves by ``limit_shift``, taken as the half-width of a rectangular distribution,
  u = |shift|/√3);
- the gradient of ln Mn and ln Mw with respect to the calibration coefficients, so that
  the calibration covariance can be carried into every run of a series as one common,
  correlated error.

Formulas (docs/science.md, sections 1.1 and 11.5), with w_i = h_i ΔV_i / A, A = Σ h ΔV:

    d ln Mn = Σ_i ε_i ΔV_i/A · (1 − Mn/M_i),   d ln Mw = Σ_i ε_i ΔV_i/A · (M_i/Mw − 1)
    ∂ ln Mn/∂c_k = ln10 · f · Σ (w_i/M_i) φ_k(V_i) / Σ (w_i/M_i)
    ∂ ln Mw/∂c_k = ln10 · f · Σ (w_i M_i) φ_k(V_i) / Σ (w_i M_i)

where log10 M(V) = offset + f·Σ_k c_k φ_k(V) is the calibration (φ_k = t^k with
t = (V − center)/scale inside the calibrated range, and the tangent continuation outside
it). References: JCGM 100:2008 (GUM), 5.1 (first-order propagation) and 4.3.7
(rectangular distribution).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["InjectionUncertainty", "injection_uncertainty", "calibration_basis"]

LN10 = math.log(10.0)


@dataclass(frozen=True)
class InjectionUncertainty:
    """Relative standard uncertainties of one injection's Mn and Mw, and their gradients.

    Attributes
    ----------
    u_Mn_noise, u_Mw_noise : float
        From the baseline noise [-] (relative).
    u_Mn_limit, u_Mw_limit : float
        From the low-M limit sensitivity [-] (relative).
    grad_ln_Mn, grad_ln_Mw : numpy.ndarray
        d ln Mn/d c and d ln Mw/d c for the calibration coefficients c [-].
    """

    u_Mn_noise: float
    u_Mw_noise: float
    u_Mn_limit: float
    u_Mw_limit: float
    grad_ln_Mn: np.ndarray
    grad_ln_Mw: np.ndarray

    @property
    def u_Mn(self) -> float:
        """Combined relative uncertainty of Mn (and of 1/DPn from Mn) [-]."""
        return math.hypot(self.u_Mn_noise, self.u_Mn_limit)

    @property
    def u_Mw(self) -> float:
        """Combined relative uncertainty of Mw (and of 2 M0/Mw) [-]."""
        return math.hypot(self.u_Mw_noise, self.u_Mw_limit)


def calibration_basis(calibration: Any, V: np.ndarray) -> np.ndarray:
    """∂ log10 M/∂ c_k at volumes V, shape (len(V), order + 1) [-].

    Inside the calibrated range φ_k = t^k; outside, the tangent continuation
    log M(v_end) + slope·(V − v_end) gives φ_k = t_e^k + k t_e^(k−1) (t − t_e), t_e the
    scaled range end. Multiplied by the calibration's ``log_factor``.
    """
    t = (np.asarray(V, dtype=float) - calibration.center) / calibration.scale
    lo = (calibration.v_min - calibration.center) / calibration.scale
    hi = (calibration.v_max - calibration.center) / calibration.scale
    te = np.clip(t, lo, hi)
    k = np.arange(calibration.order + 1)
    powers = te[:, None] ** k[None, :]
    deriv = np.zeros_like(powers)
    deriv[:, 1:] = k[None, 1:] * te[:, None] ** (k[None, 1:] - 1)
    return calibration.log_factor * (powers + deriv * (t - te)[:, None])


def injection_uncertainty(injection: Any, calibration: Any) -> InjectionUncertainty:
    """Noise, limit and calibration sensitivity of one processed injection.

    Parameters
    ----------
    injection : gpctools.batch.InjectionResult
        With its distribution (volumes, M, mass fractions), corrected trace (heights,
        baseline noise) and the low-M limit shifts of Mn and Mw [%].
    calibration : gpctools.calibration.Calibration
        The calibration used (for the coefficient basis).

    Returns
    -------
    InjectionUncertainty
    """
    from gpctools.distribution import slice_widths

    d = injection.distribution
    c = injection.corrected
    V_all = np.asarray(c.volume, dtype=float)
    order = np.argsort(V_all)
    V_sorted = V_all[order]
    dV_sorted = slice_widths(V_sorted)
    h_sorted = np.asarray(c.signal, dtype=float)[order]
    V = np.asarray(d.volume, dtype=float)
    idx = np.clip(np.searchsorted(V_sorted, V), 0, V_sorted.size - 1)
    dV = dV_sorted[idx]
    A = float(np.sum(h_sorted[idx] * dV))
    M = np.asarray(d.M, dtype=float)
    w = np.asarray(d.w, dtype=float)
    sigma_h = float(getattr(c.baseline, "noise", 0.0) or 0.0)
    if A > 0 and sigma_h > 0:
        g_n = dV / A * (1.0 - d.Mn / M)
        g_w = dV / A * (M / d.Mw - 1.0)
        u_n, u_w = sigma_h * math.sqrt(float(g_n @ g_n)), sigma_h * math.sqrt(float(g_w @ g_w))
    else:
        u_n = u_w = 0.0
    shift_n = abs(float(injection.Mn_shift_pct)) / 100.0 if math.isfinite(injection.Mn_shift_pct) else 0.0
    shift_w = abs(float(injection.Mw_shift_pct)) / 100.0 if math.isfinite(injection.Mw_shift_pct) else 0.0
    phi = calibration_basis(calibration, V)
    wn = w / M
    wm = w * M
    grad_n = LN10 * (wn @ phi) / float(np.sum(wn))
    grad_w = LN10 * (wm @ phi) / float(np.sum(wm))
    return InjectionUncertainty(u_n, u_w, shift_n / math.sqrt(3.0), shift_w / math.sqrt(3.0),
                                grad_n, grad_w)
