"""The causes of a low molar mass the diagnosis weighs, one small class each.

Every hypothesis declares its key, title, category, its one fitted parameter θ with the
reported value and unit, its model μ(θ) of the observations, its plausible range from
practice, and its explanation. The kinetic causes perturb the steady-state model at the
expected parameters (:func:`gpctools.kinetics.predict.evaluate`, through
:meth:`Hypothesis.perturbation`) and predict y = ln(perturbed/base) for R_p, Mn and Mw,
and the change of the distribution's tails; the measurement causes shift the averages
directly.

============================  ===============================  ===============================
cause                         θ (grid) -> reported value       model of the observations
============================  ===============================  ===============================
no cause                      none (k = 0)                     every y = 0
unexplained transfer          r = DPn/DPn_base in [0.02, 1]    Δ(1/DPn) = (1/DPn)·(1/r − 1);
                              -> Δ(1/DPn) [-]                  R_p unchanged
excess initiation             ln F in [0, ln 1000] -> F [-]    f·k_d·[I] × F: R_p ∝ F^½
temperature overshoot         ΔT in [0, 80] K                  k_p, k_d, k_t by Arrhenius
inhibition / retardation      h = [R•]/[R•]_base in [0.02, 1]  ζ = 2k_t[R•]_base(1 − h²)/h
                              -> ζ = k_z[Z] [1/s]              (+ ζ₀(1 − h)/h); induction
                                                               period free
dilution / monomer loss       g in [0.02, 1]                   [M] × g
flow-rate error               ε in [−0.1, 0.1]                 Mn, Mw, check standard:
                                                               −ln10·B·V·ε; flow marker: ε
calibration drift             s in [−2, 2]                     Mn, Mw, check standard: s
integration-limit artefact    t in [−2, 0]                     Mn: t; limit check −t/2 ±
                                                               |t|/2; low-M tail free
============================  ===============================  ===============================

The retarder steady state 2k_t[R•]² + (ζ₀ + ζ)[R•] = R_i holds with [R•] = h·[R•]_base for
the ζ above (R_i = 2k_t[R•]_base² + ζ₀[R•]_base, ζ₀ from charged inhibitors), so R_p falls
exactly by h [derived].

The registry is the explicit tuple :data:`HYPOTHESES` (its order is the order of the
causes before ranking and breaks ties). Each class but "no cause" has a ``prior_range``
(:class:`PriorRange`, with its basis; docs/science.md, section 9.5): the fit minimises
χ² plus the penalty for a value outside it (:mod:`gpctools.kinetics.scoring`).

References
----------
- Fingerprints of low molar mass: docs/science.md, section 9 (transfer keeps R_p, more initiator or
  heat raises R_p with R_p·DPn about constant, retarders lower both, measurement
  artefacts shift all averages or only Mn).
- Steady state and the Mayo equation: docs/science.md, section 3.2; Mayo, J. Am. Chem. Soc. 1943.
- Flow-error sensitivity Δlog M = −B·V·ε: docs/science.md, section 2.2 [derived].
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from typing import ClassVar, Protocol

import numpy as np

from gpctools.formatting import ratio
from gpctools.kinetics.checks import FlowSensitivity
from gpctools.kinetics.evidence import Tails, model_tails
from gpctools.kinetics.predict import KineticParameters, KineticState, evaluate
from gpctools.refdata import R_GAS

__all__ = [
    "AnchoredModel",
    "PriorRange",
    "Evidence",
    "Explanation",
    "Hypothesis",
    "HYPOTHESES",
    "hypothesis",
]


# --------------------------------------------------------------------------- inputs


@dataclass(frozen=True)
class AnchoredModel:
    """The anchored steady-state model the kinetic causes perturb.

    Attributes
    ----------
    parameters : KineticParameters
        Parameters at the posterior mode (updated by the normal batch, when given).
    base : KineticState
        ``evaluate(parameters)``: the expected state of this batch.
    flow : FlowSensitivity
        B·V and its uncertainty, for the flow-rate cause.
    covariance_names, covariance : tuple of str, ndarray or None
        Covariance of the expected observations named (``R_p``, ``Mn``, ``Mw``) from the
        parameter uncertainties [-] (:mod:`gpctools.kinetics.uncertainty`); None: none.
    shape : bool
        Also predict the change of the distribution's low-M tail and high-M shoulder
        (mass fractions, :mod:`gpctools.kinetics.evidence`) when a distribution was
        measured.
    """

    parameters: KineticParameters
    base: KineticState
    flow: FlowSensitivity
    covariance_names: tuple[str, ...] = ()
    covariance: np.ndarray | None = field(default=None, compare=False)
    shape: bool = False
    _cache: dict[tuple[tuple[str, float], ...], KineticState] = field(
        default_factory=dict, compare=False, repr=False)

    @property
    def inv_DPn(self) -> float:
        """Expected 1/DPn of this batch [-]."""
        return self.base.inv_DPn

    def state(self, **perturbation: float) -> KineticState:
        """``evaluate(parameters, **perturbation)``, cached (the fits revisit grid points)."""
        key = tuple(sorted(perturbation.items()))
        s = self._cache.get(key)
        if s is None:
            s = evaluate(self.parameters, **perturbation)
            self._cache[key] = s
        return s

    def response(self, **perturbation: float) -> dict[str, float]:
        """y = ln(perturbed/base) of R_p, Mn and Mw [-] for a perturbation of ``evaluate``."""
        s = self.state(**perturbation)
        base = self.base
        out = {
            "R_p": math.log(s.R_p / base.R_p),
            "Mn": math.log(s.DPn / base.DPn),
            "Mw": math.log(s.DPn * s.dispersity / (base.DPn * base.dispersity)),
        }
        if self.shape:
            t, t0 = model_tails(s.tau, s.beta), self.base_tails
            out["low-M tail"] = t.low - t0.low
            out["high-M shoulder"] = t.high - t0.high
        return out

    @property
    def base_tails(self) -> Tails:
        """Tails of the expected (base) instantaneous distribution."""
        return model_tails(self.base.tau, self.base.beta)


class CandidateLevel(Protocol):
    """What an explanation reads of one impurity candidate (see ``ImpurityEstimate``)."""

    @property
    def name(self) -> str: ...
    @property
    def C(self) -> float: ...
    @property
    def ppm_mol(self) -> float: ...
    @property
    def ppm_mass(self) -> float | None: ...


@dataclass(frozen=True)
class Evidence:
    """What the explanations quote: measured/expected ratios and the derived numbers.

    Attributes
    ----------
    parameters : KineticParameters
        The un-anchored parameters of the recipe (T [K], E_p, E_d [kJ/mol], [M] [mol/L]).
    model : AnchoredModel
    rp_ratio, mn_ratio, mw_ratio : float or None
        Measured/expected R_p, Mn, Mw [-] (None when not measured).
    excess : float or None
        1/DPn measured − expected [-].
    impurities : tuple
        Candidate levels that would explain the excess, best first.
    induction : float or None
        Induction period [min].
    Mn_shift_low_limit : float or None
        Mn change when the low-M limit moves 0.2 mL earlier [%].
    excess_interval : (float, float)
        95 % interval of the excess 1/DPn [-].
    relation : str
        Which impurity relation the levels use (instantaneous or cumulative).
    """

    parameters: KineticParameters
    model: AnchoredModel
    rp_ratio: float | None = None
    mn_ratio: float | None = None
    mw_ratio: float | None = None
    excess: float | None = None
    impurities: tuple[CandidateLevel, ...] = ()
    induction: float | None = None
    Mn_shift_low_limit: float | None = None
    excess_interval: tuple[float, float] = (math.nan, math.nan)
    relation: str = ""

    @property
    def rp_text(self) -> str:
        """'R_p is 1.23× expected' or 'R_p was not measured'."""
        if self.rp_ratio is None:
            return "R_p was not measured"
        return f"R_p is {ratio(self.rp_ratio)}× expected"

    @property
    def mn_text(self) -> str:
        """'Mn is 0.8× expected' or 'Mn was not measured'."""
        if self.mn_ratio is None:
            return "Mn was not measured"
        return f"Mn is {ratio(self.mn_ratio)}× expected"

    def ratio_numbers(self) -> list[tuple[str, float]]:
        """The measured/expected ratios that were measured, unit-named."""
        nums: list[tuple[str, float]] = []
        if self.rp_ratio is not None:
            nums.append(("R_p measured/expected [-]", self.rp_ratio))
        if self.mn_ratio is not None:
            nums.append(("Mn measured/expected [-]", self.mn_ratio))
        if self.mw_ratio is not None:
            nums.append(("Mw measured/expected [-]", self.mw_ratio))
        return nums


@dataclass(frozen=True)
class Explanation:
    """Plain-language text, the numbers behind it (unit in each label) and the next step."""

    text: str
    numbers: tuple[tuple[str, float], ...]
    next_step: str


def _sig(x: float | None, n: int = 4) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "n/a"
    return f"{x:.{n}g}"


# --------------------------------------------------------------------------- plausibility


@dataclass(frozen=True)
class PriorRange:
    """Plausible range of a hypothesis' fitted quantity, from practice.

    Inside [lo, hi] every value is equally plausible; outside, the penalty added to χ² is
    (d/scale)², d the distance to the range (in ln units when ``log``): a flat prior with
    half-normal tails (−2 ln prior, up to a constant).

    Attributes
    ----------
    quantity : str
        What the range is on (may differ from the reported value, e.g. the DPn ratio).
    lo, hi : float
        The range [quantity's unit].
    scale : float
        Tail scale (ln units when ``log``).
    log : bool
    basis : str
        Where the range comes from.
    """

    quantity: str
    lo: float
    hi: float
    scale: float
    log: bool
    basis: str

    def distance(self, q: float) -> float:
        """Distance of ``q`` outside the range, in tail scales (0 inside)."""
        if self.log:
            if not q > 0:
                return math.inf
            x, lo, hi = math.log(q), math.log(self.lo), math.log(self.hi)
        else:
            x, lo, hi = q, self.lo, self.hi
        return max(lo - x, 0.0, x - hi) / self.scale

    def penalty(self, q: float) -> float:
        """(d/scale)² [-]."""
        return self.distance(q) ** 2

    def describe(self) -> str:
        """'initiator factor F 1–2 (common practice: ...)'."""
        return f"{self.quantity} {self.lo:g}–{self.hi:g} ({self.basis})"


# --------------------------------------------------------------------------- the base


class Hypothesis(ABC):
    """One cause: a parameter grid, a model μ(θ) of the observations and an explanation.

    Class attributes
    ----------------
    key, title, category : str
        Short key, plain title, ``process``, ``measurement`` or ``none``.
    parameter, unit : str
        Name and unit of the reported value of the fitted parameter.
    k : int
        Number of fitted parameters (for the Akaike score).
    free : tuple of str
        Observations this cause leaves unexplained on purpose (not counted in χ²).
    prior_range : PriorRange or None
        Plausible range of the fitted quantity (:meth:`prior_quantity`) and how values
        outside it are penalised; None: every value on the grid equally plausible.
    skipped_note : str
        Note when :meth:`applies` is False.
    """

    key: ClassVar[str] = ""
    title: ClassVar[str] = ""
    category: ClassVar[str] = "process"
    parameter: ClassVar[str] = ""
    unit: ClassVar[str] = "-"
    k: ClassVar[int] = 1
    free: ClassVar[tuple[str, ...]] = ()
    prior_range: ClassVar[PriorRange | None] = None
    skipped_note: ClassVar[str] = ""

    def applies(self, parameters: KineticParameters) -> bool:
        """Whether the cause can be evaluated for these parameters."""
        return True

    @abstractmethod
    def grid(self) -> np.ndarray:
        """Grid of θ searched before the bounded refinement (each cause defines its own)."""

    def perturbation(self, theta: float, model: AnchoredModel) -> dict[str, float] | None:
        """Keyword perturbation of :func:`~gpctools.kinetics.predict.evaluate` at θ for a
        cause in the chemistry; None for a measurement cause.
        """
        return None

    def predict(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        """μ(θ) for each observation it affects (others are predicted as 0).

        A chemistry cause predicts the model's response to its perturbation; a
        measurement cause overrides this.
        """
        pert = self.perturbation(theta, model)
        if pert is None:  # pragma: no cover - measurement causes override predict
            raise TypeError(f"{type(self).__name__}: a cause without a perturbation of the "
                            "chemistry (a measurement cause) must define predict()")
        return model.response(**pert)

    def molar_mass_shift(self, theta: float, model: AnchoredModel) -> float:
        """ln of the factor a measurement cause puts on every M [-] (0: none)."""
        return 0.0

    def extra_sigma(self, theta: float, name: str, model: AnchoredModel) -> float | None:
        """Extra standard uncertainty of observation ``name`` at θ (None: none)."""
        return None

    def value(self, theta: float, model: AnchoredModel) -> float:
        """The reported value of the fitted parameter, in ``unit``."""
        return theta

    def prior_quantity(self, theta: float, model: AnchoredModel) -> float:
        """The quantity ``prior_range`` is on (default: the reported value)."""
        return self.value(theta, model)

    def penalty(self, theta: float, model: AnchoredModel) -> float:
        """Plausibility penalty at θ [-] (0 inside the range or without one)."""
        pr = self.prior_range
        return 0.0 if pr is None else pr.penalty(self.prior_quantity(theta, model))

    def plausible(self, theta: float, model: AnchoredModel) -> bool:
        """Whether the fitted quantity lies inside the prior range."""
        pr = self.prior_range
        # a millionth of a tail scale: the optimiser's tolerance at the range's edge
        return pr is None or pr.distance(self.prior_quantity(theta, model)) <= 1e-6

    @abstractmethod
    def explain(self, value: float, ev: Evidence) -> Explanation:
        """Text, numbers and next step for the best-fit ``value`` (each cause its own)."""

    def __repr__(self) -> str:
        return f"<hypothesis {self.key}>"


# --------------------------------------------------------------------------- the causes


class NoCause(Hypothesis):
    """Everything as expected: μ = 0 for every observation, nothing fitted."""

    key = "none"
    title = "no cause: as expected"
    category = "none"
    parameter = "-"
    k = 0

    def grid(self) -> np.ndarray:
        return np.array([0.0])

    def predict(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {}

    def explain(self, value: float, ev: Evidence) -> Explanation:
        return Explanation(
            f"Measured values agree with the expected ones within their uncertainties "
            f"({ev.mn_text}; {ev.rp_text}).",
            tuple(ev.ratio_numbers()),
            "nothing to chase; if the product is still off-spec, check the specification "
            "and the sampling",
        )


class UnexplainedTransfer(Hypothesis):
    """Chains stop more often than the recipe explains; the radicals keep going.

    θ = r = DPn/DPn_base; Δ(1/DPn) = (1/DPn_base)·(1/r − 1) added to the Mayo sum.
    """

    key = "transfer"
    title = "unexplained chain transfer (impurity or agent overcharge)"
    parameter = "excess 1/DPn"
    prior_range = PriorRange(
        "DPn ratio with/without the excess", 0.1, 1.0, 0.5, True,
        "common practice: a contaminant, or an agent charged twice, rarely takes DPn "
        "below a tenth")

    def grid(self) -> np.ndarray:
        return np.linspace(0.02, 1.0, 197)[::-1]

    def perturbation(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {"extra_transfer": self.value(theta, model)}

    def value(self, theta: float, model: AnchoredModel) -> float:
        return model.inv_DPn * (1.0 / theta - 1.0)

    def prior_quantity(self, theta: float, model: AnchoredModel) -> float:
        return theta

    def explain(self, value: float, ev: Evidence) -> Explanation:
        ex = ev.excess
        lo, hi = ev.excess_interval
        nums = ev.ratio_numbers()
        nums.insert(0, ("excess 1/DPn (fit) [-]", value))
        nums.insert(1, ("excess 1/DPn 95 % interval low [-]", lo))
        nums.insert(2, ("excess 1/DPn 95 % interval high [-]", hi))
        nums.insert(3, ("excess 1/DPn (from Mn alone) [-]",
                        ex if ex is not None else float("nan")))
        nums.append(("1/DPn expected [-]", ev.model.inv_DPn))
        lines = ""
        if ev.impurities:
            top = ev.impurities[:3]
            lines = "; ".join(
                f"{i.name} (C = {i.C:.3g}): {i.ppm_mol:.3g} ppm mol"
                + (f" (95 %: {getattr(i, 'ppm_mol_low', math.nan):.3g}–"
                   f"{getattr(i, 'ppm_mol_high', math.nan):.3g})")
                + (f", {i.ppm_mass:.3g} ppm by mass" if i.ppm_mass else "")
                for i in top
            )
            nums.append((f"equivalent {top[0].name} [ppm mol]", top[0].ppm_mol))
        return Explanation(
            f"Chains stop more often than the recipe explains while the radicals keep "
            f"going: {ev.mn_text}, {ev.rp_text}. Excess 1/DPn = {_sig(value, 4)} (95 % "
            f"interval {_sig(lo, 3)}–{_sig(hi, 3)}; from Mn alone {_sig(ex, 4)}). "
            f"Equivalent impurity levels ({ev.relation or 'instantaneous relation'}): "
            f"{lines or 'none'}.",
            tuple(nums),
            "look for a transfer-active contaminant: thiols or halocarbons in monomer or "
            "solvent lots (GC), shared lines and cleaning residues, an agent charged twice; "
            "compare with a retained sample of the previous lot",
        )


class ExcessInitiation(Hypothesis):
    """More radicals than the recipe gives: θ = ln F, F the factor on f·k_d·[I]."""

    key = "initiator"
    title = "excess initiation (initiator overcharge)"
    parameter = "initiator factor F"
    prior_range = PriorRange(
        "initiator factor F", 1.0, 2.0, 0.5, True,
        "common practice: the largest usual charging error is a double or second charge")

    def grid(self) -> np.ndarray:
        return np.linspace(0.0, math.log(1000.0), 241)

    def perturbation(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {"radical_flux_factor": math.exp(theta)}

    def value(self, theta: float, model: AnchoredModel) -> float:
        return math.exp(theta)

    def explain(self, value: float, ev: Evidence) -> Explanation:
        F = value
        rp, dp = ev.rp_ratio, ev.mn_ratio
        base = ev.model.base
        s = ev.model.state(radical_flux_factor=F)
        nums = ev.ratio_numbers()
        nums.append(("best-fit initiator factor F [-]", F))
        if rp is not None:
            nums.append(("initiator factor from R_p, (R_p ratio)² [-]", rp**2))
        nums.append(("Mn ratio predicted at F [-]", s.DPn / base.DPn))
        if rp is not None and dp is not None:
            nums.append(("R_p·DPn measured/expected [-]", rp * dp))
        prod = (
            f"; R_p·DPn is {ratio(rp * dp)}× expected (about 1 for extra initiator)"
            if (rp is not None and dp is not None) else ""
        )
        from_rate = (
            f" The rate corresponds to {ratio(rp**2)}× the radical flux (R_p ∝ [I]^½)."
            if rp is not None else ""
        )
        return Explanation(
            f"More radicals than the recipe gives: {ev.rp_text} and {ev.mn_text}{prod}."
            f"{from_rate} Best fit F = {F:.3g} (× f·k_d·[I]), which predicts R_p × "
            f"{s.R_p / base.R_p:.3g} and Mn × {s.DPn / base.DPn:.3g}.",
            tuple(nums),
            "check the initiator weighing, assay and charge records, dosing and any "
            "second charge; do not change initiator or temperature without a heat-balance "
            "review (runaway risk)",
        )


class TemperatureOvershoot(Hypothesis):
    """A temperature rise ΔT [K]: k_p and k_d follow Arrhenius, k_t is held constant."""

    key = "temperature"
    title = "temperature overshoot"
    parameter = "temperature rise ΔT"
    unit = "K"
    prior_range = PriorRange(
        "temperature rise ΔT [K]", 0.0, 10.0, 5.0, False,
        "common practice: jacket control holds a few K; an exotherm or a controller fault "
        "overshoots by up to about 10 K")
    skipped_note = "temperature overshoot not evaluated: activation energy of k_p or k_d unknown"

    def applies(self, parameters: KineticParameters) -> bool:
        return parameters.E_p is not None and parameters.E_d is not None

    def grid(self) -> np.ndarray:
        return np.linspace(0.0, 80.0, 321)

    def perturbation(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {"dT": theta}

    def explain(self, value: float, ev: Evidence) -> Explanation:
        dT = value
        p, rp = ev.parameters, ev.rp_ratio
        base = ev.model.base
        s = ev.model.state(dT=dT)
        Ep, Ed = p.E_p, p.E_d
        assert Ep is not None and Ed is not None  # applies() holds
        nums = ev.ratio_numbers()
        nums.append(("best-fit temperature rise [K]", dT))
        if rp is not None and rp > 1:
            # R_p ∝ k_p·k_d^½: 1/T' = 1/T − R·ln(R_p ratio)/(E_p + E_d/2)
            inv_T = 1.0 / p.T - R_GAS * math.log(rp) / ((Ep + Ed / 2.0) * 1e3)
            nums.append(("temperature rise from R_p alone [K]", 1.0 / inv_T - p.T))
        nums.append(("Mn ratio predicted at that rise [-]", s.DPn / base.DPn))
        return Explanation(
            f"A higher temperature speeds up decomposition (E_d = {Ed:g} kJ/mol) and "
            f"propagation (E_p = {Ep:g} kJ/mol): {ev.rp_text}, {ev.mn_text}. A rise of "
            f"{dT:.3g} K explains it best; it predicts R_p × {s.R_p / base.R_p:.3g} and "
            f"Mn × {s.DPn / base.DPn:.3g} (heat lowers Mn less than extra initiator at the "
            "same rate).",
            tuple(nums),
            "check the temperature record and probe calibration, jacket control and the "
            "start-up exotherm; an overshoot means the heat removal was short: review it "
            "before the next batch (runaway risk)",
        )


class Retardation(Hypothesis):
    """Radicals lost to a retarder: θ = h = [R•]/[R•]_base.

    ζ = 2k_t[R•]_base(1 − h²)/h + ζ₀(1 − h)/h, ζ₀ the loss to charged inhibitors, solves
    2k_t[R•]² + (ζ₀ + ζ)[R•] = R_i with [R•] = h·[R•]_base [derived].
    """

    key = "retarder"
    title = "inhibition or retardation (stabilizer, oxygen)"
    parameter = "radical loss to retarder ζ = k_z[Z]"
    unit = "1/s"
    free = ("induction period",)
    prior_range = PriorRange(
        "[R•] ratio h", 0.3, 1.0, 0.5, True,
        "common practice: stabilizer left in the monomer or an air leak slows a batch by "
        "up to about threefold")

    def grid(self) -> np.ndarray:
        return np.linspace(0.02, 1.0, 197)[::-1]

    def perturbation(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {"retarder": self.value(theta, model)}

    def value(self, theta: float, model: AnchoredModel) -> float:
        h = theta
        b = model.base
        return 2.0 * b.k_t * b.radicals * (1.0 - h * h) / h + b.zeta * (1.0 - h) / h

    def prior_quantity(self, theta: float, model: AnchoredModel) -> float:
        return theta

    def explain(self, value: float, ev: Evidence) -> Explanation:
        zeta = value
        base = ev.model.base
        s = ev.model.state(retarder=zeta)
        nums = ev.ratio_numbers()
        nums.append(("radical loss to retarder ζ [1/s]", zeta))
        nums.append(("R_p ratio predicted [-]", s.R_p / base.R_p))
        nums.append(("Mn ratio predicted [-]", s.DPn / base.DPn))
        ind = ev.induction
        if ind is not None:
            nums.append(("induction period [min]", ind))
        return Explanation(
            f"Something consumes radicals: {ev.rp_text}, {ev.mn_text}"
            + (f", induction period {ind:.3g} min" if ind else "")
            + f". A radical loss ζ = {zeta:.3g} 1/s (each loss ends a chain) reproduces "
            f"R_p × {s.R_p / base.R_p:.3g} and Mn × {s.DPn / base.DPn:.3g}.",
            tuple(nums),
            "check inhibitor (stabilizer) removal, degassing and the nitrogen purge "
            "(oxygen), and the monomer lot's stabilizer content",
        )


class Dilution(Hypothesis):
    """Less monomer than the recipe: θ = g, the factor on [M]."""

    key = "dilution"
    title = "dilution or monomer loss"
    parameter = "[M] factor g"
    prior_range = PriorRange(
        "[M] factor g", 0.9, 1.0, 0.05, True,
        "common practice: weighing and charging errors of a few percent, monomer lost by "
        "evaporation or venting up to about 10 %; a larger shortfall needs a reason")

    def grid(self) -> np.ndarray:
        return np.linspace(0.02, 1.0, 197)[::-1]

    def perturbation(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {"monomer_factor": theta}

    def explain(self, value: float, ev: Evidence) -> Explanation:
        g = value
        p = ev.parameters
        base = ev.model.base
        s = ev.model.state(monomer_factor=g)
        nums = ev.ratio_numbers()
        nums.append(("[M] factor g [-]", g))
        nums.append(("[M] implied [mol/L]", p.conc_M * g))
        return Explanation(
            f"Less monomer than the recipe: {ev.rp_text}, {ev.mn_text}. [M] × {g:.3g} "
            f"({p.conc_M * g:.4g} mol/L) lowers R_p and DPn together "
            f"(R_p × {s.R_p / base.R_p:.3g}, Mn × {s.DPn / base.DPn:.3g}).",
            tuple(nums),
            "check the monomer and solvent charges, evaporation or venting losses, and the "
            "monomer assay",
        )


class FlowError(Hypothesis):
    """An uncorrected relative flow error ε: every average × 10^(−B·V·ε), marker shifted by ε.

    The uncertainty of B·V adds rel·|ln10·B·V·ε| to the σ of Mn, Mw and the check standard.
    """

    key = "flow"
    title = "flow-rate error (uncorrected flow-marker drift)"
    category = "measurement"
    parameter = "relative flow error ε"
    prior_range = PriorRange(
        "relative flow error ε", -0.01, 0.01, 0.005, False,
        "common practice: a pump out of calibration, a leak or a bubble moves the flow by "
        "up to about 1 %")
    _SHIFTED: ClassVar[tuple[str, ...]] = ("Mn", "Mw", "check standard")

    def grid(self) -> np.ndarray:
        return np.linspace(-0.1, 0.1, 801)

    def predict(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        k = model.flow.k
        return {"Mn": -k * theta, "Mw": -k * theta, "check standard": -k * theta,
                "flow marker": theta}

    def extra_sigma(self, theta: float, name: str, model: AnchoredModel) -> float | None:
        return model.flow.rel * abs(model.flow.k * theta) if name in self._SHIFTED else 0.0

    def molar_mass_shift(self, theta: float, model: AnchoredModel) -> float:
        return -model.flow.k * theta

    def explain(self, value: float, ev: Evidence) -> Explanation:
        e = value
        BV = ev.model.flow.BV
        shift = 100.0 * (10 ** (-BV * e) - 1.0)
        nums = ev.ratio_numbers()
        nums.insert(0, ("relative flow error [%]", 100 * e))
        nums.append(("shift of every average [%]", shift))
        return Explanation(
            f"A flow-rate error of {100 * e:+.3g} % moves every average by {shift:+.3g} % "
            f"(B·V = {BV:.3g}) and leaves the dispersity unchanged; {ev.rp_text}.",
            tuple(nums),
            "re-process with the flow-marker correction; check pump flow (timed volume), "
            "leaks and degassing; re-run the check standard",
        )


class CalibrationDrift(Hypothesis):
    """Every average and the check standard × e^s (θ = s)."""

    key = "calibration"
    title = "calibration drift (check standard off)"
    category = "measurement"
    parameter = "shift of all averages ln(factor)"
    prior_range = PriorRange(
        "factor on all averages", 0.85, 1.15, 0.05, True,
        "common practice: check standards are accepted within ±5 %; a calibration drifts "
        "by up to about 15 % before it is caught")

    def grid(self) -> np.ndarray:
        return np.linspace(-2.0, 2.0, 801)

    def predict(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {"Mn": theta, "Mw": theta, "check standard": theta}

    def molar_mass_shift(self, theta: float, model: AnchoredModel) -> float:
        return theta

    def prior_quantity(self, theta: float, model: AnchoredModel) -> float:
        return math.exp(theta)

    def explain(self, value: float, ev: Evidence) -> Explanation:
        shift = 100.0 * (math.exp(value) - 1.0)
        nums = ev.ratio_numbers()
        nums.insert(0, ("shift of every average [%]", shift))
        return Explanation(
            f"All averages shifted together by {shift:+.3g} % as a calibration drift "
            f"would do (check standard and sample alike); {ev.rp_text}.",
            tuple(nums),
            "recalibrate with fresh narrow standards, check column condition (broadened "
            "standards) and re-run the check standard",
        )


class LimitArtefact(Hypothesis):
    """Mn × e^t (t ≤ 0), Mw unchanged; moving the low-M limit 0.2 mL earlier raises Mn.

    The limit check (Mn change when the low-M limit moves 0.2 mL earlier, as a fraction)
    is predicted as −κ·t with κ = 0.5 and an extra σ of 0.5·|t|: the part of the
    artefact's low-M material in the last 0.2 mL of the window lies anywhere between none
    and all of it [typical]. The mass outside the calibration and the low-M tail are
    left free (their size does not follow from t).
    """

    key = "limit"
    title = "integration-limit artefact (low-M tail inside the limits)"
    category = "measurement"
    parameter = "Mn bias ln(factor)"
    free = ("outside calibration", "low-M tail")
    _KAPPA: ClassVar[float] = 0.5
    prior_range = PriorRange(
        "factor on Mn", 0.3, 1.0, 0.3, True,
        "common practice: a system peak or low-M tail inside the limits can take a large "
        "part off Mn, rarely more than 70 %")

    def grid(self) -> np.ndarray:
        return np.linspace(-2.0, 0.0, 401)

    def predict(self, theta: float, model: AnchoredModel) -> dict[str, float]:
        return {"Mn": theta, "low-M limit": -self._KAPPA * theta}

    def extra_sigma(self, theta: float, name: str, model: AnchoredModel) -> float | None:
        return self._KAPPA * abs(theta) if name == "low-M limit" else None

    def prior_quantity(self, theta: float, model: AnchoredModel) -> float:
        return math.exp(theta)

    def explain(self, value: float, ev: Evidence) -> Explanation:
        shift = 100.0 * (math.exp(value) - 1.0)
        nums = ev.ratio_numbers()
        nums.insert(0, ("Mn bias [%]", shift))
        lim = ev.Mn_shift_low_limit
        if lim is not None:
            nums.append(("Mn shift, low-M limit -0.2 mL [%]", lim))
        return Explanation(
            f"Mn is low by {shift:+.3g} % while Mw is {ratio(ev.mw_ratio)}× expected: a "
            "low-M tail, system peak or baseline end inside the integration limits"
            + (f"; Mn moves {lim:+.3g} % when the limit moves 0.2 mL" if lim is not None else "")
            + ".",
            tuple(nums),
            "re-integrate with the low-M limit before the system peak and a longer baseline "
            "window; judge on Mw",
        )


#: The registered causes, in the order they are fitted (ties keep this order).
HYPOTHESES: tuple[Hypothesis, ...] = (
    NoCause(),
    UnexplainedTransfer(),
    ExcessInitiation(),
    TemperatureOvershoot(),
    Retardation(),
    Dilution(),
    FlowError(),
    CalibrationDrift(),
    LimitArtefact(),
)


def hypothesis(key: str) -> Hypothesis:
    """The registered hypothesis with ``key``."""
    for h in HYPOTHESES:
        if h.key == key:
            return h
    raise KeyError(f"no hypothesis {key!r}; known: {', '.join(h.key for h in HYPOTHESES)}")
