"""The sequence parts of the QC report: verdict tables, replicates, standards, blanks, and
one printable page per sample.

Used by :func:`gpctools.report.run_qc`: the workbook sheets (``injections`` with each
injection's verdict, ``replicates``, ``standards located``, ``blanks``, ``sequence
calibration``) and the HTML page's sequence sections and sample pages. A sample page
shows each injection's chromatogram (raw trace, fitted baseline, baseline windows,
limits, excluded regions, flow marker) above its dw/dlogM (Mn, Mw, Mp marked, the
product's reference distribution when the QC settings give one), the averages with their
standard uncertainty when the results carry ``u(...) [%]`` columns, every spec verdict,
and a review/sign-off block.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.errors import InputFormatError
from gpctools.qc import QCResult, label_text, role_of, sample_keys
from gpctools.qc.decisions import Decisions

__all__ = ["injections_sheet", "replicates_frame", "standards_frame", "blanks_frame",
           "sequence_calibration_frame", "review_inputs", "read_reference", "sample_pages",
           "uncertainty_columns"]

_U = re.compile(r"^u\((?P<q>[^)]+)\)\s*\[(?P<unit>[^\]]+)\]$")


def uncertainty_columns(columns: Any) -> dict[str, str]:
    """Standard-uncertainty columns of a results table: quantity -> header
    (``{"Mn": "u(Mn) [%]"}``); empty when the results carry none.
    """
    out = {}
    for c in columns:
        m = _U.match(str(c))
        if m:
            out[m.group("q").strip()] = str(c)
    return out


def injections_sheet(table: pd.DataFrame, decisions: Decisions) -> pd.DataFrame:
    """The results table with each injection's verdict, verdict against spec and reasons."""
    df = table.copy()
    by_pos = {v.position: v for v in decisions.injections}
    df[C.VERDICT] = [by_pos[i].verdict if i in by_pos else "" for i in range(len(df))]
    df[C.SPEC_VERDICT] = [by_pos[i].spec_verdict if i in by_pos else "" for i in range(len(df))]
    df[C.VERDICT_REASONS] = ["; ".join(by_pos[i].reasons) if i in by_pos else "" for i in range(len(df))]
    return df


def replicates_frame(result: QCResult) -> pd.DataFrame:
    """One row per sequence, quantity and replicate group, with the rule's verdict and its
    false-fail rate.
    """
    rows = []
    for s in result.suitability:
        for r in s.replicates:
            common = {"sequence": s.sequence, "quantity": r.quantity, "rule": r.rule,
                      "statistic [%]": r.value if r.rule != "pairs" else math.nan,
                      "limit [%]": r.limit if r.rule != "pairs" else math.nan,
                      "result": {True: "pass", False: "fail", None: "not evaluated"}[r.passed],
                      "degrees of freedom [-]": r.dof, "assumed repeatability [%]": r.sigma_pct,
                      "false-fail rate, simulated [%]": 100 * r.false_fail_simulated,
                      "false-fail rate, closed form [%]": 100 * r.false_fail_closed}
            if not r.groups:
                rows.append({**common, "sample_id": "", "injections [-]": 0, "group RSD [%]": math.nan,
                             "group range [%]": math.nan})
            for g in r.groups:
                rows.append({**common, "sample_id": g.key, "injections [-]": g.n, "group RSD [%]": g.rsd_pct,
                             "group range [%]": g.range_pct})
    cols = ["sequence", "quantity", "rule", "sample_id", "injections [-]", "group RSD [%]", "group range [%]",
            "statistic [%]", "limit [%]", "result", "degrees of freedom [-]", "assumed repeatability [%]",
            "false-fail rate, simulated [%]", "false-fail rate, closed form [%]"]
    return pd.DataFrame(rows, columns=cols)


