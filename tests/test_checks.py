"""Each measurement check of the diagnosis on its own (gpctools.kinetics.checks)."""

from __future__ import annotations

import math

import pytest

from gpctools.kinetics.checks import (
    CHECKS,
    CheckInputs,
    calibrated_range,
    check_standard,
    flow_marker,
    flow_sensitivity,
    induction_period,
    low_M_limit,
    molar_mass_scale,
    pump_flow,
    run_checks,
)
from gpctools.kinetics.recipe import Checks


def test_flow_sensitivity_defaults_and_given_values():
    # typical defaults B = 0.4 decades/mL, V = 25 mL (docs/science.md, section 2.1) -> B·V = 10, 30 % uncertain
    d = flow_sensitivity(Checks())
    assert d.BV == pytest.approx(10.0) and d.rel == 0.3
    assert d.k == pytest.approx(math.log(10.0) * 10.0)  # d ln M/dε magnitude [derived]
    g = flow_sensitivity(Checks(calibration_slope=0.5, peak_volume=22.0))
    assert g.BV == pytest.approx(11.0) and g.rel == 0.1
    # only one of the two given: the default uncertainty stays
    assert flow_sensitivity(Checks(calibration_slope=0.5)).rel == 0.3


def test_molar_mass_scale():
    ok = molar_mass_scale(CheckInputs(Checks()))
    assert ok.line.status == "ok" and ok.observation is None and ok.warning is None
    none = molar_mass_scale(CheckInputs(Checks(), "relative to pullulan", None, "polystyrene"))
    assert none.line.status == "flag" and "used as if absolute" in none.line.text
    assert none.warning == "pullulan-equivalent Mn/Mw used as absolute (no Mark-Houwink pair)"
    # 1.0938: PS-equivalent 1e5 -> PMMA 109 380 (derived from the IUPAC pairs, test_kinetics)
    conv = molar_mass_scale(CheckInputs(Checks(), "relative to polystyrene", 1.0938,
                                        "poly(methyl methacrylate)"))
    assert conv.line.status == "flag" and "factor 1.094 at Mn" in conv.line.text
    assert conv.line.numbers == (("conversion factor at Mn [-]", 1.0938),)
    same = molar_mass_scale(CheckInputs(Checks(), "relative to polystyrene", 1.0, "polystyrene"))
    assert same.line.status == "ok" and "are absolute" in same.line.text


def test_check_standard():
    # +5 %: y = ln(1.05) = 0.04879 [derived]; beyond the 3 % repeatability -> flag
    c = check_standard(CheckInputs(Checks(check_standard_deviation=5.0)))
    assert c.observation.y == pytest.approx(math.log(1.05), rel=1e-12)
    assert c.observation.sigma == 0.03 and c.observation.recorded
    assert c.line.status == "flag" and c.line.action
    assert check_standard(CheckInputs(Checks(check_standard_deviation=2.0))).line.status == "ok"
    # not recorded: a 0 ± 5 % prior (standards accepted within ±5 %, common practice)
    n = check_standard(CheckInputs(Checks()))
    assert n.line.status == "not recorded"
    assert (n.observation.y, n.observation.sigma, n.observation.recorded) == (0.0, 0.05, False)


def test_flow_marker():
    # 28.65 mL against 28.50 mL: ε = 0.15/28.5 = 0.526 %; with B·V = 10 every average moves
    # by 10^(−10·0.005263) − 1 = −11.41 % [derived, docs/science.md, section 2.2]
    c = flow_marker(CheckInputs(Checks(flow_marker_observed=28.65, flow_marker_reference=28.50)))
    eps = 0.15 / 28.5
    assert c.observation.y == pytest.approx(eps, rel=1e-12)
    assert c.observation.sigma == 0.001
    assert c.line.status == "flag"  # beyond twice the 0.1 % marker reproducibility
    nums = dict(c.line.numbers)
    assert nums["expected shift of averages [%]"] == pytest.approx(-11.413, abs=1e-3)
    assert "(+0.526 %)" in c.line.text and "about -11.4 %" in c.line.text
    # within 0.2 %: ok
    ok = flow_marker(CheckInputs(Checks(flow_marker_observed=28.51, flow_marker_reference=28.50)))
    assert ok.line.status == "ok" and ok.line.action == ""
    # corrected results: only the residual 0.05 % prior
    cor = flow_marker(CheckInputs(Checks(flow_marker_observed=28.65, flow_marker_reference=28.50,
                                         flow_marker_corrected=True)))
    assert cor.line.status == "ok" and "corrected with the flow marker" in cor.line.text
    assert (cor.observation.y, cor.observation.sigma, cor.observation.recorded) == (0.0, 5e-4,
                                                                                    False)
    # not recorded: 0 ± 0.2 % (pump accuracy, common practice)
    n = flow_marker(CheckInputs(Checks()))
    assert n.line.status == "not recorded" and n.observation.sigma == 0.002


