"""Conversion drift: the cumulative (integrated) Mayo model, the naive-fit bias, the
consumption method.

When the agent A is consumed only by transfer, d[A]/d[M] = C_A [A]/[M], so
[A]/[A]0 = ([M]/[M]0)^C_A and the instantaneous ratio drifts as

    (A/M)(x) = r0 (1 − x)^(C_A − 1),   r0 = [A]0/[M]0,

at monomer conversion x. Dead chains formed per monomer converted follow the Mayo
equation instantaneously, λ(x) = 1/DPn0 + C_A (A/M)(x); the cumulative averages are

    DPn,cum(x) = x / [x/DPn0 + r0 (1 − (1 − x)^C_A)]
    Mw,cum(x) = (1/x) ∫0^x M0 (2 − λ)/λ dx'          (mass-weighted Flory Mw)

A naive Mayo fit on initial ratios returns C_app = (1 − (1 − x)^C_A)/x.

Term kinds: agents (``C_A``, ``C_A:<agent>``) and the solvent (``C_S``) are consumed by
transfer (same law with their own constant); the initiator (``C_I``) is treated as being at
constant concentration while the monomer is used up, (I/M)(x) = (I0/M0)/(1 − x);
``C_M`` is constant. 1/DPn0 is held constant over conversion.

The formulas themselves (drifted ratios, cumulative 1/DPn, DPw and number distribution,
C_app) live in :mod:`gpctools.chainlength`; this module fits them to run series.

References
----------
SCIENCE.md section 5 [derived]: cumulative Mayo, C_app, cumulative Mw, identifiability.
Mayo, F. R., J. Am. Chem. Soc. 1943. Walling, C., J. Am. Chem. Soc. 1948 (consumption
method) [from memory].
"""

from __future__ import annotations

import warnings as _warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.chainlength import (
    apparent_constant,
    cumulative_dpw,
    cumulative_inv_dpn,
    cumulative_ln_number,
    remaining_fraction,
    term_kind,
)
from gpctools.errors import DataError, DesignError, EstimatorWarning
from gpctools.transfer._stats import FittedConstants, as_str_tuple, finite_or_none, t_quantile
from gpctools.transfer.mayo import FittedValue, MayoFit, check_design

__all__ = [
    "apparent_constant",
    "remaining_fraction",
    "cumulative_inv_dpn",
    "cumulative_inv_dpw_half",
    "cumulative_cld_lambda",
    "DriftFit",
    "fit_cumulative",
    "cumulative_model",
    "ConsumptionResult",
    "consumption_constant",
    "IDENTIFIABILITY_LIMIT",
]

#: remaining agent fraction (1 − x)^C below which cumulative averages hardly depend on C
#: [-] (our threshold for "(1 − x)^C ≪ 1").
IDENTIFIABILITY_LIMIT = 0.05


def cumulative_inv_dpw_half(
    x: Any, inv_DPn0: float, terms: Mapping[str, tuple[float, Any]]
) -> np.ndarray:
    """Cumulative 2 M0/Mw at conversion x [-], the drift model of the Mw/2 estimator.

    Mw,cum = M0 DPw,cum (:func:`gpctools.chainlength.cumulative_dpw`), returned as
    2 M0/Mw,cum so that it equals 1/DPn for an instantaneous most-probable sample.

    References
    ----------
    SCIENCE.md section 5 [derived].
    """
    return 2.0 / cumulative_dpw(np.atleast_1d(np.asarray(x, dtype=float)), inv_DPn0, terms)


def cumulative_cld_lambda(
    x: Any,
    inv_DPn0: float,
    terms: Mapping[str, tuple[float, Any]],
    windows: Sequence[tuple[float, float]],
    M0: float,
    *,
    points: int = 25,
) -> np.ndarray:
    """Λ of the cumulative number distribution, fitted over each run's CLD window [-].

    Λ = −d ln P_cum/dN (:func:`gpctools.chainlength.cumulative_ln_number`) by a straight
    line over ``points`` log-spaced chain lengths in the window (SEC slices are about
    evenly spaced in log M).

    References
    ----------
    SCIENCE.md sections 4 and 5 [derived]; Clay and Gilbert, Macromolecules 1995.
    """
    x = np.atleast_1d(np.asarray(x, dtype=float))
    out = np.empty(x.size)
    for i, xi in enumerate(x):
        lo, hi = windows[i]
        N = np.geomspace(lo / M0, hi / M0, points)
        ti = {k: (C, (np.atleast_1d(np.asarray(r, dtype=float))[i] if np.ndim(r) else r))
              for k, (C, r) in terms.items()}
        lnP = cumulative_ln_number(N, xi, inv_DPn0, ti)
        slope = np.polyfit(N, lnP, 1)[0]
        out[i] = -slope
    return out


