"""Acceptance of the low-molar-mass diagnosis (issue 13): single causes, simulated with the
kinetic scheme, ranked first with a clear verdict, with and without a normal batch.

How the cases are made, and why the check is not circular
---------------------------------------------------------
The "plant" runs with true kinetics that differ from the bundled tables within their
uncertainty (k_t 0.8 times the tabulated value, f 0.85 times: our choice). A lot is the
steady-state model of :func:`gpctools.kinetics.evaluate` at those true parameters, with
one cause applied (an impurity's Mayo term, a factor on the radical flux, a temperature
rise, a retarder's radical loss, less monomer), or the true lot with a measurement fault
applied to its averages (an uncorrected flow error, a low-M artefact). The model itself
is checked against closed forms and an independent integration of the radical balance in
tests/test_kinetics.py (DPn ∝ [M]/[I]^½, R_p ∝ [I]^½, R_p·DPn constant, the steady state
of d[R•]/dt), so the cases rest on checked physics, not on the diagnosis.

Configurations:

- **with a normal batch**: the recipe holds only the tabulated values; a normal lot of
  the same recipe (true kinetics, no cause) is given. The diagnosis must learn the true
  kinetics from it.
- **without a normal batch**: the recipe gives the plant's parameters (k_p, k_d, f, k_t,
  δ, C_M, the solvent's C), taken as exact.

The lab measures R_p with 3 % repeatability (stated in the recipe), Mn and Mw with the
default 4 % and 3 %, and records its SEC checks (check standard +0.5 %, Mn shift at the
low-M limit 0.3 %, outside calibration 0.05 %; our choice of a clean sequence).
"""

from __future__ import annotations

import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from gpctools.kinetics import Recipe, diagnose, evaluate, resolve_parameters
from gpctools.kinetics import hypotheses as H

BASE = {
    "label": "acceptance case",
    "T [°C]": 60.0,
    "monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
    "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02},
    "solvent": [{"name": "toluene", "concentration [mol/L]": 3.0}],
    "checks": {"check standard deviation [%]": 0.5, "Mn shift, low-M limit -0.2 mL [%]": 0.3,
               "outside calibration [% mass]": 0.05},
    "uncertainty": {"R_p [%]": 3.0},
}
C_THIOL = 14.8  # published: Carraher, 1-dodecanethiol in styrene at 60 °C (the bundled row)
BV = 10.0  # B·V of the default flow sensitivity: 0.4 decades/mL × 25 mL (typical)


def build(**changes) -> dict:
    d = json.loads(json.dumps(BASE))
    for k, v in changes.items():
        d[k] = {**d[k], **v} if isinstance(v, dict) and isinstance(d.get(k), dict) else v
    return d


P_TAB = resolve_parameters(Recipe.from_dict(build()))
P_TRUE = replace(P_TAB, k_t=P_TAB.k_t * 0.8, f=P_TAB.f * 0.85)  # our choice, within σ
S_TRUE = evaluate(P_TRUE)


def given(p) -> dict:
    """The plant's parameters written into the recipe (taken as exact)."""
    return {"monomer": {"k_p [L/mol/s]": p.k_p, "C_M [-]": p.C_M},
            "initiator": {"k_d [1/s]": p.k_d, "f [-]": p.f},
            "termination": {"k_t [L/mol/s]": p.k_t, "delta [-]": p.delta},
            "solvent": [{"name": "toluene", "concentration [mol/L]": 3.0,
                         "C [-]": p.transfer[0].C}]}


def lot(p, *, Mn_factor: float = 1.0, **perturbation) -> dict:
    """Measured values of a lot: the model at p, perturbed; Mn × Mn_factor (artefacts)."""
    s = evaluate(p, **perturbation)
    Mn = s.DPn * p.M0
    return {"Mn [g/mol]": Mn * Mn_factor, "Mw [g/mol]": Mn * s.dispersity,
            "R_p [mol/L/s]": s.R_p}


