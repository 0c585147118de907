"""Slice bookkeeping shared by the light-scattering and viscometry analyses (private).

The integration window, the "good signal" region, and the straight (or low-order) fit of
log10 M against V that replaces noisy slice molar masses (docs/science.md, section 14).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.distribution import averages, slice_widths
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none

from ._common import LN10, LineFit, polyfit


def window_mask(volume: np.ndarray, limits: tuple[float, float] | None) -> np.ndarray:
    """Slices inside the integration limits (all slices when ``limits`` is None)."""
    if limits is None:
        return np.ones(volume.size, dtype=bool)
    lo, hi = sorted(float(v) for v in limits)
    mask = (volume >= lo) & (volume <= hi)
    if mask.sum() < 10:
        raise DataError(f"the integration limits [{lo:g}, {hi:g}] mL hold {int(mask.sum())} slices (need 10)")
    return mask


def good_signal_mask(conc: np.ndarray, other: np.ndarray, inside: np.ndarray, fraction: float) -> np.ndarray:
    """Slices where both traces exceed ``fraction`` of their maxima, contiguous around
    the other detector's peak (docs/science.md, section 14: e.g. LS above 10 % of its maximum).
    """
    if not 0.0 < fraction < 1.0:
        raise DataError(f"the good-signal fraction must lie between 0 and 1, got {fraction}")
    c = np.where(inside, conc, -np.inf)
    o = np.where(inside, other, -np.inf)
    if not (np.max(c) > 0 and np.max(o) > 0):
        raise DataError("no positive signal inside the integration limits")
    ok = (c >= fraction * np.max(c)) & (o >= fraction * np.max(o))
    start = int(np.argmax(np.where(ok, o, -np.inf)))
    mask = np.zeros(ok.size, dtype=bool)
    if not ok[start]:
        return mask
    lo = hi = start
    while lo - 1 >= 0 and ok[lo - 1]:
        lo -= 1
    while hi + 1 < ok.size and ok[hi + 1]:
        hi += 1
    mask[lo : hi + 1] = True
    return mask


@dataclass(frozen=True, repr=False)
class LogMFit(Display):
    """log10 M = Σ b_k (V − V_c)^k fitted over the good-signal slices.

    Attributes
    ----------
    coef : tuple of float
        b_0, b_1, ... in increasing power of (V − V_c) [-, 1/mL, ...].
    stderr : tuple of float
        Their standard errors (widened for serial correlation of the residuals).
    center : float
        V_c [mL].
    volume_range : tuple of float
        Fit range [mL].
    M_range : tuple of float
        Fitted M at the ends of the range [g/mol].
    n_points : int
        Slices fitted.
    residual_sd : float
        Scatter of log10 M_i about the fit [-].
    covariance : numpy.ndarray or None
        Covariance of ``coef`` (widened like ``stderr``), for :func:`averages_uncertainty`.
    """

    coef: tuple[float, ...]
    stderr: tuple[float, ...]
    center: float
    volume_range: tuple[float, float]
    M_range: tuple[float, float]
    n_points: int
    residual_sd: float
    covariance: np.ndarray | None = None

    def basis(self, volume: Any) -> np.ndarray:
        """The fit's basis functions (V − V_c)^k at ``volume``, shape (n, order + 1)."""
        return np.vander(np.asarray(volume, dtype=float) - self.center, self.order + 1, increasing=True)

    @property
    def order(self) -> int:
        return len(self.coef) - 1

    def log_M(self, volume: Any) -> np.ndarray:
        """Fitted log10 M at ``volume`` [mL] (extrapolated outside the fit range)."""
        return np.polynomial.polynomial.polyval(np.asarray(volume, dtype=float) - self.center,
                                                np.asarray(self.coef))

    def slope(self, volume: Any) -> np.ndarray:
        """d log10 M/dV [1/mL]."""
        d = np.polynomial.polynomial.polyder(np.asarray(self.coef))
        return np.polynomial.polynomial.polyval(np.asarray(volume, dtype=float) - self.center, d)

    def intercept_at_zero(self) -> float:
        """log10 M at V = 0 for a straight line (the A of log M = A − B·V) [-]."""
        return float(self.log_M(0.0))

    def summary(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "order": self.order,
            "center [mL]": self.center,
            "coefficients [-, 1/mL, ...]": [finite_or_none(c) for c in self.coef],
            "standard errors": [finite_or_none(s) for s in self.stderr],
            "fit range [mL]": list(self.volume_range),
            "M at the range ends [g/mol]": [finite_or_none(m) for m in self.M_range],
            "slices fitted": self.n_points,
            "residual sd log10 M [-]": finite_or_none(self.residual_sd),
        }
        if self.order == 1:
            out["slope d log10 M/dV [1/mL]"] = finite_or_none(self.coef[1])
            out["log10 M at V = 0 [-]"] = finite_or_none(self.intercept_at_zero())
        return out


