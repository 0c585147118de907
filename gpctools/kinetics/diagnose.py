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
e.g. 10 ppm of a thiol with C = 15 adds 1.5e-4 to 1/DPn (docs/science.md, section 9).

Where the parts live: the measurement checks (step 2) are registered in
:mod:`gpctools.kinetics.checks`, the causes (step 3) in
:mod:`gpctools.kinetics.hypotheses`, the fit and the Akaike score (steps 3-4) in
:mod:`gpctools.kinetics.scoring`; :func:`diagnose` assembles them.

References
----------
- Mayo, J. Am. Chem. Soc. 1943; IUPAC steady-state kinetics (docs/science.md, section 3).
- Fingerprints of low molar mass: docs/science.md, section 9 (transfer keeps R_p, more initiator or
  heat raises R_p with R_p·DPn about constant, retarders lower both, measurement
  artefacts shift all averages or only Mn).
- Flow-error sensitivity Δ logM = B·V·ε: docs/science.md, section 2 [derived].
- Akaike, IEEE Trans. Autom. Control 1974; Burnham and Anderson, Model Selection and
  Multimodel Inference, 2002 (Akaike weights) [from memory].
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns
from gpctools.chainlength import impurity_ratio
from gpctools.errors import DataError, InputFormatError, MethodError
from gpctools.kinetics.checks import CheckInputs, CheckLine, flow_sensitivity, run_checks
from gpctools.kinetics.hypotheses import HYPOTHESES, AnchoredModel, Evidence, hypothesis
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
    Measured,
    NormalBatch,
    Recipe,
    Uncertainty,
    load_recipe,
    normalize_scale,
)
from gpctools.kinetics.safety import safety_lines
from gpctools.kinetics.scoring import (
    HypothesisFit,
    Observation,
    akaike_shares,
    fit_hypothesis,
    fit_probability,
)
from gpctools.refdata import ReferenceData

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

# Default relative standard uncertainties [%], each with its basis (the checks' σ and
# priors are in gpctools.kinetics.checks).
DEFAULT_UNCERTAINTY = {
    # published: SEC round robins, repeatability under 3 % (docs/science.md, section 7); Mn is more
    # sensitive to baseline and limits, hence 4 %.
    "Mn": 4.0,
    "Mw": 3.0,
    # common practice: gravimetric/spectroscopic initial rates repeat to about 10 %.
    "R_p": 10.0,
    # typical: tabulated k_t is an order-of-magnitude value; a normal batch removes this.
    "model": 10.0,
}
_SIGMA_DISPERSITY_MODEL = 0.15  # typical: real Đ exceeds Đ_inst (drift, band broadening)

_MAX_IMPURITY_PPM = 1e4  # 1 mol % of the monomer
_CLEAR_SHARE = 50.0
_CLEAN_MAX_SHARE = 20.0


# --------------------------------------------------------------------------- records


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


@dataclass(frozen=True)
class _BatchValues:
    """This batch as measured: Mn, Mw on the absolute scale [g/mol], R_p [mol/L/s]."""

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
    meas: Measured, p: KineticParameters, polymer: str, ref: ReferenceData
) -> _BatchValues:
    """Measured values on the absolute scale; R_p and induction from conversion if needed."""
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


@dataclass(frozen=True)
class _Anchor:
    """The model anchored to the normal batch.

    ``parameters``: this recipe's parameters with f × φ and the 1/DPn offset term;
    ``has``: which of "R_p", "Mn", "Mw" the normal batch measured.
    """

    parameters: KineticParameters
    Mw_factor: float
    has: frozenset[str]
    info: dict[str, Any]
    note: str | None


def _offset_term(conc_M: float, offset: float) -> TransferTerm:
    # a term C·[X]/[M] with [X] = [M] contributes exactly the offset
    return TransferTerm("normal-batch offset", "offset", conc_M, offset, None, None, "anchor")