def zeta(h: float) -> float:
    """Radical loss that takes [R•] to h times its value [1/s] (hypotheses module doc)."""
    return 2.0 * S_TRUE.k_t * S_TRUE.radicals * (1.0 - h * h) / h


FLOW_EPS = 0.005  # a pump 0.5 % slow, not corrected (our choice)
FLOW_FACTOR = 10 ** (-BV * FLOW_EPS)  # every average × 10^(−B·V·ε) [derived, docs/science.md, section 2]

#: cause -> (perturbation of the lot, extra recipe keys); magnitudes are our choice, each a
#: common size of that fault: 40 ppm of a thiol, a double initiator charge, 10 K, a
#: retarder that slows the batch by 30 %, a 10 % monomer shortfall, a 0.5 % pump error,
#: a low-M artefact that takes 25 % off Mn.
CASES = {
    "transfer": ({"extra_transfer": 40e-6 * C_THIOL}, {"candidate": [{"name": "1-dodecanethiol"}]}),
    "initiator": ({"radical_flux_factor": 2.0}, {}),
    "temperature": ({"dT": 10.0}, {}),
    "retarder": ({"retarder": zeta(0.7)}, {}),
    "dilution": ({"monomer_factor": 0.9}, {}),
    "flow": ({}, {"checks": {"flow marker observed [mL]": 22.60 * (1 + FLOW_EPS),
                             "flow marker reference [mL]": 22.60,
                             "check standard deviation [%]": 100 * (FLOW_FACTOR - 1)}}),
    "limit": ({"Mn_factor": 0.75}, {"checks": {"Mn shift, low-M limit -0.2 mL [%]": 9.0}}),
}


def case_recipe(cause: str, config: str) -> Recipe:
    pert, extra = CASES[cause] if cause != "clean" else ({}, {})
    meas = lot(P_TRUE, **pert)
    if cause == "flow":  # every average moved by the uncorrected flow error
        meas["Mn [g/mol]"] *= FLOW_FACTOR
        meas["Mw [g/mol]"] *= FLOW_FACTOR
    kw = {**extra, "measured": meas}
    if config == "normal batch":
        kw["normal_batch"] = lot(P_TRUE)
    else:
        for k, v in given(P_TRUE).items():
            kw[k] = {**kw[k], **v} if isinstance(kw.get(k), dict) else v
    return Recipe.from_dict(build(**kw))


@pytest.mark.parametrize("config", ["normal batch", "given parameters"])
@pytest.mark.parametrize("cause", list(CASES))
def test_single_cause_is_first_with_a_clear_verdict(cause, config):
    d = diagnose(case_recipe(cause, config))
    assert d.top.key == cause, [(c.key, round(c.share, 1)) for c in d.causes[:3]]
    assert d.verdict == "clear", [(c.key, round(c.share, 1)) for c in d.causes[:3]]
    assert d.top.plausible


@pytest.mark.parametrize("config", ["normal batch", "given parameters"])
def test_fitted_values_come_back(config):
    # noise-free lots: each cause's own parameter is recovered. Tolerances: with a normal
    # batch the expected values carry the normal lot's measurement uncertainty through the
    # parameters' prior pull, a few tenths of a percent on R_p and Mn; exact without.
    tol = 0.02 if config == "normal batch" else 1e-3
    want = {"transfer": 40e-6 * C_THIOL, "initiator": 2.0, "dilution": 0.9,
            "flow": FLOW_EPS}
    for cause, truth in want.items():
        d = diagnose(case_recipe(cause, config))
        assert d.top.value == pytest.approx(truth, rel=5 * tol if cause == "flow" else tol), cause
    t = diagnose(case_recipe("temperature", config)).top
    assert t.value == pytest.approx(10.0, abs=50 * tol)  # K; same reason


@pytest.mark.parametrize("config", ["normal batch", "given parameters"])
def test_impurity_level_within_15_percent(config):
    # acceptance of issue 13: the level of the named impurity comes back within 15 %
    d = diagnose(case_recipe("transfer", config))
    thiol = next(i for i in d.impurities if i.name == "1-dodecanethiol")
    assert thiol.ppm_mol == pytest.approx(40.0, rel=0.15)
    assert thiol.ppm_mol_low < 40.0 < thiol.ppm_mol_high  # the 95 % interval covers it
    assert thiol.relation == "instantaneous"