def standards_frame(run: Any) -> pd.DataFrame:
    """Every standard located in the sequence's calibration-standard injections, with its
    residual in the sequence's calibration.
    """
    cols = ["sequence", "injection", "standard", "Mp [g/mol]", "volume [mL]", "volume standard error [µL]",
            "points in top fit [-]", "fitted M [g/mol]", "residual [%]"]
    if run is None or not getattr(run, "standards", ()):
        return pd.DataFrame(columns=cols)
    rows = []
    for seq, cal in run.calibrations.items():
        loc = sorted((s for s in run.standards if s.sequence == seq), key=lambda s: s.peak.volume)
        for s, r, fitted in zip(loc, cal.residuals_pct, cal.standards_table(), strict=False):
            rows.append({"sequence": seq, "injection": s.sample_id, "standard": s.name, "Mp [g/mol]": s.Mp,
                         "volume [mL]": s.peak.volume, "volume standard error [µL]": 1000.0 * s.peak.stderr,
                         "points in top fit [-]": s.peak.points,
                         "fitted M [g/mol]": fitted["fitted M [g/mol]"], "residual [%]": r})
    return pd.DataFrame(rows, columns=cols)


def blanks_frame(run: Any, table: pd.DataFrame) -> pd.DataFrame:
    """Per blank and product: the largest peak in the product's window."""
    cols = ["sample_id", "sequence", "product", "window low [mL]", "window high [mL]", "at [mL]",
            "blank peak [% of product peak]"]
    rows = []
    for pos, found in (getattr(run, "blanks", None) or {}).items():
        sid = label_text(table[C.SAMPLE_ID].iloc[pos])
        seq = label_text(table[C.SEQUENCE].iloc[pos]) if C.SEQUENCE in table.columns else ""
        for f in found:
            rows.append({"sample_id": sid, "sequence": seq, "product": f.product, "window low [mL]": f.window[0],
                         "window high [mL]": f.window[1], "at [mL]": f.volume,
                         "blank peak [% of product peak]": f.peak_pct})
    return pd.DataFrame(rows, columns=cols)


def sequence_calibration_frame(result: QCResult) -> pd.DataFrame:
    """Standards of every calibration a sequence built from its own injections."""
    frames = []
    for seq, cal in result.calibrations.items():
        df = pd.DataFrame(cal.get("standards_table", []))
        df.insert(0, "sequence", seq)
        frames.append(df)
    if not frames:
        return pd.DataFrame(columns=["sequence", "standard", "Mp [g/mol]", "volume [mL]", "fitted M [g/mol]",
                                     "residual [%]"])
    return pd.concat(frames, ignore_index=True)


def read_reference(path: str) -> tuple[np.ndarray, np.ndarray]:
    """A reference distribution table: columns ``M [g/mol]`` and ``dw/dlogM [-]`` (a
    distribution table written by ``gpctools batch`` qualifies).

    Raises
    ------
    InputFormatError
        The file cannot be read or lacks the two columns.
    """
    from gpctools.io import read_sheet

    df = read_sheet(path)
    cols = {str(c).strip(): c for c in df.columns}
    if "M [g/mol]" not in cols or "dw/dlogM [-]" not in cols:
        raise InputFormatError("a reference distribution needs the columns 'M [g/mol]' and 'dw/dlogM [-]' "
                               "(a distributions/*.csv table written by 'gpctools batch' has them)", path=path)
    M = pd.to_numeric(df[cols["M [g/mol]"]], errors="coerce").to_numpy(float)
    y = pd.to_numeric(df[cols["dw/dlogM [-]"]], errors="coerce").to_numpy(float)
    return M, y


