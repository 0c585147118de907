"""Declarative sheet schemas and the one reader that checks a table against them.

A sheet kind (standards table, batch sheet, run series, spec limits, ...) is a
:class:`SheetSchema`: its :class:`Field` s (name, aliases, unit and accepted unit
conversions, kind, bounds, required) and, for headers that follow a pattern, its
:class:`FieldFamily` s (``[A:<name>] [mol/L]``, ``<quantity> min [<unit>]``). The reader
:func:`read_table` takes the raw table of :func:`gpctools.io.read_sheet` (which stays the
file-dialect reader) and returns a :class:`CheckedSheet` of :class:`SheetRow` s whose
values are parsed (:mod:`gpctools.sheets.cells`), converted to the field's unit and
checked.

The same fault gives the same message in every sheet:

=============================  =============================================================
fault                          message (after ``<file>, [sheet ..,] row N, column 'H':``)
=============================  =============================================================
required column missing        ``the <sheet> needs a 'H' column (also accepted: ...); found
                               columns: ...`` (no row, no column)
unit not accepted              ``unit [u] is not accepted for 'H'; write [g/mol] or [kg/mol]
                               (or rename the column if it holds something else)``
two columns, one field         ``columns 'a' and 'b' both give 'H'; keep one``
empty cell where one is        ``the cell is empty; <hint>``
needed
not a number                   ``'x' is not a number; write a plain number such as 150000
                               (unit [g/mol] in the header)`` (``positive number`` for fields
                               that must be positive)
ambiguous number               ``'90,000' is ambiguous: ...; write 90000 or 90.0``
out of bounds                  ``-1 must be positive``, ``-1 must not be negative``,
                               ``0.5 is below 1, the smallest value accepted``, ``150 % must
                               be below 100 %`` (bounds shown in the header's unit)
not an accepted choice         ``unknown <field> 'x'; write one of: a, b, c``
repeated unique value          ``'x' is used again (first in row N); 'H' must be unique, one
                               row per <row noun>``
no rows                        ``the <sheet> has a header but no <row noun> rows; add one row
                               per <row noun>``
=============================  =============================================================

A field's ``hint`` (or, for needed fields, the sheet's ``row_hint``) is appended after a
``;``. Columns that no field takes are kept as metadata (``extras="keep"``) or refused
(``extras="refuse"``). Each sheet raises its own error class (``column_error`` for the
table's shape, ``cell_error`` for a cell), so that callers who catch
:class:`~gpctools.errors.MethodError` for the standards table or
:class:`~gpctools.errors.DataError` for a run series keep doing so; the messages are the
same.

A recipe sheet and a QC-settings sheet fit the same mould: key/value sheets are a schema
whose fields are the keys (``kind="bool"`` and ``kind="choice"`` cover switches and
named options).
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from gpctools.errors import DataError, GpcError, InputFormatError
from gpctools.sheets import cells

__all__ = [
    "KINDS",
    "HeaderError",
    "Field",
    "FieldFamily",
    "SheetSchema",
    "Column",
    "ColumnMap",
    "SheetRow",
    "CheckedSheet",
    "match_columns",
    "read_table",
    "read_file",
]

#: Kinds of field: a number (converted to the field's unit), free text, an identifier
#: (text that names the row), a file path, one of a set of choices, yes/no.
KINDS = ("number", "text", "id", "path", "choice", "bool")


class HeaderError(ValueError):
    """Raised by :attr:`FieldFamily.make` for a malformed header; the reader adds the file,
    sheet, header row and column and raises the sheet's ``column_error``.
    """


@dataclass(frozen=True)
class Field:
    """One column of a sheet kind.

    Attributes
    ----------
    name : str
        The key the code uses (``"Mp"``, ``"sample_id"``).
    header : str
        The header as the templates write it, unit in brackets (``"Mp [g/mol]"``).
    kind : str
        One of :data:`KINDS`.
    aliases : tuple of str
        Other names of the column, without unit, compared case-insensitively with ``_``
        as a space (:func:`gpctools.sheets.cells.normalise_name`).
    unit : str or None
        The unit values are returned in (numbers); a header without a unit is taken to be
        in it.
    conversions : mapping
        Other accepted header units -> ``(factor, offset)`` with
        ``value[unit] = factor·value[header unit] + offset`` (``{"kg/mol": (1000, 0)}``).
    minimum, maximum : float or None
        Bounds in ``unit``; ``min_open``/``max_open`` make them exclusive.
    required : bool
        The column must be present.
    needed : bool
        Every row must hold a value in this column.
    unique : bool
        No two rows may hold the same value (compared case-insensitively).
    choices : mapping
        For ``kind="choice"``: accepted spelling (as :func:`~gpctools.sheets.cells.choice_key`
        gives it) -> the value returned.
    default : Any
        Value of a blank cell (choices and bools).
    hint : str
        What to write, appended to this field's cell messages.
    example : str
        A typical value, shown in "not a number" messages.
    meaning : str
        One line for documentation.
    """

    name: str
    header: str
    kind: str = "number"
    aliases: tuple[str, ...] = ()
    unit: str | None = None
    conversions: Mapping[str, tuple[float, float]] = field(default_factory=dict)
    minimum: float | None = None
    maximum: float | None = None
    min_open: bool = False
    max_open: bool = False
    required: bool = False
    needed: bool = False
    unique: bool = False
    choices: Mapping[str, str] = field(default_factory=dict)
    default: Any = None
    hint: str = ""
    example: str = ""
    meaning: str = ""

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise ValueError(f"field {self.name!r}: kind must be one of {KINDS}, got {self.kind!r}")
        if self.kind == "choice" and not self.choices:
            raise ValueError(f"field {self.name!r}: a choice field needs choices")

    @property
    def names(self) -> tuple[str, ...]:
        """The header names that mean this field, in compared form."""
        own = cells.split_header(self.header).name
        return tuple(dict.fromkeys(cells.normalise_name(n) for n in (own, *self.aliases)))

    @property
    def units(self) -> tuple[str, ...]:
        """Accepted header units: the field's own first, then the conversions."""
        out = [self.unit] if self.unit else []
        return tuple(dict.fromkeys([*out, *self.conversions]))

    @property
    def positive(self) -> bool:
        """True when values must be above zero."""
        return self.minimum == 0 and self.min_open and self.maximum is None

    def convert(self, header_unit: str | None) -> tuple[float, float] | None:
        """``(factor, offset)`` from ``header_unit`` to :attr:`unit`; None when not accepted."""
        if header_unit is None or self.unit is None:
            return (1.0, 0.0)
        u = cells.canonical_unit(header_unit) or header_unit.strip()
        if u == self.unit:
            return (1.0, 0.0)
        for k, conv in self.conversions.items():
            if (cells.canonical_unit(k) or k) == u:
                return conv
        return None


