"""The recipe: what went into the reactor, and what was measured on the product.

A recipe is a small TOML file (template: ``templates/recipe.toml``) or a recipe sheet
(CSV/XLSX, template ``templates/recipe.csv``, one row per key: ``section``, ``item``,
``key``, ``value``; schema in :mod:`gpctools.sheets.recipe`). Keys carry their unit in
the name, as everywhere in gpctools (``"T [°C]"``, ``"concentration [mol/L]"``) and are
the same in both forms. :func:`load_recipe` checks every key once, at the boundary; an
unknown key or a bad value raises :class:`gpctools.errors.MethodError` naming the dotted
key (e.g. ``monomer."concentration [mol/L]"``) or, for a sheet, the row and cell.

Sections
--------
top level      ``label``, ``"T [°C]"``, ``"volume [L]"`` (reaction volume, for charges in g)
[monomer]      ``name`` (from the monomers table), ``"concentration [mol/L]"``,
               ``bulk = true`` or ``"charge [g]"``; optional overrides ``"M0 [g/mol]"``,
               ``"k_p [L/mol/s]"`` (with ``"k_p E [kJ/mol]"``, else E_p from the table),
               or ``"k_p A [L/mol/s]"`` + ``"k_p E [kJ/mol]"``,
               ``"C_M [-]"``, ``"density [g/mL]"``; ``backbiting`` (true/false: false
               for pulsed-laser conditions, where chain ends propagate)
[initiator]    ``name``, an amount (see below); overrides ``"k_d [1/s]"`` (at
               ``"k_d T [°C]"``, default the recipe temperature), ``"E_d [kJ/mol]"``,
               ``"f [-]"``, ``"C_I [-]"``, ``"M [g/mol]"``
[termination]  overrides ``"k_t [L/mol/s]"`` (at ``"k_t T [°C]"``, default the recipe
               temperature), ``"k_t E [kJ/mol]"``, ``convention``, ``"delta [-]"``
[[solvent]]    ``name``, an amount, optional ``"C [-]"``, ``"C uncertainty [%]"``,
               ``"M [g/mol]"``, ``"density [g/mL]"``
[[agent]]      same keys as a solvent
[[inhibitor]]  a charged inhibitor or retarder: ``name``, an amount, ``"k_z [L/mol/s]"``
               or ``"z [-]"`` (= k_z/k_p), ``"stoichiometric factor [-]"`` (radicals
               trapped per molecule, default 2), ``"M [g/mol]"``,
               ``"k_z uncertainty [%]"``
[[candidate]]  suspected impurities for the diagnosis: ``name``, optional ``"C [-]"``,
               ``"M [g/mol]"``
[measured]     ``"Mn [g/mol]"``, ``"Mw [g/mol]"``, ``scale``, ``"R_p [mol/L/s]"``,
               ``"time [min]"`` + ``conversion`` (lists), ``"induction period [min]"``,
               ``"final conversion [-]"`` (of the sample whose Mn was measured),
               ``distribution`` (a distribution table as gpctools batch writes it) or
               ``chromatogram`` + ``method`` (a slice export and its method file)
[checks]       measurement checks (see :class:`Checks`)
[normal_batch] the batch that came out right: optional ``recipe`` (path) and the same
               keys as [measured]
[uncertainty]  measurement: ``"Mn [%]"``, ``"Mw [%]"``, ``"R_p [%]"``; parameters (relative
               standard uncertainties): ``"k_p [%]"``, ``"k_d [%]"``, ``"f [%]"``,
               ``"k_t [%]"``, ``"C_M [%]"``, ``"delta [-]"`` (absolute),
               ``"monomer charge [%]"``, ``"initiator charge [%]"``, ``"Mw breadth [%]"``;
               ``"model [%]"`` (an extra flat model uncertainty, none by default)
[data_files]   user reference tables, e.g. ``agents = "my_agents.csv"``

Amounts: ``"concentration [mol/L]"``, ``"charge [g]"`` (needs the reaction volume:
``"volume [L]"``, or the monomer and every solvent charged in g with their densities),
or ``"charge [g per 100 g monomer]"`` (needs only molar masses: [X] = [M]·(c/100)·M0/M_X).
Charges are converted with :func:`gpctools.kinetics.charges.resolve_charges`.
"""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from gpctools.display import Display
from gpctools.errors import GpcError, InputFormatError, MethodError
from gpctools.refdata import TABLE_NAMES, ReferenceData, celsius_to_kelvin

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