@pytest.mark.parametrize("config", ["normal batch", "given parameters"])
def test_clean_case_gives_no_strong_cause(config):
    d = diagnose(case_recipe("clean", config))
    assert d.verdict == "no strong cause" and d.strong_cause is None
    assert d.top.key == "none"


def test_tables_only_large_causes_are_clear_and_moderate_ones_never_wrong():
    # Without a normal batch and with tabulated parameters only, the expected Mn is
    # uncertain by about ±26 % (k_t's spread between sources, f and k_d from memory):
    # large causes are still clear; moderate ones may come out unresolved, but never as a
    # clear verdict for the wrong cause. The truth here is the tables themselves.
    s0 = evaluate(P_TAB)
    z = 2.0 * s0.k_t * s0.radicals * (1 - 0.5**2) / 0.5
    large = {"transfer": {"extra_transfer": 300e-6 * C_THIOL}, "temperature": {"dT": 10.0},
             "retarder": {"retarder": z}}
    for cause, pert in large.items():
        d = diagnose(Recipe.from_dict(build(measured=lot(P_TAB, **pert))))
        assert (d.top.key, d.verdict) == (cause, "clear"), cause
    moderate = [("transfer", {"extra_transfer": 20e-6 * C_THIOL}),
                ("initiator", {"radical_flux_factor": 1.5}), ("dilution", {"monomer_factor": 0.9}),
                ("temperature", {"dT": 3.0}), ("none", {})]
    for cause, pert in moderate:
        d = diagnose(Recipe.from_dict(build(measured=lot(P_TAB, **pert))))
        assert d.verdict != "clear" or d.top.key == cause, (cause, d.top.key)
        assert any("without a normal batch the expected Mn is uncertain" in n for n in d.notes)


def test_retarder_and_dilution_are_separated_by_plausibility(monkeypatch):
    # A mild retarder (radicals × 0.85) with the default 10 % rate uncertainty: the data
    # alone let dilution explain much of it with a 25 % monomer shortfall; that is outside
    # the plausible range (common practice: charging errors of a few percent, losses up to
    # 10 %), and the penalty settles it.
    r = Recipe.from_dict(build(measured=lot(P_TRUE, retarder=zeta(0.85)),
                               normal_batch=lot(P_TRUE), uncertainty={"R_p [%]": 10.0}))
    d = diagnose(r)
    dil = d.cause("dilution")
    assert d.top.key == "retarder" and d.verdict == "clear"
    assert not dil.plausible and dil.penalty > 1.0 and dil.value < 0.9
    assert dil.share < 1.0
    monkeypatch.setattr(H.Dilution, "prior_range", None)
    flat = diagnose(r)
    assert flat.cause("dilution").share > 20 * dil.share  # without the plausibility prior
    assert flat.cause("retarder").share < d.cause("retarder").share


def test_no_cause_explains_an_implausible_shortfall_on_its_own():
    # Only Mn measured, 35 % low: every chemistry cause fits it exactly, so only
    # plausibility can rank them. Dilution needs g = 0.65 (outside 0.9-1) and pays for it.
    r = Recipe.from_dict(build(measured={"Mn [g/mol]": lot(P_TRUE)["Mn [g/mol]"] * 0.65},
                               normal_batch=lot(P_TRUE)))
    d = diagnose(r)
    dil = d.cause("dilution")
    # g = 0.65 is 6.5 tail scales outside (ln(0.9/0.65)/0.05 [derived]); the fit settles
    # part-way, paying both in penalty and in χ²
    assert not dil.plausible and dil.penalty > 4.0 and dil.chi2 > 4.0
    assert dil.share < 0.01 * d.cause("retarder").share


# ------------------------------------------------------------------ measured noise


