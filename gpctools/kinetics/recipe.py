"""The recipe file: what went into the reactor, and what was measured on the product.

A recipe is a small TOML file (template: ``templates/recipe.toml``). Keys carry their
unit in the name, as everywhere in gpctools (``"T [°C]"``, ``"concentration [mol/L]"``).
:func:`load_recipe` checks every key once, at the boundary; an unknown key or a bad
value raises :class:`gpctools.errors.MethodError` naming the dotted key
(e.g. ``monomer."concentration [mol/L]"``) and what to change.

Sections
--------
top level      ``label``, ``"T [°C]"``
[monomer]      ``name`` (from the monomers table), ``"concentration [mol/L]"`` or
               ``bulk = true``; optional overrides ``"M0 [g/mol]"``, ``"k_p [L/mol/s]"``,
               ``"k_p A [L/mol/s]"``, ``"k_p E [kJ/mol]"``, ``"C_M [-]"``, ``"density [g/mL]"``
[initiator]    ``name``, ``"concentration [mol/L]"``; overrides ``"k_d [1/s]"`` (at the
               recipe temperature), ``"E_d [kJ/mol]"``, ``"f [-]"``, ``"C_I [-]"``
[termination]  optional overrides ``"k_t [L/mol/s]"``, ``convention``, ``"delta [-]"``
[[solvent]]    ``name``, ``"concentration [mol/L]"``, optional ``"C [-]"``, ``"M [g/mol]"``
[[agent]]      same keys as a solvent
[[candidate]]  suspected impurities for the diagnosis: ``name``, optional ``"C [-]"``,
               ``"M [g/mol]"``
[measured]     ``"Mn [g/mol]"``, ``"Mw [g/mol]"``, ``scale``, ``"R_p [mol/L/s]"``,
               ``"time [min]"`` + ``conversion`` (lists), ``"induction period [min]"``
[checks]       measurement checks (see :class:`Checks`)
[normal_batch] the batch that came out right: optional ``recipe`` (path) and the same
               keys as [measured]
[uncertainty]  ``"Mn [%]"``, ``"Mw [%]"``, ``"R_p [%]"``, ``"model [%]"``
[data_files]   user reference tables, e.g. ``agents = "my_agents.csv"``
"""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from gpctools.errors import InputFormatError, MethodError
from gpctools.refdata import TABLE_NAMES, ReferenceData, celsius_to_kelvin

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

__all__ = [
    "Component",
    "MonomerSpec",
    "InitiatorSpec",
    "TerminationSpec",
    "Measured",
    "Checks",
    "Uncertainty",
    "NormalBatch",
    "Recipe",
    "load_recipe",
    "SCALES",
    "normalize_scale",
]

#: Molar-mass scales a measured Mn/Mw can be on ("relative to <standard polymer>" in general).
SCALES = ("absolute", "relative to polystyrene")


def normalize_scale(text: str) -> str | None:
    """Map a scale description to ``"absolute"`` or ``"relative to <polymer>"``.

    Accepts the recipe forms and the batch-table forms ("absolute ... (universal
    calibration)", "polystyrene-equivalent (relative)"); None when not recognised.
    """
    t = " ".join(str(text).strip().split())
    low = t.lower()
    if low.startswith("absolute"):
        return "absolute"
    if low.startswith("relative to ") and len(t) > len("relative to "):
        return "relative to " + t[len("relative to "):].strip()
    if "-equivalent" in low:
        return "relative to " + t[: low.index("-equivalent")].strip()
    return None

_CONC = "concentration [mol/L]"


# --------------------------------------------------------------------------- value checks


def _where(section: str, key: str) -> str:
    k = key if key.replace("_", "").isalnum() else f'"{key}"'
    return f"{section}.{k}" if section else k


def _check_keys(d: Mapping[str, Any], allowed: tuple[str, ...], section: str, path) -> None:
    if not isinstance(d, Mapping):
        raise MethodError(
            f"must be a table ([{section}]) not {type(d).__name__}", key=section or None, path=path
        )
    for k in d:
        if k not in allowed:
            raise MethodError(
                f"unknown key; allowed here: {', '.join(repr(a) for a in allowed)}",
                key=_where(section, k),
                path=path,
            )


