"""The method file: every processing choice of an SEC analysis in one TOML file.

A method is read once, checked key by key, and turned into a frozen :class:`Method`
holding a fitted :class:`~gpctools.calibration.Calibration`. Unknown keys and bad values
raise :class:`~gpctools.errors.MethodError` naming the dotted key (``baseline.windows``)
and what to write instead. The commented starter file is ``gpctools/templates/method.toml`` (``gpctools template method.toml``).

Schema (all sections optional except ``[calibration]``)::

    name = "..."                      # free text
    sample_polymer = "polystyrene"    # what the samples are (default: unknown -> relative)

    [import]                          # how slice exports are read
    x_column = "auto"                 # header text or 0-based index
    signal_column = "auto"
    x_unit = "auto"                   # "auto" | "mL" | "min" | "s"
    sheet = "auto"                    # XLSX sheet name or 0-based index
    decimal = "auto"                  # "auto" | "." | ","
    separator = "auto"                # "auto" | "," | ";" | "tab"
    encoding = "auto"

    [flow]
    rate = 1.0                        # nominal flow rate [mL/min]

    [flow_marker]
    reference = 23.6                  # marker peak volume on the calibration day [mL]
    search = [23.2, 24.0]             # find the marker peak in each injection here [mL]
    min_signal_to_noise = 10          # a peak counts as the marker from this height / noise SD
    fwhm = [0.02, 0.4]                # plausible full width at half height [mL] (default:
                                      # 5 slices to half the search window)
    required = false                  # true: an injection without a marker is an error

    [baseline]
    windows = "auto"                  # or [[a, b], [c, d]] [mL]

    [integration]
    limits = "auto"                   # or [low, high] [mL]
    # limits_molar_mass = [1000, 1e6] # or the limits in molar mass [g/mol] (either order),
    #                                   converted through the calibration (not with limits)
    exclude = [[23.2, 24.0]]          # excluded regions [mL]
    outside = "linear"                # "linear" | "exclude": slices outside the calibrated range

    [calibration]
    order = 3                         # 1-5 or "auto" (AICc)
    standard_polymer = "polystyrene"
    standards = "standards.csv"       # file relative to the method file, or inline:
    # [[calibration.standard]]
    # name = "PS 96k"; Mp = 96000; volume = 15.0   (or time = ... [min])

    [mark_houwink]                    # optional universal calibration
    sample_polymer = "poly(methyl methacrylate)"
    K_standard = 1.14e-4              # [dL/g]
    a_standard = 0.716
    K_sample = 9.44e-5                # [dL/g]
    a_sample = 0.719
    source = "..."

    [peaks]                           # several peaks in one trace
    split = "none"                    # "none" | "valleys" | [20000, 800] molar masses [g/mol]
    valley_depth_pct = 10             # a valley lies this % below the lower neighbouring peak
    min_height_pct = 5                # a peak stands at least this % of the highest one

    [fractions]                       # mass fractions as result columns
    below = [500, 1000]               # "mass below 500 g/mol [%]", ... [g/mol]
    above = [1000000]                 # "mass above 1000000 g/mol [%]" [g/mol]

    [thresholds]
    outside_calibration_pct = 1.0     # warn above this mass % outside calibration
    standard_residual_pct = 5.0       # acceptance of each standard's residual [%]
    limit_shift = 0.2                 # low-M limit move for the Mn-sensitivity check [mL]
"""

from __future__ import annotations

import hashlib
import math
import sys
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from gpctools.display import Display

from . import columns as C
from .calibration import Calibration, fit_calibration
from .detectors.pipeline import DetectorMethod
from .errors import CalibrationError, MethodError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on 3.10 only
    import tomli as tomllib

__all__ = ["Method", "MethodOverrides", "ImportOptions", "FlowMarkerOptions", "PeakOptions", "FractionOptions",
           "load_method"]

Window = tuple[float, float]

_SCHEMA: dict[str, set[str] | None] = {
    "": {"name", "sample_polymer", "import", "flow", "flow_marker", "baseline", "integration",
         "calibration", "mark_houwink", "thresholds", "description", "peaks", "fractions",
         "qc", "detectors"},  # [qc]: read by gpctools.qc (QC settings); [detectors]: gpctools.detectors
    "import": {"x_column", "signal_column", "x_unit", "sheet", "decimal", "separator", "encoding"},
    "flow": {"rate"},
    "flow_marker": {"reference", "search", "min_signal_to_noise", "fwhm", "required"},
    "peaks": {"split", "valley_depth_pct", "min_height_pct"},
    "fractions": {"below", "above"},
    "baseline": {"windows"},
    "integration": {"limits", "limits_molar_mass", "exclude", "outside"},
    "calibration": {"order", "standard_polymer", "standards", "standard", "sheet"},
    "mark_houwink": {"sample_polymer", "K_standard", "a_standard", "K_sample", "a_sample", "source"},
    "thresholds": {"outside_calibration_pct", "standard_residual_pct", "limit_shift"},
}


@dataclass(frozen=True)
class ImportOptions:
    """Reader options passed to :func:`gpctools.io.read_chromatogram` (None = automatic)."""

    x_column: str | int | None = None
    signal_column: str | int | None = None
    x_unit: str | None = None
    sheet: str | int | None = None
    decimal: str | None = None
    separator: str | None = None
    encoding: str | None = None

    def as_kwargs(self) -> dict[str, Any]:
        """The options that are set, as keyword arguments of :func:`gpctools.io.read_chromatogram`."""
        return {k: v for k, v in self.__dict__.items() if v is not None}


