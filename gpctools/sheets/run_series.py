"""The run-series sheet: one row per polymerization run (read by
:func:`gpctools.transfer.read_run_series`).

Fields (header names compared case-insensitively; units in brackets, parentheses or
after a comma; the degree sign does not matter):

============================== ============================================================
``run``                        run id, unique (also ``run id``, ``sample_id``, ``id``)
``file``                       chromatogram, relative to the sheet (also ``chromatogram``);
                               replicate injections of one run separated by ``;``
``Mn [g/mol]``, ``Mw [g/mol]`` measured averages (``[kg/mol]`` accepted)
``Mn scale``                   ``absolute`` or ``relative`` (also ``molar-mass scale``)
``monomer``, ``M0 [g/mol]``    monomer name in the bundled table, or the repeat-unit mass
``[M] [mol/L]``                monomer concentration at the start (``[mmol/L]`` accepted)
``conversion [-]``             monomer conversion, 0 <= x < 1 (``[%]`` accepted)
``T [°C]``                     temperature, -100 < T < 400 °C (``[K]`` accepted)
``series``, ``agent``          group label, agent name
``role``                       ``run`` (default), ``control``, ``skip`` (also
                               ``exclude``, ``excluded``, ``ignore``)
``R_p [mol/L/s]``              measured rate of polymerization (kinetic term R_p/[M]²)
``initiator``                  initiator name (kinetic term from reference data)
``delta [-]``                  δ = k_td/k_t, share of termination by disproportionation
``residual [M] [mol/L]``,      consumption method: monomer left, and the standard
``u(residual [M]) [mol/L]``,   uncertainties
``u(conversion) [-]``
============================== ============================================================

Families (one column per species; ``<name>`` keeps its case and becomes the term
``C_A:<name>``): ``[A] [mol/L]`` / ``[S]`` / ``[I]`` and ``[A:<name>] [mol/L]``
(concentrations); ``ratio [A]/[M] [-]`` and ``ratio [A:<name>]/[M] [-]`` (ratios);
``residual [A] [mol/L]`` and ``u(residual [A]) [mol/L]``. Other columns are kept as
metadata.
"""

from __future__ import annotations

import re

from gpctools import columns as C
from gpctools.errors import DataError, InputFormatError
from gpctools.sheets.cells import Header
from gpctools.sheets.schema import Field, FieldFamily, SheetSchema

__all__ = ["RUN_SERIES", "SHEET_COLUMNS", "ROLE_CHOICES", "term"]

#: Canonical column names written by the template (and the tables).
SHEET_COLUMNS = (
    "run", "file", "series", "agent", "monomer", "M0 [g/mol]", "T [°C]", "[M] [mol/L]",
    "[A] [mol/L]", "ratio [A]/[M] [-]", "[S] [mol/L]", "[I] [mol/L]", "conversion [-]",
    "Mn [g/mol]", "Mw [g/mol]", "Mn scale", "role", "R_p [mol/L/s]", "initiator", "delta [-]",
    "residual [A] [mol/L]",
    "residual [M] [mol/L]", "u(residual [A]) [mol/L]", "u(residual [M]) [mol/L]",
    "u(conversion) [-]",
)

#: Accepted roles of a run -> the role used.
ROLE_CHOICES = {"run": "run", "control": "control", "skip": "skip", "exclude": "skip",
                "excluded": "skip", "ignore": "skip"}

_KG: dict[str, tuple[float, float]] = {"kg/mol": (1000.0, 0.0)}
_MMOL: dict[str, tuple[float, float]] = {"mmol/L": (1e-3, 0.0)}
_CONVERSION_HINT = "write a fraction (0.05 for 5 %) or use a 'conversion [%]' column"


def term(species: str, name: str | None) -> str:
    """The fitted term of a species column: ``C_A``, ``C_A:<name>``, ``C_S``, ``C_I``.

    Examples
    --------
    >>> term("a", "thiol"), term("S", None)
    ('C_A:thiol', 'C_S')
    """
    base = {"a": "C_A", "s": "C_S", "i": "C_I"}[species.lower()]
    return f"{base}:{name.strip()}" if (name and base == "C_A") else base


def _agent_name(header: Header) -> str | None:
    """The agent name inside ``[A:<name>]`` with its original case."""
    m = re.search(r"\[\s*[AaSsIi]\s*:\s*([^\]]+?)\s*\]", header.name)
    return m.group(1) if m else None


def _mol_l(name: str, header: str) -> Field:
    """A concentration that may be zero [mol/L]."""
    return Field(name, header, unit="mol/L", conversions=_MMOL, minimum=0.0, example="0.01")


def _concentration(m: re.Match[str], h: Header) -> tuple[str, Field]:
    t = term(m.group(1), _agent_name(h))
    return t, _mol_l(t, h.text)


