"""The run-series sheet: one row per polymerization run, read into a :class:`RunSeries`.

Columns (header text; case, spacing and the degree sign do not matter). A run needs an
id, a chain length (a chromatogram ``file`` or measured ``Mn``/``Mw``), the monomer's M0
and the ratio(s) of the species whose constants are fitted:

============================== ============================================================
``run``                        run id (unique); also accepted: ``run id``, ``sample_id``
``file``                       chromatogram (slice export), relative to the sheet
``Mn [g/mol]``, ``Mw [g/mol]`` measured averages, used when there is no ``file``
                               (``[kg/mol]`` also accepted)
``Mn scale``                   ``absolute`` or ``relative`` (standard-equivalent) for the
                               measured Mn/Mw; chromatograms take the method's scale
``monomer``                    name in the bundled monomer table (gives M0), or
``M0 [g/mol]``                 the repeat-unit molar mass directly
``[M] [mol/L]``                monomer concentration at the start
``[A] [mol/L]``                agent concentration at the start (name it in ``agent``), or
``ratio [A]/[M] [-]``          the ratio directly
``[A:<name>] [mol/L]``         several agents varied in one design: one column per agent
                               (or ``ratio [A:<name>]/[M] [-]``); the term is ``C_A:<name>``
``[S] [mol/L]``, ``[I] [mol/L]`` solvent and initiator (or ``ratio [S]/[M] [-]``, ...)
``conversion [-]``             monomer conversion x (``conversion [%]`` also accepted)
``T [°C]``                     temperature (``T [K]`` also accepted)
``series``                     group label; runs are fitted per (series, T)
``agent``                      name of the agent of ``[A]`` (label only)
``role``                       ``run`` (default), ``control`` (reference run without agent
                               for the intercept check, not fitted) or ``skip``
``residual [A] [mol/L]``       agent left at the end (consumption method); with
``residual [M] [mol/L]``       monomer left (or the conversion), and optional
``u(residual [A]) [mol/L]``,   standard uncertainties
``u(residual [M]) [mol/L]``,
``u(conversion) [-]``
============================== ============================================================

Other columns are kept as metadata. Every problem names the file, the row as the sheet
counts it, and the column.
"""

from __future__ import annotations

import math
import re
import warnings as _warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from gpctools.errors import DataError, EstimatorWarning, GpcError, InputFormatError

__all__ = ["Run", "RunSeries", "read_run_series", "run_series_from_rows", "SHEET_COLUMNS"]

#: Canonical column names written by the template (and the tables).
SHEET_COLUMNS = (
    "run", "file", "series", "agent", "monomer", "M0 [g/mol]", "T [°C]", "[M] [mol/L]",
    "[A] [mol/L]", "ratio [A]/[M] [-]", "[S] [mol/L]", "[I] [mol/L]", "conversion [-]",
    "Mn [g/mol]", "Mw [g/mol]", "Mn scale", "role", "residual [A] [mol/L]",
    "residual [M] [mol/L]", "u(residual [A]) [mol/L]", "u(residual [M]) [mol/L]",
    "u(conversion) [-]",
)

_SIMPLE = {
    "run": ("run", "run id", "run_id", "sample_id", "sample id", "id"),
    "file": ("file", "chromatogram", "chromatogram file"),
    "series": ("series", "group"),
    "agent": ("agent", "transfer agent"),
    "monomer": ("monomer",),
    "M0": ("m0 [g/mol]", "m0"),
    "T_C": ("t [c]", "t [degc]", "temperature [c]", "t", "temperature"),
    "T_K": ("t [k]", "temperature [k]"),
    "M": ("[m] [mol/l]", "[m]0 [mol/l]", "[m]"),
    "conversion": ("conversion [-]", "conversion", "x [-]"),
    "conversion_pct": ("conversion [%]",),
    "Mn": ("mn [g/mol]", "mn"),
    "Mw": ("mw [g/mol]", "mw"),
    "Mn_kg": ("mn [kg/mol]",),
    "Mw_kg": ("mw [kg/mol]",),
    "scale": ("mn scale", "molar-mass scale", "scale"),
    "role": ("role",),
    "res_M": ("residual [m] [mol/l]",),
    "u_res_M": ("u(residual [m]) [mol/l]",),
    "u_conversion": ("u(conversion) [-]",),
}
_CONC = re.compile(r"^\[(a|s|i)(?::\s*(.+?))?\]0? \[mol/l\]$")
_RATIO = re.compile(r"^(?:ratio )?\[(a|s|i)(?::\s*(.+?))?\]0?\s*/\s*\[m\]0?(?: \[-\]| \[mol/mol\])?$")
_RES_A = re.compile(r"^residual \[a(?::\s*(.+?))?\] \[mol/l\]$")
_U_RES_A = re.compile(r"^u\(residual \[a(?::\s*(.+?))?\]\) \[mol/l\]$")