@dataclass(frozen=True)
class FlowMarkerOptions:
    """How a flow-marker peak is recognised in ``flow_marker.search`` (docs/science.md, section 19.1).

    Attributes
    ----------
    min_signal_to_noise : float
        A candidate counts as the marker only when its fitted height above the local line
        is at least this many noise SDs [-] (default 10, the usual limit of quantitation,
        ICH Q2(R1), from memory).
    fwhm : (float, float) or None
        Plausible full width at half height [mL]; None: from 5 slice spacings to half
        the search window.
    required : bool
        True: an injection without a recognised marker fails (``DataError``); False: it
        is processed without flow correction and a warning names the file.
    """

    min_signal_to_noise: float = 10.0
    fwhm: Window | None = None
    required: bool = False


@dataclass(frozen=True)
class PeakOptions:
    """Splitting a trace into peaks (docs/science.md, section 19.5).

    Attributes
    ----------
    split : "none", "valleys" or tuple of float
        "none": one set of averages (a warning when the trace has several peaks);
        "valleys": split at the valleys :func:`gpctools.signal.find_peaks` finds; a tuple:
        split at these molar masses [g/mol].
    valley_depth : float
        Valley criterion: dip below the lower neighbouring peak, fraction [-].
    min_height : float
        Smallest peak as a fraction of the highest [-].
    """

    split: str | tuple[float, ...] = "none"
    valley_depth: float = 0.10
    min_height: float = 0.05


@dataclass(frozen=True)
class FractionOptions:
    """Mass fractions reported as result columns (docs/science.md, section 19.6).

    Attributes
    ----------
    below, above : tuple of float
        Cut-off molar masses [g/mol]: ``mass below <M> g/mol [%]`` and ``mass above <M>
        g/mol [%]`` columns, in the order given.
    """

    below: tuple[float, ...] = ()
    above: tuple[float, ...] = ()


@dataclass(frozen=True, repr=False)
class Method(Display):
    """All processing choices of an analysis, checked.

    Attributes
    ----------
    calibration : Calibration
        Fitted (and, when ``[mark_houwink]`` is given, converted) calibration.
    flow_rate : float or None
        Nominal flow rate [mL/min]; needed when exports are in time.
    marker_reference : float or None
        Flow-marker volume on the calibration day [mL].
    marker_search : (float, float) or None
        Window in which the marker peak is looked for in each injection [mL].
    marker : FlowMarkerOptions
        How the marker is recognised there (signal-to-noise, width, required).
    peaks : PeakOptions
        Splitting several peaks (``[peaks]``).
    fractions : FractionOptions
        Mass fractions below/above cut-offs (``[fractions]``).
    windows : pair of windows or None
        Baseline windows [mL]; None = automatic.
    limits : (float, float) or None
        Integration limits [mL]; None = automatic (or given in molar mass).
    limits_M : (float, float) or None
        Integration limits in molar mass (low M, high M) [g/mol] (``integration.
        limits_molar_mass``); converted to volumes by :meth:`volume_limits`.
    exclusions : tuple of windows
        Excluded regions [mL].
    outside : str
        "linear" or "exclude" (see :func:`gpctools.distribution.compute_distribution`).
    outside_warn_pct, residual_limit_pct, limit_shift : float
        Thresholds [% mass], [%], [mL].
    detectors : DetectorMethod or None
        The ``[detectors]`` section: light scattering, viscometer, UV and RI set-up, the
        export column of each, offsets and broadening (docs/detectors.md); None for a
        single-detector method.
    source : str or None
        Path of the method file; ``sha256`` its SHA-256 and ``text`` its content.
    """

    calibration: Calibration
    name: str = ""
    flow_rate: float | None = None
    marker_reference: float | None = None
    marker_search: Window | None = None
    windows: tuple[Window, Window] | None = None
    limits: Window | None = None
    limits_M: Window | None = None
    exclusions: tuple[Window, ...] = ()
    outside: str = "linear"
    outside_warn_pct: float = 1.0
    residual_limit_pct: float = 5.0
    limit_shift: float = 0.2
    marker: FlowMarkerOptions = field(default_factory=FlowMarkerOptions)
    peaks: PeakOptions = field(default_factory=PeakOptions)
    fractions: FractionOptions = field(default_factory=FractionOptions)
    import_options: ImportOptions = field(default_factory=ImportOptions)
    detectors: DetectorMethod | None = None
    source: str | None = None
    sha256: str | None = None
    text: str | None = None
    settings: dict[str, Any] = field(default_factory=dict)

    @classmethod
    def from_dict(cls, data: dict[str, Any], *, base_dir: str | Path = ".", source: str | None = None) -> Method:
        """Build a method from a parsed TOML mapping (paths relative to ``base_dir``)."""
        return _build(data, Path(base_dir), source)

    def volume_limits(self) -> Window | None:
        """The integration limits as volumes [mL] on the calibration's volume axis, or None.

        Limits given in mL are returned as they are; limits given in molar mass
        (``integration.limits_molar_mass``) are converted through the calibration,
        V_lim = V(M_lim) (:meth:`~gpctools.calibration.Calibration.volume_at`, tangent
        continuation outside the calibrated range; docs/science.md, section 1.6). The
        volumes are those of the calibration, so they apply to a trace after its
        flow-marker correction. None means automatic limits.

        Raises
        ------
        MethodError
            Key ``integration.limits_molar_mass``: the calibration cannot be inverted
            at one of the limits.
        """
        if self.limits_M is None:
            return self.limits
        try:
            v = self.calibration.volume_at(list(self.limits_M))
        except CalibrationError as exc:
            raise MethodError(exc.message, path=self.source,
                              key="integration.limits_molar_mass") from None
        lo, hi = sorted((float(v[0]), float(v[1])))
        return lo, hi

    def with_overrides(self, overrides: MethodOverrides) -> Method:
        """A copy of the method with one injection's overrides applied (a new, derived Method).

        Limits in mL replace any limits of the method (also limits in molar mass), and
        limits in molar mass replace limits in mL; baseline windows replace the method's.
        ``settings["overrides"]`` records what was changed; ``source`` and ``sha256``
        stay those of the method file, so a result row names the file it started from.
        """
        if not overrides:
            return self
        changes: dict[str, Any] = {}
        settings = dict(self.settings)
        if overrides.limits is not None:
            changes.update(limits=overrides.limits, limits_M=None)
            settings["integration limits [mL]"] = list(overrides.limits)
            settings.pop("integration limits [g/mol]", None)
        elif overrides.limits_M is not None:
            changes.update(limits=None, limits_M=overrides.limits_M)
            settings["integration limits [mL]"] = "from molar mass"
            settings["integration limits [g/mol]"] = list(overrides.limits_M)
        if overrides.windows is not None:
            changes["windows"] = overrides.windows
            settings["baseline windows [mL]"] = [list(w) for w in overrides.windows]
        settings["overrides"] = overrides.summary()
        return replace(self, settings=settings, **changes)

    @property
    def label(self) -> str:
        """How results name this method: the file it was read from (or its name)."""
        return self.source if self.source is not None else (self.name or "(method without a file)")

    def summary(self) -> dict[str, Any]:
        """JSON-safe settings and calibration summary (for manifests and reports)."""
        return {
            "name": self.name,
            "source": self.source,
            "sha256": self.sha256,
            "settings": self.settings,
            "calibration": self.calibration.summary(),
        }


