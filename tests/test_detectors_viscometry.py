"""Viscometry and branching: η_sp from the detector designs, [η] per slice, universal
calibration with measured [η], Mark-Houwink fit, Mv, Zimm-Stockmayer g and its inversion.

Check values from docs/science.md, section 15 with their status tags. Traces for the
whole-injection checks are built by hand with numpy from closed forms (a Gaussian
concentration profile through log M = A − B·V), so the module is not checked against the
test-data generator alone.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad

from gpctools.calibration import universal_log_M
from gpctools.detectors import (
    DetectorSetup,
    DetectorTraces,
    ViscometryOptions,
    analyse_viscometry,
    branch_points,
    branching,
    bridge_pressure,
    contraction_factor,
    fit_mark_houwink,
    hydrodynamic_volume,
    intrinsic_viscosity,
    mark_houwink_viscosity,
    number_average_universal,
    specific_viscosity,
    universal_molar_mass,
    viscosity_average_M,
    weight_average_intrinsic_viscosity,
)
from gpctools.errors import CalibrationWarning, DataError

# Reference analytic sample of docs/detectors.md, units and names: A = 12, B = 0.3 1/mL, Gaussian c at 22 mL, σ 0.8 mL
A, B, V0, SIG = 12.0, 0.3, 22.0, 0.8
MN_REF, MW_REF = 215_618.0, 292_627.0  # docs/detectors.md, units and names, DERIVED (closed forms of a log-normal)
K_PS, A_PS = 1.14e-4, 0.716  # PS in THF, dL/g (= 1.14e-2 mL/g), docs/science.md, section 15 (from docs/science.md)


# -- detector designs ----------------------------------------------------------------------
@pytest.mark.parametrize(
    ("eta_sp", "dp", "naive"),
    [
        (0.01, 0.24876, 0.00995),  # docs/science.md, section 15, DERIVED (bridge balance), IP = 100
        (0.1, 2.38095, 0.0952),
        (0.5, 10.0000, 0.400),
    ],
)
def test_bridge_formula_round_trip(eta_sp, dp, naive):
    got = bridge_pressure(eta_sp, 100.0)
    assert got == pytest.approx(dp, abs=5e-6)  # printed to 5 decimals
    back = specific_viscosity("bridge", [[got, 100.0]])[0]
    assert back == pytest.approx(eta_sp, rel=1e-13)  # exact inverse, rounding only
    digits = len(str(naive).split(".")[1])
    assert 4 * got / 100.0 == pytest.approx(naive, abs=0.5 * 10**-digits)  # the naive 4ΔP/IP, as printed


def test_capillary_designs_and_gain():
    ch = np.array([[0.5, 50.0], [1.0, 50.0]])
    # V1: η_sp = (ΔP − ΔP0)/ΔP0 (docs/science.md, section 15, FOUND form of a single capillary)
    np.testing.assert_allclose(specific_viscosity("single capillary", ch), [0.01, 0.02], rtol=1e-14)
    np.testing.assert_allclose(specific_viscosity("two capillaries", ch, constant=2.0), [0.02, 0.04], rtol=1e-14)
    np.testing.assert_allclose(specific_viscosity("specific viscosity", [0.01, 0.02], constant=1.5),
                               [0.015, 0.03], rtol=1e-14)
    with pytest.raises(DataError, match="reference pressure"):
        specific_viscosity("bridge", [[1.0, 0.0]])
    with pytest.raises(DataError, match="unknown viscometer design"):
        specific_viscosity("piston", ch)


@pytest.mark.parametrize(
    ("eta_true", "c", "eta_sp", "dilute", "sc"),
    [
        # docs/science.md, section 15 table, DERIVED with Huggins k_H = 0.35; [η] in mL/g there
        (100.0, 2e-3, 0.214000, 107.00, 100.20),
        (100.0, 1e-4, 0.010035, 100.35, 100.02),
        (300.0, 5e-4, 0.157875, 315.75, 300.51),
    ],
)
def test_intrinsic_viscosity_single_point_table(eta_true, c, eta_sp, dilute, sc):
    # the η_sp column follows from the Huggins equation (IUPAC Gold Book H02869, FOUND)
    assert eta_true * c + 0.35 * (eta_true * c) ** 2 == pytest.approx(eta_sp, abs=5e-7)
    to_ml = 100.0  # the API returns dL/g
    assert intrinsic_viscosity(eta_sp, c, method="dilute") * to_ml == pytest.approx(dilute, abs=0.005)
    assert intrinsic_viscosity(eta_sp, c) * to_ml == pytest.approx(sc, abs=0.005)  # Solomon-Ciuta default
    hug = intrinsic_viscosity(eta_sp, c, method="huggins", huggins=0.35) * to_ml
    assert hug == pytest.approx(eta_true, rel=1e-9)  # V6 inverts the Huggins equation exactly


def test_solomon_ciuta_keeps_the_sign_of_noise():
    # a negative η_sp (baseline noise) must stay negative, else averages are biased (common practice)
    out = intrinsic_viscosity([-1e-4, 1e-4], [1e-5, 1e-5])
    assert out[0] < 0 < out[1]
    assert out[0] == pytest.approx(-out[1], rel=1e-3)  # symmetric to first order in η_sp


# -- universal calibration ---------------------------------------------------------------
def test_universal_calibration_check_values():
    # docs/science.md, section 15, DERIVED: PS-equivalent 1e5 → J = 4.3342e6 mL/mol = 4.3342e4 dL/mol
    J = hydrodynamic_volume(5.0, K_PS, A_PS)
    assert J == pytest.approx(4.3342e4, rel=1e-4)  # printed to 5 figures
    # → PMMA (9.44e-5 dL/g, 0.719): M = 109 380, [η] = 39.63 mL/g (also in docs/science.md)
    K_x, a_x = 9.44e-5, 0.719
    M_x = (J / K_x) ** (1 / (1 + a_x))
    assert M_x == pytest.approx(109_380, rel=1e-4)
    eta_x = mark_houwink_viscosity(M_x, K_x, a_x)
    # printed 39.63; the exact value is 39.6249, so the print rounds a boundary case: 0.01 tolerance
    assert eta_x * 100 == pytest.approx(39.63, abs=0.01)
    # V8 with the measured [η] returns the same M; independent: the project's Benoit transform
    assert universal_molar_mass(J, eta_x) == pytest.approx(M_x, rel=1e-12)
    assert universal_molar_mass(J, eta_x) == pytest.approx(
        float(universal_log_M(1e5, K_PS, A_PS, K_x, a_x)), rel=1e-9)


@pytest.mark.parametrize(("M", "eta_ml"), [(1e4, 8.335), (1e5, 43.342), (1e6, 225.375)])
def test_mark_houwink_values_polystyrene(M, eta_ml):
    # docs/science.md, section 15, DERIVED from the PS pair
    assert mark_houwink_viscosity(M, K_PS, A_PS) * 100 == pytest.approx(eta_ml, abs=5e-4)


def _reference_slices(step=0.005, huggins=0.0):
    """Closed-form slices of the reference sample as PS: c, η_sp, widths, J."""
    V = np.arange(V0 - 8 * SIG, V0 + 8 * SIG, step)
    m = 2.0e-4
    c = m * np.exp(-0.5 * ((V - V0) / SIG) ** 2) / (SIG * math.sqrt(2 * math.pi))
    M = 10 ** (A - B * V)
    eta = K_PS * M**A_PS  # dL/g
    u = 100 * eta * c
    eta_sp = u + huggins * u * u
    w = np.full(V.size, step)
    return V, c, eta_sp, w, hydrodynamic_volume(A - B * V, K_PS, A_PS), m


def test_number_average_by_viscometry_equals_reference():
    # docs/detectors.md, check values, DERIVED: reference sample as PS → Mn = 215 618 exactly
    V, c, eta_sp, w, J, m = _reference_slices()
    mass = float(np.sum(c * w))
    assert number_average_universal(eta_sp, w, J, mass) == pytest.approx(MN_REF, rel=2e-6)  # 6-figure print


def test_weight_average_intrinsic_viscosity_and_Mv():
    # docs/detectors.md, check values, DERIVED: [η]_w = 90.636 mL/g, = K·Mv^a with Mv = 280 208
    V, c, eta_sp, w, J, m = _reference_slices()
    eta_w = weight_average_intrinsic_viscosity(eta_sp, w, float(np.sum(c * w)))
    assert eta_w * 100 == pytest.approx(90.636, abs=5e-4)
    assert viscosity_average_M(eta_w, K_PS, A_PS) == pytest.approx(280_208, rel=1e-5)
    # independent: E_w[M^a] of the log-normal weight distribution by scipy quad
    D2 = math.log(10) * B

    def pdf(x):  # x = ln M ~ N(ln Mp, (D2 σ)²) by weight
        s = D2 * SIG
        mu = math.log(10 ** (A - B * V0))
        return math.exp(-0.5 * ((x - mu) / s) ** 2) / (s * math.sqrt(2 * math.pi))

    E = quad(lambda x: pdf(x) * math.exp(A_PS * x), 5, 20)[0]
    assert eta_w == pytest.approx(K_PS * E, rel=1e-6)  # quad accuracy far below this


def _setup_ri_visc(design="bridge", offset=0.0, broadening=0.0):
    return DetectorSetup.from_mapping({
        "ri": {"kind": "RI", "constant": 5.0e4, "dn_dc": 0.185, "broadening": broadening},
        "visc": {"kind": "viscometer", "design": design, "offset": offset, "broadening": broadening},
    })


def _hand_traces(setup, offset=0.0, step=0.005):
    V, c, eta_sp, w, J, m = _reference_slices(step)
    ri = c * 5.0e4 * 0.185
    esp = np.interp(V - offset, V, eta_sp)  # the viscometer sees slice V at V + Δ
    dp = bridge_pressure(esp, 100.0)
    return DetectorTraces(V, {"ri": ri, "visc": np.column_stack([dp, np.full(V.size, 100.0)])})


def test_viscometry_analysis_universal_calibration_end_to_end():
    # hand-built bridge traces (closed forms); offset 0.25 mL declared in the set-up
    setup = _setup_ri_visc(offset=0.25)
    tr = _hand_traces(setup, offset=0.25)
    # the hand traces follow η_sp = [η]c exactly (no Huggins term), so the dilute form V4 is exact
    # here; Solomon-Ciuta assumes k_H ≈ 1/3 and would read [η] 0.3 % low at the peak
    r = analyse_viscometry(tr, setup, standard_log_M=lambda v: A - B * v, K_standard=K_PS, a_standard=A_PS,
                           K=K_PS, a=A_PS, options=ViscometryOptions(method="dilute"))
    # tolerance: interpolation of the shifted trace (0.005 mL slices) and truncation at ±8σ
    assert r.Mn_universal == pytest.approx(MN_REF, rel=5e-4)
    assert r.averages["Mn"] == pytest.approx(MN_REF, rel=5e-4)
    assert r.averages["Mw"] == pytest.approx(MW_REF, rel=5e-4)
    assert r.intrinsic_w * 100 == pytest.approx(90.636, rel=5e-4)
    assert r.Mv == pytest.approx(280_208, rel=1e-3)
    assert r.log_M_fit is not None and r.log_M_fit.coef[1] == pytest.approx(-B, rel=1e-3)
    s = r.summary()
    assert s["Mv [g/mol]"] == pytest.approx(r.Mv)
    assert set(r.table()) >= {"volume [mL]", "[eta] [dL/g]", "M universal fitted [g/mol]"}


def test_viscometry_weight_average_is_offset_free():
    # V10 needs no alignment (docs/science.md, section 15): a wrong declared offset leaves [η]_w unchanged
    tr = _hand_traces(_setup_ri_visc(), offset=0.25)
    right = analyse_viscometry(tr, _setup_ri_visc(offset=0.25)).intrinsic_w
    wrong = analyse_viscometry(tr, _setup_ri_visc(offset=0.30)).intrinsic_w
    assert right == pytest.approx(wrong, rel=1e-12)


def test_viscometry_refuses_missing_standard_constants():
    setup = _setup_ri_visc()
    with pytest.raises(DataError, match="K_standard"):
        analyse_viscometry(_hand_traces(setup), setup, standard_log_M=lambda v: A - B * v)


def test_mark_houwink_fit_recovers_constants_with_honest_errors():
    rng = np.random.default_rng(7)
    M = np.logspace(4.5, 6.2, 200)
    # 2 % independent scatter on [η]: the fitted a must lie within 3 standard errors
    eta = mark_houwink_viscosity(M, 9.44e-5, 0.719) * (1 + 0.02 * rng.standard_normal(M.size))
    fit = fit_mark_houwink(M, eta)
    assert abs(fit.a - 0.719) < 3 * fit.a_stderr
    assert abs(fit.K - 9.44e-5) < 3 * fit.K_stderr
    assert fit.correlation < -0.9  # log K and a are strongly anti-correlated (common practice: report both)
    assert fit.n_points == 200 and fit.summary()["a [-]"] == pytest.approx(fit.a)


def test_mark_houwink_fit_flags_downward_bend():
    M = np.logspace(4.5, 6.5, 100)
    g_prime = np.where(M > 3e5, (M / 3e5) ** -0.25, 1.0)  # contraction at high M, as for branching
    fit = fit_mark_houwink(M, mark_houwink_viscosity(M, K_PS, A_PS) * g_prime)
    assert fit.curvature < 0
    assert any("bends down" in w for w in fit.warnings)


# -- branching ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("model", "values"),
    [
        # docs/science.md, section 15, DERIVED from the Zimm-Stockmayer formulas (formulas MEMORY), n = 1/2/5/10
        ("trifunctional", (0.9089, 0.8401, 0.7042, 0.5800)),
        ("tetrafunctional", (0.8153, 0.7065, 0.5364, 0.4125)),
        ("trifunctional polydisperse", (0.8431, 0.7394, 0.5591, 0.4151)),
        ("tetrafunctional polydisperse", (0.6931, 0.5493, 0.3584, 0.2398)),
    ],
)
def test_zimm_stockmayer_table(model, values):
    got = contraction_factor([1, 2, 5, 10], model)
    np.testing.assert_allclose(got, values, atol=5e-5)  # 4-decimal print
    assert contraction_factor([1e-9], model)[0] == pytest.approx(1.0, abs=1e-6)  # g → 1 as n → 0
    np.testing.assert_allclose(branch_points(got, model), [1, 2, 5, 10], rtol=1e-8)  # inversion round trip


def test_star_contraction():
    # docs/detectors.md, check values, DERIVED: f = 3/4/6/12 → 0.7778/0.6250/0.4444/0.2361
    np.testing.assert_allclose(contraction_factor([3, 4, 6, 12], "star"), [0.7778, 0.6250, 0.4444, 0.2361], atol=5e-5)


@pytest.mark.parametrize(
    ("eps", "model", "n"),
    [
        (0.75, "trifunctional", 3.97),  # docs/science.md, section 15, DERIVED: g′ 0.80 → g 0.7427 → n3 3.97
        (0.75, "tetrafunctional", 1.62),
        (0.5, "trifunctional", 7.19),
        (1.5, "trifunctional", 1.66),
    ],
)
def test_epsilon_sensitivity_of_branch_count(eps, model, n):
    M = np.array([5e5])
    eta = mark_houwink_viscosity(M, K_PS, A_PS) * 0.80  # g′ = 0.80 against the linear reference
    r = branching(M, intrinsic=eta, K_linear=K_PS, a_linear=A_PS, epsilon=eps, model=model, M0=104.15)
    assert r.g_prime[0] == pytest.approx(0.80, rel=1e-12)
    assert r.n[0] == pytest.approx(n, abs=0.005)  # 2-decimal print
    s = r.summary()
    assert s["epsilon [-]"] == eps and model in s["model"]  # model and ε travel with every n
    assert r.per_1000[0] == pytest.approx(1000 * 104.15 * r.n[0] / 5e5)  # V21


def test_branching_from_rg_needs_no_epsilon():
    M = np.array([1e5, 1e6])
    rg_lin = 0.014 * M**0.585
    r = branching(M, rg=rg_lin * math.sqrt(0.7042), rg_Q_linear=0.014, rg_nu_linear=0.585)
    np.testing.assert_allclose(r.g, 0.7042, rtol=1e-12)
    np.testing.assert_allclose(r.n, 5.0, atol=2e-3)  # g3(5) = 0.7042 printed to 4 decimals
    assert r.epsilon is None and r.source == "Rg"


def test_viscometer_gain_calibrated_from_known_eta():
    # a bridge whose differential transducer reads 7 % low is corrected by the standard's [η]_w (V10)
    from gpctools.detectors import NarrowStandard, calibrate_setup

    setup = _setup_ri_visc()
    V, c, eta_sp, w, J, m = _reference_slices()
    tr = DetectorTraces(V, {"ri": c * 5e4 * 0.185,
                            "visc": np.column_stack([bridge_pressure(eta_sp, 100.0) / 1.07, np.full(V.size, 100.0)])})
    std = NarrowStandard(name="broad PS", intrinsic_viscosity=0.90636)  # [η]_w of this sample (V10 check)
    with pytest.warns(CalibrationWarning, match="upper bound"):  # no Đ/B given: σ_RI from the whole peak
        cal = calibrate_setup(tr, setup, std, shape="gaussian")
    assert cal["visc"].constant == pytest.approx(1.07, rel=1e-4)  # [η]_w printed to 5 figures
    assert np.isfinite(ViscometryOptions().good_fraction)


def test_universal_calibration_undoes_matched_broadening():
    # both traces spread by a Gaussian of σ 0.2 mL with numpy (independent of the module); the
    # viscometer's response ∝ c·M^a is re-weighted like light scattering's (derived in
    # broadening.tilted_trace), so the averages return to the closed-form values
    step = 0.005
    V, c, eta_sp, w, J, m = _reference_slices(step)
    u = np.arange(-1.2, 1.2 + 1e-9, step)
    G = np.exp(-0.5 * (u / 0.2) ** 2)
    G /= G.sum()
    c_b = np.convolve(c, G, mode="same")
    esp_b = np.convolve(eta_sp, G, mode="same")
    setup = _setup_ri_visc(broadening=0.2)
    tr = DetectorTraces(V, {"ri": c_b * 5e4 * 0.185,
                            "visc": np.column_stack([bridge_pressure(esp_b, 100.0), np.full(V.size, 100.0)])})
    opts = ViscometryOptions(method="dilute")  # traces follow η_sp = [η]c exactly
    r = analyse_viscometry(tr, setup, standard_log_M=lambda v: A - B * v, K_standard=K_PS, a_standard=A_PS,
                           options=opts)
    # tolerance: 0.005 mL slices, kernel cut at ±6σ
    assert r.averages["Mn"] == pytest.approx(MN_REF, rel=5e-4)
    assert r.averages["Mw"] == pytest.approx(MW_REF, rel=5e-4)
    plain = analyse_viscometry(tr, setup, standard_log_M=lambda v: A - B * v, K_standard=K_PS,
                               a_standard=A_PS, options=ViscometryOptions(method="dilute", match_broadening=False))
    # without the treatment the averages carry a conventional-calibration-like broadening bias
    assert plain.averages["dispersity"] > 1.01 * r.averages["dispersity"]
