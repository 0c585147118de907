"""Tests of gpctools.transfer: Mayo fit, estimators, drift, impurity flags, temperature.

The truth side comes from things the fitting code did not make: exact most-probable
(Flory) distributions and their published identities, conversion integrals done by
scipy.integrate.quad, reference least-squares by numpy, Student-t quantiles by scipy, and
literature transfer constants used as the truth of simulated series.
"""

from __future__ import annotations

import hashlib
import math
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from gpctools.chainlength import cumulative_averages, cumulative_most_probable, most_probable
from gpctools.errors import DataError, DesignError, EstimatorWarning, GpcError, InputFormatError
from gpctools.report import write_transfer
from gpctools.simulate import averages_from_dwdlogM, simulate_series
from gpctools.transfer import (
    analyse_series,
    apparent_constant,
    check_design,
    check_intercept,
    cld_slope,
    consumption_constant,
    cumulative_inv_dpn,
    fit_arrhenius,
    fit_cumulative,
    fit_mayo,
    flag_runs,
    impurity_level,
    read_run_series,
    run_series_from_rows,
)
from gpctools.transfer.drift import cumulative_inv_dpw_half, remaining_fraction
from gpctools.transfer.estimators import ln_number_distribution
from gpctools.transfer.impurity import flag_runs_cumulative, robust_fit

pytestmark = pytest.mark.filterwarnings("ignore::gpctools.errors.GpcWarning")

# --- check values and their sources ---------------------------------------------------
M0_STYRENE = 104.15  # g/mol, C8H8 [derived: standard atomic weights]
C_DDM_STYRENE_60 = 14.8  # 1-dodecanethiol in styrene, 60 °C [published: Carraher's Polymer Chemistry, 8th ed.]
C_CBR4_STYRENE_60 = 1.8  # carbon tetrabromide in styrene, 60 °C [published: Carraher's Polymer Chemistry, 8th ed.]
C_M_STYRENE_50 = 5.27e-5  # transfer to styrene, 50 °C [published: Kukulj, Davis, Gilbert, Macromolecules 1998]
C_DDM_MMA = 0.65  # n-dodecyl mercaptan in MMA, about 0.6-0.7 [from memory: Hutchinson et al. 1995]
INV_DPN0 = 5.0e-4  # 1/DPn0 of the simulated series (DPn0 = 2000), our choice
RATIOS = np.array([0.0, 0.5e-4, 1.0e-4, 2.0e-4, 3.0e-4, 4.0e-4])  # [A]/[M], our choice


def _grid(lam_min: float, M0: float = M0_STYRENE) -> np.ndarray:
    """log-uniform M grid covering a most-probable distribution with λ >= lam_min."""
    return np.geomspace(M0, M0 * 40.0 / lam_min, 6000)


def _lambda(r, C=C_DDM_STYRENE_60, a=INV_DPN0):
    return a + C * np.asarray(r, dtype=float)


# =========================================================================== Mayo fit


def test_mayo_weighted_fit_matches_numpy_reference():
    # reference library: numpy weighted least squares with the same weights 1/y_fit
    rng = np.random.default_rng(1)
    y = _lambda(RATIOS) * (1 + 0.02 * rng.standard_normal(RATIOS.size))
    fit = fit_mayo(y, {"C_A": RATIOS})
    X = np.column_stack([np.ones_like(RATIOS), RATIOS])
    w = fit.weights
    beta, *_ = np.linalg.lstsq(X * w[:, None], y * w, rcond=None)
    res = (y - X @ beta) * w
    cov = np.linalg.inv((X * w[:, None]).T @ (X * w[:, None])) * (res @ res) / (RATIOS.size - 2)
    assert fit.constant("C_A").value == pytest.approx(beta[1], rel=1e-7)  # same linear problem
    assert fit.intercept.value == pytest.approx(beta[0], rel=1e-7)
    # the covariance from the normal equations (reference: numpy lstsq + inverse above)
    assert fit.constant("C_A").stderr == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-4)
    assert fit.intercept.stderr == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-4)


def test_mayo_interval_is_student_t_with_n_minus_p_dof():
    rng = np.random.default_rng(2)
    y = _lambda(RATIOS) * (1 + 0.02 * rng.standard_normal(RATIOS.size))
    c = fit_mayo(y, {"C_A": RATIOS}).constant("C_A")
    q = stats.t.ppf(0.975, RATIOS.size - 2)  # reference library: scipy Student t
    assert c.ci_high - c.value == pytest.approx(q * c.stderr, rel=1e-9)
    assert c.value - c.ci_low == pytest.approx(q * c.stderr, rel=1e-9)


def test_regression_mayo_known_sigma_uses_normal_quantile():
    # With absolute uncertainties of 1/DPn given, the covariance is not estimated from the
    # scatter, so the 95 % interval is value ± z*se with z = Φ⁻¹(0.975) (reference library:
    # scipy normal), not Student t with n - p dof. rel=1e-9: rounding only.
    rng = np.random.default_rng(5)
    y = _lambda(RATIOS) * (1 + 0.02 * rng.standard_normal(RATIOS.size))
    fit = fit_mayo(y, {"C_A": RATIOS}, sigma=0.02 * _lambda(RATIOS))
    c = fit.constant("C_A")
    z = stats.norm.ppf(0.975)
    assert c.ci_high - c.value == pytest.approx(z * c.stderr, rel=1e-9)
    assert fit.intercept.ci_high - fit.intercept.value == pytest.approx(
        z * fit.intercept.stderr, rel=1e-9)
    lo, hi = fit.band({"C_A": np.array([2.0e-4])})
    se_mean = (hi[0] - lo[0]) / 2 / z
    g = np.array([1.0, 2.0e-4])
    assert se_mean == pytest.approx(math.sqrt(g @ fit.covariance @ g), rel=1e-9)