def _num(x: float) -> str:
    """A number as people write it (``1080000``, ``0.5``, ``1e-05``), never a numpy repr."""
    return f"{float(x):.10g}"


@dataclass(frozen=True, repr=False)
class MethodOverrides(Display):
    """Settings one injection changes in its method (batch-sheet columns).

    Attributes
    ----------
    limits : (float, float) or None
        Integration limits (start, end) [mL].
    limits_M : (float, float) or None
        Integration limits in molar mass (low M, high M) [g/mol]; not with ``limits``.
    windows : pair of windows or None
        Baseline windows ((a, b), (c, d)) [mL].

    Examples
    --------
    >>> MethodOverrides(limits_M=(1000.0, 1e6)).describe()
    'limits 1000-1000000 g/mol'
    >>> bool(MethodOverrides())
    False
    """

    limits: Window | None = None
    limits_M: Window | None = None
    windows: tuple[Window, Window] | None = None

    def __post_init__(self) -> None:
        if self.limits is not None and self.limits_M is not None:
            raise MethodError("give the integration limits in mL or in g/mol, not both")
        for label, pair, unit in (("limits", self.limits, "mL"), ("limits", self.limits_M, "g/mol")):
            if pair is not None and not pair[0] < pair[1]:
                raise MethodError(f"{label} {_num(pair[0])}-{_num(pair[1])} {unit}: the first must "
                                  "be below the second")
        if self.limits_M is not None and not self.limits_M[0] > 0:
            raise MethodError(f"limits in molar mass must be positive, got {_num(self.limits_M[0])} g/mol")
        if self.windows is not None:
            (a, b), (c, d) = self.windows
            if not (a < b <= c < d):
                raise MethodError(f"baseline windows {_num(a)}-{_num(b)} and {_num(c)}-{_num(d)} mL: "
                                  "each must start before it ends, the first before the second")

    def __bool__(self) -> bool:
        return self.limits is not None or self.limits_M is not None or self.windows is not None

    def describe(self) -> str:
        """One line for the results table (``""`` when nothing is overridden)."""
        parts = []
        if self.limits is not None:
            parts.append(f"limits {_num(self.limits[0])}-{_num(self.limits[1])} mL")
        if self.limits_M is not None:
            parts.append(f"limits {_num(self.limits_M[0])}-{_num(self.limits_M[1])} g/mol")
        if self.windows is not None:
            (a, b), (c, d) = self.windows
            parts.append(f"baseline windows {_num(a)}-{_num(b)}, {_num(c)}-{_num(d)} mL")
        return "; ".join(parts)

    def summary(self) -> dict[str, Any]:
        """JSON-safe description (only what is overridden)."""
        out: dict[str, Any] = {}
        if self.limits is not None:
            out["integration limits [mL]"] = list(self.limits)
        if self.limits_M is not None:
            out["integration limits [g/mol]"] = list(self.limits_M)
        if self.windows is not None:
            out["baseline windows [mL]"] = [list(w) for w in self.windows]
        return out


