"""Why is the molar mass low? Measured against predicted, and a ranked list of causes.

How the diagnosis works
-----------------------
1. **Expected values.** The recipe is predicted with the steady-state model
   (:mod:`gpctools.kinetics.predict`). When a normal batch with measured values is
   given, the model is first *anchored* to it: the radical flux f·k_d·[I] is scaled so
   that the model reproduces the normal batch's R_p, a constant offset is added to 1/DPn
   so that it reproduces its Mn, and a factor on Mw absorbs its real breadth. The
   anchored model then gives the expected R_p, Mn and Mw of this batch.
2. **Observations.** Each measured quantity becomes y = ln(measured/expected) with a
   standard uncertainty σ (relative): R_p, Mn, Mw; plus the measurement checks:
   check-standard deviation, flow-marker shift, Mn sensitivity to the low-M limit,
   fraction outside the calibration, induction period. A check that was not recorded
   enters as a prior (e.g. flow error 0 ± 0.2 %: typical pump accuracy).
3. **Hypotheses.** Each cause predicts all observations from one parameter θ:

   ============================  ==========================================================
   unexplained transfer          Δ(1/DPn) ≥ 0; R_p unchanged
   excess initiation             factor F ≥ 1 on f·k_d·[I]; R_p ∝ F^½, DPn from the model
   temperature overshoot         ΔT ≥ 0; k_p and k_d by Arrhenius, k_t constant
   inhibition / retardation      ζ = k_z[Z] (radical loss, each event ends a chain);
                                 R_p down; induction period free
   dilution / monomer loss       factor g ≤ 1 on [M]
   flow-rate error               relative flow error ε: every average × 10^(−B·V·ε),
                                 flow marker shifted by ε, check standard shifted too
   calibration drift             every average and the check standard × e^s
   integration-limit artefact    Mn × e^t (t ≤ 0), Mw unchanged; limit sensitivity free
   no cause                      everything as expected
   ============================  ==========================================================

   θ is fitted by minimising χ² = Σ ((y − μ(θ))/σ)² (grid, then bounded refinement).
4. **Score.** Akaike weights: AIC = χ²_min + 2k (k = 1 fitted parameter, 0 for "no
   cause"); the *likelihood share* of a cause is exp(−AIC/2) normalised over all causes
   [%]. It says how much better one single cause explains all numbers than the others,
   assuming one cause and normal errors; it is not a probability that the cause is real.
   The diagnosis is *clear* when the top cause is not "no cause", has a share of at least
   50 % and "no cause" has less than 20 %.

The unexplained transfer is also expressed as the equivalent concentration of candidate
impurities: [X] = Δ(1/DPn)·[M]/C_X, or Δ(1/DPn)/C_X·10⁶ ppm (mol of X per mol monomer);
e.g. 10 ppm of a thiol with C = 15 adds 1.5e-4 to 1/DPn (SCIENCE.md §9).

References
----------
- Mayo, J. Am. Chem. Soc. 1943; IUPAC steady-state kinetics (SCIENCE.md §3).
- Fingerprints of low molar mass: SCIENCE.md §9 (transfer keeps R_p, more initiator or
  heat raises R_p with R_p·DPn about constant, retarders lower both, measurement
  artefacts shift all averages or only Mn).
- Flow-error sensitivity Δ logM = B·V·ε: SCIENCE.md §2 [derived].
- Akaike, IEEE Trans. Autom. Control 1974; Burnham and Anderson, Model Selection and
  Multimodel Inference, 2002 (Akaike weights) [from memory].
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns
from gpctools.chainlength import impurity_ratio
from gpctools.errors import DataError, InputFormatError, MethodError
from gpctools.kinetics.predict import (
    KineticParameters,
    KineticState,
    Prediction,
    TransferTerm,
    evaluate,
    predict,
    resolve_parameters,
)
from gpctools.kinetics.recipe import (
    Checks,
    Measured,
    NormalBatch,
    Recipe,
    load_recipe,
    normalize_scale,
)
from gpctools.kinetics.safety import safety_lines
from gpctools.refdata import R_GAS, ReferenceData

__all__ = [
    "Observation",
    "Cause",
    "CheckLine",
    "ImpurityEstimate",
    "RateFromConversion",
    "Diagnosis",
    "rate_from_conversion",
    "diagnose",
    "measured_from_results",
    "diagnose_recipe",
    "DEFAULT_UNCERTAINTY",
]

# Default relative standard uncertainties [%] and check tolerances, each with its basis.
DEFAULT_UNCERTAINTY = {
    # published: SEC round robins, repeatability under 3 % (SCIENCE.md §7); Mn is more
    # sensitive to baseline and limits, hence 4 %.
    "Mn": 4.0,
    "Mw": 3.0,
    # common practice: gravimetric/spectroscopic initial rates repeat to about 10 %.
    "R_p": 10.0,
    # typical: tabulated k_t is an order-of-magnitude value; a normal batch removes this.
    "model": 10.0,
}
_SIGMA_DISPERSITY_MODEL = 0.15  # typical: real Đ exceeds Đ_inst (drift, band broadening)
_SIGMA_CHECK_STANDARD = 0.03  # published: repeatability under 3 % (SCIENCE.md §7)
_PRIOR_CHECK_STANDARD = 0.05  # common practice: standards accepted within ±5 %
_SIGMA_FLOW_MARKER = 0.001  # common practice: marker position reproducible to about 0.1 %
_PRIOR_FLOW = 0.002  # common practice: pump flow accuracy about 0.2 % when not checked
_PRIOR_FLOW_CORRECTED = 0.0005  # residual flow error after marker correction
_SIGMA_LIMIT = 0.03  # common practice: a well-placed limit moves Mn by less than ~3 %
_SIGMA_OUTSIDE = 1.0  # % mass; common practice: warn above about 1 % (SCIENCE.md §1)
_SIGMA_INDUCTION = 5.0  # min; common practice: about one sampling interval
_DEFAULT_SLOPE = 0.4  # decades/mL, typical 0.3-0.5 (SCIENCE.md §2)
_DEFAULT_PEAK_VOLUME = 25.0  # mL, typical 20-30 (SCIENCE.md §2)
_BV_REL_DEFAULT = 0.3  # B·V range 6-15 around 10
_BV_REL_GIVEN = 0.1

_MAX_IMPURITY_PPM = 1e4  # 1 mol % of the monomer
_CLEAR_SHARE = 50.0
_CLEAN_MAX_SHARE = 20.0


# --------------------------------------------------------------------------- records


@dataclass(frozen=True)
class Observation:
    """One observation: y = ln(measured/expected) (or a raw check value) and σ.

    ``name`` is one of "R_p", "Mn", "Mw", "check standard", "flow marker",
    "low-M limit", "outside calibration", "induction period"; ``recorded`` is False for
    priors of checks that were not made.
    """

    name: str
    y: float
    sigma: float
    recorded: bool
    measured: float | None
    expected: float | None
    unit: str


@dataclass(frozen=True)
class Cause:
    """One ranked cause.

    Attributes
    ----------
    key : str
        ``transfer``, ``initiator``, ``temperature``, ``retarder``, ``dilution``,
        ``flow``, ``calibration``, ``limit`` or ``none``.
    title, category : str
        Plain name; ``process``, ``measurement`` or ``none``.
    share : float
        Likelihood share (Akaike weight) [%].
    chi2 : float
        χ² at the best parameter [-].
    parameter, value, unit : str, float, str
        The fitted parameter of the hypothesis.
    text : str
        Plain-language explanation with its numbers.
    numbers : tuple of (label, value)
        The numbers behind it, unit in each label.
    next_step : str
        What to do next.
    residuals : tuple of (observation, residual in σ)
    """

    key: str
    title: str
    category: str
    share: float
    chi2: float
    parameter: str
    value: float
    unit: str
    text: str
    numbers: tuple[tuple[str, float], ...]
    next_step: str
    residuals: tuple[tuple[str, float], ...]

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict."""
        return {
            "key": self.key,
            "title": self.title,
            "category": self.category,
            "likelihood share [%]": self.share,
            "chi2 [-]": self.chi2,
            "parameter": self.parameter,
            "value": self.value,
            "unit": self.unit,
            "text": self.text,
            "numbers": {k: v for k, v in self.numbers},
            "next step": self.next_step,
            "residuals [sigma]": {k: v for k, v in self.residuals},
        }


