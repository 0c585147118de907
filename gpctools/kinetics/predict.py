"""Steady-state prediction from a recipe: radicals, R_p, chain length and the 1/DPn budget.

Convention: IUPAC, −d[R•]/dt = 2k_t[R•]², k_t = k_tc + k_td, δ = k_td/k_t. A k_t given
in the other convention (−d[R•]/dt = k_t[R•]²) is halved before use.

Steady state (low conversion, constant [I] and [M]):

- rate of initiation R_i = 2 f k_d [I]
- [R•] = (f k_d [I] / k_t)^½
- R_p = k_p [M] [R•]
- kinetic chain length ν = R_p/R_i = k_p[M] / (2 (f k_d k_t [I])^½)
- DPn without transfer = 2ν/(1+δ)
- Mayo: 1/DPn = (1+δ) k_t R_p/(k_p²[M]²) + C_M + C_S[S]/[M] + C_I[I]/[M] + Σ C_A[A]/[M]

Instantaneous dispersity [derived]. Per propagation step a radical stops by combination
with probability β = 2(1−δ)k_t[R•]/(k_p[M]) and by anything that ends one chain
(disproportionation, transfer) with probability τ = 2δk_t[R•]/(k_p[M]) + Σ C_X[X]/[M].
Chains ended alone form a most-probable distribution (Đ = 2), chains formed by
combination a Schulz-Zimm distribution with b = 2 (Đ = 1.5). Summing the two gives
DPn = 1/(τ + β/2), DPw = (2τ + 3β)/(τ + β)², hence, with u = β/(τ + β) the fraction of
radical-stopping events that are combinations,

    Đ_inst = (2 + u)(1 − u/2) = 2 − u²/2,

and, with φ = (β/2)/(τ + β/2) the fraction of dead chains made by combination,
u = 2φ/(1 + φ). Limits: u = 0 gives 2, u = 1 gives 1.5. Mw = Mn·Đ_inst. The Mayo sum and
these relations are computed by :mod:`gpctools.chainlength` (``mayo_inv_dpn``,
``mixed_termination``).

References
----------
- IUPAC convention for k_t and the steady-state expressions: docs/science.md, section 3.
- Mayo, J. Am. Chem. Soc. 1943 (the Mayo equation).
- Schulz-Zimm distribution, Đ = (b+1)/b: IUPAC Gold Book; docs/science.md, section 8.
"""

from __future__ import annotations

import math
import warnings as _warnings
from dataclasses import dataclass, field, replace
from typing import Any

import pandas as pd

from gpctools.chainlength import (
    DistributionModel,
    dispersity_instantaneous,
    mayo_inv_dpn,
    mixed_termination,
)
from gpctools.display import Display
from gpctools.errors import DataError, GpcWarning, MethodError
from gpctools.kinetics.recipe import (
    Component,
    InitiatorSpec,
    MonomerSpec,
    Recipe,
    TerminationSpec,
)
from gpctools.refdata import (
    R_GAS,
    Initiator,
    Monomer,
    ReferenceData,
    ReferenceWarning,
    Termination,
    convert_kt,
)

__all__ = [
    "KineticsWarning",
    "TransferTerm",
    "KineticParameters",
    "KineticState",
    "BudgetTerm",
    "Prediction",
    "resolve_parameters",
    "evaluate",
    "predict",
    "dispersity_instantaneous",
]


class KineticsWarning(GpcWarning):
    """A kinetic parameter is missing or assumed (e.g. δ not tabulated, C_M unknown)."""




@dataclass(frozen=True)
class TransferTerm:
    """One transfer partner in the Mayo sum: C_X·[X]/[M].

    Attributes
    ----------
    name, role : str
        Name and role ("solvent", "agent").
    concentration : float
        [X] [mol/L].
    C : float
        Transfer constant at the recipe temperature [-].
    dE : float or None
        E_tr − E_p [kJ/mol] if known (used when the temperature is varied).
    M : float or None
        Molar mass [g/mol].
    source : str
        Where C comes from.
    caution : str
        Handling caution from the table (may be empty).
    """

    name: str
    role: str
    concentration: float
    C: float
    dE: float | None
    M: float | None
    source: str
    caution: str = ""


@dataclass(frozen=True)
class InhibitorTerm:
    """A charged inhibitor or retarder: radicals trapped at ζ = k_z[Z] [1/s].

    Attributes
    ----------
    name : str
    concentration : float
        [Z] [mol/L].
    k_z : float
        Rate coefficient of radical trapping at the recipe temperature [L/mol/s].
    z : float or None
        k_z/k_p [-] when the recipe gave it (k_z then follows k_p with temperature).
    stoichiometry : float
        Radicals trapped per molecule [-] (induction period μ[Z]/R_i).
    source : str
    """

    name: str
    concentration: float
    k_z: float
    z: float | None
    stoichiometry: float
    source: str = "recipe"


