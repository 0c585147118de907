"""Absolute molar mass and size of one injection from light scattering + a concentration
detector.

Steps (docs/science.md, section 14):

1. c_i = S_conc,i/(k·dn/dc) from the concentration detector (C1-C2).
2. The LS channels are read at V + Δ (offset) and the less broadened trace is spread to
   match the other (C6).
3. R_θ,i = k_cal·N_θ·S_θ,i and the angular fit of each slice gives M_i and Rg,i (L7-L10).
4. **Mw from the areas**, Mw = Σ R_0,i ΔV/(K*·Σ c_i ΔV) (L11): the area of each channel is
   extrapolated to zero angle like a batch measurement. No alignment, no broadening
   correction and no calibration enter, so this is the most robust LS number.
5. **Low-M fix**: log10 M is fitted against V over the slices where both detectors have
   good signal (default: both above 10 % of their maxima) and the fitted M(V) is used for
   every slice in the window; Mn, Mz and the distribution come from it.
6. Mass recovery: the mass seen by the concentration detector against the mass injected
   (< 95 % flags adsorption, filter loss, or a wrong dn/dc or k_RI).
7. Conformation: log Rg against log M over the slices with measurable Rg (L14).

Rg averages (L13): Rg,z² = Σ c_i M_i Rg,i²/Σ c_i M_i, Rg,w² = Σ c_i Rg,i²/Σ c_i, over the
slices where Rg is measurable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError, SignalWarning

from ._common import (
    LN10,
    Estimate,
    finite_or_none,
    polyfit,
    warn_all,
)
from ._slices import (
    LogMFit,
    extrapolation_decades,
    fit_log_M,
    good_signal_mask,
    slice_averages,
    widths,
    window_mask,
)
from .broadening import Spreading, shared_spreading, tilted_trace, unbroadened_averages
from .instrument import DetectorSetup, LightScatteringDetector
from .scattering import AngularFit, fit_angles, optical_constant
from .traces import DetectorTraces, concentration, matched_pair

__all__ = [
    "LightScatteringOptions",
    "ConformationFit",
    "LightScatteringResult",
    "analyse_light_scattering",
    "rayleigh_ratios",
    "recovery_warnings",
    "SLICE_COLUMNS",
]

#: Column names of :meth:`LightScatteringResult.table`.
SLICE_COLUMNS = (
    "volume [mL]",
    "c [g/mL]",
    "M slice [g/mol]",
    "M fitted [g/mol]",
    "Rg [nm]",
    "good signal [-]",
    "dw/dlogM [-]",
)


@dataclass(frozen=True)
class LightScatteringOptions:
    """Choices of the light-scattering analysis.

    Attributes
    ----------
    formalism : {"berry", "zimm", "debye"}
        Angular extrapolation (ignored for one angle).
    order : {1, 2}
        Order of the angular fit in sin²(θ/2).
    angles : tuple of float or None
        Angles to use [degree] (None: all of the set-up's).
    rg_min : float
        Smallest Rg reported [nm].
    good_fraction : float
        Slices count as good signal where both traces exceed this fraction of their
        maxima [-].
    fit_order : {1, 2, 3}
        Order of the log10 M(V) fit (1 unless the calibration is visibly curved).
    match_broadening : bool
        Spread the less broadened trace to match the other before forming ratios.
    size_fraction : float
        Rg averages and the conformation fit use the slices where both traces exceed this
        fraction of their maxima [-]: the angular signal is a few per cent of the LS signal,
        so Rg is noise-dominated well before M is, and cutting noisy Rg at ``rg_min``
        would bias the conformation slope low.
    """

    formalism: str = "berry"
    order: int = 1
    angles: tuple[float, ...] | None = None
    rg_min: float = 10.0
    good_fraction: float = 0.10
    fit_order: int = 1
    match_broadening: bool = True
    size_fraction: float = 0.5


@dataclass(frozen=True, repr=False)
class ConformationFit(Display):
    """log10 Rg = log10 Q + ν·log10 M over the slices with measurable Rg (L14).

    Attributes
    ----------
    nu, nu_stderr : float
        Slope [-]: about 0.58-0.60 for a coil in a good solvent, 0.5 in a theta
        solvent, 1/3 for a sphere; lower than the linear reference for branched chains.
    Q : float
        Rg at M = 1 g/mol [nm] (the prefactor).
    M_range : tuple of float
        [g/mol].
    n_points : int
    """

    nu: float
    nu_stderr: float
    Q: float
    M_range: tuple[float, float]
    n_points: int

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "slope nu [-]": finite_or_none(self.nu),
            "slope standard error [-]": finite_or_none(self.nu_stderr),
            "prefactor Q [nm]": finite_or_none(self.Q),
            "M range [g/mol]": [finite_or_none(v) for v in self.M_range],
            "slices fitted": self.n_points,
        }


@dataclass(frozen=True, repr=False)
class LightScatteringResult(Display):
    """Absolute molar mass of one injection by light scattering.

    Attributes
    ----------
    volume : numpy.ndarray
        Slices in the integration window [mL], increasing.
    concentration : numpy.ndarray
        c per slice [g/mL].
    M_slice : numpy.ndarray
        Molar mass from each slice's own angular fit [g/mol] (NaN without signal).
    M_fit : numpy.ndarray
        Molar mass from the log M(V) fit [g/mol].
    rg : numpy.ndarray
        Radius of gyration per slice [nm] (NaN where not measurable).
    good : numpy.ndarray
        Slices used in the log M(V) fit.
    Mw_areas : Estimate
        Mw from the channel areas [g/mol] (offset- and broadening-free).
    rg_z_areas : float
        z-average Rg from the areas' angular dependence [nm] (NaN for one angle or below
        ``rg_min``).
    averages : dict
        Mn, Mw, Mz, Mz1 [g/mol], dispersity [-] from the fitted M(V), corrected for band
        broadening (see :func:`analyse_light_scattering`).
    averages_observed : dict
        The same before the broadening correction (the broadened concentration trace
        through the fitted M(V)).
    averages_slices : dict
        The same from the slice molar masses (noise-sensitive; for comparison).
    rg_averages : dict
        ``Rg_z``, ``Rg_w`` [nm] over slices with measurable Rg.
    log_M_fit : LogMFit
    conformation : ConformationFit or None
    mass : float
        Mass seen by the concentration detector in the window [g].
    injected_mass : float or None
        [g].
    optical_constant : float
        K* [mol cm² g⁻²].
    """

    volume: np.ndarray
    concentration: np.ndarray
    M_slice: np.ndarray
    M_fit: np.ndarray
    rg: np.ndarray
    good: np.ndarray
    Mw_areas: Estimate
    rg_z_areas: float
    averages: dict[str, float]
    averages_observed: dict[str, float]
    averages_slices: dict[str, float]
    broadening: Spreading
    rg_averages: dict[str, float]
    log_M_fit: LogMFit
    conformation: ConformationFit | None
    mass: float
    injected_mass: float | None
    optical_constant: float
    detector: str
    formalism: str
    options: LightScatteringOptions
    warnings: tuple[str, ...] = field(default=())

    @property
    def recovery(self) -> float:
        """Mass seen / mass injected [-] (NaN without an injected mass)."""
        return self.mass / self.injected_mass if self.injected_mass else math.nan

    def dwdlogM(self) -> np.ndarray:
        """dw/dlog10 M per slice from the fitted M(V) (the calibration Jacobian) [-]."""
        w = widths(self.volume)
        area = float(np.sum(self.concentration * w))
        slope = np.abs(self.log_M_fit.slope(self.volume))
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.asarray(self.concentration / slope / area)

    def table(self) -> dict[str, np.ndarray]:
        """Per-slice columns (names in :data:`SLICE_COLUMNS`)."""
        cols = (self.volume, self.concentration, self.M_slice, self.M_fit, self.rg,
                self.good.astype(float), self.dwdlogM())
        return dict(zip(SLICE_COLUMNS, cols))

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        av = {f"{k} [g/mol]" if k != "dispersity" else "dispersity [-]": finite_or_none(v)
              for k, v in self.averages.items()}
        av_s = {f"{k} [g/mol]" if k != "dispersity" else "dispersity [-]": finite_or_none(v)
                for k, v in self.averages_slices.items()}
        return {
            "molar-mass scale": "absolute, light scattering",
            "detector": self.detector,
            "formalism": self.formalism,
            "optical constant K* [mol cm2/g2]": self.optical_constant,
            "Mw from areas [g/mol]": finite_or_none(self.Mw_areas.value),
            "Mw from areas, angular-extrapolation standard error [g/mol]": finite_or_none(self.Mw_areas.stderr),
            "Rg_z from areas [nm]": finite_or_none(self.rg_z_areas),
            "averages (fitted log M(V))": av,
            "averages before broadening correction": {
                f"{k} [g/mol]" if k != "dispersity" else "dispersity [-]": finite_or_none(v)
                for k, v in self.averages_observed.items()},
            "averages (slice M)": av_s,
            "broadening used": self.broadening.summary(),
            "Rg_z [nm]": finite_or_none(self.rg_averages.get("Rg_z")),
            "Rg_w [nm]": finite_or_none(self.rg_averages.get("Rg_w")),
            "log M(V) fit": self.log_M_fit.summary(),
            "conformation": None if self.conformation is None else self.conformation.summary(),
            "mass eluted [g]": finite_or_none(self.mass),
            "mass injected [g]": finite_or_none(self.injected_mass),
            "recovery [%]": finite_or_none(100.0 * self.recovery),
            "warnings": list(self.warnings),
        }


def rayleigh_ratios(detector: LightScatteringDetector, signal: np.ndarray,
                    angles: tuple[float, ...] | None = None) -> tuple[np.ndarray, tuple[float, ...]]:
    """R_θ = k_cal·N_θ·S_θ per slice and channel [cm⁻¹] (docs/science.md, section 14), for ``angles``."""
    if detector.constant is None:
        raise DataError(
            f"light-scattering detector {detector.name!r} has no calibration constant: give "
            f"detectors.{detector.name}.constant or calibrate with a narrow standard of known Mw"
        )
    S = signal if signal.ndim == 2 else signal[:, None]
    use = detector.angles if angles is None else tuple(float(a) for a in angles)
    idx = []
    for a in use:
        hits = [j for j, b in enumerate(detector.angles) if abs(b - a) < 1e-9]
        if not hits:
            raise DataError(f"angle {a:g}° is not one of detector {detector.name!r}'s angles {list(detector.angles)}")
        idx.append(hits[0])
    N = np.asarray(detector.normalisation)[idx]
    return detector.constant * N[None, :] * S[:, idx], use


def _require_optics(det: LightScatteringDetector) -> float:
    missing = [k for k in ("dn_dc", "solvent_refractive_index", "wavelength") if getattr(det, k) is None]
    if missing:
        raise DataError(f"light-scattering detector {det.name!r} needs detectors.{det.name}.{missing[0]}")
    assert det.dn_dc is not None and det.solvent_refractive_index is not None and det.wavelength is not None
    return optical_constant(det.dn_dc, det.wavelength, det.solvent_refractive_index)


def _areas_fit(R_raw: np.ndarray, w: np.ndarray, inside: np.ndarray, mass: float, angles: tuple[float, ...],
               K: float, det: LightScatteringDetector, opts: LightScatteringOptions) -> tuple[Estimate, float]:
    """Mw and Rg_z from the channel areas extrapolated to zero angle (L11).

    The standard error is that of the angular extrapolation (the scatter of the channel
    areas about the fitted line in sin²(θ/2), propagated to M); it excludes the
    uncertainty of dn/dc and of the calibration constants, which enter M linearly or
    quadratically (docs/science.md, section 14).
    """
    assert det.wavelength is not None and det.solvent_refractive_index is not None
    areas = np.sum(R_raw[inside] * w[inside, None], axis=0)
    if not np.all(areas > 0):
        raise DataError(f"light-scattering detector {det.name!r}: a channel has no positive area in the window")
    order = opts.order if len(angles) > opts.order + 1 else 1
    fit = fit_angles(areas[None, :], [mass], angles, optical=K, wavelength=det.wavelength,
                     solvent_refractive_index=det.solvent_refractive_index,
                     formalism=opts.formalism, order=order, rg_min=opts.rg_min)
    Mw = float(fit.M[0])
    se = math.nan
    if len(angles) >= order + 3 and math.isfinite(Mw):
        s = np.sin(np.radians(np.asarray(angles)) / 2.0) ** 2
        z = K * mass / areas
        y = {"zimm": z, "debye": 1.0 / z, "berry": np.sqrt(z)}[fit.formalism]
        f = polyfit(s, y, order, inflate=False, what="angular extrapolation of the areas")
        b0, se_b0 = float(f.coef[0]), f.stderr(0)
        rel = {"zimm": se_b0 / b0, "debye": se_b0 / b0, "berry": 2.0 * se_b0 / b0}[fit.formalism]
        se = Mw * abs(rel)
    return Estimate(Mw, se, "g/mol"), float(fit.rg[0])


def analyse_light_scattering(traces: DetectorTraces, setup: DetectorSetup, *, detector: str | None = None,
                             options: LightScatteringOptions | None = None,
                             limits: tuple[float, float] | None = None,
                             injected_mass: float | None = None) -> LightScatteringResult:
    """Absolute molar mass, Rg and their averages for one injection.

    Parameters
    ----------
    traces : DetectorTraces
        Baseline-corrected traces of the concentration and light-scattering detectors.
    setup : DetectorSetup
        Constants, offsets and broadening.
    detector : str, optional
        Name of the light-scattering detector (default: the only one).
    options : LightScatteringOptions, optional
    limits : (float, float), optional
        Integration limits on the concentration axis [mL] (default: the whole trace).
    injected_mass : float, optional
        c_sample·V_inj [g], for the mass recovery.

    Returns
    -------
    LightScatteringResult
    """
    opts = options or LightScatteringOptions()
    det = _pick(setup, detector)
    cdet = setup.concentration_detector
    traces.check(setup, (cdet.name, det.name))
    K = _require_optics(det)
    V = traces.volume
    w = widths(V)
    inside = window_mask(V, limits)
    c_raw = concentration(cdet, traces[cdet.name])
    # (4) areas: raw channels, no alignment or matching needed
    R_all, angles = rayleigh_ratios(det, traces[det.name], opts.angles)
    mass = float(np.sum(c_raw[inside] * w[inside]))
    if not mass > 0:
        raise DataError(f"{traces.name}: the concentration trace has no positive area inside the limits")
    # the LS window is the concentration window moved by the offset
    inside_ls = window_mask(V - det.offset, limits) if limits is not None else inside
    Mw_est, rgz_area = _areas_fit(R_all, w, inside_ls, mass, angles, K, det, opts)
    Mw_area = Mw_est.value
    # (2)-(3) slices
    c, R = matched_pair(V, c_raw, R_all, cdet, det, match=opts.match_broadening)
    spread = shared_spreading(cdet.broadening, det.broadening) if opts.match_broadening else Spreading()
    assert det.wavelength is not None and det.solvent_refractive_index is not None
    lam, n0 = det.wavelength, det.solvent_refractive_index

    def slices(c_eff: np.ndarray) -> AngularFit:
        return fit_angles(R, c_eff, angles, optical=K, wavelength=lam, solvent_refractive_index=n0,
                          formalism=opts.formalism, order=opts.order, A2=det.A2, rg_min=opts.rg_min)

    fit = slices(c)
    # (5) good-signal region and log M(V)
    ls_level = R[:, int(np.argmin(angles))]
    good = good_signal_mask(c, ls_level, inside, opts.good_fraction)
    what = f"{traces.name}: light-scattering log M(V) fit"
    logfit = fit_log_M(V, fit.M, good, opts.fit_order, what)
    # Rg and the LS-weighted slice M both describe the (broadened) mixture at V: the conformation
    # plot pairs Rg with this apparent M(V), not with the broadening-corrected one
    M_mixture = 10.0 ** logfit.log_M(V)
    notes: list[str] = []
    if not spread.is_zero():
        if opts.fit_order == 1:
            fit, logfit = _broadening_consistent(V, c, spread, slices, good, logfit, what)
        else:
            notes.append(f"{traces.name}: the light-scattering M(V) is not corrected for band broadening "
                         "with a curved log M(V) fit (order > 1); Mn and Đ are biased (Mw from areas is not)")
    M_fit = 10.0 ** logfit.log_M(V)
    av_obs = slice_averages(M_fit, c, w, inside)
    av = unbroadened_averages(av_obs, spread, -LN10 * logfit.coef[1]) if not spread.is_zero() and opts.fit_order == 1 else av_obs
    av_slices = slice_averages(fit.M, c, w, inside)
    warns = notes + list(_warnings(traces.name, logfit, V, inside, av, Mw_area, mass, injected_mass))
    size_mask = good_signal_mask(c, ls_level, inside, max(opts.size_fraction, opts.good_fraction))
    rg_av, conf = _size(fit, M_mixture, c, size_mask)
    result = LightScatteringResult(
        volume=V[inside], concentration=c[inside], M_slice=fit.M[inside], M_fit=M_fit[inside],
        rg=fit.rg[inside], good=good[inside],
        Mw_areas=Mw_est, rg_z_areas=rgz_area,
        averages=av, averages_observed=av_obs, averages_slices=av_slices, broadening=spread, rg_averages=rg_av, log_M_fit=logfit,
        conformation=conf, mass=mass, injected_mass=injected_mass, optical_constant=K,
        detector=det.name, formalism=fit.formalism, options=opts, warnings=tuple(warns),
    )
    warn_all(warns, SignalWarning)
    return result


def _pick(setup: DetectorSetup, name: str | None) -> LightScatteringDetector:
    if name is not None:
        d = setup[name]
        if not isinstance(d, LightScatteringDetector):
            raise DataError(f"detector {name!r} is a {d.kind} detector, not light scattering")
        return d
    found = [d for d in setup.detectors if isinstance(d, LightScatteringDetector)]
    if len(found) != 1:
        raise DataError("name the light-scattering detector to use" if found
                        else "the set-up has no light-scattering detector")
    return found[0]


def _warnings(name: str, logfit: LogMFit, V: np.ndarray, inside: np.ndarray, av: dict[str, float],
              Mw_area: float, mass: float, injected: float | None) -> list[str]:
    out = []
    dec = extrapolation_decades(logfit, V, inside)
    if dec > 0.5:
        out.append(f"{name}: the log M(V) fit is extrapolated {dec:.2f} decades of M beyond the slices with "
                   "good signal; Mn depends on that extrapolation")
    if logfit.order == 1 and logfit.coef[1] >= 0:
        out.append(f"{name}: log M does not fall with V across the peak (slope {logfit.coef[1]:.3g} 1/mL): "
                   "check the detector offset and the concentration trace")
    if math.isfinite(av.get("Mw", math.nan)) and Mw_area > 0:
        dev = av["Mw"] / Mw_area - 1.0
        if abs(dev) > 0.05:
            out.append(f"{name}: Mw from the fitted M(V) differs from Mw from the areas by {100 * dev:+.1f} %: "
                       "check the offset, the broadening and the good-signal range")
    if injected:
        out.extend(recovery_warnings(name, mass / injected))
    return out


def recovery_warnings(name: str, recovery: float) -> list[str]:
    """The warning for a mass recovery (eluted/injected [-]) outside 0.95-1.05, or none.

    The band is the usual acceptance of a mass balance in SEC (common practice): below it
    adsorption, filtration loss, or a wrong dn/dc or detector constant; above it a wrong
    dn/dc, constant or injected mass.
    """
    if not math.isfinite(recovery):
        return []
    if recovery < 0.95:
        return [f"{name}: mass recovery {100 * recovery:.1f} % is below 95 %: adsorption, filtration loss, "
                "or a wrong dn/dc or RI constant"]
    if recovery > 1.05:
        return [f"{name}: mass recovery {100 * recovery:.1f} % is above 105 %: check dn/dc, the RI constant "
                "and the injected mass"]
    return []


def _size(fit: AngularFit, M: np.ndarray, c: np.ndarray, mask: np.ndarray) -> tuple[dict[str, float], ConformationFit | None]:
    """Rg averages (L13) and the conformation fit (L14) over slices with measurable Rg."""
    ok = mask & np.isfinite(fit.rg) & np.isfinite(M) & (M > 0) & (c > 0)
    if ok.sum() < 3:
        return {"Rg_z": math.nan, "Rg_w": math.nan}, None
    rg, m, cc = fit.rg[ok], M[ok], c[ok]
    rgz = math.sqrt(float(np.sum(cc * m * rg**2) / np.sum(cc * m)))
    rgw = math.sqrt(float(np.sum(cc * rg**2) / np.sum(cc)))
    conf = None
    if ok.sum() >= 5 and np.ptp(np.log10(m)) > 0.1:
        x = np.log10(m)
        xc = float(x.mean())
        f = polyfit(x - xc, np.log10(rg), 1, what="conformation fit")
        nu = float(f.coef[1])
        conf = ConformationFit(nu=nu, nu_stderr=f.stderr(1), Q=float(10 ** (f.coef[0] - nu * xc)),
                               M_range=(float(m.min()), float(m.max())), n_points=int(ok.sum()))
    return {"Rg_z": rgz, "Rg_w": rgw}, conf


def _broadening_consistent(V: np.ndarray, c: np.ndarray, g: Spreading, slices: Any, good: np.ndarray,
                           logfit: LogMFit, what: str) -> tuple[AngularFit, LogMFit]:
    """Iterate D2 → c_eff → slice M → straight log M(V) fit until D2 settles."""
    fit = None
    for _ in range(30):
        D2 = -LN10 * logfit.coef[1]
        if not D2 > 0 or g.tau * D2 >= 1.0:
            break
        fit = slices(tilted_trace(V, c, g, D2))
        new = fit_log_M(V, fit.M, good, 1, what)
        done = abs(new.coef[1] - logfit.coef[1]) < 1e-9
        logfit = new
        if done:
            break
    if fit is None:
        fit = slices(c)
    return fit, logfit