@dataclass(frozen=True)
class FieldFamily:
    """Columns whose headers follow a pattern, one field per header.

    Attributes
    ----------
    name : str
        Key of the family (``"concentration"``).
    pattern : str
        Regular expression matched (whole, case-insensitive) against the header name in
        compared form (:attr:`gpctools.sheets.cells.Header.key`).
    make : callable
        ``make(match, header) -> (key, Field)``: the member's key (``"C_A:thiol"``) and its
        field (unit, bounds, ...); ``None`` when the header is not a member after all
        (it is then an extra column). It raises :class:`HeaderError` for a malformed
        header.
    describe : str
        How such headers are written, for messages (``"'[A] [mol/L]'"``).
    """

    name: str
    pattern: str
    make: Callable[[re.Match[str], cells.Header], tuple[str, Field] | None]
    describe: str = ""

    def match(self, header: cells.Header) -> re.Match[str] | None:
        """The pattern's match on a header's name, or None."""
        return re.fullmatch(self.pattern, header.key, flags=re.IGNORECASE)


@dataclass(frozen=True)
class SheetSchema:
    """A sheet kind: its fields, families and messages.

    Attributes
    ----------
    kind : str
        The sheet's name in messages (``"batch sheet"``).
    row_noun : str
        What one row is (``"injection"``).
    fields : tuple of Field
    families : tuple of FieldFamily
    one_of : tuple of tuple of str
        Groups of field names of which at least one column must be present.
    extras : str
        ``"keep"``: other columns become row metadata; ``"refuse"``: they are an error.
    template : str or None
        The starter file, named in column messages (``"batch.csv"``: written by
        ``gpctools template batch.csv``).
    column_error, cell_error : type of GpcError
        Error classes for faults of the table's shape and of single cells.
    row_hint : str
        Appended to messages about empty needed cells (``"give every standard its Mp"``).
    check_extra : callable or None
        ``check_extra(header) -> message or None``: refuses some extra columns (the spec
        sheet refuses unit-bearing headers that are not limits).
    """

    kind: str
    row_noun: str
    fields: tuple[Field, ...]
    families: tuple[FieldFamily, ...] = ()
    one_of: tuple[tuple[str, ...], ...] = ()
    extras: str = "keep"
    template: str | None = None
    column_error: type[GpcError] = InputFormatError
    cell_error: type[GpcError] = DataError
    row_hint: str = ""
    check_extra: Callable[[cells.Header], str | None] | None = None

    def __post_init__(self) -> None:
        if self.extras not in ("keep", "refuse"):
            raise ValueError("extras must be 'keep' or 'refuse'")
        seen: dict[str, str] = {}
        for f in self.fields:
            for n in f.names:
                if n in seen:
                    raise ValueError(f"{self.kind}: name {n!r} means both {seen[n]!r} and {f.name!r}")
                seen[n] = f.name

    def field(self, name: str) -> Field:
        """The field called ``name``."""
        for f in self.fields:
            if f.name == name:
                return f
        raise KeyError(name)


