"""One injection through every detector of the method: the batch's one entry point.

:class:`DetectorMethod` is the checked ``[detectors]`` section of a method file (the
hardware of :class:`~.instrument.DetectorSetup`, the export column of each detector and
the analysis choices of ``[detectors.analysis]``). :func:`analyse_injection` takes the
channels of one export on the flow-corrected volume axis, the integration limits and
baseline windows the concentration trace was processed with, and the conventional
calibration, and returns a :class:`DetectorResult` with the result-row values
(:data:`gpctools.columns.DETECTOR_COLUMNS`) and the per-slice table.

What it computes (docs/detectors.md, sections "Light scattering", "Viscometry",
"Branching", "Copolymer composition by UV and RI", "Band broadening"):

- light scattering: absolute Mn, Mw, Mz and Đ from the log M(V) fit over the slices with
  good signal (broadening-corrected, and before the correction), Mw from the channel
  areas (offset-free), Rg_z, Rg_w and the conformation slope;
- viscometer: [η]_w, Mn and Mw by universal calibration with the measured [η] (when the
  standards' Mark-Houwink pair is known), the Mark-Houwink K and a fitted against the
  light-scattering M (else against the universal-calibration M), Mv with that pair (or
  the method's ``[mark_houwink]`` sample pair), and g′ against a linear reference;
- UV + RI: the overall mass fraction of component A;
- the conventional Mn, Mw and Đ corrected for the concentration detector's broadening.

This module reads nothing and writes nothing; it knows neither the method file nor the
batch (they pass plain values), so it sits in the detectors layer.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools import columns as C
from gpctools.display import Display
from gpctools.errors import DataError, MethodError
from gpctools.sheets.cells import finite_or_none

from ._slices import averages_uncertainty, widths
from .broadening import correct_averages
from .composition import Composition, analyse_composition
from .instrument import ConcentrationDetector, DetectorSetup, LightScatteringDetector, Viscometer
from .light_scattering import (
    LightScatteringOptions,
    LightScatteringResult,
    analyse_light_scattering,
    recovery_warnings,
)
from .traces import DetectorTraces
from .viscometry import (
    MarkHouwinkFit,
    ViscometryOptions,
    ViscometryResult,
    analyse_viscometry,
    fit_mark_houwink,
    viscosity_average_M,
)

__all__ = ["Alignment", "DetectorMethod", "DetectorResult", "ShapedFit", "calibration_shaped_fit", "analyse_injection", "assign_columns", "for_injection",
           "calibrate_with_standard", "setup_toml", "ANALYSIS_KEYS", "SLICE_COLUMNS"]

#: Keys of ``[detectors.analysis]`` and what they mean (units in the docs and the template).
ANALYSIS_KEYS = {
    "formalism": "angular extrapolation: 'berry' (default), 'zimm' or 'debye'",
    "angular_fit_order": "order of the angular fit in sin²(θ/2): 1 (default) or 2",
    "good_signal_fraction": "slices count as good signal above this fraction of both maxima (0.10)",
    "log_M_fit_order": "order of the log10 M(V) fit over the good slices: 1 (default), 2 or 3",
    "log_M_fit_shape": "'calibration' (default: log10 M = b0 + b1·log10 M_calibration(V), the shape of the "
                       "method's calibration curve) or 'polynomial' (a polynomial in V of log_M_fit_order)",
    "rg_min_nm": "smallest Rg reported [nm] (10)",
    "match_broadening": "spread the less broadened trace to match the other before ratios (true)",
    "intrinsic_viscosity_method": "'solomon-ciuta' (default), 'dilute' or 'huggins'",
    "huggins": "Huggins constant for intrinsic_viscosity_method = 'huggins' [-]",
    "standard_K": "Mark-Houwink K of the standards' polymer [dL/g] (default: [mark_houwink] K_standard)",
    "standard_a": "Mark-Houwink a of the standards' polymer (default: [mark_houwink] a_standard)",
    "linear_reference_K": "Mark-Houwink K of a linear reference of the same polymer [dL/g], for g'",
    "linear_reference_a": "Mark-Houwink a of that linear reference, for g'",
    "correct_broadening": "report the conventional averages corrected for band broadening (true)",
}

#: Per-slice columns of :meth:`DetectorResult.table` (composition columns add the names).
SLICE_COLUMNS = ("M LS [g/mol]", "M LS slice [g/mol]", "Rg [nm]", "[eta] [dL/g]", "M universal [g/mol]",
                 "g' [-]")


@dataclass(frozen=True, repr=False)
class DetectorMethod(Display):
    """The ``[detectors]`` section of a method, checked.

    Attributes
    ----------
    setup : DetectorSetup
        Detectors, constants, offsets [mL] and broadening [mL].
    columns : dict
        Detector name -> export column headers (or 0-based numbers) it reads, in channel
        order (light scattering: one per angle; viscometer: differential then reference).
        A detector missing here is found by the kind of its column headers
        (:func:`assign_columns`).
    light_scattering, viscometry : options of the two analyses.
    standard_mark_houwink : (K [dL/g], a) or None
        Of the standards' polymer, for universal calibration with the measured [η].
    sample_mark_houwink : (K [dL/g], a) or None
        Of the sample (the method's ``[mark_houwink]``), for Mv when no pair is fitted.
    linear_reference : (K [dL/g], a) or None
        Of a linear polymer of the same chemistry, for g′.
    correct_broadening : bool
        Report the conventional averages corrected for the concentration detector's
        broadening.
    fit_shape : {"calibration", "polynomial"}
        How the light-scattering M(V) is carried beyond the slices with good signal (see
        :func:`calibration_shaped_fit`).
    """

    setup: DetectorSetup
    columns: dict[str, tuple[str | int, ...]] = field(default_factory=dict)
    light_scattering: LightScatteringOptions = field(default_factory=LightScatteringOptions)
    viscometry: ViscometryOptions = field(default_factory=ViscometryOptions)
    standard_mark_houwink: tuple[float, float] | None = None
    sample_mark_houwink: tuple[float, float] | None = None
    linear_reference: tuple[float, float] | None = None
    correct_broadening: bool = True
    fit_shape: str = "calibration"

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "setup": self.setup.summary(),
            "columns": {k: list(v) for k, v in self.columns.items()},
            "light scattering": {"formalism": self.light_scattering.formalism,
                                 "angular fit order": self.light_scattering.order,
                                 "good-signal fraction": self.light_scattering.good_fraction,
                                 "log M(V) fit order": self.light_scattering.fit_order,
                                 "log M(V) fit shape": self.fit_shape},
            "intrinsic viscosity method": self.viscometry.method,
            "standard Mark-Houwink (K [dL/g], a)": self.standard_mark_houwink,
            "sample Mark-Houwink (K [dL/g], a)": self.sample_mark_houwink,
            "linear reference (K [dL/g], a)": self.linear_reference,
            "broadening-corrected conventional averages": self.correct_broadening,
        }

    @classmethod
    def from_mapping(cls, data: Mapping[str, Any], *, flow_rate: float | None = None,
                     source: str | None = None,
                     mark_houwink: Mapping[str, float] | None = None) -> DetectorMethod:
        """Check a parsed ``[detectors]`` table (see ``docs/detectors.md`` and the template).

        About 90 lines: one check per key, in the order of the template, each with the
        message that names its dotted key.

        ``mark_houwink`` is the method's checked ``[mark_houwink]`` values (K_standard,
        a_standard, K_sample, a_sample), used where the analysis table gives none.

        Raises
        ------
        MethodError
            Naming the dotted key (``detectors.ls.columns``, ``detectors.analysis.formalism``).
        """
        def err(msg: str, key: str) -> MethodError:
            return MethodError(msg, path=source, key=f"detectors.{key}")

        if not isinstance(data, Mapping):
            raise MethodError("must be a table ([detectors] with one sub-table per detector)", path=source,
                              key="detectors")
        hardware: dict[str, Any] = {}
        cols: dict[str, tuple[str | int, ...]] = {}
        for name, sec in data.items():
            if name == "analysis":
                continue
            if isinstance(sec, Mapping):
                sec = dict(sec)
                if "columns" in sec:
                    cols[name] = _column_list(sec.pop("columns"), err, f"{name}.columns")
            hardware[name] = sec
        setup = DetectorSetup.from_mapping(hardware, flow_rate=flow_rate, source=source)
        for name, spec in cols.items():
            det = setup[name]
            need = _channels_needed(det)
            if need is not None and len(spec) != need:
                raise err(f"lists {len(spec)} column(s); a {det.kind} detector"
                          + (f" with {need} angle(s)" if isinstance(det, LightScatteringDetector) else
                             f" of design {det.design!r}" if isinstance(det, Viscometer) else "")
                          + f" reads {need}", f"{name}.columns")
        ana = data.get("analysis", {})
        if not isinstance(ana, Mapping):
            raise err("must be a table of analysis settings", "analysis")
        for k in ana:
            if k not in ANALYSIS_KEYS:
                raise err("unknown key; allowed: " + ", ".join(ANALYSIS_KEYS), f"analysis.{k}")

        def num(k: str, default: float | None, *, lo: float | None = None, hi: float | None = None,
                positive: bool = False) -> float | None:
            if k not in ana:
                return default
            v = ana[k]
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
                raise err(f"must be a number, got {v!r}", f"analysis.{k}")
            v = float(v)
            if (positive and v <= 0) or (lo is not None and v < lo) or (hi is not None and v > hi):
                rng = "positive" if positive else f"between {lo:g} and {hi:g}"
                raise err(f"must be {rng}, got {v:g}", f"analysis.{k}")
            return v

        def choice(k: str, default: Any, allowed: Sequence[Any]) -> Any:
            v = ana.get(k, default)
            if isinstance(v, str):
                v = v.strip().lower()
            if isinstance(v, bool) and not all(isinstance(a, bool) for a in allowed):
                raise err(f"must be one of {', '.join(repr(a) for a in allowed)}, got {v!r}", f"analysis.{k}")
            if v not in allowed:
                raise err(f"must be one of {', '.join(repr(a) for a in allowed)}, got {v!r}", f"analysis.{k}")
            return v

        ls = LightScatteringOptions(
            formalism=choice("formalism", "berry", ("berry", "zimm", "debye")),
            order=choice("angular_fit_order", 1, (1, 2)),
            good_fraction=float(num("good_signal_fraction", 0.10, lo=0.01, hi=0.9) or 0.10),
            fit_order=choice("log_M_fit_order", 1, (1, 2, 3)),
            rg_min=float(num("rg_min_nm", 10.0, positive=True) or 10.0),
            match_broadening=choice("match_broadening", True, (True, False)),
        )
        visc_method = choice("intrinsic_viscosity_method", "solomon-ciuta", ("solomon-ciuta", "dilute", "huggins"))
        huggins = num("huggins", None, lo=0.0, hi=2.0)
        if visc_method == "huggins" and huggins is None:
            raise err("intrinsic_viscosity_method = 'huggins' needs the Huggins constant", "analysis.huggins")
        visc = ViscometryOptions(method=visc_method, huggins=huggins, good_fraction=ls.good_fraction,
                                 fit_order=ls.fit_order, match_broadening=ls.match_broadening)
        mh = dict(mark_houwink or {})

        def pair(kK: str, ka: str, fallback: tuple[str, str] | None) -> tuple[float, float] | None:
            K = num(kK, None, positive=True)
            a = num(ka, None, lo=0.0, hi=2.0)
            if (K is None) != (a is None):
                raise err(f"give {kK} and {ka} together", f"analysis.{ka if a is None else kK}")
            if K is not None and a is not None:
                return K, a
            if fallback is not None and fallback[0] in mh and fallback[1] in mh:
                return float(mh[fallback[0]]), float(mh[fallback[1]])
            return None

        return cls(
            setup=setup, columns=cols, light_scattering=ls, viscometry=visc,
            standard_mark_houwink=pair("standard_K", "standard_a", ("K_standard", "a_standard")),
            sample_mark_houwink=(float(mh["K_sample"]), float(mh["a_sample"]))
            if "K_sample" in mh and "a_sample" in mh else None,
            linear_reference=pair("linear_reference_K", "linear_reference_a", None),
            correct_broadening=choice("correct_broadening", True, (True, False)),
            fit_shape=choice("log_M_fit_shape", "calibration", ("calibration", "polynomial")),
        )


def _column_list(value: Any, err: Callable[[str, str], MethodError], key: str) -> tuple[str | int, ...]:
    items = value if isinstance(value, list) else [value]
    if not items or not all((isinstance(v, str) and v.strip()) or (isinstance(v, int) and not isinstance(v, bool)
                                                                    and v >= 0) for v in items):
        raise err("must be an export column header (text) or 0-based number, or a list of them, "
                  f"got {value!r}", key)
    return tuple(items)


def _channels_needed(det: Any) -> int | None:
    if isinstance(det, LightScatteringDetector):
        return len(det.angles)
    if isinstance(det, Viscometer):
        return det.channels
    if isinstance(det, ConcentrationDetector):
        return 1
    return None


def assign_columns(method: DetectorMethod, headers: Sequence[str], signal_column: str) -> dict[str, list[str]]:
    """Export columns of each detector, in channel order.

    Columns named in ``detectors.<name>.columns`` are taken as given (matched like the
    reader matches ``import.signal_column``: case-insensitive, with or without the
    unit; a number is a 0-based column among ``headers``, which start after x). A
    detector without ``columns`` takes the columns whose headers say its kind
    (``gpctools.io.describe.column_kind``: ``LS 90°``, ``MALS``, ``DP``, ``IP``,
    ``visc``, ``UV 254``...) in channel order (:func:`_channel_order`: light-scattering
    headers by the angle they name, the viscometer's inlet/reference pressure second;
    otherwise file order); the concentration detector takes the reader's signal column
    when it is of its kind.

    Raises
    ------
    DataError
        Naming ``detectors.<name>.columns`` when a column is missing or the count does
        not fit the detector.
    """
    from gpctools.io.describe import column_kind
    from gpctools.sheets.cells import split_header

    def match(spec: str | int, name: str) -> str:
        if isinstance(spec, int):
            if spec < len(headers):
                return headers[spec]
        else:
            want = spec.strip().casefold()
            for h in headers:
                if h.strip().casefold() == want or split_header(h).name.strip().casefold() == want:
                    return h
        raise DataError(f"the export has no column {spec!r} for detector {name!r} (columns: "
                        f"{', '.join(repr(h) for h in headers)}); correct detectors.{name}.columns",
                        key=f"detectors.{name}.columns")

    kinds = {h: column_kind(h) for h in headers}
    out: dict[str, list[str]] = {}
    setup = method.setup
    for det in setup.detectors:
        if det.name in method.columns:
            out[det.name] = [match(s, det.name) for s in method.columns[det.name]]
            continue
        if det.name == setup.concentration and kinds.get(signal_column) == det.kind:
            out[det.name] = [signal_column]
            continue
        same = [d for d in setup.detectors if d.kind == det.kind and d.name not in method.columns]
        found = [h for h in headers if kinds[h] == det.kind]
        need = _channels_needed(det)
        if len(same) != 1 or len(found) != need:
            raise DataError(
                f"cannot tell which export columns belong to the {det.kind} detector {det.name!r}: "
                f"{len(found)} column(s) look like {det.kind} ({', '.join(repr(h) for h in found) or 'none'}), "
                f"it reads {need}; list them in detectors.{det.name}.columns",
                key=f"detectors.{det.name}.columns")
        out[det.name] = _channel_order(det, found)
    return out


_NUMBER = re.compile(r"(?<![\d.])(\d{1,3}(?:\.\d+)?)(?![\d.])")
_REFERENCE_WORDS = re.compile(r"\b(ip|inlet|reference|ref|solvent)\b", re.IGNORECASE)


def _channel_order(det: Any, headers: list[str]) -> list[str]:
    """Headers found by kind, put in channel order.

    Light scattering: when every header names exactly one of the detector's angles
    (``LS 90°``, ``MALS 35 deg``), in the order of ``angles``; else file order.
    Viscometer with two channels: the header that says inlet/reference pressure (``IP``,
    ``inlet``, ``reference``, ``solvent``) goes second; else file order.
    """
    if isinstance(det, LightScatteringDetector) and len(headers) > 1:
        def angle(h: str) -> float | None:
            hits = [float(x) for x in _NUMBER.findall(h) if any(abs(float(x) - a) < 1e-6 for a in det.angles)]
            return hits[0] if len(hits) == 1 else None
        found = [angle(h) for h in headers]
        known = [a for a in found if a is not None]
        if len(known) == len(found) and len(set(known)) == len(known):
            rank = {a: i for i, a in enumerate(det.angles)}
            return [h for _, h in sorted(zip(known, headers), key=lambda t: rank[t[0]])]
    if isinstance(det, Viscometer) and len(headers) == 2:
        ref = [bool(_REFERENCE_WORDS.search(h)) for h in headers]
        if ref == [True, False]:
            return [headers[1], headers[0]]
    return headers


@dataclass(frozen=True, repr=False)
class ShapedFit(Display):
    """log10 M = b0 + b1·log10 M_cal(V) fitted to the light-scattering slice molar masses.

    Attributes
    ----------
    b0, b1 : float
        Intercept [-] and factor [-], with standard errors ``b0_stderr``, ``b1_stderr``.
    M : numpy.ndarray
        Fitted M per slice of the light-scattering result [g/mol].
    averages, averages_observed : dict
        Mn, Mw, Mz, Mz1 [g/mol], dispersity [-] after and before the broadening correction.
    """

    b0: float
    b1: float
    b0_stderr: float
    b1_stderr: float
    M: np.ndarray
    averages: dict[str, float]
    averages_observed: dict[str, float]
    covariance: np.ndarray | None = None

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {"form": "log10 M = b0 + b1 log10 M_calibration(V)", "b0 [-]": self.b0,
                "b0 standard error [-]": self.b0_stderr, "b1 [-]": self.b1, "b1 standard error [-]": self.b1_stderr}


def calibration_shaped_fit(ls: LightScatteringResult, calibration_log_M: Callable[[np.ndarray], np.ndarray],
                           calibration_slope: Callable[[np.ndarray], np.ndarray]) -> ShapedFit:
    """Carry the light-scattering M(V) beyond the good slices with the calibration's shape.

    Between two polymers that obey universal calibration, log M_x(V) is a linear
    function of log M_std(V) at every V (docs/science.md, universal calibration:
    log M_x = [log(K_s/K_x) + (1 + a_s) log M_s]/(1 + a_x)), so fitting
    log10 M_LS = b0 + b1·log10 M_cal(V) over the slices with good signal (the slice M
    of :func:`analyse_light_scattering`, already made consistent with the band
    broadening) extrapolates to the low-M end along the column's measured curvature,
    where a straight line in V would not (the low-M noise fix of docs/detectors.md,
    "Light scattering", step 5, with the calibration as the basis). The averages of the
    concentration trace through this M(V) are then corrected for the shared band
    broadening with the local slope D2 = −ln10·b1·dlog10 M_cal/dV at the concentration
    peak (the same correction the straight-line fit gets).
    """
    from ._common import polyfit
    from ._slices import slice_averages
    from .broadening import unbroadened_averages

    V = ls.volume
    x = np.asarray(calibration_log_M(V), dtype=float)
    ok = ls.good & np.isfinite(ls.M_slice) & (ls.M_slice > 0)
    f = polyfit(x[ok], np.log10(ls.M_slice[ok]), 1, what="calibration-shaped log M fit")
    b0, b1 = float(f.coef[0]), float(f.coef[1])
    M = 10.0 ** (b0 + b1 * x)
    w = widths(V)
    inside = np.ones(V.size, dtype=bool)
    av_obs = slice_averages(M, ls.concentration, w, inside)
    av = av_obs
    if not ls.broadening.is_zero():
        v_peak = float(V[int(np.argmax(ls.concentration))])
        D2 = -math.log(10.0) * b1 * float(np.asarray(calibration_slope(np.array([v_peak])))[0])
        if D2 > 0:
            av = unbroadened_averages(av_obs, ls.broadening, D2)
    return ShapedFit(b0=b0, b1=b1, b0_stderr=f.stderr(0), b1_stderr=f.stderr(1), M=M, averages=av,
                     averages_observed=av_obs, covariance=np.array(f.covariance, dtype=float))


@dataclass(frozen=True)
class Alignment:
    """Every detector's trace on the concentration detector's volume axis, for plots.

    Attributes
    ----------
    volume : numpy.ndarray
        Flow-corrected volume of the concentration detector [mL] (the limits' axis, with
        the baseline windows).
    traces : dict
        Detector name -> its baseline-corrected trace read at V + offset
        (:func:`gpctools.detectors.traces.align`), one channel per detector: the
        light-scattering angle nearest 90°, the viscometer's differential channel
        [detector units].
    offsets : dict
        Detector name -> offset applied [mL] (0 for the concentration detector).
    labels : dict
        Detector name -> what the trace is (``"RI"``, ``"LS 90°"``, ``"viscometer DP"``).
    concentration : str
        Name of the concentration detector.
    """

    volume: np.ndarray
    traces: dict[str, np.ndarray]
    offsets: dict[str, float]
    labels: dict[str, str]
    concentration: str


def _alignment(traces: DetectorTraces, setup: DetectorSetup) -> Alignment:
    """One aligned channel per detector (see :class:`Alignment`)."""
    from .traces import align

    V = traces.volume
    out: dict[str, np.ndarray] = {}
    labels: dict[str, str] = {}
    for det in setup.detectors:
        y = np.asarray(traces[det.name], dtype=float)
        label = det.kind
        if y.ndim == 2:
            j = 0
            if isinstance(det, LightScatteringDetector):
                j = int(np.argmin(np.abs(np.asarray(det.angles) - 90.0)))
                label = f"LS {det.angles[j]:g}°"
            elif isinstance(det, Viscometer):
                label = "viscometer DP"
            y = y[:, j]
        out[det.name] = align(V, y, float(det.offset)) if det.name != setup.concentration else y
        labels[det.name] = label
    return Alignment(volume=V, traces=out, offsets={d.name: float(d.offset) for d in setup.detectors},
                     labels=labels, concentration=setup.concentration)


@dataclass(frozen=True, repr=False)
class DetectorResult(Display):
    """Everything the detectors give for one injection.

    Attributes
    ----------
    values : dict
        Result-row values by column name (:data:`gpctools.columns.DETECTOR_COLUMNS`;
        NaN or "" where a quantity does not apply).
    volume : numpy.ndarray
        Slices of the per-slice table [mL] (flow-corrected axis, inside the limits).
    slices : dict
        Per-slice columns (:data:`SLICE_COLUMNS` and the composition columns).
    light_scattering, viscometry, composition, mark_houwink : the analyses' own results
        (None where not run), for summaries and plots.
    warnings : tuple of str
    alignment : Alignment or None
        Every detector's trace after the offsets, for the review page.
    """

    values: dict[str, Any]
    volume: np.ndarray
    slices: dict[str, np.ndarray]
    light_scattering: LightScatteringResult | None = None
    viscometry: ViscometryResult | None = None
    composition: Composition | None = None
    mark_houwink: MarkHouwinkFit | None = None
    shaped: ShapedFit | None = None
    warnings: tuple[str, ...] = ()
    alignment: Alignment | None = None

    def row(self) -> dict[str, Any]:
        """The result-row values (every :data:`gpctools.columns.DETECTOR_COLUMNS`)."""
        return dict(self.values)

    def on_volume(self, volume: Any) -> dict[str, np.ndarray]:
        """The per-slice columns at ``volume`` [mL] (NaN outside this table's slices).

        Used to add the detector columns to an injection's distribution table, whose
        slices are the same flow-corrected volumes.
        """
        V = np.asarray(volume, dtype=float)
        out = {}
        for name, col in self.slices.items():
            y = np.asarray(col, dtype=float)
            ok = np.isfinite(y)
            if ok.sum() < 2:
                out[name] = np.full(V.shape, np.nan)
                continue
            vals = np.interp(V, self.volume, np.where(ok, y, 0.0), left=np.nan, right=np.nan)
            mask = np.interp(V, self.volume, ok.astype(float), left=0.0, right=0.0)
            out[name] = np.where(mask > 0.999, vals, np.nan)
        return out

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        return {
            "values": {k: (finite_or_none(v) if not isinstance(v, str) else v) for k, v in self.values.items()},
            "light scattering": None if self.light_scattering is None else self.light_scattering.summary(),
            "viscometry": None if self.viscometry is None else self.viscometry.summary(),
            "Mark-Houwink fit": None if self.mark_houwink is None else self.mark_houwink.summary(),
            "calibration-shaped light-scattering fit": None if self.shaped is None else self.shaped.summary(),
            "composition": None if self.composition is None else self.composition.summary(),
            "warnings": list(self.warnings),
        }


def _straight_baseline(V: np.ndarray, y: np.ndarray, windows: Sequence[tuple[float, float]], what: str) -> np.ndarray:
    """y minus the straight line through its means in the two windows (as the main trace's
    baseline passes through its window means, gpctools.signal.Baseline).
    """
    pts = []
    for a, b in windows:
        m = (V >= a) & (V <= b)
        if m.sum() < 2:
            raise DataError(f"{what}: the baseline window {a:.3f}-{b:.3f} mL holds fewer than 2 slices "
                            "after the detector offset; widen baseline.windows or check the offset")
        pts.append((float(V[m].mean()), float(y[m].mean())))
    (v1, y1), (v2, y2) = pts
    slope = (y2 - y1) / (v2 - v1) if v2 != v1 else 0.0
    return y - (y1 + slope * (V - v1))


def _traces(volume: np.ndarray, channels: Mapping[str, np.ndarray], method: DetectorMethod,
            assigned: Mapping[str, list[str]], windows: Sequence[tuple[float, float]], name: str) -> DetectorTraces:
    signals: dict[str, np.ndarray] = {}
    for det in method.setup.detectors:
        raw = [np.asarray(channels[h], dtype=float) for h in assigned[det.name]]
        shifted = [(a + det.offset, b + det.offset) for a, b in windows]
        what = f"{name}: detector {det.name!r}"
        if isinstance(det, Viscometer) and det.design != "specific viscosity":
            # the differential channel is baseline-corrected; the reference pressure is used as measured
            signals[det.name] = np.column_stack([_straight_baseline(volume, raw[0], shifted, what), raw[1]])
        else:
            cols = [_straight_baseline(volume, r, shifted, what) for r in raw]
            signals[det.name] = cols[0] if len(cols) == 1 else np.column_stack(cols)
    return DetectorTraces(volume=volume, signals=signals, name=name)


def analyse_injection(volume: Any, channels: Mapping[str, Any], method: DetectorMethod, *,
                      signal_column: str, limits: tuple[float, float],
                      baseline_windows: Sequence[tuple[float, float]],
                      conventional: Mapping[str, float] | None = None,
                      calibration_log_M: Callable[[np.ndarray], np.ndarray] | None = None,
                      calibration_slope: Callable[[np.ndarray], np.ndarray] | None = None,
                      injected_mass_mg: float | None = None,
                      name: str = "injection") -> DetectorResult:
    """All detector results of one injection.

    Long (about 100 lines) because it is the order of the analysis itself: align the
    channels, concentration and mass recovery, light scattering, viscometry, composition,
    broadening; each step reads what the one before produced, and the warnings of all
    steps are gathered in one place.

    Parameters
    ----------
    volume : array_like
        Flow-corrected elution volume of each slice [mL] (the axis the concentration
        trace was processed on).
    channels : mapping
        Export column header -> raw values per slice (every numeric column of the export).
    method : DetectorMethod
    signal_column : str
        Header of the column the conventional analysis used.
    limits : (float, float)
        Integration limits on the concentration detector's axis [mL].
    baseline_windows : two (start, end) pairs
        Signal-free windows of the concentration trace [mL]; every other channel gets a
        straight baseline through the same windows moved by its offset.
    conventional : mapping, optional
        Mn, Mw, Mz, dispersity of the conventional calibration, for the broadening
        correction.
    calibration_log_M : callable, optional
        V -> log10 M of the standards' polymer (before any Mark-Houwink conversion), for
        universal calibration with the measured [η] and as the shape of the
        light-scattering M(V) (:func:`calibration_shaped_fit`).
    calibration_slope : callable, optional
        V -> d log10 M/dV of the calibration the conventional averages used.
    injected_mass_mg : float, optional
        Polymer mass injected [mg] (the batch sheet's ``injected mass [mg]``). With the
        concentration detector's constant known, ``mass recovery [%]`` =
        100·m_eluted/m_injected, m_eluted = Σ c_i ΔV_i inside the limits (the trapezoid-free
        sum of docs/detectors.md, section "Light scattering", step 7); below 95 % or above
        105 % is a warning.
    name : str
        Sample id for messages.
    """
    V = np.asarray(volume, dtype=float)
    setup = method.setup
    assigned = assign_columns(method, list(channels), signal_column)
    traces = _traces(V, {k: np.asarray(v, dtype=float) for k, v in channels.items()}, method, assigned,
                     baseline_windows, name)
    vals: dict[str, Any] = {c: (math.nan if C.describe(c).unit else "") for c in C.DETECTOR_COLUMNS}
    notes: list[str] = []
    lo, hi = sorted(float(x) for x in limits)
    inside = (V >= lo) & (V <= hi)
    Vin = V[inside]
    slices: dict[str, np.ndarray] = {c: np.full(Vin.size, np.nan) for c in SLICE_COLUMNS}
    cdet = setup.concentration_detector
    ls = visc = comp = shaped = None
    M_ls: np.ndarray | None = None
    mhfit = None
    if cdet.factor is not None:
        w = widths(V)
        c = traces[cdet.name] / cdet.factor
        vals[C.MASS_ELUTED] = 1e3 * float(np.sum(c[inside] * w[inside]))
    if injected_mass_mg is not None:
        vals[C.INJECTED_MASS] = float(injected_mass_mg)
        if cdet.factor is None:
            notes.append(f"{name}: no mass recovery: the concentration detector {cdet.name!r} has no "
                         f"constant (give detectors.{cdet.name}.constant, or calibrate with a narrow standard "
                         "of known injected mass)")
        elif injected_mass_mg > 0:
            rec = vals[C.MASS_ELUTED] / float(injected_mass_mg)
            vals[C.MASS_RECOVERY] = 100.0 * rec
            notes.extend(recovery_warnings(name, rec))
    if setup.of_kind("light scattering"):
        ls = analyse_light_scattering(
            traces, setup, options=method.light_scattering, limits=(lo, hi),
            injected_mass=None if injected_mass_mg is None or cdet.factor is None else 1e-3 * injected_mass_mg)
        av, ob, M_ls = ls.averages, ls.averages_observed, ls.M_fit
        basis = ls.log_M_fit.basis(ls.volume)
        if method.fit_shape == "calibration" and calibration_log_M is not None and calibration_slope is not None:
            shaped = calibration_shaped_fit(ls, calibration_log_M, calibration_slope)
            av, ob, M_ls = shaped.averages, shaped.averages_observed, shaped.M
            x = np.asarray(calibration_log_M(ls.volume), dtype=float)
            basis = np.column_stack([np.ones_like(x), x])
        u_rel = _ls_noise_uncertainty(ls, M_ls, basis, traces[cdet.name] / float(cdet.factor or 1.0), V,
                                      baseline_windows)
        vals.update({C.U_MN_LS: av["Mn"] * u_rel["Mn"], C.U_MW_LS: av["Mw"] * u_rel["Mw"]})
        vals.update({C.MN_LS: av["Mn"], C.MW_LS: av["Mw"], C.MZ_LS: av["Mz"], C.DISPERSITY_LS: av["dispersity"],
                     C.MW_LS_AREAS: ls.Mw_areas.value,
                     C.U_MW_LS_AREAS: 100.0 * ls.Mw_areas.stderr / ls.Mw_areas.value
                     if ls.Mw_areas.value else math.nan,
                     C.MN_LS_OBSERVED: ob["Mn"], C.MW_LS_OBSERVED: ob["Mw"],
                     C.LS_FIT_START: ls.log_M_fit.volume_range[0], C.LS_FIT_END: ls.log_M_fit.volume_range[1],
                     C.RG_Z: ls.rg_averages.get("Rg_z", math.nan), C.RG_W: ls.rg_averages.get("Rg_w", math.nan),
                     C.CONFORMATION_SLOPE: ls.conformation.nu if ls.conformation is not None else math.nan,
                     C.DETECTOR_SCALE: C.LS_SCALE_LABEL})
        slices["M LS [g/mol]"] = M_ls
        slices["M LS slice [g/mol]"] = ls.M_slice
        slices["Rg [nm]"] = ls.rg
        notes.extend(ls.warnings)
    if setup.of_kind("viscometer"):
        std = method.standard_mark_houwink
        use_uc = std is not None and calibration_log_M is not None
        visc = analyse_viscometry(
            traces, setup, options=method.viscometry, limits=(lo, hi),
            standard_log_M=calibration_log_M if use_uc else None,
            K_standard=std[0] if use_uc and std else None, a_standard=std[1] if use_uc and std else None)
        notes.extend(visc.warnings)
        vals[C.INTRINSIC_VISCOSITY] = visc.intrinsic_w
        slices["[eta] [dL/g]"] = visc.intrinsic
        if visc.M_universal_fit is not None:
            slices["M universal [g/mol]"] = visc.M_universal_fit
            vals[C.MN_UNIVERSAL] = visc.averages.get("Mn", math.nan)
            vals[C.MW_UNIVERSAL] = visc.averages.get("Mw", math.nan)
            if not vals[C.DETECTOR_SCALE]:
                vals[C.DETECTOR_SCALE] = "absolute, universal calibration with measured [eta]"
        M_ref = M_ls if ls is not None else visc.M_universal_fit
        good = visc.good & (ls.good if ls is not None else True)
        if M_ref is not None:
            try:
                mhfit = fit_mark_houwink(M_ref, visc.intrinsic, mask=good)
            except DataError as exc:
                notes.append(f"{name}: no Mark-Houwink fit ({exc.message})")
        pair = (mhfit.K, mhfit.a) if mhfit is not None else method.sample_mark_houwink
        if mhfit is not None:
            vals.update({C.MH_K: mhfit.K, C.MH_A: mhfit.a, C.MH_A_SE: mhfit.a_stderr})
            notes.extend(f"{name}: {m}" for m in mhfit.warnings)
        elif pair is not None:
            vals.update({C.MH_K: pair[0], C.MH_A: pair[1]})
        if pair is not None and visc.intrinsic_w > 0:
            vals[C.MV] = viscosity_average_M(visc.intrinsic_w, pair[0], pair[1])
        if method.linear_reference is not None and M_ref is not None:
            KL, aL = method.linear_reference
            cw = visc.concentration * widths(visc.volume)
            okc = np.isfinite(M_ref) & (M_ref > 0)
            eta_lin_w = float(np.sum(cw[okc] * KL * M_ref[okc] ** aL) / np.sum(cw[okc]))
            vals[C.G_PRIME] = visc.intrinsic_w / eta_lin_w
            with np.errstate(divide="ignore", invalid="ignore"):
                slices["g' [-]"] = visc.intrinsic / (KL * M_ref**aL)
    if setup.copolymer is not None and setup.of_kind("UV"):
        comp = analyse_composition(traces, setup, limits=(lo, hi), match_broadening=method.light_scattering.match_broadening)
        vals[C.COMPOSITION_A] = 100.0 * comp.overall_w_A
        for k, v in comp.table().items():
            slices[k] = v
        notes.extend(comp.warnings)
    if method.correct_broadening and conventional and calibration_slope is not None \
            and not cdet.broadening.is_zero():
        c_sig = traces[cdet.name]
        v_peak = float(V[inside][int(np.argmax(c_sig[inside]))])
        B = -float(np.asarray(calibration_slope(np.array([v_peak])))[0])
        if B > 0:
            corr = correct_averages({k: conventional[k] for k in ("Mn", "Mw", "Mz") if k in conventional},
                                    cdet.broadening, B)
            vals.update({C.MN_BROADENING: corr.corrected.get("Mn", math.nan),
                         C.MW_BROADENING: corr.corrected.get("Mw", math.nan),
                         C.DISPERSITY_BROADENING: corr.corrected.get("dispersity", math.nan)})
            notes.extend(corr.warnings)
    return DetectorResult(values=vals, volume=Vin, slices=slices, light_scattering=ls, viscometry=visc,
                          composition=comp, mark_houwink=mhfit, shaped=shaped,
                          warnings=tuple(dict.fromkeys(notes)), alignment=_alignment(traces, setup))


def _ls_noise_uncertainty(ls: LightScatteringResult, M: np.ndarray, basis: np.ndarray, c_all: np.ndarray,
                          V: np.ndarray, windows: Sequence[tuple[float, float]]) -> dict[str, float]:
    """Noise part of u(Mn LS)/Mn LS and u(Mw LS)/Mw LS [-] (docs/detectors.md, "Light scattering").

    Two independent parts in quadrature: the scatter of the slice molar masses about the
    log M(V) fit (:func:`~._slices.robust_covariance` of the fitted coefficients through
    the averages, :func:`~._slices.averages_uncertainty`), and the white noise of the
    concentration trace in the averages' weights, with its baseline
    (:func:`~._slices.weights_noise_uncertainty`, σ from the trace in the baseline
    windows). Applied as relative values to the reported, broadening-corrected averages.
    """
    from ._slices import robust_covariance, weights_noise_uncertainty

    ok = ls.good & np.isfinite(ls.M_slice) & (ls.M_slice > 0)
    out = {"Mn": math.nan, "Mw": math.nan}
    if ok.sum() <= basis.shape[1] + 1:
        return out
    y = np.log10(ls.M_slice[ok])
    X = basis[ok]
    coef, *_ = np.linalg.lstsq(X, y, rcond=None)
    w = widths(ls.volume)
    # the larger of the ordinary (widened for serial correlation, as _common.polyfit) and the
    # sandwich covariance: on simulated injections each alone understated Mn or Mw by up to 1.6x
    r = y - X @ coef
    rr = float(r @ r)
    rho = float(r[1:] @ r[:-1]) / rr if rr > 0 else 0.0
    ols = rr / max(len(y) - X.shape[1], 1) * np.linalg.pinv(X.T @ X) * ((1.0 + rho) / (1.0 - rho) if 0.0 < rho < 1.0 else 1.0)
    parts = [averages_uncertainty(M, ls.concentration, w, basis, cov) for cov in (robust_covariance(X, r), ols)]
    fit = {k: max(p[k] for p in parts) for k in ("Mn", "Mw")}
    sel = [(V >= a) & (V <= b) for a, b in windows]
    counts = tuple(int(m.sum()) for m in sel)
    base = np.concatenate([c_all[m] for m in sel]) if all(counts) else np.array([])
    sigma = float(np.std(base, ddof=2)) if base.size > 4 else math.nan
    centres = tuple(float(V[m].mean()) if m.any() else math.nan for m in sel)
    conc = weights_noise_uncertainty(M, ls.concentration, w, ls.volume, sigma, (centres[0], centres[1]),
                                     (counts[0], counts[1]))
    for k in out:
        out[k] = math.sqrt(fit[k] ** 2 + conc[k] ** 2) if math.isfinite(conc[k]) else fit[k]
    return out


def for_injection(chromatogram: Any, volume: Any, result: Any, method: Any, *,
                  injected_mass_mg: float | None = None) -> DetectorResult:
    """The detector results of one processed injection (the batch's one call).

    Parameters (duck-typed, so that this layer imports neither the reader's callers nor
    the method file)
    ----------
    chromatogram : gpctools.io.Chromatogram
        Read with ``channels="all"``.
    volume : array_like
        Its volume axis before the flow-marker correction [mL].
    result : gpctools.batch.InjectionResult
        The conventional processing of the same export (flow factor, limits, baseline
        windows, averages).
    method : gpctools.method.Method
        With ``detectors`` set.
    injected_mass_mg : float, optional
        Polymer mass injected [mg], for ``mass recovery [%]`` (:func:`analyse_injection`).

    The warnings of the analyses are returned in :attr:`DetectorResult.warnings` (and not
    issued again).
    """
    import warnings

    from gpctools.errors import GpcWarning

    cal = method.calibration
    V = np.asarray(volume, dtype=float) * float(result.flow_factor)
    channels = dict(chromatogram.channels)
    channels.setdefault(chromatogram.signal_column, chromatogram.signal)
    d = result.distribution

    def standard_log_M(v: np.ndarray) -> np.ndarray:
        # the standards' own polymer: undo a [mark_houwink] conversion (log M = offset + factor·log M_std)
        return np.asarray((cal.log_M(v) - cal.log_offset) / cal.log_factor)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", GpcWarning)
        return analyse_injection(
            V, channels, method.detectors, signal_column=chromatogram.signal_column,
            limits=result.corrected.limits, baseline_windows=result.corrected.baseline.windows,
            conventional={"Mn": d.Mn, "Mw": d.Mw, "Mz": d.Mz}, calibration_log_M=standard_log_M,
            calibration_slope=cal.dlogM_dV, injected_mass_mg=injected_mass_mg,
            name=result.sample_id or "injection")


def calibrate_with_standard(chromatogram: Any, volume: Any, result: Any, method: Any, standard: Any, *,
                            B: float | None = None, normalise: bool = False, shape: str = "gaussian") -> Any:
    """Offsets, broadening and constants from one narrow-standard injection.

    The channels are baseline-corrected like a sample's (:func:`for_injection`), then
    :func:`gpctools.detectors.calibrate_setup` fits each detector's peak and adds the
    polydispersity lead ℓ = exponent·ln Đ/(ln10·B) to the observed peak difference
    (docs/detectors.md, "Calibrating the set-up from one narrow standard"). Only the
    slices from 0.5 mL before the standard's integration limits to 0.5 mL past them (plus
    the largest offset the method already has) enter, so that the areas behind the
    constants do not collect baseline error over the whole record.

    Parameters (duck-typed like :func:`for_injection`)
    ----------
    standard : gpctools.detectors.NarrowStandard
        Its ``B`` may be None: then ``B`` here, or the slope of the method's calibration
        (of the standards' own polymer) at the concentration detector's peak, is used.
    B : float, optional
        −d log10 M/dV at the standard's peak [1/mL].
    normalise, shape
        As in :func:`gpctools.detectors.calibrate_setup`; the peaks are Gaussian by default
        (the lead is derived for Gaussian peaks; docs/detectors.md, "In the method file, the
        batch and the command line").

    Returns
    -------
    gpctools.detectors.SetupCalibration
    """
    import dataclasses
    import warnings

    from gpctools.errors import GpcWarning

    from .narrow_standard import calibrate_setup

    cal = method.calibration
    det_method: DetectorMethod = method.detectors
    V = np.asarray(volume, dtype=float) * float(result.flow_factor)
    channels = dict(chromatogram.channels)
    channels.setdefault(chromatogram.signal_column, chromatogram.signal)
    assigned = assign_columns(det_method, list(channels), chromatogram.signal_column)
    plain = dataclasses.replace(det_method, setup=_zero_offsets(det_method.setup))
    full = _traces(V, {k: np.asarray(v, dtype=float) for k, v in channels.items()}, plain, assigned,
                   result.corrected.baseline.windows, result.sample_id or "standard")
    # areas over the standard's peak only: integrating the whole record would add the baseline's
    # own error times the record length (1-2 % of the constants at ordinary noise)
    lo, hi = result.corrected.limits
    late = max([d.offset for d in det_method.setup.detectors] + [0.0]) + 0.5
    sel = (V >= lo - 0.5) & (V <= hi + late)
    traces = DetectorTraces(volume=V[sel], signals={k: v[sel] for k, v in full.signals.items()}, name=full.name)
    if standard.B is None:
        if B is None:
            c = traces[det_method.setup.concentration]
            v_peak = float(traces.volume[int(np.argmax(c))])
            B = -float(cal.dlogM_dV([v_peak])[0]) / cal.log_factor
        standard = dataclasses.replace(standard, B=B)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", GpcWarning)
        return calibrate_setup(traces, det_method.setup, standard, normalise=normalise, shape=shape)


def _zero_offsets(setup: DetectorSetup) -> DetectorSetup:
    """The set-up with every offset 0 (baseline windows of an uncalibrated line stay put)."""
    out = setup
    for d in setup.detectors:
        if d.offset:
            out = out.replace(d.name, offset=0.0)
    return out


def setup_toml(setup: DetectorSetup, columns: Mapping[str, Sequence[str | int]] | None = None) -> str:
    """The ``[detectors.<name>]`` tables of ``setup`` as TOML text, ready to paste into a method.

    Numbers are written with 6 significant digits (offsets to 0.0001 mL); ``columns``
    are added back where the method names them.
    """
    def value(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        if isinstance(v, (int, float)):
            return f"{float(v):.6g}" if isinstance(v, float) else str(v)
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(value(x) for x in v) + "]"
        if isinstance(v, Mapping):
            return "{" + ", ".join(f"{k} = {value(x)}" for k, x in v.items()) + "}"
        return value(str(v))

    data = setup.to_mapping()
    lines = ["[detectors]", f"concentration = {value(data.pop('concentration'))}"]
    copolymer = data.pop("copolymer", None)
    for name, sec in data.items():
        lines += ["", f"[detectors.{name}]"]
        for k, v in sec.items():
            if k == "offset":
                v = round(float(v), 4)
            lines.append(f"{k} = {value(v)}")
        if columns and name in columns:
            lines.append(f"columns = {value(list(columns[name]))}")
    if copolymer is not None:
        lines += ["", "[detectors.copolymer]"] + [f"{k} = {value(v)}" for k, v in copolymer.items()]
    return "\n".join(lines) + "\n"
