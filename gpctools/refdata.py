"""Bundled reference data: monomers, initiators, termination, transfer agents, Mark-Houwink pairs.

The values live in CSV files inside the package (``gpctools/data/*.csv``), one table per
file, with a source on every row. A source starts with its status:

- ``published: ...`` where the value was taken from the publication named;
- ``from memory: ...`` where it is recalled from the named source and should be treated
  as approximate;
- ``derived: ...`` for exact consequences (e.g. a molar mass from a formula, a k_t from
  a tabulated k_p and a tabulated ratio k_p/k_t^½);
- ``typical: ...`` for an order-of-magnitude placeholder;
- ``user: <file>`` for rows or cells supplied by the user.

Tables with values from more than one source carry one source column per group of
values (``k_p source`` for the propagation Arrhenius pair and its validity range,
``backbiting source``, ``C_M source``, ``k_d source``, ``f source``, ``delta source``,
``source`` for the rest).

Every Arrhenius row (k_p, k_t, k_d, and C where a temperature dependence is tabulated)
carries the temperature range of the data behind it (``... T min [°C]``, ``... T max
[°C]``). A record method evaluated outside that range still returns the Arrhenius value
but issues a :class:`ReferenceWarning` (an extrapolation; see docs/science.md, section 7).
Acrylate rows carry a backbiting caution and the parameters for the effective k_p of a
conventional polymerization (:meth:`Monomer.k_p_effective`).

Users add rows or override single cells from their own CSV/XLSX file with the same
column names (only the key columns are required)::

    ref = ReferenceData(extra={"monomers": "my_monomers.csv"})
    ref.monomer("MMA").k_p(333.15)

A user row whose key matches a bundled row (by name or alias, case-insensitive)
replaces the cells it gives and leaves the others; the source column of every group it
touches becomes ``"user: my_monomers.csv"`` (followed by the user's own source text if
the file has that column). Rows with a new key are appended.

Temperatures are given to the record methods in kelvin, as everywhere inside gpctools;
the tables hold degrees Celsius (``T [°C]`` columns).
"""

from __future__ import annotations

import functools
import math
import os
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import asdict, dataclass
from importlib import resources
from pathlib import Path
from typing import Any, cast

import pandas as pd

from gpctools.display import Display
from gpctools.errors import DataError, InputFormatError, MethodError, RangeWarning

__all__ = [
    "R_GAS",
    "TABLE_NAMES",
    "KT_CONVENTIONS",
    "ReferenceWarning",
    "Monomer",
    "Initiator",
    "Termination",
    "Agent",
    "MarkHouwinkPair",
    "ReferenceData",
    "load_table",
    "default_reference",
    "monomer",
    "initiator",
    "termination",
    "agent",
    "agents_for",
    "mark_houwink",
    "convert_kt",
    "celsius_to_kelvin",
]

#: Molar gas constant [J/mol/K] (CODATA 2018 exact value).
R_GAS = 8.314462618

#: Termination conventions: ``"IUPAC 2kt"`` means -d[R]/dt = 2 k_t [R]^2 (the IUPAC
#: recommendation); ``"kt"`` means -d[R]/dt = k_t [R]^2 (some handbooks), whose k_t is
#: twice the IUPAC one.
KT_CONVENTIONS = ("IUPAC 2kt", "kt")

_STATUS_PREFIXES = ("published:", "from memory:", "derived:", "typical:", "user:")


class ReferenceWarning(RangeWarning):
    """A reference value is used outside the temperature range of the data behind it
    (an Arrhenius extrapolation), or with a caution (e.g. acrylate backbiting).
    """



