"""The full Mayo model, fitted by weighted least squares, with a design check.

.. math::

    \\frac{1}{DP_n} = \\frac{1}{DP_{n0}} + C_M + C_S\\frac{[S]}{[M]} + C_I\\frac{[I]}{[M]}
    + \\sum_j C_{A,j}\\frac{[A_j]}{[M]}

The user chooses the terms. Term names are the constants' names: ``"C_A"`` (the single
agent), ``"C_A:<agent>"`` (one of several agents varied in the same design), ``"C_S"``,
``"C_I"`` and ``"C_M"``. Each term has a column of the design: the ratio [X]/[M] of its
runs (``C_M``: a column of ones, which only a fixed intercept lets one fit).

Errors in Mn scale with Mn, so 1/DPn has a roughly constant *relative* error; the default
weights are 1/(relative error * 1/DPn), the relative error being estimated from the scatter.

References
----------
Mayo, F. R., J. Am. Chem. Soc. 1943: the Mayo equation (dead chains per monomer consumed).
SCIENCE.md section 3: weighting for constant relative error of 1/DPn.
"""

from __future__ import annotations

import warnings as _warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.errors import DataError, DesignError, EstimatorWarning
from gpctools.transfer._stats import (
    FittedConstants,
    as_str_tuple,
    finite_or_none,
    t_quantile,
    weighted_linear_fit,
)

__all__ = [
    "FittedValue",
    "DesignCheck",
    "MayoFit",
    "check_design",
    "fit_mayo",
    "term_label",
]

#: variance-inflation factor above which a term is reported as poorly separated [-]
#: (common practice: VIF > 10 marks serious collinearity).
VIF_WARN = 10.0
#: relative singular-value tolerance for a rank-deficient (collinear) design [-].
RANK_TOL = 1e-9


def term_label(term: str) -> str:
    """The sheet-style ratio label of a term, e.g. ``"C_A:thiol"`` -> ``"ratio [A:thiol]/[M] [-]"``."""
    if term == "C_M":
        return "C_M (constant column)"
    if term.startswith("C_A"):
        species = "A" + term[3:]
    elif term in ("C_S", "C_I"):
        species = term[2:]
    else:
        species = term
    return f"ratio [{species}]/[M] [-]"


@dataclass(frozen=True)
class FittedValue:
    """A fitted quantity with its standard error and confidence interval.

    Attributes
    ----------
    name : str
        E.g. ``"C_A"``, ``"1/DPn0"``, ``"DPn0"``.
    value, stderr : float
        Estimate and standard error [unit].
    ci_low, ci_high : float
        Confidence interval at ``confidence`` [unit] (may be ``inf`` for DPn0).
    confidence : float
        Two-sided confidence level of the interval [-].
    unit : str
        Unit of the value ("-" for dimensionless).
    """

    name: str
    value: float
    stderr: float
    ci_low: float
    ci_high: float
    confidence: float = 0.95
    unit: str = "-"

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "name": self.name,
            "value": finite_or_none(self.value),
            "standard error": finite_or_none(self.stderr),
            "CI low": finite_or_none(self.ci_low),
            "CI high": finite_or_none(self.ci_high),
            "confidence": self.confidence,
            "unit": self.unit,
        }


@dataclass(frozen=True)
class DesignCheck:
    """What the design of a run series can separate.

    Attributes
    ----------
    n_runs, n_params : int
        Runs used and parameters fitted (intercept included when free).
    distinct_points : int
        Distinct combinations of the term columns.
    rank : int
        Numerical rank of the column-normalised design matrix.
    condition_number : float
        Ratio of largest to smallest singular value of the column-normalised design [-].
    vif : dict
        Variance-inflation factor per term [-] (1 = independent of the others).
    warnings : tuple of str
    """

    n_runs: int
    n_params: int
    distinct_points: int
    rank: int
    condition_number: float
    vif: dict[str, float]
    warnings: tuple[str, ...] = ()

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "runs": self.n_runs,
            "parameters": self.n_params,
            "distinct design points": self.distinct_points,
            "rank": self.rank,
            "condition number [-]": finite_or_none(self.condition_number),
            "VIF [-]": {k: finite_or_none(v) for k, v in self.vif.items()},
            "warnings": list(self.warnings),
        }


