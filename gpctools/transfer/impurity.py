"""Impurity-driven transfer: runs above the Mayo line, and an intercept above expectation.

An impurity that transfers (a thiol left in a vessel, a stabilizer, a solvent
contaminant) adds Δ(1/DPn) = C_X [X]/[M] to the affected runs. Two signatures:

(a) **runs above the line** (:func:`flag_runs`). A robust fit (Huber, then Tukey-bisquare
    iteratively reweighted least squares) finds the line of the clean runs; the model is
    linearised there (its Jacobian; exact for the Mn estimator at low conversion), so
    every leave-one-out quantity has a closed form and no run is refitted. Rosner's
    generalized extreme-studentized-deviate procedure then removes, K times, the run with
    the largest externally studentized residual
    t_i = r_i/(s_(i) √(1 − h_ii)) (weighted residual r, hat value h, scale s_(i) without
    the run) and declares as contaminated the runs removed up to the **last** step whose
    statistic exceeds its critical value, so two contaminated runs cannot hide each
    other. The critical value of step k with n_a runs left is the one-sided t quantile at
    α_k = 1 − (1 − f_k·α)^(1/n_a) (Šidák over the runs left; f_1 = :data:`ESD_FIRST_FACTOR`
    and f_k = :data:`ESD_LEVEL_FACTOR` for k >= 2, measured by simulation so that clean
    series keep the stated false-flag rate).
    Finally every run is tested against the line of the runs not flagged, and
    "flagged" means exactly "statistic above its threshold" (iterated until stable).
(b) **the intercept above its expected value** (all runs contaminated alike): 1/DPn0 is
    compared with a control run without agent, a given C_M plus kinetic term, or a given
    value: z = (a − e)/sqrt(se_a^2 + se_e^2) against the one-sided t quantile.

The scale of the test is the scatter of the runs about the line (Student t with the
reference runs' degrees of freedom), pooled with measured noise where the data carry it:
replicate injections (their within-run scatter, Σ(n_i − 1) degrees of freedom) or each
run's own uncertainty of 1/DPn propagated from its chromatogram (one degree of freedom
per run). Pooling is used only while the scatter about the line agrees with the measured
noise (one-sided F test at 5 %); otherwise the scatter alone sets the scale. The scale is
never taken below :data:`SCALE_FLOOR` (0.3 % of one observation), which keeps a handful of
reference runs that happen to lie almost on a line from turning ordinary scatter into a
flag. A known relative error (``rel_error``) replaces all of this (normal quantile).

The excess 1/DPn converts to an impurity level for a given impurity constant C_X:
[X]/[M] = excess/C_X at low conversion and [X]0/[M]0 = excess·x/(1 − (1 − x)^C_X) for
polymer collected up to conversion x (:func:`gpctools.chainlength.impurity_ratio_cumulative`),
× 1e6 for ppm by mol of monomer, × [M] for mol/L. Without a candidate C_X the levels for
C_X = 1, 10 and 100 are given.

References
----------
Rosner, Technometrics 1983 (generalized ESD). Beaton and Tukey, Technometrics 1974
(bisquare weights, c = 4.685); Huber, Robust Statistics (Wiley, 1981). Belsley, Kuh,
Welsch, Regression Diagnostics (Wiley, 1980): externally studentized residuals and their
closed form. Šidák, J. Am. Stat. Assoc. 1967. docs/science.md, sections 5.3, 9 and 11.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools.chainlength import impurity_ratio, impurity_ratio_cumulative
from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none
from gpctools.transfer._fit import linear_solve, solve
from gpctools.transfer._stats import (
    as_str_tuple,
    gauss_newton,
    t_quantile,
    t_sf,
    t_upper,
)
from gpctools.transfer.mayo import MayoFit, check_design
from gpctools.transfer.model import SeriesModel

__all__ = [
    "RunFlag",
    "ImpurityCheck",
    "InterceptCheck",
    "robust_fit",
    "flag_runs",
    "flag_runs_cumulative",
    "check_intercept",
    "impurity_level",
    "GENERIC_C_X",
    "ESD_LEVEL_FACTOR",
]

#: Tukey bisquare tuning constant (95 % efficiency at the normal), Beaton and Tukey 1974.
TUKEY_C = 4.685
#: Huber tuning constant (95 % efficiency at the normal), Huber 1981.
HUBER_C = 1.345
#: MAD -> standard deviation for normal data, 1/Φ^-1(3/4).
MAD_TO_SD = 1.482602218505602
#: Impurity constants for the equivalent levels when no candidate is named [-].
GENERIC_C_X = (1.0, 10.0, 100.0)
#: Factor on the series level α of the second and later ESD steps, measured on simulated
#: clean series so that the false-flag rate per series stays at or below α
#: (``python bench/bench_transfer.py calibrate``). The first step keeps Šidák's level: on
#: its own it holds α; the later steps, each another chance for a clean series to be
#: flagged, share what is left.
ESD_LEVEL_FACTOR = 0.5
#: Factor on the series level α of the first ESD step (and of the final test when nothing
#: is flagged), from the same simulations: with Šidák's level at every step clean series
#: were flagged 1.3-1.8 % of the time at α = 1 %; with 0.6 and 0.5, 0.0-1.15 % per design
#: (16 designs, 2000 series each, binomial SE 0.2 %).
ESD_FIRST_FACTOR = 0.6
#: One-sided level of the F test that decides whether measured noise may be pooled [-].
POOL_F_LEVEL = 0.05
#: Smallest relative scatter of one observation the test accepts from a few reference
#: runs [-]. With two or three degrees of freedom the scatter of the reference runs can
#: come out far below anything SEC achieves (repeat injections of one sample rarely agree
#: better than about 0.3 % in Mw [common practice; docs/science.md, section 7.6 gives
#: repeatability under 3 %]), and a clean run would then stand 20 "standard errors" off.
SCALE_FLOOR = 0.003


def impurity_level(excess: Any, C_X: float, monomer_conc: Any = None,
                   conversion: Any = None) -> tuple[np.ndarray, np.ndarray]:
    """Impurity equivalent to an excess 1/DPn: (ppm by mol of monomer [-·1e6], [X] [mol/L]).

    [X]/[M] = excess/C_X at low conversion (:func:`gpctools.chainlength.impurity_ratio`);
    with a ``conversion`` x > 0 the cumulative relation
    [X]0/[M]0 = excess·x/(1 − (1 − x)^C_X) (the impurity is consumed like an agent).
    [X] = ratio·[M] (NaN when [M] is not known); both NaN without a C_X > 0.

    Examples
    --------
    >>> ppm, _ = impurity_level(1.5e-4, 15.0)
    >>> round(float(ppm), 6)
    10.0

    References
    ----------
    docs/science.md, section 9 [derived]: 10 ppm (mol) of a thiol with C = 15 adds 1.5e-4
    to 1/DPn; section 5.3 [derived]: the cumulative relation.
    """
    ex = np.asarray(excess, dtype=float)
    if not (C_X and C_X > 0):
        nan = np.full(np.shape(ex), np.nan)
        return nan, nan
    if conversion is None or not np.any(np.asarray(conversion, dtype=float) > 0):
        ratio = impurity_ratio(ex, C_X)
    else:
        x = np.nan_to_num(np.asarray(conversion, dtype=float), nan=0.0)
        ratio = impurity_ratio_cumulative(ex, C_X, x)
    ppm = ratio * 1e6
    conc = ratio * (np.asarray(monomer_conc, dtype=float) if monomer_conc is not None else np.nan)
    return ppm, conc


def robust_fit(
    X: np.ndarray, y: np.ndarray, *, c: float = TUKEY_C, max_iter: int = 30
) -> tuple[np.ndarray, np.ndarray, float]:
    """Robust fit of y ≈ X β for relative (proportional) errors.

    Residuals are relative, r_i = (y_i − x_i β)/ŷ_i; Huber IRLS (convex, so it starts
    anywhere) gives the start, Tukey-bisquare IRLS with the scale 1.4826·MAD refines it.

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
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    beta, u, scale = _irls(lambda b: X @ b, lambda b: X, y,
                           np.linalg.lstsq(X / y[:, None], np.ones_like(y), rcond=None)[0],
                           c=c, max_iter=max_iter, linear=(X, np.zeros_like(y)))
    return beta, u, scale


