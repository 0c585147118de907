"""The detector set-up: which detectors an SEC line has, their constants and plumbing.

A :class:`DetectorSetup` is built once from a plain mapping (what a ``[detectors]`` TOML
section parses to) by :meth:`DetectorSetup.from_mapping`; bad keys and values raise
:class:`~gpctools.errors.MethodError` naming the dotted key (``detectors.ls.dn_dc``).
Everything downstream can then assume checked, frozen values.

Mapping layout (every detector is a sub-table with a name of the user's choosing)::

    [detectors]
    concentration = "ri"              # the detector that gives c (default: the only RI)

    [detectors.ri]
    kind = "RI"
    constant = 5.0e4                  # k_RI [signal units per refractive-index unit]
    dn_dc = 0.185                     # at the RI detector's wavelength [mL/g]
    wavelength = 880                  # [nm], informative
    broadening = 0.10                 # σ [mL], or {sigma = 0.10, tau = 0.02}

    [detectors.ls]
    kind = "light scattering"
    wavelength = 658                  # laser vacuum wavelength [nm]
    dn_dc = 0.185                     # at the laser wavelength [mL/g]
    solvent_refractive_index = 1.404  # n0 at the laser wavelength [-]
    angles = [35, 50, 75, 90, 105, 130, 145]   # in the solvent [degree]
    normalisation = [1, 1, 1, 1, 1, 1, 1]      # N_θ, relative to 90° [-]
    constant = 1.0e-5                 # k_cal: R_θ = k_cal·N_θ·signal [cm⁻¹ per signal unit]
    A2 = 0.0                          # second virial coefficient [mol mL/g²]
    offset = 0.120                    # Δ = V_ls − V_conc [mL] (or delay = ... [min])
    broadening = 0.12

    [detectors.visc]
    kind = "viscometer"
    design = "bridge"                 # "bridge" | "single capillary" | "two capillaries"
                                      # | "specific viscosity"
    constant = 1.0                    # gain correction [-] (see Viscometer)
    offset = 0.250

    [detectors.uv]
    kind = "UV"
    response = 2.0e3                  # signal per concentration [signal units per g/mL]
    wavelength = 260

    [detectors.copolymer]             # optional, for UV + RI composition
    names = ["styrene", "methyl acrylate"]
    dn_dc = [0.185, 0.084]            # per component, at the RI wavelength [mL/g]
    uv_response = [2.0e3, 50.0]       # per component [signal units per g/mL]

Offset convention (docs/science.md, section 13): Δ_X = V_X − V_conc for the same fluid element,
positive when detector X is downstream of the concentration detector. To combine slices,
X's trace is read at V + Δ_X for the concentration slice at V (X's axis shifted by −Δ_X).
An offset given as a time delay [min] is converted with the flow rate.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from gpctools.display import Display
from gpctools.errors import MethodError

from .broadening import Spreading

__all__ = [
    "Detector",
    "ConcentrationDetector",
    "LightScatteringDetector",
    "Viscometer",
    "Copolymer",
    "DetectorSetup",
    "KINDS",
    "VISCOMETER_DESIGNS",
]

#: Canonical detector kinds and the words accepted for each (case-insensitive).
KINDS: dict[str, tuple[str, ...]] = {
    "RI": ("ri", "dri", "refractive index", "refractive-index"),
    "UV": ("uv", "uv-vis", "absorbance"),
    "light scattering": ("light scattering", "ls", "mals", "lals", "rals", "static light scattering"),
    "viscometer": ("viscometer", "visc", "viscometry", "differential viscometer"),
}

VISCOMETER_DESIGNS = ("bridge", "single capillary", "two capillaries", "specific viscosity")

_COMMON_KEYS = {"kind", "offset", "delay", "broadening", "wavelength", "description"}
_KEYS: dict[str, set[str]] = {
    "RI": _COMMON_KEYS | {"constant", "dn_dc"},
    "UV": _COMMON_KEYS | {"response"},
    "light scattering": _COMMON_KEYS | {"dn_dc", "solvent_refractive_index", "angles",
                                        "normalisation", "constant", "A2"},
    "viscometer": _COMMON_KEYS | {"design", "constant"},
}
_TOP_KEYS = {"concentration", "copolymer", "description"}
_COPOLYMER_KEYS = {"names", "dn_dc", "uv_response", "dn_dc_laser"}


@dataclass(frozen=True, repr=False)
class Detector(Display):
    """What every detector has.

    Attributes
    ----------
    name : str
        The key of the detector in the set-up (``"ri"``, ``"ls"``...).
    kind : str
        ``"RI"``, ``"UV"``, ``"light scattering"`` or ``"viscometer"``.
    offset : float
        Δ = V_detector − V_concentration for the same fluid element [mL] (0 for the
        concentration detector itself).
    broadening : Spreading
        Total band spreading of this detector's trace [mL] (column + cells + tubing).
    wavelength : float or None
        Working wavelength [nm] (the laser's vacuum wavelength for light scattering).
    """

    name: str
    kind: str
    offset: float = 0.0
    broadening: Spreading = field(default_factory=Spreading)
    wavelength: float | None = None

    def _extra_mapping(self) -> dict[str, Any]:
        return {}

    def to_mapping(self) -> dict[str, Any]:
        """The mapping :meth:`DetectorSetup.from_mapping` reads back to this detector."""
        out: dict[str, Any] = {"kind": self.kind}
        if self.offset:
            out["offset"] = self.offset
        if not self.broadening.is_zero():
            out["broadening"] = ({"sigma": self.broadening.sigma, "tau": self.broadening.tau}
                                 if self.broadening.tau else self.broadening.sigma)
        if self.wavelength is not None:
            out["wavelength"] = self.wavelength
        out.update({k: v for k, v in self._extra_mapping().items() if v is not None})
        return out

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        out: dict[str, Any] = {"name": self.name}
        for k, v in self.to_mapping().items():
            out[k] = list(v) if isinstance(v, tuple) else v
        out.setdefault("offset", 0.0)
        out["broadening"] = self.broadening.summary()
        return out


@dataclass(frozen=True, repr=False)
class ConcentrationDetector(Detector, Display):
    """RI or UV detector: signal proportional to mass concentration.

    Attributes
    ----------
    constant : float or None
        RI: k_RI, signal per refractive-index unit [signal units/RIU]; c = S/(k_RI·dn/dc)
        (docs/detectors.md, check values).
    dn_dc : float or None
        RI: refractive-index increment at the RI detector's wavelength [mL/g].
    response : float or None
        UV: signal per concentration, a_m·ℓ times the detector gain
        [signal units per g/mL]; c = S/response (C5).
    """

    constant: float | None = None
    dn_dc: float | None = None
    response: float | None = None

    @property
    def factor(self) -> float | None:
        """Signal per concentration [signal units per g/mL], or None if not yet known."""
        if self.kind == "RI":
            if self.constant is None or self.dn_dc is None:
                return None
            return self.constant * self.dn_dc
        return self.response

    def _extra_mapping(self) -> dict[str, Any]:
        if self.kind == "RI":
            return {"constant": self.constant, "dn_dc": self.dn_dc}
        return {"response": self.response}


@dataclass(frozen=True, repr=False)
class LightScatteringDetector(Detector, Display):
    """Static light-scattering detector with one or more angles.

    Attributes
    ----------
    dn_dc : float or None
        Refractive-index increment at the laser wavelength [mL/g].
    solvent_refractive_index : float or None
        n0 at the laser wavelength [-].
    angles : tuple of float
        Scattering angle of each channel, in the solvent [degree].
    normalisation : tuple of float
        N_θ per channel, relative to the 90° channel [-].
    constant : float or None
        k_cal: R_θ = k_cal·N_θ·(S_θ − S_θ,baseline) [cm⁻¹ per signal unit] (docs/science.md, section 14).
    A2 : float
        Second virial coefficient of the sample [mol mL/g²] (0: no correction).
    """

    dn_dc: float | None = None
    solvent_refractive_index: float | None = None
    angles: tuple[float, ...] = ()
    normalisation: tuple[float, ...] = ()
    constant: float | None = None
    A2: float = 0.0

    def _extra_mapping(self) -> dict[str, Any]:
        return {
            "dn_dc": self.dn_dc,
            "solvent_refractive_index": self.solvent_refractive_index,
            "angles": list(self.angles),
            "normalisation": list(self.normalisation),
            "constant": self.constant,
            "A2": self.A2 or None,
        }


@dataclass(frozen=True, repr=False)
class Viscometer(Detector, Display):
    """Online viscometer.

    Attributes
    ----------
    design : str
        ``"bridge"`` (four-capillary bridge: channels ΔP and inlet pressure IP),
        ``"single capillary"`` (channels ΔP − ΔP0 and ΔP0), ``"two capillaries"``
        (channels ΔP1 − ΔP2 and ΔP2, the solvent capillary) or ``"specific viscosity"``
        (one channel already holding η_sp). See
        :func:`gpctools.detectors.viscometry.specific_viscosity`.
    constant : float
        Gain correction [-]: for the bridge the ratio of the differential to the inlet
        transducer gain (it multiplies ΔP before η_sp = 4ΔP/(IP − 2ΔP)); for the other
        designs a factor on η_sp. 1 for a matched instrument; derived from a standard of
        known [η] by the narrow-standard calibration.
    """

    design: str = "bridge"
    constant: float = 1.0

    @property
    def channels(self) -> int:
        """Number of signal columns this design needs."""
        return 1 if self.design == "specific viscosity" else 2

    def _extra_mapping(self) -> dict[str, Any]:
        return {"design": self.design, "constant": self.constant}


@dataclass(frozen=True)
class Copolymer:
    """Two-component copolymer constants for UV + RI composition (docs/science.md, section 16).

    Attributes
    ----------
    names : tuple of str
        Component names (A, B); A is usually the UV-absorbing one.
    dn_dc : tuple of float
        (dn/dc)_A, (dn/dc)_B at the RI wavelength [mL/g].
    uv_response : tuple of float
        f_A^UV, f_B^UV [signal units per g/mL].
    dn_dc_laser : tuple of float or None
        (dn/dc)_A, (dn/dc)_B at the laser wavelength [mL/g], for light scattering.
    """

    names: tuple[str, str]
    dn_dc: tuple[float, float]
    uv_response: tuple[float, float]
    dn_dc_laser: tuple[float, float] | None = None

    def to_mapping(self) -> dict[str, Any]:
        """The constants as the method file's ``[detectors]`` keys would hold them."""
        out: dict[str, Any] = {"names": list(self.names), "dn_dc": list(self.dn_dc),
                               "uv_response": list(self.uv_response)}
        if self.dn_dc_laser is not None:
            out["dn_dc_laser"] = list(self.dn_dc_laser)
        return out


@dataclass(frozen=True, repr=False)
class DetectorSetup(Display):
    """All detectors of an SEC line, with the concentration detector named.

    Attributes
    ----------
    detectors : tuple of Detector
        In the order given.
    concentration : str
        Name of the detector that gives the mass concentration (RI or UV); offsets are
        relative to it.
    copolymer : Copolymer or None
        Component constants for UV + RI composition.
    """

    detectors: tuple[Detector, ...]
    concentration: str
    copolymer: Copolymer | None = None

    def __post_init__(self) -> None:
        names = [d.name for d in self.detectors]
        if len(set(names)) != len(names):
            raise MethodError("two detectors share a name", key="detectors")
        if self.concentration not in names:
            raise MethodError(
                f"no detector named {self.concentration!r}; detectors are: {', '.join(names)}",
                key="detectors.concentration",
            )
        if not isinstance(self[self.concentration], ConcentrationDetector):
            raise MethodError("the concentration detector must be of kind RI or UV",
                              key="detectors.concentration")

    def __getitem__(self, name: str) -> Detector:
        for d in self.detectors:
            if d.name == name:
                return d
        raise MethodError(
            f"no detector named {name!r} in the set-up; detectors are: "
            f"{', '.join(d.name for d in self.detectors)}",
            key=f"detectors.{name}",
        )

    def __contains__(self, name: object) -> bool:
        return any(d.name == name for d in self.detectors)

    @property
    def names(self) -> tuple[str, ...]:
        """Names of the detectors, in the order of the set-up."""
        return tuple(d.name for d in self.detectors)

    @property
    def concentration_detector(self) -> ConcentrationDetector:
        """The detector (RI or UV) whose signal gives the slice concentrations."""
        d = self[self.concentration]
        assert isinstance(d, ConcentrationDetector)
        return d

    def of_kind(self, kind: str) -> tuple[Detector, ...]:
        """Detectors of one kind (``"RI"``, ``"UV"``, ``"light scattering"``, ``"viscometer"``)."""
        canon = _canonical_kind(kind, "kind")
        return tuple(d for d in self.detectors if d.kind == canon)

    def replace(self, name: str, **changes: Any) -> DetectorSetup:
        """A copy with fields of detector ``name`` changed (e.g. a calibrated offset)."""
        self[name]  # raises the named error for an unknown detector
        new = tuple(dataclasses.replace(d, **changes) if d.name == name else d
                    for d in self.detectors)
        return dataclasses.replace(self, detectors=new)

    def to_mapping(self) -> dict[str, Any]:
        """Plain mapping that :meth:`from_mapping` turns back into this set-up."""
        out: dict[str, Any] = {"concentration": self.concentration}
        for d in self.detectors:
            out[d.name] = d.to_mapping()
        if self.copolymer is not None:
            out["copolymer"] = self.copolymer.to_mapping()
        return out

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "concentration detector": self.concentration,
            "offset convention": "offset = V_detector − V_concentration [mL], positive downstream",
            "detectors": [d.summary() for d in self.detectors],
            "copolymer": None if self.copolymer is None else self.copolymer.to_mapping(),
        }

    @classmethod
    def from_mapping(cls, data: Mapping[str, Any], *, flow_rate: float | None = None,
                     source: str | None = None, prefix: str = "detectors") -> DetectorSetup:
        """Check and build a set-up from a plain mapping (a parsed ``[detectors]`` table).

        Parameters
        ----------
        data : mapping
            See the module docstring for the layout.
        flow_rate : float, optional
            Flow rate [mL/min] to convert offsets given as ``delay`` [min].
        source : str, optional
            File the mapping came from, for error messages.
        prefix : str
            Dotted prefix of keys in error messages.

        Raises
        ------
        MethodError
            Naming the dotted key (``detectors.ls.dn_dc``) and what to write instead.
        """
        return _build_setup(data, flow_rate=flow_rate, source=source, prefix=prefix)


