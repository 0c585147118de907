"""Tests of gpctools.calibration: polynomial fit, quality checks, order choice,
tangent extrapolation, flow-marker factor and universal (Mark-Houwink) calibration.

References for check values: numpy's own least-squares polynomial fit (a reference
library), exact consequences of the formulas [derived], and the universal-calibration
values of docs/science.md, section 2 [derived from the IUPAC pairs; pairs from memory].
"""

from __future__ import annotations

import dataclasses
import json
import math
import warnings

import numpy as np
import pandas as pd
import pytest

from gpctools.calibration import (
    Calibration,
    fit_calibration,
    flow_marker_factor,
    select_order,
    universal_log_M,
)
from gpctools.errors import CalibrationError, CalibrationWarning, GpcError
from gpctools.simulate import DEFAULT_STANDARDS, default_calibration

# Mark-Houwink pairs in THF, K in dL/g [from memory: pairs used in the IUPAC
# propagation-rate benchmark papers, docs/science.md, section 2].
PS = (1.14e-4, 0.716)
PMMA = (9.44e-5, 0.719)


def _standards() -> tuple[np.ndarray, np.ndarray, list[str]]:
    names, Mp, V = zip(*DEFAULT_STANDARDS, strict=True)
    return np.array(V), np.array(Mp), list(names)


def _no_warnings_fit(*args, **kwargs) -> Calibration:
    with warnings.catch_warnings():
        warnings.simplefilter("error", CalibrationWarning)
        return fit_calibration(*args, **kwargs)


# ============================================================================ fit against numpy


@pytest.mark.parametrize("order", [1, 2, 3])
def test_fit_matches_numpy_polyfit(order: int) -> None:
    V, Mp, names = _standards()
    with warnings.catch_warnings():
        # orders 1-2 leave residuals above 5 % on this curved set: warned, not the point here
        warnings.simplefilter("ignore", CalibrationWarning)
        cal = fit_calibration(V, Mp, order=order, names=names)
    y = np.log10(Mp)
    ref = np.polyfit(V, y, order)  # numpy, reference least squares, in unscaled V
    fitted = np.polyval(ref, V)
    grid = np.linspace(V.min(), V.max(), 7)
    # Same least-squares problem, other parametrisation: 1e-9 in log M (conditioning).
    assert cal.log_M(grid) == pytest.approx(np.polyval(ref, grid), abs=1e-9)
    assert cal.dlogM_dV(grid) == pytest.approx(np.polyval(np.polyder(ref), grid), abs=1e-8)
    # residuals in percent: 100·(M_fit/M_nominal - 1) [docs/science.md, section 2]
    expected = 100.0 * (10.0 ** (fitted - y) - 1.0)
    assert cal.residuals_pct == pytest.approx(expected, abs=1e-7)  # %, from 1e-9 in log M
    tss = ((y - y.mean()) ** 2).sum()
    rss = ((y - fitted) ** 2).sum()
    assert cal.r_squared == pytest.approx(1.0 - rss / tss, rel=1e-9)  # definition of R²
    # residual SD with n - order - 1 degrees of freedom (definition)
    assert cal.residual_std_log == pytest.approx(math.sqrt(rss / (V.size - order - 1)), rel=1e-7)
    assert cal.order == order and cal.v_min == V.min() and cal.v_max == V.max()


def test_default_cubic_is_clean_and_monotonic() -> None:
    V, Mp, names = _standards()
    cal = _no_warnings_fit(V, Mp, order=3, names=names)
    assert cal.warnings == ()
    assert max(abs(r) for r in cal.residuals_pct) < 5.0  # common practice: ±5 %
    assert np.all(cal.dlogM_dV(np.linspace(cal.v_min, cal.v_max, 200)) < 0)
    assert cal.r_squared > 0.999
    table = cal.standards_table()
    assert [row["standard"] for row in table][0] == "PS 2.5M"
    assert table[0]["residual [%]"] == pytest.approx(cal.residuals_pct[0], rel=1e-12)
    json.dumps(cal.summary())


