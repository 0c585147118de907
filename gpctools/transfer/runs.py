"""Chain-length estimates of each run, with the run's own measurement uncertainty.

A run's chain length comes from its chromatogram(s) through the method
(:func:`gpctools.batch.process_injection`), or from the Mn/Mw written in the sheet. For
chromatogram runs the analysis also keeps what the uncertainty budget needs:

- the relative measurement uncertainty of each estimator's observation: from replicate
  injections when the run has several (their scatter, n − 1 degrees of freedom, divided
  by √n for the mean), else from the chromatogram itself (baseline noise and low-M limit
  sensitivity: the injection's own uncertainty, :mod:`gpctools.uncertainty`);
- the gradient of the observation's logarithm with respect to the calibration
  coefficients, so that the calibration covariance reaches the constants as one error
  common to every run (docs/science.md, section 11.5).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from gpctools import columns as C
from gpctools.errors import DataError, GpcError
from gpctools.transfer.estimators import CLDSlope, cld_slope
from gpctools.transfer.series import Run, RunSeries

__all__ = ["RunEstimate", "estimate_runs", "scale_warnings"]

LN10 = math.log(10.0)


@dataclass(frozen=True)
class RunEstimate:
    """Chain-length estimates of one run.

    Attributes
    ----------
    run : Run
    Mn, Mw : float
        Averages used [g/mol] (from the chromatogram(s), mean over replicates; else the
        sheet).
    scale : str
        Molar-mass scale description.
    cld : CLDSlope or None
    M, dwdlogM : numpy.ndarray or None
        The distribution (first injection) for plots [g/mol], [-].
    Mn_shift_pct : float
        Change of Mn when the low-M limit moves (chromatogram runs) [%].
    error : str
        Why the run could not be used ("" when fine).
    warnings : tuple of str
    observations : dict
        Estimator -> per-injection observations (M0/Mn, 2 M0/Mw, Λ) [-].
    rel_u : dict
        Estimator -> relative standard uncertainty of the run's observation [-].
    rel_u_dof : dict
        Estimator -> its degrees of freedom (replicates: n − 1; chromatogram: 1).
    rel_u_source : str
        ``"replicate injections"``, ``"chromatogram (noise, limit)"`` or ``""``.
    gradient : dict
        Estimator -> d ln(observation)/d(calibration coefficients) [-].
    """

    run: Run
    Mn: float
    Mw: float
    scale: str
    cld: CLDSlope | None
    M: np.ndarray | None
    dwdlogM: np.ndarray | None
    Mn_shift_pct: float
    error: str = ""
    warnings: tuple[str, ...] = ()
    observations: dict[str, list[float]] = field(default_factory=dict)
    rel_u: dict[str, float] = field(default_factory=dict)
    rel_u_dof: dict[str, float] = field(default_factory=dict)
    rel_u_source: str = ""
    gradient: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def injections(self) -> int:
        """Injections averaged for this run (0 for sheet values)."""
        return max((len(v) for v in self.observations.values()), default=0)

    def y(self, estimator: str) -> float:
        """The observation of ``estimator`` [-]: M0/Mn ("Mn"), 2 M0/Mw ("Mw/2") or Λ
        ("CLD"); the mean over replicate injections; NaN when not available.
        """
        if self.error:
            return float("nan")
        obs = self.observations.get(estimator)
        if obs:
            return float(np.mean(obs))
        if estimator == "Mn":
            return self.run.M0 / self.Mn if math.isfinite(self.Mn) else float("nan")
        if estimator == "Mw/2":
            return 2.0 * self.run.M0 / self.Mw if math.isfinite(self.Mw) else float("nan")
        if estimator == "CLD":
            return self.cld.Lambda if self.cld is not None else float("nan")
        raise DataError(f"unknown estimator {estimator!r}; use Mn, Mw/2 or CLD", key="estimators")


def _window(opts: Any, run_id: str) -> tuple[float, float] | None:
    w = opts.cld_window
    return w.get(run_id) if isinstance(w, Mapping) else w


def _one_injection(path: str, run: Run, method: Any, opts: Any, want_cld: bool):
    """Process one chromatogram: (injection, CLD slope or None, notes, uncertainty, Λ gradient)."""
    from gpctools.batch import process_injection

    inj = process_injection(path, method, sample_id=run.run_id)
    d = inj.distribution
    notes = list(inj.warnings)
    cld = None
    g_cld = None
    if want_cld:
        try:
            cld = cld_slope(d.M, d.dwdlogM, run.M0, window=_window(opts, run.run_id),
                            fraction=opts.cld_fraction, what=f"run {run.run_id}")
            notes.extend(cld.warnings)
            # Λ ∝ 1/M for a shift of the calibration at the window centre (first order)
            logc = 0.5 * (math.log10(cld.window[0]) + math.log10(cld.window[1]))
            order = np.argsort(np.log10(d.M))
            Vc = float(np.interp(logc, np.log10(d.M)[order], np.asarray(d.volume)[order]))
            g_cld = -LN10 * method.calibration.log_M_gradient(np.array([Vc]))[0]
        except DataError as exc:
            notes.append(f"CLD: {exc.message}")
    return inj, cld, notes, _measurement_of(inj, method.calibration), g_cld


@dataclass(frozen=True)
class _Measurement:
    """What a run needs of one injection's own uncertainty (gpctools.uncertainty)."""

    u_Mn: float  # relative, noise and limit parts combined [-]
    u_Mw: float
    grad_ln_Mn: np.ndarray  # ∂ ln Mn/∂c over the calibration coefficients [-]
    grad_ln_Mw: np.ndarray


