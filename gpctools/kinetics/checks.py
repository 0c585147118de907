"""Measurement checks of the diagnosis: each turns a recorded check into a line and an observation.

A check that can make a molar mass *look* low (a drifting calibration, an uncorrected
flow error, a low-M tail inside the integration limits, mass outside the calibrated
range) is read from the recipe's ``[checks]``. Each registered check returns

- a :class:`CheckLine` for the report (status ``ok``, ``flag`` or ``not recorded``), and
- an :class:`~gpctools.kinetics.scoring.Observation` for the scoring, or a prior
  (``recorded=False``) when the check was not made, so that a measurement cause is
  never favoured or excluded by silence.

The registry :data:`CHECKS` is run in its order by :func:`run_checks`; the order fixes
the order of the report lines and of the observations.

Defaults, each with its basis
-----------------------------
====================================  =======  ============================================
check standard σ                      3 %      published: SEC repeatability under 3 % in
                                               round robins (docs/science.md, section 7.6)
check standard prior (not recorded)   5 %      common practice: standards accepted ±5 %
flow marker σ                         0.1 %    common practice: marker position
                                               reproducible to about 0.1 %
flow prior (no marker)                0.2 %    common practice: pump flow accuracy
flow prior (marker-corrected)         0.05 %   residual error after the marker correction
low-M limit σ                         3 %      common practice: a well-placed limit moves
                                               Mn by less than about 3 %
outside calibration σ                 1 %      common practice: warn above about 1 % mass
                                               (docs/science.md, section 1.5)
induction period σ                    5 min    common practice: about one sampling interval
calibration slope B                   0.4      decades/mL, typical 0.3–0.5
                                               (docs/science.md, section 2.1)
peak volume V                         25 mL    typical 20–30 mL (docs/science.md,
                                               section 2.1)
relative uncertainty of B·V           30 %     defaults (B·V 6–15 around 10); 10 % given
flow finding threshold                0.1 %    common practice: a pump holds its flow
                                               within about 0.1 %
====================================  =======  ============================================

Instrument findings stand beside the chemistry: a flow error above 0.1 % is reported as
an instrument fault to fix (:func:`pump_flow`) even when the flow marker corrected the
results, because the next sequence may not have a marker, and a drifting pump also
broadens peaks and moves retention of the standards.

References
----------
Flow-error sensitivity Δlog M = −B·V·ε for a relative flow error ε: docs/science.md,
section 2.2 [derived].
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from gpctools.display import Display
from gpctools.kinetics.recipe import Checks
from gpctools.kinetics.scoring import Observation

__all__ = [
    "CheckLine",
    "CheckInputs",
    "CheckOutcome",
    "CheckReport",
    "FlowSensitivity",
    "CHECKS",
    "flow_sensitivity",
    "pump_flow",
    "run_checks",
    "FLOW_FINDING_THRESHOLD",
]

SIGMA_CHECK_STANDARD = 0.03  # published: repeatability under 3 % (docs/science.md, section 7.6)
PRIOR_CHECK_STANDARD = 0.05  # common practice: standards accepted within ±5 %
SIGMA_FLOW_MARKER = 0.001  # common practice: marker position reproducible to about 0.1 %
PRIOR_FLOW = 0.002  # common practice: pump flow accuracy about 0.2 % when not checked
PRIOR_FLOW_CORRECTED = 0.0005  # residual flow error after marker correction
SIGMA_LIMIT = 0.03  # common practice: a well-placed limit moves Mn by less than ~3 %
SIGMA_OUTSIDE = 1.0  # % mass; common practice: warn above about 1 % (docs/science.md, section 1.5)
SIGMA_INDUCTION = 5.0  # min; common practice: about one sampling interval
DEFAULT_SLOPE = 0.4  # decades/mL, typical 0.3-0.5 (docs/science.md, section 2.1)
DEFAULT_PEAK_VOLUME = 25.0  # mL, typical 20-30 (docs/science.md, section 2.1)
BV_REL_DEFAULT = 0.3  # B·V range 6-15 around 10
BV_REL_GIVEN = 0.1
#: A flow error above this is an instrument finding even when the results were corrected
#: [common practice: a pump holds its flow within about 0.1 %; more is a fault to fix].
FLOW_FINDING_THRESHOLD = 0.001


@dataclass(frozen=True, repr=False)
class CheckLine(Display):
    """A measurement check: status ``ok``, ``flag`` or ``not recorded``, with its numbers."""

    check: str
    status: str
    text: str
    numbers: tuple[tuple[str, float], ...]
    action: str

    def summary(self) -> dict[str, Any]:
        """JSON-safe dict."""
        return {
            "check": self.check,
            "status": self.status,
            "text": self.text,
            "numbers": {k: v for k, v in self.numbers},
            "action": self.action,
        }


@dataclass(frozen=True)
class FlowSensitivity:
    """How strongly a relative flow error moves the molar-mass averages.

    Attributes
    ----------
    BV : float
        Calibration slope × peak volume, B·V [decades] (Δlog M = −B·V·ε).
    rel : float
        Relative standard uncertainty of B·V [-].
    """

    BV: float
    rel: float

    @property
    def k(self) -> float:
        """k = ln(10)·B·V [-]: a relative flow error ε moves every ln M by −k·ε."""
        return math.log(10.0) * self.BV


def flow_sensitivity(checks: Checks) -> FlowSensitivity:
    """B·V from the recipe's calibration slope and peak volume, else the typical defaults."""
    given = checks.calibration_slope is not None and checks.peak_volume is not None
    B = checks.calibration_slope if checks.calibration_slope is not None else DEFAULT_SLOPE
    V = checks.peak_volume if checks.peak_volume is not None else DEFAULT_PEAK_VOLUME
    return FlowSensitivity(BV=B * V, rel=BV_REL_GIVEN if given else BV_REL_DEFAULT)


