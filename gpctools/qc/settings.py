"""QC settings: acceptance limits, sample judgement, trend charts and per-product processing.

:class:`QCSettings` holds every choice of a QC evaluation; it is recorded in the audit
trail. It is read from a QC settings file (:func:`read_qc_settings`: TOML, or a key/value
CSV/XLSX sheet; ``templates/qc_settings.toml`` is the commented starter) or from a
``[qc]`` table in the method file (:meth:`QCSettings.from_method`), with the schema
:data:`gpctools.sheets.QC_SETTINGS` and the one cell parser.

TOML layout::

    [suitability]                 # SuitabilityLimits, keys as in the sheets schema
    max_calibration_residual_pct = 5.0
    check_standard_tolerance_Mw_pct = 5.0
    replicate_rule = "pooled"     # pooled | pairs | worst
    ...
    [samples]
    judge = "injections and mean" # or "mean"
    blank_subtraction = false
    [trends]
    columns = ["Mw [g/mol]", "dispersity [-]"]
    rules = "nelson-1-2"          # a rule set, or a list of rule codes
    baseline = "auto"             # "auto" | "all" | "history" | 20 | ["2026-01-01", "2026-03-31"]
                                  # | "flag: <column>"
    [products.LC-110]
    limits = [2000, 3000000]      # integration window [g/mol]
    method = "lc110.toml"         # a method of its own (relative to this file)
    reference = "ref_LC-110.csv"  # reference distribution (M [g/mol], dw/dlogM [-])
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import os
import sys
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any

import pandas as pd

from gpctools import columns as C
from gpctools.display import Display
from gpctools.errors import GpcError, MethodError
from gpctools.qc.decisions import JUDGE_INJECTIONS, JUDGE_MEAN
from gpctools.qc.suitability import SuitabilityLimits
from gpctools.qc.trends import DEFAULT_RULE_SET, FALSE_ALARM_SIMULATIONS, RunRule, rule_set
from gpctools.sheets import cells
from gpctools.sheets.qc_settings import QC_PRODUCT, QC_SETTINGS, SECTIONS
from gpctools.sheets.schema import read_table

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on 3.10 only
    import tomli as tomllib

__all__ = ["QCSettings", "ProductSettings", "TrendBaseline", "read_qc_settings", "AUTO_BASELINE_POINTS"]

#: With at least this many history points, "auto" freezes the limits on the first this
#: many (common practice: 20-25 points for trial limits of an individuals chart).
AUTO_BASELINE_POINTS = 20
_BASELINE_KINDS = ("auto", "all", "history", "count", "dates", "flag")
_TREND_LIST_KEYS = ("columns", "rules", "baseline")


@dataclass(frozen=True, repr=False)
class TrendBaseline(Display):
    """Which points of a control chart set its (frozen) limits.

    Attributes
    ----------
    kind : str
        ``"auto"``: the first :data:`AUTO_BASELINE_POINTS` history points when the chart
        has that many, else all history points (when two or more), else all points;
        ``"all"``; ``"history"``; ``"count"`` (the first ``count`` points); ``"dates"``
        (points dated ``start`` to ``end``, inclusive); ``"flag"`` (points whose rows
        say yes in ``column``).
    """

    kind: str = "auto"
    count: int | None = None
    start: _dt.datetime | None = None
    end: _dt.datetime | None = None
    column: str | None = None

    def __post_init__(self) -> None:
        if self.kind not in _BASELINE_KINDS:
            raise MethodError(f"baseline must be one of {', '.join(_BASELINE_KINDS)}", key="trends.baseline")
        if self.kind == "count" and not (self.count and self.count >= 2):
            raise MethodError("a baseline count needs at least 2 points", key="trends.baseline")

    def describe(self) -> str:
        """In words, for reports."""
        if self.kind == "auto":
            return (f"auto: the first {AUTO_BASELINE_POINTS} history points when there are that many, "
                    "else all history points")
        if self.kind == "count":
            return f"the first {self.count} points"
        if self.kind == "dates":
            return f"points dated {self.start:%Y-%m-%d} to {self.end:%Y-%m-%d}"
        if self.kind == "flag":
            return f"points flagged in column {self.column!r}"
        return {"all": "all points", "history": "all history points"}[self.kind]

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"kind": self.kind, "description": self.describe()}


@dataclass(frozen=True, repr=False)
class ProductSettings(Display):
    """How one product is processed and shown.

    Attributes
    ----------
    product : str
        Product code as in the batch sheet.
    limits : (float, float) or None
        Integration window in molar mass (low, high) [g/mol]; converted to volumes with
        the sequence's calibration.
    method : str or None
        A method file of its own (absolute path).
    reference : str or None
        Reference distribution table (``M [g/mol]`` and ``dw/dlogM [-]`` columns).
    """

    product: str
    limits: tuple[float, float] | None = None
    method: str | None = None
    reference: str | None = None

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {"product": self.product, "limits [g/mol]": list(self.limits) if self.limits else None,
                "method": self.method, "reference": self.reference}


@dataclass(frozen=True, repr=False)
class QCSettings(Display):
    """Settings of a QC evaluation (recorded in the audit trail).

    Attributes
    ----------
    suitability : SuitabilityLimits
    trend_columns : tuple of str
        Results columns charted across batches (default Mw and dispersity).
    trend_limits_from : str
        ``"auto"``, ``"all"`` or ``"history"``: shorthand for ``baseline``.
    rules : tuple of RunRule
        Run rules (default the ``nelson-1-2`` set: a point beyond 3 sigma, 9 in a row).
    chart_check_standards : bool
        Also chart each check standard across sequences.
    baseline : TrendBaseline or None
        Which points set the frozen limits (None: ``trend_limits_from``).
    false_alarm_simulations : int
        Simulated in-control charts behind each chart's stated false-alarm rate (0: none).
    judge : str
        ``"injections and mean"`` (default) or ``"mean"``.
    blank_subtraction : bool
        Subtract the sequence's blank from every injection before processing.
    products : tuple of ProductSettings
    source, sha256 : str or None
        The settings file and its SHA-256.
    """

    suitability: SuitabilityLimits = field(default_factory=SuitabilityLimits)
    trend_columns: tuple[str, ...] = (C.MW, C.DISPERSITY)
    trend_limits_from: str = "auto"
    rules: tuple[RunRule, ...] = rule_set(DEFAULT_RULE_SET)[1]
    chart_check_standards: bool = True
    baseline: TrendBaseline | None = None
    false_alarm_simulations: int = FALSE_ALARM_SIMULATIONS
    judge: str = JUDGE_INJECTIONS
    blank_subtraction: bool = False
    products: tuple[ProductSettings, ...] = ()
    source: str | None = None
    sha256: str | None = None

    def __post_init__(self) -> None:
        if self.trend_limits_from not in ("auto", "all", "history"):
            raise MethodError(f"trend_limits_from must be one of auto, all, history, got "
                              f"{self.trend_limits_from!r}", key="trend_limits_from")
        if self.judge not in (JUDGE_INJECTIONS, JUDGE_MEAN):
            raise MethodError(f"judge must be {JUDGE_INJECTIONS!r} or {JUDGE_MEAN!r}", key="samples.judge")
        object.__setattr__(self, "trend_columns", tuple(self.trend_columns))
        object.__setattr__(self, "rules", tuple(self.rules))
        object.__setattr__(self, "products", tuple(self.products))
        if self.baseline is None:
            object.__setattr__(self, "baseline", TrendBaseline(self.trend_limits_from))

    @property
    def rule_set_name(self) -> str:
        """Name of the run rules, as shown in reports."""
        return rule_set(self.rules)[0]

    def product(self, code: str) -> ProductSettings | None:
        """Processing settings of a product (case-insensitive), or None."""
        key = cells.text(code).casefold()
        return next((p for p in self.products if p.product.casefold() == key), None)

    @classmethod
    def from_method(cls, method: Any = None, *, require_check_standard: bool = True) -> QCSettings:
        """Settings from a method: its ``[qc]`` table when it has one, else the defaults,
        with the method's thresholds as the matching suitability limits.

        Parameters
        ----------
        method : gpctools.method.Method, optional
            Its ``residual_limit_pct`` (``thresholds.standard_residual_pct``) and
            ``outside_warn_pct`` (``thresholds.outside_calibration_pct``) become the
            calibration-residual and outside-calibration limits unless its ``[qc]`` table
            sets them.
        require_check_standard : bool
            See :class:`SuitabilityLimits` (False switches the requirement off).
        """
        base = cls()
        if method is not None:
            base = replace(base, suitability=replace(
                base.suitability, max_calibration_residual_pct=float(method.residual_limit_pct),
                max_outside_calibration_pct=float(method.outside_warn_pct)))
            qc = _method_qc_table(method)
            if qc:
                src = getattr(method, "source", None)
                folder = Path(src).parent if src else Path(".")
                base = settings_from_mapping(qc, source=src, base_dir=folder, defaults=base, prefix="qc.")
        if not require_check_standard:
            base = replace(base, suitability=replace(base.suitability, require_check_standard=False))
        return base

    def summary(self) -> dict[str, Any]:
        """JSON-safe copy."""
        assert self.baseline is not None
        return {
            "source": self.source,
            "sha256": self.sha256,
            "suitability": self.suitability.summary(),
            "sample judgement": self.judge,
            "blank subtraction": self.blank_subtraction,
            "trend columns": list(self.trend_columns),
            "trend baseline": self.baseline.summary(),
            "run rules": [r.code for r in self.rules],
            "rule set": self.rule_set_name,
            "false-alarm simulations": self.false_alarm_simulations,
            "chart check standards": self.chart_check_standards,
            "products": [p.summary() for p in self.products],
        }


def _method_qc_table(method: Any) -> dict[str, Any] | None:
    text = getattr(method, "text", None)
    if not text:
        return None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        return None
    qc = data.get("qc")
    return qc if isinstance(qc, dict) else None


def _scalars(values: Mapping[str, Any], source: str | None, keys: Mapping[str, str]) -> dict[str, Any]:
    """Check scalar settings with :data:`QC_SETTINGS`; ``keys`` maps a field to its dotted key."""
    if not values:
        return {}
    frame = pd.DataFrame([{k: v for k, v in values.items()}])
    try:
        table = read_table(frame, QC_SETTINGS, path=source, source_rows=[1])
    except GpcError as exc:
        col = exc.column or ""
        field_name = next((f.name for f in QC_SETTINGS.fields
                           if cells.normalise_name(col) in f.names), col)
        raise MethodError(exc.message, path=source, key=keys.get(field_name, col)) from None
    return {k: v for k, v in table.rows[0].values.items() if v is not None}


def _apply(base: QCSettings, v: Mapping[str, Any]) -> QCSettings:
    """Settings with the checked scalar values ``v`` (field name -> value) applied."""
    lim_fields = {f.name for f in fields(SuitabilityLimits)}
    lim = {k: v[k] for k in lim_fields if k in v}
    out = replace(base, suitability=replace(base.suitability, **lim))
    if "judge" in v:
        out = replace(out, judge=v["judge"])
    if "blank_subtraction" in v:
        out = replace(out, blank_subtraction=bool(v["blank_subtraction"]))
    if "chart_check_standards" in v:
        out = replace(out, chart_check_standards=bool(v["chart_check_standards"]))
    if "false_alarm_simulations" in v:
        out = replace(out, false_alarm_simulations=int(v["false_alarm_simulations"]))
    return out


def _baseline(value: Any, source: str | None, key: str) -> TrendBaseline:
    """``trends.baseline``: auto/all/history, a count, two dates, or ``flag: <column>``."""
    if isinstance(value, bool):
        raise MethodError("write a count, two dates, 'auto', 'all', 'history' or 'flag: <column>'",
                          path=source, key=key)
    if isinstance(value, (int, float)) or (isinstance(value, str) and value.strip().isdigit()):
        n = float(value)
        if not (n == int(n) and n >= 2):
            raise MethodError(f"a baseline count must be a whole number of at least 2, got {value!r}",
                              path=source, key=key)
        return TrendBaseline("count", count=int(n))
    if isinstance(value, (list, tuple)):
        if len(value) != 2:
            raise MethodError("a baseline period is two dates [first, last]", path=source, key=key)
        d = [_date(x, source, key) for x in value]
        if d[0] > d[1]:
            raise MethodError("the baseline period starts after it ends; swap the dates", path=source, key=key)
        return TrendBaseline("dates", start=d[0], end=d[1])
    text = cells.text(value)
    low = text.casefold()
    if low.startswith("flag"):
        col = text.split(":", 1)[1].strip() if ":" in text else ""
        if not col:
            raise MethodError("name the flag column: 'flag: baseline'", path=source, key=key)
        return TrendBaseline("flag", column=col)
    if " to " in low:
        a, b = text.split(" to ", 1) if " to " in text else text.split(" TO ", 1)
        return _baseline([a.strip(), b.strip()], source, key)
    if low in ("auto", "all", "history"):
        return TrendBaseline(low)
    raise MethodError(f"unknown baseline {text!r}; write 'auto', 'all', 'history', a count such as 20, "
                      "two dates ['2026-01-01', '2026-03-31'] or 'flag: <column>'", path=source, key=key)


def _date(x: Any, source: str | None, key: str) -> _dt.datetime:
    if isinstance(x, _dt.datetime):
        return x.replace(tzinfo=None)
    if isinstance(x, _dt.date):
        return _dt.datetime(x.year, x.month, x.day)
    try:
        return _dt.datetime.fromisoformat(cells.text(x))
    except ValueError:
        raise MethodError(f"{x!r} is not a date; write YYYY-MM-DD", path=source, key=key) from None


def _trends(base: QCSettings, tr: Mapping[str, Any], source: str | None, prefix: str) -> QCSettings:
    out = base
    if "columns" in tr:
        cols = tr["columns"]
        cols = [c.strip() for c in cols.split(";")] if isinstance(cols, str) else list(cols)
        if not cols or not all(isinstance(c, str) and c.strip() for c in cols):
            raise MethodError("list the results columns to chart, e.g. [\"Mw [g/mol]\", \"dispersity [-]\"]",
                              path=source, key=f"{prefix}trends.columns")
        out = replace(out, trend_columns=tuple(c.strip() for c in cols))
    if "rules" in tr:
        r = tr["rules"]
        if isinstance(r, str) and ";" in r:
            r = [x.strip() for x in r.split(";")]
        try:
            out = replace(out, rules=rule_set(r)[1])
        except MethodError as exc:
            raise MethodError(exc.message, path=source, key=f"{prefix}trends.rules") from None
    if "baseline" in tr:
        out = replace(out, baseline=_baseline(tr["baseline"], source, f"{prefix}trends.baseline"))
    return out


def _product(code: str, p: Mapping[str, Any], source: str | None, base_dir: Path, key: str) -> ProductSettings:
    unknown = set(p) - {"limits", "method", "reference"}
    if unknown:
        raise MethodError(f"unknown key(s) {sorted(unknown)}; a product takes limits [g/mol], method, "
                          "reference", path=source, key=key)
    limits = None
    if "limits" in p:
        lim = p["limits"]
        ok = isinstance(lim, (list, tuple)) and len(lim) == 2 and all(
            isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) and x > 0 for x in lim)
        if not ok:
            raise MethodError("write the integration window as two molar masses [g/mol], e.g. "
                              "limits = [2000, 3000000]", path=source, key=f"{key}.limits")
        lo, hi = sorted(float(x) for x in lim)
        if lo == hi:
            raise MethodError("the two molar masses of the window are equal", path=source, key=f"{key}.limits")
        limits = (lo, hi)
    paths = {}
    for k in ("method", "reference"):
        if k in p:
            if not isinstance(p[k], str) or not p[k].strip():
                raise MethodError("give a file name relative to the settings file", path=source, key=f"{key}.{k}")
            paths[k] = str((base_dir / p[k]).resolve())
            if not Path(paths[k]).exists():
                raise MethodError(f"file {paths[k]} not found", path=source, key=f"{key}.{k}")
    return ProductSettings(code, limits, paths.get("method"), paths.get("reference"))


def settings_from_mapping(data: Mapping[str, Any], *, source: str | None = None, base_dir: Path = Path("."),
                          defaults: QCSettings | None = None, prefix: str = "") -> QCSettings:
    """Settings from a parsed TOML mapping (sections suitability, samples, trends, products).

    Raises
    ------
    MethodError
        Naming the dotted key and what to write.
    """
    base = defaults or QCSettings()
    known = {"suitability", "samples", "trends", "products"}
    for k, v in data.items():
        if k not in known:
            raise MethodError(f"unknown section {k!r}; the sections are {', '.join(sorted(known))}",
                              path=source, key=f"{prefix}{k}")
        if not isinstance(v, dict):
            raise MethodError("must be a table ([section])", path=source, key=f"{prefix}{k}")
    values: dict[str, Any] = {}
    keys: dict[str, str] = {}
    for section in ("suitability", "samples", "trends"):
        for k, v in data.get(section, {}).items():
            if section == "trends" and k in _TREND_LIST_KEYS:
                continue
            if k not in SECTIONS[section]:
                allowed = [*SECTIONS[section], *(_TREND_LIST_KEYS if section == "trends" else ())]
                raise MethodError(f"unknown key {k!r}; [{section}] takes {', '.join(allowed)}",
                                  path=source, key=f"{prefix}{section}.{k}")
            values[k] = v
            keys[k] = f"{prefix}{section}.{k}"
    out = _apply(base, _scalars(values, source, keys))
    out = _trends(out, data.get("trends", {}), source, prefix)
    products = [_product(str(code), p if isinstance(p, dict) else {}, source, base_dir,
                         f"{prefix}products.{code}") for code, p in data.get("products", {}).items()]
    if products:
        out = replace(out, products=tuple(products))
    return out


def _from_sheet(path: Path) -> QCSettings:
    """Settings from a key/value sheet: ``setting``, ``value`` and an optional ``product``."""
    from gpctools.io import read_sheet

    df = read_sheet(path)
    heads = {cells.normalise_name(cells.text(c)): c for c in df.columns}
    if "setting" not in heads or "value" not in heads:
        raise MethodError("a QC settings sheet needs the columns 'setting' and 'value' (and 'product' "
                          "for per-product rows); see templates/qc_settings.csv", path=path)
    prod_col = heads.get("product")
    scalars: dict[str, Any] = {}
    trends: dict[str, Any] = {}
    products: dict[str, dict[str, Any]] = {}
    for _, r in df.iterrows():
        name = cells.text(r[heads["setting"]])
        if not name:
            continue
        product = cells.text(r[prod_col]) if prod_col is not None else ""
        if product:
            products.setdefault(product, {})[name] = r[heads["value"]]
        elif cells.normalise_name(name) in ("trend columns", "columns", "run rules", "rules", "baseline",
                                            "trend baseline"):
            trends[cells.normalise_name(name).split()[-1]] = cells.text(r[heads["value"]])
        else:
            scalars[name] = r[heads["value"]]
    out = _apply(QCSettings(), _scalars(scalars, str(path), {}))
    out = _trends(out, trends, str(path), "")
    prods = []
    for code, kv in products.items():
        table = read_table(pd.DataFrame([kv]), QC_PRODUCT, path=str(path), source_rows=[1])
        v = table.rows[0].values
        p: dict[str, Any] = {}
        if v.get("low") is not None or v.get("high") is not None:
            p["limits"] = [v.get("low"), v.get("high")]
        for k in ("method", "reference"):
            if v.get(k):
                p[k] = v[k]
        prods.append(_product(code, p, str(path), path.parent, f"product {code}"))
    return replace(out, products=tuple(prods)) if prods else out


def read_qc_settings(path: str | os.PathLike[str], *, method: Any = None) -> QCSettings:
    """Read a QC settings file: TOML (``.toml``) or a key/value sheet (CSV/XLSX).

    Parameters
    ----------
    path : str or os.PathLike
    method : gpctools.method.Method, optional
        Its thresholds and ``[qc]`` table are the defaults the file overrides.

    Returns
    -------
    QCSettings
        With ``source`` and ``sha256`` of the file.

    Raises
    ------
    MethodError
        Naming the file and the key (or row) and what to write.
    """
    p = Path(path)
    if not p.is_file():
        raise MethodError("QC settings file not found; start from templates/qc_settings.toml", path=p)
    raw = p.read_bytes()
    digest = hashlib.sha256(raw).hexdigest()
    if p.suffix.lower() == ".toml":
        try:
            data = tomllib.loads(raw.decode("utf-8-sig"))
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise MethodError(f"not valid TOML: {exc}", path=p) from None
        defaults = QCSettings.from_method(method) if method is not None else QCSettings()
        out = settings_from_mapping(data, source=str(p), base_dir=p.parent, defaults=defaults)
    else:
        out = _from_sheet(p)
    return replace(out, source=str(p), sha256=digest)