def _num(
    d: Mapping[str, Any],
    key: str,
    section: str,
    path,
    *,
    required: bool = False,
    positive: bool = False,
    nonneg: bool = False,
    lo: float | None = None,
    hi: float | None = None,
) -> float | None:
    if key not in d:
        if required:
            raise MethodError("required key is missing", key=_where(section, key), path=path)
        return None
    v = d[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise MethodError(
            f"must be a number, not {v!r}", key=_where(section, key), path=path
        )
    v = float(v)
    if not math.isfinite(v):
        raise MethodError("must be a finite number", key=_where(section, key), path=path)
    if positive and v <= 0:
        raise MethodError(f"must be > 0 (got {v:g})", key=_where(section, key), path=path)
    if nonneg and v < 0:
        raise MethodError(f"must be >= 0 (got {v:g})", key=_where(section, key), path=path)
    if (lo is not None and v < lo) or (hi is not None and v > hi):
        rng = (
            f"between {lo:g} and {hi:g}" if lo is not None and hi is not None
            else (f">= {lo:g}" if lo is not None else f"<= {hi:g}")
        )
        raise MethodError(f"must be {rng} (got {v:g})", key=_where(section, key), path=path)
    return v


def _str(d: Mapping[str, Any], key: str, section: str, path, *, required: bool = False) -> str | None:
    if key not in d:
        if required:
            raise MethodError("required key is missing", key=_where(section, key), path=path)
        return None
    v = d[key]
    if not isinstance(v, str) or not v.strip():
        raise MethodError(f"must be a non-empty text, not {v!r}", key=_where(section, key), path=path)
    return v.strip()


def _bool(d: Mapping[str, Any], key: str, section: str, path, default: bool) -> bool:
    if key not in d:
        return default
    v = d[key]
    if not isinstance(v, bool):
        raise MethodError(f"must be true or false, not {v!r}", key=_where(section, key), path=path)
    return v


# --------------------------------------------------------------------------- sections


@dataclass(frozen=True)
class Component:
    """A solvent, agent or impurity candidate.

    Attributes
    ----------
    name : str
        Name or alias in the agents table, or any name when ``C`` is given.
    concentration : float
        [mol/L] (0 for impurity candidates, whose level the diagnosis estimates).
    C : float or None
        Transfer constant override [-] (None: from the agents table).
    M : float or None
        Molar mass override [g/mol], used for ppm by mass.
    role : {"solvent", "agent", "candidate"}
    """

    name: str
    concentration: float
    C: float | None = None
    M: float | None = None
    role: str = "agent"


@dataclass(frozen=True)
class MonomerSpec:
    """Monomer name, concentration [mol/L] (or bulk) and optional value overrides."""

    name: str
    concentration: float | None
    bulk: bool = False
    M0: float | None = None
    k_p: float | None = None
    k_p_A: float | None = None
    k_p_E: float | None = None
    C_M: float | None = None
    density: float | None = None


@dataclass(frozen=True)
class InitiatorSpec:
    """Initiator name, concentration [mol/L] and optional overrides (k_d at the recipe T)."""

    name: str
    concentration: float
    k_d: float | None = None
    E_d: float | None = None
    f: float | None = None
    C_I: float | None = None


@dataclass(frozen=True)
class TerminationSpec:
    """Optional overrides of k_t [L/mol/s] (with its convention) and δ [-]."""

    k_t: float | None = None
    convention: str = "IUPAC 2kt"
    delta: float | None = None


@dataclass(frozen=True)
class Measured:
    """What was measured on the product and during the run.

    Attributes
    ----------
    Mn, Mw : float or None
        [g/mol].
    scale : {"absolute", "relative to polystyrene"}
        Whether Mn/Mw are absolute or polystyrene-equivalent values.
    R_p : float or None
        Measured initial rate of polymerization [mol/L/s].
    time_min, conversion : tuple of float
        Conversion x [-] against time [min] (used for R_p and the induction period when
        ``R_p`` is not given).
    induction_min : float or None
        Observed induction period [min].
    """

    Mn: float | None = None
    Mw: float | None = None
    scale: str = "absolute"
    R_p: float | None = None
    time_min: tuple[float, ...] = ()
    conversion: tuple[float, ...] = ()
    induction_min: float | None = None

    @property
    def has_molar_mass(self) -> bool:
        return self.Mn is not None or self.Mw is not None

    @property
    def is_empty(self) -> bool:
        return (
            not self.has_molar_mass
            and self.R_p is None
            and not self.conversion
            and self.induction_min is None
        )


@dataclass(frozen=True)
class Checks:
    """Measurement checks that can make a molar mass look low.

    Attributes
    ----------
    check_standard_deviation : float or None
        Check standard result against its assigned value, 100·(measured/assigned − 1) [%].
    flow_marker_observed, flow_marker_reference : float or None
        Flow-marker elution volume in this sequence and in the calibration run [mL].
    flow_marker_corrected : bool
        True when the results were already corrected with the flow marker.
    calibration_slope : float or None
        |d logM/dV| near the sample peak [decades/mL] (default 0.4, typical 0.3–0.5).
    peak_volume : float or None
        Elution volume of the sample peak [mL] (default 25, typical 20–30).
    outside_calibration : float or None
        Mass eluting outside the calibrated range [% mass].
    Mn_shift_low_limit : float or None
        Change of Mn when the low-M integration limit moves 0.2 mL earlier [%].
    """

    check_standard_deviation: float | None = None
    flow_marker_observed: float | None = None
    flow_marker_reference: float | None = None
    flow_marker_corrected: bool = False
    calibration_slope: float | None = None
    peak_volume: float | None = None
    outside_calibration: float | None = None
    Mn_shift_low_limit: float | None = None

    @property
    def flow_error(self) -> float | None:
        """Relative flow-marker shift V_obs/V_ref − 1 [-] (None when not recorded)."""
        if self.flow_marker_observed is None or self.flow_marker_reference is None:
            return None
        return self.flow_marker_observed / self.flow_marker_reference - 1.0


@dataclass(frozen=True)
class Uncertainty:
    """Relative standard uncertainties [%] used to score the diagnosis.

    Defaults (``None``): Mn 4 %, Mw 3 % (SEC repeatability under 3 % in round robins; Mn
    is more sensitive to baseline and limits), R_p 10 % (common practice for
    gravimetric or spectroscopic conversion), model 10 % without a normal batch and 0 %
    with measured normal-batch values (typical; the normal batch absorbs the error of
    the tabulated k_t, f and k_p).
    """

    Mn: float | None = None
    Mw: float | None = None
    R_p: float | None = None
    model: float | None = None


@dataclass(frozen=True)
class NormalBatch:
    """The batch that came out right: its recipe (None = same as this one) and measurements."""

    recipe: Recipe | None
    measured: Measured


@dataclass(frozen=True)
class Recipe:
    """A polymerization recipe with optional measurements and checks.

    Build it with :func:`load_recipe` or :meth:`Recipe.from_dict`; values are checked
    there. ``T`` is the temperature in kelvin; ``T_C`` as written [°C].
    """

    label: str
    T_C: float
    monomer: MonomerSpec
    initiator: InitiatorSpec
    termination: TerminationSpec = field(default_factory=TerminationSpec)
    solvents: tuple[Component, ...] = ()
    agents: tuple[Component, ...] = ()
    candidates: tuple[Component, ...] = ()
    measured: Measured = field(default_factory=Measured)
    checks: Checks = field(default_factory=Checks)
    normal_batch: NormalBatch | None = None
    uncertainty: Uncertainty = field(default_factory=Uncertainty)
    data_files: tuple[tuple[str, tuple[str, ...]], ...] = ()
    path: str | None = None

    @property
    def T(self) -> float:
        """Reaction temperature [K]."""
        return celsius_to_kelvin(self.T_C)

    def reference_data(self) -> ReferenceData:
        """Bundled tables merged with the recipe's ``[data_files]``."""
        if not self.data_files:
            from gpctools.refdata import default_reference

            return default_reference()
        return ReferenceData(extra={k: list(v) for k, v in self.data_files})

    def with_changes(self, **changes: Any) -> Recipe:
        """A copy with fields replaced (``dataclasses.replace``)."""
        return replace(self, **changes)

    @classmethod
    def from_dict(
        cls, d: Mapping[str, Any], *, base_dir: str | os.PathLike[str] | None = None,
        path: str | os.PathLike[str] | None = None,
    ) -> Recipe:
        """Build and check a recipe from a parsed TOML mapping.

        Parameters
        ----------
        d : mapping
            The TOML content.
        base_dir : path, optional
            Folder that relative file names (``[data_files]``, ``normal_batch.recipe``)
            are relative to (default: the current folder).
        path : path, optional
            The recipe file, for error messages.
        """
        return _parse(d, Path(base_dir) if base_dir is not None else Path.cwd(), path, depth=0)

    def summary(self) -> dict[str, Any]:
        """JSON-safe description of the recipe."""
        from dataclasses import asdict

        d = asdict(self)
        if self.normal_batch is not None and self.normal_batch.recipe is not None:
            d["normal_batch"]["recipe"] = self.normal_batch.recipe.label
        return _jsonable(d)


def _jsonable(x: Any) -> Any:
    if isinstance(x, dict):
        return {k: _jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_jsonable(v) for v in x]
    return x


_TOP = ("label", "T [°C]", "monomer", "initiator", "termination", "solvent", "agent",
        "candidate", "measured", "checks", "normal_batch", "uncertainty", "data_files")
_MONOMER = ("name", _CONC, "bulk", "M0 [g/mol]", "k_p [L/mol/s]", "k_p A [L/mol/s]",
            "k_p E [kJ/mol]", "C_M [-]", "density [g/mL]")
_INITIATOR = ("name", _CONC, "k_d [1/s]", "E_d [kJ/mol]", "f [-]", "C_I [-]")
_TERMINATION = ("k_t [L/mol/s]", "convention", "delta [-]")
_COMPONENT = ("name", _CONC, "C [-]", "M [g/mol]")
_CANDIDATE = ("name", "C [-]", "M [g/mol]")
_MEASURED = ("Mn [g/mol]", "Mw [g/mol]", "scale", "R_p [mol/L/s]", "time [min]", "conversion",
             "induction period [min]")
_CHECKS = ("check standard deviation [%]", "flow marker observed [mL]",
           "flow marker reference [mL]", "flow marker corrected",
           "calibration slope [decades/mL]", "peak volume [mL]",
           "outside calibration [% mass]", "Mn shift, low-M limit -0.2 mL [%]")
_UNCERTAINTY = ("Mn [%]", "Mw [%]", "R_p [%]", "model [%]")


def _components(items: Any, section: str, path, role: str) -> tuple[Component, ...]:
    if isinstance(items, Mapping):
        items = [items]
    if not isinstance(items, list):
        raise MethodError(f"write each entry as [[{section}]]", key=section, path=path)
    out = []
    allowed = _CANDIDATE if role == "candidate" else _COMPONENT
    for i, item in enumerate(items):
        sec = f"{section}[{i + 1}]"
        _check_keys(item, allowed, sec, path)
        name = _required_str(item, "name", sec, path)
        conc = 0.0 if role == "candidate" else _required_num(item, _CONC, sec, path, nonneg=True)
        out.append(
            Component(
                name=name,
                concentration=conc,
                C=_num(item, "C [-]", sec, path, nonneg=True),
                M=_num(item, "M [g/mol]", sec, path, positive=True),
                role=role,
            )
        )
    return tuple(out)


def _measured(d: Mapping[str, Any], section: str, path, extra_allowed=()) -> Measured:
    _check_keys(d, _MEASURED + tuple(extra_allowed), section, path)
    scale = normalize_scale(_str(d, "scale", section, path) or "absolute")
    if scale is None:
        raise MethodError(
            f"unknown scale {d['scale']!r}; use 'absolute' or 'relative to <standard polymer>', "
            "e.g. 'relative to polystyrene'",
            key=_where(section, "scale"),
            path=path,
        )
    times = d.get("time [min]", [])
    conv = d.get("conversion", [])
    for key, seq in (("time [min]", times), ("conversion", conv)):
        if not isinstance(seq, list) or any(
            isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)
            for v in seq
        ):
            raise MethodError("must be a list of numbers", key=_where(section, key), path=path)
    if len(times) != len(conv):
        raise MethodError(
            f"'time [min]' has {len(times)} values and 'conversion' {len(conv)}; give one "
            "conversion per time",
            key=_where(section, "conversion"),
            path=path,
        )
    if any(not 0.0 <= x < 1.0 for x in conv):
        raise MethodError(
            "conversions are fractions 0 <= x < 1 (not percent)",
            key=_where(section, "conversion"),
            path=path,
        )
    if conv and len(conv) < 2:
        raise MethodError(
            "give at least two conversion points (or 'R_p [mol/L/s]')",
            key=_where(section, "conversion"),
            path=path,
        )
    Mn = _num(d, "Mn [g/mol]", section, path, positive=True)
    Mw = _num(d, "Mw [g/mol]", section, path, positive=True)
    if Mn is not None and Mw is not None and Mw < Mn:
        raise MethodError(
            f"Mw {Mw:g} g/mol is below Mn {Mn:g} g/mol, which no sample can have "
            "(dispersity Mw/Mn >= 1); check the two values",
            key=_where(section, "Mw [g/mol]"),
            path=path,
        )
    return Measured(
        Mn=Mn,
        Mw=Mw,
        scale=scale,
        R_p=_num(d, "R_p [mol/L/s]", section, path, positive=True),
        time_min=tuple(float(t) for t in times),
        conversion=tuple(float(x) for x in conv),
        induction_min=_num(d, "induction period [min]", section, path, nonneg=True),
    )


