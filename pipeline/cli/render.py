"""Command-line output: the text each command prints, built from the stages' results.
Every function returns lines (or a string); the commands print them."""

import math

from ..core.findings import ERROR, INFO, WARNING, format_block
from ..library.entries import outlines_of


def totals(findings) -> tuple:
    """(errors, counted warnings, acknowledged) of ``findings``."""
    n_err = sum(1 for f in findings if f.severity == ERROR)
    n_warn = sum(1 for f in findings if f.severity == WARNING and f.counts)
    n_ack = sum(1 for f in findings if not f.counts)
    return n_err, n_warn, n_ack


def findings_by_file(findings, *, show_info: bool = False) -> list:
    """Findings grouped under their file, sorted; infos only with ``show_info``."""
    by_file = {}
    for f in sorted(findings, key=lambda f: f.sort_key()):
        if f.severity == INFO and not show_info:
            continue
        by_file.setdefault(f.file or f.source or "(raw)", []).append(f)
    lines = []
    for file, items in by_file.items():
        lines.append(file)
        lines += [format_block(f) for f in items]
    return lines


def build_json(result, out, notice: str) -> dict:
    """The ``build --json`` summary of a BuildResult written into ``out``."""
    n_err, n_warn, n_ack = totals(result.findings)
    return {"species": [s["id"] for s in result.document["species"]],
            "quarantined": [{"id": q["id"], "file": q["file"], "code": q["reasons"][0]["code"]}
                            for q in result.document["quarantined"]],
            "errors": n_err, "warnings": n_warn, "acknowledged": n_ack,
            "held_back": [{"file": f, "code": errs[0].code} for f, errs in result.held_back],
            "out": str(out), "files": len(result.written),
            "partitions": {"reused": result.reused[0], "of": result.reused[1]},
            "report_pages_linked": result.linked,
            "notice": notice}


def build_summary(result, out, notice: str) -> list:
    """The lines ``build`` prints: one per species fitted, quarantined or held back."""
    n_err, n_warn, n_ack = totals(result.findings)
    lines = [f"thermoledger build: {len(result.fitted)} species fitted, "
             f"{len(result.quarantined)} table(s) quarantined, {n_err} error(s), "
             f"{n_warn} warning(s), {n_ack} acknowledged"]
    for sp in outlines_of(result.document):
        q = sp["quality"]
        flag = "  extrapolated: " + ", ".join(f"{e['t_min']:g}-{e['t_max']:g} K"
                                               for e in sp["extrapolated"]) if sp["extrapolated"] else ""
        span = f"{sp['ranges'][0]['t_min']:g}-{sp['ranges'][-1]['t_max']:g} K"
        breaks = "/".join(f"{r['t_max']:g}" for r in sp["ranges"][:-1])
        breaks = f"break {breaks:>6s} K" if breaks else "one range     "
        used = [f"{x['file']}" + (f" ({x['rows']} rows)" if i else "")
                for i, x in enumerate(s for s in sp["sources"] if s["used"])]
        dropped = f"  {len(sp['excluded'])} row(s) left out" if sp["excluded"] else ""
        origin = (sp.get("origin") or {}).get("repair")
        word = "fitted" if origin is None else "repaired" if origin == "repaired" else "published"
        lines.append(f"  {word:11s} {sp['id']:14s} {span:14s} {breaks}  "
                     f"max |dCp/Cp| {100 * q['cp_max_rel_dev']:.3f} %  "
                     f"from {' + '.join(used)}{dropped}{flag}")
    for entry in result.document["quarantined"]:
        first = entry["reasons"][0]
        where = entry["file"] + (f":{first['line']}" if first["line"] is not None else "")
        col = f" [{first['column']}]" if first["column"] else ""
        more = f" (+{len(entry['reasons']) - 1} more)" if len(entry["reasons"]) > 1 else ""
        lines.append(f"  QUARANTINED {entry['id']:14s} {where}{col}: {first['code']} "
                     f"{first['message']}{more}")
    for file, errs in result.held_back:
        first = errs[0]
        sets = sorted({f.extra["species"] for f in errs if f.extra.get("species")})
        scope = "whole source" if file.endswith("/source.json") else \
            f"set not read: {', '.join(sets)}" if sets else "table not read"
        where = first.file + (f":{first.line}" if first.line is not None else "")
        col = f" [{first.column}]" if first.column else ""
        more = f" (+{len(errs) - 1} more)" if len(errs) > 1 else ""
        lines.append(f"  HELD BACK   {scope:14s} {where}{col}: {first.code} {first.message}{more}")
    lines.append(f"wrote {len(result.written)} files into {out}/ (manifest.json lists each with "
                 "its sha256; datapackage.json and provenance.json describe the release)")
    reused, parts = result.reused
    if reused:
        lines.append(f"reused {reused} of {parts} partition(s) of species from the last build "
                     "(inputs, settings and code unchanged; --fresh recomputes them)")
    if result.linked:
        lines.append(f"linked the report pages of {result.linked} species from the last release "
                     "(drawn from the same inputs; --fresh draws them all)")
    lines.append(f"caution: {notice}")
    return lines


