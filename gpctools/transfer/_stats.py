"""Small statistics helpers shared by the transfer fits (private).

Weighted linear least squares solved directly, a damped Gauss–Newton for the nonlinear
(drift, mixed-termination) models, Student-t quantiles through ``scipy.special`` (cheap
to import), the Welch–Satterthwaite degrees of freedom, and plain-type conversion for
``summary()``. No lmfit: a weighted linear fit needs no iterative minimiser, and the
few-parameter nonlinear fits here converge in a handful of Gauss–Newton steps.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.errors import DataError


def t_quantile(probability: float, dof: float) -> float:
    """Quantile of Student's t distribution (normal quantile when ``dof`` is 0 or less, or inf).

    Parameters
    ----------
    probability : float
        Lower-tail probability, e.g. 0.975 for a two-sided 95 % interval [-].
    dof : float
        Degrees of freedom (may be fractional, e.g. Welch–Satterthwaite); ``dof <= 0`` or
        infinite means a known-variance case (normal quantile).

    References
    ----------
    scipy.special.stdtrit / ndtri (the t and normal inverse distribution functions).
    """
    from scipy import special

    if not (dof > 0) or not math.isfinite(dof):
        return float(special.ndtri(probability))
    return float(special.stdtrit(dof, probability))


def t_upper(alpha: float, dof: float) -> float:
    """One-sided upper critical value: P(T > value) = ``alpha`` [-] (normal for dof <= 0)."""
    return t_quantile(1.0 - alpha, dof)


def t_sf(t: float, dof: float) -> float:
    """One-sided p-value P(T > t) of Student's t (normal for dof <= 0 or inf) [-]."""
    from scipy import special

    if not math.isfinite(t):
        return float("nan")
    if not (dof > 0) or not math.isfinite(dof):
        return float(special.ndtr(-t))
    return float(special.stdtr(dof, -t))


def welch_dof(parts: Sequence[tuple[float, float]]) -> float:
    """Welch–Satterthwaite effective degrees of freedom of a sum of variance parts.

    ν_eff = (Σ u_k²)² / Σ (u_k⁴/ν_k) for standard uncertainties u_k with ν_k degrees of
    freedom (ν_k <= 0 or inf: known, contributes nothing to the denominator).

    Parameters
    ----------
    parts : sequence of (u, dof)
        Standard uncertainty [unit] and its degrees of freedom.

    Returns
    -------
    float
        inf when every part is known.

    References
    ----------
    JCGM 100:2008 (GUM), G.4.1 (Welch–Satterthwaite formula).
    """
    num = sum(u * u for u, _ in parts) ** 2
    den = sum(u**4 / d for u, d in parts if d > 0 and math.isfinite(d) and u > 0)
    return float(num / den) if den > 0 else float("inf")




@dataclass(frozen=True)
class LinearFit:
    """Result of :func:`weighted_linear_fit` (private shape)."""

    beta: np.ndarray
    covariance: np.ndarray
    fitted: np.ndarray
    chisqr: float
    redchi: float
    dof: int
    success: bool
    message: str
    #: (X'W²X)⁻¹, the unscaled covariance [-]
    unscaled: np.ndarray | None = None