def test_mayo_dpn0_propagated_error():
    rng = np.random.default_rng(3)
    y = _lambda(RATIOS) * (1 + 0.02 * rng.standard_normal(RATIOS.size))
    fit = fit_mayo(y, {"C_A": RATIOS})
    a, sa = fit.intercept.value, fit.intercept.stderr
    assert fit.DPn0.value == pytest.approx(1 / a)  # DPn0 = 1/intercept [derived]
    assert fit.DPn0.stderr == pytest.approx(sa / a**2)  # first-order propagation [derived]
    assert fit.DPn0.ci_low == pytest.approx(1 / fit.intercept.ci_high)


def test_mayo_95_percent_interval_covers_truth_about_95_percent_of_the_time():
    # Monte Carlo with 2 % relative noise; coverage of a correct 95 % t interval is 0.95 [derived]
    rng = np.random.default_rng(4)
    n, hits = 400, 0
    for _ in range(n):
        y = _lambda(RATIOS) * (1 + 0.02 * rng.standard_normal(RATIOS.size))
        c = fit_mayo(y, {"C_A": RATIOS}).constant("C_A")
        hits += c.ci_low <= C_DDM_STYRENE_60 <= c.ci_high
    # binomial SD at n = 400 is 1.1 %; allow 3.5 SD (weights estimated from the data)
    assert abs(hits / n - 0.95) < 0.04


@pytest.mark.parametrize("estimator", ["Mn", "Mw/2", "CLD"])
def test_literature_constant_recovered_by_each_estimator(estimator):
    # truth: 1-dodecanethiol in styrene at 60 °C, C = 14.8 [published: Carraher's Polymer
    # Chemistry, 8th ed.]; instantaneous most-probable distributions (no drift)
    y = []
    for r in RATIOS:
        lam = float(_lambda(r))
        f = most_probable(M0_STYRENE / lam, M0_STYRENE)
        M = _grid(lam)
        h = f(M)
        Mn, Mw = averages_from_dwdlogM(M, h)
        if estimator == "Mn":
            y.append(M0_STYRENE / Mn)
        elif estimator == "Mw/2":
            y.append(2 * M0_STYRENE / Mw)
        else:
            y.append(cld_slope(M, h, M0_STYRENE).Lambda)
    c = fit_mayo(y, {"C_A": RATIOS}, estimator=estimator).constant("C_A")
    # Flory identities are exact for a continuous chain length; the discrete Flory
    # distribution differs by O(λ) <= 0.7 % here (Mw/2: 2λ/(2-λ); Λ: -ln(1-λ)) [derived]
    assert c.value == pytest.approx(C_DDM_STYRENE_60, rel=0.01)


def test_three_estimators_agree_on_ideal_distributions():
    # Flory identities [derived]: DPw = 2 DPn, ln P straight with slope -Λ, Λ = 1/DPn
    for r in RATIOS:
        lam = float(_lambda(r))
        M = _grid(lam)
        h = most_probable(M0_STYRENE / lam, M0_STYRENE)(M)
        Mn, Mw = averages_from_dwdlogM(M, h)
        dpn_mn, dpn_mw = Mn / M0_STYRENE, Mw / (2 * M0_STYRENE)
        dpn_cld = 1 / cld_slope(M, h, M0_STYRENE).Lambda
        # exact discrete-Flory values [derived]: DPn = 1/λ, DPw = (2 - λ)/λ, Λ = -ln(1 - λ);
        # Mn from the grid is high by about λ/2 because the grid starts at N = 1 [derived]
        assert dpn_mn == pytest.approx(1 / lam, rel=lam)
        assert dpn_mw == pytest.approx((2 - lam) / (2 * lam), rel=1e-4)
        assert dpn_cld == pytest.approx(-1 / math.log1p(-lam), rel=1e-8)
        # the three estimators agree to the O(λ) discrete-continuous difference, <= 0.7 %
        assert dpn_mw == pytest.approx(dpn_mn, rel=7e-3)
        assert dpn_cld == pytest.approx(dpn_mn, rel=7e-3)


def test_several_agents_varied_in_one_design():
    # factorial design of two agents in styrene at 60 °C: 1-dodecanethiol 14.8 and CBr4 1.8
    # [published: Carraher's Polymer Chemistry, 8th ed.]
    r1 = np.array([0, 1, 2, 0, 1, 2, 0, 1, 2]) * 1e-4
    r2 = np.array([0, 0, 0, 5, 5, 5, 10, 10, 10]) * 1e-4
    rng = np.random.default_rng(5)
    y = (INV_DPN0 + C_DDM_STYRENE_60 * r1 + C_CBR4_STYRENE_60 * r2) * (
        1 + 0.01 * rng.standard_normal(r1.size))
    fit = fit_mayo(y, {"C_A:1-dodecanethiol": r1, "C_A:CBr4": r2})
    c1, c2 = fit.constant("C_A:1-dodecanethiol"), fit.constant("C_A:CBr4")
    # 1 % noise on 9 runs: each constant within 4 standard errors (and a few %)
    assert abs(c1.value - C_DDM_STYRENE_60) < 4 * c1.stderr
    assert abs(c2.value - C_CBR4_STYRENE_60) < 4 * c2.stderr
    assert c1.value == pytest.approx(C_DDM_STYRENE_60, rel=0.05)
    assert c2.value == pytest.approx(C_CBR4_STYRENE_60, rel=0.10)
    assert fit.design_check.rank == 3