def check_summary(result) -> list:
    """The closing lines of ``check``: counts, and every input held back."""
    n_err, n_warn, n_ack = totals(result.findings)
    lines = [f"thermoledger check: {len(result.tables)} table(s) read, "
             f"{len(result.quarantined)} would be quarantined; {n_err} error(s), "
             f"{n_warn} warning(s), {n_ack} acknowledged"]
    lines += [f"  held back: {file} ({errs[0].code})" for file, errs in result.held_back]
    return lines


PROPS_UNITS = {"T": "K", "Cp": "J/(mol*K)", "H": "J/mol", "S": "J/(mol*K)", "G": "J/mol"}


def props_json(sps, temperatures, values: dict, formed=None, missing=(), refs=None) -> dict:
    """The ``props --json`` document at ``temperatures`` [K]; ``sps`` the library entry
    evaluated at each temperature (one species, or the stable phase of each); ``formed``
    its formation properties (None: none, ``missing`` says why; ``refs`` the reference
    states by element)."""
    keys = ("Cp", "u_Cp", "H", "u_H", "S", "u_S", "G")
    first = sps[0]
    doc = {"id": first["id"] if len({sp["id"] for sp in sps}) == 1 else None,
           "form": first["form"], "units": {**PROPS_UNITS, **FORMATION_UNITS},
           "rows": [{"T": t, "id": sp["id"], "phase": sp["phase"],
                     **{k: float(values[k][i]) for k in keys},
                     **{k: _number(formed[k][i]) if formed else None for k in FORMATION_UNITS},
                     "extrapolated": bool(values["extrapolated"][i] or (
                         formed is not None and formed["ref_extrapolated"][i]))}
                    for i, (t, sp) in enumerate(zip(temperatures, sps))]}
    if refs is not None:
        doc["formation"] = {"reference_states": _used_refs(sps, refs) if formed else {},
                            "missing": list(missing)}
    return doc


FORMATION_UNITS = {"dfH": "J/mol", "u_dfH": "J/mol", "dfG": "J/mol", "u_dfG": "J/mol",
                   "log10Kf": "1", "u_log10Kf": "1"}


def _number(x):
    """A float for JSON, None for NaN (no value)."""
    x = float(x)
    return None if math.isnan(x) else x


def _used_refs(sps, refs) -> dict:
    """{element: reference species ids} of the elements of ``sps``."""
    from ..library.references import elements_of

    return {el: refs[el]["ids"] for el, _ in elements_of(sps[0]["formula"])}


def formation_table(sps, temperatures, formed, missing, refs) -> list:
    """The formation block ``props`` prints under its table: ΔfH°, ΔfG° and log10 Kf with
    standard uncertainties, or why there are none."""
    if formed is None:
        return [f"no formation properties: {'; '.join(missing)}"]
    used = ", ".join(f"{el}: {' / '.join(ids)}" for el, ids in _used_refs(sps, refs).items())
    lines = [f"formation from the elements in their reference states ({used}):",
             f"{'T [K]':>10} {'ΔfH° [kJ/mol]':>20} {'ΔfG° [kJ/mol]':>20} {'log10 Kf':>18}"]
    for i, t in enumerate(temperatures):
        if math.isnan(formed["dfH"][i]):
            lines.append(f"{t:10.2f}  (no reference phase of an element in range)")
            continue
        note = "  extrapolated reference" if formed["ref_extrapolated"][i] else ""
        lines.append(f"{t:10.2f} {formed['dfH'][i] / 1000:11.4f} ± {formed['u_dfH'][i] / 1000:6.4f} "
                     f"{formed['dfG'][i] / 1000:11.4f} ± {formed['u_dfG'][i] / 1000:6.4f} "
                     f"{formed['log10Kf'][i]:9.4f} ± {formed['u_log10Kf'][i]:6.4f}{note}")
    lines.append("± standard uncertainty, with those of ΔfH° and S° (library/budget.py); "
                 "species independent unless linked by transitions.")
    return lines


def reaction_units(energy: str, entropy: str) -> dict:
    """{'dH', 'dG': energy unit, 'dS': entropy unit} checked by the units library (UnitError
    for a unit of the wrong kind)."""
    from ..core import units

    units.check_unit(energy, "enthalpy")
    units.check_unit(entropy, "heat_capacity")
    return {"dH": energy, "dS": entropy, "dG": energy}


def _in(values, unit, key):
    from ..core import units

    return units.from_si(values, unit, "heat_capacity" if key == "dS" else "enthalpy")


REACTION_NOTE = ("± standard uncertainty (k = 1) from each species' fit covariance, form "
                 "misfit, extrapolation model, ΔfH° and S° and its transitions; species "
                 "independent unless linked by transitions. K at the standard pressure of 1 bar; "
                 "ΔrH° and ΔrG° on the assigned-enthalpy scale.")


