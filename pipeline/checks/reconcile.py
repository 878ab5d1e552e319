"""Reconciliation of sources: agreement, unit factors between sources, and the rows to fit.

For a species (id and phase) present in several accepted tables:

1. Every lower-priority table is compared with the preferred one where their
   temperature ranges overlap: both are interpolated (monotone cubic, PCHIP, in
   ln T and ln Cp) onto the union of their temperatures in the overlap. A median
   ratio near a recognisable unit factor is an error (SRC-FACTOR) against the
   lower-priority table; a largest relative deviation above the tolerance is a
   warning (SRC-DISAGREE) naming both sources and where.
2. Rule for the rows that enter the fit: the preferred source (highest
   ``priority``; on a tie the source id first in alphabetical order, with a
   SEL-TIE warning) supplies every row it has; each next source in priority order
   supplies only rows outside the temperature interval already covered. The
   choice is recorded per source (rows used, interval) in the species'
   provenance.

Rows flagged by the smoothness checks are left out before merging.
"""

import math
from dataclasses import dataclass

import numpy as np

from ..core.errors import let_through
from ..core.findings import by_subject, finding, stage_failed
from ..core.records import first_of_each_t
from ..core.rows import Rows, concat
from .physical import factor_candidates
from .smoothness import EXCLUDING

#: a median ratio between two sources is tested against the unit factors only when
#: |ln ratio| exceeds this (a factor of 1.22; every factor we look for is larger)
FACTOR_MIN_LOG_RATIO = 0.2


@dataclass(frozen=True)
class SourceUse:
    """How one table served a species: the rows it supplied and their interval [K]."""

    meta: object          # TableMeta
    rows: int             # rows entering the fit
    t_min: float | None   # [K] of the rows used
    t_max: float | None


@dataclass(frozen=True)
class Selection:
    """The rows one species is fitted from, merged from its tables by priority."""

    species_id: str
    primary: object       # the preferred Table: metadata and anchors come from it
    data: Rows            # rows to fit: the documented columns plus 'file'
    uses: tuple           # SourceUse per table considered, preferred first
    excluded: tuple       # (file, line, code) of rows left out
    findings: tuple       # findings that travel with the species


def _curve(table):
    d = first_of_each_t(table.valid)
    return d["T"], d["Cp"]


def compare(a, b, scale=(1.0, 0.0)):
    """Compare two tables where they overlap, b's temperatures read as α T + β by ``scale``.

    Returns None without an overlap of at least two points each, else
    (largest |Cp_b/Cp_a − 1| [-], T where it is [K], median Cp_b/Cp_a [-], t_lo, t_hi).
    """
    ta, ca = _curve(a)
    tb, cb = _curve(b)
    tb = scale[0] * tb + scale[1]
    if len(ta) < 2 or len(tb) < 2 or tb[0] <= 0:
        return None
    lo, hi = max(ta[0], tb[0]), min(ta[-1], tb[-1])
    grid = np.union1d(ta[(ta >= lo) & (ta <= hi)], tb[(tb >= lo) & (tb <= hi)])
    if hi <= lo or ((ta >= lo) & (ta <= hi)).sum() < 2 or ((tb >= lo) & (tb <= hi)).sum() < 2:
        return None
    from scipy.interpolate import PchipInterpolator  # here: checking loads scipy on first use

    ia = np.exp(PchipInterpolator(np.log(ta), np.log(ca))(np.log(grid)))
    ib = np.exp(PchipInterpolator(np.log(tb), np.log(cb))(np.log(grid)))
    rel = ib / ia - 1.0
    k = int(np.argmax(np.abs(rel)))
    return float(abs(rel[k])), float(grid[k]), float(np.median(ib / ia)), float(lo), float(hi)


#: temperature-scale mix-ups: (what happened, fix, α, β) with the true T = α T_read + β [K]
_C, _F = 273.15, 1.8
T_SCALES = (
    ("degrees Celsius under a kelvin label", "relabel the column T [degC]", 1.0, _C),
    ("kelvin under a Celsius label", "relabel the column T [K]", 1.0, -_C),
    ("degrees Fahrenheit under a Celsius label", "relabel the column T [degF]",
     1 / _F, _C - (_C + 32.0) / _F),
    ("degrees Celsius under a Fahrenheit label", "relabel the column T [degC]",
     _F, _C + 32.0 - _F * _C),
    ("degrees Fahrenheit under a kelvin label", "relabel the column T [degF]",
     1 / _F, _C - 32.0 / _F),
    ("kelvin under a Fahrenheit label", "relabel the column T [K]", _F, 32.0 - _F * _C),
    ("degrees Rankine under a kelvin label", "relabel the column T [degR]", 1 / _F, 0.0),
    ("kelvin under a Rankine label", "relabel the column T [K]", _F, 0.0),
)
#: defaults for how far two sources' anchors may differ when no uncertainty is stated
#: (common practice): ΔfH° [J/mol] and S° [J/(mol K)]
ANCHOR_TOLERANCE = {"enthalpy_of_formation_298": 1000.0, "entropy_298": 0.5}


