"""Weighted fit of a :class:`~gpctools.transfer.model.SeriesModel` with both parts of the
uncertainty (private).

The statistical part comes from the scatter of the runs about the model (covariance
(JᵀW²J)⁻¹ scaled by the reduced chi-square, Student t with n − p degrees of freedom), or
from known uncertainties of y (unscaled, normal quantile). The calibration part is common
to every run of the series: with Cov_cal(y) the covariance of the observations caused by
the calibration's coefficient covariance, the constants move by
B·δy with B = (JᵀW²J)⁻¹JᵀW², so Cov_cal(θ) = B Cov_cal(y) Bᵀ (first order, GUM). The two
are combined in quadrature with Welch–Satterthwaite degrees of freedom.

References
----------
Draper and Smith, Applied Regression Analysis, 3rd ed., 1998 (weighted least squares);
JCGM 100:2008 (GUM), sections 5.1 and G.4 (propagation, effective degrees of freedom);
docs/science.md, sections 3.5, 11.4 and 11.5.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from gpctools.chainlength import apparent_constant, term_kind
from gpctools.errors import DataError
from gpctools.transfer._stats import (
    NonlinearFit,
    gauss_newton,
    t_quantile,
    weighted_linear_fit,
    welch_dof,
)
from gpctools.transfer.model import SeriesModel

__all__ = ["Solution", "solve", "interval_parts"]


@dataclass(frozen=True)
class Solution:
    """A fitted :class:`SeriesModel` (private shape).

    ``cov_stat`` and ``cov_cal`` are the statistical and calibration covariances of θ;
    ``dof`` the residual degrees of freedom (0 with known σ), ``dof_cal`` those of the
    calibration fit (inf when there is none or it is exact).
    """

    model: SeriesModel
    theta: np.ndarray
    y: np.ndarray
    fitted: np.ndarray
    weights: np.ndarray
    jacobian: np.ndarray
    unscaled: np.ndarray
    cov_stat: np.ndarray
    cov_cal: np.ndarray
    dof: int
    dof_cal: float
    redchi: float
    known_sigma: bool
    success: bool
    message: str

    @property
    def cov(self) -> np.ndarray:
        """Combined covariance of θ [-]."""
        return self.cov_stat + self.cov_cal

    def parts(self, j: int) -> tuple[float, float, float, float]:
        """(statistical SE, calibration SE, combined SE, effective dof) of θ_j."""
        return interval_parts(float(self.cov_stat[j, j]), float(self.cov_cal[j, j]),
                              0 if self.known_sigma else self.dof, self.dof_cal)

    def quantile(self, j: int, confidence: float) -> float:
        """Two-sided quantile of the interval of θ_j (t with effective dof, or normal)."""
        return t_quantile(0.5 + confidence / 2, self.parts(j)[3])

    def gradient_parts(self, g: np.ndarray) -> tuple[float, float, float, float]:
        """Like :meth:`parts` for the linear combination g·θ."""
        return interval_parts(float(g @ self.cov_stat @ g), float(g @ self.cov_cal @ g),
                              0 if self.known_sigma else self.dof, self.dof_cal)


def interval_parts(var_stat: float, var_cal: float, dof: float,
                   dof_cal: float) -> tuple[float, float, float, float]:
    """(statistical SE, calibration SE, combined SE, Welch–Satterthwaite dof)."""
    s = math.sqrt(max(var_stat, 0.0))
    c = math.sqrt(max(var_cal, 0.0))
    tot = math.hypot(s, c)
    nu = welch_dof([(s, dof if dof > 0 else math.inf), (c, dof_cal)])
    return s, c, tot, nu


def _start(model: SeriesModel, y: np.ndarray) -> np.ndarray:
    """Start values: a linear fit of y on the instantaneous design, then each consumed
    constant corrected for drift by inverting C_app = (1 − (1 − x)^C)/x at the mean x.
    """
    X = model.linear_design()
    target = y - (model.intercept or 0.0)
    if model.kinetic_known is not None:
        target = target - model.kinetic_known
    lin = weighted_linear_fit(X, target, 1.0 / y, scale_covar=False)
    th = np.array(lin.beta, dtype=float)
    if model.conversion is not None:
        xbar = float(np.mean(model.conversion))
        off = len(model.names) - len(model.terms)
        for j, t in enumerate(model.terms):
            if term_kind(t) == "consumed":
                th[off + j] = _invert_capp(float(th[off + j]), xbar)
    return np.maximum(th, np.where(np.isfinite(model.lower), model.lower + 1e-9, -np.inf))


def _invert_capp(c_app: float, x: float) -> float:
    """C with (1 − (1 − x)^C)/x = c_app, by bisection on log C (start value only)."""
    if not (math.isfinite(c_app) and c_app > 0):
        return 1.0
    if c_app >= 0.999 / x:
        return 200.0
    lo, hi = 1e-9, 1.0
    while float(apparent_constant(hi, x)) < c_app and hi < 1e4:
        hi *= 2.0
    for _ in range(60):
        mid = math.sqrt(lo * hi)
        if float(apparent_constant(mid, x)) < c_app:
            lo = mid
        else:
            hi = mid
    return math.sqrt(lo * hi)


def _minimise(model: SeriesModel, y: np.ndarray, w: np.ndarray, th0: np.ndarray) -> NonlinearFit:
    """Weighted least squares: one direct solve for a linear model, else Gauss–Newton."""
    if not model.is_linear:
        return gauss_newton(model.predict, model.jacobian, y, w, th0, lower=model.lower)
    offset = model.predict(np.zeros(len(model.names)))
    fit = linear_solve(model.linear_design(), y - offset, w)
    return replace(fit, fitted=fit.fitted + offset)


def linear_solve(X: np.ndarray, target: np.ndarray, w: np.ndarray) -> NonlinearFit:
    """Direct weighted least squares X θ ≈ target in the shape of a Gauss–Newton result."""
    lin = weighted_linear_fit(X, target, w, scale_covar=False)
    return NonlinearFit(theta=lin.beta, jacobian=X, fitted=lin.fitted, unscaled=lin.covariance,
                        chisqr=lin.chisqr, dof=lin.dof, iterations=1, success=lin.success,
                        message=lin.message)


def solve(
    model: SeriesModel,
    y: Sequence[float] | np.ndarray,
    *,
    weights: str = "relative",
    sigma: np.ndarray | None = None,
    cal_cov_y: np.ndarray | None = None,
    dof_cal: float = math.inf,
    theta0: np.ndarray | None = None,
) -> Solution:
    """Fit ``model`` to the observations ``y`` by weighted least squares.

    Parameters
    ----------
    model : SeriesModel
    y : array-like
        The estimator's observable per run [-] (M0/Mn, 2 M0/Mw or Λ).
    weights : {"relative", "equal"}
        ``"relative"``: constant relative error, weights 1/ŷ (first pass 1/y);
        ``"equal"``: ordinary least squares.
    sigma : numpy.ndarray, optional
        Known absolute standard uncertainties of y [-]: weights 1/σ, the covariance is
        not scaled, intervals use the normal quantile.
    cal_cov_y : numpy.ndarray, optional
        Covariance of y caused by the calibration, shape (n, n) [-].
    dof_cal : float
        Degrees of freedom of the calibration fit.
    theta0 : numpy.ndarray, optional
        Start values (default: :func:`_start`).
    """
    yv = np.asarray(y, dtype=float).ravel()
    if yv.size != model.n:
        raise DataError(f"{yv.size} observations for {model.n} runs")
    th0 = _start(model, yv) if theta0 is None else np.asarray(theta0, dtype=float)
    if sigma is not None:
        w = 1.0 / np.asarray(sigma, dtype=float)
        passes = [w]
    elif weights == "equal":
        passes = [np.ones(yv.size)]
    elif weights == "relative":
        passes = [1.0 / yv]
    else:
        raise DataError(f"weights must be 'relative' or 'equal', not {weights!r}", key="weights")
    fit = _minimise(model, yv, passes[0], th0)
    w = passes[0]
    if sigma is None and weights == "relative" and np.all(fit.fitted > 0):
        w = 1.0 / fit.fitted
        fit = _minimise(model, yv, w, fit.theta)
    dof = yv.size - fit.theta.size
    chisq = float(np.sum(((fit.fitted - yv) * w) ** 2))
    redchi = chisq / dof if dof > 0 else float("nan")
    known = sigma is not None
    cov_stat = fit.unscaled * (1.0 if known else (redchi if dof > 0 else float("nan")))
    if cal_cov_y is not None:
        B = fit.unscaled @ (fit.jacobian * (w * w)[:, None]).T
        cov_cal = B @ cal_cov_y @ B.T
    else:
        cov_cal = np.zeros_like(cov_stat)
    return Solution(model=model, theta=fit.theta, y=yv, fitted=fit.fitted, weights=w,
                    jacobian=fit.jacobian, unscaled=fit.unscaled, cov_stat=cov_stat,
                    cov_cal=cov_cal, dof=dof, dof_cal=dof_cal, redchi=redchi,
                    known_sigma=known, success=fit.success, message=fit.message)