def test_transfer_to_monomer_fitted_with_a_fixed_kinetic_intercept():
    # C_M of styrene at 50 °C, 5.27e-5 [published: Kukulj, Davis, Gilbert, Macromolecules 1998];
    # kinetic term known and held fixed, so the constant column C_M is separable
    kin = 4.0e-4
    y = kin + C_M_STYRENE_50 + C_DDM_STYRENE_60 * RATIOS
    fit = fit_mayo(y, {"C_M": np.ones_like(RATIOS), "C_A": RATIOS}, intercept=kin)
    assert fit.constant("C_M").value == pytest.approx(C_M_STYRENE_50, rel=1e-6)  # exact data
    assert fit.constant("C_A").value == pytest.approx(C_DDM_STYRENE_60, rel=1e-6)


# =========================================================================== design check


def test_design_refuses_agents_varied_in_fixed_proportion():
    with pytest.raises(DesignError, match="collinear"):
        fit_mayo(_lambda(RATIOS), {"C_A:x": RATIOS, "C_A:y": 3 * RATIOS})


def test_design_refuses_a_term_that_does_not_vary():
    with pytest.raises(DesignError, match="same value"):
        check_design({"C_A": np.full(5, 1e-4)})


def test_design_refuses_too_few_runs():
    with pytest.raises(DesignError, match="more runs than parameters"):
        check_design({"C_A": RATIOS[:2]})


def test_design_refuses_too_few_distinct_points():
    # two agents, three parameters, but the runs sit at only two design points
    r1 = np.array([0, 0, 1, 1]) * 1e-4
    r2 = np.array([0, 0, 2, 2]) * 1e-4
    with pytest.raises(DesignError, match="distinct combinations"):
        check_design({"C_A:a": r1, "C_A:b": r2})


def test_design_refuses_C_M_with_a_free_intercept():
    with pytest.raises(DesignError, match="C_M and the intercept"):
        fit_mayo(_lambda(RATIOS), {"C_A": RATIOS, "C_M": np.ones_like(RATIOS)})


def test_design_warns_on_poorly_separated_terms_and_two_ratios():
    r1 = np.array([0, 1, 2, 3, 4, 5]) * 1e-4
    r2 = r1 * 2 + np.array([0, 1e-6, -1e-6, 2e-6, 0, -2e-6])
    chk = check_design({"C_A:a": r1, "C_A:b": r2})
    assert any("variance-inflation" in w for w in chk.warnings)
    chk2 = check_design({"C_A": np.array([0, 0, 1, 1]) * 1e-4})
    assert any("only 2 distinct ratios" in w for w in chk2.warnings)


def test_fit_refuses_non_positive_chain_length():
    y = _lambda(RATIOS).copy()
    y[2] = -1
    with pytest.raises(DataError, match="run '3'"):
        fit_mayo(y, {"C_A": RATIOS})


# =========================================================================== CLD slope


def test_cld_slope_of_exact_flory_distribution():
    lam = 2e-3
    M = _grid(lam)
    h = most_probable(M0_STYRENE / lam, M0_STYRENE)(M)
    s = cld_slope(M, h, M0_STYRENE)
    # discrete Flory: ln P(N) = const + N ln(1 - λ), so Λ = -ln(1 - λ) exactly [derived]
    assert s.Lambda == pytest.approx(-math.log1p(-lam), rel=1e-9)
    assert abs(s.curvature) < 1e-6  # a straight line has no curvature [derived]
    # auto window: dw/dlogM >= 0.7 max spans N = 1.03/λ .. 3.44/λ [derived: u^2 e^-u = 0.7*4e^-2]
    lo, hi = s.window
    assert lo / M0_STYRENE * lam == pytest.approx(1.031, rel=0.01)  # grid spacing 0.1 % in M
    assert hi / M0_STYRENE * lam == pytest.approx(3.443, rel=0.01)
    assert lo < s.M_peak < hi


def test_cld_user_window_and_refusal():
    lam = 2e-3
    M = _grid(lam)
    h = most_probable(M0_STYRENE / lam, M0_STYRENE)(M)
    s = cld_slope(M, h, M0_STYRENE, window=(30_000, 90_000))
    assert s.how == "user window"
    assert 30_000 <= s.window[0] and s.window[1] <= 90_000
    assert s.Lambda == pytest.approx(-math.log1p(-lam), rel=1e-9)
    with pytest.raises(DataError, match="window"):
        cld_slope(M, h, M0_STYRENE, window=(50_000, 50_010))