def _norm(header: Any) -> str:
    s = re.sub(r"\s+", " ", str(header).strip().lower())
    return s.replace("°", "").replace("deg c", "c")


def _term(species: str, name: str | None) -> str:
    base = {"a": "C_A", "s": "C_S", "i": "C_I"}[species]
    return f"{base}:{name.strip()}" if (name and species == "a") else base


@dataclass(frozen=True)
class Run:
    """One polymerization run of a series.

    Attributes
    ----------
    run_id : str
    row : int
        Row of the sheet as the user counts it (1-based, header included).
    file : str or None
        Chromatogram path (resolved against the sheet's folder), if any.
    Mn, Mw : float
        Measured averages [g/mol] (NaN when taken from the chromatogram or not given).
    scale : str
        ``"absolute"``, ``"relative"`` or ``""`` (not stated).
    monomer : str
    M0 : float
        Repeat-unit molar mass [g/mol].
    monomer_conc : float
        [M] at the start [mol/L] (NaN when only ratios are given).
    ratios : dict
        Term (``"C_A"``, ``"C_A:<name>"``, ``"C_S"``, ``"C_I"``) -> [X]0/[M]0 [-].
    conversion : float
        Monomer conversion x [-] (NaN when not given).
    T_C : float
        Temperature [°C] (NaN when not given).
    series, agent, role : str
    residual_agent : dict
        Term -> residual agent [mol/L] (consumption method).
    u_residual_agent : dict
        Term -> its standard uncertainty [mol/L].
    agent_conc : dict
        Term -> initial agent concentration [mol/L] (NaN when only ratios are given).
    residual_monomer, u_residual_monomer, u_conversion : float
        [mol/L], [mol/L], [-] (NaN when not given).
    metadata : dict
        Other columns.
    """

    run_id: str
    row: int
    file: str | None
    Mn: float
    Mw: float
    scale: str
    monomer: str
    M0: float
    monomer_conc: float
    ratios: dict[str, float]
    conversion: float
    T_C: float
    series: str
    agent: str
    role: str
    residual_agent: dict[str, float] = field(default_factory=dict)
    u_residual_agent: dict[str, float] = field(default_factory=dict)
    agent_conc: dict[str, float] = field(default_factory=dict)
    residual_monomer: float = float("nan")
    u_residual_monomer: float = float("nan")
    u_conversion: float = float("nan")
    metadata: dict[str, Any] = field(default_factory=dict)

    @property
    def T_K(self) -> float:
        """Temperature [K]."""
        return self.T_C + 273.15

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        def f(v: float) -> float | None:
            return v if isinstance(v, float) and math.isfinite(v) else None

        return {
            "run": self.run_id,
            "row": self.row,
            "file": self.file,
            "Mn [g/mol]": f(self.Mn),
            "Mw [g/mol]": f(self.Mw),
            "scale": self.scale,
            "monomer": self.monomer,
            "M0 [g/mol]": self.M0,
            "[M] [mol/L]": f(self.monomer_conc),
            "ratios [-]": {k: f(v) for k, v in self.ratios.items()},
            "conversion [-]": f(self.conversion),
            "T [°C]": f(self.T_C),
            "series": self.series,
            "agent": self.agent,
            "role": self.role,
        }