@dataclass(frozen=True)
class CheckLine:
    """A measurement check: status ``ok``, ``flag`` or ``not recorded``, with its numbers."""

    check: str
    status: str
    text: str
    numbers: tuple[tuple[str, float], ...]
    action: str

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict."""
        return {
            "check": self.check,
            "status": self.status,
            "text": self.text,
            "numbers": {k: v for k, v in self.numbers},
            "action": self.action,
        }


@dataclass(frozen=True)
class ImpurityEstimate:
    """Level of one candidate impurity that would explain the excess 1/DPn.

    [X] = Δ(1/DPn)·[M]/C [mol/L]; ppm (mol) = 10⁶·Δ(1/DPn)/C relative to monomer;
    ppm (mass) = ppm (mol)·M_X/M0.
    """

    name: str
    C: float
    concentration: float
    ppm_mol: float
    ppm_mass: float | None
    source: str

    def row(self) -> dict[str, Any]:
        """Unit-named dict for tables."""
        return {
            "candidate": self.name,
            "C [-]": self.C,
            "[X] [mol/L]": self.concentration,
            "ratio [X]/[M] [ppm mol]": self.ppm_mol,
            "mass ratio X/monomer [ppm mass]": self.ppm_mass,
            "source": self.source,
        }


@dataclass(frozen=True)
class RateFromConversion:
    """Initial rate from conversion against time.

    Fit −ln(1 − x) = k_app·(t − t_ind) to the points with x > 0 (first order in monomer),
    R_p = k_app·[M]0.

    Attributes
    ----------
    k_app, k_app_se : float
        Apparent first-order rate coefficient and its standard error [1/s].
    R_p, R_p_se : float
        [mol/L/s].
    induction_min : float
        Time-axis intercept t_ind [min] (0 when not significant).
    n_points : int
    """

    k_app: float
    k_app_se: float
    R_p: float
    R_p_se: float
    induction_min: float
    n_points: int


def rate_from_conversion(
    time_min: Any, conversion: Any, conc_M: float
) -> RateFromConversion:
    """Initial rate of polymerization and induction period from conversion data.

    Parameters
    ----------
    time_min : array-like
        Times [min].
    conversion : array-like
        Monomer conversion x [-] (0 ≤ x < 1).
    conc_M : float
        Initial monomer concentration [mol/L].

    Returns
    -------
    RateFromConversion

    Notes
    -----
    −ln(1 − x) = k_p[R•]·t for constant [R•] (first order in monomer), so the slope
    gives k_app = k_p[R•] and R_p(0) = k_app·[M]0. Points with x = 0 (during an
    induction period) are left out of the fit; the time-axis intercept is the
    induction period, reported when larger than twice its standard error.

    References
    ----------
    SCIENCE.md §3 (R_p = k_p[M][R•]).
    """
    t = np.asarray(time_min, dtype=float) * 60.0
    x = np.asarray(conversion, dtype=float)
    keep = x > 0
    if keep.sum() < 2:
        raise DataError(
            "need at least two conversion points above 0 to estimate R_p",
            key="measured.conversion",
        )
    t, y = t[keep], -np.log1p(-x[keep])
    n = len(t)
    A = np.vstack([t, np.ones(n)]).T
    coef, *_ = np.linalg.lstsq(A, y, rcond=None)
    slope, intercept = float(coef[0]), float(coef[1])
    if slope <= 0:
        raise DataError(
            "conversion does not increase with time; check the time and conversion lists",
            key="measured.conversion",
        )
    if n > 2:
        resid = y - A @ coef
        s2 = float(resid @ resid) / (n - 2)
        cov = s2 * np.linalg.inv(A.T @ A)
        slope_se = math.sqrt(max(cov[0, 0], 0.0))
        # induction t0 = -b/a; delta method
        g = np.array([intercept / slope**2, -1.0 / slope])
        t0_se = math.sqrt(max(float(g @ cov @ g), 0.0))
    else:
        slope_se = float("nan")
        t0_se = float("nan")
    t0 = -intercept / slope
    if not (t0 > 0 and (math.isnan(t0_se) or t0 > 2 * t0_se)):
        t0 = 0.0
    return RateFromConversion(
        k_app=slope,
        k_app_se=slope_se,
        R_p=slope * conc_M,
        R_p_se=slope_se * conc_M,
        induction_min=t0 / 60.0,
        n_points=n,
    )


# --------------------------------------------------------------------------- the diagnosis


@dataclass(frozen=True)
class Diagnosis:
    """Measured against predicted, ranked causes, measurement checks and cautions.

    Attributes
    ----------
    label : str
    prediction : Prediction
        The un-anchored prediction of the recipe (its budget and parameters).
    expected, measured : dict
        Expected (anchored) and measured R_p [mol/L/s], Mn, Mw [g/mol], dispersity [-],
        1/DPn [-] (unit-named keys; measured values on the absolute scale).
    anchor : dict
        How the model was anchored to the normal batch (empty without one).
    observations : tuple of Observation
    causes : tuple of Cause
        Ranked, highest likelihood share first.
    checks : tuple of CheckLine
    impurities : tuple of ImpurityEstimate
        Candidate levels that would explain the excess 1/DPn (empty if no excess).
    excess_inv_DPn : float or None
        1/DPn measured − 1/DPn expected [-] (from Mn).
    safety : tuple of str
        Cautions (always present).
    notes, warnings : tuple of str
    """

    label: str
    prediction: Prediction
    expected: dict[str, float | None]
    measured: dict[str, float | None]
    anchor: dict[str, Any]
    observations: tuple[Observation, ...]
    causes: tuple[Cause, ...]
    checks: tuple[CheckLine, ...]
    impurities: tuple[ImpurityEstimate, ...]
    excess_inv_DPn: float | None
    safety: tuple[str, ...]
    notes: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()

    @property
    def top(self) -> Cause:
        """The highest-ranked cause."""
        return self.causes[0]

    @property
    def verdict(self) -> str:
        """``"clear"``, ``"no strong cause"`` or ``"ambiguous"`` (thresholds in the module doc)."""
        top = self.causes[0]
        none_share = next((c.share for c in self.causes if c.key == "none"), 0.0)
        if top.key == "none":
            return "no strong cause"
        if top.share >= _CLEAR_SHARE and none_share < _CLEAN_MAX_SHARE:
            return "clear"
        if none_share >= _CLEAN_MAX_SHARE and top.share < _CLEAR_SHARE:
            return "no strong cause"
        return "ambiguous"

    @property
    def strong_cause(self) -> Cause | None:
        """The top cause when the verdict is clear, else None."""
        return self.causes[0] if self.verdict == "clear" else None

    def cause(self, key: str) -> Cause:
        """The cause with ``key``."""
        for c in self.causes:
            if c.key == key:
                return c
        raise MethodError(f"no cause {key!r}; known: {', '.join(c.key for c in self.causes)}")

    def table(self) -> pd.DataFrame:
        """Ranked causes with unit-named columns."""
        rows = []
        for i, c in enumerate(self.causes, start=1):
            rows.append({
                "rank": i,
                "cause": c.title,
                "key": c.key,
                "category": c.category,
                "likelihood share [%]": c.share,
                "chi2 [-]": c.chi2,
                "parameter": c.parameter,
                "value": c.value,
                "unit": c.unit,
                "explanation": c.text,
                "next step": c.next_step,
            })
        return pd.DataFrame(rows)

    def observations_table(self) -> pd.DataFrame:
        """Observations: measured, expected, y and σ."""
        return pd.DataFrame([
            {
                "observation": o.name,
                "measured": o.measured,
                "expected": o.expected,
                "unit": o.unit,
                "y = ln(measured/expected) or value [-]": o.y,
                "sigma [-]": o.sigma,
                "recorded": o.recorded,
            }
            for o in self.observations
        ])

    def checks_table(self) -> pd.DataFrame:
        """Measurement checks."""
        return pd.DataFrame([
            {"check": c.check, "status": c.status, "text": c.text, "action": c.action}
            for c in self.checks
        ])

    def impurities_table(self) -> pd.DataFrame:
        """Candidate impurity levels."""
        cols = ["candidate", "C [-]", "[X] [mol/L]", "ratio [X]/[M] [ppm mol]",
                "mass ratio X/monomer [ppm mass]", "source"]
        return pd.DataFrame([i.row() for i in self.impurities], columns=cols)

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of everything."""
        return {
            "label": self.label,
            "verdict": self.verdict,
            "prediction": self.prediction.summary(),
            "expected": dict(self.expected),
            "measured": dict(self.measured),
            "anchor": dict(self.anchor),
            "excess 1/DPn [-]": self.excess_inv_DPn,
            "observations": [
                {"name": o.name, "y": o.y, "sigma": o.sigma, "recorded": o.recorded,
                 "measured": o.measured, "expected": o.expected, "unit": o.unit}
                for o in self.observations
            ],
            "causes": [c.summary() for c in self.causes],
            "checks": [c.summary() for c in self.checks],
            "impurities": [i.row() for i in self.impurities],
            "safety": list(self.safety),
            "notes": list(self.notes),
            "warnings": list(self.warnings),
        }



