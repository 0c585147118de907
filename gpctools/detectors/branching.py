"""Long-chain branching from the contraction of size at equal molar mass.

    g  = ⟨s²⟩_branched/⟨s²⟩_linear at the same M                                  (V12)
    g′ = [η]_branched/[η]_linear at the same M, [η]_linear = K·M^a               (V13)
    g′ = g^ε,  ε = 0.5 (stars) ... 1.5 (non-draining limit)                        (V15)

Zimm-Stockmayer relations between g and the number n of branch points per molecule:

    trifunctional, fixed n        g = [(1 + n/7)^½ + 4n/(9π)]^(−½)                 (V16)
    tetrafunctional, fixed n      g = [(1 + n/6)^½ + 4n/(3π)]^(−½)                 (V17)
    trifunctional, polydisperse   g = (6/n)·{½[(2+n)/n]^½·ln[((2+n)^½ + n^½)/((2+n)^½ − n^½)] − 1}   (V18)
    tetrafunctional, polydisperse g = ln(1 + n)/n                                  (V19)
    regular star of f arms        g = (3f − 2)/f²                                  (V20)

and the branching frequency λ = n/M, per 1000 repeat units 1000·M0·n/M (V21).

The choice of ε alone changes n by a factor of about 4 (g′ = 0.80: n3 = 7.19 at ε = 0.5,
1.66 at ε = 1.5), so every branch count is reported with its model and ε.

References
----------
IUPAC Purple Book 1.25 (branching index g). Zimm and Stockmayer, J. Chem. Phys. 17 (1949)
1301 (V16-V19; formulas from memory). Zimm and Kilb, J. Polym. Sci. 37 (1959) 19 (ε = 0.5
for stars; from memory). "Evaluation of different branching functions used in the
determination of random branching by GPC", J. Appl. Polym. Sci. 21 (1977).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.sheets.cells import finite_or_none

from ._common import json_list, positive

__all__ = ["MODELS", "contraction_factor", "branch_points", "Branching", "branching"]

#: Zimm-Stockmayer models by name.
MODELS = ("trifunctional", "tetrafunctional", "trifunctional polydisperse", "tetrafunctional polydisperse", "star")


def contraction_factor(n: Any, model: str = "trifunctional") -> np.ndarray:
    """g for n branch points per molecule (or f arms for ``"star"``) [-] (V16-V20).

    Examples
    --------
    n = 5 (docs/science.md, section 15, derived from the formulas): g3 0.7042, g4 0.5364:

    >>> round(float(contraction_factor(5, "trifunctional")[0]), 4), round(float(contraction_factor(5, "tetrafunctional")[0]), 4)
    (0.7042, 0.5364)
    """
    x = np.atleast_1d(np.asarray(n, dtype=float))
    if np.any(x < 0):
        raise DataError("branch counts must be zero or positive")
    out = np.ones_like(x)
    nz = x > 0
    v = x[nz]
    if model == "trifunctional":
        out[nz] = ((1 + v / 7) ** 0.5 + 4 * v / (9 * math.pi)) ** -0.5
    elif model == "tetrafunctional":
        out[nz] = ((1 + v / 6) ** 0.5 + 4 * v / (3 * math.pi)) ** -0.5
    elif model == "trifunctional polydisperse":
        # with t² = n/(2+n): ½[(2+n)/n]^½·ln[...] − 1 = Σ_k≥1 t^(2k)/(2k+1) (artanh series);
        # the series avoids the cancellation of the closed form at small n
        t2 = v / (2 + v)
        series = sum(t2**k / (2 * k + 1) for k in range(1, 25))
        r = np.sqrt(2 + v)
        s = np.sqrt(v)
        with np.errstate(divide="ignore", invalid="ignore"):
            closed = 0.5 * np.sqrt((2 + v) / v) * np.log((r + s) / (r - s)) - 1
        out[nz] = (6 / v) * np.where(v < 0.1, series, closed)
    elif model == "tetrafunctional polydisperse":
        out[nz] = np.log1p(v) / v
    elif model == "star":
        out = (3 * x - 2) / x**2
        if np.any(x < 1):
            raise DataError("a star needs at least one arm")
    else:
        raise DataError(f"unknown branching model {model!r}; use one of {', '.join(MODELS)}")
    return out


def branch_points(g: Any, model: str = "trifunctional", *, n_max: float = 1e4) -> np.ndarray:
    """Invert :func:`contraction_factor` for n (bisection; g falls monotonically with n).

    g ≥ 1 gives 0; g at or below the model's value at ``n_max`` gives NaN.

    Examples
    --------
    g = 0.7427 (g′ 0.80 with ε 0.75): n3 = 3.97 (docs/science.md, section 15):

    >>> round(float(branch_points(0.7427)[0]), 2)
    3.97
    """
    from scipy.optimize import brentq

    if model == "star":
        raise DataError("for stars the arm count follows from g directly; use contraction_factor")
    gs = np.atleast_1d(np.asarray(g, dtype=float))
    out = np.full(gs.shape, np.nan)
    g_min = float(contraction_factor(n_max, model)[0])
    for i, gi in enumerate(gs):
        if not np.isfinite(gi):
            continue
        if gi >= 1.0:
            out[i] = 0.0
        elif gi > g_min:
            out[i] = brentq(lambda n, gi=gi: float(contraction_factor(n, model)[0]) - gi, 1e-12, n_max, xtol=1e-12)
    return out


@dataclass(frozen=True, repr=False)
class Branching(Display):
    """Branching per slice and its model.

    Attributes
    ----------
    M : numpy.ndarray
        [g/mol].
    g_prime : numpy.ndarray
        Viscosity contraction g′ [-] (NaN without viscometry).
    g : numpy.ndarray
        Size contraction g [-]: measured from Rg when given, else g′^(1/ε).
    n : numpy.ndarray
        Branch points per molecule [-] by ``model``.
    per_1000 : numpy.ndarray
        Branch points per 1000 repeat units [-] (NaN without M0).
    model : str
    epsilon : float or None
        ε used to turn g′ into g (None when g was measured from Rg).
    source : str
        ``"Rg"`` or ``"intrinsic viscosity"``.
    """

    M: np.ndarray
    g_prime: np.ndarray
    g: np.ndarray
    n: np.ndarray
    per_1000: np.ndarray
    model: str
    epsilon: float | None
    source: str

    def summary(self) -> dict[str, Any]:
        """Plain JSON-safe dict of the result, units in the keys (NaN and inf as None)."""
        ok = np.isfinite(self.n)
        return {
            "model": f"Zimm-Stockmayer, {self.model}",
            "epsilon [-]": self.epsilon,
            "g from": self.source,
            "note": "branch counts depend strongly on the model and on epsilon; always quote both",
            "mean branch points per molecule [-]": finite_or_none(float(np.mean(self.n[ok])) if ok.any() else None),
            "M [g/mol]": json_list(self.M),
            "g' [-]": json_list(self.g_prime),
            "g [-]": json_list(self.g),
            "n [-]": json_list(self.n),
            "branch points per 1000 repeat units [-]": json_list(self.per_1000),
        }


def branching(M: Any, *, intrinsic: Any = None, K_linear: float | None = None, a_linear: float | None = None,
              rg: Any = None, rg_Q_linear: float | None = None, rg_nu_linear: float | None = None,
              epsilon: float = 0.75, model: str = "trifunctional", M0: float | None = None) -> Branching:
    """g′, g and branch counts per slice against a linear reference of the same chemistry.

    Parameters
    ----------
    M : array_like
        Molar mass per slice [g/mol] (absolute: LS or universal calibration).
    intrinsic : array_like, optional
        [η] per slice [dL/g]; with ``K_linear`` [dL/g] and ``a_linear`` gives g′ (V13).
    rg : array_like, optional
        Rg per slice [nm]; with the linear reference Rg = Q·M^ν (``rg_Q_linear`` [nm],
        ``rg_nu_linear``) gives g directly (V12). Preferred over g′ when given.
    epsilon : float
        ε of g′ = g^ε (V15) when g comes from g′.
    model : str
        Zimm-Stockmayer model for n (see :data:`MODELS`; not ``"star"``).
    M0 : float, optional
        Repeat-unit molar mass [g/mol] for branch points per 1000 units.

    Notes
    -----
    The linear reference must be measured in the same solvent and at the same
    temperature. Short-chain branching (e.g. backbiting in acrylates) lowers [η] too and
    is not long-chain branching.
    """
    Mv = np.asarray(M, dtype=float)
    gp = np.full(Mv.shape, np.nan)
    if intrinsic is not None:
        if K_linear is None or a_linear is None:
            raise DataError("g′ needs the linear reference's Mark-Houwink K [dL/g] and a")
        with np.errstate(divide="ignore", invalid="ignore"):
            gp = np.asarray(intrinsic, dtype=float) / (K_linear * Mv**a_linear)
    if rg is not None:
        if rg_Q_linear is None or rg_nu_linear is None:
            raise DataError("g from Rg needs the linear reference Rg = Q·M^ν (Q [nm] and ν)")
        with np.errstate(divide="ignore", invalid="ignore"):
            g = (np.asarray(rg, dtype=float) / (rg_Q_linear * Mv**rg_nu_linear)) ** 2
        eps: float | None = None
        source = "Rg"
    elif intrinsic is not None:
        e = positive(epsilon, "epsilon")
        with np.errstate(invalid="ignore"):
            g = np.where(gp > 0, gp, np.nan) ** (1.0 / e)
        eps = e
        source = "intrinsic viscosity"
    else:
        raise DataError("branching needs [η] per slice or Rg per slice")
    n = branch_points(g, model)
    per = 1000.0 * M0 * n / Mv if M0 else np.full(Mv.shape, np.nan)
    return Branching(M=Mv, g_prime=gp, g=np.asarray(g), n=n, per_1000=np.asarray(per), model=model,
                     epsilon=eps, source=source)