def _irls(f: Any, jac: Any, y: np.ndarray, theta: np.ndarray, *, c: float = TUKEY_C,
          max_iter: int = 30, lower: np.ndarray | None = None,
          linear: tuple[np.ndarray, np.ndarray] | None = None) -> tuple[np.ndarray, np.ndarray, float]:
    """Huber then bisquare iteratively reweighted least squares on relative residuals
    (``linear`` = (X, offset) of a linear model: each step is one direct solve).
    """
    th = np.asarray(theta, dtype=float)
    p = th.size
    u = np.ones_like(y)
    scale = float("nan")
    for stage in ("huber", "bisquare"):
        for _ in range(max_iter):
            pred = f(th)
            ref = np.where(pred > 0, pred, y)
            r = (y - pred) / ref
            scale = MAD_TO_SD * float(np.median(np.abs(r - np.median(r))))
            if not scale > 0:
                return th, u, scale
            z = r / ((HUBER_C if stage == "huber" else c) * scale)
            if stage == "huber":
                new_u = np.minimum(1.0, 1.0 / np.maximum(np.abs(z), 1e-300))
            else:
                new_u = np.where(np.abs(z) < 1, (1 - z**2) ** 2, 0.0)
            if np.count_nonzero(new_u) < p + 1:
                break
            u = new_u
            if linear is not None:
                sol = linear_solve(linear[0], y - linear[1], np.sqrt(u) / ref)
            else:
                sol = gauss_newton(f, jac, y, np.sqrt(u) / ref, th, lower=lower, max_iter=20)
            done = np.allclose(sol.theta, th, rtol=1e-7, atol=0.0)
            th = sol.theta
            if done:
                break
    return th, u, scale