def cumulative_model(
    estimator: str,
    conversion: np.ndarray,
    columns: Mapping[str, np.ndarray],
    *,
    windows: Sequence[tuple[float, float]] | None = None,
    M0: float | None = None,
) -> Any:
    """The cumulative model of one estimator as ``f(a, consts) -> prediction per run`` [-].

    ``a`` is 1/DPn0 and ``consts`` the constants in the order of ``columns``.
    """
    names = list(columns)
    if estimator not in ("Mn", "Mw/2", "CLD"):
        raise DataError(f"unknown estimator {estimator!r}; use Mn, Mw/2 or CLD", key="estimators")
    xv = np.asarray(conversion, dtype=float)

    def model(a: float, consts: Sequence[float]) -> np.ndarray:
        terms = {k: (c, columns[k]) for k, c in zip(names, consts, strict=True)}
        if estimator == "Mn":
            return cumulative_inv_dpn(xv, a, terms)
        if estimator == "Mw/2":
            return cumulative_inv_dpw_half(xv, a, terms)
        return cumulative_cld_lambda(xv, a, terms, windows, float(M0))  # type: ignore[arg-type]

    return model


@dataclass(frozen=True)
class DriftFit(FittedConstants):
    """The cumulative Mayo model fitted to a series at finite conversion.

    Attributes
    ----------
    estimator : str
        ``"Mn"``, ``"Mw/2"`` or ``"CLD"``.
    terms : tuple of str
    constants : tuple of FittedValue
        Drift-corrected constants [-].
    intercept, DPn0 : FittedValue
        1/DPn0 [-] and DPn0 [-] (propagated error).
    naive : tuple of FittedValue
        Constants of the naive Mayo fit on initial ratios [-] (same order), if given.
    naive_bias : tuple of float
        C_naive/C_drift − 1 per term [-].
    apparent : dict
        Term -> analytic C_app = (1 − (1 − x)^C)/x at each run's conversion, using the
        drift-corrected C [-].
    remaining : dict
        Term -> remaining fraction (1 − x)^C per run [-] (consumed terms only).
    identifiable : dict
        Term -> False when every run has (1 − x)^C < ``IDENTIFIABILITY_LIMIT``.
    run_ids : tuple of str
    conversion : numpy.ndarray
        Monomer conversion per run [-].
    y, fitted : numpy.ndarray
        Observed and model cumulative 1/DPn (or 2M0/Mw, or Λ) [-].
    covariance : numpy.ndarray
        Covariance of (1/DPn0, then the constants) [-].
    dof : int
        Degrees of freedom n - p.
    redchi : float
        Reduced chi-square [-].
    confidence : float
        Level of the intervals [-].
    success : bool
    message : str
    warnings : tuple of str
    """

    estimator: str
    terms: tuple[str, ...]
    constants: tuple[FittedValue, ...]
    intercept: FittedValue
    DPn0: FittedValue
    naive: tuple[FittedValue, ...]
    naive_bias: tuple[float, ...]
    apparent: dict[str, np.ndarray]
    remaining: dict[str, np.ndarray]
    identifiable: dict[str, bool]
    run_ids: tuple[str, ...]
    conversion: np.ndarray
    y: np.ndarray
    fitted: np.ndarray
    covariance: np.ndarray
    dof: int
    redchi: float
    confidence: float
    success: bool
    message: str
    warnings: tuple[str, ...] = field(default=())

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "estimator": self.estimator,
            "model": "cumulative Mayo (conversion drift)",
            "terms": list(self.terms),
            "constants": [c.summary() for c in self.constants],
            "intercept 1/DPn0 [-]": self.intercept.summary(),
            "DPn0 [-]": self.DPn0.summary(),
            "naive constants": [c.summary() for c in self.naive],
            "naive bias [%]": [finite_or_none(100 * b) for b in self.naive_bias],
            "analytic C_app [-]": {k: [finite_or_none(v) for v in a] for k, a in self.apparent.items()},
            "remaining agent fraction [-]": {k: [finite_or_none(v) for v in a]
                                             for k, a in self.remaining.items()},
            "identifiable": dict(self.identifiable),
            "runs": list(self.run_ids),
            "conversion [-]": [finite_or_none(v) for v in self.conversion],
            "degrees of freedom": self.dof,
            "reduced chi-square": finite_or_none(self.redchi),
            "success": self.success,
            "message": self.message,
            "warnings": list(self.warnings),
        }


