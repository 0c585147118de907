"""How gpctools writes numbers: one policy for the screen, the pages and the tables.

Two audiences, two rules:

* **Files for machines** (CSV, XLSX, JSON): full precision without float noise. A value
  is rounded to :data:`FILE_DIGITS` (12) significant digits by :func:`clean`, so a
  standard of 2,520,000 g/mol that went through ``10 ** log10(M)`` is stored as
  ``2520000`` and not ``2519999.999999998``; 12 digits keep every digit a measurement
  or fit can carry (float64 holds 15-17) and drop only the last bits of rounding
  error. No thousands separators in files.
* **Text for people** (terminal, HTML, markdown, plot labels): significant digits per
  quantity, the table :data:`SCREEN_DIGITS`; molar masses above 1000 g/mol as whole
  numbers with thousands separators (``2,520,000``), R² with enough digits to show how
  far it is from 1 (``0.99987``, never ``1``), per-cent residuals with a fixed number of
  decimals so that a column of them lines up, dispersity to 3 significant digits
  (``1.62``), ratios with their trailing zeros (``1.00×``, not ``1×``).

Intervals that are not symmetric about the value, or that come from a t quantile, are
written as intervals (:func:`interval`: ``95 % CI 4.1 to 20.3 kJ/mol``), never as
``± se``.

The rounding is decimal rounding of a float (``float(f"{x:.12g}")``): the stored
number is the float nearest to the rounded decimal, which is what a reader of the
text file gets back.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = [
    "FILE_DIGITS",
    "SCREEN_DIGITS",
    "clean",
    "clean_frame",
    "clean_json",
    "significant",
    "molar_mass",
    "r_squared",
    "percent",
    "dispersity",
    "ratio",
    "number",
    "quantity_of",
    "interval",
    "value_with_se",
]

#: Significant digits kept in CSV, XLSX and JSON files (see the module docstring).
FILE_DIGITS = 12

#: Digits shown on screen per quantity (name without unit -> digits). ``sig`` counts
#: significant digits, ``dec`` decimals after the point. Quantities not listed get
#: 4 significant digits.
SCREEN_DIGITS: dict[str, tuple[str, int]] = {
    "molar mass": ("sig", 4),       # below 1000 g/mol; above it whole g/mol with separators
    "dispersity": ("sig", 3),       # Mw/Mn, Mz/Mw
    "percent": ("dec", 2),          # residuals, shares, shifts [%]: fixed decimals line up
    "volume": ("dec", 3),           # elution volumes [mL]
    "ratio": ("sig", 3),            # "1.23× expected"
    "energy": ("sig", 3),           # activation energies [kJ/mol]
    "coefficient": ("sig", 8),      # calibration coefficients: the curve needs them
    "standard error": ("sig", 2),   # standard errors and uncertainties
    "other": ("sig", 4),
}


def _finite(x: Any) -> float | None:
    try:
        f = float(x)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def clean(x: Any, digits: int = FILE_DIGITS) -> Any:
    """``x`` rounded to ``digits`` significant digits when it is a finite float.

    Integers, text, None and non-finite values come back unchanged (NaN stays NaN: a
    missing value is not a number to round).

    >>> clean(2519999.999999998)
    2520000.0
    >>> clean(0.1 + 0.2)
    0.3
    """
    if isinstance(x, bool) or not isinstance(x, float):
        try:
            import numpy as np

            if isinstance(x, np.floating):
                x = float(x)
            else:
                return x
        except ImportError:  # pragma: no cover
            return x
    if not math.isfinite(x) or x == 0.0:
        return x
    return float(f"{x:.{digits}g}")


def clean_frame(frame: Any, digits: int = FILE_DIGITS) -> Any:
    """A copy of a DataFrame with every float column rounded by :func:`clean`.

    Object columns are cleaned cell by cell; about 0.5 µs per value.
    """
    out = frame.copy()
    fmt = f"%.{digits}g"
    for col in out.columns:
        s = out[col]
        if s.dtype.kind == "f":
            out[col] = [float(fmt % x) for x in s.to_numpy(dtype=float)]
        elif s.dtype == object:
            out[col] = [clean(x, digits) for x in s]
    return out


def clean_json(obj: Any, digits: int = FILE_DIGITS) -> Any:
    """A JSON-ready structure with every float cleaned by :func:`clean` (dicts, lists and
    tuples walked; other values unchanged).
    """
    if isinstance(obj, dict):
        return {k: clean_json(v, digits) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [clean_json(v, digits) for v in obj]
    return clean(obj, digits)


def significant(x: Any, digits: int = 4, *, keep_zeros: bool = False) -> str:
    """``x`` to ``digits`` significant digits (``keep_zeros``: ``1.00``, not ``1``); ``-`` for none."""
    f = _finite(x)
    if f is None:
        return "-"
    text = f"{f:#.{digits}g}" if keep_zeros else f"{f:.{digits}g}"
    if text.endswith("."):
        text = text[:-1]
    if "e" in text:  # 1.2e+05 -> 1.2e5
        mant, exp = text.split("e")
        text = f"{mant}e{int(exp)}"
    return text


def molar_mass(M: Any, *, separator: str = ",") -> str:
    """A molar mass for people [g/mol]: whole numbers with thousands separators from
    1000 g/mol on (``2,520,000``), 4 significant digits below (``162.2``).
    """
    f = _finite(M)
    if f is None:
        return "-"
    if abs(f) >= 1000.0:
        return f"{f:,.0f}".replace(",", separator)
    return significant(f, 4)


def r_squared(r2: Any) -> str:
    """R² with two digits beyond its run of nines: ``0.99987``, ``0.99912``, ``0.987``.

    The number of decimals is ``max(3, 1 - floor(log10(1 - R²)))``, so the distance
    from 1 is always shown with two significant digits; an exact 1 is ``1.000000``.
    """
    f = _finite(r2)
    if f is None:
        return "-"
    gap = 1.0 - f
    if gap <= 0.0:
        return f"{f:.6f}"
    decimals = max(3, 1 - math.floor(math.log10(gap)))
    return f"{f:.{min(decimals, 12)}f}"


def percent(x: Any, *, decimals: int = 2, sign: bool = False) -> str:
    """A per-cent value with a fixed number of decimals (``-0.34``, ``0.46``, ``-0.06``)."""
    f = _finite(x)
    if f is None:
        return "-"
    return f"{f:+.{decimals}f}" if sign else f"{f:.{decimals}f}"


def dispersity(x: Any) -> str:
    """Dispersity (Mw/Mn) to 3 significant digits, zeros kept (``1.62``, ``2.00``)."""
    return significant(x, 3, keep_zeros=True)


def ratio(x: Any, digits: int = 3) -> str:
    """A ratio such as "measured / expected", zeros kept: ``1.00``, ``0.812``, ``12.3``."""
    return significant(x, digits, keep_zeros=True)


def quantity_of(column: str) -> str:
    """The :data:`SCREEN_DIGITS` key of a result column, from its name and unit."""
    c = column.strip()
    if c.endswith("[g/mol]"):
        return "molar mass"
    if c.startswith(("dispersity", "Mw/Mn", "Mz/Mw")):
        return "dispersity"
    if c.endswith(("[%]", "[% mass]")) or "[% " in c:
        return "percent"
    if c.endswith("[mL]"):
        return "volume"
    if c.endswith("[kJ/mol]"):
        return "energy"
    return "other"


def number(value: Any, column: str = "", *, separator: str = ",") -> str:
    """A table cell for people, by the quantity its column holds (:func:`quantity_of`).

    R² columns go through :func:`r_squared`; text comes back as text, a missing value
    as ``-``.
    """
    if isinstance(value, str):
        return value
    if isinstance(value, int) and not isinstance(value, bool):  # counts stay counts
        return f"{value:,}".replace(",", separator) if abs(value) >= 10_000 else str(value)
    f = _finite(value)
    if f is None:
        return "-"
    if column.startswith(("R^2", "R²")) or "R² [-]" in column or "R^2 [-]" in column:
        return r_squared(f)
    kind = quantity_of(column)
    if kind == "molar mass":
        return molar_mass(f, separator=separator)
    if kind == "dispersity":
        return dispersity(f)
    how, n = SCREEN_DIGITS[kind]
    if how == "dec":
        return f"{f:.{n}f}"
    if abs(f) >= 10_000:
        return f"{f:,.0f}".replace(",", separator)
    # trailing zeros kept so that a column reads at one precision (11.60 beside 12.32);
    # a whole number (a count stored as float) stays whole
    return significant(f, n, keep_zeros=not f.is_integer())


def interval(low: Any, high: Any, *, unit: str = "", level: float = 0.95, digits: int = 3) -> str:
    """A confidence interval as an interval: ``95 % CI 4.1 to 20.3 kJ/mol``.

    Both ends get the same number of decimals: enough for ``digits`` significant
    digits of the wider end's magnitude.
    """
    lo, hi = _finite(low), _finite(high)
    pct = f"{100.0 * level:.4g} % CI"
    if lo is None or hi is None:
        return f"{pct} not available"
    big = max(abs(lo), abs(hi))
    decimals = 0 if big == 0 else max(0, digits - 1 - math.floor(math.log10(big)))
    text = f"{pct} {lo:.{decimals}f} to {hi:.{decimals}f}"
    return f"{text} {unit}" if unit else text


def value_with_se(value: Any, se: Any, *, unit: str = "", digits: int = 2) -> str:
    """``value ± se`` for a symmetric standard uncertainty, the value to the decimal of
    the uncertainty's ``digits`` significant digits (``15.2 ± 1.3 kJ/mol``).
    """
    v, s = _finite(value), _finite(se)
    if v is None:
        return "-"
    if s is None or s <= 0:
        text = significant(v, 4)
    else:
        decimals = max(0, digits - 1 - math.floor(math.log10(s)))
        text = f"{v:.{decimals}f} ± {s:.{decimals}f}"
    return f"{text} {unit}" if unit else text