def weighted_linear_fit(
    X: np.ndarray,
    y: np.ndarray,
    weights: np.ndarray,
    *,
    scale_covar: bool = True,
) -> LinearFit:
    """Weighted least squares ``y ≈ X @ beta``, solved directly (QR via numpy.linalg.lstsq).

    The weighted residual is ``(X @ beta - y) * weights``; with ``weights = 1/sigma`` this
    is the usual chi-square fit. The covariance is (XᵀW²X)⁻¹, times the reduced
    chi-square when ``scale_covar`` is true (uncertainties from the scatter).

    Parameters
    ----------
    X : numpy.ndarray
        Design matrix, shape (n, p).
    y : numpy.ndarray
        Observations, shape (n,).
    weights : numpy.ndarray
        Multiplicative residual weights (1/sigma), shape (n,).
    scale_covar : bool
        Scale the covariance by the reduced chi-square.

    Raises
    ------
    DataError
        When the design is singular (a fitted term does not vary).

    References
    ----------
    Draper and Smith, Applied Regression Analysis, 3rd ed. (Wiley, 1998), weighted least
    squares and the covariance of its coefficients.
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.asarray(weights, dtype=float)
    n, p = X.shape
    Xw = X * w[:, None]
    beta, *_ = np.linalg.lstsq(Xw, y * w, rcond=None)
    dof = n - p
    resid = (X @ beta - y) * w
    chisqr = float(resid @ resid)
    redchi = chisqr / dof if dof > 0 else float("nan")
    try:
        inv = np.linalg.inv(Xw.T @ Xw)
    except np.linalg.LinAlgError as exc:
        raise DataError(
            "the fit's covariance cannot be computed (singular design); "
            "check that every fitted term varies over the runs"
        ) from exc
    covar = inv * (redchi if (scale_covar and dof > 0) else 1.0)
    return LinearFit(
        beta=beta,
        covariance=covar,
        fitted=X @ beta,
        chisqr=chisqr,
        redchi=redchi,
        dof=dof,
        success=bool(np.all(np.isfinite(beta))),
        message="direct weighted least squares",
        unscaled=inv,
    )


@dataclass(frozen=True)
class NonlinearFit:
    """Result of :func:`gauss_newton` (private shape)."""

    theta: np.ndarray
    jacobian: np.ndarray
    fitted: np.ndarray
    unscaled: np.ndarray
    chisqr: float
    dof: int
    iterations: int
    success: bool
    message: str


def gauss_newton(
    model: Callable[[np.ndarray], np.ndarray],
    jacobian: Callable[[np.ndarray], np.ndarray],
    y: np.ndarray,
    weights: np.ndarray,
    theta0: np.ndarray,
    *,
    lower: np.ndarray | None = None,
    max_iter: int = 60,
    rtol: float = 1e-10,
) -> NonlinearFit:
    """Weighted least squares for a smooth model: damped Gauss–Newton (Levenberg–Marquardt).

    Minimises Σ ((model(θ) − y)·w)² from ``theta0``; each step solves
    (JᵀW²J + μ diag(JᵀW²J)) Δ = −JᵀW² r, with μ raised when a step does not lower the sum
    and lowered when it does; parameters below ``lower`` are held at it. Stops when the
    relative change of the sum and of every parameter is below ``rtol``.

    Parameters
    ----------
    model : callable
        θ -> predictions, shape (n,).
    jacobian : callable
        θ -> d predictions/d θ, shape (n, p) (analytic or by finite differences).
    y, weights : numpy.ndarray
        Observations and residual weights 1/σ, shape (n,).
    theta0 : numpy.ndarray
        Start values, shape (p,).
    lower : numpy.ndarray, optional
        Lower bounds (−inf for none).
    max_iter : int
    rtol : float

    Returns
    -------
    NonlinearFit
        ``unscaled`` is (JᵀW²J)⁻¹ at the solution (multiply by the reduced chi-square for
        uncertainties from the scatter).

    References
    ----------
    Levenberg, Q. Appl. Math. 1944; Marquardt, J. SIAM 1963 (damped Gauss–Newton);
    Draper and Smith 1998 (covariance of a nonlinear least-squares fit, linearised).
    """
    th = np.asarray(theta0, dtype=float).copy()
    lo = np.full(th.size, -np.inf) if lower is None else np.asarray(lower, dtype=float)
    th = np.maximum(th, lo)
    w2 = np.asarray(weights, dtype=float) ** 2

    def cost(t: np.ndarray) -> tuple[float, np.ndarray]:
        m = model(t)
        r = m - y
        return float(np.sum(w2 * r * r)), m

    f0, m0 = cost(th)
    mu = 1e-3
    it = 0
    ok = np.isfinite(f0)
    msg = "converged"
    for _ in range(max_iter):
        it += 1
        J = jacobian(th)
        A = J.T @ (J * w2[:, None])
        g = J.T @ (w2 * (m0 - y))
        improved = False
        for _ in range(30):
            D = A + mu * np.diag(np.maximum(np.diag(A), 1e-300))
            try:
                step = -np.linalg.solve(D, g)
            except np.linalg.LinAlgError:
                mu *= 10.0
                continue
            trial = np.maximum(th + step, lo)
            f1, m1 = cost(trial)
            if np.isfinite(f1) and f1 <= f0:
                improved = True
                break
            mu *= 10.0
        if not improved:
            msg = "no further decrease of the sum of squares"
            break
        dth = np.abs(trial - th) <= rtol * np.maximum(np.abs(trial), 1e-300) + 1e-300
        dsum = abs(f0 - f1) <= rtol * max(f0, 1e-300)
        th, f0, m0 = trial, f1, m1
        mu = max(mu / 10.0, 1e-12)
        if dsum and bool(np.all(dth)):
            break
    else:
        msg = f"stopped after {max_iter} iterations"
    J = jacobian(th)
    A = J.T @ (J * w2[:, None])
    try:
        unscaled = np.linalg.inv(A)
    except np.linalg.LinAlgError:
        unscaled = np.full(A.shape, np.nan)
        ok = False
    return NonlinearFit(theta=th, jacobian=J, fitted=m0, unscaled=unscaled, chisqr=f0,
                        dof=y.size - th.size, iterations=it, success=bool(ok),
                        message=msg)


def numeric_jacobian(model: Callable[[np.ndarray], np.ndarray],
                     theta: np.ndarray, *, rel_step: float = 1e-6,
                     scale: np.ndarray | None = None) -> np.ndarray:
    """Forward-difference Jacobian d model/d θ, shape (n, p).

    The step of parameter j is ``rel_step`` times max(|θ_j|, ``scale[j]``) so that a
    parameter at zero still gets a step of its natural size.
    """
    th = np.asarray(theta, dtype=float)
    base = model(th)
    J = np.empty((base.size, th.size))
    for j in range(th.size):
        ref = abs(th[j]) if scale is None else max(abs(th[j]), float(scale[j]))
        h = rel_step * (ref if ref > 0 else 1.0)
        t2 = th.copy()
        t2[j] += h
        J[:, j] = (model(t2) - base) / h
    return J


def ols_with_cov(x: np.ndarray, y: np.ndarray, degree: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Unweighted polynomial least squares, coefficients highest power first, and covariance.

    The covariance is scaled by the residual variance (``n - degree - 1`` degrees of freedom).
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    V = np.vander(x, degree + 1)
    coef, *_ = np.linalg.lstsq(V, y, rcond=None)
    resid = y - V @ coef
    dof = len(x) - degree - 1
    s2 = float(resid @ resid) / dof if dof > 0 else float("nan")
    cov = np.linalg.pinv(V.T @ V) * s2
    return coef, cov


def as_str_tuple(values: Sequence[Any]) -> tuple[str, ...]:
    """Tuple of ``str`` (for run ids)."""
    return tuple(str(v) for v in values)


class FittedConstants:
    """Shared accessors of fit results that hold ``constants``, ``terms``, ``y`` and ``fitted``.

    Mixed into the frozen result dataclasses (:class:`~gpctools.transfer.mayo.MayoFit`,
    :class:`~gpctools.transfer.drift.DriftFit`); it adds methods only, no fields.
    """

    def constant(self, name: str):
        """The fitted constant called ``name`` (``"C_A"``, ``"C_A:thiol"``, ...)."""
        for c in self.constants:  # type: ignore[attr-defined]
            if c.name == name:
                return c
        raise KeyError(f"no fitted constant {name!r}; fitted: {', '.join(self.terms)}")  # type: ignore[attr-defined]

    @property
    def residuals(self) -> np.ndarray:
        """Relative residuals (y - fitted)/fitted per run [-]."""
        return (self.y - self.fitted) / self.fitted  # type: ignore[attr-defined]
