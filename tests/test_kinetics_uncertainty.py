"""The model's uncertainty: priors from the recipe and the tables, first-order propagation,
and the update by a normal batch (gpctools.kinetics.uncertainty)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from gpctools.kinetics import Recipe, evaluate, resolve_parameters
from gpctools.kinetics.uncertainty import (
    BREADTH_SIGMA,
    jacobian,
    model_uncertainty,
    nuisance_parameters,
    observables,
    perturb,
)

BASE = {
    "T [°C]": 60.0,
    "monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
    "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02},
    "solvent": [{"name": "toluene", "concentration [mol/L]": 3.0}],
}


def recipe(**changes) -> Recipe:
    d = json.loads(json.dumps(BASE))
    for k, v in changes.items():
        d[k] = {**d[k], **v} if isinstance(v, dict) and isinstance(d.get(k), dict) else v
    return Recipe.from_dict(d)


def setup(**changes):
    r = recipe(**changes)
    return r, resolve_parameters(r), r.reference_data()


def test_priors_from_the_tables_status_and_spread():
    r, p, ref = setup()
    n = {x.name: x for x in nuisance_parameters(r, p, ref)}
    # k_t: the spread 6.0e7-2.56e8 between sources read as ±2σ: ln(2.56e8/6.0e7)/4 = 0.3627
    # [derived from the bundled styrene row]
    assert n["k_t"].sigma == pytest.approx(math.log(2.56e8 / 6.0e7) / 4, rel=1e-12)
    assert "spread between sources" in n["k_t"].basis
    # k_p published (IUPAC benchmark) 10 %, k_d and f from memory 20 %, δ from memory 0.1
    assert (n["k_p"].sigma, n["k_d"].sigma, n["f"].sigma, n["delta"].sigma) == (0.1, 0.2, 0.2, 0.1)
    assert n["Mw breadth"].sigma == BREADTH_SIGMA
    assert not n["delta"].log and n["k_t"].log and n["k_t"].shared


def test_values_given_in_the_recipe_are_exact_unless_an_uncertainty_is_stated():
    r, p, ref = setup(termination={"k_t [L/mol/s]": 2.0e8},
                      initiator={"f [-]": 0.5},
                      uncertainty={"f [%]": 5.0, "Mw breadth [%]": 0.0, "monomer charge [%]": 1.0})
    names = {x.name: x for x in nuisance_parameters(r, p, ref)}
    assert "k_t" not in names  # given without an uncertainty: taken as exact
    assert names["f"].sigma == 0.05 and names["f"].basis == "recipe [uncertainty]"
    assert "Mw breadth" not in names  # stated as 0
    assert names["[M]"].sigma == 0.01 and not names["[M]"].shared  # this batch's weighing


def test_prediction_uncertainty_by_hand():
    # Termination ends almost all chains; with R_p = k_p[M](f·k_d[I]/k_t)^½ the relative
    # σ of R_p is (σ_kp² + σ_kd²/4 + σ_f²/4 + σ_kt²/4)^½ = (0.01 + 0.01 + 0.01 +
    # 0.3627²/4)^½ = 0.2508 [derived: first-order propagation, GUM]. rtol 1e-3: the
    # forward-difference Jacobian (step 1e-4).
    r, p, ref = setup()
    mu = model_uncertainty(r, p, ref)
    sk = math.log(2.56e8 / 6.0e7) / 4
    assert mu.sigma("R_p") == pytest.approx(math.sqrt(0.03 + sk**2 / 4), rel=1e-3)
    # the Jacobian: ∂ln R_p/∂ln k_t = −½, ∂ln R_p/∂ln k_p = 1 exactly [derived]
    names = [x.name for x in mu.nuisances]
    J = jacobian(p, mu.nuisances)
    assert J[0, names.index("k_t")] == pytest.approx(-0.5, abs=1e-4)
    assert J[0, names.index("k_p")] == pytest.approx(1.0, abs=1e-4)
    # breadth moves only Mw, one for one
    b = names.index("Mw breadth")
    assert J[:, b] == pytest.approx([0.0, 0.0, 1.0], abs=1e-9)
    assert mu.anchored == () and mu.shift == (0.0,) * len(names)


def test_normal_batch_update_matches_the_linear_gaussian_closed_form():
    # A normal batch that equals the model: the posterior mode stays at 0 and the posterior
    # covariance is the linear-Gaussian one, written here in the other (gain) form:
    # Σ_post = Σ0 − Σ0 Jᵀ (J Σ0 Jᵀ + R)⁻¹ J Σ0 [published: the Kalman update, which equals
    # (JᵀR⁻¹J + Σ0⁻¹)⁻¹ by the matrix inversion lemma]. rtol 1e-6: Jacobians by forward
    # differences at slightly different points.
    r, p, ref = setup()
    y = observables(p)
    obs = {"R_p": (y[0], 0.05), "Mn": (y[1], 0.04), "Mw": (y[2], 0.03)}
    mu = model_uncertainty(r, p, ref, normal_observations=obs)
    assert max(abs(v) for v in mu.shift) < 1e-8
    S0 = np.diag([x.sigma**2 for x in mu.nuisances])
    J = jacobian(p, mu.nuisances)
    R = np.diag([0.05**2, 0.04**2, 0.03**2])
    post = S0 - S0 @ J.T @ np.linalg.solve(J @ S0 @ J.T + R, J @ S0)
    assert np.sqrt(np.diag(post)) == pytest.approx(np.array(mu.posterior_sigma), rel=1e-6)
    # the same recipe: what the normal batch pinned down is known to about its own σ
    assert mu.sigma("Mn") < 0.04 and mu.sigma("R_p") < 0.05 and mu.anchored == ("R_p", "Mn", "Mw")


def test_regression_normal_batch_with_less_termination_keeps_every_term_positive():
    # Issue 13: a normal lot whose k_t is lower than the table's (true k_t 0.8×, f 0.5, our
    # choice) made the old constant 1/DPn offset negative, termination 126 % of 1/DPn. The
    # update moves the parameters instead: the model reproduces the lot within its
    # uncertainty and every 1/DPn term stays positive.
    from dataclasses import replace

    r, p, ref = setup()
    true = replace(p, k_t=p.k_t * 0.8, f=0.5)
    y = observables(true)
    obs = {"R_p": (y[0], 0.02), "Mn": (y[1], 0.04), "Mw": (y[2], 0.03)}
    mu = model_uncertainty(r, p, ref, normal_observations=obs)
    s = evaluate(mu.parameters)
    assert all(v >= 0 for _, v in s.terms)
    assert sum(v for k, v in s.terms if k.startswith("termination")) < s.inv_DPn
    assert all(abs(res) < 1.0 for _, res in mu.normal_residuals)  # within 1 σ
    assert mu.factor("k_t") < 1.0  # it learnt that termination is slower than tabulated


def test_perturb_applies_factors_and_skips_what_is_absent():
    r, p, ref = setup(inhibitor=[{"name": "Q", "concentration [mol/L]": 1e-5, "z [-]": 10.0}])
    nuis = nuisance_parameters(r, p, ref)
    names = [x.name for x in nuis]
    phi = np.zeros(len(nuis))
    phi[names.index("k_t")] = math.log(2.0)
    phi[names.index("delta")] = 0.05
    q, ln_b = perturb(p, nuis, phi)
    assert q.k_t == pytest.approx(2 * p.k_t, rel=1e-12) and q.delta == pytest.approx(p.delta + 0.05)
    assert ln_b == 0.0
    assert "k_z:Q" not in names  # an inhibitor from the recipe without an uncertainty: exact
    other = perturb(p, [*nuis[:1], type(nuis[0])("C:absent", 0.1, "test")], [0.0, 0.3])[0]
    assert other.transfer == p.transfer
