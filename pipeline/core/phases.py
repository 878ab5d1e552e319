"""Phases of a species and the transitions between them.

A phase is ``g`` (ideal gas), ``l`` (liquid) or ``cr`` (a crystal), a crystal form named by
a suffix: ``cr-alpha``, ``cr-gamma``, ``cr2``. The species id names the phase:
``Fe(cr-alpha)``. Transitions take place at the standard pressure of 1 bar; on heating, H
rises by ΔH_trs and S by ΔH_trs / T_trs at T_trs, so that G is continuous there.
"""

import re

#: what a phase label may be (also in schemas/source.schema.json)
PHASE_PATTERN = r"^(g|l|cr(-?[a-z0-9]{1,12})?)$"
_PHASE = re.compile(PHASE_PATTERN)


def is_phase(text: str) -> bool:
    """True for a phase label this project knows: g, l, cr or cr-<form>."""
    return isinstance(text, str) and bool(_PHASE.match(text))


def is_gas(phase: str) -> bool:
    """True for the ideal-gas phase."""
    return phase == "g"


def is_crystal(phase: str) -> bool:
    """True for a crystal phase (cr, cr-alpha, cr2, ...)."""
    return phase.startswith("cr")