@dataclass(frozen=True, repr=False)
class KineticParameters(Display):
    """Every number the prediction uses, with its source (all at the recipe temperature).

    Units: T [K], concentrations [mol/L], k_p and k_t [L/mol/s], k_d [1/s], energies
    [kJ/mol], M0 [g/mol]; k_t is in the IUPAC convention. ``E_t`` is the activation
    energy of k_t (None: k_t held constant when the temperature is varied).
    """

    label: str
    T: float
    monomer: str
    M0: float
    conc_M: float
    k_p: float
    E_p: float | None
    initiator: str
    conc_I: float
    k_d: float
    E_d: float | None
    f: float
    C_I: float
    k_t: float
    delta: float
    C_M: float
    transfer: tuple[TransferTerm, ...]
    sources: tuple[tuple[str, str], ...]
    notes: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    initiator_caution: str = ""
    E_t: float | None = None
    inhibitors: tuple[InhibitorTerm, ...] = ()

    @property
    def T_C(self) -> float:
        """Temperature [°C]."""
        return self.T - 273.15

    def source(self, name: str) -> str:
        """Source text of a parameter (empty if none)."""
        return dict(self.sources).get(name, "")

    def table(self) -> pd.DataFrame:
        """Parameters as a table: ``parameter``, ``symbol``, ``value``, ``unit``, ``source``."""
        rows = [
            ("temperature", "T", self.T, "K", "recipe"),
            ("monomer", "[M]", self.conc_M, "mol/L", self.source("[M]")),
            ("repeat-unit molar mass", "M0", self.M0, "g/mol", self.source("M0")),
            ("propagation rate coefficient", "k_p", self.k_p, "L/mol/s", self.source("k_p")),
            ("initiator", "[I]", self.conc_I, "mol/L", "recipe"),
            ("decomposition rate coefficient", "k_d", self.k_d, "1/s", self.source("k_d")),
            ("initiator efficiency", "f", self.f, "-", self.source("f")),
            ("termination rate coefficient (IUPAC)", "k_t", self.k_t, "L/mol/s",
             self.source("k_t")),
            ("fraction by disproportionation", "delta", self.delta, "-", self.source("delta")),
            ("transfer to monomer", "C_M", self.C_M, "-", self.source("C_M")),
            ("transfer to initiator", "C_I", self.C_I, "-", self.source("C_I")),
        ]
        for t in self.transfer:
            rows.append((f"{t.role}: {t.name}", f"[{t.name}]", t.concentration, "mol/L", "recipe"))
            rows.append((f"transfer constant: {t.name}", f"C({t.name})", t.C, "-", t.source))
        for z in self.inhibitors:
            rows.append((f"inhibitor: {z.name}", f"[{z.name}]", z.concentration, "mol/L",
                         "recipe"))
            rows.append((f"radical trapping: {z.name}", f"k_z({z.name})", z.k_z, "L/mol/s",
                         z.source))
            rows.append((f"radicals trapped per molecule: {z.name}", f"mu({z.name})",
                         z.stoichiometry, "-", z.source))
        return pd.DataFrame(
            rows, columns=["parameter", "symbol", "value", "unit", "source"]
        )

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict of all parameters."""
        return {
            "label": self.label,
            "T [K]": self.T,
            "T [°C]": self.T_C,
            "monomer": self.monomer,
            "M0 [g/mol]": self.M0,
            "[M] [mol/L]": self.conc_M,
            "k_p [L/mol/s]": self.k_p,
            "E_p [kJ/mol]": self.E_p,
            "initiator": self.initiator,
            "[I] [mol/L]": self.conc_I,
            "k_d [1/s]": self.k_d,
            "E_d [kJ/mol]": self.E_d,
            "f [-]": self.f,
            "C_I [-]": self.C_I,
            "k_t (IUPAC) [L/mol/s]": self.k_t,
            "E_t [kJ/mol]": self.E_t,
            "delta [-]": self.delta,
            "C_M [-]": self.C_M,
            "transfer": [
                {"name": t.name, "role": t.role, "[X] [mol/L]": t.concentration, "C [-]": t.C,
                 "dE [kJ/mol]": t.dE, "source": t.source}
                for t in self.transfer
            ],
            "inhibitors": [
                {"name": z.name, "[Z] [mol/L]": z.concentration, "k_z [L/mol/s]": z.k_z,
                 "z [-]": z.z, "stoichiometric factor [-]": z.stoichiometry, "source": z.source}
                for z in self.inhibitors
            ],
            "sources": dict(self.sources),
            "notes": list(self.notes),
            "warnings": list(self.warnings),
        }


def _component_term(
    comp: Component, ref: ReferenceData, monomer: str, T: float, key: str, path=None
) -> tuple[TransferTerm, str | None]:
    if comp.C is not None:
        M = comp.M
        caution = ""
        try:
            row = ref.agent(comp.name, monomer)
            M = M if M is not None else row.M
            caution = row.caution
        except MethodError:
            pass
        return (
            TransferTerm(comp.name, comp.role, comp.concentration, comp.C, None, M,
                         "recipe", caution),
            None,
        )
    try:
        row = ref.agent(comp.name, monomer)
    except MethodError as exc:
        raise MethodError(
            f"{exc.message} (or give 'C [-]' for it in [[{key.split('[')[0]}]])",
            key=f"{key}.name", path=path,
        ) from None
    return (
        TransferTerm(
            name=row.agent,
            role=comp.role,
            concentration=comp.concentration,
            C=row.C(T),
            dE=row.dE,
            M=comp.M if comp.M is not None else row.M,
            source=row.source,
            caution=row.caution,
        ),
        row.temperature_note(T),
    )


@dataclass
class _Provenance:
    """Sources of the values, notes on assumptions and warnings, in the order found."""

    path: str | None
    sources: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    reference_warnings: list[str] = field(default_factory=list)

    def table_value(self, method: Any, *args: float) -> float:
        """Call a reference-record method, collecting its ReferenceWarnings (validity
        range, backbiting) in ``reference_warnings`` instead of letting them through.
        """
        with _warnings.catch_warnings(record=True) as caught:
            _warnings.simplefilter("always")
            value = float(method(*args))
        for w in caught:
            if issubclass(w.category, ReferenceWarning):
                if str(w.message) not in self.reference_warnings:
                    self.reference_warnings.append(str(w.message))
            else:
                _warnings.warn(w.message, w.category, stacklevel=3)
        return value


def _monomer_row(ms: MonomerSpec, ref: ReferenceData, prov: _Provenance) -> Monomer | None:
    """The monomer's table row; None for an unknown monomer whose M0 and k_p are given."""
    try:
        return ref.monomer(ms.name)
    except MethodError as exc:
        if ms.M0 is None or (ms.k_p is None and ms.k_p_A is None):
            raise MethodError(
                exc.message + "; or give 'M0 [g/mol]' and 'k_p [L/mol/s]' in [monomer]",
                key="monomer.name", path=prov.path,
            ) from None
        return None