def test_cld_curvature_positive_for_a_drifted_distribution():
    # a mixture of exponentials is log-convex (Hölder's inequality) [derived], so ln P of
    # the cumulative distribution bends upward: positive curvature
    f = cumulative_most_probable(0.3, INV_DPN0, {"C_A": (3.0, 3e-4)}, M0_STYRENE)
    M = _grid(5e-4)
    s = cld_slope(M, f(M), M0_STYRENE)
    assert s.curvature > 0.01 and s.curvature > 100 * s.curvature_stderr  # exact data
    assert np.all(np.isfinite(ln_number_distribution(M, f(M))))


# =========================================================================== drift


def test_apparent_constant_check_values():
    # docs/science.md, section 5 [derived]: C_A = 14.8 -> C_app 10.64 at x = 0.05, 7.90 at x = 0.10
    assert float(apparent_constant(14.8, 0.05)) == pytest.approx(10.64, abs=0.005)
    assert float(apparent_constant(14.8, 0.10)) == pytest.approx(7.90, abs=0.005)
    # for C_A < 1 the bias is small [derived, docs/science.md, section 5]
    assert float(apparent_constant(0.5, 0.05)) == pytest.approx(0.5, rel=0.02)


def test_cumulative_model_matches_numerical_integrals():
    # reference library: scipy.integrate.quad over the instantaneous Mayo λ(x') [derived]
    C, r0, x, a = 14.8, 2e-4, 0.08, INV_DPN0

    def lam(xp):
        return a + C * r0 * (1 - xp) ** (C - 1)

    n_int = integrate.quad(lam, 0, x)[0] / x
    w_int = integrate.quad(lambda xp: (2 - lam(xp)) / lam(xp), 0, x)[0] / x
    assert float(cumulative_inv_dpn(x, a, {"C_A": (C, r0)})) == pytest.approx(n_int, rel=1e-10)
    assert float(cumulative_inv_dpw_half(x, a, {"C_A": (C, r0)})[0]) == pytest.approx(2 / w_int, rel=1e-8)


def test_cumulative_averages_from_the_mixed_distribution():
    # the cumulative dw/dlogM (a mixture over conversion) integrated slice by slice gives
    # the same averages as the conversion integrals [derived]
    x = 0.1
    f = cumulative_most_probable(x, INV_DPN0, {"C_A": (14.8, 2e-4)}, M0_STYRENE)
    M = _grid(float(_lambda(2e-4)))
    Mn_d, Mw_d = averages_from_dwdlogM(M, f(M))
    Mn, Mw = cumulative_averages(x, INV_DPN0, {"C_A": (14.8, 2e-4)}, M0_STYRENE)
    assert Mn_d == pytest.approx(Mn, rel=2e-3)  # grid starts at N = 1: the N < 1 part is cut
    assert Mw_d == pytest.approx(Mw, rel=1e-4)
    assert float(1 / cumulative_inv_dpn(x, INV_DPN0, {"C_A": (14.8, 2e-4)})) * M0_STYRENE == pytest.approx(Mn, rel=1e-9)


def _drift_series(C, xs, ratios, rel_noise=0.0, seed=0):
    rows = simulate_series(ratios, C_A=C, inv_DPn0=INV_DPN0, M0=M0_STYRENE, conversion=xs,
                           rel_noise=rel_noise, seed=seed)
    y_n = np.array([M0_STYRENE / r["Mn [g/mol]"] for r in rows])
    y_w = np.array([2 * M0_STYRENE / r["Mw [g/mol]"] for r in rows])
    return y_n, y_w


@pytest.mark.parametrize(
    "C, xs, ratios",
    [
        # a strong agent (1-dodecanethiol in styrene, C = 14.8 [published: Carraher 8th ed.]) at 3-10 %
        (C_DDM_STYRENE_60, np.array([0.03, 0.05, 0.06, 0.08, 0.09, 0.10]), RATIOS),
        # a moderate agent (C = 3, our choice) at 20-45 % conversion
        (3.0, np.array([0.20, 0.25, 0.30, 0.35, 0.40, 0.45]), RATIOS * 5),
    ],
)
@pytest.mark.parametrize("estimator", ["Mn", "Mw/2"])
def test_drift_correction_recovers_constant_where_naive_fit_is_far_off(C, xs, ratios, estimator):
    y_n, y_w = _drift_series(C, xs, ratios, rel_noise=0.01, seed=11)
    y = y_n if estimator == "Mn" else y_w
    naive = fit_mayo(y, {"C_A": ratios}, estimator=estimator)
    d = fit_cumulative(y, xs, {"C_A": ratios}, estimator=estimator, naive=naive)
    # issue 3: within 5 % with the drift correction (1 % noise on Mn and Mw)
    assert d.constant("C_A").value == pytest.approx(C, rel=0.05)
    # the naive fit is far off, as the analytic C_app predicts (bias of 16-55 % here) [derived]
    assert naive.constant("C_A").value < 0.85 * C
    capp = apparent_constant(C, xs)
    assert capp.min() * 0.9 < naive.constant("C_A").value < capp.max() * 1.1
    assert d.naive_bias[0] < -0.15


def test_naive_fit_equals_analytic_C_app_at_fixed_conversion():
    # all runs at x = 0.05: the cumulative 1/DPn is exactly linear in r0 with slope C_app [derived]
    x = 0.05
    y = cumulative_inv_dpn(np.full(RATIOS.size, x), INV_DPN0, {"C_A": (C_DDM_STYRENE_60, RATIOS)})
    naive = fit_mayo(y, {"C_A": RATIOS})
    assert naive.constant("C_A").value == pytest.approx(10.64, abs=0.005)  # docs/science.md, section 5 [derived]


