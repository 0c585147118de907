"""χ², the one-parameter fit and the Akaike shares of the diagnosis (gpctools.kinetics.scoring)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from gpctools.kinetics.checks import FlowSensitivity
from gpctools.kinetics.hypotheses import AnchoredModel, hypothesis
from gpctools.kinetics.predict import KineticParameters, evaluate
from gpctools.kinetics.scoring import (
    Observation,
    akaike_shares,
    chi_square,
    fit_hypothesis,
    fit_probability,
)

P = KineticParameters(  # our choice; only the measurement causes are used here
    label="hand", T=333.15, monomer="M", M0=100.0, conc_M=5.0, k_p=300.0, E_p=30.0,
    initiator="I", conc_I=0.01, k_d=1e-5, E_d=120.0, f=0.5, C_I=0.0, k_t=1e8, delta=1.0,
    C_M=0.0, transfer=(), sources=(),
)
MODEL = AnchoredModel(P, evaluate(P), FlowSensitivity(BV=10.0, rel=0.3))


def o(name: str, y: float, sigma: float) -> Observation:
    return Observation(name, y, sigma, True, None, None, "-")


OBS = {
    "Mn": o("Mn", 0.10, 0.04),
    "Mw": o("Mw", 0.20, 0.03),
    "check standard": o("check standard", 0.05, 0.03),
    "low-M limit": o("low-M limit", 0.09, 0.03),
}


def test_chi_square_by_hand():
    # calibration drift at s = 0.1 predicts 0.1 for Mn, Mw, check standard and 0 for the rest
    chi2, res = chi_square(hypothesis("calibration"), 0.1, MODEL, OBS)
    expected = {"Mn": 0.0, "Mw": 0.1 / 0.03, "check standard": -0.05 / 0.03,
                "low-M limit": 0.09 / 0.03}  # (y − μ)/σ [derived]
    assert res == pytest.approx(expected, rel=1e-12)
    assert chi2 == pytest.approx(sum(v * v for v in expected.values()), rel=1e-12)
    # the retarder leaves the induction period free: not counted
    induction = {**OBS, "induction period": o("induction period", 30.0, 5.0)}
    _, res_free = chi_square(hypothesis("retarder"), 1.0, MODEL, induction)
    assert "induction period" not in res_free and "Mn" in res_free


def test_extra_sigma_is_added_in_quadrature():
    # flow: ε = 0.01 -> μ = −0.2303 on Mn, extra σ = 0.3·0.2303 (B·V 30 % uncertain)
    only_mn = {"Mn": o("Mn", 0.0, 0.04)}
    _, res = chi_square(hypothesis("flow"), 0.01, MODEL, only_mn)
    mu = -math.log(10.0) * 0.1
    assert res["Mn"] == pytest.approx(-mu / math.hypot(0.04, 0.3 * mu), rel=1e-12)


def test_fit_is_the_weighted_mean_for_a_constant_shift():
    # calibration drift predicts the same s for Mn, Mw, check standard: weighted least squares
    # gives s* = Σ(y/σ²)/Σ(1/σ²) = 0.11951 and χ²_min = Σ((y − s*)/σ)² + 3² [derived]
    f = fit_hypothesis(hypothesis("calibration"), MODEL, OBS)
    ys = np.array([0.10, 0.20, 0.05])
    w = 1 / np.array([0.04, 0.03, 0.03]) ** 2
    s_star = float(np.sum(w * ys) / np.sum(w))
    assert s_star == pytest.approx(0.119512, abs=1e-6)  # hand-worked: 340.278/2847.22
    assert f.theta == pytest.approx(s_star, abs=1e-8)  # bounded minimiser, xatol 1e-10 of bracket
    chi2_min = float(np.sum(w * (ys - s_star) ** 2)) + (0.09 / 0.03) ** 2
    assert f.chi2 == pytest.approx(chi2_min, rel=1e-9)
    assert f.value == f.theta  # reported as ln(factor) itself
    assert [k for k, _ in f.residuals] == list(OBS)


def test_grid_edge_is_kept_when_the_optimum_lies_outside():
    # the limit artefact only lowers Mn (t ≤ 0): a high Mn ends at the grid edge t = 0
    f = fit_hypothesis(hypothesis("limit"), MODEL, {"Mn": o("Mn", 0.3, 0.04)})
    assert f.theta == pytest.approx(0.0, abs=1e-6)


def test_akaike_shares_by_hand():
    # AIC = χ² + 2k = (0, 4, 6): w = (1, e^-2, e^-3), normalised [derived, Burnham & Anderson]
    s = akaike_shares([0.0, 2.0, 4.0], [0, 1, 1])
    w = np.array([1.0, math.exp(-2.0), math.exp(-3.0)])
    assert s == pytest.approx(100 * w / w.sum(), rel=1e-12)
    assert s == pytest.approx([84.379, 11.419, 4.201], abs=1e-3)  # hand-worked
    assert s.sum() == pytest.approx(100.0)
    # shifting every χ² by a constant changes nothing
    assert akaike_shares([10.0, 12.0, 14.0], [0, 1, 1]) == pytest.approx(s, rel=1e-12)


def test_fit_probability_against_the_chi_square_table():
    # χ² 0.95 quantiles: 3.841 (1 dof), 5.991 (2 dof) [published: standard χ² tables]
    p, dof = fit_probability(3.841459, 2, 1)
    assert dof == 1 and p == pytest.approx(0.05, abs=1e-6)
    p, dof = fit_probability(5.991465, 3, 1)
    assert dof == 2 and p == pytest.approx(0.05, abs=1e-6)
    # never fewer than one degree of freedom
    assert fit_probability(1.0, 1, 1)[1] == 1


def test_model_covariance_enters_chi_square_by_hand():
    # Mn and Mw both 0.1 low with σ 0.04 and 0.03, and a fully correlated model uncertainty
    # of 0.1 on both (one common parameter): χ² = rᵀ(D + 0.01·11ᵀ)⁻¹r [derived, by hand
    # with the Sherman-Morrison formula: rᵀD⁻¹r − (1ᵀD⁻¹r)²·0.01/(1 + 0.01·1ᵀD⁻¹1)]
    cov = np.full((3, 3), 0.01)
    model = AnchoredModel(P, evaluate(P), FlowSensitivity(BV=10.0, rel=0.3),
                          covariance_names=("R_p", "Mn", "Mw"), covariance=cov)
    obs = {"Mn": o("Mn", -0.1, 0.04), "Mw": o("Mw", -0.1, 0.03)}
    chi2, res = chi_square(hypothesis("none"), 0.0, model, obs)
    d = np.array([0.04**2, 0.03**2])
    r = np.array([-0.1, -0.1])
    a = np.sum(r / d)
    expected = np.sum(r * r / d) - a * a * 0.01 / (1 + 0.01 * np.sum(1 / d))
    assert chi2 == pytest.approx(expected, rel=1e-12)
    # the reported residual is r_i/√C_ii
    assert res["Mn"] == pytest.approx(-0.1 / math.sqrt(0.04**2 + 0.01), rel=1e-12)
    # without the covariance the same residuals cost far more: the model's common-mode
    # uncertainty absorbs a shift of every average
    assert chi_square(hypothesis("none"), 0.0, MODEL, obs)[0] > 5 * chi2
