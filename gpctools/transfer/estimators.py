"""Estimators of the chain length from an SEC distribution: Mn, Mw/2 and the CLD slope Λ.

- ``"Mn"``: DPn = Mn/M0.
- ``"Mw/2"``: DPn = Mw/(2 M0), exact for a most-probable distribution and far less
  sensitive to the baseline and the low-M limit.
- ``"CLD"``: Λ = −M0 d ln P(M)/dM from ln P(M) = ln(dw/dlogM) − 2 ln M, fitted in a window
  near the peak of the SEC distribution; Λ plays the role of 1/DPn in the Mayo plot.

References
----------
Heuts, Davis, Russell et al., Macromolecules 1999 (Mw/2 versus Mn; comparison of the Mayo
and chain-length-distribution procedures). Clay and Gilbert, Macromolecules 1995; Moad and
Moad, Macromolecules 1996 (the Λ method). van Berkel, Russell, Gilbert, Macromolecules
2005 (take the slope near the peak of the SEC distribution). docs/science.md, section 4.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none
from gpctools.transfer._stats import ols_with_cov

__all__ = [
    "ESTIMATORS",
    "CLDSlope",
    "dpn_from_Mn",
    "dpn_from_Mw",
    "ln_number_distribution",
    "cld_slope",
]

#: The estimator names, in report order.
ESTIMATORS = ("Mn", "Mw/2", "CLD")

#: Default: the CLD window is the contiguous range around the dw/dlogM peak where
#: dw/dlogM >= this fraction of its maximum [-] (our choice, common practice for a "near the
#: peak" window; for a most-probable distribution, dw/dlogM ∝ (ΛN)^2 exp(−ΛN), it spans
#: N = 1.03/Λ to 3.44/Λ around the peak at N = 2/Λ [derived]).
DEFAULT_FRACTION = 0.7
#: Fewest slices a CLD window must hold for a slope and a curvature.
MIN_WINDOW_POINTS = 5


def dpn_from_Mn(Mn: Any, M0: Any) -> np.ndarray:
    """DPn = Mn/M0 [-].

    Parameters
    ----------
    Mn : array-like
        Absolute number-average molar mass [g/mol].
    M0 : array-like
        Repeat-unit molar mass [g/mol].

    References
    ----------
    docs/science.md, section 4 (absolute Mn; PS-equivalent values need universal calibration).
    """
    return np.asarray(Mn, dtype=float) / np.asarray(M0, dtype=float)


def dpn_from_Mw(Mw: Any, M0: Any) -> np.ndarray:
    """DPn = Mw/(2 M0) [-], exact for a most-probable (Flory) distribution.

    References
    ----------
    Heuts, Davis, Russell et al., Macromolecules 1999.
    """
    return np.asarray(Mw, dtype=float) / (2.0 * np.asarray(M0, dtype=float))


def ln_number_distribution(M: Any, dwdlogM: Any) -> np.ndarray:
    """ln P(M) = ln(dw/dlogM) − 2 ln M, up to an additive constant; NaN where dw/dlogM <= 0.

    Parameters
    ----------
    M : array-like
        Molar mass per slice [g/mol].
    dwdlogM : array-like
        Differential mass distribution dw/dlogM per slice [-].

    References
    ----------
    docs/science.md, section 1: w(log M) = ln10 * M^2 * n(M).
    """
    M = np.asarray(M, dtype=float)
    h = np.asarray(dwdlogM, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where((h > 0) & (M > 0), np.log(np.where(h > 0, h, 1.0)) - 2.0 * np.log(M), np.nan)
    return out


@dataclass(frozen=True, repr=False)
class CLDSlope(Display):
    """Slope Λ of ln P(M) in a window near the peak of one SEC distribution.

    Attributes
    ----------
    Lambda : float
        Λ = −M0 · d ln P/dM from a straight-line fit in the window [-].
    stderr : float
        Standard error of Λ from the fit residuals [-].
    window : tuple of float
        (M_low, M_high) of the slices used [g/mol].
    n_points : int
        Slices in the window.
    M_peak : float
        Molar mass at the maximum of dw/dlogM [g/mol].
    curvature : float
        Relative change of the local slope across the window,
        (Λ(M_low) − Λ(M_high))/Λ from a quadratic fit [-]; 0 for an ideal most-probable
        distribution, positive when ln P bends upward at high M (drift, broadening).
    curvature_stderr : float
        Its standard error [-].
    how : str
        ``"auto (dw/dlogM >= f of max)"`` or ``"user window"``.
    warnings : tuple of str
    """

    Lambda: float
    stderr: float
    window: tuple[float, float]
    n_points: int
    M_peak: float
    curvature: float
    curvature_stderr: float
    how: str
    warnings: tuple[str, ...] = ()

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "Lambda [-]": finite_or_none(self.Lambda),
            "standard error [-]": finite_or_none(self.stderr),
            "window [g/mol]": [finite_or_none(self.window[0]), finite_or_none(self.window[1])],
            "points": self.n_points,
            "M peak [g/mol]": finite_or_none(self.M_peak),
            "curvature [-]": finite_or_none(self.curvature),
            "curvature standard error [-]": finite_or_none(self.curvature_stderr),
            "window choice": self.how,
            "warnings": list(self.warnings),
        }


def cld_slope(
    M: Sequence[float] | np.ndarray,
    dwdlogM: Sequence[float] | np.ndarray,
    M0: float,
    *,
    window: tuple[float, float] | None = None,
    fraction: float = DEFAULT_FRACTION,
    what: str = "this distribution",
) -> CLDSlope:
    """Chain-length-distribution slope Λ = −M0 d ln P(M)/dM near the distribution's peak.

    About 80 lines: the window choice, the fit and its curvature check read as one
    sequence, each step feeding the next and its warning.

    Parameters
    ----------
    M : array-like
        Molar mass per slice [g/mol] (any order).
    dwdlogM : array-like
        dw/dlogM per slice [-].
    M0 : float
        Repeat-unit molar mass [g/mol].
    window : (float, float), optional
        User window (M_low, M_high) [g/mol]. Default: the contiguous range around the
        maximum of dw/dlogM where dw/dlogM >= ``fraction`` times the maximum.
    fraction : float
        Threshold of the automatic window, 0 < fraction < 1 [-] (default 0.7).
    what : str
        Name for messages (run id).

    Returns
    -------
    CLDSlope

    Notes
    -----
    For an instantaneous most-probable distribution P(N) ∝ exp(−ΛN), ln P is a straight
    line of slope −Λ/M0 in M, and Λ ≈ 1/DPn [derived]; the straight-line fit in the window
    gives Λ, a quadratic fit in the same window gives the curvature.

    References
    ----------
    Clay and Gilbert, Macromolecules 1995; Moad and Moad, Macromolecules 1996 (Λ method).
    van Berkel, Russell, Gilbert, Macromolecules 2005 (slope near the peak of the SEC
    distribution, where band broadening affects it least).
    """
    Mv = np.asarray(M, dtype=float).ravel()
    h = np.asarray(dwdlogM, dtype=float).ravel()
    if Mv.size != h.size:
        raise DataError(f"{what}: M and dw/dlogM have different lengths ({Mv.size}, {h.size})")
    if not (0.0 < fraction < 1.0):
        raise DataError(f"CLD window fraction must be between 0 and 1, not {fraction}",
                        key="cld_fraction")
    ok = np.isfinite(Mv) & np.isfinite(h) & (Mv > 0)
    Mv, h = Mv[ok], h[ok]
    order = np.argsort(Mv)
    Mv, h = Mv[order], h[order]
    if Mv.size < MIN_WINDOW_POINTS or not np.any(h > 0):
        raise DataError(f"{what}: no usable distribution for the CLD method (no positive dw/dlogM)")
    ipk = int(np.argmax(h))
    M_peak = float(Mv[ipk])
    if window is None:
        thr = fraction * h[ipk]
        lo = ipk
        while lo - 1 >= 0 and h[lo - 1] >= thr:
            lo -= 1
        hi = ipk
        while hi + 1 < h.size and h[hi + 1] >= thr:
            hi += 1
        sel = np.zeros(h.size, dtype=bool)
        sel[lo : hi + 1] = True
        how = f"auto (dw/dlogM >= {fraction:g} of max)"
    else:
        a, b = sorted(float(v) for v in window)
        if not (a > 0 and np.isfinite(b)):
            raise DataError(f"{what}: CLD window {window!r} must be two positive molar masses [g/mol]",
                            key="cld_window")
        sel = (Mv >= a) & (Mv <= b)
        how = "user window"
    sel &= h > 0
    npts = int(sel.sum())
    if npts < MIN_WINDOW_POINTS:
        raise DataError(
            f"{what}: the CLD window holds {npts} slices with signal (at least "
            f"{MIN_WINDOW_POINTS} needed); widen the window or lower the fraction",
            key="cld_window",
        )
    x = Mv[sel]
    lnp = np.log(h[sel]) - 2.0 * np.log(x)
    # centre and scale M for a well-conditioned polynomial fit
    xc = x.mean()
    xs = x.std() or 1.0
    u = (x - xc) / xs
    coef1, cov1 = ols_with_cov(u, lnp, 1)
    slope = coef1[0] / xs
    Lam = -M0 * slope
    se = M0 * np.sqrt(max(cov1[0, 0], 0.0)) / xs
    if not np.isfinite(se):
        se = float("nan")
    warns: list[str] = []
    # quadratic in the same window (npts >= MIN_WINDOW_POINTS > 3 points): local slope
    # d lnP/du = 2 c2 u + c1, so Λ(u) = −M0/xs (2 c2 u + c1)
    coef2, cov2 = ols_with_cov(u, lnp, 2)
    span_u = (x.max() - x.min()) / xs
    if Lam != 0 and np.isfinite(Lam):
        curv = 2.0 * coef2[0] * span_u * (M0 / xs) / Lam
        curv_se = abs(2.0 * span_u * (M0 / xs) / Lam) * np.sqrt(max(cov2[0, 0], 0.0))
    else:
        curv, curv_se = float("nan"), float("nan")
    if not np.isfinite(Lam) or Lam <= 0:
        warns.append(f"{what}: ln P(M) does not fall with M in the CLD window (Λ = {Lam:.3g})")
    elif np.isfinite(curv) and abs(curv) > 0.1 and abs(curv) > 3 * (curv_se if np.isfinite(curv_se) else 0):
        warns.append(
            f"{what}: ln P(M) is curved in the CLD window (the slope changes by {100 * curv:.0f} % "
            "across it): conversion drift, band broadening or combination termination; Λ "
            "depends on the window chosen"
        )
    return CLDSlope(
        Lambda=float(Lam),
        stderr=float(se),
        window=(float(x.min()), float(x.max())),
        n_points=npts,
        M_peak=M_peak,
        curvature=float(curv),
        curvature_stderr=float(curv_se),
        how=how,
        warnings=tuple(warns),
    )
