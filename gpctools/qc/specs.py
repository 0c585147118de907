"""Spec-limits sheet: per product (grade) limits on molar-mass results.

The sheet is a table with one row per product and one column per limit, the unit in
every header (wide form)::

    product | description | Mn min [g/mol] | Mn max [g/mol] | Mn target [g/mol] | Mw min [g/mol] | ...
            | dispersity min [-] | dispersity max [-] | check-standard tolerance [%]

Limit headers read ``<quantity> <min|max|target> [<unit>]`` where ``<quantity>`` is one of
``Mn``, ``Mw``, ``Mz``, ``Mz+1``, ``Mp``, ``Mp (dw/dlogM)`` (unit ``g/mol``) or
``dispersity`` (unit ``-``); the limit applies to the results column ``<quantity> [<unit>]``.
An empty cell means "no limit". ``check-standard tolerance [%]`` is the allowed deviation of
a check standard's average from its assigned value, for rows whose ``product`` names a
check standard. Columns without a unit (``description``, ``notes``, ...) are kept as text.
Limits are inclusive: a value equal to ``min`` or ``max`` passes.

The sheet is read with the schema :data:`gpctools.sheets.SPEC_LIMITS` and the one cell
parser, so a limit written ``150000``, ``150 000``, ``150.000,0`` or ``"90000,5"`` means
what it means in every other sheet.
"""

from __future__ import annotations

import hashlib
import math
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from gpctools import columns as C
from gpctools.display import Display
from gpctools.sheets import cells
from gpctools.sheets.schema import CheckedSheet, SheetRow, read_table
from gpctools.sheets.spec_limits import (
    _KNOWN_TEXT,
    SPEC_LIMITS,
    SPEC_LIMITS_LONG,
    SPEC_QUANTITIES,
    TOLERANCE_QUANTITIES,
    quantity_column,
)

__all__ = [
    "SPEC_QUANTITIES",
    "CHECK_STANDARD_TOLERANCE_COLUMN",
    "Limit",
    "ProductSpec",
    "SpecSheet",
    "read_specs",
    "specs_from_frame",
    "label_text",
    "within",
    "is_long_form",
    "split_column",
    "find_column",
]

#: Header of the check-standard tolerance column.
CHECK_STANDARD_TOLERANCE_COLUMN = C.CHECK_STANDARD_TOLERANCE

#: Columns of :meth:`SpecSheet.to_frame` (the unit of min/max/target is the quantity's).
SPEC_FRAME_COLUMNS = (
    "product",
    "quantity",
    "min [unit of quantity]",
    "max [unit of quantity]",
    "target [unit of quantity]",
    "limits",
)


def label_text(value: Any) -> str:
    """A product / batch / sample label as text (``200.0`` read from a sheet becomes ``"200"``).

    The sheets' :func:`gpctools.sheets.cells.text`: blank cells (empty, NaN, ``-``,
    ``n/a``, ...) give ``""``.

    Parameters
    ----------
    value : Any
        Cell value.

    Returns
    -------
    str
        Stripped text; ``""`` for empty cells.

    Examples
    --------
    >>> label_text(200.0), label_text(" PA-20 "), label_text(None)
    ('200', 'PA-20', '')
    """
    return cells.text(value)


#: Relative slack of limit comparisons, so that a value equal to a limit up to floating-point
#: rounding (e.g. a mean of replicates) counts as equal [-].
REL_SLACK = 1e-12


def _close(value: float, limit: float) -> bool:
    return abs(value - limit) <= REL_SLACK * max(abs(limit), 1e-300)


def within(value: float, limit: float, comparison: str) -> bool:
    """``value <= limit`` (or ``>=``), inclusive, with :data:`REL_SLACK` for rounding.

    Examples
    --------
    >>> within(100 * (105000 / 100000 - 1), 5.0, "<=")
    True
    """
    if comparison == "<=":
        return bool(value <= limit or _close(value, limit))
    return bool(value >= limit or _close(value, limit))