# ------------------------------------------------------------------------------ messages


def _accepted_units(f: Field) -> str:
    return " or ".join(f"[{u}]" for u in f.units)


def _unit_note(f: Field, unit: str | None) -> str:
    u = unit or f.unit
    return f" (unit [{u}] in the header)" if u and u != "-" else ""


def _shown(value: float, unit: str | None) -> str:
    t = cells._g(value)
    return f"{t} {unit}" if unit and unit not in ("-",) else t


def message_missing_column(schema: SheetSchema, f: Field, found: Sequence[str]) -> str:
    """``the <sheet> needs a 'H' column (also accepted: ...); found columns: ...``."""
    names = _accepted_names(f)
    also = f" (also accepted: {', '.join(repr(n) for n in names)})" if names else ""
    listed = ", ".join(repr(c) for c in found) if found else "none"
    where = f"; see {_starter(schema)}" if schema.template else ""
    return f"the {schema.kind} needs a {f.header!r} column{also}; found columns: {listed}{where}"


def _starter(schema: SheetSchema) -> str:
    """How a user gets the starter file, installed or not: ``gpctools template NAME``."""
    return f"the starter file (gpctools template {schema.template})"


def _accepted_names(f: Field) -> list[str]:
    """The other names of a field as declared (not in compared form), without repeats."""
    own = cells.normalise_name(cells.split_header(f.header).name)
    out: dict[str, str] = {}
    for a in f.aliases:
        key = cells.normalise_name(a)
        if key != own:
            out.setdefault(key, a)
    return list(out.values())


def message_missing_one_of(schema: SheetSchema, fields: Sequence[Field], found: Sequence[str]) -> str:
    """``the <sheet> needs one of the columns 'a' (also accepted: ...), 'b' (...); found columns: ...``."""
    def accepted(f: Field) -> str:
        names = _accepted_names(f)
        return f"{f.header!r}" + (f" (also accepted: {', '.join(repr(n) for n in names)})" if names else "")

    heads = ", ".join(accepted(f) for f in fields)
    listed = ", ".join(repr(c) for c in found) if found else "none"
    where = f"; see {_starter(schema)}" if schema.template else ""
    return f"the {schema.kind} needs one of the columns {heads}; found columns: {listed}{where}"


def message_bad_unit(f: Field, unit: str) -> str:
    """``unit [u] is not accepted for 'H'; write [g/mol] or [kg/mol] (or rename ...)``."""
    return (f"unit [{unit}] is not accepted for {f.header!r}; write {_accepted_units(f)} (or "
            "rename the column if it holds something else)")


def message_two_columns(f: Field, first: str, second: str) -> str:
    """``columns 'a' and 'b' both give 'H'; keep one``."""
    return f"columns {first!r} and {second!r} both give {f.header!r}; keep one"


def message_no_rows(schema: SheetSchema) -> str:
    """``the <sheet> has a header but no <row noun> rows; add one row per <row noun>``."""
    where = f" (see {_starter(schema)})" if schema.template else ""
    return (f"the {schema.kind} has a header but no {schema.row_noun} rows; add one row per "
            f"{schema.row_noun}{where}")


