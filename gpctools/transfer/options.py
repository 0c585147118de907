"""The settings of a run-series analysis, checked once (:class:`TransferOptions`).

:func:`gpctools.transfer.analysis.analyse_series` takes one ``TransferOptions`` (or
keyword overrides of its fields) instead of threading each setting through its steps.
Every value is checked when the object is made; a bad value raises
:class:`~gpctools.errors.DataError` whose ``key`` is the option's name.
"""

from __future__ import annotations

import difflib
import math
import numbers
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields, replace
from types import MappingProxyType
from typing import Any

from gpctools.display import Display
from gpctools.errors import DataError
from gpctools.transfer.estimators import DEFAULT_FRACTION, ESTIMATORS
from gpctools.transfer.kinetic import KINETIC_CHOICES

__all__ = ["TransferOptions", "DRIFT_CHOICES", "ADJUST_CHOICES"]

#: Accepted values of ``drift``.
DRIFT_CHOICES = ("auto", True, False)
#: Accepted values of ``impurity_adjust``.
ADJUST_CHOICES = ("series", "run")

Window = tuple[float, float]


@dataclass(frozen=True, repr=False)
class TransferOptions(Display):
    """Settings of :func:`~gpctools.transfer.analysis.analyse_series`.

    Attributes
    ----------
    terms : tuple of str or None
        Constants to fit: ``"C_A"``, ``"C_A:<agent>"``, ``"C_S"``, ``"C_I"``, ``"C_M"``.
        None (default): every ratio that varies within a group.
    estimators : tuple of str
        Any of ``"Mn"``, ``"Mw/2"``, ``"CLD"`` (CLD needs chromatograms).
    drift : {"auto", True, False}
        Fit the cumulative (conversion-drift) model: "auto" when every run of a group has
        a conversion; True requires it; False never.
    cld_window : (float, float), mapping of run id to (float, float), or None
        CLD window (M_low, M_high) [g/mol] for every run, or per run id; None: automatic.
    cld_fraction : float
        Automatic CLD window: dw/dlogM >= this fraction of its maximum, 0 < f < 1 [-].
    confidence : float
        Two-sided level of the constants' intervals, 0 < level < 1 [-] (0.95).
    impurity_confidence : float
        One-sided level of impurity flags and the intercept check, 0 < level < 1 [-] (0.99).
    impurity_adjust : {"series", "run"}
        Whether the flag level holds for the whole series (default) or per run.
    impurity_C : float or None
        Transfer constant of the suspected impurity [-] (>= 0), for ppm and mol/L.
    rel_error : float or None
        Known relative standard error of one 1/DPn [-] (> 0) for the impurity test.
    flag_estimator : str or None
        Estimator of the impurity test (default: Mw/2, else Mn, else CLD).
    exclude_flagged : bool
        Leave flagged runs out of the final fits (default True).
    expected_intercept : float, (float, float) or None
        Expected 1/DPn0 [-] and optionally its standard error [-], both >= 0.
    C_M : float or None
        Known transfer-to-monomer constant [-] (>= 0), for the intercept check.
    kinetic_term : float or None
        Known kinetic part of 1/DPn0, (1 + δ) k_t R_p/(k_p² [M]²) [-] (>= 0).
    fixed_intercept : float or None
        Hold 1/DPn0 at this value [-] (>= 0); lets ``C_M`` be fitted, no drift model then.
    delta : float or None
        δ = k_td/k_t, share of termination by disproportionation, 0 <= δ <= 1 [-]. None
        (default): the sheet's ``delta [-]``, else the monomer's bundled value, else 1.
    kinetic : {"auto", "regressor", "reference", "none"}
        How the kinetic term enters when [M], [I] or T varies in a group (see
        :mod:`gpctools.transfer.kinetic`): "auto" fits R_p/[M]² or √[I]/[M] as a regressor
        when it spans about 2-fold or more.

    Examples
    --------
    >>> TransferOptions(estimators=("Mw/2",), impurity_C=15.0).with_changes(drift=False).drift
    False
    """

    terms: tuple[str, ...] | None = None
    estimators: tuple[str, ...] = ESTIMATORS
    drift: str | bool = "auto"
    cld_window: Window | Mapping[str, Window] | None = None
    cld_fraction: float = DEFAULT_FRACTION
    confidence: float = 0.95
    impurity_confidence: float = 0.99
    impurity_adjust: str = "series"
    impurity_C: float | None = None
    rel_error: float | None = None
    flag_estimator: str | None = None
    exclude_flagged: bool = True
    expected_intercept: float | tuple[float, float] | None = None
    C_M: float | None = None
    kinetic_term: float | None = None
    fixed_intercept: float | None = None
    delta: float | None = None
    kinetic: str = "auto"

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "terms", _terms(self.terms))
        set_(self, "estimators", _estimators(self.estimators))
        if self.drift not in DRIFT_CHOICES:
            raise DataError(f"drift must be 'auto', True or False, not {self.drift!r}",
                            key="drift")
        set_(self, "cld_window", _cld_window(self.cld_window))
        _open_unit("cld_fraction", self.cld_fraction, "the CLD window fraction")
        _open_unit("confidence", self.confidence, "a confidence level")
        _open_unit("impurity_confidence", self.impurity_confidence, "a confidence level")
        if self.impurity_adjust not in ADJUST_CHOICES:
            raise DataError(f"impurity_adjust must be 'series' or 'run', not "
                            f"{self.impurity_adjust!r}", key="impurity_adjust")
        if self.flag_estimator is not None and self.flag_estimator not in ESTIMATORS:
            raise DataError(f"unknown estimator {self.flag_estimator!r}; use Mn, Mw/2 or CLD",
                            key="flag_estimator")
        if not isinstance(self.exclude_flagged, bool):
            raise DataError(f"exclude_flagged must be True or False, not "
                            f"{self.exclude_flagged!r}", key="exclude_flagged")
        for name in ("impurity_C", "C_M", "kinetic_term", "fixed_intercept"):
            _not_negative(name, getattr(self, name))
        if self.rel_error is not None and not (_finite(self.rel_error) and self.rel_error > 0):
            raise DataError(f"rel_error must be positive, not {self.rel_error!r}",
                            key="rel_error")
        set_(self, "expected_intercept", _expected(self.expected_intercept))
        if self.delta is not None and not (_finite(self.delta) and 0.0 <= self.delta <= 1.0):
            raise DataError(f"delta must be between 0 and 1 (share of termination by "
                            f"disproportionation), not {self.delta!r}", key="delta")
        if self.kinetic not in KINETIC_CHOICES:
            raise DataError(f"kinetic must be one of {', '.join(KINETIC_CHOICES)}, not "
                            f"{self.kinetic!r}", key="kinetic")

    @classmethod
    def names(cls) -> tuple[str, ...]:
        """The option names (the dataclass fields)."""
        return tuple(f.name for f in fields(cls))

    def with_changes(self, **changes: Any) -> TransferOptions:
        """A checked copy with some options changed; unknown names raise TypeError."""
        check_names(changes)
        return replace(self, **changes)

    def summary(self) -> dict[str, Any]:
        """The settings as plain JSON-safe values, unit-named (``TransferResult.options``)."""
        w = self.cld_window
        ei = self.expected_intercept
        return {
            "terms": list(self.terms) if self.terms else "auto",
            "estimators": list(self.estimators),
            "drift": self.drift,
            "CLD window [g/mol]": list(w) if isinstance(w, tuple) else (
                {k: list(v) for k, v in w.items()} if isinstance(w, Mapping) else "auto"),
            "CLD fraction [-]": self.cld_fraction,
            "confidence [-]": self.confidence,
            "impurity confidence [-]": self.impurity_confidence,
            "impurity level applies to": self.impurity_adjust,
            "impurity C_X [-]": self.impurity_C,
            "relative error of 1/DPn [-]": self.rel_error,
            "exclude flagged runs": self.exclude_flagged,
            "expected intercept [-]": list(ei) if isinstance(ei, tuple) else ei,
            "C_M [-]": self.C_M,
            "kinetic term [-]": self.kinetic_term,
            "fixed intercept [-]": self.fixed_intercept,
            "delta [-]": self.delta,
            "kinetic term": self.kinetic,
        }