def test_noisy_lots_keep_the_right_cause_first():
    # Measurement noise at the stated uncertainties (R_p 3 %, Mn 4 %, Mw 3 %; seed 13), 12
    # replicate lots per cause with a noisy normal batch. bench/bench_diagnosis.py measured
    # on 200 lots per cause (seed 20260613; docs/science.md, section 9.4): right cause
    # first 78 % (transfer), 99.5 % (initiator), 100 % (retarder); a clean lot judged
    # "clear" 5 %. Thresholds from the binomial distribution at those rates, each failing by
    # chance in at most 0.2 % [derived]: transfer at least 5 of 12 (P(X <= 4 | 0.78) =
    # 0.1 %), the others at least 10 of 12, clean lots at most 3 clear verdicts
    # (P(X >= 4 | 0.05) = 0.2 %).
    rng = np.random.default_rng(13)
    sig = {"R_p [mol/L/s]": 0.03, "Mn [g/mol]": 0.04, "Mw [g/mol]": 0.03}

    def noisy(values: dict) -> dict:
        return {k: v * math.exp(sig[k] * rng.standard_normal()) for k, v in values.items()}

    need = {"transfer": 5, "initiator": 10, "retarder": 10}
    for cause, at_least in need.items():
        pert, extra = CASES[cause]
        hits = 0
        for _ in range(12):
            r = Recipe.from_dict(build(**extra, measured=noisy(lot(P_TRUE, **pert)),
                                       normal_batch=noisy(lot(P_TRUE))))
            hits += diagnose(r).top.key == cause
        assert hits >= at_least, (cause, hits)
    clear = sum(diagnose(Recipe.from_dict(build(measured=noisy(lot(P_TRUE)),
                                                normal_batch=noisy(lot(P_TRUE))))).verdict
                == "clear" for _ in range(12))
    assert clear <= 3


# ------------------------------------------------------------------ the CLI on exports


def _exports(folder: Path, lots: dict, *, additive: float = 0.0) -> Path:
    """Slice exports of the lots' instantaneous distributions through the demo calibration
    (gpctools.simulate), a batch sheet, and a method with careless low-M limits."""
    from gpctools import simulate
    from gpctools.demo import write_chromatogram

    cal = simulate.default_calibration()
    (folder / "exports").mkdir(parents=True, exist_ok=True)
    rows = ["sample_id,file,role"]
    for name, (state, extra_low) in lots.items():
        f = state.distribution(P_TRUE.M0)
        if extra_low:  # a low-M additive (M about 1 000 g/mol, log-normal) by mass
            lowm = simulate.lognormal(1000.0, 1.05)
            f = simulate.mixture([(1.0 - extra_low, f), (extra_low, lowm)])
        V, h = simulate.chromatogram(f, cal, height=100.0, baseline_offset=0.3, noise=0.005,
                                     extra_peaks=((22.60, 0.08, 12.0),), seed=7)
        write_chromatogram(folder / "exports" / f"{name}.csv", V, h)
        rows.append(f"{name},exports/{name}.csv,sample")
    (folder / "batch.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    names, Mp, Vs = zip(*simulate.DEFAULT_STANDARDS, strict=True)
    (folder / "standards.csv").write_text(
        "name,Mp [g/mol],volume [mL]\n" + "".join(f"{n},{m},{v}\n" for n, m, v in
                                                   zip(names, Mp, Vs)), encoding="utf-8")
    (folder / "method.toml").write_text(
        'name = "acceptance"\nsample_polymer = "polystyrene"\n[flow]\nrate = 1.0\n'
        '[flow_marker]\nreference = 22.60\nsearch = [22.2, 23.0]\n'
        '[baseline]\nwindows = [[9.0, 10.0], [23.4, 24.4]]\n'
        # careless: the low-M limit reaches into the additive
        '[integration]\nlimits = [11.5, 21.9]\nexclude = [[22.0, 23.2]]\n'
        '[calibration]\norder = 3\nstandard_polymer = "polystyrene"\n'
        'standards = "standards.csv"\n', encoding="utf-8")
    return folder


def _toml(d: dict) -> str:
    """A recipe dict as TOML text (scalars, tables, arrays of tables: what recipes use)."""
    def val(v) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, list):
            return "[" + ", ".join(val(x) for x in v) + "]"
        return repr(float(v))

    top = [f"{json.dumps(k)} = {val(v)}" for k, v in d.items() if not isinstance(v, (dict, list))
           or (isinstance(v, list) and not (v and isinstance(v[0], dict)))]
    out = ["\n".join(top)]
    for k, v in d.items():
        if isinstance(v, dict):
            out.append(f"[{k}]\n" + "\n".join(f"{json.dumps(a)} = {val(b)}" for a, b in v.items()))
        elif isinstance(v, list) and v and isinstance(v[0], dict):
            for item in v:
                out.append(f"[[{k}]]\n" + "\n".join(f"{json.dumps(a)} = {val(b)}"
                                                     for a, b in item.items()))
    return "\n\n".join(out) + "\n"


