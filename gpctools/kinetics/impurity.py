"""How much of an impurity would explain the excess 1/DPn: always given, with its interval.

The excess 1/DPn is the unexplained-transfer cause's fitted value (Δ(1/DPn) over R_p,
Mn and Mw together, with the model's uncertainty) and its 95 % profile interval
(:mod:`gpctools.kinetics.scoring`). It is turned into the level of a transfer-active
impurity X with transfer constant C_X:

- instantaneous (low conversion): [X]/[M] = Δ(1/DPn)/C_X
  (:func:`gpctools.chainlength.impurity_ratio`, docs/science.md, section 9.1);
- cumulative, when the final conversion x of the measured sample is known (the impurity
  is used up like an agent): [X]0/[M]0 = Δ(1/DPn)·x/(1 − (1 − x)^C_X)
  (:func:`gpctools.chainlength.impurity_ratio_cumulative`, docs/science.md, section 5.3).

Levels are given for the candidates the recipe names; when it names none, for generic
transfer constants C_X = 1, 10 and 100 (:data:`GENERIC_C`: a weak, a moderate and a
strong transfer agent — halocarbons and thiols span this range in styrene, docs/science.md,
section 7.2), and in both cases for the tabulated agents of the monomer that would need
no more than 1 mol % of the monomer. ppm (mol) = 10⁶·[X]/[M]; ppm by mass
= ppm (mol)·M_X/M0; [X] = ([X]/[M])·[M] [mol/L].
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from gpctools.chainlength import impurity_ratio, impurity_ratio_cumulative
from gpctools.display import Display
from gpctools.errors import MethodError
from gpctools.kinetics.predict import KineticParameters
from gpctools.kinetics.recipe import Recipe
from gpctools.refdata import ReferenceData

__all__ = ["GENERIC_C", "ExcessEstimate", "ImpurityEstimate", "impurity_estimates"]

#: Transfer constants of the generic candidates shown when the recipe names none [-].
GENERIC_C = (1.0, 10.0, 100.0)
_MAX_IMPURITY_PPM = 1e4  # table candidates needing more than 1 mol % are not "hidden"


@dataclass(frozen=True, repr=False)
class ExcessEstimate(Display):
    """The excess 1/DPn [-]: value, 95 % interval, and the value from Mn alone.

    ``relation`` says which impurity relation applies ("instantaneous (low conversion)"
    or "cumulative at conversion x = ...").
    """

    value: float
    low: float
    high: float
    from_Mn: float | None
    final_conversion: float | None

    @property
    def relation(self) -> str:
        """The relation used for the impurity level, in words (instantaneous or cumulative)."""
        x = self.final_conversion
        if x is None or x == 0:
            return ("instantaneous (low conversion): [X]/[M] = Δ(1/DPn)/C; give "
                    "'final conversion [-]' in [measured] for the cumulative relation")
        return f"cumulative at conversion x = {x:.3g}: [X]0/[M]0 = Δ(1/DPn)·x/(1 − (1 − x)^C)"

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict."""
        return {"excess 1/DPn [-]": self.value, "95 % interval low [-]": self.low,
                "95 % interval high [-]": self.high, "from Mn alone [-]": self.from_Mn,
                "relation": self.relation}


@dataclass(frozen=True)
class ImpurityEstimate:
    """Level of one candidate impurity that would explain the excess 1/DPn.

    ``concentration`` [mol/L], ``ppm_mol`` (mol X per 10⁶ mol monomer) with its 95 %
    interval ``ppm_mol_low``–``ppm_mol_high``, ``ppm_mass`` relative to monomer (None
    without a molar mass); ``generic`` for the generic constants.
    """

    name: str
    C: float
    concentration: float
    ppm_mol: float
    ppm_mass: float | None
    source: str
    ppm_mol_low: float = math.nan
    ppm_mol_high: float = math.nan
    relation: str = "instantaneous"
    generic: bool = False

    def row(self) -> dict[str, Any]:
        """Unit-named dict for tables."""
        return {
            "candidate": self.name,
            "C [-]": self.C,
            "[X] [mol/L]": self.concentration,
            "ratio [X]/[M] [ppm mol]": self.ppm_mol,
            "95 % interval low [ppm mol]": self.ppm_mol_low,
            "95 % interval high [ppm mol]": self.ppm_mol_high,
            "mass ratio X/monomer [ppm mass]": self.ppm_mass,
            "relation": self.relation,
            "source": self.source,
        }


def _candidates(
    recipe: Recipe, ref: ReferenceData, p: KineticParameters
) -> list[tuple[str, float, float | None, str, bool]]:
    """(name, C [-], M [g/mol], source, from the recipe or generic): named, else generic;
    then the table's agents.
    """
    out: list[tuple[str, float, float | None, str, bool]] = []
    for c in recipe.candidates:
        if c.C is not None:
            M = c.M
            if M is None:
                try:
                    M = ref.agent(c.name, p.monomer).M
                except MethodError:
                    M = None
            out.append((c.name, c.C, M, "recipe", True))
            continue
        try:
            a = ref.agent(c.name, p.monomer)
        except MethodError as exc:
            raise MethodError(exc.message, key="candidate.name", path=recipe.path) from None
        out.append((a.agent, a.C(p.T), c.M if c.M is not None else a.M, a.source, True))
    if not recipe.candidates:
        out.extend((f"generic agent, C = {C:g}", C, None,
                    "generic transfer constant (no candidate named in the recipe)", True)
                   for C in GENERIC_C)
    try:
        table = ref.agents_for(p.monomer)
    except MethodError:  # monomer not in the tables
        table = []
    out.extend((a.agent, a.C(p.T), a.M, a.source, False)
               for a in sorted(table, key=lambda a: -a.C(p.T)))
    return out


def _ratio(excess: float, C: float, x: float | None) -> float:
    """[X]0/[M]0 [mol/mol] for an excess (0 for no excess)."""
    if not excess > 0:
        return 0.0
    if x:
        return float(impurity_ratio_cumulative(excess, C, x))
    return float(impurity_ratio(excess, C))


def impurity_estimates(
    recipe: Recipe, ref: ReferenceData, p: KineticParameters, excess: ExcessEstimate
) -> tuple[ImpurityEstimate, ...]:
    """Level of each candidate that alone would explain the excess (empty when even the
    interval's upper end shows no excess).

    Parameters
    ----------
    recipe : Recipe
        Its ``[[candidate]]`` entries.
    ref : ReferenceData
    p : KineticParameters
        [M] [mol/L], M0 [g/mol], T [K] and the monomer name.
    excess : ExcessEstimate
    """
    if not excess.high > 0:
        return ()
    x = excess.final_conversion
    relation = "cumulative" if x else "instantaneous"
    out: list[ImpurityEstimate] = []
    seen: set[str] = set()
    for name, C, M, src, named in _candidates(recipe, ref, p):
        if name.lower() in seen or C <= 0:
            continue
        ratio = _ratio(excess.value, C, x)
        if not named and 1e6 * ratio > _MAX_IMPURITY_PPM:
            continue
        seen.add(name.lower())
        ppm = 1e6 * ratio
        out.append(ImpurityEstimate(
            name=name, C=C, concentration=ratio * p.conc_M, ppm_mol=ppm,
            ppm_mass=ppm * M / p.M0 if M else None, source=src,
            ppm_mol_low=1e6 * _ratio(excess.low, C, x),
            ppm_mol_high=1e6 * _ratio(excess.high, C, x), relation=relation,
            generic=src.startswith("generic"),
        ))
    return tuple(out)