def test_drift_identifiability_flag_when_agent_used_up():
    xs = np.array([0.40, 0.45, 0.50, 0.55, 0.60, 0.65])
    y_n, _ = _drift_series(C_DDM_STYRENE_60, xs, RATIOS)
    with pytest.warns(EstimatorWarning, match="not identifiable"):
        d = fit_cumulative(y_n, xs, {"C_A": RATIOS}, naive=fit_mayo(y_n, {"C_A": RATIOS}))
    assert d.identifiable["C_A"] is False
    assert np.all(d.remaining["C_A"] == pytest.approx(remaining_fraction(d.constant("C_A").value, xs)))


def test_cld_drift_model_recovers_constant():
    xs = np.array([0.03, 0.05, 0.06, 0.08, 0.09, 0.10])
    y, wins = [], []
    for r, x in zip(RATIOS, xs, strict=True):
        lam = float(_lambda(r))
        M = np.geomspace(M0_STYRENE * 20, M0_STYRENE * 20 / lam, 1500)
        s = cld_slope(M, cumulative_most_probable(x, INV_DPN0, {"C_A": (C_DDM_STYRENE_60, r)}, M0_STYRENE)(M),
                      M0_STYRENE)
        y.append(s.Lambda)
        wins.append(s.window)
    naive = fit_mayo(y, {"C_A": RATIOS}, estimator="CLD")
    d = fit_cumulative(y, xs, {"C_A": RATIOS}, estimator="CLD", windows=wins, M0=M0_STYRENE,
                       naive=naive)
    # noise-free: the model reproduces its own windows; 1 % for the log-spaced model points
    assert d.constant("C_A").value == pytest.approx(C_DDM_STYRENE_60, rel=0.01)
    assert naive.constant("C_A").value < 0.85 * C_DDM_STYRENE_60


def test_consumption_method_and_its_uncertainty():
    # [A]/[A]0 = ([M]/[M]0)^C (Walling 1948 [from memory]); C = 14.8 [published: Carraher 8th ed.]
    x = np.array([0.02, 0.04, 0.06])
    A0 = np.array([1e-3, 2e-3, 3e-3])
    A = A0 * (1 - x) ** C_DDM_STYRENE_60
    res = consumption_constant(A0, A, conversion=x, u_agent_residual=0.02 * A)
    assert np.allclose(res.C_runs, C_DDM_STYRENE_60)
    assert res.constant.value == pytest.approx(C_DDM_STYRENE_60, rel=1e-9)
    # propagated u(C) against a Monte Carlo of the same 2 % error (reference: numpy sampling)
    rng = np.random.default_rng(6)
    samp = np.log(A[0] * (1 + 0.02 * rng.standard_normal(20000)) / A0[0]) / np.log(1 - x[0])
    assert res.C_runs_stderr[0] == pytest.approx(samp.std(), rel=0.05)  # MC SD to ~1 %, first order
    with pytest.raises(DataError, match="between 0 and 1"):
        consumption_constant(A0, A0 * 1.1, conversion=x)


# =========================================================================== temperature


def test_arrhenius_recovers_known_activation_difference():
    dE, lnA = 8.0, math.log(200.0)  # our chosen truth [kJ/mol], [-]
    T = np.array([40.0, 50.0, 60.0, 70.0, 80.0]) + 273.15
    C = np.exp(lnA - dE * 1e3 / (8.314462618 * T))
    fit = fit_arrhenius(T, C, 0.02 * C)
    assert fit.delta_E.value == pytest.approx(dE, rel=1e-8)  # exact data
    assert fit.A_ratio.value == pytest.approx(200.0, rel=1e-8)
    # with 2 % errors the standard error of ΔE is sd(ln C)·R/sqrt(Sxx) [derived]
    x = 1 / T
    se = 0.02 * 8.314462618 / 1e3 / math.sqrt(np.sum((x - x.mean()) ** 2))
    assert fit.delta_E.stderr == pytest.approx(se, rel=1e-3)
    assert fit.delta_E.ci_low < dE < fit.delta_E.ci_high


def test_arrhenius_flat_thiol_methacrylate_pair():
    # some thiol/methacrylate pairs show ΔE ≈ 0 over 20-80 °C [published: Hutchinson, Paquet,
    # McMinn, Macromolecules 1995]; C about 0.65 [from memory: same paper]
    rng = np.random.default_rng(8)
    T = np.array([20.0, 40.0, 60.0, 80.0]) + 273.15
    C = C_DDM_MMA * (1 + 0.02 * rng.standard_normal(T.size))
    fit = fit_arrhenius(T, C, 0.02 * C)
    assert fit.delta_E.ci_low < 0 < fit.delta_E.ci_high


def test_arrhenius_needs_two_temperatures():
    with pytest.raises(DesignError, match="2 distinct temperatures"):
        fit_arrhenius([333.15, 333.15], [10.0, 11.0], [0.1, 0.1])


# =========================================================================== impurity