@dataclass(frozen=True, repr=False)
class RunFlag(Display):
    """The outlier test of one run against the line of the other (clean) runs.

    Attributes
    ----------
    run_id : str
    t : float
        Externally studentized residual against the runs not flagged [-] (NaN when too
        few runs to test).
    dof : float
        Its degrees of freedom (0: known scale, normal quantile).
    threshold : float
        One-sided critical value for this run [-]; ``flagged`` is exactly ``t > threshold``.
    p_value : float
        One-sided p-value of t [-].
    flagged : bool
    excess, excess_stderr : float
        1/DPn minus the line of the other runs, and its standard error [-] (on the 1/DPn
        scale; cumulative 1/DPn at the run's conversion when drift is modelled).
    impurity_ppm : float
        Equivalent impurity, ppm by mol of monomer, for C_X [-·1e6].
    impurity_conc : float
        Equivalent impurity concentration [mol/L].
    robust_weight : float
        The run's bisquare weight in the robust fit [-].
    reason : str
    generic_ppm : dict
        C_X -> equivalent ppm (mol) for the generic constants 1, 10, 100 when no candidate
        C_X is named.
    u_measurement : float
        The run's relative measurement uncertainty of the observation used for the scale
        (replicates or chromatogram), NaN when not known [-].
    """

    run_id: str
    t: float
    dof: float
    threshold: float
    p_value: float
    flagged: bool
    excess: float
    excess_stderr: float
    impurity_ppm: float
    impurity_conc: float
    robust_weight: float
    reason: str
    generic_ppm: dict[float, float] = field(default_factory=dict)
    u_measurement: float = float("nan")

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "run": self.run_id,
            "studentized residual [-]": finite_or_none(self.t),
            "degrees of freedom": finite_or_none(self.dof),
            "threshold [-]": finite_or_none(self.threshold),
            "p-value (one-sided) [-]": finite_or_none(self.p_value),
            "flagged": self.flagged,
            "excess 1/DPn [-]": finite_or_none(self.excess),
            "excess standard error [-]": finite_or_none(self.excess_stderr),
            "impurity [ppm mol]": finite_or_none(self.impurity_ppm),
            "impurity [mol/L]": finite_or_none(self.impurity_conc),
            "impurity at generic C_X [ppm mol]": {f"C_X = {k:g}": finite_or_none(v)
                                                  for k, v in self.generic_ppm.items()},
            "relative measurement uncertainty [-]": finite_or_none(self.u_measurement),
            "robust weight [-]": finite_or_none(self.robust_weight),
            "reason": self.reason,
        }