def _hint(schema: SheetSchema, f: Field) -> str:
    h = f.hint or (schema.row_hint if f.needed else "")
    return f"; {h}" if h else ""


def message_empty(schema: SheetSchema, f: Field) -> str:
    """``the cell is empty; <hint>``."""
    return "the cell is empty" + (_hint(schema, f) or f"; fill in {f.header!r}")


def message_cell(schema: SheetSchema, f: Field, error: cells.CellError, unit: str | None) -> str:
    """The message for a cell the parser refused (not a number, ambiguous, ...)."""
    if error.problem.endswith("is not a number"):
        noun = "positive number" if f.positive else "number"
        example = f.example or ("96000" if (f.unit or "").endswith("g/mol") else "0.5")
        text = (f"{error.found!r} is not a {noun}; write a plain number such as {example}"
                f"{_unit_note(f, unit)}")
    else:
        text = f"{error.problem}; {error.advice}" if error.advice else error.problem
    return text + _hint(schema, f)


def message_bounds(schema: SheetSchema, f: Field, value: float, unit: str | None,
                   conv: tuple[float, float]) -> str | None:
    """The message for a number outside the field's bounds (None when inside).

    ``value`` is in the header's unit ``unit``; bounds are shown in that unit too.
    """
    factor, offset = conv
    v = factor * value + offset
    lo, hi = f.minimum, f.maximum
    low = lo is not None and (v < lo or (f.min_open and v == lo))
    high = hi is not None and (v > hi or (f.max_open and v == hi))
    if not (low or high):
        return None
    u = unit or f.unit

    def back(b: float) -> str:
        return cells._g((b - offset) / factor)

    if lo == 0 and hi is None and offset == 0:
        rel = "must be positive" if f.min_open else "must not be negative"
        return f"{_shown(value, u)} {rel}" + _hint(schema, f)
    if low:
        assert lo is not None
        rel = (f"must be above {_shown_bound(back(lo), u)}" if f.min_open
               else f"is below {_shown_bound(back(lo), u)}, the smallest value accepted")
    else:
        assert hi is not None
        rel = (f"must be below {_shown_bound(back(hi), u)}" if f.max_open
               else f"is above {_shown_bound(back(hi), u)}, the largest value accepted")
    return f"{_shown(value, u)} {rel}" + _hint(schema, f)


def _shown_bound(text: str, unit: str | None) -> str:
    return f"{text} {unit}" if unit and unit != "-" else text


def message_choice(schema: SheetSchema, f: Field, found: str) -> str:
    """``unknown <field> 'x'; write one of: a, b, c``."""
    values = ", ".join(dict.fromkeys(f.choices.values()))
    label = cells.split_header(f.header).name
    return f"unknown {label} {found!r}; write one of: {values}" + _hint(schema, f)


def message_repeated(schema: SheetSchema, f: Field, value: str, first_row: int) -> str:
    """``'x' is used again (first in row N); 'H' must be unique, one row per <row noun>``."""
    return (f"{value!r} is used again (first in row {first_row}); {f.header!r} must be unique, "
            f"one row per {schema.row_noun}")


# ------------------------------------------------------------------------------- columns


@dataclass(frozen=True)
class Column:
    """A header matched to a field.

    Attributes
    ----------
    field : Field
    header : str
        The header as written in the sheet.
    unit : str or None
        The header's unit (canonical spelling), None when it has none.
    factor, offset : float
        Conversion to the field's unit (``value = factor·cell + offset``).
    key : str or None
        The member key for columns of a :class:`FieldFamily`.
    """

    field: Field
    header: str
    unit: str | None
    factor: float = 1.0
    offset: float = 0.0
    key: str | None = None


@dataclass(frozen=True)
class ColumnMap:
    """Which header gives which field.

    Attributes
    ----------
    fields : dict
        Field name -> :class:`Column`, for the fields present.
    families : dict
        Family name -> {member key -> :class:`Column`}, in sheet order.
    extras : tuple of str
        Headers no field takes (metadata).
    headers : tuple of str
        Every header, in sheet order.
    """

    fields: dict[str, Column]
    families: dict[str, dict[str, Column]]
    extras: tuple[str, ...]
    headers: tuple[str, ...]

    def header(self, name: str) -> str | None:
        """The header that gives field ``name`` (None when absent)."""
        col = self.fields.get(name)
        return col.header if col is not None else None

    def __contains__(self, name: object) -> bool:
        return name in self.fields


