"""The recipe: complete recipes (Arrhenius keys, inhibitors, backbiting switch), mass-basis
charges, and the recipe sheet (CSV/XLSX) against the TOML form."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from gpctools.errors import MethodError
from gpctools.kinetics import Recipe, diagnose, load_recipe, predict, resolve_parameters

REPO = Path(__file__).resolve().parent.parent
R_GAS = 8.314462618  # J/mol/K [published: CODATA 2018]

BASE = {
    "T [°C]": 60.0,
    "monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
    "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02},
}


def recipe(**changes) -> Recipe:
    d = json.loads(json.dumps(BASE))
    for k, v in changes.items():
        d[k] = {**d[k], **v} if isinstance(v, dict) and isinstance(d.get(k), dict) else v
    return Recipe.from_dict(d)


# ------------------------------------------------------------------ mass-basis charges


def test_charge_per_100_g_monomer_needs_only_molar_masses():
    # [X] = [M]·(c/100)·M0/M_X [derived]: 6·0.005·104.15/164.21 = 0.019027 mol/L
    # (M0 of styrene and M of AIBN from the formulas, bundled rows). rtol 1e-12: arithmetic.
    r = Recipe.from_dict({**BASE, "initiator": {"name": "AIBN",
                                                "charge [g per 100 g monomer]": 0.5}})
    assert r.initiator.concentration == pytest.approx(6.0 * 0.005 * 104.15 / 164.21, rel=1e-12)
    assert r.initiator.charge is not None and r.initiator.charge.unit == "g per 100 g monomer"
    assert any("0.5 g per 100 g monomer -> 0.01903 mol/L" in n for n in r.charge_notes)
    assert any("0.01903 mol/L" in n for n in predict(r).notes)


def test_charges_in_grams_with_the_volume_from_densities():
    # 500 g styrene (0.906 g/mL, bundled) and 300 g toluene (0.867 g/mL, given): V = 551.88
    # + 346.02 = 897.90 mL; [M] = 500/104.15/0.89790 = 5.3467 mol/L; 1.0 g AIBN:
    # 1/164.21/0.89790 = 6.7823e-3 mol/L [derived]. rtol 1e-4: hand arithmetic to 5 digits.
    r = Recipe.from_dict({
        "T [°C]": 60.0,
        "monomer": {"name": "styrene", "charge [g]": 500.0},
        "initiator": {"name": "AIBN", "charge [g]": 1.0},
        "solvent": [{"name": "toluene", "charge [g]": 300.0, "density [g/mL]": 0.867}],
    })
    assert r.volume == pytest.approx(0.89790, rel=1e-4)
    assert r.monomer.concentration == pytest.approx(5.3467, rel=1e-4)
    assert r.initiator.concentration == pytest.approx(6.7823e-3, rel=1e-4)
    # toluene M = 92.14 g/mol from the agents table: 300/92.14/0.8979 = 3.6261 mol/L
    assert r.solvents[0].concentration == pytest.approx(3.6261, rel=1e-4)
    assert any("reaction volume 0.8979 L" in n for n in r.charge_notes)
    # with the volume given, it is used as is
    v = Recipe.from_dict({"T [°C]": 60.0, "volume [L]": 1.0,
                          "monomer": {"name": "styrene", "charge [g]": 500.0},
                          "initiator": {"name": "AIBN", "charge [g]": 1.0}})
    assert v.monomer.concentration == pytest.approx(500.0 / 104.15, rel=1e-12)


@pytest.mark.parametrize(("d", "key"), [
    ({"monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
      "initiator": {"name": "AIBN", "charge [g]": 1.0}}, "volume [L]"),
    ({"monomer": {"name": "styrene", "charge [g]": 500.0},
      "initiator": {"name": "AIBN", "charge [g]": 1.0},
      "solvent": [{"name": "toluene", "charge [g]": 300.0}]}, 'solvent[1]."density [g/mL]"'),
    ({"monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
      "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02},
      "inhibitor": [{"name": "TBC", "charge [g per 100 g monomer]": 0.0015, "z [-]": 1.0}]},
     'inhibitor[1]."M [g/mol]"'),
    ({"monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
      "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02, "charge [g]": 1.0}},
     'initiator."charge [g]"'),
])
def test_charges_that_cannot_be_converted_name_the_key(d, key):
    with pytest.raises(MethodError) as e:
        Recipe.from_dict({"T [°C]": 60.0, **d})
    assert e.value.key == key


# ------------------------------------------------------------------ complete recipes


def test_kd_given_at_another_temperature_moves_with_E_d():
    # k_d = 3.0e-5 1/s at 70 °C, E_d = 128.9 kJ/mol: at 60 °C
    # 3.0e-5·exp(−128900/R·(1/333.15 − 1/343.15)) [derived]. rtol 1e-12: same formula.
    r = recipe(initiator={"k_d [1/s]": 3.0e-5, "k_d T [°C]": 70.0, "E_d [kJ/mol]": 128.9})
    want = 3.0e-5 * math.exp(-128.9e3 / R_GAS * (1 / 333.15 - 1 / 343.15))
    assert resolve_parameters(r).k_d == pytest.approx(want, rel=1e-12)
    with pytest.raises(MethodError, match="give both"):
        recipe(initiator={"k_d T [°C]": 70.0})


def test_kt_given_with_its_temperature_and_activation_energy():
    # k_t = 2.0e8 (IUPAC) at 50 °C with E_t = 10 kJ/mol: at 60 °C
    # 2.0e8·exp(−10000/R·(1/333.15 − 1/323.15)) = 2.2372e8 [derived]; the temperature cause
    # then moves k_t with E_t = 10. rtol 1e-12: same formula.
    r = recipe(termination={"k_t [L/mol/s]": 2.0e8, "k_t T [°C]": 50.0, "k_t E [kJ/mol]": 10.0})
    p = resolve_parameters(r)
    assert p.k_t == pytest.approx(2.0e8 * math.exp(-10e3 / R_GAS * (1 / 333.15 - 1 / 323.15)),
                                  rel=1e-12)
    assert p.E_t == 10.0
    # E_t alone overrides the table's activation energy of the tabulated k_t
    q = resolve_parameters(recipe(**{"T [°C]": 70.0}, termination={"k_t E [kJ/mol]": 20.0}))
    tab = 2.56e8  # bundled styrene k_t at 60 °C (IUPAC; derived from classical rate data)
    assert q.k_t == pytest.approx(tab * math.exp(-20e3 / R_GAS * (1 / 343.15 - 1 / 333.15)),
                                  rel=1e-9)


def test_kp_given_keeps_the_tabulated_activation_energy():
    # a k_p at the recipe temperature moves with the table's E_p (32.51 kJ/mol for styrene,
    # published: Buback et al. 1995), so a temperature cause can still be weighed
    p = resolve_parameters(recipe(monomer={"k_p [L/mol/s]": 350.0}))
    assert p.k_p == 350.0 and p.E_p == pytest.approx(32.51)
    p2 = resolve_parameters(recipe(monomer={"k_p [L/mol/s]": 350.0, "k_p E [kJ/mol]": 30.0}))
    assert p2.E_p == 30.0


def test_backbiting_switch_for_pulsed_conditions():
    # n-butyl acrylate at 50 °C, 4 mol/L: chain-end k_p 2.21e7·exp(−17900/(R·323.15)) =
    # 2.8252e4 (published: IUPAC part 5) with backbiting = false; the effective 5652 by
    # default (tests/test_kinetics.py, hand value)
    base = {"T [°C]": 50.0, "monomer": {"name": "BA", "concentration [mol/L]": 4.0},
            "initiator": {"name": "AIBN", "concentration [mol/L]": 0.01},
            "termination": {"delta [-]": 0.5}, "monomer_C": None}
    base.pop("monomer_C")
    with pytest.warns(Warning):
        eff = resolve_parameters(Recipe.from_dict(base))
        end = resolve_parameters(Recipe.from_dict(
            {**base, "monomer": {**base["monomer"], "backbiting": False}}))
    assert end.k_p == pytest.approx(2.21e7 * math.exp(-17.9e3 / (R_GAS * 323.15)), rel=1e-12)
    assert eff.k_p == pytest.approx(5652.0, rel=1e-3)
    assert "pulsed" in end.source("k_p")


# ------------------------------------------------------------------ the recipe sheet


def test_template_sheet_is_the_template_toml():
    toml = load_recipe(REPO / "gpctools" / "templates" / "recipe.toml")
    sheet = load_recipe(REPO / "gpctools" / "templates" / "recipe.csv")
    from dataclasses import replace

    assert replace(sheet, path=toml.path) == toml
    assert diagnose(sheet).verdict == diagnose(toml).verdict


def test_recipe_sheet_as_a_workbook(tmp_path):
    from openpyxl import Workbook

    wb = Workbook()
    ws = wb.active
    ws.append(["section", "item", "key", "value"])
    for row in (["recipe", None, "T [°C]", 60], ["monomer", None, "name", "styrene"],
                ["monomer", None, "concentration [mol/L]", 6.0],
                ["initiator", None, "name", "AIBN"],
                ["initiator", None, "charge [g per 100 g monomer]", 0.5],
                ["solvent", "toluene", "concentration [mol/L]", 3.0],
                ["solvent", "toluene", "C uncertainty [%]", 20],
                ["measured", None, "Mn [g/mol]", 30000], ["measured", None, "time [min]", "0; 30"],
                ["measured", None, "conversion", "0; 0.01"],
                ["checks", None, "flow marker corrected", "yes"],
                ["checks", None, "flow marker observed [mL]", 22.61],
                ["checks", None, "flow marker reference [mL]", 22.60]):
        ws.append(row)
    path = tmp_path / "recipe.xlsx"
    wb.save(path)
    r = load_recipe(path)
    assert r.solvents[0].name == "toluene" and r.solvents[0].C_uncertainty == 20.0
    assert r.initiator.concentration == pytest.approx(6.0 * 0.005 * 104.15 / 164.21, rel=1e-12)
    assert r.measured.time_min == (0.0, 30.0) and r.checks.flow_marker_corrected is True


@pytest.mark.parametrize(("old", "new", "row", "column", "text"), [
    ("initiator,,concentration [mol/L],0.02", "initiator,,concentration [mol/L],abc", 7,
     "value", "must be a number"),
    ("monomer,,name,styrene", "monomer,,colour,red", 4, "key", "unknown key"),
    ("solvent,toluene", "solvnt,toluene", 8, "section", "unknown section 'solvnt'"),
    ("checks,,flow marker corrected,no", "checks,,flow marker corrected,perhaps", 18, "value",
     "not yes or no"),
])
def test_recipe_sheet_errors_name_the_row_and_cell(tmp_path, old, new, row, column, text):
    src = (REPO / "gpctools" / "templates" / "recipe.csv").read_text(encoding="utf-8")
    assert old in src
    bad = tmp_path / "bad.csv"
    bad.write_text(src.replace(old, new), encoding="utf-8")
    with pytest.raises(MethodError) as e:
        load_recipe(bad)
    assert (e.value.row, e.value.column) == (row, column), str(e.value)
    assert text in str(e.value) and "bad.csv" in str(e.value)


def test_recipe_sheet_key_given_twice(tmp_path):
    src = (REPO / "gpctools" / "templates" / "recipe.csv").read_text(encoding="utf-8")
    bad = tmp_path / "twice.csv"
    bad.write_text(src + "monomer,,concentration [mol/L],5.0\n", encoding="utf-8")
    with pytest.raises(MethodError, match="given twice") as e:
        load_recipe(bad)
    assert e.value.row == 24 and "row 5" in str(e.value)  # header + 22 rows, then this one
