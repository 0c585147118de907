"""Standard uncertainty of the molar-mass averages of one injection.

Three independent sources are propagated to the relative standard uncertainty u(X)/X of
Mn, Mw and Mz, and combined in quadrature (docs/science.md, section 19.7; first-order
propagation as in JCGM 100:2008, the GUM, section 5.1, from memory):

* **calibration** (:func:`calibration_uncertainty`): the covariance C of the calibration
  coefficients c moves every log10 M_i together. Each average is a ratio of moment sums,
  X = S_a/S_b with S_k = Σ w_i M_i^k, so exactly

      ∂ ln X/∂c = ln10 · (a·x̄_a − b·x̄_b),   x̄_k = Σ w_i M_i^k ∇_c log10 M_i / S_k,

  and u_cal(X)/X = √(gᵀ C g) with g that gradient.
* **baseline noise** (:func:`noise_uncertainty`): white noise of SD σ on every slice
  height, plus the error of the baseline line itself (each window mean has variance
  σ²/n_j), propagated through the sums S_a and S_b. *Assumption*: the noise is white
  (independent from slice to slice). Detector filtering that correlates neighbouring
  slices makes the true value larger.
* **integration limits** (:func:`limit_uncertainty`): half the relative change of X when
  the low-M limit moves ``limit_shift`` mL earlier, a stated convention (no standard
  gives one).

The parts are fractions (u/X, [-]) on the objects and per cent in the result columns
(``u(Mn) calibration [%]`` and so on, :mod:`gpctools.columns`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display

from .calibration import Calibration
from .distribution import AVERAGE_MOMENTS, Distribution
from .signal import Baseline, _median

__all__ = [
    "UNCERTAIN_AVERAGES",
    "RelativeUncertainty",
    "AverageUncertainty",
    "calibration_uncertainty",
    "calibration_gradients",
    "noise_uncertainty",
    "limit_uncertainty",
    "average_uncertainty",
]

#: The averages that get an uncertainty.
UNCERTAIN_AVERAGES = ("Mn", "Mw", "Mz")

LN10 = math.log(10.0)


@dataclass(frozen=True, repr=False)
class RelativeUncertainty(Display):
    """Relative standard uncertainty u(X)/X of one average, by source [-] (fractions, not %).

    Attributes
    ----------
    calibration : float
        From the calibration-coefficient covariance [-]. Common to every injection
        processed with the same calibration (it does not average out over a series).
    noise : float
        From the white baseline noise and the baseline line's own error [-].
    limits : float
        Half the relative change when the low-M limit moves by the limit shift [-].
    """

    calibration: float
    noise: float
    limits: float

    @property
    def total(self) -> float:
        """Combined relative standard uncertainty √(cal² + noise² + limits²) [-].

        NaN when any part is unknown (for example a calibration without degrees of freedom).
        """
        return math.sqrt(self.calibration**2 + self.noise**2 + self.limits**2)

    def summary(self) -> dict[str, float | None]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        from .sheets.cells import finite_or_none

        return {
            "calibration [%]": finite_or_none(100.0 * self.calibration),
            "noise [%]": finite_or_none(100.0 * self.noise),
            "limits [%]": finite_or_none(100.0 * self.limits),
            "combined [%]": finite_or_none(100.0 * self.total),
        }


@dataclass(frozen=True, repr=False)
class AverageUncertainty(Display):
    """Relative standard uncertainties of Mn, Mw and Mz of one injection.

    Attributes
    ----------
    Mn, Mw, Mz : RelativeUncertainty
        u(X)/X by source [-]; ``.total`` is the combination.
    noise_sd : float
        The baseline noise SD used [signal units].
    limit_shift : float
        The move of the low-M limit behind the limits part [mL].
    """

    Mn: RelativeUncertainty
    Mw: RelativeUncertainty
    Mz: RelativeUncertainty
    noise_sd: float
    limit_shift: float

    def of(self, name: str) -> RelativeUncertainty:
        """The uncertainty of ``"Mn"``, ``"Mw"`` or ``"Mz"``."""
        if name not in UNCERTAIN_AVERAGES:
            raise KeyError(name)
        return getattr(self, name)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            **{f"u({k})": self.of(k).summary() for k in UNCERTAIN_AVERAGES},
            "noise SD [signal]": self.noise_sd,
            "low-M limit shift [mL]": self.limit_shift,
            "assumptions": "first-order propagation; white baseline noise; limits part = half "
                           "the change for the low-M limit shift",
        }


def _moment_weights(dist: Distribution) -> tuple[np.ndarray, dict[int, np.ndarray]]:
    """Scaled molar masses m = M/M_ref and m^k for k = -1 ... 3 (scale-free ratios),
    with M_ref the median of M (one partition, the same value as ``numpy.median``).
    """
    m = dist.M / _median(dist.M)
    m2 = m * m  # products, not float powers: several times faster on long arrays
    return m, {-1: 1.0 / m, 0: np.ones_like(m), 1: m, 2: m2, 3: m2 * m}


def calibration_uncertainty(
    dist: Distribution, calibration: Calibration, *, _weights: dict[int, np.ndarray] | None = None
) -> dict[str, float]:
    r"""u(X)/X of Mn, Mw, Mz from the calibration-coefficient covariance [-].

    .. math:: \frac{u_{cal}(X)}{X} = \sqrt{g^T C g},\quad
              g = \ln 10\,(a\,\bar x_a - b\,\bar x_b),\quad
              \bar x_k = \frac{\sum_i w_i M_i^k \nabla_c \log_{10} M_i}{\sum_i w_i M_i^k}

    for X = S_a/S_b (Mn: a = 0, b = −1; Mw: 1, 0; Mz: 2, 1), with ∇_c log10 M_i from
    :meth:`gpctools.calibration.Calibration.log_M_gradient` (tangent continuation
    outside the calibrated range included) and C the covariance s²(XᵀX)⁻¹ of the fit.
    The slice masses w_i do not depend on the calibration, so this is the exact first
    derivative. NaN without a covariance (no degrees of freedom) or for a missing average.
    """
    out = {k: math.nan for k in UNCERTAIN_AVERAGES}
    if not calibration.covariance:
        return out
    C = np.asarray(calibration.covariance, dtype=float)
    if not np.all(np.isfinite(C)):
        return out
    for name, g in calibration_gradients(dist, calibration, _weights=_weights).items():
        out[name] = math.sqrt(max(float(g @ C @ g), 0.0))
    return out


def calibration_gradients(
    dist: Distribution, calibration: Calibration, *, _weights: dict[int, np.ndarray] | None = None
) -> dict[str, np.ndarray]:
    r"""∂ ln X/∂c of Mn, Mw and Mz with respect to the calibration coefficients c [-].

    .. math:: \nabla_c \ln X = \ln 10\,(a\,\bar x_a - b\,\bar x_b)

    with the moment-weighted mean gradients x̄_k of :func:`calibration_uncertainty`. A
    calibration error is common to every injection measured with it, so a run series
    carries these vectors to correlate its runs' errors (gpctools.transfer; docs/science.md,
    section 11.5). Averages that are missing are left out of the mapping. ``_weights``
    (internal) are the powers m^k of :func:`_moment_weights` when already computed.
    """
    G = calibration.log_M_gradient(dist.volume)  # (n, p)
    mk = _moment_weights(dist)[1] if _weights is None else _weights
    ks = sorted({k for name in UNCERTAIN_AVERAGES for k in AVERAGE_MOMENTS[name]})
    Wk = np.stack([dist.w * mk[k] for k in ks])  # (moments, n)
    xbar = dict(zip(ks, (Wk @ G) / Wk.sum(axis=1)[:, None]))  # weighted mean gradient per moment
    out: dict[str, np.ndarray] = {}
    for name in UNCERTAIN_AVERAGES:
        if name in dist.missing:
            continue
        a, b = AVERAGE_MOMENTS[name]
        out[name] = LN10 * (a * xbar[a] - b * xbar[b])
    return out


def noise_uncertainty(
    dist: Distribution, noise_sd: float, baseline: Baseline | None = None, *,
    _weights: dict[int, np.ndarray] | None = None,
) -> dict[str, float]:
    r"""u(X)/X of Mn, Mw, Mz from white baseline noise of SD ``noise_sd`` [-].

    Slice i contributes h_i·ΔV_i·M_i^k to S_k. Its height carries white noise ε_i (SD σ)
    and the error of the baseline line, δb(V_i) = e1·(1 − λ_i) + e2·λ_i, where e_j is
    the error of window j's mean (variance σ²/n_j) and λ_i = (V_i − V̄1)/(V̄2 − V̄1)
    places the slice between the window centres. With a_ik = ΔV_i·M_i^k,

    .. math:: \mathrm{cov}(S_j, S_k) = \sigma^2 \Big[\sum_i a_{ij} a_{ik}
              + \frac{(\sum_i a_{ij}(1-\lambda_i))(\sum_i a_{ik}(1-\lambda_i))}{n_1}
              + \frac{(\sum_i a_{ij}\lambda_i)(\sum_i a_{ik}\lambda_i)}{n_2}\Big]

    and for X = S_a/S_b, u²(ln X) = var S_a/S_a² + var S_b/S_b² − 2 cov(S_a, S_b)/(S_a S_b)
    (first order). Assumes the noise is white and the windows do not overlap the
    integration window; without ``baseline`` only the slice noise is counted.

    Parameters
    ----------
    dist : Distribution
        Must carry slice widths and area (from :func:`gpctools.distribution.compute_distribution`).
    noise_sd : float
        White-noise SD of the heights [signal units] (the baseline's residual SD).
    baseline : Baseline, optional
        The line, with its window centres and slice counts.
    """
    out = {k: math.nan for k in UNCERTAIN_AVERAGES}
    if dist.width is None or not math.isfinite(dist.area) or not (math.isfinite(noise_sd) and noise_sd >= 0):
        return out
    mk = _moment_weights(dist)[1] if _weights is None else _weights
    ks = (-1, 0, 1, 2)
    A = np.stack([dist.width * mk[k] for k in ks])  # a_ik, (moments, n)
    S = dict(zip(ks, A @ dist.height))
    cov = A @ A.T
    if baseline is not None and baseline.counts[0] > 0 and baseline.counts[1] > 0:
        c1, c2 = baseline.centres
        if math.isfinite(c1) and math.isfinite(c2) and c2 != c1:
            lam = (dist.volume - c1) / (c2 - c1)
            u1, u2 = A @ (1.0 - lam), A @ lam
            cov = cov + np.outer(u1, u1) / baseline.counts[0] + np.outer(u2, u2) / baseline.counts[1]
    cov = cov * noise_sd * noise_sd
    index = {k: i for i, k in enumerate(ks)}
    for name in UNCERTAIN_AVERAGES:
        a, b = AVERAGE_MOMENTS[name]
        if name in dist.missing or not (S[a] > 0 and S[b] > 0):
            continue
        ia, ib = index[a], index[b]
        var = cov[ia, ia] / S[a] ** 2 + cov[ib, ib] / S[b] ** 2 - 2.0 * cov[ia, ib] / (S[a] * S[b])
        out[name] = math.sqrt(max(float(var), 0.0))
    return out


def limit_uncertainty(full: Distribution, shifted: dict[str, float]) -> dict[str, float]:
    """u(X)/X from the low-M limit: half the relative change |X_shifted/X − 1|/2 [-].

    ``shifted`` holds the averages [g/mol] with the low-M limit moved ``limit_shift`` mL
    earlier (:func:`gpctools.batch.process_trace`). The factor 1/2 is our stated
    convention: the move is a deliberate, generous excursion of the limit, and half of
    its effect is taken as one standard uncertainty.
    """
    out = {}
    for name in UNCERTAIN_AVERAGES:
        x, y = full.average(name), float(shifted.get(name, math.nan))
        out[name] = 0.5 * abs(y / x - 1.0) if (math.isfinite(x) and math.isfinite(y) and x > 0) else math.nan
    return out


def average_uncertainty(
    dist: Distribution,
    calibration: Calibration,
    *,
    noise_sd: float,
    baseline: Baseline | None,
    shifted: dict[str, float],
    limit_shift: float,
) -> AverageUncertainty:
    """All three parts for Mn, Mw and Mz (see the module docstring); the moment weights
    m^k are computed once for the calibration and the noise parts.
    """
    mk = _moment_weights(dist)[1]
    cal = calibration_uncertainty(dist, calibration, _weights=mk)
    noise = noise_uncertainty(dist, noise_sd, baseline, _weights=mk)
    lim = limit_uncertainty(dist, shifted)
    parts = {k: RelativeUncertainty(cal[k], noise[k], lim[k]) for k in UNCERTAIN_AVERAGES}
    return AverageUncertainty(parts["Mn"], parts["Mw"], parts["Mz"], float(noise_sd), float(limit_shift))
