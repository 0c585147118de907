"""Tests of gpctools.qc: spec limits, system suitability, decisions, control charts.

Check values are hand-worked from the definitions (marked "derived") or come from the
published rule set named beside them. Results tables are built by hand with the column
names of the batch results table (gpctools.batch.RESULT_COLUMNS).
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from gpctools.errors import DataError, GpcError, InputFormatError, MethodError
from gpctools.qc import (
    D2_MOVING_RANGE,
    FAIL,
    NO_RESULT,
    NO_SPEC,
    NOT_REPORTABLE,
    PASS,
    WESTERN_ELECTRIC_RULES,
    QCSettings,
    SuitabilityLimits,
    TrendWarning,
    decide,
    evaluate_qc,
    individuals_chart,
    read_specs,
    rule_violations,
    specs_from_frame,
    system_suitability,
)

ROOT = Path(__file__).resolve().parents[1]


# ============================================================================ helpers


def spec_frame() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "product": ["SG-150", "CHK-PS-BROAD"],
            "Mw min [g/mol]": [135000.0, None],
            "Mw max [g/mol]": [165000.0, None],
            "Mw target [g/mol]": [150000.0, None],
            "dispersity max [-]": [2.4, None],
            "check-standard tolerance [%]": [None, 5.0],
        }
    )


def cal_summary(r2: float = 0.99995, residuals=(1.0, -2.0, 0.5)) -> dict:
    """Calibration summary in the shape of gpctools.calibration.Calibration.summary()."""
    return {
        "R^2 [-]": r2,
        "standards_table": [
            {"standard": f"PS {i}", "residual [%]": r} for i, r in enumerate(residuals, start=1)
        ],
    }


def row(sample_id, Mw, Mn, *, role="sample", product="SG-150", batch="B1", sequence="S1",
        status="ok", error="", marker=math.nan, outside=0.1, assigned_Mw=math.nan, assigned_Mn=math.nan):
    return {
        "sample_id": sample_id,
        "file": f"{sample_id}.csv",
        "role": role,
        "product": product,
        "batch": batch,
        "sequence": sequence,
        "assigned Mw [g/mol]": assigned_Mw,
        "assigned Mn [g/mol]": assigned_Mn,
        "status": status,
        "Mn [g/mol]": Mn if status == "ok" else math.nan,
        "Mw [g/mol]": Mw if status == "ok" else math.nan,
        "Mp [g/mol]": 0.9 * Mw if status == "ok" else math.nan,
        "dispersity [-]": Mw / Mn if status == "ok" else math.nan,
        "outside calibration [% mass]": outside,
        "flow marker [mL]": marker,
        "warnings": "",
        "error": error,
    }


def good_table() -> pd.DataFrame:
    rows = [
        row("CS-1", 101000.0, 50000.0, role="check_standard", product="CHK-PS-BROAD",
            assigned_Mw=100000.0, assigned_Mn=50000.0, marker=23.61),
        row("A1", 150000.0, 70000.0, marker=23.62),
        row("A1", 152000.0, 71000.0, marker=23.60),
        row("A2", 140000.0, 65000.0),
        row("CS-1", 99000.0, 50000.0, role="check_standard", product="CHK-PS-BROAD",
            assigned_Mw=100000.0, assigned_Mn=50000.0),
    ]
    return pd.DataFrame(rows)


# ============================================================================ specs


def test_spec_templates_load_and_agree():
    csv_specs = read_specs(ROOT / "gpctools" / "templates" / "spec_limits.csv")
    xlsx_specs = read_specs(ROOT / "gpctools" / "templates" / "spec_limits.xlsx")
    assert csv_specs.products == xlsx_specs.products
    sg = csv_specs.get("sg-150")  # product codes match case-insensitively
    assert sg is not None and sg.limit("Mw").max == 165000.0
    assert csv_specs.get("CHK-PS-BROAD").check_standard_tolerance_pct == 5.0
    assert len(csv_specs.sha256) == 64
    # the demo folder's sheet is a valid spec sheet too
    assert read_specs(ROOT / "sample_runs" / "spec_limits.csv").products


def test_limit_check_inclusive_and_reasons():
    specs = specs_from_frame(spec_frame())
    lim = specs.get("SG-150").limit("Mw [g/mol]")
    # derived: limits are inclusive, a value equal to a limit passes
    assert lim.check(165000.0)[0] is True
    assert lim.check(135000.0)[0] is True
    passed, reason = lim.check(165001.0)
    assert passed is False and "above max" in reason and "165 000" in reason
    passed, reason = lim.check(134999.0)
    assert passed is False and "below min" in reason
    assert lim.check(float("nan"))[0] is None
    # derived: 100*(153000/150000 - 1) = 2 %
    assert lim.deviation_from_target_pct(153000.0) == pytest.approx(2.0, rel=1e-12)


@pytest.mark.parametrize(
    "change, column, text",
    [
        ({"Mw max [g/mol]": ["lots", None]}, "Mw max [g/mol]", "not a number"),
        ({"Mw max [g/mol]": [100000.0, None]}, "Mw min [g/mol]", "above max"),
        ({"Mw target [g/mol]": [200000.0, None]}, "Mw target [g/mol]", "outside its limits"),
        ({"Mx max [g/mol]": [1.0, None]}, "Mx max [g/mol]", "unknown quantity"),
        ({"Mw low [kg/mol]": [1.0, None]}, "Mw low [kg/mol]", "<quantity> <min|max|target>"),
        ({"dispersity max [g/mol]": [2.0, None]}, "dispersity max [g/mol]", "[-]"),
        ({"dispersity min [-]": [0.5, None]}, "dispersity min [-]", "below 1"),
        ({"check-standard tolerance [%]": [None, -1.0]}, "check-standard tolerance [%]", "positive"),
    ],
)
def test_spec_errors_name_row_and_column(change, column, text):
    df = spec_frame()
    for k, v in change.items():
        df[k] = pd.Series(v, dtype=object)
    with pytest.raises(InputFormatError) as info:
        specs_from_frame(df, path="spec.csv")
    err = info.value
    assert err.path == "spec.csv" and err.column == column
    assert text in err.message
    assert err.row is not None


def test_spec_file_errors_name_file_and_row(tmp_path):
    p = tmp_path / "spec.csv"
    p.write_text("product,Mw max [g/mol]\nSG-150,165000\nSG-150,170000\n", encoding="utf-8")
    with pytest.raises(InputFormatError) as info:
        read_specs(p)
    # the duplicate is on line 3 of the file (header on line 1)
    assert info.value.row == 3 and info.value.column == "product" and str(p) in str(info.value)
    p.write_text("grade,Mw max [g/mol]\nSG-150,165000\n", encoding="utf-8")
    with pytest.raises(InputFormatError, match="'product' column"):
        read_specs(p)
    p.write_text("product,Mw max [g/mol]\n,165000\n", encoding="utf-8")
    with pytest.raises(InputFormatError, match="empty product"):
        read_specs(p)


# ============================================================================ suitability


def checks_by_name(result):
    return {c.name: c for c in result.checks}


def test_suitability_passes_hand_worked():
    (res,) = system_suitability(good_table(), cal_summary(), specs=specs_from_frame(spec_frame()),
                                reference_flow_marker=23.6)
    assert res.sequence == "S1" and res.passed, res.reasons()
    c = checks_by_name(res)
    # derived: mean(101000, 99000) = 100000 = assigned -> 0 % deviation
    assert c["check standard CHK-PS-BROAD: Mw deviation from assigned [%]"].value == pytest.approx(0.0, abs=1e-12)
    assert "spec sheet" in c["check standard CHK-PS-BROAD: Mw deviation from assigned [%]"].source
    # derived: worst marker 23.62 vs 23.6 -> 100*(23.62/23.6 - 1) = 0.084746 %
    fm = c["flow-marker drift |V_obs/V_ref - 1| [%]"]
    assert fm.value == pytest.approx(100 * (23.62 / 23.6 - 1), rel=1e-12) and fm.passed
    # derived: replicates A1 150000/152000 -> RSD 100*1414.21/151000 = 0.9366 %, one degree
    # of freedom, so the pooled RSD is that value. Check standards are judged against their
    # assigned values, not as a replicate group (issue 12).
    rsd = c["replicate RSD of Mw, pooled [%]"]
    assert rsd.value == pytest.approx(100 * math.sqrt(2e6) / 151000, rel=1e-12)
    assert "1 degree(s) of freedom" in rsd.reason and rsd.passed
    assert "fails this pooled rule" in rsd.reason  # the false-fail rate is stated
    # derived: worst |residual| of (1, -2, 0.5) is 2 %
    assert c["worst calibration residual |M_fit/Mp - 1| [%]"].value == 2.0
    assert "-2.00 %" in c["worst calibration residual |M_fit/Mp - 1| [%]"].reason


def test_check_standard_tolerance_is_inclusive_and_fails_beyond():
    df = good_table()
    # derived: both injections 105000 = +5.000 % of 100000, on the 5 % tolerance: passes
    # (each injection and the mean are judged since issue 12; 106000/104000 would now fail
    # on the first injection, +6 %, although their mean is +5 %)
    df.loc[df["sample_id"] == "CS-1", "Mw [g/mol]"] = [105000.0, 105000.0]
    (res,) = system_suitability(df, cal_summary(), specs=specs_from_frame(spec_frame()))
    assert res.passed
    df.loc[df["sample_id"] == "CS-1", "Mw [g/mol]"] = [105100.0, 105100.0]
    (res,) = system_suitability(df, cal_summary(), specs=specs_from_frame(spec_frame()))
    assert not res.passed
    mean = [c for c in res.failures if c.name == "check standard CHK-PS-BROAD: Mw deviation from assigned [%]"]
    (fail,) = mean
    # derived: mean 105100 -> +5.10 %
    assert "+5.10 %" in fail.reason and fail.value == pytest.approx(5.1, rel=1e-9)
    assert len(res.failures) == 3  # the two injections and the mean
    df.loc[df["sample_id"] == "CS-1", "Mw [g/mol]"] = [106000.0, 104000.0]
    (res,) = system_suitability(df, cal_summary(), specs=specs_from_frame(spec_frame()))
    assert [c.name for c in res.failures] == [
        "check standard CHK-PS-BROAD, injection 1 (CS-1): Mw deviation from assigned [%]"]


def test_each_suitability_check_can_fail():
    specs = specs_from_frame(spec_frame())
    # flow marker: 23.7 vs 23.6 -> +0.4237 % > 0.3 % (derived)
    df = good_table()
    df.loc[1, "flow marker [mL]"] = 23.7
    (res,) = system_suitability(df, cal_summary(), specs=specs, reference_flow_marker=23.6)
    assert [c.name for c in res.failures] == ["flow-marker drift |V_obs/V_ref - 1| [%]"]
    assert "A1" in res.failures[0].reason and "+0.424 %" in res.failures[0].reason
    # replicates: 150000 and 157000 -> RSD = 100*4949.747/153500 = 3.2246 % > 3 % (derived);
    # the only group, so the pooled RSD is that value
    df = good_table()
    df.loc[2, "Mw [g/mol]"] = 157000.0
    (res,) = system_suitability(df, cal_summary(), specs=specs)
    assert [c.name for c in res.failures] == ["replicate RSD of Mw, pooled [%]"]
    assert res.failures[0].value == pytest.approx(100 * np.std([150000, 157000], ddof=1) / 153500, rel=1e-12)
    # outside calibration 1.5 % > 1 %
    df = good_table()
    df.loc[3, "outside calibration [% mass]"] = 1.5
    (res,) = system_suitability(df, cal_summary(), specs=specs)
    assert [c.name for c in res.failures] == ["mass outside calibration [% mass]"]
    assert "A2" in res.failures[0].reason
    # calibration: R^2 0.998 and a 6 % standard
    (res,) = system_suitability(good_table(), cal_summary(0.998, (6.0, -1.0)), specs=specs)
    assert {c.name for c in res.failures} == {
        "calibration R² [-]", "worst calibration residual |M_fit/Mp - 1| [%]"}
    # no calibration at all cannot show suitability
    (res,) = system_suitability(good_table(), None, specs=specs)
    assert not res.passed


def test_missing_check_standard_and_not_evaluated_checks():
    df = good_table()
    df = df[df["role"] == "sample"].drop(columns=["flow marker [mL]"])
    (res,) = system_suitability(df, cal_summary())
    assert [c.name for c in res.failures] == ["check standard present"]
    (res,) = system_suitability(df, cal_summary(), limits=SuitabilityLimits(require_check_standard=False))
    assert res.passed
    outcomes = {c.name: c.outcome for c in res.checks}
    assert outcomes["flow-marker drift |V_obs/V_ref - 1| [%]"] == "not evaluated"
    # a check standard whose injections all failed fails the check, with the error text
    df = good_table()
    df.loc[df["role"] == "check_standard", "status"] = "error"
    df.loc[df["role"] == "check_standard", "error"] = "cs.csv: no signal"
    (res,) = system_suitability(df, cal_summary())
    assert any("no usable injection" in c.reason and "no signal" in c.reason for c in res.failures)
    with pytest.raises(MethodError):
        SuitabilityLimits(max_flow_marker_drift_pct=-1)


def test_real_calibration_object_is_accepted():
    from gpctools.calibration import fit_calibration

    V = np.linspace(14.0, 22.0, 8)
    Mp = 10 ** (9.0 - 0.3 * V)  # exactly linear: residuals 0, R^2 = 1 (derived)
    cal = fit_calibration(V, Mp, order=1)
    checks = {c.name: c for c in system_suitability(good_table(), cal)[0].checks}
    assert checks["calibration R² [-]"].value == pytest.approx(1.0, abs=1e-12)
    assert checks["worst calibration residual |M_fit/Mp - 1| [%]"].value == pytest.approx(0.0, abs=1e-9)


# ============================================================================ decisions


def test_decisions_pass_fail_no_result():
    specs = specs_from_frame(spec_frame())
    df = good_table()
    extra = pd.DataFrame([
        row("B1-hi", 170000.0, 75000.0, batch="B2"),  # Mw above 165000, dispersity 2.27 within
        row("B1-ok", 150000.0, 70000.0, batch="B2"),
        row("C1", 0, 0, batch="B3", status="error", error="c1.csv: file not found"),
        row("D1", 150000.0, 70000.0, batch="B4", product="XX-1"),
    ])
    df = pd.concat([df, extra], ignore_index=True)
    suit = system_suitability(df, cal_summary(), specs=specs)
    assert suit[0].passed
    dec = decide(df, specs, suit)
    by_sample = {s.sample_id: s for s in dec.samples}
    assert by_sample["A1"].decision == PASS
    # derived: A1 is the mean of its two injections
    assert by_sample["A1"].values["Mw [g/mol]"] == 151000.0 and by_sample["A1"].injections == 2
    assert by_sample["B1-hi"].decision == FAIL
    assert by_sample["B1-hi"].reasons == ("Mw 170 000 g/mol above max 165 000 g/mol",)
    assert by_sample["C1"].decision == NO_RESULT and "file not found" in by_sample["C1"].reasons[0]
    assert by_sample["D1"].decision == NO_SPEC and "XX-1" in by_sample["D1"].reasons[0]
    by_batch = {b.batch: b for b in dec.batches}
    assert by_batch["B1"].decision == PASS
    assert by_batch["B2"].decision == FAIL
    assert any("B1-hi" in r and "above max" in r for r in by_batch["B2"].reasons)
    assert by_batch["B3"].decision == NO_RESULT
    assert by_batch["B4"].decision == NO_SPEC
    assert not dec.all_pass
    frame = dec.samples_frame()
    assert {"Mw [g/mol]", "injections [-]", "decision", "reasons"} <= set(frame.columns)
    assert "CS-1" not in set(frame["sample_id"])  # check standards are not released


def test_failed_suitability_makes_batch_not_reportable_not_failed():
    specs = specs_from_frame(spec_frame())
    df = good_table()
    df.loc[df["role"] == "check_standard", "Mw [g/mol]"] = [120000.0, 118000.0]  # +19 %
    df.loc[3, "Mw [g/mol]"] = 200000.0  # also out of spec, but the sequence decides first
    suit = system_suitability(df, cal_summary(), specs=specs)
    dec = decide(df, specs, suit)
    (batch,) = dec.batches
    assert batch.decision == NOT_REPORTABLE
    assert any("failed system suitability" in r and "CHK-PS-BROAD" in r for r in batch.reasons)
    assert {s.decision for s in dec.samples} == {NOT_REPORTABLE}


def test_decisions_do_not_modify_the_table():
    df = good_table()
    before = df.copy(deep=True)
    res = evaluate_qc(df, specs_from_frame(spec_frame()), calibration=cal_summary())
    pd.testing.assert_frame_equal(df, before)
    assert res.reportable and res.decisions.all_pass


# ============================================================================ run rules

# Rule set: Western Electric Statistical Quality Control Handbook, 1956 [published]
# (WE1 one point beyond 3 sigma; WE2 2 of 3 beyond 2 sigma same side; WE3 4 of 5 beyond
# 1 sigma same side; WE4 8 in a row on one side). Cases below are hand-worked on z values.


def flagged(z):
    return [(i, r.code) for i, r, _ in rule_violations(z)]


def test_we_rule_set_is_named_and_complete():
    assert [r.code for r in WESTERN_ELECTRIC_RULES] == ["WE1", "WE2", "WE3", "WE4"]
    assert [(r.count, r.window, r.zone) for r in WESTERN_ELECTRIC_RULES] == [
        (1, 1, 3.0), (2, 3, 2.0), (4, 5, 1.0), (8, 8, 0.0)]


def test_we1_one_point_beyond_3_sigma():
    assert flagged([0.0, 3.01, 0.0]) == [(1, "WE1")]
    assert flagged([0.0, -3.5]) == [(1, "WE1")]
    assert flagged([0.0, 3.0, 0.0]) == []  # exactly on the limit is not beyond


def test_we2_two_of_three_beyond_2_sigma_same_side():
    assert flagged([2.1, 0.0, 2.1]) == [(2, "WE2")]
    assert flagged([0.0, 2.5, 2.5]) == [(2, "WE2")]
    assert flagged([2.1, -2.1, 0.0]) == []  # opposite sides
    assert flagged([2.1, 0.0, 0.0, 2.1]) == []  # 1 of 3 in each window


def test_we3_four_of_five_beyond_1_sigma_same_side():
    assert flagged([1.1, 1.1, 0.0, 1.1, 1.1]) == [(4, "WE3")]
    assert flagged([1.1, 1.1, 0.0, 0.0, 1.1, 1.1]) == []
    assert flagged([-1.5, -1.2, -1.9, 0.5, -1.1]) == [(4, "WE3")]


def test_we4_eight_in_a_row_same_side():
    assert flagged([0.1] * 8) == [(7, "WE4")]
    assert flagged([0.1] * 7) == []
    assert flagged([0.1] * 4 + [0.0] + [0.1] * 4) == []  # a point on the centre line breaks the run
    assert flagged([-0.2] * 9) == [(7, "WE4"), (8, "WE4")]


def test_individuals_chart_hand_worked():
    # derived: mean(10, 12, 11, 13, 12) = 11.6; moving ranges 2, 1, 2, 1 -> MR-bar 1.5;
    # sigma = 1.5 / 1.128 = 1.329787..., UCL = 11.6 + 3 sigma
    with pytest.warns(TrendWarning, match="provisional"):
        chart = individuals_chart([10, 12, 11, 13, 12], ["b1", "b2", "b3", "b4", "b5"],
                                  quantity="Mw [g/mol]", group="SG-150")
    assert chart.centre == pytest.approx(11.6, rel=1e-15)
    assert chart.mr_bar == pytest.approx(1.5, rel=1e-15)
    assert chart.sigma == pytest.approx(1.5 / 1.128, rel=1e-15)
    assert chart.ucl == pytest.approx(11.6 + 3 * 1.5 / 1.128, rel=1e-15)
    assert chart.violations == ()
    frame = chart.to_frame()
    assert "upper control limit [g/mol]" in frame.columns and "z [sigma]" in frame.columns


def test_d2_constant():
    # published constant d2(n=2) = 1.128 (ISO 7870-2 table, from memory); it equals the mean
    # range of two standard normal values, 2/sqrt(pi) = 1.12838 (derived); tolerance 4e-4 is
    # the rounding of the tabulated value to 3 decimals.
    assert D2_MOVING_RANGE == pytest.approx(2 / math.sqrt(math.pi), abs=4e-4)


def test_chart_limits_from_history_catch_a_new_outlier():
    # history alternates 100, 102 (MR-bar 2 -> sigma 1.773, CL 101, derived); the new point
    # 107 is 3.38 sigma above: WE1 when the limits come from history only
    hist = [100.0, 102.0] * 5
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TrendWarning)
        chart = individuals_chart(hist + [107.0], sets_limits=[True] * 10 + [False])
    assert chart.centre == 101.0 and chart.sigma == pytest.approx(2 / 1.128, rel=1e-15)
    assert [(v.index, v.rule) for v in chart.violations] == [(10, "WE1")]


def test_chart_errors_and_flat_series():
    with pytest.raises(DataError, match="at least 2"):
        individuals_chart([1.0])
    with pytest.raises(DataError, match="no finite value"):
        individuals_chart([1.0, float("nan"), 2.0])
    with pytest.warns(TrendWarning, match="no spread"):
        chart = individuals_chart([5.0] * 25)
    assert chart.violations == ()
    assert isinstance(DataError("x"), GpcError)


# ============================================================================ evaluate_qc


def history_tables(values, product="SG-150"):
    return [pd.DataFrame([row(f"H{i}", v, v / 2.1, batch=f"H{i:02d}", product=product)])
            for i, v in enumerate(values)]


def test_evaluate_qc_trend_flags_run_rule_with_history():
    specs = specs_from_frame(spec_frame())
    # history: Mw 150000/152000 alternating over 10 batches -> CL 151000, MR-bar 2000,
    # sigma = 2000/1.128 = 1773.05 g/mol (derived). Current batch B1: mean of the sample
    # means 151000 (A1) and 140000 (A2) = 145500, z = -5500/1773.05 = -3.10: WE1 below.
    hist = history_tables([150000.0, 152000.0] * 5)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = evaluate_qc(good_table(), specs, calibration=cal_summary(), history=hist,
                          settings=QCSettings(trend_columns=("Mw [g/mol]",), rules=WESTERN_ELECTRIC_RULES))
    (chart,) = [c for c in res.trends if c.group == "SG-150"]
    assert chart.labels[-1] == "B1" and chart.values[-1] == 145500.0
    assert int(chart.sets_limits.sum()) == 10  # limits from the history only
    assert chart.centre == 151000.0 and chart.sigma == pytest.approx(2000 / 1.128, rel=1e-15)
    assert [(v.label, v.rule, v.side) for v in chart.violations] == [("B1", "WE1", "below")]
    assert res.trend_signals == 1
    # the same data with limits from all points: the outlier widens sigma and still shows
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res_all = evaluate_qc(good_table(), specs, calibration=cal_summary(), history=hist,
                              settings=QCSettings(trend_columns=("Mw [g/mol]",), trend_limits_from="all",
                                                  rules=WESTERN_ELECTRIC_RULES))
    assert int(res_all.trends[0].sets_limits.sum()) == 11
    # one sequence only: no check-standard chart (two or more points are needed)
    assert not any(c.group.startswith("check standard") for c in res.trends)
    assert any("no control chart" in w for w in res.warnings)


def test_evaluate_qc_we4_across_batches_in_one_table():
    specs = specs_from_frame(spec_frame())
    # derived: values 140000 x 4 then 150000 x 8 -> centre 146667, the last 8 all above: WE4 at
    # the 8th of them; sigma = MR-bar/d2 = (10000/11)/1.128 = 805.9, so the jump is also > 3 sigma
    vals = [140000.0] * 4 + [150000.0] * 8
    rows = [row(f"S{i}", v, v / 2, batch=f"L{i:02d}") for i, v in enumerate(vals)]
    rows.append(row("CS-1", 100000.0, 50000.0, role="check_standard", product="CHK-PS-BROAD",
                    assigned_Mw=100000.0))
    df = pd.DataFrame(rows)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = evaluate_qc(df, specs, calibration=cal_summary(), settings=QCSettings(rules=WESTERN_ELECTRIC_RULES))
    chart = next(c for c in res.trends if c.group == "SG-150" and c.quantity == "Mw [g/mol]")
    assert chart.centre == pytest.approx(np.mean(vals), rel=1e-15)
    found = {(v.label, v.rule) for v in chart.violations}
    assert ("L11", "WE4") in found and ("L04", "WE1") in found
    assert res.reportable and not res.trend_violations_frame().empty


def test_conflicting_assigned_values_warn_and_are_listed():
    from gpctools.qc import QCWarning

    df = good_table()
    df.loc[4, "assigned Mw [g/mol]"] = 101000.0
    with pytest.warns(QCWarning, match="different assigned Mw"):
        (res,) = system_suitability(df, cal_summary())
    assert any("different assigned Mw" in w for w in res.warnings)