def fit_log_M(volume: np.ndarray, M: np.ndarray, mask: np.ndarray, order: int, what: str) -> LogMFit:
    """Least-squares log10 M(V) over ``mask`` slices with finite positive M."""
    if order not in (1, 2, 3):
        raise DataError(f"{what}: the log M(V) fit order must be 1, 2 or 3, got {order}")
    ok = mask & np.isfinite(M) & (M > 0)
    n = int(ok.sum())
    if n < order + 3:
        raise DataError(
            f"{what}: only {n} slices have good signal on both detectors (need {order + 3}); lower the "
            "good-signal fraction, check the offsets, or use Mw from the areas only"
        )
    V = volume[ok]
    center = float(V.mean())
    f: LineFit = polyfit(V - center, np.log10(M[ok]), order, what=what)
    lo, hi = float(V.min()), float(V.max())
    fit = LogMFit(coef=tuple(float(c) for c in f.coef),
                  stderr=tuple(f.stderr(k) for k in range(order + 1)),
                  center=center, volume_range=(lo, hi), M_range=(math.nan, math.nan),
                  n_points=n, residual_sd=f.residual_sd)
    ends = 10.0 ** fit.log_M(np.array([lo, hi]))
    return LogMFit(coef=fit.coef, stderr=fit.stderr, center=center, volume_range=(lo, hi),
                   M_range=(float(ends[0]), float(ends[1])), n_points=n, residual_sd=f.residual_sd,
                   covariance=np.array(f.covariance, dtype=float))


def robust_covariance(basis: np.ndarray, residuals: np.ndarray) -> np.ndarray:
    """Covariance of least-squares coefficients that allows unequal scatter per slice.

    The slice molar masses of light scattering are ratios of two small signals at the ends
    of the good-signal range, so their scatter grows towards the ends, where the points
    also weigh most on the slope; the ordinary s²(XᵀX)⁻¹ then understates the slope's
    uncertainty. The heteroscedasticity-consistent ("sandwich") form
    (XᵀX)⁻¹ Xᵀ diag(r²) X (XᵀX)⁻¹ (White, Econometrica 48 (1980) 817, from memory), scaled by
    n/(n − p) and widened by the lag-1 autocorrelation factor (1 + ρ)/(1 − ρ) of the
    residuals (as :func:`gpctools.detectors._common.polyfit` does), is used instead.
    """
    X = np.asarray(basis, dtype=float)
    r = np.asarray(residuals, dtype=float)
    n, p = X.shape
    inv = np.linalg.pinv(X.T @ X)
    cov = inv @ (X.T * (r * r)) @ X @ inv * (n / max(n - p, 1))
    denom = float(r @ r)
    rho = float(r[1:] @ r[:-1]) / denom if n > 3 and denom > 0 else 0.0
    if 0.0 < rho < 1.0:
        cov = cov * (1.0 + rho) / (1.0 - rho)
    return np.asarray(cov)