def load_method(path: str | Path) -> Method:
    """Read and check a method TOML file.

    Raises
    ------
    MethodError
        Missing file, TOML syntax error (with line), unknown key, bad value.
    """
    p = Path(path)
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise MethodError("method file not found; check the path", path=p) from None
    except OSError as exc:
        raise MethodError(f"cannot read method file: {exc.strerror}", path=p) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise MethodError("method file is not UTF-8 text; save it as UTF-8", path=p) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MethodError(f"not valid TOML: {exc}", path=p) from None
    method = _build(data, p.parent, str(p))
    object.__setattr__(method, "sha256", hashlib.sha256(raw).hexdigest())
    object.__setattr__(method, "text", text)
    return method


# -- checking helpers ---------------------------------------------------------------------
def _err(msg: str, key: str, source: str | None) -> MethodError:
    return MethodError(msg, path=source, key=key)


def _check_keys(section: dict, name: str, source: str | None) -> None:
    allowed = _SCHEMA.get(name)
    if allowed is None:
        return
    for key in section:
        if key not in allowed:
            full = f"{name}.{key}" if name else key
            hint = ", ".join(sorted(allowed))
            raise _err(f"unknown key; allowed here: {hint}", full, source)


def _number(value: Any, key: str, source: str | None, *, positive: bool = False, minimum: float | None = None) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _err(f"must be a number, got {value!r}", key, source)
    v = float(value)
    if not math.isfinite(v):
        raise _err(f"must be finite, got {value!r}", key, source)
    if positive and v <= 0:
        raise _err(f"must be positive, got {value!r}", key, source)
    if minimum is not None and v < minimum:
        raise _err(f"must be at least {minimum:g}, got {value!r}", key, source)
    return v


def _window(value: Any, key: str, source: str | None) -> Window:
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise _err(f"must be a pair [start, end] in mL, got {value!r}", key, source)
    a = _number(value[0], key, source)
    b = _number(value[1], key, source)
    if not a < b:
        raise _err(f"start must be below end, got [{a:g}, {b:g}]", key, source)
    return a, b


def _auto(value: Any) -> bool:
    return isinstance(value, str) and value.strip().lower() == "auto"


def _section(data: dict, name: str, source: str | None) -> dict:
    sec = data.get(name, {})
    if not isinstance(sec, dict):
        raise _err("must be a table (a [section] in TOML)", name, source)
    _check_keys(sec, name, source)
    return sec


def _build(data: dict[str, Any], base: Path, source: str | None) -> Method:
    """Check a parsed method mapping section by section and build the :class:`Method`.

    Each section has its own step (``_import_options``, ``_flow``, ``_flow_marker``,
    ``_baseline``, ``_integration``, ``_thresholds``, ``_peaks``, ``_fractions``,
    ``_build_calibration``); every step
    records what it decided in ``settings`` (the audit copy of the method).
    """
    if not isinstance(data, dict):
        raise _err("the method must be a TOML table", "", source)
    _check_keys(data, "", source)
    settings: dict[str, Any] = {}
    import_options = _import_options(data, source, settings)
    flow_rate = _flow(data, source, settings)
    marker_ref, marker_search, marker_options = _flow_marker(data, source, settings)
    windows = _baseline(data, source, settings)
    limits, exclusions, outside = _integration(data, source, settings)
    limits_M = _integration_molar_mass(data, source, settings)
    out_pct, res_pct, shift = _thresholds(data, source, settings)
    peak_options = _peaks(data, source, settings)
    fraction_options = _fractions(data, source, settings)

    sample_polymer = data.get("sample_polymer")
    if sample_polymer is not None and not isinstance(sample_polymer, str):
        raise _err("must be text, e.g. 'polystyrene'", "sample_polymer", source)

    calibration = _build_calibration(data, base, source, flow_rate, res_pct, sample_polymer, settings)
    detectors = _detectors(data, source, flow_rate, calibration, settings)

    name = data.get("name", "")
    if not isinstance(name, str):
        raise _err("must be text", "name", source)
    return Method(
        calibration=calibration,
        name=name,
        flow_rate=flow_rate,
        marker_reference=marker_ref,
        marker_search=marker_search,
        windows=windows,
        limits=limits,
        limits_M=limits_M,
        exclusions=exclusions,
        outside=outside,
        outside_warn_pct=out_pct,
        residual_limit_pct=res_pct,
        limit_shift=shift,
        marker=marker_options,
        peaks=peak_options,
        fractions=fraction_options,
        import_options=import_options,
        detectors=detectors,
        source=source,
        settings=settings,
    )