# -- parsing ------------------------------------------------------------------------------
class _Keys:
    """Error helper that knows the source file and the dotted prefix."""

    def __init__(self, source: str | None, prefix: str) -> None:
        self.source = source
        self.prefix = prefix

    def err(self, msg: str, *parts: str) -> MethodError:
        key = ".".join([self.prefix, *[p for p in parts if p]])
        return MethodError(msg, path=self.source, key=key)

    def number(self, value: Any, *parts: str, positive: bool = False, nonneg: bool = False) -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.err(f"must be a number, got {value!r}", *parts)
        v = float(value)
        if not math.isfinite(v):
            raise self.err(f"must be finite, got {value!r}", *parts)
        if positive and v <= 0:
            raise self.err(f"must be positive, got {value!r}", *parts)
        if nonneg and v < 0:
            raise self.err(f"must be zero or positive, got {value!r}", *parts)
        return v

    def numbers(self, value: Any, *parts: str, positive: bool = False, length: int | None = None) -> tuple[float, ...]:
        if not isinstance(value, (list, tuple)) or len(value) == 0:
            raise self.err(f"must be a list of numbers, got {value!r}", *parts)
        if length is not None and len(value) != length:
            raise self.err(f"must hold {length} numbers, got {len(value)}", *parts)
        return tuple(self.number(v, *parts, positive=positive) for v in value)


