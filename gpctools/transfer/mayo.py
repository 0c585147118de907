r"""The full Mayo model, fitted by weighted least squares, with a design check.

.. math::

    \frac{1}{DP_n} = \frac{1}{DP_{n0}} + C_M + C_S\frac{[S]}{[M]} + C_I\frac{[I]}{[M]}
    + \sum_j C_{A,j}\frac{[A_j]}{[M]}

The user chooses the terms. Term names are the constants' names: ``"C_A"`` (the single
agent), ``"C_A:<agent>"`` (one of several agents varied in the same design), ``"C_S"``,
``"C_I"`` and ``"C_M"``. Each term has a column of the design: the ratio [X]/[M] of its
runs (``C_M``: a column of ones, which only a fixed intercept lets one fit).

Errors in Mn scale with Mn, so 1/DPn has a roughly constant *relative* error; the default
weights are 1/(relative error * 1/DPn), the relative error being estimated from the scatter.

References
----------
Mayo, F. R., J. Am. Chem. Soc. 1943: the Mayo equation (dead chains per monomer consumed).
docs/science.md, section 3: weighting for constant relative error of 1/DPn.
"""

from __future__ import annotations

import warnings as _warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError, DesignError, EstimatorWarning
from gpctools.sheets.cells import finite_or_none
from gpctools.transfer._fit import Solution, solve
from gpctools.transfer._stats import FittedConstants, as_str_tuple, t_quantile
from gpctools.transfer.model import KINETIC_NAME, SeriesModel

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
    if term == KINETIC_NAME:
        return "kinetic term (R_p/[M]^2 or sqrt([I])/[M])"
    if term == "C_M":
        return "C_M (constant column)"
    if term.startswith("C_A"):
        species = "A" + term[3:]
    elif term in ("C_S", "C_I"):
        species = term[2:]
    else:
        species = term
    return f"ratio [{species}]/[M] [-]"


