"""TransferOptions: checked settings of the run-series analysis, and how analyse_series takes them."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from gpctools.errors import DataError, DesignError, EstimatorWarning
from gpctools.simulate import simulate_series
from gpctools.transfer import TransferOptions, analyse_series, run_series_from_rows

M0_STYRENE = 104.15  # g/mol [derived: C8H8, standard atomic weights]
C_DDM_STYRENE_60 = 14.8  # 1-dodecanethiol in styrene, 60 °C [published: Carraher 8th ed.]
RATIOS = np.array([0.0, 0.5e-4, 1.0e-4, 2.0e-4, 3.0e-4, 4.0e-4])  # [A]/[M], our choice


def _series():
    rows = simulate_series(RATIOS, C_A=C_DDM_STYRENE_60, inv_DPn0=5e-4, M0=M0_STYRENE,
                           rel_noise=0.01, seed=21)
    for r in rows:
        r.update({"monomer": "styrene", "agent": "1-dodecanethiol", "T [°C]": 60.0,
                  "delta [-]": 1.0})  # most-probable data (simulate_series): no combination
    return run_series_from_rows(rows)


def test_defaults_and_their_summary():
    o = TransferOptions()
    assert o.terms is None and o.estimators == ("Mn", "Mw/2", "CLD") and o.drift == "auto"
    assert o.summary() == {
        "terms": "auto", "estimators": ["Mn", "Mw/2", "CLD"], "drift": "auto",
        "CLD window [g/mol]": "auto", "CLD fraction [-]": 0.7, "confidence [-]": 0.95,
        "impurity confidence [-]": 0.99, "impurity level applies to": "series",
        "impurity C_X [-]": None, "relative error of 1/DPn [-]": None,
        "exclude flagged runs": True, "expected intercept [-]": None, "C_M [-]": None,
        "kinetic term [-]": None, "fixed intercept [-]": None,
        "delta [-]": None, "kinetic term": "auto",  # issue 11: termination mode, kinetic term
    }
    json.dumps(o.summary())  # JSON-safe


def test_values_are_normalised_and_frozen():
    o = TransferOptions(terms=["C_A"], estimators="Mw/2", cld_window=[2e4, 2e5],
                        expected_intercept=[5e-4, 1e-5])
    assert o.terms == ("C_A",) and o.estimators == ("Mw/2",)
    assert o.cld_window == (2e4, 2e5) and o.expected_intercept == (5e-4, 1e-5)
    assert TransferOptions(terms=[]).terms is None  # empty list: every varying ratio
    per_run = TransferOptions(cld_window={"R1": (1e4, 1e5)})
    assert per_run.cld_window["R1"] == (1e4, 1e5)
    with pytest.raises(TypeError):
        per_run.cld_window["R2"] = (1e4, 1e5)  # read-only
    with pytest.raises(AttributeError):
        o.drift = False  # frozen


@pytest.mark.parametrize(("change", "key", "words"), [
    ({"estimators": ["Mz"]}, "estimators", "unknown estimator 'Mz'"),
    ({"estimators": []}, "estimators", "at least one estimator"),
    ({"drift": "maybe"}, "drift", "'auto', True or False"),
    ({"cld_window": (2e5, 2e4)}, "cld_window", "0 < M_low < M_high"),
    ({"cld_window": {"R1": (-1, 5)}}, "cld_window", "of run 'R1'"),
    ({"cld_fraction": 1.2}, "cld_fraction", "between 0 and 1"),
    ({"confidence": 95}, "confidence", "between 0 and 1"),
    ({"impurity_confidence": 0.0}, "impurity_confidence", "between 0 and 1"),
    ({"impurity_adjust": "batch"}, "impurity_adjust", "'series' or 'run'"),
    ({"flag_estimator": "Mz"}, "flag_estimator", "unknown estimator"),
    ({"exclude_flagged": "no"}, "exclude_flagged", "True or False"),
    ({"impurity_C": -3.0}, "impurity_C", ">= 0"),
    ({"C_M": float("nan")}, "C_M", ">= 0"),
    ({"kinetic_term": -1e-4}, "kinetic_term", ">= 0"),
    ({"fixed_intercept": float("inf")}, "fixed_intercept", ">= 0"),
    ({"rel_error": 0.0}, "rel_error", "positive"),
    ({"expected_intercept": (-1.0, -2.0)}, "expected_intercept", ">= 0"),
    ({"expected_intercept": (1e-4, 1e-5, 3.0)}, "expected_intercept", "standard error"),
    ({"terms": [1, 2]}, "terms", "names such as C_A"),
])
def test_bad_values_name_the_option(change, key, words):
    with pytest.raises(DataError, match=words) as e:
        TransferOptions(**change)
    assert e.value.key == key
    # the same check when an option is changed later
    with pytest.raises(DataError):
        TransferOptions().with_changes(**change)


def test_unknown_option_names_are_refused_with_a_hint():
    with pytest.raises(TypeError, match="did you mean 'impurity_C'"):
        TransferOptions().with_changes(impurity_c=15.0)
    with pytest.raises(TypeError, match="unknown transfer option 'colour'"):
        analyse_series(series=_series(), colour="red")


def test_options_object_and_keyword_overrides_agree():
    s = _series()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", EstimatorWarning)
        by_keywords = analyse_series(series=s, impurity_C=15.0, estimators=["Mn", "Mw/2"])
        opts = TransferOptions(impurity_C=15.0, estimators=("Mn", "Mw/2"))
        by_object = analyse_series(series=s, options=opts)
        overridden = analyse_series(series=s, options=opts, estimators=["Mn"])
    assert json.dumps(by_object.summary()) == json.dumps(by_keywords.summary())
    assert by_object.options == opts.summary()
    assert overridden.options["estimators"] == ["Mn"]  # the keyword wins over the object
    assert opts.estimators == ("Mn", "Mw/2")  # and the object is not changed
    with pytest.raises(TypeError, match="TransferOptions"):
        analyse_series(series=s, options={"impurity_C": 15.0})


def test_a_skipped_impurity_test_leaves_a_warning(monkeypatch):
    # a design the impurity test refuses must not pass silently as "nothing flagged"
    import gpctools.transfer.group as group  # the per-group steps moved out of analysis.py

    def refuse(*args, **kwargs):
        raise DesignError("DDM: the test cannot run on this design")

    monkeypatch.setattr(group, "flag_runs", refuse)
    with pytest.warns(EstimatorWarning, match="impurity test"):
        res = analyse_series(series=_series(), impurity_C=15.0)
    g = res.group()
    assert g.impurity is None and g.excluded == ()
    msg = next(w for w in g.warnings if "impurity test" in w)
    assert "not run" in msg and "no run is flagged" in msg and "cannot run on this design" in msg
    assert msg in res.warnings
    # the fits are still made
    assert res.constant("C_A").value == pytest.approx(C_DDM_STYRENE_60, rel=0.05)  # issue 3: 5 %
