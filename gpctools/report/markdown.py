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


def _step_lines(pred: Prediction) -> list[str]:
    """Each formula of the prediction with its numbers (the "Step by step" section)."""
    p = pred.parameters
    lines: list[str] = []
    lines.append(
        f"- R_i = 2·f·k_d·[I] = 2 × {_g(p.f)} × {_g(p.k_d)} × {_g(p.conc_I)} = "
        f"{_g(pred.R_i)} mol/L/s"
    )
    if p.inhibitors:
        zeta = " + ".join(f"{_g(z.k_z)} × {_g(z.concentration)}" for z in p.inhibitors)
        lines.append(
            f"- inhibitors: ζ = Σ k_z[Z] = {zeta} 1/s; [R•] from 2k_t[R•]² + ζ[R•] = R_i "
            f"= {_g(pred.radicals)} mol/L; induction period μ[Z]/R_i: "
            + ", ".join(f"{name} {_g(t / 60.0, 3)} min" for name, t in pred.induction)
        )
    else:
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
    return lines


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
    lines += _step_lines(pred)
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


def _verdict_lines(d: Diagnosis) -> list[str]:
    top = d.causes[0]
    verdict = {
        "clear": f"**Most likely cause: {top.title}** ({_g(top.share, 3)} % likelihood share).",
        "ambiguous": f"**Ambiguous:** {top.title} ranks first with only "
        f"{_g(top.share, 3)} % likelihood share; see the ranking.",
        "no strong cause": "**No strong cause:** the measured values are within what the "
        "expected values allow.",
    }[d.verdict]
    lines = [verdict, ""]
    if d.findings:
        lines += [f"**Instrument finding{'s' if len(d.findings) > 1 else ''} to fix:** "
                  + "; ".join(f.text for f in d.findings) + ".", ""]
    if d.safety and d.safety[0].startswith("Runaway"):
        lines += [f"> {d.safety[0]}", ""]
    return lines


def _measured_lines(d: Diagnosis) -> list[str]:
    lines = ["## Measured against expected", ""]
    sig = {"R_p [mol/L/s]": "R_p", "Mn [g/mol]": "Mn", "Mw [g/mol]": "Mw"}
    rows = []
    for k in ("R_p [mol/L/s]", "Mn [g/mol]", "Mw [g/mol]", "dispersity [-]", "1/DPn [-]"):
        m, e = d.measured.get(k), d.expected.get(k)
        ratio = (m / e) if (m is not None and e) else None
        u = 100 * d.model.sigma(sig[k]) if (d.model is not None and k in sig) else None
        rows.append([k, _g(m), _g(e), _g(u, 2), _g(ratio, 4)])
    lines += _table(["quantity", "measured", "expected", "expected ± [%]",
                     "measured/expected [-]"], rows)
    if d.measured.get("induction period [min]"):
        lines += ["", f"Induction period: {_g(d.measured['induction period [min]'], 3)} min."]
    ex = d.excess
    if ex is not None:
        from_mn = ""
        if ex.from_Mn is not None:
            from_mn = (f"From Mn alone: 1/DPn,measured − 1/DPn,expected = "
                       f"{_g(d.measured.get('1/DPn [-]'))} − {_g(d.expected['1/DPn [-]'])} = "
                       f"{_g(ex.from_Mn, 4)}. ")
        lines += ["", f"Excess 1/DPn. {from_mn}Over all observations (the unexplained-transfer "
                  f"fit): {_g(ex.value, 4)}, 95 % interval {_g(ex.low, 3)} to {_g(ex.high, 3)}."]
    if d.anchor:
        lines += ["", "Expected values use the parameters updated by the normal batch ("
                  + "; ".join(f"{k} {_g(v, 4)}" for k, v in d.anchor.items()) + ")."]
    lines.append("")
    return lines


def _fitted(c: Any) -> str:
    if c.key == "none":
        return "–"
    unit = "" if c.unit == "-" else f" {c.unit}"
    lo, hi = c.interval
    return (f"{c.parameter} = {_g(c.value, 4)}{unit} (95 %: {_g(lo, 3)} to {_g(hi, 3)})")


def _causes_lines(d: Diagnosis) -> list[str]:
    lines = ["## Ranked causes", ""]
    lines += _table(
        ["rank", "cause", "likelihood share [%]", "chi2 [-]", "penalty [-]",
         "fitted parameter", "plausibility"],
        [[i, c.title, _g(c.share, 3), _g(c.chi2, 3), _g(c.penalty, 3), _fitted(c),
          c.plausibility] for i, c in enumerate(d.causes, start=1)],
    )
    lines.append("")
    for i, c in enumerate(d.causes[:3], start=1):
        lines.append(f"### {i}. {c.title} ({_g(c.share, 3)} %)")
        lines.append("")
        lines.append(c.text)
        if c.prior:
            lines += ["", f"Plausible range: {c.prior}; the fitted value is "
                      f"{c.plausibility}."]
        if c.numbers:
            lines.append("")
            lines += [f"- {k}: {_g(v, 4)}" for k, v in c.numbers]
        lines += ["", f"Next: {c.next_step}", ""]
    return lines


