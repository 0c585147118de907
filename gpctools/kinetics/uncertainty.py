"""How well the model knows what a batch should have given: parameter uncertainties,
their propagation to R_p, Mn and Mw, and the update by a normal batch.

Parameters as uncertain quantities
----------------------------------
Every uncertain input of the steady-state model is a *nuisance parameter* φ_j: the
natural logarithm of a factor on a positive coefficient (k_p, k_d, f, k_t, C_M, each
transfer constant, each inhibitor's k_z, the weighed [M] and [I], and the "Mw breadth" b,
the factor by which the real Mw exceeds the instantaneous model's through conversion
drift and band broadening), or an absolute shift of δ. Each has a prior
φ_j ~ N(0, σ_j²) whose σ_j comes from, in this order:

1. the recipe's ``[uncertainty]`` section (or ``"C uncertainty [%]"`` of a component),
   relative standard uncertainty in % (δ absolute);
2. for a value the recipe gives without an uncertainty: 0 — the value is taken as exact
   (the report says so; give an uncertainty to loosen it);
3. for a tabulated value: the uncertainty its source states (the tables'
   ``... uncertainty [%]`` columns), else the status of its source
   (:data:`STATUS_SIGMA`), widened to the spread between sources where the table carries
   one (``k_t low/high``, ``C_M low/high``), read as a ±2σ range:
   σ = max(σ_status, ln(high/low)/4) [common practice: a range between sources taken as
   about a 95 % interval].

Propagation (first order)
-------------------------
With g(φ) the model's (ln R_p, ln Mn, ln Mw) and J = ∂g/∂φ at the centre (forward
differences, step 1e-4), the covariance of the predicted observations is J·Σ·Jᵀ. The
scoring adds it to the measurement covariance, so common-mode parameter errors (k_t
moves R_p and Mn together, f·k_d moves them apart) do not look like a cause.

Anchoring to a normal batch
---------------------------
A batch that came out right measures the same physics. Its observations y_n (ln of the
measured R_p, Mn, Mw, each with its σ) update the shared nuisance parameters: the
posterior mode minimises Σ((y_n − g_n(φ))/σ_n)² + Σ(φ_j/σ_j)² (Gauss–Newton), and its
covariance is (JᵀWJ + Σ₀⁻¹)⁻¹ (Laplace approximation). The expected values of the batch
in question are the model at the posterior mode, their covariance J·Σ_post·Jᵀ. This
replaces a constant 1/DPn offset, which went negative when the tabulated termination
was larger than the normal batch showed, and let other causes absorb the difference
(issue 13). The weighed charges ([M], [I]) are errors of one batch, not shared: they are
not updated and add their own J·σ²·Jᵀ.

References
----------
- Linear error propagation and the Laplace (Gaussian) approximation of a posterior:
  JCGM 100:2008 (GUM), section 5 [from memory]; Gauss–Newton for a weighted sum of
  squares with a Gaussian prior [common practice].
- The statuses of values: docs/science.md, "How to read these notes" and section 7.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd

from gpctools.display import Display
from gpctools.errors import MethodError
from gpctools.kinetics.predict import KineticParameters, evaluate
from gpctools.kinetics.recipe import Recipe
from gpctools.refdata import ReferenceData

__all__ = [
    "STATUS_SIGMA",
    "STATUS_SIGMA_DELTA",
    "BREADTH_SIGMA",
    "OBSERVABLES",
    "Nuisance",
    "ModelUncertainty",
    "nuisance_parameters",
    "perturb",
    "observables",
    "jacobian",
    "model_uncertainty",
]

#: σ of ln(value) by the status of a tabulated value's source, when the source states no
#: uncertainty. published/derived 10 %: benchmark rate coefficients are quoted with
#: about ±20 % (95 %) [from memory: IUPAC k_p benchmark papers]; from memory 20 %: a
#: recalled value, as docs/science.md says, is approximate [common practice]; typical
#: 50 %: an order-of-magnitude placeholder [common practice]; user and recipe values 0:
#: taken as exact unless an uncertainty is stated.
STATUS_SIGMA = {"published": 0.10, "derived": 0.10, "from memory": 0.20, "typical": 0.50,
                "user": 0.0, "recipe": 0.0}
#: σ of δ (absolute) by status; "assumed" is the 0.5 used when δ is not tabulated,
#: σ = 1/√12 of a value anywhere between 0 and 1 [derived].
STATUS_SIGMA_DELTA = {"published": 0.05, "derived": 0.05, "from memory": 0.10, "typical": 0.20,
                      "assumed": 1.0 / math.sqrt(12.0), "user": 0.0, "recipe": 0.0}
#: σ of ln b, the Mw breadth (typical: a low-conversion batch is 0-30 % broader in Mw than
#: the instantaneous distribution, through drift and band broadening; docs/science.md,
#: sections 5 and 12).
BREADTH_SIGMA = 0.15
#: The model observables, in this order.
OBSERVABLES = ("R_p", "Mn", "Mw")
_STEP = 1e-4  # forward-difference step in φ (the model is smooth; 1e-4 keeps rounding small)


def _status(source: str) -> str:
    """The status a source text starts with ("published", "from memory", ...)."""
    s = source.strip().lower()
    if s.startswith("recipe"):
        return "recipe"
    if s.startswith("assumed"):
        return "assumed"
    for key in ("published", "derived", "from memory", "typical", "user"):
        if s.startswith(key):
            return key
    return "typical"


@dataclass(frozen=True)
class Nuisance:
    """One uncertain model input.

    Attributes
    ----------
    name : str
        ``k_p``, ``k_d``, ``f``, ``k_t``, ``delta``, ``C_M``, ``C:<name>``, ``k_z:<name>``,
        ``[M]``, ``[I]`` or ``Mw breadth``.
    sigma : float
        Prior standard deviation of φ (of ln factor; of δ itself for ``delta``).
    basis : str
        Where σ comes from.
    shared : bool
        Shared with a normal batch (physics) or not (this batch's charges).
    """

    name: str
    sigma: float
    basis: str
    shared: bool = True

    @property
    def log(self) -> bool:
        """True when φ is the log of a factor (all but δ)."""
        return self.name != "delta"


def _sigma_of(
    given: float | None, source: str, *, declared: float | None = None,
    low: float | None = None, high: float | None = None, delta: bool = False,
) -> tuple[float, str]:
    """σ and its basis: recipe [uncertainty], else recipe value exact, else table rules."""
    if given is not None:
        return (given if delta else given / 100.0), "recipe [uncertainty]"
    status = _status(source)
    if status in ("recipe", "user"):
        return 0.0, f"{status} value, taken as exact (state an uncertainty to loosen it)"
    if declared is not None:
        return declared / 100.0, "uncertainty stated by the source"
    table = STATUS_SIGMA_DELTA if delta else STATUS_SIGMA
    sigma = table.get(status, table["typical"])
    basis = f"status '{status}'"
    if low is not None and high is not None and 0 < low < high:
        spread = math.log(high / low) / 4.0
        if spread > sigma:
            sigma, basis = spread, f"spread between sources {low:.3g}–{high:.3g} read as ±2σ"
    return sigma, basis


def _table_rows(p: KineticParameters, ref: ReferenceData) -> tuple[Any, Any, Any]:
    def get(fn: Any, *args: Any) -> Any:
        try:
            return fn(*args)
        except MethodError:
            return None

    return (get(ref.monomer, p.monomer), get(ref.initiator, p.initiator),
            get(ref.termination, p.monomer))


def nuisance_parameters(
    recipe: Recipe, p: KineticParameters, ref: ReferenceData
) -> tuple[Nuisance, ...]:
    """The uncertain inputs of ``p`` with their prior σ (rules in the module docstring).

    Parameters with σ = 0 are left out (they are exact).
    """
    u = recipe.uncertainty
    mon, ini, term = _table_rows(p, ref)
    out: list[Nuisance] = []

    def add(name: str, given: float | None, source: str, shared: bool = True,
            **kw: Any) -> None:
        sigma, basis = _sigma_of(given, source, **kw)
        if sigma > 0:
            out.append(Nuisance(name, sigma, basis, shared))

    add("k_p", u.k_p, p.source("k_p"), declared=mon.kp_uncertainty if mon else None)
    add("k_d", u.k_d, p.source("k_d"))
    add("f", u.f, p.source("f"))
    add("k_t", u.k_t, p.source("k_t"), low=term.k_t_low if term else None,
        high=term.k_t_high if term else None)
    add("delta", u.delta, p.source("delta"), delta=True)
    if p.C_M > 0:
        add("C_M", u.C_M, p.source("C_M"), declared=mon.C_M_uncertainty if mon else None,
            low=mon.C_M_low if mon else None, high=mon.C_M_high if mon else None)
    comps = {c.name.lower(): c for c in (*recipe.solvents, *recipe.agents)}
    for t in p.transfer:
        if t.C > 0:
            c = comps.get(t.name.lower())
            add(f"C:{t.name}", c.C_uncertainty if c else None, t.source,
                declared=_declared_C(ref, t.name, p.monomer))
    zs = {z.name: z for z in recipe.inhibitors}
    for zt in p.inhibitors:
        z = zs.get(zt.name)
        add(f"k_z:{zt.name}", z.k_z_uncertainty if z else None, "recipe")
    add("[M]", u.monomer_charge, "recipe", shared=False)
    add("[I]", u.initiator_charge, "recipe", shared=False)
    sigma_b = u.breadth / 100.0 if u.breadth is not None else BREADTH_SIGMA
    if sigma_b > 0:
        out.append(Nuisance("Mw breadth", sigma_b, "recipe [uncertainty]" if u.breadth is not None
                            else "typical: drift and band broadening widen Mw by 0-30 %"))
    return tuple(out)


def _declared_C(ref: ReferenceData, name: str, monomer: str) -> float | None:
    try:
        return ref.agent(name, monomer).C_uncertainty
    except MethodError:
        return None


def perturb(
    p: KineticParameters, nuisances: Sequence[Nuisance], phi: Sequence[float] | np.ndarray
) -> tuple[KineticParameters, float]:
    """``p`` with every factor e^φ_j (δ + φ, clipped to [0, 1]) applied, and ln b.

    Nuisances that ``p`` does not have (a solvent only in the other batch) are skipped.
    """
    ch: dict[str, Any] = {}
    transfer = list(p.transfer)
    inhibitors = list(p.inhibitors)
    ln_b = 0.0
    direct = {"k_p": "k_p", "k_d": "k_d", "f": "f", "k_t": "k_t", "C_M": "C_M",
              "[M]": "conc_M", "[I]": "conc_I"}
    for n, v in zip(nuisances, phi):
        if v == 0.0:
            continue
        if n.name in direct:
            attr = direct[n.name]
            ch[attr] = ch.get(attr, getattr(p, attr)) * math.exp(v)
        elif n.name == "delta":
            ch["delta"] = min(max(p.delta + v, 0.0), 1.0)
        elif n.name == "Mw breadth":
            ln_b = float(v)
        elif n.name.startswith("C:"):
            transfer = [replace(t, C=t.C * math.exp(v)) if t.name == n.name[2:] else t
                        for t in transfer]
        elif n.name.startswith("k_z:"):
            inhibitors = [replace(z, k_z=z.k_z * math.exp(v),
                                  z=None if z.z is None else z.z * math.exp(v))
                          if z.name == n.name[4:] else z for z in inhibitors]
    return replace(p, transfer=tuple(transfer), inhibitors=tuple(inhibitors), **ch), ln_b


def observables(p: KineticParameters, ln_b: float = 0.0) -> np.ndarray:
    """(ln R_p, ln Mn, ln Mw) of the steady-state model [ln of mol/L/s, g/mol, g/mol].

    Mw = DPn·M0·Đ_inst·b (b = e^ln_b, the breadth factor).
    """
    s = evaluate(p)
    ln_Mn = math.log(s.DPn * p.M0)
    return np.array([math.log(s.R_p), ln_Mn, ln_Mn + math.log(s.dispersity) + ln_b])


def jacobian(
    p: KineticParameters, nuisances: Sequence[Nuisance],
    phi: Sequence[float] | np.ndarray | None = None,
) -> np.ndarray:
    """∂(ln R_p, ln Mn, ln Mw)/∂φ at φ (default 0), forward differences (3 × n)."""
    phi0 = np.zeros(len(nuisances)) if phi is None else np.asarray(phi, dtype=float)
    g0 = observables(*perturb(p, nuisances, phi0))
    J = np.empty((3, len(nuisances)))
    for j in range(len(nuisances)):
        ph = phi0.copy()
        ph[j] += _STEP
        J[:, j] = (observables(*perturb(p, nuisances, ph)) - g0) / _STEP
    return J


@dataclass(frozen=True, repr=False)
class ModelUncertainty(Display):
    """The model's expectation for a batch and how uncertain it is.

    Attributes
    ----------
    nuisances : tuple of Nuisance
        The uncertain inputs with their prior σ.
    shift, posterior_sigma : tuple of float
        Posterior mode and σ of each φ (0 and the prior σ without a normal batch).
    parameters : KineticParameters
        This batch's parameters at the posterior mode.
    ln_breadth : float
        ln b at the posterior mode (Mw = DPn·M0·Đ_inst·b).
    covariance : ndarray
        3 × 3 covariance of the predicted (ln R_p, ln Mn, ln Mw) [-].
    anchored : tuple of str
        The normal-batch observables used ("R_p", "Mn", "Mw"); empty without one.
    normal_residuals : tuple of (name, residual in σ)
        How far the updated model still is from the normal batch.
    notes : tuple of str
    """

    nuisances: tuple[Nuisance, ...]
    shift: tuple[float, ...]
    posterior_sigma: tuple[float, ...]
    parameters: KineticParameters
    ln_breadth: float
    covariance: np.ndarray
    anchored: tuple[str, ...] = ()
    normal_residuals: tuple[tuple[str, float], ...] = ()
    notes: tuple[str, ...] = ()

    def sigma(self, name: str) -> float:
        """Standard uncertainty of the predicted ln(``name``) [-] (``R_p``, ``Mn``, ``Mw``)."""
        i = OBSERVABLES.index(name)
        return math.sqrt(max(float(self.covariance[i, i]), 0.0))

    def factor(self, name: str) -> float:
        """Posterior factor e^φ on a parameter (δ: the shift itself); 1 when not uncertain."""
        for n, v in zip(self.nuisances, self.shift):
            if n.name == name:
                return math.exp(v) if n.log else v
        return 1.0 if name != "delta" else 0.0

    def table(self) -> pd.DataFrame:
        """One row per uncertain input: prior σ, its basis, posterior factor and σ."""
        rows = []
        for n, v, s in zip(self.nuisances, self.shift, self.posterior_sigma):
            rows.append({
                "parameter": n.name,
                "prior sigma [%]": 100.0 * n.sigma if n.log else None,
                "prior sigma [-]": None if n.log else n.sigma,
                "basis": n.basis,
                "shared with the normal batch": n.shared,
                "posterior factor [-]": math.exp(v) if n.log else None,
                "posterior shift [-]": None if n.log else v,
                "posterior sigma [%]": 100.0 * s if n.log else None,
                "posterior sigma [-]": None if n.log else s,
            })
        return pd.DataFrame(rows)

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict."""
        return {
            "parameters": self.table().astype(object).where(self.table().notna(), None)
            .to_dict("records"),
            "prediction sigma [-]": {k: self.sigma(k) for k in OBSERVABLES},
            "anchored to": list(self.anchored),
            "normal batch residuals [sigma]": dict(self.normal_residuals),
            "notes": list(self.notes),
        }


def _objective(p: KineticParameters, nuis: Sequence[Nuisance], phi: np.ndarray,
               idx: list[int], y: np.ndarray, w: np.ndarray, prior_w: np.ndarray) -> float:
    r = y - observables(*perturb(p, nuis, phi))[idx]
    return float(np.sum(w * r * r) + np.sum(prior_w * phi * phi))


def _posterior(
    p: KineticParameters, nuis: Sequence[Nuisance], obs: Mapping[str, tuple[float, float]]
) -> tuple[np.ndarray, np.ndarray, list[tuple[str, float]]]:
    """Posterior mode and covariance of φ given a normal batch (Gauss–Newton, damped).

    ``obs`` maps "R_p"/"Mn"/"Mw" to (ln measured, σ). Returns (φ, covariance,
    residuals of the normal batch in σ at the mode).
    """
    names = [k for k in OBSERVABLES if k in obs]
    idx = [OBSERVABLES.index(k) for k in names]
    y = np.array([obs[k][0] for k in names])
    w = np.array([1.0 / obs[k][1] ** 2 for k in names])
    prior_w = np.array([1.0 / n.sigma**2 for n in nuis])
    phi = np.zeros(len(nuis))
    best = _objective(p, nuis, phi, idx, y, w, prior_w)
    for _ in range(50):
        J = jacobian(p, nuis, phi)[idx]
        r = y - observables(*perturb(p, nuis, phi))[idx]
        A = J.T @ (w[:, None] * J) + np.diag(prior_w)
        step = np.linalg.solve(A, J.T @ (w * r) - prior_w * phi)
        for _halving in range(30):  # damped: accept only a step that lowers the objective
            trial = phi + step
            try:
                val = _objective(p, nuis, trial, idx, y, w, prior_w)
            except ArithmeticError:
                val = math.inf
            except ValueError:  # DataError from a non-physical trial point
                val = math.inf
            if val <= best:
                break
            step = step / 2.0
        else:
            break
        phi, best = trial, val
        if float(np.max(np.abs(step))) < 1e-10:
            break
    J = jacobian(p, nuis, phi)[idx]
    cov = np.linalg.inv(J.T @ (w[:, None] * J) + np.diag(prior_w))
    r = y - observables(*perturb(p, nuis, phi))[idx]
    return phi, cov, [(k, float(ri * math.sqrt(wi))) for k, ri, wi in zip(names, r, w)]


def model_uncertainty(
    recipe: Recipe,
    p: KineticParameters,
    ref: ReferenceData,
    *,
    normal_parameters: KineticParameters | None = None,
    normal_observations: Mapping[str, tuple[float, float]] | None = None,
) -> ModelUncertainty:
    """Expected model state of a batch and the covariance of its predicted observables.

    Parameters
    ----------
    recipe : Recipe
        The batch in question (its ``[uncertainty]`` and components).
    p : KineticParameters
        Its resolved parameters.
    ref : ReferenceData
        Tables (statuses, spreads, stated uncertainties).
    normal_parameters : KineticParameters, optional
        The normal batch's parameters (its own recipe, or ``p``).
    normal_observations : mapping, optional
        "R_p", "Mn", "Mw" -> (ln measured value, σ of it) of the normal batch (absolute
        scale; R_p [mol/L/s], Mn/Mw [g/mol]).

    Returns
    -------
    ModelUncertainty

    References
    ----------
    Module docstring (priors, propagation, anchoring).
    """
    nuis = nuisance_parameters(recipe, p, ref)
    prior = np.array([n.sigma for n in nuis])
    shift = np.zeros(len(nuis))
    cov = np.diag(prior**2)
    residuals: list[tuple[str, float]] = []
    notes: list[str] = []
    anchored: tuple[str, ...] = ()
    if normal_observations:
        shared = [i for i, n in enumerate(nuis) if n.shared]
        pn = normal_parameters if normal_parameters is not None else p
        if shared:
            phi_s, cov_s, residuals = _posterior(pn, [nuis[i] for i in shared],
                                                 normal_observations)
            shift[shared] = phi_s
            cov[np.ix_(shared, shared)] = cov_s
        anchored = tuple(k for k in OBSERVABLES if k in normal_observations)
        off = [f"{k} {r:+.2g}σ" for k, r in residuals if abs(r) > 3.0]
        if off or not shared:
            notes.append(
                "the normal batch is further from the model than the parameter uncertainties "
                f"allow ({', '.join(off) or 'every parameter is given as exact'}): state the "
                "uncertainties of the recipe's values, or check the normal batch's numbers")
    p_post, ln_b = perturb(p, nuis, shift)
    J = jacobian(p, nuis, shift) if len(nuis) else np.zeros((3, 0))
    C = J @ cov @ J.T
    return ModelUncertainty(
        nuisances=nuis, shift=tuple(float(v) for v in shift),
        posterior_sigma=tuple(float(math.sqrt(max(cov[i, i], 0.0))) for i in range(len(nuis))),
        parameters=p_post, ln_breadth=ln_b, covariance=C, anchored=anchored,
        normal_residuals=tuple(residuals), notes=tuple(notes),
    )