def _cli_case(tmp_path: Path, config: str, lots: dict, bad: str, extra: dict | None = None):
    """Process the exports with `gpctools batch`, then `gpctools diagnose --measured`."""
    from typer.testing import CliRunner

    from gpctools.cli import app

    run = CliRunner()
    folder = _exports(tmp_path / "sec", lots)
    r = run.invoke(app, ["batch", str(folder / "batch.csv"), "-m", str(folder / "method.toml"),
                         "-o", str(tmp_path / "res")])
    assert r.exit_code == 0, r.output
    kw = {**(extra or {}), "measured": {"R_p [mol/L/s]": lot(P_TRUE)["R_p [mol/L/s]"]}}
    if config == "normal batch":
        import pandas as pd

        good = pd.read_csv(tmp_path / "res" / "results.csv").set_index("sample_id").loc["GOOD"]
        kw["normal_batch"] = {"Mn [g/mol]": float(good["Mn [g/mol]"]),
                              "Mw [g/mol]": float(good["Mw [g/mol]"]),
                              "R_p [mol/L/s]": S_TRUE.R_p}
    else:
        for k, v in given(P_TRUE).items():
            kw[k] = {**kw[k], **v} if isinstance(kw.get(k), dict) else v
    recipe = build(**kw)
    recipe.pop("checks")  # the checks come from the results table
    path = tmp_path / "recipe.toml"
    path.write_text(_toml(recipe), encoding="utf-8")
    out = tmp_path / "diag"
    r = run.invoke(app, ["diagnose", str(path), "--measured", str(tmp_path / "res" / "results.csv"),
                         "--sample", bad, "-o", str(out), "--no-xlsx"])
    assert r.exit_code == 0, r.output
    return r.output, json.loads((out / "diagnosis.json").read_text(encoding="utf-8")), out


@pytest.mark.parametrize("config", ["normal batch", "given parameters"])
def test_cli_low_M_additive_inside_careless_limits(tmp_path, config):
    # 1 % by mass of a low-M additive (about 1 000 g/mol) inside careless limits: Mn falls
    # by about a quarter, Mw hardly; the limit check and the distribution's low-M tail show it
    out, summary, folder = _cli_case(tmp_path, config, {"GOOD": (S_TRUE, 0.0),
                                                        "BAD": (S_TRUE, 0.01)}, "BAD")
    assert summary["causes"][0]["key"] == "limit" and summary["verdict"] == "clear", out
    tail = next(o for o in summary["observations"] if o["name"] == "low-M tail")
    assert tail["measured"] > 0.005  # the additive's mass sits below Mw/20
    assert (folder / "distributions.png").exists()
    curves = {c["kind"] for c in summary["distributions"]}
    assert curves == {"measured", "expected", "cause"}


