"""Impurity levels from the excess 1/DPn: named, generic, instantaneous or cumulative."""

from __future__ import annotations

import json

import pytest

from gpctools.chainlength import impurity_ratio_cumulative
from gpctools.kinetics import Recipe, resolve_parameters
from gpctools.kinetics.impurity import GENERIC_C, ExcessEstimate, impurity_estimates

BASE = {
    "T [°C]": 60.0,
    "monomer": {"name": "styrene", "concentration [mol/L]": 6.0},
    "initiator": {"name": "AIBN", "concentration [mol/L]": 0.02},
}


def setup(**changes):
    d = json.loads(json.dumps(BASE))
    d.update(changes)
    r = Recipe.from_dict(d)
    return r, r.reference_data(), resolve_parameters(r)


def test_generic_constants_when_no_candidate_is_named():
    # docs/science.md, section 9 check value: an excess of 1.5e-4 is 10 ppm (mol) of C = 15;
    # here C = 1, 10, 100 give 150, 15 and 1.5 ppm [derived: 1e6·excess/C]
    r, ref, p = setup()
    est = impurity_estimates(r, ref, p, ExcessEstimate(1.5e-4, 1.0e-4, 2.0e-4, 1.4e-4, None))
    generic = [e for e in est if e.generic]
    assert [e.C for e in generic] == list(GENERIC_C)
    assert [e.ppm_mol for e in generic] == pytest.approx([150.0, 15.0, 1.5], rel=1e-12)
    assert [e.ppm_mol_low for e in generic] == pytest.approx([100.0, 10.0, 1.0], rel=1e-12)
    assert [e.ppm_mol_high for e in generic] == pytest.approx([200.0, 20.0, 2.0], rel=1e-12)
    assert all(e.relation == "instantaneous" for e in est)
    # [X] = ratio·[M] [mol/L]
    assert generic[1].concentration == pytest.approx(15e-6 * 6.0, rel=1e-12)
    # the table's agents follow (1-dodecanethiol, C = 14.8, published: Carraher)
    thiol = next(e for e in est if e.name == "1-dodecanethiol")
    assert thiol.ppm_mol == pytest.approx(1e6 * 1.5e-4 / 14.8, rel=1e-12)


def test_named_candidate_and_the_cumulative_relation():
    # with the final conversion known: [X]0/[M]0 = excess·x/(1 − (1 − x)^C)
    # (docs/science.md, section 5.3); at x = 0.05, C = 14.8 it is 1/0.716... of the
    # instantaneous level [derived there: ratio 0.716 for C = 15 at 5 %]
    r, ref, p = setup(candidate=[{"name": "1-dodecanethiol"}])
    ex = ExcessEstimate(3e-4, 2e-4, 4e-4, None, 0.05)
    est = impurity_estimates(r, ref, p, ex)
    assert not any(e.generic for e in est)  # a candidate is named: no generic ones
    first = est[0]
    assert first.name == "1-dodecanethiol" and first.relation == "cumulative"
    assert first.ppm_mol == pytest.approx(1e6 * float(impurity_ratio_cumulative(3e-4, 14.8, 0.05)),
                                          rel=1e-12)
    assert first.ppm_mol > 1e6 * 3e-4 / 14.8  # the instantaneous relation underestimates
    assert "cumulative at conversion x = 0.05" in ex.relation
    assert first.ppm_mass == pytest.approx(first.ppm_mol * 202.40 / 104.15, rel=1e-12)


def test_no_excess_gives_no_levels_and_a_small_one_a_zero_lower_end():
    r, ref, p = setup()
    assert impurity_estimates(r, ref, p, ExcessEstimate(-1e-4, -2e-4, -0.5e-4, None, None)) == ()
    est = impurity_estimates(r, ref, p, ExcessEstimate(0.5e-4, -0.5e-4, 1.5e-4, None, None))
    assert est and all(e.ppm_mol_low == 0.0 for e in est)
