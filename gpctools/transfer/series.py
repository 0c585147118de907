"""The run-series sheet: one row per polymerization run, read into a :class:`RunSeries`.

Columns (header text; case, spacing and the degree sign do not matter). A run needs an
id, a chain length (a chromatogram ``file`` or measured ``Mn``/``Mw``), the monomer's M0
and the ratio(s) of the species whose constants are fitted:

============================== ============================================================
``run``                        run id (unique); also accepted: ``run id``, ``sample_id``
``file``                       chromatogram (slice export), relative to the sheet;
                               replicate injections of one run separated by ``;``
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
``R_p [mol/L/s]``              measured rate of polymerization (kinetic regressor
                               R_p/[M]² when [M] or [I] varies)
``initiator``                  initiator name (kinetic term from reference data)
``delta [-]``                  δ = k_td/k_t (default: the monomer's bundled value)
``residual [A] [mol/L]``       agent left at the end (consumption method); with
``residual [M] [mol/L]``       monomer left (or the conversion), and optional
``u(residual [A]) [mol/L]``,   standard uncertainties
``u(residual [M]) [mol/L]``,
``u(conversion) [-]``
============================== ============================================================

Other columns are kept as metadata. Every problem names the file, the row as the sheet
counts it, and the column. The sheet is read with the schema
:data:`gpctools.sheets.RUN_SERIES` and the one cell parser (a decimal comma, ``[kg/mol]``,
``[%]``, ``[K]``, ``[mmol/L]`` are understood the same way as in every other sheet).
"""

from __future__ import annotations

import math
import warnings as _warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from gpctools import columns as C
from gpctools.display import Display
from gpctools.errors import EstimatorWarning, GpcError, InputFormatError
from gpctools.sheets import cells
from gpctools.sheets.run_series import RUN_SERIES, SHEET_COLUMNS
from gpctools.sheets.schema import CheckedSheet, SheetRow, read_table

__all__ = ["Run", "RunSeries", "read_run_series", "run_series_from_rows", "SHEET_COLUMNS"]

_NAN = float("nan")


@dataclass(frozen=True, repr=False)
class Run(Display):
    """One polymerization run of a series.

    Attributes
    ----------
    run_id : str
    row : int
        Row of the sheet as the user counts it (1-based, header included).
    file : str or None
        Chromatogram path (resolved against the sheet's folder), if any; the first one
        when the run has replicate injections (``files``).
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
    rate : float
        Measured rate of polymerization R_p [mol/L/s] (NaN when not given).
    initiator : str
        Initiator name (for a kinetic term from reference data).
    delta : float
        δ = k_td/k_t given in the sheet [-] (NaN when not given).
    files : tuple of str
        Every chromatogram of the run (replicate injections; ``file;file`` in the sheet).
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
    rate: float = float("nan")
    initiator: str = ""
    delta: float = float("nan")
    files: tuple[str, ...] = ()

    @property
    def initiator_conc(self) -> float:
        """[I] at the start [mol/L] (NaN when not given)."""
        v = self.agent_conc.get("C_I", float("nan"))
        return v if (v > 0 or self.ratios.get("C_I", 0.0) > 0) else float("nan")

    @property
    def T_K(self) -> float:
        """Temperature [K]."""
        return self.T_C + 273.15

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict."""
        f = cells.finite_or_none
        return {
            "run": self.run_id,
            "row": self.row,
            "file": self.file,
            C.MN: f(self.Mn),
            C.MW: f(self.Mw),
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
            "R_p [mol/L/s]": f(self.rate),
            "initiator": self.initiator,
            "delta [-]": f(self.delta),
            "files": list(self.files),
        }