@dataclass(frozen=True)
class RunSeries:
    """All runs of a run-series sheet.

    Attributes
    ----------
    path : str or None
        The sheet.
    runs : tuple of Run
    terms : tuple of str
        Every ratio term present in the sheet.
    warnings : tuple of str
    """

    path: str | None
    runs: tuple[Run, ...]
    terms: tuple[str, ...]
    warnings: tuple[str, ...] = ()

    def groups(self) -> dict[tuple[str, float], list[Run]]:
        """Runs grouped by (series label, temperature [°C] rounded to 0.1), sheet order."""
        out: dict[tuple[str, float], list[Run]] = {}
        for r in self.runs:
            key = (r.series, round(r.T_C, 1) if math.isfinite(r.T_C) else float("nan"))
            for k in out:
                if k[0] == key[0] and (k[1] == key[1] or (math.isnan(k[1]) and math.isnan(key[1]))):
                    key = k
                    break
            out.setdefault(key, []).append(r)
        return out

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        return {
            "sheet": self.path,
            "runs": [r.summary() for r in self.runs],
            "terms": list(self.terms),
            "warnings": list(self.warnings),
        }


def _blank(v: Any) -> bool:
    if v is None:
        return True
    if isinstance(v, float) and math.isnan(v):
        return True
    if isinstance(v, str) and not v.strip():
        return True
    try:
        import pandas as pd

        return bool(pd.isna(v)) if not isinstance(v, (list, tuple, dict)) else False
    except (TypeError, ValueError):
        return False


def _text(v: Any) -> str:
    return "" if _blank(v) else str(v).strip()


class _Row:
    """Accessor of one sheet row that names the file, row and column in every error."""

    def __init__(self, values: Mapping[str, Any], path: Any, sheet: Any, row: int) -> None:
        self.values = values
        self.path = path
        self.sheet = sheet
        self.row = row

    def err(self, msg: str, column: str | None = None) -> DataError:
        return DataError(msg, path=self.path, sheet=self.sheet, row=self.row, column=column)

    def num(self, column: str | None, *, positive: bool = False, nonneg: bool = False,
            fraction: bool = False) -> float:
        if column is None:
            return float("nan")
        v = self.values.get(column)
        if _blank(v):
            return float("nan")
        try:
            if isinstance(v, str):
                s = v.strip().replace("\u2212", "-")
                if re.fullmatch(r"[+-]?\d+,\d+(?:[eE][+-]?\d+)?", s):
                    s = s.replace(",", ".")
                f = float(s)
            else:
                f = float(v)
        except (TypeError, ValueError):
            raise self.err(f"{v!r} is not a number; write a plain number (units are in the "
                           "header)", column) from None
        if not math.isfinite(f):
            raise self.err(f"{v!r} is not a finite number", column)
        if positive and f <= 0:
            raise self.err(f"{f:g} must be positive", column)
        if nonneg and f < 0:
            raise self.err(f"{f:g} must not be negative", column)
        if fraction and not (0 <= f < 1):
            raise self.err(f"{f:g} must be a fraction between 0 and 1 (e.g. 0.05 for 5 %; "
                           "use a 'conversion [%]' column for percent)", column)
        return f


