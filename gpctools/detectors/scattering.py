"""Static light scattering: optical constant, scattering vector, particle scattering
function, and the angular extrapolation of each slice (Zimm, Debye, Berry).

Units: wavelength in nm at the API (cm inside the formulas), dn/dc in mL/g, R_θ in
cm⁻¹, K* in mol cm² g⁻², c in g/mL, M in g/mol, Rg in nm, A2 in mol mL g⁻².

Equations (docs/science.md, section 14):

    K* = 4π² n0² (dn/dc)² / (N_A λ0⁴)                                              (L2)
    q  = (4π n0/λ0) sin(θ/2)                                                        (L3)
    K*c/R_θ = 1/(M·P(θ)) + 2A2·c                                                    (L4)
    P(θ) = 1 − q²Rg²/3 + …; random coil P(x) = 2(e^(−x) + x − 1)/x², x = q²Rg²       (L6)

Per slice, y is regressed on s = sin²(θ/2) with k = 16π²n0²/(3λ0²):

    Zimm   y = K*c/R_θ       M = 1/b0      Rg² = (b1/b0)/k                          (L7)
    Debye  y = R_θ/(K*c)     M = b0        Rg² = −(b1/b0)/k                         (L8)
    Berry  y = (K*c/R_θ)^½   M = 1/b0²     Rg² = 2(b1/b0)/k                         (L9)

References
----------
IUPAC Purple Book (Compendium of Polymer Terminology and Nomenclature), ch. 3: Rayleigh
ratio, scattering vector, Zimm plot, dissymmetry (L1, L3, L4). Zimm, J. Chem. Phys. 16
(1948) 1093. Debye, J. Phys. Colloid Chem. 51 (1947) 18 (coil function; from memory).
Berry, J. Chem. Phys. 44 (1966) 4550 (from memory). K* as defined in the background of
European patent EP1510807.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError

from ._common import N_A, as_array, json_list, positive

__all__ = [
    "FORMALISMS",
    "optical_constant",
    "scattering_vector",
    "coil_scattering_function",
    "AngularFit",
    "fit_angles",
    "rg_from_dissymmetry",
    "flory_fox_rg",
    "viscometric_radius",
    "molar_mass_with_viscometer",
]

FORMALISMS = ("zimm", "debye", "berry")

#: Flory-Fox constant Φ′ = Φ·6^(3/2) for a coil in a good solvent, with [η] in dL/g and Rg
#: in cm: 3.67×10²² (Φ = 2.5×10²³ with [η] in mL/g and ⟨r²⟩ = 6⟨s²⟩; from memory,
#: docs/detectors.md, check values).
PHI_GOOD_SOLVENT = 2.5e23 * 6.0**1.5 / 100.0
#: Flory-Fox Φ′ in theta conditions, 4.22×10²² with [η] in dL/g and s in cm
#: (IUPAC Gold Book, doi:10.1351/goldbook.12265).
PHI_THETA = 4.22e22


def optical_constant(dn_dc: float, wavelength: float, solvent_refractive_index: float) -> float:
    """Optical constant K* = 4π²n0²(dn/dc)²/(N_A λ0⁴) [mol cm² g⁻²] (L2).

    Parameters
    ----------
    dn_dc : float
        Refractive-index increment at the laser wavelength [mL/g].
    wavelength : float
        Laser vacuum wavelength λ0 [nm].
    solvent_refractive_index : float
        n0 at λ0 [-].

    Examples
    --------
    Polystyrene in THF (dn/dc 0.185 mL/g, n0 1.404) at 658 nm (docs/science.md, section 14, derived):

    >>> f"{optical_constant(0.185, 658.0, 1.404):.4g}"
    '2.359e-07'
    """
    lam = positive(wavelength, "laser wavelength [nm]") * 1e-7  # cm
    n0 = positive(solvent_refractive_index, "solvent refractive index")
    dn = float(dn_dc)
    if dn == 0.0 or not math.isfinite(dn):
        raise DataError(f"dn/dc at the laser wavelength must be a non-zero number, got {dn_dc!r}")
    return 4.0 * math.pi**2 * n0**2 * dn**2 / (N_A * lam**4)


def scattering_vector(angle: Any, wavelength: float, solvent_refractive_index: float) -> np.ndarray:
    """q = (4π n0/λ0)·sin(θ/2) [1/nm] (L3), θ in degrees, λ0 in nm."""
    theta = np.radians(np.asarray(angle, dtype=float))
    return np.asarray(4.0 * math.pi * solvent_refractive_index / wavelength * np.sin(theta / 2.0))


def coil_scattering_function(angle: Any, rg: Any, wavelength: float,
                             solvent_refractive_index: float) -> np.ndarray:
    """Debye function of a Gaussian coil, P(x) = 2(e^(−x) + x − 1)/x², x = q²Rg² [-] (L6).

    Parameters
    ----------
    angle : array_like
        Scattering angle in the solvent [degree].
    rg : array_like
        Radius of gyration [nm] (broadcast against ``angle``).
    wavelength : float
        λ0 [nm].
    solvent_refractive_index : float
        n0 [-].

    Examples
    --------
    Rg 10 nm at 90° and 658 nm in THF: P = 0.988 (docs/science.md, section 14, derived):

    >>> round(float(coil_scattering_function(90.0, 10.0, 658.0, 1.404)), 3)
    0.988
    """
    q = scattering_vector(angle, wavelength, solvent_refractive_index)
    x = (q * np.asarray(rg, dtype=float)) ** 2
    x = np.asarray(x, dtype=float)
    out = np.ones_like(x)
    small = x < 1e-4
    xs = x[~small]
    out[~small] = 2.0 * (np.expm1(-xs) + xs) / (xs * xs)
    # series 1 − x/3 + x²/12 avoids cancellation for tiny x
    out[small] = 1.0 - x[small] / 3.0 + x[small] ** 2 / 12.0
    return out


@dataclass(frozen=True, repr=False)
class AngularFit(Display):
    """Molar mass and radius of gyration of each slice from its angular dependence.

    Attributes
    ----------
    M : numpy.ndarray
        Molar mass per slice [g/mol]; NaN where the extrapolated intercept is not
        positive (no usable signal).
    rg : numpy.ndarray
        Radius of gyration per slice [nm]; NaN below ``rg_min`` or where the slope has
        the wrong sign (the angular signal is below noise).
    rg2 : numpy.ndarray
        Rg² as fitted, before any masking [nm²] (may be negative with noise).
    formalism : str
        ``"zimm"``, ``"debye"``, ``"berry"`` or ``"single angle"``.
    order : int
        Polynomial order in sin²(θ/2).
    angles : tuple of float
        Angles used [degree].
    rg_min : float
        Smallest Rg reported [nm].
    """

    M: np.ndarray
    rg: np.ndarray
    rg2: np.ndarray
    formalism: str
    order: int
    angles: tuple[float, ...]
    rg_min: float
    warnings: tuple[str, ...] = field(default=())

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "formalism": self.formalism,
            "order": self.order,
            "angles [degree]": list(self.angles),
            "smallest reported Rg [nm]": self.rg_min,
            "M [g/mol]": json_list(self.M),
            "Rg [nm]": json_list(self.rg),
            "warnings": list(self.warnings),
        }


def fit_angles(rayleigh: Any, concentration: Any, angles: Any, *, optical: float, wavelength: float,
               solvent_refractive_index: float, formalism: str = "berry", order: int = 1,
               A2: float = 0.0, rg_min: float = 10.0) -> AngularFit:
    """Extrapolate each slice's excess Rayleigh ratios to zero angle (L7-L9, L4, L10).

    Parameters
    ----------
    rayleigh : array_like, shape (n,) or (n, m)
        Excess Rayleigh ratio R_θ of each slice at each angle [cm⁻¹], aligned with the
        concentration slices. NaN marks a rejected reading (that angle is left out of
        that slice's fit).
    concentration : array_like, shape (n,)
        c of each slice [g/mL].
    angles : array_like, shape (m,)
        Scattering angles in the solvent [degree].
    optical : float
        K* [mol cm² g⁻²].
    wavelength : float
        λ0 [nm].
    solvent_refractive_index : float
        n0 [-].
    formalism : {"berry", "zimm", "debye"}
        Which quantity is regressed on sin²(θ/2). Berry is the most nearly linear for
        coils; first-order Zimm overestimates M and Rg, Debye underestimates them, all
        agree while q²Rg² ≪ 1 (docs/science.md, section 14). With one angle the particle
        scattering function is taken as 1 (low-angle detector): M = R_θ/(K*c).
    order : {1, 2}
        Fit order in sin²(θ/2): 1 for Rg ≲ 50 nm, 2 above; higher orders are refused on
        3-8 angles.
    A2 : float
        Second virial coefficient [mol mL g⁻²]. Each angle's K*c/R_θ is reduced by 2A2·c
        before the fit (L4), which at θ → 0 is M = M_app/(1 − 2A2·c·M_app) (L10).
    rg_min : float
        Rg below this is not measurable from the angular signal at 600-700 nm
        (P(90°) = 0.988 for Rg = 10 nm): reported as NaN [nm].

    Returns
    -------
    AngularFit
    """
    form = str(formalism).strip().lower()
    if form not in FORMALISMS:
        raise DataError(f"unknown light-scattering formalism {formalism!r}; use one of {', '.join(FORMALISMS)}")
    R = np.array(rayleigh, dtype=float)
    if R.ndim == 1:
        R = R[:, None]
    c = as_array(concentration, "slice concentration")
    th = as_array(angles, "scattering angles")
    if R.ndim != 2 or R.shape[0] != c.size or R.shape[1] != th.size:
        raise DataError(f"Rayleigh ratios of shape {R.shape} do not match {c.size} slices × {th.size} angles")
    if order not in (1, 2):
        raise DataError("the angular fit order must be 1 or 2 (higher orders are unstable on 3-8 angles)")
    Kc = optical * c
    with np.errstate(divide="ignore", invalid="ignore"):
        z = Kc[:, None] / R - 2.0 * A2 * c[:, None]  # K*c/R_θ corrected for A2 (L4)
    m = th.size
    warns: list[str] = []
    if m == 1:
        with np.errstate(divide="ignore", invalid="ignore"):
            M = 1.0 / z[:, 0]
        M = np.where(np.isfinite(M) & (M > 0), M, np.nan)
        nan = np.full(c.size, np.nan)
        return AngularFit(M=M, rg=nan, rg2=nan.copy(), formalism="single angle", order=0,
                          angles=tuple(float(a) for a in th), rg_min=float(rg_min))
    if m < order + 1:
        raise DataError(f"an order-{order} angular fit needs at least {order + 1} angles, got {m}")
    s = np.sin(np.radians(th) / 2.0) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        if form == "zimm":
            y = z
        elif form == "debye":
            y = 1.0 / z
        else:
            y = np.sqrt(z)  # NaN where z ≤ 0 (noise): that angle drops out of the slice
    b0, b1 = _rowwise_polyfit(s, y, order)
    k = 16.0 * math.pi**2 * solvent_refractive_index**2 / (3.0 * (wavelength * 1e-7) ** 2)  # cm⁻²
    with np.errstate(divide="ignore", invalid="ignore"):
        if form == "zimm":
            M = 1.0 / b0
            rg2 = (b1 / b0) / k
        elif form == "debye":
            M = b0
            rg2 = -(b1 / b0) / k
        else:
            M = 1.0 / (b0 * b0)
            rg2 = 2.0 * (b1 / b0) / k
            M = np.where(b0 > 0, M, np.nan)
    M = np.where(np.isfinite(M) & (M > 0), M, np.nan)
    rg2_nm = rg2 * 1e14  # cm² -> nm²
    rg = np.sqrt(np.where(rg2_nm > 0, rg2_nm, np.nan))
    rg = np.where(np.isfinite(M) & (rg >= rg_min), rg, np.nan)
    return AngularFit(M=M, rg=rg, rg2=rg2_nm, formalism=form, order=order,
                      angles=tuple(float(a) for a in th), rg_min=float(rg_min), warnings=tuple(warns))


def _rowwise_polyfit(s: np.ndarray, y: np.ndarray, order: int) -> tuple[np.ndarray, np.ndarray]:
    """Intercept and initial slope of y_i(s) for every row i; NaN entries are left out."""
    n = y.shape[0]
    X = np.vander(s, order + 1, increasing=True)
    b0 = np.full(n, np.nan)
    b1 = np.full(n, np.nan)
    good = np.isfinite(y)
    full = good.all(axis=1)
    if full.any():
        coef, *_ = np.linalg.lstsq(X, y[full].T, rcond=None)
        b0[full], b1[full] = coef[0], coef[1]
    for i in np.flatnonzero(~full & (good.sum(axis=1) >= order + 1)):
        g = good[i]
        coef, *_ = np.linalg.lstsq(X[g], y[i, g], rcond=None)
        b0[i], b1[i] = coef[0], coef[1]
    return b0, b1


def rg_from_dissymmetry(ratio: Any, angles: tuple[float, float], wavelength: float,
                        solvent_refractive_index: float, *, rg_max: float = 500.0) -> np.ndarray:
    """Rg of a random coil from the dissymmetry z = R(θ1)/R(θ2) = P(θ1)/P(θ2) [nm].

    Solves the Debye coil function (L6) for Rg slice by slice (bisection; z grows
    monotonically with Rg for θ1 < θ2). Values at or below 1 (no measurable angular
    dependence) give NaN.

    Examples
    --------
    Coil, 658 nm, THF: z(15°, 90°) = 1.3072 ↔ Rg = 50 nm (docs/science.md, section 14, derived):

    >>> round(float(rg_from_dissymmetry(1.3072, (15.0, 90.0), 658.0, 1.404)[0]), 1)
    50.0
    """
    from scipy.optimize import brentq

    t1, t2 = float(angles[0]), float(angles[1])
    if not t1 < t2:
        raise DataError("dissymmetry needs the lower angle first, e.g. (15, 90)")
    z = np.atleast_1d(np.asarray(ratio, dtype=float))
    out = np.full(z.shape, np.nan)

    def ratio_at(rg: float) -> float:
        p = coil_scattering_function(np.array([t1, t2]), rg, wavelength, solvent_refractive_index)
        return float(p[0] / p[1])

    zmax = ratio_at(rg_max)
    for i, zi in enumerate(z):
        if np.isfinite(zi) and 1.0 < zi < zmax:
            out[i] = brentq(lambda r, zi=zi: ratio_at(r) - zi, 1e-6, rg_max, xtol=1e-9)
    return out


def flory_fox_rg(intrinsic_viscosity: Any, M: Any, *, phi: float = PHI_GOOD_SOLVENT) -> np.ndarray:
    """Rg = ([η]M/Φ′)^(1/3) [nm] (Flory-Fox, docs/detectors.md, check values).

    Parameters
    ----------
    intrinsic_viscosity : array_like
        [η] [dL/g].
    M : array_like
        [g/mol].
    phi : float
        Φ′ with [η] in dL/g and Rg in cm; default the good-solvent value 3.67×10²²
        (Φ = 2.5×10²³ with ⟨r²⟩ = 6⟨s²⟩, from memory); theta solvent 4.22×10²² (IUPAC
        Gold Book 12265).

    Examples
    --------
    Polystyrene 10⁵ g/mol in THF, [η] 0.4334 dL/g: Rg ≈ 10.6 nm (docs/detectors.md, check values):

    >>> round(float(flory_fox_rg(0.43342, 1e5)), 1)
    10.6
    """
    eta = np.asarray(intrinsic_viscosity, dtype=float)
    mm = np.asarray(M, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.asarray(np.cbrt(eta * mm / phi) * 1e7)


def viscometric_radius(intrinsic_viscosity: Any, M: Any) -> np.ndarray:
    """R_η = (3[η]M/(10π N_A))^(1/3) [nm] (Einstein; docs/detectors.md, check values, from memory).

    [η] in dL/g (converted to mL/g = cm³/g inside).

    Examples
    --------
    >>> round(float(viscometric_radius(0.43342, 1e5)), 1)
    8.8
    """
    eta = np.asarray(intrinsic_viscosity, dtype=float) * 100.0
    return np.asarray(np.cbrt(3.0 * eta * np.asarray(M, dtype=float) / (10.0 * math.pi * N_A)) * 1e7)


def molar_mass_with_viscometer(rayleigh: Any, concentration: Any, intrinsic_viscosity: Any, *,
                               angle: float, optical: float, wavelength: float,
                               solvent_refractive_index: float, phi: float = PHI_GOOD_SOLVENT,
                               iterations: int = 50) -> tuple[np.ndarray, np.ndarray]:
    """M and Rg per slice from one (right-angle) channel and the viscometer.

    Iterates M → Rg (Flory-Fox, V14) → P(θ) (coil, L6) → M = R_θ/(K*c·P(θ)) to
    convergence (docs/science.md, section 14; the iterative per-slice scheme is described in the
    Handbook of Size Exclusion Chromatography and Related Techniques, ch. 3).

    Parameters
    ----------
    rayleigh : array_like
        R_θ per slice [cm⁻¹].
    concentration : array_like
        c per slice [g/mL].
    intrinsic_viscosity : array_like
        [η] per slice [dL/g].
    angle : float
        θ of the channel [degree].

    Returns
    -------
    M, rg : numpy.ndarray
        [g/mol] and [nm]; NaN where a slice has no positive signal.
    """
    R = as_array(rayleigh, "Rayleigh ratio")
    c = as_array(concentration, "slice concentration")
    eta = as_array(intrinsic_viscosity, "intrinsic viscosity")
    with np.errstate(divide="ignore", invalid="ignore"):
        M0 = R / (optical * c)
    ok = np.isfinite(M0) & (M0 > 0) & (eta > 0)
    M = np.where(ok, M0, np.nan)
    for _ in range(iterations):
        rg = flory_fox_rg(eta, M, phi=phi)
        P = coil_scattering_function(angle, np.where(ok, rg, 0.0), wavelength, solvent_refractive_index)
        new = np.where(ok, M0 / P, np.nan)
        done = np.nanmax(np.abs(new / M - 1.0)) < 1e-12 if ok.any() else True
        M = new
        if done:
            break
    return M, flory_fox_rg(eta, M, phi=phi)
