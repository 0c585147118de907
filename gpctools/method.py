"""The method file: every processing choice of an SEC analysis in one TOML file.

A method is read once, checked key by key, and turned into a frozen :class:`Method`
holding a fitted :class:`~gpctools.calibration.Calibration`. Unknown keys and bad values
raise :class:`~gpctools.errors.MethodError` naming the dotted key (``baseline.windows``)
and what to write instead. The commented starter file is ``templates/method.toml``.

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

    [baseline]
    windows = "auto"                  # or [[a, b], [c, d]] [mL]

    [integration]
    limits = "auto"                   # or [low, high] [mL]
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

    [thresholds]
    outside_calibration_pct = 1.0     # warn above this mass % outside calibration
    standard_residual_pct = 5.0       # acceptance of each standard's residual [%]
    limit_shift = 0.2                 # low-M limit move for the Mn-sensitivity check [mL]
"""

from __future__ import annotations

import hashlib
import math
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from . import columns as C
from .calibration import Calibration, fit_calibration
from .errors import CalibrationError, MethodError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on 3.10 only
    import tomli as tomllib

__all__ = ["Method", "ImportOptions", "load_method"]

Window = tuple[float, float]

_SCHEMA: dict[str, set[str] | None] = {
    "": {"name", "sample_polymer", "import", "flow", "flow_marker", "baseline", "integration",
         "calibration", "mark_houwink", "thresholds", "description", "qc"},  # [qc]: read by gpctools.qc
    "import": {"x_column", "signal_column", "x_unit", "sheet", "decimal", "separator", "encoding"},
    "flow": {"rate"},
    "flow_marker": {"reference", "search"},
    "baseline": {"windows"},
    "integration": {"limits", "exclude", "outside"},
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
        return {k: v for k, v in self.__dict__.items() if v is not None}


@dataclass(frozen=True)
class Method:
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
    windows : pair of windows or None
        Baseline windows [mL]; None = automatic.
    limits : (float, float) or None
        Integration limits [mL]; None = automatic.
    exclusions : tuple of windows
        Excluded regions [mL].
    outside : str
        "linear" or "exclude" (see :func:`gpctools.distribution.compute_distribution`).
    outside_warn_pct, residual_limit_pct, limit_shift : float
        Thresholds [% mass], [%], [mL].
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
    exclusions: tuple[Window, ...] = ()
    outside: str = "linear"
    outside_warn_pct: float = 1.0
    residual_limit_pct: float = 5.0
    limit_shift: float = 0.2
    import_options: ImportOptions = field(default_factory=ImportOptions)
    source: str | None = None
    sha256: str | None = None
    text: str | None = None
    settings: dict[str, Any] = field(default_factory=dict)

    @classmethod
    def from_dict(cls, data: dict[str, Any], *, base_dir: str | Path = ".", source: str | None = None) -> Method:
        """Build a method from a parsed TOML mapping (paths relative to ``base_dir``)."""
        return _build(data, Path(base_dir), source)

    def summary(self) -> dict[str, Any]:
        """JSON-safe settings and calibration summary (for manifests and reports)."""
        return {
            "name": self.name,
            "source": self.source,
            "sha256": self.sha256,
            "settings": self.settings,
            "calibration": self.calibration.summary(),
        }


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
    ``_baseline``, ``_integration``, ``_thresholds``, ``_build_calibration``); every step
    records what it decided in ``settings`` (the audit copy of the method).
    """
    if not isinstance(data, dict):
        raise _err("the method must be a TOML table", "", source)
    _check_keys(data, "", source)
    settings: dict[str, Any] = {}
    import_options = _import_options(data, source, settings)
    flow_rate = _flow(data, source, settings)
    marker_ref, marker_search = _flow_marker(data, source, settings)
    windows = _baseline(data, source, settings)
    limits, exclusions, outside = _integration(data, source, settings)
    out_pct, res_pct, shift = _thresholds(data, source, settings)

    sample_polymer = data.get("sample_polymer")
    if sample_polymer is not None and not isinstance(sample_polymer, str):
        raise _err("must be text, e.g. 'polystyrene'", "sample_polymer", source)

    calibration = _build_calibration(data, base, source, flow_rate, res_pct, sample_polymer, settings)

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
        exclusions=exclusions,
        outside=outside,
        outside_warn_pct=out_pct,
        residual_limit_pct=res_pct,
        limit_shift=shift,
        import_options=import_options,
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
) -> tuple[float | None, Window | None]:
    """``[flow_marker]``: the reference position [mL] and the search window [mL]."""
    fm = _section(data, "flow_marker", source)
    marker_ref = _number(fm["reference"], "flow_marker.reference", source, positive=True) if "reference" in fm else None
    marker_search = _window(fm["search"], "flow_marker.search", source) if "search" in fm else None
    if marker_search is not None and marker_ref is None:
        raise _err("a marker search window needs flow_marker.reference (the calibration-day position)",
                   "flow_marker.reference", source)
    settings["flow marker reference [mL]"] = marker_ref
    settings["flow marker search [mL]"] = list(marker_search) if marker_search else None
    return marker_ref, marker_search


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


def _standards_from_rows(rows: list[dict[str, Any]], key: str, source: str | None, flow_rate: float | None):
    names, mps, vols = [], [], []
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
    return names, mps, vols


def _standards_from_file(
    path: Path, sheet: str | int | None, source: str | None, flow_rate: float | None
) -> tuple[list[str], list[float], list[float]]:
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
    for row in table.rows:
        x = row[x_field]
        if x is None:
            raise row.error(message_empty(STANDARDS, STANDARDS.field(x_field)), x_header)
        names.append(row.get("name") or f"standard {len(names) + 1}")
        mps.append(row["Mp"])
        vols.append(x if use_volume else x * flow_rate)
    return names, mps, vols


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
        names, mps, vols = _standards_from_file(base / f, cal.get("sheet"), source, flow_rate)
        settings["standards file"] = f
    elif "standard" in cal:
        rows = cal["standard"]
        if not isinstance(rows, list):
            raise _err("use [[calibration.standard]] tables", "calibration.standard", source)
        names, mps, vols = _standards_from_rows(rows, "calibration.standard", source, flow_rate)
    else:
        raise _err("no standards: give calibration.standards = 'file.csv' or [[calibration.standard]] tables",
                   "calibration", source)
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
