"""A whole batch: one batch sheet plus its method(s) gives one result row per injection.

The batch sheet (CSV or XLSX) has one row per injection (schema and every accepted
header in :mod:`gpctools.sheets.batch`):

=========================  ======================================================
column                     meaning
=========================  ======================================================
``sample_id``              required; repeated ids are replicate injections (a
                           warning names them)
``file``                   required; slice export, path relative to the sheet
``role``                   optional: ``sample`` (default), ``replicate``,
                           ``check_standard``, ``blank``, ``calibration_standard``;
                           blanks and calibration standards get no averages
                           (status ``not processed``: ``gpctools qc`` judges them)
``flow marker [mL]``       optional: observed marker position of that injection
``method file``            optional: the method of that injection (relative to the
                           sheet); blank = the method given to :func:`run_batch`
``limit start [mL]``,      optional overrides of that injection: integration
``limit end [mL]``,        limits in mL or in molar mass, baseline windows
``limit low M [g/mol]``,   (:class:`~gpctools.method.MethodOverrides`)
``limit high M [g/mol]``,
``baseline 1 start [mL]``
... ``baseline 2 end [mL]``
anything else              free metadata (``product``, ``batch``, ``sequence``,
                           ``assigned Mw [g/mol]``, ...), copied to the results
=========================  ======================================================

A mixed sequence runs in one call: each distinct method file is loaded once, each row
runs with its own method (with its overrides applied as a derived
:class:`~gpctools.method.Method`), and each result row records the method file, its
SHA-256 and the overrides used (``method file``, ``method SHA-256``, ``overrides``), as
well as the integration limits used as numbers (``integration start [mL]``, ``M at
integration start [g/mol]``, ...).

One failing injection does not stop the batch: it gets a row with ``status = "error"``
and its message, and :attr:`BatchResult.failed` counts it. Inputs are only read; this
module writes nothing: :func:`gpctools.report.write_batch` writes the outputs, and
``on_result=`` (e.g. :class:`gpctools.report.DistributionWriter`) receives each injection
as it finishes, so a long batch can stream its distribution tables to disk.

Per injection (:func:`process_trace`): flow-marker recognition and correction, baseline
and limits with the polymer peak searched inside the calibrated range, distribution and
averages (an average whose sum is not positive is missing, the others stand), the
sensitivity to the low-M limit, the standard uncertainty of Mn, Mw and Mz, the peak
count and the optional split into peaks, and the mass fractions below/above cut-offs
(docs/science.md, section 19).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Iterable, Iterator, Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from gpctools.display import Display

from . import columns as C
from .distribution import (
    CURVE_STEP,
    Distribution,
    DistributionCurve,
    PeakPart,
    averages_with_reasons,
    compute_distribution,
    distribution_curve,
    mass_fraction_below,
    peak_top,
    split_distribution,
)
from .errors import (
    DataError,
    GpcError,
    GpcWarning,
    InputFormatError,
    InputWarning,
    MethodError,
    SignalWarning,
)
from .method import FlowMarkerOptions, Method, MethodOverrides
from .sheets import batch as _sheet
from .signal import (
    CorrectedSignal,
    Peaks,
    _mean,
    _median,
    correct_signal,
    find_peaks,
    fit_baseline,
    noise_level,
)
from .uncertainty import UNCERTAIN_AVERAGES, AverageUncertainty, average_uncertainty

__all__ = [
    "InjectionResult",
    "MarkerSearch",
    "MassFraction",
    "BatchEntry",
    "BatchResult",
    "process_injection",
    "process_trace",
    "read_batch_sheet",
    "run_batch",
    "iter_batch",
    "load_batch_methods",
    "ResultSink",
    "CurveSink",
    "RESULT_COLUMNS",
]

ROLES = _sheet.ROLES

#: Result columns in order (metadata columns of the sheet are inserted after ``role``;
#: the method's ``mass below/above <M> g/mol [%]`` columns follow ``outside calibration``);
#: names, units and meanings in :mod:`gpctools.columns`.
RESULT_COLUMNS = (
    C.STATUS,
    C.MN,
    C.MW,
    C.MZ,
    C.MZ1,
    C.MP,
    C.MP_DWDLOGM,
    C.DISPERSITY,
    *C.UNCERTAINTY_COLUMNS,
    C.OUTSIDE_CALIBRATION,
    C.PEAKS,
    *C.PEAK_SPLIT_COLUMNS,
    *C.PEAK_COLUMNS,
    C.INTEGRATION_START,
    C.INTEGRATION_END,
    C.M_AT_INTEGRATION_START,
    C.M_AT_INTEGRATION_END,
    C.LIMITS_CHOICE,
    *C.BASELINE_COLUMNS,
    C.BASELINE_CHOICE,
    C.FLOW_MARKER,
    C.FLOW_MARKER_STATUS,
    C.FLOW_FACTOR,
    C.MN_SHIFT_LOW_M,
    C.MW_SHIFT_LOW_M,
    C.LIMIT_SHIFT,
    C.SCALE,
    C.METHOD_FILE,
    C.METHOD_SHA256,
    C.OVERRIDES,
    C.WARNINGS,
    C.ERROR,
)

#: Values of :attr:`MarkerSearch.status` (and of the ``flow marker status`` column).
MARKER_FOUND, MARKER_GIVEN, MARKER_NOT_FOUND, MARKER_NOT_USED = "found", "given", "not found", "not used"


@dataclass(frozen=True, repr=False)
class MarkerSearch(Display):
    """The flow marker of one injection: where it is and how it was decided.

    Attributes
    ----------
    status : str
        ``"found"`` (recognised in ``flow_marker.search``), ``"given"`` (batch sheet),
        ``"not found"`` (no peak passed the test: no correction) or ``"not used"`` (the
        method has no marker).
    position : float or None
        Observed marker position [mL] (None unless found or given).
    signal_to_noise : float
        Smoothed height of the best candidate over the noise SD [-] (NaN when not searched).
    fwhm : float
        Full width at half height of the best candidate [mL] (NaN when not searched).
    stderr : float
        Standard error of the fitted position [mL] (NaN when not searched).
    reason : str
        Why a candidate was refused (empty otherwise).
    """

    status: str
    position: float | None = None
    signal_to_noise: float = math.nan
    fwhm: float = math.nan
    stderr: float = math.nan
    reason: str = ""

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        from .sheets.cells import finite_or_none

        return {
            "status": self.status,
            "position [mL]": self.position,
            "signal-to-noise [-]": finite_or_none(self.signal_to_noise),
            "fwhm [mL]": finite_or_none(self.fwhm),
            "position standard error [mL]": finite_or_none(self.stderr),
            "reason": self.reason,
        }


@dataclass(frozen=True)
class MassFraction:
    """Mass fraction below or above a cut-off molar mass.

    Attributes
    ----------
    side : str
        ``"below"`` or ``"above"``.
    M : float
        The cut-off [g/mol].
    percent : float
        The fraction of the distribution's mass [%].
    """

    side: str
    M: float
    percent: float

    @property
    def column(self) -> str:
        """The result column, ``mass below 1000 g/mol [%]`` (:func:`gpctools.columns.mass_fraction_column`)."""
        return C.mass_fraction_column(self.side, self.M)


def _nan_if_none(x: float | None) -> float:
    return float("nan") if x is None else float(x)


@dataclass(frozen=True, repr=False)
class InjectionResult(Display):
    """Everything computed for one injection.

    Attributes
    ----------
    sample_id, file : str
    distribution : Distribution
    corrected : CorrectedSignal
        Baseline-corrected trace on the flow-corrected volume axis.
    marker_observed : float or None
        Observed flow-marker position [mL] (from the sheet or found in the search window);
        None when there is none or none was found.
    flow_factor : float
        Volume correction factor reference/observed [-] (1 without a marker).
    Mn_shift_pct, Mw_shift_pct : float
        Change of Mn and Mw when the low-M (high-volume) integration limit is moved
        ``limit_shift`` mL earlier [%], over the same slices as the averages (so with
        ``outside = "exclude"`` the slices the averages drop stay dropped); a large Mn
        change with a small Mw change points to a low-M tail or system peak inside the
        limits (docs/science.md, section 9).
    limit_shift : float
        That move of the low-M limit [mL] (method key ``thresholds.limit_shift``).
    scale : str
        Molar-mass scale (absolute or standard-equivalent).
    warnings : tuple of str
    metadata : dict
        Free-text metadata of the export file.
    marker : MarkerSearch or None
        How the marker was found or given (None for results built by hand).
    uncertainty : AverageUncertainty or None
        Relative standard uncertainties u(X)/X [-] (fractions, not %) of Mn, Mw and Mz by
        source: ``uncertainty.Mn.calibration``, ``.noise``, ``.limits`` and the combined
        ``.total`` (docs/science.md, section 19.7). The calibration part is common to
        every injection on the same calibration; the shortcuts below give the totals.
    peaks : Peaks or None
        Maxima and valleys of the trace by the method's valley criterion.
    parts : tuple of PeakPart
        The trace split into peaks (empty unless ``[peaks] split`` asks for it).
    fractions : tuple of MassFraction
        Mass below/above the method's cut-offs.
    detectors : gpctools.detectors.DetectorResult or None
        Light scattering, viscometry, composition and broadening-corrected averages when
        the method has ``[detectors]`` (columns :data:`gpctools.columns.DETECTOR_COLUMNS`).
    """

    sample_id: str
    file: str
    distribution: Distribution
    corrected: CorrectedSignal
    marker_observed: float | None
    flow_factor: float
    Mn_shift_pct: float
    Mw_shift_pct: float
    limit_shift: float
    scale: str
    warnings: tuple[str, ...] = ()
    metadata: dict[str, str] = field(default_factory=dict)
    marker: MarkerSearch | None = None
    uncertainty: AverageUncertainty | None = None
    peaks: Peaks | None = None
    parts: tuple[PeakPart, ...] = ()
    fractions: tuple[MassFraction, ...] = ()
    detectors: Any = None

    # -- the uncertainties issue 11 consumes (relative, fractions [-]) ------------------
    @property
    def u_Mn(self) -> float:
        """Combined relative standard uncertainty of Mn, u(Mn)/Mn [-] (NaN if unknown)."""
        return self.uncertainty.Mn.total if self.uncertainty else math.nan

    @property
    def u_Mw(self) -> float:
        """Combined relative standard uncertainty of Mw, u(Mw)/Mw [-] (NaN if unknown)."""
        return self.uncertainty.Mw.total if self.uncertainty else math.nan

    @property
    def u_Mn_calibration(self) -> float:
        """Calibration part of u(Mn)/Mn [-]: shared by every run on the same calibration."""
        return self.uncertainty.Mn.calibration if self.uncertainty else math.nan

    @property
    def u_Mw_calibration(self) -> float:
        """Calibration part of u(Mw)/Mw [-]: shared by every run on the same calibration."""
        return self.uncertainty.Mw.calibration if self.uncertainty else math.nan

    def row(self) -> dict[str, Any]:
        """Result-table row; columns as in :data:`RESULT_COLUMNS` (:mod:`gpctools.columns`).

        Headers never depend on a setting: the low-M limit move is its own column,
        ``low-M limit shift [mL]``; peaks always have the columns of peaks 1-3 (empty when
        the trace is not split). The one exception by design are the mass fractions, named
        by their cut-off (``mass below 1000 g/mol [%]``), which come after ``outside
        calibration [% mass]`` in the order of the method's ``[fractions]``.
        """
        d = self.distribution
        bw = self.corrected.baseline.windows
        lim = self.corrected.limits
        row: dict[str, Any] = {
            C.SAMPLE_ID: self.sample_id,
            C.FILE: self.file,
            C.STATUS: "ok",
            C.MN: d.Mn,
            C.MW: d.Mw,
            C.MZ: d.Mz,
            C.MZ1: d.Mz1,
            C.MP: d.Mp,
            C.MP_DWDLOGM: d.Mp_dwdlogM,
            C.DISPERSITY: d.dispersity,
        }
        for avg in UNCERTAIN_AVERAGES:
            u = self.uncertainty.of(avg) if self.uncertainty else None
            for source in ("", "calibration", "noise", "limits"):
                value = math.nan if u is None else (u.total if source == "" else getattr(u, source))
                row[C.uncertainty_column(avg, source)] = 100.0 * value
        row[C.OUTSIDE_CALIBRATION] = 100.0 * d.outside_fraction
        for frac in self.fractions:
            row[frac.column] = frac.percent
        row[C.PEAKS] = self.peaks.count if self.peaks is not None else math.nan
        splits = [p.M_lower for p in self.parts if p.M_lower is not None]
        for n, col in enumerate(C.PEAK_SPLIT_COLUMNS):
            row[col] = float(splits[n]) if n < len(splits) else math.nan
        for n in range(1, C.MAX_PEAK_COLUMNS + 1):
            part = self.parts[n - 1] if n <= len(self.parts) else None
            for q in C.PEAK_QUANTITIES:
                value = math.nan if part is None else (part.area_pct if q == "area" else getattr(part, q))
                row[C.peak_column(n, q)] = value
        row.update({
            # ranges as numbers (the limits' columns come from the batch, with M at each end)
            C.INTEGRATION_START: float(lim[0]),
            C.INTEGRATION_END: float(lim[1]),
            C.LIMITS_CHOICE: "automatic" if self.corrected.automatic_limits else "set",
            C.BASELINE_1_START: float(bw[0][0]),
            C.BASELINE_1_END: float(bw[0][1]),
            C.BASELINE_2_START: float(bw[1][0]),
            C.BASELINE_2_END: float(bw[1][1]),
            C.BASELINE_CHOICE: "automatic" if self.corrected.baseline.automatic else "set",
            C.FLOW_MARKER: _nan_if_none(self.marker_observed),
            C.FLOW_MARKER_STATUS: self.marker.status if self.marker is not None else (
                MARKER_GIVEN if self.marker_observed is not None else MARKER_NOT_USED),
            C.FLOW_FACTOR: self.flow_factor,
            C.MN_SHIFT_LOW_M: self.Mn_shift_pct,
            C.MW_SHIFT_LOW_M: self.Mw_shift_pct,
            C.LIMIT_SHIFT: self.limit_shift,
            C.SCALE: self.scale,
            C.WARNINGS: "; ".join(self.warnings),
            C.ERROR: "",
        })
        if self.detectors is not None:
            row.update(self.detectors.row())
        return row

    def _display_items(self) -> list[tuple[str, Any]]:
        """Headline values of ``repr`` and the notebook table (:mod:`gpctools.display`)."""
        d = self.distribution
        items: list[tuple[str, Any]] = [(C.SAMPLE_ID, self.sample_id), (C.MN, d.Mn), (C.MW, d.Mw), (C.MZ, d.Mz),
                                        (C.MP, d.Mp), (C.DISPERSITY, d.dispersity),
                                        (C.uncertainty_column("Mn"), 100.0 * self.u_Mn),
                                        (C.uncertainty_column("Mw"), 100.0 * self.u_Mw),
                                        (C.OUTSIDE_CALIBRATION, 100.0 * d.outside_fraction),
                                        (C.FLOW_MARKER, self.marker_observed), (C.SCALE, self.scale)]
        if self.warnings:
            items.append(("warnings", str(len(self.warnings))))
        return [(k, v) for k, v in items if v is not None]

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe description of the injection and its results."""
        from .sheets.cells import finite_or_none

        return {
            C.SAMPLE_ID: self.sample_id,
            C.FILE: self.file,
            "distribution": self.distribution.summary(),
            "signal": self.corrected.summary(),
            C.FLOW_MARKER: self.marker_observed,
            "flow marker search": self.marker.summary() if self.marker is not None else None,
            C.FLOW_FACTOR: self.flow_factor,
            "Mn shift [%]": finite_or_none(self.Mn_shift_pct),
            "Mw shift [%]": finite_or_none(self.Mw_shift_pct),
            C.LIMIT_SHIFT: self.limit_shift,
            "uncertainty": self.uncertainty.summary() if self.uncertainty is not None else None,
            "peaks": self.peaks.summary() if self.peaks is not None else None,
            "peak parts": [p.summary() for p in self.parts],
            "fractions": {f.column: finite_or_none(f.percent) for f in self.fractions},
            C.SCALE: self.scale,
            "detectors": self.detectors.summary() if self.detectors is not None else None,
            C.WARNINGS: list(self.warnings),
        }


