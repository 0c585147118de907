"""Each cause of the diagnosis on its own: its model μ(θ), its fitted value and its text.

The kinetic parameters are chosen by hand (not from the tables) so that every expected
number follows from the steady-state formulas in closed form: δ = 1 (disproportionation
only: Đ_inst = 2 for every perturbation), no transfer, C_M = C_I = 0, so that
1/DPn = 2k_t[R•]/(k_p[M]) and R_p = k_p[M][R•] with [R•] = (f·k_d·[I]/k_t)^½
(IUPAC steady state, docs/science.md, section 3.2).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from gpctools.kinetics.checks import FlowSensitivity
from gpctools.kinetics.hypotheses import (
    HYPOTHESES,
    AnchoredModel,
    Evidence,
    PriorRange,
    hypothesis,
)
from gpctools.kinetics.predict import KineticParameters, evaluate
from gpctools.kinetics.scoring import Observation, fit_hypothesis

R_GAS = 8.314462618  # J/mol/K [published: CODATA 2018]

# our choice of round numbers
P = KineticParameters(
    label="hand", T=333.15, monomer="M", M0=100.0, conc_M=5.0, k_p=300.0, E_p=30.0,
    initiator="I", conc_I=0.01, k_d=1e-5, E_d=120.0, f=0.5, C_I=0.0, k_t=1e8, delta=1.0,
    C_M=0.0, transfer=(), sources=(),
)
R0 = math.sqrt(0.5 * 1e-5 * 0.01 / 1e8)  # [R•] = (f k_d [I]/k_t)^½ = 2.236e-8 mol/L [derived]
INV_DPN = 2 * 1e8 * R0 / (300.0 * 5.0)  # 2 k_t [R•]/(k_p [M]) = 2.981e-3 [derived]
FLOW = FlowSensitivity(BV=0.4 * 25.0, rel=0.3)  # B 0.4 decades/mL, V 25 mL: typical defaults

# 1e-9: the model evaluates the same closed forms in a different order (rounding only)
TIGHT = 1e-9


@pytest.fixture()
def model() -> AnchoredModel:
    return AnchoredModel(P, evaluate(P), FLOW)


def evidence(model: AnchoredModel, **kw) -> Evidence:
    return Evidence(parameters=P, model=model, **kw)


def test_base_state_is_the_hand_computed_one(model):
    assert model.base.radicals == pytest.approx(R0, rel=TIGHT)
    assert model.inv_DPn == pytest.approx(INV_DPN, rel=TIGHT)
    assert model.base.dispersity == 2.0  # δ = 1: most probable, Đ_inst = 2 [derived]


def test_registry_holds_nine_causes_in_fitting_order():
    keys = [h.key for h in HYPOTHESES]
    assert keys == ["none", "transfer", "initiator", "temperature", "retarder", "dilution",
                    "flow", "calibration", "limit"]
    for h in HYPOTHESES:
        assert h.title and h.parameter and h.unit
        assert h.category in ("process", "measurement", "none")
        if h.key == "none":
            assert h.prior_range is None  # nothing fitted, nothing to judge
        else:  # every fitted value is judged against a range from practice, with its basis
            assert isinstance(h.prior_range, PriorRange)
            assert h.prior_range.lo < h.prior_range.hi and h.prior_range.scale > 0
            assert h.prior_range.basis.startswith("common practice")
        assert hypothesis(h.key) is h
    with pytest.raises(KeyError, match="no hypothesis"):
        hypothesis("gremlins")


def test_no_cause(model):
    h = hypothesis("none")
    assert h.k == 0 and list(h.grid()) == [0.0]
    assert h.predict(0.0, model) == {}
    text = h.explain(0.0, evidence(model, rp_ratio=1.01, mn_ratio=0.99)).text
    assert "agree with the expected ones" in text and "Mn is 0.990× expected" in text  # ratios keep 3 significant digits (gpctools.formatting.ratio)


def test_unexplained_transfer(model):
    h = hypothesis("transfer")
    # θ = DPn ratio 0.5: Δ(1/DPn) = (1/DPn)(1/0.5 − 1) = 1/DPn [derived]
    assert h.value(0.5, model) == pytest.approx(INV_DPN, rel=TIGHT)
    mu = h.predict(0.5, model)
    assert mu["Mn"] == pytest.approx(math.log(0.5), rel=TIGHT)
    assert mu["Mw"] == pytest.approx(math.log(0.5), rel=TIGHT)  # Đ stays 2 (δ = 1)
    assert mu["R_p"] == pytest.approx(0.0, abs=1e-12)  # transfer keeps the rate (docs/science.md, section 9)

    class Thiol:  # 10 ppm of C = 15 adds 1.5e-4 to 1/DPn (docs/science.md, section 9 check value)
        name, C, ppm_mol, ppm_mass = "thiol", 15.0, 10.0, 19.4

    x = h.explain(1.5e-4, evidence(model, mn_ratio=0.95, excess=1.5e-4, impurities=(Thiol(),),
                                   excess_interval=(1e-4, 2e-4)))
    assert "Excess 1/DPn = 0.00015 (95 % interval 0.0001–0.0002; from Mn alone 0.00015)" in x.text
    assert "thiol (C = 15): 10 ppm mol" in x.text and "19.4 ppm by mass" in x.text
    assert x.numbers[0] == ("excess 1/DPn (fit) [-]", 1.5e-4)
    assert ("equivalent thiol [ppm mol]", 10.0) in x.numbers


def test_excess_initiation(model):
    h = hypothesis("initiator")
    theta = math.log(4.0)  # F = 4
    assert h.value(theta, model) == pytest.approx(4.0, rel=TIGHT)
    mu = h.predict(theta, model)
    # R_p ∝ (f k_d [I])^½ and, with δ = 1 and no transfer, 1/DPn ∝ [R•] [derived, docs/science.md, section 3.2]
    assert mu["R_p"] == pytest.approx(math.log(2.0), rel=TIGHT)
    assert mu["Mn"] == pytest.approx(-math.log(2.0), rel=TIGHT)
    x = h.explain(4.0, evidence(model, rp_ratio=2.0, mn_ratio=0.5))
    # R_p twice expected -> (R_p ratio)² = 4 × the radical flux; R_p·DPn = 1 [derived]
    assert "4.00× the radical flux" in x.text and "R_p·DPn is 1.00× expected" in x.text  # 3 significant digits
    assert ("initiator factor from R_p, (R_p ratio)² [-]", 4.0) in x.numbers
    assert "runaway" in x.next_step


def test_temperature_overshoot(model):
    h = hypothesis("temperature")
    assert h.unit == "K"
    dT, T = 10.0, 333.15
    d_inv_T = 1.0 / (T + dT) - 1.0 / T
    mu = h.predict(dT, model)
    # R_p ∝ k_p·k_d^½, 1/DPn ∝ k_d^½/k_p (k_t constant) with Arrhenius k's [derived, docs/science.md, section 3.2]
    assert mu["R_p"] == pytest.approx(-(30.0 + 60.0) * 1e3 / R_GAS * d_inv_T, rel=TIGHT)
    assert mu["Mn"] == pytest.approx(-(30.0 - 60.0) * 1e3 / R_GAS * d_inv_T, rel=TIGHT)
    assert mu["R_p"] == pytest.approx(0.9468, abs=1e-4)  # hand-worked: 10824.5 K × 8.7469e-5/K
    # not evaluated without activation energies
    assert h.applies(P)
    assert not h.applies(replace(P, E_p=None))
    rp = math.exp(mu["R_p"])
    nums = dict(h.explain(dT, evidence(model, rp_ratio=rp)).numbers)
    # the rise from R_p alone inverts the same Arrhenius law exactly [derived]
    assert nums["temperature rise from R_p alone [K]"] == pytest.approx(dT, rel=1e-9)


def test_retardation(model):
    h = hypothesis("retarder")
    assert h.free == ("induction period",) and h.unit == "1/s"
    # [R•] down to h = 0.6: ζ = 2 k_t [R•]0 (1 − h²)/h = 4.770 1/s [derived in the module doc]
    zeta = h.value(0.6, model)
    assert zeta == pytest.approx(2 * 1e8 * R0 * (1 - 0.36) / 0.6, rel=TIGHT)
    assert zeta == pytest.approx(4.770, abs=1e-3)
    mu = h.predict(0.6, model)
    # R_p ∝ [R•]; with δ = 1, 1/DPn = (2 k_t [R•] + ζ)/(k_p[M]) = base/h [derived]
    assert mu["R_p"] == pytest.approx(math.log(0.6), rel=TIGHT)
    assert mu["Mn"] == pytest.approx(math.log(0.6), rel=TIGHT)
    x = h.explain(zeta, evidence(model, rp_ratio=0.6, mn_ratio=0.6, induction=25.0))
    assert "induction period 25 min" in x.text and "R_p × 0.6" in x.text


def test_dilution(model):
    h = hypothesis("dilution")
    mu = h.predict(0.5, model)
    # R_p ∝ [M]; with δ = 1 and no transfer 1/DPn ∝ 1/[M] [derived, docs/science.md, section 3.2]
    assert mu["R_p"] == pytest.approx(math.log(0.5), rel=TIGHT)
    assert mu["Mn"] == pytest.approx(math.log(0.5), rel=TIGHT)
    x = h.explain(0.5, evidence(model))
    assert "[M] × 0.5 (2.5 mol/L)" in x.text
    assert ("[M] implied [mol/L]", 2.5) in x.numbers


def test_flow_error(model):
    h = hypothesis("flow")
    mu = h.predict(0.01, model)
    # Δ ln M = −ln10·B·V·ε = −ln10·10·0.01 = −0.2303 (docs/science.md, section 2.2, derived)
    for name in ("Mn", "Mw", "check standard"):
        assert mu[name] == pytest.approx(-math.log(10.0) * 0.1, rel=TIGHT)
    assert mu["flow marker"] == 0.01 and "R_p" not in mu
    # B·V known to 30 %: extra σ = 0.3·0.2303 on the averages, none on the marker
    assert h.extra_sigma(0.01, "Mn", model) == pytest.approx(0.3 * math.log(10.0) * 0.1)
    assert h.extra_sigma(0.01, "flow marker", model) == 0.0
    x = h.explain(0.01, evidence(model))
    # 10^(−0.1) − 1 = −20.57 % [derived]
    assert "flow-rate error of +1 % moves every average by -20.6 %" in x.text
    assert x.numbers[0] == ("relative flow error [%]", 1.0)


def test_calibration_drift(model):
    h = hypothesis("calibration")
    s = math.log(0.85)
    assert h.predict(s, model) == {"Mn": s, "Mw": s, "check standard": s}
    x = h.explain(s, evidence(model))
    assert "shifted together by -15 %" in x.text  # e^ln0.85 − 1 = −15 % [derived]


def test_limit_artefact(model):
    h = hypothesis("limit")
    assert h.free == ("outside calibration", "low-M tail")
    # the limit check is predicted at half the bias, give or take the other half (typical)
    assert h.predict(-0.3, model) == {"Mn": -0.3, "low-M limit": pytest.approx(0.15)}
    assert h.extra_sigma(-0.3, "low-M limit", model) == pytest.approx(0.15)
    assert h.extra_sigma(-0.3, "Mn", model) is None
    x = h.explain(math.log(0.75), evidence(model, mw_ratio=0.99, Mn_shift_low_limit=9.0))
    assert "Mn is low by -25 % while Mw is 0.990× expected" in x.text  # e^ln0.75 − 1 [derived]
    assert "Mn moves +9 % when the limit moves 0.2 mL" in x.text


@pytest.mark.parametrize(("key", "perturbation", "truth"), [
    # observations from the closed forms above (δ = 1), not from the model
    # (truths inside each cause's plausible range, so no penalty pulls the fit)
    ("dilution", {"R_p": math.log(0.95), "Mn": math.log(0.95), "Mw": math.log(0.95)}, 0.95),
    ("initiator", {"R_p": math.log(1.8) / 2, "Mn": -math.log(1.8) / 2,
                   "Mw": -math.log(1.8) / 2}, 1.8),
    ("calibration", {"Mn": -0.1, "Mw": -0.1, "check standard": -0.1}, -0.1),
])
def test_fit_recovers_the_parameter_from_closed_form_observations(model, key, perturbation,
                                                                  truth):
    o = {k: Observation(k, y, 0.05, True, None, None, "-") for k, y in perturbation.items()}
    f = fit_hypothesis(hypothesis(key), model, o)
    # noise-free observations: χ² ~ 0 and the parameter back to the optimiser's tolerance
    assert f.value == pytest.approx(truth, rel=1e-6)
    assert f.chi2 == pytest.approx(0.0, abs=1e-9)
    assert np.isfinite([r for _, r in f.residuals]).all()


def test_prior_range_penalty_by_hand():
    # flat inside, ((distance)/scale)² outside; ln units for factors [derived from the doc]
    pr = PriorRange("g", 0.9, 1.0, 0.05, True, "common practice: test")
    assert pr.penalty(0.95) == 0.0 and pr.distance(0.9) == 0.0
    assert pr.penalty(0.8) == pytest.approx((math.log(0.9 / 0.8) / 0.05) ** 2, rel=1e-12)
    lin = PriorRange("dT", 0.0, 10.0, 5.0, False, "common practice: test")
    assert lin.penalty(20.0) == pytest.approx(4.0, rel=1e-12) and lin.penalty(-5.0) == 1.0
    assert "g 0.9–1 (common practice: test)" == pr.describe()


def test_implausible_value_is_penalised_and_flagged(model):
    # a 35 % monomer shortfall (the retarder-or-dilution coin flip of issue 13): the fit is
    # pulled towards the plausible range and pays for what is left outside it
    h = hypothesis("dilution")
    g = 0.65
    o = {k: Observation(k, math.log(g), 0.05, True, None, None, "-") for k in ("R_p", "Mn", "Mw")}
    f = fit_hypothesis(h, model, o)
    assert f.penalty > 4.0  # at least 2 tail scales outside [derived: ln(0.9/0.65)/0.05 = 6.5]
    assert not h.plausible(f.theta, model)
    assert g < f.value < 0.9  # the MAP lies between the data and the range
    inside = fit_hypothesis(h, model, {k: Observation(k, math.log(0.95), 0.05, True, None,
                                                      None, "-") for k in ("R_p", "Mn")})
    assert inside.penalty == 0.0 and h.plausible(inside.theta, model)


def test_profile_interval_brackets_the_fit(model):
    # Mn and Mw both -0.1 with σ 0.05: calibration shift s = -0.1, σ_s = 0.05/√2 (two equal
    # observations), so the 95 % profile interval is -0.1 ± 1.96·0.0354 [derived]
    o = {k: Observation(k, -0.1, 0.05, True, None, None, "-") for k in ("Mn", "Mw")}
    f = fit_hypothesis(hypothesis("calibration"), model, o)
    half = 1.96 * 0.05 / math.sqrt(2.0)
    # 2e-3: the profile is read on the 0.005-wide grid by linear interpolation of χ²
    assert f.interval[0] == pytest.approx(-0.1 - half, abs=2e-3)
    assert f.interval[1] == pytest.approx(-0.1 + half, abs=2e-3)
