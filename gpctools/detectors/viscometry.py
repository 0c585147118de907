"""Online viscometry: specific and intrinsic viscosity per slice, universal calibration
with measured [η], the Mark-Houwink fit and the viscosity-average molar mass.

Units: [η] and K in dL/g (the project's Mark-Houwink unit; 1 dL/g = 100 mL/g), c in
g/mL, pressures in any one unit, hydrodynamic volume J = [η]·M in dL/mol.

Equations (docs/science.md, section 15):

    bridge            η_sp = 4ΔP/(IP − 2ΔP)                                          (V3)
    single capillary  η_sp = (ΔP − ΔP0)/ΔP0                                          (V1)
    two capillaries   η_r = ΔP1/ΔP2, η_sp = η_r − 1                                   (V2)
    dilute limit      [η] = η_sp/c                                                   (V4)
    Solomon-Ciuta     [η] = [2(η_sp − ln η_r)]^½ / c                                 (V5)
    Huggins inverted  [η] = (−1 + (1 + 4k_H η_sp)^½)/(2k_H c)                        (V6)
    universal cal.    J(V) = K_s·M_s(V)^(1+a_s),  M_i = J(V_i)/[η]_i                 (V7, V8)
    Mn                Mn = m / Σ(η_sp,i ΔV_i / J(V_i))                               (V9)
    [η]_w             [η]_w = Σ η_sp,i ΔV_i / m = Σ w_i[η]_i,  Mv = ([η]_w/K)^(1/a)    (V10)
    Mark-Houwink      log[η] = log K + a·log M                                       (V11)

References
----------
Bridge principle: Haney, J. Appl. Polym. Sci. 30 (1985) 3023 (from memory); the formula
V3 is derived from the balance of a bridge with equal capillaries. Two capillaries:
European patent EP0181224 (1986). Solomon and Ciuta, J. Appl. Polym. Sci. 6 (1962) 683
(from memory); its bias evaluated by Pamies et al., Colloid Polym. Sci. 286 (2008) 1223.
Huggins equation: IUPAC Gold Book H02869. Universal calibration: Benoit et al. 1967
(from memory); ISO 16014-2.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none

from ._common import LN10, ML_PER_DL, as_array, polyfit, positive
from ._slices import LogMFit, fit_log_M, good_signal_mask, slice_averages, widths, window_mask
from .broadening import Spreading, shared_spreading, tilted_trace, unbroadened_averages
from .instrument import VISCOMETER_DESIGNS, DetectorSetup, Viscometer
from .traces import DetectorTraces, concentration, matched_pair

__all__ = [
    "INTRINSIC_METHODS",
    "specific_viscosity",
    "bridge_pressure",
    "intrinsic_viscosity",
    "hydrodynamic_volume",
    "universal_molar_mass",
    "number_average_universal",
    "weight_average_intrinsic_viscosity",
    "viscosity_average_M",
    "mark_houwink_viscosity",
    "MarkHouwinkFit",
    "fit_mark_houwink",
    "ViscometryOptions",
    "ViscometryResult",
    "analyse_viscometry",
]

INTRINSIC_METHODS = ("solomon-ciuta", "dilute", "huggins")


def specific_viscosity(design: str, channels: Any, *, constant: float = 1.0) -> np.ndarray:
    """Specific viscosity η_sp per slice from the viscometer's channels [-].

    Parameters
    ----------
    design : str
        ``"bridge"``: channels [ΔP, IP] — bridge differential pressure (baseline-
        corrected) and inlet pressure (as measured); η_sp = 4kΔP/(IP − 2kΔP) (V3).
        ``"single capillary"``: channels [ΔP − ΔP0, ΔP0] — excess pressure drop over the
        solvent's and the solvent pressure drop under the peak; η_sp = k(ΔP − ΔP0)/ΔP0 (V1).
        ``"two capillaries"``: channels [ΔP1 − ΔP2, ΔP2] — excess of the sample capillary
        over the solvent capillary, and the solvent capillary's drop (transducers
        matched on solvent); η_sp = η_r − 1 = k(ΔP1 − ΔP2)/ΔP2 (V2).
        ``"specific viscosity"``: one channel already holding η_sp; η_sp = k·S.
    channels : array_like, shape (n, 2) or (n,)
        As above, in one pressure unit.
    constant : float
        Gain correction k [-] (for the bridge: the differential/inlet transducer gain
        ratio).

    Examples
    --------
    The bridge round trip of docs/science.md, section 15 (derived): IP = 100, η_sp = 0.1 gives
    ΔP = 2.38095 and back:

    >>> dp = bridge_pressure(0.1, 100.0)
    >>> round(float(dp), 5), round(float(specific_viscosity("bridge", [[dp, 100.0]])[0]), 12)
    (2.38095, 0.1)
    """
    d = str(design).strip().lower()
    if d not in VISCOMETER_DESIGNS:
        raise DataError(f"unknown viscometer design {design!r}; use one of {', '.join(VISCOMETER_DESIGNS)}")
    k = positive(constant, "viscometer constant")
    a = as_array(channels, "viscometer channels", ndim=None)
    if d == "specific viscosity":
        if a.ndim != 1:
            a = a.reshape(a.shape[0], -1)
            if a.shape[1] != 1:
                raise DataError("a 'specific viscosity' viscometer has one channel")
            a = a[:, 0]
        return k * a
    if a.ndim != 2 or a.shape[1] != 2:
        raise DataError(f"a {d} viscometer needs two channels per slice [differential, reference]")
    diff, ref = a[:, 0], a[:, 1]
    if np.any(ref <= 0):
        raise DataError(
            f"the reference pressure of the {d} viscometer must be positive in every slice "
            "(inlet pressure or solvent pressure drop, not baseline-subtracted)"
        )
    if d == "bridge":
        kd = k * diff
        denom = ref - 2.0 * kd
        if np.any(denom <= 0):
            raise DataError("bridge differential pressure reaches half the inlet pressure: check the channels")
        return np.asarray(4.0 * kd / denom)
    return np.asarray(k * diff / ref)


def bridge_pressure(eta_sp: Any, inlet_pressure: Any) -> np.ndarray:
    """Bridge differential pressure for a given η_sp: ΔP = η_sp·IP/(4 + 2η_sp) (V3 inverted)."""
    e = np.asarray(eta_sp, dtype=float)
    return np.asarray(e * np.asarray(inlet_pressure, dtype=float) / (4.0 + 2.0 * e))


def intrinsic_viscosity(eta_sp: Any, concentration: Any, *, method: str = "solomon-ciuta",
                        huggins: float | None = None) -> np.ndarray:
    """Intrinsic viscosity per slice [dL/g] (V4-V6).

    Parameters
    ----------
    eta_sp : array_like
        Specific viscosity per slice [-].
    concentration : array_like
        c per slice [g/mL].
    method : {"solomon-ciuta", "dilute", "huggins"}
        V5 (default; within 0.02 % at SEC concentrations), V4 (within about 0.4 %), or V6
        with ``huggins`` = k_H.
    huggins : float, optional
        Huggins constant k_H [-] for ``method="huggins"``.

    Notes
    -----
    Baseline noise makes η_sp negative in the tails. V5's square root would turn such
    slices positive and bias every average, so the sign of η_sp is kept:
    [η] = sign(η_sp)·[2|η_sp − ln(1 + η_sp)|]^½/c. Slices with c ≤ 0 give NaN.

    Examples
    --------
    [η] = 1.00 dL/g, c = 1×10⁻⁴ g/mL, η_sp = 0.010035 (Huggins k_H 0.35): Solomon-Ciuta
    gives 1.0002 dL/g, V4 1.0035 (docs/science.md, section 15, derived):

    >>> round(float(intrinsic_viscosity(0.010035, 1e-4)), 4)
    1.0002
    """
    e = np.asarray(eta_sp, dtype=float)
    c = np.asarray(concentration, dtype=float)
    m = str(method).strip().lower()
    with np.errstate(divide="ignore", invalid="ignore"):
        if m == "dilute":
            out = e / c
        elif m == "solomon-ciuta":
            if np.any(e <= -1.0):
                raise DataError("specific viscosity at or below −1 is impossible: check the viscometer channels")
            excess = e - np.log1p(e)
            out = np.sign(e) * np.sqrt(2.0 * np.abs(excess)) / c
        elif m == "huggins":
            if huggins is None or not huggins > 0:
                raise DataError("the Huggins inversion needs a positive Huggins constant k_H")
            root = np.sqrt(np.clip(1.0 + 4.0 * huggins * e, 0.0, None))
            out = (root - 1.0) / (2.0 * huggins * c)
        else:
            raise DataError(f"unknown intrinsic-viscosity method {method!r}; use one of {', '.join(INTRINSIC_METHODS)}")
    out = np.where(c > 0, out, np.nan) / ML_PER_DL
    return np.asarray(out)


def hydrodynamic_volume(log_M_standard: Any, K_standard: float, a_standard: float) -> np.ndarray:
    """J = K_s·M_s^(1+a_s) = [η]_s·M_s [dL/mol] from the standards' calibration (V7).

    Parameters
    ----------
    log_M_standard : array_like
        log10 of the standard-polymer molar mass at each slice volume [-] (the
        conventional calibration curve, before any Mark-Houwink conversion).
    K_standard : float
        Mark-Houwink K of the standard polymer [dL/g].
    a_standard : float
        Mark-Houwink exponent of the standard polymer [-].

    Examples
    --------
    Polystyrene 10⁵ g/mol (K 1.14×10⁻⁴ dL/g, a 0.716): J = 4.3342×10⁴ dL/mol (docs/science.md, section 15):

    >>> f"{float(hydrodynamic_volume(5.0, 1.14e-4, 0.716)):.5g}"
    '43342'
    """
    K = positive(K_standard, "Mark-Houwink K of the standard [dL/g]")
    lg = np.asarray(log_M_standard, dtype=float)
    return np.asarray(K * np.power(10.0, (1.0 + float(a_standard)) * lg))


def universal_molar_mass(J: Any, intrinsic: Any) -> np.ndarray:
    """M_i = J(V_i)/[η]_i [g/mol] (V8); NaN where [η] ≤ 0 (noise)."""
    j = np.asarray(J, dtype=float)
    eta = np.asarray(intrinsic, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.asarray(np.where(eta > 0, j / eta, np.nan))


def number_average_universal(eta_sp: Any, widths: Any, J: Any, mass: float) -> float:
    """Mn = m / Σ(η_sp,i ΔV_i / J_i) [g/mol] (V9).

    Needs only the mass eluted, not the concentration profile: Σ c_i[η]_i ΔV_i/J_i =
    Σ c_i ΔV_i/M_i. Derived in docs/science.md, section 15.

    Parameters
    ----------
    eta_sp : array_like
        Specific viscosity per slice [-].
    widths : array_like
        Slice widths ΔV [mL].
    J : array_like
        Hydrodynamic volume at each slice [dL/mol].
    mass : float
        Mass eluted in the slices [g].
    """
    m = positive(mass, "mass eluted [g]")
    s = float(np.sum(np.asarray(eta_sp) * np.asarray(widths) / (np.asarray(J) * ML_PER_DL)))
    if not s > 0:
        raise DataError("the viscometer trace holds no positive specific viscosity: no Mn from it")
    return m / s


def weight_average_intrinsic_viscosity(eta_sp: Any, widths: Any, mass: float) -> float:
    """[η]_w = Σ η_sp,i ΔV_i / m [dL/g] (V10): offset- and broadening-independent."""
    m = positive(mass, "mass eluted [g]")
    return float(np.sum(np.asarray(eta_sp) * np.asarray(widths))) / m / ML_PER_DL


def viscosity_average_M(intrinsic_w: float, K: float, a: float) -> float:
    """Mv = ([η]_w/K)^(1/a) [g/mol] (V10 with [η] = K·M^a).

    Examples
    --------
    [η]_w = 0.90636 dL/g with the polystyrene pair (1.14×10⁻⁴ dL/g, 0.716):
    Mv = 280 208 (docs/science.md, section 15, derived):

    >>> round(viscosity_average_M(0.90636, 1.14e-4, 0.716), -1)
    280210.0
    """
    return float((positive(intrinsic_w, "[η]_w [dL/g]") / positive(K, "K [dL/g]")) ** (1.0 / positive(a, "a")))


def mark_houwink_viscosity(M: Any, K: float, a: float) -> np.ndarray:
    """[η] = K·M^a [dL/g] (V11)."""
    return np.asarray(K * np.power(np.asarray(M, dtype=float), a))


@dataclass(frozen=True, repr=False)
class MarkHouwinkFit(Display):
    """Mark-Houwink constants fitted to slice data: log10[η] = log10 K + a·log10 M (V11).

    Attributes
    ----------
    K, K_stderr : float
        [dL/g]; the standard error from that of log10 K (K·ln10·se).
    a, a_stderr : float
        Exponent [-].
    correlation : float
        Correlation of log10 K and a [-] (strongly negative: report both together).
    M_range : tuple of float
        Molar-mass range of the slices fitted [g/mol].
    n_points : int
        Slices fitted.
    curvature, curvature_stderr : float
        Quadratic coefficient of log10[η] in log10 M [-]; a significant negative value
        (bending down at high M) suggests long-chain branching.
    residual_sd : float
        Of log10[η] [-].
    rho : float
        Lag-1 autocorrelation of the residuals [-]; standard errors are widened by
        √((1 + ρ)/(1 − ρ)) when it is positive (neighbouring slices are not independent).
    """

    K: float
    K_stderr: float
    a: float
    a_stderr: float
    correlation: float
    M_range: tuple[float, float]
    n_points: int
    curvature: float
    curvature_stderr: float
    residual_sd: float
    rho: float
    warnings: tuple[str, ...] = field(default=())

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "K [dL/g]": finite_or_none(self.K),
            "K standard error [dL/g]": finite_or_none(self.K_stderr),
            "a [-]": finite_or_none(self.a),
            "a standard error [-]": finite_or_none(self.a_stderr),
            "correlation logK-a [-]": finite_or_none(self.correlation),
            "M range [g/mol]": [finite_or_none(v) for v in self.M_range],
            "slices fitted": self.n_points,
            "curvature [-]": finite_or_none(self.curvature),
            "curvature standard error [-]": finite_or_none(self.curvature_stderr),
            "residual sd log10[eta] [-]": finite_or_none(self.residual_sd),
            "residual autocorrelation [-]": finite_or_none(self.rho),
            "warnings": list(self.warnings),
        }


def fit_mark_houwink(M: Any, intrinsic: Any, *, mask: Any = None) -> MarkHouwinkFit:
    """Fit K and a to per-slice [η] and M by least squares in log-log (V11).

    Parameters
    ----------
    M : array_like
        Molar mass per slice [g/mol] (light scattering or universal calibration).
    intrinsic : array_like
        [η] per slice [dL/g].
    mask : array_like of bool, optional
        Slices with good signal on both detectors (default: all with positive values).

    Notes
    -----
    With M from the universal calibration (V8) the fit is not independent of the
    calibration: log[η] + log M = log J(V) holds by construction, so it describes the
    sample only through the spread of [η] at each V.
    """
    Mv = np.asarray(M, dtype=float)
    eta = np.asarray(intrinsic, dtype=float)
    ok = np.isfinite(Mv) & np.isfinite(eta) & (Mv > 0) & (eta > 0)
    if mask is not None:
        ok &= np.asarray(mask, dtype=bool)
    if ok.sum() < 5:
        raise DataError(f"the Mark-Houwink fit needs at least 5 slices with positive M and [η], got {int(ok.sum())}")
    x = np.log10(Mv[ok])
    y = np.log10(eta[ok])
    xc = float(x.mean())
    f1 = polyfit(x - xc, y, 1, what="Mark-Houwink fit")
    a = float(f1.coef[1])
    logK = float(f1.coef[0]) - a * xc
    # covariance of (log K, a) from that of (b0 at xc, a)
    c00, c01, c11 = f1.covariance[0, 0], f1.covariance[0, 1], f1.covariance[1, 1]
    var_logK = c00 - 2 * xc * c01 + xc * xc * c11
    cov_logK_a = c01 - xc * c11
    se_logK = math.sqrt(max(var_logK, 0.0))
    se_a = math.sqrt(max(c11, 0.0))
    corr = cov_logK_a / (se_logK * se_a) if se_logK > 0 and se_a > 0 else float("nan")
    K = 10.0**logK
    warns: list[str] = []
    curv, curv_se = float("nan"), float("nan")
    if x.size >= 6:
        f2 = polyfit(x - xc, y, 2, what="Mark-Houwink curvature")
        curv, curv_se = float(f2.coef[2]), f2.stderr(2)
        if curv < 0 and abs(curv) > 3 * curv_se and float(np.ptp(x)) > 0.3:
            warns.append(
                f"log[η] bends down against log M (quadratic term {curv:.3g} ± {curv_se:.2g}): long-chain "
                "branching at high M, or a poorly aligned viscometer"
            )
    if a < 0.5:
        warns.append(f"Mark-Houwink exponent a = {a:.3f} is below 0.5: branching, or a theta-like solvent")
    return MarkHouwinkFit(
        K=K, K_stderr=K * math.log(10.0) * se_logK, a=a, a_stderr=se_a, correlation=float(corr),
        M_range=(float(10 ** x.min()), float(10 ** x.max())), n_points=int(x.size),
        curvature=curv, curvature_stderr=curv_se, residual_sd=f1.residual_sd, rho=f1.rho,
        warnings=tuple(warns),
    )



@dataclass(frozen=True)
class ViscometryOptions:
    """Choices of the viscometry analysis.

    Attributes
    ----------
    method : {"solomon-ciuta", "dilute", "huggins"}
        Intrinsic viscosity per slice (V5 default, V4, V6).
    huggins : float or None
        k_H for ``method="huggins"`` [-].
    good_fraction : float
        Slices with both traces above this fraction of their maxima are fitted [-].
    fit_order : {1, 2, 3}
        Order of the log10 M(V) fit of the universal-calibration molar masses.
    match_broadening : bool
        Spread the less broadened trace to match the other.
    """

    method: str = "solomon-ciuta"
    huggins: float | None = None
    good_fraction: float = 0.10
    fit_order: int = 1
    match_broadening: bool = True


@dataclass(frozen=True, repr=False)
class ViscometryResult(Display):
    """Viscometry of one injection.

    Attributes
    ----------
    volume : numpy.ndarray
        Slices in the window [mL].
    concentration : numpy.ndarray
        [g/mL].
    eta_sp : numpy.ndarray
        Specific viscosity, aligned and broadening-matched [-].
    intrinsic : numpy.ndarray
        [η] per slice [dL/g] (NaN where c ≤ 0).
    intrinsic_w : float
        [η]_w = Σ η_sp ΔV / m [dL/g] from the raw trace (V10; offset-free).
    mass : float
        Mass eluted, from the concentration detector [g].
    M_universal : numpy.ndarray or None
        J(V)/[η] per slice [g/mol] (V8) when a standard calibration was given.
    M_universal_fit : numpy.ndarray or None
        The same from a log M(V) fit over the good-signal slices [g/mol].
    Mn_universal : float
        m/Σ(η_sp ΔV/J) [g/mol] (V9; needs only the mass), NaN without a calibration.
    averages : dict
        Mn, Mw, Mz, Mz1 [g/mol], dispersity [-] from ``M_universal_fit`` (empty without).
    log_M_fit : LogMFit or None
    Mv : float
        ([η]_w/K)^(1/a) with the sample's Mark-Houwink pair, if given [g/mol].
    good : numpy.ndarray
        Slices with good signal on both detectors.
    """

    volume: np.ndarray
    concentration: np.ndarray
    eta_sp: np.ndarray
    intrinsic: np.ndarray
    intrinsic_w: float
    mass: float
    M_universal: np.ndarray | None
    M_universal_fit: np.ndarray | None
    Mn_universal: float
    averages: dict[str, float]
    log_M_fit: LogMFit | None
    Mv: float
    good: np.ndarray
    detector: str
    options: ViscometryOptions
    warnings: tuple[str, ...] = field(default=())

    def table(self) -> dict[str, np.ndarray]:
        """Per-slice columns with units in the names."""
        cols: dict[str, np.ndarray] = {
            "volume [mL]": self.volume,
            "c [g/mL]": self.concentration,
            "eta_sp [-]": self.eta_sp,
            "[eta] [dL/g]": self.intrinsic,
            "good signal [-]": self.good.astype(float),
        }
        if self.M_universal is not None and self.M_universal_fit is not None:
            cols["M universal [g/mol]"] = self.M_universal
            cols["M universal fitted [g/mol]"] = self.M_universal_fit
        return cols

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "detector": self.detector,
            "intrinsic viscosity method": self.options.method,
            "[eta]_w [dL/g]": finite_or_none(self.intrinsic_w),
            "Mv [g/mol]": finite_or_none(self.Mv),
            "Mn universal calibration [g/mol]": finite_or_none(self.Mn_universal),
            "averages (universal calibration, fitted log M(V))": {
                (f"{k} [g/mol]" if k != "dispersity" else "dispersity [-]"): finite_or_none(v)
                for k, v in self.averages.items()},
            "log M(V) fit": None if self.log_M_fit is None else self.log_M_fit.summary(),
            "mass eluted [g]": finite_or_none(self.mass),
            "warnings": list(self.warnings),
        }


def analyse_viscometry(traces: DetectorTraces, setup: DetectorSetup, *, detector: str | None = None,
                       options: ViscometryOptions | None = None,
                       limits: tuple[float, float] | None = None,
                       standard_log_M: Callable[[np.ndarray], np.ndarray] | None = None, K_standard: float | None = None,
                       a_standard: float | None = None, K: float | None = None,
                       a: float | None = None) -> ViscometryResult:
    """Specific and intrinsic viscosity per slice, [η]_w, Mv and universal calibration.

    Parameters
    ----------
    traces : DetectorTraces
    setup : DetectorSetup
    detector : str, optional
        Viscometer name (default: the only one).
    options : ViscometryOptions, optional
    limits : (float, float), optional
        Integration limits on the concentration axis [mL].
    standard_log_M : callable, optional
        V [mL] -> log10 M of the standard polymer (the conventional calibration before
        any Mark-Houwink conversion, e.g. ``Calibration.log_M``); with ``K_standard`` [dL/g]
        and ``a_standard`` it gives J(V) (V7) and the universal-calibration molar masses.
    K, a : float, optional
        Mark-Houwink pair of the sample [dL/g, -] for Mv.

    Notes
    -----
    J(V) is evaluated at the concentration slice volumes, so the viscometer must be
    aligned (offset) and the calibration made on the concentration detector's axis.
    With M from universal calibration the broadening bias of the averages is that of a
    conventional calibration; correct them with :func:`.broadening.correct_averages`.
    """
    opts = options or ViscometryOptions()
    if detector is None:
        found = [d for d in setup.detectors if isinstance(d, Viscometer)]
        if len(found) != 1:
            raise DataError("name the viscometer to use" if found else "the set-up has no viscometer")
        det = found[0]
    else:
        d0 = setup[detector]
        if not isinstance(d0, Viscometer):
            raise DataError(f"detector {detector!r} is a {d0.kind} detector, not a viscometer")
        det = d0
    cdet = setup.concentration_detector
    traces.check(setup, (cdet.name, det.name))
    V = traces.volume
    w = widths(V)
    inside = window_mask(V, limits)
    c_raw = concentration(cdet, traces[cdet.name])
    mass = float(np.sum(c_raw[inside] * w[inside]))
    if not mass > 0:
        raise DataError(f"{traces.name}: the concentration trace has no positive area inside the limits")
    esp_raw = specific_viscosity(det.design, traces[det.name], constant=det.constant)
    inside_v = window_mask(V - det.offset, limits) if limits is not None else inside
    eta_w = weight_average_intrinsic_viscosity(esp_raw[inside_v], w[inside_v], mass)
    c, esp = matched_pair(V, c_raw, esp_raw, cdet, det, match=opts.match_broadening)
    eta = intrinsic_viscosity(esp, np.where(c > 0, c, np.nan), method=opts.method, huggins=opts.huggins)
    good = good_signal_mask(c, esp, inside, opts.good_fraction)
    warns: list[str] = []
    M_uc = M_uc_fit = None
    Mn_uc = math.nan
    av: dict[str, float] = {}
    logfit = None
    if standard_log_M is not None:
        if K_standard is None or a_standard is None:
            raise DataError("universal calibration needs K_standard [dL/g] and a_standard of the standard polymer")
        J = hydrodynamic_volume(standard_log_M(V), K_standard, a_standard)
        M_uc = universal_molar_mass(J, eta)
        Mn_uc = number_average_universal(esp[inside], w[inside], J[inside], mass)
        what = f"{traces.name}: universal-calibration log M(V) fit"
        logfit = fit_log_M(V, M_uc, good, opts.fit_order, what)
        spread = shared_spreading(cdet.broadening, det.broadening) if opts.match_broadening else Spreading()
        if not spread.is_zero() and opts.fit_order == 1:
            eta, M_uc, logfit = _broadening_consistent(V, c, esp, J, spread, good, logfit, opts, what)
        M_uc_fit = 10.0 ** logfit.log_M(V)
        av = slice_averages(M_uc_fit, c, w, inside)
        if not spread.is_zero() and opts.fit_order == 1:
            av = unbroadened_averages(av, spread, -LN10 * logfit.coef[1])
        if math.isfinite(av.get("Mn", math.nan)) and abs(av["Mn"] / Mn_uc - 1) > 0.05:
            warns.append(f"{traces.name}: Mn from the fitted universal calibration differs from m/Σ(η_sp ΔV/J) "
                         f"by {100 * (av['Mn'] / Mn_uc - 1):+.1f} %: check the viscometer offset and baseline")
    Mv = viscosity_average_M(eta_w, K, a) if K is not None and a is not None and eta_w > 0 else math.nan
    if eta_w <= 0:
        warns.append(f"{traces.name}: the viscometer trace has no positive area: no [η]_w or Mv")
    return ViscometryResult(
        volume=V[inside], concentration=c[inside], eta_sp=esp[inside], intrinsic=eta[inside],
        intrinsic_w=eta_w, mass=mass,
        M_universal=None if M_uc is None else M_uc[inside],
        M_universal_fit=None if M_uc_fit is None else M_uc_fit[inside],
        Mn_universal=Mn_uc, averages=av, log_M_fit=logfit, Mv=Mv, good=good[inside],
        detector=det.name, options=opts, warnings=tuple(warns),
    )


def _broadening_consistent(V: np.ndarray, c: np.ndarray, esp: np.ndarray, J: np.ndarray, g: Spreading,
                           good: np.ndarray, logfit: LogMFit, opts: ViscometryOptions,
                           what: str) -> tuple[np.ndarray, np.ndarray, LogMFit]:
    """[η] per slice of a broadened pair of traces, for a linear calibration.

    The viscometer responds to c·[η] ∝ c·M^a, so with both traces spread by G the slice
    at V mixes neighbouring volumes; :func:`.broadening.tilted_trace` with D = a·D2 gives
    the concentration that makes η_sp/c the [η] of the molecules that belong at V. D2
    comes from the log M(V) fit and a from d log[η]/d log M = (d log J/dV)/(d log M/dV) − 1;
    both are iterated to a fixed point.
    """
    sJ = float(np.polyfit(V[good], np.log10(J[good]), 1)[0])
    eta = M_uc = np.full(V.size, np.nan)
    for _ in range(30):
        sM = logfit.coef[1]
        D2 = -LN10 * sM
        a = sJ / sM - 1.0
        if not (D2 > 0 and 0.0 < a < 2.0) or g.tau * a * D2 >= 1.0:
            break
        c_eff = tilted_trace(V, c, g, a * D2)
        eta = intrinsic_viscosity(esp, np.where(c_eff > 0, c_eff, np.nan), method=opts.method,
                                  huggins=opts.huggins)
        M_uc = universal_molar_mass(J, eta)
        new = fit_log_M(V, M_uc, good, 1, what)
        done = abs(new.coef[1] - logfit.coef[1]) < 1e-9
        logfit = new
        if done:
            break
    return eta, M_uc, logfit