def _repeat_unit_mass(ms: MonomerSpec, mon: Monomer | None, prov: _Provenance) -> float:
    """M0 [g/mol]: the recipe's, else the table's (one of them exists, see _monomer_row)."""
    if ms.M0 is not None:
        prov.sources["M0"] = "recipe"
        return ms.M0
    assert mon is not None  # _monomer_row refuses an unknown monomer without M0
    prov.sources["M0"] = mon.source
    return mon.M0


def _propagation(
    ms: MonomerSpec, mon: Monomer | None, name: str, T: float, conc_M: float, prov: _Provenance
) -> tuple[float, float | None]:
    """k_p [L/mol/s] at T and E_p [kJ/mol]: recipe value, recipe Arrhenius pair, or table.

    From the table, acrylates get the effective k_p with backbiting at the recipe's [M]
    [mol/L] (docs/science.md, section 7), with a note giving the chain-end value.
    """
    if ms.k_p is not None:
        prov.sources["k_p"] = "recipe"
        if ms.k_p_E is not None or mon is None or mon.kp_E is None:
            return ms.k_p, ms.k_p_E
        # k_p at the recipe temperature from the recipe, its temperature dependence from
        # the table (as for k_d and k_t)
        E = (mon.k_p_effective_E(T, conc_M) if (mon.has_backbiting and ms.backbiting is not False)
             else mon.kp_E)
        prov.sources["k_p"] = f"recipe; E_p {E:.4g} kJ/mol from the table ({mon.kp_source})"
        return ms.k_p, E
    if ms.k_p_A is not None and ms.k_p_E is not None:  # the recipe gives both or neither
        prov.sources["k_p"] = "recipe (Arrhenius A, E)"
        return ms.k_p_A * math.exp(-ms.k_p_E * 1e3 / (R_GAS * T)), ms.k_p_E
    if mon is None or mon.kp_A is None:
        raise MethodError(
            f"no k_p for {name!r} in the tables; give 'k_p [L/mol/s]' in [monomer]",
            key='monomer."k_p [L/mol/s]"', path=prov.path,
        )
    kp_E = mon.kp_E
    assert kp_E is not None  # a row with A has E (refdata pins the pair)
    prov.sources["k_p"] = f"{mon.kp_source}; k_p = {mon.kp_A:.5g}·exp(−{kp_E:g} kJ/mol/RT)"
    if ms.backbiting is False or not mon.has_backbiting:
        if ms.backbiting and not mon.has_backbiting:
            prov.notes.append(f"{name}: backbiting asked for, but no backbiting parameters are "
                              "tabulated; the chain-end k_p is used")
        if ms.backbiting is False and mon.has_backbiting:
            prov.sources["k_p"] += " (chain ends: backbiting = false, pulsed conditions)"
        return prov.table_value(mon.k_p, T), kp_E
    k_p = prov.table_value(mon.k_p_effective, T, conc_M)
    E_p = mon.k_p_effective_E(T, conc_M)
    if mon.has_backbiting:
        k_end = mon.kp_A * math.exp(-kp_E * 1e3 / (R_GAS * T))
        x = prov.table_value(mon.mcr_fraction, T, conc_M)
        prov.sources["k_p"] += f" (chain ends); effective k_p with backbiting: {mon.backbiting_source}"
        prov.notes.append(
            f"{name}: {mon.backbiting_caution}. Effective k_p {k_p:.4g} L/mol/s = "
            f"{k_p / k_end:.2f} × the chain-end value {k_end:.4g} at [M] = {conc_M:g} "
            f"mol/L (mid-chain radical fraction {x:.2f}); it changes with [M]"
        )
    return k_p, E_p


