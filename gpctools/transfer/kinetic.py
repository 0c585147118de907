"""The kinetic (termination) term and the termination mode of a group of runs.

**Kinetic term.** The agent-free part of 1/DPn holds the termination term
(1 + δ) k_t R_p/(k_p² [M]²), which scales as R_p/[M]², i.e. as √[I]/[M] at steady state
(docs/science.md, section 3.3). It is constant only while [M], [I] and T are; a dilution
or initiator series must carry it, or the solvent or initiator constant absorbs it.
:func:`kinetic_term` decides, for one group:

- ``"auto"`` (default): a regressor z enters when its ratio spans at least
  :data:`KINETIC_SPAN` (about 2-fold): z = R_p/[M]² when every run has a measured R_p,
  else z = √[I]/[M] when every run has [I] and [M]; otherwise no regressor (and the
  explanation says why, e.g. "±2 % scatter in [I] is not a design");
- ``"regressor"``: the regressor whatever its span (refused when it cannot be formed);
- ``"reference"``: no regressor; the term is computed from reference data and taken as
  known, K = (1 + δ) k_t R_p/(k_p² [M]²) with a measured R_p, else
  K = (1 + δ)(f k_d k_t [I])^½/(k_p [M]) for the named initiator (bundled k_p, k_t, δ,
  f, k_d at the group's T) — only as good as those values (order of magnitude for k_t,
  docs/science.md, section 7.5);
- ``"none"``: the kinetic term is held constant (part of 1/DPn0).

**Termination mode.** δ = k_td/k_t: the value given (option or sheet column), else the
monomer's bundled value (``ReferenceData.termination(monomer).delta``), else 1 (no
combination: the most-probable relations), said so in the notes.

References
----------
Mayo, J. Am. Chem. Soc. 1943; docs/science.md, sections 3.2, 3.3, 4.3 and 7.5.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DesignError, GpcError

__all__ = ["KineticTerm", "Termination", "kinetic_term", "termination_mode", "KINETIC_SPAN",
           "KINETIC_CHOICES", "RATIO_SPAN"]

#: Least max/min ratio of the kinetic regressor for it to enter automatically [-]
#: (common practice: a factor of about two; weighing scatter of a few % is not a design).
KINETIC_SPAN = 2.0
#: Least max/min ratio (or zero and non-zero values) for a ratio term to enter
#: automatically [-]; same reasoning as KINETIC_SPAN.
RATIO_SPAN = 2.0
#: Accepted values of the ``kinetic`` option.
KINETIC_CHOICES = ("auto", "regressor", "reference", "none")


@dataclass(frozen=True, repr=False)
class KineticTerm(Display):
    """How the kinetic term enters the fits of one group.

    Attributes
    ----------
    how : str
        ``"regressor"``, ``"reference"`` or ``"constant"``.
    label : str
        ``"R_p/[M]^2"``, ``"sqrt([I])/[M]"`` or ``""``.
    z : numpy.ndarray or None
        The regressor per run (R_p/[M]² [L·s⁻¹·mol⁻¹] or √[I]/[M] [L^½ mol^-½]).
    known : numpy.ndarray or None
        The kinetic term per run from reference data [-].
    span : float
        max/min of the candidate regressor (NaN when it cannot be formed) [-].
    note : str
        What was decided and why, in words.
    """

    how: str
    label: str = ""
    z: np.ndarray | None = None
    known: np.ndarray | None = None
    span: float = float("nan")
    note: str = ""

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {"how": self.how, "regressor": self.label,
                "span [-]": self.span if math.isfinite(self.span) else None,
                "note": self.note}


@dataclass(frozen=True, repr=False)
class Termination(Display):
    """δ of a group, where it came from, and the known C_M used to split the intercept."""

    delta: float
    source: str
    C_M: float
    C_M_source: str

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {"delta [-]": self.delta, "delta source": self.source,
                "C_M used to split the intercept [-]": self.C_M, "C_M source": self.C_M_source}


def _span(v: np.ndarray) -> float:
    if v.size == 0 or not np.all(np.isfinite(v)) or np.any(v <= 0):
        return float("nan")
    return float(v.max() / v.min())


def _candidates(runs: Sequence[Any]) -> tuple[str, np.ndarray | None]:
    """The regressor that can be formed: R_p/[M]² (every run has R_p and [M]), else
    √[I]/[M] (every run has [I] and [M]).
    """
    M = np.array([r.monomer_conc for r in runs], dtype=float)
    Rp = np.array([r.rate for r in runs], dtype=float)
    I0 = np.array([r.initiator_conc for r in runs], dtype=float)
    if np.all(np.isfinite(Rp)) and np.all(np.isfinite(M)) and np.all(M > 0):
        return "R_p/[M]^2", Rp / M**2
    if np.all(np.isfinite(I0)) and np.all(I0 > 0) and np.all(np.isfinite(M)) and np.all(M > 0):
        return "sqrt([I])/[M]", np.sqrt(I0) / M
    return "", None


def kinetic_term(runs: Sequence[Any], mode: str, *, delta: float, T_C: float,
                 reference: Any = None, label: str = "this series") -> KineticTerm:
    """Decide how the kinetic term enters the fits of one group (see the module docstring).

    Parameters
    ----------
    runs : sequence of Run
        The group's fitted runs ([M], [I], R_p, initiator, monomer).
    mode : {"auto", "regressor", "reference", "none"}
    delta : float
        δ of the group [-] (for the reference term).
    T_C : float
        Temperature [°C] (for the reference term).
    reference : gpctools.refdata.ReferenceData, optional
    label : str
        Group label for messages.

    Raises
    ------
    DesignError
        ``"regressor"`` without R_p or [I] and [M]; ``"reference"`` without what it needs.
    """
    kind, z = _candidates(runs)
    span = _span(z) if z is not None else float("nan")
    if mode == "none":
        return KineticTerm("constant", span=span, note="kinetic term held constant (asked for)")
    if mode == "reference":
        return _reference(runs, delta, T_C, reference, label, span)
    if z is None:
        if mode == "regressor":
            raise DesignError(f"{label}: a kinetic regressor needs 'R_p [mol/L/s]' or "
                              "'[I] [mol/L]', with '[M] [mol/L]', in every run", key="kinetic")
        return KineticTerm("constant", note="kinetic term taken as constant: no R_p and no "
                           "[I] with [M] in every run, so it cannot vary in the design")
    if mode == "regressor" or span >= KINETIC_SPAN:
        why = "asked for" if mode == "regressor" else (
            f"it spans {span:.2g}-fold over the runs (>= {KINETIC_SPAN:g}), so the intercept "
            "is not constant")
        return KineticTerm("regressor", kind, z, span=span,
                           note=f"kinetic term fitted as a regressor {kind}: {why}")
    return KineticTerm("constant", kind, None, span=span,
                       note=f"kinetic term taken as constant: {kind} spans only {span:.3g}-fold "
                       f"(< {KINETIC_SPAN:g}); scatter of a few % (weighing, temperature) is not "
                       "a design that can separate it")


def _tables(reference: Any) -> Any:
    """The given reference tables, or the bundled ones (loaded on first need)."""
    if reference is not None:
        return reference
    from gpctools import refdata

    return refdata.default_reference()


def _reference(runs: Sequence[Any], delta: float, T_C: float, reference: Any, label: str,
               span: float) -> KineticTerm:
    """K per run from bundled k_p, k_t (IUPAC) and the initiator's f·k_d."""
    ref = _tables(reference)
    mono = next((r.monomer for r in runs if r.monomer), "")
    if not mono or not math.isfinite(T_C):
        raise DesignError(f"{label}: a kinetic term from reference data needs the monomer name "
                          "and 'T [°C]'", key="kinetic")
    T = T_C + 273.15
    try:
        kp = ref.monomer(mono).k_p(T)
        kt = ref.termination(mono).k_t_iupac
    except GpcError as exc:
        raise DesignError(f"{label}: kinetic term from reference data: {exc.message}",
                          key="kinetic") from None
    M = np.array([r.monomer_conc for r in runs], dtype=float)
    Rp = np.array([r.rate for r in runs], dtype=float)
    if np.all(np.isfinite(Rp)) and np.all(M > 0):
        K = (1 + delta) * kt * Rp / (kp**2 * M**2)
        how = "from measured R_p: (1 + δ) k_t R_p/(k_p² [M]²)"
    else:
        inits = {r.initiator for r in runs if r.initiator}
        I0 = np.array([r.initiator_conc for r in runs], dtype=float)
        if len(inits) != 1 or not np.all(np.isfinite(I0)) or not np.all(M > 0):
            raise DesignError(f"{label}: a kinetic term from reference data needs measured "
                              "'R_p [mol/L/s]', or one named 'initiator' with '[I] [mol/L]' and "
                              "'[M] [mol/L]' in every run", key="kinetic")
        try:
            ini = ref.initiator(next(iter(inits)))
        except GpcError as exc:
            raise DesignError(f"{label}: {exc.message}", key="kinetic") from None
        K = (1 + delta) * np.sqrt(ini.f * ini.k_d(T) * kt * I0) / (kp * M)
        how = f"steady state with {ini.name}: (1 + δ)(f k_d k_t [I])^½/(k_p [M])"
    return KineticTerm("reference", "", None, K, span,
                       note=f"kinetic term computed from reference data ({how}; k_p "
                       f"{kp:.3g} L/mol/s, k_t {kt:.3g} L/mol/s IUPAC) and subtracted as known; "
                       "the bundled k_t is an order of magnitude only (docs/science.md, "
                       "section 7.5)")


