"""Molar-mass distribution and averages from a corrected trace and a calibration.

Slice i has height h_i at volume V_i, width ΔV_i and molar mass M_i = M(V_i). The mass in
the slice is w_i ∝ h_i·ΔV_i and (SCIENCE.md section 1; any polymer-science text, e.g. the
IUPAC definitions of the averages):

    Mn = Σw / Σ(w/M),  Mw = Σ wM / Σw,  Mz = Σ wM² / Σ wM,  Mz+1 = Σ wM³ / Σ wM²,
    Đ = Mw / Mn.

Slice widths are the midpoint widths ΔV_i = (V_{i+1} - V_{i-1})/2 (half widths at the
ends), so unequal slice spacing is integrated correctly; with equal widths ΔV cancels.
Leaving ΔV out with unequal widths is a real bug (about +1 % on Mn and +2 % on Mw for
random widths, SCIENCE.md section 1).

The differential distribution uses the calibration Jacobian:

    dw/dlogM (V) = h(V) / |d log10 M / dV| / ∫ h dV.

Negative heights after baseline subtraction are noise and are kept in every sum (area,
Σw/M, Σ wM, ...): clipping them would bias the area upward and Mn most of all, since the
low-M tail carries the largest 1/M weight. Should the sums themselves be non-positive the
trace holds no usable polymer signal and a :class:`~gpctools.errors.DataError` is raised.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .calibration import Calibration
from .errors import DataError, RangeWarning
from .signal import _as_trace

__all__ = ["Distribution", "averages", "compute_distribution", "slice_widths", "peak_position"]


#: Column names of :meth:`Distribution.table` and of the per-injection distribution CSV.
TABLE_COLUMNS = (
    "volume [mL]",
    "M [g/mol]",
    "log10 M [-]",
    "mass fraction [-]",
    "dw/dlogM [-]",
    "cumulative mass fraction [-]",
)


def slice_widths(volume: Any) -> np.ndarray:
    """Midpoint widths ΔV_i of slices centred at increasing volumes V_i [mL]."""
    V = np.asarray(volume, dtype=float)
    if V.size < 2:
        return np.ones_like(V)
    edges = np.empty(V.size + 1)
    edges[1:-1] = 0.5 * (V[1:] + V[:-1])
    edges[0] = V[0]
    edges[-1] = V[-1]
    return np.diff(edges)


def averages(M: Any, w: Any) -> dict[str, float]:
    """Molar-mass averages of a discrete set of species.

    Parameters
    ----------
    M : array_like
        Molar mass of each species or slice [g/mol].
    w : array_like
        Mass (not number) of each species or slice, any unit.

    Returns
    -------
    dict
        ``Mn``, ``Mw``, ``Mz``, ``Mz1`` [g/mol] and ``dispersity`` [-].

    Examples
    --------
    Species M = 2, 3, 7 in counts 4, 3, 2 (masses 8, 9, 14) give Mn = 31/9,
    Mw = 141/31, Mz = 799/141 (SCIENCE.md section 8, derived):

    >>> r = averages([2, 3, 7], [8, 9, 14])
    >>> round(r["Mn"] * 9, 9), round(r["Mw"] * 31, 9), round(r["Mz"] * 141, 9)
    (31.0, 141.0, 799.0)
    """
    M = np.asarray(M, dtype=float)
    w = np.asarray(w, dtype=float)
    if M.shape != w.shape:
        raise DataError(f"averages: {M.size} molar masses but {w.size} weights")
    if M.size == 0:
        raise DataError("averages: no slices to average")
    if np.any(~np.isfinite(M)) or np.any(M <= 0):
        raise DataError("averages: molar masses must be finite and positive")
    if np.any(~np.isfinite(w)):
        raise DataError("averages: slice weights must be finite numbers (remove or fill missing values)")
    s0 = float(w.sum())
    s_1 = float((w / M).sum())
    s1 = float((w * M).sum())
    s2 = float((w * M * M).sum())
    s3 = float((w * M * M * M).sum())
    if s0 <= 0 or s_1 <= 0 or s1 <= 0 or s2 <= 0:
        raise DataError(
            "the weight sums are not positive: no usable polymer signal inside the integration "
            "limits (check the baseline windows, the limits and the signal column)"
        )
    Mn = s0 / s_1
    Mw = s1 / s0
    return {"Mn": Mn, "Mw": Mw, "Mz": s2 / s1, "Mz1": s3 / s2, "dispersity": Mw / Mn}


def peak_position(x: np.ndarray, y: np.ndarray) -> float:
    """x at the maximum of y, refined by a parabola through the top three points.

    The raw maximum sample is off by up to half a slice; the local parabola recovers
    the vertex (SCIENCE.md section 1, common practice).
    """
    i = int(np.argmax(y))
    if 0 < i < y.size - 1:
        x0, x1, x2 = x[i - 1], x[i], x[i + 1]
        y0, y1, y2 = y[i - 1], y[i], y[i + 1]
        denom = (x0 - x1) * (x0 - x2) * (x1 - x2)
        if denom != 0:
            a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / denom
            b = (x2 * x2 * (y0 - y1) + x1 * x1 * (y2 - y0) + x0 * x0 * (y1 - y2)) / denom
            if a < 0:
                xv = -b / (2 * a)
                if min(x0, x2) <= xv <= max(x0, x2):
                    return float(xv)
    return float(x[i])


@dataclass(frozen=True)
class Distribution:
    """Differential and cumulative molar-mass distribution with its averages.

    Arrays hold the slices inside the integration window (exclusions removed), in
    order of increasing volume (decreasing M).

    Attributes
    ----------
    volume : ndarray
        Elution volume [mL].
    M : ndarray
        Molar mass [g/mol].
    w : ndarray
        Mass fraction of each slice [-] (sums to 1).
    dwdlogM : ndarray
        Differential weight distribution dw/dlog10 M [-] (integrates to 1 over log10 M).
    cumulative : ndarray
        Mass fraction with molar mass at or below M [-]: 1 at the first (highest-M)
        slice, falling to the last slice's own fraction at the low-M end.
    Mn, Mw, Mz, Mz1 : float
        Averages [g/mol] (Mz1 is Mz+1).
    Mp : float
        M at the maximum of the corrected trace h(V), parabola-refined [g/mol]; the
        convention for narrow standards and for reporting.
    Mp_dwdlogM : float
        M at the maximum of dw/dlogM [g/mol]; differs from Mp unless the calibration is
        linear.
    dispersity : float
        Mw/Mn [-].
    outside_fraction : float
        Mass fraction of the window eluting outside the calibrated range [-].
    """

    volume: np.ndarray
    M: np.ndarray
    w: np.ndarray
    dwdlogM: np.ndarray
    cumulative: np.ndarray
    Mn: float
    Mw: float
    Mz: float
    Mz1: float
    Mp: float
    Mp_dwdlogM: float
    dispersity: float
    outside_fraction: float
    warnings: tuple[str, ...] = field(default=())

    def summary(self) -> dict[str, Any]:
        return {
            "Mn [g/mol]": self.Mn,
            "Mw [g/mol]": self.Mw,
            "Mz [g/mol]": self.Mz,
            "Mz+1 [g/mol]": self.Mz1,
            "Mp [g/mol]": self.Mp,
            "Mp (dw/dlogM) [g/mol]": self.Mp_dwdlogM,
            "dispersity [-]": self.dispersity,
            "outside calibration [% mass]": 100.0 * self.outside_fraction,
            "slices": int(self.volume.size),
            "warnings": list(self.warnings),
        }

    def table(self):
        """The distribution as a pandas DataFrame with unit-named columns."""
        import pandas as pd

        columns = (self.volume, self.M, np.log10(self.M), self.w, self.dwdlogM, self.cumulative)
        return pd.DataFrame(dict(zip(TABLE_COLUMNS, columns)))


def compute_distribution(
    volume: Any,
    signal: Any,
    calibration: Calibration,
    *,
    mask: Any = None,
    outside: str = "linear",
    outside_warn_pct: float = 1.0,
) -> Distribution:
    """Distribution and averages from a baseline-corrected trace.

    Parameters
    ----------
    volume : array_like
        Elution volumes of all slices [mL] (sorted internally; ``signal`` and ``mask``
        follow the same order as ``volume``).
    signal : array_like
        Baseline-corrected concentration-detector response h [signal units].
    calibration : Calibration
        log10 M(V) and its Jacobian.
    mask : array_like of bool, optional
        Slices that enter the averages (integration window minus exclusions); all by
        default.
    outside : {"linear", "exclude"}
        How slices outside the calibrated range are treated: ``"linear"`` continues
        log M along the tangent at the range end and keeps them; ``"exclude"`` drops
        them from the averages. Either way their mass fraction is reported.
    outside_warn_pct : float
        Warn when more than this mass percentage elutes outside the calibrated range
        [% mass] (common practice: 1 %).

    Returns
    -------
    Distribution

    Notes
    -----
    Slice widths come from the full volume axis, so a window edge does not change the
    widths of the slices next to it. The cumulative fraction is accumulated from the
    low-M end: ``cumulative[i]`` is the mass fraction with M ≤ M_i.
    """
    V, h, order = _as_trace(volume, signal)
    if outside not in ("linear", "exclude"):
        raise DataError(f"outside must be 'linear' or 'exclude', got {outside!r}")
    sel = np.ones(V.shape, dtype=bool) if mask is None else np.asarray(mask, dtype=bool)
    if sel.shape != V.shape:
        raise DataError(f"mask has {sel.size} entries for {V.size} slices; give one per slice")
    # Slice widths need increasing volumes; unsorted input gives the same answer.
    V, h, sel = V[order], h[order], sel[order]
    dV = slice_widths(V)
    area_all = h[sel] * dV[sel]
    inside = calibration.inside(V[sel])
    total = float(area_all.sum())
    if total <= 0:
        raise DataError(
            "the corrected signal has no positive area inside the integration limits; "
            "check the baseline windows, the limits and the signal column"
        )
    outside_fraction = float(area_all[~inside].sum() / total)
    if outside == "exclude":
        sel = sel.copy()
        sel[np.nonzero(sel)[0][~inside]] = False
    Vs = V[sel]
    hs = h[sel]
    area = hs * dV[sel]
    area_sum = float(area.sum())
    if area_sum <= 0 or Vs.size < 3:
        raise DataError("no usable slices left inside the calibrated range")
    logM = calibration.log_M(Vs)
    M = np.power(10.0, logM)
    avg = averages(M, area)
    w = area / area_sum
    jac = np.abs(calibration.dlogM_dV(Vs))
    dwdlogM = hs / jac / area_sum
    cumulative = np.cumsum(w[::-1])[::-1]
    Mp = float(calibration.M(peak_position(Vs, hs)))
    Mp_d = float(10.0 ** peak_position(logM, dwdlogM))
    notes: list[str] = []
    if 100.0 * outside_fraction > outside_warn_pct:
        notes.append(
            f"{100.0 * outside_fraction:.2f} % of the mass elutes outside the calibrated range "
            f"({calibration.v_min:.4g}-{calibration.v_max:.4g} mL); "
            + ("treated by tangent extrapolation" if outside == "linear" else "excluded from the averages")
        )
    for note in notes:
        warnings.warn(note, RangeWarning, stacklevel=2)
    if not all(math.isfinite(avg[k]) for k in avg):
        raise DataError("averages are not finite; check the calibration and the signal")
    return Distribution(
        volume=Vs,
        M=M,
        w=w,
        dwdlogM=dwdlogM,
        cumulative=cumulative,
        Mn=avg["Mn"],
        Mw=avg["Mw"],
        Mz=avg["Mz"],
        Mz1=avg["Mz1"],
        Mp=Mp,
        Mp_dwdlogM=Mp_d,
        dispersity=avg["dispersity"],
        outside_fraction=outside_fraction,
        warnings=tuple(notes),
    )
