"""Structural checks of one clean table: temperatures and heat capacities positive,
uncertainties positive, no repeated temperature, enough points for the ranges asked for,
fit settings that fit the data, and data that reach 298.15 K (or close enough to anchor).
Each is ``check(table, ctx) -> list[Finding]`` and never raises."""

import numpy as np

from ..core import constants
from ..core.findings import finding
from ..core.limits import TEMPERATURE_SETTING_RANGE
from ..core.records import Table
from ..core.settings import Settings, for_table


def _rows_where(table: Table, mask: np.ndarray, code: str, what: str, column: str,
                expected: str, values):
    data = table.data
    meta = table.meta
    return [finding(code, what.format(v=v), source=meta.source.id, file=meta.file,
                    line=int(line), column=column, seen=f"{v:.6g}", expected=expected)
            for line, v in zip(data["line"][mask], np.asarray(values)[mask])]


def check_temperature_positive(table: Table, ctx: Settings):
    """T-NOT-POSITIVE findings: rows whose T [K] is not above zero."""
    t = table.data["T"]
    mask = ~(t > 0) & ~np.isnan(t)
    return _rows_where(table, mask, "T-NOT-POSITIVE", "T = {v:.6g} K is not above 0 K", "T",
                       "T > 0 K", t)


def check_cp_positive(table: Table, ctx: Settings):
    """CP-NOT-POSITIVE findings: rows whose Cp [J/(mol K)] is not above zero."""
    cp = table.data["Cp"]
    mask = ~(cp > 0) & ~np.isnan(cp)
    return _rows_where(table, mask, "CP-NOT-POSITIVE", "Cp = {v:.6g} J/(mol*K) is not above zero",
                       "Cp", "Cp > 0", cp)


def check_uncertainty_positive(table: Table, ctx: Settings):
    """UCP-NOT-POSITIVE findings: rows whose u(Cp) [J/(mol K)] is not above zero."""
    u = table.data["u_Cp"]
    mask = ~(u > 0) & ~np.isnan(u)
    return _rows_where(table, mask, "UCP-NOT-POSITIVE", "u(Cp) = {v:.6g} J/(mol*K) is not above "
                       "zero", "u(Cp)", "u(Cp) > 0", u)


def check_duplicate_temperatures(table: Table, ctx: Settings):
    """T-DUPLICATE findings: temperatures [K] that appear more than once."""
    data = table.data
    t = data["T"]
    out = []
    order = t.argsort(kind="stable")
    ts, lines = t[order], data["line"][order]
    # the same temperature to 1e-9 K after conversion counts as repeated
    same = np.abs(ts[1:] - ts[:-1]) <= 1e-9 * np.maximum(1.0, np.abs(ts[1:]))
    for i in np.nonzero(same)[0]:
        out.append(finding("T-DUPLICATE", f"T = {ts[i + 1]:.6g} K repeats line {int(lines[i])}",
                           **table.meta.where,
                           line=int(lines[i + 1]), column="T", seen=f"{ts[i + 1]:.6g}",
                           expected="each temperature once"))
    return out


def check_enough_points(table: Table, ctx: Settings):
    """TOO-FEW-POINTS findings: fewer data points than the table's ranges need (none when no
    row could be read at all: the reading findings say why)."""
    n = int(np.isfinite(table.data["T"]).sum())
    fit = for_table(ctx.fit, table.meta.fit_overrides)
    need = fit.min_points
    if n >= need or not len(table.data):
        return []
    return [finding("TOO-FEW-POINTS", f"{n} data points; a {fit.ranges}-range fit needs at "
                    f"least {need}", **table.meta.where,
                    seen=str(n), expected=f">= {need}")]


