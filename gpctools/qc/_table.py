"""Helpers shared by the QC modules: reading the batch results table consistently.

The results table is the one written by :func:`gpctools.batch.run_batch` (one row per
injection; column names carry units). These helpers only read it; they never modify it.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

from gpctools.errors import DataError, GpcWarning
from gpctools.qc.specs import label_text

__all__ = [
    "QCWarning",
    "ROLE_SAMPLE",
    "ROLE_CHECK",
    "ROLE_BLANK",
    "ALL_SEQUENCES",
    "role_of",
    "roles",
    "labels",
    "numbers",
    "ok_mask",
    "error_text",
    "require_columns",
    "first_number",
]

class QCWarning(GpcWarning):
    """Something in the QC inputs deserves a look (conflicting assigned values, duplicate
    trend labels)."""


ROLE_SAMPLE = "sample"
ROLE_CHECK = "check_standard"
ROLE_BLANK = "blank"
#: Sequence label used when the table has no ``sequence`` column (or it is empty).
ALL_SEQUENCES = "(all)"

_ROLE_ALIASES = {
    "": ROLE_SAMPLE,
    "sample": ROLE_SAMPLE,
    "check_standard": ROLE_CHECK,
    "checkstandard": ROLE_CHECK,
    "check": ROLE_CHECK,
    "blank": ROLE_BLANK,
}


def role_of(value: Any) -> str:
    """Normalised role: ``sample`` (default for empty), ``check_standard`` or ``blank``.

    Spaces and hyphens count as underscores (``"check standard"`` = ``"check_standard"``);
    any other role is returned as written (in lower case) and is ignored by the QC steps.
    """
    text = label_text(value).casefold().replace("-", "_").replace(" ", "_")
    return _ROLE_ALIASES.get(text, text)


def roles(table: pd.DataFrame) -> np.ndarray:
    """Normalised role of every row (all ``sample`` when there is no ``role`` column)."""
    if "role" not in table.columns:
        return np.array([ROLE_SAMPLE] * len(table), dtype=object)
    return np.array([role_of(v) for v in table["role"].tolist()], dtype=object)


def labels(table: pd.DataFrame, column: str, default: str = "") -> np.ndarray:
    """Text labels of a column (``default`` where the column is missing or a cell is empty)."""
    if column not in table.columns:
        return np.array([default] * len(table), dtype=object)
    out = [label_text(v) for v in table[column].tolist()]
    return np.array([v if v else default for v in out], dtype=object)


def numbers(table: pd.DataFrame, column: str) -> np.ndarray:
    """A numeric column as float64 (NaN where missing or not a number)."""
    if column not in table.columns:
        return np.full(len(table), np.nan)
    return pd.to_numeric(table[column], errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def ok_mask(table: pd.DataFrame) -> np.ndarray:
    """True for rows whose ``status`` is ``ok`` (all rows when there is no status column)."""
    if "status" not in table.columns:
        return np.ones(len(table), dtype=bool)
    return np.array([label_text(v).casefold() == "ok" for v in table["status"].tolist()])


def error_text(table: pd.DataFrame, position: int) -> str:
    """The ``error`` text of a row (empty when there is none)."""
    if "error" not in table.columns:
        return ""
    return label_text(table["error"].iloc[position])


def require_columns(table: pd.DataFrame, columns: tuple[str, ...], what: str) -> None:
    """Raise :class:`DataError` naming the first missing column."""
    for c in columns:
        if c not in table.columns:
            raise DataError(
                f"the results table has no column {c!r}, needed for {what}; use the table "
                "written by 'gpctools batch' (results.csv) or add the column",
                column=c,
            )
    if table.columns.duplicated().any():
        dup = table.columns[table.columns.duplicated()][0]
        raise DataError(
            f"the results table has the column {dup!r} twice; keep one", column=str(dup)
        )


def first_number(values: np.ndarray) -> float:
    """First finite value of an array, NaN when there is none."""
    for v in values:
        if math.isfinite(v):
            return float(v)
    return math.nan
