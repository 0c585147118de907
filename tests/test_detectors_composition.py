"""UV + RI copolymer composition (docs/science.md, section 16; algebra K1-K7)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from gpctools.detectors import Copolymer, composition, copolymer_dn_dc, copolymer_log_M
from gpctools.errors import DataError

# docs/science.md, section 16 check set-up, DERIVED: k_RI 1e4, dn/dc 0.185 / 0.084, f_UV 2000 / 50
CP = Copolymer(("styrene", "methyl acrylate"), (0.185, 0.084), (2000.0, 50.0))
K_RI = 1e4


def test_inversion_check_slice():
    # c = 2.0e-4 g/mL, w_A = 0.30 → S_RI 0.228600, S_UV 0.127000 (DERIVED)
    c_A, c_B = 6.0e-5, 1.4e-4
    assert K_RI * (0.185 * c_A + 0.084 * c_B) == pytest.approx(0.2286, rel=1e-12)  # K1
    assert 2000 * c_A + 50 * c_B == pytest.approx(0.127, rel=1e-12)  # K2
    r = composition([0.2286], [0.127], CP, K_RI, threshold=0.0)
    assert r.c_A[0] == pytest.approx(6.0e-5, rel=1e-12)  # exact 2x2 solve, rounding only
    assert r.c_B[0] == pytest.approx(1.4e-4, rel=1e-12)
    assert r.w_A[0] == pytest.approx(0.300000, abs=5e-7)
    # K5: composition-weighted dn/dc 0.1143 mL/g (DERIVED)
    assert r.dn_dc[0] == pytest.approx(0.1143, abs=5e-5)


def test_inversion_against_numpy_solve_and_uv_error():
    rng = np.random.default_rng(5)
    c_A = rng.uniform(1e-5, 1e-4, 50)
    c_B = rng.uniform(1e-5, 1e-4, 50)
    F = np.array([[K_RI * 0.185, K_RI * 0.084], [2000.0, 50.0]])
    S = F @ np.vstack([c_A, c_B])
    r = composition(S[0], S[1], CP, K_RI, threshold=0.0)
    ref = np.linalg.solve(F, S)  # independent: numpy's LU solve
    np.testing.assert_allclose(r.c_A, ref[0], rtol=1e-10)
    np.testing.assert_allclose(r.c_B, ref[1], rtol=1e-10)
    # docs/science.md, section 16, DERIVED: a +1 % UV error gives w_A = 0.3046 on the check slice
    assert composition([0.2286], [0.127 * 1.01], CP, K_RI, threshold=0.0).w_A[0] == pytest.approx(0.3046, abs=5e-5)


def test_single_dn_dc_error_size():
    # docs/science.md, section 16, DERIVED: using A's dn/dc for the whole slice gives c ×0.618
    c_wrong = 0.2286 / (K_RI * 0.185)
    assert c_wrong / 2.0e-4 == pytest.approx(0.618, abs=5e-4)


def test_threshold_masks_peak_ends_and_overall_composition():
    V = np.linspace(18, 26, 801)
    c = np.exp(-0.5 * ((V - 22) / 0.8) ** 2) * 1e-4
    wA = np.full(V.size, 0.3)
    S_ri = K_RI * (0.185 * wA * c + 0.084 * (1 - wA) * c)
    S_uv = 2000 * wA * c + 50 * (1 - wA) * c
    r = composition(S_ri, S_uv, CP, K_RI, threshold=0.05)
    assert np.isnan(r.w_A[0]) and np.isnan(r.w_A[-1])
    np.testing.assert_allclose(r.w_A[np.isfinite(r.w_A)], 0.3, rtol=1e-10)
    assert r.overall_w_A == pytest.approx(0.3, rel=1e-10)  # area-based, offset-free
    assert set(r.table()) == {"c styrene [g/mL]", "c methyl acrylate [g/mL]", "w styrene [-]", "dn/dc [mL/g]"}


def test_indistinguishable_components_refused():
    same = Copolymer(("A", "B"), (0.1, 0.2), (100.0, 200.0))  # same UV/RI ratio for both
    with pytest.raises(DataError, match="cannot be told apart"):
        composition([1.0], [1.0], same, K_RI)


def test_copolymer_calibration_and_dn_dc():
    # docs/detectors.md, check values (MEMORY method, DERIVED number): w_A 0.3, M_A 1.00e5, M_B 1.09e5 → 106 218
    assert 10 ** copolymer_log_M(0.3, 5.0, math.log10(1.09e5)) == pytest.approx(106_218, abs=0.5)
    assert copolymer_dn_dc(1.0, 0.185, 0.084) == pytest.approx(0.185)


def test_analyse_composition_aligns_uv_to_ri():
    # a UV detector 0.05 mL upstream (negative offset) with the same broadening; the copolymer
    # drifts from w_A 0.2 to 0.4 across the peak (compositional heterogeneity)
    from gpctools.detectors import DetectorSetup, DetectorTraces, analyse_composition

    setup = DetectorSetup.from_mapping({
        "ri": {"kind": "RI", "constant": K_RI, "dn_dc": 0.15},
        "uv": {"kind": "UV", "response": 1000.0, "offset": -0.05},
        "copolymer": {"names": ["styrene", "methyl acrylate"], "dn_dc": [0.185, 0.084],
                      "uv_response": [2000.0, 50.0]},
    })
    V = np.arange(16.0, 28.0, 0.01)
    c = np.exp(-0.5 * ((V - 22) / 0.8) ** 2) * 1e-4
    wA = 0.3 + 0.1 * np.tanh((V - 22) / 0.8)
    S_ri = K_RI * (0.185 * wA * c + 0.084 * (1 - wA) * c)
    S_uv = 2000 * wA * c + 50 * (1 - wA) * c
    uv_seen = np.interp(V + 0.05, V, S_uv)  # the UV sees slice V at V + Δ = V − 0.05 mL
    r = analyse_composition(DetectorTraces(V, {"ri": S_ri, "uv": uv_seen}), setup, limits=(18, 26))
    ok = np.isfinite(r.w_A)
    inner = (V[(V >= 18) & (V <= 26)] > 18.2)[ok]  # beyond the interpolation edge
    np.testing.assert_allclose(r.w_A[ok][inner], wA[(V >= 18) & (V <= 26)][ok][inner], atol=1e-6)  # linear interpolation of a smooth trace
    # the overall composition equals the mass-weighted mean of w_A
    sel = (V >= 18) & (V <= 26)
    assert r.overall_w_A == pytest.approx(np.sum(wA[sel] * c[sel]) / np.sum(c[sel]), rel=1e-3)
