"""Molar-mass distribution and averages from a corrected trace and a calibration.

Slice i has height h_i at volume V_i, width ΔV_i and molar mass M_i = M(V_i). The mass in
the slice is w_i ∝ h_i·ΔV_i and (docs/science.md, section 1; any polymer-science text,
e.g. the IUPAC definitions of the averages):

    Mn = Σw / Σ(w/M),  Mw = Σ wM / Σw,  Mz = Σ wM² / Σ wM,  Mz+1 = Σ wM³ / Σ wM²,
    Đ = Mw / Mn.

Slice widths are the midpoint widths ΔV_i = (V_{i+1} - V_{i-1})/2 (half widths at the
ends), so unequal slice spacing is integrated correctly; with equal widths ΔV cancels.
Leaving ΔV out with unequal widths is a real bug (about +1 % on Mn and +2 % on Mw for
random widths, docs/science.md, section 1).

The differential distribution uses the calibration Jacobian:

    dw/dlogM (V) = h(V) / |d log10 M / dV| / ∫ h dV.

Negative heights after baseline subtraction are noise and are kept in every sum (area,
Σw/M, Σ wM, ...): clipping them would bias the area upward and Mn most of all, since the
low-M tail carries the largest 1/M weight. When the area Σw itself is not positive the
trace holds no usable polymer signal and a :class:`~gpctools.errors.DataError` is raised;
when only one of the other sums is not positive (baseline noise times M² at high M can
pull Σ wM² below zero), only the averages that need that sum are missing (NaN, with the
reason in :attr:`Distribution.missing` and a :class:`~gpctools.errors.SignalWarning`);
the others stand (docs/science.md, section 19.4).

Peak maxima (Mp) come from a least-squares fit over the top of the peak
(:func:`peak_top`, docs/science.md, section 19.2); mass fractions below or above a molar
mass from the cumulative distribution (:func:`mass_fraction_below`, section 19.6); several
peaks are split at given molar masses (:func:`split_distribution`, section 19.5).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display

from .calibration import Calibration
from .errors import DataError, RangeWarning, SignalWarning
from .signal import _as_trace, _median

__all__ = [
    "Distribution",
    "PeakPart",
    "PeakTop",
    "AVERAGE_MOMENTS",
    "averages",
    "averages_with_reasons",
    "moment_sums",
    "compute_distribution",
    "CURVE_COLUMNS",
    "DistributionCurve",
    "distribution_curve",
    "mass_fraction_below",
    "peak_position",
    "peak_top",
    "slice_widths",
    "split_distribution",
]


#: Column names of :meth:`Distribution.table` and of the per-injection distribution CSV.
TABLE_COLUMNS = (
    "volume [mL]",
    "M [g/mol]",
    "log10 M [-]",
    "mass fraction [-]",
    "dw/dlogM [-]",
    "cumulative mass fraction [-]",
)


#: Columns of a :class:`DistributionCurve` in the long-form distributions table.
CURVE_COLUMNS = (
    "log10 M [-]",
    "M [g/mol]",
    "dw/dlogM [-]",
    "cumulative mass fraction [-]",
)

#: Bin width of :func:`distribution_curve` in log10 M [-]: 100 bins per decade, a
#: tenth of the usual slice spacing of a 6,000-slice export (common practice for
#: overlays of dw/dlogM curves).
CURVE_STEP = 0.01


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


#: Each average as the ratio of two moment sums S_k = Σ w·M^k: (numerator k, denominator k).
AVERAGE_MOMENTS: dict[str, tuple[int, int]] = {"Mn": (0, -1), "Mw": (1, 0), "Mz": (2, 1), "Mz1": (3, 2)}

_SUM_TEXT = {-1: "Σ w/M", 0: "Σ w", 1: "Σ w·M", 2: "Σ w·M²", 3: "Σ w·M³"}


def _check_slices(M: np.ndarray, w: np.ndarray) -> None:
    if M.shape != w.shape:
        raise DataError(f"averages: {M.size} molar masses but {w.size} weights")
    if M.size == 0:
        raise DataError("averages: no slices to average")
    if np.any(~np.isfinite(M)) or np.any(M <= 0):
        raise DataError("averages: molar masses must be finite and positive")
    if np.any(~np.isfinite(w)):
        raise DataError("averages: slice weights must be finite numbers (remove or fill missing values)")


def moment_sums(M: Any, w: Any) -> dict[int, float]:
    """The moment sums S_k = Σ w_i·M_i^k for k = -1 ... 3 [w units · (g/mol)^k]."""
    M = np.asarray(M, dtype=float)
    w = np.asarray(w, dtype=float)
    _check_slices(M, w)
    wM = w * M
    wM2 = wM * M
    return {-1: float((w / M).sum()), 0: float(w.sum()), 1: float(wM.sum()), 2: float(wM2.sum()),
            3: float((wM2 * M).sum())}


def averages_with_reasons(M: Any, w: Any) -> tuple[dict[str, float], dict[str, str]]:
    """Molar-mass averages and, for each one that cannot be formed, the reason.

    Each average is a ratio of two moment sums (:data:`AVERAGE_MOMENTS`,
    docs/science.md, section 1.1); it is reported only when both sums are positive.
    Negative heights (baseline noise) are kept in the sums, so a sum weighted by a high
    power of M can turn negative on a noisy trace although the others are sound; then
    only the averages needing it are missing (NaN) and the others stand
    (docs/science.md, section 19.4). The dispersity needs Mn and Mw.

    Parameters
    ----------
    M : array_like
        Molar mass of each species or slice [g/mol].
    w : array_like
        Mass (not number) of each species or slice, any unit.

    Returns
    -------
    values : dict
        ``Mn``, ``Mw``, ``Mz``, ``Mz1`` [g/mol] and ``dispersity`` [-] (NaN when missing).
    missing : dict
        Average name -> why it is missing (empty when all stand).

    Raises
    ------
    DataError
        Unusable input, or an area Σw that is not positive: then no average exists.
    """
    sums = moment_sums(M, w)
    if sums[0] <= 0:
        raise DataError(
            "the weight sums are not positive: no usable polymer signal inside the integration "
            "limits (check the baseline windows, the limits and the signal column)"
        )
    values: dict[str, float] = {}
    missing: dict[str, str] = {}
    for name, (k_num, k_den) in AVERAGE_MOMENTS.items():
        bad = [k for k in (k_num, k_den) if not sums[k] > 0]
        if bad:
            values[name] = math.nan
            missing[name] = (
                f"{'Mz+1' if name == 'Mz1' else name} not reported: the sum {_SUM_TEXT[bad[0]]} over the "
                f"slices is not positive ({sums[bad[0]]:.3g}); negative heights from baseline noise "
                "outweigh the signal where that sum is weighted most"
            )
        else:
            values[name] = sums[k_num] / sums[k_den]
    values["dispersity"] = values["Mw"] / values["Mn"]  # NaN when either is missing
    return values, missing


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
        ``Mn``, ``Mw``, ``Mz``, ``Mz1`` [g/mol] and ``dispersity`` [-]. An average whose
        moment sum is not positive is NaN, with a :class:`~gpctools.errors.SignalWarning`
        giving the reason (see :func:`averages_with_reasons`).

    Raises
    ------
    DataError
        Unusable input, or Σw not positive.

    Examples
    --------
    Species M = 2, 3, 7 in counts 4, 3, 2 (masses 8, 9, 14) give Mn = 31/9,
    Mw = 141/31, Mz = 799/141 (docs/science.md, section 8, derived):

    >>> r = averages([2, 3, 7], [8, 9, 14])
    >>> round(r["Mn"] * 9, 9), round(r["Mw"] * 31, 9), round(r["Mz"] * 141, 9)
    (31.0, 141.0, 799.0)
    """
    values, missing = averages_with_reasons(M, w)
    for reason in missing.values():
        warnings.warn(reason, SignalWarning, stacklevel=2)
    return values


