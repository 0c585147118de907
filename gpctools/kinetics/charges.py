"""Mass-basis charges of a recipe converted to concentrations [mol/L].

A recipe may give an amount as ``"charge [g]"`` or ``"charge [g per 100 g monomer]"``
instead of ``"concentration [mol/L]"``. The conversions (molar masses in g/mol, volume
in L) [derived]:

- monomer charged in g: [M] = m_M / (M0 · V);
- anything else in g: [X] = m_X / (M_X · V);
- in g per 100 g of monomer (parts per hundred monomer, c): n_X/n_M = (c/100)·M0/M_X, so
  [X] = [M] · (c/100) · M0/M_X, which needs no volume;
- the reaction volume V is the recipe's ``"volume [L]"``, else the sum of the volumes of
  the monomer and the solvents, each m/ρ, when every one of them is charged in g with a
  density (monomer density from the recipe or the table, solvent density from the
  recipe). Volumes are taken as additive and the minor components (initiator, agents,
  inhibitors) are left out: mixing volumes of common monomer/solvent pairs differ from
  additivity by about 1 % [common practice], and the 20 °C densities make [M] a few
  percent high at the reaction temperature (docs/science.md, section 7.7).

The monomer's molar mass is the repeat-unit molar mass M0 (addition polymerization).
Molar masses of the others come from the recipe (``"M [g/mol]"``), else the initiator
and agent tables; an inhibitor charged by mass needs its ``"M [g/mol]"``.
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

from gpctools.errors import MethodError

if TYPE_CHECKING:  # pragma: no cover - the recipe module calls this one while parsing
    from gpctools.kinetics.recipe import Charge, Component, InhibitorSpec, Recipe
    from gpctools.refdata import ReferenceData

__all__ = ["resolve_charges"]


def _has_charges(r: Recipe) -> bool:
    items = [r.monomer.charge, r.initiator.charge]
    items += [c.charge for c in (*r.solvents, *r.agents)]
    items += [i.charge for i in r.inhibitors]
    return any(c is not None for c in items)


def _monomer_mass_and_density(r: Recipe, ref: ReferenceData) -> tuple[float, float | None]:
    """M0 [g/mol] and density [g/mL] of the monomer: recipe values, else the table."""
    ms = r.monomer
    try:
        row = ref.monomer(ms.name)
    except MethodError:
        row = None
    M0 = ms.M0 if ms.M0 is not None else (row.M0 if row is not None else None)
    if M0 is None:
        raise MethodError(f"monomer {ms.name!r} is not tabulated: give 'M0 [g/mol]' to convert "
                          "charges", key='monomer."M0 [g/mol]"', path=r.path)
    density = ms.density if ms.density is not None else (row.density if row else None)
    return M0, density


def _volume(r: Recipe, density_M: float | None, notes: list[str]) -> float:
    """Reaction volume [L]: the recipe's, else Σ m/ρ of the monomer and the solvents."""
    if r.volume is not None:
        return r.volume
    ms = r.monomer
    ask = ("give the reaction volume as 'volume [L]' at the top of the recipe, or charge the "
           "monomer and every solvent in g with their densities")
    if ms.charge is None or density_M is None:
        raise MethodError(f"charges in g need the reaction volume: {ask}", key="volume [L]",
                          path=r.path)
    mL = ms.charge.value / density_M
    for j, s in enumerate(r.solvents):
        if s.charge is None or s.charge.unit != "g" or s.density is None:
            raise MethodError(f"charges in g need the reaction volume: {ask}",
                              key=f'solvent[{j + 1}]."density [g/mL]"', path=r.path)
        mL += s.charge.value / s.density
    V = mL / 1000.0
    notes.append(f"reaction volume {V:.4g} L from the monomer and solvent charges and their "
                 "densities (volumes taken as additive; minor components left out)")
    return V


def _concentration(
    ch: Charge, M_X: float | None, what: str, V: float | None, conc_M: float, M0: float,
    path: str | None, M_key: str, notes: list[str], M_source: str,
) -> float:
    """[X] [mol/L] of one charge (see the module docstring)."""
    if M_X is None:
        raise MethodError(f"{what} is charged by mass: give its molar mass 'M [g/mol]'",
                          key=M_key, path=path)
    if ch.unit == "g":
        assert V is not None
        c = ch.value / (M_X * V)
    else:
        c = conc_M * (ch.value / 100.0) * M0 / M_X
    notes.append(f"{what}: {ch.value:g} {ch.unit} -> {c:.4g} mol/L (M {M_X:g} g/mol, "
                 f"{M_source})")
    return c


