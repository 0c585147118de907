"""The dosing answer: how much agent gives a target Mn (or Mw) at a final conversion.

From a group's recommended fit (the drift-corrected one when conversions were given),
:func:`agent_charge` solves the cumulative model for the initial ratio r0 = [A]0/[M]0
that makes the polymer collected up to conversion x have the target average:

- target Mn (exact closed form, docs/science.md, section 5.5 [derived]):
  r0 = x (1/DPn,target − 1/DPn0) / (1 − (1 − x)^C_A);
- target Mw: the cumulative Mw of the mixed-termination model
  (:class:`~gpctools.transfer.model.SeriesModel`, estimator Mw/2) solved by bisection
  (it falls monotonically as r0 grows).

The other terms (solvent, kinetic regressor) stay at the group's mean. The interval comes
from the covariance of the fitted parameters — statistical and calibration parts — by
first-order propagation, dr0/dθ = −(∂f/∂θ)/(∂f/∂r0) (JCGM 100:2008, 5.1), with
Welch–Satterthwaite degrees of freedom.

[A]0 = r0 [M]0 [mol/L]; per 100 g of monomer n_A = 100 r0/M_monomer [mol] (M_monomer is
the repeat-unit molar mass M0 for a vinyl monomer).

Safety: transfer agents (thiols, halocarbons) are toxic, malodorous or sensitizing;
polymerizations are exothermic. Follow site safety rules, local codes and licensed
practice; the answer is a recipe calculation, not a safety assessment.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none
from gpctools.transfer._fit import interval_parts
from gpctools.transfer._stats import t_quantile
from gpctools.transfer.mayo import FittedValue
from gpctools.transfer.model import SeriesModel

__all__ = ["DosingAnswer", "agent_charge", "DOSING_SAFETY"]

DOSING_SAFETY = (
    "Transfer agents and solvents are often toxic, malodorous or sensitizing; a changed "
    "recipe changes the heat released. Follow your site safety rules, local codes and "
    "licensed practice.")


@dataclass(frozen=True, repr=False)
class DosingAnswer(Display):
    """Agent charge for a target average at a final conversion.

    Attributes
    ----------
    group, term : str
        Group label and the dosed constant (``C_A``, ``C_A:<agent>``).
    target : str
        ``"Mn"`` or ``"Mw"``.
    target_value : float
        Target average [g/mol].
    conversion : float
        Final monomer conversion [-].
    ratio : FittedValue
        [A]0/[M]0 [-] with its interval (statistical and calibration parts).
    concentration : FittedValue
        [A]0 [mol/L] (NaN without [M]0).
    per_100g : FittedValue
        Agent per 100 g of monomer [mol].
    monomer_conc : float
        [M]0 used [mol/L].
    model : str
        The fit the answer rests on (estimator, model).
    notes : tuple of str
    """

    group: str
    term: str
    target: str
    target_value: float
    conversion: float
    ratio: FittedValue
    concentration: FittedValue
    per_100g: FittedValue
    monomer_conc: float
    model: str
    notes: tuple[str, ...] = ()

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "group": self.group, "term": self.term,
            f"target {self.target} [g/mol]": finite_or_none(self.target_value),
            "conversion [-]": self.conversion,
            "[A]0/[M]0 [-]": self.ratio.summary(),
            "[A]0 [mol/L]": self.concentration.summary(),
            "agent per 100 g monomer [mol]": self.per_100g.summary(),
            "[M]0 [mol/L]": finite_or_none(self.monomer_conc),
            "based on": self.model, "notes": list(self.notes), "safety": DOSING_SAFETY,
        }

    def row(self) -> dict[str, Any]:
        """One row of the dosing table (unit-named columns)."""
        return {
            "group": self.group, "term": self.term, "target": self.target,
            "target [g/mol]": self.target_value, "conversion [-]": self.conversion,
            "[A]0/[M]0 [-]": self.ratio.value, "[A]0/[M]0 standard error [-]": self.ratio.stderr,
            "[A]0 [mol/L]": self.concentration.value,
            "[A]0 CI low [mol/L]": self.concentration.ci_low,
            "[A]0 CI high [mol/L]": self.concentration.ci_high,
            "agent per 100 g monomer [mol]": self.per_100g.value,
            "per 100 g CI low [mol]": self.per_100g.ci_low,
            "per 100 g CI high [mol]": self.per_100g.ci_high,
            "confidence [-]": self.ratio.confidence, "[M]0 [mol/L]": self.monomer_conc,
            "based on": self.model, "notes": "; ".join(self.notes),
        }


def _one_run_model(fit: Any, group: Any, term: str, x: float, estimator: str) -> SeriesModel:
    """The fit's model for one hypothetical run at conversion x; other terms at the mean."""
    m = fit.model
    ratios = np.mean(m.ratios, axis=0, keepdims=True)
    ratios[0, list(m.terms).index(term)] = 0.0
    z = None if m.kinetic is None else np.array([float(np.mean(m.kinetic))])
    known = None if m.kinetic_known is None else np.array([float(np.mean(m.kinetic_known))])
    return SeriesModel(estimator, m.terms, ratios, np.array([x]), z, known, m.intercept,
                       m.delta, m.C_M_known, None, m.M0)


