"""What changed between two libraries, in properties.

For every species present in both, the differences of Cp, H − H298, S and G = H − TS at
standard temperatures (within both ranges of use) and the largest differences over the
common range (on a dense grid), plus changes of sources, ranges, breakpoints and findings.
"""

import numpy as np

from ..core.constants import REFERENCE_TEMPERATURE
from ..physics import forms
from . import document as library

STANDARD_TEMPERATURES = (298.15, 300.0, 400.0, 500.0, 600.0, 800.0, 1000.0, 1500.0, 2000.0,
                         3000.0)


def _props(sp, t):
    ev = forms.evaluate_ranges(library.ranges_of(sp), t, sp["form"])
    h298 = forms.h_of_ranges(library.ranges_of(sp), [REFERENCE_TEMPERATURE], sp["form"])[0]
    return {"Cp": ev["Cp"], "dH": ev["H"] - h298, "S": ev["S"], "G": ev["G"]}


def compare_species(old, new) -> dict:
    """Property differences (new − old) of one species present in both libraries."""
    lo = max(old["ranges"][0]["t_min"], new["ranges"][0]["t_min"])
    hi = min(old["ranges"][-1]["t_max"], new["ranges"][-1]["t_max"])
    out = {"id": new["id"], "common_range": [lo, hi], "at": [], "largest": None, "changes": []}
    if hi > lo:
        std = [t for t in STANDARD_TEMPERATURES if lo <= t <= hi]
        if std:
            a, b = _props(old, np.array(std)), _props(new, np.array(std))
            for i, t in enumerate(std):
                out["at"].append({"T": t, **{k: float(b[k][i] - a[k][i]) for k in a}})
        grid = np.geomspace(lo, hi, 400)
        a, b = _props(old, grid), _props(new, grid)
        rel = np.abs(b["Cp"] / a["Cp"] - 1)
        k = int(np.argmax(rel))
        out["largest"] = {"cp_rel": float(rel[k]), "cp_rel_at": float(grid[k]),
                          "dH": float(np.max(np.abs(b["dH"] - a["dH"]))),
                          "S": float(np.max(np.abs(b["S"] - a["S"]))),
                          "G": float(np.max(np.abs(b["G"] - a["G"])))}
    ch = out["changes"]
    old_src = {x["file"]: x for x in old["sources"]}
    new_src = {x["file"]: x for x in new["sources"]}
    if old_src != new_src:
        parts = [f"+ {f}" for f in sorted(set(new_src) - set(old_src))]
        parts += [f"- {f}" for f in sorted(set(old_src) - set(new_src))]
        for f in sorted(set(old_src) & set(new_src)):
            a, b = old_src[f], new_src[f]
            if a["sha256"] != b["sha256"]:
                parts.append(f"content changed: {f}")
            elif a != b:
                parts.append(f"use changed: {f} ({a['rows']} -> {b['rows']} rows)")
        ch.append("sources: " + "; ".join(parts))
    r_old = [(r["t_min"], r["t_max"]) for r in old["ranges"]]
    r_new = [(r["t_min"], r["t_max"]) for r in new["ranges"]]
    if r_old != r_new:
        ch.append(f"ranges: {_fmt_ranges(r_old)} -> {_fmt_ranges(r_new)}")
    if old.get("breakpoints") != new.get("breakpoints"):
        ch.append(f"breakpoints: {old.get('breakpoints')} -> {new.get('breakpoints')}")
    if old["form"] != new["form"]:
        ch.append(f"form: {old['form']} -> {new['form']}")
    f_old = {(f["code"], f["file"], f["line"]) for f in old["findings"]}
    f_new = {(f["code"], f["file"], f["line"]) for f in new["findings"]}
    if f_old != f_new:
        gone = sorted(f"{c} {f}:{ln}" for c, f, ln in f_old - f_new)
        came = sorted(f"{c} {f}:{ln}" for c, f, ln in f_new - f_old)
        ch.append("findings: " + "; ".join(([f"+ {x}" for x in came]) + [f"- {x}" for x in gone]))
    return out


def _fmt_ranges(r):
    return ", ".join(f"{a:g}-{b:g}" for a, b in r)


def diff(old_doc: dict, new_doc: dict, *, cp_threshold=None, h_threshold=None,
         s_threshold=None) -> dict:
    """Added, removed and changed species. A changed species is listed when its coefficients,
    sources, ranges or findings differ — and, when thresholds are given (relative Cp [-],
    H [J/mol], S [J/(mol K)]), only when one of its largest differences exceeds its
    threshold."""
    limits = {k: v for k, v in (("cp_rel", cp_threshold), ("dH", h_threshold),
                                ("S", s_threshold)) if v is not None}
    old = {s["id"]: s for s in old_doc["species"]}
    new = {s["id"]: s for s in new_doc["species"]}
    changed = []
    for sid in sorted(set(old) & set(new)):
        a, b = old[sid], new[sid]
        same = (a["ranges"] == b["ranges"] and a["form"] == b["form"]
                and a["sources"] == b["sources"] and a["findings"] == b["findings"])
        if same:
            continue
        c = compare_species(a, b)
        if not limits or c["largest"] is None or any(c["largest"][k] > v
                                                     for k, v in limits.items()):
            changed.append(c)
    return {"diff_format": 1, "added": sorted(set(new) - set(old)),
            "removed": sorted(set(old) - set(new)), "changed": changed, "thresholds": limits}


def render(d: dict) -> str:
    """Readable text of a diff."""
    lines = []
    for sid in d["added"]:
        lines.append(f"+ {sid}  added")
    for sid in d["removed"]:
        lines.append(f"- {sid}  removed")
    for c in d["changed"]:
        head = f"~ {c['id']}"
        if c["largest"]:
            g = c["largest"]
            head += (f"  largest over {c['common_range'][0]:g}-{c['common_range'][1]:g} K: "
                     f"Cp {100 * g['cp_rel']:.4g} % (at {g['cp_rel_at']:.5g} K), "
                     f"H-H298 {g['dH']:.4g} J/mol, S {g['S']:.4g} J/(mol*K), G {g['G']:.4g} J/mol")
        lines.append(head)
        for ch in c["changes"]:
            lines.append(f"    {ch}")
        if c["at"]:
            lines.append(f"    {'T [K]':>8} {'dCp':>11} {'d(H-H298)':>11} {'dS':>11} {'dG':>11}")
            for row in c["at"]:
                lines.append(f"    {row['T']:8.2f} {row['Cp']:11.4g} {row['dH']:11.4g} "
                             f"{row['S']:11.4g} {row['G']:11.4g}")
    if not lines:
        lines.append("no differences" + (" above the thresholds" if d["thresholds"] else ""))
    return "\n".join(lines)