def _anchor(
    recipe: Recipe, normal: NormalBatch | None, p: KineticParameters, polymer: str,
    ref: ReferenceData,
) -> _Anchor:
    """Scale f·k_d·[I] to the normal batch's R_p (φ), offset 1/DPn to its Mn, Mw to its Mw.

    φ = (R_p,normal/R_p,model)²; offset = M0/Mn,normal − 1/DPn(model with φ);
    Mw factor = Mw,normal/(DPn·M0·Đ_inst) of the anchored normal-batch model. The same
    φ and offset are carried to this recipe.
    """
    if normal is None or normal.measured.is_empty:
        return _Anchor(p, 1.0, frozenset(), {}, None)
    nrec = normal.recipe if normal.recipe is not None else recipe
    p_ref = resolve_parameters(nrec, ref) if normal.recipe is not None else p
    nm = normal.measured
    nMn, nMw, _ = _absolute(nm, polymer, ref)
    nRp = nm.R_p
    if nRp is None and nm.conversion:
        nRp = rate_from_conversion(nm.time_min, nm.conversion, p_ref.conc_M).R_p
    has: set[str] = set()
    phi = 1.0
    if nRp is not None:
        phi = (nRp / evaluate(p_ref).R_p) ** 2
        has.add("R_p")
    p_ref_cal = replace(p_ref, f=p_ref.f * phi)
    offset = 0.0
    if nMn is not None:
        offset = p_ref.M0 / nMn - evaluate(p_ref_cal).inv_DPn
        has.add("Mn")
    if offset:
        p_ref_cal = replace(p_ref_cal, transfer=p_ref_cal.transfer + (
            _offset_term(p_ref.conc_M, offset),))
    Mw_factor = 1.0
    if nMw is not None:
        s_ref = evaluate(p_ref_cal)
        Mw_factor = nMw / (s_ref.DPn * p_ref.M0 * s_ref.dispersity)
        has.add("Mw")
    transfer = p.transfer + ((_offset_term(p.conc_M, offset),) if offset else ())
    info = {
        "radical flux factor (f·k_d·[I]) [-]": phi,
        "1/DPn offset [-]": offset,
        "Mw factor [-]": Mw_factor,
        "normal batch": nrec.label if normal.recipe is not None else "same recipe",
    }
    note = ("expected values anchored to the normal batch: radical flux × "
            f"{phi:.4g}, 1/DPn offset {offset:+.4g}, Mw × {Mw_factor:.4g}")
    return _Anchor(replace(p, f=p.f * phi, transfer=transfer), Mw_factor, frozenset(has),
                   info, note)


@dataclass(frozen=True)
class _Expected:
    """Expected R_p [mol/L/s], Mn, Mw [g/mol] and 1/DPn [-] of the anchored model."""

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


def _expected(base: KineticState, M0: float, Mw_factor: float) -> _Expected:
    return _Expected(R_p=base.R_p, Mn=base.DPn * M0,
                     Mw=base.DPn * M0 * base.dispersity * Mw_factor, inv_DPn=base.inv_DPn)


def _value_observations(
    u: Uncertainty, v: _BatchValues, e: _Expected, anchored: frozenset[str]
) -> dict[str, Observation]:
    """y = ln(measured/expected) of R_p, Mn, Mw with σ (see ``DEFAULT_UNCERTAINTY``).

    σ = (σ_meas²·(2 if the normal batch measured it) + σ_model²)^½, σ_model 0 when
    anchored; an un-anchored Mw adds the dispersity-model σ (0.15).
    """
    sMn = (u.Mn if u.Mn is not None else DEFAULT_UNCERTAINTY["Mn"]) / 100.0
    sMw = (u.Mw if u.Mw is not None else DEFAULT_UNCERTAINTY["Mw"]) / 100.0
    sRp = (u.R_p if u.R_p is not None else DEFAULT_UNCERTAINTY["R_p"]) / 100.0
    if u.R_p is None and v.R_p_rel_se is not None and math.isfinite(v.R_p_rel_se):
        sRp = max(v.R_p_rel_se, 0.05)

    def model_sigma(is_anchored: bool) -> float:
        if u.model is not None:
            return u.model / 100.0
        return 0.0 if is_anchored else DEFAULT_UNCERTAINTY["model"] / 100.0

    def sigma(s_meas: float, name: str) -> float:
        return math.hypot(s_meas * (math.sqrt(2) if name in anchored else 1.0),
                          model_sigma(name in anchored))

    obs: dict[str, Observation] = {}
    if v.R_p is not None:
        obs["R_p"] = Observation("R_p", math.log(v.R_p / e.R_p), sigma(sRp, "R_p"), True,
                                 v.R_p, e.R_p, "mol/L/s")
    if v.Mn is not None:
        obs["Mn"] = Observation("Mn", math.log(v.Mn / e.Mn), sigma(sMn, "Mn"), True, v.Mn, e.Mn,
                                "g/mol")
    if v.Mw is not None:
        if "Mw" in anchored:
            s = math.hypot(sMw * math.sqrt(2), model_sigma(True))
        else:
            s = math.sqrt(sMw**2 + model_sigma(False) ** 2 + _SIGMA_DISPERSITY_MODEL**2)
        obs["Mw"] = Observation("Mw", math.log(v.Mw / e.Mw), s, True, v.Mw, e.Mw, "g/mol")
    return obs


def _excess(
    M0: float, v: _BatchValues, e: _Expected, fits: list[HypothesisFit]
) -> float | None:
    """1/DPn measured − expected [-]: from Mn, else the transfer fit when Mw was measured."""
    if v.Mn is not None:
        return M0 / v.Mn - e.inv_DPn
    if v.Mw is None:
        return None
    return next(f.value for f in fits if f.hypothesis.key == "transfer")


def _impurity_candidates(
    recipe: Recipe, ref: ReferenceData, p: KineticParameters
) -> list[tuple[str, float, float | None, str]]:
    """(name, C [-], M [g/mol], source): the recipe's candidates, then the table's agents."""
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
    return cands