@dataclass(frozen=True)
class PeakTop:
    """The maximum of a peak from a least-squares fit over its top.

    Attributes
    ----------
    position : float
        x at the fitted maximum [x units].
    height : float
        Fitted height there [y units].
    stderr : float
        Standard error of ``position`` from the fit's residuals [x units] (NaN without
        degrees of freedom).
    fraction : float
        The fit used the points within this fraction of the height below the top [-].
    points : int
        Number of points fitted [-].
    fitted : bool
        False when no maximum could be fitted and the maximum of the smoothed curve was
        taken instead.
    """

    position: float
    height: float
    stderr: float
    fraction: float
    points: int
    fitted: bool


def _smoothed(y: np.ndarray, width: int) -> np.ndarray:
    """Moving average over ``width`` points (odd), ends padded with the end values."""
    width = max(1, int(width) | 1)
    if width == 1 or y.size < width:
        return y.copy()
    half = width // 2
    padded = np.concatenate((np.full(half, y[0]), y, np.full(half, y[-1])))
    c = np.concatenate(([0.0], np.cumsum(padded)))
    return (c[width:] - c[:-width]) / width


def _noise_sd(y: np.ndarray) -> float:
    """White-noise SD from second differences [y units]: σ ≈ 1.4826·MAD(Δ²y)/√6.

    For white noise var(Δ²y) = 6σ²; second differences cancel a locally straight signal,
    so the steep flanks of a coarsely sampled peak do not pass for noise (first
    differences would), and the median ignores the few points of strong curvature
    (common practice in signal processing).
    """
    if y.size < 5:
        return 0.0
    d2 = np.diff(y, 2)
    return 1.4826 * _median(np.abs(d2 - _median(d2))) / math.sqrt(6.0)


