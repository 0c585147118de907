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
- IUPAC convention for k_t and the steady-state expressions: SCIENCE.md §3.
- Mayo, J. Am. Chem. Soc. 1943 (the Mayo equation).
- Schulz-Zimm distribution, Đ = (b+1)/b: IUPAC Gold Book; SCIENCE.md §8.
"""

from __future__ import annotations

import math
import warnings as _warnings
from dataclasses import dataclass, replace
from typing import Any

import pandas as pd

from gpctools.chainlength import dispersity_instantaneous, mayo_inv_dpn, mixed_termination
from gpctools.errors import DataError, GpcWarning, MethodError
from gpctools.kinetics.recipe import Component, Recipe
from gpctools.refdata import R_GAS, ReferenceData, ReferenceWarning, convert_kt

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
class KineticParameters:
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


def _table_value(ref_warns: list[str], method: Any, *args: float) -> float:
    """Call a reference-record method; collect its ReferenceWarnings (validity range,
    backbiting) into ``ref_warns`` instead of letting them through."""
    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always")
        value = float(method(*args))
    for w in caught:
        if issubclass(w.category, ReferenceWarning):
            if str(w.message) not in ref_warns:
                ref_warns.append(str(w.message))
        else:
            _warnings.warn(w.message, w.category, stacklevel=3)
    return value


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
    ms, ins, ts = recipe.monomer, recipe.initiator, recipe.termination
    sources: dict[str, str] = {}
    notes: list[str] = []
    warns: list[str] = []
    ref_warns: list[str] = []

    try:
        mon = ref.monomer(ms.name)
    except MethodError as exc:
        if ms.M0 is None or (ms.k_p is None and ms.k_p_A is None):
            raise MethodError(
                exc.message + "; or give 'M0 [g/mol]' and 'k_p [L/mol/s]' in [monomer]",
                key="monomer.name", path=recipe.path,
            ) from None
        mon = None
    name = mon.name if mon else ms.name

    M0 = ms.M0 if ms.M0 is not None else mon.M0
    sources["M0"] = "recipe" if ms.M0 is not None else mon.source

    if ms.k_p is not None:
        k_p, E_p = ms.k_p, ms.k_p_E
        sources["k_p"] = "recipe"
    elif ms.k_p_A is not None:
        k_p, E_p = ms.k_p_A * math.exp(-ms.k_p_E * 1e3 / (R_GAS * T)), ms.k_p_E
        sources["k_p"] = "recipe (Arrhenius A, E)"
    else:
        if mon.kp_A is None:
            raise MethodError(
                f"no k_p for {name!r} in the tables; give 'k_p [L/mol/s]' in [monomer]",
                key='monomer."k_p [L/mol/s]"', path=recipe.path,
            )
        k_p, E_p = math.nan, mon.kp_E  # set below, once [M] is known

    if ms.bulk:
        density = ms.density if ms.density is not None else (mon.density if mon else None)
        if density is None:
            raise MethodError(
                f"no density for {name!r}; give 'density [g/mL]' or the concentration",
                key='monomer."density [g/mL]"', path=recipe.path,
            )
        conc_M = 1000.0 * density / M0
        dT = f" at {mon.density_T:g} °C" if (mon and ms.density is None and mon.density_T) else ""
        sources["[M]"] = f"bulk: 1000·density/M0 with density {density:g} g/mL{dT}"
        notes.append(
            f"[M] of neat monomer from its density{dT}; the density at the reaction "
            "temperature is lower by a few percent"
        )
    else:
        conc_M = float(ms.concentration)
        sources["[M]"] = "recipe"

    if "k_p" not in sources:  # from the tables; acrylates: effective k_p with backbiting
        k_p = _table_value(ref_warns, mon.k_p_effective, T, conc_M)
        E_p = mon.k_p_effective_E(T, conc_M)
        sources["k_p"] = f"{mon.kp_source}; k_p = {mon.kp_A:.5g}·exp(−{mon.kp_E:g} kJ/mol/RT)"
        if mon.has_backbiting:
            k_end = mon.kp_A * math.exp(-mon.kp_E * 1e3 / (R_GAS * T))
            x = _table_value(ref_warns, mon.mcr_fraction, T, conc_M)
            sources["k_p"] += (f" (chain ends); effective k_p with backbiting: "
                               f"{mon.backbiting_source}")
            notes.append(
                f"{name}: {mon.backbiting_caution}. Effective k_p {k_p:.4g} L/mol/s = "
                f"{k_p / k_end:.2f} × the chain-end value {k_end:.4g} at [M] = {conc_M:g} "
                f"mol/L (mid-chain radical fraction {x:.2f}); it changes with [M]"
            )

    if ms.C_M is not None:
        C_M = ms.C_M
        sources["C_M"] = "recipe"
    elif mon is not None and mon.C_M is not None:
        C_M = mon.C_M
        if mon.C_M_T is None:
            # a user table may give C_M without 'C_M T [°C]'
            sources["C_M"] = mon.C_M_source
            notes.append(
                f"C_M of {name} is tabulated without its temperature and used unchanged at "
                f"{T - 273.15:g} °C"
            )
        else:
            sources["C_M"] = f"{mon.C_M_source} (at {mon.C_M_T:g} °C)"
            if abs(mon.C_M_T + 273.15 - T) > 5.0:
                notes.append(
                    f"C_M of {name} is tabulated at {mon.C_M_T:g} °C and used unchanged at "
                    f"{T - 273.15:g} °C"
                )
    else:
        C_M = 0.0
        sources["C_M"] = "assumed 0 (not tabulated)"
        warns.append(f"C_M for {name} is not tabulated; 0 used — give 'C_M [-]' in [monomer]")

    # initiator
    try:
        ini = ref.initiator(ins.name)
    except MethodError as exc:
        if ins.k_d is None or ins.f is None:
            raise MethodError(
                exc.message + "; or give 'k_d [1/s]' and 'f [-]' in [initiator]",
                key="initiator.name", path=recipe.path,
            ) from None
        ini = None
    ini_name = ini.name if ini else ins.name
    if ins.k_d is not None:
        k_d = ins.k_d
        E_d = ins.E_d if ins.E_d is not None else (ini.E_d if ini else None)
        sources["k_d"] = "recipe"
    else:
        E_d = ins.E_d if ins.E_d is not None else ini.E_d
        if ins.E_d is not None:
            T_ref = ini.T_ref + 273.15
            k_d = ini.k_d_ref * math.exp(-E_d * 1e3 / R_GAS * (1 / T - 1 / T_ref))
        else:
            k_d = _table_value(ref_warns, ini.k_d, T)
        sources["k_d"] = (
            f"{ini.kd_source}; k_d = {ini.k_d_ref:g}·exp(−{E_d:g} kJ/mol/R·(1/T − 1/"
            f"{ini.T_ref + 273.15:g} K))"
        )
    f = ins.f if ins.f is not None else ini.f
    sources["f"] = "recipe" if ins.f is not None else ini.f_source
    C_I = ins.C_I if ins.C_I is not None else 0.0
    sources["C_I"] = "recipe" if ins.C_I is not None else "assumed 0 (not tabulated)"
    if ins.C_I is None:
        notes.append("transfer to initiator not tabulated; C_I = 0 used")

    # termination
    k_t_row = None
    try:
        k_t_row = ref.termination(name)
    except MethodError:
        k_t_row = None
    if ts.k_t is not None:
        k_t = convert_kt(ts.k_t, ts.convention, "IUPAC 2kt")
        sources["k_t"] = "recipe" + (
            f" ({ts.k_t:g} in the 'kt' convention, halved)" if ts.convention == "kt" else ""
        )
    elif k_t_row is not None:
        k_t = _table_value(ref_warns, k_t_row.k_t, T)
        sources["k_t"] = k_t_row.source + (
            f" ({k_t_row.k_t_ref:g} in the 'kt' convention, halved)"
            if k_t_row.convention == "kt" else ""
        ) + (f"; k_t = {k_t_row.k_t_iupac:g}·exp(−{k_t_row.E:g} kJ/mol/R·(1/T − 1/"
             f"{k_t_row.T + 273.15:g} K))" if (k_t_row.E is not None and k_t_row.T is not None)
             else "")
        if k_t_row.temperature_note(T):
            notes.append(str(k_t_row.temperature_note(T)))
    else:
        raise MethodError(
            f"no termination row for {name!r}; give 'k_t [L/mol/s]' in [termination]",
            key='termination."k_t [L/mol/s]"', path=recipe.path,
        )
    if ts.delta is not None:
        delta = ts.delta
        sources["delta"] = "recipe"
    elif k_t_row is not None and k_t_row.delta is not None:
        delta = k_t_row.delta
        sources["delta"] = k_t_row.delta_source or k_t_row.source
    else:
        delta = 0.5
        sources["delta"] = "assumed 0.5 (not tabulated)"
        warns.append(
            f"fraction by disproportionation for {name} not tabulated; 0.5 used (DPn "
            "uncertain by up to 33 %) — give 'delta [-]' in [termination]"
        )

    terms = []
    for key, comps in (("solvent", recipe.solvents), ("agent", recipe.agents)):
        for j, comp in enumerate(comps):
            term, note = _component_term(comp, ref, name, T, f"{key}[{j + 1}]", recipe.path)
            terms.append(term)
            if note:
                notes.append(note)

    for w in warns:
        _warnings.warn(w, KineticsWarning, stacklevel=2)
    for w in ref_warns:
        _warnings.warn(w, ReferenceWarning, stacklevel=2)

    return KineticParameters(
        label=recipe.label,
        T=T,
        monomer=name,
        M0=M0,
        conc_M=conc_M,
        k_p=k_p,
        E_p=E_p,
        initiator=ini_name,
        conc_I=ins.concentration,
        k_d=k_d,
        E_d=E_d,
        f=f,
        C_I=C_I,
        k_t=k_t,
        delta=delta,
        C_M=C_M,
        transfer=tuple(terms),
        sources=tuple(sources.items()),
        notes=tuple(notes),
        warnings=tuple(warns + ref_warns),
        initiator_caution=ini.caution if ini else "",
        E_t=k_t_row.E if k_t_row is not None else None,
    )


@dataclass(frozen=True)
class KineticState:
    """Steady state of the model for one set of (possibly perturbed) parameters.

    Units: R_i, R_p [mol/L/s]; radicals [mol/L]; k's as in :class:`KineticParameters`.
    ``terms`` holds each 1/DPn contribution [-] by name.
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
        with a tabulated ΔE follow C ∝ exp(−ΔE/RT); k_t follows ``E_t`` when known.
    extra_transfer : float
        Added 1/DPn from unexplained transfer [-] (Σ C_x[x]/[M] of an impurity).
    retarder : float
        ζ = k_z[Z], first-order radical loss to a retarder [1/s]; each such event ends a
        chain. Steady state 2k_t[R•]² + ζ[R•] = R_i.
    monomer_factor : float
        Factor on [M] (dilution or monomer loss) [-].

    Returns
    -------
    KineticState

    References
    ----------
    SCIENCE.md §3 (steady state, Mayo equation), module docstring (dispersity).
    """
    T = p.T + dT
    if T <= 0:
        raise DataError(f"temperature {T} K is not physical")

    def arrh(k0: float, E: float | None) -> float:
        if dT == 0.0 or E is None:
            return k0
        return k0 * math.exp(-E * 1e3 / R_GAS * (1.0 / T - 1.0 / p.T))

    k_p = arrh(p.k_p, p.E_p)
    k_d = arrh(p.k_d, p.E_d)
    conc_M = p.conc_M * monomer_factor
    conc_I = p.conc_I * radical_flux_factor
    R_i = 2.0 * p.f * k_d * conc_I
    k_t = arrh(p.k_t, p.E_t)
    if retarder > 0.0:
        radicals = (-retarder + math.sqrt(retarder**2 + 8.0 * k_t * R_i)) / (4.0 * k_t)
    else:
        radicals = math.sqrt(p.f * k_d * conc_I / k_t)
    R_p = k_p * conc_M * radicals
    nu = R_p / R_i
    kpM = k_p * conc_M
    comb = (1.0 - p.delta) * k_t * radicals / kpM
    disp = 2.0 * p.delta * k_t * radicals / kpM
    transfer: list[tuple[str, float, float]] = [("transfer to initiator", p.C_I, conc_I / conc_M)]
    for t in p.transfer:
        C = t.C
        if dT != 0.0 and t.dE is not None:
            C = C * math.exp(-t.dE * 1e3 / R_GAS * (1.0 / T - 1.0 / p.T))
        transfer.append((f"{t.role}: {t.name}", C, t.concentration / conc_M))
    terms: list[tuple[str, float]] = [
        ("termination (combination)", comb),
        ("termination (disproportionation)", disp),
        ("transfer to monomer", p.C_M),
    ] + [(name, C * ratio) for name, C, ratio in transfer]
    stops = (retarder / kpM) if retarder else 0.0
    if extra_transfer:
        terms.append(("unexplained transfer", extra_transfer))
    if retarder:
        terms.append(("retarder", stops))
    # the Mayo sum (in the budget's order), plus chain stops outside it
    inv = float(mayo_inv_dpn(comb + disp, C_M=p.C_M,
                             transfer=[(C, ratio) for _, C, ratio in transfer])) + extra_transfer + stops
    if not inv > 0:
        raise DataError(
            "the 1/DPn sum is not positive (a normal-batch offset larger than the model "
            "terms?); check the normal batch values"
        )
    # τ: everything that ends one chain; β = 2·comb: radical stops by combination
    mixed = mixed_termination(tau=inv - comb, beta=2.0 * comb)
    u = mixed.u_combination
    return KineticState(
        T=T,
        conc_M=conc_M,
        conc_I=conc_I,
        k_p=k_p,
        k_d=k_d,
        R_i=R_i,
        radicals=radicals,
        R_p=R_p,
        nu=nu,
        terms=tuple(terms),
        inv_DPn=inv,
        DPn=1.0 / inv,
        u_combination=u,
        fraction_chains_combination=mixed.fraction_chains_combination,
        dispersity=dispersity_instantaneous(min(max(u, 0.0), 1.0)),
    )


_FORMULAS = {
    "termination (combination)": "(1−δ)·k_t·R_p/(k_p²[M]²)",
    "termination (disproportionation)": "2δ·k_t·R_p/(k_p²[M]²)",
    "transfer to monomer": "C_M",
    "transfer to initiator": "C_I·[I]/[M]",
    "unexplained transfer": "Δ(1/DPn)",
    "retarder": "ζ/(k_p[M])",
}


@dataclass(frozen=True)
class BudgetTerm:
    """One line of the 1/DPn budget: contribution [-] and share of the total [%]."""

    term: str
    formula: str
    value: float
    share: float


@dataclass(frozen=True)
class Prediction:
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

    def to_markdown(self) -> str:
        """Compact report: parameters used, formulas, results and the 1/DPn budget."""
        from gpctools.kinetics._markdown import prediction_markdown

        return prediction_markdown(self)


def _from_state(p: KineticParameters, s: KineticState, notes=(), warns=()) -> Prediction:
    inv = s.inv_DPn
    budget = tuple(
        BudgetTerm(
            term=name,
            formula=_FORMULAS.get(name, "C·[X]/[M]"),
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
    SCIENCE.md §3 (IUPAC convention, steady state, Mayo, J. Am. Chem. Soc. 1943);
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