__all__ = [
    "Charge",
    "Component",
    "MonomerSpec",
    "InitiatorSpec",
    "TerminationSpec",
    "InhibitorSpec",
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

#: Default stoichiometric factor of a charged inhibitor: radicals trapped per molecule
#: (typical: phenolic and quinone inhibitors trap about two radicals per molecule).
DEFAULT_STOICHIOMETRY = 2.0


def normalize_scale(text: str) -> str | None:
    """Map a scale description to ``"absolute"`` or ``"relative to <polymer>"``.

    Accepts the recipe forms and the batch-table forms ("absolute ... (universal
    calibration)", "polystyrene-equivalent (relative)"); None when not recognised.
    Light scattering keeps its label, ``"absolute, light scattering"``
    (:data:`gpctools.columns.LS_SCALE_LABEL`), which counts as absolute everywhere.
    """
    t = " ".join(str(text).strip().split())
    low = t.lower()
    if low.startswith("absolute"):
        return "absolute, light scattering" if "light scattering" in low else "absolute"
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
class Charge:
    """An amount as written in the recipe, before conversion to mol/L.

    Attributes
    ----------
    value : float
        The number written.
    unit : {"g", "g per 100 g monomer"}
    key : str
        The dotted key it came from (for messages).
    """

    value: float
    unit: str
    key: str


@dataclass(frozen=True)
class Component:
    """A solvent, agent or impurity candidate.

    Attributes
    ----------
    name : str
        Name or alias in the agents table, or any name when ``C`` is given.
    concentration : float
        [mol/L] (0 for impurity candidates, whose level the diagnosis estimates; for a
        charge in g, the converted value).
    C : float or None
        Transfer constant override [-] (None: from the agents table).
    M : float or None
        Molar mass override [g/mol], used for ppm by mass and for charges in g.
    role : {"solvent", "agent", "candidate"}
    charge : Charge or None
        The amount as written when it was not a concentration.
    density : float or None
        [g/mL], for the reaction volume of charges in g.
    C_uncertainty : float or None
        Relative standard uncertainty of C [%] (None: from the source status).
    """

    name: str
    concentration: float
    C: float | None = None
    M: float | None = None
    role: str = "agent"
    charge: Charge | None = None
    density: float | None = None
    C_uncertainty: float | None = None


@dataclass(frozen=True)
class MonomerSpec:
    """Monomer name, concentration [mol/L] (or bulk, or a charge in g) and overrides.

    ``backbiting``: None uses the effective k_p where backbiting is tabulated
    (conventional polymerization); False the chain-end k_p (pulsed-laser conditions);
    True asks for the effective k_p (a note when it is not tabulated).
    """

    name: str
    concentration: float | None
    bulk: bool = False
    M0: float | None = None
    k_p: float | None = None
    k_p_A: float | None = None
    k_p_E: float | None = None
    C_M: float | None = None
    density: float | None = None
    charge: Charge | None = None
    backbiting: bool | None = None


@dataclass(frozen=True)
class InitiatorSpec:
    """Initiator name, concentration [mol/L] and optional overrides.

    ``k_d`` [1/s] applies at ``k_d_T`` [°C] (None: at the recipe temperature) and is
    moved to the recipe temperature with E_d [kJ/mol]; ``M`` [g/mol] converts charges.
    """

    name: str
    concentration: float
    k_d: float | None = None
    E_d: float | None = None
    f: float | None = None
    C_I: float | None = None
    k_d_T: float | None = None
    M: float | None = None
    charge: Charge | None = None


@dataclass(frozen=True)
class TerminationSpec:
    """Optional overrides of k_t [L/mol/s] (at ``k_t_T`` [°C], with its convention), its
    activation energy ``k_t_E`` [kJ/mol], and δ [-].
    """

    k_t: float | None = None
    convention: str = "IUPAC 2kt"
    delta: float | None = None
    k_t_E: float | None = None
    k_t_T: float | None = None


@dataclass(frozen=True)
class InhibitorSpec:
    """An inhibitor or retarder charged on purpose (or known to be in the monomer).

    Each radical it traps ends a chain: first-order radical loss ζ = k_z[Z] [1/s] with
    k_z = z·k_p when ``z`` = k_z/k_p [-] is given. ``stoichiometry`` [-] is the number
    of radicals one molecule traps (induction period μ[Z]/R_i).
    """

    name: str
    concentration: float
    k_z: float | None = None
    z: float | None = None
    stoichiometry: float = DEFAULT_STOICHIOMETRY
    M: float | None = None
    charge: Charge | None = None
    k_z_uncertainty: float | None = None


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
    final_conversion : float or None
        Monomer conversion of the sample whose Mn/Mw were measured [-] (the cumulative
        impurity relation needs it).
    distribution : str or None
        A distribution table (columns ``M [g/mol]`` and ``dw/dlogM [-]``) [path].
    chromatogram, method : str or None
        A slice export and the method file that processes it [paths].
    """

    Mn: float | None = None
    Mw: float | None = None
    scale: str = "absolute"
    R_p: float | None = None
    time_min: tuple[float, ...] = ()
    conversion: tuple[float, ...] = ()
    induction_min: float | None = None
    final_conversion: float | None = None
    distribution: str | None = None
    chromatogram: str | None = None
    method: str | None = None

    @property
    def has_molar_mass(self) -> bool:
        """True when the recipe gives a measured Mn or Mw."""
        return self.Mn is not None or self.Mw is not None

    @property
    def has_distribution(self) -> bool:
        """True when the recipe gives a distribution table or a chromatogram."""
        return self.distribution is not None or self.chromatogram is not None

    @property
    def is_empty(self) -> bool:
        """True when nothing was measured on this batch."""
        return (
            not self.has_molar_mass
            and self.R_p is None
            and not self.conversion
            and self.induction_min is None
            and not self.has_distribution
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
    """Standard uncertainties the recipe states (None: not stated).

    Measurement [%]: Mn, Mw, R_p (defaults in :mod:`gpctools.kinetics.diagnose`).
    Parameters, relative [%] unless noted: k_p, k_d, f, k_t, C_M, delta (absolute [-]),
    monomer_charge and initiator_charge (the weighed amounts), breadth (the factor by
    which the real Mw exceeds the instantaneous model's). A parameter the recipe gives
    without an uncertainty is taken as exact; a tabulated one gets its uncertainty from
    its source (:mod:`gpctools.kinetics.uncertainty`). ``model`` [%] adds a flat model
    uncertainty to R_p, Mn and Mw (none by default).
    """

    Mn: float | None = None
    Mw: float | None = None
    R_p: float | None = None
    model: float | None = None
    k_p: float | None = None
    k_d: float | None = None
    f: float | None = None
    k_t: float | None = None
    C_M: float | None = None
    delta: float | None = None
    monomer_charge: float | None = None
    initiator_charge: float | None = None
    breadth: float | None = None


@dataclass(frozen=True)
class NormalBatch:
    """The batch that came out right: its recipe (None = same as this one) and measurements."""

    recipe: Recipe | None
    measured: Measured


@dataclass(frozen=True, repr=False)
class Recipe(Display):
    """A polymerization recipe with optional measurements and checks.

    Build it with :func:`load_recipe` or :meth:`Recipe.from_dict`; values are checked
    there and charges converted to concentrations (``charge_notes`` says how). ``T`` is
    the temperature in kelvin; ``T_C`` as written [°C]; ``volume`` the reaction volume
    [L] when given.
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
    inhibitors: tuple[InhibitorSpec, ...] = ()
    volume: float | None = None
    charge_notes: tuple[str, ...] = ()

    @property
    def T(self) -> float:
        """Reaction temperature [K]."""
        return celsius_to_kelvin(self.T_C)

    def reference_data(self) -> ReferenceData:
        """Bundled tables merged with the recipe's ``[data_files]``."""
        return _reference_data(self.data_files)

    def with_changes(self, **changes: Any) -> Recipe:
        """A copy with fields replaced (``dataclasses.replace``)."""
        return replace(self, **changes)

    @classmethod
    def from_dict(
        cls, d: Mapping[str, Any], *, base_dir: str | os.PathLike[str] | None = None,
        path: str | os.PathLike[str] | None = None,
    ) -> Recipe:
        """Build a recipe from a parsed TOML mapping (same keys as the file).

        Parameters
        ----------
        d : mapping
            The recipe as nested dicts.
        base_dir : path, optional
            Folder that relative paths (normal-batch recipe, data files, distribution)
            are resolved against (default: the current folder).
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


def _reference_data(data_files: tuple[tuple[str, tuple[str, ...]], ...]) -> ReferenceData:
    if not data_files:
        from gpctools.refdata import default_reference

        return default_reference()
    return ReferenceData(extra={k: list(v) for k, v in data_files})


def _jsonable(x: Any) -> Any:
    if isinstance(x, dict):
        return {k: _jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_jsonable(v) for v in x]
    return x


_G = "charge [g]"
_PHM = "charge [g per 100 g monomer]"
_AMOUNTS = (_CONC, _G, _PHM)
_TOP = ("label", "T [°C]", "volume [L]", "monomer", "initiator", "termination", "solvent",
        "agent", "inhibitor", "candidate", "measured", "checks", "normal_batch", "uncertainty",
        "data_files")
_MONOMER = ("name", _CONC, "bulk", _G, "M0 [g/mol]", "k_p [L/mol/s]", "k_p A [L/mol/s]",
            "k_p E [kJ/mol]", "C_M [-]", "density [g/mL]", "backbiting")
_INITIATOR = ("name", *_AMOUNTS, "k_d [1/s]", "k_d T [°C]", "E_d [kJ/mol]", "f [-]", "C_I [-]",
              "M [g/mol]")
_TERMINATION = ("k_t [L/mol/s]", "k_t T [°C]", "k_t E [kJ/mol]", "convention", "delta [-]")
_COMPONENT = ("name", *_AMOUNTS, "C [-]", "C uncertainty [%]", "M [g/mol]", "density [g/mL]")
_INHIBITOR = ("name", *_AMOUNTS, "k_z [L/mol/s]", "z [-]", "stoichiometric factor [-]",
              "M [g/mol]", "k_z uncertainty [%]")
_CANDIDATE = ("name", "C [-]", "M [g/mol]")
_MEASURED = ("Mn [g/mol]", "Mw [g/mol]", "scale", "R_p [mol/L/s]", "time [min]", "conversion",
             "induction period [min]", "final conversion [-]", "distribution", "chromatogram",
             "method")
_CHECKS = ("check standard deviation [%]", "flow marker observed [mL]",
           "flow marker reference [mL]", "flow marker corrected",
           "calibration slope [decades/mL]", "peak volume [mL]",
           "outside calibration [% mass]", "Mn shift, low-M limit -0.2 mL [%]")
#: [uncertainty] keys and the Uncertainty field each fills.
_UNCERTAINTY_KEYS = {
    "Mn [%]": "Mn", "Mw [%]": "Mw", "R_p [%]": "R_p", "model [%]": "model",
    "k_p [%]": "k_p", "k_d [%]": "k_d", "f [%]": "f", "k_t [%]": "k_t", "C_M [%]": "C_M",
    "delta [-]": "delta", "monomer charge [%]": "monomer_charge",
    "initiator charge [%]": "initiator_charge", "Mw breadth [%]": "breadth",
}
_UNCERTAINTY = tuple(_UNCERTAINTY_KEYS)
#: Keys whose values are text, yes/no or lists (all others are numbers): used by the sheet
#: reader to type a cell.
TEXT_KEYS = frozenset({"label", "name", "scale", "convention", "recipe", "distribution",
                       "chromatogram", "method"})
BOOL_KEYS = frozenset({"bulk", "flow marker corrected", "backbiting"})
LIST_KEYS = frozenset({"time [min]", "conversion"})


def _amount(
    item: Mapping[str, Any], sec: str, path: Any, *, required: bool = True
) -> tuple[float | None, Charge | None]:
    """One of concentration [mol/L], charge [g], charge [g per 100 g monomer]."""
    given = [k for k in _AMOUNTS if k in item]
    if len(given) > 1:
        raise MethodError(
            f"give one amount, not {' and '.join(repr(k) for k in given)}",
            key=_where(sec, given[1]), path=path)
    if not given:
        if required:
            raise MethodError(
                f"give the amount: {_CONC!r}, {_G!r} or {_PHM!r}", key=_where(sec, _CONC),
                path=path)
        return None, None
    key = given[0]
    v = _num(item, key, sec, path, nonneg=True)
    assert v is not None
    if key == _CONC:
        return v, None
    return None, Charge(v, "g" if key == _G else "g per 100 g monomer", _where(sec, key))


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
        conc, charge = (0.0, None) if role == "candidate" else _amount(item, sec, path)
        out.append(
            Component(
                name=name,
                concentration=conc if conc is not None else 0.0,
                C=_num(item, "C [-]", sec, path, nonneg=True),
                M=_num(item, "M [g/mol]", sec, path, positive=True),
                role=role,
                charge=charge,
                density=_num(item, "density [g/mL]", sec, path, positive=True),
                C_uncertainty=_num(item, "C uncertainty [%]", sec, path, nonneg=True, hi=300.0),
            )
        )
    return tuple(out)


def _inhibitors(items: Any, path: Any) -> tuple[InhibitorSpec, ...]:
    if isinstance(items, Mapping):
        items = [items]
    if not isinstance(items, list):
        raise MethodError("write each entry as [[inhibitor]]", key="inhibitor", path=path)
    out = []
    for i, item in enumerate(items):
        sec = f"inhibitor[{i + 1}]"
        _check_keys(item, _INHIBITOR, sec, path)
        conc, charge = _amount(item, sec, path)
        k_z = _num(item, "k_z [L/mol/s]", sec, path, nonneg=True)
        z = _num(item, "z [-]", sec, path, nonneg=True)
        if (k_z is None) == (z is None):
            raise MethodError(
                "give either 'k_z [L/mol/s]' (rate coefficient of radical trapping) or "
                "'z [-]' (= k_z/k_p), not both or neither", key=_where(sec, "k_z [L/mol/s]"),
                path=path)
        stoich = _num(item, "stoichiometric factor [-]", sec, path, positive=True, hi=10.0)
        out.append(InhibitorSpec(
            name=_required_str(item, "name", sec, path),
            concentration=conc if conc is not None else 0.0, k_z=k_z, z=z,
            stoichiometry=stoich if stoich is not None else DEFAULT_STOICHIOMETRY,
            M=_num(item, "M [g/mol]", sec, path, positive=True), charge=charge,
            k_z_uncertainty=_num(item, "k_z uncertainty [%]", sec, path, nonneg=True, hi=300.0),
        ))
    return tuple(out)


def _path_value(d: Mapping[str, Any], key: str, section: str, base: Path, path: Any) -> str | None:
    """A file named in the recipe, resolved against the recipe's folder (must exist)."""
    rel = _str(d, key, section, path)
    if rel is None:
        return None
    full = base / rel
    if not full.exists():
        raise InputFormatError(f"file named in {_where(section, key)} not found", path=full)
    return str(full)


def _measured(d: Mapping[str, Any], section: str, path, base: Path | None = None,
              extra_allowed=()) -> Measured:
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
    base = base if base is not None else Path.cwd()
    chrom = _path_value(d, "chromatogram", section, base, path)
    method = _path_value(d, "method", section, base, path)
    if (chrom is None) != (method is None):
        raise MethodError("a chromatogram needs its method file (and a method a chromatogram)",
                          key=_where(section, "method" if method is None else "chromatogram"),
                          path=path)
    return Measured(
        Mn=Mn,
        Mw=Mw,
        scale=scale,
        R_p=_num(d, "R_p [mol/L/s]", section, path, positive=True),
        time_min=tuple(float(t) for t in times),
        conversion=tuple(float(x) for x in conv),
        induction_min=_num(d, "induction period [min]", section, path, nonneg=True),
        final_conversion=_num(d, "final conversion [-]", section, path, lo=0.0, hi=0.999),
        distribution=_path_value(d, "distribution", section, base, path),
        chromatogram=chrom,
        method=method,
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
    grams = _num(m, _G, "monomer", path, positive=True)
    given = [k for k, v in ((_CONC, conc), ("bulk", bulk or None), (_G, grams)) if v]
    if not given:
        raise MethodError(
            "give the monomer concentration in mol/L, its charge in g, or bulk = true for "
            "neat monomer",
            key=_where("monomer", _CONC),
            path=path,
        )
    if len(given) > 1:
        raise MethodError(
            f"give one of {', '.join(repr(k) for k in given)}, not both",
            key="monomer.bulk" if bulk else _where("monomer", _G),
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
        charge=Charge(grams, "g", _where("monomer", _G)) if grams is not None else None,
        backbiting=_bool(m, "backbiting", "monomer", path, False) if "backbiting" in m else None,
    )
    if (monomer.k_p_A is not None and monomer.k_p_E is None) or (
            monomer.k_p_E is not None and monomer.k_p_A is None and monomer.k_p is None):
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
    conc, charge = _amount(i, "initiator", path)
    if conc is not None and conc <= 0:
        raise MethodError(f"must be > 0 (got {conc:g})", key=_where("initiator", _CONC), path=path)
    spec = InitiatorSpec(
        name=_required_str(i, "name", "initiator", path),
        concentration=conc if conc is not None else 0.0,
        k_d=_num(i, "k_d [1/s]", "initiator", path, positive=True),
        E_d=_num(i, "E_d [kJ/mol]", "initiator", path, positive=True),
        f=_num(i, "f [-]", "initiator", path, positive=True, lo=0.0, hi=1.0),
        C_I=_num(i, "C_I [-]", "initiator", path, nonneg=True),
        k_d_T=_num(i, "k_d T [°C]", "initiator", path, lo=-80.0, hi=300.0),
        M=_num(i, "M [g/mol]", "initiator", path, positive=True),
        charge=charge,
    )
    if spec.k_d_T is not None and spec.k_d is None:
        raise MethodError("'k_d T [°C]' is the temperature of a given 'k_d [1/s]'; give both",
                          key='initiator."k_d [1/s]"', path=path)
    return spec


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
    spec = TerminationSpec(
        k_t=_num(t, "k_t [L/mol/s]", "termination", path, positive=True),
        convention=conv,
        delta=_num(t, "delta [-]", "termination", path, lo=0.0, hi=1.0),
        k_t_E=_num(t, "k_t E [kJ/mol]", "termination", path, lo=-50.0, hi=100.0),
        k_t_T=_num(t, "k_t T [°C]", "termination", path, lo=-80.0, hi=300.0),
    )
    if spec.k_t_T is not None and spec.k_t is None:
        raise MethodError("'k_t T [°C]' is the temperature of a given 'k_t [L/mol/s]'; give both",
                          key='termination."k_t [L/mol/s]"', path=path)
    return spec


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
    nb_meas = _measured({k: v for k, v in nb.items() if k != "recipe"}, "normal_batch", path, base)
    if nb_meas.is_empty and nb_recipe is not None:
        nb_meas = nb_recipe.measured
    return NormalBatch(recipe=nb_recipe, measured=nb_meas)


def _uncertainty_section(d: Mapping[str, Any], path: Any) -> Uncertainty:
    u = d.get("uncertainty", {})
    _check_keys(u, _UNCERTAINTY, "uncertainty", path)
    values: dict[str, float | None] = {}
    for key, name in _UNCERTAINTY_KEYS.items():
        if name == "delta":
            values[name] = _num(u, key, "uncertainty", path, nonneg=True, hi=1.0)
        elif name in ("Mn", "Mw", "R_p"):
            values[name] = _num(u, key, "uncertainty", path, positive=True, hi=100.0)
        else:
            values[name] = _num(u, key, "uncertainty", path, nonneg=True, hi=300.0)
    return Uncertainty(**values)


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
    """Check every section of a parsed recipe, in file order, build the Recipe and
    convert charges to concentrations.
    """
    from gpctools.kinetics.charges import resolve_charges

    _check_keys(d, _TOP, "", path)
    label = d.get("label", Path(path).stem if path else "recipe")
    if not isinstance(label, str):
        raise MethodError("must be a text", key="label", path=path)
    T_C = _required_num(d, "T [°C]", "", path, lo=-80.0, hi=300.0)
    volume = _num(d, "volume [L]", "", path, positive=True)
    monomer = _monomer_section(d, path)
    initiator = _initiator_section(d, path)
    termination = _termination_section(d, path)
    solvents = _components(d.get("solvent", []), "solvent", path, "solvent")
    agents = _components(d.get("agent", []), "agent", path, "agent")
    inhibitors = _inhibitors(d.get("inhibitor", []), path)
    candidates = _components(d.get("candidate", []), "candidate", path, "candidate")
    measured = _measured(d.get("measured", {}), "measured", path, base)
    checks = _checks_section(d, path)
    normal = _normal_batch_section(d, base, path, depth)
    uncertainty = _uncertainty_section(d, path)
    files = _data_files_section(d, base, path)
    recipe = Recipe(
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
        inhibitors=inhibitors,
        volume=volume,
    )
    return resolve_charges(recipe, _reference_data(files))


def load_recipe(path: str | os.PathLike[str], *, _depth: int = 0) -> Recipe:
    """Read and check a recipe: TOML, or a recipe sheet (CSV/XLSX).

    Parameters
    ----------
    path : path
        The recipe file (see ``templates/recipe.toml`` and ``templates/recipe.csv``);
        ``.toml`` is read as TOML, any other extension as a recipe sheet.

    Returns
    -------
    Recipe

    Raises
    ------
    InputFormatError
        The file is missing or is not valid TOML / not a readable sheet.
    MethodError
        An unknown key or a bad value (the error names the dotted key, and for a sheet
        the row and cell).
    """
    p = Path(path)
    if not p.exists():
        raise InputFormatError("recipe file not found; check the path", path=p)
    if p.suffix.lower() != ".toml":
        return _load_recipe_sheet(p, _depth)
    try:
        with p.open("rb") as fh:
            data = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not valid TOML: {exc}", path=p) from exc
    except UnicodeDecodeError:
        raise InputFormatError(
            "the recipe is not UTF-8 text (is it the right file?); save it as UTF-8 TOML, "
            "see the starter file: gpctools template recipe.toml", path=p) from None
    except OSError as exc:
        raise InputFormatError(f"cannot read recipe: {exc.strerror or exc}", path=p) from None
    return _parse(data, p.parent, p, depth=_depth)


# --------------------------------------------------------------------------- recipe sheets


def _load_recipe_sheet(p: Path, depth: int) -> Recipe:
    """A recipe sheet (one row per key, :data:`gpctools.sheets.recipe.RECIPE`) as a Recipe.

    The rows become the same nested mapping a TOML recipe gives, so every key is checked
    by the same code; an error about a key is re-raised at the sheet row that holds it.
    """
    from gpctools.io import read_sheet
    from gpctools.sheets import read_table
    from gpctools.sheets.recipe import RECIPE, nested_recipe

    checked = read_table(read_sheet(p), RECIPE, path=p)
    data, rows = nested_recipe(checked, text_keys=TEXT_KEYS, bool_keys=BOOL_KEYS,
                               list_keys=LIST_KEYS, dotted=_where)
    try:
        return _parse(data, p.parent, p, depth=depth)
    except GpcError as exc:
        row = rows.get(exc.key or "")
        if row is None or exc.path != str(p):
            raise
        column = "key" if exc.message.startswith("unknown key") else "value"
        raise type(exc)(exc.message, path=p, sheet=checked.sheet, row=row, column=column,
                        key=exc.key) from None