def _top_run(sm: np.ndarray, i0: int, threshold: float, min_points: int) -> tuple[int, int]:
    """Index range [lo, hi] of the contiguous run around i0 with sm >= threshold (at least min_points)."""
    n = sm.size
    below = np.flatnonzero(sm < threshold)
    left = below[below < i0]
    right = below[below > i0]
    lo = int(left[-1]) + 1 if left.size else 0
    hi = int(right[0]) - 1 if right.size else n - 1
    while hi - lo + 1 < min_points and (lo > 0 or hi < n - 1):
        lo, hi = max(0, lo - 1), min(n - 1, hi + 1)
    return lo, hi


def _real_roots(c: np.ndarray) -> np.ndarray:
    """Real roots of the polynomial Σ c_k t^k (lowest first), robust to a tiny top coefficient.

    Linear and quadratic cases use the closed forms (the quadratic in the cancellation-free
    form q = −(b + sign(b)·√(b² − 4ac))/2, roots q/a and c/q; any numerical-analysis text);
    a top coefficient below 1e-12 of the largest is dropped first.
    """
    c = np.asarray(c, dtype=float)
    cl = [float(v) for v in c] if c.size <= 3 else []
    if cl and all(map(math.isfinite, cl)):  # the closed forms on Python floats (the same IEEE operations)
        scale = max((abs(v) for v in cl), default=0.0)
        if scale == 0.0:
            return np.array([])
        while abs(cl[-1]) <= 1e-12 * scale:  # numpy's polytrim
            cl.pop()
        if len(cl) <= 1:
            return np.array([])
        if len(cl) == 2:
            return np.array([-cl[0] / cl[1]])
        cc, b, a = cl
        disc = b * b - 4 * a * cc
        if disc < 0:
            return np.array([])
        q = -0.5 * (b + math.copysign(math.sqrt(disc), b))
        return np.array([q / a] + ([cc / q] if q != 0 else []))
    scale = float(np.max(np.abs(c))) if c.size else 0.0
    if scale == 0.0:
        return np.array([])
    big = np.flatnonzero(np.abs(c) > 1e-12 * scale)  # numpy's polytrim, without its generic checks
    if big.size == 0:  # NaN coefficients: polytrim leaves one (zeroed) coefficient
        return np.array([])
    c = c[: int(big[-1]) + 1]
    if c.size <= 1:
        return np.array([])
    if c.size == 2:
        return np.array([-c[0] / c[1]])
    if c.size == 3:
        cc, b, a = c
        disc = b * b - 4 * a * cc
        if disc < 0:
            return np.array([])
        q = -0.5 * (b + math.copysign(math.sqrt(disc), b))
        out = [q / a] + ([cc / q] if q != 0 else [])
        return np.array(out)
    r = np.polynomial.polynomial.polyroots(c)
    return r[np.abs(r.imag) <= 1e-9 * np.maximum(1.0, np.abs(r.real))].real