@pytest.mark.parametrize("config", ["normal batch", "given parameters"])
def test_cli_impurity_from_exports(tmp_path, config):
    # 40 ppm of the thiol, lots processed from their exports (Mn, Mw within the SEC
    # processing error of the true averages): transfer first and clear, level within 15 %
    low = evaluate(P_TRUE, extra_transfer=40e-6 * C_THIOL)
    out, summary, _ = _cli_case(tmp_path, config, {"GOOD": (S_TRUE, 0.0), "BAD": (low, 0.0)},
                                "BAD", {"candidate": [{"name": "1-dodecanethiol"}]})
    assert summary["causes"][0]["key"] == "transfer" and summary["verdict"] == "clear", out
    thiol = next(i for i in summary["impurities"] if i["candidate"] == "1-dodecanethiol")
    assert thiol["ratio [X]/[M] [ppm mol]"] == pytest.approx(40.0, rel=0.15)


def test_cli_slow_pump_corrected_is_an_instrument_finding(tmp_path):
    # every volume 0.3 % late (pump 0.3 % slow): the batch's flow marker corrects the
    # results, so the chemistry is clean, and the pump is reported as a fault to fix
    from typer.testing import CliRunner

    from gpctools.cli import app

    folder = _exports(tmp_path / "sec", {"GOOD": (S_TRUE, 0.0), "BAD": (S_TRUE, 0.0)})
    text = (folder / "exports" / "BAD.csv").read_text(encoding="utf-8").splitlines()
    head = [i for i, line in enumerate(text) if line[:1].isdigit()][0]
    moved = [f"{float(a) * 1.003:.6f},{b}" for a, b in (line.split(",") for line in text[head:])]
    (folder / "exports" / "BAD.csv").write_text("\n".join(text[:head] + moved) + "\n")
    run = CliRunner()
    assert run.invoke(app, ["batch", str(folder / "batch.csv"), "-m", str(folder / "method.toml"),
                            "-o", str(tmp_path / "res")]).exit_code == 0
    recipe = build(normal_batch=lot(P_TRUE), measured={"R_p [mol/L/s]": S_TRUE.R_p})
    recipe.pop("checks")
    (tmp_path / "r.toml").write_text(_toml(recipe), encoding="utf-8")
    r = run.invoke(app, ["diagnose", str(tmp_path / "r.toml"), "--measured",
                         str(tmp_path / "res" / "results.csv"), "--sample", "BAD",
                         "-o", str(tmp_path / "d"), "--no-xlsx"])
    assert r.exit_code == 0, r.output
    s = json.loads((tmp_path / "d" / "diagnosis.json").read_text(encoding="utf-8"))
    assert s["verdict"] == "no strong cause"
    assert [f["check"] for f in s["instrument findings"]] == ["pump flow"]
    assert "slow" in s["instrument findings"][0]["text"] and "instrument finding" in r.output
    assert "Instrument findings" in (tmp_path / "d" / "diagnosis.md").read_text(encoding="utf-8")


def test_a_normal_batch_the_exact_parameters_cannot_match_is_said():
    # every parameter given as exact, and a normal lot 30 % off in Mn: nothing can absorb
    # it, and the report says so (the lot in question is still judged against the model)
    r = Recipe.from_dict(build(**given(P_TRUE), uncertainty={"R_p [%]": 3.0, "Mw breadth [%]": 0},
                               measured=lot(P_TRUE, extra_transfer=40e-6 * C_THIOL),
                               normal_batch={**lot(P_TRUE), "Mn [g/mol]":
                                             lot(P_TRUE)["Mn [g/mol]"] * 1.3}))
    d = diagnose(r)
    assert any("further from the model than the parameter uncertainties allow" in n
               for n in d.notes)
    assert d.top.key == "transfer"


def test_a_cause_that_does_not_describe_the_numbers_is_not_clear():
    # R_p 40 % up with Mn 40 % up: no single cause of a LOW molar mass fits (χ² far beyond
    # its 99.9 % quantile), so whatever ranks first the verdict is not "clear"
    r = Recipe.from_dict(build(measured={k: v * 1.4 for k, v in lot(P_TRUE).items()},
                               normal_batch=lot(P_TRUE)))
    d = diagnose(r)
    assert d.fit_probability < 1e-3 and d.verdict != "clear"
    assert any("no single cause explains all numbers well" in n for n in d.notes)