@dataclass(frozen=True, repr=False)
class RunSeries(Display):
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

    Steps: check the table against :data:`gpctools.sheets.RUN_SERIES` (columns, units,
    cells), find the fitted terms, then build each run (:func:`_run`): chromatogram,
    measured averages and their scale, repeat-unit molar mass, ratios, temperature.

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

    Raises
    ------
    InputFormatError, DataError
        Naming the file, row (as the sheet counts it) and column.
    """
    table = read_table(frame, RUN_SERIES, path=path, sheet=sheet, source_rows=source_rows)
    warns = _unrecognised_columns(table, path)
    terms = _terms(table)
    base = Path(path).parent if path else Path(".")
    m0 = _RepeatUnit(M0, monomer, reference)
    runs = tuple(_run(row, table, terms, base, m0) for row in table.rows)
    for msg in warns:
        _warnings.warn(msg, EstimatorWarning, stacklevel=2)
    return RunSeries(path=path, runs=runs, terms=terms, warnings=tuple(warns))


def _unrecognised_columns(table: CheckedSheet, path: str | None) -> list[str]:
    """Warnings for extra columns that look like concentrations but match no family."""
    out = []
    for h in table.columns.extras:
        if h.strip().startswith("[") or "mol/l" in cells.normalise_name(h):
            out.append(
                f"{path or 'run-series sheet'}: column {h!r} looks like a concentration but is "
                "not recognised (write e.g. '[A] [mol/L]', '[A:thiol] [mol/L]' or "
                "'ratio [A]/[M] [-]'); it is ignored"
            )
    return out


def _terms(table: CheckedSheet) -> tuple[str, ...]:
    """The fitted terms the sheet gives (concentration or ratio columns), in sheet order."""
    fam = table.columns.families
    terms = tuple(dict.fromkeys([*fam["concentration"], *fam["ratio"]]))
    if not terms:
        raise table.error(
            "the run-series sheet gives no agent, solvent or initiator: add '[A] [mol/L]' "
            "with '[M] [mol/L]', or 'ratio [A]/[M] [-]' (or [S], [I], or [A:<name>] columns)",
            row=None)
    return terms


def _run(row: SheetRow, table: CheckedSheet, terms: tuple[str, ...], base: Path,
         m0: _RepeatUnit) -> Run:
    """One :class:`Run` from a checked row (the steps below check what spans columns)."""
    cols = table.columns
    role = row.get("role", "run")
    files = _chromatograms(row, table, base)
    fpath = files[0] if files else None
    Mn, Mw = _averages(row, cols.header, fpath is not None or role == "skip")
    mono = row.get("monomer", "") or (m0.default_monomer or "")
    Mc = _num(row.get("M"))
    ratios, agent_conc = _ratios(row, table, terms, Mc)
    res = {k: v for k, v in row.family_values["residual"].items() if v is not None}
    u_res = {k: v for k, v in row.family_values["u_residual"].items() if v is not None}
    return Run(
        run_id=row["run"], row=row.row, file=fpath, Mn=Mn, Mw=Mw,
        scale=_scale(row, cols.header("scale"), cols.header("Mn") or cols.header("Mw")), monomer=mono,
        M0=m0.value(row, mono, cols), monomer_conc=Mc, ratios=ratios,
        conversion=_num(row.get("conversion")), T_C=_temperature(row, table),
        series=row.get("series", ""), agent=row.get("agent", ""), role=role,
        residual_agent=res, u_residual_agent=u_res, agent_conc=agent_conc,
        residual_monomer=_num(row.get("res_M")), u_residual_monomer=_num(row.get("u_res_M")),
        u_conversion=_num(row.get("u_conversion")),
        metadata={h: v for h, v in row.metadata.items() if v is not None},
        rate=_num(row.get("R_p")), initiator=row.get("initiator", "") or "",
        delta=_num(row.get("delta")), files=files,
    )


def _num(value: float | None) -> float:
    """A checked number or NaN for a blank cell."""
    return _NAN if value is None else float(value)


def _chromatograms(row: SheetRow, table: CheckedSheet, base: Path) -> tuple[str, ...]:
    """The chromatogram paths (replicate injections separated by ``;``) resolved against
    the sheet's folder (each must exist).
    """
    cell = row.get("file", "")
    out = []
    for file in (f.strip() for f in str(cell or "").split(";")):
        if not file:
            continue
        p = Path(file)
        if not p.is_absolute():
            p = base / p
        if not p.exists():
            raise InputFormatError(
                f"chromatogram file {file!r} not found (looked for {p}); file paths are "
                "relative to the sheet's folder", path=table.path, sheet=table.sheet,
                row=row.row, column=table.columns.header("file"))
        out.append(str(p))
    return tuple(out)


def _averages(row: SheetRow, header: Any, has_other_source: bool) -> tuple[float, float]:
    """Measured Mn and Mw [g/mol] (NaN when blank); one of them is needed without a file."""
    Mn, Mw = _num(row.get("Mn")), _num(row.get("Mw"))
    if not has_other_source and not (math.isfinite(Mn) or math.isfinite(Mw)):
        raise row.error("no chain length for this run: give a chromatogram 'file' or measured "
                        "'Mn [g/mol]' and/or 'Mw [g/mol]'", header("file") or header("Mn"))
    if math.isfinite(Mn) and math.isfinite(Mw) and Mw < Mn:
        raise row.error(f"Mw {Mw:g} is smaller than Mn {Mn:g}; check the two columns", header("Mw"))
    return Mn, Mw


def _scale(row: SheetRow, header: str | None, averages_header: str | None = None) -> str:
    """``absolute``, ``relative`` (standard-equivalent) or ``""`` from the ``Mn scale`` cell.

    Light scattering keeps its own label, ``absolute, light scattering``
    (:data:`gpctools.columns.LS_SCALE_LABEL`): from a cell that says so, or from averages
    taken from the ``Mn LS [g/mol]`` / ``Mw LS [g/mol]`` columns of a batch with
    ``[detectors]`` when the cell is blank.
    """
    scale = str(row.get("scale") or "").lower()
    from_ls = " ls" in f" {(averages_header or '').lower()}"
    if scale.startswith("abs"):
        return C.LS_SCALE_LABEL if "light scattering" in scale else "absolute"
    if not scale and from_ls and (math.isfinite(_num(row.get("Mn"))) or math.isfinite(_num(row.get("Mw")))):
        return C.LS_SCALE_LABEL
    if scale.startswith("rel") or "equivalent" in scale:
        return "relative"
    if scale:
        raise row.error(f"Mn scale {scale!r} must be 'absolute' or 'relative'", header)
    return ""


class _RepeatUnit:
    """Repeat-unit molar mass [g/mol] of a row: its M0, its monomer's, or the defaults."""

    def __init__(self, M0: float | None, monomer: str | None, reference: Any) -> None:
        self.default_M0 = M0
        self.default_monomer = monomer
        self.reference = reference
        self.cache: dict[str, float] = {}

    def value(self, row: SheetRow, mono: str, cols: Any) -> float:
        given = row.get("M0")
        if given is not None:
            return float(given)
        if mono:
            if mono not in self.cache:
                try:
                    if self.reference is None:
                        from gpctools import refdata

                        self.cache[mono] = float(refdata.monomer(mono).M0)
                    else:
                        self.cache[mono] = float(self.reference.monomer(mono).M0)
                except GpcError as exc:
                    raise row.error(f"{exc.message}; or give 'M0 [g/mol]' in this row",
                                    cols.header("monomer")) from None
            return self.cache[mono]
        if self.default_M0 is not None:
            return float(self.default_M0)
        raise row.error("no repeat-unit molar mass: give 'monomer' (a name in the bundled "
                        "table) or 'M0 [g/mol]'", cols.header("monomer") or cols.header("M0"))