def _solve_ratio(f: Any, y_target: float, what: str) -> float:
    """r0 >= 0 with f(r0) = y_target, f increasing (bisection on a bracketing interval)."""
    f0 = f(0.0)
    if y_target <= f0:
        raise DataError(f"{what}: the target needs a longer chain than the recipe gives without "
                        f"agent (1/DPn at zero agent {f0:.4g} >= target {y_target:.4g}); no agent "
                        "charge reaches it: lower the initiator or raise [M] instead",
                        key="target")
    hi = 1e-6
    while f(hi) < y_target:
        hi *= 2.0
        if hi > 10.0:
            raise DataError(f"{what}: the target is out of reach of this agent", key="target")
    lo = 0.0
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        if f(mid) < y_target:
            lo = mid
        else:
            hi = mid
        if hi - lo <= 1e-14 * hi:
            break
    return 0.5 * (lo + hi)


def agent_charge(result: Any, *, conversion: float, target_Mn: float | None = None,
                 target_Mw: float | None = None, term: str | None = None,
                 group: str | None = None, monomer_conc: float | None = None,
                 confidence: float = 0.95) -> DosingAnswer:
    """The agent charge that gives a target Mn (or Mw) at a final conversion.

    Parameters
    ----------
    result : TransferResult or GroupResult
        A run-series analysis (its group's recommended fit is used).
    conversion : float
        Final monomer conversion, 0 < x < 1 [-].
    target_Mn, target_Mw : float
        Target average of the polymer collected up to ``conversion`` [g/mol]; give one.
    term : str, optional
        The dosed agent's term (default: the group's first agent term).
    group : str, optional
        Group label (needed when the result has several groups).
    monomer_conc : float, optional
        [M]0 of the recipe [mol/L] (default: the group's mean).
    confidence : float
        Two-sided level of the interval [-].

    Returns
    -------
    DosingAnswer

    Raises
    ------
    DataError
        Bad targets or conversion, or a target no agent charge can reach.
    """
    if (target_Mn is None) == (target_Mw is None):
        raise DataError("give one target: target_Mn or target_Mw [g/mol]", key="target")
    if not (0.0 < conversion < 1.0):
        raise DataError(f"conversion must be between 0 and 1, not {conversion!r}", key="conversion")
    g = result.group(group) if hasattr(result, "group") else result
    agents = [t for t in g.terms if t.startswith("C_A")]
    term = term or (agents[0] if agents else g.terms[0])
    if term not in g.terms:
        raise DataError(f"{g.label}: no term {term!r}; fitted: {', '.join(g.terms)}", key="term")
    est, model_name = g.preferred[term]
    fit = g.fit(est, model_name)
    if fit.model is None:
        raise DataError(f"{g.label}: the fit carries no model to dose from", key="target")
    M0 = float(fit.model.M0) if fit.model.M0 else float("nan")
    if not math.isfinite(M0):
        raise DataError(f"{g.label}: the repeat-unit molar mass M0 is not known", key="M0")
    target = float(target_Mn if target_Mn is not None else target_Mw)  # type: ignore[arg-type]
    if not target > 0:
        raise DataError(f"target must be a positive molar mass [g/mol], not {target!r}", key="target")
    return _answer(g, fit, term, est, model_name, conversion, target_Mn is not None, target,
                   M0, monomer_conc, confidence)