def _fmt(value: float, unit: str) -> str:
    """Format a number with its unit for messages (4 significant digits at least)."""
    if unit == "g/mol":
        text = f"{value:,.0f}".replace(",", " ") if abs(value) >= 1000 else f"{value:.4g}"
    else:
        text = f"{value:.4g}"
    return f"{text} {unit}" if unit != "-" else text


@dataclass(frozen=True, repr=False)
class Limit(Display):
    """Limits on one results column for one product.

    Attributes
    ----------
    quantity : str
        Quantity name, e.g. ``"Mw"``.
    column : str
        Results-table column, e.g. ``"Mw [g/mol]"``.
    unit : str
        Unit of the limits (``"g/mol"`` or ``"-"``).
    min, max, target : float or None
        Inclusive lower and upper limits and the target value; ``None`` where not given.
    """

    quantity: str
    column: str
    unit: str
    min: float | None = None
    max: float | None = None
    target: float | None = None

    def check(self, value: float) -> tuple[bool | None, str]:
        """Compare one value with the limits.

        Parameters
        ----------
        value : float
            Result in the unit of the limit.

        Returns
        -------
        (bool or None, str)
            ``True`` within limits (inclusive), ``False`` outside, ``None`` when the value
            is missing (NaN); and a reason in words.
        """
        if value is None or not math.isfinite(float(value)):
            return None, f"{self.quantity}: no value"
        v = float(value)
        if self.min is not None and v < self.min and not _close(v, self.min):
            return False, (
                f"{self.quantity} {_fmt(v, self.unit)} below min {_fmt(self.min, self.unit)}"
            )
        if self.max is not None and v > self.max and not _close(v, self.max):
            return False, (
                f"{self.quantity} {_fmt(v, self.unit)} above max {_fmt(self.max, self.unit)}"
            )
        return True, f"{self.quantity} {_fmt(v, self.unit)} within {self.describe()}"

    def describe(self) -> str:
        """Limits in words, e.g. ``"90 000-110 000 g/mol"``."""
        unit = "" if self.unit == "-" else f" {self.unit}"
        lo = _fmt(self.min, "-") if self.min is not None else None
        hi = _fmt(self.max, "-") if self.max is not None else None
        if self.unit == "g/mol":
            lo = f"{self.min:,.0f}".replace(",", " ") if self.min is not None else None
            hi = f"{self.max:,.0f}".replace(",", " ") if self.max is not None else None
        if lo is not None and hi is not None:
            return f"{lo} to {hi}{unit}"
        if lo is not None:
            return f">= {lo}{unit}"
        if hi is not None:
            return f"<= {hi}{unit}"
        return "no limit"

    def deviation_from_target_pct(self, value: float) -> float:
        """``100·(value/target - 1)`` [%]; NaN without a target."""
        if self.target is None or not math.isfinite(float(value)):
            return math.nan
        return 100.0 * (float(value) / self.target - 1.0)

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "quantity": self.quantity,
            "column": self.column,
            "unit": self.unit,
            "min": self.min,
            "max": self.max,
            "target": self.target,
        }