def _columns_matrix(columns: Mapping[str, Any], n: int | None) -> tuple[list[str], np.ndarray]:
    names = list(columns)
    if not names:
        raise DesignError("no terms to fit: choose at least one of C_A, C_A:<agent>, C_S, C_I, C_M")
    arrays = []
    for name in names:
        a = np.asarray(columns[name], dtype=float).ravel()
        arrays.append(a)
    lengths = {len(a) for a in arrays}
    if len(lengths) != 1:
        raise DesignError(f"term columns have different lengths {sorted(lengths)}", key=names[0])
    m = np.column_stack(arrays) if arrays else np.zeros((n or 0, 0))
    for name, a in zip(names, arrays, strict=True):
        if not np.all(np.isfinite(a)):
            bad = int(np.flatnonzero(~np.isfinite(a))[0])
            raise DataError(
                f"term {name}: {term_label(name)} is missing or not a number for run {bad + 1}; "
                "fill it in (0 when the species is absent) or leave the term out",
                column=term_label(name),
            )
    return names, m


def check_design(
    columns: Mapping[str, Any],
    *,
    intercept: bool = True,
    what: str = "this run series",
) -> DesignCheck:
    """Check that a run series can separate the chosen Mayo terms; raise if it cannot.

    Refuses (:class:`~gpctools.errors.DesignError`) when there are no more runs than
    parameters, when a term does not vary (or fewer distinct design points than
    parameters), and when columns are collinear (rank-deficient column-normalised design:
    e.g. two agents varied in fixed proportion, or ``C_M`` with a free intercept). Warns
    (listed in ``warnings``) when a term's variance-inflation factor exceeds 10, or when a
    single-term line rests on only two distinct ratios.

    Parameters
    ----------
    columns : mapping of str to array-like
        Term name -> design column (the ratio [X]/[M] per run [-]; ones for ``C_M``).
    intercept : bool
        Whether 1/DPn0 is fitted (a column of ones is added).
    what : str
        Name of the series for the messages.

    Returns
    -------
    DesignCheck

    References
    ----------
    Belsley, Kuh, Welsch, Regression Diagnostics (Wiley, 1980): condition number of the
    column-scaled design; variance-inflation factors (VIF > 10, common practice).
    """
    names, T = _columns_matrix(columns, None)
    n = T.shape[0]
    full_names = (["1/DPn0"] if intercept else []) + names
    X = np.column_stack([np.ones(n), T]) if intercept else T
    p = X.shape[1]
    if n <= p:
        raise DesignError(
            f"{what}: {n} runs for {p} fitted parameters ({', '.join(full_names)}); the fit "
            f"needs more runs than parameters (at least {p + 1}) to give uncertainties. "
            "Add runs, or fit fewer terms (fix the intercept or leave terms out)"
        )
    warns: list[str] = []
    for j, name in enumerate(names):
        col = T[:, j]
        distinct = np.unique(np.round(col / (np.max(np.abs(col)) or 1.0), 9)).size
        if intercept and distinct < 2:
            if name == "C_M":
                raise DesignError(
                    f"{what}: C_M and the intercept 1/DPn0 are both constant over the runs and "
                    "cannot be separated; give C_M as a known value (it is then part of the "
                    "expected intercept) or fix the intercept from a kinetic term"
                )
            raise DesignError(
                f"{what}: term {name} cannot be fitted: {term_label(name)} has the same value "
                f"({col[0]:.6g}) in every run; vary it over at least 2 (better 4 or more) values "
                "or leave the term out",
                column=term_label(name),
            )
        if not intercept and np.all(col == 0):
            raise DesignError(
                f"{what}: term {name} is zero in every run; leave it out",
                column=term_label(name),
            )
    distinct_points = np.unique(np.round(X / np.maximum(np.max(np.abs(X), axis=0), 1e-300), 9),
                                axis=0).shape[0]
    if distinct_points < p:
        raise DesignError(
            f"{what}: only {distinct_points} distinct combinations of "
            f"{', '.join(term_label(t) for t in names)} for {p} parameters; "
            f"runs at at least {p} different design points are needed (better {p + 2} or more)"
        )
    norms = np.linalg.norm(X, axis=0)
    Xs = X / np.where(norms > 0, norms, 1.0)
    sv = np.linalg.svd(Xs, compute_uv=False)
    rank = int(np.sum(sv > RANK_TOL * sv[0]))
    cond = float(sv[0] / sv[-1]) if sv[-1] > 0 else float("inf")
    vif: dict[str, float] = {}
    for j, name in enumerate(full_names):
        if name == "1/DPn0":
            continue
        others = np.delete(Xs, j, axis=1)
        target = Xs[:, j]
        if others.shape[1] == 0:
            vif[name] = 1.0
            continue
        coef, *_ = np.linalg.lstsq(others, target, rcond=None)
        resid = target - others @ coef
        if intercept:
            ss_tot = float(np.sum((target - target.mean()) ** 2))
        else:
            ss_tot = float(np.sum(target**2))
        ss_res = float(resid @ resid)
        vif[name] = float("inf") if ss_res <= 1e-18 * max(ss_tot, 1e-300) else ss_tot / ss_res
    if rank < p:
        culprits = [k for k, v in vif.items() if not np.isfinite(v) or v > 1e8]
        pair = _most_correlated(T, names)
        detail = f" ({pair})" if pair else ""
        raise DesignError(
            f"{what}: the columns of {', '.join(term_label(t) for t in culprits or names)} are "
            f"collinear{detail}, so the series cannot separate their constants "
            f"(design rank {rank} < {p} parameters). Vary the species independently "
            "(e.g. a factorial design of ratios) or fit one combined term"
        )
    for name, v in vif.items():
        if v > VIF_WARN:
            warns.append(
                f"{what}: {name} is poorly separated from the other terms (variance-inflation "
                f"factor {v:.0f} > {VIF_WARN:.0f}); its standard error is inflated accordingly"
            )
    if intercept and len(names) == 1 and names[0] != "C_M":
        distinct = np.unique(np.round(T[:, 0] / (np.max(np.abs(T[:, 0])) or 1.0), 9)).size
        if distinct == 2:
            warns.append(
                f"{what}: {names[0]} rests on only 2 distinct ratios; a straight line through two "
                "points cannot show curvature (common practice: 4 or more ratios)"
            )
    return DesignCheck(
        n_runs=n,
        n_params=p,
        distinct_points=int(distinct_points),
        rank=rank,
        condition_number=cond,
        vif=vif,
        warnings=tuple(warns),
    )