def _answer(g: Any, fit: Any, term: str, est: str, model_name: str, x: float, by_Mn: bool,
            target: float, M0: float, monomer_conc: float | None,
            confidence: float) -> DosingAnswer:
    """Solve for r0 and propagate the parameter covariance (both parts) to it."""
    one = _one_run_model(fit, g, term, x, "Mn" if by_Mn else "Mw/2")
    j = list(one.names).index(term)
    theta = np.asarray(fit.theta, dtype=float)
    y_target = M0 / target if by_Mn else 2.0 * M0 / target

    def f_of(th: np.ndarray, r0: float) -> float:
        m = replace(one, ratios=_with(one.ratios, one.terms.index(term), r0))
        return float(m.predict(th)[0])

    what = f"{g.label}: target {'Mn' if by_Mn else 'Mw'} {target:g} g/mol at x = {x:g}"
    r0 = _solve_ratio(lambda r: f_of(theta, r), y_target, what)
    h = max(abs(r0) * 1e-6, 1e-14)
    dfdr = (f_of(theta, r0 + h) - f_of(theta, r0 - h)) / (2 * h)
    grad = np.empty(theta.size)
    for k in range(theta.size):
        hk = 1e-6 * max(abs(theta[k]), 1e-6 if k != j else 1e-3)
        tp, tm = theta.copy(), theta.copy()
        tp[k] += hk
        tm[k] -= hk
        grad[k] = -(f_of(tp, r0) - f_of(tm, r0)) / (2 * hk) / dfdr
    cov_cal = fit.covariance_calibration if fit.covariance_calibration is not None else 0 * fit.covariance
    s, c, tot, nu = interval_parts(float(grad @ (fit.covariance - cov_cal) @ grad),
                                   float(grad @ cov_cal @ grad),
                                   0 if fit.known_sigma else fit.dof,
                                   getattr(fit, "dof_calibration", math.inf))
    q = t_quantile(0.5 + confidence / 2, nu)

    def fv(name: str, scale: float, unit: str) -> FittedValue:
        v, se = r0 * scale, tot * abs(scale)
        return FittedValue(name, v, se, max(v - q * se, 0.0), v + q * se, confidence,
                           unit, s * abs(scale), c * abs(scale), nu)

    Mc = float(monomer_conc) if monomer_conc is not None else float(g.monomer_conc)
    notes = [f"{'Mn' if by_Mn else 'Mw'} of the polymer collected up to x = {x:g}, agent "
             "consumed by transfer as it was in the fitted runs (drift included)"]
    if fit.model.conversion is None:
        notes.append("the constants come from low-conversion runs; the drift to x uses them")
    if not math.isfinite(Mc):
        notes.append("[M]0 not known: give monomer_conc for [A]0 in mol/L")
    xs = fit.model.conversion
    if xs is not None and x > 1.5 * float(np.max(xs)):
        notes.append("x lies well beyond the conversions of the fitted runs: an extrapolation")
    return DosingAnswer(
        group=g.label, term=term, target="Mn" if by_Mn else "Mw", target_value=target,
        conversion=x, ratio=fv("[A]0/[M]0", 1.0, "-"),
        concentration=fv("[A]0", Mc if math.isfinite(Mc) else float("nan"), "mol/L"),
        per_100g=fv("agent per 100 g monomer", 100.0 / M0, "mol"), monomer_conc=Mc,
        model=f"{est}, {model_name}", notes=tuple(notes))


def _with(R: np.ndarray, j: int, value: float) -> np.ndarray:
    out = np.array(R, dtype=float)
    out[0, j] = value
    return out