def weights_noise_uncertainty(M: np.ndarray, c: np.ndarray, widths: np.ndarray, volume: np.ndarray,
                              sigma: float, centres: tuple[float, float],
                              counts: tuple[int, int]) -> dict[str, float]:
    r"""Relative standard uncertainty [-] of Mn and Mw from white noise on the concentration trace.

    With S_k = Σ c_i ΔV_i M_i^k, Mn = S_0/S_{-1} and Mw = S_1/S_0. Each c_i carries white
    noise of SD σ and the error of the straight baseline through the two window means
    (variance σ²/n_j each), e1·(1 − λ_i) + e2·λ_i with λ_i = (V_i − V̄_1)/(V̄_2 − V̄_1). With
    a_ik = ΔV_i M_i^k, cov(S_j, S_k) = σ²[Σ a_ij a_ik + A_j(1−λ)A_k(1−λ)/n_1 + A_jλ A_kλ/n_2]
    and u²(ln S_a/S_b) = var S_a/S_a² + var S_b/S_b² − 2cov/(S_a S_b) (first-order
    propagation, JCGM 100:2008, section 5.1.2). The same propagation as the conventional
    noise part (docs/science.md, section 19.7), here with the light-scattering M(V).
    """
    ok = np.isfinite(M) & (M > 0) & np.isfinite(c)
    if ok.sum() < 3 or not (math.isfinite(sigma) and sigma >= 0):
        return {"Mn": math.nan, "Mw": math.nan}
    m = M[ok] / float(np.median(M[ok]))
    A = np.stack([widths[ok] / m, widths[ok], widths[ok] * m])  # k = -1, 0, 1
    S = A @ c[ok]
    cov = A @ A.T
    (c1, c2), (n1, n2) = centres, counts
    if n1 > 0 and n2 > 0 and math.isfinite(c1) and math.isfinite(c2) and c2 != c1:
        lam = (volume[ok] - c1) / (c2 - c1)
        u1, u2 = A @ (1.0 - lam), A @ lam
        cov = cov + np.outer(u1, u1) / n1 + np.outer(u2, u2) / n2
    cov = cov * sigma * sigma
    out = {}
    for key, (a, b) in (("Mn", (1, 0)), ("Mw", (2, 1))):
        if not (S[a] > 0 and S[b] > 0):
            out[key] = math.nan
            continue
        var = cov[a, a] / S[a] ** 2 + cov[b, b] / S[b] ** 2 - 2.0 * cov[a, b] / (S[a] * S[b])
        out[key] = math.sqrt(max(float(var), 0.0))
    return out


def averages_uncertainty(M: np.ndarray, c: np.ndarray, widths: np.ndarray, basis: np.ndarray,
                         covariance: np.ndarray) -> dict[str, float]:
    """Relative standard uncertainty [-] of Mn and Mw from the covariance of a log10 M fit.

    The slices' molar masses are M_i = 10^(Σ_k b_k φ_k(V_i)) and the averages
    Mn = Σw_i/Σ(w_i/M_i), Mw = Σw_i M_i/Σw_i (w_i = c_i ΔV_i). Their gradients in the
    coefficients are, exactly,

        ∂ln Mn/∂b_k = ln10 · Σ(w_i/M_i)φ_ik / Σ(w_i/M_i),
        ∂ln Mw/∂b_k = ln10 · Σ(w_i M_i)φ_ik / Σ(w_i M_i),

    and the delta method (first-order propagation, JCGM 100:2008 "GUM", section 5.1.2)
    gives u²(ln M) = gᵀ C g with C the coefficients' covariance. This is the noise part of
    the light-scattering averages (scatter of the slice M about the fit, widened for serial
    correlation); it leaves out dn/dc, the detector constants, the offsets and the
    concentration trace's own noise (docs/detectors.md, section "Light scattering").
    """
    ok = np.isfinite(M) & (M > 0) & np.isfinite(c)
    if ok.sum() < 3 or covariance is None:
        return {"Mn": math.nan, "Mw": math.nan}
    w = c[ok] * widths[ok]
    phi = np.asarray(basis, dtype=float)[ok]
    C = np.asarray(covariance, dtype=float)
    out = {}
    for key, weight in (("Mn", w / M[ok]), ("Mw", w * M[ok])):
        total = float(np.sum(weight))
        if not total > 0:
            out[key] = math.nan
            continue
        g = LN10 * (weight @ phi) / total
        out[key] = math.sqrt(max(float(g @ C @ g), 0.0))
    return out


def slice_averages(M: np.ndarray, c: np.ndarray, widths: np.ndarray, mask: np.ndarray) -> dict[str, float]:
    """Mn, Mw, Mz, Mz+1 [g/mol] and Đ of the slices in ``mask`` with finite positive M."""
    ok = mask & np.isfinite(M) & (M > 0)
    if ok.sum() < 3:
        return {k: math.nan for k in ("Mn", "Mw", "Mz", "Mz1", "dispersity")}
    return averages(M[ok], c[ok] * widths[ok])


def widths(volume: np.ndarray) -> np.ndarray:
    """Midpoint slice widths ΔV [mL] (the project's rule, gpctools.distribution)."""
    return slice_widths(volume)


def extrapolation_decades(fit: LogMFit, volume: np.ndarray, inside: np.ndarray) -> float:
    """How far (in decades of M) the window reaches beyond the fitted range."""
    lg = fit.log_M(volume[inside])
    lo, hi = (math.log10(m) for m in fit.M_range)
    top, bottom = max(lo, hi), min(lo, hi)
    return float(max(np.max(lg) - top, bottom - np.min(lg), 0.0))
