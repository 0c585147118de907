"""Narrow-standard calibration curves, flow-marker correction and universal calibration.

A calibration maps elution volume V [mL] to log10 M [g/mol]. It is fitted as a polynomial
of log10 Mp against V (the volume is the measured, error-free variable in practice; fitting
the reverse direction biases the curve) [1]_. Orders 1-3 are usual; higher orders need many
standards (at least order + 2, better 8-10 evenly spread) [1]_.

Outside the calibrated range (between the peak volumes of the highest and lowest standard)
the polynomial is not used: log M is continued along the tangent at the range end, and the
mass fraction eluting there is reported so that the analyst can judge it (warning above
1 % by default, common practice).

References
----------
.. [1] Reviews of SEC calibration practice; see docs/science.md, section 2 of the
   project notes ("published: SEC calibration practice reviews").
.. [2] H. Benoit, Z. Grubisic, P. Rempp, "A universal calibration for gel permeation
   chromatography", J. Polym. Sci. B 5 (1967) 753.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from gpctools.display import Display

from .errors import CalibrationError, CalibrationWarning

__all__ = [
    "Calibration",
    "fit_calibration",
    "select_order",
    "flow_marker_factor",
    "universal_log_M",
    "mark_houwink_notes",
    "K_PLAUSIBLE_DL_G",
]

MAX_ORDER = 5

#: Plausible span of a Mark-Houwink K in dL/g [dL/g]. Tabulated K of flexible polymers in
#: organic eluents lie mostly between 1e-5 and 1e-3 dL/g (from memory: Polymer Handbook
#: Mark-Houwink tables; the bundled pairs are 7.6e-5 to 1.2e-4), widened tenfold below and
#: fivefold above (common practice) so that only a unit mix-up falls outside: the same K
#: in mL/g is 100 times larger (1 dL/g = 100 mL/g), e.g. polystyrene 1.14e-2 mL/g.
K_PLAUSIBLE_DL_G = (1e-6, 5e-3)
#: Largest plausible ratio of the two K of a universal calibration [-]: pairs measured in
#: one eluent differ by a factor of a few (the bundled THF pairs by at most 1.6; polystyrene
#: and polyethylene in trichlorobenzene by about 3.4, from memory), while one K typed in
#: mL/g next to one in dL/g makes the ratio 100 times larger (common practice).
K_RATIO_LIMIT = 10.0


@dataclass(frozen=True, repr=False)
class Calibration(Display):
    """A fitted calibration curve log10 M(V).

    Attributes
    ----------
    coefficients : tuple of float
        Polynomial coefficients, lowest order first, in the scaled variable
        ``t = (V - center) / scale`` (numerically well conditioned).
    center, scale : float
        Scaling of the volume axis [mL].
    v_min, v_max : float
        Calibrated range: peak volumes of the last- and first-eluting standards [mL].
    order : int
        Polynomial order.
    names, Mp, volume : tuple
        The standards used: name, nominal peak molar mass [g/mol], peak volume [mL].
    residuals_pct : tuple of float
        Per standard, ``100 * (M_fit / Mp - 1)`` [%].
    r_squared : float
        Coefficient of determination of the fit in log10 M [-].
    residual_std_log : float
        Residual standard deviation in log10 M (n - order - 1 degrees of freedom) [-].
    covariance : tuple of tuples
        Covariance matrix of ``coefficients``, s²(XᵀX)⁻¹ [-] (NaN without degrees of
        freedom); see :attr:`coefficient_stderr` and :meth:`log_M_stderr`.
    aicc : float
        Small-sample corrected Akaike information criterion of the fit (for order choice).
    log_offset, log_factor : float
        Affine transform applied to the standard-polymer log M, ``log M = offset +
        factor * log M_standard`` (identity unless a universal calibration was applied).
    standard_polymer, sample_polymer : str
        What the standards are, and what polymer the molar masses refer to.
    mark_houwink : dict or None
        The Mark-Houwink pairs used for a universal calibration (K [dL/g], a [-]).
    warnings : tuple of str
        Quality concerns found while fitting.
    """

    coefficients: tuple[float, ...]
    center: float
    scale: float
    v_min: float
    v_max: float
    order: int
    names: tuple[str, ...]
    Mp: tuple[float, ...]
    volume: tuple[float, ...]
    residuals_pct: tuple[float, ...]
    r_squared: float
    residual_std_log: float
    aicc: float
    log_offset: float = 0.0
    log_factor: float = 1.0
    standard_polymer: str = "polystyrene"
    sample_polymer: str | None = None
    mark_houwink: dict[str, Any] | None = None
    warnings: tuple[str, ...] = field(default=())
    covariance: tuple[tuple[float, ...], ...] = field(default=())

    # -- evaluation ------------------------------------------------------------------------
    def _poly_log_M(self, V: np.ndarray) -> np.ndarray:
        t = (V - self.center) / self.scale
        return np.polynomial.polynomial.polyval(t, self.coefficients)

    def _poly_slope(self, V: np.ndarray) -> np.ndarray:
        t = (V - self.center) / self.scale
        d = np.polynomial.polynomial.polyder(self.coefficients)
        return np.polynomial.polynomial.polyval(t, d) / self.scale

    def log_M(self, V: Any) -> np.ndarray:
        """log10 M at elution volume(s) V [mL].

        Inside [v_min, v_max] the fitted polynomial; outside it the tangent at the range
        end (no polynomial extrapolation, which is unstable for orders above 1).
        """
        V = np.asarray(V, dtype=float)
        out = self._poly_log_M(np.clip(V, self.v_min, self.v_max))
        lo = V < self.v_min
        hi = V > self.v_max
        if lo.any():
            s = self._poly_slope(np.array([self.v_min]))[0]
            out = np.where(lo, out + s * (V - self.v_min), out)
        if hi.any():
            s = self._poly_slope(np.array([self.v_max]))[0]
            out = np.where(hi, out + s * (V - self.v_max), out)
        return self.log_offset + self.log_factor * out

    def M(self, V: Any) -> np.ndarray:
        """Molar mass [g/mol] at elution volume(s) V [mL]."""
        return np.power(10.0, self.log_M(V))

    def volume_at(self, M: Any) -> np.ndarray:
        r"""Elution volume [mL] at which the calibration gives molar mass(es) M [g/mol].

        The inverse of :meth:`M`, on the same curve: inside the calibrated range the
        root of the fitted polynomial, outside it the tangent at the range end (as
        :meth:`log_M` continues the curve), so ``volume_at(M(V)) == V`` for every V. With
        y = (log10 M - log_offset) / log_factor the standard-polymer log M,

        .. math:: V = v_{min} + (y - p(v_{min})) / p'(v_{min}) \quad (y > p(v_{min}))

        and likewise beyond ``v_max`` (docs/science.md, section 1.6: V_lim = V(M_lim)).

        Parameters
        ----------
        M : float or array_like
            Molar mass(es) [g/mol], positive.

        Returns
        -------
        numpy.ndarray
            Volume(s) [mL], same shape as ``M``.

        Raises
        ------
        CalibrationError
            M not positive, or the curve gives that M at several volumes (its slope
            changes sign) or at none (a slope that is not negative at a range end).

        Examples
        --------
        >>> cal = fit_calibration([12.0, 14.0, 16.0, 18.0], [1e6, 1e5, 1e4, 1e3], order=1)
        >>> [round(float(v), 6) for v in cal.volume_at([1e5, 1e2])]
        [14.0, 20.0]
        """
        M_arr = np.asarray(M, dtype=float)
        flat = M_arr.ravel()
        if not np.all(np.isfinite(flat) & (flat > 0)):
            bad = next(float(m) for m in flat if not (math.isfinite(m) and m > 0))
            raise CalibrationError(f"a molar mass must be a positive number in g/mol, got {bad:g}")
        y = (np.log10(flat) - self.log_offset) / self.log_factor
        out = np.array([self._volume_at_poly(float(v), float(m)) for v, m in zip(y, flat)])
        return out.reshape(M_arr.shape)

    def _volume_at_poly(self, y: float, M: float) -> float:
        """The one volume where the (tangent-continued) polynomial equals y; see volume_at."""
        t_lo = (self.v_min - self.center) / self.scale
        t_hi = (self.v_max - self.center) / self.scale
        coef = np.array(self.coefficients, dtype=float)
        coef[0] -= y
        found: list[float] = []
        if self.order >= 1:
            roots = np.polynomial.polynomial.polyroots(coef)
            tol = 1e-9 * max(1.0, t_hi - t_lo)
            for r in roots:
                if abs(r.imag) <= 1e-9 and t_lo - tol <= r.real <= t_hi + tol:
                    found.append(float(np.clip(r.real, t_lo, t_hi)) * self.scale + self.center)
        for end, beyond in ((self.v_min, -1.0), (self.v_max, 1.0)):
            p_end = float(self._poly_log_M(np.array([end]))[0])
            slope = float(self._poly_slope(np.array([end]))[0])
            if slope != 0.0:
                v = end + (y - p_end) / slope
                if (v - end) * beyond > 0:
                    found.append(v)
        found.sort()
        unique = [v for i, v in enumerate(found) if i == 0 or v - found[i - 1] > 1e-9 * max(1.0, abs(v))]
        if len(unique) == 1:
            return unique[0]
        if not unique:
            raise CalibrationError(
                f"the calibration never reaches {M:g} g/mol (its slope is not negative at the "
                "end of the calibrated range); check the standards or lower calibration.order")
        listed = ", ".join(f"{v:.3f}" for v in unique)
        raise CalibrationError(
            f"the calibration gives {M:g} g/mol at several volumes ({listed} mL): its slope "
            "changes sign; lower calibration.order or check the standards")

    def dlogM_dV(self, V: Any) -> np.ndarray:
        """Calibration Jacobian d log10 M / dV [1/mL] (negative for a valid curve)."""
        V = np.asarray(V, dtype=float)
        return self.log_factor * self._poly_slope(np.clip(V, self.v_min, self.v_max))

    @property
    def coefficient_stderr(self) -> tuple[float, ...]:
        """Standard errors of :attr:`coefficients` [-] (square roots of the covariance diagonal)."""
        if not self.covariance:
            return tuple(float("nan") for _ in self.coefficients)
        return tuple(float(math.sqrt(c)) if c >= 0 else float("nan")
                     for c in np.diag(np.asarray(self.covariance)))

    def coefficients_mL(self) -> tuple[tuple[float, ...], tuple[float, ...]]:
        """The curve in the user's units: log10 M = Σ b_k V^k with V in mL, and the
        standard errors of the b_k, lowest order first.

        The fit is made in the scaled variable t = (V − center)/scale for conditioning;
        expanding (V − c)^k by the binomial theorem gives b = A·c with
        A[j, k] = C(k, j)·(−c)^(k−j)/s^k (derived), so the covariance of b is A·Σ·Aᵀ.
        A universal-calibration transform (log M = offset + factor·log M_standard) is
        applied, so the b_k give the molar masses of the results' scale. Valid inside
        the calibrated range (outside it :meth:`log_M` continues along the tangent).

        Returns
        -------
        (coefficients, standard errors) : tuple of float, tuple of float
            b_k [log10(g/mol)/mL^k]; standard errors NaN without degrees of freedom.
        """
        from math import comb

        n = len(self.coefficients)
        c, s = self.center, self.scale
        A = np.zeros((n, n))
        for k in range(n):
            for j in range(k + 1):
                A[j, k] = comb(k, j) * (-c) ** (k - j) / s**k
        b = self.log_factor * (A @ np.asarray(self.coefficients, dtype=float))
        b[0] += self.log_offset
        if self.covariance:
            cov = (self.log_factor**2) * (A @ np.asarray(self.covariance, dtype=float) @ A.T)
            se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
        else:
            se = np.full(n, np.nan)
        return tuple(float(v) for v in b), tuple(float(v) for v in se)

    def log_M_stderr(self, V: Any) -> np.ndarray:
        """Standard error of the fitted log10 M at V [-], from the coefficient covariance.

        se² = xᵀ C x with x = (1, t, t², ...), t the scaled volume (clipped to the calibrated
        range), times ``log_factor`` after a universal conversion. 100·ln10·se is the
        relative standard error of M in %.
        """
        V = np.asarray(V, dtype=float)
        if not self.covariance:
            return np.full(V.shape, np.nan)
        t = (np.clip(V, self.v_min, self.v_max) - self.center) / self.scale
        X = np.polynomial.polynomial.polyvander(t, self.order)
        C = np.asarray(self.covariance)
        var = np.einsum("...i,ij,...j->...", X, C, X).reshape(V.shape)
        return abs(self.log_factor) * np.sqrt(np.maximum(var, 0.0))

    def log_M_gradient(self, V: Any) -> np.ndarray:
        r"""Derivative of log10 M(V) with respect to each coefficient, shape (len(V), order + 1) [-].

        Inside the calibrated range log10 M = off + f·Σ c_k t^k with t = (V − center)/scale,
        so ∂ log10 M/∂c_k = f·t^k. Outside it the tangent at the range end V_e (t_e) is used,
        log10 M = off + f·[Σ c_k t_e^k + (Σ k c_k t_e^(k−1))·(V − V_e)/scale], so

        .. math:: \partial \log_{10} M / \partial c_k = f\,[t_e^k + k\,t_e^{k-1} (V - V_e)/s]

        (f = ``log_factor``; the universal-calibration offset does not depend on the
        coefficients). With the coefficient covariance C, the variance of a function g of
        the molar masses follows as ∇gᵀ C ∇g (first-order propagation; JCGM 100:2008,
        the GUM, section 5.1, from memory). See
        :func:`gpctools.uncertainty.calibration_uncertainty`.
        """
        V = np.atleast_1d(np.asarray(V, dtype=float))
        Ve = np.clip(V, self.v_min, self.v_max)
        te = (Ve - self.center) / self.scale
        G = np.polynomial.polynomial.polyvander(te, self.order)
        if np.array_equal(V, Ve):  # all inside: the tangent term below is exactly zero
            return self.log_factor * np.ascontiguousarray(G)
        k = np.arange(self.order + 1)
        # derivative of t^k: k t^(k-1) (zero for k = 0)
        dG = np.zeros_like(G)
        dG[:, 1:] = G[:, :-1] * k[1:]
        G = G + dG * ((V - Ve) / self.scale)[:, None]
        return self.log_factor * G

    def inside(self, V: Any) -> np.ndarray:
        """Boolean mask: V inside the calibrated range."""
        V = np.asarray(V, dtype=float)
        return (V >= self.v_min) & (V <= self.v_max)

    # -- derived calibrations --------------------------------------------------------------
    def converted(
        self,
        K_standard: float,
        a_standard: float,
        K_sample: float,
        a_sample: float,
        *,
        sample_polymer: str = "sample polymer",
        source: str | None = None,
    ) -> Calibration:
        r"""Universal calibration: the same curve expressed for another polymer.

        Equal hydrodynamic volume [η]·M at equal V with [η] = K·M^a gives [2]_

        .. math:: \log M_x = \frac{\log(K_s/K_x) + (1 + a_s)\log M_s}{1 + a_x}

        Parameters
        ----------
        K_standard, a_standard : float
            Mark-Houwink constants of the standard polymer (K [dL/g], a [-]).
        K_sample, a_sample : float
            The same for the sample polymer, same solvent and temperature, same K unit.
        sample_polymer : str
            Name recorded in results.
        source : str, optional
            Where the Mark-Houwink pairs come from (recorded; literature pairs differ by
            about 5 % in the resulting M).

        Warns
        -----
        CalibrationWarning
            A K outside the plausible dL/g range or two K a factor of more than
            :data:`K_RATIO_LIMIT` apart (:func:`mark_houwink_notes`): the sign of a K
            typed in mL/g.

        Notes
        -----
        Not valid for branched polymers or samples that adsorb on the column.
        """
        for name, value in (("K_standard", K_standard), ("K_sample", K_sample)):
            if not (math.isfinite(value) and value > 0):
                raise CalibrationError(f"Mark-Houwink {name} must be a positive number, got {value!r}")
        for name, value in (("a_standard", a_standard), ("a_sample", a_sample)):
            if not (math.isfinite(value) and 0.0 < value < 2.0):
                raise CalibrationError(
                    f"Mark-Houwink exponent {name} must lie between 0 and 2, got {value!r}"
                )
        offset, factor = universal_transform(K_standard, a_standard, K_sample, a_sample)
        notes = mark_houwink_notes(K_standard, K_sample)
        for note in notes:
            warnings.warn(note, CalibrationWarning, stacklevel=2)
        return replace(
            self,
            warnings=(*self.warnings, *notes),
            log_offset=offset + factor * self.log_offset,
            log_factor=factor * self.log_factor,
            sample_polymer=sample_polymer,
            mark_houwink={
                "K_standard [dL/g]": float(K_standard),
                "a_standard [-]": float(a_standard),
                "K_sample [dL/g]": float(K_sample),
                "a_sample [-]": float(a_sample),
                "source": source,
            },
        )

    @property
    def is_absolute(self) -> bool:
        """True when molar masses refer to the sample polymer itself.

        That is the case after a universal calibration, or when the method states that
        the samples are the same polymer as the standards (``sample_polymer ==
        standard_polymer``). With no sample polymer stated the scale is relative.
        """
        return self.mark_houwink is not None or (
            self.sample_polymer is not None and self.sample_polymer == self.standard_polymer
        )

    def scale_label(self) -> str:
        """Plain description of the molar-mass scale, for result tables."""
        if self.mark_houwink is not None:
            return f"absolute {self.sample_polymer} (universal calibration)"
        if self.is_absolute:
            return f"absolute {self.sample_polymer} (same-polymer standards)"
        return f"{self.standard_polymer}-equivalent (relative)"

    def standards_table(self) -> list[dict[str, Any]]:
        """One dict per standard with unit-named keys (for reports)."""
        fitted = self._poly_log_M(np.asarray(self.volume))
        return [
            {
                "standard": n,
                "Mp [g/mol]": mp,
                "volume [mL]": v,
                "fitted M [g/mol]": float(10.0**f),
                "residual [%]": r,
            }
            for n, mp, v, f, r in zip(self.names, self.Mp, self.volume, fitted, self.residuals_pct)
        ]

    def summary(self) -> dict[str, Any]:
        """JSON-safe description: order, range, quality, standards, transform, warnings."""
        worst = max(self.residuals_pct, key=abs) if self.residuals_pct else float("nan")
        return {
            "order": self.order,
            "coefficients (scaled V, lowest first)": list(self.coefficients),
            "center [mL]": self.center,
            "scale [mL]": self.scale,
            "calibrated range [mL]": [self.v_min, self.v_max],
            "calibrated range [g/mol]": [
                float(self.M(self.v_max)),
                float(self.M(self.v_min)),
            ],
            "standards": len(self.Mp),
            "R^2 [-]": self.r_squared,
            "residual SD log10 M [-]": self.residual_std_log,
            "worst residual [%]": worst,
            "AICc [-]": self.aicc,
            "coefficient standard errors (scaled V, lowest first) [-]": list(self.coefficient_stderr),
            "coefficients log10 M vs V [mL], lowest first": list(self.coefficients_mL()[0]),
            "coefficient standard errors log10 M vs V [mL], lowest first": list(self.coefficients_mL()[1]),
            "largest standard error of M inside the range [%]": float(
                100.0 * math.log(10.0) * np.nanmax(self.log_M_stderr(np.linspace(self.v_min, self.v_max, 201)))
            ) if self.covariance else float("nan"),
            "standard polymer": self.standard_polymer,
            "molar-mass scale": self.scale_label(),
            "mark_houwink": self.mark_houwink,
            "standards_table": self.standards_table(),
            "warnings": list(self.warnings),
        }


def universal_transform(
    K_standard: float, a_standard: float, K_sample: float, a_sample: float
) -> tuple[float, float]:
    """Offset and factor of ``log M_x = offset + factor * log M_s`` (Benoit et al. 1967).

    offset = log10(K_s/K_x)/(1 + a_x), factor = (1 + a_s)/(1 + a_x).
    """
    offset = math.log10(K_standard / K_sample) / (1.0 + a_sample)
    factor = (1.0 + a_standard) / (1.0 + a_sample)
    return offset, factor


def universal_log_M(
    M_standard: Any, K_standard: float, a_standard: float, K_sample: float, a_sample: float
) -> np.ndarray:
    """Sample-polymer molar mass [g/mol] at the same V as standard-polymer mass M_standard.

    Examples
    --------
    Polystyrene 1e5 g/mol expressed as PMMA with the pairs of docs/science.md, section 2
    (PS 1.14e-4 dL/g, 0.716; PMMA 9.44e-5 dL/g, 0.719):

    >>> round(float(universal_log_M(1e5, 1.14e-4, 0.716, 9.44e-5, 0.719)))
    109380
    """
    offset, factor = universal_transform(K_standard, a_standard, K_sample, a_sample)
    return np.power(10.0, offset + factor * np.log10(np.asarray(M_standard, dtype=float)))


def mark_houwink_notes(K_standard: float, K_sample: float) -> list[str]:
    """Warnings about Mark-Houwink K values that look like a unit mix-up.

    The method takes K in dL/g; the same K in mL/g is 100 times larger (1 dL/g = 100
    mL/g). Only the ratio K_s/K_x enters the universal calibration (offset
    log10(K_s/K_x)/(1 + a_x), see :func:`universal_transform`), so one K in the wrong unit
    moves every molar mass: with the polystyrene and PMMA pairs of docs/science.md,
    section 2.3, a sample K typed in mL/g turns a PS-equivalent 100 000 g/mol into
    7 507 g/mol [derived]. A K outside :data:`K_PLAUSIBLE_DL_G` or two K more than
    :data:`K_RATIO_LIMIT` apart gets a note.

    Parameters
    ----------
    K_standard, K_sample : float
        Mark-Houwink K of the standard and the sample polymer [dL/g].

    Returns
    -------
    list of str
        One note per concern (empty when both K look like dL/g values).

    Examples
    --------
    >>> mark_houwink_notes(1.14e-4, 9.44e-5)
    []
    >>> len(mark_houwink_notes(1.14e-4, 9.44e-3))
    2
    """
    lo, hi = K_PLAUSIBLE_DL_G
    notes = []
    for key, K in (("K_standard", K_standard), ("K_sample", K_sample)):
        if not lo <= K <= hi:
            if K > hi:
                guess = f"; if it is in mL/g, write {K / 100:.3g} (1 dL/g = 100 mL/g)"
            else:
                guess = "; check its unit and exponent"
            notes.append(
                f"Mark-Houwink {key} = {K:.3g} dL/g lies outside the plausible range "
                f"{lo:g}-{hi:g} dL/g{guess} (mark_houwink.{key}; docs/science.md, section 2.3)")
    ratio = K_standard / K_sample
    if not 1.0 / K_RATIO_LIMIT <= ratio <= K_RATIO_LIMIT:
        notes.append(
            f"Mark-Houwink K_standard = {K_standard:.3g} and K_sample = {K_sample:.3g} differ "
            f"by a factor {max(ratio, 1.0 / ratio):.3g}: is one of them in mL/g? Both must be "
            "in dL/g (a K in mL/g is 100 times its dL/g value, and one K in the wrong unit "
            "shifts every molar mass, e.g. a PS-equivalent 100 000 g/mol read as 7 507; "
            "docs/science.md, section 2.3)")
    return notes


def flow_marker_factor(reference: float, observed: float) -> float:
    """Volume correction factor V_corr = V_obs * reference / observed [-].

    A flow-marker peak observed later than on the calibration day means the pump
    delivered less than nominal; scaling every volume of the injection by
    ``reference / observed`` puts it back on the calibration's volume axis. For
    log M = A - B·V, a relative flow error δ shifts log M by B·V·δ at volume V
    (docs/science.md, section 2, derived).
    """
    for name, value in (("reference", reference), ("observed", observed)):
        if value is None or not (math.isfinite(value) and value > 0):
            raise CalibrationError(
                f"flow-marker {name} position must be a positive volume in mL, got {value!r}"
            )
    return float(reference) / float(observed)


def _fit_poly(V: np.ndarray, y: np.ndarray, order: int):
    center = float((V.max() + V.min()) / 2.0)
    scale = float((V.max() - V.min()) / 2.0) or 1.0
    t = (V - center) / scale
    coef = np.polynomial.polynomial.polyfit(t, y, order)
    fitted = np.polynomial.polynomial.polyval(t, coef)
    resid = y - fitted
    n, p = len(V), order + 1
    rss = float(resid @ resid)
    tss = float(((y - y.mean()) ** 2).sum())
    r2 = 1.0 - rss / tss if tss > 0 else float("nan")
    dof = n - p
    sd = math.sqrt(rss / dof) if dof > 0 else float("nan")
    # Coefficient covariance s^2 (X^T X)^-1 of ordinary least squares (any regression
    # text); NaN when no degrees of freedom are left.
    X = np.polynomial.polynomial.polyvander(t, order)
    xtx_inv = np.linalg.pinv(X.T @ X)
    cov = xtx_inv * (sd * sd) if dof > 0 else np.full((p, p), np.nan)
    # AICc for Gaussian errors: n ln(RSS/n) + 2k + 2k(k+1)/(n-k-1), k = p + 1 (variance).
    k = p + 1
    if n - k - 1 > 0 and rss > 0:
        aicc = n * math.log(rss / n) + 2 * k + 2 * k * (k + 1) / (n - k - 1)
    else:
        aicc = float("nan")
    return coef, center, scale, fitted, r2, sd, aicc, cov


def select_order(volume: Sequence[float], Mp: Sequence[float], orders: Sequence[int] = (1, 2, 3, 4, 5)) -> int:
    """Choose the calibration order by the smallest AICc among orders the data support.

    An order is eligible when there are at least ``order + 4`` standards (AICc needs
    n > k + 1 with k = order + 2 fitted quantities), and its slope is monotonic
    (negative) over the calibrated range. Choosing by R² alone always picks the highest
    order (docs/science.md, section 2: "choose the order by an information criterion").

    For Gaussian residuals in log10 M, AICc = n·ln(RSS/n) + 2k + 2k(k+1)/(n - k - 1)
    with k = order + 2 (coefficients plus the variance) [3]_.

    References
    ----------
    .. [3] C. M. Hurvich, C.-L. Tsai, "Regression and time series model selection in
       small samples", Biometrika 76 (1989) 297.
    """
    V, logM, _ = _clean_standards(volume, Mp, None)
    best, best_aicc = None, math.inf
    for order in orders:
        if len(V) < order + 4:
            continue
        coef, center, scale, _, _, _, aicc, _ = _fit_poly(V, logM, order)
        if not math.isfinite(aicc) or not _monotonic(coef, center, scale, V.min(), V.max()):
            continue
        if aicc < best_aicc - 1e-9:
            best, best_aicc = order, aicc
    if best is None:
        raise CalibrationError(
            f"cannot choose a calibration order automatically from {len(V)} standards: "
            "give at least 5 standards or set calibration.order explicitly"
        )
    return best


def _monotonic(coef, center, scale, v_lo, v_hi) -> bool:
    grid = np.linspace(v_lo, v_hi, 401)
    d = np.polynomial.polynomial.polyval((grid - center) / scale, np.polynomial.polynomial.polyder(coef))
    return bool(np.all(d < 0))


def _clean_standards(volume, Mp, names):
    V = np.asarray(volume, dtype=float).ravel()
    M = np.asarray(Mp, dtype=float).ravel()
    if V.shape != M.shape:
        raise CalibrationError(
            f"standards table: {len(V)} volumes but {len(M)} molar masses; give one of each per standard"
        )
    if names is None:
        names = [f"standard {i + 1}" for i in range(len(V))]
    names = [str(n) for n in names]
    if len(names) != len(V):
        raise CalibrationError("standards table: the number of names differs from the number of standards")
    for i, (v, m) in enumerate(zip(V, M)):
        if not (math.isfinite(v) and v > 0):
            raise CalibrationError(f"standard {names[i]!r}: peak volume must be a positive number in mL, got {float(v)!r}")
        if not (math.isfinite(m) and m > 0):
            raise CalibrationError(f"standard {names[i]!r}: Mp must be a positive number in g/mol, got {float(m)!r}")
    if len(V) < 2:
        raise CalibrationError(f"a calibration needs at least 2 narrow standards, got {len(V)}")
    order_idx = np.argsort(V, kind="stable")
    V, M = V[order_idx], M[order_idx]
    names = [names[i] for i in order_idx]
    if np.any(np.diff(V) == 0):
        dup = V[np.nonzero(np.diff(V) == 0)[0][0]]
        raise CalibrationError(f"two standards have the same peak volume {dup} mL; remove one or correct it")
    return V, np.log10(M), names


def fit_calibration(
    volume: Sequence[float],
    Mp: Sequence[float],
    *,
    order: int | str = 3,
    names: Sequence[str] | None = None,
    standard_polymer: str = "polystyrene",
    sample_polymer: str | None = None,
    residual_limit_pct: float = 5.0,
) -> Calibration:
    r"""Fit log10 Mp of narrow standards against peak elution volume.

    .. math:: \log_{10} M(V) = \sum_{k=0}^{n} c_k \left(\frac{V - V_c}{s}\right)^k

    Parameters
    ----------
    volume : sequence of float
        Peak elution volume of each standard [mL] (order does not matter).
    Mp : sequence of float
        Nominal peak molar mass of each standard [g/mol].
    order : int or "auto"
        Polynomial order 1-5 (default 3), or "auto" to choose by AICc (:func:`select_order`).
    names : sequence of str, optional
        Standard names for the residual table.
    standard_polymer, sample_polymer : str
        What the standards are and what the samples are. Results are absolute only
        when the two are the same polymer (or after :meth:`Calibration.converted`);
        with no sample polymer given they are standard-equivalent (relative).
    residual_limit_pct : float
        Acceptance limit for each standard's residual [%] (common practice: ±5 %).

    Returns
    -------
    Calibration

    Warns
    -----
    CalibrationWarning
        Too few standards for the order (fewer than order + 2), a slope that is not
        negative everywhere inside the calibrated range, or a residual above the limit.

    Raises
    ------
    CalibrationError
        Fewer than order + 1 standards, non-positive values, duplicate volumes.
    """
    V, logM, names = _clean_standards(volume, Mp, names)
    # the nominal Mp as given, in the same (volume) order: 10**log10(Mp) carries float noise
    # (2519999.999999998 for 2,520,000)
    Mp_nominal = np.asarray(Mp, dtype=float).ravel()[np.argsort(np.asarray(volume, dtype=float).ravel(),
                                                                kind="stable")]
    if isinstance(order, str):
        if order.strip().lower() != "auto":
            raise CalibrationError(f"calibration order must be 1-{MAX_ORDER} or 'auto', got {order!r}")
        order = select_order(V, 10.0**logM)
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or not 1 <= order <= MAX_ORDER:
        raise CalibrationError(f"calibration order must be an integer 1-{MAX_ORDER}, got {order!r}")
    order = int(order)
    n = len(V)
    if n < order + 1:
        raise CalibrationError(
            f"a calibration of order {order} needs at least {order + 1} standards "
            f"(better {order + 2} or more), got {n}; lower the order or add standards"
        )
    coef, center, scale, fitted, r2, sd, aicc, cov = _fit_poly(V, logM, order)
    resid_pct = 100.0 * (np.power(10.0, fitted - logM) - 1.0)
    notes: list[str] = []
    if n < order + 2:
        notes.append(
            f"only {n} standards for an order-{order} fit: no degrees of freedom left to judge it; "
            f"use at least {order + 2} (better 8-10 evenly spread)"
        )
    if not _monotonic(coef, center, scale, V.min(), V.max()):
        notes.append(
            "the fitted slope d logM/dV is not negative everywhere inside the calibrated range: "
            "lower the order or check the standards"
        )
    bad = [f"{nm} ({r:+.1f} %)" for nm, r in zip(names, resid_pct) if abs(r) > residual_limit_pct]
    if bad:
        notes.append(f"standards outside ±{residual_limit_pct:g} %: " + ", ".join(bad))
    for note in notes:
        warnings.warn(note, CalibrationWarning, stacklevel=2)
    return Calibration(
        coefficients=tuple(float(c) for c in coef),
        center=center,
        scale=scale,
        v_min=float(V.min()),
        v_max=float(V.max()),
        order=order,
        names=tuple(names),
        Mp=tuple(float(m) for m in Mp_nominal),
        volume=tuple(float(v) for v in V),
        residuals_pct=tuple(float(r) for r in resid_pct),
        r_squared=float(r2),
        residual_std_log=float(sd),
        aicc=float(aicc),
        standard_polymer=standard_polymer,
        sample_polymer=sample_polymer,
        warnings=tuple(notes),
        covariance=tuple(tuple(float(c) for c in row) for row in cov),
    )
