"""Issue 12 acceptance: QC as a lab runs it, with hand-worked verdicts.

Traces are built by hand with numpy (Gaussian peaks in volume through an exactly linear
calibration log10 M = 9 - 0.3 V, so log10 M of a Gaussian trace is normal and its averages
have closed forms), not with the project's simulator. Cases:

* the check-standard averaging trap (+0.3 % and +7.8 % against ±5 %);
* a blank with and without a ghost peak;
* a sequence calibrated from its own standard injections;
* two products with different windows (and a method of their own) in one run;
* a history with a shift after its baseline period (9 in a row) and a point beyond 3 sigma;
* a long-form spec sheet;
* unknown roles, replicate false-fail rates, QC settings files.
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from gpctools.errors import InputFormatError, MethodError
from gpctools.qc import (
    FAIL,
    NELSON_RULES,
    NOT_REPORTABLE,
    PASS,
    QCSettings,
    SuitabilityLimits,
    decide,
    evaluate_qc,
    false_alarm_rate,
    read_qc_settings,
    read_specs,
    specs_from_frame,
    system_suitability,
)
from gpctools.qc.replicates import false_fail_closed_form, false_fail_simulated

LN10 = math.log(10.0)
#: Exact linear calibration of these tests: log10 M = A - B·V (derived cases, docs/science.md, section 8).
A, B = 9.0, 0.3


def logM(V):
    return A - B * np.asarray(V, dtype=float)


def V_of(M):
    return (A - math.log10(M)) / B


def gauss(V, centre, sd, height):
    return height * np.exp(-0.5 * ((V - centre) / sd) ** 2)


def write_trace(path: Path, V, h) -> str:
    path.parent.mkdir(parents=True, exist_ok=True)
    lines = ["volume [mL],RI signal [mV]"] + [f"{v:.6f},{x:.6f}" for v, x in zip(V, h, strict=True)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return str(path)


GRID = np.linspace(8.0, 26.0, 6000)  # slice spacing 0.003 mL
STANDARD_VOLUMES = (11.0, 13.0, 15.0, 17.0, 19.0, 21.0)  # [mL], Mp = 10^(9 - 0.3 V)


def method_text(shift: float = 0.3, extra: str = "") -> tuple[str, str]:
    """Method TOML and a standards table whose volumes are ``shift`` mL off the truth."""
    rows = ["name,Mp [g/mol],volume [mL]"] + [
        f"S{k},{10 ** (A - B * v):.6g},{v + shift:.3f}" for k, v in enumerate(STANDARD_VOLUMES)]
    toml = ('name = "test"\nsample_polymer = "polystyrene"\n[flow]\nrate = 1.0\n'
            '[calibration]\norder = 3\nstandard_polymer = "polystyrene"\nstandards = "standards.csv"\n' + extra)
    return toml, "\n".join(rows) + "\n"


def write_method(folder: Path, shift: float = 0.3, extra: str = "", name: str = "method.toml") -> Path:
    toml, stds = method_text(shift, extra)
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "standards.csv").write_text(stds, encoding="utf-8")
    (folder / name).write_text(toml, encoding="utf-8")
    return folder / name


def cocktail(volumes, noise_seed=1):
    rng = np.random.default_rng(noise_seed)
    h = sum(gauss(GRID, v, 0.12, 50.0) for v in volumes) + 2.0 + 0.01 * rng.standard_normal(GRID.size)
    return h


def sample_trace(centre, sd, height=100.0, seed=2, extra=()):
    rng = np.random.default_rng(seed)
    h = gauss(GRID, centre, sd, height) + 2.0 - 0.02 * (GRID - 8.0) + 0.01 * rng.standard_normal(GRID.size)
    for c, s, hh in extra:
        h = h + gauss(GRID, c, s, hh)
    return h


def lognormal_averages(centre, sd):
    """Gaussian trace in V through log10 M = A - B V: log10 M ~ N(A - B c, B sd); with a
    constant Jacobian dw/dlogM follows the trace, so Mw = 10^m·exp((s ln10)²/2) and
    Mn = 10^m·exp(-(s ln10)²/2) [derived]."""
    m, s = A - B * centre, B * sd
    return 10 ** m * math.exp(-((s * LN10) ** 2) / 2), 10 ** m * math.exp((s * LN10) ** 2 / 2)


# ============================================================================ check standards


def cs_table(values_mw, assigned=200000.0):
    rows = []
    for mw in values_mw:
        rows.append({"sample_id": "CS", "role": "check_standard", "product": "CHK", "batch": "",
                     "sequence": "S1", "status": "ok", "Mw [g/mol]": mw, "Mn [g/mol]": mw / 2,
                     "dispersity [-]": 2.0, "assigned Mw [g/mol]": assigned, "assigned Mn [g/mol]": assigned / 2,
                     "outside calibration [% mass]": 0.1})
    rows.append({"sample_id": "P1", "role": "sample", "product": "P", "batch": "B1", "sequence": "S1",
                 "status": "ok", "Mw [g/mol]": 46800.0, "Mn [g/mol]": 23000.0, "dispersity [-]": 2.035,
                 "outside calibration [% mass]": 0.1})
    return pd.DataFrame(rows)


SPECS = specs_from_frame(pd.DataFrame({"product": ["P", "CHK"], "Mw max [g/mol]": [46000.0, None],
                                       "check-standard tolerance [%]": [None, 5.0]}))
CAL = {"R^2 [-]": 0.99999, "standards_table": [{"standard": "S", "residual [%]": 0.5}]}


def test_averaging_trap_second_check_injection_fails_though_the_mean_passes():
    # derived: +0.3 % and +7.8 % of 200000 are 200600 and 215600; their mean 208100 is
    # +4.05 %, inside ±5 %, but the second injection is outside: the sequence fails.
    table = cs_table([200600.0, 215600.0])
    (suit,) = system_suitability(table, CAL, specs=SPECS)
    assert not suit.passed
    by = {c.name: c for c in suit.checks}
    mean = by["check standard CHK: Mw deviation from assigned [%]"]
    assert mean.passed and mean.value == pytest.approx(4.05, abs=1e-9)
    second = by["check standard CHK, injection 2 (CS): Mw deviation from assigned [%]"]
    assert not second.passed and second.value == pytest.approx(7.8, abs=1e-9)
    assert [c.passed for c in suit.check_standards] == [True, False]
    dec = decide(table, SPECS, (suit,))
    verdicts = [(v.sample_id, v.verdict) for v in dec.injections]
    assert verdicts == [("CS", PASS), ("CS", FAIL), ("P1", NOT_REPORTABLE)]
    assert "+7.80 %" in dec.injections[1].reasons[0] and "±5 %" in dec.injections[1].reasons[0]
    # the batch is not reportable and still says what it would be: Mw 46 800 > 46 000 (derived)
    (batch,) = dec.batches
    assert batch.decision == NOT_REPORTABLE and batch.spec_verdict == FAIL
    assert any(r.startswith("would fail") and "46 800" in r and "46 000" in r for r in batch.reasons)


def test_separate_check_standard_tolerances_for_mn_and_mw():
    table = cs_table([204000.0, 204000.0])
    table["Mn [g/mol]"] = [108000.0, 108000.0, 23000.0]  # +8 % on Mn (derived), +2 % on Mw
    specs = specs_from_frame(pd.DataFrame({"product": ["CHK"], "check-standard tolerance Mw [%]": [3.0],
                                           "check-standard tolerance Mn [%]": [10.0]}))
    (suit,) = system_suitability(table, CAL, specs=specs)
    assert suit.passed, suit.reasons()
    specs = specs_from_frame(pd.DataFrame({"product": ["CHK"], "check-standard tolerance Mw [%]": [3.0],
                                           "check-standard tolerance Mn [%]": [7.5]}))
    (suit,) = system_suitability(table, CAL, specs=specs)
    assert {c.name for c in suit.failures} == {
        "check standard CHK, injection 1 (CS): Mn deviation from assigned [%]",
        "check standard CHK, injection 2 (CS): Mn deviation from assigned [%]",
        "check standard CHK: Mn deviation from assigned [%]"}


# ============================================================================ replicates


@pytest.mark.parametrize("k, expected", [(4, 0.170), (8, 0.311)])
def test_worst_duplicate_rule_fails_sound_sequences_as_the_issue_says(k, expected):
    # derived: a duplicate's RSD² / σ² ~ χ²(1); P(s > 3 % | σ = 1.5 %) = P(χ²(1) > 4) = 0.0455,
    # so 1 - 0.9545^k = 0.170 (k = 4) and 0.311 (k = 8). Simulation tolerance 0.01: 20000
    # sequences give a standard error of 0.003.
    assert false_fail_closed_form("worst", [2] * k, 3.0, 1.5) == pytest.approx(expected, abs=0.001)
    assert false_fail_simulated("worst", [2] * k, 3.0, 1.5) == pytest.approx(expected, abs=0.01)
    # the pooled rule with the same limit: P(χ²(k) > 4k), 0.003 for k = 4 (scipy, derived)
    pooled = false_fail_closed_form("pooled", [2] * k, 3.0, 1.5)
    assert pooled < 0.004
    assert false_fail_simulated("pooled", [2] * k, 3.0, 1.5) == pytest.approx(pooled, abs=0.003)


def test_pairs_rule_is_the_repeatability_limit():
    from gpctools.qc import ReplicateGroup, replicate_precision

    # r = 2.8 σ_r = 4.2 % for σ_r = 1.5 % (ISO 5725-6, from memory); a pair 100/104.5 has
    # a range of 100·4.5/102.25 = 4.40 % > 4.2 % (derived)
    res = replicate_precision([ReplicateGroup("A", (100.0, 104.5)), ReplicateGroup("B", (100.0, 101.0))],
                              "Mw", rule="pairs", limit_pct=3.0, sigma_pct=1.5)
    assert res.passed is False and "A range 4.40 % > r = 4.20 %" in res.reason
    # a sound system fails one pair with P(|Z1 - Z2| > 2.8) = 2(1 - Φ(2.8/√2)) = 0.0477 (derived)
    assert false_fail_closed_form("pairs", [2], 3.0, 1.5) == pytest.approx(0.0477, abs=0.0005)


# ============================================================================ roles


def test_unknown_role_is_an_error_listing_the_known_roles(tmp_path):
    table = cs_table([200000.0])
    table.loc[1, "role"] = "blnak"
    with pytest.raises(Exception, match="blank, calibration_standard, replicate"):
        decide(table, SPECS, ())
    from gpctools.method import load_method
    from gpctools.qc.sequence import run_sequence

    m = load_method(write_method(tmp_path))
    (tmp_path / "batch.csv").write_text("sample_id,file,role\nX,x.csv,blnak\n", encoding="utf-8")
    with pytest.raises(InputFormatError, match="unknown role 'blnak'; write one of: sample, check_standard, blank"):
        run_sequence(tmp_path / "batch.csv", m)


# ============================================================================ sequences


@pytest.fixture(scope="module")
def sequence(tmp_path_factory):
    """A sequence: two cocktails, a clean blank, a blank with a ghost peak, a check
    standard, product A (narrow window) and product B (wide window, own method)."""
    d = tmp_path_factory.mktemp("seq")
    write_method(d, shift=0.3)
    write_method(d / "b", shift=0.3, name="method_b.toml",
                 extra="[thresholds]\nlimit_shift = 0.1\n")
    rows = ["sample_id,file,role,product,batch,sequence,standards,assigned Mn [g/mol],assigned Mw [g/mol]"]
    mix = {"MIX-1": STANDARD_VOLUMES[0::2], "MIX-2": STANDARD_VOLUMES[1::2]}
    for sid, vols in mix.items():
        names = "; ".join(f"S{STANDARD_VOLUMES.index(v)}" for v in vols)
        write_trace(d / f"{sid}.csv", GRID, cocktail(vols, noise_seed=len(rows)))
        rows.append(f"{sid},{sid}.csv,calibration_standard,,,Q1,{names},,")
    rng = np.random.default_rng(5)
    blank = 2.0 - 0.02 * (GRID - 8.0) + 0.01 * rng.standard_normal(GRID.size)
    write_trace(d / "blank_clean.csv", GRID, blank)
    write_trace(d / "blank_ghost.csv", GRID, blank + gauss(GRID, 16.5, 0.15, 3.0))
    rows.append("BL-1,blank_clean.csv,blank,,,Q1,,,")
    rows.append("BL-2,blank_ghost.csv,blank,,,Q2,,,")
    mn, mw = lognormal_averages(15.5, 0.5)
    write_trace(d / "cs.csv", GRID, sample_trace(15.5, 0.5, seed=9))
    rows.append(f"CS-1,cs.csv,check_standard,CHK,,Q1,,{mn:.0f},{mw:.0f}")
    rows.append(f"CS-2,cs.csv,check_standard,CHK,,Q2,,{mn:.0f},{mw:.0f}")
    # A and B: a main peak at 15 mL plus a small low-M peak at 19.5 mL
    for sid, product, seq in (("A-1", "A", "Q1"), ("B-1", "B", "Q1"), ("A-2", "A", "Q2")):
        write_trace(d / f"{sid}.csv", GRID, sample_trace(15.0, 0.4, seed=len(rows), extra=((19.5, 0.2, 10.0),)))
        rows.append(f"{sid},{sid}.csv,sample,{product},L{sid},{seq},,,")
    (d / "batch.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (d / "qc.toml").write_text(
        '[products.A]\nlimits = [20000, 50000000]\n'        # V 9.0 to 14.663 + ... (derived below)
        '[products.B]\nlimits = [300, 50000000]\nmethod = "b/method_b.toml"\n'
        '[products.CHK]\nlimits = [1000, 50000000]\n', encoding="utf-8")
    from gpctools.method import load_method
    from gpctools.qc.sequence import run_sequence

    method = load_method(d / "method.toml")
    settings = read_qc_settings(d / "qc.toml", method=method)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        run = run_sequence(d / "batch.csv", method, settings)
    return {"dir": d, "run": run, "method": method, "settings": settings}


def row_of(run, sid):
    t = run.table
    return t[t["sample_id"] == sid].iloc[0]


def test_sequence_is_calibrated_from_its_own_standard_injections(sequence):
    run = sequence["run"]
    cal = run.calibrations["Q1"]
    # derived: each located peak is the Gaussian centre; tolerance 0.003 mL = one slice
    # (the parabola vertex over the top 20 % of a noisy, 0.12 mL wide peak)
    located = sorted(s.peak.volume for s in run.standards if s.sequence == "Q1")
    assert located == pytest.approx(STANDARD_VOLUMES, abs=0.003)
    assert max(abs(r) for r in cal.residuals_pct) < 0.3  # exact line, located within 0.003 mL
    # the method's table is 0.3 mL off; the sequence's calibration recovers the true curve:
    # M(15 mL) = 10^(9 - 4.5) = 31623 g/mol (derived), within 0.3 %
    assert float(cal.M(15.0)) == pytest.approx(10 ** 4.5, rel=0.003)
    assert float(sequence["method"].calibration.M(15.0)) > 1.2 * 10 ** 4.5
    # the check standard processed with the sequence's calibration matches its closed form
    mn, mw = lognormal_averages(15.5, 0.5)
    cs = row_of(run, "CS-1")
    assert cs["Mw [g/mol]"] == pytest.approx(mw, rel=0.01)  # 1 %: limits cut the Gaussian tails
    assert "own standards" in cs["calibration"]
    assert set(row_of(run, "MIX-1")[["status"]]) == {"ok"}
    assert abs(row_of(run, "MIX-1")["worst standard residual [%]"]) < 0.3


def test_blank_with_and_without_a_ghost_peak(sequence):
    run = sequence["run"]
    clean = row_of(run, "BL-1")
    ghost = row_of(run, "BL-2")
    # blanks are never processed as samples: no averages, no error
    assert clean["status"] == "ok" and math.isnan(clean["Mw [g/mol]"])
    # clean: noise 0.01 smoothed over 30 slices, against a product peak of 100 -> about
    # 0.005 %; limit 1 %
    assert clean["blank peak [% of product peak]"] < 0.05
    # ghost: 3.0 on a product peak of 100 (A in Q2) -> 3.0 %; the moving average of 30
    # slices (0.09 mL) lowers a 0.15 mL Gaussian by (0.09/0.15)²/24 = 1.5 % of itself (derived)
    assert ghost["blank peak [% of product peak]"] == pytest.approx(3.0 * (1 - 0.015), abs=0.05)
    assert "16.5" in ghost["blank check"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = evaluate_qc(run.table, specs_from_frame(pd.DataFrame({"product": ["A", "B"],
                                                                   "Mw max [g/mol]": [1e6, 1e6]})),
                          calibration=run.method.calibration, calibrations=run.calibrations,
                          settings=QCSettings(false_alarm_simulations=0))
    verdicts = {(v.sample_id, v.role): v.verdict for v in res.decisions.injections}
    assert verdicts[("BL-1", "blank")] == PASS and verdicts[("BL-2", "blank")] == FAIL
    suit = {s.sequence: s for s in res.suitability}
    assert not suit["Q2"].passed and any("blank BL-2" in r for r in suit["Q2"].reasons())
    assert verdicts[("A-2", "sample")] == NOT_REPORTABLE
    assert run.failed == 0  # a blank never counts as a failed injection


def test_two_products_with_different_windows_in_one_run(sequence):
    run = sequence["run"]
    a, b = row_of(run, "A-1"), row_of(run, "B-1")
    # derived: window [20000, 5e7] g/mol -> V = (9 - log10 M)/0.3: 3.333 ... 15.566 mL;
    # [300, 5e7] -> 3.333 ... 21.742 mL; the limits used are clipped to the record
    # 0.02 mL: the sequence calibration's cubic differs from the exact line by < 0.3 %
    assert a["integration end [mL]"] == pytest.approx(V_of(20000), abs=0.02)
    assert b["integration end [mL]"] == pytest.approx(V_of(300), abs=0.02)
    assert a["M at integration end [g/mol]"] == pytest.approx(20000, rel=1e-6)
    assert a["overrides"] == "limits 20000-50000000 g/mol" and b["overrides"] == "limits 300-50000000 g/mol"
    # B integrates the low-M peak at 19.5 mL, A does not: B's Mn is far lower
    assert b["Mn [g/mol]"] < 0.7 * a["Mn [g/mol]"]
    # every method used is recorded with its SHA-256
    shas = {m.sha256 for m in run.methods.values()}
    assert len(run.methods) == 2 and all(s and len(s) == 64 for s in shas)
    assert b["method file"].endswith("method_b.toml") and len(b["method SHA-256"]) == 64
    assert a["method SHA-256"] != b["method SHA-256"]
    # a row of the batch sheet that sets its own limits wins over the product's window
    from gpctools.qc.sequence import expand_products

    e = run.entries[[x.sample_id for x in run.entries].index("A-1")]
    from dataclasses import replace as _replace

    from gpctools.method import MethodOverrides

    own = _replace(e, overrides=MethodOverrides(limits=(12.0, 18.0)))
    (kept,) = expand_products([own], sequence["settings"])
    assert kept.overrides.limits == (12.0, 18.0) and kept.overrides.limits_M is None
    (expanded,) = expand_products([e], sequence["settings"])
    assert expanded.overrides.limits_M == (20000.0, 50000000.0)


# ============================================================================ trends


NO_CHECK = SuitabilityLimits(require_check_standard=False)


def history_frame(values, dates, label="H"):
    return pd.DataFrame({"batch": [f"{label}{k:02d}" for k in range(len(values))], "product": "P",
                         "date": dates, "Mw [g/mol]": values})


def test_history_shift_after_the_baseline_and_a_point_beyond_3_sigma():
    # 20 baseline points alternating 101/99 (the last at 99): CL 100, MR-bar 2, sigma
    # 2/1.128 = 1.773 (derived). Then 9 points at 101 (z = +0.56 each): nine in a row above
    # the centre line -> N2 at the ninth (H28). The current batch at 106: z = 6/1.773 = 3.38
    # -> N1, and the tenth point in a row above -> N2 again. Limits frozen on the first 20.
    base = [101.0, 99.0] * 10
    shifted = [101.0] * 9
    dates = pd.date_range("2026-01-01", periods=29, freq="D").strftime("%Y-%m-%d").tolist()
    hist = history_frame(base + shifted, dates)
    # two files in the wrong order: the dates put them right
    h1, h2 = hist.iloc[15:], hist.iloc[:15]
    current = pd.DataFrame([{"sample_id": "C1", "role": "sample", "product": "P", "batch": "NOW", "sequence": "S",
                             "date": "2026-03-01", "status": "ok", "Mw [g/mol]": 106.0}])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = evaluate_qc(current, specs_from_frame(pd.DataFrame({"product": ["P"], "Mw max [g/mol]": [200.0]})),
                          calibration=CAL, history=[h1, h2],
                          settings=QCSettings(trend_columns=("Mw [g/mol]",), suitability=NO_CHECK))
    (chart,) = res.trends
    assert chart.labels[:3] == ("H00", "H01", "H02") and chart.labels[-1] == "NOW"
    assert int(chart.sets_limits.sum()) == 20 and chart.sets_limits[:20].all()
    assert chart.centre == 100.0 and chart.sigma == pytest.approx(2 / 1.128, rel=1e-12)
    found = [(v.label, v.rule) for v in chart.violations]
    assert found == [("H28", "N2"), ("NOW", "N1"), ("NOW", "N2")]
    # the expected false-alarm rate of this layout is stated (simulation)
    assert chart.false_alarm is not None and 0 < chart.false_alarm.per_point < 0.05
    # with limits from every point the centre line moves to (20·100 + 9·101 + 106)/30 =
    # 100.47 (derived): the judged points set their own limits
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res_all = evaluate_qc(current, specs_from_frame(pd.DataFrame({"product": ["P"]})), calibration=CAL,
                              history=[h1, h2], settings=QCSettings(trend_columns=("Mw [g/mol]",),
                                                                     trend_limits_from="all",
                                                                     false_alarm_simulations=0,
                                                                     suitability=NO_CHECK))
    assert res_all.trends[0].centre == pytest.approx((2000 + 909 + 106) / 30, rel=1e-12)


def test_false_alarm_rate_of_one_rule_matches_its_closed_form():
    # closed form with known limits: 2(1 - Φ(3)) = 0.0027 (derived); with limits from 500
    # points the estimate adds little. Tolerance 0.0008: estimation of sigma from 500 points
    # and the simulation's standard error (about 0.0001).
    fa = false_alarm_rate([True] * 500 + [False] * 200, NELSON_RULES[:1])
    assert fa.closed_form_known_limits == pytest.approx(0.0027, abs=1e-4)
    assert fa.per_point == pytest.approx(0.0027, abs=0.0008)
    # nine in a row on one side alone, known centre: 2·0.5⁹ = 0.0039 per point once 9 points
    # are in (derived); with a 500-point baseline the simulated rate is close to it
    fa2 = false_alarm_rate([True] * 500 + [False] * 200, NELSON_RULES[1:2])
    assert fa2.per_point == pytest.approx(2 * 0.5**9, abs=0.0012)


def test_baseline_by_dates_and_by_flag():
    from gpctools.qc.settings import settings_from_mapping

    vals = [100.0, 101.0, 99.0, 100.0, 130.0]
    df = history_frame(vals, ["2026-01-01", "2026-01-02", "2026-01-03", "2026-01-04", "2026-02-01"])
    df["baseline"] = ["yes", "yes", "yes", "no", "no"]
    s = settings_from_mapping({"trends": {"baseline": ["2026-01-01", "2026-01-03"], "columns": ["Mw [g/mol]"]}})
    s_flag = settings_from_mapping({"trends": {"baseline": "flag: baseline", "columns": ["Mw [g/mol]"]}})
    for settings in (s, s_flag):
        settings = QCSettings(**{**settings.__dict__, "false_alarm_simulations": 0})
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = evaluate_qc(df.iloc[:0].assign(sample_id=[]), specs_from_frame(pd.DataFrame({"product": ["P"]})),
                              calibration=CAL, history=[df], settings=settings)
        (chart,) = res.trends
        assert list(chart.sets_limits) == [True, True, True, False, False]
        assert chart.centre == 100.0  # derived: mean of 100, 101, 99


# ============================================================================ specs and settings


LONG = """product,quantity,min,max,target,unit,description
LC-1,Mw [g/mol],90000,112000,100000,,grade one
LC-1,Mn,50,70,,kg/mol,
LC-1,dispersity,1.4,1.9,,,
LC-1,mass below 1000 g/mol [%],,2,,,
CHK,check-standard tolerance,,5,,%,check standard
CHK,check-standard tolerance Mn,,8,,%,
"""


def test_long_form_spec_sheet(tmp_path):
    p = tmp_path / "spec_long.csv"
    p.write_text(LONG, encoding="utf-8")
    specs = read_specs(p)
    assert specs.form == "long"
    lc = specs.get("lc-1")
    assert lc.limit("Mw").min == 90000.0 and lc.limit("Mw").target == 100000.0
    assert lc.limit("Mn").max == 70000.0  # derived: 70 kg/mol
    assert lc.limit("dispersity").max == 1.9
    assert lc.limit("mass below 1000 g/mol [%]").max == 2.0
    chk = specs.get("CHK")
    assert chk.tolerance("Mw") == 5.0 and chk.tolerance("Mn") == 8.0
    # judged generically by name: a results column with the number written differently
    table = pd.DataFrame([{"sample_id": "X", "role": "sample", "product": "LC-1", "batch": "B", "status": "ok",
                           "Mw [g/mol]": 100000.0, "Mn [g/mol]": 60000.0, "dispersity [-]": 1.67,
                           "mass below 1 000 g/mol [%]": 2.5}])
    dec = decide(table, specs, ())
    assert dec.batches[0].decision == FAIL
    assert any("mass below 1000 g/mol" in r and "above max 2" in r for r in dec.batches[0].reasons)
    # the wide template and the long template mean the same limits
    root = Path(__file__).resolve().parents[1]
    wide = read_specs(root / "gpctools" / "templates" / "spec_limits.csv")
    long_ = read_specs(root / "gpctools" / "templates" / "spec_limits_long.csv")
    assert [(p.product, p.limits, p.tolerance("Mw")) for p in wide.products] == \
        [(p.product, p.limits, p.tolerance("Mw")) for p in long_.products]


@pytest.mark.parametrize("line, column, text", [
    ("LC-1,Mx [g/mol],1,2,,,", "quantity", "unknown quantity 'Mx [g/mol]'"),
    ("LC-2,Mw [g/mol],200000,100000,,,", "min", "above max"),
    ("LC-2,Mw,1,2,,kg/L,", "quantity", "does not fit Mw"),
    ("LC-1,Mw [g/mol],1,2,,,", "quantity", "given twice"),
])
def test_long_form_errors_name_row_and_column(tmp_path, line, column, text):
    p = tmp_path / "s.csv"
    p.write_text(LONG + line + "\n", encoding="utf-8")
    with pytest.raises(InputFormatError) as info:
        read_specs(p)
    assert info.value.row == 8 and info.value.column == column and text in info.value.message


def test_qc_settings_files_toml_and_sheet(tmp_path):
    root = Path(__file__).resolve().parents[1]
    s = read_qc_settings(root / "gpctools" / "templates" / "qc_settings.toml")
    assert s.suitability.replicate_rule == "pooled" and [r.code for r in s.rules] == ["N1", "N2"]
    assert s.source and len(s.sha256) == 64
    sheet = read_qc_settings(root / "gpctools" / "templates" / "qc_settings.csv")
    assert sheet.suitability == s.suitability and sheet.rules == s.rules
    bad = tmp_path / "bad.toml"
    bad.write_text("[suitability]\nmax_calibration_residual_pct = -2\n", encoding="utf-8")
    with pytest.raises(MethodError) as info:
        read_qc_settings(bad)
    assert info.value.key == "suitability.max_calibration_residual_pct" and "positive" in info.value.message
    bad.write_text("[suitability]\nmax_residual = 2\n", encoding="utf-8")
    with pytest.raises(MethodError, match="unknown key 'max_residual'"):
        read_qc_settings(bad)
    bad.write_text('[trends]\nrules = "wild"\n', encoding="utf-8")
    with pytest.raises(MethodError, match="unknown rule set 'wild'"):
        read_qc_settings(bad)


# ============================================================================ the bundled sequence, CLI


def test_bundled_qc_sequence_is_what_the_generator_writes(tmp_path, sample_runs_dir):
    from gpctools.demo import write_qc_sequence

    write_qc_sequence(tmp_path)
    theirs = sorted(p.relative_to(tmp_path) for p in tmp_path.rglob("*") if p.is_file())
    ours = sorted(p.relative_to(sample_runs_dir / "qc_sequence")
                  for p in (sample_runs_dir / "qc_sequence").rglob("*") if p.is_file())
    assert theirs == ours
    for rel in ours:
        assert (tmp_path / rel).read_bytes() == (sample_runs_dir / "qc_sequence" / rel).read_bytes(), rel


def test_cli_qc_on_the_bundled_sequence_with_defaults(sample_runs_dir, tmp_path, cli_runner):
    """A new analyst's run: batch sheet, method, long spec sheet, a history folder, no
    settings file. Verdicts by design of the scenario (gpctools.demo.QC_INJECTIONS): true
    Mw = Mp·sqrt(D) [derived] is 214 767 (B2612-01), 225 076 (-02) and 243 403 g/mol (-03),
    against a max of 240 000: -03 fails; the history's last nine points run 1.5 SD high (N2)
    and -02 and -03 lie beyond 3 sigma of the first 20 points (N1)."""
    import shutil

    from gpctools.cli import app

    d = tmp_path / "seq"
    shutil.copytree(sample_runs_dir / "qc_sequence", d)
    out = tmp_path / "out"
    res = cli_runner.invoke(app, ["qc", str(d / "batch.csv"), "-m", str(d / "method.toml"), "-s",
                                  str(d / "spec_limits.csv"), "--history", str(d / "history"), "-o", str(out)])
    assert res.exit_code == 0, res.output
    text = res.output
    assert "B2612-01: pass" in text and "B2612-02: pass" in text and "B2612-03: fail" in text
    import re

    # true Mw 243 403 g/mol; the round trip recovers it within 0.5 % (noise, limits)
    assert re.search(r"Mw 24[23] \d{3} g/mol above max 240 000 g/mol", text)
    for line in ("CAL-MIX-A (calibration_standard, sheet row 2): pass", "BLANK-1 (blank, sheet row 5): pass",
                 "CHK-1 (check_standard, sheet row 6): pass", "B2612-03 (replicate, sheet row 12): fail"):
        assert line in text
    assert "breaks N2" in text and "B2612-02 breaks N1" in text and "B2612-03 breaks N1" in text
    for f in ("qc_report.html", "qc_report.xlsx", "results.csv", "audit.json"):
        assert (out / f).is_file()
    import json

    audit = json.loads((out / "audit.json").read_text(encoding="utf-8"))
    used = audit["settings"]["methods used"]
    assert len(used) == 1 and all(len(v["sha256"]) == 64 for v in used.values())
    # the same history as a quoted glob, with the lab's settings file: the same verdicts
    res2 = cli_runner.invoke(app, ["qc", str(d / "batch.csv"), "-m", str(d / "method.toml"), "-s",
                                   str(d / "spec_limits.csv"), "--history", str(d / "history" / "*.csv"),
                                   "--settings", str(d / "qc_settings.toml"), "-o", str(tmp_path / "out2")])
    assert res2.exit_code == 0, res2.output
    assert "B2612-03: fail" in res2.output and "B2612-03 breaks N1" in res2.output
    html = (tmp_path / "out2" / "qc_report.html").read_text(encoding="utf-8")
    assert html.count('class="sample-page"') == 3 and "Review and sign-off" in html
    assert "reference LC-180" in html or "reference distribution" in html
    _open_in_chromium(tmp_path / "out2" / "qc_report.html", tmp_path)
    bad = cli_runner.invoke(app, ["qc", str(d / "batch.csv"), "-m", str(d / "method.toml"), "-s",
                                  str(d / "spec_limits.csv"), "--history", str(d / "nothing*.csv"), "-o",
                                  str(tmp_path / "out3")])
    assert bad.exit_code == 2 and "no file matches" in bad.output


def _open_in_chromium(html: Path, tmp: Path) -> None:
    """The sequence report as a browser shows it (skipped without Chromium outside CI)."""
    import os
    import shutil
    import subprocess

    exe = next((shutil.which(n) for n in ("chromium", "chromium-browser", "google-chrome") if shutil.which(n)), None)
    if exe is None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail("CI=true but Debian's 'chromium' is not installed")
        return
    base = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-sync",
            "--disable-background-networking", f"--user-data-dir={tmp / 'chromium-profile'}"]
    dom = subprocess.run([*base, "--dump-dom", html.as_uri()], capture_output=True, text=True, timeout=120,
                         check=False).stdout
    for sec in ("verdicts", "blanks", "sample-pages", "trends", "calibration"):
        assert f'id="{sec}"' in dom
    assert dom.count('class="sample-page"') == 3 and dom.count("<img") >= 15
    assert "B2612-03" in dom and "Review and sign-off" in dom


def test_templates_of_a_sequence_read(templates_dir):
    from gpctools.batch import read_batch_sheet
    from gpctools.qc.standards_run import injection_standards, read_standard_mix

    entries = read_batch_sheet(templates_dir / "batch_sequence.csv")
    roles = {e.role for e in entries}
    assert roles == {"calibration_standard", "blank", "check_standard", "sample", "replicate"}
    assert all(e.problem is None for e in entries)
    assert read_standard_mix(templates_dir / "standards_mix.csv", "CAL-C") == [
        ("PS 480k", 480000.0), ("PS 42k", 42000.0), ("PS 3.2k", 3200.0)]
    from gpctools.method import load_method

    cal = load_method(templates_dir / "method.toml").calibration
    name, mp = injection_standards(entries[0].metadata, "CAL-A", cal, templates_dir)[0]
    assert name == "PS 2.5M" and mp == pytest.approx(2520000.0, rel=1e-12)  # 10**log10 round trip
    hist = pd.read_csv(templates_dir / "history.csv")
    from gpctools.qc import trend_points

    pts = trend_points(hist, "Mw [g/mol]", flag_column="baseline")
    assert len(pts) == 24 and sum(p.flag for p in pts) == 20 and all(p.date is not None for p in pts)


def test_review_plot_draws_on_the_callers_axes():
    from matplotlib.figure import Figure

    from gpctools.report.plots import plot_distribution_review, plot_trace_review, review_figure

    V = GRID
    h = sample_trace(15.0, 0.4)
    fig = Figure()
    ax1, ax2 = fig.subplots(2)
    assert plot_trace_review(V, h, baseline=2.0 - 0.02 * (V - 8.0), baseline_windows=((9, 10), (20, 21)),
                             limits=(11.0, 19.5), exclusions=((22.0, 23.0),), marker=22.6, ax=ax1) is ax1
    M = 10 ** logM(V)
    assert plot_distribution_review(M, h, marks={"Mn": 2e4, "Mw": 4e4}, reference=(M, h), ax=ax2) is ax2
    assert len(ax1.lines) >= 4 and ax2.get_xscale() == "log"
    full = review_figure({"volume": V, "signal": h}, {"M": M, "dwdlogM": h})
    assert len(full.axes) == 2


def test_qc_settings_in_the_method_file(tmp_path):
    from gpctools.method import load_method

    path = write_method(tmp_path, extra='[thresholds]\nstandard_residual_pct = 4.0\n'
                                         '[qc.suitability]\ncheck_standard_tolerance_Mw_pct = 3.0\n'
                                         '[qc.trends]\nrules = "western-electric"\nbaseline = 25\n')
    s = QCSettings.from_method(load_method(path))
    assert s.suitability.check_standard_tolerance_Mw_pct == 3.0
    assert s.suitability.max_calibration_residual_pct == 4.0  # the method's threshold
    assert [r.code for r in s.rules] == ["WE1", "WE2", "WE3", "WE4"]
    assert s.baseline is not None and s.baseline.kind == "count" and s.baseline.count == 25
    bad = write_method(tmp_path / "bad", extra='[qc.suitability]\ncheck_tolerance = 3.0\n')
    with pytest.raises(MethodError) as info:
        QCSettings.from_method(load_method(bad))
    assert info.value.key == "qc.suitability.check_tolerance"


def test_sample_judged_per_injection_and_as_a_mean():
    # derived: 45 000 and 46 800 against max 46 000: the mean 45 900 passes, the second
    # injection fails; by default the sample fails and says why, with judge="mean" it passes
    rows = [{"sample_id": "P1", "role": r, "product": "P", "batch": "B1", "sequence": "S1", "status": "ok",
             "Mw [g/mol]": mw} for r, mw in (("sample", 45000.0), ("replicate", 46800.0))]
    table = pd.DataFrame(rows)
    dec = decide(table, SPECS, ())
    (sample,) = dec.samples
    assert sample.decision == FAIL and sample.values["Mw [g/mol]"] == 45900.0
    assert sample.reasons == ("the mean is within limits but an injection is not",
                              "injection 2 of 2 (P1): Mw 46 800 g/mol above max 46 000 g/mol")
    assert [v.verdict for v in dec.injections] == [PASS, FAIL]
    assert decide(table, SPECS, (), judge="mean").samples[0].decision == PASS


def test_history_without_product_column_and_other_date_spellings():
    # a history table of reported values only: batch, date (day.month.year), Mw; no
    # product, sample_id, role or status. Its points join the current run's only product.
    hist = pd.DataFrame({"batch": ["H2", "H1", "H3"], "date": ["03.01.2026", "02.01.2026", "04.01.2026"],
                         "Mw [g/mol]": [101.0, 99.0, 100.0]})
    current = pd.DataFrame([{"sample_id": "C1", "role": "sample", "product": "P", "batch": "NOW",
                             "sequence": "S", "date": "2026-02-01", "status": "ok", "Mw [g/mol]": 100.5}])
    settings = QCSettings(trend_columns=("Mw [g/mol]",), suitability=NO_CHECK, false_alarm_simulations=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = evaluate_qc(current, specs_from_frame(pd.DataFrame({"product": ["P"]})), calibration=CAL,
                          history=[hist], settings=settings)
    (chart,) = res.trends
    assert chart.group == "P" and chart.labels == ("H1", "H2", "H3", "NOW")  # by date
    assert any("no 'product' column" in w for w in res.warnings)
    # a date that reads two ways is not guessed: a warning, and the file order is kept
    hist["date"] = ["03/01/2026", "02/01/2026", "04/01/2026"]
    with pytest.warns(Warning, match="is not a date"):
        res = evaluate_qc(current, specs_from_frame(pd.DataFrame({"product": ["P"]})), calibration=CAL,
                          history=[hist], settings=settings)
    assert res.trends[0].labels[:3] == ("H2", "H1", "H3")


def test_a_replicate_with_an_id_of_its_own_joins_the_sample_of_its_batch():
    # B1 and its replicate written B1-R: one sample of two injections (RSD derived:
    # 100·sd(100000, 102000)/101000 = 1.40 %); a second sample in another batch stays apart
    rows = [{"sample_id": s, "role": r, "product": "P", "batch": b, "sequence": "S1", "status": "ok",
             "Mw [g/mol]": mw, "Mn [g/mol]": mw / 2} for s, r, b, mw in
            (("B1", "sample", "L1", 100000.0), ("B1-R", "replicate", "L1", 102000.0),
             ("B2", "sample", "L2", 101000.0))]
    table = pd.DataFrame(rows)
    dec = decide(table, specs_from_frame(pd.DataFrame({"product": ["P"], "Mw max [g/mol]": [2e5]})), ())
    assert [(s.sample_id, s.injections) for s in dec.samples] == [("B1", 2), ("B2", 1)]
    (suit,) = system_suitability(table, CAL, limits=NO_CHECK)
    (rep,) = [r for r in suit.replicates if r.quantity == "Mw"]
    assert [(g.key, g.n) for g in rep.groups] == [("B1", 2)]
    assert rep.value == pytest.approx(100 * np.std([100000, 102000], ddof=1) / 101000, rel=1e-12)


def test_standards_are_found_beside_a_marker_and_a_system_peak():
    from gpctools.qc.standards_run import locate_marker, locate_peaks

    # three standards (derived centres 12, 15, 18 mL), a positive marker at 22.6 mL taller
    # than any standard and a solvent peak at 24.5 mL: only the standards count
    h = cocktail((12.0, 15.0, 18.0)) + gauss(GRID, 22.6, 0.08, 120.0) + gauss(GRID, 24.5, 0.2, 150.0)
    peaks = locate_peaks(GRID, h, 3, exclusions=((22.2, 23.0),), search=(10.0, 21.0))
    # tolerance 0.003 mL: one slice
    assert [p.volume for p in peaks] == pytest.approx([12.0, 15.0, 18.0], abs=0.003)
    assert all(0 < p.stderr < 0.003 and p.points >= 5 for p in peaks)
    assert locate_marker(GRID, h, (22.2, 23.0)) == pytest.approx(22.6, abs=0.003)
    assert locate_marker(GRID, cocktail((12.0,)), (22.2, 23.0)) is None  # no marker: no correction
    with pytest.raises(Exception, match="found 3 peak"):
        locate_peaks(GRID, h, 4, exclusions=((22.2, 23.0),), search=(10.0, 21.0))


def test_blank_subtraction_removes_a_ghost_the_sample_shares(tmp_path):
    from dataclasses import replace as _replace

    from gpctools.method import load_method
    from gpctools.qc.sequence import run_sequence

    method = load_method(write_method(tmp_path, shift=0.0))
    rng = np.random.default_rng(11)
    base = 2.0 - 0.02 * (GRID - 8.0)
    ghost = gauss(GRID, 17.0, 0.15, 4.0)
    write_trace(tmp_path / "blank.csv", GRID, base + ghost + 0.01 * rng.standard_normal(GRID.size))
    write_trace(tmp_path / "clean.csv", GRID, sample_trace(15.0, 0.4, seed=3))
    write_trace(tmp_path / "ghosted.csv", GRID, sample_trace(15.0, 0.4, seed=4) + ghost)
    (tmp_path / "batch.csv").write_text(
        "sample_id,file,role,product,batch,sequence\nBL,blank.csv,blank,,,S\n"
        "CLEAN,clean.csv,sample,P,L1,S\nGHOST,ghosted.csv,sample,P,L2,S\n", encoding="utf-8")
    settings = QCSettings(products=(), blank_subtraction=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = run_sequence(tmp_path / "batch.csv", method, settings).table.set_index("sample_id")
        sub = run_sequence(tmp_path / "batch.csv", method,
                           _replace(settings, blank_subtraction=True)).table.set_index("sample_id")
    # derived: the ghost (4 % of the peak at 17 mL, M = 10^(9 - 5.1) = 7943 g/mol) drags Mn
    # down by several per cent; subtracting the blank gives back the clean sample's Mn
    # (0.5 %: two independent noise draws and the blank's own noise)
    assert plain.loc["GHOST", "Mn [g/mol]"] < 0.97 * plain.loc["CLEAN", "Mn [g/mol]"]
    assert sub.loc["GHOST", "Mn [g/mol]"] == pytest.approx(plain.loc["CLEAN", "Mn [g/mol]"], rel=0.005)
    assert "blank subtracted" in sub.loc["GHOST", "warnings"]
    assert plain.loc["BL", "blank peak [% of product peak]"] > 1.0  # and the blank itself fails


def test_per_peak_limits_and_uncertainty_columns_by_name(tmp_path):
    from gpctools import columns as C
    from gpctools.report.qc_pages import _averages_table, uncertainty_columns

    p = tmp_path / "s.csv"
    p.write_text("product,quantity,min,max,target,unit,description\n"
                 f"P,{C.peak_column(1, 'Mw')},100000,,,,\nP,{C.mass_fraction_column('below', 1000)},,1.5,,,\n",
                 encoding="utf-8")
    specs = read_specs(p)
    row = {"sample_id": "X", "role": "sample", "product": "P", "batch": "B", "status": "ok",
           "Mn [g/mol]": 50000.0, "Mw [g/mol]": 100000.0, C.peak_column(1, "Mw"): 99000.0,
           C.mass_fraction_column("below", 1000): 1.2, C.uncertainty_column("Mn"): 0.8,
           C.uncertainty_column("Mn", "noise"): 0.1}
    dec = decide(pd.DataFrame([row]), specs, ())
    # derived: 99 000 is below the per-peak minimum 100 000; 1.2 % is within 1.5 %
    assert dec.batches[0].decision == FAIL
    assert any("peak 1 Mw 99 000 g/mol below min 100 000 g/mol" in r for r in dec.batches[0].reasons)
    assert uncertainty_columns(row) == {"Mn": "u(Mn) [%]"}  # the combined one, not its parts
    table = _averages_table(pd.DataFrame([row]), [0])
    assert list(table.columns[:4]) == ["injection", "status", "Mn [g/mol]", "u(Mn) [%]"]