# --------------------------------------------------------------------------- helpers


def _ps_to_absolute(
    M: float | None, scale: str, monomer_polymer: str, ref: ReferenceData, notes: list[str]
) -> tuple[float | None, float | None]:
    """Convert a standard-equivalent average to the sample polymer (Mark-Houwink).

    log M_x = [log(K_s/K_x) + (1 + a_s)·log M_s]/(1 + a_x) (Benoit, Grubisic and Rempp,
    1967; SCIENCE.md §2), applied to the average itself: exact per slice, approximate
    for an average (the map is a power law with exponent close to 1).
    Returns (converted value, factor) or (M, None) if no pair is known.
    """
    if M is None or scale == "absolute":
        return M, 1.0
    std = scale[len("relative to "):]
    try:
        s = ref.mark_houwink(std, "THF")
        x = ref.mark_houwink(monomer_polymer, "THF")
    except MethodError:
        return M, None
    if s.polymer == x.polymer:
        return M, 1.0
    log_mx = (math.log10(s.K / x.K) + (1 + s.a) * math.log10(M)) / (1 + x.a)
    return 10**log_mx, 10**log_mx / M


def _sig(x: float | None, n: int = 4) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "n/a"
    return f"{x:.{n}g}"


class _Hyp:
    """One hypothesis: a parameter grid and a prediction μ(θ) for each observation."""

    def __init__(
        self,
        key: str,
        title: str,
        category: str,
        grid: np.ndarray,
        mu: Callable[[float], dict[str, float]],
        *,
        free: tuple[str, ...] = (),
        extra_sigma: Callable[[float, str], float] | None = None,
        k: int = 1,
        parameter: str = "",
        unit: str = "",
        to_value: Callable[[float], float] = lambda t: t,
    ) -> None:
        self.key, self.title, self.category = key, title, category
        self.grid, self.mu, self.free = grid, mu, free
        self.extra_sigma = extra_sigma
        self.k, self.parameter, self.unit, self.to_value = k, parameter, unit, to_value

    def chi2(self, theta: float, obs: Mapping[str, Observation]) -> tuple[float, dict[str, float]]:
        mu = self.mu(theta)
        total = 0.0
        res = {}
        for name, o in obs.items():
            if name in self.free:
                continue
            s = o.sigma
            if self.extra_sigma is not None:
                s = math.hypot(s, self.extra_sigma(theta, name))
            r = (o.y - mu.get(name, 0.0)) / s
            res[name] = r
            total += r * r
        return total, res

    def fit(self, obs: Mapping[str, Observation]) -> tuple[float, float, dict[str, float]]:
        from scipy.optimize import minimize_scalar

        vals = [self.chi2(t, obs)[0] for t in self.grid]
        i = int(np.argmin(vals))
        best_t, best = float(self.grid[i]), vals[i]
        if len(self.grid) > 2:
            lo = float(self.grid[max(i - 1, 0)])
            hi = float(self.grid[min(i + 1, len(self.grid) - 1)])
            if hi > lo:
                r = minimize_scalar(
                    lambda t: self.chi2(t, obs)[0], bounds=(lo, hi), method="bounded",
                    options={"xatol": 1e-10 * max(1.0, abs(hi - lo))},
                )
                if r.success and r.fun < best:
                    best_t, best = float(r.x), float(r.fun)
        chi2, res = self.chi2(best_t, obs)
        return best_t, chi2, res


# --------------------------------------------------------------------------- main entry