def _ratio(m: re.Match[str], h: Header) -> tuple[str, Field]:
    t = term(m.group(1), _agent_name(h))
    return t, Field(t, h.text, unit="-", conversions={"mol/mol": (1.0, 0.0)}, minimum=0.0,
                    example="0.001")


def _residual(m: re.Match[str], h: Header) -> tuple[str, Field]:
    t = term("a", _agent_name(h))
    return t, _mol_l(t, h.text)


#: Schema of the run-series sheet.
RUN_SERIES = SheetSchema(
    kind="run-series sheet",
    row_noun="run",
    fields=(
        Field("run", "run", kind="id", aliases=("run id", "sample_id", "id"), required=True,
              needed=True, unique=True, hint="give every run an id", meaning="run id"),
        Field("file", "file", kind="path", aliases=("chromatogram", "chromatogram file"),
              meaning="chromatogram of the run, relative to the sheet"),
        Field("series", "series", kind="text", aliases=("group",), meaning="group label"),
        Field("agent", "agent", kind="text", aliases=("transfer agent",), meaning="agent name"),
        Field("monomer", "monomer", kind="text", meaning="monomer name in the bundled table"),
        Field("M0", "M0 [g/mol]", unit="g/mol", minimum=0.0, min_open=True, example="104.15",
              meaning="repeat-unit molar mass"),
        Field("T", "T [°C]", aliases=("temperature",), unit="°C",
              conversions={"K": (1.0, -273.15)}, minimum=-100.0, maximum=400.0, min_open=True,
              max_open=True, example="60", meaning="temperature",
              hint="check the unit in the header ([°C] or [K])"),
        Field("M", "[M] [mol/L]", aliases=("[M]0",), unit="mol/L", conversions=_MMOL,
              minimum=0.0, min_open=True, example="8.7",
              meaning="monomer concentration at the start"),
        Field("conversion", "conversion [-]", aliases=("x",), unit="-",
              conversions={"%": (0.01, 0.0)}, minimum=0.0, maximum=1.0, max_open=True,
              example="0.05", hint=_CONVERSION_HINT, meaning="monomer conversion"),
        Field("Mn", C.MN, unit="g/mol", conversions=_KG, minimum=0.0, min_open=True,
              aliases=("Mn LS",), example="150000",
              meaning="measured Mn ('Mn LS [g/mol]' of a batch with light scattering: absolute)"),
        Field("Mw", C.MW, unit="g/mol", conversions=_KG, minimum=0.0, min_open=True,
              aliases=("Mw LS",), example="300000",
              meaning="measured Mw ('Mw LS [g/mol]' of a batch with light scattering: absolute)"),
        Field("scale", "Mn scale", kind="text", aliases=("molar-mass scale", "scale"),
              meaning="absolute or relative"),
        Field("role", "role", kind="choice", choices=ROLE_CHOICES, default="run",
              meaning="run, control or skip"),
        Field("R_p", "R_p [mol/L/s]", aliases=("Rp", "rate of polymerization"),
              unit="mol/L/s", conversions={"mol/L/min": (1.0 / 60.0, 0.0),
                                           "mmol/L/s": (1e-3, 0.0)},
              minimum=0.0, min_open=True, example="6.8e-5",
              meaning="measured rate of polymerization (kinetic term R_p/[M]^2)"),
        Field("initiator", "initiator", kind="text", aliases=("initiator name",),
              meaning="initiator name in the bundled table (kinetic term from reference data)"),
        Field("delta", "delta [-]", aliases=("δ", "disproportionation fraction"), unit="-",
              minimum=0.0, maximum=1.0, example="0.1",
              meaning="fraction of termination by disproportionation, δ = k_td/k_t"),
        _mol_l("res_M", "residual [M] [mol/L]"),
        _mol_l("u_res_M", "u(residual [M]) [mol/L]"),
        Field("u_conversion", "u(conversion) [-]", unit="-", minimum=0.0, example="0.005"),
    ),
    families=(
        FieldFamily("concentration", r"\[(a|s|i)(?::\s*(.+?))?\]0?", _concentration,
                    "'[A] [mol/L]' or '[A:<name>] [mol/L]'"),
        FieldFamily("ratio", r"(?:ratio )?\[(a|s|i)(?::\s*(.+?))?\]0?\s*/\s*\[m\]0?", _ratio,
                    "'ratio [A]/[M] [-]'"),
        FieldFamily("residual", r"residual \[(a)(?::\s*(.+?))?\]", _residual,
                    "'residual [A] [mol/L]'"),
        FieldFamily("u_residual", r"u\(residual \[(a)(?::\s*(.+?))?\]\)", _residual,
                    "'u(residual [A]) [mol/L]'"),
    ),
    one_of=(("file", "Mn", "Mw"),),
    template="run_series.csv",
    column_error=InputFormatError,
    cell_error=DataError,
)