def _impurity_lines(d: Diagnosis) -> list[str]:
    if not d.impurities:
        return []
    rel = d.excess.relation if d.excess is not None else ""
    lines = ["## Candidate impurity levels", "",
             "Level of each candidate that alone would explain the excess 1/DPn (with the "
             f"95 % interval of the excess); relation: {rel}. ppm (mol) per mol of monomer.",
             ""]
    lines += _table(
        ["candidate", "C [-]", "[X] [mol/L]", "[X]/[M] [ppm mol]", "95 % interval [ppm mol]",
         "[ppm mass]", "source"],
        [[i.name, _g(i.C, 4), _g(i.concentration, 4), _g(i.ppm_mol, 4),
          f"{_g(i.ppm_mol_low, 3)} to {_g(i.ppm_mol_high, 3)}", _g(i.ppm_mass, 4), i.source]
         for i in d.impurities],
    )
    lines.append("")
    return lines


def _distribution_lines(d: Diagnosis) -> list[str]:
    shape = [o for o in d.observations if o.name in ("low-M tail", "high-M shoulder")]
    if not shape and not d.curves:
        return []
    lines = ["## The whole distribution", ""]
    if shape:
        lines += _table(["measure", "measured [% mass]", "expected [% mass]", "sigma [% mass]"],
                        [[o.name, _g(100 * (o.measured or 0.0), 3),
                          _g(100 * (o.expected or 0.0), 3), _g(100 * o.sigma, 2)]
                         for o in shape])
        lines += ["", "Low-M tail: mass below Mw/20; high-M shoulder: mass above 5·Mw (each of "
                  "the distribution's own Mw)."]
    if d.curves:
        what = ("the measured distribution with the one" if shape else "the distribution")
        lines += (["", ""] if shape else []) + [
            f"distributions.png overlays {what} predicted for the recipe and for the leading "
            "causes (instantaneous model: real samples are broader)."]
        lines = [x for i, x in enumerate(lines) if not (i > 0 and x == "" == lines[i - 1])]
    lines.append("")
    return lines


def _model_lines(d: Diagnosis) -> list[str]:
    if d.model is None or not d.model.nuisances:
        return []
    m = d.model
    lines = ["## How sure the expected values are", "",
             f"Expected R_p ± {_g(100 * m.sigma('R_p'), 2)} %, Mn ± "
             f"{_g(100 * m.sigma('Mn'), 2)} %, Mw ± {_g(100 * m.sigma('Mw'), 2)} % (one "
             "standard uncertainty, from the parameters below"
             + (", updated by the normal batch" if m.anchored else "") + ").", ""]
    rows = []
    for n, v, s in zip(m.nuisances, m.shift, m.posterior_sigma):
        prior = f"{_g(100 * n.sigma, 3)} %" if n.log else _g(n.sigma, 3)
        post = (f"× {_g(math.exp(v), 4)} ± {_g(100 * s, 3)} %" if n.log
                else f"{v:+.3g} ± {_g(s, 3)}")
        rows.append([n.name, prior, n.basis, post])
    lines += _table(["parameter", "prior sigma", "basis", "after the normal batch"], rows)
    lines.append("")
    return lines


def diagnosis_markdown(d: Diagnosis) -> str:
    """Verdict, measured vs expected, ranked causes, findings, checks, prediction, safety.

    Parameters
    ----------
    d : gpctools.kinetics.Diagnosis

    Returns
    -------
    str
        Markdown (the content of ``diagnosis.md``).
    """
    lines = [f"# Why is the molar mass low? {d.label}", ""]
    lines += _verdict_lines(d)
    lines += _measured_lines(d)
    lines += _causes_lines(d)
    if d.findings:
        lines += ["## Instrument findings", "",
                  "Beside the chemistry: faults of the instrument to fix, even where the "
                  "results were corrected.", ""]
        lines += _table(["finding", "what", "action"],
                        [[f.check, f.text, f.action] for f in d.findings])
        lines.append("")
    lines += _impurity_lines(d)
    lines += _distribution_lines(d)
    lines += ["## Measurement checks", ""]
    lines += _table(["check", "status", "finding", "action"],
                    [[c.check, c.status, c.text, c.action or "–"] for c in d.checks])
    lines.append("")
    lines += _model_lines(d)
    lines += ["## How the causes are scored", "",
              "Each cause predicts R_p, Mn, Mw, the distribution's tails and the checks from "
              "one fitted parameter; χ² = rᵀC⁻¹r compares prediction and measurement, C "
              "holding the measurement uncertainties ("
              + ", ".join(f"{o.name} {_g(o.sigma, 3)}" for o in d.observations)
              + ") and the expected values' covariance above. A fitted value outside the "
              "cause's plausible range adds a penalty ((distance/scale)²). The likelihood "
              "share is the Akaike weight exp(−(χ² + penalty + 2k)/2), normalised over all "
              "causes (k = 1 fitted parameter, 0 for 'no cause'). It assumes a single cause; "
              "it is not the probability that the cause is real.", ""]
    if d.notes:
        lines += ["## Notes", ""] + [f"- {n}" for n in d.notes] + [""]
    if d.warnings:
        lines += ["## Warnings", ""] + [f"- {w}" for w in d.warnings] + [""]
    lines.append(prediction_markdown(d.prediction, level=2))
    lines += ["## Safety", ""] + [f"- {s}" for s in d.safety] + [""]
    return "\n".join(lines)
