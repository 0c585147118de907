"""Small statistics helpers shared by the transfer fits (private).

Weighted linear least squares through lmfit (so every fit in the package reports the
same diagnostics), Student-t quantiles, and plain-type conversion for ``summary()``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.errors import DataError


def t_quantile(probability: float, dof: int) -> float:
    """Quantile of Student's t distribution (normal quantile when ``dof`` is 0 or less).

    Parameters
    ----------
    probability : float
        Lower-tail probability, e.g. 0.975 for a two-sided 95 % interval [-].
    dof : int
        Degrees of freedom; ``dof <= 0`` means a known-variance case (normal quantile).
    """
    from scipy import stats

    if dof <= 0:
        return float(stats.norm.ppf(probability))
    return float(stats.t.ppf(probability, dof))


def finite_or_none(value: Any) -> Any:
    """A float for JSON, or ``None`` where the value is NaN/inf/None."""
    if value is None:
        return None
    try:
        f = float(value)
    except (TypeError, ValueError):
        return value
    return f if math.isfinite(f) else None


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


def weighted_linear_fit(
    X: np.ndarray,
    y: np.ndarray,
    weights: np.ndarray,
    *,
    scale_covar: bool = True,
) -> LinearFit:
    """Weighted least squares ``y ≈ X @ beta`` solved with lmfit.

    The residual handed to lmfit is ``(X @ beta - y) * weights``; with ``weights = 1/sigma``
    this is the usual chi-square fit. The start values come from a direct linear solve, so
    lmfit's Levenberg–Marquardt step only confirms them and supplies the covariance
    (scaled by the reduced chi-square when ``scale_covar`` is true).

    Parameters
    ----------
    X : numpy.ndarray
        Design matrix, shape (n, p).
    y : numpy.ndarray
        Observations, shape (n,).
    weights : numpy.ndarray
        Multiplicative residual weights (1/sigma), shape (n,).
    scale_covar : bool
        Scale the covariance by the reduced chi-square (uncertainties from the scatter).

    References
    ----------
    Newville et al., LMFIT: non-linear least-squares minimization and curve-fitting for
    Python (Zenodo, 2014), covariance from the Jacobian at the minimum.
    """
    import lmfit

    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    w = np.asarray(weights, dtype=float)
    n, p = X.shape
    Xw = X * w[:, None]
    start, *_ = np.linalg.lstsq(Xw, y * w, rcond=None)
    params = lmfit.Parameters()
    names = [f"b{j}" for j in range(p)]
    for name, value in zip(names, start, strict=True):
        step = max(abs(float(value)), 1e-12)
        params.add(name, value=float(value) + 1e-3 * step)

    def residual(pars: Any) -> np.ndarray:
        beta = np.array([pars[name].value for name in names])
        return (X @ beta - y) * w

    minimizer = lmfit.Minimizer(residual, params, scale_covar=scale_covar)
    result = minimizer.minimize(method="leastsq")
    beta = np.array([result.params[name].value for name in names])
    dof = n - p
    chisqr = float(np.sum(((X @ beta - y) * w) ** 2))
    redchi = chisqr / dof if dof > 0 else float("nan")
    # The covariance of a linear model follows exactly from the weighted normal equations;
    # lmfit's numerical one agrees to rounding (checked in the tests) and is used when present.
    covar = result.covar
    if covar is None or not np.all(np.isfinite(covar)):
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
        covariance=np.asarray(covar, dtype=float),
        fitted=X @ beta,
        chisqr=chisqr,
        redchi=redchi,
        dof=dof,
        success=bool(result.success),
        message=str(result.message),
    )


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