def _monomer_concentration(
    ms: MonomerSpec, mon: Monomer | None, name: str, M0: float, prov: _Provenance
) -> float:
    """[M] [mol/L]: the recipe's, or 1000·density/M0 for neat monomer (bulk = true)."""
    if not ms.bulk:
        assert ms.concentration is not None  # the recipe refuses neither bulk nor [M]
        prov.sources["[M]"] = "recipe"
        return float(ms.concentration)
    density = ms.density if ms.density is not None else (mon.density if mon else None)
    if density is None:
        raise MethodError(
            f"no density for {name!r}; give 'density [g/mL]' or the concentration",
            key='monomer."density [g/mL]"', path=prov.path,
        )
    dT = f" at {mon.density_T:g} °C" if (mon and ms.density is None and mon.density_T) else ""
    prov.sources["[M]"] = f"bulk: 1000·density/M0 with density {density:g} g/mL{dT}"
    prov.notes.append(
        f"[M] of neat monomer from its density{dT}; the density at the reaction "
        "temperature is lower by a few percent"
    )
    return 1000.0 * density / M0


def _transfer_to_monomer(
    ms: MonomerSpec, mon: Monomer | None, name: str, T: float, prov: _Provenance
) -> float:
    """C_M [-]: recipe, else table (noting a temperature mismatch over 5 K), else 0 (warned)."""
    if ms.C_M is not None:
        prov.sources["C_M"] = "recipe"
        return ms.C_M
    if mon is None or mon.C_M is None:
        prov.sources["C_M"] = "assumed 0 (not tabulated)"
        prov.warnings.append(
            f"C_M for {name} is not tabulated; 0 used — give 'C_M [-]' in [monomer]")
        return 0.0
    if mon.C_M_T is None:
        # a user table may give C_M without 'C_M T [°C]'
        prov.sources["C_M"] = mon.C_M_source
        prov.notes.append(
            f"C_M of {name} is tabulated without its temperature and used unchanged at "
            f"{T - 273.15:g} °C"
        )
    else:
        prov.sources["C_M"] = f"{mon.C_M_source} (at {mon.C_M_T:g} °C)"
        if abs(mon.C_M_T + 273.15 - T) > 5.0:
            prov.notes.append(
                f"C_M of {name} is tabulated at {mon.C_M_T:g} °C and used unchanged at "
                f"{T - 273.15:g} °C"
            )
    return mon.C_M


def _initiator_row(ins: InitiatorSpec, ref: ReferenceData, prov: _Provenance) -> Initiator | None:
    """The initiator's table row; None for an unknown initiator whose k_d and f are given."""
    try:
        return ref.initiator(ins.name)
    except MethodError as exc:
        if ins.k_d is None or ins.f is None:
            raise MethodError(
                exc.message + "; or give 'k_d [1/s]' and 'f [-]' in [initiator]",
                key="initiator.name", path=prov.path,
            ) from None
        return None


def _decomposition(
    ins: InitiatorSpec, ini: Initiator | None, T: float, prov: _Provenance
) -> tuple[float, float | None]:
    """k_d [1/s] at T and E_d [kJ/mol]: recipe k_d, else the table's k_d_ref moved to T.

    k_d(T) = k_d,ref·exp(−E_d/R·(1/T − 1/T_ref)), with the recipe's E_d when given.
    """
    if ins.k_d is not None:
        E = ins.E_d if ins.E_d is not None else (ini.E_d if ini else None)
        if ins.k_d_T is None or abs(ins.k_d_T + 273.15 - T) < 1e-9:
            prov.sources["k_d"] = "recipe"
            return ins.k_d, E
        if E is None:
            raise MethodError(
                "the recipe gives k_d at another temperature: give 'E_d [kJ/mol]' to move it",
                key='initiator."E_d [kJ/mol]"', path=prov.path)
        T_kd = ins.k_d_T + 273.15
        prov.sources["k_d"] = (f"recipe: k_d = {ins.k_d:g}·exp(−{E:g} kJ/mol/R·(1/T − 1/"
                               f"{T_kd:g} K))")
        return ins.k_d * math.exp(-E * 1e3 / R_GAS * (1 / T - 1 / T_kd)), E
    assert ini is not None  # _initiator_row refuses an unknown initiator without k_d
    E_d = ins.E_d if ins.E_d is not None else ini.E_d
    if ins.E_d is not None:
        T_ref = ini.T_ref + 273.15
        k_d = ini.k_d_ref * math.exp(-E_d * 1e3 / R_GAS * (1 / T - 1 / T_ref))
    else:
        k_d = prov.table_value(ini.k_d, T)
    prov.sources["k_d"] = (
        f"{ini.kd_source}; k_d = {ini.k_d_ref:g}·exp(−{E_d:g} kJ/mol/R·(1/T − 1/"
        f"{ini.T_ref + 273.15:g} K))"
    )
    return k_d, E_d


def _efficiency_and_C_I(
    ins: InitiatorSpec, ini: Initiator | None, prov: _Provenance
) -> tuple[float, float]:
    """f [-] (recipe, else table) and C_I [-] (recipe, else 0 with a note)."""
    if ins.f is not None:
        f, prov.sources["f"] = ins.f, "recipe"
    else:
        assert ini is not None  # _initiator_row refuses an unknown initiator without f
        f, prov.sources["f"] = ini.f, ini.f_source
    C_I = ins.C_I if ins.C_I is not None else 0.0
    prov.sources["C_I"] = "recipe" if ins.C_I is not None else "assumed 0 (not tabulated)"
    if ins.C_I is None:
        prov.notes.append("transfer to initiator not tabulated; C_I = 0 used")
    return f, C_I


