"""Error rates and speed of the run-series analysis (issues 11 and 14), with fixed seeds.

Every result line is printed with the command that reproduces it. Subcommands:

    python bench/bench_transfer.py flags      [--trials 1000]   false flags and power
    python bench/bench_transfer.py coverage   [--series 200]    95 % intervals of C, whole chain
    python bench/bench_transfer.py solvent                      toluene dilution series, C_S
    python bench/bench_transfer.py initiator  [--trials 200]    C_I = 0 series
    python bench/bench_transfer.py styrene    [--trials 200]    combination (delta = 0.1)
    python bench/bench_transfer.py timing                       100-run series, best of three
    python bench/bench_transfer.py calibrate  [--trials 2000]   false-flag rate per design
    python bench/bench_transfer.py chain-power [--series 100]   two contaminated runs, whole chain
    python bench/bench_transfer.py all                          all of the above

Truths come from the steady-state kinetic scheme with the bundled reference data
(:func:`gpctools.simulate.kinetic_series`), published constants (1-dodecanethiol and
toluene in styrene at 60 °C, docs/science.md, section 7.2) and, for the whole chain,
narrow standards with ±0.02 mL scatter -> calibration -> simulated chromatograms ->
constants. Long runs belong here, not in the tests (the tests run small versions).
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

warnings.simplefilter("ignore")

C_DDM = 14.8  # 1-dodecanethiol in styrene, 60 °C [published: Carraher 8th ed.]
C_TOLUENE = 0.105e-4  # toluene in styrene, 60 °C [published: Carraher 8th ed.]
M0_ST = 104.15  # g/mol [derived]


def _cmd(args: str) -> str:
    return f"python bench/bench_transfer.py {args}"


def _rate(k: int, n: int) -> str:
    p = k / n
    return f"{100 * p:.1f} % ({k}/{n}, binomial SE {100 * math.sqrt(max(p * (1 - p), 1e-12) / n):.1f} %)"


# ----------------------------------------------------------------------------- flags


def _linear_series(n: int, noise: float, rng: np.random.Generator, bad=(), excess=0.25):
    r = np.linspace(0, 4e-4, n)
    y = (5e-4 + C_DDM * r) * (1 + noise * rng.standard_normal(n))
    for i in bad:
        y[i] *= 1 + excess
    return r, y


def flags(trials: int) -> None:
    from gpctools.transfer import flag_runs

    rng = np.random.default_rng(20250101)
    for n, noise in ((6, 0.005), (8, 0.02), (12, 0.03), (20, 0.02)):
        k = sum(bool(flag_runs(_linear_series(n, noise, rng)[1],
                               {"C_A": np.linspace(0, 4e-4, n)}).flagged_ids) for _ in range(trials))
        print(f"clean series, {n} runs, {100 * noise:g} % noise: false-flag rate per series "
              f"{_rate(k, trials)}  [{_cmd(f'flags --trials {trials}')}, seed 20250101]")
    both = 0
    for _ in range(trials):
        r, y = _linear_series(12, 0.03, rng, bad=(3, 8))
        f = flag_runs(y, {"C_A": r}).flagged_ids
        both += "4" in f and "9" in f
    print(f"12 runs, 2 at +25 % excess, 3 % noise: both flagged in {_rate(both, trials)}  "
          f"[{_cmd(f'flags --trials {trials}')}]")
    both = 0
    for _ in range(trials):
        r, y = _linear_series(6, 0.005, rng, bad=(2, 4))
        f = flag_runs(y, {"C_A": r}).flagged_ids
        both += "3" in f and "5" in f
    print(f"6 runs, 2 at +25 % excess, 0.5 % noise: both flagged in {_rate(both, trials)}  "
          f"[{_cmd(f'flags --trials {trials}')}]")
    _flags_through_analysis(trials // 5, rng)


def _flags_through_analysis(trials: int, rng: np.random.Generator) -> None:
    """The six-run case with the default options of analyse_series (drift, Mw/2, δ)."""
    from gpctools.simulate import kinetic_series
    from gpctools.transfer import analyse_series, run_series_from_rows

    both = clean_ff = 0
    for _ in range(trials):
        spec = [{"[M]": 8.0, "[A]": 8.0 * r, "x": 0.05} for r in np.linspace(0, 4e-4, 6)]
        rows = kinetic_series(spec, C_A=C_DDM, rel_noise=0.005, seed=int(rng.integers(1 << 31)),
                              impurity={1: 4e-4, 4: 1.5e-3})
        clean = kinetic_series(spec, C_A=C_DDM, rel_noise=0.005, seed=int(rng.integers(1 << 31)))
        for r in rows + clean:
            r.pop("_truth")
        f = analyse_series(series=run_series_from_rows(rows)).group().impurity.flagged_ids
        both += "K2" in f and "K5" in f
        clean_ff += bool(analyse_series(series=run_series_from_rows(clean)).group().impurity.flagged_ids)
    print(f"6-run styrene series (kinetic scheme, delta 0.1, x = 0.05, 0.5 % noise), runs 2 and 5 "
          f"contaminated (+4e-4, +1.5e-3 on 1/DPn), default options: both flagged in "
          f"{_rate(both, trials)}; the same series clean: flagged in {_rate(clean_ff, trials)}  "
          f"[{_cmd('flags')}]")


def calibrate(trials: int) -> None:
    """False-flag rate of clean series per design (n runs, p parameters), 2 % noise."""
    from gpctools.transfer import flag_runs

    for p in (2, 3):
        for n in (5, 6, 8, 10, 12, 16, 24, 40):
            rng = np.random.default_rng(100 + n + 10 * p)
            r = np.linspace(0, 4e-4, n)
            r2 = np.tile([0, 5e-4, 1e-3], n)[:n]
            cols = {"C_A": r} if p == 2 else {"C_A": r, "C_A:b": r2}
            lam = 5e-4 + C_DDM * r + (1.8 * r2 if p == 3 else 0)
            k = sum(bool(flag_runs(lam * (1 + 0.02 * rng.standard_normal(n)), cols).flagged_ids)
                    for _ in range(trials))
            print(f"calibrate: p = {p}, n = {n}: false-flag rate {_rate(k, trials)}  "
                  f"[{_cmd(f'calibrate --trials {trials}')}]", flush=True)


# ----------------------------------------------------------------------------- coverage


_METHOD = """name = "bench: PS in THF"
sample_polymer = "polystyrene"
[flow]
rate = 1.0
[baseline]
windows = "auto"
[integration]
limits = "auto"
[calibration]
order = 3
standard_polymer = "polystyrene"
standards = "standards.csv"
"""


def chain_series(folder: Path, seed: int, *, scatter_mL: float = 0.02, runs: int = 6,
                 x: float = 0.03, charge_noise: float = 0.01, impurity: dict[int, float] | None = None):
    """One styrene/1-dodecanethiol series through the whole chain: standards with scatter ->
    calibration -> chromatograms (true calibration) -> sheet. Returns (sheet, method, truth C).

    ``impurity`` maps a run index to the relative excess of its 1/DPn (0.25: +25 %), added
    as transfer to an unlisted species with the chain-length formulas of the agent."""
    import pandas as pd

    from gpctools import refdata, simulate
    from gpctools.chainlength import combination_stops, cumulative_most_probable, kinetic_inv_dpn
    from gpctools.demo import write_chromatogram
    from gpctools.method import load_method

    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    names, Mp, V = zip(*simulate.DEFAULT_STANDARDS, strict=True)
    Vs = np.asarray(V) + scatter_mL * rng.standard_normal(len(V))
    pd.DataFrame({"name": names, "Mp [g/mol]": Mp, "volume [mL]": Vs}).to_csv(
        folder / "standards.csv", index=False)
    (folder / "method.toml").write_text(_METHOD, encoding="utf-8")
    true_cal = simulate.default_calibration()
    T = 333.15
    mono, term, ini = refdata.monomer("styrene"), refdata.termination("styrene"), refdata.initiator("AIBN")
    kp, kt, d = mono.k_p(T), term.k_t_iupac, term.delta
    M, I0 = 8.0, 0.01
    rad = math.sqrt(ini.f * ini.k_d(T) * I0 / kt)
    K = float(kinetic_inv_dpn(kp * M * rad, M, kp, kt, d))
    beta = float(combination_stops(K, d))
    rows = []
    for i, r in enumerate(np.linspace(0, 4e-4, runs)):
        r_true = r * (1 + charge_noise * rng.standard_normal())
        extra = (impurity or {}).get(i, 0.0) * (K + mono.C_M + C_DDM * r_true)
        f = cumulative_most_probable(x, K + mono.C_M + extra, {"C_A": (C_DDM, r_true)}, M0_ST, beta=beta)
        vol, sig = simulate.chromatogram(f, true_cal, volume=np.linspace(8, 26, 2000), height=100.0,
                                         baseline_offset=0.3, baseline_drift=0.01, noise=0.03,
                                         seed=int(rng.integers(1 << 31)))
        write_chromatogram(folder / f"r{i}.csv", vol, sig)
        rows.append({"run": f"R{i + 1}", "file": f"r{i}.csv", "monomer": "styrene", "T [°C]": 60,
                     "[M] [mol/L]": M, "[A] [mol/L]": M * r, "conversion [-]": x})
    pd.DataFrame(rows).to_csv(folder / "series.csv", index=False)
    return folder / "series.csv", load_method(folder / "method.toml"), C_DDM


def coverage(series: int, seed0: int = 7000) -> tuple[int, int, int]:
    """Coverage of the 95 % interval of the recommended C_A (combined), and of its
    statistical part alone, over ``series`` whole-chain simulations."""
    from gpctools.transfer import analyse_series

    hits = hits_stat = done = 0
    with tempfile.TemporaryDirectory() as tmp:
        for s in range(series):
            sheet, method, C = chain_series(Path(tmp) / f"s{s}", seed0 + s)
            res = analyse_series(sheet, method, estimators=("Mn", "Mw/2"))
            c = res.constant("C_A")
            hits += c.ci_low <= C <= c.ci_high
            from gpctools.transfer._stats import t_quantile

            q = t_quantile(0.975, res.group().preferred_fit().dof)
            hits_stat += abs(c.value - C) <= q * c.stderr_statistical
            done += 1
    print(f"95 % intervals of C_A (Mw/2, drift, delta 0.1) cover the truth in {_rate(hits, done)} of "
          f"whole-chain series (standards ±0.02 mL, 6 runs, 1 % charge scatter); statistical part "
          f"alone: {_rate(hits_stat, done)}  [{_cmd(f'coverage --series {series} --seed {seed0}')}]")
    return hits, hits_stat, done


def chain_power(series: int, seed0: int = 11000) -> None:
    """Six-run whole-chain series (chromatograms, defaults) with runs 2 and 5 at +25 %
    excess 1/DPn: how often both are flagged, and how often a clean run is flagged."""
    from gpctools.transfer import analyse_series

    both = other = 0
    with tempfile.TemporaryDirectory() as tmp:
        for s in range(series):
            sheet, method, _ = chain_series(Path(tmp) / f"s{s}", seed0 + s, impurity={1: 0.25, 4: 0.25})
            f = analyse_series(sheet, method).group().impurity.flagged_ids
            both += "R2" in f and "R5" in f
            other += bool(set(f) - {"R2", "R5"})
    print(f"whole chain, 6 runs (chromatograms, standards ±0.02 mL, 1 % charge scatter), runs 2 "
          f"and 5 at +25 % excess 1/DPn, default options: both flagged in {_rate(both, series)}; "
          f"a clean run flagged in {_rate(other, series)}  "
          f"[{_cmd(f'chain-power --series {series} --seed {seed0}')}]")


# ----------------------------------------------------------------------------- designs


def solvent() -> None:
    """Toluene dilution series (0-50 % toluene) in styrene at 60 °C."""
    from gpctools.errors import DesignError
    from gpctools.simulate import kinetic_series
    from gpctools.transfer import analyse_series, run_series_from_rows

    cM, cS = 8.7, 9.4  # neat styrene and toluene [mol/L] [derived: density/M, from memory]
    phis = np.linspace(1.0, 0.5, 6)
    for label, levels, noise in (("one [I] level", (0.01,), 0.0),
                                 ("two [I] levels (0.0025, 0.04 mol/L)", (0.0025, 0.04), 0.0),
                                 ("two [I] levels, 0.2 % noise", (0.0025, 0.04), 0.002)):
        spec = [{"[M]": cM * p, "[S]": cS * (1 - p), "[I]": I0} for p in phis for I0 in levels]
        rows = kinetic_series(spec, C_S=C_TOLUENE, rel_noise=noise, seed=5)
        for r in rows:
            r.pop("_truth")
        try:
            res = analyse_series(series=run_series_from_rows(rows), estimators=("Mn",))
            c = res.constant("C_S", estimator="Mn")
            print(f"toluene dilution, {label}: C_S = {c.value:.4g} ± {c.stderr:.2g} (truth "
                  f"{C_TOLUENE:g}, {100 * (c.value / C_TOLUENE - 1):+.1f} %; kinetic term: "
                  f"{res.group().kinetic.how})  [{_cmd('solvent')}]")
        except DesignError as exc:
            print(f"toluene dilution, {label}: refused: {exc.message}  [{_cmd('solvent')}]")
    spec = [{"[M]": cM * p, "[S]": cS * (1 - p), "[I]": 0.01} for p in phis]
    rows = kinetic_series(spec, C_S=C_TOLUENE, seed=5)
    for r in rows:
        r.pop("_truth")
    res = analyse_series(series=run_series_from_rows(rows), estimators=("Mn",), kinetic="reference")
    c = res.constant("C_S", estimator="Mn")
    print(f"toluene dilution, one [I] level, kinetic term from reference data (the same bundled "
          f"values made the series): C_S = {c.value:.4g} ({100 * (c.value / C_TOLUENE - 1):+.1f} %)  "
          f"[{_cmd('solvent')}]")


def initiator(trials: int) -> None:
    """Initiator series, C_I = 0: the interval of C_I contains 0; ±2 % [I] scatter adds no term."""
    from gpctools.simulate import kinetic_series
    from gpctools.transfer import analyse_series, run_series_from_rows

    rng = np.random.default_rng(31)
    contains = extra = 0
    for _ in range(trials):
        spec = [{"[M]": 8.0, "[I]": I0} for I0 in (0.002, 0.004, 0.008, 0.016, 0.032, 0.064)]
        rows = kinetic_series(spec, rel_noise=0.01, seed=int(rng.integers(1 << 31)))
        for r in rows:
            r.pop("_truth")
        c = analyse_series(series=run_series_from_rows(rows), estimators=("Mn",)).constant(
            "C_I", estimator="Mn")
        contains += c.ci_low <= 0.0 <= c.ci_high
        spec2 = [{"[M]": 8.0, "[I]": 0.01 * (1 + 0.02 * rng.standard_normal()), "[A]": 8 * r}
                 for r in np.linspace(0, 4e-4, 6)]
        rows2 = kinetic_series(spec2, C_A=C_DDM, rel_noise=0.01, seed=int(rng.integers(1 << 31)))
        for r in rows2:
            r.pop("_truth")
        g = analyse_series(series=run_series_from_rows(rows2), estimators=("Mn",)).group()
        extra += ("C_I" in g.terms) or g.kinetic.how != "constant"
    print(f"initiator series (AIBN 0.002 to 0.064 mol/L, C_I = 0, 1 % noise): the 95 % interval of "
          f"C_I contains 0 in {_rate(contains, trials)}; ±2 % [I] scatter added a term in "
          f"{_rate(extra, trials)}  [{_cmd(f'initiator --trials {trials}')}, seed 31]")


def styrene(trials: int) -> None:
    """Styrene-like δ = 0.1 at low conversion: Mw/2 and CLD within 2 %, no false intercept flag."""
    from gpctools.simulate import kinetic_series
    from gpctools.transfer import analyse_series, run_series_from_rows

    rng = np.random.default_rng(41)
    worst = {"Mn": 0.0, "Mw/2": 0.0}
    ic_flags = 0
    for _ in range(trials):
        spec = [{"[M]": 8.0, "[A]": 8.0 * r, "x": 0.002} for r in (0, 0, 0.5e-4, 1e-4, 2e-4, 3e-4, 4e-4)]
        rows = kinetic_series(spec, C_A=C_DDM, rel_noise=0.002, seed=int(rng.integers(1 << 31)))
        for r in rows:
            r.pop("_truth")
        rows[0]["role"] = "control"
        res = analyse_series(series=run_series_from_rows(rows), estimators=("Mn", "Mw/2"),
                             drift=False)
        g = res.group()
        for e in worst:
            worst[e] = max(worst[e], abs(g.mayo[e].constant("C_A").value / C_DDM - 1))
        ic_flags += bool(g.intercept_check is not None and g.intercept_check.flagged)
    print(f"styrene-like delta 0.1 (kinetic scheme, 0.2 % noise): largest deviation of C_A "
          f"Mn {100 * worst['Mn']:.2f} %, Mw/2 {100 * worst['Mw/2']:.2f} % over {trials} series; "
          f"intercept flagged against a control run in {_rate(ic_flags, trials)}  "
          f"[{_cmd(f'styrene --trials {trials}')}, seed 41]")
    _styrene_cld()


def _styrene_cld() -> None:
    """CLD with δ = 0.1 on exact mixed-termination distributions (no noise)."""
    from gpctools import refdata
    from gpctools.chainlength import combination_stops, kinetic_inv_dpn, mixed_termination
    from gpctools.transfer import cld_slope, fit_mayo

    T = 333.15
    mono, term, ini = refdata.monomer("styrene"), refdata.termination("styrene"), refdata.initiator("AIBN")
    kp, kt, d = mono.k_p(T), term.k_t_iupac, term.delta
    rad = math.sqrt(ini.f * ini.k_d(T) * 0.01 / kt)
    K = float(kinetic_inv_dpn(kp * 8.0 * rad, 8.0, kp, kt, d))
    beta = float(combination_stops(K, d))
    ratios = np.array([0, 0.5e-4, 1e-4, 2e-4, 3e-4, 4e-4])
    lam, wins = [], []
    for r in ratios:
        tau = K + mono.C_M + C_DDM * r - beta / 2
        f = mixed_termination(tau, beta).distribution(M0_ST)
        M = np.geomspace(M0_ST * 10, M0_ST * 50 / (tau + beta), 3000)
        s = cld_slope(M, f(M), M0_ST)
        lam.append(s.Lambda)
        wins.append(s.window)
    fit = fit_mayo(lam, {"C_A": ratios}, estimator="CLD", delta=d, C_M_known=mono.C_M,
                   windows=wins, M0=M0_ST)
    naive = fit_mayo(lam, {"C_A": ratios}, estimator="CLD")
    print(f"styrene-like delta {d:g}, CLD on exact mixed-termination distributions: C_A = "
          f"{fit.constant('C_A').value:.4g} ({100 * (fit.constant('C_A').value / C_DDM - 1):+.2f} %); "
          f"ignoring combination: {naive.constant('C_A').value:.4g}  [{_cmd('styrene')}]")


# ----------------------------------------------------------------------------- timing


def timing() -> None:
    """A 100-run series with drift and impurity flags through the API, best of three."""
    from gpctools.simulate import simulate_series
    from gpctools.transfer import analyse_series, run_series_from_rows

    rng = np.random.default_rng(14)
    ratios = np.tile(np.linspace(0, 4e-4, 10), 10)
    xs = rng.uniform(0.03, 0.10, ratios.size)
    rows = simulate_series(ratios, C_A=C_DDM, inv_DPn0=5e-4, M0=M0_ST, conversion=xs,
                           rel_noise=0.01, seed=14, impurity={7: 8e-4, 42: 1.2e-3, 77: 6e-4})
    for r in rows:
        r["agent"] = "1-dodecanethiol"
    series = run_series_from_rows(rows)
    best = math.inf
    res = None
    for _ in range(3):
        t0 = time.perf_counter()
        res = analyse_series(series=series, impurity_C=15.0)
        best = min(best, time.perf_counter() - t0)
    g = res.group()  # type: ignore[union-attr]
    print(f"100-run series (3 estimators requested, Mn and Mw/2 available; drift; flags): "
          f"{best:.3f} s best of three; C_A = {res.constant('C_A').value:.4g}; flagged "  # type: ignore[union-attr]
          f"{', '.join(g.impurity.flagged_ids)}  [{_cmd('timing')}]")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("what", choices=("flags", "coverage", "solvent", "initiator", "styrene",
                                     "timing", "calibrate", "chain-power", "all"))
    ap.add_argument("--trials", type=int, default=None)
    ap.add_argument("--series", type=int, default=None, help="series (coverage 200, chain-power 100)")
    ap.add_argument("--seed", type=int, default=None, help="first seed of coverage / chain-power")
    a = ap.parse_args(argv)
    if a.what in ("flags", "all"):
        flags(a.trials or 1000)
    if a.what in ("solvent", "all"):
        solvent()
    if a.what in ("initiator", "all"):
        initiator(a.trials or 200)
    if a.what in ("styrene", "all"):
        styrene(a.trials or 200)
    if a.what in ("timing", "all"):
        timing()
    if a.what in ("coverage", "all"):
        coverage(a.series or 200, *(() if a.seed is None else (a.seed,)))
    if a.what in ("chain-power", "all"):
        chain_power(a.series or 100, *(() if a.seed is None else (a.seed,)))
    if a.what == "calibrate":
        calibrate(a.trials or 2000)
    return 0


if __name__ == "__main__":
    sys.exit(main())
