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
docs/science.md, section 5 [derived]: cumulative Mayo, C_app, cumulative Mw, identifiability.
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
from gpctools.display import Display
from gpctools.errors import DataError, DesignError, EstimatorWarning
from gpctools.sheets.cells import finite_or_none
from gpctools.transfer._fit import solve
from gpctools.transfer._stats import FittedConstants, as_str_tuple, t_quantile
from gpctools.transfer.mayo import (
    FittedValue,
    MayoFit,
    check_design,
    dpn0_value,
    fitted_values,
)
from gpctools.transfer.model import KINETIC_NAME, SeriesModel

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
    docs/science.md, section 5 [derived].
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
    docs/science.md, sections 4 and 5 [derived]; Clay and Gilbert, Macromolecules 1995.
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
    delta: float = 1.0,
) -> Any:
    """The cumulative model of one estimator as ``f(a, consts) -> prediction per run`` [-].

    ``a`` is 1/DPn0 and ``consts`` the constants in the order of ``columns`` (a thin
    wrapper of :class:`gpctools.transfer.model.SeriesModel`).
    """
    names = list(columns)
    model = SeriesModel(estimator, tuple(names),
                        np.column_stack([np.asarray(columns[k], dtype=float) for k in names]),
                        np.asarray(conversion, dtype=float), delta=delta,
                        windows=None if windows is None else np.asarray(windows, dtype=float),
                        M0=M0)

    def f(a: float, consts: Sequence[float]) -> np.ndarray:
        return model.predict(np.array([a, *consts], dtype=float))

    return f


@dataclass(frozen=True, repr=False)
class DriftFit(FittedConstants, Display):
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
    model: SeriesModel | None = None
    theta: np.ndarray | None = None
    covariance_calibration: np.ndarray | None = None
    kinetic: FittedValue | None = None
    weights: np.ndarray | None = None
    known_sigma: bool = False
    dof_calibration: float = float("inf")

    @property
    def intercept_fixed(self) -> bool:
        """Whether 1/DPn0 was held at a given value."""
        return self.model is not None and self.model.intercept is not None

    def predict(self, columns: Mapping[str, Any]) -> np.ndarray:
        """Instantaneous (x = 0) model 1/DPn for design rows, term -> values [-]."""
        return MayoFit.predict(self, columns)  # type: ignore[arg-type]

    def band(self, columns: Mapping[str, Any], confidence: float | None = None):
        """Pointwise band of the instantaneous line with the drift-corrected constants [-]."""
        return MayoFit.band(self, columns, confidence)  # type: ignore[arg-type]

    def _row_matrix(self, columns: Mapping[str, Any]) -> np.ndarray:
        return MayoFit._row_matrix(self, columns)  # type: ignore[arg-type]

    def _beta(self) -> np.ndarray:
        return MayoFit._beta(self)  # type: ignore[arg-type]

    def inv_dpn_points(self) -> np.ndarray:
        """Observations moved to x = 0 and the 1/DPn scale with the fitted model [-]."""
        return MayoFit.inv_dpn_points(self)  # type: ignore[arg-type]

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "estimator": self.estimator,
            "model": "cumulative Mayo (conversion drift)",
            "delta [-]": finite_or_none(self.model.delta) if self.model else None,
            "kinetic term coefficient": self.kinetic.summary() if self.kinetic else None,
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
    delta: float = 1.0,
    kinetic: Sequence[float] | np.ndarray | None = None,
    kinetic_known: Sequence[float] | np.ndarray | None = None,
    C_M_known: float = 0.0,
    sigma: Sequence[float] | np.ndarray | None = None,
    cal_cov_y: np.ndarray | None = None,
    dof_cal: float = float("inf"),
    kinetic_label: str = "kinetic term",
) -> DriftFit:
    """Fit the cumulative (conversion-drift) Mayo model (nonlinear in C; Gauss–Newton).

    Parameters
    ----------
    y : array-like
        Observed value per run [-] (``"Mn"``: M0/Mn; ``"Mw/2"``: 2 M0/Mw; ``"CLD"``: Λ).
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
        The naive fit on initial ratios, for the bias report.
    weights : {"relative", "equal"}
        As in :func:`gpctools.transfer.mayo.fit_mayo`.
    run_ids : sequence, optional
    confidence : float
        Two-sided level of the intervals [-].
    what : str
        Series name for messages.
    delta, kinetic, kinetic_known, C_M_known, sigma, cal_cov_y, dof_cal, kinetic_label
        As in :func:`gpctools.transfer.mayo.fit_mayo`.

    Returns
    -------
    DriftFit

    References
    ----------
    docs/science.md, section 5 [derived]; Mayo, J. Am. Chem. Soc. 1943; Levenberg 1944 and
    Marquardt 1963 (damped Gauss–Newton).
    """
    yv = np.asarray(y, dtype=float).ravel()
    xv = np.asarray(conversion, dtype=float).ravel()
    n = yv.size
    ids = as_str_tuple(run_ids) if run_ids is not None else tuple(str(i + 1) for i in range(n))
    names = list(columns)
    R = {k: np.asarray(columns[k], dtype=float).ravel() for k in names}
    _check_inputs(yv, xv, R, ids, estimator, windows, M0, what)
    z = None if kinetic is None else np.asarray(kinetic, dtype=float).ravel()
    check_design(R, intercept=True, what=what, kinetic=z, kinetic_label=kinetic_label)
    model = SeriesModel(estimator, tuple(names), np.column_stack([R[k] for k in names]), xv, z,
                        None if kinetic_known is None else np.asarray(kinetic_known, dtype=float),
                        None, float(delta), float(C_M_known),
                        None if windows is None else np.asarray(windows, dtype=float), M0)
    sig = None if sigma is None else np.asarray(sigma, dtype=float).ravel()
    sol = solve(model, yv, weights=weights, sigma=sig, cal_cov_y=cal_cov_y, dof_cal=dof_cal)
    return _drift_result(sol, ids, naive, confidence, estimator, what)