@dataclass(frozen=True)
class _Where:
    path: str | None
    sheet: str | None
    header_row: int | None


def match_columns(headers: Iterable[Any], schema: SheetSchema, *, path: Any = None,
                  sheet: str | None = None, header_row: int | None = None) -> ColumnMap:
    """Match a table's headers to the schema's fields and families.

    Parameters
    ----------
    headers : iterable
        The table's headers, in order.
    schema : SheetSchema
    path, sheet, header_row : optional
        Named in error messages.

    Returns
    -------
    ColumnMap

    Raises
    ------
    GpcError
        ``schema.column_error``: a required column missing (the message lists the columns
        found and the names accepted), a unit not accepted, two columns for one field,
        an extra column where the sheet takes none.
    """
    where = _Where(None if path is None else str(path), sheet, header_row)
    heads = [_header_text(h) for h in headers]
    by_name = {n: f for f in schema.fields for n in f.names}
    found: dict[str, Column] = {}
    families: dict[str, dict[str, Column]] = {fam.name: {} for fam in schema.families}
    extras: list[str] = []
    for h in heads:
        hd = cells.split_header(h)
        f = by_name.get(hd.key)
        if f is None and hd.unit is not None and hd.style != "brackets":
            # "Mp (dw/dlogM)"-like names whose parentheses are part of the name
            f = by_name.get(cells.normalise_name(hd.text))
            if f is not None:
                hd = cells.Header(hd.text, hd.text, None, None)
        if f is not None:
            col = _column(schema, f, hd, h, where)
            if f.name in found:
                raise schema.column_error(message_two_columns(f, found[f.name].header, h),
                                          path=where.path, sheet=sheet, row=header_row, column=h)
            found[f.name] = col
            continue
        for fam in schema.families:
            m = fam.match(hd)
            if m is None:
                continue
            try:
                made = fam.make(m, hd)
            except HeaderError as exc:
                raise schema.column_error(str(exc), path=where.path, sheet=sheet, row=header_row,
                                          column=h) from None
            if made is None:
                continue
            key, member = made
            col = _column(schema, member, hd, h, where, key=key)
            members = families[fam.name]
            if key in members:
                raise schema.column_error(message_two_columns(member, members[key].header, h),
                                          path=where.path, sheet=sheet, row=header_row, column=h)
            members[key] = col
            break
        else:
            if schema.extras == "refuse":
                names = ", ".join(repr(f.header) for f in schema.fields)
                raise schema.column_error(
                    f"the {schema.kind} has no column {h!r}; its columns are {names}",
                    path=where.path, sheet=sheet, row=header_row, column=h)
            if schema.check_extra is not None:
                bad = schema.check_extra(hd)
                if bad is not None:
                    raise schema.column_error(bad, path=where.path, sheet=sheet, row=header_row,
                                              column=h)
            extras.append(h)
    for f in schema.fields:
        if f.required and f.name not in found:
            raise schema.column_error(message_missing_column(schema, f, heads),
                                      path=where.path, sheet=sheet)
    for group in schema.one_of:
        if not any(n in found for n in group):
            raise schema.column_error(
                message_missing_one_of(schema, [schema.field(n) for n in group], heads),
                path=where.path, sheet=sheet)
    return ColumnMap(found, families, tuple(extras), tuple(heads))


def _header_text(h: Any) -> str:
    return h.strip() if isinstance(h, str) else cells.text(h)


def _column(schema: SheetSchema, f: Field, hd: cells.Header, header: str, where: _Where,
            key: str | None = None) -> Column:
    """The column of ``header`` (as written) for field ``f``, its unit checked."""
    if f.kind != "number" or hd.unit is None:
        return Column(f, header, None, key=key)
    conv = f.convert(hd.unit)
    if conv is None:
        raise schema.column_error(message_bad_unit(f, hd.unit), path=where.path, sheet=where.sheet,
                                  row=where.header_row, column=header)
    unit = cells.canonical_unit(hd.unit) or hd.unit
    return Column(f, header, unit, conv[0], conv[1], key)


# ---------------------------------------------------------------------------------- rows