def _ratios(row: SheetRow, table: CheckedSheet, terms: tuple[str, ...],
            Mc: float) -> tuple[dict[str, float], dict[str, float]]:
    """[X]0/[M]0 [-] and [X]0 [mol/L] per term, from a concentration or a ratio column.

    A concentration needs [M] in the same row; when both a concentration and a ratio are
    given they must agree within 1 %.
    """
    fam = table.columns.families
    conc_cols, ratio_cols = fam["concentration"], fam["ratio"]
    concs, given = row.family_values["concentration"], row.family_values["ratio"]
    M_header = table.columns.header("M")
    ratios: dict[str, float] = {}
    agent_conc: dict[str, float] = {}
    for t in terms:
        c, r = _num(concs.get(t)), _num(given.get(t))
        if math.isfinite(c):
            if not math.isfinite(Mc):
                raise row.error(f"'{conc_cols[t].header}' needs '[M] [mol/L]' in the same row (or "
                                "give the ratio column instead)", M_header or conc_cols[t].header)
            rc = c / Mc
            if math.isfinite(r) and abs(rc - r) > 0.01 * max(abs(r), abs(rc)) + 1e-15:
                raise row.error(f"'{conc_cols[t].header}'/'[M] [mol/L]' = {rc:.4g} disagrees with "
                                f"'{ratio_cols[t].header}' = {r:.4g}; give one of them",
                                ratio_cols[t].header)
            ratios[t], agent_conc[t] = rc, c
        elif math.isfinite(r):
            ratios[t] = r
            agent_conc[t] = r * Mc if math.isfinite(Mc) else _NAN
        else:
            ratios[t], agent_conc[t] = 0.0, 0.0
    return ratios, agent_conc


def _temperature(row: SheetRow, table: CheckedSheet) -> float:
    """Temperature [°C] (NaN when blank); a unitless header with 200 or more is refused."""
    T_C = _num(row.get("T"))
    col = table.columns.fields.get("T")
    if col is not None and col.unit is None and math.isfinite(T_C) and T_C >= 200:
        # a header with no unit: 333 is far more likely 60 °C written in kelvin
        raise row.error(f"temperature {T_C:g} under a header without a unit looks like kelvin; "
                        "write the unit in the header: 'T [K]' or 'T [°C]'", col.header)
    return T_C


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