@dataclass(frozen=True)
class CheckInputs:
    """What the checks read.

    Attributes
    ----------
    checks : Checks
        The recipe's ``[checks]``.
    scale : str
        Molar-mass scale of the measured Mn/Mw ("absolute" or "relative to <polymer>").
    scale_factor : float or None
        Factor that converted them to the sample polymer at Mn [-] (1 when absolute or
        same polymer; None when no Mark-Houwink pair is known).
    polymer : str
        The sample polymer.
    induction : float or None
        Observed induction period [min] (given, or from the conversion data).
    """

    checks: Checks
    scale: str = "absolute"
    scale_factor: float | None = 1.0
    polymer: str = ""
    induction: float | None = None


@dataclass(frozen=True)
class CheckOutcome:
    """What one check gives: a report line, an observation, a warning, an instrument
    finding (each optional).
    """

    line: CheckLine | None = None
    observation: Observation | None = None
    warning: str | None = None
    finding: CheckLine | None = None


@dataclass(frozen=True)
class CheckReport:
    """All checks: report lines, observations (name -> Observation), warnings and
    instrument findings, in order.
    """

    lines: tuple[CheckLine, ...]
    observations: dict[str, Observation]
    warnings: tuple[str, ...]
    findings: tuple[CheckLine, ...] = ()


def molar_mass_scale(c: CheckInputs) -> CheckOutcome:
    """Whether Mn/Mw are absolute, converted by Mark-Houwink pairs, or used as if absolute."""
    if c.scale.startswith("absolute"):
        how = "absolute, light scattering" if "light scattering" in c.scale else "entered as absolute"
        return CheckOutcome(CheckLine("molar-mass scale", "ok", f"values {how}", (), ""))
    std = c.scale[len("relative to "):]
    fac = c.scale_factor
    if fac is None:
        return CheckOutcome(
            CheckLine(
                "molar-mass scale", "flag",
                f"Mn/Mw are {std}-equivalent values and no Mark-Houwink pair is bundled to "
                f"convert them to {c.polymer}; they are used as if absolute",
                (), "use universal calibration with a Mark-Houwink pair for the polymer, or "
                "absolute (light-scattering) detection; add the pair to the mark_houwink table",
            ),
            warning=f"{std}-equivalent Mn/Mw used as absolute (no Mark-Houwink pair)",
        )
    if abs(fac - 1.0) > 1e-12:
        return CheckOutcome(CheckLine(
            "molar-mass scale", "flag",
            f"Mn/Mw are {std}-equivalent; converted to {c.polymer} with the bundled "
            f"Mark-Houwink pairs (factor {fac:.4g} at Mn; about 5 % uncertain by the "
            "choice of pair). Using equivalent values as absolute would misstate the gap",
            (("conversion factor at Mn [-]", fac),),
            "report which pair was used; prefer universal calibration in the method",
        ))
    return CheckOutcome(CheckLine(
        "molar-mass scale", "ok", f"{std}-equivalent values of {c.polymer} are absolute", (), ""))