def diagnose(
    recipe: Recipe,
    measured: Measured | None = None,
    reference: Recipe | NormalBatch | None = None,
    *,
    ref: ReferenceData | None = None,
) -> Diagnosis:
    """Compare measured with predicted and rank the causes of a low molar mass.

    Parameters
    ----------
    recipe : Recipe
        The batch in question (its ``measured`` and ``checks`` are used).
    measured : Measured, optional
        Replaces ``recipe.measured``.
    reference : Recipe or NormalBatch, optional
        The normal batch (a Recipe with its own ``measured``); default
        ``recipe.normal_batch``.
    ref : ReferenceData, optional
        Reference tables (default: the recipe's).

    Returns
    -------
    Diagnosis

    Raises
    ------
    DataError
        Nothing measured (no Mn, Mw, R_p or conversion).

    References
    ----------
    See the module docstring (method, scoring and sources).
    """
    ref = ref if ref is not None else recipe.reference_data()
    meas = measured if measured is not None else recipe.measured
    if reference is None:
        normal = recipe.normal_batch
    elif isinstance(reference, Recipe):
        normal = NormalBatch(recipe=reference, measured=reference.measured)
    else:
        normal = reference
    if meas.is_empty:
        raise DataError(
            "nothing measured to compare: give [measured] 'Mn [g/mol]' and/or 'Mw [g/mol]', "
            "'R_p [mol/L/s]' or conversion against time",
            key="measured",
            path=recipe.path,
        )
    notes: list[str] = []
    pred = predict(recipe, ref)
    p = pred.parameters
    warns = list(pred.warnings)
    notes.extend(pred.notes)
    mon = None
    try:
        mon = ref.monomer(p.monomer)
        polymer = mon.polymer
    except MethodError:
        polymer = p.monomer
    checks: list[CheckLine] = []

    # ---- measured values on the absolute scale
    def absolute(m: Measured, what: str) -> tuple[float | None, float | None, float | None]:
        Mn, f_n = _ps_to_absolute(m.Mn, m.scale, polymer, ref, notes)
        Mw, f_w = _ps_to_absolute(m.Mw, m.scale, polymer, ref, notes)
        return Mn, Mw, (f_n if f_n is not None else f_w)

    Mn_m, Mw_m, fac = absolute(meas, "measured")
    if meas.scale != "absolute":
        std = meas.scale[len("relative to "):]
        if fac is None:
            checks.append(CheckLine(
                "molar-mass scale", "flag",
                f"Mn/Mw are {std}-equivalent values and no Mark-Houwink pair is bundled to "
                f"convert them to {polymer}; they are used as if absolute",
                (), "use universal calibration with a Mark-Houwink pair for the polymer, or "
                "absolute (light-scattering) detection; add the pair to the mark_houwink table",
            ))
            warns.append(f"{std}-equivalent Mn/Mw used as absolute (no Mark-Houwink pair)")
        elif abs(fac - 1.0) > 1e-12:
            checks.append(CheckLine(
                "molar-mass scale", "flag",
                f"Mn/Mw are {std}-equivalent; converted to {polymer} with the bundled "
                f"Mark-Houwink pairs (factor {fac:.4g} at Mn; about 5 % uncertain by the "
                "choice of pair). Using equivalent values as absolute would misstate the gap",
                (("conversion factor at Mn [-]", fac),),
                "report which pair was used; prefer universal calibration in the method",
            ))
        else:
            checks.append(CheckLine(
                "molar-mass scale", "ok", f"{std}-equivalent values of {polymer} are absolute",
                (), "",
            ))
    else:
        checks.append(CheckLine("molar-mass scale", "ok", "values entered as absolute", (), ""))

    # ---- measured R_p
    Rp_m, Rp_rel_se, induction = meas.R_p, None, meas.induction_min
    if Rp_m is None and meas.conversion:
        rc = rate_from_conversion(meas.time_min, meas.conversion, p.conc_M)
        Rp_m = rc.R_p
        Rp_rel_se = rc.R_p_se / rc.R_p if math.isfinite(rc.R_p_se) else None
        if induction is None:
            induction = rc.induction_min
        notes.append(
            f"R_p from conversion: k_app = {rc.k_app:.4g} 1/s from {rc.n_points} points, "
            f"R_p = k_app·[M]0 = {rc.R_p:.4g} mol/L/s"
        )

    # ---- anchoring to the normal batch
    anchor: dict[str, Any] = {}
    p_cal = p
    Mw_factor = 1.0
    normal_has = {"Mn": False, "Mw": False, "R_p": False}
    if normal is not None and not normal.measured.is_empty:
        nrec = normal.recipe if normal.recipe is not None else recipe
        p_ref = resolve_parameters(nrec, ref) if normal.recipe is not None else p
        nm = normal.measured
        nMn, nMw, _ = absolute(nm, "normal batch")
        nRp = nm.R_p
        if nRp is None and nm.conversion:
            nRp = rate_from_conversion(nm.time_min, nm.conversion, p_ref.conc_M).R_p
        phi = 1.0
        if nRp is not None:
            phi = (nRp / evaluate(p_ref).R_p) ** 2
            normal_has["R_p"] = True
        p_ref_cal = replace(p_ref, f=p_ref.f * phi)
        offset = 0.0
        if nMn is not None:
            offset = p_ref.M0 / nMn - evaluate(p_ref_cal).inv_DPn
            normal_has["Mn"] = True
        if offset:
            # a term C·[X]/[M] with [X] = [M] contributes exactly the offset
            off_term = TransferTerm("normal-batch offset", "offset", p_ref.conc_M, offset,
                                    None, None, "anchor")
            p_ref_cal = replace(p_ref_cal, transfer=p_ref_cal.transfer + (off_term,))
        if nMw is not None:
            s_ref = evaluate(p_ref_cal)
            Mw_factor = nMw / (s_ref.DPn * p_ref.M0 * s_ref.dispersity)
            normal_has["Mw"] = True
        # carry the anchor to this recipe
        transfer = p.transfer
        if offset:
            transfer = transfer + (
                TransferTerm("normal-batch offset", "offset", p.conc_M, offset, None, None,
                             "anchor"),
            )
        p_cal = replace(p, f=p.f * phi, transfer=transfer)
        anchor = {
            "radical flux factor (f·k_d·[I]) [-]": phi,
            "1/DPn offset [-]": offset,
            "Mw factor [-]": Mw_factor,
            "normal batch": nrec.label if normal.recipe is not None else "same recipe",
        }
        notes.append(
            "expected values anchored to the normal batch: radical flux × "
            f"{phi:.4g}, 1/DPn offset {offset:+.4g}, Mw × {Mw_factor:.4g}"
        )
    base = evaluate(p_cal)

    # ---- expected values
    Rp_e = base.R_p
    Mn_e = base.DPn * p.M0
    Mw_e = base.DPn * p.M0 * base.dispersity * Mw_factor
    inv_e = base.inv_DPn

    # ---- uncertainties
    u = recipe.uncertainty
    sMn = (u.Mn if u.Mn is not None else DEFAULT_UNCERTAINTY["Mn"]) / 100.0
    sMw = (u.Mw if u.Mw is not None else DEFAULT_UNCERTAINTY["Mw"]) / 100.0
    sRp = (u.R_p if u.R_p is not None else DEFAULT_UNCERTAINTY["R_p"]) / 100.0
    if u.R_p is None and Rp_rel_se is not None and math.isfinite(Rp_rel_se):
        sRp = max(Rp_rel_se, 0.05)
    def model_sigma(anchored: bool) -> float:
        if u.model is not None:
            return u.model / 100.0
        return 0.0 if anchored else DEFAULT_UNCERTAINTY["model"] / 100.0

    obs: dict[str, Observation] = {}
    if Rp_m is not None:
        s = math.hypot(sRp * (math.sqrt(2) if normal_has["R_p"] else 1.0),
                       model_sigma(normal_has["R_p"]))
        obs["R_p"] = Observation("R_p", math.log(Rp_m / Rp_e), s, True, Rp_m, Rp_e, "mol/L/s")
    if Mn_m is not None:
        s = math.hypot(sMn * (math.sqrt(2) if normal_has["Mn"] else 1.0),
                       model_sigma(normal_has["Mn"]))
        obs["Mn"] = Observation("Mn", math.log(Mn_m / Mn_e), s, True, Mn_m, Mn_e, "g/mol")
    if Mw_m is not None:
        if normal_has["Mw"]:
            s = math.hypot(sMw * math.sqrt(2), model_sigma(True))
        else:
            s = math.sqrt(sMw**2 + model_sigma(False) ** 2 + _SIGMA_DISPERSITY_MODEL**2)
        obs["Mw"] = Observation("Mw", math.log(Mw_m / Mw_e), s, True, Mw_m, Mw_e, "g/mol")
    if not any(k in obs for k in ("Mn", "Mw")):
        notes.append("no Mn or Mw measured: only the rate can be compared")

    ch: Checks = recipe.checks
    # check standard
    if ch.check_standard_deviation is not None:
        y = math.log1p(ch.check_standard_deviation / 100.0)
        obs["check standard"] = Observation(
            "check standard", y, _SIGMA_CHECK_STANDARD, True, ch.check_standard_deviation, 0.0,
            "%")
        status = "flag" if abs(ch.check_standard_deviation) > 100 * _SIGMA_CHECK_STANDARD else "ok"
        checks.append(CheckLine(
            "check standard", status,
            f"check standard {ch.check_standard_deviation:+.3g} % from its assigned value "
            f"(repeatability under 3 %)",
            (("check standard deviation [%]", ch.check_standard_deviation),),
            "recalibrate and re-run the check standard before judging the sample"
            if status == "flag" else "",
        ))
    else:
        obs["check standard"] = Observation(
            "check standard", 0.0, _PRIOR_CHECK_STANDARD, False, None, None, "%")
        checks.append(CheckLine(
            "check standard", "not recorded", "no check-standard result given", (),
            "run a check standard with the samples; give 'check standard deviation [%]'",
        ))
    # flow marker
    BV_given = ch.calibration_slope is not None and ch.peak_volume is not None
    B = ch.calibration_slope if ch.calibration_slope is not None else _DEFAULT_SLOPE
    V = ch.peak_volume if ch.peak_volume is not None else _DEFAULT_PEAK_VOLUME
    BV = B * V
    BV_rel = _BV_REL_GIVEN if BV_given else _BV_REL_DEFAULT
    k_flow = math.log(10.0) * BV
    fe = ch.flow_error
    if fe is not None and not ch.flow_marker_corrected:
        obs["flow marker"] = Observation("flow marker", fe, _SIGMA_FLOW_MARKER, True,
                                         ch.flow_marker_observed, ch.flow_marker_reference, "mL")
        shift = 100.0 * (10 ** (-BV * fe) - 1.0)
        status = "flag" if abs(fe) > 2 * _SIGMA_FLOW_MARKER else "ok"
        checks.append(CheckLine(
            "flow marker", status,
            f"flow marker at {ch.flow_marker_observed:g} mL against {ch.flow_marker_reference:g}"
            f" mL ({100 * fe:+.3g} %); uncorrected this moves every average by about "
            f"{shift:+.3g} % (B·V = {BV:.3g}), dispersity unchanged",
            (("flow marker shift [%]", 100 * fe), ("expected shift of averages [%]", shift),
             ("B·V [decades]", BV)),
            "re-process with the flow-marker correction; check pump flow, leaks and degassing"
            if status == "flag" else "",
        ))
    elif fe is not None:
        obs["flow marker"] = Observation("flow marker", 0.0, _PRIOR_FLOW_CORRECTED, False,
                                         ch.flow_marker_observed, ch.flow_marker_reference, "mL")
        checks.append(CheckLine(
            "flow marker", "ok",
            f"results corrected with the flow marker ({100 * fe:+.3g} % shift)",
            (("flow marker shift [%]", 100 * fe),), "",
        ))
    else:
        obs["flow marker"] = Observation("flow marker", 0.0, _PRIOR_FLOW, False, None, None, "mL")
        checks.append(CheckLine(
            "flow marker", "not recorded", "no flow-marker positions given", (),
            "use a flow marker and give its observed and reference volumes",
        ))
    # low-M limit
    if ch.Mn_shift_low_limit is not None:
        y = ch.Mn_shift_low_limit / 100.0
        obs["low-M limit"] = Observation("low-M limit", y, _SIGMA_LIMIT, True,
                                         ch.Mn_shift_low_limit, 0.0, "%")
        status = "flag" if abs(y) > _SIGMA_LIMIT else "ok"
        checks.append(CheckLine(
            "low-M integration limit", status,
            f"Mn changes by {ch.Mn_shift_low_limit:+.3g} % when the low-M limit moves 0.2 mL "
            "earlier" + (" (a low-M tail or system peak inside the limits)" if status == "flag"
                         else ""),
            (("Mn shift, low-M limit -0.2 mL [%]", ch.Mn_shift_low_limit),),
            "move the limit before the system/solvent peaks, check the baseline end, and "
            "judge on Mw, which is far less sensitive" if status == "flag" else "",
        ))
    else:
        checks.append(CheckLine(
            "low-M integration limit", "not recorded", "Mn sensitivity to the limit not given",
            (), "re-integrate with the low-M limit 0.2 mL earlier and compare Mn",
        ))
    # outside calibration
    if ch.outside_calibration is not None:
        obs["outside calibration"] = Observation(
            "outside calibration", ch.outside_calibration, _SIGMA_OUTSIDE, True,
            ch.outside_calibration, 0.0, "% mass")
        status = "flag" if ch.outside_calibration > _SIGMA_OUTSIDE else "ok"
        checks.append(CheckLine(
            "calibrated range", status,
            f"{ch.outside_calibration:.3g} % of the mass elutes outside the calibrated range",
            (("outside calibration [% mass]", ch.outside_calibration),),
            "add standards covering the range (do not extrapolate the calibration)"
            if status == "flag" else "",
        ))
    # induction period
    if induction is not None:
        obs["induction period"] = Observation("induction period", induction, _SIGMA_INDUCTION,
                                              True, induction, 0.0, "min")

    # ---- hypotheses
    kin_cache: dict[tuple, KineticState] = {}

    def kin(**kw: float) -> dict[str, float]:
        key = tuple(sorted(kw.items()))
        s = kin_cache.get(key)
        if s is None:
            s = evaluate(p_cal, **kw)
            kin_cache[key] = s
        return {
            "R_p": math.log(s.R_p / base.R_p),
            "Mn": math.log(s.DPn / base.DPn),
            "Mw": math.log(s.DPn * s.dispersity / (base.DPn * base.dispersity)),
        }

    R0 = base.radicals
    hyps: list[_Hyp] = [
        _Hyp("none", "no cause: as expected", "none", np.array([0.0]), lambda t: {}, k=0,
             parameter="-", unit="-"),
        _Hyp(
            "transfer", "unexplained chain transfer (impurity or agent overcharge)", "process",
            np.linspace(0.02, 1.0, 197)[::-1],
            lambda r: kin(extra_transfer=inv_e * (1.0 / r - 1.0)),
            parameter="excess 1/DPn", unit="-", to_value=lambda r: inv_e * (1.0 / r - 1.0),
        ),
        _Hyp(
            "initiator", "excess initiation (initiator overcharge)", "process",
            np.linspace(0.0, math.log(1000.0), 241),
            lambda lf: kin(radical_flux_factor=math.exp(lf)),
            parameter="initiator factor F", unit="-", to_value=math.exp,
        ),
        _Hyp(
            "retarder", "inhibition or retardation (stabilizer, oxygen)", "process",
            np.linspace(0.02, 1.0, 197)[::-1],
            lambda h: kin(retarder=2.0 * p_cal.k_t * R0 * (1.0 - h * h) / h),
            free=("induction period",),
            parameter="radical loss to retarder ζ = k_z[Z]", unit="1/s",
            to_value=lambda h: 2.0 * p_cal.k_t * R0 * (1.0 - h * h) / h,
        ),
        _Hyp(
            "dilution", "dilution or monomer loss", "process",
            np.linspace(0.02, 1.0, 197)[::-1],
            lambda g: kin(monomer_factor=g),
            parameter="[M] factor g", unit="-",
        ),
        _Hyp(
            "flow", "flow-rate error (uncorrected flow-marker drift)", "measurement",
            np.linspace(-0.1, 0.1, 801),
            lambda e: {"Mn": -k_flow * e, "Mw": -k_flow * e, "check standard": -k_flow * e,
                       "flow marker": e},
            extra_sigma=lambda e, name: BV_rel * abs(k_flow * e)
            if name in ("Mn", "Mw", "check standard") else 0.0,
            parameter="relative flow error ε", unit="-",
        ),
        _Hyp(
            "calibration", "calibration drift (check standard off)", "measurement",
            np.linspace(-2.0, 2.0, 801),
            lambda s: {"Mn": s, "Mw": s, "check standard": s},
            parameter="shift of all averages ln(factor)", unit="-",
        ),
        _Hyp(
            "limit", "integration-limit artefact (low-M tail inside the limits)", "measurement",
            np.linspace(-2.0, 0.0, 401),
            lambda t: {"Mn": t},
            free=("low-M limit", "outside calibration"),
            parameter="Mn bias ln(factor)", unit="-",
        ),
    ]
    if p.E_p is not None and p.E_d is not None:
        hyps.insert(3, _Hyp(
            "temperature", "temperature overshoot", "process",
            np.linspace(0.0, 80.0, 321),
            lambda dT: kin(dT=dT),
            parameter="temperature rise ΔT", unit="K",
        ))
    else:
        notes.append("temperature overshoot not evaluated: activation energy of k_p or k_d unknown")

    fits = []
    for h in hyps:
        theta, chi2, res = h.fit(obs)
        fits.append((h, theta, chi2, res))
    aic = np.array([chi2 + 2 * h.k for h, _, chi2, _ in fits])
    w = np.exp(-(aic - aic.min()) / 2.0)
    share = 100.0 * w / w.sum()

    # ---- excess 1/DPn and impurity levels
    excess = None
    if Mn_m is not None:
        excess = p.M0 / Mn_m - inv_e
    else:
        tr = next(f for f in fits if f[0].key == "transfer")
        excess = tr[0].to_value(tr[1]) if Mw_m is not None else None
    impurities: list[ImpurityEstimate] = []
    if excess is not None and excess > 0:
        seen = set()
        cands: list[tuple[str, float, float | None, str]] = []
        for c in recipe.candidates:
            if c.C is not None:
                M = c.M
                if M is None:
                    try:
                        M = ref.agent(c.name, p.monomer).M
                    except MethodError:
                        M = None
                cands.append((c.name, c.C, M, "recipe"))
            else:
                try:
                    a = ref.agent(c.name, p.monomer)
                except MethodError as exc:
                    raise MethodError(exc.message, key="candidate.name", path=recipe.path) from None
                cands.append((a.agent, a.C(p.T), c.M if c.M is not None else a.M, a.source))
        try:
            table_agents = ref.agents_for(p.monomer)
        except MethodError:  # monomer not in the tables
            table_agents = []
        for a in sorted(table_agents, key=lambda a: -a.C(p.T)):
            cands.append((a.agent, a.C(p.T), a.M, a.source))
        n_recipe = len(recipe.candidates)
        for j, (name, C, M, src) in enumerate(cands):
            if name.lower() in seen or C <= 0:
                continue
            # table candidates needing more than 1 mol % of the monomer are not a hidden
            # impurity (common practice); candidates named in the recipe are always shown
            ratio = float(impurity_ratio(excess, C))  # [X]/[M], instantaneous
            if j >= n_recipe and 1e6 * ratio > _MAX_IMPURITY_PPM:
                continue
            seen.add(name.lower())
            ppm = 1e6 * ratio
            impurities.append(ImpurityEstimate(
                name=name, C=C, concentration=ratio * p.conc_M, ppm_mol=ppm,
                ppm_mass=ppm * M / p.M0 if M else None, source=src,
            ))

    # ---- texts
    rp_ratio = Rp_m / Rp_e if Rp_m is not None else None
    dp_ratio = Mn_m / Mn_e if Mn_m is not None else None
    causes = []
    for (h, theta, chi2, res), sh in zip(fits, share, strict=True):
        value = float(h.to_value(theta))
        text, numbers, nxt = _explain(
            h.key, value, theta, p=p, p_cal=p_cal, base=base, rp_ratio=rp_ratio,
            dp_ratio=dp_ratio, Mn_m=Mn_m, Mw_m=Mw_m, Mn_e=Mn_e, Mw_e=Mw_e, inv_e=inv_e,
            excess=excess, impurities=impurities, induction=induction, checks=ch,
            BV=BV, obs=obs,
        )
        causes.append(Cause(
            key=h.key, title=h.title, category=h.category, share=float(sh), chi2=float(chi2),
            parameter=h.parameter, value=value, unit=h.unit, text=text,
            numbers=tuple(numbers), next_step=nxt,
            residuals=tuple((k, float(v)) for k, v in res.items()),
        ))
    causes.sort(key=lambda c: (-c.share, c.chi2))
    if "R_p" not in obs and any(k in obs for k in ("Mn", "Mw")):
        notes.append(
            "R_p not measured: unexplained transfer, extra initiator and a temperature "
            "overshoot lower Mn alike and cannot be told apart; measure conversion against "
            "time (the rate goes up with initiator or heat, not with transfer)"
        )

    top = causes[0]
    # goodness of fit of the best single cause: chi-square with (observations - k) dof
    n_obs = len(obs) - sum(1 for h in hyps if h.key == top.key for f in h.free if f in obs)
    k_top = next(h.k for h in hyps if h.key == top.key)
    dof = max(n_obs - k_top, 1)
    from scipy.stats import chi2 as _chi2

    fit_p = float(_chi2.sf(top.chi2, dof))
    if fit_p < 0.01:
        notes.append(
            f"no single cause explains all numbers well (best χ² = {top.chi2:.3g} for {dof} "
            f"degrees of freedom, p = {fit_p:.2g}): two causes may act together, or an "
            "input value is off; check the residuals"
        )
    runaway = top.key in ("initiator", "temperature") or any(
        c.key in ("initiator", "temperature") and c.share >= 20.0 for c in causes
    )
    cautions: list[str] = []
    if p.initiator_caution:
        cautions.append(f"{p.initiator}: {p.initiator_caution}")
    for t in p.transfer:
        if t.caution:
            cautions.append(f"{t.name}: {t.caution}")

    expected = {
        "R_p [mol/L/s]": Rp_e,
        "Mn [g/mol]": Mn_e,
        "Mw [g/mol]": Mw_e,
        "dispersity [-]": Mw_e / Mn_e,
        "1/DPn [-]": inv_e,
    }
    measured_d = {
        "R_p [mol/L/s]": Rp_m,
        "Mn [g/mol]": Mn_m,
        "Mw [g/mol]": Mw_m,
        "dispersity [-]": (Mw_m / Mn_m) if (Mw_m and Mn_m) else None,
        "1/DPn [-]": (p.M0 / Mn_m) if Mn_m else None,
        "induction period [min]": induction,
    }
    return Diagnosis(
        label=recipe.label,
        prediction=pred,
        expected=expected,
        measured=measured_d,
        anchor=anchor,
        observations=tuple(obs.values()),
        causes=tuple(causes),
        checks=tuple(checks),
        impurities=tuple(impurities),
        excess_inv_DPn=excess,
        safety=safety_lines(runaway=runaway, cautions=tuple(dict.fromkeys(cautions))),
        notes=tuple(dict.fromkeys(notes)),
        warnings=tuple(dict.fromkeys(warns)),
    )


