"""Band-broadening corrections: Hamielec factors, EMG factors, σ from a narrow standard,
deconvolution, and the CLD-slope bias (docs/science.md, section 12, status tags beside each
value). Numerical convolutions here are done with numpy/scipy in the test, not with the
module under test, wherever they serve as the independent side of a check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from gpctools.detectors import (
    Spreading,
    broadening_factors,
    cld_broadening_bias,
    correct_averages,
    deconvolve,
    spreading_from_dispersity,
)
from gpctools.distribution import averages
from gpctools.errors import DataError

A, B, V0, SIG = 12.0, 0.3, 22.0, 0.8  # reference sample of docs/detectors.md, units and names
D2 = math.log(10) * B


@pytest.mark.parametrize(
    ("sigma", "mw", "mn", "d"),
    [
        # docs/science.md, section 12, DERIVED (verified there by numerical convolution of the reference sample)
        (0.1, 1.0024, 0.9976, 1.0048),
        (0.2, 1.0096, 0.9905, 1.0193),
        (0.3, 1.0217, 0.9788, 1.0439),
    ],
)
def test_hamielec_gaussian_factors(sigma, mw, mn, d):
    f = broadening_factors(Spreading(sigma), B)
    # tolerance: 4-decimal print
    assert f["Mw"] == pytest.approx(mw, abs=5e-5)
    assert f["Mn"] == pytest.approx(mn, abs=5e-5)
    assert f["dispersity"] == pytest.approx(d, abs=5e-5)
    # B3 closed forms (DERIVED): exp(±D2²σ²/2), Mz factor exp(3D2²σ²/2)
    s2 = (D2 * sigma) ** 2
    assert f["Mz"] == pytest.approx(math.exp(1.5 * s2), rel=1e-12)


def test_hamielec_factors_against_numerical_convolution():
    # independent: convolve the reference sample with numpy and take the averages by slice sums
    V = np.arange(10.0, 34.0, 0.002)
    W = np.exp(-0.5 * ((V - V0) / SIG) ** 2)
    sigma = 0.25
    u = np.arange(-2.0, 2.0 + 1e-9, 0.002)
    G = np.exp(-0.5 * (u / sigma) ** 2)
    F = np.convolve(W, G / G.sum(), mode="same")
    M = 10 ** (A - B * V)
    true, obs = averages(M, W), averages(M, F)
    f = broadening_factors(Spreading(sigma), B)
    for k in ("Mn", "Mw", "Mz", "dispersity"):
        assert obs[k] / true[k] == pytest.approx(f[k], rel=2e-5)  # grid 0.002 mL, tails at ±15σ


def test_emg_factors_and_equal_variance_gaussian():
    # docs/science.md, section 12, DERIVED: EMG σ 0.15, τ 0.10 (centred) → Mw ×1.00768, Mn ×0.99216;
    # the Gaussian with the same variance: 1.00778, 0.99228
    f = broadening_factors(Spreading(0.15, 0.10), B)
    assert f["Mw"] == pytest.approx(1.00768, abs=5e-6)
    assert f["Mn"] == pytest.approx(0.99216, abs=5e-6)
    g = broadening_factors(Spreading(math.sqrt(0.15**2 + 0.10**2)), B)
    assert g["Mw"] == pytest.approx(1.00778, abs=5e-6)
    assert g["Mn"] == pytest.approx(0.99228, abs=5e-6)


def test_emg_mgf_against_quadrature():
    # B4 closed form vs scipy quad of the EMG density (Grushka 1972 form, MEMORY; check independent)
    s, t, x = 0.15, 0.10, -0.7

    def pdf(u):
        from scipy.special import erfc
        return (1 / (2 * t)) * math.exp(s * s / (2 * t * t) - u / t) * erfc((s / t - u / s) / math.sqrt(2))

    mgf_quad = quad(lambda u: pdf(u) * math.exp(x * u), -3, 5, limit=200)[0]
    assert Spreading(s, t).mgf(x, centred=False) == pytest.approx(mgf_quad, rel=1e-9)
    # centred: the mean τ removed
    assert Spreading(s, t).mgf(x) == pytest.approx(mgf_quad * math.exp(-t * x), rel=1e-9)


def test_correct_averages_reports_both():
    obs = {"Mn": 213_570.0, "Mw": 295_430.0, "Mz": 408_670.0}
    r = correct_averages(obs, Spreading(0.2), B)
    f = broadening_factors(Spreading(0.2), B)
    assert r.corrected["Mw"] == pytest.approx(obs["Mw"] / f["Mw"], rel=1e-14)
    assert r.corrected["dispersity"] == pytest.approx(r.corrected["Mw"] / r.corrected["Mn"])
    s = r.summary()
    assert s["Mw observed [g/mol]"] == obs["Mw"]
    assert s["Mw corrected [g/mol]"] == pytest.approx(r.corrected["Mw"])
    assert s["sigma lnM [-]"] == pytest.approx(D2 * 0.2)


@pytest.mark.parametrize(("sigma", "d_obs"), [(0.1, 1.0249), (0.2, 1.0397), (0.3, 1.0648)])
def test_sigma_from_narrow_standard(sigma, d_obs):
    # docs/science.md, section 12 (B5), DERIVED: Đ_true 1.02, B 0.3
    got = spreading_from_dispersity(d_obs, 1.02, B).sigma
    # tolerance: Đ_obs printed to 4 decimals; dσ/dĐ = 1/(2 D2² σ Đ) gives up to 0.002 mL at σ 0.1
    assert got == pytest.approx(sigma, abs=2.5e-3)
    # forward closed form
    assert 1.02 * math.exp((D2 * sigma) ** 2) == pytest.approx(d_obs, abs=5e-5)


def test_sigma_from_standard_with_tail_round_trips():
    g = Spreading(0.18, 0.06)
    f = broadening_factors(g, B)
    back = spreading_from_dispersity(1.02 * f["dispersity"], 1.02, B, tau=0.06)
    assert back.sigma == pytest.approx(0.18, rel=1e-8)  # brentq to 1e-12 mL


def test_sigma_from_standard_refuses_no_broadening():
    with pytest.raises(DataError, match="no measurable broadening"):
        spreading_from_dispersity(1.02, 1.03, B)


@pytest.mark.parametrize(
    ("s", "peak", "window"),
    [
        # docs/science.md, section 12 table, DERIVED (numerical convolution in ln M of a Flory distribution)
        (0.10, 1.0049, 1.0021),
        (0.14, 1.0094, 1.0039),
        (0.20, 1.0186, 1.0072),
        (0.30, 1.0387, 1.0123),
    ],
)
def test_cld_bias_table(s, peak, window):
    r = cld_broadening_bias(s, fraction=0.5)
    # tolerance: 4-decimal print plus grid differences between two independent numerical convolutions
    assert r.at_peak == pytest.approx(peak, abs=1.5e-4)
    assert r.in_window == pytest.approx(window, abs=1.5e-4)
    # first-order rule of thumb (docs/science.md, section 12): peak bias ≈ σ²/2, window about half of it
    assert r.at_peak - 1 == pytest.approx(s * s / 2, rel=0.15)
    # Đ of the broadened Flory distribution, closed form 2·exp(σ²) (B3 in ln M). The docs/detectors.md
    # table prints 2.016/2.035/2.077/2.183, about 0.2 % lower: its grid truncated the Flory tail.
    assert r.dispersity_observed == pytest.approx(2 * math.exp(s * s), rel=1e-12)


def test_deconvolution_recovers_reference_averages():
    # reference sample broadened by σ = 0.2 mL with numpy; NNLS with a smoothness penalty undoes it
    V = np.arange(16.0, 28.0, 0.01)
    W = np.exp(-0.5 * ((V - V0) / SIG) ** 2)
    u = np.arange(-1.2, 1.2 + 1e-9, 0.01)
    G = np.exp(-0.5 * (u / 0.2) ** 2)
    F = np.convolve(W, G / G.sum(), mode="same")
    rng = np.random.default_rng(3)
    F_noisy = F + 0.002 * rng.standard_normal(F.size)
    M = lambda v: 10 ** (A - B * v)  # noqa: E731
    true = averages(M(V), W)
    observed = averages(M(V), F)
    d = deconvolve(V, F_noisy, Spreading(0.2))
    got = averages(M(d.volume), d.signal)
    # the correction removes most of the Đ excess (observed +1.9 %); tolerance 0.5 % on Mn/Mw:
    # the penalty and 0.2 % noise leave a small residual broadening
    assert observed["dispersity"] / true["dispersity"] > 1.015
    assert got["Mn"] == pytest.approx(true["Mn"], rel=5e-3)
    assert got["Mw"] == pytest.approx(true["Mw"], rel=5e-3)
    assert abs(got["dispersity"] / true["dispersity"] - 1) < 0.4 * (observed["dispersity"] / true["dispersity"] - 1)
    assert d.residual_rms < 0.004  # about the noise level


def test_spreading_kernel_moments():
    # the sampled EMG kernel has mean τ and variance σ² + τ² (Grushka 1972, MEMORY; DERIVED moments)
    g = Spreading(0.12, 0.08)
    step = 0.002
    k = g.kernel(step)
    u = (np.arange(k.size) - k.size // 2) * step
    mean = float(np.sum(u * k))
    var = float(np.sum((u - mean) ** 2 * k))
    assert mean == pytest.approx(0.08, abs=1e-4)  # grid 0.002 mL
    assert var == pytest.approx(0.12**2 + 0.08**2, rel=2e-3)
    kc = g.kernel(step, centred=True)
    assert float(np.sum(u * kc)) == pytest.approx(0.0, abs=1e-4)
