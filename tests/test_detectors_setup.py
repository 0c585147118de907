"""Detector set-up from a plain mapping (a parsed [detectors] TOML table), traces and alignment."""

from __future__ import annotations

import sys

import numpy as np
import pytest

from gpctools.detectors import DetectorSetup, DetectorTraces, Spreading, align
from gpctools.detectors.traces import matching_spreading
from gpctools.errors import DataError, MethodError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

TOML = """
[detectors]
concentration = "ri"

[detectors.ri]
kind = "RI"
constant = 5.0e4
dn_dc = 0.185
wavelength = 880
broadening = 0.10

[detectors.ls]
kind = "MALS"
wavelength = 658
dn_dc = 0.185
solvent_refractive_index = 1.404
angles = [35, 50, 75, 90, 105, 130, 145]
constant = 1.0e-5
offset = 0.120
broadening = {sigma = 0.12, tau = 0.02}

[detectors.visc]
kind = "viscometer"
design = "bridge"
delay = 0.25

[detectors.uv]
kind = "UV"
response = 2.0e3
offset = -0.05

[detectors.copolymer]
names = ["styrene", "methyl acrylate"]
dn_dc = [0.185, 0.084]
uv_response = [2.0e3, 50.0]
"""


def _mapping():
    return tomllib.loads(TOML)["detectors"]


def test_setup_from_toml_mapping_and_round_trip():
    s = DetectorSetup.from_mapping(_mapping(), flow_rate=1.0)
    assert s.concentration == "ri" and s.names == ("ri", "ls", "visc", "uv")
    ls = s["ls"]
    assert ls.kind == "light scattering" and ls.angles[3] == 90.0 and ls.normalisation == (1.0,) * 7
    assert ls.broadening == Spreading(0.12, 0.02)
    assert s["visc"].offset == pytest.approx(0.25)  # delay 0.25 min × 1.0 mL/min
    assert s["uv"].offset == -0.05  # upstream of the RI: negative (docs/science.md, section 13 sign)
    assert s.copolymer is not None and s.copolymer.uv_response == (2000.0, 50.0)
    again = DetectorSetup.from_mapping(s.to_mapping())
    assert again == s
    summ = s.summary()
    assert summ["concentration detector"] == "ri" and len(summ["detectors"]) == 4


@pytest.mark.parametrize(
    ("path", "value", "key", "words"),
    [
        (("ls", "dn_dc"), "0.185", "detectors.ls.dn_dc", "must be a number"),
        (("ls", "dn_dc"), 0.0, "detectors.ls.dn_dc", "must not be 0"),
        (("ls", "angles"), [90, 190], "detectors.ls.angles", "between 0 and 180"),
        (("ls", "normalisation"), [1, 1], "detectors.ls.normalisation", "must hold 7"),
        (("ls", "colour"), "red", "detectors.ls.colour", "unknown key"),
        (("ls", "solvent_refractive_index"), 14.04, "detectors.ls.solvent_refractive_index", "implausible"),
        (("ri", "kind"), "ELSD", "detectors.ri.kind", "unknown detector kind"),
        (("visc", "design"), "piston", "detectors.visc.design", "unknown design"),
        (("ri", "broadening"), {"sigma": -1}, "detectors.ri.broadening.sigma", "zero or positive"),
        (("ri", "offset"), 0.1, "detectors.ri.offset", "must be 0"),
        (("copolymer", "dn_dc"), [0.185], "detectors.copolymer.dn_dc", "must hold 2"),
    ],
)
def test_setup_errors_name_the_dotted_key(path, value, key, words):
    m = _mapping()
    m[path[0]][path[1]] = value
    with pytest.raises(MethodError) as exc:
        DetectorSetup.from_mapping(m, flow_rate=1.0, source="method.toml")
    assert exc.value.key == key
    assert words in exc.value.message
    assert "method.toml" in str(exc.value)


def test_setup_errors_for_missing_things():
    m = _mapping()
    with pytest.raises(MethodError, match="flow rate") as exc:
        DetectorSetup.from_mapping(m)  # delay without a flow rate
    assert exc.value.key == "detectors.visc.delay"
    m = _mapping()
    del m["ls"]["angles"]
    with pytest.raises(MethodError) as exc:
        DetectorSetup.from_mapping(m, flow_rate=1.0)
    assert exc.value.key == "detectors.ls.angles"
    m = _mapping()
    m["concentration"] = "ls"
    with pytest.raises(MethodError, match="must be RI or UV"):
        DetectorSetup.from_mapping(m, flow_rate=1.0)
    with pytest.raises(MethodError, match="no detectors"):
        DetectorSetup.from_mapping({})


def test_setup_default_concentration_detector_is_the_only_ri():
    s = DetectorSetup.from_mapping({"a": {"kind": "refractive index"}, "b": {"kind": "LS", "wavelength": 658,
                                                                              "angles": [90]}})
    assert s.concentration == "a"


def test_replace_returns_new_setup():
    s = DetectorSetup.from_mapping(_mapping(), flow_rate=1.0)
    t = s.replace("ls", offset=0.2)
    assert t["ls"].offset == 0.2 and s["ls"].offset == 0.12
    with pytest.raises(MethodError, match="no detector named"):
        s.replace("mals2", offset=0.1)


def test_traces_sorted_and_checked():
    V = np.linspace(10, 20, 50)
    tr = DetectorTraces(V[::-1], {"ri": np.arange(50.0)[::-1]})
    assert np.all(np.diff(tr.volume) > 0)
    np.testing.assert_array_equal(tr["ri"], np.arange(50.0))  # signal follows its volume
    with pytest.raises(DataError, match="no trace for detector 'ls'"):
        tr["ls"]
    with pytest.raises(DataError, match="rows"):
        DetectorTraces(V, {"ri": np.ones(49)})
    s = DetectorSetup.from_mapping(_mapping(), flow_rate=1.0)
    bad = DetectorTraces(V, {"ri": np.ones(50), "ls": np.ones((50, 3))})
    with pytest.raises(DataError, match="lists 7 angles"):
        bad.check(s)


def test_align_follows_the_offset_sign():
    # Δ = V_X − V_conc > 0: the downstream detector's peak sits later; reading X at V + Δ
    # puts it back on the concentration axis (docs/science.md, section 13)
    V = np.arange(0, 10, 0.01)
    conc = np.exp(-0.5 * ((V - 5) / 0.3) ** 2)
    x = np.exp(-0.5 * ((V - 5.2) / 0.3) ** 2)
    back = align(V, x, 0.2)
    inner = (V > 1) & (V < 9)
    np.testing.assert_allclose(back[inner], conc[inner], atol=1e-9)  # 0.2 is a whole number of slices


def test_matching_spreading_adds_variance():
    # C6: σ²_extra = σ²_more − σ²_less (docs/science.md, section 13, DERIVED)
    m = matching_spreading(Spreading(0.1), Spreading(0.2, 0.05))
    assert m.sigma**2 == pytest.approx(0.2**2 - 0.1**2)
    assert m.tau == 0.05
    assert matching_spreading(Spreading(0.3), Spreading(0.2)).is_zero()