def _explain(key: str, value: float, theta: float, **c: Any):
    """Plain-language text, numbers and next step for one cause."""
    p: KineticParameters = c["p"]
    p_cal: KineticParameters = c["p_cal"]
    base: KineticState = c["base"]
    rp, dp = c["rp_ratio"], c["dp_ratio"]
    nums: list[tuple[str, float]] = []
    if rp is not None:
        nums.append(("R_p measured/expected [-]", rp))
    if dp is not None:
        nums.append(("Mn measured/expected [-]", dp))
    if c["Mw_m"] is not None:
        nums.append(("Mw measured/expected [-]", c["Mw_m"] / c["Mw_e"]))
    rp_txt = f"R_p is {_sig(rp, 3)}× expected" if rp is not None else "R_p was not measured"
    dp_txt = f"Mn is {_sig(dp, 3)}× expected" if dp is not None else "Mn was not measured"

    if key == "none":
        return (
            f"Measured values agree with the expected ones within their uncertainties "
            f"({dp_txt}; {rp_txt}).",
            nums,
            "nothing to chase; if the product is still off-spec, check the specification "
            "and the sampling",
        )
    if key == "transfer":
        ex = c["excess"]
        nums.insert(0, ("excess 1/DPn (from Mn) [-]", ex if ex is not None else float("nan")))
        nums.append(("1/DPn expected [-]", c["inv_e"]))
        lines = ""
        if c["impurities"]:
            top = c["impurities"][:3]
            lines = "; ".join(
                f"{i.name} (C = {i.C:.3g}): {i.ppm_mol:.3g} ppm mol"
                + (f" ({i.ppm_mass:.3g} ppm by mass)" if i.ppm_mass else "")
                for i in top
            )
            nums.append((f"equivalent {top[0].name} [ppm mol]", top[0].ppm_mol))
        return (
            f"Chains stop more often than the recipe explains while the radicals keep "
            f"going: {dp_txt}, {rp_txt}. Excess 1/DPn = {_sig(ex, 4)} "
            f"(1/DPn measured − expected). Equivalent impurity levels: "
            f"{lines or 'no candidates'}.",
            nums,
            "look for a transfer-active contaminant: thiols or halocarbons in monomer or "
            "solvent lots (GC), shared lines and cleaning residues, an agent charged twice; "
            "compare with a retained sample of the previous lot",
        )
    if key == "initiator":
        F = value
        s = evaluate(p_cal, radical_flux_factor=F)
        nums.append(("best-fit initiator factor F [-]", F))
        if rp is not None:
            nums.append(("initiator factor from R_p, (R_p ratio)² [-]", rp**2))
        nums.append(("Mn ratio predicted at F [-]", s.DPn / base.DPn))
        if rp is not None and dp is not None:
            nums.append(("R_p·DPn measured/expected [-]", rp * dp))
        prod = (
            f"; R_p·DPn is {rp * dp:.3g}× expected (about 1 for extra initiator)"
            if (rp is not None and dp is not None) else ""
        )
        from_rate = (
            f" The rate corresponds to {rp**2:.3g}× the radical flux (R_p ∝ [I]^½)."
            if rp is not None else ""
        )
        return (
            f"More radicals than the recipe gives: {rp_txt} and {dp_txt}{prod}.{from_rate} "
            f"Best fit F = {F:.3g} (× f·k_d·[I]), which predicts R_p × "
            f"{s.R_p / base.R_p:.3g} and Mn × {s.DPn / base.DPn:.3g}.",
            nums,
            "check the initiator weighing, assay and charge records, dosing and any "
            "second charge; do not change initiator or temperature without a heat-balance "
            "review (runaway risk)",
        )
    if key == "temperature":
        dT = value
        s = evaluate(p_cal, dT=dT)
        Ep, Ed = p.E_p, p.E_d
        nums.append(("best-fit temperature rise [K]", dT))
        if rp is not None and rp > 1:
            inv_T = 1.0 / p.T - R_GAS * math.log(rp) / ((Ep + Ed / 2.0) * 1e3)
            dT_rp = 1.0 / inv_T - p.T
            nums.append(("temperature rise from R_p alone [K]", dT_rp))
        nums.append(("Mn ratio predicted at that rise [-]", s.DPn / base.DPn))
        return (
            f"A higher temperature speeds up decomposition (E_d = {Ed:g} kJ/mol) and "
            f"propagation (E_p = {Ep:g} kJ/mol): {rp_txt}, {dp_txt}. A rise of "
            f"{dT:.3g} K explains it best; it predicts R_p × {s.R_p / base.R_p:.3g} and "
            f"Mn × {s.DPn / base.DPn:.3g} (heat lowers Mn less than extra initiator at the "
            "same rate).",
            nums,
            "check the temperature record and probe calibration, jacket control and the "
            "start-up exotherm; an overshoot means the heat removal was short: review it "
            "before the next batch (runaway risk)",
        )
    if key == "retarder":
        zeta = value
        s = evaluate(p_cal, retarder=zeta)
        nums.append(("radical loss to retarder ζ [1/s]", zeta))
        nums.append(("R_p ratio predicted [-]", s.R_p / base.R_p))
        nums.append(("Mn ratio predicted [-]", s.DPn / base.DPn))
        ind = c["induction"]
        if ind is not None:
            nums.append(("induction period [min]", ind))
        return (
            f"Something consumes radicals: {rp_txt}, {dp_txt}"
            + (f", induction period {ind:.3g} min" if ind else "")
            + f". A radical loss ζ = {zeta:.3g} 1/s (each loss ends a chain) reproduces "
            f"R_p × {s.R_p / base.R_p:.3g} and Mn × {s.DPn / base.DPn:.3g}.",
            nums,
            "check inhibitor (stabilizer) removal, degassing and the nitrogen purge "
            "(oxygen), and the monomer lot's stabilizer content",
        )
    if key == "dilution":
        g = value
        s = evaluate(p_cal, monomer_factor=g)
        nums.append(("[M] factor g [-]", g))
        nums.append(("[M] implied [mol/L]", p.conc_M * g))
        return (
            f"Less monomer than the recipe: {rp_txt}, {dp_txt}. [M] × {g:.3g} "
            f"({p.conc_M * g:.4g} mol/L) lowers R_p and DPn together "
            f"(R_p × {s.R_p / base.R_p:.3g}, Mn × {s.DPn / base.DPn:.3g}).",
            nums,
            "check the monomer and solvent charges, evaporation or venting losses, and the "
            "monomer assay",
        )
    if key == "flow":
        e = value
        shift = 100.0 * (10 ** (-c["BV"] * e) - 1.0)
        nums.insert(0, ("relative flow error [%]", 100 * e))
        nums.append(("shift of every average [%]", shift))
        return (
            f"A flow-rate error of {100 * e:+.3g} % moves every average by {shift:+.3g} % "
            f"(B·V = {c['BV']:.3g}) and leaves the dispersity unchanged; {rp_txt}.",
            nums,
            "re-process with the flow-marker correction; check pump flow (timed volume), "
            "leaks and degassing; re-run the check standard",
        )
    if key == "calibration":
        shift = 100.0 * (math.exp(value) - 1.0)
        nums.insert(0, ("shift of every average [%]", shift))
        return (
            f"All averages shifted together by {shift:+.3g} % as a calibration drift "
            f"would do (check standard and sample alike); {rp_txt}.",
            nums,
            "recalibrate with fresh narrow standards, check column condition (broadened "
            "standards) and re-run the check standard",
        )
    if key == "limit":
        shift = 100.0 * (math.exp(value) - 1.0)
        nums.insert(0, ("Mn bias [%]", shift))
        lim = c["checks"].Mn_shift_low_limit
        if lim is not None:
            nums.append(("Mn shift, low-M limit -0.2 mL [%]", lim))
        return (
            f"Mn is low by {shift:+.3g} % while Mw is "
            f"{_sig(c['Mw_m'] / c['Mw_e'] if c['Mw_m'] else None, 3)}× expected: a low-M tail, "
            "system peak or baseline end inside the integration limits"
            + (f"; Mn moves {lim:+.3g} % when the limit moves 0.2 mL" if lim is not None else "")
            + ".",
            nums,
            "re-integrate with the low-M limit before the system peak and a longer baseline "
            "window; judge on Mw",
        )
    raise MethodError(f"unknown cause {key!r}")  # pragma: no cover