def _required_num(d: Mapping[str, Any], key: str, section: str, path: Any, **bounds: Any) -> float:
    """:func:`_num` with ``required=True`` (which raises when the key is missing)."""
    v = _num(d, key, section, path, required=True, **bounds)
    assert v is not None
    return v


def _required_str(d: Mapping[str, Any], key: str, section: str, path: Any) -> str:
    """:func:`_str` with ``required=True`` (which raises when the key is missing)."""
    v = _str(d, key, section, path, required=True)
    assert v is not None
    return v


def _monomer_section(d: Mapping[str, Any], path: Any) -> MonomerSpec:
    if "monomer" not in d:
        raise MethodError("required table is missing; add [monomer]", key="monomer", path=path)
    m = d["monomer"]
    _check_keys(m, _MONOMER, "monomer", path)
    bulk = _bool(m, "bulk", "monomer", path, False)
    conc = _num(m, _CONC, "monomer", path, positive=True)
    if conc is None and not bulk:
        raise MethodError(
            "give the monomer concentration in mol/L, or bulk = true for neat monomer",
            key=_where("monomer", _CONC),
            path=path,
        )
    if conc is not None and bulk:
        raise MethodError(
            "give either the concentration or bulk = true, not both",
            key="monomer.bulk",
            path=path,
        )
    monomer = MonomerSpec(
        name=_required_str(m, "name", "monomer", path),
        concentration=conc,
        bulk=bulk,
        M0=_num(m, "M0 [g/mol]", "monomer", path, positive=True),
        k_p=_num(m, "k_p [L/mol/s]", "monomer", path, positive=True),
        k_p_A=_num(m, "k_p A [L/mol/s]", "monomer", path, positive=True),
        k_p_E=_num(m, "k_p E [kJ/mol]", "monomer", path, nonneg=True),
        C_M=_num(m, "C_M [-]", "monomer", path, nonneg=True),
        density=_num(m, "density [g/mL]", "monomer", path, positive=True),
    )
    if (monomer.k_p_A is None) != (monomer.k_p_E is None):
        raise MethodError(
            "give both 'k_p A [L/mol/s]' and 'k_p E [kJ/mol]' (or 'k_p [L/mol/s]')",
            key='monomer."k_p A [L/mol/s]"' if monomer.k_p_A is None else 'monomer."k_p E [kJ/mol]"',
            path=path,
        )
    return monomer


