"""Markdown text for predictions and diagnoses (compact, every number with its unit).

:func:`prediction_markdown` shows the parameters used, each formula with its numbers and
the 1/DPn budget of a :class:`gpctools.kinetics.Prediction`; :func:`diagnosis_markdown`
is the ``diagnosis.md`` report of a :class:`gpctools.kinetics.Diagnosis` (verdict,
measured against expected, ranked causes, checks, the prediction and the safety notes).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

__all__ = ["prediction_markdown", "diagnosis_markdown"]

if TYPE_CHECKING:  # pragma: no cover
    from gpctools.kinetics.diagnose import Diagnosis
    from gpctools.kinetics.predict import Prediction


def _g(x: Any, n: int = 5) -> str:
    if x is None:
        return "–"
    if isinstance(x, str):
        return x
    try:
        v = float(x)
    except (TypeError, ValueError):
        return str(x)
    if not math.isfinite(v):
        return "–"
    return f"{v:.{n}g}"


def _cell(text: Any) -> str:
    return str(text).replace("|", "/").replace("\n", " ")


def _table(header: list[str], rows: list[list[Any]]) -> list[str]:
    out = ["| " + " | ".join(header) + " |", "|" + "|".join("---" for _ in header) + "|"]
    for r in rows:
        out.append("| " + " | ".join(_cell(c) for c in r) + " |")
    return out


def prediction_markdown(pred: Prediction, level: int = 1) -> str:
    """Parameters used, the formulas with their numbers, results and the 1/DPn budget.

    Parameters
    ----------
    pred : gpctools.kinetics.Prediction
    level : int
        Heading level of the title (sections are one level deeper).

    Returns
    -------
    str
        Markdown; rates in mol/L/s, concentrations in mol/L, molar masses in g/mol.
    """
    p = pred.parameters
    h = "#" * level
    lines = [f"{h} Prediction: {p.label}", ""]
    lines.append(
        f"Steady state at low conversion, IUPAC termination convention "
        f"(−d[R•]/dt = 2k_t[R•]²); T = {_g(p.T_C)} °C = {_g(p.T)} K."
    )
    lines.append("")
    lines.append(f"{h}# Parameters used")
    lines.append("")
    pt = p.table()
    lines += _table(
        ["parameter", "symbol", "value", "unit", "source"],
        [[r.parameter, r.symbol, _g(r.value), r.unit, r.source] for r in pt.itertuples()],
    )
    lines.append("")
    lines.append(f"{h}# Step by step")
    lines.append("")
    lines.append(
        f"- R_i = 2·f·k_d·[I] = 2 × {_g(p.f)} × {_g(p.k_d)} × {_g(p.conc_I)} = "
        f"{_g(pred.R_i)} mol/L/s"
    )
    lines.append(
        f"- [R•] = (f·k_d·[I]/k_t)^½ = ({_g(p.f)} × {_g(p.k_d)} × {_g(p.conc_I)} / "
        f"{_g(p.k_t)})^½ = {_g(pred.radicals)} mol/L"
    )
    lines.append(
        f"- R_p = k_p·[M]·[R•] = {_g(p.k_p)} × {_g(p.conc_M)} × {_g(pred.radicals)} = "
        f"{_g(pred.R_p)} mol/L/s"
    )
    lines.append(f"- ν = R_p/R_i = {_g(pred.nu)}")
    lines.append(
        f"- DPn without transfer = 2ν/(1+δ) = 2 × {_g(pred.nu)} / (1 + {_g(p.delta)}) = "
        f"{_g(pred.DPn_no_transfer)}"
    )
    term = (1 + p.delta) * p.k_t * pred.R_p / (p.k_p**2 * p.conc_M**2)
    lines.append(
        f"- termination term (1+δ)·k_t·R_p/(k_p²[M]²) = (1 + {_g(p.delta)}) × {_g(p.k_t)} × "
        f"{_g(pred.R_p)} / ({_g(p.k_p)}² × {_g(p.conc_M)}²) = {_g(term)} (= 1/DPn without "
        "transfer)"
    )
    transfer = " + ".join(
        f"{_g(b.value)}" for b in pred.budget if not b.term.startswith("termination")
    )
    lines.append(
        f"- Mayo: 1/DPn = termination + C_M + C_I[I]/[M] + Σ C_X[X]/[M] = {_g(term)} + "
        f"{transfer} = {_g(pred.inv_DPn)}, DPn = {_g(pred.DPn)}"
    )
    comb = next(b.value for b in pred.budget if b.term == "termination (combination)")
    beta = 2 * comb
    tau = pred.inv_DPn - comb
    lines.append(
        f"- per propagation step: β (stop by combination) = 2·(1−δ)·k_t·[R•]/(k_p[M]) = "
        f"{_g(beta)}; τ (stop ending one chain) = 1/DPn − β/2 = {_g(tau)}; "
        f"u = β/(τ+β) = {_g(pred.u_combination, 4)}"
    )
    lines.append(f"- Mn = DPn·M0 = {_g(pred.DPn)} × {_g(p.M0)} = {_g(pred.Mn)} g/mol")
    lines.append(
        f"- Đ_inst = 2 − u²/2 = 2 − {_g(pred.u_combination, 4)}²/2 "
        f"({_g(100 * pred.fraction_chains_combination, 3)} % of chains by combination) = "
        f"{_g(pred.dispersity, 4)}; Mw = Mn·Đ_inst = {_g(pred.Mw)} g/mol"
    )
    lines.append(f"- initiator half-life ln2/k_d = {_g(pred.half_life / 3600.0, 4)} h")
    lines.append("")
    lines.append(f"{h}# 1/DPn budget")
    lines.append("")
    lines += _table(
        ["term", "formula", "1/DPn contribution [-]", "share [%]"],
        [[b.term, b.formula, _g(b.value, 4), _g(b.share, 3)] for b in pred.budget]
        + [["total", "", _g(pred.inv_DPn, 4), "100"]],
    )
    if pred.notes:
        lines += ["", "Notes:"] + [f"- {n}" for n in pred.notes]
    if pred.warnings:
        lines += ["", "Warnings:"] + [f"- {w}" for w in pred.warnings]
    lines.append("")
    return "\n".join(lines)


def diagnosis_markdown(d: Diagnosis) -> str:
    """Verdict, measured vs expected, ranked causes, checks, prediction and safety.

    Parameters
    ----------
    d : gpctools.kinetics.Diagnosis

    Returns
    -------
    str
        Markdown (the content of ``diagnosis.md``).
    """
    top = d.causes[0]
    lines = [f"# Why is the molar mass low? {d.label}", ""]
    verdict = {
        "clear": f"**Most likely cause: {top.title}** ({_g(top.share, 3)} % likelihood share).",
        "ambiguous": f"**Ambiguous:** {top.title} ranks first with only "
        f"{_g(top.share, 3)} % likelihood share; see the ranking.",
        "no strong cause": "**No strong cause:** the measured values are close to the "
        "expected ones.",
    }[d.verdict]
    lines += [verdict, ""]
    if d.safety and d.safety[0].startswith("Runaway"):
        lines += [f"> {d.safety[0]}", ""]

    lines += ["## Measured against expected", ""]
    rows = []
    for k in ("R_p [mol/L/s]", "Mn [g/mol]", "Mw [g/mol]", "dispersity [-]", "1/DPn [-]"):
        m, e = d.measured.get(k), d.expected.get(k)
        ratio = (m / e) if (m is not None and e) else None
        rows.append([k, _g(m), _g(e), _g(ratio, 4)])
    lines += _table(["quantity", "measured", "expected", "measured/expected [-]"], rows)
    if d.measured.get("induction period [min]"):
        lines.append("")
        lines.append(f"Induction period: {_g(d.measured['induction period [min]'], 3)} min.")
    if d.excess_inv_DPn is not None:
        lines += ["", f"Excess 1/DPn = 1/DPn,measured − 1/DPn,expected = "
                  f"{_g(d.measured.get('1/DPn [-]'))} − {_g(d.expected['1/DPn [-]'])} = "
                  f"{_g(d.excess_inv_DPn, 4)}."]
    if d.anchor:
        lines += ["", "Expected values are anchored to the normal batch: " + "; ".join(
            f"{k} {_g(v)}" for k, v in d.anchor.items())]
    lines.append("")

    lines += ["## Ranked causes", ""]
    lines += _table(
        ["rank", "cause", "likelihood share [%]", "chi2 [-]", "fitted parameter"],
        [[i, c.title, _g(c.share, 3), _g(c.chi2, 3),
          (f"{c.parameter} = {_g(c.value, 4)}" + ("" if c.unit == "-" else f" {c.unit}"))
          if c.key != "none" else "–"]
         for i, c in enumerate(d.causes, start=1)],
    )
    lines.append("")
    for i, c in enumerate(d.causes[:3], start=1):
        lines.append(f"### {i}. {c.title} ({_g(c.share, 3)} %)")
        lines.append("")
        lines.append(c.text)
        if c.numbers:
            lines.append("")
            lines += [f"- {k}: {_g(v, 4)}" for k, v in c.numbers]
        lines += ["", f"Next: {c.next_step}", ""]

    if d.impurities:
        lines += ["## Candidate impurity levels", "",
                  "Level of each candidate that alone would explain the excess 1/DPn: "
                  "[X] = Δ(1/DPn)·[M]/C, ppm (mol) = 10⁶·Δ(1/DPn)/C.", ""]
        lines += _table(
            ["candidate", "C [-]", "[X] [mol/L]", "[X]/[M] [ppm mol]", "[ppm mass]", "source"],
            [[i.name, _g(i.C, 4), _g(i.concentration, 4), _g(i.ppm_mol, 4), _g(i.ppm_mass, 4),
              i.source] for i in d.impurities],
        )
        lines.append("")

    lines += ["## Measurement checks", ""]
    lines += _table(["check", "status", "finding", "action"],
                    [[c.check, c.status, c.text, c.action or "–"] for c in d.checks])
    lines.append("")

    lines += ["## How the causes are scored", "",
              "Each cause predicts R_p, Mn, Mw and the checks from one fitted parameter; "
              "χ² compares prediction and measurement (relative uncertainties: "
              + ", ".join(f"{o.name} {_g(o.sigma, 3)}" for o in d.observations)
              + "). The likelihood share is the Akaike weight exp(−(χ² + 2k)/2), normalised "
              "over all causes (k = 1 fitted parameter, 0 for 'no cause'). It assumes a single "
              "cause; it is not the probability that the cause is real.", ""]

    if d.notes:
        lines += ["## Notes", ""] + [f"- {n}" for n in d.notes] + [""]
    if d.warnings:
        lines += ["## Warnings", ""] + [f"- {w}" for w in d.warnings] + [""]

    lines.append(prediction_markdown(d.prediction, level=2))
    lines += ["## Safety", ""] + [f"- {s}" for s in d.safety] + [""]
    return "\n".join(lines)
