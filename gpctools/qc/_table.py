"""Helpers shared by the QC modules: reading the batch results table consistently.

The results table is the one written by :func:`gpctools.batch.run_batch` (one row per
injection; column names carry units). These helpers only read it; they never modify it.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from typing import Any

import numpy as np
import pandas as pd

from gpctools import columns as C
from gpctools.errors import DataError, GpcWarning
from gpctools.sheets import batch as _batch_sheet
from gpctools.sheets import cells
from gpctools.sheets.cells import text as label_text

__all__ = [
    "QCWarning",
    "ROLE_SAMPLE",
    "ROLE_CHECK",
    "ROLE_BLANK",
    "ROLE_CALIBRATION",
    "ROLE_REPLICATE",
    "SAMPLE_ROLES",
    "ALL_SEQUENCES",
    "check_roles",
    "sample_keys",
    "date_column",
    "dates",
    "role_of",
    "roles",
    "labels",
    "numbers",
    "ok_mask",
    "error_text",
    "require_columns",
    "first_number",
    "label_text",
]


class QCWarning(GpcWarning):
    """Something in the QC inputs deserves a look (conflicting assigned values, duplicate
    trend labels).
    """


ROLE_SAMPLE = _batch_sheet.ROLE_SAMPLE
ROLE_CHECK = _batch_sheet.ROLE_CHECK
ROLE_BLANK = _batch_sheet.ROLE_BLANK
ROLE_CALIBRATION = _batch_sheet.ROLE_CALIBRATION
ROLE_REPLICATE = _batch_sheet.ROLE_REPLICATE
#: Roles whose injections are judged against the product's spec (a replicate is a repeat
#: injection of a sample and shares its ``sample_id``).
SAMPLE_ROLES = (ROLE_SAMPLE, ROLE_REPLICATE)
#: Sequence label used when the table has no ``sequence`` column (or it is empty).
ALL_SEQUENCES = "(all)"


def role_of(value: Any) -> str:
    """Normalised role: ``sample`` (default for empty), ``check_standard`` or ``blank``.

    The batch sheet's spellings (:data:`gpctools.sheets.batch.ROLE_CHOICES`): case does
    not matter, spaces and hyphens count as underscores (``"check standard"`` =
    ``"check_standard"``, also ``check``); any other role is returned in that compared
    form and is ignored by the QC steps.
    """
    return _batch_sheet.role_of(value)


def check_roles(table: pd.DataFrame, what: str = "the results table") -> None:
    """Raise :class:`DataError` for a role that is none of the known ones, listing them.

    A mistyped role (``"blnak"``) would otherwise drop the injection from every check.
    """
    if C.ROLE not in table.columns:
        return
    for i, v in enumerate(table[C.ROLE].tolist()):
        r = role_of(v)
        if r not in _batch_sheet.ROLES:
            raise DataError(
                f"{what}, row {i + 1}: unknown role {label_text(v)!r}; write one of: "
                f"{', '.join(_batch_sheet.ROLES)}", column=C.ROLE, row=i + 1)


def sample_keys(table: pd.DataFrame) -> np.ndarray:
    """The sample each row belongs to: its ``sample_id``, except that a ``replicate`` row whose
    id no ``sample`` row shares joins the only sample of its batch (and product), when there
    is exactly one (``B1`` and its replicate written ``B1-R``).
    """
    sid = labels(table, C.SAMPLE_ID)
    role = roles(table)
    batch = labels(table, C.BATCH)
    product = labels(table, C.PRODUCT)
    keys = sid.copy()
    samples = role == ROLE_SAMPLE
    shared = set(sid[samples].tolist())
    for i in np.flatnonzero(role == ROLE_REPLICATE):
        if sid[i] in shared or not batch[i]:
            continue
        same = samples & (batch == batch[i]) & (product == product[i])
        ids = set(sid[same].tolist())
        if len(ids) == 1:
            keys[i] = ids.pop()
    return keys


def roles(table: pd.DataFrame) -> np.ndarray:
    """Normalised role of every row (all ``sample`` when there is no ``role`` column)."""
    if C.ROLE not in table.columns:
        return np.array([ROLE_SAMPLE] * len(table), dtype=object)
    return np.array([role_of(v) for v in table[C.ROLE].tolist()], dtype=object)


def labels(table: pd.DataFrame, column: str, default: str = "") -> np.ndarray:
    """Text labels of a column (``default`` where the column is missing or a cell is empty)."""
    if column not in table.columns:
        return np.array([default] * len(table), dtype=object)
    out = [label_text(v) for v in table[column].tolist()]
    return np.array([v if v else default for v in out], dtype=object)


def numbers(table: pd.DataFrame, column: str) -> np.ndarray:
    """A numeric column as float64 (NaN where missing or not a number).

    Text cells are read with the sheets' cell parser
    (:func:`gpctools.sheets.cells.parse_number`), so ``"90000,5"`` copied from a batch
    sheet means 90000.5 here as in every sheet.
    """
    if column not in table.columns:
        return np.full(len(table), np.nan)
    col = table[column]
    if pd.api.types.is_numeric_dtype(col) and not pd.api.types.is_bool_dtype(col):
        return col.to_numpy(dtype=float, na_value=np.nan)
    values = col.tolist()
    decimal = cells.column_decimal(values)
    out = [cells.number_or_none(v, decimal=decimal) for v in values]
    return np.array([np.nan if v is None else v for v in out], dtype=float)


def ok_mask(table: pd.DataFrame) -> np.ndarray:
    """True for rows whose ``status`` is ``ok`` (all rows when there is no status column)."""
    if C.STATUS not in table.columns:
        return np.ones(len(table), dtype=bool)
    return np.array([label_text(v).casefold() == "ok" for v in table[C.STATUS].tolist()],
                    dtype=bool)


def error_text(table: pd.DataFrame, position: int) -> str:
    """The ``error`` text of a row (empty when there is none)."""
    if C.ERROR not in table.columns:
        return ""
    return label_text(table[C.ERROR].iloc[position])


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


_DATE_NAME = re.compile(r"(?:.*\b)?(?:date|datetime|timestamp)(?:\b.*)?", re.IGNORECASE)


def date_column(table: pd.DataFrame) -> str | None:
    """The column holding the analysis date: ``date`` itself, else the first header whose
    name (without its unit) contains the word ``date`` (``analysis date``, ``run date``).
    """
    names = [str(c) for c in table.columns]
    for c in names:
        if cells.split_header(c).key == "date":
            return c
    for c in names:
        if _DATE_NAME.fullmatch(cells.split_header(c).name.strip()):
            return c
    return None


#: Date texts accepted besides ISO 8601: day.month.year, year/month/day, and month names.
_DATE_FORMATS = ("%d.%m.%Y", "%d.%m.%Y %H:%M", "%Y/%m/%d", "%d-%b-%Y", "%d %b %Y", "%b %d %Y",
                 "%d %B %Y", "%B %d %Y", "%Y%m%d")


def _date_text(text: str) -> _dt.datetime | None:
    try:
        return _dt.datetime.fromisoformat(text.replace("Z", "")).replace(tzinfo=None)
    except ValueError:
        pass
    for fmt in _DATE_FORMATS:
        try:
            return _dt.datetime.strptime(text, fmt)
        except ValueError:
            continue
    return None


def dates(table: pd.DataFrame, column: str | None, *, strict: bool = True) -> list[_dt.datetime | None]:
    """Dates of a column as :class:`datetime.datetime` (None for blank cells).

    Accepted: date/datetime cells of a workbook; text in ISO 8601 (``2026-03-14``,
    ``2026-03-14 09:30``, ``2026-03-14T09:30:00``), ``14.03.2026``, ``2026/03/14``,
    ``14-Mar-2026``, ``14 March 2026``. Slash dates with the year last (``03/04/2026``)
    are refused: they read two ways.

    Parameters
    ----------
    strict : bool
        Raise for a cell that is no such date; with False the whole column is ignored
        (every date None) and a :class:`QCWarning` says so.

    Raises
    ------
    DataError
        Naming the row and column (``strict`` only).
    """
    try:
        return _dates(table, column)
    except DataError as exc:
        if strict:
            raise
        import warnings

        warnings.warn(f"{exc}; the points are kept in the order of the files", QCWarning, stacklevel=2)
        return [None] * len(table)


def _dates(table: pd.DataFrame, column: str | None) -> list[_dt.datetime | None]:
    if column is None:
        return [None] * len(table)
    out: list[_dt.datetime | None] = []
    for i, v in enumerate(table[column].tolist()):
        if cells.is_blank(v):
            out.append(None)
            continue
        if isinstance(v, _dt.datetime):
            out.append(v.replace(tzinfo=None))
            continue
        if isinstance(v, _dt.date):
            out.append(_dt.datetime(v.year, v.month, v.day))
            continue
        if isinstance(v, pd.Timestamp):
            out.append(v.to_pydatetime().replace(tzinfo=None))
            continue
        text = label_text(v)
        d = _date_text(text)
        if d is None:
            raise DataError(
                f"row {i + 1}: {text!r} is not a date; write dates as YYYY-MM-DD "
                "(ISO 8601, e.g. 2026-03-14)", column=column, row=i + 1)
        out.append(d)
    return out