def _termination(
    ts: TerminationSpec, ref: ReferenceData, name: str, T: float, prov: _Provenance
) -> tuple[float, float, float | None]:
    """k_t in the IUPAC convention [L/mol/s], δ [-] and E_t [kJ/mol].

    k_t from the recipe, else the table's k_t at T (Arrhenius with the tabulated E_t);
    δ from the recipe, else the table, else 0.5 (warned); E_t from the table (None when
    not tabulated: k_t is then held constant when the temperature is varied).
    """
    try:
        row: Termination | None = ref.termination(name)
    except MethodError:
        row = None
    E_t = ts.k_t_E if ts.k_t_E is not None else (row.E if row is not None else None)
    if ts.k_t is not None:
        k_t = convert_kt(ts.k_t, ts.convention, "IUPAC 2kt")
        prov.sources["k_t"] = "recipe" + (
            f" ({ts.k_t:g} in the 'kt' convention, halved)" if ts.convention == "kt" else ""
        )
        if ts.k_t_T is not None and abs(ts.k_t_T + 273.15 - T) > 1e-9:
            if E_t is None:
                raise MethodError(
                    "the recipe gives k_t at another temperature: give 'k_t E [kJ/mol]' to "
                    "move it", key='termination."k_t E [kJ/mol]"', path=prov.path)
            T_kt = ts.k_t_T + 273.15
            k_t *= math.exp(-E_t * 1e3 / R_GAS * (1 / T - 1 / T_kt))
            prov.sources["k_t"] += (f"; k_t(T) = k_t·exp(−{E_t:g} kJ/mol/R·(1/T − 1/"
                                    f"{T_kt:g} K))")
    elif row is not None and ts.k_t_E is not None and row.T is not None:
        T_ref = row.T + 273.15
        k_t = row.k_t_iupac * math.exp(-ts.k_t_E * 1e3 / R_GAS * (1 / T - 1 / T_ref))
        prov.sources["k_t"] = (f"{row.source}; E_t {ts.k_t_E:g} kJ/mol from the recipe: "
                               f"k_t = {row.k_t_iupac:g}·exp(−{ts.k_t_E:g} kJ/mol/R·(1/T − 1/"
                               f"{T_ref:g} K))")
    elif row is not None:
        k_t = prov.table_value(row.k_t, T)
        prov.sources["k_t"] = row.source + (
            f" ({row.k_t_ref:g} in the 'kt' convention, halved)" if row.convention == "kt" else ""
        ) + (f"; k_t = {row.k_t_iupac:g}·exp(−{row.E:g} kJ/mol/R·(1/T − 1/"
             f"{row.T + 273.15:g} K))" if (row.E is not None and row.T is not None) else "")
        note = row.temperature_note(T)
        if note:
            prov.notes.append(str(note))
    else:
        raise MethodError(
            f"no termination row for {name!r}; give 'k_t [L/mol/s]' in [termination]",
            key='termination."k_t [L/mol/s]"', path=prov.path,
        )
    if ts.delta is not None:
        prov.sources["delta"] = "recipe"
        return k_t, ts.delta, E_t
    if row is not None and row.delta is not None:
        prov.sources["delta"] = row.delta_source or row.source
        return k_t, row.delta, E_t
    prov.sources["delta"] = "assumed 0.5 (not tabulated)"
    prov.warnings.append(
        f"fraction by disproportionation for {name} not tabulated; 0.5 used (DPn "
        "uncertain by up to 33 %) — give 'delta [-]' in [termination]"
    )
    return k_t, 0.5, E_t


def _transfer_terms(
    recipe: Recipe, ref: ReferenceData, name: str, T: float, prov: _Provenance
) -> tuple[TransferTerm, ...]:
    """One Mayo term per solvent and agent of the recipe (solvents first)."""
    terms = []
    for key, comps in (("solvent", recipe.solvents), ("agent", recipe.agents)):
        for j, comp in enumerate(comps):
            term, note = _component_term(comp, ref, name, T, f"{key}[{j + 1}]", prov.path)
            terms.append(term)
            if note:
                prov.notes.append(note)
    return tuple(terms)


def _inhibitor_terms(recipe: Recipe, k_p: float) -> tuple[InhibitorTerm, ...]:
    """The recipe's charged inhibitors: k_z as given, or z·k_p [L/mol/s]."""
    return tuple(
        InhibitorTerm(
            name=z.name, concentration=z.concentration,
            k_z=z.k_z if z.k_z is not None else float(z.z or 0.0) * k_p, z=z.z,
            stoichiometry=z.stoichiometry,
            source="recipe" if z.k_z is not None else f"recipe: k_z = z·k_p with z = {z.z:g}",
        )
        for z in recipe.inhibitors
    )


