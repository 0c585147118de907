"""The demo troubleshooting case: a low-Mn batch with a hidden impurity (our own scenario).

Scenario (invented): at *Larchmere Coatings* (the fictional resin maker of the demo
sequence) grade LC-180 is made by solution polymerization of styrene in toluene with
AIBN at 60 °C. Lot LC180-0417 came out with Mn about 16 % low. The feed line had been
used the week before for a thiol-modified grade: 25 ppm (mol, relative to monomer) of
1-dodecanethiol were carried over. The rate was normal; the SEC checks were clean.

:func:`write_troubleshooting_case` writes the recipe (with the normal lot's values), two
simulated slice exports (normal and low lot) with a batch sheet for the demo method, and
``truth.json`` with the hidden cause. The measured values in the recipe are the exact
averages of the simulated distributions; processing the exports reproduces them within
the SEC processing error.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from gpctools.kinetics.recipe import Recipe
from gpctools.report.files import write_text

__all__ = ["write_troubleshooting_case", "TRUTH"]

#: The hidden cause and the fixed numbers of the scenario.
TRUTH: dict[str, Any] = {
    "cause": "transfer",
    "impurity": "1-dodecanethiol",
    "impurity [ppm mol]": 25.0,
    "normal Mn [g/mol]": 52_000.0,
    "normal Mw [g/mol]": 96_000.0,
    "normal R_p [mol/L/s]": 3.75e-5,
}

_BASE = {
    "T [°C]": 60.0,
    "monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
    "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02},
    "solvent": [{"name": "toluene", "concentration [mol/L]": 3.0}],
}

_RECIPE = """\
# Troubleshooting case (invented scenario, see gpctools/kinetics/_demo.py):
# lot LC180-0417 of grade LC-180 came out with low Mn. Why?
#   gpctools diagnose sample_runs/troubleshooting/recipe.toml --out diagnosis-out
# Safety: recipe changes that add initiator or raise temperature can run away; follow
# site safety rules, local codes and licensed practice.

label = "LC180-0417 (low Mn complaint)"
"T [°C]" = 60.0

[monomer]
name = "styrene"
"concentration [mol/L]" = 6.0

[initiator]
name = "AIBN"
"concentration [mol/L]" = 0.02

[[solvent]]
name = "toluene"
"concentration [mol/L]" = 3.0

[[candidate]]                 # the thiol of the grade made last week on the same line
name = "1-dodecanethiol"

[measured]                    # exact averages of the simulated exports/LC180-0417.csv
                              # (processing the export gives them within about 1 %)
"Mn [g/mol]" = {Mn:.0f}
"Mw [g/mol]" = {Mw:.0f}
scale = "absolute"            # polystyrene measured against polystyrene standards
"time [min]" = [0, 20, 40, 60, 80]
conversion = [{conv}]

[checks]
"check standard deviation [%]" = 0.6
"flow marker observed [mL]" = 22.61
"flow marker reference [mL]" = 22.60
"flow marker corrected" = true
"outside calibration [% mass]" = 0.03
"Mn shift, low-M limit -0.2 mL [%]" = 0.1