def test_low_M_limit():
    c = low_M_limit(CheckInputs(Checks(Mn_shift_low_limit=9.0)))
    assert c.observation.y == pytest.approx(0.09) and c.observation.sigma == 0.03
    assert c.line.status == "flag" and "low-M tail" in c.line.text
    assert low_M_limit(CheckInputs(Checks(Mn_shift_low_limit=1.1))).line.status == "ok"
    n = low_M_limit(CheckInputs(Checks()))
    assert n.line.status == "not recorded" and n.observation is None


def test_calibrated_range():
    c = calibrated_range(CheckInputs(Checks(outside_calibration=3.0)))
    assert c.line.status == "flag" and c.observation.y == 3.0 and c.observation.sigma == 1.0
    assert calibrated_range(CheckInputs(Checks(outside_calibration=0.2))).line.status == "ok"
    n = calibrated_range(CheckInputs(Checks()))
    assert n.line is None and n.observation is None


def test_induction_period():
    c = induction_period(CheckInputs(Checks(), induction=25.0))
    assert c.line is None
    assert (c.observation.y, c.observation.sigma, c.observation.unit) == (25.0, 5.0, "min")
    assert induction_period(CheckInputs(Checks())).observation is None


def test_run_checks_keeps_the_registry_order():
    assert [c.__name__ for c in CHECKS] == ["molar_mass_scale", "check_standard", "flow_marker",
                                           "pump_flow", "low_M_limit", "calibrated_range",
                                           "induction_period"]
    r = run_checks(CheckInputs(Checks(outside_calibration=2.0, Mn_shift_low_limit=1.0),
                               "relative to pullulan", None, "polystyrene", induction=3.0))
    assert [line.check for line in r.lines] == ["molar-mass scale", "check standard",
                                                "flow marker", "low-M integration limit",
                                                "calibrated range"]
    assert list(r.observations) == ["check standard", "flow marker", "low-M limit",
                                    "outside calibration", "induction period"]
    assert len(r.warnings) == 1


def test_pump_flow_is_an_instrument_finding_even_when_corrected():
    # 22.668 mL against 22.60 mL: the pump is 0.3 % slow (V_obs/V_ref − 1 = 0.00301) [derived]
    ch = Checks(flow_marker_observed=22.668, flow_marker_reference=22.60,
                flow_marker_corrected=True)
    out = pump_flow(CheckInputs(ch))
    f = out.finding
    assert f is not None and f.status == "fix" and f.check == "pump flow"
    assert "0.301 % slow" in f.text and "corrected with the flow marker, but" in f.text
    nums = dict(f.numbers)
    assert nums["flow error [%]"] == pytest.approx(100 * (22.668 / 22.60 - 1), rel=1e-12)
    # the batch's correction factor V_ref/V_obs [derived]
    assert nums["flow correction factor [-]"] == pytest.approx(22.60 / 22.668, rel=1e-12)
    assert "check the pump" in f.action
    # the corrected marker check itself still reads ok: the results are right
    assert flow_marker(CheckInputs(ch)).line.status == "ok"
    # a fast pump, uncorrected
    fast = pump_flow(CheckInputs(Checks(flow_marker_observed=22.55, flow_marker_reference=22.60)))
    assert "fast" in fast.finding.text and "not corrected" in fast.finding.text
    # at or below 0.1 % (common practice: pump flow held within about 0.1 %): no finding
    assert pump_flow(CheckInputs(Checks(flow_marker_observed=22.62,
                                        flow_marker_reference=22.60))).finding is None
    assert pump_flow(CheckInputs(Checks())).finding is None
    r = run_checks(CheckInputs(ch))
    assert [x.check for x in r.findings] == ["pump flow"]
    assert "pump flow" not in [x.check for x in r.lines]
