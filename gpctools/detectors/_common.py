"""Small helpers shared by the detector modules (private).

Array checks that raise :class:`~gpctools.errors.DataError` with the quantity's name,
plain-type conversion for ``summary()``, an estimate-with-uncertainty record, an
ordinary least-squares fit with its covariance, and the physical constants used by
more than one module.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError, GpcWarning
from gpctools.sheets.cells import finite_or_none

#: Avogadro constant [1/mol] (SI 2019 exact value, CODATA).
N_A = 6.02214076e23
LN10 = math.log(10.0)
#: mL per dL: intrinsic viscosities are carried in dL/g (the project's Mark-Houwink unit),
#: while slice concentrations are in g/mL, so η_sp/c comes out in mL/g.
ML_PER_DL = 100.0




def json_list(values: Any) -> list[Any]:
    """A 1-D array as a JSON-safe list (NaN/inf become ``None``)."""
    return [finite_or_none(v) for v in np.asarray(values, dtype=float).ravel()]


def as_array(values: Any, name: str, *, ndim: int | None = 1, finite: bool = True) -> np.ndarray:
    """A float64 copy of ``values``, checked for dimension and finiteness.

    Parameters
    ----------
    values : array_like
        Input numbers (list, tuple, numpy array, pandas Series).
    name : str
        Name of the quantity for the error message, e.g. ``"RI signal"``.
    ndim : int or None
        Required number of dimensions (None: any).
    finite : bool
        Refuse NaN and infinities.
    """
    try:
        arr = np.array(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DataError(f"{name}: values must be numbers ({exc})") from None
    if ndim is not None and arr.ndim != ndim:
        raise DataError(f"{name}: expected a {ndim}-D array of numbers, got shape {arr.shape}")
    if finite and not np.all(np.isfinite(arr)):
        raise DataError(f"{name}: contains missing or non-finite values (fill or remove those slices)")
    return arr


def positive(value: Any, name: str, *, allow_zero: bool = False) -> float:
    """``value`` as a finite float, refused unless positive (or zero when allowed)."""
    if isinstance(value, bool):
        raise DataError(f"{name} must be a number, got {value!r}")
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise DataError(f"{name} must be a number, got {value!r}") from None
    if not math.isfinite(v) or v < 0 or (v == 0 and not allow_zero):
        need = "zero or positive" if allow_zero else "positive"
        raise DataError(f"{name} must be a finite {need} number, got {value!r}")
    return v


def warn_all(messages: Sequence[str], category: type[GpcWarning]) -> None:
    """Issue each message as a warning of ``category`` (results also keep them)."""
    for msg in messages:
        warnings.warn(msg, category, stacklevel=3)


@dataclass(frozen=True, repr=False)
class Estimate(Display):
    """A derived number with its standard uncertainty.

    Attributes
    ----------
    value : float
        Best estimate [unit].
    stderr : float
        Standard uncertainty [unit]; NaN when none can be given.
    unit : str
        Unit of both ("-" for dimensionless).
    """

    value: float
    stderr: float = float("nan")
    unit: str = "-"

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "value": finite_or_none(self.value),
            "standard error": finite_or_none(self.stderr),
            "unit": self.unit,
        }


@dataclass(frozen=True)
class LineFit:
    """Ordinary least-squares polynomial y = Σ b_k x^k with its covariance (private shape).

    ``coef`` is in increasing power (b0, b1, ...); ``covariance`` is scaled by the residual
    variance and, when ``autocorrelation_inflation`` is applied, by the AR(1) factor
    (1 + ρ)/(1 − ρ) of the residuals (common practice for serially correlated slice data,
    whose ordinary standard errors are too small).
    """

    coef: np.ndarray
    covariance: np.ndarray
    residual_sd: float
    n: int
    rho: float

    def stderr(self, k: int) -> float:
        return float(math.sqrt(max(float(self.covariance[k, k]), 0.0)))

    def __call__(self, x: Any) -> np.ndarray:
        return np.polynomial.polynomial.polyval(np.asarray(x, dtype=float), self.coef)


def polyfit(x: np.ndarray, y: np.ndarray, order: int, *, inflate: bool = True,
            what: str = "fit") -> LineFit:
    """Least-squares polynomial of ``order`` with a covariance matrix.

    The covariance is s²(XᵀX)⁻¹ with s² the residual variance on n − order − 1 degrees
    of freedom; with ``inflate`` the lag-1 autocorrelation ρ of the residuals (in x
    order) widens it by (1 + ρ)/(1 − ρ) when ρ > 0.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = x.size
    if n < order + 2:
        raise DataError(f"{what}: {n} points are too few for an order-{order} fit (need {order + 2})")
    X = np.vander(x, order + 1, increasing=True)
    coef, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ coef
    dof = n - order - 1
    s2 = float(resid @ resid) / dof
    try:
        cov = s2 * np.linalg.inv(X.T @ X)
    except np.linalg.LinAlgError:
        raise DataError(f"{what}: the points do not determine the fit (all at the same x?)") from None
    rho = 0.0
    if n > 3:
        idx = np.argsort(x)
        r = resid[idx]
        denom = float(r @ r)
        if denom > 0:
            rho = float(r[1:] @ r[:-1]) / denom
    if inflate and 0.0 < rho < 1.0:
        cov = cov * (1.0 + rho) / (1.0 - rho)
    return LineFit(coef=coef, covariance=cov, residual_sd=math.sqrt(s2), n=n, rho=rho)