def _invert_capp(c_app: float, x: float) -> float:
    """C with (1 − (1 − x)^C)/x = c_app (start value for the fit)."""
    from scipy.optimize import brentq

    if not (np.isfinite(c_app) and c_app > 0):
        return 1.0
    if c_app >= 1.0 / x * 0.999:
        return 200.0
    f = lambda C: float(apparent_constant(C, x)) - c_app  # noqa: E731
    hi = 1.0
    while f(hi) < 0 and hi < 1e4:
        hi *= 2
    try:
        return float(brentq(f, 1e-9, hi))
    except ValueError:
        return float(c_app)


def fit_cumulative(
    y: Sequence[float] | np.ndarray,
    conversion: Sequence[float] | np.ndarray,
    columns: Mapping[str, Any],
    *,
    estimator: str = "Mn",
    windows: Sequence[tuple[float, float]] | None = None,
    M0: float | None = None,
    naive: MayoFit | None = None,
    weights: str = "relative",
    run_ids: Sequence[Any] | None = None,
    confidence: float = 0.95,
    what: str = "this run series",
) -> DriftFit:
    """Fit the cumulative (conversion-drift) Mayo model with lmfit (nonlinear in C).

    Parameters
    ----------
    y : array-like
        Observed 1/DPn (``"Mn"``: M0/Mn; ``"Mw/2"``: 2 M0/Mw; ``"CLD"``: Λ) per run [-].
    conversion : array-like
        Monomer conversion x of each run, 0 < x < 1 [-].
    columns : mapping
        Term -> initial ratio [X]0/[M]0 per run [-] (ones for ``C_M``).
    estimator : {"Mn", "Mw/2", "CLD"}
        Chooses the model average: cumulative 1/DPn, cumulative 2M0/Mw, or Λ of the
        cumulative distribution over ``windows``.
    windows : sequence of (float, float), optional
        Per-run CLD windows (M_low, M_high) [g/mol]; required for ``"CLD"``.
    M0 : float, optional
        Repeat-unit molar mass [g/mol]; required for ``"CLD"``.
    naive : MayoFit, optional
        The naive fit on initial ratios, for the bias report and the start values.
    weights : {"relative", "equal"}
        As in :func:`gpctools.transfer.mayo.fit_mayo`.
    run_ids : sequence, optional
    confidence : float
        Two-sided level of the intervals (t distribution, n − p dof) [-].
    what : str
        Series name for messages.

    Returns
    -------
    DriftFit

    References
    ----------
    SCIENCE.md section 5 [derived]; Mayo, J. Am. Chem. Soc. 1943. Newville et al., LMFIT
    (Levenberg–Marquardt with covariance from the Jacobian).
    """
    import lmfit

    yv = np.asarray(y, dtype=float).ravel()
    xv = np.asarray(conversion, dtype=float).ravel()
    n = yv.size
    ids = as_str_tuple(run_ids) if run_ids is not None else tuple(str(i + 1) for i in range(n))
    names = list(columns)
    R = {k: np.asarray(columns[k], dtype=float).ravel() for k in names}
    for k in names:
        term_kind(k)
        if R[k].size != n:
            raise DesignError(f"{what}: term {k} has {R[k].size} rows for {n} runs")
    bad = np.flatnonzero(~np.isfinite(xv) | (xv <= 0) | (xv >= 1))
    if bad.size:
        i = int(bad[0])
        raise DataError(
            f"{what}: run {ids[i]!r} has conversion {xv[i]!r}; the drift model needs "
            "0 < conversion < 1 for every run (as a fraction, e.g. 0.05 for 5 %)",
            column="conversion [-]",
        )
    bady = np.flatnonzero(~np.isfinite(yv) | (yv <= 0))
    if bady.size:
        i = int(bady[0])
        raise DataError(f"{what}: run {ids[i]!r} has no usable chain length for {estimator}")
    if estimator == "CLD" and (windows is None or M0 is None or len(windows) != n):
        raise DataError(f"{what}: the CLD drift model needs each run's window and M0")
    check_design(R, intercept=True, what=what)

    model = cumulative_model(estimator, xv, R, windows=windows, M0=M0)

    # start values: naive fit, each consumed C corrected by inverting C_app at the mean x
    xbar = float(np.mean(xv))
    if naive is not None:
        a0 = max(naive.intercept.value, 1e-12)
        c0 = []
        for k in names:
            cn = naive.constant(k).value
            c0.append(_invert_capp(cn, xbar) if term_kind(k) == "consumed" else cn)
    else:
        a0 = float(np.min(yv)) * 0.5
        c0 = [1.0 for _ in names]
    pars = lmfit.Parameters()
    pars.add("a", value=a0)
    for j, c in enumerate(c0):
        pars.add(f"c{j}", value=max(float(c), 1e-6), min=0.0 if term_kind(names[j]) != "monomer" else -np.inf)

    w = 1.0 / yv

    def resid(p: Any, w: np.ndarray) -> np.ndarray:
        m = model(p["a"].value, [p[f"c{j}"].value for j in range(len(names))])
        return (m - yv) * w

    mini = lmfit.Minimizer(resid, pars, fcn_args=(w,))
    res = mini.minimize(method="leastsq")
    if weights == "relative":
        m1 = model(res.params["a"].value, [res.params[f"c{j}"].value for j in range(len(names))])
        if np.all(m1 > 0):
            w = 1.0 / m1
            mini = lmfit.Minimizer(resid, res.params, fcn_args=(w,))
            res = mini.minimize(method="leastsq")
    elif weights == "equal":
        w = np.ones(n)
        mini = lmfit.Minimizer(resid, res.params, fcn_args=(w,))
        res = mini.minimize(method="leastsq")
    p = 1 + len(names)
    dof = n - p
    a = float(res.params["a"].value)
    cs = [float(res.params[f"c{j}"].value) for j in range(len(names))]
    fitted = model(a, cs)
    chisqr = float(np.sum(((fitted - yv) * w) ** 2))
    redchi = chisqr / dof if dof > 0 else float("nan")
    names_all = ["a"] + [f"c{j}" for j in range(len(names))]
    cov = res.covar
    warns: list[str] = []
    if cov is None or np.shape(cov) != (p, p):
        cov = _numeric_covariance(model, a, cs, w, redchi)
        if not np.all(np.isfinite(cov)):
            warns.append(f"{what} ({estimator}, drift model): the covariance could not be "
                         "estimated; the constants are poorly determined by these runs")
    # lmfit's covar follows the order of varying parameters (all vary here)
    var_names = list(res.var_names) if getattr(res, "var_names", None) else names_all
    order = [var_names.index(nm) for nm in names_all] if set(var_names) == set(names_all) else list(range(p))
    cov = np.asarray(cov, dtype=float)[np.ix_(order, order)]
    se = np.sqrt(np.maximum(np.diag(cov), 0.0))
    q = t_quantile(0.5 + confidence / 2, dof)
    consts = tuple(
        FittedValue(k, cs[j], float(se[1 + j]), float(cs[j] - q * se[1 + j]),
                    float(cs[j] + q * se[1 + j]),
                    confidence=confidence)
        for j, k in enumerate(names)
    )
    sa = float(se[0])
    icpt = FittedValue("1/DPn0", a, sa, a - q * sa, a + q * sa, confidence=confidence)
    if a > 0:
        dpn0 = FittedValue("DPn0", 1 / a, sa / a**2,
                           1 / icpt.ci_high if icpt.ci_high > 0 else float("inf"),
                           1 / icpt.ci_low if icpt.ci_low > 0 else float("inf"),
                           confidence=confidence)
    else:
        dpn0 = FittedValue("DPn0", float("nan"), float("nan"), float("nan"), float("nan"),
                           confidence=confidence)
    naive_vals: tuple[FittedValue, ...] = ()
    bias: tuple[float, ...] = ()
    if naive is not None:
        naive_vals = tuple(naive.constant(k) for k in names)
        bias = tuple(nv.value / c.value - 1.0 if c.value != 0 else float("nan")
                     for nv, c in zip(naive_vals, consts, strict=True))
    apparent: dict[str, np.ndarray] = {}
    remaining: dict[str, np.ndarray] = {}
    ident: dict[str, bool] = {}
    for j, k in enumerate(names):
        if term_kind(k) != "consumed":
            continue
        apparent[k] = apparent_constant(cs[j], xv)
        remaining[k] = remaining_fraction(cs[j], xv)
        low = remaining[k] < IDENTIFIABILITY_LIMIT
        ident[k] = not bool(np.all(low))
        if np.all(low):
            warns.append(
                f"{what} ({estimator}): {k} is not identifiable from these runs: the agent is "
                f"almost used up in every run ((1 − x)^C below {IDENTIFIABILITY_LIMIT:g}), so the "
                "cumulative averages hardly depend on C; repeat at lower conversion"
            )
        elif np.any(low):
            lows = ", ".join(ids[i] for i in np.flatnonzero(low))
            warns.append(
                f"{what} ({estimator}): in runs {lows} the agent is almost used up "
                f"((1 − x)^{k} < {IDENTIFIABILITY_LIMIT:g}); they carry little information on {k}"
            )
        rel = consts[j].stderr / abs(cs[j]) if cs[j] else float("inf")
        if np.isfinite(rel) and rel > 0.5:
            warns.append(f"{what} ({estimator}): the drift-corrected {k} has a relative standard "
                         f"error of {100 * rel:.0f} %; the conversions make it poorly determined")
    for msg in warns:
        _warnings.warn(msg, EstimatorWarning, stacklevel=2)
    return DriftFit(
        estimator=estimator,
        terms=tuple(names),
        constants=consts,
        intercept=icpt,
        DPn0=dpn0,
        naive=naive_vals,
        naive_bias=bias,
        apparent=apparent,
        remaining=remaining,
        identifiable=ident,
        run_ids=ids,
        conversion=xv,
        y=yv,
        fitted=fitted,
        covariance=cov,
        dof=dof,
        redchi=redchi,
        confidence=confidence,
        success=bool(res.success),
        message=str(res.message),
        warnings=tuple(warns),
    )


