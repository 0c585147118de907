"""Self-contained HTML report (jinja2 with autoescape; plots embedded as PNG data URIs).

The page loads nothing from outside: styles are inline, images are ``data:`` URIs, there
is no script. All user text (sample names, products, reasons, file paths, the method
text) goes through jinja2's HTML autoescaping. Print styles give A4 pages without the
navigation bar.
"""

from __future__ import annotations

import base64
import math
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from gpctools.formatting import dispersity, r_squared
from gpctools.report.files import write_text

__all__ = ["TEMPLATE", "png_data_uri", "figure", "format_value", "table_context", "render_html", "write_html"]

#: Template file inside the package (``gpctools/report/templates``).
TEMPLATE = "qc_report.html.j2"
_TAGGED = {"decision", "result", "verdict", "verdict against spec"}
_TAG_VALUES = {"pass", "fail", "not reportable", "no result", "no spec", "not evaluated"}


def png_data_uri(png: bytes) -> str:
    """``data:image/png;base64,...`` for an ``<img src>``."""
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii")


def format_value(value: Any, column: str = "") -> tuple[str, bool]:
    """Text of one table cell and whether it is a number.

    The policy of :mod:`gpctools.formatting`: molar masses ``[g/mol]`` to the nearest
    1 g/mol with thin-space thousands, ``[%]`` to 2 decimals, R² with two digits past its
    nines (``0.99987``), dispersity to 3 significant digits, other ``[-]`` and
    ``[sigma]`` to 4 significant digits, ``[mL]`` to 3 decimals, other numbers to 6
    significant digits. The workbook keeps full precision.
    """
    if value is None:
        return "", False
    if isinstance(value, (bool, np.bool_)):
        return ("yes" if value else "no"), False
    if isinstance(value, (int, np.integer)) and not column.endswith("[g/mol]"):
        return str(int(value)), True
    if isinstance(value, (int, float, np.integer, np.floating)):
        f = float(value)
        if not math.isfinite(f):
            return "", True
        c = column.strip()
        if c.startswith(("R² [-]", "R^2 [-]", "calibration R²")):
            return r_squared(f), True
        if c.startswith(("dispersity", "Mw/Mn", "Mz/Mw")):
            return dispersity(f), True
        if c.endswith("[g/mol]"):
            return f"{f:,.0f}".replace(",", "\u2009"), True
        if c.endswith("[%]") or c.endswith("[% mass]"):
            return f"{f:.2f}", True
        if c.endswith("[-]") or c.endswith("[sigma]"):
            return f"{f:.4g}", True
        if c.endswith("[mL]"):
            return f"{f:.3f}", True
        return f"{f:.6g}", True
    try:
        if pd.isna(value):
            return "", False
    except (TypeError, ValueError):
        pass
    return str(value), False


def table_context(
    frame: pd.DataFrame | None,
    *,
    empty: str = "Nothing to show.",
    formats: Mapping[str, str] | None = None,
    unit_from: str | None = None,
) -> dict[str, Any]:
    """A DataFrame as plain data for the template (cells already formatted as text).

    Parameters
    ----------
    frame : pandas.DataFrame or None
    empty : str
        Text shown for an empty table.
    formats : mapping, optional
        Column -> unit-like suffix used for formatting when the header has no unit
        (e.g. ``{"value": "[-]"}``).
    unit_from : str, optional
        A text column whose label (the quantity, ending in its unit ``[...]``) formats
        the other cells of the row (key/value tables such as ``item | value``).
    """
    if frame is None or frame.empty:
        return {"columns": [] if frame is None else [str(c) for c in frame.columns], "rows": [], "empty": empty}
    cols = [str(c) for c in frame.columns]
    fmt_cols = [(formats or {}).get(c, c) for c in cols]
    rows = []
    key = cols.index(unit_from) if unit_from in cols else None
    for rec in frame.itertuples(index=False, name=None):
        cells = []
        row_fmt = fmt_cols
        if key is not None:
            label = str(rec[key])  # the label names the quantity and ends in its unit
            row_fmt = [f if j == key else label for j, f in enumerate(fmt_cols)]
        for c, fc, v in zip(cols, row_fmt, rec, strict=False):
            text, num = format_value(v, fc)
            tag = text.replace(" ", "-") if c in _TAGGED and text in _TAG_VALUES else None
            longest = max((len(t) for t in text.split()), default=0)
            cls = "" if num else " ".join(filter(None, ("wide" if len(text) > 60 else "",
                                                        "brk" if longest > 20 else "")))
            cells.append({"text": text, "num": num, "tag": tag, "cls": cls})
        rows.append(cells)
    return {"columns": cols, "rows": rows, "empty": empty}


def _environment():
    import jinja2

    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(Path(__file__).parent / "templates")),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )


def render_html(context: Mapping[str, Any]) -> str:
    """Render the QC report template with ``context`` (see :func:`gpctools.report.run_qc`)."""
    return _environment().get_template(TEMPLATE).render(**context)


def write_html(path: str | os.PathLike[str], context: Mapping[str, Any]) -> Path:
    """Render and write the report atomically (UTF-8)."""
    return write_text(path, render_html(context))


def figure(png: bytes, caption: str, alt: str | None = None) -> dict[str, str]:
    """Template data of one embedded figure."""
    return {"src": png_data_uri(png), "caption": caption, "alt": alt or caption}

