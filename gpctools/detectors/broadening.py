"""Band broadening (axial dispersion): spreading functions, corrections of the averages,
σ from a narrow standard, a regularised deconvolution, and the CLD-window bias.

Model (Tung's integral equation): the observed trace is the true one spread by a
function G that does not depend on V,

    F(V) = ∫ W(y) G(V − y) dy.                                                  (B1)

With a linear calibration M = D1·exp(−D2·V), D2 = ln10·B, every moment of the observed
trace is the true moment times the moment-generating function of G,

    M_G(t) = ∫ G(u) e^(t·u) du,
    Mw,obs = Mw·M_G(−D2),   Mn,obs = Mn / M_G(+D2),
    ∫F·M^k dV = M_G(−k·D2) ∫W·M^k dV.                                            (B2)

For a Gaussian G of s.d. σ, M_G(t) = exp(σ²t²/2), so Mw is high by exp(D2²σ²/2), Mn low
by the same factor, and Đ high by exp(D2²σ²) (B3). For an exponentially modified
Gaussian (Gaussian σ convolved with an exponential of time constant τ, shifted so that
its mean is zero) M_G(t) = exp(σ²t²/2 − τt)/(1 − τt), τt < 1 (B4).

References
----------
Tung, J. Appl. Polym. Sci. 10 (1966) 375 (B1; from memory). Hamielec and Ray, J. Appl.
Polym. Sci. 13 (1969) 1319, and Hamielec, J. Appl. Polym. Sci. 14 (1970) 1519 (B2-B3 for
a linear calibration; from memory). Grushka, Anal. Chem. 44 (1972) 1733 (the EMG moments).
The factor forms B2-B4 are exact consequences of B1 for a linear calibration (derived).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none

from ._common import LN10, positive

__all__ = [
    "Spreading",
    "BroadeningCorrection",
    "broadening_factors",
    "correct_averages",
    "spreading_from_dispersity",
    "Deconvolution",
    "deconvolve",
    "CLDBias",
    "cld_broadening_bias",
    "convolve",
    "shared_spreading",
    "tilted_trace",
    "unbroadened_averages",
]


@dataclass(frozen=True, repr=False)
class Spreading(Display):
    """A band-spreading function G: Gaussian (tau = 0) or exponentially modified Gaussian.

    Attributes
    ----------
    sigma : float
        Standard deviation of the Gaussian part [mL].
    tau : float
        Time constant of the exponential tail, in volume [mL] (0 = symmetric Gaussian).
        The tail moves the mean of G by τ and adds τ² to its variance.
    """

    sigma: float = 0.0
    tau: float = 0.0

    def __post_init__(self) -> None:
        positive(self.sigma, "broadening sigma [mL]", allow_zero=True)
        positive(self.tau, "broadening tau [mL]", allow_zero=True)

    @property
    def variance(self) -> float:
        """Total variance σ² + τ² [mL²]."""
        return self.sigma**2 + self.tau**2

    @property
    def mean_shift(self) -> float:
        """Mean of G relative to its Gaussian centre, τ [mL]."""
        return self.tau

    @property
    def skewness(self) -> float:
        """Skew 2τ³/(σ² + τ²)^(3/2) [-] (Grushka 1972)."""
        var = self.variance
        return 2.0 * self.tau**3 / var**1.5 if var > 0 else 0.0

    def is_zero(self) -> bool:
        """True when the spreading function is the identity (no broadening)."""
        return self.sigma == 0.0 and self.tau == 0.0

    def mgf(self, t: float, *, centred: bool = True) -> float:
        """Moment-generating function M_G(t) = ∫G(u)e^(tu)du [-] (B3, B4).

        Parameters
        ----------
        t : float
            Argument [1/mL]; for the averages t = ±k·D2.
        centred : bool
            G shifted so that its mean is 0 (default), or the plain EMG whose Gaussian
            part is centred at 0 (then M_G(t) = exp(σ²t²/2)/(1 − τt)).
        """
        g = math.exp(0.5 * self.sigma**2 * t * t)
        if self.tau == 0.0:
            return g
        if self.tau * t >= 1.0:
            raise DataError(
                f"the exponential tail tau = {self.tau:g} mL is too long for this calibration "
                f"slope (tau·t = {self.tau * t:.3g} must stay below 1): the broadening correction "
                "of the averages diverges; check tau"
            )
        shift = math.exp(-self.tau * t) if centred else 1.0
        return g * shift / (1.0 - self.tau * t)

    def kernel(self, step: float, *, centred: bool = False, width: float = 6.0) -> np.ndarray:
        """G sampled on a uniform grid of spacing ``step`` [mL], normalised to unit sum.

        The kernel has an odd number of points with u = 0 in the middle, so that
        ``numpy.convolve(x, kernel, mode="same")`` spreads ``x`` by G. With ``centred``
        the exponential tail's mean shift τ is removed (the mean of G is 0).
        """
        if self.is_zero():
            return np.ones(1)
        step = positive(step, "slice spacing [mL]")
        reach = width * self.sigma + (width * 1.5 + 1.0) * self.tau
        half = max(int(math.ceil(reach / step)), 1)
        u = np.arange(-half, half + 1) * step
        if centred:
            u = u + self.tau
        g = _emg_pdf(u, self.sigma, self.tau, step)
        s = g.sum()
        if not s > 0:
            return np.ones(1)
        return np.asarray(g / s)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {"sigma [mL]": self.sigma, "tau [mL]": self.tau}


def _emg_pdf(u: np.ndarray, sigma: float, tau: float, step: float) -> np.ndarray:
    """Density of N(0, σ²) ⊗ Exp(τ) at u, or its bin-averaged form for very narrow parts."""
    from scipy.special import erfc, erfcx

    if tau == 0.0:
        if sigma < 0.25 * step:
            # narrower than a slice: the cell-integrated Gaussian avoids a spike-only kernel
            from scipy.special import erf

            s = max(sigma, 1e-12) * math.sqrt(2.0)
            return np.asarray(0.5 * (erf((u + step / 2) / s) - erf((u - step / 2) / s)))
        return np.exp(-0.5 * (u / sigma) ** 2)
    if sigma < 0.25 * step:
        # pure exponential: integrate over each cell, else the kernel's mean is off by ~step/2
        lo = np.clip(u - step / 2, 0.0, None)
        hi = np.clip(u + step / 2, 0.0, None)
        return np.asarray(np.exp(-lo / tau) - np.exp(-hi / tau))
    # stable form: (1/2τ) exp(σ²/2τ² − u/τ) erfc((σ/τ − u/σ)/√2) = (1/2τ) e^(−u²/2σ²) erfcx(z)
    z = (sigma / tau - u / sigma) / math.sqrt(2.0)
    with np.errstate(over="ignore"):
        val = np.where(
            z > 0,
            np.exp(-0.5 * (u / sigma) ** 2) * erfcx(z),
            np.exp(0.5 * (sigma / tau) ** 2 - u / tau) * erfc(z),
        )
    return np.asarray(val / (2.0 * tau))


def convolve(volume: np.ndarray, signal: np.ndarray, spreading: Spreading, *,
             centred: bool = False) -> np.ndarray:
    """Spread ``signal`` by G (B1) on its own volume axis [mL].

    The axis must be evenly spaced to within 0.1 % of a step (slice exports are); an
    uneven axis is resampled to its median step and back. Values outside the trace are
    taken as the end values (the baseline), so the ends do not fall off.
    """
    V = np.asarray(volume, dtype=float)
    y = np.asarray(signal, dtype=float)
    if spreading.is_zero() or V.size < 3:
        return y.copy()
    d = np.diff(V)
    step = float(np.median(d))
    if not step > 0:
        raise DataError("volume axis must increase to convolve a trace")
    even = np.allclose(d, step, rtol=1e-3, atol=0.0)
    grid = V if even else np.arange(V[0], V[-1] + 0.5 * step, step)
    yg = y if even else np.interp(grid, V, y)
    k = spreading.kernel(step, centred=centred)
    h = k.size // 2
    padded = np.concatenate([np.full(h, yg[0]), yg, np.full(h, yg[-1])])
    if k.size > 64:
        from scipy.signal import fftconvolve

        out = fftconvolve(padded, k, mode="same")[h : h + yg.size]
    else:
        out = np.convolve(padded, k, mode="same")[h : h + yg.size]
    return out if even else np.interp(V, grid, out)


def broadening_factors(spreading: Spreading, B: float, *, centred: bool = True) -> dict[str, float]:
    """Factors observed/true for Mn, Mw, Mz, Mz+1 and Đ under spreading G (B2-B4).

    Parameters
    ----------
    spreading : Spreading
        G with its mean removed (a shift of the mean acts like a calibration shift and
        belongs to the flow-marker correction, not here).
    B : float
        Calibration slope −d log10 M / dV at the peak [1/mL] (D2 = ln10·B).
    centred : bool
        Remove the mean shift τ of an EMG (default; right for a calibration made with
        standards that saw the same shift). With False the factors refer to the volume
        axis of the Gaussian part (used when M(V) comes from light scattering).

    Returns
    -------
    dict
        ``Mn``, ``Mw``, ``Mz``, ``Mz1``, ``dispersity`` [-]: observed = true × factor.

    Notes
    -----
    The k-th moment of the observed trace, ∫F·M^k dV, is M_G(−k·D2) times the true one;
    Mn = m0/m−1, Mw = m1/m0, Mz = m2/m1, Mz+1 = m3/m2 (derived from B1).

    Examples
    --------
    Gaussian σ = 0.2 mL, B = 0.3 1/mL: Mw ×1.0096, Mn ×0.9905, Đ ×1.0193
    (docs/science.md, section 12, derived):

    >>> f = broadening_factors(Spreading(0.2), 0.3)
    >>> round(f["Mw"], 4), round(f["Mn"], 4), round(f["dispersity"], 4)
    (1.0096, 0.9905, 1.0193)
    """
    D2 = LN10 * positive(B, "calibration slope B [1/mL]")
    m = {k: spreading.mgf(-k * D2, centred=centred) for k in (-1, 1, 2, 3)}
    Mn = 1.0 / m[-1]
    Mw = m[1]
    return {
        "Mn": Mn,
        "Mw": Mw,
        "Mz": m[2] / m[1],
        "Mz1": m[3] / m[2],
        "dispersity": Mw / Mn,
    }


@dataclass(frozen=True, repr=False)
class BroadeningCorrection(Display):
    """Averages before and after the analytic broadening correction (B2-B4).

    Attributes
    ----------
    observed, corrected : dict
        ``Mn``, ``Mw``, ``Mz``, ``Mz1`` [g/mol] and ``dispersity`` [-] (keys present in
        the input only).
    factors : dict
        Observed/true factor per average [-].
    spreading : Spreading
        G used [mL].
    B : float
        Calibration slope used [1/mL].
    sigma_lnM : float
        Spread in ln M, D2·√(σ² + τ²) [-].
    """

    observed: dict[str, float]
    corrected: dict[str, float]
    factors: dict[str, float]
    spreading: Spreading
    B: float
    sigma_lnM: float
    warnings: tuple[str, ...] = field(default=())

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        unit = {"dispersity": "[-]"}
        out: dict[str, Any] = {
            "broadening": self.spreading.summary(),
            "calibration slope B [1/mL]": self.B,
            "sigma lnM [-]": self.sigma_lnM,
        }
        for k in self.observed:
            u = unit.get(k, "[g/mol]")
            out[f"{k} observed {u}"] = finite_or_none(self.observed[k])
            out[f"{k} corrected {u}"] = finite_or_none(self.corrected[k])
            out[f"{k} factor observed/true [-]"] = finite_or_none(self.factors[k])
        out["warnings"] = list(self.warnings)
        return out


def correct_averages(averages: dict[str, float], spreading: Spreading, B: float) -> BroadeningCorrection:
    """Divide observed averages by the broadening factors of :func:`broadening_factors`.

    Parameters
    ----------
    averages : dict
        Observed ``Mn``, ``Mw``, ``Mz``, ``Mz1`` [g/mol] and/or ``dispersity`` [-]
        (from a concentration detector and a calibration curve; other keys are ignored).
    spreading : Spreading
        The concentration detector's total band spreading [mL].
    B : float
        −d log10 M/dV at the peak [1/mL]; for a non-linear calibration the local slope at
        the peak is a first-order approximation (docs/science.md, section 12).

    Notes
    -----
    Do not apply this to averages from light scattering: with LS the slice molar mass is
    measured, Mw from areas is unaffected by broadening and Đ is biased low, not high
    (docs/science.md, section 14).
    """
    factors_all = broadening_factors(spreading, B)
    obs = {k: float(v) for k, v in averages.items() if k in factors_all and v is not None}
    corr = {k: v / factors_all[k] for k, v in obs.items()}
    if "Mn" in corr and "Mw" in corr:
        corr["dispersity"] = corr["Mw"] / corr["Mn"]
    sigma_lnM = LN10 * B * math.sqrt(spreading.variance)
    warns = []
    if sigma_lnM > 0.3:
        warns.append(
            f"band spreading is large (σ in ln M = {sigma_lnM:.2f}): the analytic correction assumes "
            "a locally linear calibration over ±3σ; check it against a deconvolution"
        )
    return BroadeningCorrection(
        observed=obs,
        corrected=corr,
        factors={k: factors_all[k] for k in obs},
        spreading=spreading,
        B=float(B),
        sigma_lnM=sigma_lnM,
        warnings=tuple(warns),
    )


def spreading_from_dispersity(dispersity_observed: float, dispersity_true: float, B: float, *,
                              tau: float = 0.0) -> Spreading:
    """σ of G from a narrow standard's observed and certified dispersity.

    For a Gaussian G, Đ_obs = Đ_true·exp(D2²σ²), so

        σ = √ln(Đ_obs/Đ_true) / D2                                                 (B5)

    and with an exponential tail τ (given), σ solves Đ_obs/Đ_true = M_G(D2)·M_G(−D2).

    Parameters
    ----------
    dispersity_observed : float
        Đ of the standard from the concentration trace and the calibration [-].
    dispersity_true : float
        Certified Đ (from LS or MALDI) [-]; often only an upper bound is given, then σ
        is a lower bound.
    B : float
        −d log10 M/dV at the standard's peak [1/mL].
    tau : float
        Exponential tail of G [mL], if known.

    Examples
    --------
    Đ_true 1.02, B 0.3: Đ_obs 1.0397 ↔ σ = 0.2 mL (docs/science.md, section 12, derived):

    >>> round(spreading_from_dispersity(1.0397, 1.02, 0.3).sigma, 3)
    0.2
    """
    d_obs = positive(dispersity_observed, "observed dispersity")
    d_true = positive(dispersity_true, "certified dispersity")
    if d_true < 1.0 or d_obs < 1.0:
        raise DataError("dispersities must be at least 1")
    D2 = LN10 * positive(B, "calibration slope B [1/mL]")
    ratio = d_obs / d_true
    if ratio <= 1.0:
        raise DataError(
            f"the observed dispersity {d_obs:g} is not above the certified {d_true:g}: the standard "
            "shows no measurable broadening (or its certificate is an upper bound); give sigma directly"
        )
    tau = positive(tau, "broadening tau [mL]", allow_zero=True)
    if tau == 0.0:
        return Spreading(math.sqrt(math.log(ratio)) / D2)
    from scipy.optimize import brentq

    def excess(s: float) -> float:
        g = Spreading(s, tau)
        return math.log(g.mgf(D2) * g.mgf(-D2)) - math.log(ratio)

    if tau * D2 >= 1.0:
        raise DataError(f"tau = {tau:g} mL is too long for B = {B:g} (τ·D2 must stay below 1)")
    if excess(0.0) >= 0:
        raise DataError(
            f"the tail tau = {tau:g} mL alone broadens the standard more than observed; lower tau"
        )
    hi = 1.0
    while excess(hi) < 0:
        hi *= 2.0
    return Spreading(brentq(excess, 0.0, hi, xtol=1e-12), tau)


@dataclass(frozen=True, repr=False)
class Deconvolution(Display):
    """A trace corrected for band spreading by regularised non-negative least squares.

    Attributes
    ----------
    volume : numpy.ndarray
        Grid of the corrected trace [mL] (coarser than the input when it was long).
    signal : numpy.ndarray
        Estimated true trace W on ``volume`` [detector units].
    fitted : numpy.ndarray
        G ⊗ W, to compare with the observed trace on the same grid [detector units].
    observed : numpy.ndarray
        The observed trace on ``volume`` [detector units].
    smoothing : float
        Weight α of the second-difference penalty, relative to the kernel's scale [-].
    residual_rms : float
        RMS of observed − fitted [detector units].
    """

    volume: np.ndarray
    signal: np.ndarray
    fitted: np.ndarray
    observed: np.ndarray
    smoothing: float
    residual_rms: float
    spreading: Spreading

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "method": "non-negative least squares with a second-difference penalty",
            "grid points": int(self.volume.size),
            "smoothing [-]": self.smoothing,
            "residual rms [detector units]": finite_or_none(self.residual_rms),
            "broadening": self.spreading.summary(),
        }


def deconvolve(volume: Any, signal: Any, spreading: Spreading, *, smoothing: float = 1e-3,
               max_points: int = 400) -> Deconvolution:
    """Solve Tung's equation (B1) for the true trace W ≥ 0 on the sampled grid.

    Minimises ||G·W − F||² + α·s²·||D₂W||² subject to W ≥ 0, where G is the (mean-free)
    spreading matrix, D₂ the second-difference operator and s² the mean squared column
    sum of G (so α is dimensionless). Unregularised inversion amplifies noise; the
    penalty keeps W smooth (docs/science.md, section 12; the IUPAC project 2003-023-2-400 summary
    lists such regularised approaches).

    Parameters
    ----------
    volume, signal : array_like
        Observed trace F (baseline-corrected) on an increasing volume axis [mL].
    spreading : Spreading
        G; its mean shift τ is removed (a shift belongs to the calibration).
    smoothing : float
        α [-]; 1e-3 suits traces with noise below about 1 % of the peak; raise it for
        noisier traces (the result gets smoother, the averages move little).
    max_points : int
        Longer traces are averaged onto this many points first (the NNLS is O(n³)).

    Notes
    -----
    Offered as an option: the default correction of the averages is analytic
    (:func:`correct_averages`). The averages of W through the calibration are the
    corrected averages without the linear-calibration assumption.
    """
    from scipy.optimize import nnls

    V = np.asarray(volume, dtype=float)
    F = np.asarray(signal, dtype=float)
    if V.ndim != 1 or V.shape != F.shape or V.size < 10:
        raise DataError("deconvolution needs volume and signal of the same length (at least 10 slices)")
    if not np.all(np.diff(V) > 0):
        order = np.argsort(V)
        V, F = V[order], F[order]
    n = V.size
    if n > max_points:
        edges = np.linspace(V[0], V[-1], max_points + 1)
        idx = np.clip(np.searchsorted(edges, V, side="right") - 1, 0, max_points - 1)
        counts = np.bincount(idx, minlength=max_points)
        keep = counts > 0
        Vg = (np.bincount(idx, weights=V, minlength=max_points)[keep] / counts[keep])
        Fg = (np.bincount(idx, weights=F, minlength=max_points)[keep] / counts[keep])
    else:
        Vg, Fg = V, F
    m = Vg.size
    step = float(np.median(np.diff(Vg)))
    # G[i, j] = G(V_i − V_j)·ΔV, mean-free; the kernel on the (near-uniform) grid
    k = spreading.kernel(step, centred=True)
    h = k.size // 2
    Gm = np.zeros((m, m))
    for off in range(-h, h + 1):
        w = k[off + h]
        if w == 0.0:
            continue
        i0, i1 = max(0, off), min(m, m + off)
        rows = np.arange(i0, i1)
        Gm[rows, rows - off] += w
    D = np.diff(np.eye(m), n=2, axis=0)
    scale = float(np.mean(np.sum(Gm * Gm, axis=0)))
    alpha = positive(smoothing, "deconvolution smoothing", allow_zero=True)
    A = np.vstack([Gm, math.sqrt(alpha * scale) * D])
    b = np.concatenate([Fg, np.zeros(D.shape[0])])
    W, _ = nnls(A, b, maxiter=50 * m)
    fitted = Gm @ W
    rms = float(np.sqrt(np.mean((Fg - fitted) ** 2)))
    return Deconvolution(volume=Vg, signal=W, fitted=fitted, observed=Fg, smoothing=alpha,
                         residual_rms=rms, spreading=spreading)


@dataclass(frozen=True, repr=False)
class CLDBias(Display):
    """Bias of the chain-length-distribution slope Λ caused by band spreading.

    Attributes
    ----------
    sigma_lnM : float
        Spread in ln M [-].
    fraction : float
        Window: the contiguous region where dw/dlogM ≥ fraction × its maximum [-].
    at_peak : float
        Λ_app/Λ from the local slope at the observed peak [-].
    in_window : float
        Λ_app/Λ from a straight-line fit of ln P against M in the window [-].
    Mp_ratio : float
        Observed/true peak molar mass [-].
    dispersity_observed : float
        Đ of the broadened most-probable distribution, 2·exp(σ_lnM²) [-].
    """

    sigma_lnM: float
    fraction: float
    at_peak: float
    in_window: float
    Mp_ratio: float
    dispersity_observed: float

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "sigma lnM [-]": self.sigma_lnM,
            "window fraction [-]": self.fraction,
            "Lambda apparent/true at the peak [-]": self.at_peak,
            "Lambda apparent/true in the window [-]": self.in_window,
            "Mp observed/true [-]": self.Mp_ratio,
            "dispersity observed [-]": self.dispersity_observed,
            "advice": (
                "fit the CLD slope in a window around the peak of dw/dlogM; its bias is about "
                "sigma_lnM²/2 at the peak and about half that over a ±50 %-height window; "
                "correct Λ by dividing by the factor above when σ is known"
            ),
        }


def cld_broadening_bias(sigma_lnM: float, *, fraction: float = 0.5) -> CLDBias:
    """How much Gaussian spreading in ln M biases the CLD slope Λ of a most-probable CLD.

    The instantaneous most-probable distribution has dw/dlnM ∝ M²·exp(−ΛM/M0); it is
    convolved numerically in ln M with a Gaussian of s.d. ``sigma_lnM``, and Λ is read as
    in the CLD method, −M0·d ln P/dM with ln P = ln(dw/dlogM) − 2 ln M, (a) from the local
    slope at the observed peak, (b) from a straight line over the window. The ratio
    Λ_app/Λ depends on σ_lnM and the window only (the problem is scale-free), so the result
    applies to any Λ and M0.

    Parameters
    ----------
    sigma_lnM : float
        D2·σ for a linear calibration [-] (0.14 for σ = 0.2 mL, B = 0.3 1/mL).
    fraction : float
        Window threshold on dw/dlogM relative to its maximum [-].

    References
    ----------
    van Berkel, Russell, Gilbert, Macromolecules 2005 (slope near the peak least
    affected); the residual bias ≈ σ_lnM²/2 at the peak is derived (docs/science.md, section 12).
    """
    s = positive(sigma_lnM, "sigma lnM", allow_zero=True)
    if not 0.0 < fraction < 1.0:
        raise DataError(f"CLD window fraction must be between 0 and 1, not {fraction}")
    # scale-free: take Λ/M0 = 1 so the true peak of dw/dlnM is at M = 2
    x = np.linspace(math.log(2.0) - 12.0, math.log(2.0) + 6.0, 36001)
    M = np.exp(x)
    w = M * M * np.exp(-M)
    if s > 0:
        w = convolve(x, w, Spreading(s))
    ipk = int(np.argmax(w))
    from gpctools.distribution import peak_position

    xp = peak_position(x, w)
    Mp_obs = math.exp(xp)
    at_peak = 2.0 / Mp_obs  # Λ_app = −d lnP/dM = 2/M at the maximum of dw/dlnM (Λ = 1)
    thr = fraction * w[ipk]
    lo, hi = ipk, ipk
    while lo > 0 and w[lo - 1] >= thr:
        lo -= 1
    while hi < w.size - 1 and w[hi + 1] >= thr:
        hi += 1
    sel = slice(lo, hi + 1)
    lnP = np.log(w[sel]) - 2.0 * x[sel]
    slope = np.polyfit(M[sel], lnP, 1)[0]
    return CLDBias(
        sigma_lnM=s,
        fraction=float(fraction),
        at_peak=float(at_peak),
        in_window=float(-slope),
        Mp_ratio=Mp_obs / 2.0,
        dispersity_observed=2.0 * math.exp(s * s),
    )


def shared_spreading(a: Spreading, b: Spreading) -> Spreading:
    """The spreading both traces share after matching: the broader of the two."""
    return Spreading(max(a.sigma, b.sigma), max(a.tau, b.tau))


def tilted_trace(V: np.ndarray, F: np.ndarray, g: Spreading, D2: float) -> np.ndarray:
    """The concentration trace re-weighted so that [G ⊗ (W·e^(−D2·y))](V) = e^(−D2·V)·result.

    A detector whose response is ∝ c·M^k (light scattering k = 1, a viscometer k = a) sees,
    with M(y) = D1·e^(−D2·y) and both traces spread by G = N(0, σ²) ⊗ Exp(τ), call
    D = k·D2 (the argument ``D2`` here):

        S(V) ∝ [G ⊗ (W·e^(−D·y))](V) = e^(−D·V)·M_G(D)·[G_t ⊗ W](V),

    where the tilted kernel e^(D·u)G(u)/M_G(D) is N(Dσ², σ²) ⊗ Exp(τ′), τ′ = τ/(1 − τD),
    and M_G(D) = e^(σ²D²/2)/(1 − τD) (G not centred). G_t ⊗ W follows from the observed
    F = G ⊗ W by undoing Exp(τ) (W′ = F + τ·dF/dV), applying Exp(τ′) and moving the result
    Dσ² to later volumes; the function returns M_G(D)·[G_t ⊗ W]. For a Gaussian G this is
    F read Dσ² earlier: the slice molar mass of a broadened trace leads the concentration
    slice by the same mechanism as the narrow-standard lead (docs/science.md, section 13), with the
    broadening variance in place of the standard's own. Exact for a linear calibration
    (derived here; checked against closed-form averages in the tests).
    """
    Ft = F
    if g.tau > 0:
        tp = g.tau / (1.0 - g.tau * D2)
        Ft = convolve(V, F + g.tau * np.gradient(F, V), Spreading(0.0, tp))
    shifted = np.interp(V - D2 * g.sigma**2, V, Ft)
    return g.mgf(D2, centred=False) * shifted


def unbroadened_averages(av: dict[str, float], g: Spreading, D2: float) -> dict[str, float]:
    """True averages from those of the broadened trace taken through the true M(V) (B2).

    ``D2`` = −ln10·d log10 M/dV of the true calibration [1/mL].

    The k-th moment ∫F·M^k dV is M_G(−k·D2) times the true one, with G not centred
    because M(V) from light scattering refers to the Gaussian part's axis.
    """
    if not D2 > 0 or not all(math.isfinite(v) for v in av.values()):
        return av
    m = {k: g.mgf(-k * D2, centred=False) for k in (-1, 1, 2, 3)}
    out = {"Mn": av["Mn"] * m[-1], "Mw": av["Mw"] / m[1], "Mz": av["Mz"] * m[1] / m[2],
           "Mz1": av["Mz1"] * m[2] / m[3]}
    out["dispersity"] = out["Mw"] / out["Mn"]
    return out