def temperature_scale(primary, other, tol):
    """(what, fix, α, β, deviation) of the temperature-scale mix-up that makes ``other``
    agree with ``primary`` within ``tol`` where as labelled it does not, or None."""
    best = None
    for what, fix, alpha, beta in T_SCALES:
        got = compare(primary, other, (alpha, beta))
        if got is not None and got[0] <= tol and (best is None or got[0] < best[4]):
            best = (what, fix, alpha, beta, got[0])
    return best


def anchor_disagreements(sid, primary, other):
    """SRC-ANCHOR-DISAGREE warnings: ``other``'s ΔfH° or S° at 298.15 K differs from the
    preferred table's by more than ANCHOR_TOLERANCE."""
    out = []
    for key, label, unit, scale in (("enthalpy_of_formation_298", "ΔfH°(298.15 K)", "kJ/mol",
                                     1e-3), ("entropy_298", "S°(298.15 K)", "J/(mol*K)", 1.0)):
        a, b = getattr(primary.meta, key), getattr(other.meta, key)
        if a is None or b is None or abs(a - b) <= ANCHOR_TOLERANCE[key]:
            continue
        out.append(finding("SRC-ANCHOR-DISAGREE", f"{sid}: {label} is {b * scale:.6g} {unit} "
                           f"in {other.meta.source.id} but {a * scale:.6g} {unit} in "
                           f"{primary.meta.source.id} (the preferred source, whose value is "
                           "used)", **other.meta.where,
                           column=key, seen=f"{b * scale:.6g}", expected=f"{a * scale:.6g} ± "
                           f"{ANCHOR_TOLERANCE[key] * scale:g} {unit}"))
    return out


def _factor_of(ratio, molar_mass, tol):
    for name, f, fix in factor_candidates(molar_mass):
        # ratio = seen_b / seen_a; b is wrong by 1/f when b's true value = seen_b * f
        if abs(math.log(ratio * f)) < tol:
            return name, f, fix
    return None


def excluded_lines(table, findings):
    """{(line, code)} of the rows the smoothness checks left out of the fit; ``findings`` are
    those about the table (or all, which are filtered here)."""
    out = set()
    for f in findings:
        if f.code in EXCLUDING and f.file == table.meta.file:
            out.update((ln, f.code) for ln in (f.lines or (f.line,)) if ln is not None)
    return out


def reconcile(accepted, findings, ctx):
    """Choose the rows to fit for every species.

    Parameters
    ----------
    accepted : sequence of Table without error findings
    findings : all findings so far (for exclusions)

    Returns (selections, new findings, tables quarantined here as (TableMeta, findings)).
    """
    groups = {}
    for table in accepted:
        groups.setdefault(table.meta.species_id, []).append(table)
    selections, new, quarantined = [], [], []
    about = by_subject(findings)
    for sid in sorted(groups):
        try:
            sel, notes, dropped = _select(sid, groups[sid], about, ctx)
        except Exception as exc:  # noqa: BLE001 - one bad species never stops the rest
            let_through(exc)
            for table in groups[sid]:
                f = stage_failed("reconcile", exc, **table.meta.where)
                new.append(f)
                quarantined.append((table.meta, (f,)))
            continue
        new += notes
        quarantined += dropped
        selections.append(sel)
    return selections, new, quarantined


