"""Validation stage: checks on clean tables, collected lazily into findings.

Each check is a small function ``check(table, settings) -> list[Finding]`` that
never raises; ``validate`` runs every registered check on every table and
returns all findings at once. A table with any error finding is quarantined by
the build; warnings travel with the species.
"""

import numpy as np

from . import constants
from .findings import finding
from .records import Table
from .settings import FitSettings


def _rows_where(table: Table, mask: np.ndarray, code: str, what: str, column: str,
                expected: str, values):
    data = table.data
    meta = table.meta
    return [finding(code, what.format(v=v), source=meta.source.source, file=meta.file,
                    line=int(line), column=column, seen=f"{v:.6g}", expected=expected)
            for line, v in zip(data["line"][mask], np.asarray(values)[mask])]


def check_temperature_positive(table: Table, settings: FitSettings):
    t = table.data["T"].to_numpy()
    mask = ~(t > 0) & ~np.isnan(t)
    return _rows_where(table, mask, "T-NOT-POSITIVE", "T = {v:.6g} K is not above 0 K", "T",
                       "T > 0 K", t)


def check_cp_positive(table: Table, settings: FitSettings):
    cp = table.data["Cp"].to_numpy()
    mask = ~(cp > 0) & ~np.isnan(cp)
    return _rows_where(table, mask, "CP-NOT-POSITIVE", "Cp = {v:.6g} J/(mol*K) is not above zero",
                       "Cp", "Cp > 0", cp)


def check_uncertainty_positive(table: Table, settings: FitSettings):
    u = table.data["u_Cp"].to_numpy()
    mask = ~(u > 0) & ~np.isnan(u)
    return _rows_where(table, mask, "UCP-NOT-POSITIVE", "u(Cp) = {v:.6g} J/(mol*K) is not above "
                       "zero", "u(Cp)", "u(Cp) > 0", u)


def check_duplicate_temperatures(table: Table, settings: FitSettings):
    data = table.data
    t = data["T"].to_numpy()
    out = []
    order = np.argsort(t, kind="stable")
    ts, lines = t[order], data["line"].to_numpy()[order]
    # same temperature to 1e-9 K after conversion counts as repeated
    same = np.abs(np.diff(ts)) <= 1e-9 * np.maximum(1.0, np.abs(ts[1:]))
    for i in np.nonzero(same)[0]:
        out.append(finding("T-DUPLICATE", f"T = {ts[i + 1]:.6g} K repeats line {int(lines[i])}",
                           source=table.meta.source.source, file=table.meta.file,
                           line=int(lines[i + 1]), column="T", seen=f"{ts[i + 1]:.6g}",
                           expected="each temperature once"))
    return out


def check_enough_points(table: Table, settings: FitSettings):
    n = int(np.isfinite(table.data["T"]).sum())
    if n >= settings.min_points:
        return []
    return [finding("TOO-FEW-POINTS", f"{n} data points; a two-range fit needs at least "
                    f"{settings.min_points}", source=table.meta.source.source,
                    file=table.meta.file, seen=str(n), expected=f">= {settings.min_points}")]


def check_anchor_reach(table: Table, settings: FitSettings):
    t = table.data["T"].to_numpy()
    t = t[np.isfinite(t) & (t > 0)]
    if not len(t):
        return []
    gap = float(t.min()) - constants.REFERENCE_TEMPERATURE
    where = dict(source=table.meta.source.source, file=table.meta.file, column="T",
                 seen=f"{t.min():.6g} K")
    if gap > settings.max_anchor_extension:
        return [finding("ANCHOR-OUT-OF-REACH", f"data start at {t.min():.6g} K, "
                        f"{gap:.6g} K above 298.15 K", expected=f"data from <= "
                        f"{constants.REFERENCE_TEMPERATURE + settings.max_anchor_extension:g} K",
                        **where)]
    if gap > 0:
        return [finding("RANGE-EXTENDED", f"data start at {t.min():.6g} K; the lowest range is "
                        "extrapolated down to 298.15 K", expected="data from <= 298.15 K",
                        **where)]
    return []


#: the registered checks, run in this order
CHECKS = (
    check_temperature_positive,
    check_cp_positive,
    check_uncertainty_positive,
    check_duplicate_temperatures,
    check_enough_points,
    check_anchor_reach,
)


def validate(tables, settings: FitSettings = FitSettings()):
    """Run every check on every table -> findings (a tuple, in table then check order)."""
    out = []
    for table in tables:
        for check in CHECKS:
            out += check(table, settings)
    return tuple(out)