def resolve_parameters(recipe: Recipe, ref: ReferenceData | None = None) -> KineticParameters:
    """Collect every kinetic parameter for a recipe: recipe overrides, else the tables.

    Parameters
    ----------
    recipe : Recipe
    ref : ReferenceData, optional
        Reference tables (default: the recipe's, i.e. bundled plus ``[data_files]``).

    Returns
    -------
    KineticParameters
        All values at the recipe temperature, k_t converted to the IUPAC convention,
        with the source of each value and notes on assumptions. Missing δ (0.5 assumed)
        or C_M (0 assumed) issue a :class:`KineticsWarning`, a table value used outside
        its validity range a :class:`gpctools.refdata.ReferenceWarning`; both are also
        listed in ``warnings``. k_t follows its tabulated activation energy; acrylates
        use the effective k_p with backbiting (docs/science.md, section 7).
    """
    ref = ref if ref is not None else recipe.reference_data()
    T = recipe.T
    ms, ins = recipe.monomer, recipe.initiator
    prov = _Provenance(recipe.path)
    mon = _monomer_row(ms, ref, prov)
    name = mon.name if mon else ms.name
    M0 = _repeat_unit_mass(ms, mon, prov)
    conc_M = _monomer_concentration(ms, mon, name, M0, prov)
    k_p, E_p = _propagation(ms, mon, name, T, conc_M, prov)
    C_M = _transfer_to_monomer(ms, mon, name, T, prov)
    ini = _initiator_row(ins, ref, prov)
    k_d, E_d = _decomposition(ins, ini, T, prov)
    f, C_I = _efficiency_and_C_I(ins, ini, prov)
    k_t, delta, E_t = _termination(recipe.termination, ref, name, T, prov)
    terms = _transfer_terms(recipe, ref, name, T, prov)
    prov.notes.extend(recipe.charge_notes)
    for w in prov.warnings:
        _warnings.warn(w, KineticsWarning, stacklevel=2)
    for w in prov.reference_warnings:
        _warnings.warn(w, ReferenceWarning, stacklevel=2)
    return KineticParameters(
        label=recipe.label, T=T, monomer=name, M0=M0, conc_M=conc_M, k_p=k_p, E_p=E_p,
        initiator=ini.name if ini else ins.name, conc_I=ins.concentration, k_d=k_d, E_d=E_d,
        f=f, C_I=C_I, k_t=k_t, delta=delta, C_M=C_M, transfer=terms,
        sources=tuple(prov.sources.items()), notes=tuple(prov.notes),
        warnings=tuple(prov.warnings + prov.reference_warnings),
        initiator_caution=ini.caution if ini else "", E_t=E_t,
        inhibitors=_inhibitor_terms(recipe, k_p),
    )


@dataclass(frozen=True)
class KineticState:
    """Steady state of the model for one set of (possibly perturbed) parameters.

    Units: R_i, R_p [mol/L/s]; radicals [mol/L]; k's as in :class:`KineticParameters`.
    ``terms`` holds each 1/DPn contribution [-] by name; ``tau`` and ``beta`` are the
    chain stops per propagation step that end one chain and that combine [-]
    (:class:`gpctools.chainlength.MixedTermination`); ``zeta`` the first-order radical
    loss to inhibitors and retarders [1/s].
    """

    T: float
    conc_M: float
    conc_I: float
    k_p: float
    k_d: float
    R_i: float
    radicals: float
    R_p: float
    nu: float
    terms: tuple[tuple[str, float], ...]
    inv_DPn: float
    DPn: float
    u_combination: float
    fraction_chains_combination: float
    dispersity: float
    tau: float = float("nan")
    beta: float = float("nan")
    zeta: float = 0.0
    k_t: float = float("nan")

    def distribution(self, M0: float) -> DistributionModel:
        """dw/dlog10 M of the instantaneous distribution [-] for repeat unit M0 [g/mol]."""
        return mixed_termination(self.tau, self.beta).distribution(M0)


def _arrhenius_shift(k0: float, E: float | None, T0: float, T: float) -> float:
    """k0·exp(−E/R·(1/T − 1/T0)) [k0's unit]; k0 when E is unknown or T = T0."""
    if T == T0 or E is None:
        return k0
    return k0 * math.exp(-E * 1e3 / R_GAS * (1.0 / T - 1.0 / T0))


def _radicals(k_t: float, R_i: float, zeta: float) -> float:
    """[R•] [mol/L] from 2k_t[R•]² + ζ[R•] = R_i (ζ = 0: (R_i/2k_t)^½)."""
    if zeta > 0.0:
        return (-zeta + math.sqrt(zeta**2 + 8.0 * k_t * R_i)) / (4.0 * k_t)
    return math.sqrt(R_i / (2.0 * k_t))


def _stop_terms(
    p: KineticParameters, T: float, conc_M: float, conc_I: float, k_p: float,
    zetas: list[tuple[str, float]], extra_transfer: float,
) -> list[tuple[str, float, float]]:
    """(name, C, ratio) of every chain stop besides termination: C·ratio is its 1/DPn."""
    kpM = k_p * conc_M
    out: list[tuple[str, float, float]] = [("transfer to monomer", p.C_M, 1.0),
                                           ("transfer to initiator", p.C_I, conc_I / conc_M)]
    for t in p.transfer:
        C = _arrhenius_shift(t.C, t.dE, p.T, T)
        out.append((f"{t.role}: {t.name}", C, t.concentration / conc_M))
    if extra_transfer:
        out.append(("unexplained transfer", extra_transfer, 1.0))
    out.extend((name, z / kpM, 1.0) for name, z in zetas if z)
    return out