def _measurement_of(inj: Any, calibration: Any) -> _Measurement:
    """The injection's noise and limit uncertainty of Mn and Mw (combined in quadrature;
    the calibration part is carried separately, as gradients common to every run:
    docs/science.md, sections 11.5 and 19.7).
    """
    from gpctools.uncertainty import calibration_gradients

    def part(x: float) -> float:
        return x if math.isfinite(x) else 0.0

    u = inj.uncertainty
    u_n = math.hypot(part(u.Mn.noise), part(u.Mn.limits)) if u is not None else 0.0
    u_w = math.hypot(part(u.Mw.noise), part(u.Mw.limits)) if u is not None else 0.0
    g = calibration_gradients(inj.distribution, calibration)
    zero = np.zeros(calibration.order + 1)
    return _Measurement(u_n, u_w, g.get("Mn", zero), g.get("Mw", zero))


def _light_scattering(inj: Any) -> tuple[float, float] | None:
    """Absolute Mn, Mw [g/mol] of an injection whose method has [detectors] with light
    scattering (gpctools.columns.MN_LS, MW_LS), or None.
    """
    det = getattr(inj, "detectors", None)
    if det is None:
        return None
    vals = det.row()
    Mn, Mw = vals.get(C.MN_LS, math.nan), vals.get(C.MW_LS, math.nan)
    return (float(Mn), float(Mw)) if math.isfinite(Mn) and math.isfinite(Mw) and Mn > 0 and Mw > 0 else None


def _chromatogram_run(run: Run, method: Any, opts: Any, want_cld: bool) -> RunEstimate:
    """A run from its chromatogram(s): mean over replicate injections, their scatter or the
    chromatogram's own uncertainty, and the calibration gradients.

    With light scattering in the method ([detectors]) the run's Mn and Mw are the absolute
    ones (scale "absolute, light scattering"), which do not move with the conventional
    calibration's coefficients (zero gradient); the CLD slope still uses the
    concentration trace through the calibration.
    """
    obs: dict[str, list[float]] = {"Mn": [], "Mw/2": [], "CLD": []}
    grads: dict[str, list[np.ndarray]] = {"Mn": [], "Mw/2": [], "CLD": []}
    u_chrom: dict[str, list[float]] = {"Mn": [], "Mw/2": []}
    notes: list[str] = []
    first = None
    Mn_l, Mw_l = [], []
    scale = None
    for path in run.files or ((run.file,) if run.file else ()):
        try:
            inj, cld, nts, unc, g_cld = _one_injection(path, run, method, opts, want_cld)
        except GpcError as exc:
            return RunEstimate(run, float("nan"), float("nan"), "", None, None, None,
                               float("nan"), str(exc), ())
        d = inj.distribution
        first = first or (inj, cld)
        notes.extend(nts)
        ls = _light_scattering(inj)
        Mn_i, Mw_i = ls if ls is not None else (float(d.Mn), float(d.Mw))
        scale = C.LS_SCALE_LABEL if ls is not None else (scale or inj.scale)
        Mn_l.append(Mn_i)
        Mw_l.append(Mw_i)
        obs["Mn"].append(run.M0 / Mn_i)
        obs["Mw/2"].append(2.0 * run.M0 / Mw_i)
        grads["Mn"].append(-unc.grad_ln_Mn * (ls is None))
        grads["Mw/2"].append(-unc.grad_ln_Mw * (ls is None))
        u_chrom["Mn"].append(unc.u_Mn)
        u_chrom["Mw/2"].append(unc.u_Mw)
        if cld is not None and g_cld is not None:
            obs["CLD"].append(cld.Lambda)
            grads["CLD"].append(g_cld)
    inj0, cld0 = first  # type: ignore[misc]
    n = len(Mn_l)
    rel_u, rel_dof, source = _replicate_noise(obs, u_chrom, n)
    return RunEstimate(
        run, float(np.mean(Mn_l)), float(np.mean(Mw_l)), scale or inj0.scale, cld0,
        np.asarray(inj0.distribution.M), np.asarray(inj0.distribution.dwdlogM),
        float(inj0.Mn_shift_pct), "", tuple(dict.fromkeys(notes)),
        observations={k: v for k, v in obs.items() if v}, rel_u=rel_u, rel_u_dof=rel_dof,
        rel_u_source=source,
        gradient={k: np.mean(v, axis=0) for k, v in grads.items() if v})


