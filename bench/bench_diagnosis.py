"""Error rates of the low-molar-mass diagnosis (not a test): how often the right cause comes
first, how often the verdict is clear, and how often a clear verdict names the wrong
cause, on noisy simulated lots.

Usage::

    python bench/bench_diagnosis.py --n 200 --seed 20260613
    python bench/bench_diagnosis.py --n 50 --config "tables only"

The lots are the cases of tests/test_diagnosis_cases.py: styrene 6 mol/L in toluene with
AIBN 0.02 mol/L at 60 °C, true kinetics k_t 0.8 × and f 0.85 × the bundled values, one
cause per lot (40 ppm of a thiol, a double initiator charge, +10 K, a retarder that slows
the batch by 30 %, a 10 % monomer shortfall, a 0.5 % uncorrected pump error, a low-M
artefact taking 25 % off Mn; or none). Measurement noise, log-normal: R_p 3 %, Mn 4 %,
Mw 3 % (the stated uncertainties; the normal batch gets its own noise), the flow marker
0.1 %, the limit check 0.5 % (absolute), the check standard 3 %.

Besides the verdict the diagnosis gives, the rates are shown for the verdict rule with
other evidence ratios between the top cause and the runner-up (``--ratios``), which is how
the rule's threshold was chosen.

Configurations: "normal batch" (tabulated recipe plus a normal lot), "given parameters"
(the plant's parameters in the recipe, taken as exact), "tables only" (tabulated recipe,
no normal lot; the truth is then the tables themselves).
"""

from __future__ import annotations

import argparse
import json
import math
import time
import warnings
from dataclasses import replace

import numpy as np

BASE = {
    "label": "bench", "T [°C]": 60.0,
    "monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
    "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02},
    "solvent": [{"name": "toluene", "concentration [mol/L]": 3.0}],
    "uncertainty": {"R_p [%]": 3.0},
}
CAUSES = ("none", "transfer", "initiator", "temperature", "retarder", "dilution", "flow", "limit")


def run(n: int, seed: int, config: str, ratios: tuple[float, ...] = (1.0,)) -> dict:
    from gpctools.kinetics import Recipe, diagnose, evaluate, resolve_parameters

    p_tab = resolve_parameters(Recipe.from_dict(BASE))
    p = p_tab if config == "tables only" else replace(p_tab, k_t=p_tab.k_t * 0.8,
                                                      f=p_tab.f * 0.85)
    s = evaluate(p)
    zeta = 2 * s.k_t * s.radicals * (1 - 0.7**2) / 0.7
    pert = {"none": {}, "transfer": {"extra_transfer": 40e-6 * 14.8},
            "initiator": {"radical_flux_factor": 2.0}, "temperature": {"dT": 10.0},
            "retarder": {"retarder": zeta}, "dilution": {"monomer_factor": 0.9},
            "flow": {}, "limit": {}}
    rng = np.random.default_rng(seed)

    def lot(**kw):
        st = evaluate(p, **kw)
        Mn = st.DPn * p.M0
        return {"Mn [g/mol]": Mn, "Mw [g/mol]": Mn * st.dispersity, "R_p [mol/L/s]": st.R_p}

    def noisy(v):
        sig = {"R_p [mol/L/s]": 0.03, "Mn [g/mol]": 0.04, "Mw [g/mol]": 0.03}
        return {k: x * math.exp(sig[k] * rng.standard_normal()) for k, x in v.items()}

    given = {"monomer": {**BASE["monomer"], "k_p [L/mol/s]": p.k_p, "C_M [-]": p.C_M},
             "initiator": {**BASE["initiator"], "k_d [1/s]": p.k_d, "f [-]": p.f},
             "termination": {"k_t [L/mol/s]": p.k_t, "delta [-]": p.delta},
             "solvent": [{**BASE["solvent"][0], "C [-]": p.transfer[0].C}]}
    out = {}
    for cause in CAUSES:
        top = clear = wrong_clear = 0
        by_ratio = {r: [0, 0] for r in ratios}
        for _ in range(n):
            meas = noisy(lot(**pert[cause]))
            eps = 0.005 if cause == "flow" else 0.0
            f = 10 ** (-10.0 * eps)
            meas["Mn [g/mol]"] *= f * (0.75 if cause == "limit" else 1.0)
            meas["Mw [g/mol]"] *= f
            checks = {
                "flow marker observed [mL]": 22.60 * (1 + eps + 0.001 * rng.standard_normal()),
                "flow marker reference [mL]": 22.60,
                "check standard deviation [%]": 100 * (f * math.exp(0.03 * rng.standard_normal()) - 1),
                "Mn shift, low-M limit -0.2 mL [%]": (9.0 if cause == "limit" else 0.3)
                + 0.5 * rng.standard_normal(),
            }
            d = json.loads(json.dumps(BASE))
            d.update(measured=meas, checks=checks)
            if cause == "transfer":
                d["candidate"] = [{"name": "1-dodecanethiol"}]
            if config == "normal batch":
                d["normal_batch"] = noisy(lot())
            elif config == "given parameters":
                d.update(given)
            res = diagnose(Recipe.from_dict(d))
            top += res.top.key == cause
            c = res.verdict == "clear" or (cause == "none" and res.verdict == "no strong cause")
            clear += c and res.top.key == cause
            wrong_clear += res.verdict == "clear" and res.top.key != cause
            sh = [c.share for c in res.causes]
            none = next(c.share for c in res.causes if c.key == "none")
            for r in ratios:
                ok = (res.top.key != "none" and sh[0] >= 50 and none < 20 and sh[0] >= r * sh[1])
                by_ratio[r][0] += ok and res.top.key == cause
                by_ratio[r][1] += ok and res.top.key != cause
        out[cause] = {"right cause first [%]": 100 * top / n,
                      "right and clear (no strong cause for none) [%]": 100 * clear / n,
                      "clear but wrong [%]": 100 * wrong_clear / n,
                      **{f"ratio {r:g}: right+clear, clear but wrong [%]":
                         (100 * v[0] / n, 100 * v[1] / n) for r, v in by_ratio.items()}}
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=200, help="replicate lots per cause")
    ap.add_argument("--seed", type=int, default=20260613)
    ap.add_argument("--ratios", default="1,2,3",
                    help="evidence ratios top/runner-up to tabulate the verdict rule with")
    ap.add_argument("--config", default="normal batch,given parameters",
                    help="comma-separated: normal batch, given parameters, tables only")
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    for config in args.config.split(","):
        t0 = time.perf_counter()
        ratios = tuple(float(x) for x in args.ratios.split(","))
        res = run(args.n, args.seed, config.strip(), ratios)
        print(f"\n{config.strip()} (n = {args.n} per cause, seed {args.seed}, "
              f"{time.perf_counter() - t0:.0f} s)")
        print(f"{'cause':12s} {'first [%]':>10s} {'right+clear [%]':>16s} {'clear, wrong [%]':>17s}"
              + "".join(f"  ratio {r:g}: right/wrong [%]" for r in ratios))
        for cause, r in res.items():
            vals = list(r.values())
            print(f"{cause:12s} {vals[0]:10.1f} {vals[1]:16.1f} {vals[2]:17.1f}"
                  + "".join(f"  {a:12.1f} / {b:5.1f}      " for a, b in vals[3:]))


if __name__ == "__main__":
    main()