def _initiator_section(d: Mapping[str, Any], path: Any) -> InitiatorSpec:
    if "initiator" not in d:
        raise MethodError("required table is missing; add [initiator]", key="initiator", path=path)
    i = d["initiator"]
    _check_keys(i, _INITIATOR, "initiator", path)
    return InitiatorSpec(
        name=_required_str(i, "name", "initiator", path),
        concentration=_required_num(i, _CONC, "initiator", path, positive=True),
        k_d=_num(i, "k_d [1/s]", "initiator", path, positive=True),
        E_d=_num(i, "E_d [kJ/mol]", "initiator", path, positive=True),
        f=_num(i, "f [-]", "initiator", path, positive=True, lo=0.0, hi=1.0),
        C_I=_num(i, "C_I [-]", "initiator", path, nonneg=True),
    )


def _termination_section(d: Mapping[str, Any], path: Any) -> TerminationSpec:
    t = d.get("termination", {})
    _check_keys(t, _TERMINATION, "termination", path)
    conv = _str(t, "convention", "termination", path) or "IUPAC 2kt"
    from gpctools.refdata import KT_CONVENTIONS

    if conv not in KT_CONVENTIONS:
        raise MethodError(
            f"unknown convention {conv!r}; use 'IUPAC 2kt' (-d[R]/dt = 2 k_t [R]^2) or 'kt' "
            "(-d[R]/dt = k_t [R]^2)",
            key="termination.convention",
            path=path,
        )
    return TerminationSpec(
        k_t=_num(t, "k_t [L/mol/s]", "termination", path, positive=True),
        convention=conv,
        delta=_num(t, "delta [-]", "termination", path, lo=0.0, hi=1.0),
    )