[normal_batch]                # lot LC180-0409, same recipe, in specification
"Mn [g/mol]" = {nMn:.0f}
"Mw [g/mol]" = {nMw:.0f}
"R_p [mol/L/s]" = {nRp:.4g}
"""


def _problem_values() -> dict[str, float]:
    from dataclasses import replace

    from gpctools.kinetics.predict import TransferTerm, evaluate, resolve_parameters

    nMn, nMw, nRp = (TRUTH["normal Mn [g/mol]"], TRUTH["normal Mw [g/mol]"],
                     TRUTH["normal R_p [mol/L/s]"])
    recipe = Recipe.from_dict(dict(_BASE, label="normal"))
    p = resolve_parameters(recipe)
    # anchor the model to the normal lot, as the diagnosis does
    phi = (nRp / evaluate(p).R_p) ** 2
    p1 = replace(p, f=p.f * phi)
    offset = p.M0 / nMn - evaluate(p1).inv_DPn
    p1 = replace(p1, transfer=p1.transfer + (
        TransferTerm("normal-batch offset", "offset", p.conc_M, offset, None, None, "anchor"),))
    s0 = evaluate(p1)
    Mw_factor = nMw / (s0.DPn * p.M0 * s0.dispersity)
    C = next(a for a in __import__("gpctools.refdata", fromlist=["agents_for"]).agents_for(
        "styrene") if a.agent == TRUTH["impurity"]).C(p.T)
    excess = TRUTH["impurity [ppm mol]"] * 1e-6 * C
    s = evaluate(p1, extra_transfer=excess)
    Mn = s.DPn * p.M0
    Mw = Mn * s.dispersity * Mw_factor
    return {"Mn": Mn, "Mw": Mw, "R_p": s.R_p, "k_app": s.R_p / p.conc_M,
            "nMn": nMn, "nMw": nMw, "nRp": nRp, "excess": excess, "C": C}


def write_troubleshooting_case(folder: str | Path) -> dict[str, Any]:
    """Write the demo troubleshooting case into ``folder``.

    Files: ``recipe.toml``, ``batch.csv`` (for the demo method one level up,
    ``../method.toml``), ``exports/LC180-0409.csv`` (normal lot),
    ``exports/LC180-0417.csv`` (low lot), ``truth.json``.

    Returns
    -------
    dict
        ``folder``, ``recipe``, ``batch_sheet``, ``exports`` (paths as str) and
        ``truth`` (the hidden cause and the exact averages).
    """
    from gpctools import simulate

    out = Path(folder)
    v = _problem_values()
    times = [0, 20, 40, 60, 80]
    conv = [1.0 - math.exp(-v["k_app"] * 60.0 * t) for t in times]
    conv_txt = ", ".join(f"{x:.5f}" for x in conv)
    recipe_path = write_text(
        out / "recipe.toml",
        _RECIPE.format(Mn=v["Mn"], Mw=v["Mw"], conv=conv_txt, nMn=v["nMn"], nMw=v["nMw"],
                       nRp=v["nRp"]),
    )
    cal = simulate.default_calibration()
    exports = []
    lots = (("LC180-0409", v["nMn"], v["nMw"], 71), ("LC180-0417", v["Mn"], v["Mw"], 72))
    for lot, Mn, Mw, seed in lots:
        b = 1.0 / (Mw / Mn - 1.0)  # Schulz-Zimm: dispersity (b+1)/b
        V, h = simulate.chromatogram(
            simulate.schulz_zimm(Mn, b), cal, height=100.0, baseline_offset=0.4,
            baseline_drift=0.01, noise=0.01, extra_peaks=((22.61, 0.08, 12.0),), seed=seed,
        )
        path = out / "exports" / f"{lot}.csv"
        simulate.write_chromatogram(path, V, h, metadata={"sample": lot})
        exports.append(str(path))
    sheet = write_text(
        out / "batch.csv",
        "sample_id,file,role,product,batch\n"
        "LC180-0409,exports/LC180-0409.csv,sample,LC-180,normal lot\n"
        "LC180-0417,exports/LC180-0417.csv,sample,LC-180,low-Mn lot\n",
    )
    truth = dict(TRUTH)
    truth.update({
        "low lot Mn [g/mol]": v["Mn"],
        "low lot Mw [g/mol]": v["Mw"],
        "R_p [mol/L/s]": v["R_p"],
        "excess 1/DPn [-]": v["excess"],
        "C of the impurity [-]": v["C"],
    })
    write_text(out / "truth.json", json.dumps(truth, indent=2))
    return {
        "folder": str(out),
        "recipe": str(recipe_path),
        "batch_sheet": str(sheet),
        "exports": exports,
        "truth": truth,
    }