def _numeric_covariance(model: Any, a: float, cs: Sequence[float], w: np.ndarray,
                        redchi: float) -> np.ndarray:
    theta = np.array([a, *cs], dtype=float)
    base = model(theta[0], theta[1:])
    J = np.empty((base.size, theta.size))
    for j in range(theta.size):
        h = 1e-6 * max(abs(theta[j]), 1e-8)
        t2 = theta.copy()
        t2[j] += h
        J[:, j] = (model(t2[0], t2[1:]) - base) * w / h
    try:
        inv = np.linalg.inv(J.T @ J)
    except np.linalg.LinAlgError:
        return np.full((theta.size, theta.size), np.nan)
    return inv * (redchi if np.isfinite(redchi) else 1.0)


@dataclass(frozen=True)
class ConsumptionResult:
    """Transfer constant from measured agent and monomer consumption.

    Attributes
    ----------
    run_ids : tuple of str
    C_runs : numpy.ndarray
        Per-run C = ln([A]/[A]0)/ln([M]/[M]0) [-].
    C_runs_stderr : numpy.ndarray
        Per-run propagated standard uncertainty [-] (NaN when no uncertainties given).
    constant : FittedValue
        Combined C [-]: inverse-variance weighted mean (uncertainty scaled by the Birge
        ratio when above 1), or the plain mean with s/sqrt(n) when no uncertainties given.
    warnings : tuple of str
    """

    run_ids: tuple[str, ...]
    C_runs: np.ndarray
    C_runs_stderr: np.ndarray
    constant: FittedValue
    warnings: tuple[str, ...] = ()

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "method": "consumption: C = ln([A]/[A]0)/ln([M]/[M]0)",
            "runs": list(self.run_ids),
            "C per run [-]": [finite_or_none(v) for v in self.C_runs],
            "C per run standard error [-]": [finite_or_none(v) for v in self.C_runs_stderr],
            "constant": self.constant.summary(),
            "warnings": list(self.warnings),
        }


