"""Tests of gpctools.chainlength against closed forms and independent numerics.

Truth side: published identities (Flory; Schulz-Zimm moments from the IUPAC Gold Book;
Clay and Gilbert 1995), the derived check values of docs/science.md, sections 3-5 and 9, direct
summation over chain lengths with numpy, and integrals over conversion by
scipy.integrate (quad, quad_vec, solve_ivp) of integrands written out here by hand, not
taken from the module.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.optimize import minimize_scalar

from gpctools.chainlength import (
    agent_ratio,
    apparent_constant,
    cumulative_averages,
    cumulative_dpw,
    cumulative_inv_dpn,
    cumulative_ln_number,
    cumulative_most_probable,
    dispersity_instantaneous,
    impurity_ratio,
    impurity_ratio_cumulative,
    instantaneous_inv_dpn,
    kinetic_inv_dpn,
    mayo_inv_dpn,
    mixed_termination,
    most_probable,
    remaining_fraction,
    term_kind,
)
from gpctools.errors import DataError, DesignError

M0_STYRENE = 104.15  # g/mol, C8H8 [derived: standard atomic weights]
C_DDM_STYRENE_60 = 14.8  # 1-dodecanethiol in styrene, 60 °C [published: Carraher's Polymer Chemistry, 8th ed.]
C_M_STYRENE_50 = 5.27e-5  # transfer to styrene, 50 °C [published: Kukulj, Davis, Gilbert, Macromolecules 1998]
INV_DPN0 = 5.0e-4  # our choice (DPn0 = 2000)


def _sum_moments(N: np.ndarray, P: np.ndarray) -> dict[str, float]:
    """DPn, DPw, DPz, DPz+1 of a number distribution P(N) by direct summation."""
    m = [float(np.sum(P * N**k)) for k in range(5)]
    return {"DPn": m[1] / m[0], "DPw": m[2] / m[1], "DPz": m[3] / m[2], "DPz1": m[4] / m[3]}


# ============================================================================ Mayo sum


def test_mayo_sum_impurity_check_value():
    # docs/science.md, section 9 [derived]: 10 ppm (mol) of a thiol with C = 15 adds 1.5e-4 to
    # 1/DPn, taking DPn 2000 to about 1540. Rounding only.
    base = mayo_inv_dpn(INV_DPN0)
    with_thiol = mayo_inv_dpn(INV_DPN0, transfer=[(15.0, 10e-6)])
    assert with_thiol - base == pytest.approx(1.5e-4, rel=1e-12)
    assert 1.0 / with_thiol == pytest.approx(1540.0, abs=2.0)  # "about 1540"
    assert isinstance(with_thiol, float)  # floats in, float out


def test_mayo_sum_adds_every_term_and_broadcasts():
    # Mayo, J. Am. Chem. Soc. 1943: 1/DPn = kinetic + C_M + C_S[S]/[M] + C_I[I]/[M] + C_A[A]/[M]
    ratios = np.array([0.0, 1e-4, 2e-4])
    got = mayo_inv_dpn(4e-4, C_M=C_M_STYRENE_50, transfer=[(1e-5, 0.5), (0.05, 2.5e-3),
                                                            (C_DDM_STYRENE_60, ratios)])
    by_hand = 4e-4 + C_M_STYRENE_50 + 1e-5 * 0.5 + 0.05 * 2.5e-3 + C_DDM_STYRENE_60 * ratios
    assert got == pytest.approx(by_hand, rel=1e-14)  # same sum, rounding only


def test_kinetic_term_is_the_steady_state_chain_length():
    # docs/science.md, section 3 [derived]: R_p = k_p[M](f k_d[I]/k_t)^½,
    # ν = k_p[M]/(2(f k_d k_t[I])^½), and without transfer DPn = 2ν/(1 + δ).
    # Values: styrene 60 °C k_p ≈ 341 L/mol/s [from memory: Buback et al. 1995, docs/science.md, section 7];
    # AIBN k_d ≈ 8.7e-6 1/s [from memory: supplier tables]; f 0.6, k_t 1e8 (order of
    # magnitude, docs/science.md, section 7); [M] 8.7, [I] 0.02 mol/L (our choice).
    k_p, k_d, f, k_t, M, conc_I = 341.0, 8.7e-6, 0.6, 1e8, 8.7, 0.02
    R_p = k_p * M * math.sqrt(f * k_d * conc_I / k_t)
    nu = k_p * M / (2.0 * math.sqrt(f * k_d * k_t * conc_I))
    for delta in (0.0, 0.3, 1.0):
        inv = float(kinetic_inv_dpn(R_p, M, k_p, k_t, delta))
        assert 1.0 / inv == pytest.approx(2.0 * nu / (1.0 + delta), rel=1e-12)  # identity


# ===================================================================== most probable


@pytest.mark.parametrize("lam", [2e-3, 0.05, 0.3])
def test_discrete_most_probable_averages_by_direct_summation(lam):
    # Flory 1953: P(N) = λ(1 − λ)^(N−1), N = 1, 2, ...; summed with numpy to q^N < 1e-25
    model = most_probable(M0_STYRENE / lam, M0_STYRENE)
    N = np.arange(1.0, math.ceil(60.0 / lam))
    P = lam * (1.0 - lam) ** (N - 1.0)
    ref = _sum_moments(N, P)
    for dp, key in (("DPn", "Mn"), ("DPw", "Mw"), ("DPz", "Mz"), ("DPz1", "Mz1")):
        # summation of up to 30,000 terms: rounding about 1e-13 relative; 1e-10
        assert model.averages[key] == pytest.approx(M0_STYRENE * ref[dp], rel=1e-10), key
    assert model.averages["dispersity"] == pytest.approx(2.0 - lam, rel=1e-12)  # (2 − λ) [derived]
    # the callable at integer N is ln10·N·w(N), w(N) = N P(N)/DPn the mass fraction: Σ w = 1
    w = model(N * M0_STYRENE) / (math.log(10.0) * N)
    assert float(np.sum(w)) == pytest.approx(1.0, rel=1e-10)


def test_discrete_most_probable_peak_and_continuous_limit():
    lam = 0.01
    model = most_probable(M0_STYRENE / lam, M0_STYRENE)
    res = minimize_scalar(lambda lg: -float(model(10.0**lg)), bounds=(3.5, 5.5), method="bounded",
                          options={"xatol": 1e-10})
    # xatol 1e-10 decades on a smooth maximum: M to about 1e-6 relative; 1e-5
    assert 10.0**res.x == pytest.approx(model.averages["Mp_dwdlogM"], rel=1e-5)
    # continuous limit (Schulz-Zimm b = 1, IUPAC Gold Book): Mw = 2Mn, Mz = 3Mn, Mz+1 = 4Mn
    cont = most_probable(50_000.0)
    assert (cont.averages["Mw"], cont.averages["Mz"], cont.averages["Mz1"]) == pytest.approx(
        (1e5, 1.5e5, 2e5), rel=1e-14)
    # the discrete form tends to it as λ → 0: dw/dlogM ratio 1 + O(λN) at the peak [derived]
    tiny = most_probable(50_000.0, 0.05)  # λ = 1e-6
    M = np.geomspace(1e3, 5e5, 50)
    assert tiny(M) == pytest.approx(cont(M), rel=1e-5)  # |ratio − 1| <= λ(N+1) <= 1e-5 here


@pytest.mark.parametrize("call", [lambda: most_probable(-1.0), lambda: most_probable(100.0, 200.0),
                                  lambda: most_probable(float("nan"))])
def test_most_probable_refuses_bad_parameters(call):
    with pytest.raises(DataError):
        call()


# ===================================================================== mixed termination


@pytest.mark.parametrize("tau, beta", [(3e-4, 9e-4), (1e-3, 0.0), (0.0, 2e-3), (2e-3, 5e-4)])
def test_mixed_termination_moments_by_quad(tau, beta):
    # Clay and Gilbert, Macromolecules 1995: dead chains n(N) ∝ τσ e^(−σN) + (β/2)σ² N e^(−σN)
    # (σ = τ + β), integrated with scipy quad over N (continuous form).
    mt = mixed_termination(tau, beta)
    s = tau + beta

    def n(N: float) -> float:
        return (tau * s + 0.5 * beta * s * s * N) * math.exp(-s * N)

    m = [integrate.quad(lambda N, k=k: n(N) * N**k, 0.0, np.inf, epsabs=0.0, epsrel=1e-12)[0]
         for k in range(5)]
    # quad to 1e-12 relative on smooth exponential integrands; 1e-9
    assert mt.DPn == pytest.approx(m[1] / m[0], rel=1e-9)
    assert mt.DPw == pytest.approx(m[2] / m[1], rel=1e-9)
    assert mt.DPz == pytest.approx(m[3] / m[2], rel=1e-9)
    assert mt.DPz1 == pytest.approx(m[4] / m[3], rel=1e-9)
    # Clay and Gilbert 1995 / docs/science.md, section 4: DPn = 1/(τ + β/2), DPw = (2τ + 3β)/(τ + β)²
    assert mt.DPn == pytest.approx(1.0 / (tau + beta / 2), rel=1e-14)
    assert mt.DPw == pytest.approx((2 * tau + 3 * beta) / s**2, rel=1e-14)
    # Đ = 2 − u²/2 with u = β/(τ+β), and u = 2φ/(1+φ) [derived, kinetics.predict docstring]
    u, phi = mt.u_combination, mt.fraction_chains_combination
    assert mt.dispersity == pytest.approx(mt.DPw / mt.DPn, rel=1e-12)
    assert u == pytest.approx(2 * phi / (1 + phi), rel=1e-12, abs=1e-15)


def test_mixed_termination_limits_and_discrete_form():
    # Schulz-Zimm b = 1 (most probable) Đ = 2, b = 2 (pure combination) Đ = 1.5 [published:
    # IUPAC Gold Book]; exact arithmetic
    assert mixed_termination(1e-3, 0.0).dispersity == 2.0
    assert mixed_termination(0.0, 1e-3).dispersity == 1.5
    assert dispersity_instantaneous(0.0) == 2.0 and dispersity_instantaneous(1.0) == 1.5
    # discrete distribution by direct summation (radicals stop at length N with
    # probability σ q^(N−1); combination products are their convolution σ²(N−1)q^(N−2)):
    # same DPn, DPw one less [derived]; with β = 0, DPn = (DPw + 1)/2 (docs/science.md, section 4)
    for tau, beta in ((3e-3, 5e-3), (4e-3, 0.0)):
        mt = mixed_termination(tau, beta)
        s = tau + beta
        q = 1.0 - s
        N = np.arange(1.0, 25_000.0)
        P = tau * s * q ** (N - 1) + np.where(N >= 2, 0.5 * beta * s * s * (N - 1) * q ** (N - 2), 0.0)
        ref = _sum_moments(N, P)
        # 25,000 terms (q^N < 1e-40): rounding only; 1e-10
        assert ref["DPn"] == pytest.approx(mt.DPn, rel=1e-10)
        assert ref["DPw"] == pytest.approx(mt.DPw_discrete, rel=1e-10)
        if beta == 0.0:
            assert mt.DPn == pytest.approx((mt.DPw_discrete + 1.0) / 2.0, rel=1e-12)


def test_mixed_termination_distribution_matches_its_averages():
    mt = mixed_termination(4e-4, 1.2e-3)
    model = mt.distribution(M0_STYRENE)
    centre = math.log10(model.averages["Mp_dwdlogM"])

    def q(k: int) -> float:
        # mass moments over log10 M by scipy quad, 12 decades below and 3 above the peak
        return integrate.quad(lambda lg: float(model(10.0**lg)) * 10.0 ** (k * (lg - centre)),
                              centre - 12, centre + 3, points=[centre], limit=400,
                              epsabs=0.0, epsrel=1e-12)[0] * 10.0 ** (k * centre)

    m_1, m0, m1, m2 = q(-1), q(0), q(1), q(2)
    # quad to 1e-12; the tails outside the range hold < 1e-12 of the moments; 1e-8
    assert m0 == pytest.approx(1.0, rel=1e-8)
    assert m0 / m_1 == pytest.approx(model.averages["Mn"], rel=1e-8)
    assert m1 / m0 == pytest.approx(model.averages["Mw"], rel=1e-8)
    assert m2 / m1 == pytest.approx(model.averages["Mz"], rel=1e-8)
    res = minimize_scalar(lambda lg: -float(model(10.0**lg)), bounds=(centre - 1, centre + 1),
                          method="bounded", options={"xatol": 1e-10})
    assert 10.0**res.x == pytest.approx(model.averages["Mp_dwdlogM"], rel=1e-5)  # as above
    # β = 0: the continuous most-probable distribution with Mn = M0/τ (identity)
    plain = mixed_termination(2e-3, 0.0).distribution(M0_STYRENE)
    M = np.geomspace(1e3, 1e6, 40)
    assert plain(M) == pytest.approx(most_probable(M0_STYRENE / 2e-3)(M), rel=1e-12)
    # high-M slope of ln P(N) is −(τ + β) whatever the mode (docs/science.md, section 4)
    N1, N2 = 2e5, 2e5 + 10.0
    lnP = [math.log(float(model(N * M0_STYRENE)) / N**2) for N in (N1, N2)]
    assert (lnP[1] - lnP[0]) / (N2 - N1) == pytest.approx(-mt.sigma, rel=1e-2)  # B/(A+BN)/σ ≈ 3e-3


@pytest.mark.parametrize("tau, beta", [(1e-3, -1e-4), (-1e-3, 1e-3), (float("nan"), 0.0), (0.0, 0.0)])
def test_mixed_termination_refuses_impossible_rates(tau, beta):
    with pytest.raises(DataError):
        mixed_termination(tau, beta)


# ==================================================================== conversion drift


def test_apparent_constant_check_values():
    # docs/science.md, section 5 [derived]: C = 14.8 -> C_app 10.64 at x = 0.05, 7.90 at x = 0.10
    # (two decimals: tolerance half a unit in the last place)
    assert float(apparent_constant(C_DDM_STYRENE_60, 0.05)) == pytest.approx(10.64, abs=0.005)
    assert float(apparent_constant(C_DDM_STYRENE_60, 0.10)) == pytest.approx(7.90, abs=0.005)


def test_agent_ratio_follows_the_consumption_ode():
    # d[A]/d[M] = C [A]/[M] (transfer consumes A in proportion to its use of monomer),
    # integrated by scipy solve_ivp from [M] = 1 down to 1 − x (docs/science.md, section 5)
    C, r0, x = C_DDM_STYRENE_60, 3e-4, 0.2
    sol = integrate.solve_ivp(lambda m, a: C * a / m, (1.0, 1.0 - x), [r0], rtol=1e-12, atol=1e-20)
    A = float(sol.y[0, -1])
    # solve_ivp at rtol 1e-12: 1e-9 relative is ample
    assert float(remaining_fraction(C, x)) == pytest.approx(A / r0, rel=1e-9)
    assert float(agent_ratio(r0, C, x)) == pytest.approx(A / (1.0 - x), rel=1e-9)


TERMS = {"C_A": (C_DDM_STYRENE_60, 2e-4), "C_S": (1e-4, 0.3), "C_I": (0.05, 2e-3),
         "C_M": (C_M_STYRENE_50, 1.0)}


def _lam_by_hand(xp: float) -> float:
    """λ(x') of TERMS, written out (docs/science.md, section 5)."""
    lam = INV_DPN0 + C_M_STYRENE_50
    lam += C_DDM_STYRENE_60 * 2e-4 * (1 - xp) ** (C_DDM_STYRENE_60 - 1)
    lam += 1e-4 * 0.3 * (1 - xp) ** (1e-4 - 1)
    lam += 0.05 * 2e-3 / (1 - xp)
    return lam


@pytest.mark.parametrize("x", [0.01, 0.1, 0.4])
def test_cumulative_formulas_match_quad_over_conversion(x):
    assert float(instantaneous_inv_dpn(x, INV_DPN0, TERMS)) == pytest.approx(_lam_by_hand(x), rel=1e-13)
    n_int = integrate.quad(_lam_by_hand, 0.0, x, epsabs=0.0, epsrel=1e-13)[0] / x
    w_int = integrate.quad(lambda xp: (2 - _lam_by_hand(xp)) / _lam_by_hand(xp), 0.0, x,
                           epsabs=0.0, epsrel=1e-13)[0] / x
    # closed form vs quad at 1e-13: 1e-11; 64-node Gauss-Legendre on a smooth integrand: 1e-10
    assert float(cumulative_inv_dpn(x, INV_DPN0, TERMS)) == pytest.approx(n_int, rel=1e-11)
    assert float(cumulative_dpw(x, INV_DPN0, TERMS)) == pytest.approx(w_int, rel=1e-10)
    Mn, Mw = cumulative_averages(x, INV_DPN0, TERMS, M0_STYRENE)
    assert (Mn, Mw) == pytest.approx((M0_STYRENE / n_int, M0_STYRENE * w_int), rel=1e-10)


def test_cumulative_at_zero_conversion_is_instantaneous():
    lam = _lam_by_hand(0.0)
    assert float(cumulative_inv_dpn(0.0, INV_DPN0, TERMS)) == pytest.approx(lam, rel=1e-14)
    # discrete most probable: DPn = 1/λ, DPw = (2 − λ)/λ [Flory 1953]
    Mn, Mw = cumulative_averages(0.0, INV_DPN0, TERMS, M0_STYRENE)
    assert Mn == pytest.approx(M0_STYRENE / lam, rel=1e-13)
    assert Mw == pytest.approx(M0_STYRENE * (2 - lam) / lam, rel=1e-13)
    inst = most_probable(M0_STYRENE / lam, M0_STYRENE)
    cum = cumulative_most_probable(0.0, INV_DPN0, TERMS, M0_STYRENE)
    for key in ("Mn", "Mw", "Mz", "Mz1"):
        assert cum.averages[key] == pytest.approx(inst.averages[key], rel=1e-12), key


def test_cumulative_distribution_by_summation_over_chain_lengths():
    # number distribution of the cumulative polymer, P(N) ∝ ∫0^x λ² (1 − λ)^(N−1) dx'
    # (docs/science.md, section 5), integrated over conversion by scipy quad_vec for every N and
    # summed over N with numpy; λ(x') written by hand (one consumed agent)
    x, C, r0 = 0.1, C_DDM_STYRENE_60, 2e-4
    terms = {"C_A": (C, r0)}

    def lam(xp: float) -> float:
        return INV_DPN0 + C * r0 * (1 - xp) ** (C - 1)

    N = np.arange(1.0, 80_000.0)  # λ >= 5e-4: (1 − λ)^N < 1e-17 at the end
    P, _ = integrate.quad_vec(lambda xp: lam(xp) ** 2 * (1 - lam(xp)) ** (N - 1), 0.0, x,
                              epsabs=0.0, epsrel=1e-12)
    ref = _sum_moments(N, P)
    model = cumulative_most_probable(x, INV_DPN0, terms, M0_STYRENE)
    for dp, key in (("DPn", "Mn"), ("DPw", "Mw"), ("DPz", "Mz"), ("DPz1", "Mz1")):
        # quad_vec at 1e-12 and 200 Gauss-Legendre nodes on a smooth λ(x'): 1e-9
        assert model.averages[key] == pytest.approx(M0_STYRENE * ref[dp], rel=1e-9), key
    # the callable at integer N is ln10·N·w(N) with w the mass fraction: Σ w = 1
    w = model(N * M0_STYRENE) / (math.log(10.0) * N)
    assert float(np.sum(w)) == pytest.approx(1.0, rel=1e-9)
    # ln P_cum differences (the CLD model) match the summed distribution
    Ns = np.array([1_000.0, 3_000.0, 9_000.0])
    lnP = cumulative_ln_number(Ns, x, INV_DPN0, terms)
    ref_ln = np.log(P[Ns.astype(int) - 1])
    assert lnP - lnP[0] == pytest.approx(ref_ln - ref_ln[0], abs=1e-8)  # log of a 1e-9 ratio


def test_unknown_term_is_refused():
    assert [term_kind(t) for t in ("C_A", "C_A:thiol", "C_S", "C_I", "C_M")] == [
        "consumed", "consumed", "consumed", "unconsumed", "monomer"]
    with pytest.raises(DesignError, match="unknown term"):
        cumulative_inv_dpn(0.1, INV_DPN0, {"C_X": (1.0, 1e-4)})


# ==================================================================== impurity level


def test_instantaneous_impurity_level_check_value():
    # docs/science.md, section 9 [derived]: an excess of 1.5e-4 is 10 ppm (mol) of a C = 15 thiol
    assert float(impurity_ratio(1.5e-4, 15.0)) * 1e6 == pytest.approx(10.0, rel=1e-12)
    with pytest.raises(DataError):
        impurity_ratio(1e-4, 0.0)


@pytest.mark.parametrize("x", [0.05, 0.10, 0.5])
def test_cumulative_impurity_level_recovers_the_charge(x):
    # an impurity charged at r0 = 25 ppm and consumed by transfer (C_X = 14.8) adds
    # (1/x)∫0^x C_X r0 (1 − x')^(C_X − 1) dx' to the cumulative 1/DPn: quad, then invert
    # (docs/science.md, section 5 [derived]: [X]0/[M]0 = excess·x/(1 − (1 − x)^C_X))
    C_X, r0 = C_DDM_STYRENE_60, 25e-6
    excess = integrate.quad(lambda xp: C_X * r0 * (1 - xp) ** (C_X - 1), 0.0, x,
                            epsabs=0.0, epsrel=1e-13)[0] / x
    assert float(impurity_ratio_cumulative(excess, C_X, x)) == pytest.approx(r0, rel=1e-11)
    # dividing the cumulative excess by C_X underestimates it by C_app/C_X (derived); with
    # the docs/science.md check values, 10.64/14.8 at x = 0.05 and 7.90/14.8 at x = 0.10
    naive = float(impurity_ratio(excess, C_X))
    assert naive / r0 == pytest.approx(float(apparent_constant(C_X, x)) / C_X, rel=1e-11)
    expected = {0.05: 10.64 / 14.8, 0.10: 7.90 / 14.8}.get(x)
    if expected is not None:
        assert naive / r0 == pytest.approx(expected, abs=0.0005)  # two-decimal check values


def test_cumulative_impurity_level_tends_to_the_instantaneous_one():
    # x = 0 is the instantaneous relation exactly; x = 1e-8 differs by O(C x) [derived]
    assert float(impurity_ratio_cumulative(1.5e-4, 15.0, 0.0)) == float(impurity_ratio(1.5e-4, 15.0))
    assert float(impurity_ratio_cumulative(1.5e-4, 15.0, 1e-8)) == pytest.approx(1e-5, rel=1e-6)
