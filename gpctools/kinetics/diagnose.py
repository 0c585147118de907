"""Why is the molar mass low? Measured against predicted, and a ranked list of causes.

How the diagnosis works
-----------------------
1. **Expected values and their uncertainty.** The recipe is predicted with the
   steady-state model (:mod:`gpctools.kinetics.predict`). Every uncertain input (k_p,
   k_d, f, k_t, δ, C_M, transfer constants, the Mw breadth) carries a standard
   uncertainty — stated in the recipe, taken as exact when the recipe gives the value
   without one, else from the reference data's source status and spread — propagated to
   the expected R_p, Mn and Mw as a covariance (:mod:`gpctools.kinetics.uncertainty`).
   A normal batch (a lot that came out right) updates these parameters: the expected
   values are the model at their posterior mode, with the posterior covariance.
2. **Observations.** Each measured quantity becomes y = ln(measured/expected) with a
   standard measurement uncertainty σ: R_p, Mn, Mw; where a distribution is given, its
   low-M tail and high-M shoulder (:mod:`gpctools.kinetics.evidence`); plus the
   measurement checks: check-standard deviation, flow-marker shift, Mn sensitivity to
   the low-M limit, fraction outside the calibration, induction period. A check that
   was not recorded enters as a prior (e.g. flow error 0 ± 0.2 %: typical pump
   accuracy).
3. **Hypotheses.** Each cause predicts all observations from one parameter θ:

   ============================  ==========================================================
   unexplained transfer          Δ(1/DPn) ≥ 0; R_p unchanged
   excess initiation             factor F ≥ 1 on f·k_d·[I]; R_p ∝ F^½, DPn from the model
   temperature overshoot         ΔT ≥ 0; k_p, k_d and k_t by Arrhenius
   inhibition / retardation      ζ = k_z[Z] (radical loss, each event ends a chain);
                                 R_p down; induction period free
   dilution / monomer loss       factor g ≤ 1 on [M]
   flow-rate error               relative flow error ε: every average × 10^(−B·V·ε),
                                 flow marker shifted by ε, check standard shifted too
   calibration drift             every average and the check standard × e^s
   integration-limit artefact    Mn × e^t (t ≤ 0), Mw unchanged; limit checks and the
                                 low-M tail free
   no cause                      everything as expected
   ============================  ==========================================================

   θ minimises χ² = rᵀC⁻¹r plus a plausibility penalty outside the cause's prior range
   from practice (:mod:`gpctools.kinetics.scoring`).
4. **Score.** Akaike weights: AIC = χ²_min + penalty + 2k (k = 1 fitted parameter, 0 for
   "no cause"); the *likelihood share* of a cause is exp(−AIC/2) normalised over all
   causes [%]. It says how much better one single cause explains all numbers than the
   others, assuming one cause and normal errors; it is not a probability that the cause
   is real. The diagnosis is *clear* when the top cause is not "no cause", has a share of
   at least 50 % and at least twice the runner-up's, "no cause" has less than 20 %, and
   the top cause describes the numbers (χ² fit probability at least 0.001) (error rates
   on noisy lots: bench/bench_diagnosis.py).

The excess 1/DPn (the transfer cause's fitted value, with its 95 % interval) is always
turned into impurity levels: named candidates, or generic transfer constants
(:mod:`gpctools.kinetics.impurity`). Instrument findings (a pump flow error above 0.1 %,
even when corrected) are listed beside the causes.

Where the parts live: the measurement checks (step 2) are registered in
:mod:`gpctools.kinetics.checks`, the causes (step 3) in
:mod:`gpctools.kinetics.hypotheses`, the fit and the Akaike score (steps 3-4) in
:mod:`gpctools.kinetics.scoring`; :func:`diagnose` assembles them, and
:mod:`gpctools.kinetics.inputs` reads results tables and distributions for it.

References
----------
- Mayo, J. Am. Chem. Soc. 1943; IUPAC steady-state kinetics (docs/science.md, section 3).
- Fingerprints of low molar mass: docs/science.md, section 9 (transfer keeps R_p, more
  initiator or heat raises R_p with R_p·DPn about constant, retarders lower both,
  measurement artefacts shift all averages or only Mn).
- Flow-error sensitivity Δ logM = B·V·ε: docs/science.md, section 2 [derived].
- Akaike, IEEE Trans. Autom. Control 1974; Burnham and Anderson, Model Selection and
  Multimodel Inference, 2002 (Akaike weights) [from memory].
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd

from gpctools.display import Display
from gpctools.errors import DataError, MethodError
from gpctools.kinetics.checks import CheckInputs, CheckLine, flow_sensitivity, run_checks
from gpctools.kinetics.evidence import (
    SIGMA_HIGH_SHOULDER,
    SIGMA_LOW_TAIL,
    DistributionCurve,
    MeasuredDistribution,
    Tails,
    distribution_from_chromatogram,
    read_distribution,
)
from gpctools.kinetics.hypotheses import HYPOTHESES, AnchoredModel, Evidence, hypothesis
from gpctools.kinetics.impurity import ExcessEstimate, ImpurityEstimate, impurity_estimates
from gpctools.kinetics.predict import (
    KineticParameters,
    KineticState,
    Prediction,
    evaluate,
    predict,
    resolve_parameters,
)
from gpctools.kinetics.recipe import Checks, Measured, NormalBatch, Recipe, Uncertainty
from gpctools.kinetics.safety import safety_lines
from gpctools.kinetics.scoring import (
    HypothesisFit,
    Observation,
    akaike_shares,
    fit_hypothesis,
    fit_probability,
)
from gpctools.kinetics.uncertainty import OBSERVABLES, ModelUncertainty, model_uncertainty
from gpctools.refdata import ReferenceData

__all__ = [
    "Observation",
    "Cause",
    "CheckLine",
    "ImpurityEstimate",
    "ExcessEstimate",
    "RateFromConversion",
    "Diagnosis",
    "rate_from_conversion",
    "diagnose",
    "DEFAULT_UNCERTAINTY",
]

# Default relative standard measurement uncertainties [%], each with its basis (the
# checks' σ and priors are in gpctools.kinetics.checks; the model's uncertainty comes from
# its parameters, gpctools.kinetics.uncertainty).
DEFAULT_UNCERTAINTY = {
    # published: SEC round robins, repeatability under 3 % (docs/science.md, section 7.6);
    # Mn is more sensitive to baseline and limits, hence 4 %.
    "Mn": 4.0,
    "Mw": 3.0,
    # common practice: gravimetric/spectroscopic initial rates repeat to about 10 %.
    "R_p": 10.0,
}
#: Floor of the relative σ of an R_p fitted from conversion data (common practice: a few
#: points on one run understate the run-to-run scatter of rates).
_RP_FIT_FLOOR = 0.05
_CLEAR_SHARE = 50.0
_CLEAN_MAX_SHARE = 20.0
#: A clear verdict also needs the top cause at least this many times the runner-up's share
#: (evidence ratio 2, ΔAIC ≥ 1.4): on noisy simulated lots it halves the clear verdicts
#: that name a wrong cause (bench/bench_diagnosis.py, docs/science.md, section 9.4).
_CLEAR_RATIO = 2.0
#: ... and the top cause must describe the numbers: a χ² beyond its 99.9 % quantile
#: (fit probability below 0.001) makes the verdict "ambiguous" [common practice].
_MIN_FIT_P = 1e-3
#: Causes drawn in the distribution overlay (besides "no cause"), best first.
_CURVES = 3


# --------------------------------------------------------------------------- records


@dataclass(frozen=True, repr=False)
class Cause(Display):
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
        χ² at the best parameter [-] (data only).
    parameter, value, unit : str, float, str
        The fitted parameter of the hypothesis.
    text : str
        Plain-language explanation with its numbers.
    numbers : tuple of (label, value)
        The numbers behind it, unit in each label.
    next_step : str
        What to do next.
    residuals : tuple of (observation, residual in σ)
    penalty : float
        Plausibility penalty at the fitted value [-] (0 inside the prior range).
    plausible : bool
        Whether the fitted value lies inside the prior range.
    prior : str
        The prior range and its basis ("" for "no cause").
    interval : (float, float)
        95 % profile interval of ``value``.
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
    penalty: float = 0.0
    plausible: bool = True
    prior: str = ""
    interval: tuple[float, float] = (math.nan, math.nan)

    @property
    def plausibility(self) -> str:
        """'plausible', 'outside the plausible range' or '–' (no cause)."""
        if self.key == "none":
            return "–"
        return "plausible" if self.plausible else "outside the plausible range"

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict."""
        return {
            "key": self.key,
            "title": self.title,
            "category": self.category,
            "likelihood share [%]": self.share,
            "chi2 [-]": self.chi2,
            "plausibility penalty [-]": self.penalty,
            "parameter": self.parameter,
            "value": self.value,
            "95 % interval": list(self.interval),
            "unit": self.unit,
            "plausible": self.plausible,
            "plausible range": self.prior,
            "text": self.text,
            "numbers": {k: v for k, v in self.numbers},
            "next step": self.next_step,
            "residuals [sigma]": {k: v for k, v in self.residuals},
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
    docs/science.md, section 3 (R_p = k_p[M][R•]).
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


@dataclass(frozen=True, repr=False)
class Diagnosis(Display):
    """Measured against predicted, ranked causes, measurement checks and cautions.

    Attributes
    ----------
    label : str
    prediction : Prediction
        The prediction of the recipe from the tables (its budget and parameters).
    expected, measured : dict
        Expected and measured R_p [mol/L/s], Mn, Mw [g/mol], dispersity [-], 1/DPn [-]
        (unit-named keys; measured values on the absolute scale; expected values from the
        model at the parameters updated by the normal batch, when one is given).
    anchor : dict
        How the normal batch updated the model (empty without one).
    observations : tuple of Observation
    causes : tuple of Cause
        Ranked, highest likelihood share first.
    checks : tuple of CheckLine
    impurities : tuple of ImpurityEstimate
        Candidate levels that would explain the excess 1/DPn (empty if no excess).
    excess_inv_DPn : float or None
        The excess 1/DPn [-]: the unexplained-transfer fit over all observations
        (``excess`` holds its interval and the value from Mn alone).
    safety : tuple of str
        Cautions (always present).
    notes, warnings : tuple of str
    model : ModelUncertainty or None
        Parameter uncertainties, their update by the normal batch, the expected values'
        covariance.
    findings : tuple of CheckLine
        Instrument findings to fix (beside the chemistry).
    excess : ExcessEstimate or None
    curves : tuple of DistributionCurve
        Measured and predicted distributions for the overlay plot.
    fit_probability : float
        χ² upper-tail probability of the top cause's fit [-] (goodness of fit).
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
    model: ModelUncertainty | None = None
    findings: tuple[CheckLine, ...] = ()
    excess: ExcessEstimate | None = None
    curves: tuple[DistributionCurve, ...] = ()
    fit_probability: float = 1.0

    @property
    def top(self) -> Cause:
        """The highest-ranked cause."""
        return self.causes[0]

    @property
    def verdict(self) -> str:
        """``"clear"``, ``"no strong cause"`` or ``"ambiguous"`` (thresholds in the module doc)."""
        top = self.causes[0]
        none_share = next((c.share for c in self.causes if c.key == "none"), 0.0)
        runner_up = self.causes[1].share if len(self.causes) > 1 else 0.0
        if top.key == "none":
            return "no strong cause"
        if (top.share >= _CLEAR_SHARE and none_share < _CLEAN_MAX_SHARE
                and top.share >= _CLEAR_RATIO * runner_up and self.fit_probability >= _MIN_FIT_P):
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
        """Ranked causes with unit-named columns, the fitted value and its plausibility."""
        rows = []
        for i, c in enumerate(self.causes, start=1):
            rows.append({
                "rank": i,
                "cause": c.title,
                "key": c.key,
                "category": c.category,
                "likelihood share [%]": c.share,
                "chi2 [-]": c.chi2,
                "plausibility penalty [-]": c.penalty,
                "parameter": c.parameter,
                "value": c.value,
                "95 % interval low": c.interval[0],
                "95 % interval high": c.interval[1],
                "unit": c.unit,
                "plausibility": c.plausibility,
                "plausible range": c.prior,
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
        """Measurement checks, then the instrument findings."""
        return pd.DataFrame([
            {"check": c.check, "status": c.status, "text": c.text, "action": c.action}
            for c in (*self.checks, *self.findings)
        ])

    def impurities_table(self) -> pd.DataFrame:
        """Candidate impurity levels with their 95 % intervals."""
        cols = ["candidate", "C [-]", "[X] [mol/L]", "ratio [X]/[M] [ppm mol]",
                "95 % interval low [ppm mol]", "95 % interval high [ppm mol]",
                "mass ratio X/monomer [ppm mass]", "relation", "source"]
        return pd.DataFrame([i.row() for i in self.impurities], columns=cols)

    def model_table(self) -> pd.DataFrame:
        """Uncertain model inputs: prior σ and basis, update by the normal batch."""
        return self.model.table() if self.model is not None else pd.DataFrame()

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of everything."""
        return {
            "label": self.label,
            "verdict": self.verdict,
            "fit probability of the top cause [-]": self.fit_probability,
            "prediction": self.prediction.summary(),
            "expected": dict(self.expected),
            "measured": dict(self.measured),
            "anchor": dict(self.anchor),
            "excess 1/DPn [-]": self.excess_inv_DPn,
            "excess": self.excess.summary() if self.excess is not None else None,
            "model uncertainty": self.model.summary() if self.model is not None else None,
            "observations": [
                {"name": o.name, "y": o.y, "sigma": o.sigma, "recorded": o.recorded,
                 "measured": o.measured, "expected": o.expected, "unit": o.unit}
                for o in self.observations
            ],
            "causes": [c.summary() for c in self.causes],
            "checks": [c.summary() for c in self.checks],
            "instrument findings": [c.summary() for c in self.findings],
            "impurities": [i.row() for i in self.impurities],
            "distributions": [c.summary() for c in self.curves],
            "safety": list(self.safety),
            "notes": list(self.notes),
            "warnings": list(self.warnings),
        }


# --------------------------------------------------------------------------- steps


def _ps_to_absolute(
    M: float | None, scale: str, monomer_polymer: str, ref: ReferenceData
) -> tuple[float | None, float | None]:
    """Convert a standard-equivalent average to the sample polymer (Mark-Houwink).

    log M_x = [log(K_s/K_x) + (1 + a_s)·log M_s]/(1 + a_x) (Benoit, Grubisic and Rempp,
    1967; docs/science.md, section 2), applied to the average itself: exact per slice, approximate
    for an average (the map is a power law with exponent close to 1).
    Returns (converted value, factor) or (M, None) if no pair is known.
    """
    if M is None or scale.startswith("absolute"):
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


def _absolute(
    m: Measured, polymer: str, ref: ReferenceData
) -> tuple[float | None, float | None, float | None]:
    """Mn, Mw on the absolute scale [g/mol] and the conversion factor (None: no pair)."""
    Mn, f_n = _ps_to_absolute(m.Mn, m.scale, polymer, ref)
    Mw, f_w = _ps_to_absolute(m.Mw, m.scale, polymer, ref)
    return Mn, Mw, (f_n if f_n is not None else f_w)


def _polymer(p: KineticParameters, ref: ReferenceData) -> str:
    """The polymer of the recipe's monomer (the monomer name when not tabulated)."""
    try:
        return ref.monomer(p.monomer).polymer
    except MethodError:
        return p.monomer


def _normal_batch(recipe: Recipe, reference: Recipe | NormalBatch | None) -> NormalBatch | None:
    if reference is None:
        return recipe.normal_batch
    if isinstance(reference, Recipe):
        return NormalBatch(recipe=reference, measured=reference.measured)
    return reference


def _measured_distribution(meas: Measured) -> MeasuredDistribution | None:
    """The distribution a [measured] section names (table, or export + method)."""
    if meas.distribution is not None:
        return read_distribution(meas.distribution)
    if meas.chromatogram is not None and meas.method is not None:
        return distribution_from_chromatogram(meas.chromatogram, meas.method)
    return None


@dataclass(frozen=True)
class _BatchValues:
    """A batch as measured: Mn, Mw on the absolute scale [g/mol], R_p [mol/L/s]."""

    Mn: float | None
    Mw: float | None
    scale_factor: float | None
    R_p: float | None
    R_p_rel_se: float | None
    induction: float | None
    note: str | None

    def table(self, M0: float) -> dict[str, float | None]:
        """Unit-named measured values (``Diagnosis.measured``)."""
        Mn, Mw = self.Mn, self.Mw
        return {
            "R_p [mol/L/s]": self.R_p,
            "Mn [g/mol]": Mn,
            "Mw [g/mol]": Mw,
            "dispersity [-]": (Mw / Mn) if (Mw and Mn) else None,
            "1/DPn [-]": (M0 / Mn) if Mn else None,
            "induction period [min]": self.induction,
        }


def _batch_values(
    meas: Measured, p: KineticParameters, polymer: str, ref: ReferenceData,
    dist: MeasuredDistribution | None = None,
) -> _BatchValues:
    """Measured values on the absolute scale; Mn/Mw from the distribution when the
    recipe gives none; R_p and induction from conversion if needed.
    """
    if dist is not None and not meas.has_molar_mass:
        meas = replace(meas, Mn=dist.Mn, Mw=dist.Mw)
    Mn, Mw, fac = _absolute(meas, polymer, ref)
    Rp, Rp_rel_se, induction, note = meas.R_p, None, meas.induction_min, None
    if Rp is None and meas.conversion:
        rc = rate_from_conversion(meas.time_min, meas.conversion, p.conc_M)
        Rp = rc.R_p
        Rp_rel_se = rc.R_p_se / rc.R_p if math.isfinite(rc.R_p_se) else None
        if induction is None:
            induction = rc.induction_min
        note = (
            f"R_p from conversion: k_app = {rc.k_app:.4g} 1/s from {rc.n_points} points, "
            f"R_p = k_app·[M]0 = {rc.R_p:.4g} mol/L/s"
        )
    return _BatchValues(Mn, Mw, fac, Rp, Rp_rel_se, induction, note)


def _measurement_sigmas(u: Uncertainty, rp_rel_se: float | None) -> dict[str, float]:
    """Relative σ of R_p, Mn, Mw: the recipe's, else the defaults; R_p from a conversion
    fit uses its standard error (at least 5 %).
    """
    s = {k: (getattr(u, k) if getattr(u, k) is not None else DEFAULT_UNCERTAINTY[k]) / 100.0
         for k in OBSERVABLES}
    if u.R_p is None and rp_rel_se is not None and math.isfinite(rp_rel_se):
        s["R_p"] = max(rp_rel_se, _RP_FIT_FLOOR)
    return s


def _normal_observations(
    recipe: Recipe, normal: NormalBatch | None, p: KineticParameters, polymer: str,
    ref: ReferenceData,
) -> tuple[KineticParameters | None, dict[str, tuple[float, float]], MeasuredDistribution | None,
           str]:
    """The normal batch: its parameters, ln of its measured R_p, Mn, Mw with σ, its
    distribution and its label (nothing when there is no normal batch).
    """
    if normal is None or normal.measured.is_empty:
        return None, {}, None, ""
    nrec = normal.recipe if normal.recipe is not None else recipe
    pn = resolve_parameters(nrec, ref) if normal.recipe is not None else p
    ndist = _measured_distribution(normal.measured)
    v = _batch_values(normal.measured, pn, polymer, ref, ndist)
    sig = _measurement_sigmas(nrec.uncertainty, v.R_p_rel_se)
    obs = {k: (math.log(val), sig[k]) for k, val in (("R_p", v.R_p), ("Mn", v.Mn), ("Mw", v.Mw))
           if val is not None}
    return pn, obs, ndist, nrec.label if normal.recipe is not None else "same recipe"


@dataclass(frozen=True)
class _Expected:
    """Expected R_p [mol/L/s], Mn, Mw [g/mol] and 1/DPn [-] of the updated model."""

    R_p: float
    Mn: float
    Mw: float
    inv_DPn: float

    def table(self) -> dict[str, float | None]:
        """Unit-named expected values (``Diagnosis.expected``)."""
        return {
            "R_p [mol/L/s]": self.R_p,
            "Mn [g/mol]": self.Mn,
            "Mw [g/mol]": self.Mw,
            "dispersity [-]": self.Mw / self.Mn,
            "1/DPn [-]": self.inv_DPn,
        }


def _expected(base: KineticState, M0: float, ln_breadth: float) -> _Expected:
    return _Expected(R_p=base.R_p, Mn=base.DPn * M0,
                     Mw=base.DPn * M0 * base.dispersity * math.exp(ln_breadth),
                     inv_DPn=base.inv_DPn)


def _value_observations(
    u: Uncertainty, v: _BatchValues, e: _Expected
) -> dict[str, Observation]:
    """y = ln(measured/expected) of R_p, Mn, Mw with the measurement σ (and the recipe's
    flat ``model [%]`` when given; the model's own uncertainty is a covariance).
    """
    sig = _measurement_sigmas(u, v.R_p_rel_se)
    flat = (u.model or 0.0) / 100.0
    obs: dict[str, Observation] = {}
    for name, m, x, unit in (("R_p", v.R_p, e.R_p, "mol/L/s"), ("Mn", v.Mn, e.Mn, "g/mol"),
                             ("Mw", v.Mw, e.Mw, "g/mol")):
        if m is not None:
            obs[name] = Observation(name, math.log(m / x), math.hypot(sig[name], flat), True,
                                    m, x, unit)
    return obs


def _shape_observations(
    dist: MeasuredDistribution | None, normal: MeasuredDistribution | None, model: AnchoredModel
) -> dict[str, Observation]:
    """Low-M tail and high-M shoulder: measured − expected mass fraction [-]; expected is
    the normal batch's distribution, else the model's.
    """
    if dist is None:
        return {}
    t = dist.tails
    e: Tails = normal.tails if normal is not None else model.base_tails
    unit = "mass fraction"
    return {
        "low-M tail": Observation("low-M tail", t.low - e.low, SIGMA_LOW_TAIL, True, t.low,
                                  e.low, unit),
        "high-M shoulder": Observation("high-M shoulder", t.high - e.high, SIGMA_HIGH_SHOULDER,
                                       True, t.high, e.high, unit),
    }


def _checks_from_distribution(checks: Checks, dist: MeasuredDistribution | None) -> Checks:
    """Checks a processed export adds when the recipe does not give them."""
    if dist is None:
        return checks
    new: dict[str, Any] = {}
    if checks.Mn_shift_low_limit is None and dist.Mn_shift_low_limit is not None:
        new["Mn_shift_low_limit"] = dist.Mn_shift_low_limit
    if checks.outside_calibration is None and dist.outside_calibration is not None:
        new["outside_calibration"] = dist.outside_calibration
    if (checks.flow_marker_observed is None and dist.marker_observed is not None
            and dist.flow_factor is not None):
        new.update(flow_marker_observed=dist.marker_observed,
                   flow_marker_reference=dist.marker_observed * dist.flow_factor,
                   flow_marker_corrected=True)
    return replace(checks, **new) if new else checks


def _anchor_info(mu: ModelUncertainty, label: str) -> dict[str, Any]:
    if not mu.anchored:
        return {}
    info: dict[str, Any] = {"normal batch": label, "updated with": ", ".join(mu.anchored)}
    for n in mu.nuisances:
        if n.shared:
            info[f"{n.name} factor [-]" if n.log else f"{n.name} shift [-]"] = mu.factor(n.name)
    return info


def _excess(
    M0: float, v: _BatchValues, e: _Expected, fits: list[HypothesisFit],
    final_conversion: float | None,
) -> ExcessEstimate | None:
    """The transfer fit's excess 1/DPn with its interval, and the value from Mn alone."""
    if v.Mn is None and v.Mw is None:
        return None
    f = next(f for f in fits if f.hypothesis.key == "transfer")
    from_Mn = M0 / v.Mn - e.inv_DPn if v.Mn is not None else None
    return ExcessEstimate(f.value, f.interval[0], f.interval[1], from_Mn, final_conversion)


def _ranked_causes(
    fits: list[HypothesisFit], shares: np.ndarray, ev: Evidence
) -> tuple[Cause, ...]:
    """One Cause per fit with its explanation, highest share first (then lowest score)."""
    causes = []
    for f, share in zip(fits, shares, strict=True):
        h = f.hypothesis
        x = h.explain(f.value, ev)
        pr = h.prior_range
        causes.append(Cause(
            key=h.key, title=h.title, category=h.category, share=float(share), chi2=f.chi2,
            parameter=h.parameter, value=f.value, unit=h.unit, text=x.text,
            numbers=x.numbers, next_step=x.next_step, residuals=f.residuals,
            penalty=f.penalty, plausible=h.plausible(f.theta, ev.model),
            prior=pr.describe() if pr is not None else "", interval=f.interval,
        ))
    causes.sort(key=lambda c: (-c.share, c.chi2 + c.penalty))
    return tuple(causes)


def _curves(
    dist: MeasuredDistribution | None, model: AnchoredModel, fits: list[HypothesisFit],
    shares: np.ndarray, M0: float,
) -> tuple[DistributionCurve, ...]:
    """Measured, expected and the leading causes' distributions on one M grid."""
    base = model.base
    Mw = base.DPn * M0 * base.dispersity
    M = np.logspace(math.log10(Mw / 300.0), math.log10(Mw * 20.0), 400)
    out: list[DistributionCurve] = []
    if dist is not None:
        out.append(DistributionCurve("measured", "measured", dist.M, dist.dwdlogM))
    f_base = base.distribution(M0)
    out.append(DistributionCurve("expected from the recipe", "expected", M, f_base(M)))
    order = np.argsort(-shares)
    n = 0
    for i in order:
        f = fits[int(i)]
        h = f.hypothesis
        if h.key == "none" or n >= _CURVES:
            continue
        pert = h.perturbation(f.theta, model)
        if pert is not None:
            w = model.state(**pert).distribution(M0)(M)
        else:
            w = f_base(M / math.exp(h.molar_mass_shift(f.theta, model)))
        out.append(DistributionCurve(f"{h.title} ({shares[int(i)]:.3g} %)", "cause", M, w))
        n += 1
    return tuple(out)


def _separation_note(
    fits: list[HypothesisFit], shares: np.ndarray, model: AnchoredModel,
    obs: Mapping[str, Observation],
) -> str | None:
    """What would tell the two leading causes apart, when the verdict is not clear.

    Their predictions at the fitted values differ most, relative to what is measured, in
    one of R_p, Mn, Mw: the note names it and the precision that would separate them at
    three standard uncertainties.
    """
    order = [int(i) for i in np.argsort(-shares)]
    a, b = (fits[i] for i in order[:2])
    if "none" in (a.hypothesis.key, b.hypothesis.key):
        return None
    mu_a = a.hypothesis.predict(a.theta, model)
    mu_b = b.hypothesis.predict(b.theta, model)
    best = None
    for name in OBSERVABLES:
        d = abs(mu_a.get(name, 0.0) - mu_b.get(name, 0.0))
        sig = obs[name].sigma if name in obs else math.inf
        if d > 0 and (best is None or d / sig > best[1] / best[2]):
            best = (name, d, sig)
    if best is None:
        return None
    name, d, sig = best
    how = ("it was not measured" if not math.isfinite(sig)
           else f"measured to ±{100 * sig:.2g} %")
    return (f"{a.hypothesis.title} and {b.hypothesis.title} differ most in {name}, by "
            f"{100 * (math.exp(d) - 1):.2g} % ({how}); measuring {name} to ±"
            f"{100 * (math.exp(d / 3) - 1):.2g} % would tell them apart")


def _top_fit(obs: Mapping[str, Observation], top: Cause) -> tuple[float, int]:
    """χ² upper-tail probability of the best cause and its degrees of freedom."""
    h = hypothesis(top.key)
    n_obs = len(obs) - sum(1 for f in h.free if f in obs)
    return fit_probability(top.chi2, n_obs, h.k)


def _closing_notes(
    obs: Mapping[str, Observation], causes: tuple[Cause, ...], mu: ModelUncertainty
) -> list[str]:
    """Notes on what cannot be told apart, on a poor or implausible best cause, and on
    how uncertain the expected values are.
    """
    notes = list(mu.notes)
    if "R_p" not in obs and any(k in obs for k in ("Mn", "Mw")):
        notes.append(
            "R_p not measured: unexplained transfer, extra initiator and a temperature "
            "overshoot lower Mn alike and cannot be told apart; measure conversion against "
            "time (the rate goes up with initiator or heat, not with transfer)"
        )
    if not mu.anchored and "Mn" in obs and mu.sigma("Mn") > 0.08:
        notes.append(
            f"without a normal batch the expected Mn is uncertain by ±{100 * mu.sigma('Mn'):.2g} % "
            f"and R_p by ±{100 * mu.sigma('R_p'):.2g} % (the tabulated parameters' "
            "uncertainties, see the model table): smaller effects cannot be told from 'no "
            "cause'; give a normal batch or the recipe's measured parameters"
        )
    top = causes[0]
    fit_p, dof = _top_fit(obs, top)
    if fit_p < 0.01:
        notes.append(
            f"no single cause explains all numbers well (best χ² = {top.chi2:.3g} for {dof} "
            f"degrees of freedom, p = {fit_p:.2g}): two causes may act together, or an "
            "input value is off; check the residuals"
        )
    if not top.plausible:
        notes.append(
            f"the best cause needs {top.parameter} = {top.value:.3g} {top.unit}, outside its "
            f"plausible range ({top.prior}): look for a reason, or for two causes acting "
            "together"
        )
    return notes


def _safety(p: KineticParameters, causes: tuple[Cause, ...]) -> tuple[str, ...]:
    """Cautions: runaway when heat or initiator is a likely cause, and the tables' cautions."""
    runaway = causes[0].key in ("initiator", "temperature") or any(
        c.key in ("initiator", "temperature") and c.share >= 20.0 for c in causes
    )
    cautions: list[str] = []
    if p.initiator_caution:
        cautions.append(f"{p.initiator}: {p.initiator_caution}")
    for t in p.transfer:
        if t.caution:
            cautions.append(f"{t.name}: {t.caution}")
    return safety_lines(runaway=runaway, cautions=tuple(dict.fromkeys(cautions)))


# --------------------------------------------------------------------------- main entry


@dataclass(frozen=True)
class _Setup:
    """The model and the observations of one diagnosis (step 1 and 2)."""

    prediction: Prediction
    model: AnchoredModel
    uncertainty: ModelUncertainty
    values: _BatchValues
    expected: _Expected
    observations: dict[str, Observation]
    checks: Any
    distribution: MeasuredDistribution | None
    normal_label: str
    notes: list[str]


def _setup(
    recipe: Recipe, meas: Measured, normal: NormalBatch | None, ref: ReferenceData,
    distribution: MeasuredDistribution | None,
) -> _Setup:
    """Predict, update the model by the normal batch, and collect the observations."""
    pred = predict(recipe, ref)
    p = pred.parameters
    polymer = _polymer(p, ref)
    dist = distribution if distribution is not None else _measured_distribution(meas)
    values = _batch_values(meas, p, polymer, ref, dist)
    pn, nobs, ndist, nlabel = _normal_observations(recipe, normal, p, polymer, ref)
    mu = model_uncertainty(recipe, p, ref, normal_parameters=pn, normal_observations=nobs)
    base = evaluate(mu.parameters)
    checks_in = _checks_from_distribution(recipe.checks, dist)
    model = AnchoredModel(mu.parameters, base, flow_sensitivity(checks_in),
                          covariance_names=OBSERVABLES, covariance=mu.covariance,
                          shape=dist is not None)
    expected = _expected(base, p.M0, mu.ln_breadth)
    obs = _value_observations(recipe.uncertainty, values, expected)
    obs.update(_shape_observations(dist, ndist, model))
    checks = run_checks(CheckInputs(checks_in, meas.scale, values.scale_factor, polymer,
                                    values.induction))
    obs.update(checks.observations)
    notes = [*pred.notes, *(n for n in (values.note,) if n)]
    if not any(k in obs for k in ("Mn", "Mw")):
        notes.append("no Mn or Mw measured: only the rate can be compared")
    return _Setup(pred, model, mu, values, expected, obs, checks, dist, nlabel, notes)


def diagnose(
    recipe: Recipe,
    measured: Measured | None = None,
    reference: Recipe | NormalBatch | None = None,
    *,
    ref: ReferenceData | None = None,
    distribution: MeasuredDistribution | None = None,
) -> Diagnosis:
    """Compare measured with predicted and rank the causes of a low molar mass.

    Parameters
    ----------
    recipe : Recipe
        The batch in question (its ``measured``, ``checks`` and ``uncertainty`` are used).
    measured : Measured, optional
        Replaces ``recipe.measured``.
    reference : Recipe or NormalBatch, optional
        The normal batch (a Recipe with its own ``measured``); default
        ``recipe.normal_batch``.
    ref : ReferenceData, optional
        Reference tables (default: the recipe's).
    distribution : MeasuredDistribution, optional
        This batch's measured distribution (default: the one ``[measured]`` names).

    Returns
    -------
    Diagnosis

    Raises
    ------
    DataError
        Nothing measured (no Mn, Mw, R_p, conversion or distribution).

    References
    ----------
    See the module docstring (method, scoring and sources).
    """
    ref = ref if ref is not None else recipe.reference_data()
    meas = measured if measured is not None else recipe.measured
    if meas.is_empty and distribution is None:
        raise DataError(
            "nothing measured to compare: give [measured] 'Mn [g/mol]' and/or 'Mw [g/mol]', "
            "'R_p [mol/L/s]', conversion against time, or a distribution",
            key="measured",
            path=recipe.path,
        )
    st = _setup(recipe, meas, _normal_batch(recipe, reference), ref, distribution)
    p, model, obs = st.prediction.parameters, st.model, st.observations
    notes = list(st.notes)
    notes.extend(h.skipped_note for h in HYPOTHESES if not h.applies(p))
    fits = [fit_hypothesis(h, model, obs) for h in HYPOTHESES if h.applies(p)]
    shares = akaike_shares([f.score for f in fits], [f.hypothesis.k for f in fits])
    excess = _excess(p.M0, st.values, st.expected, fits, meas.final_conversion)
    impurities = impurity_estimates(recipe, ref, p, excess) if excess is not None else ()
    v, e = st.values, st.expected
    evidence = Evidence(
        parameters=p, model=model,
        rp_ratio=v.R_p / e.R_p if v.R_p is not None else None,
        mn_ratio=v.Mn / e.Mn if v.Mn is not None else None,
        mw_ratio=v.Mw / e.Mw if v.Mw is not None else None,
        excess=excess.from_Mn if excess is not None else None, impurities=impurities,
        induction=v.induction, Mn_shift_low_limit=recipe.checks.Mn_shift_low_limit,
        excess_interval=(excess.low, excess.high) if excess is not None else (math.nan,) * 2,
        relation=excess.relation.split(":")[0] if excess is not None else "",
    )
    causes = _ranked_causes(fits, shares, evidence)
    notes.extend(_closing_notes(obs, causes, st.uncertainty))
    diagnosis = Diagnosis(
        label=recipe.label, prediction=st.prediction, expected=e.table(),
        measured=v.table(p.M0), anchor=_anchor_info(st.uncertainty, st.normal_label),
        observations=tuple(obs.values()), causes=causes, checks=st.checks.lines,
        impurities=impurities, excess_inv_DPn=excess.value if excess is not None else None,
        safety=_safety(p, causes), notes=tuple(dict.fromkeys(notes)),
        warnings=tuple(dict.fromkeys([*st.prediction.warnings, *st.checks.warnings])),
        model=st.uncertainty, findings=st.checks.findings, excess=excess,
        curves=_curves(st.distribution, model, fits, shares, p.M0),
        fit_probability=_top_fit(obs, causes[0])[0],
    )
    if diagnosis.verdict != "clear":
        sep = _separation_note(fits, shares, model, obs)
        if sep:
            diagnosis = replace(diagnosis, notes=(*diagnosis.notes, sep))
    return diagnosis