def check_fit_settings(table: Table, ctx: Settings):
    """The table's own fit settings (source.json "fit") fit its data: fixed breakpoints
    strictly increasing, inside the data, every range at least min_range_ratio wide; a range
    of use inside TEMPERATURE_SETTING_RANGE with its ends in order."""
    meta = table.meta
    over = dict(meta.fit_overrides)
    if not over:
        return []
    fit = for_table(ctx.fit, meta.fit_overrides)
    t = table.data["T"]
    t = t[np.isfinite(t) & (t > 0)]
    where = dict(source=meta.source.id, file=f"{meta.source.folder}/source.json",
                 extra={"table": meta.file})
    out = []

    def bad(key, what, seen, expected):
        out.append(finding("FIT-SETTING", what, column=f"tables/{meta.index}/fit/{key}",
                           seen=str(seen), expected=expected, **where))

    lo_t, hi_t = TEMPERATURE_SETTING_RANGE
    for key in ("use_t_min", "use_t_max"):
        v = over.get(key)
        if v is not None and not lo_t <= v <= hi_t:
            bad(key, f"{key} {v:g} K lies outside {lo_t:g}-{hi_t:g} K", v, f"{lo_t:g} to {hi_t:g}")
    if (fit.use_t_min is not None and fit.use_t_max is not None
            and not fit.use_t_max > fit.use_t_min):
        bad("use_t_max", f"use_t_max {fit.use_t_max:g} K is not above use_t_min "
            f"{fit.use_t_min:g} K", fit.use_t_max, f"> {fit.use_t_min:g}")
    if "breakpoints" in over and fit.breakpoint_mode == "fixed" and len(t):
        bps = list(over["breakpoints"])
        edges = [float(t.min())] + bps + [float(t.max())]
        steps = [b / a for a, b in zip(edges[:-1], edges[1:])]
        if any(b <= a for a, b in zip(bps[:-1], bps[1:])):
            bad("breakpoints", f"breakpoints {bps} are not strictly increasing", bps,
                "strictly increasing temperatures [K]")
        elif bps[0] <= edges[0] or bps[-1] >= edges[-1]:
            bad("breakpoints", f"breakpoints {bps} do not lie inside the data "
                f"{edges[0]:.6g}-{edges[-1]:.6g} K", bps, "temperatures inside the data")
        elif min(steps) < fit.min_range_ratio:
            bad("breakpoints", f"breakpoints {bps} leave a range only {min(steps):.4g} times "
                "wider at the top than at the bottom", bps,
                f"every range at least {fit.min_range_ratio:g} times wider")
    return out


def check_anchor_reach(table: Table, ctx: Settings):
    """ANCHOR-OUT-OF-REACH / RANGE-EXTENDED findings: data that do not contain 298.15 K, where
    ΔfH° and S° anchor H and S.

    Below the data the lowest range may be stretched by the allowed anchor extension [K]
    (flagged). Above the data only an ideal gas can be carried up to 298.15 K, by the
    extrapolation model of the fit stage (flagged, with its uncertainty); a condensed phase
    whose data end below 298.15 K exists only there and is held back until it can be
    anchored through its transitions.
    """
    t = table.data["T"]
    t = t[np.isfinite(t) & (t > 0)]
    if not len(t) or table.meta.reached or not table.meta.anchored:
        return []         # anchored through a transition (checks/transitions.py)
    meta, tref = table.meta, constants.REFERENCE_TEMPERATURE
    gap = float(t.min()) - tref
    reach = ctx.fit.max_anchor_extension
    where = dict(source=meta.source.id, file=meta.file, column="T")
    if float(t.max()) < tref:
        seen = dict(seen=f"{t.max():.6g} K", expected="data up to >= 298.15 K", **where)
        fit = for_table(ctx.fit, meta.fit_overrides)
        if meta.phase != "g":
            return [finding("ANCHOR-OUT-OF-REACH", f"the data end at {t.max():.6g} K, below "
                            "298.15 K where ΔfH° and S° anchor H and S; a condensed phase that "
                            "exists only below 298.15 K is anchored through its transitions, "
                            "which this build cannot do yet: held back", **seen)]
        if not (fit.extrapolate and meta.geometry and meta.atoms):
            return [finding("ANCHOR-OUT-OF-REACH", f"the data end at {t.max():.6g} K, below "
                            "298.15 K where ΔfH° and S° anchor H and S, and no extrapolation "
                            "model can carry Cp there (it needs a gas's geometry and "
                            "extrapolation on)", **seen)]
        return [finding("RANGE-EXTENDED", f"the data end at {t.max():.6g} K; Cp is extrapolated "
                        "up to 298.15 K with a physically shaped model to anchor H and S",
                        **seen)]
    where["seen"] = f"{t.min():.6g} K"
    if gap > reach:
        more = (" (a condensed phase that exists only above 298.15 K is anchored through its "
                "transitions, which this build cannot do yet)" if meta.phase != "g" else "")
        return [finding("ANCHOR-OUT-OF-REACH", f"data start at {t.min():.6g} K, "
                        f"{gap:.6g} K above 298.15 K{more}", expected=f"data from <= "
                        f"{tref + reach:g} K", **where)]
    if gap > 0:
        return [finding("RANGE-EXTENDED", f"data start at {t.min():.6g} K; the lowest range is "
                        "extrapolated down to 298.15 K", expected="data from <= 298.15 K",
                        **where)]
    return []