def test_impurity_level_check_value():
    # docs/science.md, section 9 [derived]: 10 ppm (mol) of a thiol with C = 15 adds 1.5e-4 to 1/DPn
    ppm, conc = impurity_level(1.5e-4, 15.0, 8.0)
    assert float(ppm) == pytest.approx(10.0)
    assert float(conc) == pytest.approx(8.0e-5)  # 10e-6 mol/mol × 8 mol/L [derived]


def test_contaminated_run_flagged_and_clean_runs_not():
    ratios = np.linspace(0, 4e-4, 8)
    for seed in range(5):
        rng = np.random.default_rng(100 + seed)
        y = _lambda(ratios) * (1 + 0.015 * rng.standard_normal(ratios.size))
        y[5] += 6.0e-4  # +40 ppm of a C = 15 impurity in run 6 [derived: docs/science.md, section 9]
        chk = flag_runs(y, {"C_A": ratios}, C_X=15.0)
        assert chk.flagged_ids == ("6",)
        f = chk.flag("6")
        assert f.excess == pytest.approx(6.0e-4, rel=0.15)  # 1.5 % noise on 8 runs
        assert f.impurity_ppm == pytest.approx(40.0, rel=0.15)


def test_clean_series_false_flag_rate_at_stated_level():
    # at 99 % confidence for the series, at most 1 % of clean series may carry any flag;
    # 400 series: binomial SD 0.5 %, allow 3 SD
    rng = np.random.default_rng(7)
    ratios = np.linspace(0, 4e-4, 7)
    n, flagged = 400, 0
    for _ in range(n):
        y = _lambda(ratios) * (1 + 0.02 * rng.standard_normal(ratios.size))
        flagged += bool(flag_runs(y, {"C_A": ratios}).flagged_ids)
    assert flagged / n <= 0.01 + 3 * math.sqrt(0.01 * 0.99 / n)


def test_robust_fit_is_not_dragged_by_one_contaminated_run():
    rng = np.random.default_rng(9)
    y = _lambda(RATIOS) * (1 + 0.01 * rng.standard_normal(RATIOS.size))
    y[5] *= 1.5
    X = np.column_stack([np.ones_like(RATIOS), RATIOS])
    beta, u, _ = robust_fit(X, y)
    ols = fit_mayo(y, {"C_A": RATIOS}).constant("C_A").value
    assert beta[1] == pytest.approx(C_DDM_STYRENE_60, rel=0.03)  # 1 % noise
    assert abs(ols / C_DDM_STYRENE_60 - 1) > 0.1  # the plain fit is dragged
    assert u[5] == 0.0


def test_contaminated_run_flagged_under_conversion_drift():
    xs = np.array([0.03, 0.05, 0.06, 0.08, 0.09, 0.10, 0.07])
    ratios = np.append(RATIOS, 1.5e-4)
    y_n, _ = _drift_series(C_DDM_STYRENE_60, xs, ratios, rel_noise=0.01, seed=12)
    y_n[3] += 8e-4
    naive = fit_mayo(y_n, {"C_A": ratios})
    d = fit_cumulative(y_n, xs, {"C_A": ratios}, naive=naive)
    chk = flag_runs_cumulative(y_n, xs, {"C_A": ratios},
                               [d.intercept.value, d.constant("C_A").value])
    assert chk.flagged_ids == ("4",)


def test_intercept_check_against_a_control_value():
    # every run carries 10 ppm of a C = 15 impurity: +1.5e-4 [derived: docs/science.md, section 9]
    rng = np.random.default_rng(10)
    y = (_lambda(RATIOS) + 1.5e-4) * (1 + 0.01 * rng.standard_normal(RATIOS.size))
    fit = fit_mayo(y, {"C_A": RATIOS})
    ic = check_intercept(fit, INV_DPN0, 1e-5, source="control", C_X=15.0)
    assert ic.flagged
    assert ic.impurity_ppm == pytest.approx(10.0, rel=0.3)  # intercept SE about 1e-5 here
    clean = fit_mayo(_lambda(RATIOS) * (1 + 0.01 * rng.standard_normal(RATIOS.size)), {"C_A": RATIOS})
    assert not check_intercept(clean, INV_DPN0, 1e-5).flagged
    lb = check_intercept(fit, 0.6e-4, source="C_M alone", lower_bound=True, C_X=15.0)
    assert not lb.flagged and "at most" in lb.message


# =========================================================================== sheet + analysis


def _write_rows(path, rows):
    pd.DataFrame(rows).to_csv(path, index=False)
    return path


def test_run_series_sheet_errors_name_file_row_and_column(tmp_path):
    base = {"run": "R1", "monomer": "styrene", "[M] [mol/L]": 8.0, "[A] [mol/L]": 0.0,
            "Mn [g/mol]": 200000, "Mw [g/mol]": 400000}
    rows = [dict(base, run=f"R{i}", **{"[A] [mol/L]": i * 1e-4}) for i in range(1, 5)]
    rows[2]["Mn [g/mol]"] = "lots"
    p = _write_rows(tmp_path / "runs.csv", rows)
    with pytest.raises(DataError) as e:
        read_run_series(p)
    assert e.value.row == 4 and e.value.column == "Mn [g/mol]" and "runs.csv" in str(e.value)
    rows[2]["Mn [g/mol]"] = 100000
    rows[1]["monomer"] = "unobtainium"
    with pytest.raises(GpcError) as e:
        read_run_series(_write_rows(tmp_path / "runs.csv", rows))
    assert e.value.row == 3 and e.value.column == "monomer" and "M0 [g/mol]" in str(e.value)
    rows[1]["monomer"] = "styrene"
    rows[3]["run"] = "R1"
    with pytest.raises(DataError, match="used again"):
        read_run_series(_write_rows(tmp_path / "runs.csv", rows))
    rows[3]["run"] = "R4"
    rows[0]["file"] = "missing.csv"
    with pytest.raises(InputFormatError, match="not found") as e:
        read_run_series(_write_rows(tmp_path / "runs.csv", rows))
    assert e.value.column == "file" and e.value.row == 2
    del rows[0]["file"]
    for r in rows:
        r.pop("[M] [mol/L]")
    with pytest.raises(DataError, match=r"needs '\[M\] \[mol/L\]'"):
        read_run_series(_write_rows(tmp_path / "runs.csv", rows))