# -- flow marker ----------------------------------------------------------------------------
def _half_height_run(V: np.ndarray, sm: np.ndarray, i0: int) -> tuple[float, bool]:
    """Full width at half height of the smoothed peak at i0 [mL], and whether it fits the window.

    The crossings are interpolated linearly between slices; a run that reaches either
    end of the window does not fit (the peak is cut off, or it is a baseline hump).
    """
    half = 0.5 * sm[i0]
    below = np.flatnonzero(sm < half)
    left = below[below < i0]
    right = below[below > i0]
    if not left.size or not right.size:
        return math.nan, False
    a, b = int(left[-1]), int(right[0])
    va = V[a] + (half - sm[a]) * (V[a + 1] - V[a]) / (sm[a + 1] - sm[a])
    vb = V[b - 1] + (half - sm[b - 1]) * (V[b] - V[b - 1]) / (sm[b] - sm[b - 1])
    return float(vb - va), True


@dataclass(frozen=True)
class _MarkerCandidate:
    """The largest excursion in the search window: its smoothed height [signal units],
    width at half height [mL], whether it lies wholly inside the window, and the top fit.
    """

    height: float
    fwhm: float
    inside: bool
    position: float
    stderr: float
    fitted: bool
    spacing: float


def _marker_candidate(volume: np.ndarray, signal: np.ndarray, window: tuple[float, float]) -> _MarkerCandidate:
    """Geometry of the best marker candidate in ``window`` (see :func:`_find_marker`)."""
    m = (volume >= window[0]) & (volume <= window[1])
    if m.sum() < 5:
        raise DataError(
            f"flow-marker search window {window[0]:g}-{window[1]:g} mL holds too few slices; "
            "set flow_marker.search around the marker peak"
        )
    order = np.argsort(volume[m], kind="stable")
    V = volume[m][order]
    h = signal[m][order]
    k = max(1, V.size // 20)
    line = np.interp(V, [_mean(V[:k]), _mean(V[-k:])], [_mean(h[:k]), _mean(h[-k:])])
    dev = h - line
    from .distribution import _smoothed

    reach = max(3, V.size // 50)
    sm = _smoothed(dev, reach)
    if abs(sm.min()) > abs(sm.max()):
        dev, sm = -dev, -sm
    i0 = int(np.argmax(sm))
    # the width on a light (3-point) smoothing, so that a one-slice spike stays narrow
    narrow = _smoothed(dev, 3)
    lo = max(0, i0 - reach)
    j0 = lo + int(np.argmax(narrow[lo: i0 + reach + 1]))
    fwhm, inside = _half_height_run(V, narrow, j0)
    top = peak_top(V, dev, fraction=0.5)
    spacing = _median(np.diff(V)) if V.size > 1 else 0.0
    return _MarkerCandidate(float(sm[i0]), fwhm, inside, float(top.position), float(top.stderr),
                            bool(top.fitted and window[0] < top.position < window[1]), spacing)


def _judge_marker(
    cand: _MarkerCandidate, window: tuple[float, float], noise: float, options: FlowMarkerOptions
) -> MarkerSearch:
    """Accept or refuse a candidate by height over ``noise`` [signal units], width and fit."""
    snr = cand.height / noise if noise > 0 else math.inf
    lo, hi = options.fwhm if options.fwhm is not None else (5.0 * cand.spacing, 0.5 * (window[1] - window[0]))
    reason = ""
    if not snr >= options.min_signal_to_noise:
        reason = (f"the largest peak stands {snr:.1f} noise SDs high, {options.min_signal_to_noise:g} needed "
                  "(flow_marker.min_signal_to_noise)")
    elif not cand.inside:
        reason = "the largest peak is cut off by the search window or is a baseline hump"
    elif not (lo <= cand.fwhm <= hi):
        reason = (f"the largest peak is {cand.fwhm:.3g} mL wide at half height, outside the plausible "
                  f"{lo:.3g}-{hi:.3g} mL (flow_marker.fwhm)")
    elif not cand.fitted:
        reason = "no maximum could be fitted over the top of the largest peak"
    if reason:
        return MarkerSearch(MARKER_NOT_FOUND, None, snr, cand.fwhm, math.nan, reason)
    return MarkerSearch(MARKER_FOUND, cand.position, snr, cand.fwhm, cand.stderr, "")


def _find_marker(
    volume: np.ndarray,
    signal: np.ndarray,
    window: tuple[float, float],
    *,
    noise: float,
    options: FlowMarkerOptions | None = None,
) -> MarkerSearch:
    """Recognise and locate the flow-marker peak inside ``window`` [mL].

    A straight line through the means of the window's first and last 5 % is removed; the
    larger deviation (positive or negative: refractive-index markers are often negative)
    is the candidate. It is accepted as the marker only when (docs/science.md, section 19.1)

    * its height (on a moving average of n/50 points) is at least
      ``options.min_signal_to_noise`` times ``noise`` (the noise SD of the trace
      [signal units], :func:`_marker_noise`);
    * its full width at half height (on a 3-point moving average) lies in
      ``options.fwhm`` (default: 5 slice spacings to half the window [mL]: a spike of a
      slice or two is not a marker, nor is a hump as wide as the window) and the peak
      lies wholly inside the window;
    * a maximum can be fitted over its top.

    The position is the maximum of a cubic in ln(height) fitted by weighted least squares
    over the points above half height (:func:`gpctools.distribution.peak_top`), not the
    highest raw point: 3 raw points follow the noise (issue 10 measured 0.006 min on a
    0.3 % pump error).

    Returns
    -------
    MarkerSearch
        Status ``"found"`` with the position, or ``"not found"`` with the reason.
    """
    return _judge_marker(_marker_candidate(volume, signal, window), window, noise, options or FlowMarkerOptions())


def _marker_noise(V: np.ndarray, h: np.ndarray, method: Method, white: float | None = None) -> float:
    """Noise SD of the raw trace for marker recognition [signal units].

    The larger of the point-to-point (white) estimate over the whole record and the
    residual SD about a provisional baseline fitted with the search window excluded:
    the second also sees slow, correlated noise, which differences cannot, so a wander
    of the baseline is not taken for a marker.
    """
    sigma = noise_level(h) if white is None else float(white)
    search = method.marker_search
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", GpcWarning)
            base = fit_baseline(V, h, method.windows, exclusions=(*method.exclusions, *(search and [search] or [])),
                                noise=sigma, search=(method.calibration.v_min, method.calibration.v_max))
        sigma = max(sigma, base.noise)
    except GpcError:
        pass
    return float(sigma)


def _flow_correction(
    V: np.ndarray, h: np.ndarray, method: Method, marker_observed: float | None, file: str
) -> tuple[float, MarkerSearch]:
    """The volume factor V_ref/V_obs [-] and how the marker was obtained (given, found or not)."""
    if marker_observed is not None:
        marker = MarkerSearch(MARKER_GIVEN, float(marker_observed))
    elif method.marker_search is not None:
        # The white-noise SD is cheap and never larger than the full estimate: a candidate
        # it already refuses is refused; only a candidate it accepts is judged again.
        cand = _marker_candidate(V, h, method.marker_search)
        white = noise_level(h)
        marker = _judge_marker(cand, method.marker_search, white, method.marker)
        if marker.status == MARKER_FOUND:
            marker = _judge_marker(cand, method.marker_search, _marker_noise(V, h, method, white), method.marker)
        if marker.status == MARKER_NOT_FOUND:
            where = f"{file}: " if file else ""
            text = (f"{where}no flow marker recognised in {method.marker_search[0]:g}-"
                    f"{method.marker_search[1]:g} mL ({marker.reason})")
            if method.marker.required:
                raise DataError(text + "; flow_marker.required = true, so the injection is not processed")
            warnings.warn(text + "; volumes not corrected (flow correction factor 1). Give the position in "
                          "the batch sheet ('flow marker [mL]') or adjust [flow_marker]", SignalWarning,
                          stacklevel=3)
            return 1.0, marker
    else:
        return 1.0, MarkerSearch(MARKER_NOT_USED)
    obs = marker.position
    if method.marker_reference is None:
        raise DataError("a flow-marker position was given but the method has no flow_marker.reference")
    if obs is None or not (math.isfinite(obs) and obs > 0):
        raise DataError(f"flow-marker position must be a positive volume, got {obs!r}")
    factor = method.marker_reference / obs
    if abs(factor - 1.0) > 0.05:
        raise DataError(
            f"flow marker at {obs:.3f} mL is more than 5 % from the reference "
            f"{method.marker_reference:.3f} mL: check the marker peak or the search window"
        )
    return factor, marker


# -- one trace ------------------------------------------------------------------------------
def _low_m_shift(dist: Distribution, cs: CorrectedSignal, shift: float) -> dict[str, float]:
    """Averages [g/mol] with the low-M limit moved ``shift`` mL earlier, over the slices
    the averages used (exclusions and the outside rule applied alike).
    """
    keep = dist.volume <= cs.limits[1] - shift
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", GpcWarning)
            values, _ = averages_with_reasons(dist.M[keep], dist.w[keep])
    except DataError:
        values = {k: math.nan for k in ("Mn", "Mw", "Mz", "Mz1", "dispersity")}
    return values


def _peaks_and_parts(
    V: np.ndarray, cs: CorrectedSignal, dist: Distribution, method: Method
) -> tuple[Peaks, tuple[PeakPart, ...]]:
    """Peaks by the valley criterion, and the split the method asks for (warns on several
    peaks reported as one).
    """
    opts = method.peaks
    peaks = find_peaks(V, cs.signal, mask=cs.mask, valley_depth=opts.valley_depth, min_height=opts.min_height)
    parts: tuple[PeakPart, ...] = ()
    if opts.split == "valleys":
        split_M = [float(method.calibration.M(v)) for v in peaks.valleys]
        parts = split_distribution(dist, method.calibration, split_M)
    elif isinstance(opts.split, tuple):
        parts = split_distribution(dist, method.calibration, opts.split)
    elif peaks.count > 1:
        valleys = ", ".join(f"{v:.3f} mL ({float(method.calibration.M(v)):.4g} g/mol)" for v in peaks.valleys)
        warnings.warn(
            f"the trace has {peaks.count} peaks (valleys at {valleys}) but is reported as one: the "
            "averages cover all of them; set [peaks] split = \"valleys\" for averages per peak",
            SignalWarning, stacklevel=3)
    if len(parts) > C.MAX_PEAK_COLUMNS:
        warnings.warn(f"{len(parts)} peaks: the result columns show the first {C.MAX_PEAK_COLUMNS} "
                      "(all are in the injection's summary)", SignalWarning, stacklevel=3)
    for part in parts:
        for text in part.missing.values():
            warnings.warn(text, SignalWarning, stacklevel=3)
    return peaks, parts


def _mass_fractions(dist: Distribution, method: Method) -> tuple[MassFraction, ...]:
    """Mass below/above the method's cut-offs [%], with a note for a cut-off outside the
    molar masses integrated (where the answer is 0 or 100 % by the limits alone).
    """
    out = []
    lo, hi = float(dist.M.min()), float(dist.M.max())
    for side, cuts in (("below", method.fractions.below), ("above", method.fractions.above)):
        for M in cuts:
            below = mass_fraction_below(dist, M)
            out.append(MassFraction(side, float(M), 100.0 * (below if side == "below" else 1.0 - below)))
            if not lo < M < hi:
                warnings.warn(
                    f"cut-off {C.format_molar_mass(M)} g/mol lies outside the molar masses integrated "
                    f"({lo:.4g}-{hi:.4g} g/mol): the mass {side} it is set by the integration limits",
                    SignalWarning, stacklevel=3)
    return tuple(out)


def process_trace(
    volume: Any,
    signal: Any,
    method: Method,
    *,
    sample_id: str = "",
    file: str = "",
    marker_observed: float | None = None,
    metadata: dict[str, str] | None = None,
) -> InjectionResult:
    """Process one trace already on the volume axis (see :func:`process_injection`).

    Steps: flow marker (:func:`_flow_correction`), baseline and limits with the main peak
    searched inside the calibrated range (:func:`gpctools.signal.correct_signal`),
    distribution (:func:`gpctools.distribution.compute_distribution`), low-M limit
    sensitivity (:func:`_low_m_shift`), uncertainty
    (:func:`gpctools.uncertainty.average_uncertainty`), peaks (:func:`_peaks_and_parts`)
    and mass fractions (:func:`_mass_fractions`). Every :class:`~gpctools.errors.GpcWarning`
    raised on the way ends up in ``warnings``.
    """
    V = np.asarray(volume, dtype=float)
    h = np.asarray(signal, dtype=float)
    cal = method.calibration
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", GpcWarning)
        factor, marker = _flow_correction(V, h, method, marker_observed, file)
        V = V * factor
        cs = correct_signal(V, h, windows=method.windows, limits=method.volume_limits(),
                            exclusions=method.exclusions, search=(cal.v_min, cal.v_max))
        dist = compute_distribution(
            V, cs.signal, cal, mask=cs.mask,
            outside=method.outside, outside_warn_pct=method.outside_warn_pct,
        )
        shifted = _low_m_shift(dist, cs, method.limit_shift)
        mn_shift = 100.0 * (shifted["Mn"] / dist.Mn - 1.0)
        mw_shift = 100.0 * (shifted["Mw"] / dist.Mw - 1.0)
        unc = average_uncertainty(dist, cal, noise_sd=cs.baseline.noise, baseline=cs.baseline,
                                  shifted=shifted, limit_shift=method.limit_shift)
        peaks, parts = _peaks_and_parts(V, cs, dist, method)
        fractions = _mass_fractions(dist, method)
    notes = tuple(dict.fromkeys(str(w.message) for w in caught if issubclass(w.category, GpcWarning)))
    for w in caught:
        if not issubclass(w.category, GpcWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return InjectionResult(
        sample_id=sample_id,
        file=file,
        distribution=dist,
        corrected=cs,
        marker_observed=marker.position,
        flow_factor=factor,
        Mn_shift_pct=mn_shift,
        Mw_shift_pct=mw_shift,
        limit_shift=method.limit_shift,
        scale=cal.scale_label(),
        warnings=notes,
        metadata=dict(metadata or {}),
        marker=marker,
        uncertainty=unc,
        peaks=peaks,
        parts=parts,
        fractions=fractions,
    )


def process_injection(
    path: str | Path,
    method: Method,
    *,
    sample_id: str | None = None,
    marker_observed: float | None = None,
    injected_mass: float | None = None,
) -> InjectionResult:
    """Read and process one slice export.

    Steps: read (:func:`gpctools.io.read_chromatogram` with the method's import options),
    convert time to volume with the flow rate, then :func:`process_trace`: correct volumes
    with the flow marker when one is recognised (V_corr = V·V_ref/V_obs, docs/science.md,
    sections 2.2 and 19.1), subtract the baseline, apply limits and exclusions with the
    polymer peak searched inside the calibrated range
    (:func:`gpctools.signal.correct_signal`), compute the distribution and averages
    (:func:`gpctools.distribution.compute_distribution`), the Mn/Mw sensitivity to the
    low-M limit, the uncertainty of Mn, Mw and Mz, the peaks and the mass fractions.

    Parameters
    ----------
    path : str or Path
        The export file.
    method : Method
    sample_id : str, optional
        Defaults to the file stem.
    marker_observed : float, optional
        Observed flow-marker position [mL]; otherwise searched for when the method has
        ``flow_marker.search``.
    injected_mass : float, optional
        Polymer mass injected [mg]: ``mass recovery [%]`` with ``[detectors]``
        (:func:`gpctools.detectors.pipeline.analyse_injection`).

    Raises
    ------
    GpcError
        Any reading or processing problem, with the file named.
    """
    from .io import read_chromatogram
    from .io.describe import response_note

    p = Path(path)
    extra = {"channels": "all"} if method.detectors is not None else {}
    chrom = read_chromatogram(p, **method.import_options.as_kwargs(), **extra)
    V = chrom.to_volume(method.flow_rate)
    try:
        res = process_trace(
            V, chrom.signal, method,
            sample_id=sample_id if sample_id is not None else p.stem,
            file=str(path), marker_observed=marker_observed, metadata=chrom.metadata,
        )
        if method.detectors is not None:  # [detectors]: gpctools.detectors.pipeline (issue 16)
            from .detectors.pipeline import for_injection

            found = for_injection(chrom, V, res, method, injected_mass_mg=injected_mass)
            res = replace(res, detectors=found, warnings=(*res.warnings, *found.warnings))
        elif injected_mass is not None:
            res = replace(res, warnings=(*res.warnings, "injected mass given but the method has no [detectors] "
                                                        "with a constant for the concentration detector: no mass "
                                                        "recovery"))
    except GpcError as exc:
        if exc.path is None:
            exc.path = str(path)
        raise
    note = response_note(chrom.signal_column)  # UV or ELSD taken as mass concentration
    if note is not None:  # listed with the injection's other warnings (as process_trace does)
        res = replace(res, warnings=(*res.warnings, note))
    return res


# -- the batch sheet ----------------------------------------------------------------------
@dataclass(frozen=True)
class BatchEntry:
    """One row of the batch sheet, checked.

    Attributes
    ----------
    row : int
        The sheet row (1-based, as the user counts).
    sample_id, file : str
        As written (``sample_id`` is ``"(row N)"`` when the cell is empty).
    path : Path
        The export, resolved against the sheet's folder.
    role : str
        ``sample``, ``check_standard`` or ``blank``.
    marker_observed : float or None
        Observed flow-marker position [mL].
    metadata : dict
        The sheet's other columns (``None`` for blank cells).
    problem : str or None
        Why the row cannot be processed (it becomes an error row of the batch).
    method_file : str
        The ``method file`` cell as written (``""``: the batch's default method).
    method_path : Path or None
        That method file, resolved against the sheet's folder.
    overrides : MethodOverrides
        Settings the row changes in its method (limits, baseline windows).
    injected_mass : float or None
        Polymer mass injected [mg] (``injected mass [mg]``, or ``concentration [mg/mL]``
        × ``injection volume [µL]``/1000).
    """

    row: int
    sample_id: str
    file: str
    path: Path
    role: str
    marker_observed: float | None
    metadata: dict[str, Any]
    problem: str | None = None
    method_file: str = ""
    method_path: Path | None = None
    overrides: MethodOverrides = field(default_factory=MethodOverrides)
    injected_mass: float | None = None


def read_batch_sheet(path: str | Path, *, sheet: str | int | None = None) -> list[BatchEntry]:
    """Read and check a batch sheet (schema :data:`gpctools.sheets.BATCH`).

    Parameters
    ----------
    path : str or Path
        The batch sheet (CSV or XLSX); export and method paths are relative to its folder.
    sheet : str or int, optional
        Workbook sheet (name or 0-based index).

    Returns
    -------
    list of BatchEntry
        One per injection row, in sheet order.

    Raises
    ------
    InputFormatError
        The sheet cannot be read, lacks the ``sample_id`` or ``file`` column, or has no
        rows. Problems of single rows (empty file cell, unknown role, bad marker value, an
        override pair given half, limits in mL and g/mol in one row, a limit start after
        its end) do not raise: the entry carries a ``problem`` and becomes an error row of
        the batch.

    Warns
    -----
    InputWarning
        Sample ids used on more than one row: they are treated as replicate injections
        of one sample (issue 9).
    """
    entries, notes = _read_sheet(path, sheet)
    for note in notes:
        warnings.warn(note, InputWarning, stacklevel=2)
    return entries


def _read_sheet(path: str | Path, sheet: str | int | None) -> tuple[list[BatchEntry], list[str]]:
    """The entries of a batch sheet and the warnings about it (see :func:`read_batch_sheet`)."""
    from .sheets import BATCH, read_file

    p = Path(path)
    table = read_file(p, BATCH, sheet=sheet, collect=True)
    entries = []
    for row in table.rows:
        sid = row["sample_id"] or f"(row {row.row})"
        f = row["file"]
        fp = (p.parent / f) if f else p.parent
        overrides, problem = _row_overrides(row, table.columns)
        mass, mass_problem = _row_injected_mass(row, table.columns)
        mf = row.get("method_file") or ""
        entries.append(BatchEntry(row.row, sid, f, fp, row.get("role", _sheet.ROLE_SAMPLE),
                                  row.get("flow_marker"), dict(row.metadata), row.problem or problem or mass_problem,
                                  mf, (p.parent / mf) if mf else None, overrides, mass))
    note = _replicate_note(entries, table.rows, p)
    return entries, ([] if note is None else [note])


def _row_injected_mass(row: Any, columns: Any) -> tuple[float | None, str | None]:
    """The injected mass of a row [mg] and the problem with it, as one line (or None).

    ``injected mass [mg]``, or ``concentration [mg/mL]`` × ``injection volume [µL]``/1000
    (mg/mL × µL = µg); both pair cells or neither; with both ways given they must agree
    within 1 %.
    """
    from .sheets import BATCH

    def header(name: str) -> str:
        return columns.header(name) or BATCH.field(name).header

    given = row.get("injected_mass")
    c_name, v_name = _sheet.INJECTED_MASS_PAIR
    c, v = row.get(c_name), row.get(v_name)
    if (c is None) != (v is None):
        empty = c_name if c is None else v_name
        return None, str(row.error(
            f"the injected mass needs {header(c_name)!r} and {header(v_name)!r}; fill "
            f"{header(empty)!r}, or give {header('injected_mass')!r} instead", header(empty)))
    from_pair = None if c is None else float(c) * float(v) / 1000.0
    if given is not None and from_pair is not None and abs(float(given) / from_pair - 1.0) > 0.01:
        return None, str(row.error(
            f"{header('injected_mass')!r} is {float(given):g} mg but {header(c_name)!r} x {header(v_name)!r} "
            f"gives {from_pair:g} mg: correct one of them, or empty one way", header("injected_mass")))
    return (float(given) if given is not None else from_pair), None


def _row_overrides(row: Any, columns: Any) -> tuple[MethodOverrides, str | None]:
    """The overrides a batch-sheet row gives, or (no overrides, the problem as one line).

    Each group of columns (:data:`gpctools.sheets.batch.OVERRIDE_PAIRS`) is given whole
    or not at all; limits in mL and in molar mass exclude each other; a start must lie
    below its end (checked by :class:`~gpctools.method.MethodOverrides`).
    """
    from .sheets import BATCH

    def header(name: str) -> str:
        return columns.header(name) or BATCH.field(name).header

    got: dict[str, list[float]] = {}
    for what, names in _sheet.OVERRIDE_PAIRS:
        values = [row.get(n) for n in names]
        given = [v is not None for v in values]
        if not any(given):
            continue
        if not all(given):
            empty = [header(n) for n, ok in zip(names, given) if not ok]
            filled = [header(n) for n, ok in zip(names, given) if ok]
            listed = " and ".join(repr(header(n)) for n in names)
            return MethodOverrides(), str(row.error(
                f"{what} need {listed}; {', '.join(repr(h) for h in filled)} is filled but "
                f"{', '.join(repr(h) for h in empty)} is empty: fill it, or empty the group to "
                "use the method's setting", empty[0]))
        got[what] = [float(v) for v in values]
    mL = got.get("integration limits in mL")
    gmol = got.get("integration limits in molar mass")
    bw = got.get("baseline windows")
    first_col = header("limit_low_M") if gmol else header("limit_start") if mL else header("baseline_1_start")
    try:
        return MethodOverrides(
            limits=(mL[0], mL[1]) if mL else None,
            limits_M=(gmol[0], gmol[1]) if gmol else None,
            windows=((bw[0], bw[1]), (bw[2], bw[3])) if bw else None,
        ), None
    except MethodError as exc:
        if mL and gmol:
            msg = (f"give the integration limits of one row in mL ({header('limit_start')!r}, "
                   f"{header('limit_end')!r}) or in molar mass ({header('limit_low_M')!r}, "
                   f"{header('limit_high_M')!r}), not both")
        else:
            msg = exc.message
        return MethodOverrides(), str(row.error(msg, first_col))


def _replicate_note(entries: list[BatchEntry], rows: Any, path: Path) -> str | None:
    """The warning for sample ids used on several rows (None when every id is unique)."""
    seen: dict[str, list[int]] = {}
    for e, r in zip(entries, rows):
        if r["sample_id"]:
            seen.setdefault(e.sample_id, []).append(e.row)
    repeated = {k: v for k, v in seen.items() if len(v) > 1}
    if not repeated:
        return None
    listed = "; ".join(f"{k!r} (rows {', '.join(str(n) for n in v)})" for k, v in repeated.items())
    return (f"{path}: sample ids on more than one row: {listed}; they are treated as replicate "
            "injections of one sample (reported per injection, averaged together in QC); if "
            "some are different samples, give them different ids")


# -- running a batch ----------------------------------------------------------------------
#: Receives each processed injection: ``on_result(entry, result)``, called in the process
#: that computed it (a worker process when ``workers > 1``, so it must then be picklable:
#: a module-level function or an instance of a module-level class).
ResultSink = Callable[[BatchEntry, InjectionResult], None]

#: Receives each processed injection's binned distribution, ``on_curve(entry, curve)``,
#: in the process that runs the batch (see :func:`run_batch`).
CurveSink = Callable[[BatchEntry, DistributionCurve], None]


def _error_row(entry: BatchEntry, message: str, method: Method | None = None) -> dict[str, Any]:
    row = {C.SAMPLE_ID: entry.sample_id, C.FILE: entry.file, C.ROLE: entry.role, **entry.metadata}
    for c in RESULT_COLUMNS:
        row.setdefault(c, float("nan") if C.describe(c).unit else "")
    if method is not None:  # the method's mass-fraction columns, empty, so every row has them
        for side, cuts in (("below", method.fractions.below), ("above", method.fractions.above)):
            for M in cuts:
                row.setdefault(C.mass_fraction_column(side, M), float("nan"))
    row.update(_method_columns(entry, method))
    row[C.STATUS] = "error"
    row[C.ERROR] = message
    return _ordered(row, entry)


#: Status of the rows a batch leaves to ``gpctools qc`` (blanks, calibration standards).
NOT_PROCESSED = "not processed"


def _not_processed_row(entry: BatchEntry, method: Method | None) -> dict[str, Any]:
    """The row of a blank or a calibration standard: no averages (a blank has no polymer
    peak, a standards mixture is not one polymer); ``gpctools qc`` judges blanks against
    the product peaks and builds the sequence's calibration from the standards.
    """
    row = _error_row(entry, "", method)
    row[C.STATUS] = NOT_PROCESSED
    row[C.WARNINGS] = (f"{entry.role}: no averages; gpctools qc "
                       + ("judges blanks against the product peaks" if entry.role == _sheet.ROLE_BLANK
                          else "builds the sequence's calibration from these injections"))
    return row


def _ordered(row: dict[str, Any], entry: BatchEntry) -> dict[str, Any]:
    """The sheet's own columns, then :data:`RESULT_COLUMNS` in order (the mass-fraction
    columns of the row's method right after ``outside calibration``), then any others.
    """
    fractions = [k for k in row if C.is_mass_fraction_column(k)]
    i = RESULT_COLUMNS.index(C.OUTSIDE_CALIBRATION) + 1
    front = [C.SAMPLE_ID, C.FILE, C.ROLE, *entry.metadata, *RESULT_COLUMNS[:i], *fractions, *RESULT_COLUMNS[i:]]
    out = {k: row[k] for k in front if k in row}
    out.update((k, v) for k, v in row.items() if k not in out)
    return out


def _method_columns(entry: BatchEntry, method: Method | None) -> dict[str, Any]:
    """``method file``, ``method SHA-256`` and ``overrides`` of a row (the audit trail)."""
    if entry.method_file:
        name = entry.method_file
    else:
        name = method.label if method is not None else ""
    return {
        C.METHOD_FILE: name,
        C.METHOD_SHA256: (method.sha256 or "") if method is not None else "",
        C.OVERRIDES: entry.overrides.describe(),
    }


def _limit_columns(res: InjectionResult, method: Method) -> dict[str, float]:
    """The integration limits used, as numbers [mL], and the molar mass at each [g/mol].

    The limits are on the flow-corrected volume axis, where the calibration applies, so
    ``M = calibration.M(V)`` (tangent continuation outside the calibrated range).
    """
    lo, hi = res.corrected.limits
    M_lo, M_hi = (float(m) for m in method.calibration.M([lo, hi]))
    return {C.INTEGRATION_START: float(lo), C.INTEGRATION_END: float(hi),
            C.M_AT_INTEGRATION_START: M_lo, C.M_AT_INTEGRATION_END: M_hi}


def _run_entry(
    entry: BatchEntry, method: Method | None, on_result: ResultSink | None, keep: bool,
    curve_step: float | None = None,
) -> tuple[dict[str, Any], InjectionResult | None, DistributionCurve | None]:
    """Process one entry with its method; returns (row, result-or-None, curve-or-None).
    Never raises for bad data.

    The row's overrides give a derived method (:meth:`~gpctools.method.Method.with_overrides`).
    ``on_result`` is called with each processed injection (not for failed rows); what it
    raises (e.g. a full disk) stops the batch. With ``curve_step`` the distribution is
    also binned on a log10 M grid of that width (:func:`gpctools.distribution.distribution_curve`),
    a few kB whatever the number of slices.
    """
    if entry.problem:
        return _error_row(entry, entry.problem, method), None, None
    if entry.role in (_sheet.ROLE_BLANK, _sheet.ROLE_CALIBRATION):
        return _not_processed_row(entry, method), None, None
    if method is None:
        return _error_row(entry, "no method for this injection: fill its 'method file' cell or give "
                                 "a method for the whole batch"), None, None
    try:
        used = method.with_overrides(entry.overrides)
        res = process_injection(entry.path, used, sample_id=entry.sample_id, marker_observed=entry.marker_observed,
                                injected_mass=entry.injected_mass)
        limits = _limit_columns(res, used)
        curve = distribution_curve(res.distribution, curve_step) if curve_step is not None else None
    except GpcError as exc:
        return _error_row(entry, str(exc), method), None, None
    except Exception as exc:  # one bad injection must not sink the batch
        return _error_row(entry, f"{entry.path}: unexpected {type(exc).__name__}: {exc}", method), None, None
    row = {C.SAMPLE_ID: entry.sample_id, C.FILE: entry.file, C.ROLE: entry.role, **entry.metadata}
    row.update(res.row())
    row.update(limits)
    row.update(_method_columns(entry, method))
    row[C.FILE] = entry.file
    if on_result is not None:
        on_result(entry, res)
    return _ordered(row, entry), (res if keep else None), curve


def _worker(
    args: tuple[BatchEntry, Method | None, ResultSink | None, bool, float | None],
) -> tuple[dict[str, Any], InjectionResult | None, DistributionCurve | None]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return _run_entry(*args)


@dataclass(repr=False)
class BatchResult(Display):
    """Results of a batch: the table, the per-injection results and the inputs.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per injection, in sheet order (see :data:`RESULT_COLUMNS`).
    injections : list of InjectionResult or None
        Same order as the table; None for failed rows (or when not kept).
    entries : list of BatchEntry
    method : Method
        The batch's method: the one given to :func:`run_batch`, else the first method
        file the sheet names (its calibration is the one ``calibration.csv`` shows).
    sheet : str
        Path of the batch sheet.
    methods : dict of str to Method
        Every method the batch used, by its label (method file as written in the sheet,
        or the path of the default method); each row's ``method file`` column is one of
        these keys.
    warnings : tuple of str
        Warnings about the sheet (repeated sample ids).
    """

    table: Any
    injections: list[InjectionResult | None]
    entries: list[BatchEntry]
    method: Method
    sheet: str
    methods: dict[str, Method] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    @property
    def calibration(self):
        """The calibration of the batch's method."""
        return self.method.calibration

    @property
    def failed(self) -> int:
        """Number of injections whose status is error."""
        return int((self.table[C.STATUS] == "error").sum())

    def distributions(self) -> Any:
        """Every kept injection's distribution in one tidy long table (pandas DataFrame).

        One row per slice and injection: ``sample_id``, ``row`` (the sheet row, which
        tells replicate injections apart), ``file``, ``role``, the sheet's ``product``
        when it has one, then :data:`gpctools.distribution.TABLE_COLUMNS` (volume [mL],
        M [g/mol], log10 M [-], w [-], dw/dlogM [-], cumulative [-]). Ready for
        ``groupby("sample_id")`` or a plotting library's ``hue=``.

        Raises
        ------
        DataError
            No distribution was kept (``run_batch(..., keep_distributions=False)``: read
            the ``distributions/*.csv`` tables written by the batch instead).
        """
        import pandas as pd

        from .distribution import TABLE_COLUMNS

        parts = []
        for entry, res in zip(self.entries, self.injections):
            if res is None:
                continue
            d = res.distribution
            frame = pd.DataFrame(dict(zip(TABLE_COLUMNS, (d.volume, d.M, np.log10(d.M), d.w, d.dwdlogM,
                                                          d.cumulative))))
            meta: dict[str, Any] = {C.SAMPLE_ID: entry.sample_id, "row": entry.row, C.FILE: entry.file,
                                    C.ROLE: entry.role}
            if "product" in entry.metadata:
                meta["product"] = entry.metadata["product"]
            for k, (name, value) in enumerate(meta.items()):
                frame.insert(k, name, value)
            parts.append(frame)
        if not parts:
            raise DataError("no distribution was kept in this batch result: run_batch(..., "
                            "keep_distributions=True), or read the distributions/*.csv tables the batch wrote")
        return pd.concat(parts, ignore_index=True)

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "sheet": self.sheet,
            "injections": len(self.entries),
            "failed": self.failed,
            "method": self.method.summary(),
            "methods": [{C.METHOD_FILE: k, C.METHOD_SHA256: m.sha256, "name": m.name}
                        for k, m in self.methods.items()],
            "warnings": list(self.warnings),
        }


def _order_columns(df, meta_cols):
    front = [C.SAMPLE_ID, C.FILE, C.ROLE, *meta_cols]
    rest = [c for c in df.columns if c not in front]
    return df[[c for c in front if c in df.columns] + rest]


def _method_of(entry: BatchEntry, method: Method | None, methods: Mapping[str, Method] | None) -> Method | None:
    """The method a row runs with: its own method file (loaded in ``methods``) or the default."""
    if entry.method_path is not None:
        return (methods or {}).get(str(entry.method_path))
    return method


def iter_batch(
    entries: Iterable[BatchEntry],
    method: Method | None,
    *,
    methods: Mapping[str, Method] | None = None,
    workers: int | None = 1,
    on_result: ResultSink | None = None,
    keep: bool = True,
) -> Iterator[tuple[dict[str, Any], InjectionResult | None]]:
    """Yield (row, result) per entry in order; parallel over processes when workers > 1.

    Each entry runs with the method its ``method file`` names (looked up in ``methods``,
    keyed by the resolved path as text; loaded here with :func:`load_batch_methods` when
    ``methods`` is None) or, when it names none, with ``method``; its overrides are
    applied to that method.

    ``workers=None`` chooses: one process for fewer than 16 injections (starting worker
    processes costs about a second), otherwise one per core. ``on_result`` is
    called as ``on_result(entry, result)`` for every processed injection, in the process
    that computed it (see :data:`ResultSink`); ``keep=False`` then yields ``None`` results
    so that nothing but the rows reaches this process.
    """
    for row, res, _ in _iter_entries(entries, method, methods=methods, workers=workers,
                                     on_result=on_result, keep=keep):
        yield row, res


def _iter_entries(
    entries: Iterable[BatchEntry],
    method: Method | None,
    *,
    methods: Mapping[str, Method] | None = None,
    workers: int | None = 1,
    on_result: ResultSink | None = None,
    keep: bool = True,
    curve_step: float | None = None,
) -> Iterator[tuple[dict[str, Any], InjectionResult | None, DistributionCurve | None]]:
    """:func:`iter_batch` with the binned curve of each injection (``curve_step``) as a third item.

    Results stream: ``pool.map`` yields each chunk in order as it is done and nothing is
    kept here beyond what the caller keeps.
    """
    import os

    entries = list(entries)
    if methods is None and any(e.method_path is not None for e in entries):
        entries, methods = load_batch_methods(entries, method, "the batch sheet")
    jobs = [(e, _method_of(e, method, methods), on_result, keep, curve_step) for e in entries]
    if workers is None:
        workers = (os.cpu_count() or 1) if len(entries) >= 16 else 1
    if workers <= 1 or len(entries) < 4:
        for job in jobs:
            yield _run_entry(*job)
        return
    from concurrent.futures import ProcessPoolExecutor

    with ProcessPoolExecutor(max_workers=workers) as pool:
        # small chunks: the last ones finish close together, so no core idles at the end
        chunk = max(1, min(8, len(entries) // (workers * 4) or 1))
        yield from pool.map(_worker, jobs, chunksize=chunk)


def load_batch_methods(
    entries: list[BatchEntry], method: Method | None, sheet_path: str | Path
) -> tuple[list[BatchEntry], dict[str, Method]]:
    """Load every method file the sheet names, once each.

    Parameters
    ----------
    entries : list of BatchEntry
        From :func:`read_batch_sheet`.
    method : Method or None
        The default method, for rows whose ``method file`` cell is blank.
    sheet_path : str or Path
        The batch sheet (named in messages).

    Returns
    -------
    entries : list of BatchEntry
        The same rows; a row whose method file cannot be loaded carries that error as
        its ``problem`` (it becomes an error row: one bad method file does not stop the
        injections that use another).
    methods : dict of str to Method
        Loaded methods by resolved path (as text).

    Raises
    ------
    InputFormatError
        No default method and some rows name none (the message lists them).
    """
    from .method import load_method

    if method is None:
        missing = [e.row for e in entries if not e.method_file]
        if missing:
            shown = ", ".join(str(r) for r in missing[:10]) + (" ..." if len(missing) > 10 else "")
            hint = ""
            if any(k.strip().casefold() == "method" for e in entries for k in e.metadata):
                hint = (" (the sheet's 'method' column is kept as metadata; name it 'method file' "
                        "if it holds method files)")
            raise InputFormatError(
                f"no method for row(s) {shown}: give a method for the whole batch (gpctools "
                "batch --method METHOD.toml) or fill the 'method file' column of every row"
                + hint, path=str(sheet_path), column=C.METHOD_FILE)
    methods: dict[str, Method] = {}
    failed: dict[str, str] = {}
    out = []
    for e in entries:
        if e.method_path is None:
            out.append(e)
            continue
        key = str(e.method_path)
        if key not in methods and key not in failed:
            try:
                methods[key] = load_method(e.method_path)
            except GpcError as exc:
                failed[key] = f"method file {e.method_file!r} (row {e.row}, column {C.METHOD_FILE!r}): {exc}"
        if key in failed and not e.problem:
            e = replace(e, problem=failed[key])
        out.append(e)
    return out, methods


def run_batch(
    sheet_path: str | Path,
    method: Method | None = None,
    *,
    sheet: str | int | None = None,
    workers: int | None = 1,
    keep_distributions: bool = True,
    progress: Callable[[int, int], None] | None = None,
    on_result: ResultSink | None = None,
    on_curve: CurveSink | None = None,
    curve_step: float = CURVE_STEP,
) -> BatchResult:
    """Process every injection of a batch sheet.

    Parameters
    ----------
    sheet_path : str or Path
        The batch sheet (CSV or XLSX).
    method : Method, optional
        From :func:`gpctools.method.load_method`: the method of every row whose
        ``method file`` cell is blank. May be omitted when every row names its method
        file; each distinct file is then loaded once (:func:`load_batch_methods`).
    sheet : str or int, optional
        Workbook sheet of the batch sheet.
    workers : int or None
        Processes to use (1 = in this process, None = choose from the batch size and
        the number of cores).
    keep_distributions : bool
        Keep each :class:`InjectionResult` in memory (for plots and reports).
    progress : callable, optional
        Called as ``progress(done, total)`` after each injection.
    on_result : callable, optional
        Called as ``on_result(entry, result)`` as each injection finishes, in the process
        that computed it (see :data:`ResultSink`). Pass
        ``gpctools.report.DistributionWriter(folder)`` to write each distribution table
        while the batch runs; with ``keep_distributions=False`` memory then stays flat.
    on_curve : callable, optional
        Called as ``on_curve(entry, curve)`` in this process, in sheet order, with each
        processed injection's distribution binned on a log10 M grid of width
        ``curve_step`` (:class:`gpctools.distribution.DistributionCurve`, a few kB);
        ``gpctools.report.DistributionsTable`` writes them as one long-form table.
    curve_step : float
        Bin width of those curves in log10 M [-].

    Returns
    -------
    BatchResult
        Nothing is written; see :func:`gpctools.report.write_batch`.

    Raises
    ------
    InputFormatError
        The sheet cannot be read, or no method is given and some rows name none.
    """
    import pandas as pd

    entries, notes = _read_sheet(sheet_path, sheet)
    for note in notes:
        warnings.warn(note, InputWarning, stacklevel=2)
    entries, loaded = load_batch_methods(entries, method, sheet_path)
    used: dict[str, Method] = {}
    if method is not None and any(not e.method_file for e in entries):
        used[method.label] = method
    for e in entries:
        m = loaded.get(str(e.method_path)) if e.method_path is not None else None
        if m is not None:
            used.setdefault(e.method_file, m)
    main = method if method is not None else next(iter(used.values()), None)
    if main is None:
        raise InputFormatError("no method file of the batch sheet could be loaded; see the error of "
                               "each row: " + "; ".join(sorted({e.problem or "" for e in entries})),
                               path=str(sheet_path))
    rows, results = [], []
    total = len(entries)
    step = curve_step if on_curve is not None else None
    for i, (row, res, curve) in enumerate(_iter_entries(entries, method, methods=loaded, workers=workers,
                                                        on_result=on_result, keep=keep_distributions,
                                                        curve_step=step), start=1):
        rows.append(row)
        results.append(res)
        if on_curve is not None and curve is not None:
            on_curve(entries[i - 1], curve)
        if progress is not None:
            progress(i, total)
    meta_cols = list(entries[0].metadata) if entries else []
    table = _order_columns(pd.DataFrame(rows), meta_cols)
    return BatchResult(table=table, injections=results, entries=entries, method=main,
                       sheet=str(sheet_path), methods=used, warnings=tuple(notes))