# --------------------------------------------------------------------------- file entry


def measured_from_results(
    path: str | Path, *, sample_id: str | None = None
) -> tuple[Measured, dict[str, Any]]:
    """Measured values and checks from a batch results table (results.csv/.xlsx).

    Parameters
    ----------
    path : path
        A table with the batch results columns (``sample_id``, ``Mn [g/mol]``,
        ``Mw [g/mol]``, ``molar-mass scale``, ``outside calibration [% mass]``,
        ``flow marker [mL]``, ``Mn shift, low-M limit -0.2 mL [%]``, ``role``,
        ``assigned Mw [g/mol]``...).
    sample_id : str, optional
        Which sample; required when the table holds more than one sample. Replicate
        rows are averaged.

    Returns
    -------
    (Measured, dict)
        The measured values, and check values to merge into the recipe's ``[checks]``
        (``check_standard_deviation`` from check-standard rows with an assigned Mw,
        ``outside_calibration``, ``Mn_shift_low_limit``, ``flow_marker_observed`` with
        ``flow_marker_corrected = True`` since the batch applies the marker).
    """
    from gpctools.io import read_sheet

    df = read_sheet(path)
    if "sample_id" not in df.columns or "Mn [g/mol]" not in df.columns:
        raise InputFormatError(
            "not a results table: needs 'sample_id' and 'Mn [g/mol]' columns", path=path,
            column="sample_id" if "sample_id" not in df.columns else "Mn [g/mol]",
        )
    role = df["role"].astype(str).str.strip().str.lower() if "role" in df.columns else None
    status = df["status"].astype(str).str.strip().str.lower() if "status" in df.columns else None
    samples = df
    if role is not None:
        samples = df[role.isin(["sample", "", "nan", "replicate"])]
    if status is not None:
        samples = samples[status.loc[samples.index] == "ok"]
    ids = samples["sample_id"].astype(str).str.strip()
    if sample_id is None:
        uniq = list(dict.fromkeys(ids))
        if len(uniq) != 1:
            raise InputFormatError(
                f"the results table holds {len(uniq)} samples ({', '.join(uniq[:6])}"
                f"{', ...' if len(uniq) > 6 else ''}); choose one (CLI: --sample ID; "
                "Python: sample_id=...)", path=path, column="sample_id",
            )
        sample_id = uniq[0]
    rows = samples[ids == str(sample_id)]
    if rows.empty:
        raise InputFormatError(f"sample {sample_id!r} not found (or not ok)", path=path,
                               column="sample_id")

    def mean(col: str) -> float | None:
        if col not in rows.columns:
            return None
        v = pd.to_numeric(rows[col], errors="coerce").dropna()
        return float(v.mean()) if len(v) else None

    scale = "absolute"
    if "molar-mass scale" in rows.columns:
        text = str(rows["molar-mass scale"].iloc[0])
        s = normalize_scale(text)
        if s is None:
            # never assume absolute: a standard-equivalent Mn taken as absolute is the
            # classic way to mis-diagnose a batch
            raise InputFormatError(
                f"molar-mass scale {text!r} is not recognised; write 'absolute ...' or "
                "'relative to <standard polymer>' (as gpctools batch does)",
                path=path, column="molar-mass scale")
        scale = s
    meas = Measured(Mn=mean("Mn [g/mol]"), Mw=mean("Mw [g/mol]"), scale=scale)
    checks: dict[str, Any] = {}
    oc = mean("outside calibration [% mass]")
    if oc is not None:
        checks["outside_calibration"] = oc
    sh = mean(columns.find(rows.columns, columns.MN_SHIFT_LOW_M))  # also the old header
    if sh is not None:
        checks["Mn_shift_low_limit"] = sh
    fm = mean("flow marker [mL]")
    if fm is not None:
        checks["flow_marker_observed"] = fm
        checks["flow_marker_corrected"] = True
    if role is not None and "assigned Mw [g/mol]" in df.columns:
        cs = df[role == "check_standard"]
        if status is not None:
            cs = cs[status.loc[cs.index] == "ok"]
        a = pd.to_numeric(cs["assigned Mw [g/mol]"], errors="coerce")
        m = pd.to_numeric(cs["Mw [g/mol]"], errors="coerce")
        ok = a.notna() & m.notna() & (a > 0)
        if ok.any():
            checks["check_standard_deviation"] = float((100.0 * (m[ok] / a[ok] - 1.0)).mean())
    return meas, checks