def check_names(changes: Mapping[str, Any]) -> None:
    """Refuse keyword names that are not options (TypeError, with the closest name)."""
    known = TransferOptions.names()
    for name in changes:
        if name not in known:
            close = difflib.get_close_matches(name, known, n=1)
            hint = f"; did you mean {close[0]!r}?" if close else f"; options: {', '.join(known)}"
            raise TypeError(f"unknown transfer option {name!r}{hint}")


# --------------------------------------------------------------------------- checks


def _finite(x: Any) -> bool:
    return isinstance(x, numbers.Real) and not isinstance(x, bool) and math.isfinite(x)


def _open_unit(name: str, x: Any, what: str) -> None:
    if not (_finite(x) and 0.0 < x < 1.0):
        raise DataError(f"{name} must be between 0 and 1 ({what}), not {x!r}", key=name)


def _not_negative(name: str, x: Any) -> None:
    if x is not None and not (_finite(x) and x >= 0):
        raise DataError(f"{name} must be a finite number >= 0 [-], not {x!r}", key=name)


def _as_tuple(name: str, x: Any) -> tuple[Any, ...]:
    if isinstance(x, str):
        return (x,)
    if not isinstance(x, Sequence):
        raise DataError(f"{name} must be a list of names, not {x!r}", key=name)
    return tuple(x)