def _checks_section(d: Mapping[str, Any], path: Any) -> Checks:
    c = d.get("checks", {})
    _check_keys(c, _CHECKS, "checks", path)
    checks = Checks(
        check_standard_deviation=_num(c, "check standard deviation [%]", "checks", path,
                                      lo=-99.0, hi=1000.0),
        flow_marker_observed=_num(c, "flow marker observed [mL]", "checks", path, positive=True),
        flow_marker_reference=_num(c, "flow marker reference [mL]", "checks", path, positive=True),
        flow_marker_corrected=_bool(c, "flow marker corrected", "checks", path, False),
        calibration_slope=_num(c, "calibration slope [decades/mL]", "checks", path, positive=True),
        peak_volume=_num(c, "peak volume [mL]", "checks", path, positive=True),
        outside_calibration=_num(c, "outside calibration [% mass]", "checks", path,
                                 lo=0.0, hi=100.0),
        Mn_shift_low_limit=_num(c, "Mn shift, low-M limit -0.2 mL [%]", "checks", path,
                                lo=-100.0, hi=1000.0),
    )
    if (checks.flow_marker_observed is None) != (checks.flow_marker_reference is None):
        raise MethodError(
            "give both the observed and the reference flow-marker volume",
            key='checks."flow marker reference [mL]"',
            path=path,
        )
    return checks


