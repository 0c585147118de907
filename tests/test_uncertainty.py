"""Standard uncertainty of Mn, Mw and Mz (gpctools.uncertainty, docs/science.md, section 19.7).

Each part is checked against something it was not computed from:

* the calibration gradient against numpy finite differences of log10 M(V);
* the calibration part against numerical differentiation of the averages and against
  refits of standards redrawn with known scatter (a Monte Carlo over the standards);
* the noise part against a noise Monte Carlo through the whole chain (baseline fit,
  limits, sums);
* the limits part and the combination against their stated definitions.

Traces are written by hand with numpy (Gaussian peaks, docs/science.md, section 8). Monte
Carlo seeds are fixed; the number of draws sets the tolerance (the SD of an SD estimated
from N normal draws is about 1/√(2N) of it: 5 % for N = 200, 4.1 % for N = 300; the
stated acceptance is 20 %, four such standard errors).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from gpctools import columns as C
from gpctools.batch import process_trace
from gpctools.calibration import fit_calibration
from gpctools.distribution import compute_distribution
from gpctools.errors import GpcWarning
from gpctools.method import load_method
from gpctools.signal import correct_signal
from gpctools.uncertainty import (
    calibration_uncertainty,
    limit_uncertainty,
    noise_uncertainty,
)

# Standards of an invented column set (the same numbers as gpctools.simulate.DEFAULT_STANDARDS,
# written out so that these tests do not lean on the simulator): name, Mp [g/mol], V [mL].
STANDARDS = (
    (2.52e6, 11.20), (1.11e6, 12.05), (4.80e5, 13.00), (2.00e5, 14.05), (9.60e4, 15.00),
    (4.20e4, 16.10), (1.90e4, 17.15), (8.40e3, 18.25), (3.20e3, 19.50), (1.30e3, 20.60),
)
V_STD = np.array([v for _, v in STANDARDS])
MP_STD = np.array([m for m, _ in STANDARDS])


def gaussian(V: np.ndarray, V0: float, sigma: float, height: float) -> np.ndarray:
    return height * np.exp(-((V - V0) ** 2) / (2.0 * sigma**2))


# ============================================================================ calibration


def test_log_M_gradient_matches_finite_differences() -> None:
    cal = fit_calibration(V_STD, MP_STD, order=3)
    V = np.array([10.0, 11.2, 14.3, 17.9, 20.6, 23.0])  # two outside the range, ends included
    G = cal.log_M_gradient(V)
    c0 = np.array(cal.coefficients)
    eps = 1e-6
    for k in range(c0.size):
        up, down = c0.copy(), c0.copy()
        up[k] += eps
        down[k] -= eps
        fd = (replace(cal, coefficients=tuple(up)).log_M(V) - replace(cal, coefficients=tuple(down)).log_M(V)) / (2 * eps)
        # central difference of a function linear in the coefficient: exact up to rounding
        # (log M ~ 5, eps 1e-6: rounding ~1e-10 relative to the step).
        assert G[:, k] == pytest.approx(fd, abs=1e-8), k


def test_calibration_part_is_the_exact_first_derivative() -> None:
    """u_cal from the analytic gradient equals gᵀCg with g from numerical differentiation
    of ln Mn, ln Mw, ln Mz through compute_distribution itself (numpy central differences)."""
    rng = np.random.default_rng(4)
    cal = fit_calibration(V_STD, MP_STD * 10 ** rng.normal(0.0, 0.01, V_STD.size), order=3)
    V = np.linspace(8.0, 26.0, 2000)
    h = gaussian(V, 16.5, 1.1, 100.0)
    mask = (V > 11.0) & (V < 22.0)  # reaches past both ends of the calibrated range

    def logs(c: np.ndarray) -> np.ndarray:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", GpcWarning)
            d = compute_distribution(V, h, replace(cal, coefficients=tuple(c)), mask=mask)
        return np.log([d.Mn, d.Mw, d.Mz])

    c0 = np.array(cal.coefficients)
    J = np.empty((3, c0.size))
    for k in range(c0.size):
        e = np.zeros_like(c0)
        e[k] = 1e-6
        J[:, k] = (logs(c0 + e) - logs(c0 - e)) / 2e-6
    cov = np.asarray(cal.covariance)
    expected = np.sqrt(np.einsum("ij,jk,ik->i", J, cov, J))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", GpcWarning)
        u = calibration_uncertainty(compute_distribution(V, h, cal, mask=mask), cal)
    # first-order propagation with the same covariance: the two gradients agree to the
    # central-difference error (~1e-10 relative); 1e-6 leaves room for rounding in the sums.
    assert [u["Mn"], u["Mw"], u["Mz"]] == pytest.approx(expected, rel=1e-6)


def test_calibration_part_against_refitted_standards() -> None:
    """Monte Carlo over the standards: redraw each log10 Mp with scatter s, refit, recompute.

    The spread of ln Mn, ln Mw, ln Mz over the refits is the calibration uncertainty the
    covariance is meant to predict (docs/science.md, section 11.5). The predicted value of
    each refit uses that refit's own residual SD, as a user would see it; its RMS over the
    refits is compared. 300 refits: the spread's own SE is 4.1 %; acceptance 20 %.
    """
    truth = fit_calibration(V_STD, MP_STD, order=3)
    base = truth.log_M(V_STD)
    V = np.linspace(8.0, 26.0, 2000)
    h = gaussian(V, 16.5, 0.9, 100.0)
    mask = (V > 12.5) & (V < 21.0)
    s = 0.02  # scatter of the standards in log10 M [-] (about 4.7 % in M)
    logs, predicted = [], []
    for seed in range(300):
        y = base + np.random.default_rng(1000 + seed).normal(0.0, s, base.size)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", GpcWarning)
            cal = fit_calibration(V_STD, 10**y, order=3)
            d = compute_distribution(V, h, cal, mask=mask)
        logs.append(np.log([d.Mn, d.Mw, d.Mz]))
        u = calibration_uncertainty(d, cal)
        predicted.append([u["Mn"], u["Mw"], u["Mz"]])
    spread = np.std(np.array(logs), axis=0, ddof=1)
    rms = np.sqrt(np.mean(np.array(predicted) ** 2, axis=0))
    assert spread / rms == pytest.approx(np.ones(3), rel=0.20)


def test_no_covariance_gives_nan() -> None:
    with pytest.warns(GpcWarning):
        cal = fit_calibration([12.0, 20.0], [1e6, 1e3], order=1)  # no degrees of freedom
    V = np.linspace(8.0, 26.0, 500)
    d = compute_distribution(V, gaussian(V, 16.0, 1.0, 1.0), cal, mask=(V > 12) & (V < 20))
    assert all(math.isnan(v) for v in calibration_uncertainty(d, cal).values())


# ============================================================================ noise


@pytest.fixture(scope="module")
def linear_cal():
    V = np.linspace(12.0, 22.0, 10)
    return fit_calibration(V, 10 ** (11.0 - 0.4 * V + np.random.default_rng(1).normal(0, 0.01, V.size)), order=1)


def test_noise_part_against_a_noise_monte_carlo(linear_cal) -> None:
    """200 noise draws through the whole chain (baseline through the window means, fixed
    limits, sums) against the analytic white-noise propagation (docs/science.md, section 19.7)."""
    V = np.linspace(8.0, 26.0, 3000)
    clean = gaussian(V, 17.0, 0.9, 100.0) + 3.0 + 0.02 * V
    sigma = 0.2  # 0.2 % of the peak: the noise level of issue 10's acceptance
    windows, limits = ((9.5, 10.5), (23.5, 24.5)), (13.0, 21.0)  # 1 mL windows
    logs, predicted = [], []
    for seed in range(200):
        raw = clean + np.random.default_rng(seed).normal(0.0, sigma, V.size)
        cs = correct_signal(V, raw, windows=windows, limits=limits)
        d = compute_distribution(V, cs.signal, linear_cal, mask=cs.mask)
        logs.append(np.log([d.Mn, d.Mw, d.Mz]))
        u = noise_uncertainty(d, cs.baseline.noise, cs.baseline)
        predicted.append([u["Mn"], u["Mw"], u["Mz"]])
    spread = np.std(np.array(logs), axis=0, ddof=1)
    rms = np.sqrt(np.mean(np.array(predicted) ** 2, axis=0))
    # 200 draws: SE of the spread 5 %; the acceptance of issue 10 is 20 %.
    assert spread / rms == pytest.approx(np.ones(3), rel=0.20)
    # The baseline line's own error matters: without it the prediction falls short by
    # more than the tolerance (observed: spread 1.39, 1.41, 1.27 times the slice-only
    # value for Mn, Mw, Mz), so the check above can fail.
    u_slices = noise_uncertainty(d, sigma, None)
    assert spread[0] / u_slices["Mn"] > 1.25 and spread[1] / u_slices["Mw"] > 1.25


def test_noise_part_scales_with_the_noise(linear_cal) -> None:
    V = np.linspace(8.0, 26.0, 3000)
    h = gaussian(V, 17.0, 0.9, 100.0)
    d = compute_distribution(V, h, linear_cal, mask=(V > 13) & (V < 21))
    a, b = noise_uncertainty(d, 0.1), noise_uncertainty(d, 0.3)
    for k in ("Mn", "Mw", "Mz"):
        # derived: first-order propagation is linear in σ; rounding only.
        assert b[k] == pytest.approx(3.0 * a[k], rel=1e-12)
    assert noise_uncertainty(d, 0.0)["Mn"] == 0.0


# ============================================================================ limits and the whole


def test_limits_part_is_half_the_shift(linear_cal) -> None:
    V = np.linspace(8.0, 26.0, 3000)
    d = compute_distribution(V, gaussian(V, 17.0, 0.9, 100.0), linear_cal, mask=(V > 13) & (V < 21))
    u = limit_uncertainty(d, {"Mn": d.Mn * 1.02, "Mw": d.Mw * 0.996, "Mz": math.nan})
    # the stated convention: |X_shifted/X - 1|/2 (docs/science.md, section 19.7); rounding only
    assert u["Mn"] == pytest.approx(0.01, rel=1e-9) and u["Mw"] == pytest.approx(0.002, rel=1e-9)
    assert math.isnan(u["Mz"])


def test_injection_reports_every_part(tmp_path: Path, templates_dir: Path) -> None:
    import shutil

    shutil.copy(templates_dir / "method.toml", tmp_path / "method.toml")
    shutil.copy(templates_dir / "standards.csv", tmp_path / "standards.csv")
    method = load_method(tmp_path / "method.toml")
    V = np.linspace(8.0, 26.0, 6000)
    raw = gaussian(V, 16.4, 0.8, 120.0) + 3.5 + np.random.default_rng(7).normal(0.0, 0.24, V.size)
    res = process_trace(V, raw, method, file="u.csv")
    row = res.row()
    for avg in ("Mn", "Mw", "Mz"):
        u = res.uncertainty.of(avg)
        parts = [u.calibration, u.noise, u.limits]
        assert all(math.isfinite(p) and p >= 0 for p in parts), avg
        # combined in quadrature, as stated (docs/science.md, section 19.7)
        assert u.total == pytest.approx(math.sqrt(sum(p * p for p in parts)), rel=1e-12)
        assert row[C.uncertainty_column(avg)] == pytest.approx(100.0 * u.total, rel=1e-12)
        assert row[C.uncertainty_column(avg, "calibration")] == pytest.approx(100.0 * u.calibration, rel=1e-12)
    # the limits part is half the reported shift of the low-M limit check
    assert res.uncertainty.Mn.limits == pytest.approx(abs(res.Mn_shift_pct) / 200.0, rel=1e-9)
    # the names issue 11 reads
    assert res.u_Mn == res.uncertainty.Mn.total and res.u_Mw_calibration == res.uncertainty.Mw.calibration
    json_safe = res.summary()["uncertainty"]
    assert set(json_safe) >= {"u(Mn)", "u(Mw)", "u(Mz)"}