def _component_M(c: Component, ref: ReferenceData, monomer: str) -> tuple[float | None, str]:
    if c.M is not None:
        return c.M, "recipe"
    try:
        return ref.agent(c.name, monomer).M, "agents table"
    except MethodError:
        return None, ""


def resolve_charges(recipe: Recipe, ref: ReferenceData) -> Recipe:
    """The recipe with every charge converted to a concentration [mol/L].

    Parameters
    ----------
    recipe : Recipe
        As parsed (charges kept in ``charge`` fields, concentrations 0 for them).
    ref : ReferenceData
        Tables for the molar masses and the monomer density.

    Returns
    -------
    Recipe
        Concentrations filled in; ``charge_notes`` says how each was obtained. A recipe
        without charges is returned unchanged.

    Raises
    ------
    MethodError
        A molar mass, density or the volume is missing (the key to add is named).
    """
    if not _has_charges(recipe):
        return recipe
    notes: list[str] = []
    M0, density_M = _monomer_mass_and_density(recipe, ref)
    needs_V = any(ch is not None and ch.unit == "g" for ch in (
        recipe.monomer.charge, recipe.initiator.charge,
        *(c.charge for c in (*recipe.solvents, *recipe.agents)),
        *(i.charge for i in recipe.inhibitors)))
    V = _volume(recipe, density_M, notes) if needs_V else None
    ms = recipe.monomer
    if ms.charge is not None:
        assert V is not None
        conc_M = ms.charge.value / (M0 * V)
        notes.append(f"monomer: {ms.charge.value:g} g -> {conc_M:.4g} mol/L (M0 {M0:g} g/mol)")
        ms = replace(ms, concentration=conc_M)
    elif ms.bulk:
        if density_M is None:
            raise MethodError(f"no density for {ms.name!r}; give 'density [g/mL]'",
                              key='monomer."density [g/mL]"', path=recipe.path)
        conc_M = 1000.0 * density_M / M0
    else:
        assert ms.concentration is not None
        conc_M = ms.concentration
    path = recipe.path
    ins = recipe.initiator
    if ins.charge is not None:
        ch = ins.charge
        M_I, src = (ins.M, "recipe") if ins.M is not None else _initiator_M(ins.name, ref)
        ins = replace(ins, concentration=_concentration(
            ch, M_I, f"initiator {ins.name}", V, conc_M, M0, path,
            'initiator."M [g/mol]"', notes, src))
        if not ins.concentration > 0:
            raise MethodError("the initiator charge must be > 0", key=ch.key, path=path)

    def convert(comps: tuple[Component, ...], section: str) -> tuple[Component, ...]:
        out = []
        for j, c in enumerate(comps):
            if c.charge is not None:
                M_X, src = _component_M(c, ref, ms.name)
                c = replace(c, concentration=_concentration(
                    c.charge, M_X, f"{section} {c.name}", V, conc_M, M0, path,
                    f'{section}[{j + 1}]."M [g/mol]"', notes, src))
            out.append(c)
        return tuple(out)

    inhibitors: list[InhibitorSpec] = []
    for j, z in enumerate(recipe.inhibitors):
        if z.charge is not None:
            z = replace(z, concentration=_concentration(
                z.charge, z.M, f"inhibitor {z.name}", V, conc_M, M0, path,
                f'inhibitor[{j + 1}]."M [g/mol]"', notes, "recipe"))
        inhibitors.append(z)
    return replace(recipe, monomer=ms, initiator=ins,
                   solvents=convert(recipe.solvents, "solvent"),
                   agents=convert(recipe.agents, "agent"), inhibitors=tuple(inhibitors),
                   volume=V if V is not None else recipe.volume, charge_notes=tuple(notes))


def _initiator_M(name: str, ref: ReferenceData) -> tuple[float | None, str]:
    try:
        return ref.initiator(name).M, "initiators table"
    except MethodError:
        return None, ""