def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Rows of a table as dicts keyed by column name (the tables' headers are text)."""
    return cast("list[dict[str, Any]]", frame.to_dict("records"))

def celsius_to_kelvin(T_celsius: float) -> float:
    """Convert a temperature from degrees Celsius to kelvin [K]."""
    return float(T_celsius) + 273.15


@dataclass(frozen=True)
class _Schema:
    key: tuple[str, ...]
    text: tuple[str, ...]
    numeric: tuple[str, ...]
    sources: tuple[tuple[str, tuple[str, ...]], ...]  # (source column, value columns)

    @property
    def columns(self) -> tuple[str, ...]:
        out: list[str] = []
        for c in self.key + self.text + self.numeric + tuple(s for s, _ in self.sources):
            if c not in out:
                out.append(c)
        return tuple(out)

    def source_of(self, column: str) -> str | None:
        for src, cols in self.sources:
            if column in cols:
                return src
        return None


_KP = ("k_p A [L/mol/s]", "k_p E [kJ/mol]", "k_p uncertainty [%]", "k_p T min [°C]",
       "k_p T max [°C]")
_BACKBITING = ("k_bb A [1/s]", "k_bb E [kJ/mol]", "k_p MCR A [L/mol/s]", "k_p MCR E [kJ/mol]",
               "backbiting T min [°C]", "backbiting T max [°C]")
_C_M = ("C_M [-]", "C_M T [°C]", "C_M uncertainty [%]", "C_M low [-]", "C_M high [-]")
_K_D = ("k_d [1/s]", "k_d T [°C]", "E_d [kJ/mol]", "k_d T min [°C]", "k_d T max [°C]")
_K_T = ("k_t [L/mol/s]", "k_t T [°C]", "k_t E [kJ/mol]", "k_t T min [°C]", "k_t T max [°C]",
        "k_t low [L/mol/s]", "k_t high [L/mol/s]")
_C = ("C [-]", "C T [°C]", "dE [kJ/mol]", "C T min [°C]", "C T max [°C]", "C uncertainty [%]")

_SCHEMAS: dict[str, _Schema] = {
    "monomers": _Schema(
        key=("name",),
        text=("aliases", "polymer", "backbiting caution"),
        numeric=("M0 [g/mol]", "density [g/mL]", "density T [°C]") + _KP + _BACKBITING + _C_M,
        sources=(
            ("source", ("aliases", "polymer", "M0 [g/mol]")),
            ("density source", ("density [g/mL]", "density T [°C]")),
            ("k_p source", _KP),
            ("backbiting source", _BACKBITING + ("backbiting caution",)),
            ("C_M source", _C_M),
        ),
    ),
    "initiators": _Schema(
        key=("name",),
        text=("aliases", "caution"),
        numeric=("M [g/mol]",) + _K_D + ("f [-]",),
        sources=(
            ("source", ("aliases", "M [g/mol]")),
            ("k_d source", _K_D),
            ("f source", ("f [-]",)),
        ),
    ),
    "termination": _Schema(
        key=("monomer",),
        text=("convention", "note"),
        numeric=_K_T + ("delta [-]",),
        sources=(
            ("source", ("convention",) + _K_T),
            ("delta source", ("delta [-]",)),
        ),
    ),
    "agents": _Schema(
        key=("agent", "monomer"),
        text=("aliases", "role", "caution"),
        numeric=("M [g/mol]",) + _C,
        sources=(("source", ("aliases", "role", "M [g/mol]") + _C),),
    ),
    "mark_houwink": _Schema(
        key=("polymer", "solvent", "T [°C]"),
        text=(),
        numeric=("K [dL/g]", "a [-]"),
        sources=(("source", ("K [dL/g]", "a [-]")),),
    ),
}

#: Names of the bundled tables (file ``gpctools/data/<name>.csv``).
TABLE_NAMES = tuple(_SCHEMAS)

# Key columns that hold numbers rather than names.
_NUMERIC_KEYS = {"T [°C]"}

# Column names of earlier versions, still accepted in user files.
_LEGACY_COLUMNS = {
    "k_p uncertainty": "k_p uncertainty [%]",
    "C_M uncertainty": "C_M uncertainty [%]",
    "C uncertainty": "C uncertainty [%]",
}


# --------------------------------------------------------------------------- records


def _opt(value: Any) -> float | None:
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return None if math.isnan(v) else v


def _text(value: Any) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return str(value).strip()


def _aliases(value: Any) -> tuple[str, ...]:
    return tuple(a.strip() for a in _text(value).split(";") if a.strip())


def _arrhenius(A: float, E: float, T: float) -> float:
    """A·exp(−E/(R·T)) with E in kJ/mol and T in K."""
    return A * math.exp(-E * 1e3 / (R_GAS * float(T)))


def _range_note(what: str, T: float, T_min: float | None, T_max: float | None) -> str | None:
    """Text when ``T`` [K] lies outside [T_min, T_max] [°C]; None inside or without a range.

    The limits are inclusive; a missing limit is open on that side.
    """
    t_c = float(T) - 273.15
    below = T_min is not None and t_c < T_min - 1e-9
    above = T_max is not None and t_c > T_max + 1e-9
    if not (below or above):
        return None
    lo = "" if T_min is None else f"{T_min:g}"
    hi = "" if T_max is None else f"{T_max:g}"
    return (
        f"{what} evaluated at {t_c:.4g} °C, outside the range of the data behind it "
        f"({lo} to {hi} °C): the Arrhenius value is an extrapolation; give your own value "
        "in the recipe if you have one"
    )


def _warn(note: str | None) -> None:
    if note:
        warnings.warn(note, ReferenceWarning, stacklevel=3)


@dataclass(frozen=True, repr=False)
class Monomer(Display):
    """A monomer row: repeat-unit mass, density, propagation and transfer to monomer.

    Attributes
    ----------
    name, aliases, polymer : str, tuple of str, str
        Table name, alternative names, name of the homopolymer.
    M0 : float
        Repeat-unit molar mass [g/mol].
    density : float or None
        Liquid density [g/mL] at ``density_T`` [°C].
    kp_A, kp_E : float or None
        Propagation Arrhenius parameters: A [L/mol/s], E [kJ/mol]. For acrylates these
        are the chain-end (secondary-radical) values of the pulsed-laser benchmark.
    kp_uncertainty : float or None
        Relative standard uncertainty of k_p stated by the source [%].
    kp_T_min, kp_T_max : float or None
        Temperature range of the data behind the k_p pair [°C].
    C_M, C_M_T : float or None
        Transfer-to-monomer constant k_tr,M/k_p [-] at ``C_M_T`` [°C].
    C_M_low, C_M_high : float or None
        Spread of C_M between sources near ``C_M_T`` [-].
    kbb_A, kbb_E : float or None
        Backbiting (1,5-hydrogen shift) rate coefficient: A [1/s], E [kJ/mol].
    kpt_A, kpt_E : float or None
        Propagation of the mid-chain (tertiary) radical: A [L/mol/s], E [kJ/mol].
    bb_T_min, bb_T_max : float or None
        Temperature range of the backbiting parameters [°C].
    backbiting_caution : str
        Caution shown when the chain-end k_p of this monomer is used for a conventional
        polymerization (empty for monomers without significant backbiting).
    source, density_source, kp_source, backbiting_source, C_M_source : str
        Status and source of each group of values (``source`` covers M0, aliases and
        polymer).
    """

    name: str
    aliases: tuple[str, ...]
    polymer: str
    M0: float
    density: float | None
    density_T: float | None
    density_source: str
    kp_A: float | None
    kp_E: float | None
    kp_uncertainty: float | None
    kp_source: str
    C_M: float | None
    C_M_T: float | None
    C_M_uncertainty: float | None
    C_M_source: str
    source: str
    kp_T_min: float | None = None
    kp_T_max: float | None = None
    C_M_low: float | None = None
    C_M_high: float | None = None
    kbb_A: float | None = None
    kbb_E: float | None = None
    kpt_A: float | None = None
    kpt_E: float | None = None
    bb_T_min: float | None = None
    bb_T_max: float | None = None
    backbiting_caution: str = ""
    backbiting_source: str = ""

    def _kp_pair(self) -> tuple[float, float]:
        if self.kp_A is None or self.kp_E is None:
            raise DataError(
                f"no propagation Arrhenius parameters for {self.name!r}; give "
                "'monomer.k_p' [L/mol/s] or 'monomer.k_p_A' and 'monomer.k_p_E' in the recipe",
                key="monomer.k_p",
            )
        return self.kp_A, self.kp_E

    def k_p(self, T: float) -> float:
        """Propagation rate coefficient at temperature ``T`` [K], in L/mol/s.

        k_p = A·exp(−E/(R·T)). Outside ``kp_T_min``–``kp_T_max`` the value is an
        extrapolation and a :class:`ReferenceWarning` is issued; for an acrylate above the
        range the warning carries the backbiting caution (use :meth:`k_p_effective` for a
        conventional polymerization).

        References
        ----------
        IUPAC critically evaluated propagation rate coefficients (pulsed-laser
        polymerization benchmark series); the source of each pair is in ``kp_source``.
        """
        A, E = self._kp_pair()
        note = _range_note(f"k_p of {self.name}", T, self.kp_T_min, self.kp_T_max)
        if note and self.backbiting_caution and self.kp_T_max is not None and (
            float(T) - 273.15 > self.kp_T_max
        ):
            note += (f". {self.backbiting_caution[:1].upper()}{self.backbiting_caution[1:]}; "
                     "the effective k_p (Monomer.k_p_effective) accounts for it")
        _warn(note)
        return _arrhenius(A, E, T)

    @property
    def has_backbiting(self) -> bool:
        """True when the backbiting and mid-chain-radical parameters are tabulated."""
        return None not in (self.kbb_A, self.kbb_E, self.kpt_A, self.kpt_E)

    def _backbiting_terms(self, T: float, conc_M: float) -> tuple[float, float, float, float]:
        """(k_p chain end, k_p mid-chain, k_bb, x_MCR) at ``T`` [K] and [M] [mol/L]."""
        if not self.has_backbiting:
            raise DataError(
                f"no backbiting parameters for {self.name!r} (k_bb A/E, k_p MCR A/E)",
                key="monomer.backbiting",
            )
        if not conc_M > 0:
            raise DataError(f"monomer concentration must be > 0 mol/L, got {conc_M}")
        A, E = self._kp_pair()
        k_s = _arrhenius(A, E, T)
        k_mcr = _arrhenius(float(self.kpt_A), float(self.kpt_E), T)  # type: ignore[arg-type]
        k_bb = _arrhenius(float(self.kbb_A), float(self.kbb_E), T)  # type: ignore[arg-type]
        x = k_bb / (k_bb + k_mcr * float(conc_M))
        return k_s, k_mcr, k_bb, x

    def mcr_fraction(self, T: float, conc_M: float) -> float:
        """Fraction of radicals that are mid-chain radicals at ``T`` [K], [M] [mol/L] [-].

        Quasi-steady state between chain-end radicals (which backbite at k_bb) and
        mid-chain radicals (which add monomer at k_p,MCR), termination of mid-chain
        radicals neglected: x_MCR = k_bb/(k_bb + k_p,MCR·[M]).

        References
        ----------
        docs/science.md, section 7 (acrylates); parameters in ``backbiting_source``.
        """
        _warn(_range_note(f"backbiting parameters of {self.name}", T, self.bb_T_min,
                          self.bb_T_max))
        return self._backbiting_terms(T, conc_M)[3]

    def k_p_effective(self, T: float, conc_M: float) -> float:
        """Effective propagation rate coefficient of a conventional polymerization [L/mol/s].

        k_p,eff = (1 − x_MCR)·k_p + x_MCR·k_p,MCR with x_MCR from :meth:`mcr_fraction`.
        Monomers without backbiting parameters return :meth:`k_p`. A
        :class:`ReferenceWarning` is issued outside the range of the backbiting data.

        Parameters
        ----------
        T : float
            Temperature [K].
        conc_M : float
            Monomer concentration [mol/L] (x_MCR falls as [M] rises).

        References
        ----------
        docs/science.md, section 7 (acrylates); parameters in ``backbiting_source``.
        """
        if not self.has_backbiting:
            return self.k_p(T)
        _warn(_range_note(f"backbiting parameters of {self.name}", T, self.bb_T_min,
                          self.bb_T_max))
        k_s, k_mcr, _, x = self._backbiting_terms(T, conc_M)
        return (1.0 - x) * k_s + x * k_mcr

    def k_p_effective_E(self, T: float, conc_M: float) -> float:
        """Apparent activation energy of :meth:`k_p_effective` at ``T`` [K] [kJ/mol].

        E_app = −R·d ln k_p,eff/d(1/T), exact for the two-radical model:
        E_app = [(1 − x)E_p k_p + x E_MCR k_p,MCR + (k_p,MCR − k_p)·x(1 − x)(E_bb − E_MCR)]
        / k_p,eff. Without backbiting parameters this is E of k_p.
        """
        if not self.has_backbiting:
            return self._kp_pair()[1]
        k_s, k_mcr, _, x = self._backbiting_terms(T, conc_M)
        E_s, E_mcr, E_bb = self._kp_pair()[1], float(self.kpt_E), float(self.kbb_E)  # type: ignore[arg-type]
        k_eff = (1.0 - x) * k_s + x * k_mcr
        dk = (1.0 - x) * E_s * k_s + x * E_mcr * k_mcr + (k_mcr - k_s) * x * (1.0 - x) * (E_bb - E_mcr)
        return dk / k_eff

    def bulk_concentration(self) -> float:
        """Concentration of neat monomer [mol/L] = 1000·density/M0 (at ``density_T``)."""
        if self.density is None:
            raise DataError(
                f"no density for {self.name!r}; give '[M]' in mol/L in the recipe",
                key="monomer.density",
            )
        return 1000.0 * self.density / self.M0

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of all fields."""
        d = asdict(self)
        d["aliases"] = list(self.aliases)
        return d


@dataclass(frozen=True, repr=False)
class Initiator(Display):
    """A thermal initiator row.

    Attributes
    ----------
    M : float or None
        Molar mass of the initiator [g/mol].
    k_d_ref : float
        Decomposition rate coefficient [1/s] at ``T_ref`` [°C].
    E_d : float
        Activation energy of decomposition [kJ/mol].
    f : float
        Initiator efficiency [-].
    T_min, T_max : float or None
        Temperature range of the data behind k_d and E_d [°C].
    source, kd_source, f_source : str
        Status and source of M and aliases, of the k_d group, of f.
    caution : str
        Handling caution for the initiator.
    """

    name: str
    aliases: tuple[str, ...]
    M: float | None
    k_d_ref: float
    T_ref: float
    E_d: float
    f: float
    source: str
    caution: str
    T_min: float | None = None
    T_max: float | None = None
    kd_source: str = ""
    f_source: str = ""

    @property
    def A(self) -> float:
        """Arrhenius pre-exponential factor of k_d [1/s], from k_d at T_ref and E_d."""
        return self.k_d_ref * math.exp(self.E_d * 1e3 / (R_GAS * celsius_to_kelvin(self.T_ref)))

    def k_d(self, T: float) -> float:
        """Decomposition rate coefficient at ``T`` [K], in 1/s.

        k_d(T) = k_d(T_ref)·exp(−E_d/R·(1/T − 1/T_ref)) (Arrhenius). Outside
        ``T_min``–``T_max`` a :class:`ReferenceWarning` is issued.
        """
        _warn(_range_note(f"k_d of {self.name}", T, self.T_min, self.T_max))
        T_ref = celsius_to_kelvin(self.T_ref)
        return self.k_d_ref * math.exp(-self.E_d * 1e3 / R_GAS * (1.0 / float(T) - 1.0 / T_ref))

    def half_life(self, T: float) -> float:
        """Half-life ln2/k_d [s] at ``T`` [K] (first-order decomposition)."""
        return math.log(2.0) / self.k_d(T)

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of all fields."""
        d = asdict(self)
        d["aliases"] = list(self.aliases)
        return d


def convert_kt(value: float, from_convention: str, to_convention: str = "IUPAC 2kt") -> float:
    """Convert a termination rate coefficient between conventions [L/mol/s].

    With the IUPAC convention −d[R•]/dt = 2k_t[R•]²; some handbooks write k_t[R•]², so
    their k_t is twice the IUPAC one: k_t(IUPAC) = k_t(handbook)/2.

    Parameters
    ----------
    value : float
        k_t in ``from_convention`` [L/mol/s].
    from_convention, to_convention : {"IUPAC 2kt", "kt"}

    References
    ----------
    IUPAC recommendation on the definition of the termination rate coefficient
    (docs/science.md, section 3).
    """
    for c in (from_convention, to_convention):
        if c not in KT_CONVENTIONS:
            raise MethodError(
                f"unknown k_t convention {c!r}; use one of {', '.join(KT_CONVENTIONS)}",
                key="convention",
            )
    if from_convention == to_convention:
        return float(value)
    if from_convention == "kt":
        return float(value) / 2.0
    return float(value) * 2.0


@dataclass(frozen=True, repr=False)
class Termination(Display):
    """Termination row: k_t with its convention and temperature dependence, and δ.

    Attributes
    ----------
    k_t_ref : float
        As tabulated [L/mol/s], in ``convention``, at ``T`` [°C].
    convention : {"IUPAC 2kt", "kt"}
    T : float or None
        Temperature of the tabulated k_t [°C].
    delta : float or None
        δ = k_td/k_t, fraction of terminations by disproportionation [-].
    E : float or None
        Activation energy of k_t [kJ/mol]; None: temperature dependence unknown.
    T_min, T_max : float or None
        Temperature range of the data behind k_t and E [°C].
    k_t_low, k_t_high : float or None
        Spread of k_t between sources at ``T`` [L/mol/s], in ``convention``.
    source, delta_source : str
        Status and source of the k_t group and of δ.
    note : str
        Caveats (chain length, conversion).
    """

    monomer: str
    k_t_ref: float
    convention: str
    T: float | None
    delta: float | None
    source: str
    E: float | None = None
    T_min: float | None = None
    T_max: float | None = None
    k_t_low: float | None = None
    k_t_high: float | None = None
    delta_source: str = ""
    note: str = ""

    @property
    def k_t_iupac(self) -> float:
        """k_t at the tabulated temperature, IUPAC convention (−d[R•]/dt = 2k_t[R•]²) [L/mol/s]."""
        return convert_kt(self.k_t_ref, self.convention, "IUPAC 2kt")

    def k_t(self, T: float) -> float:
        """k_t at ``T`` [K] in the IUPAC convention [L/mol/s].

        k_t(T) = k_t(T_ref)·exp(−E/R·(1/T − 1/T_ref)). Without E (or without T_ref) the
        tabulated value is returned unchanged (see :meth:`temperature_note`). Outside
        ``T_min``–``T_max`` a :class:`ReferenceWarning` is issued.

        References
        ----------
        docs/science.md, sections 3 (convention) and 7 (values).
        """
        _warn(_range_note(f"k_t of {self.monomer}", T, self.T_min, self.T_max))
        k0 = self.k_t_iupac
        if self.E is None or self.T is None:
            return k0
        T_ref = celsius_to_kelvin(self.T)
        return k0 * math.exp(-self.E * 1e3 / R_GAS * (1.0 / float(T) - 1.0 / T_ref))

    @property
    def A(self) -> float | None:
        """Arrhenius pre-exponential factor of k_t (IUPAC convention) [L/mol/s]; None
        without E or T.
        """
        if self.E is None or self.T is None:
            return None
        return self.k_t_iupac * math.exp(self.E * 1e3 / (R_GAS * celsius_to_kelvin(self.T)))

    def temperature_note(self, T: float) -> str | None:
        """A note when ``T`` [K] is more than 5 K from the tabulated temperature and no
        activation energy is known; None otherwise.
        """
        if self.T is None or self.E is not None:
            return None
        if abs(float(T) - celsius_to_kelvin(self.T)) > 5.0:
            return (
                f"k_t of {self.monomer} is tabulated at {self.T:g} °C and used unchanged at "
                f"{float(T) - 273.15:g} °C (no activation energy tabulated)"
            )
        return None

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of all fields plus ``k_t_iupac`` and ``A``."""
        d = asdict(self)
        d["k_t_iupac"] = self.k_t_iupac
        d["A"] = self.A
        return d


@dataclass(frozen=True, repr=False)
class Agent(Display):
    """A chain-transfer agent or solvent in a given monomer.

    Attributes
    ----------
    C_ref : float
        Transfer constant k_tr/k_p [-] at ``T_ref`` [°C].
    dE : float or None
        E_tr − E_p [kJ/mol] if known; None means the temperature dependence is unknown.
    T_min, T_max : float or None
        Temperature range over which ``dE`` was established [°C].
    M : float or None
        Molar mass of the agent [g/mol].
    """

    agent: str
    aliases: tuple[str, ...]
    monomer: str
    role: str
    M: float | None
    C_ref: float
    T_ref: float | None
    dE: float | None
    C_uncertainty: float | None
    source: str
    caution: str
    T_min: float | None = None
    T_max: float | None = None

    def C(self, T: float) -> float:
        """Transfer constant at ``T`` [K] [-].

        C(T) = C(T_ref)·exp(−ΔE/R·(1/T − 1/T_ref)) with ΔE = E_tr − E_p when tabulated;
        otherwise the tabulated value is returned unchanged (see :meth:`temperature_note`).
        With ΔE, a :class:`ReferenceWarning` is issued outside ``T_min``–``T_max``.

        References
        ----------
        docs/science.md, section 6: C = (A_tr/A_p)·exp(−(E_tr − E_p)/RT).
        """
        if self.dE is None or self.T_ref is None:
            return self.C_ref
        _warn(_range_note(f"C of {self.agent} in {self.monomer}", T, self.T_min, self.T_max))
        T_ref = celsius_to_kelvin(self.T_ref)
        return self.C_ref * math.exp(-self.dE * 1e3 / R_GAS * (1.0 / float(T) - 1.0 / T_ref))

    def temperature_note(self, T: float) -> str | None:
        """A note when ``T`` [K] is more than 5 K from the tabulated temperature and no
        temperature dependence is known; None otherwise.
        """
        if self.T_ref is None or self.dE is not None:
            return None
        dT = float(T) - celsius_to_kelvin(self.T_ref)
        if abs(dT) > 5.0:
            return (
                f"C for {self.agent} in {self.monomer} is tabulated at {self.T_ref:g} °C and "
                f"used unchanged at {float(T) - 273.15:g} °C (temperature dependence unknown)"
            )
        return None

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of all fields."""
        d = asdict(self)
        d["aliases"] = list(self.aliases)
        return d


@dataclass(frozen=True, repr=False)
class MarkHouwinkPair(Display):
    """Mark-Houwink constants [η] = K·M^a, K in dL/g, for a polymer in a solvent at T [°C]."""

    polymer: str
    solvent: str
    T: float | None
    K: float
    a: float
    source: str

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of all fields."""
        return asdict(self)


# --------------------------------------------------------------------------- tables


def _bundled_path(name: str) -> Any:
    return resources.files("gpctools").joinpath("data", f"{name}.csv")


def _schema(name: str) -> _Schema:
    try:
        return _SCHEMAS[name]
    except KeyError:
        raise MethodError(
            f"unknown reference table {name!r}; known tables: {', '.join(TABLE_NAMES)}",
            key="table",
        ) from None


def _read_any(path: Path) -> pd.DataFrame:
    if not path.exists():
        raise InputFormatError("reference file not found; check the path", path=path)
    try:
        if path.suffix.lower() in (".xlsx", ".xlsm"):
            return pd.read_excel(path, dtype=object)
        return pd.read_csv(path, dtype=object, keep_default_na=False, encoding="utf-8-sig")
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputFormatError(f"cannot read reference file: {exc}", path=path) from exc


def _clean(frame: pd.DataFrame, schema: _Schema, path: Any, *, partial: bool) -> pd.DataFrame:
    """Check columns, parse numbers (one object column per field, None for blanks)."""
    frame = frame.rename(columns=lambda c: str(c).strip())
    frame = frame.rename(columns=lambda c: _LEGACY_COLUMNS.get(c, c) if c not in schema.columns else c)
    unknown = [c for c in frame.columns if c not in schema.columns]
    if unknown:
        raise InputFormatError(
            f"unknown column(s) {unknown}; allowed columns: {list(schema.columns)}",
            path=path,
            column=unknown[0],
        )
    missing = [c for c in schema.key if c not in frame.columns] if partial else [
        c for c in schema.columns if c not in frame.columns
    ]
    if missing:
        raise InputFormatError(f"missing column(s) {missing}", path=path, column=missing[0])
    out: dict[str, list[Any]] = {}
    for col in frame.columns:
        values: list[Any] = []
        for i, raw in enumerate(frame[col].tolist()):
            text = _text(raw)
            if col in schema.numeric or col in _NUMERIC_KEYS:
                if text == "":
                    values.append(None)
                    continue
                try:
                    values.append(float(text))
                except ValueError:
                    raise InputFormatError(
                        f"{text!r} is not a number", path=path, row=i + 2, column=col
                    ) from None
            else:
                values.append(text)
        out[col] = values
    for k in schema.key:
        if k in _NUMERIC_KEYS:
            continue
        for i, v in enumerate(out[k]):
            if not v:
                raise InputFormatError(
                    "key cell is empty; every row needs it", path=path, row=i + 2, column=k
                )
    return pd.DataFrame(out, columns=list(frame.columns), dtype=object)


def _norm(s: Any) -> str:
    return " ".join(_text(s).lower().split())


@functools.cache
def _bundled(name: str) -> pd.DataFrame:
    schema = _schema(name)
    src = _bundled_path(name)
    with resources.as_file(src) as p:
        frame = _read_any(Path(p))
        return _clean(frame, schema, f"gpctools/data/{name}.csv", partial=False)


def _key_of(
    row: Mapping[str, Any], schema: _Schema, resolve: Callable[[str, Any], str]
) -> tuple[Any, ...]:
    out: list[Any] = []
    for k in schema.key:
        v = row.get(k)
        if k in _NUMERIC_KEYS:
            out.append(None if v is None else round(float(v), 6))
        else:
            out.append(resolve(k, v))
    return tuple(out)


def _merge(base: pd.DataFrame, user: pd.DataFrame, schema: _Schema, label: str) -> pd.DataFrame:
    rows = [dict(r) for r in _records(base)]

    # alias index of names in this table (and of monomer names for the 'monomer' key)
    def names_of(r: Mapping[str, Any], col: str) -> list[str]:
        names = [_norm(r.get(col))]
        if col in ("name", "agent"):
            names += [_norm(a) for a in _aliases(r.get("aliases"))]
        return names

    monomer_names = _monomer_alias_map()

    def resolve(col: str, value: Any) -> str:
        v = _norm(value)
        if col == "monomer":
            return monomer_names.get(v, v)
        if col in ("name", "agent"):
            for r in rows:
                if v in names_of(r, col):
                    return _norm(r.get(col))
        return v

    index = {_key_of(r, schema, resolve): i for i, r in enumerate(rows)}
    user_text_cols = [c for c in user.columns if c not in schema.key]
    for urow in _records(user):
        key = _key_of(urow, schema, resolve)
        given = [c for c in user_text_cols if urow.get(c) not in (None, "")]
        if key in index:
            target = rows[index[key]]
        else:
            target = {c: (None if (c in schema.numeric or c in _NUMERIC_KEYS) else "")
                      for c in schema.columns}
            for k in schema.key:
                target[k] = urow.get(k)
            rows.append(target)
            index[key] = len(rows) - 1
            # a new row: every source group is the user's
            given_groups = {s for s, _ in schema.sources}
            for s in given_groups:
                target[s] = f"user: {label}"
        touched = {g for g in (schema.source_of(c) for c in given) if g is not None}
        for c in given:
            if c in {s for s, _ in schema.sources}:
                continue
            target[c] = urow[c]
        for s in touched:
            target[s] = f"user: {label}"
        for s, _ in schema.sources:
            text = _text(urow.get(s))
            if text:
                target[s] = f"user: {label}; {text}"
    return pd.DataFrame(rows, columns=list(schema.columns), dtype=object)


@functools.lru_cache(maxsize=1)
def _monomer_alias_map_cached() -> tuple[tuple[str, str], ...]:
    base = _bundled("monomers")
    pairs = []
    for r in _records(base):
        canon = _norm(r["name"])
        pairs.append((canon, canon))
        for a in _aliases(r["aliases"]):
            pairs.append((_norm(a), canon))
    return tuple(pairs)


def _monomer_alias_map() -> dict[str, str]:
    return dict(_monomer_alias_map_cached())


def _as_paths(extra: Any) -> list[Path]:
    if extra is None:
        return []
    if isinstance(extra, (str, os.PathLike)):
        return [Path(extra)]
    return [Path(p) for p in extra]


def load_table(
    name: str, extra: str | os.PathLike[str] | Sequence[str | os.PathLike[str]] | None = None
) -> pd.DataFrame:
    """Load a bundled reference table, optionally merged with user rows.

    Parameters
    ----------
    name : str
        One of :data:`TABLE_NAMES` (``"monomers"``, ``"initiators"``, ``"termination"``,
        ``"agents"``, ``"mark_houwink"``).
    extra : path or sequence of paths, optional
        User CSV/XLSX file(s) with the same column names; only the key columns are
        required. Matching rows are updated cell by cell, new rows appended; touched
        source columns read ``"user: <file name>"``.

    Returns
    -------
    pandas.DataFrame
        One row per entry, columns as in the CSV (unit in each name); blanks are None.
        A new frame each call (the bundled data cannot be modified through it).
    """
    schema = _schema(name)
    frame = _bundled(name).copy()
    for p in _as_paths(extra):
        user = _clean(_read_any(p), schema, p, partial=True)
        frame = _merge(frame, user, schema, p.name)
    return frame


class ReferenceData:
    """All reference tables, bundled rows merged with optional user files.

    Parameters
    ----------
    extra : mapping of table name to path (or list of paths), optional
        e.g. ``{"monomers": "my_monomers.csv", "agents": ["a.csv", "b.xlsx"]}``.

    Examples
    --------
    >>> ref = ReferenceData()
    >>> round(ref.monomer("MMA").k_p(333.15))
    834
    """

    def __init__(self, extra: Mapping[str, Any] | None = None) -> None:
        extra = dict(extra or {})
        for k in extra:
            _schema(k)
        self._tables = {n: load_table(n, extra.get(n)) for n in TABLE_NAMES}
        self.extra = {k: [str(p) for p in _as_paths(v)] for k, v in extra.items()}
        self._amap: dict[str, str] = {}
        for r in _records(self._tables["monomers"]):
            canon = _norm(r["name"])
            self._amap[canon] = canon
            for a in _aliases(r["aliases"]):
                self._amap.setdefault(_norm(a), canon)

    def table(self, name: str) -> pd.DataFrame:
        """A copy of the merged table ``name``."""
        _schema(name)
        return self._tables[name].copy()

    # -- lookups
    def _find(self, table: str, col: str, name: str, what: str) -> dict[str, Any]:
        want = _norm(name)
        rows = _records(self._tables[table])
        for r in rows:
            names = [_norm(r[col])] + [_norm(a) for a in _aliases(r.get("aliases"))]
            if want in names:
                return dict(r)
        known = sorted({r[col] for r in rows})
        raise MethodError(
            f"unknown {what} {name!r}; known: {', '.join(known)}. Add a row with your own "
            f"file (ReferenceData(extra={{'{table}': 'file.csv'}})) or give the values in "
            "the recipe",
            key=what,
        )

    def names(self, table: str) -> list[str]:
        """Canonical names in a table (first key column)."""
        schema = _schema(table)
        return [str(v) for v in self._tables[table][schema.key[0]].tolist()]

    def monomer(self, name: str) -> Monomer:
        """Monomer by name or alias (case-insensitive); unknown -> MethodError listing names."""
        r = self._find("monomers", "name", name, "monomer")
        if _opt(r["M0 [g/mol]"]) is None:
            raise DataError(f"monomer {r['name']!r} has no M0 [g/mol]", key="monomer.M0")
        return Monomer(
            name=r["name"],
            aliases=_aliases(r["aliases"]),
            polymer=_text(r["polymer"]),
            M0=float(r["M0 [g/mol]"]),
            density=_opt(r["density [g/mL]"]),
            density_T=_opt(r["density T [°C]"]),
            density_source=_text(r["density source"]),
            kp_A=_opt(r["k_p A [L/mol/s]"]),
            kp_E=_opt(r["k_p E [kJ/mol]"]),
            kp_uncertainty=_opt(r["k_p uncertainty [%]"]),
            kp_source=_text(r["k_p source"]),
            C_M=_opt(r["C_M [-]"]),
            C_M_T=_opt(r["C_M T [°C]"]),
            C_M_uncertainty=_opt(r["C_M uncertainty [%]"]),
            C_M_source=_text(r["C_M source"]),
            source=_text(r["source"]),
            kp_T_min=_opt(r["k_p T min [°C]"]),
            kp_T_max=_opt(r["k_p T max [°C]"]),
            C_M_low=_opt(r["C_M low [-]"]),
            C_M_high=_opt(r["C_M high [-]"]),
            kbb_A=_opt(r["k_bb A [1/s]"]),
            kbb_E=_opt(r["k_bb E [kJ/mol]"]),
            kpt_A=_opt(r["k_p MCR A [L/mol/s]"]),
            kpt_E=_opt(r["k_p MCR E [kJ/mol]"]),
            bb_T_min=_opt(r["backbiting T min [°C]"]),
            bb_T_max=_opt(r["backbiting T max [°C]"]),
            backbiting_caution=_text(r["backbiting caution"]),
            backbiting_source=_text(r["backbiting source"]),
        )

    def initiator(self, name: str) -> Initiator:
        """Initiator by name or alias; unknown -> MethodError listing names."""
        r = self._find("initiators", "name", name, "initiator")
        for c in ("k_d [1/s]", "k_d T [°C]", "E_d [kJ/mol]", "f [-]"):
            if _opt(r[c]) is None:
                raise DataError(
                    f"initiator {r['name']!r} has no {c}; add it in your reference file",
                    column=c,
                )
        return Initiator(
            name=r["name"],
            aliases=_aliases(r["aliases"]),
            M=_opt(r["M [g/mol]"]),
            k_d_ref=float(r["k_d [1/s]"]),
            T_ref=float(r["k_d T [°C]"]),
            E_d=float(r["E_d [kJ/mol]"]),
            f=float(r["f [-]"]),
            source=_text(r["source"]),
            caution=_text(r["caution"]),
            T_min=_opt(r["k_d T min [°C]"]),
            T_max=_opt(r["k_d T max [°C]"]),
            kd_source=_text(r["k_d source"]),
            f_source=_text(r["f source"]),
        )

    def termination(self, monomer: str) -> Termination:
        """Termination row of a monomer (name or alias of the monomer)."""
        canon = self.monomer(monomer).name
        rows = [
            r
            for r in _records(self._tables["termination"])
            if self._amap.get(_norm(r["monomer"]), _norm(r["monomer"])) == _norm(canon)
        ]
        if not rows:
            raise MethodError(
                f"no termination row for {canon!r}; give 'termination.k_t' and "
                "'termination.delta' in the recipe",
                key="termination",
            )
        r = rows[-1]
        conv = _text(r["convention"])
        if conv not in KT_CONVENTIONS:
            raise DataError(
                f"termination row for {canon!r} has convention {conv!r}; use one of "
                f"{', '.join(KT_CONVENTIONS)}",
                column="convention",
            )
        if _opt(r["k_t [L/mol/s]"]) is None:
            raise DataError(f"termination row for {canon!r} has no k_t", column="k_t [L/mol/s]")
        return Termination(
            monomer=canon,
            k_t_ref=float(r["k_t [L/mol/s]"]),
            convention=conv,
            T=_opt(r["k_t T [°C]"]),
            delta=_opt(r["delta [-]"]),
            source=_text(r["source"]),
            E=_opt(r["k_t E [kJ/mol]"]),
            T_min=_opt(r["k_t T min [°C]"]),
            T_max=_opt(r["k_t T max [°C]"]),
            k_t_low=_opt(r["k_t low [L/mol/s]"]),
            k_t_high=_opt(r["k_t high [L/mol/s]"]),
            delta_source=_text(r["delta source"]),
            note=_text(r["note"]),
        )

    def _agent_rows(self, monomer: str) -> tuple[str, list[dict[str, Any]]]:
        canon = self.monomer(monomer).name
        amap = self._amap
        rows = [
            r
            for r in _records(self._tables["agents"])
            if amap.get(_norm(r["monomer"]), _norm(r["monomer"])) == _norm(canon)
        ]
        return canon, rows

    @staticmethod
    def _agent_record(r: Mapping[str, Any], canon: str) -> Agent:
        if _opt(r["C [-]"]) is None:
            raise DataError(f"agent {r['agent']!r} in {canon!r} has no C [-]", column="C [-]")
        return Agent(
            agent=r["agent"],
            aliases=_aliases(r["aliases"]),
            monomer=canon,
            role=_text(r["role"]) or "agent",
            M=_opt(r["M [g/mol]"]),
            C_ref=float(r["C [-]"]),
            T_ref=_opt(r["C T [°C]"]),
            dE=_opt(r["dE [kJ/mol]"]),
            C_uncertainty=_opt(r["C uncertainty [%]"]),
            source=_text(r["source"]),
            caution=_text(r["caution"]),
            T_min=_opt(r["C T min [°C]"]),
            T_max=_opt(r["C T max [°C]"]),
        )

    def agent(self, name: str, monomer: str) -> Agent:
        """Transfer agent/solvent ``name`` in ``monomer``; unknown pair -> MethodError."""
        canon, rows = self._agent_rows(monomer)
        want = _norm(name)
        for r in rows:
            if want in [_norm(r["agent"])] + [_norm(a) for a in _aliases(r["aliases"])]:
                return self._agent_record(r, canon)
        known = ", ".join(sorted({r["agent"] for r in rows})) or "none"
        raise MethodError(
            f"no transfer constant for {name!r} in {canon!r}; known in {canon}: {known}. Give "
            "'C' for it in the recipe or add a row to the agents table",
            key="agent",
        )

    def agents_for(self, monomer: str) -> list[Agent]:
        """All agents and solvents tabulated for ``monomer``."""
        canon, rows = self._agent_rows(monomer)
        return [self._agent_record(r, canon) for r in rows if _opt(r["C [-]"]) is not None]

    def mark_houwink(
        self, polymer: str, solvent: str = "THF", T: float | None = None
    ) -> MarkHouwinkPair:
        """Mark-Houwink pair for a polymer in a solvent.

        ``polymer`` may be the polymer name, its monomer's name or alias, or "P" + a
        monomer alias ("PS", "PMMA", "PBA").

        ``T`` [°C] picks the nearest tabulated temperature; None takes the first row.
        """
        want = _norm(polymer)
        amap = self._amap
        if want in amap:  # a monomer name: use its polymer
            want = _norm(self.monomer(polymer).polymer)
        elif want.startswith("p") and want[1:] in amap:  # "PS", "PMMA", "PBA", "PVAc"
            want = _norm(self.monomer(want[1:]).polymer)
        rows = [
            r
            for r in _records(self._tables["mark_houwink"])
            if _norm(r["polymer"]) == want and _norm(r["solvent"]) == _norm(solvent)
        ]
        if not rows:
            known = sorted(
                {f"{r['polymer']} in {r['solvent']}" for r in _records(self._tables["mark_houwink"])}
            )
            raise MethodError(
                f"no Mark-Houwink pair for {polymer!r} in {solvent!r}; known: {', '.join(known)}",
                key="mark_houwink",
            )
        if T is not None:
            def distance(r: Mapping[str, Any]) -> float:
                t = _opt(r["T [°C]"])
                return abs((1e9 if t is None else t) - float(T))

            rows.sort(key=distance)
        r = rows[0]
        return MarkHouwinkPair(
            polymer=r["polymer"],
            solvent=r["solvent"],
            T=_opt(r["T [°C]"]),
            K=float(r["K [dL/g]"]),
            a=float(r["a [-]"]),
            source=_text(r["source"]),
        )


@functools.lru_cache(maxsize=1)
def default_reference() -> ReferenceData:
    """The bundled tables with no user additions (cached)."""
    return ReferenceData()


def monomer(name: str) -> Monomer:
    """Bundled monomer by name or alias (case-insensitive), e.g. ``monomer("MMA")``."""
    return default_reference().monomer(name)


def initiator(name: str) -> Initiator:
    """Bundled initiator by name or alias, e.g. ``initiator("AIBN")``."""
    return default_reference().initiator(name)


def termination(monomer_name: str) -> Termination:
    """Bundled termination row for a monomer."""
    return default_reference().termination(monomer_name)


def agent(name: str, monomer_name: str) -> Agent:
    """Bundled transfer agent/solvent in a monomer, e.g. ``agent("NDM", "styrene")``."""
    return default_reference().agent(name, monomer_name)


def agents_for(monomer_name: str) -> list[Agent]:
    """All bundled agents/solvents for a monomer."""
    return default_reference().agents_for(monomer_name)


def mark_houwink(polymer: str, solvent: str = "THF", T: float | None = None) -> MarkHouwinkPair:
    """Bundled Mark-Houwink pair, e.g. ``mark_houwink("polystyrene")``."""
    return default_reference().mark_houwink(polymer, solvent, T)


def _source_columns(name: str) -> tuple[str, ...]:
    return tuple(s for s, _ in _schema(name).sources)


def _all_sources_ok(frame: pd.DataFrame, name: str) -> bool:
    """True when every row has a non-empty source with a known status in every group."""
    for col in _source_columns(name):
        for v in frame[col].tolist():
            text = _text(v)
            if not text or not text.startswith(_STATUS_PREFIXES):
                return False
    return True
