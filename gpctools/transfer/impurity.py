"""Impurity-driven transfer: runs above the Mayo line, and an intercept above expectation.

An impurity that transfers (a thiol left in a vessel, a stabilizer, a solvent
contaminant) adds Δ(1/DPn) = C_X [X]/[M] to the affected runs. Two signatures:

(a) **one run above the line.** A robust fit (soft-L1 start, then Tukey-bisquare
    iteratively reweighted least squares) finds the line of the clean runs, so one
    contaminated run cannot drag the slope. Each run is then tested by its externally
    studentized residual: the line is refitted (weighted least squares) on the other runs
    the robust fit kept, and the run's prediction error is divided by its standard error,
    t_i = e_i / (s_(i) sqrt(1/w_i^2 + x_i (X'W^2X)_(i)^-1 x_i')), which follows Student's t
    with n_(i) − p degrees of freedom for a clean run. A run is flagged when t_i exceeds the
    one-sided quantile at the stated confidence; by default the level holds for the whole
    series (Šidák: per-run α = 1 − confidence^(1/n)), so a clean series is flagged with
    probability at most 1 − confidence.
(b) **the intercept above its expected value** (all runs contaminated alike): 1/DPn0 is
    compared with a control run without agent, a given C_M plus kinetic term, or a given
    value: z = (a − e)/sqrt(se_a^2 + se_e^2) against the one-sided t quantile.

The excess 1/DPn converts to an impurity level for a given impurity constant C_X:
[X]/[M] = excess/C_X (× 1e6 for ppm by mol of monomer) and [X] = excess·[M]/C_X [mol/L].

References
----------
Beaton and Tukey, Technometrics 1974 (bisquare weights, c = 4.685). Belsley, Kuh, Welsch,
Regression Diagnostics (Wiley, 1980): externally studentized residuals follow t with
n − p − 1 degrees of freedom. Šidák, J. Am. Stat. Assoc. 1967 (family-wise level).
SCIENCE.md sections 3 and 9 (impurity level ≈ Δ(1/DPn)·[M]/C_X).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.chainlength import impurity_ratio
from gpctools.errors import DataError
from gpctools.transfer._stats import as_str_tuple, finite_or_none, t_quantile
from gpctools.transfer.mayo import MayoFit, check_design

__all__ = [
    "RunFlag",
    "ImpurityCheck",
    "InterceptCheck",
    "robust_fit",
    "flag_runs",
    "flag_runs_cumulative",
    "check_intercept",
    "impurity_level",
]

#: Tukey bisquare tuning constant (95 % efficiency at the normal), Beaton and Tukey 1974.
TUKEY_C = 4.685
#: MAD -> standard deviation for normal data, 1/Φ^-1(3/4).
MAD_TO_SD = 1.482602218505602


def impurity_level(excess: Any, C_X: float, monomer_conc: Any = None) -> tuple[np.ndarray, np.ndarray]:
    """Impurity equivalent to an excess 1/DPn: (ppm by mol of monomer [-·1e6], [X] [mol/L]).

    [X]/[M] = excess/C_X (:func:`gpctools.chainlength.impurity_ratio`, the instantaneous
    relation); [X] = [X]/[M]·[M] (NaN when [M] is not known); both NaN without a C_X > 0.

    Examples
    --------
    >>> ppm, _ = impurity_level(1.5e-4, 15.0)
    >>> round(float(ppm), 6)
    10.0

    References
    ----------
    SCIENCE.md section 9 [derived]: 10 ppm (mol) of a thiol with C = 15 adds 1.5e-4 to 1/DPn.
    """
    ex = np.asarray(excess, dtype=float)
    if not (C_X and C_X > 0):
        nan = np.full(np.shape(ex), np.nan)
        return nan, nan
    ratio = impurity_ratio(ex, C_X)
    ppm = ratio * 1e6
    conc = ratio * (np.asarray(monomer_conc, dtype=float) if monomer_conc is not None else np.nan)
    return ppm, conc


def robust_fit(
    X: np.ndarray, y: np.ndarray, *, c: float = TUKEY_C, max_iter: int = 30
) -> tuple[np.ndarray, np.ndarray, float]:
    """Robust fit of y ≈ X β for relative (proportional) errors.

    Residuals are relative, r_i = (y_i − x_i β)/ŷ_i. A soft-L1 fit
    (scipy.optimize.least_squares) gives the start; Tukey-bisquare IRLS with the scale
    1.4826·median|r| refines it.

    Returns
    -------
    beta : numpy.ndarray
    robust_weights : numpy.ndarray
        Bisquare weights in [0, 1] (0: rejected) [-].
    scale : float
        Robust relative scatter [-].

    References
    ----------
    Beaton and Tukey, Technometrics 1974; Huber, Robust Statistics (Wiley, 1981).
    """
    from scipy.optimize import least_squares

    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    beta, *_ = np.linalg.lstsq(X / y[:, None], np.ones_like(y), rcond=None)
    r0 = (y - X @ beta) / y
    f_scale = max(MAD_TO_SD * float(np.median(np.abs(r0))), 1e-6)
    sol = least_squares(lambda b: (X @ b - y) / y, beta, loss="soft_l1", f_scale=f_scale)
    beta = sol.x
    u = np.ones_like(y)
    scale = f_scale
    for _ in range(max_iter):
        pred = X @ beta
        ref = np.where(pred > 0, pred, y)
        r = (y - pred) / ref
        scale = MAD_TO_SD * float(np.median(np.abs(r - np.median(r))))
        if scale <= 0:
            break
        z = r / (c * scale)
        u = np.where(np.abs(z) < 1, (1 - z**2) ** 2, 0.0)
        if np.count_nonzero(u) < X.shape[1]:
            break
        sw = np.sqrt(u) / ref
        new, *_ = np.linalg.lstsq(X * sw[:, None], y * sw, rcond=None)
        if np.allclose(new, beta, rtol=1e-7, atol=0.0):
            beta = new
            break
        beta = new
    return beta, u, scale


@dataclass(frozen=True)
class RunFlag:
    """The outlier test of one run against the line of the other (clean) runs.

    Attributes
    ----------
    run_id : str
    t : float
        Externally studentized residual [-] (NaN when too few runs to test).
    dof : int
        Its degrees of freedom.
    threshold : float
        One-sided t quantile used [-].
    p_value : float
        One-sided p-value of t [-].
    flagged : bool
        True when t > threshold (the run lies above the line).
    excess, excess_stderr : float
        1/DPn minus the line of the other runs, and its standard error [-].
    impurity_ppm : float
        Equivalent impurity, ppm by mol of monomer, for C_X [-·1e6].
    impurity_conc : float
        Equivalent impurity concentration [mol/L].
    robust_weight : float
        The run's bisquare weight in the robust fit [-].
    reason : str
    """

    run_id: str
    t: float
    dof: int
    threshold: float
    p_value: float
    flagged: bool
    excess: float
    excess_stderr: float
    impurity_ppm: float
    impurity_conc: float
    robust_weight: float
    reason: str

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "run": self.run_id,
            "studentized residual [-]": finite_or_none(self.t),
            "degrees of freedom": self.dof,
            "threshold [-]": finite_or_none(self.threshold),
            "p-value (one-sided) [-]": finite_or_none(self.p_value),
            "flagged": self.flagged,
            "excess 1/DPn [-]": finite_or_none(self.excess),
            "excess standard error [-]": finite_or_none(self.excess_stderr),
            "impurity [ppm mol]": finite_or_none(self.impurity_ppm),
            "impurity [mol/L]": finite_or_none(self.impurity_conc),
            "robust weight [-]": finite_or_none(self.robust_weight),
            "reason": self.reason,
        }


@dataclass(frozen=True)
class ImpurityCheck:
    """Outlier tests of all runs of a series for one estimator.

    Attributes
    ----------
    estimator : str
    confidence : float
        Stated confidence [-].
    adjust : str
        ``"series"`` (level holds for the whole series) or ``"run"`` (per run).
    flags : tuple of RunFlag
    robust_beta : numpy.ndarray
        Robust-fit coefficients (intercept first when free) [-].
    robust_scale : float
        Robust relative scatter of 1/DPn [-].
    C_X : float or None
        Impurity transfer constant used for the levels [-].
    warnings : tuple of str
    """

    estimator: str
    confidence: float
    adjust: str
    flags: tuple[RunFlag, ...]
    robust_beta: np.ndarray
    robust_scale: float
    C_X: float | None
    warnings: tuple[str, ...] = ()

    @property
    def flagged_ids(self) -> tuple[str, ...]:
        """Run ids flagged as above the line."""
        return tuple(f.run_id for f in self.flags if f.flagged)

    def flag(self, run_id: str) -> RunFlag:
        """The test of run ``run_id``."""
        for f in self.flags:
            if f.run_id == run_id:
                return f
        raise KeyError(run_id)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "estimator": self.estimator,
            "confidence": self.confidence,
            "level applies to": self.adjust,
            "flagged runs": list(self.flagged_ids),
            "robust coefficients [-]": [float(b) for b in self.robust_beta],
            "robust relative scatter [-]": finite_or_none(self.robust_scale),
            "impurity C_X [-]": finite_or_none(self.C_X),
            "runs": [f.summary() for f in self.flags],
            "warnings": list(self.warnings),
        }


def _loo(X: np.ndarray, target: np.ndarray, wts: np.ndarray, ref: np.ndarray, i: int,
         known_sd: float | None) -> tuple[float, float, int]:
    """Prediction error of run i from the weighted line of the runs in ``ref`` (i excluded):
    (excess, its standard error, degrees of freedom; 0 dof means a known scatter)."""
    p = X.shape[1]
    Xr, yr, wr = X[ref], target[ref], wts[ref]
    nr = int(ref.sum())
    dof = nr - p
    if nr < p or (known_sd is None and dof < 1):
        return float("nan"), float("nan"), max(dof, 0)
    Aw = Xr * wr[:, None]
    beta_i, *_ = np.linalg.lstsq(Aw, yr * wr, rcond=None)
    if known_sd is None:
        res = (yr - Xr @ beta_i) * wr
        s2 = float(res @ res) / dof
    else:
        s2 = known_sd**2
        dof = 0
    cov0 = np.linalg.pinv(Aw.T @ Aw)
    xi = X[i]
    e = float(target[i] - xi @ beta_i)
    var = s2 * (1.0 / wts[i] ** 2 + float(xi @ cov0 @ xi))
    return e, (float(np.sqrt(var)) if var > 0 else float("nan")), dof


def _t_upper(alpha: float, dof: int) -> float:
    from scipy import special

    if dof <= 0:
        return float(special.ndtri(1 - alpha))
    return float(special.stdtrit(dof, 1 - alpha))


def _t_sf(t: float, dof: int) -> float:
    from scipy import special

    if not np.isfinite(t):
        return float("nan")
    if dof <= 0:
        return float(special.ndtr(-t))
    return float(special.stdtr(dof, -t))


def flag_runs(
    y: Sequence[float] | np.ndarray,
    columns: Mapping[str, Any],
    *,
    intercept: float | None = None,
    run_ids: Sequence[Any] | None = None,
    monomer_conc: Sequence[float] | np.ndarray | None = None,
    C_X: float | None = None,
    confidence: float = 0.99,
    adjust: str = "series",
    rel_error: float | None = None,
    max_outliers: int | None = None,
    estimator: str = "Mn",
    what: str = "this run series",
) -> ImpurityCheck:
    """Flag runs whose 1/DPn lies above the Mayo line of the other runs beyond ``confidence``.

    Sequential deletion, one-sided (a generalized extreme-studentized-deviate procedure):
    at each step every remaining run gets its externally studentized residual against the
    weighted line of the other remaining runs; the largest is removed; after at most
    ``max_outliers`` steps the number of flagged runs is the last step whose largest
    residual exceeded its threshold. Masking by a second contaminated run is thereby
    avoided. Weights are 1/(1/DPn) of a robust (Tukey-bisquare) line. The reported t of
    every run is finally taken against the line of the unflagged runs.

    Parameters
    ----------
    y : array-like
        1/DPn per run [-].
    columns : mapping
        Term -> ratio [X]/[M] per run [-] (as for :func:`~gpctools.transfer.mayo.fit_mayo`).
    intercept : float, optional
        Known (fixed) 1/DPn0 [-].
    run_ids : sequence, optional
    monomer_conc : array-like, optional
        [M] per run [mol/L], for the impurity concentration.
    C_X : float, optional
        Transfer constant of the suspected impurity [-] (for ppm and mol/L).
    confidence : float
        One-sided confidence of a flag [-] (default 0.99).
    adjust : {"series", "run"}
        ``"series"`` (default): the level holds for the whole series (Šidák, per-run
        α = 1 − confidence^(1/n)); ``"run"``: per run.
    rel_error : float, optional
        Known relative standard error of one 1/DPn [-] (e.g. from replicate injections);
        the test then uses the normal distribution instead of the scatter of the other
        runs, which gives more power in short series. Default: estimated from the runs.
    max_outliers : int, optional
        Most runs that can be flagged. Default: n − p − 3 but at least 1 and at most a
        third of the runs (0 when n − p < 2); with ``rel_error`` n − p − 1, at most a third.
    estimator : str
        Label of the 1/DPn estimate.
    what : str
        Series name for messages.

    Returns
    -------
    ImpurityCheck

    References
    ----------
    Rosner, Technometrics 1983 (generalized ESD many-outlier procedure). Beaton and
    Tukey 1974; Belsley, Kuh, Welsch 1980; Šidák 1967 (see module docstring).
    """
    yv = np.asarray(y, dtype=float).ravel()
    n = yv.size
    ids = as_str_tuple(run_ids) if run_ids is not None else tuple(str(i + 1) for i in range(n))
    names = list(columns)
    T = np.column_stack([np.asarray(columns[k], dtype=float).ravel() for k in names])
    fixed = intercept is not None
    check_design(dict(zip(names, T.T, strict=True)), intercept=not fixed, what=what)
    _check_inputs(yv, adjust, rel_error, what)
    X = T if fixed else np.column_stack([np.ones(n), T])
    target = yv - (float(intercept) if fixed else 0.0)
    p = X.shape[1]
    if np.all(target > 0):
        beta_r, u, scale = robust_fit(X, target)
    else:
        beta_r, u, scale = np.linalg.lstsq(X, target, rcond=None)[0], np.ones(n), float("nan")
    pred_r = X @ beta_r + (float(intercept) if fixed else 0.0)
    wts = 1.0 / np.where(pred_r > 0, pred_r, yv)

    def loo(ref: np.ndarray, i: int) -> tuple[float, float, int]:
        return _loo(X, target, wts, ref, i, rel_error)

    return _flag_core(ids, p, loo, u, beta_r, scale, monomer_conc=monomer_conc, C_X=C_X,
                      confidence=confidence, adjust=adjust, rel_error=rel_error,
                      max_outliers=max_outliers, estimator=estimator, what=what)


def _check_inputs(yv: np.ndarray, adjust: str, rel_error: float | None, what: str) -> None:
    if np.any(~np.isfinite(yv)) or np.any(yv <= 0):
        raise DataError(f"{what}: impurity flags need a positive 1/DPn for every run")
    if adjust not in ("series", "run"):
        raise DataError(f"adjust must be 'series' or 'run', not {adjust!r}", key="impurity_adjust")
    if rel_error is not None and not (rel_error > 0):
        raise DataError(f"rel_error must be positive, not {rel_error!r}", key="rel_error")


def _flag_core(
    ids: tuple[str, ...],
    p: int,
    loo: Any,
    u: np.ndarray,
    beta_r: np.ndarray,
    scale: float,
    *,
    monomer_conc: Any,
    C_X: float | None,
    confidence: float,
    adjust: str,
    rel_error: float | None,
    max_outliers: int | None,
    estimator: str,
    what: str,
) -> ImpurityCheck:
    """Sequential one-sided deletion test given a leave-out predictor ``loo(ref, i)``."""
    n = len(ids)
    if max_outliers is None:
        # the first test needs 1 degree of freedom; every further one at least 3, so that
        # piling up deletions does not end on a scatter estimated from a handful of runs
        if rel_error is not None:
            max_outliers = max(0, min(n - p - 1, n // 3))
        elif n - p - 1 < 1:
            max_outliers = 0
        else:
            max_outliers = max(1, min(n // 3, n - p - 3))

    def alpha_for(count: int) -> float:
        return (1 - confidence ** (1.0 / count)) if adjust == "series" else (1 - confidence)

    active = np.ones(n, dtype=bool)
    steps: list[tuple[int, bool]] = []
    for _ in range(max_outliers):
        best, best_t, best_thr = -1, -np.inf, np.inf
        count = int(active.sum())
        for i in np.flatnonzero(active):
            ref = active.copy()
            ref[i] = False
            e, sd, dof = loo(ref, int(i))
            t = e / sd if np.isfinite(sd) and sd > 0 else float("nan")
            if np.isfinite(t) and t > best_t:
                best, best_t, best_thr = int(i), t, _t_upper(alpha_for(count), dof)
        if best < 0:
            break
        steps.append((best, bool(best_t > best_thr)))
        active[best] = False
    n_out = 0
    for _, exceeded in steps:
        if not exceeded:
            break
        n_out += 1
    flagged_idx = {i for i, _ in steps[:n_out]}
    clean = np.ones(n, dtype=bool)
    clean[list(flagged_idx)] = False
    mconc = (np.full(n, np.nan) if monomer_conc is None
             else np.asarray(monomer_conc, dtype=float).ravel())
    flags = []
    untestable = []
    count_all = n - len(flagged_idx)
    for i in range(n):
        ref = clean.copy()
        ref[i] = False
        e, sd, dof = loo(ref, i)
        if not np.isfinite(sd):
            untestable.append(ids[i])
            flags.append(RunFlag(ids[i], float("nan"), dof, float("nan"), float("nan"), False,
                                 float("nan"), float("nan"), float("nan"), float("nan"),
                                 float(u[i]), "too few other runs to test this run"))
            continue
        t = e / sd
        thr = _t_upper(alpha_for(count_all + (1 if i in flagged_idx else 0)), dof)
        pval = _t_sf(t, dof)
        flagged = i in flagged_idx
        ppm, conc = impurity_level(e, C_X or 0.0, mconc[i])
        if flagged:
            lvl = ""
            if C_X:
                lvl = f"; equivalent to {float(ppm):.3g} ppm (mol) of an impurity with C_X = {C_X:g}"
                if np.isfinite(conc):
                    lvl += f" ({float(conc):.3g} mol/L)"
            reason = (f"above the Mayo line ({estimator}): studentized residual {t:.1f} > {thr:.1f} "
                      f"(one-sided {100 * confidence:g} %"
                      f"{' for the series' if adjust == 'series' else ''}); excess 1/DPn "
                      f"{e:.3g} ± {sd:.2g}{lvl}: transfer to an impurity (or an agent overcharge)")
        elif t < -thr and dof >= 3:
            reason = (f"below the Mayo line ({estimator}): studentized residual {t:.1f}; not an "
                      "impurity signature: check the agent charge and the molar masses")
        elif adjust == "series" and dof >= 3 and t > _t_upper(1 - confidence, dof):
            reason = (f"somewhat above the Mayo line ({estimator}): studentized residual {t:.1f} "
                      f"exceeds the per-run {100 * confidence:g} % level but not the level for "
                      "the series; not flagged (repeat the run if in doubt)")
        else:
            reason = ""
        flags.append(RunFlag(ids[i], float(t), dof, thr, pval, flagged, e, sd, float(ppm),
                             float(conc), float(u[i]), reason))
    warns: list[str] = []
    if untestable or max_outliers == 0:
        warns.append(f"{what} ({estimator}): too few runs to test for an impurity-contaminated run "
                     f"(at least {p + 3} runs are needed, or give rel_error)")
    return ImpurityCheck(
        estimator=estimator,
        confidence=confidence,
        adjust=adjust,
        flags=tuple(flags),
        robust_beta=np.asarray(beta_r, dtype=float),
        robust_scale=float(scale),
        C_X=C_X,
        warnings=tuple(warns),
    )


def flag_runs_cumulative(
    y: Sequence[float] | np.ndarray,
    conversion: Sequence[float] | np.ndarray,
    columns: Mapping[str, Any],
    start: Sequence[float],
    *,
    estimator: str = "Mn",
    windows: Sequence[tuple[float, float]] | None = None,
    M0: float | None = None,
    run_ids: Sequence[Any] | None = None,
    monomer_conc: Sequence[float] | np.ndarray | None = None,
    C_X: float | None = None,
    confidence: float = 0.99,
    adjust: str = "series",
    rel_error: float | None = None,
    max_outliers: int | None = None,
    what: str = "this run series",
) -> ImpurityCheck:
    """:func:`flag_runs` for runs at finite conversion, against the cumulative Mayo model.

    Each leave-out prediction refits the cumulative model (1/DPn0 and the constants) on the
    other runs (scipy.optimize.least_squares, weights 1/prediction); the prediction's
    standard error combines the scatter with the parameter covariance propagated through
    the model's gradient (first order). Robust weights are those of a soft-L1 fit.

    Parameters
    ----------
    y, conversion, columns
        As for :func:`gpctools.transfer.drift.fit_cumulative`.
    start : sequence of float
        Start values (1/DPn0, then the constants), e.g. from a drift fit.
    estimator, windows, M0
        The cumulative model (see :func:`gpctools.transfer.drift.cumulative_model`).
    run_ids, monomer_conc, C_X, confidence, adjust, rel_error, max_outliers, what
        As for :func:`flag_runs`.

    References
    ----------
    Rosner 1983; Belsley, Kuh, Welsch 1980; SCIENCE.md section 5 (the model).
    """
    from scipy.optimize import least_squares

    from gpctools.transfer.drift import cumulative_model

    yv = np.asarray(y, dtype=float).ravel()
    n = yv.size
    ids = as_str_tuple(run_ids) if run_ids is not None else tuple(str(i + 1) for i in range(n))
    _check_inputs(yv, adjust, rel_error, what)
    R = {k: np.asarray(v, dtype=float).ravel() for k, v in columns.items()}
    model = cumulative_model(estimator, np.asarray(conversion, dtype=float).ravel(), R,
                             windows=windows, M0=M0)
    theta0 = np.asarray(start, dtype=float)
    p = theta0.size

    def f(theta: np.ndarray) -> np.ndarray:
        return model(theta[0], theta[1:])

    plain = least_squares(lambda th: (f(th) - yv) / yv, theta0, x_scale="jac")
    r0 = plain.fun
    f_scale = max(MAD_TO_SD * float(np.median(np.abs(r0))), 1e-6)
    rob = least_squares(lambda th: (f(th) - yv) / yv, plain.x, loss="soft_l1",
                        f_scale=f_scale, x_scale="jac")
    theta_r = rob.x
    pred_r = f(theta_r)
    wts = 1.0 / np.where(pred_r > 0, pred_r, yv)
    r = (yv - pred_r) / pred_r
    scale = MAD_TO_SD * float(np.median(np.abs(r - np.median(r))))
    z = r / (TUKEY_C * scale) if scale > 0 else np.zeros(n)
    u = np.where(np.abs(z) < 1, (1 - z**2) ** 2, 0.0)

    def loo(ref: np.ndarray, i: int) -> tuple[float, float, int]:
        nr = int(ref.sum())
        dof = nr - p
        if nr < p or (rel_error is None and dof < 1):
            return float("nan"), float("nan"), max(dof, 0)
        sol = least_squares(lambda th: ((f(th) - yv) * wts)[ref], theta_r, x_scale="jac")
        th = sol.x
        J = sol.jac
        pred = f(th)
        if rel_error is None:
            res = ((yv - pred) * wts)[ref]
            s2 = float(res @ res) / dof
        else:
            s2 = rel_error**2
            dof = 0
        cov0 = np.linalg.pinv(J.T @ J)
        g = np.empty(p)
        for j in range(p):
            h = 1e-6 * max(abs(th[j]), 1e-9)
            t2 = th.copy()
            t2[j] += h
            g[j] = (f(t2)[i] - pred[i]) / h
        e = float(yv[i] - pred[i])
        var = s2 * (1.0 / wts[i] ** 2 + float(g @ cov0 @ g))
        return e, (float(np.sqrt(var)) if var > 0 else float("nan")), dof

    return _flag_core(ids, p, loo, u, theta_r, scale, monomer_conc=monomer_conc, C_X=C_X,
                      confidence=confidence, adjust=adjust, rel_error=rel_error,
                      max_outliers=max_outliers, estimator=estimator, what=what)


@dataclass(frozen=True)
class InterceptCheck:
    """Is 1/DPn0 above what it should be?

    Attributes
    ----------
    estimator : str
    intercept, intercept_stderr : float
        Fitted 1/DPn0 and its standard error [-].
    expected, expected_stderr : float
        Expected 1/DPn0 and its standard error [-].
    source : str
        Where the expectation comes from.
    z : float
        (intercept − expected)/combined standard error [-].
    threshold : float
        One-sided quantile at ``confidence`` [-].
    flagged : bool
    lower_bound : bool
        True when the expectation is only a lower bound (C_M without kinetic term): no flag,
        the excess is then an upper bound of the impurity.
    excess : float
        intercept − expected [-].
    impurity_ppm, impurity_conc : float
        Equivalent impurity (ppm by mol of monomer; mol/L) for C_X.
    message : str
    """

    estimator: str
    intercept: float
    intercept_stderr: float
    expected: float
    expected_stderr: float
    source: str
    z: float
    threshold: float
    flagged: bool
    lower_bound: bool
    excess: float
    impurity_ppm: float
    impurity_conc: float
    message: str

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "estimator": self.estimator,
            "intercept 1/DPn0 [-]": finite_or_none(self.intercept),
            "intercept standard error [-]": finite_or_none(self.intercept_stderr),
            "expected 1/DPn0 [-]": finite_or_none(self.expected),
            "expected standard error [-]": finite_or_none(self.expected_stderr),
            "expected from": self.source,
            "z [-]": finite_or_none(self.z),
            "threshold [-]": finite_or_none(self.threshold),
            "flagged": self.flagged,
            "expectation is a lower bound": self.lower_bound,
            "excess 1/DPn [-]": finite_or_none(self.excess),
            "impurity [ppm mol]": finite_or_none(self.impurity_ppm),
            "impurity [mol/L]": finite_or_none(self.impurity_conc),
            "message": self.message,
        }


def check_intercept(
    fit: MayoFit,
    expected: float,
    expected_stderr: float = 0.0,
    *,
    source: str = "given value",
    lower_bound: bool = False,
    confidence: float = 0.99,
    C_X: float | None = None,
    monomer_conc: float | None = None,
) -> InterceptCheck:
    """Compare the fitted intercept 1/DPn0 with its expected value (one-sided).

    Parameters
    ----------
    fit : MayoFit
        A fit with a free intercept.
    expected, expected_stderr : float
        Expected 1/DPn0 and its standard error [-] (from a control run without agent, from
        C_M plus the kinetic term, or given).
    source : str
        Description of the expectation (for the report).
    lower_bound : bool
        The expectation is only a lower bound (e.g. C_M alone, kinetic term unknown):
        never flag; report the excess as an upper bound of the impurity.
    confidence : float
        One-sided confidence [-] (default 0.99).
    C_X : float, optional
        Impurity transfer constant [-].
    monomer_conc : float, optional
        Mean [M] of the series [mol/L].

    References
    ----------
    SCIENCE.md section 3 (1/DPn0 = kinetic term + C_M + C_S[S]/[M] + C_I[I]/[M]).
    """
    a, sa = fit.intercept.value, fit.intercept.stderr
    if getattr(fit, "intercept_fixed", False):  # a DriftFit always has a free intercept
        raise DataError("the intercept was fixed in this fit; there is nothing to check")
    comb = float(np.hypot(sa, expected_stderr))
    excess = a - expected
    z = excess / comb if comb > 0 else float("inf") if excess > 0 else float("nan")
    thr = t_quantile(confidence, fit.dof)
    ppm, conc = impurity_level(excess, C_X or 0.0, monomer_conc)
    flagged = bool(not lower_bound and np.isfinite(z) and z > thr) or bool(
        not lower_bound and z == float("inf"))
    lvl = ""
    if C_X:
        lvl = (f"; equivalent to {float(ppm):.3g} ppm (mol) of an impurity with C_X = {C_X:g}"
               + (f" ({float(conc):.3g} mol/L)" if np.isfinite(conc) else ""))
    if lower_bound:
        msg = (f"intercept 1/DPn0 = {a:.3g} ± {sa:.2g} exceeds the lower bound {expected:.3g} "
               f"({source}) by {excess:.3g}: kinetic term plus any impurity{lvl.replace('equivalent to', 'at most')}")
    elif flagged:
        msg = (f"intercept 1/DPn0 = {a:.3g} ± {sa:.2g} lies above its expected value "
               f"{expected:.3g} ± {expected_stderr:.2g} ({source}) by {z:.1f} standard errors "
               f"(one-sided {100 * confidence:g} % threshold {thr:.1f}); excess {excess:.3g}{lvl}: "
               "an impurity transferring in every run (monomer stabilizer, solvent "
               "contaminant) or more initiator/higher temperature than expected")
    else:
        msg = (f"intercept 1/DPn0 = {a:.3g} ± {sa:.2g} agrees with the expected "
               f"{expected:.3g} ± {expected_stderr:.2g} ({source}) (z = {z:.1f})")
    return InterceptCheck(
        estimator=fit.estimator,
        intercept=a,
        intercept_stderr=sa,
        expected=float(expected),
        expected_stderr=float(expected_stderr),
        source=source,
        z=float(z),
        threshold=float(thr),
        flagged=flagged,
        lower_bound=lower_bound,
        excess=float(excess),
        impurity_ppm=float(ppm),
        impurity_conc=float(conc),
        message=msg,
    )