def check_standard(c: CheckInputs) -> CheckOutcome:
    """Check-standard deviation: y = ln(1 + d/100) with σ 3 %, or a ±5 % prior."""
    d = c.checks.check_standard_deviation
    if d is None:
        return CheckOutcome(
            CheckLine("check standard", "not recorded", "no check-standard result given", (),
                      "run a check standard with the samples; give 'check standard deviation [%]'"),
            Observation("check standard", 0.0, PRIOR_CHECK_STANDARD, False, None, None, "%"),
        )
    status = "flag" if abs(d) > 100 * SIGMA_CHECK_STANDARD else "ok"
    return CheckOutcome(
        CheckLine(
            "check standard", status,
            f"check standard {d:+.3g} % from its assigned value (repeatability under 3 %)",
            (("check standard deviation [%]", d),),
            "recalibrate and re-run the check standard before judging the sample"
            if status == "flag" else "",
        ),
        Observation("check standard", math.log1p(d / 100.0), SIGMA_CHECK_STANDARD, True, d, 0.0,
                    "%"),
    )


def flow_marker(c: CheckInputs) -> CheckOutcome:
    """Flow-marker shift ε = V_obs/V_ref − 1 (σ 0.1 %); a prior when corrected or not recorded."""
    ch = c.checks
    fe = ch.flow_error
    if fe is None:
        return CheckOutcome(
            CheckLine("flow marker", "not recorded", "no flow-marker positions given", (),
                      "use a flow marker and give its observed and reference volumes"),
            Observation("flow marker", 0.0, PRIOR_FLOW, False, None, None, "mL"),
        )
    if ch.flow_marker_corrected:
        return CheckOutcome(
            CheckLine("flow marker", "ok",
                      f"results corrected with the flow marker ({100 * fe:+.3g} % shift)",
                      (("flow marker shift [%]", 100 * fe),), ""),
            Observation("flow marker", 0.0, PRIOR_FLOW_CORRECTED, False,
                        ch.flow_marker_observed, ch.flow_marker_reference, "mL"),
        )
    BV = flow_sensitivity(ch).BV
    shift = 100.0 * (10 ** (-BV * fe) - 1.0)
    status = "flag" if abs(fe) > 2 * SIGMA_FLOW_MARKER else "ok"
    return CheckOutcome(
        CheckLine(
            "flow marker", status,
            f"flow marker at {ch.flow_marker_observed:g} mL against {ch.flow_marker_reference:g}"
            f" mL ({100 * fe:+.3g} %); uncorrected this moves every average by about "
            f"{shift:+.3g} % (B·V = {BV:.3g}), dispersity unchanged",
            (("flow marker shift [%]", 100 * fe), ("expected shift of averages [%]", shift),
             ("B·V [decades]", BV)),
            "re-process with the flow-marker correction; check pump flow, leaks and degassing"
            if status == "flag" else "",
        ),
        Observation("flow marker", fe, SIGMA_FLOW_MARKER, True, ch.flow_marker_observed,
                    ch.flow_marker_reference, "mL"),
    )