def test_perturbed_standard_residual_sign_and_size() -> None:
    """One standard 3 % above an exact line: its residual is negative, near -3 % (derived)."""
    V = np.linspace(11.0, 21.0, 10)
    Mp = 10.0 ** (10.0 - 0.4 * V)
    Mp[4] *= 1.03
    cal = _no_warnings_fit(V, Mp, order=1)
    # least squares shares the 3 % among the others: leverage of the middle point is
    # about 0.1, so the residual is about -3 %·(1 - 0.1) [derived]; ±0.3 % for rounding.
    assert cal.residuals_pct[4] == pytest.approx(-2.7, abs=0.3)
    assert all(abs(r) < 1.0 for i, r in enumerate(cal.residuals_pct) if i != 4)


# ============================================================================ warnings and errors


def test_warn_too_few_standards_for_order() -> None:
    V = np.array([12.0, 14.0, 16.0, 18.0])
    Mp = 10.0 ** (10.0 - 0.4 * V + 0.01 * (V - 15.0) ** 3)
    with pytest.warns(CalibrationWarning, match="only 4 standards for an order-3 fit"):
        cal = fit_calibration(V, Mp, order=3)
    assert any("only 4 standards" in w for w in cal.warnings)


def test_warn_non_monotonic_slope_inside_range() -> None:
    V = np.linspace(11.0, 21.0, 10)
    t = (V - 16.0) / 5.0
    y = 5.0 - 1.5 * t + 0.9 * t**2  # exact quadratic, slope turns positive for t > 0.83
    assert np.polyval(np.polyder(np.polyfit(V, y, 2)), 21.0) > 0  # numpy: really rises
    with pytest.warns(CalibrationWarning, match="not negative everywhere") as caught:
        cal = fit_calibration(V, 10.0**y, order=2)
    msgs = [str(w.message) for w in caught if issubclass(w.category, CalibrationWarning)]
    assert len(msgs) == 1  # the slope is the only concern raised
    assert cal.warnings == tuple(msgs)
    # an exact quadratic: residuals vanish, so only the slope is at fault (rounding).
    assert max(abs(r) for r in cal.residuals_pct) < 1e-8


def test_warn_residual_beyond_limit() -> None:
    V = np.linspace(11.0, 21.0, 10)
    Mp = 10.0 ** (10.0 - 0.4 * V)
    Mp[4] *= 1.12  # 12 % high, in the middle of the set
    with pytest.warns(CalibrationWarning, match=r"outside ±5 %: standard 5 \(-\d+\.\d %\)$"):
        cal = fit_calibration(V, Mp, order=1)
    assert cal.residuals_pct[4] < -5.0
    assert any("standard 5" in w for w in cal.warnings)
    # the limit is a parameter: a generous limit silences the warning
    _no_warnings_fit(V, Mp, order=1, residual_limit_pct=15.0)


@pytest.mark.parametrize(
    "volume, Mp, kwargs, match",
    [
        ([12.0, 14.0, 16.0], [1e5, 1e4, 1e3], {"order": 3}, "needs at least 4 standards"),
        ([12.0, 14.0, 14.0, 16.0], [1e5, 3e4, 2e4, 1e3], {"order": 1}, "same peak volume 14"),
        ([12.0, 14.0, 16.0], [1e5, 0.0, 1e3], {"order": 1}, "Mp must be a positive number"),
        ([12.0, 14.0, 16.0], [1e5, -5.0, 1e3], {"order": 1}, "Mp must be a positive number"),
        ([12.0, -14.0, 16.0], [1e5, 1e4, 1e3], {"order": 1}, "peak volume must be a positive"),
        ([12.0, 14.0, 16.0], [1e5, 1e4], {"order": 1}, "3 volumes but 2 molar masses"),
        ([12.0], [1e5], {"order": 1}, "at least 2 narrow standards"),
        ([12.0, 14.0, 16.0], [1e5, 1e4, np.nan], {"order": 1}, "Mp must be a positive number"),
        ([12.0, 14.0, 16.0], [1e5, 1e4, 1e3], {"order": 0}, "integer 1-5"),
        ([12.0, 14.0, 16.0], [1e5, 1e4, 1e3], {"order": 6}, "integer 1-5"),
        ([12.0, 14.0, 16.0], [1e5, 1e4, 1e3], {"order": True}, "integer 1-5"),
        ([12.0, 14.0, 16.0], [1e5, 1e4, 1e3], {"order": "cubic"}, "'auto'"),
        ([12.0, 14.0, 16.0], [1e5, 1e4, 1e3], {"order": 1, "names": ["a"]}, "number of names"),
    ],
)
def test_calibration_errors(volume, Mp, kwargs, match) -> None:
    with pytest.raises(CalibrationError, match=match) as info:
        fit_calibration(volume, Mp, **kwargs)
    assert isinstance(info.value, ValueError) and isinstance(info.value, GpcError)