@dataclass(frozen=True)
class SheetRow:
    """One checked row.

    Attributes
    ----------
    row : int
        The row as the user counts it (1-based line or spreadsheet row).
    values : dict
        Field name -> value: numbers as ``float`` in the field's unit or ``None`` when
        blank; text, ids and paths as ``str`` (``""`` when blank); choices and bools
        as given by the field (its ``default`` when blank). Fields whose column is absent
        are missing (use :meth:`get`).
    family_values : dict
        Family name -> {member key -> value}.
    metadata : dict
        Extra columns -> cell value (``None`` when blank), when the sheet keeps them.
    problems : tuple of GpcError
        Cell faults, when the sheet was read with ``collect=True`` (else they raise).
    path, sheet : str or None
        Where the row came from.
    error_class : type of GpcError
        The sheet's cell error class (used by :meth:`error`).
    """

    row: int
    values: dict[str, Any]
    family_values: dict[str, dict[str, Any]]
    metadata: dict[str, Any]
    problems: tuple[GpcError, ...] = ()
    path: str | None = None
    sheet: str | None = None
    error_class: type[GpcError] = DataError

    def get(self, name: str, default: Any = None) -> Any:
        """The value of field ``name`` (``default`` when its column is absent)."""
        return self.values.get(name, default)

    def __getitem__(self, name: str) -> Any:
        return self.values[name]

    def error(self, message: str, column: str | None = None) -> GpcError:
        """An error of the sheet's cell class located at this row (and ``column``)."""
        return self.error_class(message, path=self.path, sheet=self.sheet, row=self.row,
                                column=column)

    @property
    def problem(self) -> str | None:
        """The first problem as one line (``"<file>, row N, column 'H': ..."``), or None."""
        return str(self.problems[0]) if self.problems else None


@dataclass(frozen=True)
class CheckedSheet:
    """A table checked against a schema.

    Attributes
    ----------
    schema : SheetSchema
    columns : ColumnMap
    rows : tuple of SheetRow
    path, sheet : str or None
    header_row : int or None
    """

    schema: SheetSchema
    columns: ColumnMap
    rows: tuple[SheetRow, ...]
    path: str | None = None
    sheet: str | None = None
    header_row: int | None = None

    def error(self, message: str, column: str | None = None, *, row: int | None = None) -> GpcError:
        """An error of the sheet's column class (about the table's shape)."""
        return self.schema.column_error(message, path=self.path, sheet=self.sheet,
                                        row=row if row is not None else self.header_row,
                                        column=column)


def _value(schema: SheetSchema, col: Column, raw: Any, decimal: str | None,
           fail: Callable[[str, str], None]) -> Any:
    """Parse one cell of a column; ``fail(message, header)`` reports a fault."""
    f = col.field
    if f.kind == "number":
        try:
            v = cells.parse_number(raw, decimal=decimal)
        except cells.CellError as exc:
            fail(message_cell(schema, f, exc, col.unit), col.header)
            return None
        if v is None:
            if f.needed:
                fail(message_empty(schema, f), col.header)
            return None
        bad = message_bounds(schema, f, v, col.unit, (col.factor, col.offset))
        if bad is not None:
            fail(bad, col.header)
            return None
        return col.factor * v + col.offset
    if f.kind == "bool":
        try:
            b = cells.parse_bool(raw)
        except cells.CellError as exc:
            fail(f"{exc.problem}; {exc.advice}" + _hint(schema, f), col.header)
            return f.default
        if b is None and f.needed:
            fail(message_empty(schema, f), col.header)
        return f.default if b is None else b
    t = cells.text(raw)
    if not t:
        if f.needed:
            fail(message_empty(schema, f), col.header)
        return f.default if f.kind == "choice" else ""
    if f.kind == "choice":
        choice = f.choices.get(cells.choice_key(t))
        if choice is None:
            fail(message_choice(schema, f, t), col.header)
            return f.default
        return choice
    return t