def _derivative(c: np.ndarray) -> np.ndarray:
    """Coefficients (lowest first) of the derivative of a polynomial of two or more
    coefficients: the same products j·c_j as ``numpy.polynomial.polynomial.polyder``,
    without its generic axis handling (issue 14).
    """
    return np.arange(1, c.size) * c[1:]


def _horner(c: np.ndarray, x: Any) -> Any:
    """The polynomial with coefficients ``c`` (lowest first) at ``x`` by Horner's rule: the
    same operations, in the same order, as ``numpy.polynomial.polynomial.polyval``.
    """
    c0 = c[-1] + x * 0
    for i in range(2, c.size + 1):
        c0 = c[-i] + c0 * x
    return c0


def _vander(t: np.ndarray, degree: int) -> np.ndarray:
    """Powers t^0 ... t^degree as columns, shape (n, degree + 1): the same products, in the
    same memory layout, as ``numpy.polynomial.polynomial.polyvander`` for a 1-D ``t``,
    without its generic argument handling (issue 14).
    """
    v = np.empty((degree + 1, t.size))
    v[0] = t * 0 + 1
    if degree > 0:
        v[1] = t
        for i in range(2, degree + 1):
            v[i] = v[i - 1] * t
    return v.T


def _fit_log_poly(x: np.ndarray, y: np.ndarray, x0: float, degree: int) -> tuple[float, float, float] | None:
    """Maximum of a weighted polynomial fit to ln y: (position, height, stderr) or None.

    ln y is fitted with weights y² (so the fit weighs each point as least squares on y
    would, for small noise: var(ln y) ≈ σ²/y²; Caruana et al. 1986 and Guo 2011, from
    memory). The maximum is the root of the derivative with negative curvature inside the
    fitted range. The position's standard error follows from the coefficient covariance
    s²(XᵀWX)⁻¹ and ∂r/∂c_k = −k·r^(k−1)/p''(r) (implicit differentiation of p'(r) = 0).
    """
    ok = y > 0
    x, y = x[ok], y[ok]
    p = degree + 1
    if x.size < p + 1:
        return None
    sc = float(np.max(np.abs(x - x0))) or 1.0
    t = (x - x0) / sc
    X = _vander(t, degree)
    W = y * y
    A = X.T @ (X * W[:, None])
    ln_y = np.log(y)
    try:
        coef = np.linalg.solve(A, X.T @ (W * ln_y))
    except np.linalg.LinAlgError:
        return None
    d1 = _derivative(coef)
    d2 = _derivative(d1)
    roots = _real_roots(d1)
    roots = roots[(roots >= t.min()) & (roots <= t.max())]
    roots = roots[_horner(d2, roots) < 0]
    if roots.size == 0:
        return None
    r = float(roots[np.argmax(_horner(coef, roots))])
    height = float(np.exp(_horner(coef, r)))
    stderr = math.nan
    dof = x.size - p
    if dof > 0:
        resid = ln_y - X @ coef
        s2 = float((W * resid * resid).sum()) / dof
        try:
            cov = s2 * np.linalg.inv(A)
        except np.linalg.LinAlgError:
            cov = None
        if cov is not None:
            k = np.arange(p)
            g = np.zeros(p)
            g[1:] = -k[1:] * r ** (k[1:] - 1) / float(_horner(d2, r))
            stderr = sc * math.sqrt(max(float(g @ cov @ g), 0.0))
    return x0 + r * sc, height, stderr