def _canonical_kind(value: Any, key: str, keys: _Keys | None = None) -> str:
    if isinstance(value, str):
        low = value.strip().lower()
        for canon, words in KINDS.items():
            if low in words:
                return canon
    choices = ", ".join(repr(k) for k in KINDS)
    msg = f"unknown detector kind {value!r}; use one of {choices}"
    if keys is not None:
        raise keys.err(msg, key)
    raise MethodError(msg, key=key)


def _broadening(value: Any, keys: _Keys, name: str) -> Spreading:
    if isinstance(value, Mapping):
        extra = set(value) - {"sigma", "tau"}
        if extra:
            raise keys.err(f"unknown key {sorted(extra)[0]!r}; allowed: sigma, tau", name, "broadening")
        sigma = keys.number(value.get("sigma", 0.0), name, "broadening", "sigma", nonneg=True)
        tau = keys.number(value.get("tau", 0.0), name, "broadening", "tau", nonneg=True)
        return Spreading(sigma, tau)
    return Spreading(keys.number(value, name, "broadening", nonneg=True))


def _detector(name: str, sec: Any, keys: _Keys, flow_rate: float | None) -> Detector:
    if not isinstance(sec, Mapping):
        raise keys.err("must be a table of detector settings (kind = ..., ...)", name)
    if "kind" not in sec:
        raise keys.err("missing; say what this detector is: " + ", ".join(repr(k) for k in KINDS),
                       name, "kind")
    kind = _canonical_kind(sec["kind"], name + ".kind", keys)
    allowed = _KEYS[kind]
    for k in sec:
        if k not in allowed:
            raise keys.err(f"unknown key for a {kind} detector; allowed: {', '.join(sorted(allowed))}",
                           name, k)
    if "offset" in sec and "delay" in sec:
        raise keys.err("give either offset [mL] or delay [min], not both", name, "delay")
    offset = 0.0
    if "offset" in sec:
        offset = keys.number(sec["offset"], name, "offset")
    elif "delay" in sec:
        delay = keys.number(sec["delay"], name, "delay")
        if flow_rate is None:
            raise keys.err("a delay in minutes needs the flow rate ([flow] rate); or give offset in mL",
                           name, "delay")
        offset = delay * flow_rate
    broadening = _broadening(sec.get("broadening", 0.0), keys, name)
    wavelength = (keys.number(sec["wavelength"], name, "wavelength", positive=True)
                  if "wavelength" in sec else None)
    common: dict[str, Any] = {"name": name, "kind": kind, "offset": offset,
                              "broadening": broadening, "wavelength": wavelength}

    def opt(k: str, **kw: Any) -> float | None:
        return keys.number(sec[k], name, k, **kw) if k in sec else None

    if kind in ("RI", "UV"):
        return ConcentrationDetector(**common, constant=opt("constant", positive=True),
                                     dn_dc=opt("dn_dc"), response=opt("response", positive=True))
    if kind == "light scattering":
        if wavelength is None:
            raise keys.err("missing: the laser's vacuum wavelength [nm]", name, "wavelength")
        if "angles" not in sec:
            raise keys.err("missing: the scattering angle of each channel in the solvent [degree], "
                           "e.g. [90] or [35, 50, 75, 90, 105, 130, 145]", name, "angles")
        angles = keys.numbers(sec["angles"], name, "angles", positive=True)
        if any(a >= 180 for a in angles):
            raise keys.err("angles must lie between 0 and 180 degrees", name, "angles")
        if len(set(angles)) != len(angles):
            raise keys.err("each angle may appear once", name, "angles")
        norm = (keys.numbers(sec["normalisation"], name, "normalisation", positive=True,
                             length=len(angles))
                if "normalisation" in sec else tuple(1.0 for _ in angles))
        dn_dc = opt("dn_dc")
        if dn_dc == 0.0:
            raise keys.err("must not be 0 (the polymer would be invisible to light scattering)",
                           name, "dn_dc")
        n0 = opt("solvent_refractive_index", positive=True)
        if n0 is not None and not 1.0 <= n0 <= 2.0:
            raise keys.err(f"a solvent refractive index of {n0:g} is implausible (1.0-2.0)",
                           name, "solvent_refractive_index")
        return LightScatteringDetector(**common, dn_dc=dn_dc, solvent_refractive_index=n0,
                                       angles=angles, normalisation=norm,
                                       constant=opt("constant", positive=True),
                                       A2=opt("A2") or 0.0)
    design = sec.get("design", "bridge")
    if not isinstance(design, str) or design.strip().lower() not in VISCOMETER_DESIGNS:
        raise keys.err(f"unknown design {design!r}; use one of "
                       + ", ".join(repr(d) for d in VISCOMETER_DESIGNS), name, "design")
    return Viscometer(**common, design=design.strip().lower(),
                      constant=opt("constant", positive=True) or 1.0)