def run_series_from_rows(
    frame: Any,
    *,
    path: str | None = None,
    sheet: str | None = None,
    source_rows: list[int] | None = None,
    M0: float | None = None,
    monomer: str | None = None,
    reference: Any = None,
) -> RunSeries:
    """Build a :class:`RunSeries` from a table (a DataFrame or a list of dicts).

    Parameters
    ----------
    frame : pandas.DataFrame or list of dict
        One row per run with the sheet's column headers.
    path, sheet : str, optional
        Where the rows came from (for messages and to resolve chromatogram files).
    source_rows : list of int, optional
        1-based sheet row of each row (default: 2, 3, ... under one header row).
    M0 : float, optional
        Repeat-unit molar mass [g/mol] for rows without ``monomer``/``M0 [g/mol]``.
    monomer : str, optional
        Monomer name for rows without one.
    reference : gpctools.refdata.ReferenceData, optional
        Reference tables for monomer names (default: the bundled ones).

    Returns
    -------
    RunSeries
    """
    import pandas as pd

    df = frame if isinstance(frame, pd.DataFrame) else pd.DataFrame(list(frame))
    if source_rows is None:
        source_rows = list(df.attrs.get("source_rows") or range(2, len(df) + 2))
    base = Path(path).parent if path else Path(".")
    cols: dict[str, str] = {}
    conc_cols: dict[str, str] = {}
    ratio_cols: dict[str, str] = {}
    res_cols: dict[str, str] = {}
    ures_cols: dict[str, str] = {}
    unknown: list[str] = []
    for h in df.columns:
        n = _norm(h)
        hit = False
        for key, names in _SIMPLE.items():
            if n in names:
                if key in cols:
                    raise InputFormatError(
                        f"columns {cols[key]!r} and {h!r} mean the same thing; keep one",
                        path=path, sheet=sheet, column=str(h))
                cols[key] = str(h)
                hit = True
                break
        if hit:
            continue
        m = _CONC.match(n)
        if m:
            conc_cols[_term(m.group(1), _orig_name(str(h)))] = str(h)
            continue
        m = _RATIO.match(n)
        if m:
            ratio_cols[_term(m.group(1), _orig_name(str(h)))] = str(h)
            continue
        m = _RES_A.match(n)
        if m:
            res_cols[_term("a", _orig_name(str(h)))] = str(h)
            continue
        m = _U_RES_A.match(n)
        if m:
            ures_cols[_term("a", _orig_name(str(h)))] = str(h)
            continue
        unknown.append(str(h))
    warns: list[str] = []
    for h in unknown:
        if h.strip().startswith("[") or "mol/l" in _norm(h):
            warns.append(
                f"{path or 'run-series sheet'}: column {h!r} looks like a concentration but is "
                "not recognised (write e.g. '[A] [mol/L]', '[A:thiol] [mol/L]' or "
                "'ratio [A]/[M] [-]'); it is ignored"
            )
    if "run" not in cols:
        raise InputFormatError(
            "the run-series sheet has no 'run' column (the run id); add it (see "
            "templates/run_series.csv)", path=path, sheet=sheet)
    if not ({"file", "Mn", "Mw", "Mn_kg", "Mw_kg"} & set(cols)):
        raise InputFormatError(
            "the run-series sheet needs a 'file' column (chromatograms) or measured "
            "'Mn [g/mol]' / 'Mw [g/mol]' columns", path=path, sheet=sheet)
    terms = list(dict.fromkeys([*conc_cols, *ratio_cols]))  # sheet order
    if not terms:
        raise InputFormatError(
            "the run-series sheet gives no agent, solvent or initiator: add '[A] [mol/L]' "
            "with '[M] [mol/L]', or 'ratio [A]/[M] [-]' (or [S], [I], or [A:<name>] columns)",
            path=path, sheet=sheet)
    ref = reference
    runs: list[Run] = []
    seen: dict[str, int] = {}
    m0_cache: dict[str, float] = {}
    for idx, (_label, rec) in enumerate(df.iterrows()):
        rowno = int(source_rows[idx]) if idx < len(source_rows) else idx + 2
        R = _Row(rec.to_dict(), path, sheet, rowno)
        run_id = _text(rec.get(cols["run"]))
        if not run_id:
            raise R.err("the run id is empty; give every run an id", cols["run"])
        if run_id in seen:
            raise R.err(f"run id {run_id!r} is used again (first in row {seen[run_id]}); "
                        "run ids must be unique", cols["run"])
        seen[run_id] = rowno
        role = _text(rec.get(cols.get("role", ""), "")).lower() or "run"
        if role in ("exclude", "excluded", "ignore"):
            role = "skip"
        if role not in ("run", "control", "skip"):
            raise R.err(f"role {role!r} is not one of run, control, skip", cols.get("role"))
        file = _text(rec.get(cols["file"])) if "file" in cols else ""
        fpath: str | None = None
        if file:
            p = Path(file)
            if not p.is_absolute():
                p = base / p
            if not p.exists():
                raise InputFormatError(
                    f"chromatogram file {file!r} not found (looked for {p}); file paths are "
                    "relative to the sheet's folder", path=path, sheet=sheet, row=rowno,
                    column=cols["file"])
            fpath = str(p)
        Mn = R.num(cols.get("Mn"), positive=True)
        Mw = R.num(cols.get("Mw"), positive=True)
        if not math.isfinite(Mn):
            Mn = 1e3 * R.num(cols.get("Mn_kg"), positive=True)
        if not math.isfinite(Mw):
            Mw = 1e3 * R.num(cols.get("Mw_kg"), positive=True)
        if fpath is None and not (math.isfinite(Mn) or math.isfinite(Mw)) and role != "skip":
            raise R.err("no chain length for this run: give a chromatogram 'file' or measured "
                        "'Mn [g/mol]' and/or 'Mw [g/mol]'", cols.get("file") or cols.get("Mn"))
        if math.isfinite(Mn) and math.isfinite(Mw) and Mw < Mn:
            raise R.err(f"Mw {Mw:g} is smaller than Mn {Mn:g}; check the two columns",
                        cols.get("Mw"))
        scale = _text(rec.get(cols.get("scale", ""), "")).lower()
        if scale.startswith("abs"):
            scale = "absolute"
        elif scale.startswith("rel") or "equivalent" in scale:
            scale = "relative"
        elif scale:
            raise R.err(f"Mn scale {scale!r} must be 'absolute' or 'relative'", cols.get("scale"))
        mono = _text(rec.get(cols.get("monomer", ""), "")) or (monomer or "")
        m0 = R.num(cols.get("M0"), positive=True)
        if not math.isfinite(m0):
            if mono:
                if mono not in m0_cache:
                    try:
                        if ref is None:
                            from gpctools import refdata

                            m0_cache[mono] = float(refdata.monomer(mono).M0)
                        else:
                            m0_cache[mono] = float(ref.monomer(mono).M0)
                    except GpcError as exc:
                        raise R.err(f"{exc.message}; or give 'M0 [g/mol]' in this row",
                                    cols.get("monomer")) from None
                m0 = m0_cache[mono]
            elif M0 is not None:
                m0 = float(M0)
            else:
                raise R.err("no repeat-unit molar mass: give 'monomer' (a name in the bundled "
                            "table) or 'M0 [g/mol]'", cols.get("monomer") or cols.get("M0"))
        Mc = R.num(cols.get("M"), positive=True)
        ratios: dict[str, float] = {}
        agent_conc: dict[str, float] = {}
        for t in terms:
            c = R.num(conc_cols.get(t), nonneg=True)
            r = R.num(ratio_cols.get(t), nonneg=True)
            if math.isfinite(c):
                if not math.isfinite(Mc):
                    raise R.err(f"'{conc_cols[t]}' needs '[M] [mol/L]' in the same row (or give "
                                f"the ratio column instead)", cols.get("M") or conc_cols[t])
                rc = c / Mc
                if math.isfinite(r) and abs(rc - r) > 0.01 * max(abs(r), abs(rc)) + 1e-15:
                    raise R.err(f"'{conc_cols[t]}'/'[M] [mol/L]' = {rc:.4g} disagrees with "
                                f"'{ratio_cols[t]}' = {r:.4g}; give one of them",
                                ratio_cols[t])
                ratios[t] = rc
                agent_conc[t] = c
            elif math.isfinite(r):
                ratios[t] = r
                agent_conc[t] = r * Mc if math.isfinite(Mc) else float("nan")
            else:
                ratios[t] = 0.0
                agent_conc[t] = 0.0
        x = R.num(cols.get("conversion"), fraction=True)
        if "conversion_pct" in cols:
            xp = R.num(cols.get("conversion_pct"), nonneg=True)
            if math.isfinite(xp):
                if xp >= 100:
                    raise R.err(f"conversion {xp:g} % must be below 100", cols["conversion_pct"])
                x = xp / 100.0
        T_C = R.num(cols.get("T_C"))
        if "T_K" in cols:
            tk = R.num(cols.get("T_K"), positive=True)
            if math.isfinite(tk):
                T_C = tk - 273.15
        t_head = cols.get("T_C")
        if (math.isfinite(T_C) and T_C >= 200 and t_head is not None
                and t_head.strip().casefold() in ("t", "temperature")):
            # a header with no unit: 333 is far more likely 60 °C written in kelvin
            raise R.err(f"temperature {T_C:g} under a header without a unit looks like kelvin; "
                        "write the unit in the header: 'T [K]' or 'T [°C]'", t_head)
        if math.isfinite(T_C) and not (-100 < T_C < 400):
            raise R.err(f"temperature {T_C:g} °C is outside -100..400 °C (a unit mix-up?)",
                        cols.get("T_C") or cols.get("T_K"))
        residual = {t: R.num(c, nonneg=True) for t, c in res_cols.items()}
        u_residual = {t: R.num(c, nonneg=True) for t, c in ures_cols.items()}
        meta = {h: rec.get(h) for h in unknown if not _blank(rec.get(h))}
        runs.append(Run(
            run_id=run_id, row=rowno, file=fpath, Mn=Mn, Mw=Mw, scale=scale,
            monomer=mono, M0=m0, monomer_conc=Mc, ratios=ratios, conversion=x, T_C=T_C,
            series=_text(rec.get(cols.get("series", ""), "")),
            agent=_text(rec.get(cols.get("agent", ""), "")), role=role,
            residual_agent={k: v for k, v in residual.items() if math.isfinite(v)},
            u_residual_agent={k: v for k, v in u_residual.items() if math.isfinite(v)},
            agent_conc=agent_conc,
            residual_monomer=R.num(cols.get("res_M"), nonneg=True),
            u_residual_monomer=R.num(cols.get("u_res_M"), nonneg=True),
            u_conversion=R.num(cols.get("u_conversion"), nonneg=True),
            metadata=meta,
        ))
    if not runs:
        raise InputFormatError("the run-series sheet has no runs", path=path, sheet=sheet)
    for msg in warns:
        _warnings.warn(msg, EstimatorWarning, stacklevel=2)
    return RunSeries(path=path, runs=tuple(runs), terms=tuple(terms), warnings=tuple(warns))