def _normal_batch_section(
    d: Mapping[str, Any], base: Path, path: Any, depth: int
) -> NormalBatch | None:
    if "normal_batch" not in d:
        return None
    nb = d["normal_batch"]
    _check_keys(nb, _MEASURED + ("recipe",), "normal_batch", path)
    nb_recipe = None
    if "recipe" in nb:
        if depth > 0:
            raise MethodError(
                "a normal batch cannot name another normal batch",
                key="normal_batch.recipe",
                path=path,
            )
        rel = _required_str(nb, "recipe", "normal_batch", path)
        nb_recipe = load_recipe(base / rel, _depth=depth + 1)
    nb_meas = _measured({k: v for k, v in nb.items() if k != "recipe"}, "normal_batch", path)
    if nb_meas.is_empty and nb_recipe is not None:
        nb_meas = nb_recipe.measured
    return NormalBatch(recipe=nb_recipe, measured=nb_meas)


def _uncertainty_section(d: Mapping[str, Any], path: Any) -> Uncertainty:
    u = d.get("uncertainty", {})
    _check_keys(u, _UNCERTAINTY, "uncertainty", path)
    return Uncertainty(
        Mn=_num(u, "Mn [%]", "uncertainty", path, positive=True, hi=100.0),
        Mw=_num(u, "Mw [%]", "uncertainty", path, positive=True, hi=100.0),
        R_p=_num(u, "R_p [%]", "uncertainty", path, positive=True, hi=100.0),
        model=_num(u, "model [%]", "uncertainty", path, nonneg=True, hi=300.0),
    )