def _most_correlated(T: np.ndarray, names: list[str]) -> str:
    best = ""
    best_r = 0.0
    for i in range(T.shape[1]):
        for j in range(i + 1, T.shape[1]):
            a, b = T[:, i], T[:, j]
            if np.std(a) == 0 or np.std(b) == 0:
                continue
            r = float(np.corrcoef(a, b)[0, 1])
            if abs(r) > best_r:
                best_r = abs(r)
                best = f"{names[i]} and {names[j]} vary in fixed proportion, r = {r:.4f}"
    return best if best_r > 0.999 else ""


@dataclass(frozen=True)
class MayoFit(FittedConstants):
    """A weighted fit of the Mayo model to one run series with one estimator of 1/DPn.

    Attributes
    ----------
    estimator : str
        Which chain-length estimate ``y`` is: ``"Mn"``, ``"Mw/2"`` or ``"CLD"``.
    terms : tuple of str
        Fitted constants, in design-column order.
    constants : tuple of FittedValue
        One per term (dimensionless k_tr/k_p).
    intercept : FittedValue
        1/DPn0 [-] (fitted, or the fixed value with zero standard error).
    DPn0 : FittedValue
        1/intercept with propagated standard error se(a)/a^2 and the inverted interval [-].
    covariance : numpy.ndarray
        Covariance of (intercept if free, then terms) [-].
    run_ids : tuple of str
    design : numpy.ndarray
        Term columns, shape (n, len(terms)) [-].
    y, fitted : numpy.ndarray
        Observed and fitted 1/DPn (or Λ) per run [-].
    weights : numpy.ndarray
        Residual weights used (1/sigma up to a common factor) [-].
    dof : int
        Degrees of freedom n - p.
    redchi : float
        Reduced chi-square of the weighted fit [-].
    relative_scatter : float
        Estimated relative error of one 1/DPn (sqrt(redchi) with relative weights) [-].
    confidence : float
        Level of the intervals [-].
    intercept_fixed : bool
    success : bool
    message : str
    design_check : DesignCheck
    warnings : tuple of str
    known_sigma : bool
        True when absolute uncertainties of y were given: the covariance is then not
        scaled and the intervals use the normal quantile instead of Student's t.
    """

    estimator: str
    terms: tuple[str, ...]
    constants: tuple[FittedValue, ...]
    intercept: FittedValue
    DPn0: FittedValue
    covariance: np.ndarray
    run_ids: tuple[str, ...]
    design: np.ndarray
    y: np.ndarray
    fitted: np.ndarray
    weights: np.ndarray
    dof: int
    redchi: float
    relative_scatter: float
    confidence: float
    intercept_fixed: bool
    success: bool
    message: str
    design_check: DesignCheck
    warnings: tuple[str, ...] = field(default=())
    known_sigma: bool = False

    def _row_matrix(self, columns: Mapping[str, Any]) -> np.ndarray:
        cols = [np.atleast_1d(np.asarray(columns[t], dtype=float)) for t in self.terms]
        n = max(len(c) for c in cols)
        T = np.column_stack([np.broadcast_to(c, (n,)) for c in cols])
        return T if self.intercept_fixed else np.column_stack([np.ones(n), T])

    def predict(self, columns: Mapping[str, Any]) -> np.ndarray:
        """Model 1/DPn for design rows given as term -> values [-]."""
        G = self._row_matrix(columns)
        beta = np.array(([] if self.intercept_fixed else [self.intercept.value])
                        + [c.value for c in self.constants])
        fixed = self.intercept.value if self.intercept_fixed else 0.0
        return G @ beta + fixed

    def band(self, columns: Mapping[str, Any], confidence: float | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Pointwise confidence band of the fitted line (the mean 1/DPn) [-].

        Half-width ``t_{(1+c)/2, n-p} * sqrt(g' Cov g)`` with g the design row (the normal
        quantile when the uncertainties of y were given, ``known_sigma``).

        References
        ----------
        Draper and Smith, Applied Regression Analysis, 3rd ed. (Wiley, 1998), confidence
        interval of the mean response.
        """
        level = self.confidence if confidence is None else confidence
        G = self._row_matrix(columns)
        mean = self.predict(columns)
        var = np.einsum("ij,jk,ik->i", G, self.covariance, G)
        dof = 0 if self.known_sigma else self.dof
        half = t_quantile(0.5 + level / 2, dof) * np.sqrt(np.maximum(var, 0.0))
        return mean - half, mean + half

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "estimator": self.estimator,
            "terms": list(self.terms),
            "constants": [c.summary() for c in self.constants],
            "intercept 1/DPn0 [-]": self.intercept.summary(),
            "DPn0 [-]": self.DPn0.summary(),
            "intercept fixed": self.intercept_fixed,
            "runs": list(self.run_ids),
            "degrees of freedom": self.dof,
            "reduced chi-square": finite_or_none(self.redchi),
            "relative scatter of 1/DPn [-]": finite_or_none(self.relative_scatter),
            "success": self.success,
            "message": self.message,
            "design": self.design_check.summary(),
            "warnings": list(self.warnings),
        }


def _interval(value: float, se: float, q: float) -> tuple[float, float]:
    return float(value - q * se), float(value + q * se)


def fit_mayo(
    y: Sequence[float] | np.ndarray,
    columns: Mapping[str, Any],
    *,
    intercept: float | None = None,
    weights: str = "relative",
    sigma: Sequence[float] | np.ndarray | None = None,
    run_ids: Sequence[Any] | None = None,
    estimator: str = "Mn",
    confidence: float = 0.95,
    what: str = "this run series",
) -> MayoFit:
    """Fit 1/DPn = 1/DPn0 + sum_k C_k x_k by weighted least squares (lmfit).

    Parameters
    ----------
    y : array-like
        Observed 1/DPn per run [-] (or Λ for the CLD estimator).
    columns : mapping of str to array-like
        Term name (``"C_A"``, ``"C_A:<agent>"``, ``"C_S"``, ``"C_I"``, ``"C_M"``) ->
        design column: ratio [X]/[M] per run [-] (ones for ``C_M``).
    intercept : float, optional
        Known 1/DPn0 [-]; when given it is held fixed (e.g. from a kinetic term),
        which is what lets ``C_M`` be fitted.
    weights : {"relative", "equal"}
        ``"relative"`` (default): 1/DPn has a constant relative error, weights
        1/(rel_err * 1/DPn) with 1/DPn the fitted value of a first, observation-weighted
        pass; the common relative error is estimated from the scatter. ``"equal"``:
        ordinary least squares.
    sigma : array-like, optional
        Known absolute standard uncertainties of ``y`` [-]; overrides ``weights``, the
        covariance is then not rescaled by the reduced chi-square and the intervals use
        the normal quantile (known variance).
    run_ids : sequence, optional
        Run identifiers (for messages and tables).
    estimator : str
        Label of the chain-length estimate (``"Mn"``, ``"Mw/2"``, ``"CLD"``).
    confidence : float
        Two-sided confidence level of the intervals [-], default 0.95; intervals use the
        t distribution with n - p degrees of freedom (normal when ``sigma`` is given).
    what : str
        Name of the series for messages.

    Returns
    -------
    MayoFit

    Raises
    ------
    DesignError
        When the series cannot separate the terms (see :func:`check_design`).
    DataError
        When a 1/DPn is missing, zero or negative.

    References
    ----------
    Mayo, F. R., J. Am. Chem. Soc. 1943 (the model). SCIENCE.md section 3 (constant
    relative error of 1/DPn, hence relative weights). Student t intervals with n - p
    degrees of freedom: Draper and Smith, Applied Regression Analysis, 3rd ed., 1998.
    """
    yv = np.asarray(y, dtype=float).ravel()
    n = yv.size
    ids = as_str_tuple(run_ids) if run_ids is not None else tuple(str(i + 1) for i in range(n))
    if len(ids) != n:
        raise DataError(f"{what}: {len(ids)} run ids for {n} values")
    names, T = _columns_matrix(columns, n)
    if T.shape[0] != n:
        raise DesignError(f"{what}: {T.shape[0]} design rows for {n} values of 1/DPn")
    bad = np.flatnonzero(~np.isfinite(yv) | (yv <= 0))
    if bad.size:
        i = int(bad[0])
        raise DataError(
            f"{what}: run {ids[i]!r} has no usable chain length for estimator {estimator} "
            f"(1/DPn = {yv[i]!r}); fix the run's molar mass or leave the run out"
        )
    fixed = intercept is not None
    check = check_design(dict(zip(names, T.T, strict=True)), intercept=not fixed, what=what)
    X = T if fixed else np.column_stack([np.ones(n), T])
    target = yv - (float(intercept) if fixed else 0.0)
    if sigma is not None:
        s = np.asarray(sigma, dtype=float).ravel()
        if s.size != n or np.any(~np.isfinite(s)) or np.any(s <= 0):
            raise DataError(f"{what}: sigma must be {n} positive numbers")
        w = 1.0 / s
        fit = weighted_linear_fit(X, target, w, scale_covar=False)
    elif weights == "equal":
        w = np.ones(n)
        fit = weighted_linear_fit(X, target, w)
    elif weights == "relative":
        w = 1.0 / yv
        fit = weighted_linear_fit(X, target, w)
        pred = fit.fitted + (float(intercept) if fixed else 0.0)
        if np.all(pred > 0):
            w = 1.0 / pred
            fit = weighted_linear_fit(X, target, w)
    else:
        raise DataError(f"weights must be 'relative' or 'equal', not {weights!r}", key="weights")
    # known sigma: the covariance is not estimated from the scatter, so the pivot is normal
    q = t_quantile(0.5 + confidence / 2, 0 if sigma is not None else fit.dof)
    beta = fit.beta
    se = np.sqrt(np.maximum(np.diag(fit.covariance), 0.0))
    offset = 0 if fixed else 1
    consts = tuple(
        FittedValue(name, float(beta[offset + j]), float(se[offset + j]),
                    *_interval(float(beta[offset + j]), float(se[offset + j]), q),
                    confidence=confidence)
        for j, name in enumerate(names)
    )
    if fixed:
        a, sa = float(intercept), 0.0
        icpt = FittedValue("1/DPn0", a, 0.0, a, a, confidence=confidence)
    else:
        a, sa = float(beta[0]), float(se[0])
        icpt = FittedValue("1/DPn0", a, sa, *_interval(a, sa, q), confidence=confidence)
    warns = list(check.warnings)
    if a > 0:
        lo_a, hi_a = icpt.ci_low, icpt.ci_high
        dpn0 = FittedValue(
            "DPn0", 1.0 / a, sa / a**2,
            1.0 / hi_a if hi_a > 0 else float("inf"),
            1.0 / lo_a if lo_a > 0 else float("inf"),
            confidence=confidence,
        )
    else:
        dpn0 = FittedValue("DPn0", float("nan"), float("nan"), float("nan"), float("nan"),
                           confidence=confidence)
        warns.append(
            f"{what} ({estimator}): the intercept 1/DPn0 = {a:.3g} is not positive, so DPn0 is "
            "undefined; the line is probably curved or a high-ratio run is off"
        )
    for c in consts:
        if c.name != "C_M" and c.value < 0:
            warns.append(
                f"{what} ({estimator}): {c.name} = {c.value:.3g} is negative; 1/DPn falls with "
                f"{term_label(c.name)}: check the ratios and the molar masses"
            )
    fitted = fit.fitted + (float(intercept) if fixed else 0.0)
    rel_scatter = float(np.sqrt(fit.redchi)) if (sigma is None and weights == "relative"
                                                 and fit.dof > 0) else float("nan")
    for msg in warns[len(check.warnings):] + list(check.warnings):
        _warnings.warn(msg, EstimatorWarning, stacklevel=2)
    return MayoFit(
        estimator=estimator,
        terms=tuple(names),
        constants=consts,
        intercept=icpt,
        DPn0=dpn0,
        covariance=fit.covariance,
        run_ids=ids,
        design=T,
        y=yv,
        fitted=fitted,
        weights=w,
        dof=fit.dof,
        redchi=fit.redchi,
        relative_scatter=rel_scatter,
        confidence=confidence,
        intercept_fixed=fixed,
        success=fit.success,
        message=fit.message,
        design_check=check,
        warnings=tuple(warns),
        known_sigma=sigma is not None,
    )