def test_sheet_accepts_ratios_percent_conversion_and_kelvin(tmp_path):
    rows = [{"Run ID": f"R{i}", "M0 [g/mol]": 100.12, "ratio [A]/[M] [-]": i * 1e-3,
             "conversion [%]": 5, "T [K]": 333.15, "Mw [g/mol]": 50000} for i in range(4)]
    s = read_run_series(_write_rows(tmp_path / "r.csv", rows))
    assert s.runs[1].ratios["C_A"] == pytest.approx(1e-3)
    assert s.runs[0].conversion == pytest.approx(0.05)
    assert s.runs[0].T_C == pytest.approx(60.0)


def test_regression_unitless_temperature_in_kelvin_is_refused(tmp_path):
    # "T" = 333 once passed the -100..400 °C check as 333 °C; polymerizations above 200 °C
    # under a unitless header are far more likely kelvin (common practice: ask, not guess).
    rows = [{"run": f"R{i}", "M0 [g/mol]": 100.12, "ratio [A]/[M] [-]": i * 1e-3,
             "T": 333.15, "Mw [g/mol]": 50000} for i in range(4)]
    with pytest.raises(DataError, match="looks like kelvin") as e:
        read_run_series(_write_rows(tmp_path / "r.csv", rows))
    assert e.value.column == "T"
    for r in rows:
        r["T"] = 60.0
    assert read_run_series(_write_rows(tmp_path / "r.csv", rows)).runs[0].T_C == pytest.approx(60.0)


def _series_rows(C=C_DDM_STYRENE_60, xs=None, impurity=None, seed=21, noise=0.01):
    rows = simulate_series(RATIOS, C_A=C, inv_DPn0=INV_DPN0, M0=M0_STYRENE, conversion=xs,
                           rel_noise=noise, seed=seed, impurity=impurity)
    for r in rows:
        r.pop("M0 [g/mol]")
        r.update({"monomer": "styrene", "agent": "1-dodecanethiol", "T [°C]": 60.0,
                  "series": "DDM in styrene",
                  # simulate_series makes most-probable (no combination) polymer: say so,
                  # or the analysis takes styrene's bundled delta (issue 11)
                  "delta [-]": 1.0})
    return rows


def test_analyse_series_end_to_end_from_measured_averages(tmp_path):
    xs = np.array([0.03, 0.05, 0.06, 0.08, 0.09, 0.10])
    rows = _series_rows(xs=xs, impurity={3: 8e-4})
    p = _write_rows(tmp_path / "series.csv", rows)
    before = hashlib.sha256(p.read_bytes()).hexdigest()
    res = analyse_series(p, impurity_C=15.0)
    ct = res.constants_table()
    for col in ("series", "agent", "estimator", "C [-]", "standard error [-]", "CI low [-]",
                "CI high [-]", "runs", "drift corrected", "model", "naive bias [%]"):
        assert col in ct.columns
    pref = ct[ct["preferred"] == "yes"].iloc[0]
    assert pref["drift corrected"] == "yes"
    assert pref["C [-]"] == pytest.approx(C_DDM_STYRENE_60, rel=0.05)  # issue 3: 5 %
    assert pref["excluded runs"] == "R4"
    naive = ct[(ct["model"] == "Mayo (initial ratios)") & (ct["estimator"] == pref["estimator"])].iloc[0]
    assert naive["naive bias [%]"] < -15
    rt = res.runs_table()
    for col in ("ratio [A]/[M] [-]", "DPn (Mn) [-]", "DPn (Mw/2) [-]", "Lambda (CLD) [-]",
                "residual (Mn) [-]", "flag", "reason"):
        assert col in rt.columns
    assert list(rt.loc[rt["flag"] != "", "run"]) == ["R4"]
    assert "ppm" in rt.loc[rt["run"] == "R4", "reason"].iloc[0]
    assert res.constant("C_A").value == pytest.approx(C_DDM_STYRENE_60, rel=0.05)
    paths = write_transfer(res, tmp_path / "out")
    for name in ("constants.csv", "constants.xlsx", "runs.csv", "transfer.xlsx", "summary.json"):
        assert paths[name].exists()
    assert any(k.startswith("plots/mayo_") for k in paths)
    assert pd.read_excel(paths["constants.xlsx"]).shape[0] == len(ct)
    assert hashlib.sha256(p.read_bytes()).hexdigest() == before  # input untouched
    # summary is JSON-safe and the same twice
    import json

    assert json.dumps(res.summary()) == json.dumps(analyse_series(p, impurity_C=15.0).summary())