def consumption_constant(
    agent_initial: Any,
    agent_residual: Any,
    *,
    monomer_initial: Any = None,
    monomer_residual: Any = None,
    conversion: Any = None,
    u_agent_residual: Any = None,
    u_monomer_residual: Any = None,
    u_conversion: Any = None,
    run_ids: Sequence[Any] | None = None,
    name: str = "C_A",
    confidence: float = 0.95,
    what: str = "this run series",
) -> ConsumptionResult:
    """C_A = ln([A]/[A]0)/ln([M]/[M]0) from residual agent and monomer, with error propagation.

    Parameters
    ----------
    agent_initial, agent_residual : array-like
        [A]0 and [A] at the end of each run [mol/L].
    monomer_initial, monomer_residual : array-like, optional
        [M]0 and [M] at the end [mol/L]; or give ``conversion`` ([M]/[M]0 = 1 − x).
    conversion : array-like, optional
        Monomer conversion x [-].
    u_agent_residual, u_monomer_residual, u_conversion : array-like, optional
        Standard uncertainties of the residual concentrations [mol/L] / conversion [-]; the
        initial amounts (weighed) are taken as exact.
    run_ids, name, confidence, what
        Labels, constant name and interval level [-].

    Returns
    -------
    ConsumptionResult

    Notes
    -----
    With a = [A]/[A]0 and m = [M]/[M]0: u(C)^2 = (u_a/(a ln m))^2 + (ln a · u_m/(m (ln m)^2))^2
    (first-order propagation).

    References
    ----------
    Walling, C., J. Am. Chem. Soc. 1948 [from memory: SCIENCE.md section 5] (the method);
    JCGM 100:2008 (GUM), first-order propagation of uncertainty; Birge, Phys. Rev. 1932
    (scaling by the Birge ratio when the scatter exceeds the stated uncertainties).
    """
    A0 = np.atleast_1d(np.asarray(agent_initial, dtype=float))
    A = np.atleast_1d(np.asarray(agent_residual, dtype=float))
    n = A.size
    ids = as_str_tuple(run_ids) if run_ids is not None else tuple(str(i + 1) for i in range(n))
    if monomer_residual is not None and monomer_initial is not None:
        m = np.atleast_1d(np.asarray(monomer_residual, dtype=float)) / np.atleast_1d(
            np.asarray(monomer_initial, dtype=float))
        u_m = (None if u_monomer_residual is None else
               np.atleast_1d(np.asarray(u_monomer_residual, dtype=float))
               / np.atleast_1d(np.asarray(monomer_initial, dtype=float)))
    elif conversion is not None:
        m = 1.0 - np.atleast_1d(np.asarray(conversion, dtype=float))
        u_m = None if u_conversion is None else np.atleast_1d(np.asarray(u_conversion, dtype=float))
    else:
        raise DataError(f"{what}: the consumption method needs the residual monomer "
                        "(residual [M] [mol/L]) or the conversion (conversion [-])")
    a = A / A0
    for i in range(n):
        if not (np.isfinite(a[i]) and 0 < a[i] < 1):
            raise DataError(f"{what}: run {ids[i]!r}: residual agent / initial agent = {a[i]:.4g}; "
                            "it must lie between 0 and 1 (check residual [A] [mol/L])",
                            column="residual [A] [mol/L]")
        if not (np.isfinite(m[i]) and 0 < m[i] < 1):
            raise DataError(f"{what}: run {ids[i]!r}: residual monomer fraction {m[i]:.4g} must lie "
                            "between 0 and 1 (check residual [M] [mol/L] or conversion [-])")
    lna, lnm = np.log(a), np.log(m)
    C = lna / lnm
    if u_agent_residual is not None or u_m is not None:
        u_a = (np.zeros(n) if u_agent_residual is None
               else np.atleast_1d(np.asarray(u_agent_residual, dtype=float)) / A0)
        um = np.zeros(n) if u_m is None else u_m
        uC = np.sqrt((u_a / (a * lnm)) ** 2 + (lna * um / (m * lnm**2)) ** 2)
    else:
        uC = np.full(n, np.nan)
    warns: list[str] = []
    if np.all(np.isfinite(uC)) and np.all(uC > 0):
        wts = 1 / uC**2
        val = float(np.sum(wts * C) / np.sum(wts))
        se = float(np.sqrt(1 / np.sum(wts)))
        dof = n - 1
        if n > 1:
            birge2 = float(np.sum(wts * (C - val) ** 2) / dof)
            if birge2 > 1:
                se *= np.sqrt(birge2)
        q = t_quantile(0.5 + confidence / 2, dof if n > 1 else 0)
    elif n > 1:
        val = float(np.mean(C))
        se = float(np.std(C, ddof=1) / np.sqrt(n))
        q = t_quantile(0.5 + confidence / 2, n - 1)
    else:
        val, se, q = float(C[0]), float("nan"), float("nan")
        warns.append(f"{what}: one run and no uncertainties given: the consumption constant has "
                     "no standard error (give u(residual [A]) [mol/L] or more runs)")
    const = FittedValue(name, val, se, val - q * se, val + q * se, confidence=confidence)
    for msg in warns:
        _warnings.warn(msg, EstimatorWarning, stacklevel=2)
    return ConsumptionResult(run_ids=ids, C_runs=C, C_runs_stderr=uC, constant=const,
                             warnings=tuple(warns))
