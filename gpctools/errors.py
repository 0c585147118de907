"""The one error family of gpctools, and its warning category.

Every error the library raises on bad input is a :class:`GpcError`. Each subclass is
also the matching built-in (an input-format error is also a ``ValueError``), so callers
that do not know gpctools can still catch it. Errors carry structured fields
(``path``, ``sheet``, ``row``, ``column``, ``key``) and a message that says what to
change; the CLI prints ``str(error)`` and exits non-zero without a traceback.

Suspicious but valid input is reported with a :class:`GpcWarning` (never silence) and,
where a result object exists, also listed in its ``warnings`` tuple so that reports can
show it.
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "GpcError",
    "InputFormatError",
    "MethodError",
    "CalibrationError",
    "DesignError",
    "DataError",
    "GpcWarning",
    "CalibrationWarning",
    "RangeWarning",
    "SignalWarning",
    "EstimatorWarning",
    "InputWarning",
]


class GpcError(Exception):
    """Base of every gpctools error.

    Parameters
    ----------
    message : str
        What is wrong and what to change.
    path : str, optional
        The file the problem is in.
    sheet : str, optional
        Spreadsheet sheet name.
    row : int, optional
        1-based line (text files) or row (spreadsheets) as a user would count it.
    column : str, optional
        Column header or letter.
    key : str, optional
        Dotted key of a method/recipe file, e.g. ``"calibration.order"``.
    """

    def __init__(
        self,
        message: str,
        *,
        path: Any = None,
        sheet: str | None = None,
        row: int | None = None,
        column: str | None = None,
        key: str | None = None,
    ) -> None:
        self.message = message
        self.path = None if path is None else str(path)
        self.sheet = sheet
        self.row = row
        self.column = column
        self.key = key
        super().__init__(self.__str__())

    def where(self) -> str:
        """Location prefix such as ``"runs.csv, line 12, column 'Mn'"`` (may be empty)."""
        parts = []
        if self.path:
            parts.append(self.path)
        if self.sheet:
            parts.append(f"sheet {self.sheet!r}")
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column:
            parts.append(f"column {self.column!r}")
        if self.key:
            parts.append(f"key {self.key!r}")
        return ", ".join(parts)

    def __str__(self) -> str:
        where = self.where()
        return f"{where}: {self.message}" if where else self.message

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe description of the error, for result tables."""
        return {
            "error": type(self).__name__,
            "message": self.message,
            "path": self.path,
            "sheet": self.sheet,
            "row": self.row,
            "column": self.column,
            "key": self.key,
        }


class InputFormatError(GpcError, ValueError):
    """A data file (chromatogram, sheet) cannot be read as what it should be."""


class MethodError(GpcError, ValueError):
    """A method, recipe or settings file has an unknown key or a bad value."""


class CalibrationError(GpcError, ValueError):
    """A calibration cannot be fitted or applied (too few standards, bad values...)."""


class DesignError(GpcError, ValueError):
    """A run series cannot separate the terms asked for (too few ratios, collinear columns)."""


class DataError(GpcError, ValueError):
    """Values are readable but physically or numerically unusable (e.g. no signal)."""


class GpcWarning(UserWarning):
    """Base of gpctools warnings: suspicious but valid input or results."""


class CalibrationWarning(GpcWarning):
    """Calibration quality concern (non-monotonic slope, too few standards, residuals)."""


class RangeWarning(GpcWarning):
    """Mass eluting outside the calibrated range, or an extrapolation."""


class SignalWarning(GpcWarning):
    """Baseline, limits or signal-to-noise concern."""


class EstimatorWarning(GpcWarning):
    """Disagreeing estimators, identifiability or fit-quality concerns in run-series fits."""


class InputWarning(GpcWarning):
    """Valid but surprising input: repeated sample ids in a batch sheet, a concentration
    trace from a UV or evaporative light-scattering detector.
    """