def pump_flow(c: CheckInputs) -> CheckOutcome:
    """Instrument finding: the flow marker shows a flow error above 0.1 %, corrected or not.

    With x exported as volume = time × nominal flow, the marker elutes late when the
    pump is slow: flow actual/nominal = V_ref/V_obs, so the pump is 100·(V_obs/V_ref − 1)
    % slow [derived, docs/science.md, section 2.2].
    """
    ch = c.checks
    fe = ch.flow_error
    if fe is None or abs(fe) <= FLOW_FINDING_THRESHOLD:
        return CheckOutcome()
    way = "slow" if fe > 0 else "fast"
    done = ("the results were corrected with the flow marker, but"
            if ch.flow_marker_corrected else "the results were not corrected, and")
    return CheckOutcome(finding=CheckLine(
        "pump flow", "fix",
        f"pump flow {100 * abs(fe):.3g} % {way} (flow marker at "
        f"{ch.flow_marker_observed:.4g} mL against {ch.flow_marker_reference:.4g} mL); {done} "
        f"a flow error above {100 * FLOW_FINDING_THRESHOLD:g} % is an instrument fault",
        (("flow error [%]", 100 * fe), ("flow correction factor [-]", 1.0 / (1.0 + fe))),
        "check the pump: seals and check valves, leaks, degassing and bubbles; measure the "
        "flow (timed volume) and recalibrate it before the next sequence",
    ))


def low_M_limit(c: CheckInputs) -> CheckOutcome:
    """Mn change when the low-M limit moves 0.2 mL earlier: y = shift/100, σ 3 %."""
    shift = c.checks.Mn_shift_low_limit
    if shift is None:
        return CheckOutcome(CheckLine(
            "low-M integration limit", "not recorded", "Mn sensitivity to the limit not given",
            (), "re-integrate with the low-M limit 0.2 mL earlier and compare Mn",
        ))
    y = shift / 100.0
    status = "flag" if abs(y) > SIGMA_LIMIT else "ok"
    return CheckOutcome(
        CheckLine(
            "low-M integration limit", status,
            f"Mn changes by {shift:+.3g} % when the low-M limit moves 0.2 mL "
            "earlier" + (" (a low-M tail or system peak inside the limits)" if status == "flag"
                         else ""),
            (("Mn shift, low-M limit -0.2 mL [%]", shift),),
            "move the limit before the system/solvent peaks, check the baseline end, and "
            "judge on Mw, which is far less sensitive" if status == "flag" else "",
        ),
        Observation("low-M limit", y, SIGMA_LIMIT, True, shift, 0.0, "%"),
    )


def calibrated_range(c: CheckInputs) -> CheckOutcome:
    """Mass outside the calibrated range [% mass], σ 1 %; nothing when not recorded."""
    out = c.checks.outside_calibration
    if out is None:
        return CheckOutcome()
    status = "flag" if out > SIGMA_OUTSIDE else "ok"
    return CheckOutcome(
        CheckLine(
            "calibrated range", status,
            f"{out:.3g} % of the mass elutes outside the calibrated range",
            (("outside calibration [% mass]", out),),
            "add standards covering the range (do not extrapolate the calibration)"
            if status == "flag" else "",
        ),
        Observation("outside calibration", out, SIGMA_OUTSIDE, True, out, 0.0, "% mass"),
    )


def induction_period(c: CheckInputs) -> CheckOutcome:
    """Observed induction period [min], σ 5 min (an observation only, no report line)."""
    if c.induction is None:
        return CheckOutcome()
    return CheckOutcome(observation=Observation(
        "induction period", c.induction, SIGMA_INDUCTION, True, c.induction, 0.0, "min"))


#: The registered checks, in report and observation order.
CHECKS: tuple[Callable[[CheckInputs], CheckOutcome], ...] = (
    molar_mass_scale,
    check_standard,
    flow_marker,
    pump_flow,
    low_M_limit,
    calibrated_range,
    induction_period,
)


def run_checks(inputs: CheckInputs) -> CheckReport:
    """Run every registered check in :data:`CHECKS` order."""
    lines: list[CheckLine] = []
    observations: dict[str, Observation] = {}
    warnings: list[str] = []
    findings: list[CheckLine] = []
    for check in CHECKS:
        outcome = check(inputs)
        if outcome.line is not None:
            lines.append(outcome.line)
        if outcome.observation is not None:
            observations[outcome.observation.name] = outcome.observation
        if outcome.warning is not None:
            warnings.append(outcome.warning)
        if outcome.finding is not None:
            findings.append(outcome.finding)
    return CheckReport(tuple(lines), observations, tuple(warnings), tuple(findings))