def _import_options(data: dict[str, Any], source: str | None, settings: dict[str, Any]) -> ImportOptions:
    """``[import]``: reader options for the slice exports (``"auto"`` leaves one unset)."""
    imp = _section(data, "import", source)
    opts: dict[str, Any] = {}
    for k, v in imp.items():
        key = f"import.{k}"
        if _auto(v):
            continue
        if k in ("x_column", "signal_column", "sheet"):
            if isinstance(v, bool) or not isinstance(v, (str, int)):
                raise _err("must be a header text or a 0-based column index", key, source)
            opts[k] = v
        elif k == "x_unit":
            units = {"ml": "mL", "min": "min", "s": "s"}
            if not isinstance(v, str) or v.strip().lower() not in units:
                raise _err(f"must be 'auto', 'mL', 'min' or 's', got {v!r}", key, source)
            opts[k] = units[v.strip().lower()]
        elif k == "decimal":
            if v not in (".", ","):
                raise _err(f"must be 'auto', '.' or ',', got {v!r}", key, source)
            opts[k] = v
        elif k == "separator":
            seps = {",": ",", ";": ";", "tab": "\t", "\t": "\t"}
            if v not in seps:
                raise _err(f"must be 'auto', ',', ';' or 'tab', got {v!r}", key, source)
            opts[k] = seps[v]
        elif k == "encoding":
            if not isinstance(v, str):
                raise _err("must be an encoding name such as 'utf-8' or 'utf-16'", key, source)
            opts[k] = v
    settings["import"] = dict(opts)
    return ImportOptions(**opts)


def _detectors(data: dict[str, Any], source: str | None, flow_rate: float | None, calibration: Calibration,
               settings: dict[str, Any]) -> DetectorMethod | None:
    """``[detectors]``: the multi-detector set-up, checked by
    :meth:`gpctools.detectors.DetectorMethod.from_mapping` (MethodError naming the dotted
    key, e.g. ``detectors.ls.dn_dc``); the ``[mark_houwink]`` pairs fill in the
    standards' and the sample's Mark-Houwink constants it does not give.
    """
    if "detectors" not in data:
        return None
    mh = calibration.mark_houwink or {}
    pairs = {k: float(mh[f"{k} [dL/g]" if k.startswith("K") else f"{k} [-]"])
             for k in ("K_standard", "a_standard", "K_sample", "a_sample")
             if (f"{k} [dL/g]" if k.startswith("K") else f"{k} [-]") in mh}
    det = DetectorMethod.from_mapping(data["detectors"], flow_rate=flow_rate, source=source, mark_houwink=pairs)
    settings["detectors"] = det.summary()
    return det


def _flow(data: dict[str, Any], source: str | None, settings: dict[str, Any]) -> float | None:
    """``[flow]``: the nominal flow rate [mL/min], or None."""
    flow = _section(data, "flow", source)
    flow_rate = _number(flow["rate"], "flow.rate", source, positive=True) if "rate" in flow else None
    if flow_rate is not None and flow_rate > 1000.0:
        # analytical SEC runs at about 0.1-2 mL/min, preparative columns at tens of mL/min
        raise _err(f"{flow_rate:g} mL/min is not a plausible SEC flow rate; give it in mL/min",
                   "flow.rate", source)
    settings["flow rate [mL/min]"] = flow_rate
    return flow_rate


def _flow_marker(
    data: dict[str, Any], source: str | None, settings: dict[str, Any]
) -> tuple[float | None, Window | None, FlowMarkerOptions]:
    """``[flow_marker]``: the reference position [mL], the search window [mL] and how the
    marker is recognised there (``min_signal_to_noise`` [-], ``fwhm`` [mL], ``required``).
    """
    fm = _section(data, "flow_marker", source)
    marker_ref = _number(fm["reference"], "flow_marker.reference", source, positive=True) if "reference" in fm else None
    marker_search = _window(fm["search"], "flow_marker.search", source) if "search" in fm else None
    if marker_search is not None and marker_ref is None:
        raise _err("a marker search window needs flow_marker.reference (the calibration-day position)",
                   "flow_marker.reference", source)
    snr = _number(fm.get("min_signal_to_noise", 10.0), "flow_marker.min_signal_to_noise", source, positive=True)
    fwhm = _window(fm["fwhm"], "flow_marker.fwhm", source) if "fwhm" in fm else None
    if fwhm is not None and fwhm[0] <= 0:
        raise _err(f"widths must be positive volumes in mL, got [{fwhm[0]:g}, {fwhm[1]:g}]", "flow_marker.fwhm", source)
    required = fm.get("required", False)
    if not isinstance(required, bool):
        raise _err(f"must be true or false, got {required!r}", "flow_marker.required", source)
    if (required or "fwhm" in fm or "min_signal_to_noise" in fm) and marker_search is None:
        raise _err("these settings recognise the marker in flow_marker.search; give the search window "
                   "[start, end] in mL", "flow_marker.search", source)
    settings["flow marker reference [mL]"] = marker_ref
    settings["flow marker search [mL]"] = list(marker_search) if marker_search else None
    if marker_search is not None:
        settings["flow marker recognition"] = {
            "min signal-to-noise [-]": snr,
            "fwhm [mL]": list(fwhm) if fwhm else "5 slices to half the search window",
            "required": required,
        }
    return marker_ref, marker_search, FlowMarkerOptions(snr, fwhm, required)