@dataclass(frozen=True, repr=False)
class ProductSpec(Display):
    """All limits of one product (grade) or check standard.

    Attributes
    ----------
    product : str
        Product / grade code as written in the batch sheet's ``product`` column.
    limits : tuple of Limit
        One entry per limited quantity, in sheet order.
    check_standard_tolerance_pct : float or None
        Allowed |value/assigned - 1| of a check standard [%], Mw and Mn.
    check_standard_tolerance_Mw_pct, check_standard_tolerance_Mn_pct : float or None
        The same for Mw or Mn alone (they win over the common tolerance).
    description : str
        Free text from a ``description`` column, if any.
    row : int or None
        Row of the spec sheet this came from (as a user counts).
    """

    product: str
    limits: tuple[Limit, ...] = ()
    check_standard_tolerance_pct: float | None = None
    description: str = ""
    row: int | None = None
    check_standard_tolerance_Mw_pct: float | None = None
    check_standard_tolerance_Mn_pct: float | None = None

    def tolerance(self, quantity: str) -> float | None:
        """Check-standard tolerance of ``"Mw"`` or ``"Mn"`` [%] (None when not given)."""
        own = {"Mw": self.check_standard_tolerance_Mw_pct,
               "Mn": self.check_standard_tolerance_Mn_pct}.get(quantity)
        return own if own is not None else self.check_standard_tolerance_pct

    def limit(self, quantity: str) -> Limit | None:
        """The limit on ``quantity`` (``"Mw"``) or on a column (``"Mw [g/mol]"``), if any."""
        for lim in self.limits:
            if quantity in (lim.quantity, lim.column):
                return lim
        return None

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "product": self.product,
            "description": self.description,
            "row": self.row,
            "check-standard tolerance [%]": self.check_standard_tolerance_pct,
            "check-standard tolerance Mw [%]": self.check_standard_tolerance_Mw_pct,
            "check-standard tolerance Mn [%]": self.check_standard_tolerance_Mn_pct,
            "limits": [lim.summary() for lim in self.limits],
        }