def _data_files_section(
    d: Mapping[str, Any], base: Path, path: Any
) -> tuple[tuple[str, tuple[str, ...]], ...]:
    df = d.get("data_files", {})
    _check_keys(df, TABLE_NAMES, "data_files", path)
    files = []
    for table, value in df.items():
        vals = [value] if isinstance(value, str) else value
        if not isinstance(vals, list) or not all(isinstance(v, str) for v in vals):
            raise MethodError("must be a file name or a list of file names",
                              key=f"data_files.{table}", path=path)
        paths = tuple(str(base / v) for v in vals)
        for p in paths:
            if not Path(p).exists():
                raise InputFormatError(
                    f"reference file named in data_files.{table} not found", path=p
                )
        files.append((table, paths))
    return tuple(files)


def _parse(d: Mapping[str, Any], base: Path, path: Any, depth: int) -> Recipe:
    """Check every section of a parsed recipe, in file order, and build the Recipe."""
    _check_keys(d, _TOP, "", path)
    label = d.get("label", Path(path).stem if path else "recipe")
    if not isinstance(label, str):
        raise MethodError("must be a text", key="label", path=path)
    T_C = _required_num(d, "T [°C]", "", path, lo=-80.0, hi=300.0)
    monomer = _monomer_section(d, path)
    initiator = _initiator_section(d, path)
    termination = _termination_section(d, path)
    solvents = _components(d.get("solvent", []), "solvent", path, "solvent")
    agents = _components(d.get("agent", []), "agent", path, "agent")
    candidates = _components(d.get("candidate", []), "candidate", path, "candidate")
    measured = _measured(d.get("measured", {}), "measured", path)
    checks = _checks_section(d, path)
    normal = _normal_batch_section(d, base, path, depth)
    uncertainty = _uncertainty_section(d, path)
    files = _data_files_section(d, base, path)
    return Recipe(
        label=label,
        T_C=T_C,
        monomer=monomer,
        initiator=initiator,
        termination=termination,
        solvents=solvents,
        agents=agents,
        candidates=candidates,
        measured=measured,
        checks=checks,
        normal_batch=normal,
        uncertainty=uncertainty,
        data_files=files,
        path=None if path is None else str(path),
    )


def load_recipe(path: str | os.PathLike[str], *, _depth: int = 0) -> Recipe:
    """Read and check a recipe TOML file.

    Parameters
    ----------
    path : path
        The recipe file (see ``templates/recipe.toml``).

    Returns
    -------
    Recipe

    Raises
    ------
    InputFormatError
        The file is missing or is not valid TOML.
    MethodError
        An unknown key or a bad value (the error names the dotted key).
    """
    p = Path(path)
    if not p.exists():
        raise InputFormatError("recipe file not found; check the path", path=p)
    try:
        with p.open("rb") as fh:
            data = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not valid TOML: {exc}", path=p) from exc
    except UnicodeDecodeError:
        raise InputFormatError(
            "the recipe is not UTF-8 text (is it the right file?); save it as UTF-8 TOML, "
            "see templates/recipe.toml", path=p) from None
    except OSError as exc:
        raise InputFormatError(f"cannot read recipe: {exc.strerror or exc}", path=p) from None
    return _parse(data, p.parent, p, depth=_depth)