@dataclass(frozen=True, repr=False)
class FittedValue(Display):
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
    stderr_statistical, stderr_calibration : float
        The two parts of ``stderr`` (run-to-run scatter; the calibration common to every
        run), combined in quadrature [unit]; NaN/0 where not separated.
    dof : float
        Degrees of freedom of the interval (Welch–Satterthwaite; inf: normal quantile).
    """

    name: str
    value: float
    stderr: float
    ci_low: float
    ci_high: float
    confidence: float = 0.95
    unit: str = "-"
    stderr_statistical: float = float("nan")
    stderr_calibration: float = 0.0
    dof: float = float("nan")

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "name": self.name,
            "value": finite_or_none(self.value),
            "standard error": finite_or_none(self.stderr),
            "statistical part": finite_or_none(self.stderr_statistical),
            "calibration part": finite_or_none(self.stderr_calibration),
            "degrees of freedom": finite_or_none(self.dof),
            "CI low": finite_or_none(self.ci_low),
            "CI high": finite_or_none(self.ci_high),
            "confidence": self.confidence,
            "unit": self.unit,
        }


@dataclass(frozen=True, repr=False)
class DesignCheck(Display):
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
    kinetic: np.ndarray | None = None,
    kinetic_label: str = "kinetic term",
) -> DesignCheck:
    """Check that a run series can separate the chosen Mayo terms; raise if it cannot.

    Refuses (:class:`~gpctools.errors.DesignError`) when there are no more runs than
    parameters, when a term does not vary (or fewer distinct design points than
    parameters), and when columns are collinear (rank-deficient column-normalised design:
    e.g. two agents varied in fixed proportion, or ``C_M`` with a free intercept). Warns
    (listed in ``warnings``) when a term's variance-inflation factor exceeds 10, or when a
    single-term line rests on only two distinct ratios.

    The checks run in order on one normalised design matrix and each message names the
    terms at fault, which is why they stay in one body (about 100 lines).

    Parameters
    ----------
    columns : mapping of str to array-like
        Term name -> design column (the ratio [X]/[M] per run [-]; ones for ``C_M``).
    intercept : bool
        Whether 1/DPn0 is fitted (a column of ones is added).
    what : str
        Name of the series for the messages.
    kinetic : numpy.ndarray, optional
        The kinetic regressor z per run (R_p/[M]² or √[I]/[M]) when it is fitted; it is
        checked like a term, and a design that cannot tell it from the solvent or
        initiator columns (e.g. a dilution series at one initiator level, where 1,
        [S]/[M] and 1/[M] are exactly related) is refused with what to add.
    kinetic_label : str
        How z was formed, for the messages.

    Returns
    -------
    DesignCheck

    References
    ----------
    Belsley, Kuh, Welsch, Regression Diagnostics (Wiley, 1980): condition number of the
    column-scaled design; variance-inflation factors (VIF > 10, common practice).
    """
    names, T = _columns_matrix(columns, None)
    term_names = list(names)
    if kinetic is not None:
        names = [KINETIC_NAME, *names]
        T = np.column_stack([np.asarray(kinetic, dtype=float).ravel(), T])
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
    if rank < p and kinetic is not None and vif.get(KINETIC_NAME, 0.0) > 1e8:
        culprit_terms = [t for t in term_names if t in ("C_S", "C_I", "C_M") and vif.get(t, 0) > 1e8]
        raise DesignError(_kinetic_refusal(what, culprit_terms or term_names, kinetic_label, rank, p),
                          key="kinetic_term")
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


def _kinetic_refusal(what: str, terms: Sequence[str], label: str, rank: int, p: int) -> str:
    """Why C_S / C_I cannot be told from the kinetic term, and what to add."""
    which = ", ".join(terms)
    return (
        f"{what}: {which} cannot be separated from the kinetic (termination) term, which "
        f"enters because {label} varies over the runs: the columns 1, {label} and "
        f"{', '.join(term_label(t) for t in terms)} are linear combinations of one another "
        f"(design rank {rank} < {p} parameters; in a dilution series at one initiator level "
        "1/[M] and [S]/[M] move together). Add one of: a second initiator level at each "
        "dilution ('[I] [mol/L]'), measured rates ('R_p [mol/L/s]') where they do not follow "
        "sqrt([I])/[M], or a known C_M (--C-M; C_S then rests on it), or ask for the kinetic "
        "term from reference data (kinetic = 'reference', --kinetic reference)"
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


@dataclass(frozen=True, repr=False)
class MayoFit(FittedConstants, Display):
    """A weighted fit of the Mayo model to one run series with one estimator of 1/DPn.

    Attributes
    ----------
    estimator : str
        Which chain-length estimate ``y`` is: ``"Mn"``, ``"Mw/2"`` or ``"CLD"``.
    terms : tuple of str
        Fitted constants, in design-column order.
    constants : tuple of FittedValue
        One per term (dimensionless k_tr/k_p), with statistical and calibration parts.
    intercept : FittedValue
        1/DPn0 [-] (fitted, or the fixed value with zero standard error); with a kinetic
        regressor, the constant part only (C_M and any constant transfer).
    DPn0 : FittedValue
        1/intercept with propagated standard error se(a)/a^2 and the inverted interval [-].
    covariance : numpy.ndarray
        Combined covariance of θ = (intercept if free, kinetic coefficient if fitted, then
        terms) [-]; ``covariance_calibration`` is its calibration part.
    run_ids : tuple of str
    design : numpy.ndarray
        Term columns, shape (n, len(terms)) [-].
    y, fitted : numpy.ndarray
        Observed and fitted estimator values per run [-] (1/DPn, 2 M0/Mw or Λ).
    weights : numpy.ndarray
        Residual weights used (1/sigma up to a common factor) [-].
    dof : int
        Degrees of freedom n - p.
    redchi : float
        Reduced chi-square of the weighted fit [-].
    relative_scatter : float
        Estimated relative error of one observation (sqrt(redchi) with relative weights) [-].
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
    model : SeriesModel or None
        The observation model (δ, kinetic term, CLD windows) the fit used.
    theta : numpy.ndarray or None
        The fitted parameters in the order of ``model.names``.
    covariance_calibration : numpy.ndarray or None
    kinetic : FittedValue or None
        Coefficient of the kinetic regressor, when it was fitted.
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
    model: SeriesModel | None = None
    theta: np.ndarray | None = None
    covariance_calibration: np.ndarray | None = None
    kinetic: FittedValue | None = None
    dof_calibration: float = float("inf")

    def _row_matrix(self, columns: Mapping[str, Any]) -> np.ndarray:
        """Rows of the instantaneous line in θ order; missing columns take the design mean."""
        names = self.model.names if self.model is not None else (
            (() if self.intercept_fixed else ("1/DPn0",)) + self.terms)
        cols: list[np.ndarray | None] = []
        for name in names:
            if name == "1/DPn0":
                cols.append(None)
            elif name in columns:
                cols.append(np.atleast_1d(np.asarray(columns[name], dtype=float)))
            elif name == KINETIC_NAME and self.model is not None and self.model.kinetic is not None:
                cols.append(np.atleast_1d(float(np.mean(self.model.kinetic))))
            else:
                cols.append(np.atleast_1d(np.asarray(columns[name], dtype=float)))
        n = max((c.size for c in cols if c is not None), default=1)
        return np.column_stack([np.ones(n) if c is None else np.broadcast_to(c, (n,))
                                for c in cols])

    def _beta(self) -> np.ndarray:
        if self.theta is not None:
            return np.asarray(self.theta, dtype=float)
        return np.array(([] if self.intercept_fixed else [self.intercept.value])
                        + [c.value for c in self.constants])

    def predict(self, columns: Mapping[str, Any]) -> np.ndarray:
        """Instantaneous model 1/DPn for design rows given as term -> values [-]."""
        G = self._row_matrix(columns)
        fixed = self.intercept.value if self.intercept_fixed else 0.0
        return G @ self._beta() + fixed

    def band(self, columns: Mapping[str, Any], confidence: float | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Pointwise confidence band of the instantaneous line (the mean 1/DPn) [-].

        Half-width ``q * sqrt(g' Cov g)`` with g the design row and Cov the combined
        covariance; q is Student's t with the fit's degrees of freedom (the normal quantile
        when the uncertainties of y were given, ``known_sigma``).

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

    def inv_dpn_points(self) -> np.ndarray:
        """Each run's observation on the instantaneous 1/DPn scale (see
        :meth:`SeriesModel.to_inv_dpn`) [-]; ``y`` itself for a linear Mn fit.
        """
        if self.model is None or self.theta is None:
            return self.y
        return self.model.to_inv_dpn(self.y, self.theta)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        m = self.model
        return {
            "estimator": self.estimator,
            "terms": list(self.terms),
            "constants": [c.summary() for c in self.constants],
            "intercept 1/DPn0 [-]": self.intercept.summary(),
            "DPn0 [-]": self.DPn0.summary(),
            "kinetic term coefficient": self.kinetic.summary() if self.kinetic else None,
            "delta [-]": finite_or_none(m.delta) if m is not None else None,
            "intercept fixed": self.intercept_fixed,
            "runs": list(self.run_ids),
            "degrees of freedom": self.dof,
            "reduced chi-square": finite_or_none(self.redchi),
            "relative scatter [-]": finite_or_none(self.relative_scatter),
            "success": self.success,
            "message": self.message,
            "design": self.design_check.summary(),
            "warnings": list(self.warnings),
        }


def _interval(value: float, se: float, q: float) -> tuple[float, float]:
    return float(value - q * se), float(value + q * se)


def fitted_values(sol: Solution, confidence: float) -> dict[str, FittedValue]:
    """One :class:`FittedValue` per parameter of a solution, with both parts of the error."""
    out = {}
    for j, name in enumerate(sol.model.names):
        s, c, tot, nu = sol.parts(j)
        q = t_quantile(0.5 + confidence / 2, nu)
        v = float(sol.theta[j])
        out[name] = FittedValue(name, v, tot, *_interval(v, tot, q), confidence=confidence,
                                stderr_statistical=s, stderr_calibration=c, dof=nu)
    return out


def dpn0_value(icpt: FittedValue) -> FittedValue:
    """DPn0 = 1/intercept with se(a)/a² and the inverted interval (NaN when a <= 0)."""
    a, sa = icpt.value, icpt.stderr
    if not a > 0:
        nan = float("nan")
        return FittedValue("DPn0", nan, nan, nan, nan, confidence=icpt.confidence)
    return FittedValue("DPn0", 1.0 / a, sa / a**2,
                       1.0 / icpt.ci_high if icpt.ci_high > 0 else float("inf"),
                       1.0 / icpt.ci_low if icpt.ci_low > 0 else float("inf"),
                       confidence=icpt.confidence,
                       stderr_statistical=icpt.stderr_statistical / a**2,
                       stderr_calibration=icpt.stderr_calibration / a**2, dof=icpt.dof)


def _check_y(yv: np.ndarray, ids: tuple[str, ...], estimator: str, what: str) -> None:
    bad = np.flatnonzero(~np.isfinite(yv) | (yv <= 0))
    if bad.size:
        i = int(bad[0])
        raise DataError(
            f"{what}: run {ids[i]!r} has no usable chain length for estimator {estimator} "
            f"(1/DPn = {yv[i]!r}); fix the run's molar mass or leave the run out"
        )


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
    delta: float = 1.0,
    kinetic: Sequence[float] | np.ndarray | None = None,
    kinetic_known: Sequence[float] | np.ndarray | None = None,
    C_M_known: float = 0.0,
    windows: Sequence[tuple[float, float]] | None = None,
    M0: float | None = None,
    cal_cov_y: np.ndarray | None = None,
    dof_cal: float = float("inf"),
    kinetic_label: str = "kinetic term",
) -> MayoFit:
    """Fit the Mayo model on initial ratios by weighted least squares.

    The instantaneous model is 1/DPn = 1/DPn0 [+ k z] + Σ_k C_k x_k; the estimator's
    observable follows from it through :class:`~gpctools.transfer.model.SeriesModel`
    (Mn: 1/DPn itself, a linear fit; Mw/2 and CLD with δ < 1: the mixed-termination
    relations, a nonlinear fit).

    Parameters
    ----------
    y : array-like
        Observed estimator value per run [-]: 1/DPn = M0/Mn, 2 M0/Mw, or Λ for CLD.
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
        ``"Mn"``, ``"Mw/2"`` or ``"CLD"``.
    confidence : float
        Two-sided confidence level of the intervals [-], default 0.95.
    what : str
        Name of the series for messages.
    delta : float
        δ = k_td/k_t [-]; 1 (default): no combination.
    kinetic : array-like, optional
        Kinetic regressor z per run (R_p/[M]² or √[I]/[M]); its coefficient is fitted.
    kinetic_known : array-like, optional
        Kinetic term per run from reference data [-], added as a known offset.
    C_M_known : float
        Known C_M [-], subtracted from the constant intercept to get the kinetic part
        (only matters for Mw/2 and CLD with δ < 1).
    windows, M0
        CLD windows per run [g/mol] and the repeat-unit molar mass [g/mol] (CLD only).
    cal_cov_y : numpy.ndarray, optional
        Covariance of y from the common calibration, shape (n, n) [-].
    dof_cal : float
        Degrees of freedom of the calibration fit.
    kinetic_label : str
        How the kinetic regressor was formed (for messages).

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
    Mayo, F. R., J. Am. Chem. Soc. 1943 (the model). docs/science.md, sections 3.5
    (constant relative error of 1/DPn, hence relative weights), 4.3 (mixed termination)
    and 11.4 (Student t with n − p degrees of freedom, normal with known σ); Draper and
    Smith, Applied Regression Analysis, 3rd ed., 1998.
    """
    yv = np.asarray(y, dtype=float).ravel()
    n = yv.size
    ids = as_str_tuple(run_ids) if run_ids is not None else tuple(str(i + 1) for i in range(n))
    if len(ids) != n:
        raise DataError(f"{what}: {len(ids)} run ids for {n} values")
    names, T = _columns_matrix(columns, n)
    if T.shape[0] != n:
        raise DesignError(f"{what}: {T.shape[0]} design rows for {n} values of 1/DPn")
    _check_y(yv, ids, estimator, what)
    fixed = intercept is not None
    design_cols = dict(zip(names, T.T, strict=True))
    z = None if kinetic is None else np.asarray(kinetic, dtype=float).ravel()
    check = check_design(design_cols, intercept=not fixed, what=what, kinetic=z,
                         kinetic_label=kinetic_label)
    sig = None
    if sigma is not None:
        sig = np.asarray(sigma, dtype=float).ravel()
        if sig.size != n or np.any(~np.isfinite(sig)) or np.any(sig <= 0):
            raise DataError(f"{what}: sigma must be {n} positive numbers")
    model = SeriesModel(estimator, tuple(names), T, None, z,
                        None if kinetic_known is None else np.asarray(kinetic_known, dtype=float),
                        None if intercept is None else float(intercept), float(delta),
                        float(C_M_known),
                        None if windows is None else np.asarray(windows, dtype=float),
                        M0)
    sol = solve(model, yv, weights=weights, sigma=sig, cal_cov_y=cal_cov_y, dof_cal=dof_cal)
    return _mayo_result(sol, ids, T, check, confidence, estimator, what, weights, sig is not None)


def _mayo_result(sol: Solution, ids: tuple[str, ...], T: np.ndarray, check: DesignCheck,
                 confidence: float, estimator: str, what: str, weights: str,
                 known: bool) -> MayoFit:
    """Assemble a :class:`MayoFit` (values, both error parts, DPn0, warnings) from a solution."""
    model = sol.model
    vals = fitted_values(sol, confidence)
    consts = tuple(vals[t] for t in model.terms)
    if model.intercept is not None:
        a = float(model.intercept)
        icpt = FittedValue("1/DPn0", a, 0.0, a, a, confidence=confidence,
                           stderr_statistical=0.0, dof=float("inf"))
    else:
        icpt = vals["1/DPn0"]
    warns = list(check.warnings)
    dpn0 = dpn0_value(icpt)
    if not icpt.value > 0 and model.kinetic is None:
        warns.append(
            f"{what} ({estimator}): the intercept 1/DPn0 = {icpt.value:.3g} is not positive, so "
            "DPn0 is undefined; the line is probably curved or a high-ratio run is off"
        )
    for c in consts:
        if c.name != "C_M" and c.value < 0:
            warns.append(
                f"{what} ({estimator}): {c.name} = {c.value:.3g} is negative; 1/DPn falls with "
                f"{term_label(c.name)}: check the ratios and the molar masses"
            )
    rel_scatter = float(np.sqrt(sol.redchi)) if (not known and weights == "relative"
                                                 and sol.dof > 0) else float("nan")
    for msg in warns[len(check.warnings):] + list(check.warnings):
        _warnings.warn(msg, EstimatorWarning, stacklevel=3)
    return MayoFit(
        estimator=estimator, terms=model.terms, constants=consts, intercept=icpt, DPn0=dpn0,
        covariance=sol.cov, run_ids=ids, design=T, y=sol.y, fitted=sol.fitted,
        weights=sol.weights, dof=sol.dof, redchi=sol.redchi, relative_scatter=rel_scatter,
        confidence=confidence, intercept_fixed=model.intercept is not None,
        success=sol.success, message=sol.message, design_check=check,
        warnings=tuple(warns), known_sigma=known, model=model, theta=sol.theta,
        covariance_calibration=sol.cov_cal,
        kinetic=vals.get(KINETIC_NAME),
        dof_calibration=sol.dof_cal,
    )