def _copolymer(sec: Any, keys: _Keys) -> Copolymer:
    if not isinstance(sec, Mapping):
        raise keys.err("must be a table (names, dn_dc, uv_response)", "copolymer")
    for k in sec:
        if k not in _COPOLYMER_KEYS:
            raise keys.err(f"unknown key; allowed: {', '.join(sorted(_COPOLYMER_KEYS))}", "copolymer", k)
    for k in ("names", "dn_dc", "uv_response"):
        if k not in sec:
            raise keys.err("missing (two values, component A then B)", "copolymer", k)
    names = sec["names"]
    if (not isinstance(names, (list, tuple)) or len(names) != 2
            or not all(isinstance(n, str) and n.strip() for n in names)):
        raise keys.err("must be two component names, e.g. [\"styrene\", \"methyl acrylate\"]",
                       "copolymer", "names")
    dn = keys.numbers(sec["dn_dc"], "copolymer", "dn_dc", length=2)
    uv = keys.numbers(sec["uv_response"], "copolymer", "uv_response", length=2)
    if any(v < 0 for v in uv):
        raise keys.err("UV responses must be zero or positive", "copolymer", "uv_response")
    lz = (keys.numbers(sec["dn_dc_laser"], "copolymer", "dn_dc_laser", length=2)
          if "dn_dc_laser" in sec else None)
    return Copolymer(names=(names[0].strip(), names[1].strip()), dn_dc=(dn[0], dn[1]),
                     uv_response=(uv[0], uv[1]),
                     dn_dc_laser=None if lz is None else (lz[0], lz[1]))