def _baseline(data: dict[str, Any], source: str | None, settings: dict[str, Any]) -> tuple[Window, Window] | None:
    """``[baseline]``: two baseline windows [mL], or None for automatic."""
    bl = _section(data, "baseline", source)
    windows = None
    if "windows" in bl and not _auto(bl["windows"]):
        w = bl["windows"]
        if not isinstance(w, list) or len(w) != 2:
            raise _err("must be 'auto' or two windows [[a, b], [c, d]] in mL (before and after the peak)",
                       "baseline.windows", source)
        windows = (_window(w[0], "baseline.windows", source), _window(w[1], "baseline.windows", source))
        if not windows[0][1] <= windows[1][0]:
            raise _err("the first window must end before the second starts", "baseline.windows", source)
    settings["baseline windows [mL]"] = "auto" if windows is None else [list(x) for x in windows]
    return windows


def _integration(
    data: dict[str, Any], source: str | None, settings: dict[str, Any]
) -> tuple[Window | None, tuple[Window, ...], str]:
    """``[integration]``: limits [mL] (None = automatic), excluded regions [mL], outside rule."""
    integ = _section(data, "integration", source)
    limits = None
    if "limits" in integ and not _auto(integ["limits"]):
        limits = _window(integ["limits"], "integration.limits", source)
    exclusions: tuple[Window, ...] = ()
    if "exclude" in integ:
        ex = integ["exclude"]
        if not isinstance(ex, list):
            raise _err("must be a list of [start, end] pairs in mL", "integration.exclude", source)
        exclusions = tuple(_window(e, "integration.exclude", source) for e in ex)
    outside = integ.get("outside", "linear")
    if outside not in ("linear", "exclude"):
        raise _err(f"must be 'linear' or 'exclude', got {outside!r}", "integration.outside", source)
    settings["integration limits [mL]"] = "auto" if limits is None else list(limits)
    settings["excluded regions [mL]"] = [list(e) for e in exclusions]
    settings["outside calibration"] = outside
    return limits, exclusions, outside


def _integration_molar_mass(data: dict[str, Any], source: str | None, settings: dict[str, Any]) -> Window | None:
    """``integration.limits_molar_mass``: integration limits in molar mass [g/mol], or None.

    Two positive numbers in either order (``[1000, 1e6]``); stored as (low M, high M).
    Not together with ``integration.limits`` in mL. Converted to volumes through the
    calibration by :meth:`Method.volume_limits`.
    """
    integ = data.get("integration", {})
    key = "integration.limits_molar_mass"
    value = integ.get("limits_molar_mass") if isinstance(integ, dict) else None
    if value is None or _auto(value):
        return None
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise _err(f"must be a pair [low, high] of molar masses in g/mol, e.g. [1000, 1000000]; "
                   f"got {value!r}", key, source)
    a = _number(value[0], key, source, positive=True)
    b = _number(value[1], key, source, positive=True)
    if a == b:
        raise _err(f"the two limits are equal ({_num(a)} g/mol); give a low and a high molar mass",
                   key, source)
    if "limits" in integ and not _auto(integ["limits"]):
        raise _err("give the integration limits either in mL (integration.limits) or in g/mol "
                   "(integration.limits_molar_mass), not both", key, source)
    lo, hi = min(a, b), max(a, b)
    settings["integration limits [mL]"] = "from molar mass"
    settings["integration limits [g/mol]"] = [lo, hi]
    return lo, hi


def _thresholds(
    data: dict[str, Any], source: str | None, settings: dict[str, Any]
) -> tuple[float, float, float]:
    """``[thresholds]``: outside-calibration warning [% mass], standard residual [%], limit shift [mL]."""
    th = _section(data, "thresholds", source)
    out_pct = _number(th.get("outside_calibration_pct", 1.0), "thresholds.outside_calibration_pct", source, minimum=0)
    res_pct = _number(th.get("standard_residual_pct", 5.0), "thresholds.standard_residual_pct", source, positive=True)
    shift = _number(th.get("limit_shift", 0.2), "thresholds.limit_shift", source, positive=True)
    settings["thresholds"] = {C.OUTSIDE_CALIBRATION: out_pct, "standard residual [%]": res_pct,
                              "limit shift [mL]": shift}
    return out_pct, res_pct, shift


def _molar_masses(value: Any, key: str, source: str | None) -> tuple[float, ...]:
    """A list of positive molar masses [g/mol] (a single number is accepted)."""
    items = value if isinstance(value, list) else [value]
    out = []
    for v in items:
        m = _number(v, key, source, positive=True)
        if m >= 1e15:
            raise _err(f"{m:g} g/mol is not a plausible molar mass", key, source)
        out.append(m)
    if len(set(out)) != len(out):
        raise _err("a molar mass is listed twice", key, source)
    return tuple(out)


def _peaks(data: dict[str, Any], source: str | None, settings: dict[str, Any]) -> PeakOptions:
    """``[peaks]``: how a trace is split into peaks (``split``, ``valley_depth_pct`` [%],
    ``min_height_pct`` [%]).
    """
    sec = _section(data, "peaks", source)
    split: str | tuple[float, ...] = "none"
    raw = sec.get("split", "none")
    if isinstance(raw, str):
        word = raw.strip().lower()
        if word not in ("none", "valleys"):
            raise _err(f"must be 'none', 'valleys' or a list of molar masses in g/mol, got {raw!r}",
                       "peaks.split", source)
        split = word
    elif isinstance(raw, list) and raw:
        split = tuple(sorted(_molar_masses(raw, "peaks.split", source), reverse=True))
    else:
        raise _err(f"must be 'none', 'valleys' or a list of molar masses in g/mol, got {raw!r}",
                   "peaks.split", source)
    depth = _number(sec.get("valley_depth_pct", 10.0), "peaks.valley_depth_pct", source, positive=True)
    height = _number(sec.get("min_height_pct", 5.0), "peaks.min_height_pct", source, minimum=0)
    if depth >= 100:
        raise _err(f"must lie between 0 and 100 %, got {depth:g}", "peaks.valley_depth_pct", source)
    if height >= 100:
        raise _err(f"must lie between 0 and 100 %, got {height:g}", "peaks.min_height_pct", source)
    settings["peaks"] = {"split": split if isinstance(split, str) else list(split),
                         "valley depth [%]": depth, "min height [%]": height}
    return PeakOptions(split, depth / 100.0, height / 100.0)