def reaction_json(got: dict, given, t_unit: str, shown: dict) -> dict:
    """The ``reaction --json`` document: values in the units asked for."""
    from ..release.document import NOTICE

    rows = []
    for i, t in enumerate(got["T"]):
        row = {"T": float(t), "T_given": float(given[i])}
        for key in ("dH", "dS", "dG"):
            row[key] = float(_in(got[key][i], shown[key], key))
            row[f"u_{key}"] = float(_in(got[f"u_{key}"][i], shown[key], key))
        row["log10K"], row["u_log10K"] = float(got["log10K"][i]), float(got["u_log10K"][i])
        row["ids"] = [ids[i] for ids in got["ids"]]
        row["extrapolated"] = bool(got["extrapolated"][i])
        rows.append(row)
    return {"equation": got["equation"],
            "species": [{"nu": x.nu, "name": x.name} for x in got["terms"]],
            "units": {"T": "K", "T_given": t_unit, **shown, "log10K": "1"},
            "convention": REACTION_NOTE, "rows": rows, "notice": NOTICE}


def _pm(value, u) -> str:
    """'value ± u' with u to two significant digits and the value to the same place."""
    if not (u > 0 and math.isfinite(u)):
        return f"{value:.6g} ± 0"
    places = min(max(1 - math.floor(math.log10(u)), 0), 8)
    return f"{value:.{places}f} ± {u:.{places}f}"


def reaction_table(got: dict, where, shown: dict) -> list:
    """The ``reaction`` table: ΔrH°, ΔrS°, ΔrG° and log10 K with standard uncertainties."""
    from ..release.document import NOTICE

    ids = [list(dict.fromkeys(x)) for x in got["ids"]]
    varies = any(len(x) > 1 for x in ids)
    lines = [f"{got['equation']}   from {where}",
             "species: " + ", ".join(" / ".join(x) for x in ids),
             f"{'T [K]':>9}  {'ΔrH° [' + shown['dH'] + ']':>24}  {'ΔrS° [' + shown['dS'] + ']':>24}"
             f"  {'ΔrG° [' + shown['dG'] + ']':>24}  {'log10 K':>18}"]
    for i, t in enumerate(got["T"]):
        cells = [_pm(float(_in(got[k][i], shown[k], k)), float(_in(got[f"u_{k}"][i], shown[k], k)))
                 for k in ("dH", "dS", "dG")]
        note = "  " + ", ".join(x[i] for x in got["ids"]) if varies else ""
        note += "  extrapolated" if got["extrapolated"][i] else ""
        lines.append(f"{t:9.2f}  {cells[0]:>24}  {cells[1]:>24}  {cells[2]:>24}  "
                     f"{_pm(got['log10K'][i], got['u_log10K'][i]):>18}{note}")
    lines += [REACTION_NOTE, f"caution: {NOTICE}"]
    return lines


def props_table(sps, temperatures, values: dict, where) -> list:
    """The ``props`` table: Cp, H, S, G with standard uncertainties, extrapolation flagged;
    the phase of each row when the stable phase changes with temperature."""
    several = len({sp["id"] for sp in sps}) > 1
    lines = [f"{sp['id']}  {sp['form']}, {sp['ranges'][0]['t_min']:g}-"
             f"{sp['ranges'][-1]['t_max']:g} K, from {where}" for sp in
             {sp["id"]: sp for sp in sps}.values()]
    lines.append(f"{'T [K]':>10} {'Cp [J/(mol*K)]':>20} {'H [kJ/mol]':>20} {'S [J/(mol*K)]':>18} "
                 f"{'G [kJ/mol]':>12}" + ("  phase" if several else ""))
    for i, (t, sp) in enumerate(zip(temperatures, sps)):
        note = "  extrapolated" if values["extrapolated"][i] else ""
        phase = f"  {sp['phase']}" if several else ""
        lines.append(f"{t:10.2f} {values['Cp'][i]:11.4f} ± {values['u_Cp'][i]:6.4f} "
                     f"{values['H'][i] / 1000:11.4f} ± {values['u_H'][i] / 1000:6.4f} "
                     f"{values['S'][i]:9.4f} ± {values['u_S'][i]:6.4f} "
                     f"{values['G'][i] / 1000:12.4f}{phase}{note}")
    if several:
        lines.append("phase: the phase stable at that temperature (the one below at a transition "
                     "temperature; --phase names one).")
    lines.append("± standard uncertainty of the fit (H and S relative to their exact anchors at "
                 "298.15 K or at a transition, plus the u of the transitions on the way; "
                 "extrapolated intervals include the model's).")
    lines.append("H on the assigned-enthalpy scale (H(298.15 K) = enthalpy of formation); "
                 "S at 1 bar.")
    return lines