def test_error_names_the_standard() -> None:
    with pytest.raises(CalibrationError, match="standard 'PS 19k'"):
        fit_calibration(
            [12.0, 14.0, 16.0], [1e5, 1e4, 0.0], order=1, names=["PS 1M", "PS 96k", "PS 19k"]
        )


# ============================================================================ order choice


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_select_order_by_aicc(seed: int) -> None:
    rng = np.random.default_rng(seed)
    V = np.linspace(11.0, 21.0, 10)
    t = (V - 16.0) / 5.0
    noise = rng.normal(0.0, 0.01, V.size)  # 0.01 in log M ≈ 2.3 % in M: realistic scatter
    linear = 10.0 - 0.4 * V + noise
    cubic = 5.0 - 1.8 * t + 0.25 * t**2 - 0.35 * t**3 + noise
    # AICc (common practice for order choice, docs/science.md, section 2): the cubic terms are
    # 25-35× the noise, so they are found; for a straight line the penalty for each extra
    # term (about 6 units at n = 10) outweighs the fit gain.
    assert select_order(V, 10.0**linear) == 1
    assert select_order(V, 10.0**cubic) == 3
    cal = fit_calibration(V, 10.0**cubic, order="auto")
    assert cal.order == 3
    # R² alone would always prefer more terms: it never falls when the order rises (derived)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CalibrationWarning)  # single 5-6 % residuals: not the point
        r2 = [fit_calibration(V, 10.0**linear, order=k).r_squared for k in (1, 2, 3)]
    assert r2[0] <= r2[1] + 1e-15 <= r2[2] + 2e-15


def test_select_order_needs_enough_standards() -> None:
    with pytest.raises(CalibrationError, match="at least 5 standards"):
        select_order([12.0, 14.0, 16.0], [1e5, 1e4, 1e3])


def test_regression_auto_order_minimum_standards() -> None:
    # derived: AICc with k = order + 2 needs n > k + 1, so order 1 needs n >= 5. Four
    # standards must be refused with a message asking for 5 (it used to ask for 4, which
    # then failed the same way); five standards must give an order.
    V = np.array([12.0, 13.0, 14.0, 15.0, 16.0])
    M = 10.0 ** (10.0 - 0.4 * V + np.array([0.004, -0.003, 0.002, -0.004, 0.001]))
    with pytest.raises(CalibrationError, match="at least 5 standards"):
        select_order(V[:4], M[:4])
    assert select_order(V, M) == 1


# ============================================================================ tangent extrapolation