def termination_mode(runs: Sequence[Any], delta: float | None, C_M: float | None,
                     reference: Any = None, label: str = "this series") -> Termination:
    """δ for the group (option, sheet, bundled table, else 1) and the C_M that splits the
    intercept into its kinetic part (option, else the bundled C_M, else 0).
    """
    given = {r.delta for r in runs if math.isfinite(r.delta)}
    mono = next((r.monomer for r in runs if r.monomer), "")
    ref = reference
    if delta is not None:
        d, src = float(delta), "given (option delta)"
    elif len(given) == 1:
        d, src = float(next(iter(given))), "given in the sheet (delta [-])"
    elif len(given) > 1:
        raise DesignError(f"{label}: runs give different delta [-] values {sorted(given)}; "
                          "one group has one termination mode", column="delta [-]")
    else:
        d, src = 1.0, ("not known: no monomer named; Mw/2 and CLD assume termination without "
                       "combination (give delta)")
        if mono:
            try:
                row = _tables(ref).termination(mono)
                if row.delta is not None:
                    d, src = float(row.delta), f"bundled for {row.monomer}: {row.source}"
                else:
                    src = (f"not bundled for {mono}; Mw/2 and CLD assume termination without "
                           "combination (give delta)")
            except GpcError:
                src = (f"no termination row for {mono}; Mw/2 and CLD assume termination "
                       "without combination (give delta)")
    cm, cm_src = 0.0, "none (the whole constant intercept counted as kinetic)"
    if C_M is not None:
        cm, cm_src = float(C_M), "given (option C_M)"
    elif mono and d < 1.0:
        try:
            m = _tables(ref).monomer(mono)
            if m.C_M is not None:
                cm, cm_src = float(m.C_M), f"bundled for {m.name}: {m.C_M_source}"
        except GpcError:
            pass
    return Termination(d, src, cm, cm_src)