def _build_setup(data: Mapping[str, Any], *, flow_rate: float | None, source: str | None,
                 prefix: str) -> DetectorSetup:
    keys = _Keys(source, prefix)
    if not isinstance(data, Mapping):
        raise keys.err("must be a table ([detectors] with one sub-table per detector)")
    detectors: list[Detector] = []
    for name, sec in data.items():
        if name in _TOP_KEYS:
            continue
        if not isinstance(name, str) or not name.strip():
            raise keys.err("detector names must be non-empty text", str(name))
        if not isinstance(sec, Mapping):
            raise keys.err("unknown key; allowed here: " + ", ".join(sorted(_TOP_KEYS))
                           + " and one table per detector", name)
        detectors.append(_detector(name, sec, keys, flow_rate))
    if not detectors:
        raise keys.err("no detectors: add at least one table such as [detectors.ri] with kind = \"RI\"")
    conc = data.get("concentration")
    if conc is None:
        ri = [d.name for d in detectors if d.kind == "RI"]
        cands = ri or [d.name for d in detectors if d.kind == "UV"]
        if len(cands) != 1:
            raise keys.err("missing: name the concentration detector, e.g. concentration = \"ri\"",
                           "concentration")
        conc = cands[0]
    if not isinstance(conc, str) or conc not in [d.name for d in detectors]:
        raise keys.err(f"{conc!r} is not one of the detectors ({', '.join(d.name for d in detectors)})",
                       "concentration")
    cdet = next(d for d in detectors if d.name == conc)
    if not isinstance(cdet, ConcentrationDetector):
        raise keys.err(f"{conc!r} is a {cdet.kind} detector; the concentration detector must be RI or UV",
                       "concentration")
    if cdet.offset != 0.0:
        raise keys.err("the concentration detector is the reference of all offsets: its offset must be 0",
                       conc, "offset")
    copolymer = _copolymer(data["copolymer"], keys) if "copolymer" in data else None
    return DetectorSetup(detectors=tuple(detectors), concentration=conc, copolymer=copolymer)