def _fractions(data: dict[str, Any], source: str | None, settings: dict[str, Any]) -> FractionOptions:
    """``[fractions]``: cut-off molar masses [g/mol] for the mass below and above them."""
    sec = _section(data, "fractions", source)
    below = _molar_masses(sec["below"], "fractions.below", source) if "below" in sec else ()
    above = _molar_masses(sec["above"], "fractions.above", source) if "above" in sec else ()
    settings["fractions [g/mol]"] = {"below": list(below), "above": list(above)}
    return FractionOptions(below, above)


@dataclass(frozen=True)
class _Standards:
    """Standards as read, with where each came from (for messages).

    ``where`` holds one label per standard (``row 4`` of the file, or the method key
    ``calibration.standard[2]``); ``path`` is the file that holds them (the standards
    table, or the method file for inline standards) and ``key`` the method key naming
    them when they are inline.
    """

    names: list[str]
    Mp: list[float]
    volume: list[float]
    where: list[str]
    rows: list[int | None]
    path: str | None
    key: str | None


def _standards_from_rows(
    rows: list[dict[str, Any]], key: str, source: str | None, flow_rate: float | None
) -> _Standards:
    names, mps, vols, where = [], [], [], []
    for i, row in enumerate(rows, start=1):
        k = f"{key}[{i}]"
        if not isinstance(row, dict):
            raise _err("each standard must be a table with Mp and volume (or time)", k, source)
        extra = set(row) - {"name", "Mp", "volume", "time"}
        if extra:
            raise _err(f"unknown key(s) {sorted(extra)}; use name, Mp, volume [mL] or time [min]", k, source)
        if "Mp" not in row:
            raise _err("missing Mp [g/mol]", k, source)
        mp = _number(row["Mp"], f"{k}.Mp", source, positive=True)
        if "volume" in row:
            v = _number(row["volume"], f"{k}.volume", source, positive=True)
        elif "time" in row:
            if flow_rate is None:
                raise _err("standards given as time need flow.rate [mL/min]", "flow.rate", source)
            v = _number(row["time"], f"{k}.time", source, positive=True) * flow_rate
        else:
            raise _err("missing volume [mL] or time [min]", k, source)
        names.append(str(row.get("name", f"standard {i}")))
        mps.append(mp)
        vols.append(v)
        where.append(k)
    return _Standards(names, mps, vols, where, [None] * len(names), source, key)


def _standards_from_file(
    path: Path, sheet: str | int | None, source: str | None, flow_rate: float | None
) -> _Standards:
    """Names, Mp [g/mol] and peak volumes [mL] from a standards table (CSV or XLSX).

    The table is read with :data:`gpctools.sheets.STANDARDS` (the one cell parser: a decimal
    comma, a unit in the header, ``[kg/mol]`` or ``time [s]`` are understood). Peak times
    [min] are converted with the flow rate [mL/min]: ``V = t·F``.

    Raises
    ------
    MethodError
        Naming the standards file, row and column; or the method's ``flow.rate`` key when
        the standards are given as time without a flow rate.
    """
    from .sheets import STANDARDS, read_file
    from .sheets.schema import message_empty

    table = read_file(path, STANDARDS, sheet=sheet)
    use_volume = "volume" in table.columns
    if not use_volume and flow_rate is None:
        raise MethodError("standards given as time need flow.rate [mL/min] in the method",
                          path=source, key="flow.rate")
    x_field = "volume" if use_volume else "time"
    x_header = table.columns.header(x_field)
    names: list[str] = []
    mps: list[float] = []
    vols: list[float] = []
    rows: list[int | None] = []
    for row in table.rows:
        x = row[x_field]
        if x is None:
            raise row.error(message_empty(STANDARDS, STANDARDS.field(x_field)), x_header)
        names.append(row.get("name") or f"standard {len(names) + 1}")
        mps.append(row["Mp"])
        vols.append(x if use_volume else x * flow_rate)
        rows.append(row.row)
    where = [f"row {r}" for r in rows]
    return _Standards(names, mps, vols, where, rows, table.path or str(path), None)


