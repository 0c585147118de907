"""The shared contract of readers and fits (STYLE.md), applied to gpctools.detectors:
inputs never mutated, lists accepted, the same answer twice, unsorted or reversed x gives
the same answer, summaries are plain JSON, degenerate input gives a clear error."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from gpctools.detectors import (
    DetectorSetup,
    DetectorTraces,
    NarrowStandard,
    analyse_light_scattering,
    analyse_viscometry,
    calibrate_setup,
)
from gpctools.detectors import _synthetic as syn
from gpctools.errors import DataError

SETUP = DetectorSetup.from_mapping({
    "ri": {"kind": "RI", "constant": 5e4, "dn_dc": 0.185, "broadening": 0.1},
    "ls": {"kind": "LS", "wavelength": 658, "dn_dc": 0.185, "solvent_refractive_index": 1.404,
           "angles": [35, 90, 145], "constant": 1e-5, "offset": 0.1, "broadening": 0.12},
    "visc": {"kind": "viscometer", "design": "bridge", "offset": 0.2, "broadening": 0.15},
})


def _traces():
    V = np.arange(14.0, 30.0, 0.01)
    return syn.injection(SETUP, V, syn.gaussian_profile(22, 0.8, 2e-4), syn.linear_log_M(12, 0.3),
                         noise={"ri": 0.002, "ls": 0.005, "visc": 0.005}, seed=2)


def test_unsorted_lists_same_answer_and_no_mutation():
    tr = _traces()
    order = np.random.default_rng(0).permutation(tr.volume.size)
    raw = {k: np.array(v) for k, v in tr.signals.items()}
    shuffled = DetectorTraces(list(tr.volume[order]), {k: v[order].tolist() for k, v in raw.items()})
    kw = dict(limits=(19.5, 24.5), injected_mass=2e-4)
    a = analyse_light_scattering(tr, SETUP, **kw)
    b = analyse_light_scattering(shuffled, SETUP, **kw)
    c = analyse_light_scattering(tr, SETUP, **kw)
    for k in ("Mn", "Mw", "Mz"):
        assert a.averages[k] == b.averages[k] == c.averages[k]  # same numbers, bit for bit
    for k, v in raw.items():
        np.testing.assert_array_equal(tr.signals[k], v)  # inputs untouched
    with pytest.raises(ValueError):
        tr.signals["ri"][0] = 1.0  # arrays held by a result are read-only


def test_summaries_are_plain_json():
    tr = _traces()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ls = analyse_light_scattering(tr, SETUP, limits=(19.5, 24.5), injected_mass=2e-4)
        vi = analyse_viscometry(tr, SETUP, standard_log_M=lambda v: 12 - 0.3 * v, K_standard=1.14e-4,
                                a_standard=0.716, K=1.14e-4, a=0.716, limits=(19.5, 24.5))
        cal = calibrate_setup(tr, SETUP, NarrowStandard(Mw=3e5), shape="gaussian")
    for obj in (ls, vi, cal, SETUP):
        text = json.dumps(obj.summary(), allow_nan=False)
        assert "NaN" not in text


def test_degenerate_input_is_refused_clearly():
    V = np.arange(14.0, 30.0, 0.01)
    flat = DetectorTraces(V, {"ri": np.zeros(V.size), "ls": np.zeros((V.size, 3)),
                              "visc": np.column_stack([np.zeros(V.size), np.full(V.size, 100.0)])})
    with pytest.raises(DataError, match="no positive area"):
        analyse_light_scattering(flat, SETUP)
    with pytest.raises(DataError, match="at least 10 slices"):
        DetectorTraces([1.0, 2.0], {"ri": [1.0, 2.0]})
    with pytest.raises(DataError, match="non-finite"):
        DetectorTraces(V, {"ri": np.full(V.size, np.nan)})
