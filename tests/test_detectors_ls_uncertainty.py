"""u(Mn LS) and u(Mw LS): the noise part of the light-scattering averages (issue 16).

Three checks with truth from outside the code under test:

- the delta-method propagation of a log M fit's covariance to Mn and Mw against a
  finite-difference Jacobian computed here with numpy (first-order propagation,
  JCGM 100:2008 "GUM", section 5.1.2);
- the propagation of white concentration noise and its baseline against a plain numpy
  Monte Carlo of the same model (noise drawn on every slice, baseline through the
  window means);
- the stated u of the whole pipeline against the scatter of Mn LS and Mw LS over 30
  simulated injections that differ only in their noise (gpctools.simulate, white noise),
  within a factor 1.5 (a standard deviation from 30 draws is itself uncertain by about
  13 %, from the chi-square distribution).
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pytest

import gpctools.simulate as S
from gpctools import columns as C
from gpctools.batch import process_injection
from gpctools.detectors._slices import averages_uncertainty, weights_noise_uncertainty
from gpctools.method import load_method

LN10 = math.log(10.0)


def _trace(n=400):
    V = np.linspace(14.0, 20.0, n)
    c = np.exp(-0.5 * ((V - 16.8) / 0.7) ** 2)
    basis = np.column_stack([np.ones(n), V - 17.0])
    coef = np.array([4.8, -0.45])
    return V, c, basis, coef


def _averages(M, w):
    return float(np.sum(w) / np.sum(w / M)), float(np.sum(w * M) / np.sum(w))


def test_fit_covariance_propagates_like_a_numerical_jacobian():
    V, c, basis, coef = _trace()
    w = c * np.gradient(V)
    cov = np.array([[4e-6, 1e-6], [1e-6, 9e-6]])
    M = 10.0 ** (basis @ coef)
    stated = averages_uncertainty(M, c, np.gradient(V), basis, cov)
    # independent: central differences of ln Mn, ln Mw in each coefficient (numpy)
    J = np.zeros((2, 2))
    for k in range(2):
        h = np.zeros(2)
        h[k] = 1e-6
        up = np.log(_averages(10.0 ** (basis @ (coef + h)), w))
        dn = np.log(_averages(10.0 ** (basis @ (coef - h)), w))
        J[:, k] = (up - dn) / 2e-6
    for i, key in enumerate(("Mn", "Mw")):
        assert stated[key] == pytest.approx(math.sqrt(J[i] @ cov @ J[i]), rel=1e-5)


def test_concentration_noise_propagates_like_a_monte_carlo():
    V, c, basis, coef = _trace()
    dV = np.gradient(V)
    M = 10.0 ** (basis @ coef)
    sigma, n1, n2, c1, c2 = 0.01, 60, 80, 12.5, 21.5
    stated = weights_noise_uncertainty(M, c, dV, V, sigma, (c1, c2), (n1, n2))
    # independent: draw white noise on every slice and on the two window means, subtract the
    # straight baseline through the noisy means, recompute the averages (numpy Monte Carlo)
    rng = np.random.default_rng(7)
    draws = 20000
    e = rng.normal(0.0, sigma, (draws, V.size))
    e1 = rng.normal(0.0, sigma / math.sqrt(n1), (draws, 1))
    e2 = rng.normal(0.0, sigma / math.sqrt(n2), (draws, 1))
    lam = (V - c1) / (c2 - c1)
    cc = c + e - (e1 * (1.0 - lam) + e2 * lam)
    w = cc * dV
    Mn = np.sum(w, axis=1) / np.sum(w / M, axis=1)
    Mw = np.sum(w * M, axis=1) / np.sum(w, axis=1)
    # 20 000 draws: the SD is known to about 0.5 %; first-order propagation is exact to ~1 % here
    assert stated["Mn"] == pytest.approx(np.std(np.log(Mn)), rel=0.03)
    assert stated["Mw"] == pytest.approx(np.std(np.log(Mw)), rel=0.03)




def test_stated_u_matches_the_scatter_of_simulated_injections(tmp_path, ri_ls_method_text):
    standards = "\n".join(f'[[calibration.standard]]\nname = "{n}"\nMp = {m}\nvolume = {v}'
                          for n, m, v in S.DEFAULT_STANDARDS)
    (tmp_path / "m.toml").write_text(ri_ls_method_text(standards), encoding="utf-8")
    method = load_method(tmp_path / "m.toml")
    log_M = S.default_calibration().log_M
    rows = []
    for seed in range(30):
        V, ch = S.multi_detector_traces(S.lognormal(80_000.0, 1.8), log_M, mass=2.0e-4, offsets={"ls": 0.1},
                                        noise={"ri": 0.002, "ls": 0.005}, seed=100 + seed)
        f: Path = tmp_path / f"x{seed}.csv"
        f.write_text(S.multi_detector_export(V, ch), encoding="utf-8")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            v = process_injection(f, method).detectors.values
        rows.append((v[C.MN_LS], v[C.MW_LS], v[C.U_MN_LS], v[C.U_MW_LS]))
    a = np.array(rows)
    for avg, u in ((0, 2), (1, 3)):
        observed = float(np.std(a[:, avg], ddof=1))
        stated = float(np.mean(a[:, u]))
        assert observed > 0 and 1 / 1.5 < stated / observed < 1.5, (avg, stated, observed)