def test_regression_plots_of_groups_with_clashing_file_names_are_all_written(tmp_path):
    # "DDM/St" and "DDM St" both make the file name "DDM_St": the second Mayo plot used to
    # overwrite the first.
    rows = []
    for label, prefix in (("DDM/St", "a"), ("DDM St", "b")):
        for r in _series_rows(xs=None):
            r.update({"series": label, "run": prefix + r["run"]})
            rows.append(r)
    res = analyse_series(series=run_series_from_rows(rows))
    assert len(res.groups) == 2
    from gpctools.report import write_transfer_plots

    paths = write_transfer_plots(res, tmp_path / "plots")
    mayo = sorted(k for k in paths if k.startswith("plots/mayo_"))
    assert len(mayo) == 2
    assert all(paths[k].exists() for k in mayo)


def test_analyse_series_low_conversion_without_drift_column(tmp_path):
    rows = _series_rows(xs=None)
    res = analyse_series(_write_rows(tmp_path / "s.csv", rows))
    ct = res.constants_table()
    assert set(ct["drift corrected"]) == {"no"}
    for est in ("Mn", "Mw/2"):
        c = ct[ct["estimator"] == est]["C [-]"].iloc[0]
        assert c == pytest.approx(C_DDM_STYRENE_60, rel=0.05)  # issue 3: 5 % at low conversion
    assert not any("differ by" in w for w in res.warnings)  # ideal data: estimators agree


def test_disagreeing_estimators_are_named_with_causes(tmp_path):
    rows = _series_rows(noise=0.002)
    for i, r in enumerate(rows):  # a low-M tail inside the limits pulls Mn down at high ratios
        r["Mn [g/mol]"] *= 1 - 0.03 * i
    res = analyse_series(_write_rows(tmp_path / "s.csv", rows))
    notes = [w for w in res.warnings if "differ by" in w]
    assert notes and "Mn too low" in notes[0]


def test_relative_scale_is_warned(tmp_path):
    rows = _series_rows()
    for r in rows:
        r["Mn scale"] = "relative"
    res = analyse_series(_write_rows(tmp_path / "s.csv", rows))
    assert any("relative (standard-equivalent) scale" in w for w in res.warnings)


def test_analysis_refusals_are_design_errors(tmp_path):
    rows = _series_rows()
    for r in rows:
        r["[A] [mol/L]"] = 8e-4
    with pytest.raises(DesignError, match="no agent, solvent or initiator ratio varies"):
        analyse_series(_write_rows(tmp_path / "s.csv", rows))
    with pytest.raises(DesignError, match="C_M and the intercept"):
        analyse_series(_write_rows(tmp_path / "t.csv", _series_rows()), terms=["C_A", "C_M"])
    with pytest.raises(DesignError, match="has no"):
        analyse_series(_write_rows(tmp_path / "u.csv", _series_rows()), terms=["C_S"])


def test_temperature_series_through_the_analysis():
    dE = 10.0  # kJ/mol, our chosen truth
    rows = []
    for T in (50.0, 60.0, 70.0):
        C = C_DDM_STYRENE_60 * math.exp(-dE * 1e3 / 8.314462618 * (1 / (T + 273.15) - 1 / 333.15))
        for r in simulate_series(RATIOS, C_A=C, inv_DPn0=INV_DPN0, M0=M0_STYRENE, rel_noise=0.005,
                                 seed=int(T), run_prefix=f"T{T:g}-"):
            r.update({"T [°C]": T, "series": "DDM"})
            rows.append(r)
    res = analyse_series(series=run_series_from_rows(rows))
    assert len(res.groups) == 3
    fits = {lbl["estimator"]: f for lbl, f in res.arrhenius}
    f = fits["Mw/2"]
    assert abs(f.delta_E.value - dE) < 3 * f.delta_E.stderr + 0.5  # 0.5 % noise per Mn/Mw
    at = res.arrhenius_table()
    assert {"E_tr - E_p [kJ/mol]", "A_tr/A_p [-]", "E_tr - E_p standard error [kJ/mol]"} <= set(at.columns)


def test_template_csv_and_xlsx_hold_the_same_rows_and_analyse(tmp_path):
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent / "gpctools" / "templates"
    a = read_run_series(root / "run_series.csv")
    b = read_run_series(root / "run_series.xlsx")
    assert [r.summary() for r in a.runs] == [r.summary() for r in b.runs]
    res = analyse_series(root / "run_series.csv")
    ct = res.constants_table()
    assert "consumption" in set(ct["estimator"])
    # the template's example was made with C = 14.8 [published: Carraher 8th ed.] and 1.5 % noise
    assert res.constant("C_A").value == pytest.approx(C_DDM_STYRENE_60, rel=0.05)
    # the bundled reference value is shown beside it, with its source
    assert ct["literature C [-]"].iloc[0] == pytest.approx(C_DDM_STYRENE_60)
    assert "Carraher" in ct["literature source"].iloc[0]
    assert "site safety rules" in res.summary()["safety"]


def test_library_does_not_print(capsys, tmp_path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        analyse_series(_write_rows(tmp_path / "s.csv", _series_rows()))
    assert capsys.readouterr().out == ""