def peak_top(
    x: Any,
    y: Any,
    *,
    fraction: float | None = None,
    degree: int = 3,
    min_points: int = 7,
) -> PeakTop:
    """Position of the maximum of a peak from a least-squares fit over its top.

    The points from the maximum down to ``(1 − fraction)`` of its height (on a moving
    average of n/200 points, which only chooses the points) are fitted with a polynomial
    of ``degree`` in ln y, weighted by y²; the maximum of the fitted curve is the
    position. A peak whose logarithm is a parabola (a Gaussian peak, the log-normal
    distribution through a linear calibration) is fitted exactly; the cubic term takes
    up the skew of Schulz-Zimm and similar tops, so the top can be wide enough to
    average the noise down (docs/science.md, section 19.2). A parabola through the three
    highest raw points, the former rule, follows the noise: errors of several per cent
    on broad peaks at 0.2 % noise (issue 10).

    Parameters
    ----------
    x : array_like
        Abscissa, monotonic (volume [mL] or log10 M [-]).
    y : array_like
        The peak (detector trace or dw/dlogM), positive at the top.
    fraction : float, optional
        Part of the height to fit, 0-1 [-]. By default it grows with the noise,
        ``f = 100·σ/H`` clipped to 0.01-0.30, with σ the white-noise SD from second
        differences (:func:`_noise_sd`) and H the smoothed maximum: a noise-free
        peak is fitted over its very top (no shape bias), a noisy one over up to 30 %
        (observed: Schulz-Zimm b = 1-5 and log-normal Đ = 3, 6,000 slices, 0.2 % noise,
        200 draws: largest Mp error 0.19 %; tests/test_distribution.py).
    degree : int
        Polynomial degree in ln y (2: Gaussian; 3, the default: skewed tops).
    min_points : int
        Fit at least this many points (the window grows symmetrically).

    Returns
    -------
    PeakTop
        When no maximum can be fitted (a peak at the record's end, a flat top), the
        position of the smoothed maximum is returned with ``fitted=False``.

    References
    ----------
    R. Caruana, R. Searle, T. Heller, S. Shupack, Anal. Chem. 58 (1986) 1162 (a Gaussian
    as a parabola in ln y); H. Guo, IEEE Signal Process. Mag. 28 (2011) 134 (weights y²);
    both from memory.
    """
    xa = np.asarray(x, dtype=float)
    ya = np.asarray(y, dtype=float)
    n = ya.size
    if n == 0 or xa.shape != ya.shape:
        raise DataError(f"peak_top: {xa.size} x values for {ya.size} y values")
    sm = _smoothed(ya, max(3, n // 200))
    i0 = int(np.argmax(sm))
    H = float(sm[i0])
    if fraction is None:
        sigma = _noise_sd(ya)
        fraction = min(0.30, max(0.01, 100.0 * sigma / H)) if H > 0 else 0.30
    fraction = float(fraction)
    if H <= 0 or n < 3:
        return PeakTop(float(xa[i0]), H, math.nan, fraction, 1, False)
    lo, hi = _top_run(sm, i0, (1.0 - fraction) * H, min_points)
    fit = _fit_log_poly(xa[lo:hi + 1], ya[lo:hi + 1], float(xa[i0]), degree)
    if fit is None and degree > 2:
        fit = _fit_log_poly(xa[lo:hi + 1], ya[lo:hi + 1], float(xa[i0]), 2)
    if fit is None:
        return PeakTop(float(xa[i0]), H, math.nan, fraction, hi - lo + 1, False)
    return PeakTop(fit[0], fit[1], fit[2], fraction, hi - lo + 1, True)


def peak_position(x: np.ndarray, y: np.ndarray) -> float:
    """x at the maximum of y, refined by a parabola through the top three points.

    The raw maximum sample is off by up to half a slice; the local parabola recovers
    the vertex of a noise-free peak (docs/science.md, section 1.3, common practice). On
    noisy data use :func:`peak_top`, which the averages use for Mp.
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


@dataclass(frozen=True, repr=False)
class Distribution(Display):
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
        Averages [g/mol] (Mz1 is Mz+1); NaN when missing (see ``missing``).
    Mp : float
        M at the maximum of the corrected trace h(V) [g/mol], from a fit over the top of
        the peak (:func:`peak_top`); the convention for narrow standards and for
        reporting.
    Mp_dwdlogM : float
        M at the maximum of dw/dlogM [g/mol] (same fit, in log10 M); differs from Mp
        unless the calibration is linear.
    dispersity : float
        Mw/Mn [-].
    outside_fraction : float
        Mass fraction of the window eluting outside the calibrated range [-].
    warnings : tuple of str
    width : ndarray
        Slice widths ΔV of the slices [mL] (taken on the full volume axis).
    area : float
        Σ h·ΔV over the slices [signal units · mL]; ``w = h·ΔV/area``.
    missing : dict
        Average name (``"Mn"``, ``"Mw"``, ``"Mz"``, ``"Mz1"``) -> why it is not reported.
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
    width: np.ndarray | None = None
    area: float = math.nan
    missing: dict[str, str] = field(default_factory=dict)

    @property
    def height(self) -> np.ndarray:
        """Baseline-corrected detector height of each slice, h = w·area/ΔV [signal units]."""
        if self.width is None:
            raise DataError("this distribution carries no slice widths")
        return self.w * self.area / self.width

    def average(self, name: str) -> float:
        """An average by name: ``"Mn"``, ``"Mw"``, ``"Mz"``, ``"Mz1"`` [g/mol]."""
        if name not in AVERAGE_MOMENTS:
            raise KeyError(name)
        return float(getattr(self, name))

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        from .sheets.cells import finite_or_none

        return {
            "Mn [g/mol]": finite_or_none(self.Mn),
            "Mw [g/mol]": finite_or_none(self.Mw),
            "Mz [g/mol]": finite_or_none(self.Mz),
            "Mz+1 [g/mol]": finite_or_none(self.Mz1),
            "Mp [g/mol]": finite_or_none(self.Mp),
            "Mp (dw/dlogM) [g/mol]": finite_or_none(self.Mp_dwdlogM),
            "dispersity [-]": finite_or_none(self.dispersity),
            "outside calibration [% mass]": 100.0 * self.outside_fraction,
            "slices": int(self.volume.size),
            "missing averages": dict(self.missing),
            "warnings": list(self.warnings),
        }

    def table(self):
        """The distribution as a pandas DataFrame with unit-named columns."""
        import pandas as pd

        columns = (self.volume, self.M, np.log10(self.M), self.w, self.dwdlogM, self.cumulative)
        return pd.DataFrame(dict(zip(TABLE_COLUMNS, columns)))


@dataclass(frozen=True)
class DistributionCurve:
    """A distribution on a regular log10 M grid: the compact form of one injection.

    Attributes
    ----------
    log10_M : ndarray
        Centres of the occupied bins, increasing [-].
    dwdlogM : ndarray
        Mean dw/dlog10 M of the slices in each bin [-].
    cumulative : ndarray
        Cumulative mass fraction at the bin centre [-] (interpolated linearly in log10 M
        between slices; same convention as :attr:`Distribution.cumulative`).
    step : float
        Bin width in log10 M [-].
    """

    log10_M: np.ndarray
    dwdlogM: np.ndarray
    cumulative: np.ndarray
    step: float

    def columns(self) -> tuple[np.ndarray, ...]:
        """The arrays in the order of :data:`CURVE_COLUMNS`."""
        return (self.log10_M, 10.0 ** self.log10_M, self.dwdlogM, self.cumulative)


def distribution_curve(dist: Distribution, step: float = CURVE_STEP) -> DistributionCurve:
    """Bin a distribution on a regular log10 M grid (the long-form distributions table).

    Each bin [k·step, (k+1)·step) of log10 M holds the mean of the slices' dw/dlog10 M
    that fall in it; bins without a slice (excluded regions, gaps) are left out, so no
    value is invented between slices. The averages are never computed from this curve:
    they come from the slices (:func:`compute_distribution`).

    Parameters
    ----------
    dist : Distribution
    step : float
        Bin width in log10 M [-] (default :data:`CURVE_STEP`).

    Returns
    -------
    DistributionCurve
    """
    if not step > 0:
        raise DataError(f"the bin width of a distribution curve must be positive, got {step!r}")
    x = np.log10(np.asarray(dist.M, dtype=float))
    if x.size == 0:
        empty = np.empty(0)
        return DistributionCurve(empty, empty, empty, float(step))
    k = np.floor(x / step).astype(np.int64)
    k0 = int(k.min())
    idx = k - k0
    counts = np.bincount(idx)
    sums = np.bincount(idx, weights=np.asarray(dist.dwdlogM, dtype=float))
    occupied = np.flatnonzero(counts)
    centre = (occupied + k0 + 0.5) * step
    order = np.argsort(x, kind="stable")
    cumulative = np.interp(centre, x[order], np.asarray(dist.cumulative, dtype=float)[order])
    return DistributionCurve(centre, sums[occupied] / counts[occupied], cumulative, float(step))


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
        An average whose moment sum is not positive is NaN with its reason in
        ``missing`` (and a :class:`~gpctools.errors.SignalWarning`); the others stand.

    Notes
    -----
    Slice widths come from the full volume axis, so a window edge does not change the
    widths of the slices next to it. The cumulative fraction is accumulated from the
    low-M end: ``cumulative[i]`` is the mass fraction with M ≤ M_i. Mp and Mp (dw/dlogM)
    are the maxima of :func:`peak_top` fits over the top of h(V) and of dw/dlogM against
    log10 M (docs/science.md, sections 1.3 and 19.2).
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
    avg, missing = averages_with_reasons(M, area)
    w = area / area_sum
    jac = np.abs(calibration.dlogM_dV(Vs))
    dwdlogM = hs / jac / area_sum
    cumulative = np.cumsum(w[::-1])[::-1]
    Mp = float(calibration.M(peak_top(Vs, hs).position))
    Mp_d = float(10.0 ** peak_top(logM, dwdlogM).position)
    notes: list[str] = []
    if 100.0 * outside_fraction > outside_warn_pct:
        notes.append(
            f"{100.0 * outside_fraction:.2f} % of the mass elutes outside the calibrated range "
            f"({calibration.v_min:.4g}-{calibration.v_max:.4g} mL); "
            + ("treated by tangent extrapolation" if outside == "linear" else "excluded from the averages")
        )
    for note in notes:
        warnings.warn(note, RangeWarning, stacklevel=2)
    for reason in missing.values():
        warnings.warn(reason, SignalWarning, stacklevel=2)
    notes.extend(missing.values())
    if not all(math.isfinite(avg[k]) for k in avg if k in AVERAGE_MOMENTS and k not in missing):
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
        width=dV[sel],
        area=area_sum,
        missing=missing,
    )


# -- fractions ------------------------------------------------------------------------------
def mass_fraction_below(dist: Distribution, M_cut: float) -> float:
    r"""Mass fraction of the distribution with molar mass below ``M_cut`` [-].

    .. math:: F(M_c) = \sum_i w_i \, \mathrm{clip}\left(\frac{V_{i,hi} - V_c}{V_{i,hi} - V_{i,lo}}, 0, 1\right)

    Each slice's mass is taken as spread evenly over its width [V_lo, V_hi] (the midpoint
    rule of :func:`slice_widths`), and V_c, the volume where M = M_c, is interpolated
    linearly in log10 M between slice centres, so the result moves smoothly with M_c
    instead of in whole slices. Negative heights (noise) count as they do in the
    averages. A cut-off above every integrated M gives 1, below every one 0: mass outside
    the integration limits is not part of the distribution (docs/science.md, section 19.6).

    Parameters
    ----------
    dist : Distribution
    M_cut : float
        Cut-off molar mass [g/mol], positive.

    Returns
    -------
    float
        The fraction below M_cut [-]; the fraction above is 1 minus it.
    """
    if not (math.isfinite(M_cut) and M_cut > 0):
        raise DataError(f"a molar-mass cut-off must be a positive number in g/mol, got {M_cut!r}")
    V = dist.volume
    logM = np.log10(dist.M)
    lc = math.log10(M_cut)
    if lc >= logM.max():
        return float(dist.w.sum())
    if lc < logM.min():
        return 0.0
    # log M falls with V: interpolate V at log M = lc on the reversed (increasing) axis.
    Vc = float(np.interp(lc, logM[::-1], V[::-1]))
    width = dist.width if dist.width is not None else slice_widths(V)
    lo = V - 0.5 * width
    hi = V + 0.5 * width
    if V.size > 1:
        # contiguous slices share their midpoint edges (unequal spacing included)
        mids = 0.5 * (V[1:] + V[:-1])
        touching = (V[1:] - V[:-1]) <= 1.5 * np.maximum(width[1:], width[:-1])  # not across a gap
        hi[:-1] = np.where(touching, mids, hi[:-1])
        lo[1:] = np.where(touching, mids, lo[1:])
    span = np.where(hi > lo, hi - lo, 1.0)
    part = np.clip((hi - Vc) / span, 0.0, 1.0)
    return float((dist.w * part).sum())


# -- several peaks ----------------------------------------------------------------------------
@dataclass(frozen=True, repr=False)
class PeakPart(Display):
    """One part of a trace split at given molar masses (perpendicular drop).

    Attributes
    ----------
    number : int
        1 for the highest-M part (first to elute), then 2, 3, ... [-].
    M_upper, M_lower : float or None
        The part holds slices with M_lower <= M < M_upper [g/mol] (None: open end).
    area_pct : float
        Share of the part in the whole distribution's mass [%].
    Mn, Mw, Mz : float
        The part's averages [g/mol] (NaN when missing, reason in ``missing``).
    Mp : float
        M at the part's maximum of h(V) [g/mol] (:func:`peak_top`); NaN when the
        part's highest point is at its edge (a flank, not a peak).
    missing : dict
        Quantity -> why it is not reported.
    """

    number: int
    M_upper: float | None
    M_lower: float | None
    area_pct: float
    Mn: float
    Mw: float
    Mz: float
    Mp: float
    missing: dict[str, str] = field(default_factory=dict)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        from .sheets.cells import finite_or_none

        return {
            "peak": self.number,
            "M upper [g/mol]": finite_or_none(self.M_upper),
            "M lower [g/mol]": finite_or_none(self.M_lower),
            "area [%]": finite_or_none(self.area_pct),
            "Mn [g/mol]": finite_or_none(self.Mn),
            "Mw [g/mol]": finite_or_none(self.Mw),
            "Mz [g/mol]": finite_or_none(self.Mz),
            "Mp [g/mol]": finite_or_none(self.Mp),
            "missing": dict(self.missing),
        }


def split_distribution(dist: Distribution, calibration: Calibration, split_M: Any) -> tuple[PeakPart, ...]:
    """Split a distribution at molar masses and average each part on its own.

    Each slice goes whole to the part its M falls in (perpendicular drop at the split
    masses, common practice for overlapping SEC peaks). Averages, Mp and area share are
    those of the part's own slices (:func:`averages_with_reasons`, :func:`peak_top`).
    The whole-sample averages follow from the parts with their mass fractions φ_k:
    1/Mn = Σ φ_k/Mn_k and Mw = Σ φ_k·Mw_k (docs/science.md, section 1.6, derived), which
    the tests use as a check.

    Parameters
    ----------
    dist : Distribution
    calibration : Calibration
        Turns a part's peak volume into Mp.
    split_M : sequence of float
        Molar masses to split at [g/mol] (any order; split valleys are converted by the
        caller).

    Returns
    -------
    tuple of PeakPart
        Ordered from high M to low M; ``len(split_M) + 1`` parts.
    """
    cuts = sorted({float(m) for m in split_M}, reverse=True)
    for m in cuts:
        if not (math.isfinite(m) and m > 0):
            raise DataError(f"split molar masses must be positive numbers in g/mol, got {m!r}")
    bounds = [math.inf, *cuts, 0.0]
    h = dist.height if dist.width is not None else dist.w
    parts = []
    for k in range(len(bounds) - 1):
        upper, lower = bounds[k], bounds[k + 1]
        sel = (dist.M < upper) & (dist.M >= lower)
        missing: dict[str, str] = {}
        values = {"Mn": math.nan, "Mw": math.nan, "Mz": math.nan}
        Mp = math.nan
        if int(sel.sum()) < 3:
            missing["peak"] = f"peak {k + 1}: fewer than 3 slices between the split molar masses"
        else:
            try:
                avg, why = averages_with_reasons(dist.M[sel], dist.w[sel])
                values = {key: avg[key] for key in values}
                missing.update({key: f"peak {k + 1}: {text}" for key, text in why.items() if key in values})
            except DataError as exc:
                missing["peak"] = f"peak {k + 1}: {exc.message}"
            top = peak_top(dist.volume[sel], h[sel])
            Vs = dist.volume[sel]
            if top.fitted and Vs[0] < top.position < Vs[-1]:
                Mp = float(calibration.M(top.position))
            else:
                missing["Mp"] = f"peak {k + 1}: its highest point is at the split, not a maximum"
        parts.append(PeakPart(
            number=k + 1,
            M_upper=None if math.isinf(upper) else upper,
            M_lower=None if lower == 0.0 else lower,
            area_pct=100.0 * float(dist.w[sel].sum()),
            Mn=values["Mn"], Mw=values["Mw"], Mz=values["Mz"], Mp=Mp, missing=missing,
        ))
    return tuple(parts)