def test_tangent_extrapolation_outside_range() -> None:
    cal = default_calibration()
    V, Mp, _ = _standards()
    ref = np.polyfit(V, np.log10(Mp), 3)  # numpy reference
    s_lo = np.polyval(np.polyder(ref), cal.v_min)
    s_hi = np.polyval(np.polyder(ref), cal.v_max)
    for d in (0.1, 1.0, 3.0):
        # derived: outside the range log M continues along the end tangent; 1e-8 from
        # the numpy-vs-library parametrisation difference.
        assert cal.log_M(cal.v_max + d) == pytest.approx(
            np.polyval(ref, cal.v_max) + s_hi * d, abs=1e-8
        )
        assert cal.log_M(cal.v_min - d) == pytest.approx(
            np.polyval(ref, cal.v_min) - s_lo * d, abs=1e-8
        )
        assert float(cal.dlogM_dV(cal.v_max + d)) == pytest.approx(s_hi, abs=1e-8)
        assert float(cal.dlogM_dV(cal.v_min - d)) == pytest.approx(s_lo, abs=1e-8)
    # continuous and with the end slope at both ends (one-sided difference quotients)
    eps = 1e-6
    for v in (cal.v_min, cal.v_max):
        left = (cal.log_M(v) - cal.log_M(v - eps)) / eps
        right = (cal.log_M(v + eps) - cal.log_M(v)) / eps
        # C1 join: both quotients equal the end slope to O(eps·curvature) ≈ 1e-6.
        assert float(left) == pytest.approx(float(right), abs=1e-5)
        assert abs(float(cal.log_M(v + 1e-12) - cal.log_M(v - 1e-12))) < 1e-9
    # the raw cubic would bend away out there: the tangent is really being used
    assert abs(np.polyval(ref, cal.v_max + 3.0) - cal.log_M(cal.v_max + 3.0)) > 0.01
    assert cal.inside([cal.v_min, 15.0, cal.v_max + 0.01]).tolist() == [True, True, False]


# ============================================================================ absolute or relative scale


def test_scale_label_semantics() -> None:
    V, Mp, names = _standards()
    rel_cal = fit_calibration(V, Mp, order=3, names=names)
    assert not rel_cal.is_absolute
    assert rel_cal.scale_label() == "polystyrene-equivalent (relative)"
    same = fit_calibration(V, Mp, order=3, sample_polymer="polystyrene")
    assert same.is_absolute and "same-polymer standards" in same.scale_label()
    other = fit_calibration(V, Mp, order=3, sample_polymer="PMMA")
    assert not other.is_absolute and "relative" in other.scale_label()
    conv = other.converted(*PS, *PMMA, sample_polymer="PMMA", source="docs/science.md, section 2")
    assert conv.is_absolute and conv.scale_label() == "absolute PMMA (universal calibration)"
    assert conv.mark_houwink["K_sample [dL/g]"] == PMMA[0]
    assert conv.mark_houwink["source"] == "docs/science.md, section 2"
    json.dumps(conv.summary())


# ============================================================================ universal calibration

UC_CASES = [
    # PS-equivalent M -> PMMA M [derived from the IUPAC pairs, docs/science.md, section 2;
    # the pairs themselves are from memory]
    (1e4, 10_982.0),
    (1e5, 109_380.0),
    (1e6, 1_089_411.0),
]


@pytest.mark.parametrize("M_ps, M_pmma", UC_CASES)
def test_universal_log_M_check_values(M_ps: float, M_pmma: float) -> None:
    # check values are rounded to whole g/mol: ±0.5 g/mol
    assert float(universal_log_M(M_ps, *PS, *PMMA)) == pytest.approx(M_pmma, abs=0.5)
    # K unit consistency: dL/g -> mL/g multiplies both K by 100; the ratio is unchanged
    mL = float(universal_log_M(M_ps, PS[0] * 100, PS[1], PMMA[0] * 100, PMMA[1]))
    assert mL == pytest.approx(float(universal_log_M(M_ps, *PS, *PMMA)), rel=1e-12)  # rounding


def test_universal_formula_independent() -> None:
    """log M_x = [log(K_s/K_x) + (1 + a_s) log M_s]/(1 + a_x) (Benoit et al. 1967), by hand."""
    M = np.array([3e3, 4.2e4, 7.7e5])
    by_hand = 10.0 ** ((math.log10(PS[0] / PMMA[0]) + (1 + PS[1]) * np.log10(M)) / (1 + PMMA[1]))
    assert universal_log_M(M, *PS, *PMMA) == pytest.approx(by_hand, rel=1e-12)  # rounding
    # equal hydrodynamic volume [η]·M = K·M^(1+a) on both sides (derived): rounding only
    Mx = universal_log_M(M, *PS, *PMMA)
    assert PMMA[0] * Mx ** (1 + PMMA[1]) == pytest.approx(PS[0] * M ** (1 + PS[1]), rel=1e-10)