def evaluate(
    p: KineticParameters,
    *,
    radical_flux_factor: float = 1.0,
    dT: float = 0.0,
    extra_transfer: float = 0.0,
    retarder: float = 0.0,
    monomer_factor: float = 1.0,
) -> KineticState:
    """Steady-state model at the parameters ``p``, optionally perturbed.

    Parameters
    ----------
    p : KineticParameters
    radical_flux_factor : float
        Factor on f·k_d·[I] (more or less initiator, or efficiency) [-].
    dT : float
        Temperature change [K]; k_p and k_d follow their Arrhenius energies, C values
        with a tabulated ΔE follow C ∝ exp(−ΔE/RT); k_t follows ``E_t`` when known;
        an inhibitor given by z = k_z/k_p follows k_p.
    extra_transfer : float
        Added 1/DPn from unexplained transfer [-] (Σ C_x[x]/[M] of an impurity).
    retarder : float
        ζ = k_z[Z], first-order radical loss to an unplanned retarder [1/s], added to
        the charged inhibitors' Σ k_z[Z]; each such event ends a chain. Steady state
        2k_t[R•]² + ζ[R•] = R_i, and each trapped radical adds ζ/(k_p[M]) to 1/DPn.
    monomer_factor : float
        Factor on [M] (dilution or monomer loss) [-].

    Returns
    -------
    KineticState

    References
    ----------
    docs/science.md, section 3 (steady state, Mayo equation); module docstring
    (dispersity).
    """
    T = p.T + dT
    if T <= 0:
        raise DataError(f"temperature {T} K is not physical")
    k_p = _arrhenius_shift(p.k_p, p.E_p, p.T, T)
    k_d = _arrhenius_shift(p.k_d, p.E_d, p.T, T)
    k_t = _arrhenius_shift(p.k_t, p.E_t, p.T, T)
    conc_M = p.conc_M * monomer_factor
    conc_I = p.conc_I * radical_flux_factor
    R_i = 2.0 * p.f * k_d * conc_I
    zetas = [(f"inhibitor: {z.name}",
              (z.z * k_p if z.z is not None else z.k_z) * z.concentration) for z in p.inhibitors]
    zetas.append(("retarder", retarder))
    zeta = sum(v for _, v in zetas)
    radicals = _radicals(k_t, R_i, zeta)
    R_p = k_p * conc_M * radicals
    kpM = k_p * conc_M
    comb = (1.0 - p.delta) * k_t * radicals / kpM
    disp = 2.0 * p.delta * k_t * radicals / kpM
    stops = _stop_terms(p, T, conc_M, conc_I, k_p, zetas, extra_transfer)
    terms = [("termination (combination)", comb), ("termination (disproportionation)", disp)]
    terms += [(name, C * ratio) for name, C, ratio in stops]
    # the Mayo sum (docs/science.md, section 3.3), in the budget's order
    inv = float(mayo_inv_dpn(comb + disp, transfer=[(C, ratio) for _, C, ratio in stops]))
    if not inv > 0:
        raise DataError("the 1/DPn sum is not positive; check the recipe's parameters")
    # τ: everything that ends one chain; β = 2·comb: radical stops by combination
    mixed = mixed_termination(tau=inv - comb, beta=2.0 * comb)
    u = mixed.u_combination
    return KineticState(
        T=T, conc_M=conc_M, conc_I=conc_I, k_p=k_p, k_d=k_d, R_i=R_i, radicals=radicals,
        R_p=R_p, nu=R_p / R_i, terms=tuple(terms), inv_DPn=inv, DPn=1.0 / inv,
        u_combination=u, fraction_chains_combination=mixed.fraction_chains_combination,
        dispersity=dispersity_instantaneous(min(max(u, 0.0), 1.0)),
        tau=inv - comb, beta=2.0 * comb, zeta=zeta, k_t=k_t,
    )


_FORMULAS = {
    "termination (combination)": "(1−δ)·k_t·R_p/(k_p²[M]²)",
    "termination (disproportionation)": "2δ·k_t·R_p/(k_p²[M]²)",
    "transfer to monomer": "C_M",
    "transfer to initiator": "C_I·[I]/[M]",
    "unexplained transfer": "Δ(1/DPn)",
    "retarder": "ζ/(k_p[M])",
    "inhibitor": "k_z[Z]/(k_p[M])",
}


@dataclass(frozen=True)
class BudgetTerm:
    """One line of the 1/DPn budget: contribution [-] and share of the total [%]."""

    term: str
    formula: str
    value: float
    share: float