def _impurity_estimates(
    recipe: Recipe, ref: ReferenceData, p: KineticParameters, excess: float | None
) -> tuple[ImpurityEstimate, ...]:
    """Level of each candidate that would explain ``excess`` (none when there is no excess)."""
    if not (excess is not None and excess > 0):
        return ()
    impurities: list[ImpurityEstimate] = []
    seen = set()
    n_recipe = len(recipe.candidates)
    for j, (name, C, M, src) in enumerate(_impurity_candidates(recipe, ref, p)):
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
    return tuple(impurities)


def _ranked_causes(
    fits: list[HypothesisFit], shares: np.ndarray, ev: Evidence
) -> tuple[Cause, ...]:
    """One Cause per fit with its explanation, highest share first (then lowest χ²)."""
    causes = []
    for f, share in zip(fits, shares, strict=True):
        h = f.hypothesis
        x = h.explain(f.value, ev)
        causes.append(Cause(
            key=h.key, title=h.title, category=h.category, share=float(share), chi2=f.chi2,
            parameter=h.parameter, value=f.value, unit=h.unit, text=x.text,
            numbers=x.numbers, next_step=x.next_step, residuals=f.residuals,
        ))
    causes.sort(key=lambda c: (-c.share, c.chi2))
    return tuple(causes)


def _closing_notes(obs: Mapping[str, Observation], causes: tuple[Cause, ...]) -> list[str]:
    """Notes on what cannot be told apart and on a poor fit of the best single cause."""
    notes = []
    if "R_p" not in obs and any(k in obs for k in ("Mn", "Mw")):
        notes.append(
            "R_p not measured: unexplained transfer, extra initiator and a temperature "
            "overshoot lower Mn alike and cannot be told apart; measure conversion against "
            "time (the rate goes up with initiator or heat, not with transfer)"
        )
    top = causes[0]
    h = hypothesis(top.key)
    # goodness of fit of the best single cause: chi-square with (observations - k) dof
    n_obs = len(obs) - sum(1 for f in h.free if f in obs)
    fit_p, dof = fit_probability(top.chi2, n_obs, h.k)
    if fit_p < 0.01:
        notes.append(
            f"no single cause explains all numbers well (best χ² = {top.chi2:.3g} for {dof} "
            f"degrees of freedom, p = {fit_p:.2g}): two causes may act together, or an "
            "input value is off; check the residuals"
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
    normal = _normal_batch(recipe, reference)
    if meas.is_empty:
        raise DataError(
            "nothing measured to compare: give [measured] 'Mn [g/mol]' and/or 'Mw [g/mol]', "
            "'R_p [mol/L/s]' or conversion against time",
            key="measured",
            path=recipe.path,
        )
    pred = predict(recipe, ref)
    p = pred.parameters
    polymer = _polymer(p, ref)
    # 1. measured and expected values, the model anchored to the normal batch
    values = _batch_values(meas, p, polymer, ref)
    anchor = _anchor(recipe, normal, p, polymer, ref)
    notes = [*pred.notes, *(n for n in (values.note, anchor.note) if n)]
    base = evaluate(anchor.parameters)
    model = AnchoredModel(anchor.parameters, base, flow_sensitivity(recipe.checks))
    expected = _expected(base, p.M0, anchor.Mw_factor)
    # 2. observations: measured values, then the registered measurement checks
    obs = _value_observations(recipe.uncertainty, values, expected, anchor.has)
    if not any(k in obs for k in ("Mn", "Mw")):
        notes.append("no Mn or Mw measured: only the rate can be compared")
    checks = run_checks(CheckInputs(recipe.checks, meas.scale, values.scale_factor, polymer,
                                    values.induction))
    obs.update(checks.observations)
    # 3. fit and score every registered hypothesis that applies
    notes.extend(h.skipped_note for h in HYPOTHESES if not h.applies(p))
    fits = [fit_hypothesis(h, model, obs) for h in HYPOTHESES if h.applies(p)]
    shares = akaike_shares([f.chi2 for f in fits], [f.hypothesis.k for f in fits])
    # 4. the excess 1/DPn as impurity levels, explanations, ranking
    excess = _excess(p.M0, values, expected, fits)
    impurities = _impurity_estimates(recipe, ref, p, excess)
    evidence = Evidence(
        parameters=p, model=model,
        rp_ratio=values.R_p / expected.R_p if values.R_p is not None else None,
        mn_ratio=values.Mn / expected.Mn if values.Mn is not None else None,
        mw_ratio=values.Mw / expected.Mw if values.Mw is not None else None,
        excess=excess, impurities=impurities, induction=values.induction,
        Mn_shift_low_limit=recipe.checks.Mn_shift_low_limit,
    )
    causes = _ranked_causes(fits, shares, evidence)
    notes.extend(_closing_notes(obs, causes))
    return Diagnosis(
        label=recipe.label,
        prediction=pred,
        expected=expected.table(),
        measured=values.table(p.M0),
        anchor=anchor.info,
        observations=tuple(obs.values()),
        causes=causes,
        checks=checks.lines,
        impurities=impurities,
        excess_inv_DPn=excess,
        safety=_safety(p, causes),
        notes=tuple(dict.fromkeys(notes)),
        warnings=tuple(dict.fromkeys([*pred.warnings, *checks.warnings])),
    )


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
