"""Temperature dependence of a transfer constant: ln C against 1/T.

C = k_tr/k_p = (A_tr/A_p) exp(−(E_tr − E_p)/RT), so ln C = ln(A_tr/A_p) − ΔE/(R T) with
ΔE = E_tr − E_p. A weighted straight line of ln C against 1/T gives ΔE [kJ/mol] and the
pre-exponential ratio A_tr/A_p [-].

References
----------
docs/science.md, section 6. Arrhenius form of both rate coefficients (IUPAC Gold Book,
"Arrhenius equation"). Hutchinson, Paquet, McMinn, Macromolecules 1995 (ΔE ≈ 0 for some
thiol/methacrylate pairs over 20–80 °C).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError, DesignError
from gpctools.sheets.cells import finite_or_none
from gpctools.transfer._stats import t_quantile, weighted_linear_fit
from gpctools.transfer.mayo import FittedValue

#: Molar gas constant [J/mol/K] (CODATA 2018, exact; the value of gpctools.refdata.R_GAS,
#: repeated so that the fits do not import the reference tables and pandas).
R_GAS = 8.314462618

__all__ = ["ArrheniusFit", "fit_arrhenius", "R_GAS"]


@dataclass(frozen=True, repr=False)
class ArrheniusFit(Display):
    """ln C against 1/T.

    Attributes
    ----------
    name : str
        The constant (e.g. ``"C_A"``).
    delta_E : FittedValue
        E_tr − E_p [kJ/mol].
    ln_A_ratio : FittedValue
        ln(A_tr/A_p) [-].
    A_ratio : FittedValue
        A_tr/A_p [-]; standard error A·se(ln A), interval exp of the ln interval.
    correlation : float
        Correlation of the two fitted parameters [-].
    T : numpy.ndarray
        Temperatures [K].
    C, C_stderr : numpy.ndarray
        Constants and their standard errors [-].
    fitted : numpy.ndarray
        Model C at each T [-].
    dof : int
        Degrees of freedom n - 2.
    redchi : float
        Reduced chi-square [-].
    weighted : bool
        True when the C standard errors were used as weights.
    confidence : float
        Level of the intervals [-].
    warnings : tuple of str
    interval_basis : str
        Which distribution the intervals use, and why (known errors: normal quantile,
        unscaled covariance; scatter above the errors or no errors: Student t on the
        scaled covariance).
    """

    name: str
    delta_E: FittedValue
    ln_A_ratio: FittedValue
    A_ratio: FittedValue
    correlation: float
    T: np.ndarray
    C: np.ndarray
    C_stderr: np.ndarray
    fitted: np.ndarray
    dof: int
    redchi: float
    weighted: bool
    confidence: float
    warnings: tuple[str, ...] = ()
    interval_basis: str = ""

    def predict(self, T_K: Any) -> np.ndarray:
        """Model C at temperature(s) ``T_K`` [K] [-]."""
        T = np.asarray(T_K, dtype=float)
        return np.exp(self.ln_A_ratio.value - self.delta_E.value * 1e3 / (R_GAS * T))

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "name": self.name,
            "E_tr - E_p [kJ/mol]": self.delta_E.summary(),
            "ln(A_tr/A_p) [-]": self.ln_A_ratio.summary(),
            "A_tr/A_p [-]": self.A_ratio.summary(),
            "correlation [-]": finite_or_none(self.correlation),
            "T [K]": [float(v) for v in self.T],
            "C [-]": [float(v) for v in self.C],
            "C standard error [-]": [finite_or_none(v) for v in self.C_stderr],
            "degrees of freedom": self.dof,
            "reduced chi-square": finite_or_none(self.redchi),
            "weighted": self.weighted,
            "interval": self.interval_basis,
            "warnings": list(self.warnings),
        }


def fit_arrhenius(
    T_K: Sequence[float] | np.ndarray,
    C: Sequence[float] | np.ndarray,
    C_stderr: Sequence[float] | np.ndarray | None = None,
    *,
    name: str = "C_A",
    confidence: float = 0.95,
) -> ArrheniusFit:
    """Fit ln C = ln(A_tr/A_p) − ΔE/(R T) by weighted least squares.

    Parameters
    ----------
    T_K : array-like
        Temperatures [K] (at least two distinct).
    C : array-like
        Transfer constants [-] (positive).
    C_stderr : array-like, optional
        Standard errors of C [-]; weights 1/u(ln C) = C/se(C). With these known errors the
        intervals use the normal quantile and the unscaled covariance; when the points
        scatter more than the errors say (reduced chi-square > 1) the covariance is scaled
        by it (the Birge ratio) and Student t with n − 2 dof is used. Without them the fit
        is unweighted and the uncertainties come from the scatter (needs 3 temperatures).
    name : str
        Name of the constant for labels.
    confidence : float
        Two-sided interval level [-].

    Returns
    -------
    ArrheniusFit

    References
    ----------
    docs/science.md, section 6. Birge, Phys. Rev. 1932 (scaling by the Birge ratio).
    """
    T = np.asarray(T_K, dtype=float).ravel()
    Cv = np.asarray(C, dtype=float).ravel()
    if T.size != Cv.size:
        raise DataError(f"{name}: {T.size} temperatures for {Cv.size} constants")
    if np.any(~np.isfinite(Cv)) or np.any(Cv <= 0):
        raise DataError(f"{name}: every constant must be positive for ln C against 1/T")
    if np.any(~np.isfinite(T)) or np.any(T <= 0):
        raise DataError(f"{name}: temperatures must be positive kelvin")
    distinct = np.unique(np.round(T, 3)).size
    if distinct < 2:
        raise DesignError(f"{name}: ln C against 1/T needs at least 2 distinct temperatures "
                          f"(got {distinct})")
    x = 1.0 / T
    X = np.column_stack([np.ones_like(x), x])
    y = np.log(Cv)
    warns: list[str] = []
    if C_stderr is not None:
        se = np.asarray(C_stderr, dtype=float).ravel()
        ok = np.isfinite(se) & (se > 0)
    else:
        se = np.full(Cv.size, np.nan)
        ok = np.zeros(Cv.size, dtype=bool)
    weighted = bool(np.all(ok))
    if weighted:
        w = Cv / se
        fit = weighted_linear_fit(X, y, w, scale_covar=False)
        if fit.dof > 0 and fit.redchi > 1.0:
            # the points scatter more than their errors say: scale by the reduced chi-square
            # (Birge) and use Student t with n − 2 dof (docs/science.md, section 11.4)
            cov = fit.covariance * fit.redchi
            dof_q = fit.dof
            basis = (f"Student t ({fit.dof} dof) on the covariance scaled by the reduced "
                     f"chi-square {fit.redchi:.3g} (scatter above the stated errors)")
        else:
            # errors known from the fits of C: unscaled covariance, normal quantile
            cov = fit.covariance
            dof_q = 0
            basis = "normal quantile on the unscaled covariance (errors of C known)"
    else:
        if T.size < 3:
            raise DesignError(f"{name}: without standard errors of C, ln C against 1/T needs at "
                              "least 3 temperatures to estimate uncertainties")
        fit = weighted_linear_fit(X, y, np.ones_like(y), scale_covar=True)
        cov = fit.covariance
        dof_q = fit.dof
        basis = f"Student t ({fit.dof} dof) on the covariance from the scatter (no errors of C)"
    q = t_quantile(0.5 + confidence / 2, dof_q)
    b0, b1 = fit.beta
    s0, s1 = np.sqrt(np.maximum(np.diag(cov), 0.0))
    dE = -b1 * R_GAS / 1e3
    sdE = s1 * R_GAS / 1e3
    delta_E = FittedValue("E_tr - E_p", float(dE), float(sdE), float(dE - q * sdE),
                          float(dE + q * sdE), confidence=confidence, unit="kJ/mol")
    lnA = FittedValue("ln(A_tr/A_p)", float(b0), float(s0), float(b0 - q * s0),
                      float(b0 + q * s0), confidence=confidence)
    A = FittedValue("A_tr/A_p", float(math.exp(b0)), float(math.exp(b0) * s0),
                    float(math.exp(b0 - q * s0)), float(math.exp(b0 + q * s0)),
                    confidence=confidence)
    corr = float(cov[0, 1] / (s0 * s1)) if s0 > 0 and s1 > 0 else float("nan")
    span = T.max() - T.min()
    if span < 15:
        warns.append(f"{name}: the temperatures span only {span:.0f} K; E_tr − E_p is poorly "
                     "determined (common practice: 30 K or more)")
    return ArrheniusFit(
        name=name,
        delta_E=delta_E,
        ln_A_ratio=lnA,
        A_ratio=A,
        correlation=corr,
        T=T,
        C=Cv,
        C_stderr=se,
        fitted=np.exp(X @ fit.beta),
        dof=fit.dof,
        redchi=fit.redchi,
        weighted=weighted,
        confidence=confidence,
        warnings=tuple(warns),
        interval_basis=basis,
    )