@dataclass(frozen=True, repr=False)
class Prediction(Display):
    """Steady-state prediction for a recipe.

    Attributes
    ----------
    parameters : KineticParameters
        Everything used, with sources (print it to reproduce each number by hand).
    R_i, radicals, R_p : float
        Rate of initiation [mol/L/s], [R•] [mol/L], rate of polymerization [mol/L/s].
    nu : float
        Kinetic chain length [-].
    DPn_no_transfer : float
        2ν/(1+δ) [-].
    DPn, Mn, Mw : float
        With all transfer terms [-], [g/mol], [g/mol].
    dispersity : float
        Instantaneous dispersity Đ_inst = 2 − u²/2 [-].
    fraction_chains_combination : float
        Fraction of dead chains formed by combination [-].
    budget : tuple of BudgetTerm
        The Mayo 1/DPn budget.
    half_life : float
        Initiator half-life ln2/k_d [s].
    induction : tuple of (name, float)
        Induction period of each charged inhibitor, μ[Z]/R_i [s]: the time the radicals
        formed take to use it up when every molecule traps μ of them (docs/science.md,
        section 9.1).
    """

    parameters: KineticParameters
    R_i: float
    radicals: float
    R_p: float
    nu: float
    DPn_no_transfer: float
    DPn: float
    Mn: float
    Mw: float
    dispersity: float
    u_combination: float
    fraction_chains_combination: float
    budget: tuple[BudgetTerm, ...]
    half_life: float
    notes: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()
    induction: tuple[tuple[str, float], ...] = ()

    @property
    def inv_DPn(self) -> float:
        """1/DPn [-]."""
        return 1.0 / self.DPn

    def budget_table(self) -> pd.DataFrame:
        """The 1/DPn budget with unit-named columns."""
        return pd.DataFrame(
            [(b.term, b.formula, b.value, b.share) for b in self.budget],
            columns=["term", "formula", "1/DPn contribution [-]", "share [%]"],
        )

    def results(self) -> dict[str, float]:
        """Predicted values keyed by unit-named labels."""
        return {
            "R_i [mol/L/s]": self.R_i,
            "[R•] [mol/L]": self.radicals,
            "R_p [mol/L/s]": self.R_p,
            "nu [-]": self.nu,
            "DPn without transfer [-]": self.DPn_no_transfer,
            "1/DPn [-]": self.inv_DPn,
            "DPn [-]": self.DPn,
            "Mn [g/mol]": self.Mn,
            "Mw [g/mol]": self.Mw,
            "dispersity (instantaneous) [-]": self.dispersity,
            "fraction of chains by combination [-]": self.fraction_chains_combination,
            "initiator half-life [h]": self.half_life / 3600.0,
            **{f"induction period, {name} [min]": t / 60.0 for name, t in self.induction},
        }

    def table(self) -> pd.DataFrame:
        """Predicted values as a two-column table (``quantity``, ``value``)."""
        return pd.DataFrame(list(self.results().items()), columns=["quantity", "value"])

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict: parameters, results, budget, notes and warnings."""
        return {
            "parameters": self.parameters.summary(),
            "results": {k: float(v) for k, v in self.results().items()},
            "budget": [
                {"term": b.term, "formula": b.formula, "1/DPn contribution [-]": b.value,
                 "share [%]": b.share}
                for b in self.budget
            ],
            "notes": list(self.notes),
            "warnings": list(self.warnings),
        }


def _from_state(p: KineticParameters, s: KineticState, notes=(), warns=()) -> Prediction:
    inv = s.inv_DPn
    budget = tuple(
        BudgetTerm(
            term=name,
            formula=_FORMULAS.get(name) or _FORMULAS.get(name.split(":")[0], "C·[X]/[M]"),
            value=v,
            share=100.0 * v / inv,
        )
        for name, v in s.terms
    )
    DPn = 1.0 / inv
    return Prediction(
        parameters=p,
        R_i=s.R_i,
        radicals=s.radicals,
        R_p=s.R_p,
        nu=s.nu,
        DPn_no_transfer=2.0 * s.nu / (1.0 + p.delta),
        DPn=DPn,
        Mn=DPn * p.M0,
        Mw=DPn * p.M0 * s.dispersity,
        dispersity=s.dispersity,
        u_combination=s.u_combination,
        fraction_chains_combination=s.fraction_chains_combination,
        budget=budget,
        half_life=math.log(2.0) / s.k_d,
        notes=tuple(notes),
        warnings=tuple(warns),
        induction=tuple((z.name, z.stoichiometry * z.concentration / s.R_i)
                        for z in p.inhibitors),
    )


def predict(
    recipe: Recipe | KineticParameters, ref: ReferenceData | None = None
) -> Prediction:
    """Predict R_p, chain length, Mn, Mw and the 1/DPn budget for a recipe.

    Parameters
    ----------
    recipe : Recipe or KineticParameters
        A recipe (parameters resolved from it and the tables) or ready parameters.
    ref : ReferenceData, optional
        Reference tables (default: the recipe's).

    Returns
    -------
    Prediction

    Notes
    -----
    Steady state at low conversion: [I] and [M] are taken at their initial values.

    References
    ----------
    docs/science.md, section 3 (IUPAC convention, steady state, Mayo, J. Am. Chem. Soc. 1943);
    dispersity: see the module docstring.
    """
    p = recipe if isinstance(recipe, KineticParameters) else resolve_parameters(recipe, ref)
    s = evaluate(p)
    notes = list(p.notes)
    if isinstance(recipe, Recipe) and recipe.measured.conversion:
        xmax = max(recipe.measured.conversion)
        if xmax > 0.1:
            notes.append(
                f"measured conversion reaches {xmax:.2f}: the prediction is instantaneous "
                "(low conversion); cumulative averages drift with conversion"
            )
    return _from_state(p, s, notes, p.warnings)


def scaled_parameters(p: KineticParameters, **changes: Any) -> KineticParameters:
    """A copy of ``p`` with fields replaced (for what-if comparisons)."""
    return replace(p, **changes)