@pytest.mark.parametrize("M_ps, M_pmma", UC_CASES)
def test_converted_calibration_check_values(M_ps: float, M_pmma: float) -> None:
    A, B = 10.0, 0.4
    V_std = np.linspace(11.0, 21.0, 9)
    cal = _no_warnings_fit(V_std, 10.0 ** (A - B * V_std), order=1)
    V = (A - math.log10(M_ps)) / B  # the volume where the PS curve reads M_ps
    assert float(cal.M(V)) == pytest.approx(M_ps, rel=1e-10)
    conv = cal.converted(*PS, *PMMA, sample_polymer="PMMA")
    # rounded check values ±0.5 g/mol, plus 1e-10 relative from the fitted line
    assert float(conv.M(V)) == pytest.approx(M_pmma, abs=0.5 + 1e-10 * M_pmma)
    with pytest.warns(CalibrationWarning, match="plausible range"):  # both K in mL/g (issue 10)
        conv_mL = cal.converted(PS[0] * 100, PS[1], PMMA[0] * 100, PMMA[1], sample_polymer="PMMA")
    assert float(conv_mL.M(V)) == pytest.approx(float(conv.M(V)), rel=1e-12)  # same K ratio
    # the Jacobian is scaled by (1 + a_s)/(1 + a_x) [derived]
    assert float(conv.dlogM_dV(V)) == pytest.approx(-B * (1 + PS[1]) / (1 + PMMA[1]), rel=1e-10)
    # and the original is left untouched (frozen, converted returns a new object)
    assert cal.mark_houwink is None and not cal.is_absolute


def test_converted_round_trip_is_identity() -> None:
    cal = default_calibration()
    back = cal.converted(*PS, *PMMA).converted(*PMMA, *PS)
    V = np.linspace(10.0, 22.0, 13)
    # derived: the inverse transform undoes the first; 1e-12 in log M = rounding
    assert back.log_M(V) == pytest.approx(cal.log_M(V), abs=1e-12)


@pytest.mark.parametrize(
    "args",
    [
        (0.0, 0.716, 9.44e-5, 0.719),
        (1.14e-4, 0.716, -1.0, 0.719),
        (1.14e-4, 2.5, 9.44e-5, 0.719),
        (1.14e-4, 0.716, 9.44e-5, 0.0),
        (float("nan"), 0.716, 9.44e-5, 0.719),
    ],
)
def test_converted_rejects_bad_mark_houwink(args) -> None:
    with pytest.raises(CalibrationError, match="Mark-Houwink"):
        default_calibration().converted(*args)


# ============================================================================ flow marker


def test_flow_marker_factor() -> None:
    # definition: V_corr = V_obs·reference/observed (docs/science.md, section 2); exact arithmetic
    assert flow_marker_factor(25.0, 25.05) == pytest.approx(25.0 / 25.05, rel=1e-15)
    assert flow_marker_factor(25.0, 25.0) == 1.0
    for bad in [
        (0.0, 25.0),
        (25.0, -1.0),
        (25.0, float("nan")),
        (None, 25.0),
        (25.0, float("inf")),
    ]:
        with pytest.raises(CalibrationError, match="flow-marker"):
            flow_marker_factor(*bad)


# ============================================================================ shared contract


def test_inputs_not_mutated_lists_series_unsorted_repeatable() -> None:
    V, Mp, names = _standards()
    V0, Mp0 = V.copy(), Mp.copy()
    ref = fit_calibration(V, Mp, order=3, names=names)
    assert np.array_equal(V, V0) and np.array_equal(Mp, Mp0)
    again = fit_calibration(V, Mp, order=3, names=names)
    assert again == ref
    from_lists = fit_calibration(V.tolist(), Mp.tolist(), order=3, names=names)
    from_series = fit_calibration(pd.Series(V), pd.Series(Mp), order=3, names=pd.Series(names))
    perm = np.array([3, 7, 0, 9, 1, 5, 2, 8, 6, 4])
    shuffled = fit_calibration(V[perm], Mp[perm], order=3, names=[names[i] for i in perm])
    grid = np.linspace(9.0, 23.0, 15)
    for other in (from_lists, from_series, shuffled):
        # same data: identical up to summation-order rounding
        assert other.log_M(grid) == pytest.approx(ref.log_M(grid), abs=1e-12)
        assert other.names == ref.names
        assert other.residuals_pct == pytest.approx(ref.residuals_pct, abs=1e-9)
    with pytest.raises(dataclasses.FrozenInstanceError):
        ref.order = 2  # type: ignore[misc]  # frozen: results cannot be edited in place