def _orig_name(header: str) -> str | None:
    """The agent name inside ``[A:<name>]`` with its original case."""
    m = re.search(r"\[\s*[AaSsIi]\s*:\s*([^\]]+?)\s*\]", header)
    return m.group(1) if m else None


def read_run_series(
    path: str | Path,
    *,
    sheet: str | int | None = None,
    M0: float | None = None,
    monomer: str | None = None,
    reference: Any = None,
) -> RunSeries:
    """Read a run-series sheet (CSV or XLSX).

    Parameters
    ----------
    path : str or Path
        The sheet; chromatogram files are looked up relative to its folder.
    sheet : str or int, optional
        Workbook sheet (name or 0-based index).
    M0 : float, optional
        Default repeat-unit molar mass [g/mol] for rows without monomer/M0.
    monomer : str, optional
        Default monomer name.
    reference : gpctools.refdata.ReferenceData, optional

    Returns
    -------
    RunSeries

    Raises
    ------
    InputFormatError, DataError
        Naming the file, row (as the sheet counts it) and column.
    """
    from gpctools.io import read_sheet

    df = read_sheet(path, sheet=sheet)
    rows = list(df.attrs.get("source_rows") or range(2, len(df) + 2))
    sheet_name = df.attrs.get("sheet")
    return run_series_from_rows(df.reset_index(drop=True), path=str(path), sheet=sheet_name,
                                source_rows=rows, M0=M0, monomer=monomer, reference=reference)