def _replicate_noise(obs: Mapping[str, list[float]], u_chrom: Mapping[str, list[float]],
                     n: int) -> tuple[dict[str, float], dict[str, float], str]:
    """Relative uncertainty of each run mean: replicate scatter/√n (n − 1 dof) when n >= 2,
    else the chromatogram's own (1 dof).
    """
    rel_u: dict[str, float] = {}
    dof: dict[str, float] = {}
    if n >= 2:
        for k, v in obs.items():
            if len(v) >= 2:
                a = np.asarray(v)
                rel_u[k] = float(np.std(a, ddof=1) / np.mean(a) / math.sqrt(a.size))
                dof[k] = float(a.size - 1)
        return rel_u, dof, f"replicate injections ({n})"
    for k, v in u_chrom.items():
        if v and v[0] > 0:
            rel_u[k], dof[k] = float(v[0]), 1.0
    return rel_u, dof, "chromatogram (baseline noise, low-M limit)"


def estimate_runs(series: RunSeries, method: Any, opts: Any) -> list[RunEstimate]:
    """Chain-length estimates of every run: the chromatogram(s) when named, else the sheet."""
    want_cld = "CLD" in opts.estimators
    out = []
    for run in series.runs:
        if run.role == "skip" or run.file is None:
            out.append(RunEstimate(run, run.Mn, run.Mw, run.scale, None, None, None,
                                   float("nan"), "", ()))
        else:
            out.append(_chromatogram_run(run, method, opts, want_cld))
    return out


def scale_warnings(estimates: Sequence[RunEstimate], reference: Any) -> list[str]:
    """A warning for runs on a relative (standard-equivalent) scale of another polymer."""
    msgs: list[str] = []
    relative = [e for e in estimates if "relative" in (e.scale or "")]
    if not relative:
        return msgs
    ok_same = set()
    for m in {e.run.monomer for e in relative}:
        try:
            if reference is None:
                from gpctools import refdata

                poly = refdata.monomer(m).polymer if m else ""
            else:
                poly = reference.monomer(m).polymer if m else ""
        except GpcError:
            poly = ""
        for e in relative:
            if e.run.monomer == m and poly and e.scale.lower().startswith(poly.lower()):
                ok_same.add(e.run.run_id)
    bad = [e.run.run_id for e in relative if e.run.run_id not in ok_same]
    if bad:
        msgs.append(
            f"runs {', '.join(bad)}: molar masses on a relative (standard-equivalent) scale; "
            "DPn = Mn/M0 then carries the calibration's bias and so does C (the Λ method "
            "least). Use universal calibration ([mark_houwink] in the method) or absolute "
            "detection"
        )
    return msgs


def calibration_covariance(method: Any) -> tuple[np.ndarray | None, float]:
    """The calibration's coefficient covariance [-] and its degrees of freedom (standards −
    coefficients); (None, inf) without a method or a covariance.
    """
    cal = getattr(method, "calibration", None) if method is not None else None
    if cal is None or not cal.covariance:
        return None, math.inf
    C = np.asarray(cal.covariance, dtype=float)
    if not np.all(np.isfinite(C)):
        return None, math.inf
    return C, float(len(cal.Mp) - cal.order - 1)