def test_coefficient_standard_errors_match_numpy_polyfit():
    # Reference library: numpy.polyfit(cov="unscaled") times the residual variance
    # s^2 = RSS/(n - p) gives the OLS coefficient covariance; 1e-9: same algebra, float64.
    from gpctools.simulate import DEFAULT_STANDARDS, default_calibration

    cal = default_calibration()
    _, Mp, V = zip(*DEFAULT_STANDARDS)
    t = (np.asarray(V) - cal.center) / cal.scale
    y = np.log10(Mp)
    p, cov = np.polyfit(t, y, 3, cov="unscaled")
    r = y - np.polyval(p, t)
    s2 = r @ r / (len(V) - 4)
    expected = np.sqrt(np.diag(cov * s2))[::-1]
    assert np.allclose(cal.coefficient_stderr, expected, rtol=1e-9)
    # prediction SE at the first standard: sqrt(x^T C x) (same algebra)
    x = np.vander([t[0]], 4)[0]
    se = math.sqrt(x @ (cov * s2) @ x)
    assert float(cal.log_M_stderr(V[0])) == pytest.approx(se, rel=1e-9)
    # a universal conversion scales log M by (1 + a_s)/(1 + a_x) and so its SE (derived)
    conv = cal.converted(1.14e-4, 0.716, 9.44e-5, 0.719)
    assert float(conv.log_M_stderr(V[0])) == pytest.approx(se * 1.716 / 1.719, rel=1e-9)
    assert 0 < cal.summary()["largest standard error of M inside the range [%]"] < 5


def test_no_degrees_of_freedom_gives_nan_standard_errors():
    # n = order + 1: the curve passes through every standard, nothing is left to judge it.
    with pytest.warns(CalibrationWarning):
        cal = fit_calibration([12.0, 18.0], [1e6, 1e4], order=1)
    assert all(math.isnan(s) for s in cal.coefficient_stderr)


# ============================================================================ inverse V(M)


def test_volume_at_inverts_a_line_in_closed_form() -> None:
    # log M = A - B V exactly (A = 10, B = 0.4): V = (A - log10 M) / B [derived]; outside
    # the standards the tangent is the same line, so the closed form holds everywhere.
    A, B = 10.0, 0.4
    V_std = np.linspace(11.0, 21.0, 6)
    cal = _no_warnings_fit(V_std, 10.0 ** (A - B * V_std), order=1)
    M = np.array([1e2, 1e3, 1e5, 1e6, 1e9])  # below, inside and above 1e1.6-1e5.6
    expected = (A - np.log10(M)) / B
    # float rounding of a fitted line and of log10 only
    np.testing.assert_allclose(cal.volume_at(M), expected, rtol=0, atol=1e-9)
    assert cal.volume_at(1e5).shape == ()  # a scalar in, a 0-d array out (like M(V))


def test_volume_at_round_trips_the_cubic_inside_and_outside() -> None:
    # V -> M(V) -> volume_at must give V back on the whole curve: polynomial root inside
    # the standards' range, tangent continuation outside it [derived: the same curve].
    cal = default_calibration()
    V = np.concatenate([np.linspace(cal.v_min - 3.0, cal.v_min, 7), np.linspace(cal.v_min, cal.v_max, 41),
                        np.linspace(cal.v_max, cal.v_max + 3.0, 7)])
    # 1e-9 mL: polynomial roots in double precision on a well-scaled variable
    np.testing.assert_allclose(cal.volume_at(cal.M(V)), V, rtol=0, atol=1e-9)