def _check_standards(std: _Standards, order: int | str, source: str | None) -> None:
    """Refuse standards no calibration should be fitted to, naming the rows.

    Checks that span the rows of a standards table (issue 9): two standards at one peak
    volume; Mp that does not fall as the volume rises (larger molecules elute first in
    SEC, docs/science.md, section 2.1, so a rise points to swapped values or a wrong
    row); too few standards for the order. Messages name the standards table (or the
    method keys of inline standards) and show plain numbers.
    """
    n = len(std.Mp)
    here = "the standards table" if std.key is None else "the method"
    where_err: dict[str, Any] = {"path": std.path}
    if std.key is not None:
        where_err["key"] = std.key
    order_key = f"calibration.order in {source}" if source and std.key is None else "calibration.order"
    if isinstance(order, str):
        need = 5  # select_order: order 1 needs order + 4 standards for AICc
        what = ("choosing the order automatically (calibration.order = 'auto') needs at least "
                "5 standards")
        fix = f"add standards or set {order_key} to 1, 2 or 3"
    else:
        need = max(2, order + 1)
        what = (f"an order-{order} calibration needs at least {need} standards (better "
                f"{order + 2} or more)" if order > 1 else "a calibration needs at least 2 standards")
        fix = "add standards" + (f" or lower {order_key}" if order > 1 else "")
    if n < need:
        raise MethodError(f"{here} holds {n} standard{'s' if n != 1 else ''}; {what}: {fix}",
                          **where_err)

    def label(i: int) -> str:
        return f"{std.names[i]!r} ({std.where[i]}: {_num(std.volume[i])} mL, {_num(std.Mp[i])} g/mol)"

    idx = sorted(range(n), key=lambda i: (std.volume[i], std.rows[i] or 0))
    same = [(a, b) for a, b in zip(idx, idx[1:]) if std.volume[a] == std.volume[b]]
    if same:
        a, b = same[0]
        more = f" (and {len(same) - 1} more pair(s))" if len(same) > 1 else ""
        raise MethodError(
            f"standards {std.names[a]!r} ({std.where[a]}) and {std.names[b]!r} ({std.where[b]}) "
            f"have the same peak volume {_num(std.volume[a])} mL{more}; remove one or correct it",
            row=std.rows[b], **where_err)
    rising = [(a, b) for a, b in zip(idx, idx[1:]) if not std.Mp[b] < std.Mp[a]]
    if rising:
        listed = "; ".join(f"{label(a)} elutes before {label(b)}" for a, b in rising[:3])
        more = f"; and {len(rising) - 3} more" if len(rising) > 3 else ""
        raise MethodError(
            f"Mp must fall as the peak volume rises (larger molecules elute first), but {listed}"
            f"{more}: check for swapped Mp or volume values, or a standard in the wrong row",
            row=std.rows[rising[0][1]], **where_err)


def _build_calibration(data, base, source, flow_rate, res_pct, sample_polymer, settings) -> Calibration:
    if "calibration" not in data:
        raise _err("a [calibration] section with the narrow standards is required", "calibration", source)
    cal = _section(data, "calibration", source)
    order = cal.get("order", 3)
    if not (_auto(order) or (isinstance(order, int) and not isinstance(order, bool) and 1 <= order <= 5)):
        raise _err(f"must be an integer 1-5 or 'auto', got {order!r}", "calibration.order", source)
    std_polymer = cal.get("standard_polymer", "polystyrene")
    if not isinstance(std_polymer, str):
        raise _err("must be text", "calibration.standard_polymer", source)
    if "standards" in cal and "standard" in cal:
        raise _err("give the standards either as a file (standards) or inline ([[calibration.standard]]), not both",
                   "calibration.standards", source)
    if "standards" in cal:
        f = cal["standards"]
        if not isinstance(f, str):
            raise _err("must be a file name (CSV or XLSX) relative to the method file", "calibration.standards", source)
        std = _standards_from_file(base / f, cal.get("sheet"), source, flow_rate)
        settings["standards file"] = f
    elif "standard" in cal:
        rows = cal["standard"]
        if not isinstance(rows, list):
            raise _err("use [[calibration.standard]] tables", "calibration.standard", source)
        std = _standards_from_rows(rows, "calibration.standard", source, flow_rate)
    else:
        raise _err("no standards: give calibration.standards = 'file.csv' or [[calibration.standard]] tables",
                   "calibration", source)
    _check_standards(std, order if isinstance(order, int) else "auto", source)
    names, mps, vols = std.names, std.Mp, std.volume
    mh = _section(data, "mark_houwink", source)
    try:
        calibration = fit_calibration(
            vols, mps, order=order, names=names, standard_polymer=std_polymer,
            sample_polymer=sample_polymer, residual_limit_pct=res_pct,
        )
        if mh:
            vals = {}
            for k in ("K_standard", "a_standard", "K_sample", "a_sample"):
                if k not in mh:
                    raise _err("missing; a universal calibration needs K and a for both polymers",
                               f"mark_houwink.{k}", source)
                vals[k] = _number(mh[k], f"mark_houwink.{k}", source, positive=True)
            sp = mh.get("sample_polymer", sample_polymer or "sample polymer")
            calibration = calibration.converted(
                vals["K_standard"], vals["a_standard"], vals["K_sample"], vals["a_sample"],
                sample_polymer=str(sp), source=mh.get("source"),
            )
    except CalibrationError as exc:
        raise MethodError(exc.message, path=source, key="calibration") from None
    settings["calibration order"] = calibration.order
    settings["standard polymer"] = std_polymer
    settings["molar-mass scale"] = calibration.scale_label()
    if calibration.mark_houwink:
        settings["mark_houwink"] = calibration.mark_houwink
    return calibration