def diagnose_recipe(
    recipe_path: str | Path,
    *,
    measured_path: str | Path | None = None,
    sample_id: str | None = None,
) -> Diagnosis:
    """Load a recipe (and optionally a results table) and diagnose it (the CLI entry).

    Nothing is written; :func:`gpctools.report.write_diagnosis` writes the report and
    tables.

    Parameters
    ----------
    recipe_path : path
        Recipe TOML (see ``templates/recipe.toml``).
    measured_path : path, optional
        A batch results table; its Mn/Mw (and checks it records) replace the recipe's
        ``[measured]`` molar masses, recipe values filling what the table lacks.
    sample_id : str, optional
        Sample to take from ``measured_path``.

    Returns
    -------
    Diagnosis
    """
    recipe = load_recipe(recipe_path)
    if measured_path is not None:
        meas_file, chk = measured_from_results(measured_path, sample_id=sample_id)
        m = recipe.measured
        measured = replace(
            m,
            Mn=meas_file.Mn if meas_file.Mn is not None else m.Mn,
            Mw=meas_file.Mw if meas_file.Mw is not None else m.Mw,
            scale=meas_file.scale if meas_file.has_molar_mass else m.scale,
        )
        old = recipe.checks
        new_checks = {k: v for k, v in chk.items() if getattr(old, k) in (None, False)}
        if "flow_marker_observed" in new_checks and old.flow_marker_reference is None:
            new_checks.pop("flow_marker_observed")
            new_checks.pop("flow_marker_corrected", None)
        recipe = replace(recipe, measured=measured, checks=replace(old, **new_checks))
    return diagnose(recipe)