def test_volume_at_after_universal_conversion() -> None:
    # PMMA masses through the converted curve land where PS masses of equal hydrodynamic
    # volume sit: V(M_PMMA) == V_PS(M_PS) for M_PMMA = universal_log_M(M_PS) [derived].
    cal = default_calibration()
    conv = cal.converted(*PS, *PMMA, sample_polymer="PMMA")
    M_ps = np.array([3e3, 1e5, 2e6])
    np.testing.assert_allclose(conv.volume_at(universal_log_M(M_ps, *PS, *PMMA)), cal.volume_at(M_ps),
                               rtol=0, atol=1e-9)  # same root, float rounding only


def test_volume_at_refuses_an_ambiguous_curve_and_bad_masses() -> None:
    # The exact quadratic of test_warn_non_monotonic_slope_inside_range turns up near its
    # high-volume end: some M occur at two volumes there, and the inverse says so.
    V = np.linspace(11.0, 21.0, 10)
    t = (V - 16.0) / 5.0
    y = 5.0 - 1.5 * t + 0.9 * t**2
    with pytest.warns(CalibrationWarning):
        cal = fit_calibration(V, 10.0**y, order=2)
    y_min = 5.0 - 1.5**2 / (4 * 0.9)  # vertex of the parabola, t = 0.833 [derived]
    with pytest.raises(CalibrationError, match="several volumes"):
        cal.volume_at(10 ** (y_min + 0.01))
    for bad in (0.0, -5.0, float("nan")):
        with pytest.raises(CalibrationError, match="positive number in g/mol"):
            cal.volume_at(bad)


# ============================================================================ Mark-Houwink K


def test_mark_houwink_K_checks() -> None:
    from gpctools.calibration import K_PLAUSIBLE_DL_G, mark_houwink_notes

    # bundled THF pairs in dL/g pass (gpctools/data/mark_houwink.csv)
    assert mark_houwink_notes(1.14e-4, 9.44e-5) == [] and mark_houwink_notes(1.14e-4, 7.56e-5) == []
    lo, hi = K_PLAUSIBLE_DL_G
    assert lo < 7.56e-5 and 1.22e-4 < hi  # every bundled K inside the span
    assert 1.14e-4 * 100 > hi  # polystyrene's K in mL/g falls outside (1 dL/g = 100 mL/g)
    mixed = mark_houwink_notes(1.14e-4, 9.44e-3)
    assert len(mixed) == 2 and "mL/g" in mixed[1] and "K_sample" in mixed[0]
    # a K that is in range but 100 times the other one: the ratio alone catches it
    ratio_only = mark_houwink_notes(3e-5, 3e-3)
    assert len(ratio_only) == 1 and "factor 100" in ratio_only[0]
    cal = default_calibration()
    with pytest.warns(CalibrationWarning, match="mL/g"):
        conv = cal.converted(1.14e-4, 0.716, 9.44e-3, 0.719)
    assert len(conv.warnings) == len(cal.warnings) + 2
    assert any("mL/g" in w for w in conv.summary()["warnings"])


def test_coefficients_in_mL_match_a_direct_fit_in_V(demo_method):
    # numpy as the reference: a polynomial fit of log10 Mp against V in mL, unscaled, and
    # its covariance s^2 (X^T X)^-1 with s^2 = SSR/(n - order - 1) (np.polyfit(cov=True))
    cal = demo_method.calibration
    V = np.asarray(cal.volume)
    b, se = cal.coefficients_mL()
    ref, cov = np.polyfit(V, np.log10(np.asarray(cal.Mp)), cal.order, cov=True)
    # rtol 1e-6: the unscaled normal equations of np.polyfit are less well conditioned
    np.testing.assert_allclose(b, ref[::-1], rtol=1e-6)
    np.testing.assert_allclose(se, np.sqrt(np.diag(cov))[::-1], rtol=1e-6)
    # and the curve they give is the calibration's own, inside the range
    grid = np.linspace(cal.v_min, cal.v_max, 7)
    np.testing.assert_allclose(np.polynomial.polynomial.polyval(grid, b), cal.log_M(grid), atol=1e-10)