def _terms(terms: Any) -> tuple[str, ...] | None:
    if terms is None:
        return None
    t = _as_tuple("terms", terms)
    if any(not isinstance(x, str) for x in t):
        raise DataError(f"terms must be names such as C_A, C_S, C_M, not {terms!r}", key="terms")
    return t or None


def _estimators(estimators: Any) -> tuple[str, ...]:
    e = _as_tuple("estimators", estimators)
    for x in e:
        if x not in ESTIMATORS:
            raise DataError(f"unknown estimator {x!r}; use Mn, Mw/2 or CLD", key="estimators")
    if not e:
        raise DataError("choose at least one estimator (Mn, Mw/2, CLD)", key="estimators")
    return e


def _window(x: Any, where: str) -> Window:
    if (isinstance(x, (str, bytes)) or not isinstance(x, Sequence) or len(x) != 2
            or not all(_finite(v) for v in x) or not 0 < x[0] < x[1]):
        raise DataError(f"cld_window{where} must be (M_low, M_high) in g/mol with "
                        f"0 < M_low < M_high, not {x!r}", key="cld_window")
    return (x[0], x[1])  # as given (the summary shows them unchanged)


def _cld_window(w: Any) -> Window | Mapping[str, Window] | None:
    if w is None:
        return None
    if isinstance(w, Mapping):
        return MappingProxyType({k: _window(v, f" of run {k!r}") for k, v in w.items()})
    return _window(w, "")


def _expected(x: Any) -> float | tuple[float, float] | None:
    if x is None:
        return None
    if isinstance(x, (tuple, list)):
        if len(x) != 2:
            raise DataError(f"expected_intercept must be a value or (value, standard error), "
                            f"not {x!r}", key="expected_intercept")
        for v in x:
            if v is None:
                raise DataError("expected_intercept: give a number and its standard error",
                                key="expected_intercept")
            _not_negative("expected_intercept", v)
        return (x[0], x[1])
    _not_negative("expected_intercept", x)
    return x
