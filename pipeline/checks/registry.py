"""Validation stage: registered checks on clean tables, collected lazily into findings.

Each check is a small function ``check(table, ctx) -> list[Finding]`` that never
raises (``ctx`` is a settings.Settings). ``validate`` runs every registered check
on every table and returns all findings at once. Checks come in two tiers: the
structural and physics checks always run; the checks that need clean numbers
(smoothness, column consistency, coverage) run only on tables whose first tier
found no error, so one mistake is not reported ten times over.

A table with any error finding is quarantined by the build; warnings travel with
the species.
"""

from ..core.errors import let_through
from ..core.findings import ERROR, by_subject, concerns, stage_failed
from ..core.records import Table
from ..core.settings import Settings
from .coefsets import check_set_ranges, check_set_steps
from .columns import check_columns
from .coverage import check_gaps, check_range_of_use
from .jumps import check_unlisted_transition
from .labels import check_entropy_floor, check_frozen_vibrations, check_rotor_floor
from .physical import check_condensed_bounds, check_gas_bounds, check_unit_blocks
from .smoothness import check_smoothness
from .structure import (
    check_anchor_reach,
    check_cp_positive,
    check_duplicate_temperatures,
    check_enough_points,
    check_fit_settings,
    check_temperature_positive,
    check_uncertainty_positive,
)

#: first tier: structure and physics, always run
STRUCTURE_CHECKS = (
    check_temperature_positive,
    check_cp_positive,
    check_uncertainty_positive,
    check_duplicate_temperatures,
    check_enough_points,
    check_fit_settings,
    check_anchor_reach,
    check_gas_bounds,
    check_rotor_floor,
    check_entropy_floor,
    check_condensed_bounds,
    check_unit_blocks,
    check_set_ranges,
    check_set_steps,
)
#: second tier: need clean numbers (a jump in Cp stops it: the rest would only echo it)
QUALITY_CHECKS = (
    check_unlisted_transition,
    check_frozen_vibrations,
    check_smoothness,
    check_columns,
    check_gaps,
    check_range_of_use,
)
CHECKS = STRUCTURE_CHECKS + QUALITY_CHECKS
#: checks a published coefficient set skips: its own checks (checks/coefsets.py) say more
#: precisely what a step at a breakpoint, a column mismatch or a missing 298.15 K means
SET_SKIPS = (check_unlisted_transition, check_columns, check_anchor_reach)


def validate_table(table: Table, ctx: Settings = Settings(), prior=()):
    """All findings of one table; ``prior`` are its ingest findings (errors stop tier two).
    An unexpected exception of a check becomes the table's STAGE-FAILED finding."""
    try:
        found = _validate_table(table, ctx, prior)
    except Exception as exc:  # noqa: BLE001 - one bad table never stops the rest
        let_through(exc)
        found = [stage_failed("validate", exc, **table.meta.where)]
    if not table.meta.shared:
        return found
    sid = table.meta.species_id
    if table.meta.published:           # one file holds many sets: say whose finding it is
        found = [f if f.message.startswith(sid) else f.located(message=f"{sid}: {f.message}")
                 for f in found]
    return [f.about_species(sid) for f in found]


def _validate_table(table: Table, ctx: Settings, prior):
    skip = SET_SKIPS if table.meta.published else ()
    out = []
    for check in STRUCTURE_CHECKS:
        if check not in skip:
            out += check(table, ctx)
    if any(f.severity == ERROR for f in list(prior) + out) or len(table.data) == 0:
        return out
    for check in QUALITY_CHECKS:
        if check in skip:
            continue
        found = check(table, ctx)
        out += found
        if check is check_unlisted_transition and found:
            break
    return out


def validate(tables, ctx: Settings = Settings(), prior=()):
    """Run every check on every table -> findings (a tuple, in table then check order)."""
    by_file = by_subject(prior)
    out = []
    for table in tables:
        sid = table.meta.species_id
        out += validate_table(table, ctx, [f for f in by_file.get(table.meta.file, ())
                                           if concerns(f, sid)])
    return tuple(out)