def review_inputs(res: Any, *, title: str = "", reference: tuple[np.ndarray, np.ndarray] | None = None,
                  reference_label: str = "reference") -> tuple[dict[str, Any], dict[str, Any]]:
    """Keyword arguments of :func:`gpctools.report.plots.review_figure` for one
    :class:`gpctools.batch.InjectionResult` (the raw trace is the corrected signal plus
    its baseline, on the flow-corrected axis).
    """
    cs = res.corrected
    V = np.asarray(cs.volume, dtype=float)
    base = cs.baseline(V)
    marker = res.marker_observed * res.flow_factor if res.marker_observed is not None else None
    trace = {"volume": V, "signal": np.asarray(cs.signal) + base, "baseline": base,
             "baseline_windows": tuple(cs.baseline.windows), "limits": tuple(cs.limits),
             "exclusions": tuple(cs.exclusions), "marker": marker, "title": f"{title}: chromatogram"}
    d = res.distribution
    dist = {"M": d.M, "dwdlogM": d.dwdlogM, "marks": {"Mn": d.Mn, "Mw": d.Mw, "Mp": d.Mp},
            "reference": reference, "reference_label": reference_label, "title": f"{title}: dw/dlogM"}
    return trace, dist


def _averages_table(table: pd.DataFrame, rows: list[int]) -> pd.DataFrame:
    """Averages of each injection, with their standard uncertainty where the results have it."""
    u = uncertainty_columns(table.columns)
    cols = [c for c in (C.MN, C.MW, C.MZ, C.MP, C.DISPERSITY) if c in table.columns]
    out = []
    for n, i in enumerate(rows, start=1):
        r = table.iloc[i]
        rec: dict[str, Any] = {"injection": f"{n} ({label_text(r.get(C.ROLE, ''))})", C.STATUS: r.get(C.STATUS, "")}
        for c in cols:
            rec[c] = r[c]
            q = c.split(" [")[0]
            if q in u:
                rec[u[q]] = r[u[q]]
        out.append(rec)
    return pd.DataFrame(out)


def _spec_table(result: QCResult, sample: Any) -> pd.DataFrame:
    """Every limit of the sample's product, its mean value and the verdict."""
    spec = result.specs.get(sample.product)
    rows = []
    for lim in (spec.limits if spec is not None else ()):
        v = sample.values.get(lim.column, math.nan)
        ok, reason = lim.check(v)
        rows.append({"quantity": lim.column, "limits": lim.describe(), "mean [unit of quantity]": v,
                     "verdict": {True: "pass", False: "fail", None: "no result"}[ok], "reason": reason})
    return pd.DataFrame(rows, columns=["quantity", "limits", "mean [unit of quantity]", "verdict", "reason"])


def sample_pages(result: QCResult, figures: Mapping[int, dict[str, str]]) -> list[dict[str, Any]]:
    """Template data of one page per sample (figures by results-table row)."""
    from gpctools.report import html as H

    table = result.table
    sid = [str(k) for k in sample_keys(table)]
    batch = [label_text(v) for v in table[C.BATCH].tolist()] if C.BATCH in table.columns else [""] * len(table)
    roles = [role_of(v) for v in table[C.ROLE].tolist()] if C.ROLE in table.columns else ["sample"] * len(table)
    verdicts = {v.position: v for v in result.decisions.injections}
    pages = []
    for s in result.decisions.samples:
        rows = [i for i in range(len(table)) if sid[i] == s.sample_id and roles[i] in ("sample", "replicate")
                and (batch[i] or "(no batch)") == s.batch]
        injections = [{"title": f"Injection {n} ({roles[i]}, results row {i + 1}): "
                                f"{verdicts[i].verdict if i in verdicts else ''}",
                       "reasons": "; ".join(verdicts[i].reasons) if i in verdicts else "",
                       "figure": figures.get(i)} for n, i in enumerate(rows, start=1)]
        pages.append({
            "sample_id": s.sample_id, "product": s.product, "batch": s.batch,
            "sequences": ", ".join(s.sequences),
            "decision": {"tag": s.decision.replace(" ", "-"), "text": s.decision},
            "spec_verdict": s.spec_verdict, "reasons": list(s.reasons), "notes": list(s.notes),
            "injections": injections,
            "averages": H.table_context(_averages_table(table, rows), empty="No injection."),
            "uncertainty_note": "" if uncertainty_columns(table.columns) else
            "The results carry no standard uncertainties (u(...) [%] columns).",
            "spec": H.table_context(_spec_table(result, s), formats={"mean [unit of quantity]": ""},
                                    empty="No limits for this product."),
        })
    return pages