def _check_inputs(yv: np.ndarray, xv: np.ndarray, R: Mapping[str, np.ndarray],
                  ids: tuple[str, ...], estimator: str, windows: Any, M0: Any, what: str) -> None:
    """Refuse conversions outside (0, 1), missing chain lengths and a CLD model without windows."""
    n = yv.size
    for k, r in R.items():
        term_kind(k)
        if r.size != n:
            raise DesignError(f"{what}: term {k} has {r.size} rows for {n} runs")
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


def _drift_result(sol: Any, ids: tuple[str, ...], naive: MayoFit | None, confidence: float,
                  estimator: str, what: str) -> DriftFit:
    """Assemble a :class:`DriftFit`: values with both error parts, naive bias,
    identifiability of each consumed constant and its warnings.
    """
    model = sol.model
    names = list(model.terms)
    xv = model.conversion
    vals = fitted_values(sol, confidence)
    consts = tuple(vals[t] for t in names)
    icpt = vals["1/DPn0"]
    dpn0 = dpn0_value(icpt)
    naive_vals: tuple[FittedValue, ...] = ()
    bias: tuple[float, ...] = ()
    if naive is not None:
        naive_vals = tuple(naive.constant(k) for k in names)
        bias = tuple(nv.value / c.value - 1.0 if c.value != 0 else float("nan")
                     for nv, c in zip(naive_vals, consts, strict=True))
    warns: list[str] = []
    if not sol.success:
        warns.append(f"{what} ({estimator}, drift model): {sol.message}; the constants are "
                     "poorly determined by these runs")
    apparent, remaining, ident = _identifiability(consts, xv, ids, estimator, what, warns)
    for msg in warns:
        _warnings.warn(msg, EstimatorWarning, stacklevel=3)
    return DriftFit(
        estimator=estimator, terms=tuple(names), constants=consts, intercept=icpt, DPn0=dpn0,
        naive=naive_vals, naive_bias=bias, apparent=apparent, remaining=remaining,
        identifiable=ident, run_ids=ids, conversion=xv, y=sol.y, fitted=sol.fitted,
        covariance=sol.cov, dof=sol.dof, redchi=sol.redchi, confidence=confidence,
        success=sol.success, message=sol.message, warnings=tuple(warns), model=model,
        theta=sol.theta, covariance_calibration=sol.cov_cal, kinetic=vals.get(KINETIC_NAME),
        weights=sol.weights, known_sigma=sol.known_sigma,
        dof_calibration=sol.dof_cal,
    )


def _identifiability(consts: Sequence[FittedValue], xv: np.ndarray, ids: tuple[str, ...],
                     estimator: str, what: str, warns: list[str]):
    """C_app, the remaining agent fraction and whether each consumed constant is identifiable."""
    apparent: dict[str, np.ndarray] = {}
    remaining: dict[str, np.ndarray] = {}
    ident: dict[str, bool] = {}
    for c in consts:
        k = c.name
        if term_kind(k) != "consumed":
            continue
        apparent[k] = apparent_constant(c.value, xv)
        remaining[k] = remaining_fraction(c.value, xv)
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
        rel = c.stderr / abs(c.value) if c.value else float("inf")
        if np.isfinite(rel) and rel > 0.5:
            warns.append(f"{what} ({estimator}): the drift-corrected {k} has a relative standard "
                         f"error of {100 * rel:.0f} %; the conversions make it poorly determined")
    return apparent, remaining, ident


@dataclass(frozen=True, repr=False)
class ConsumptionResult(Display):
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
    Walling, C., J. Am. Chem. Soc. 1948 [from memory: docs/science.md, section 5] (the method);
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