def _select(sid, tables, about, ctx):
    """(Selection, findings, quarantined) of one species: compare its sources, drop those
    off by a unit factor, merge the rest by priority; ``about`` maps files to findings."""
    tol = ctx.checks.source_tolerance
    new, quarantined = [], []
    ranked = sorted(tables, key=lambda t: (-t.meta.source.priority, t.meta.source.id,
                                           t.meta.file))
    primary = ranked[0]
    notes, keep = [], [primary]
    for other in ranked[1:]:
        where = dict(**other.meta.where, column="Cp")
        if other.meta.source.priority == primary.meta.source.priority:
            notes.append(finding("SEL-TIE", f"{sid}: {primary.meta.source.id} and "
                                 f"{other.meta.source.id} have equal priority; "
                                 f"{primary.meta.source.id} is preferred", **where))
        notes += anchor_disagreements(sid, primary, other)
        got = compare(primary, other)
        scale = temperature_scale(primary, other, min(tol, got[0] / 3)) \
            if got is not None and got[0] > tol else None
        if scale:
            what, fix, alpha, beta, dev = scale
            err = finding("SRC-T-SCALE", f"{sid}: this table agrees with {primary.meta.file} "
                          f"(within {100 * dev:.2f} %) only with its T read as {alpha:.6g} T "
                          f"{beta:+.6g} K: {what} (or the reverse mix-up in the other table)",
                          seen="T as labelled", expected=f"T = {alpha:.6g} T {beta:+.6g} K",
                          fix=fix, **dict(where, column="T"))
            new.append(err)
            quarantined.append((other.meta, (err,)))
            continue
        if got is None:
            keep.append(other)
            continue
        dev, t_at, ratio, lo, hi = got
        factor = _factor_of(ratio, other.meta.molar_mass, ctx.checks.factor_tolerance) \
            if abs(math.log(ratio)) > FACTOR_MIN_LOG_RATIO else None
        if factor:
            name, f, fix = factor
            err = finding("SRC-FACTOR", f"{sid}: this table is {ratio:.6g} times "
                          f"{primary.meta.file} over {lo:.6g}-{hi:.6g} K, a factor "
                          f"{f:.6g} ({name})", seen=f"ratio {ratio:.6g}",
                          expected="ratio 1", fix=fix, **where)
            new.append(err)
            quarantined.append((other.meta, (err,)))
            continue
        if dev > tol:
            notes.append(finding("SRC-DISAGREE", f"{sid}: {other.meta.source.id} differs "
                                 f"from {primary.meta.source.id} by up to "
                                 f"{100 * dev:.3g} % (at {t_at:.6g} K) over {lo:.6g}-"
                                 f"{hi:.6g} K", seen=f"{100 * dev:.3g} %",
                                 expected=f"<= {100 * tol:g} %", **where))
        keep.append(other)
    rows, uses, excluded = [], [], []
    covered = None
    for table in keep:
        ex = excluded_lines(table, about.get(table.meta.file, ()))
        excluded += [(table.meta.file, ln, code) for ln, code in sorted(ex)]
        t, cp = table.data["T"], table.data["Cp"]
        keep_row = np.isfinite(t) & np.isfinite(cp)
        if ex:
            keep_row &= ~np.isin(table.data["line"], [ln for ln, _ in ex])
        if covered is not None:
            keep_row &= (t < covered[0]) | (t > covered[1])
        if keep_row.any():              # (read-only columns: all rows kept are shared)
            d = (table.data if keep_row.all() else table.data.take(keep_row)).with_columns(
                file=table.meta.file)
            rows.append(d)
            lo, hi = float(t[keep_row].min()), float(t[keep_row].max())
            covered = (lo, hi) if covered is None else (min(covered[0], lo),
                                                         max(covered[1], hi))
            if table is primary and primary.meta.published is not None:
                covered = (-np.inf, np.inf)  # a published set is taken as it is, never filled
            uses.append(SourceUse(table.meta, int(len(d)), lo, hi))
            if table is not primary:
                notes.append(finding("SEL-MERGED", f"{sid}: {len(d)} row(s) of this table "
                                     f"({lo:.6g}-{hi:.6g} K) fill the range outside "
                                     f"{primary.meta.file}", **table.meta.where))
        else:
            uses.append(SourceUse(table.meta, 0, None, None))
            if table is not primary:
                what = "is a published coefficient set, taken as it is, over" if \
                    primary.meta.published is not None else "covers"
                notes.append(finding("SEL-SUPERSEDED", f"{sid}: {primary.meta.file} (priority "
                                     f"{primary.meta.source.priority}) {what} this table's "
                                     f"range (priority {table.meta.source.priority})",
                                     **table.meta.where))
    if rows:
        data = concat(rows) if len(rows) > 1 else rows[0]
        t = data["T"]
        if not (t[1:] >= t[:-1]).all():     # sorted already (one table, as a rule): as it is
            data = data.take(np.argsort(t, kind="stable"))
    else:
        data = primary.data.head(0).with_columns(file=np.empty(0, dtype=str))
    shared = {t.meta.file for t in tables if t.meta.shared}   # files of several species
    notes, new = ([f.about_species(sid) if f.file in shared else f for f in x]
                  for x in (notes, new))
    quarantined = [(meta, tuple(f.about_species(sid) if f.file in shared else f
                                for f in reasons)) for meta, reasons in quarantined]
    sel = Selection(species_id=sid, primary=primary, data=data, uses=tuple(uses),
                    excluded=tuple(excluded), findings=tuple(notes))
    return sel, new + notes, quarantined
