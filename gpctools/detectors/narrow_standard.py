"""Detector calibration from one narrow-standard injection: offsets, extra broadening and
constants.

**Peaks.** Each detector's peak is fitted by a Gaussian or an exponentially modified
Gaussian (centre μ, s.d. σ, tail τ; scipy ``curve_fit``, which also gives their standard
errors). Offsets are taken between the Gaussian centres, so a mixing-cell tail on one
detector does not move its offset; the tail is kept as that detector's τ.

**Offsets with the polydispersity lead** (docs/science.md, section 13, derived for a log-normal
standard, a locally linear calibration and the same broadening on both detectors). The
light-scattering signal is ∝ c·M, so for a standard of dispersity Đ the LS peak comes
earlier than the concentration peak by ℓ_LS = ln Đ/(ln10·B), even at zero offset; a
viscometer (∝ c·M^a) leads by ℓ_visc = a·ln Đ/(ln10·B). Hence

    Δ_X = (μ_X − μ_conc)_observed + ℓ_X.                                            (L0)

**Extra broadening**: σ²_X = σ²_conc + (σ²_X,obs − σ²_conc,obs) (C6); the two profiles of a
log-normal standard have the same width apart from the broadening.

**Constants**:

- RI: k_RI = ∫S_RI dV/((dn/dc)_RI·m_inj) (C3), from a known injected mass;
  UV: response = ∫S_UV dV/m_inj.
- Light scattering: k_cal = K*·Mw·m/(N_θ·∫S_θ dV/P(θ)) per channel (the secondary
  calibration of docs/science.md, section 14), m the mass seen by the concentration detector;
  P(θ) from the standard's Rg (random coil) when given, else 1 (use a standard with
  Rg ≲ 10 nm). With ``normalise`` the channel coefficients N_θ are set relative to
  the channel nearest 90° from the same areas.
- Viscometer: the gain constant that makes Σ η_sp ΔV/m = [η] of the standard (V10).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import CalibrationError, CalibrationWarning, DataError
from gpctools.sheets.cells import finite_or_none

from ._common import LN10, positive, warn_all
from ._slices import widths
from .broadening import Spreading
from .instrument import (
    ConcentrationDetector,
    Detector,
    DetectorSetup,
    LightScatteringDetector,
    Viscometer,
)
from .scattering import coil_scattering_function, optical_constant
from .traces import DetectorTraces
from .viscometry import specific_viscosity

__all__ = [
    "NarrowStandard",
    "PeakFit",
    "DetectorCalibration",
    "SetupCalibration",
    "polydispersity_lead",
    "fit_peak",
    "calibrate_setup",
]


@dataclass(frozen=True)
class NarrowStandard:
    """What is known about the narrow standard injected for the calibration.

    Attributes
    ----------
    name : str
    Mw : float or None
        Certified weight-average molar mass [g/mol] (for the LS constant).
    dispersity : float
        Certified Đ [-] (for the lead; 1.0 ignores it).
    B : float or None
        −d log10 M/dV of the calibration at the standard's peak [1/mL] (for the lead).
    injected_mass : float or None
        c·V_inj [g] (for the RI/UV constant).
    intrinsic_viscosity : float or None
        [η] of the standard in the run solvent [dL/g] (for the viscometer constant).
    a : float or None
        Mark-Houwink exponent of the standard [-] (for the viscometer lead).
    rg : float or None
        Radius of gyration [nm] (for P(θ) in the LS constant).
    """

    name: str = "narrow standard"
    Mw: float | None = None
    dispersity: float = 1.0
    B: float | None = None
    injected_mass: float | None = None
    intrinsic_viscosity: float | None = None
    a: float | None = None
    rg: float | None = None

    def __post_init__(self) -> None:
        if not self.dispersity >= 1.0:
            raise DataError(f"{self.name}: dispersity must be at least 1, got {self.dispersity!r}")
        for k in ("Mw", "B", "injected_mass", "intrinsic_viscosity", "a", "rg"):
            v = getattr(self, k)
            if v is not None:
                positive(v, f"{self.name}: {k}")


def polydispersity_lead(dispersity: float, B: float, exponent: float = 1.0) -> float:
    """Lead of a detector ∝ c·M^exponent over the concentration peak [mL] (L0).

    ℓ = exponent·ln Đ/(ln10·B): exponent 1 for light scattering, the Mark-Houwink a for a
    viscometer.

    Examples
    --------
    Đ 1.02, B 0.3 1/mL: ℓ_LS = 0.0287 mL (docs/science.md, section 13, derived):

    >>> round(polydispersity_lead(1.02, 0.3), 4)
    0.0287
    """
    d = positive(dispersity, "dispersity")
    if d < 1.0:
        raise DataError("dispersity must be at least 1")
    return exponent * math.log(d) / (LN10 * positive(B, "calibration slope B [1/mL]"))


@dataclass(frozen=True, repr=False)
class PeakFit(Display):
    """A fitted peak: amplitude·(N(μ, σ²) ⊗ Exp(τ)) [detector units, mL].

    Attributes
    ----------
    center, center_stderr : float
        μ, the centre of the Gaussian part [mL].
    sigma, sigma_stderr : float
        [mL].
    tau, tau_stderr : float
        [mL] (0 for a Gaussian fit).
    area : float
        Σ S ΔV over the trace [detector units·mL].
    shape : str
        ``"gaussian"`` or ``"emg"``.
    """

    center: float
    center_stderr: float
    sigma: float
    sigma_stderr: float
    tau: float
    tau_stderr: float
    area: float
    shape: str

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {k: (finite_or_none(v) if not isinstance(v, str) else v) for k, v in (
            ("center [mL]", self.center), ("center standard error [mL]", self.center_stderr),
            ("sigma [mL]", self.sigma), ("sigma standard error [mL]", self.sigma_stderr),
            ("tau [mL]", self.tau), ("tau standard error [mL]", self.tau_stderr),
            ("area [signal*mL]", self.area), ("shape", self.shape))}


def _model(V: np.ndarray, amp: float, mu: float, sigma: float, tau: float) -> np.ndarray:
    from scipy.special import erfc, erfcx

    sigma = abs(sigma) + 1e-12
    u = V - mu
    if tau <= 1e-9:
        return np.asarray(amp * np.exp(-0.5 * (u / sigma) ** 2) / (sigma * math.sqrt(2 * math.pi)))
    z = (sigma / tau - u / sigma) / math.sqrt(2.0)
    with np.errstate(over="ignore"):
        val = np.where(z > 0, np.exp(-0.5 * (u / sigma) ** 2) * erfcx(z),
                       np.exp(0.5 * (sigma / tau) ** 2 - u / tau) * erfc(z))
    return np.asarray(amp * val / (2.0 * tau))


def fit_peak(volume: Any, signal: Any, *, shape: str = "auto", floor: float = 0.02) -> PeakFit:
    """Fit one peak by a Gaussian or an EMG over the slices above ``floor`` × maximum.

    Parameters
    ----------
    shape : {"auto", "gaussian", "emg"}
        ``"auto"`` keeps the EMG when its tail is significant (τ > 3 standard errors and
        a lower AIC), else the Gaussian.
    """
    from scipy.optimize import curve_fit

    V = np.asarray(volume, dtype=float)
    S = np.asarray(signal, dtype=float)
    i = int(np.argmax(S))
    if not S[i] > 0:
        raise DataError("the narrow-standard trace has no positive peak")
    lo = i
    while lo > 0 and S[lo - 1] >= floor * S[i]:
        lo -= 1
    hi = i
    while hi < S.size - 1 and S[hi + 1] >= floor * S[i]:
        hi += 1
    sel = slice(lo, hi + 1)
    x, y = V[sel], S[sel]
    if x.size < 8:
        raise DataError("the narrow-standard peak spans fewer than 8 slices: record at a finer slice spacing")
    area = float(np.sum(S * widths(V)))
    m0 = float(np.sum(x * y) / np.sum(y))
    s0 = math.sqrt(max(float(np.sum((x - m0) ** 2 * y) / np.sum(y)), (x[1] - x[0]) ** 2))
    amp0 = float(np.sum(y) * (x[1] - x[0]))
    fits: dict[str, tuple[np.ndarray, np.ndarray, float]] = {}
    shapes = ("gaussian", "emg") if shape == "auto" else (shape,)
    for sh in shapes:
        try:
            if sh == "gaussian":
                p, cov = curve_fit(lambda v, a, m, s: _model(v, a, m, s, 0.0), x, y, p0=[amp0, m0, s0])
                p = np.append(p, 0.0)
                cov = np.pad(cov, ((0, 1), (0, 1)))
            elif sh == "emg":
                p, cov = curve_fit(_model, x, y, p0=[amp0, m0 - 0.3 * s0, 0.8 * s0, 0.3 * s0],
                                   bounds=([0, x[0], 1e-6, 0], [np.inf, x[-1], np.ptp(x), np.ptp(x)]))
            else:
                raise DataError(f"unknown peak shape {shape!r}; use auto, gaussian or emg")
        except (RuntimeError, ValueError) as exc:
            if shape != "auto":
                raise DataError(f"the narrow-standard peak could not be fitted ({exc})") from None
            continue
        rss = float(np.sum((y - _model(x, *p)) ** 2))
        fits[sh] = (p, cov, rss)
    if not fits:
        raise DataError("the narrow-standard peak could not be fitted by a Gaussian or an EMG")
    pick = "gaussian" if "gaussian" in fits else "emg"
    if "emg" in fits and "gaussian" in fits:
        n = x.size
        aic = {k: n * math.log(max(v[2], 1e-300) / n) + 2 * (3 if k == "gaussian" else 4) for k, v in fits.items()}
        p, cov, _ = fits["emg"]
        tau_se = math.sqrt(max(float(cov[3, 3]), 0.0))
        if aic["emg"] < aic["gaussian"] - 2 and p[3] > 3 * tau_se:
            pick = "emg"
    p, cov, _ = fits[pick]
    se = np.sqrt(np.clip(np.diag(cov), 0, None))
    return PeakFit(center=float(p[1]), center_stderr=float(se[1]), sigma=abs(float(p[2])),
                   sigma_stderr=float(se[2]), tau=float(p[3]), tau_stderr=float(se[3]), area=area,
                   shape=pick)


@dataclass(frozen=True, repr=False)
class DetectorCalibration(Display):
    """What the standard says about one detector.

    Attributes
    ----------
    name, kind : str
    peak : PeakFit
        Of the detector's own trace (the first LS channel nearest 90° for LS).
    observed_difference : float
        μ_X − μ_conc [mL].
    lead : float
        ℓ_X added to it [mL] (0 for concentration detectors).
    offset, offset_stderr : float
        Δ_X [mL].
    broadening : Spreading
        Total spreading of the detector [mL].
    constant : float or None
        k_RI [signal/RIU], UV response [signal per g/mL], LS k_cal [cm⁻¹ per signal unit]
        or the viscometer gain [-], when the standard's data allowed it.
    normalisation : tuple of float or None
        LS N_θ when requested.
    """

    name: str
    kind: str
    peak: PeakFit
    observed_difference: float
    lead: float
    offset: float
    offset_stderr: float
    broadening: Spreading
    constant: float | None = None
    normalisation: tuple[float, ...] | None = None

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "detector": self.name,
            "kind": self.kind,
            "peak": self.peak.summary(),
            "observed peak difference [mL]": self.observed_difference,
            "polydispersity lead [mL]": self.lead,
            "offset [mL]": self.offset,
            "offset standard error [mL]": finite_or_none(self.offset_stderr),
            "broadening": self.broadening.summary(),
            "constant": finite_or_none(self.constant),
            "normalisation": None if self.normalisation is None else list(self.normalisation),
        }


@dataclass(frozen=True, repr=False)
class SetupCalibration(Display):
    """Result of :func:`calibrate_setup`: per detector offsets, broadening and constants."""

    standard: NarrowStandard
    detectors: tuple[DetectorCalibration, ...]
    concentration: str
    warnings: tuple[str, ...] = field(default=())

    def __getitem__(self, name: str) -> DetectorCalibration:
        for d in self.detectors:
            if d.name == name:
                return d
        raise KeyError(name)

    def apply(self, setup: DetectorSetup) -> DetectorSetup:
        """The set-up with the derived offsets, broadening and constants filled in."""
        out = setup
        for d in self.detectors:
            changes: dict[str, Any] = {"broadening": d.broadening}
            det = setup[d.name]
            if d.name != setup.concentration:
                changes["offset"] = d.offset
            if d.constant is not None:
                if isinstance(det, ConcentrationDetector) and det.kind == "UV":
                    changes["response"] = d.constant
                else:
                    changes["constant"] = d.constant
            if d.normalisation is not None:
                changes["normalisation"] = d.normalisation
            out = out.replace(d.name, **changes)
        return out

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        s = self.standard
        return {
            "standard": {"name": s.name, "Mw [g/mol]": s.Mw, "dispersity [-]": s.dispersity,
                         "B [1/mL]": s.B, "injected mass [g]": s.injected_mass,
                         "[eta] [dL/g]": s.intrinsic_viscosity, "a [-]": s.a, "Rg [nm]": s.rg},
            "concentration detector": self.concentration,
            "offset convention": "offset = V_detector − V_concentration [mL], positive downstream",
            "detectors": [d.summary() for d in self.detectors],
            "warnings": list(self.warnings),
        }


def _reference_channel(det: LightScatteringDetector) -> int:
    return int(np.argmin([abs(a - 90.0) for a in det.angles]))


def calibrate_setup(traces: DetectorTraces, setup: DetectorSetup, standard: NarrowStandard, *,
                    shape: str = "auto", normalise: bool = False) -> SetupCalibration:
    """Offsets, broadening and constants of every detector from a narrow-standard injection.

    Parameters
    ----------
    traces : DetectorTraces
        Baseline-corrected traces of the standard on every detector to calibrate.
    setup : DetectorSetup
        Current set-up (dn/dc, optics, viscometer design; constants may be missing).
    standard : NarrowStandard
    shape : {"auto", "gaussian", "emg"}
        Peak model (see :func:`fit_peak`).
    normalise : bool
        Also derive the LS channel normalisation N_θ from this injection (only for a
        standard small enough to scatter isotropically, Rg ≲ 5 nm, or with ``rg`` given).

    Returns
    -------
    SetupCalibration
        Use ``.apply(setup)`` for the calibrated set-up.
    """
    cdet = setup.concentration_detector
    V = traces.volume
    w = widths(V)
    warns: list[str] = []
    c_sig = traces[cdet.name]
    c_peak = fit_peak(V, c_sig, shape=shape)
    c_const = _concentration_constant(cdet, c_peak.area, standard, warns)
    factor = (c_const * cdet.dn_dc if cdet.kind == "RI" and c_const is not None and cdet.dn_dc
              else c_const if cdet.kind == "UV" else cdet.factor)
    mass = c_peak.area / factor if factor else None
    c_broad = cdet.broadening if not cdet.broadening.is_zero() else _own_broadening(c_peak, standard, warns)
    results = [DetectorCalibration(
        name=cdet.name, kind=cdet.kind, peak=c_peak, observed_difference=0.0, lead=0.0, offset=0.0,
        offset_stderr=0.0, broadening=c_broad, constant=c_const)]
    base = results[0].broadening
    # the other detectors are fitted with the concentration peak's shape, so that offsets compare
    # like with like (a Gaussian fitted to a tailing peak puts its centre between the EMG's μ and mean)
    others = c_peak.shape if shape == "auto" else shape
    for det in setup.detectors:
        if det.name == cdet.name or det.name not in traces.signals:
            continue
        results.append(_calibrate_one(det, traces, V, w, c_peak, base, standard, mass, others, normalise, warns))
    warn_all(warns, CalibrationWarning)
    return SetupCalibration(standard=standard, detectors=tuple(results), concentration=cdet.name,
                            warnings=tuple(warns))


def _own_broadening(peak: PeakFit, std: NarrowStandard, warns: list[str]) -> Spreading:
    """σ of the concentration detector: the peak's σ² less the standard's own σ_p² = ln Đ/D2² (B5)."""
    if std.B is not None and std.dispersity > 1.0:
        sp2 = math.log(std.dispersity) / (LN10 * std.B) ** 2
        if peak.sigma**2 > sp2:
            return Spreading(math.sqrt(peak.sigma**2 - sp2), peak.tau)
        warns.append("the standard's peak is no wider than its certified dispersity implies: no broadening derived")
        return Spreading(0.0, peak.tau)
    warns.append(
        f"the concentration detector's broadening is taken as the standard's whole peak width "
        f"(σ = {peak.sigma:.3f} mL), an upper bound: give the standard's dispersity and B, or the "
        "broadening of the concentration detector"
    )
    return Spreading(peak.sigma, peak.tau)


def _concentration_constant(det: ConcentrationDetector, area: float, std: NarrowStandard,
                            warns: list[str]) -> float | None:
    if std.injected_mass is None:
        return None
    if det.kind == "RI":
        if not det.dn_dc:
            raise CalibrationError(f"the RI constant needs dn/dc at the RI wavelength: give detectors.{det.name}.dn_dc",
                                   key=f"detectors.{det.name}.dn_dc")
        return area / (det.dn_dc * std.injected_mass)  # C3 inverted
    return area / std.injected_mass


def _calibrate_one(det: Detector, traces: DetectorTraces, V: np.ndarray, w: np.ndarray, c_peak: PeakFit,
                   base: Spreading, std: NarrowStandard, mass: float | None, shape: str, normalise: bool,
                   warns: list[str]) -> DetectorCalibration:
    sig = traces[det.name]
    lead = 0.0
    constant: float | None = None
    norm: tuple[float, ...] | None = None
    if isinstance(det, LightScatteringDetector):
        ref = _reference_channel(det)
        S = sig if sig.ndim == 2 else sig[:, None]
        peak = fit_peak(V, S[:, ref], shape=shape)
        lead = _lead(std, 1.0, det.name, warns)
        constant, norm = _ls_constant(det, S, w, std, mass, normalise, warns)
    elif isinstance(det, Viscometer):
        esp = specific_viscosity(det.design, sig, constant=det.constant)
        peak = fit_peak(V, esp, shape=shape)
        if std.a is None and std.dispersity > 1.0:
            warns.append(f"{det.name}: no Mark-Houwink a for the standard: the viscometer lead is taken with a = 0.7")
        lead = _lead(std, std.a if std.a is not None else 0.7, det.name, warns)
        constant = _visc_constant(det, sig, w, std, mass, warns)
    else:
        peak = fit_peak(V, sig, shape=shape)
    diff = peak.center - c_peak.center
    var = base.sigma**2 + (peak.sigma**2 - c_peak.sigma**2)
    if var < 0:
        warns.append(f"{det.name}: its peak is narrower than the concentration detector's; its broadening is set "
                     "equal to the concentration detector's")
        var = base.sigma**2
    tau = max(peak.tau - c_peak.tau, 0.0) + base.tau if peak.shape == "emg" or base.tau else 0.0
    return DetectorCalibration(
        name=det.name, kind=det.kind, peak=peak, observed_difference=diff, lead=lead, offset=diff + lead,
        offset_stderr=math.hypot(peak.center_stderr, c_peak.center_stderr),
        broadening=Spreading(math.sqrt(var), tau), constant=constant, normalisation=norm)


def _lead(std: NarrowStandard, exponent: float, name: str, warns: list[str]) -> float:
    if std.dispersity == 1.0:
        return 0.0
    if std.B is None:
        warns.append(f"{name}: the standard's dispersity is given but not the calibration slope B: no lead correction")
        return 0.0
    return polydispersity_lead(std.dispersity, std.B, exponent)


def _ls_constant(det: LightScatteringDetector, S: np.ndarray, w: np.ndarray, std: NarrowStandard,
                 mass: float | None, normalise: bool, warns: list[str]) -> tuple[float | None, tuple[float, ...] | None]:
    areas = np.sum(S * w[:, None], axis=0)
    if det.wavelength is None or det.solvent_refractive_index is None or det.dn_dc is None:
        warns.append(f"{det.name}: wavelength, dn_dc or solvent_refractive_index missing: no LS constant")
        return None, None
    if std.rg is not None:
        P = coil_scattering_function(np.asarray(det.angles), std.rg, det.wavelength, det.solvent_refractive_index)
    else:
        P = np.ones(len(det.angles))
    ref = _reference_channel(det)
    norm = None
    if normalise:
        if np.any(areas <= 0):
            raise CalibrationError(f"{det.name}: a light-scattering channel has no positive area for the normalisation")
        norm = tuple(float(areas[ref] * P[j] / (areas[j] * P[ref])) for j in range(len(det.angles)))
    if std.Mw is None or mass is None:
        if std.Mw is None:
            warns.append(f"{det.name}: the standard's Mw is not given: no LS constant")
        else:
            warns.append(f"{det.name}: the concentration detector has no constant and no injected mass is given: "
                         "no LS constant")
        return None, norm
    K = optical_constant(det.dn_dc, det.wavelength, det.solvent_refractive_index)
    N = norm[ref] if norm is not None else det.normalisation[ref]
    if not areas[ref] > 0:
        raise CalibrationError(f"{det.name}: the {det.angles[ref]:g}° channel has no positive area")
    return float(K * std.Mw * mass * P[ref] / (N * areas[ref])), norm


def _visc_constant(det: Viscometer, sig: np.ndarray, w: np.ndarray, std: NarrowStandard, mass: float | None,
                   warns: list[str]) -> float | None:
    if std.intrinsic_viscosity is None or mass is None:
        if std.intrinsic_viscosity is not None:
            warns.append(f"{det.name}: no mass for the standard (concentration constant or injected mass): "
                         "no viscometer constant")
        return None
    target = std.intrinsic_viscosity * 100.0 * mass  # Σ η_sp ΔV [mL] (V10 with [η] in mL/g)

    def total(k: float) -> float:
        return float(np.sum(specific_viscosity(det.design, sig, constant=k) * w))

    if det.design != "bridge":
        t1 = total(1.0)
        if not t1 > 0:
            raise CalibrationError(f"{det.name}: the viscometer trace has no positive area")
        return target / t1
    from scipy.optimize import brentq

    pos = sig[:, 0] > 0
    if not pos.any():
        raise CalibrationError(f"{det.name}: the viscometer trace has no positive differential pressure")
    lo, hi = 1e-3, 0.49 * float(np.min(sig[pos, 1] / sig[pos, 0]))  # keep IP − 2kΔP > 0
    try:
        return float(brentq(lambda k: total(k) - target, lo, hi, xtol=1e-12))
    except (ValueError, DataError):
        raise CalibrationError(f"{det.name}: no bridge gain between {lo:g} and {hi:g} reproduces the "
                               "standard's [η]; check the channels and the [η] value") from None