@dataclass(frozen=True, repr=False)
class ESDStep(Display):
    """One step of the generalized ESD procedure: the run removed, R_k and λ_k."""

    run_id: str
    statistic: float
    critical: float
    dof: float
    runs_left: int

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {"run": self.run_id, "R_k [-]": finite_or_none(self.statistic),
                "lambda_k [-]": finite_or_none(self.critical),
                "degrees of freedom": finite_or_none(self.dof), "runs left": self.runs_left}


@dataclass(frozen=True, repr=False)
class ImpurityCheck(Display):
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
        Robust-fit parameters (the model's θ) [-].
    robust_scale : float
        Robust relative scatter of 1/DPn [-].
    C_X : float or None
        Impurity transfer constant used for the levels [-].
    warnings : tuple of str
    steps : tuple of ESDStep
        The generalized ESD steps (R_k, λ_k); the runs up to the last exceeding step
        are the candidates.
    scale : str
        Where the scale of the test came from.
    """

    estimator: str
    confidence: float
    adjust: str
    flags: tuple[RunFlag, ...]
    robust_beta: np.ndarray
    robust_scale: float
    C_X: float | None
    warnings: tuple[str, ...] = ()
    steps: tuple[ESDStep, ...] = ()
    scale: str = ""

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
            "procedure": "generalized ESD (Rosner 1983), last exceeding step",
            "scale of the test": self.scale,
            "flagged runs": list(self.flagged_ids),
            "ESD steps": [s.summary() for s in self.steps],
            "robust coefficients [-]": [float(b) for b in self.robust_beta],
            "robust relative scatter [-]": finite_or_none(self.robust_scale),
            "impurity C_X [-]": finite_or_none(self.C_X),
            "runs": [f.summary() for f in self.flags],
            "warnings": list(self.warnings),
        }


# --------------------------------------------------------------------------- the test


@dataclass(frozen=True)
class _Noise:
    """The scale information of the test: measured relative variances and their dof."""

    rel_var: np.ndarray  # per run, relative variance of the observation (NaN: unknown)
    dof: np.ndarray  # per run, degrees of freedom it carries
    known: float | None  # a known relative error (rel_error): normal quantile
    label: str


@dataclass(frozen=True)
class _Linear:
    """The model linearised at the robust fit: X θ ≈ target, weights 1/ŷ."""

    X: np.ndarray
    target: np.ndarray
    w: np.ndarray


def _loo(lin: _Linear, ref: np.ndarray, noise: _Noise,
         test: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Closed-form leave-one-out statistics against the weighted fit of the runs ``ref``.

    For each run i (those in ``test``, default all): the prediction error e_i of its
    observation from the fit of ``ref`` without i, its standard error, t = e/se and the
    degrees of freedom. For i in ``ref``: e = r_i/(1 − h_ii), s_(i)² = (RSS − r_i²/(1 −
    h_ii))/(n_ref − p − 1) (Belsley, Kuh, Welsch 1980); for i outside ``ref``: the plain
    prediction error with var = s²(1/w_i² + x_i (XᵀW²X)⁻¹ x_iᵀ).
    Returns arrays over all runs (NaN where not tested), in observation units.
    """
    n, p = lin.X.shape
    test = np.ones(n, dtype=bool) if test is None else test
    Xw = lin.X * lin.w[:, None]
    tw = lin.target * lin.w
    Xr, tr = Xw[ref], tw[ref]
    nr = int(ref.sum())
    e = np.full(n, np.nan)
    se = np.full(n, np.nan)
    dof = np.full(n, np.nan)
    if nr < p + 1 or (noise.known is None and nr < p + 2):
        return e, se, e.copy(), dof
    G = np.linalg.pinv(Xr.T @ Xr)
    beta = G @ (Xr.T @ tr)
    rw = tw - Xw @ beta  # weighted residuals of every run against the fit of ref
    h = np.einsum("ij,jk,ik->i", Xw, G, Xw)
    rss = float(np.sum(rw[ref] ** 2))
    inside = ref & test
    outside = (~ref) & test
    s2 = np.full(n, np.nan)
    nu = np.full(n, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        one_h = np.where(inside, 1.0 - h, 1.0 + h)
        ew = np.where(inside, rw / (1.0 - h), rw)
        s2[inside] = (rss - rw[inside] ** 2 / (1.0 - h[inside])) / (nr - p - 1)
        nu[inside] = nr - 1 - p
        s2[outside] = rss / (nr - p) if nr > p else np.nan
        nu[outside] = nr - p
    s2, nu = _pool(s2, nu, ref, noise)
    with np.errstate(divide="ignore", invalid="ignore"):
        var_w = s2 * np.where(inside, 1.0 / (1.0 - h), one_h)
        sew = np.sqrt(np.maximum(var_w, 0.0))
        t = ew / sew
    e[test] = (ew / lin.w)[test]
    se[test] = (sew / lin.w)[test]
    dof[test] = nu[test]
    tt = np.full(n, np.nan)
    tt[test] = t[test]
    return e, se, tt, dof


def _pool(s2: np.ndarray, nu: np.ndarray, ref: np.ndarray,
          noise: _Noise) -> tuple[np.ndarray, np.ndarray]:
    """Pool the residual variance with measured noise where they agree (F test), or use a
    known relative error; returns (variance, dof) per run (dof 0: known).
    """
    if noise.known is not None:
        return np.full_like(s2, noise.known**2), np.zeros_like(nu)
    s2 = np.maximum(s2, SCALE_FLOOR**2)
    have = ref & np.isfinite(noise.rel_var) & (noise.dof > 0)
    if not np.any(have):
        return s2, nu
    nu_m = float(np.sum(noise.dof[have]))
    s2_m = float(np.sum(noise.dof[have] * noise.rel_var[have]) / nu_m)
    if not s2_m > 0:
        return s2, nu
    from scipy import special

    out_s2, out_nu = s2.copy(), nu.copy()
    for i in np.flatnonzero(np.isfinite(s2) & (nu > 0)):
        F = s2[i] / s2_m
        p_up = float(special.fdtrc(nu[i], nu_m, F))  # P(F' > F): small when scatter > noise
        if p_up >= POOL_F_LEVEL:
            out_s2[i] = (nu[i] * s2[i] + nu_m * s2_m) / (nu[i] + nu_m)
            out_nu[i] = nu[i] + nu_m
    return np.maximum(out_s2, SCALE_FLOOR**2), out_nu


def _alpha(confidence: float, adjust: str, runs: int, step: int = 1) -> float:
    """Per-run level of ESD step ``step`` with ``runs`` runs under test: Šidák for the
    series, times :data:`ESD_FIRST_FACTOR` at the first step and :data:`ESD_LEVEL_FACTOR`
    from the second on.
    """
    a = (1.0 - confidence) * (ESD_LEVEL_FACTOR if step > 1 else ESD_FIRST_FACTOR)
    if adjust == "run":
        return a
    return 1.0 - (1.0 - a) ** (1.0 / max(runs, 1))


def _esd(lin: _Linear, noise: _Noise, K: int, confidence: float, adjust: str,
         ids: tuple[str, ...]) -> tuple[set[int], list[ESDStep]]:
    """Generalized ESD (one-sided): remove the largest t K times; candidates = the runs
    removed up to the last step whose statistic exceeds its critical value.
    """
    n = lin.X.shape[0]
    active = np.ones(n, dtype=bool)
    order: list[int] = []
    steps: list[ESDStep] = []
    for _ in range(K):
        _, _, t, dof = _loo(lin, active, noise, test=active)
        cand = np.where(active & np.isfinite(t), t, -np.inf)
        i = int(np.argmax(cand))
        if not np.isfinite(cand[i]):
            break
        runs = int(active.sum())
        lam = t_upper(_alpha(confidence, adjust, runs, len(steps) + 1), float(dof[i]))
        steps.append(ESDStep(ids[i], float(t[i]), lam, float(dof[i]), runs))
        order.append(i)
        active[i] = False
    last = max((k + 1 for k, st in enumerate(steps) if st.statistic > st.critical), default=0)
    return set(order[:last]), steps


def _final(lin: _Linear, noise: _Noise, cand: set[int], confidence: float,
           adjust: str) -> tuple[np.ndarray, tuple[np.ndarray, ...]]:
    """Test every run against the line of the runs not flagged; flagged := t > threshold,
    repeated until the set is stable (at most 10 rounds). Returns (flagged mask,
    (e, se, t, dof, threshold)).
    """
    n, p = lin.X.shape
    flagged = np.zeros(n, dtype=bool)
    flagged[list(cand)] = True
    stats: tuple[np.ndarray, ...] = ()
    for _ in range(10):
        ref = ~flagged
        e, se, t, dof = _loo(lin, ref, noise)
        n_clean = int(ref.sum())
        k = int(flagged.sum())
        thr = np.array([t_upper(_alpha(confidence, adjust, n_clean + (1 if flagged[i] else 0),
                                       k if flagged[i] else k + 1),
                                float(dof[i])) if np.isfinite(dof[i]) else np.nan
                        for i in range(n)])
        stats = (e, se, t, dof, thr)
        new = np.isfinite(t) & (t > thr)
        if np.array_equal(new, flagged) or int((~new).sum()) < p + 2:
            break
        flagged = new
    e, se, t, dof, thr = stats
    return np.isfinite(t) & (t > thr), stats


def _default_K(n: int, p: int, known: bool) -> int:
    """Most runs the procedure may remove: a third of the runs, and few enough that the
    last step keeps 2 degrees of freedom (1 reference run more than parameters with a
    known scale).
    """
    return max(0, min(n // 3, n - p - (1 if known else 2)))


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
    model: SeriesModel | None = None,
    theta0: Sequence[float] | None = None,
    rel_u: Sequence[float] | np.ndarray | None = None,
    rel_u_dof: Sequence[float] | np.ndarray | None = None,
    noise_label: str = "",
) -> ImpurityCheck:
    """Flag runs whose observation lies above the Mayo line of the other runs (one-sided).

    The procedure (robust fit, linearisation, generalized ESD with the last exceeding
    step, final self-consistent test) is described in the module docstring.

    Parameters
    ----------
    y : array-like
        The estimator's observation per run [-] (1/DPn for Mn).
    columns : mapping
        Term -> ratio [X]/[M] per run [-] (as for :func:`~gpctools.transfer.mayo.fit_mayo`);
        ignored when ``model`` is given.
    intercept : float, optional
        Known (fixed) 1/DPn0 [-].
    run_ids : sequence, optional
    monomer_conc : array-like, optional
        [M] per run [mol/L], for the impurity concentration.
    C_X : float, optional
        Transfer constant of the suspected impurity [-] (for ppm and mol/L); without it the
        levels for C_X = 1, 10, 100 are reported.
    confidence : float
        One-sided confidence of a flag [-] (default 0.99).
    adjust : {"series", "run"}
        ``"series"`` (default): the level holds for the whole series; ``"run"``: per run.
    rel_error : float, optional
        Known relative standard error of one observation [-]; the test then uses the
        normal distribution (known scale).
    max_outliers : int, optional
        Steps of the procedure (default :func:`_default_K`).
    estimator : str
        Label of the estimator.
    what : str
        Series name for messages.
    model : SeriesModel, optional
        The observation model (drift, mixed termination, kinetic term); default the
        linear Mayo model of ``columns``.
    theta0 : sequence of float, optional
        Start values of the model's parameters.
    rel_u : array-like, optional
        Measured relative standard uncertainty of each observation [-] (replicates or
        chromatogram), pooled into the scale where it agrees with the scatter.
    rel_u_dof : array-like, optional
        Degrees of freedom of each ``rel_u`` (default 1 per run).
    noise_label : str
        Where ``rel_u`` came from (for the report).

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
    _check_inputs(yv, adjust, rel_error, what)
    if model is None:
        names = list(columns)
        T = np.column_stack([np.asarray(columns[k], dtype=float).ravel() for k in names])
        model = SeriesModel(estimator, tuple(names), T, intercept=intercept)
    check_design(dict(zip(model.terms, model.ratios.T, strict=True)),
                 intercept=model.intercept is None, what=what, kinetic=model.kinetic)
    p = len(model.names)
    theta_r, u, scale, lin = _robust_linearised(model, yv, theta0)
    noise = _noise(n, rel_u, rel_u_dof, rel_error, noise_label)
    K = _default_K(n, p, rel_error is not None) if max_outliers is None else int(max_outliers)
    cand, steps = _esd(lin, noise, K, confidence, adjust, ids)
    flagged, (e, se, t, dof, thr) = _final(lin, noise, cand, confidence, adjust)
    ratio = model.inv_dpn(theta_r) / model.predict(theta_r)
    ex, ex_se = e * ratio, se * ratio
    mconc = (np.full(n, np.nan) if monomer_conc is None
             else np.asarray(monomer_conc, dtype=float).ravel())
    x = model.conversion
    flags = [_run_flag(i, ids[i], float(t[i]), float(dof[i]), float(thr[i]), bool(flagged[i]),
                       float(ex[i]), float(ex_se[i]), float(u[i]), C_X, float(mconc[i]),
                       None if x is None else float(x[i]), estimator, confidence, adjust,
                       float(np.sqrt(noise.rel_var[i])))
             for i in range(n)]
    warns: list[str] = []
    if K == 0 or not np.all(np.isfinite(t)):
        warns.append(f"{what} ({estimator}): too few runs to test for an impurity-contaminated run "
                     f"(at least {p + 3} runs are needed, or give rel_error)")
    return ImpurityCheck(estimator=estimator, confidence=confidence, adjust=adjust,
                         flags=tuple(flags), robust_beta=np.asarray(theta_r, dtype=float),
                         robust_scale=float(scale), C_X=C_X, warnings=tuple(warns),
                         steps=tuple(steps), scale=_scale_text(noise))


def _robust_linearised(model: SeriesModel, y: np.ndarray,
                       theta0: Sequence[float] | None) -> tuple[np.ndarray, np.ndarray, float, _Linear]:
    """Robust fit of the model, and the model linearised there (Jacobian, target, weights)."""
    start = solve(model, y).theta if theta0 is None else np.asarray(theta0, dtype=float)
    linear = None
    if model.is_linear:
        linear = (model.linear_design(), model.predict(np.zeros(len(model.names))))
    theta_r, u, scale = _irls(model.predict, model.jacobian, y, start, lower=model.lower,
                              linear=linear)
    J = model.jacobian(theta_r)
    pred = model.predict(theta_r)
    w = 1.0 / np.where(pred > 0, pred, y)
    return theta_r, u, scale, _Linear(J, y - pred + J @ theta_r, w)


def _noise(n: int, rel_u: Any, rel_u_dof: Any, rel_error: float | None, label: str) -> _Noise:
    """The measured-noise information of the test (see :func:`_pool`)."""
    if rel_u is None:
        rv = np.full(n, np.nan)
        dof = np.zeros(n)
    else:
        ru = np.asarray(rel_u, dtype=float).ravel()
        rv = np.where(np.isfinite(ru) & (ru > 0), ru**2, np.nan)
        dof = (np.ones(n) if rel_u_dof is None else np.asarray(rel_u_dof, dtype=float).ravel())
        dof = np.where(np.isfinite(rv), dof, 0.0)
    return _Noise(rv, dof, rel_error, label)


def _scale_text(noise: _Noise) -> str:
    if noise.known is not None:
        return f"known relative error {noise.known:g} (normal quantiles)"
    if np.any(np.isfinite(noise.rel_var)):
        return ("scatter of the reference runs, pooled with the measured noise of "
                f"{noise.label or 'the runs'} where the two agree (F test at {POOL_F_LEVEL:g})")
    return "scatter of the reference runs (Student t)"


def _run_flag(i: int, run_id: str, t: float, dof: float, thr: float, flagged: bool,
              excess: float, excess_se: float, weight: float, C_X: float | None,
              mconc: float, x: float | None, estimator: str, confidence: float,
              adjust: str, u_meas: float) -> RunFlag:
    """One run's :class:`RunFlag` with its impurity levels and the reason in words."""
    if not math.isfinite(t):
        return RunFlag(run_id, float("nan"), dof, float("nan"), float("nan"), False,
                       float("nan"), float("nan"), float("nan"), float("nan"), weight,
                       "too few other runs to test this run", {}, u_meas)
    ppm, conc = impurity_level(excess, C_X or 0.0, mconc, x)
    generic = {} if C_X else {c: float(impurity_level(excess, c, None, x)[0]) for c in GENERIC_C_X}
    level = f"one-sided {100 * confidence:g} %{' for the series' if adjust == 'series' else ''}"
    at_x = f" at conversion {x:g} (cumulative relation)" if x else ""
    if flagged:
        if C_X:
            lvl = f"; equivalent to {float(ppm):.3g} ppm (mol) of an impurity with C_X = {C_X:g}{at_x}"
            if np.isfinite(conc):
                lvl += f" ({float(conc):.3g} mol/L)"
        else:
            lvl = "; equivalent to " + ", ".join(
                f"{v:.3g} ppm (mol) at C_X = {k:g}" for k, v in generic.items()) + at_x
        reason = (f"above the Mayo line ({estimator}): studentized residual {t:.1f} > threshold "
                  f"{thr:.1f} ({level}); excess 1/DPn {excess:.3g} ± {excess_se:.2g}{lvl}: "
                  "transfer to an impurity (or an agent overcharge)")
    elif t < -thr and dof >= 3:
        reason = (f"below the Mayo line ({estimator}): studentized residual {t:.1f}; not an "
                  "impurity signature: check the agent charge and the molar masses")
    elif adjust == "series" and dof >= 3 and t > t_upper(1 - confidence, dof):
        reason = (f"somewhat above the Mayo line ({estimator}): studentized residual {t:.1f} "
                  f"exceeds the per-run {100 * confidence:g} % level but not the threshold "
                  f"{thr:.1f} for the series; not flagged (repeat the run if in doubt)")
    else:
        reason = ""
    return RunFlag(run_id, t, dof, thr, t_sf(t, dof), flagged, excess, excess_se,
                   float(ppm), float(conc), weight, reason, generic, u_meas)


def _check_inputs(yv: np.ndarray, adjust: str, rel_error: float | None, what: str) -> None:
    if np.any(~np.isfinite(yv)) or np.any(yv <= 0):
        raise DataError(f"{what}: impurity flags need a positive 1/DPn for every run")
    if adjust not in ("series", "run"):
        raise DataError(f"adjust must be 'series' or 'run', not {adjust!r}", key="impurity_adjust")
    if rel_error is not None and not (rel_error > 0):
        raise DataError(f"rel_error must be positive, not {rel_error!r}", key="rel_error")


def flag_runs_cumulative(
    y: Sequence[float] | np.ndarray,
    conversion: Sequence[float] | np.ndarray,
    columns: Mapping[str, Any],
    start: Sequence[float],
    *,
    estimator: str = "Mn",
    windows: Sequence[tuple[float, float]] | None = None,
    M0: float | None = None,
    delta: float = 1.0,
    **kwargs: Any,
) -> ImpurityCheck:
    """:func:`flag_runs` for runs at finite conversion, against the cumulative Mayo model.

    The cumulative model (:class:`~gpctools.transfer.model.SeriesModel` with the runs'
    conversions) is fitted robustly from ``start`` (1/DPn0, then the constants) and
    linearised there; no run is refitted.

    Parameters
    ----------
    y, conversion, columns
        As for :func:`gpctools.transfer.drift.fit_cumulative`.
    start : sequence of float
        Start values (1/DPn0, then the constants), e.g. from a drift fit.
    estimator, windows, M0, delta
        The cumulative model.
    **kwargs
        Any other argument of :func:`flag_runs`.

    References
    ----------
    Rosner 1983; Belsley, Kuh, Welsch 1980; docs/science.md, section 5 (the model).
    """
    names = list(columns)
    T = np.column_stack([np.asarray(columns[k], dtype=float).ravel() for k in names])
    model = SeriesModel(estimator, tuple(names), T, np.asarray(conversion, dtype=float).ravel(),
                        delta=delta, windows=None if windows is None else np.asarray(windows, dtype=float),
                        M0=M0)
    return flag_runs(y, columns, model=model, theta0=start, estimator=estimator, **kwargs)

@dataclass(frozen=True, repr=False)
class InterceptCheck(Display):
    """Whether 1/DPn0 lies above what the kinetics explain.

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
    docs/science.md, section 3 (1/DPn0 = kinetic term + C_M + C_S[S]/[M] + C_I[I]/[M]).
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