@dataclass(frozen=True, repr=False)
class SpecSheet(Display):
    """The parsed spec-limits sheet.

    Attributes
    ----------
    products : tuple of ProductSpec
        In sheet order.
    path : str or None
        The file read (``None`` when built from a frame).
    sha256 : str or None
        SHA-256 of the file bytes.
    form : str
        ``"wide"`` (one row per product) or ``"long"`` (one row per product and quantity).
    """

    products: tuple[ProductSpec, ...]
    path: str | None = None
    sha256: str | None = None
    form: str = "wide"
    _index: Mapping[str, ProductSpec] = field(default_factory=dict, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_index", {p.product.casefold(): p for p in self.products})

    def get(self, product: Any) -> ProductSpec | None:
        """The spec of ``product`` (case-insensitive), or ``None``."""
        return self._index.get(label_text(product).casefold())

    def __contains__(self, product: object) -> bool:
        return self.get(product) is not None

    def to_frame(self) -> pd.DataFrame:
        """Long table, one row per limit: product, quantity (with its unit), min, max, target."""
        rows = []
        for p in self.products:
            for lim in p.limits:
                rows.append((p.product, lim.column, lim.min, lim.max, lim.target, lim.describe()))
            for label, tol in ((CHECK_STANDARD_TOLERANCE_COLUMN, p.check_standard_tolerance_pct),
                               ("check-standard tolerance Mw [%]", p.check_standard_tolerance_Mw_pct),
                               ("check-standard tolerance Mn [%]", p.check_standard_tolerance_Mn_pct)):
                if tol is not None:
                    rows.append((p.product, label, None, tol, None,
                                 f"|value/assigned - 1| <= {tol:g} % (each injection and the mean)"))
        return pd.DataFrame(rows, columns=list(SPEC_FRAME_COLUMNS))

    def summary(self) -> dict[str, Any]:
        """JSON-safe description."""
        return {
            "path": self.path,
            "sha256": self.sha256,
            "form": self.form,
            "products": [p.summary() for p in self.products],
        }


def read_specs(path: str | os.PathLike[str], *, sheet: str | int | None = None) -> SpecSheet:
    """Read a spec-limits sheet (CSV or XLSX).

    Parameters
    ----------
    path : str or os.PathLike
        The sheet; see the module documentation for its columns.
    sheet : str or int, optional
        Workbook sheet; default the first.

    Returns
    -------
    SpecSheet

    Raises
    ------
    gpctools.errors.InputFormatError
        Naming the file, row and column: missing ``product`` column, empty or duplicate
        product, an unknown quantity or unit in a limit header, a value that is not a
        number, a negative molar mass, ``min > max`` or a target outside the limits.
    """
    from gpctools.io import read_sheet

    frame = read_sheet(path, sheet=sheet)
    digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
    spec = specs_from_frame(frame, path=str(path), sheet=frame.attrs.get("sheet"))
    return SpecSheet(spec.products, path=str(path), sha256=digest, form=spec.form)


def specs_from_frame(
    frame: pd.DataFrame, *, path: str | None = None, sheet: str | None = None
) -> SpecSheet:
    """Build a :class:`SpecSheet` from a table with the spec-sheet columns.

    Parameters
    ----------
    frame : pandas.DataFrame
        As returned by :func:`gpctools.io.read_sheet` (its ``attrs["source_rows"]`` is used
        for row numbers in messages) or built by hand. Not modified.
    path, sheet : str, optional
        Named in error messages.

    Returns
    -------
    SpecSheet

    Raises
    ------
    gpctools.errors.InputFormatError
        See :func:`read_specs`.
    """
    if is_long_form(frame):
        return SpecSheet(_long_products(frame, path, sheet), path=path, form="long")
    table = read_table(frame, SPEC_LIMITS, path=path, sheet=sheet)
    products = [_product(table, row) for row in table.rows]
    return SpecSheet(tuple(products), path=path)


def is_long_form(frame: pd.DataFrame) -> bool:
    """True when a spec table is in the long form (it has a ``quantity`` column)."""
    return any(cells.split_header(cells.text(c)).key == "quantity" for c in frame.columns)


def _product(table: CheckedSheet, row: SheetRow) -> ProductSpec:
    """One product's limits from a checked row; min/max/target checked against each other."""
    members = table.columns.families["limit"]
    values: dict[str, dict[str, float | None]] = {}
    for key, v in row.family_values["limit"].items():
        q, kind = key.rsplit("|", 1)
        values.setdefault(q, {})[kind] = v
    limits = []
    for q, kinds in values.items():
        unit = next(members[f"{q}|{k}"].field.unit for k in kinds)
        resolved = quantity_column(q, unit)
        assert resolved is not None  # the schema accepted the header
        _, column, unit = resolved
        lim = _checked_limit(q, column, unit, kinds,
                             lambda msg, k, q=q: row.error(msg, members[f"{q}|{k}"].header))
        if lim is not None:
            limits.append(lim)
    return ProductSpec(row["product"], tuple(limits), row.get("tolerance"),
                       row.get("description", ""), row.row, row.get("tolerance_Mw"),
                       row.get("tolerance_Mn"))


def split_column(column: str) -> tuple[str, str]:
    """``"Mw [g/mol]"`` -> ``("Mw", "g/mol")`` (unit ``""`` when the name has none)."""
    if column.endswith("]") and " [" in column:
        i = column.rfind(" [")
        return column[:i], column[i + 2 : -1]
    return column, ""


def _checked_limit(q: str, column: str, unit: str, kinds: Mapping[str, float | None],
                   error: Any) -> Limit | None:
    """A :class:`Limit` from min/max/target, checked against each other (None when all empty).

    ``error(message, kind)`` builds the exception for the cell of ``kind``.
    """
    for kind, v in kinds.items():
        if v is not None and unit == "g/mol" and v <= 0:
            raise error(f"{v:g} g/mol is not a molar mass; limits must be positive", kind)
    lo, hi, tgt = kinds.get("min"), kinds.get("max"), kinds.get("target")
    if lo is None and hi is None and tgt is None:
        return None
    if lo is not None and hi is not None and lo > hi:
        raise error(f"{q} min {lo:g} is above max {hi:g}; swap them", "min")
    if tgt is not None and ((lo is not None and tgt < lo) or (hi is not None and tgt > hi)):
        raise error(f"{q} target {tgt:g} lies outside its limits; check min, max and target", "target")
    return Limit(q, column, unit or "-", lo, hi, tgt)


def _long_products(frame: pd.DataFrame, path: str | None, sheet: str | None) -> tuple[ProductSpec, ...]:
    """Products of a long-form spec sheet (one row per product and quantity)."""
    table = read_table(frame, SPEC_LIMITS_LONG, path=path, sheet=sheet)
    cols = {k: table.columns.header(k) for k in ("quantity", "min", "max", "target", "unit")}
    products: dict[str, dict[str, Any]] = {}
    for row in table.rows:
        prod = products.setdefault(row["product"].casefold(), {
            "product": row["product"], "limits": {}, "tol": {}, "row": row.row, "description": ""})
        prod["description"] = prod["description"] or row.get("description", "")
        q_raw = row["quantity"]
        head = cells.split_header(q_raw)
        unit_cell = row.get("unit", "") or None
        unit = head.unit if head.style == "brackets" else unit_cell
        unit = (cells.canonical_unit(unit) or unit.strip()) if unit else None
        name = " ".join((head.name if head.style == "brackets" else q_raw).split())
        tol = TOLERANCE_QUANTITIES.get(name.casefold())
        seen = prod["tol"] if tol else prod["limits"]
        key = tol or name.casefold()
        if key in seen:
            raise row.error(f"{name!r} is given twice for product {row['product']!r} (first in row "
                            f"{seen[key][1]}); keep one row per product and quantity", cols["quantity"])
        if tol:
            if row.get("max") is None:
                raise row.error("give the tolerance [%] in the 'max' column", cols["max"])
            seen[key] = (row["max"], row.row)
            continue
        factor = 1000.0 if unit == "kg/mol" else 1.0
        resolved = quantity_column(name, "g/mol" if unit == "kg/mol" else unit)
        if resolved is None:
            raise row.error(f"unknown quantity {q_raw!r}; limits can be set on {_KNOWN_TEXT} "
                            "(write the unit in brackets, e.g. 'Mw [g/mol]')", cols["quantity"])
        q, column, qunit = resolved
        if unit is not None and unit not in (qunit, "kg/mol" if qunit == "g/mol" else qunit):
            raise row.error(f"unit [{unit}] does not fit {q}; write [{qunit}]", cols["quantity"])
        kinds = {k: (None if row.get(k) is None else row.get(k) * factor) for k in ("min", "max", "target")}
        lim = _checked_limit(q, column, qunit, kinds, lambda msg, k, r=row: r.error(msg, cols[k]))
        seen[key] = (lim, row.row)
    out = []
    for pr in products.values():
        lims = tuple(v[0] for v in pr["limits"].values() if v[0] is not None)
        tols = {k: v[0] for k, v in pr["tol"].items()}
        out.append(ProductSpec(pr["product"], lims, tols.get("tolerance"), pr["description"], pr["row"],
                               tols.get("tolerance_Mw"), tols.get("tolerance_Mn")))
    return tuple(out)


def _column_key(name: str) -> str:
    """A results-column name compared loosely: case, spacing, and numbers as values
    (``1000``, ``1 000``, ``1e3`` and ``1,000`` match).
    """
    def num(m: re.Match[str]) -> str:
        v = cells.number_or_none(m.group(0).replace(" ", ""))
        return f"{v:.12g}" if v is not None else m.group(0)

    text = " ".join(name.split()).casefold()
    return re.sub(r"\d[\d ,.]*(?:e[+-]?\d+)?", lambda m: num(m).strip() + " ", text).replace("  ", " ").strip()


def find_column(columns: Any, column: str) -> str | None:
    """The header of a results table that holds ``column`` (exact, legacy, or the same
    name with numbers written differently), or None.
    """
    heads = [str(c) for c in columns]
    if column in heads:
        return column
    legacy = C.find(heads, column)
    if legacy in heads:
        return legacy
    key = _column_key(column)
    for h in heads:
        if _column_key(h) == key:
            return h
    return None
