"""Safety cautions shown with every prediction and diagnosis.

The text follows docs/science.md, section 10. gpctools gives no process-safety advice beyond these
general cautions: site safety rules, local codes and licensed practice always take
precedence.
"""

from __future__ import annotations

__all__ = ["SAFETY_NOTE", "RUNAWAY_NOTE", "safety_lines"]

#: General caution, printed in every diagnosis report.
SAFETY_NOTE = (
    "Safety: free-radical polymerizations are exothermic (styrene about 70 kJ/mol) and "
    "autoaccelerate as viscosity rises; a recipe change that adds initiator or raises the "
    "temperature can run away. Dry benzoyl peroxide is shock- and friction-sensitive and "
    "reacts violently with amine accelerators and reducing agents; azo initiators release "
    "nitrogen (pressure in sealed vessels) and toxic by-products. Monomers are flammable and "
    "several are sensitizers or suspected carcinogens; some classic transfer solvents "
    "(benzene, carbon tetrachloride, chloroform) are toxic: prefer safer substitutes. Scale "
    "up only with calorimetric data, and follow site safety rules, local codes and licensed "
    "practice; this tool does not replace them."
)

#: Extra caution when the likely cause is more initiator or a higher temperature.
RUNAWAY_NOTE = (
    "Runaway risk: the likely cause is more radicals (extra initiator) or a higher "
    "temperature. Do not 'correct' the next batch by changing initiator or temperature "
    "without a heat-balance review; check cooling capacity, dosing and temperature control "
    "first, and follow site safety rules."
)


def safety_lines(*, runaway: bool = False, cautions: tuple[str, ...] = ()) -> tuple[str, ...]:
    """The safety lines for a report: the general note, the runaway note when asked,
    and material-specific cautions from the tables (initiator, agents).
    """
    lines = []
    if runaway:
        lines.append(RUNAWAY_NOTE)
    lines.append(SAFETY_NOTE)
    lines.extend(c for c in cautions if c)
    return tuple(lines)