def read_table(frame: Any, schema: SheetSchema, *, path: Any = None, sheet: str | None = None,
               source_rows: Sequence[int] | None = None, collect: bool = False,
               columns: ColumnMap | None = None) -> CheckedSheet:
    """Check a raw table against a schema.

    Parameters
    ----------
    frame : pandas.DataFrame or sequence of dict
        The table, as :func:`gpctools.io.read_sheet` returns it (its ``attrs`` give the
        file, sheet and row numbers) or built by hand (one dict per row).
    schema : SheetSchema
    path, sheet : optional
        Named in messages (default: the frame's ``attrs``).
    source_rows : sequence of int, optional
        1-based row of each table row (default: ``attrs["source_rows"]``, else 2, 3, ...
        under one header row).
    collect : bool
        Keep cell faults in :attr:`SheetRow.problems` instead of raising the first one
        (the batch sheet turns them into error rows).
    columns : ColumnMap, optional
        A column match already made (by :func:`match_columns`), e.g. after checks of the
        headers that only one sheet kind has.

    Returns
    -------
    CheckedSheet

    Raises
    ------
    GpcError
        ``schema.column_error`` for the table's shape (see :func:`match_columns`, and a
        table without rows); ``schema.cell_error`` for the first bad cell (unless
        ``collect``).
    """
    import pandas as pd

    df = frame if isinstance(frame, pd.DataFrame) else pd.DataFrame(list(frame))
    attrs = df.attrs
    if path is None:
        path = attrs.get("path")
    if sheet is None:
        sheet = attrs.get("sheet")
    header_row = attrs.get("header_row", 1)
    spath = None if path is None else str(os.fspath(path))
    if columns is None:
        columns = match_columns(df.columns, schema, path=spath, sheet=sheet,
                                header_row=header_row)
    if source_rows is None:
        source_rows = list(attrs.get("source_rows") or range(2, len(df) + 2))
    if len(df) == 0:
        raise schema.column_error(message_no_rows(schema), path=spath, sheet=sheet)
    records = df.to_dict("records")
    by_header = {_header_text(c): c for c in df.columns}
    all_cols = [*columns.fields.values(),
                *(c for members in columns.families.values() for c in members.values())]
    decimals = {c.header: cells.column_decimal(df[by_header[c.header]].tolist())
                for c in all_cols if c.field.kind == "number"}
    firsts: dict[str, dict[str, int]] = {}
    rows: list[SheetRow] = []
    for i, rec in enumerate(records):
        rowno = int(source_rows[i]) if i < len(source_rows) else i + 2
        problems: list[GpcError] = []

        def fail(message: str, header: str, rowno: int = rowno,
                 problems: list[GpcError] = problems) -> None:
            err = schema.cell_error(message, path=spath, sheet=sheet, row=rowno, column=header)
            if not collect:
                raise err
            problems.append(err)

        values: dict[str, Any] = {}
        for name, col in columns.fields.items():
            v = _value(schema, col, rec[by_header[col.header]], decimals.get(col.header), fail)
            if col.field.unique and isinstance(v, str) and v:
                seen = firsts.setdefault(name, {})
                k = v.casefold()
                if k in seen:
                    fail(message_repeated(schema, col.field, v, seen[k]), col.header)
                else:
                    seen[k] = rowno
            values[name] = v
        fam_values: dict[str, dict[str, Any]] = {}
        for fam, members in columns.families.items():
            fam_values[fam] = {
                key: _value(schema, col, rec[by_header[col.header]], decimals.get(col.header), fail)
                for key, col in members.items()
            }
        meta: dict[str, Any] = {}
        for h in columns.extras:
            raw = rec[by_header[h]]
            meta[h] = None if cells.is_blank(raw) else cells.plain(raw)
        rows.append(SheetRow(rowno, values, fam_values, meta, tuple(problems), spath, sheet,
                             schema.cell_error))
    return CheckedSheet(schema, columns, tuple(rows), spath, sheet, header_row)


def read_file(path: str | os.PathLike[str], schema: SheetSchema, *, sheet: str | int | None = None,
              collect: bool = False) -> CheckedSheet:
    """Read a sheet file (CSV or XLSX, :func:`gpctools.io.read_sheet`) and check it.

    Parameters
    ----------
    path : str or os.PathLike
    schema : SheetSchema
    sheet : str or int, optional
        Workbook sheet (name or 0-based index).
    collect : bool
        See :func:`read_table`.

    Returns
    -------
    CheckedSheet
    """
    from gpctools.io import read_sheet

    df = read_sheet(path, sheet=sheet)
    return read_table(df, schema, path=path, sheet=df.attrs.get("sheet"), collect=collect)
