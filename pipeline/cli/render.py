"""Command-line output: the text each command prints, built from the stages' results.
Every function returns lines (or a string); the commands print them."""

from ..core.findings import ERROR, INFO, WARNING, format_block


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
            "out": str(out), "files": len(result.written), "notice": notice}


def build_summary(result, out, notice: str) -> list:
    """The lines ``build`` prints: one per species fitted, quarantined or held back."""
    n_err, n_warn, n_ack = totals(result.findings)
    lines = [f"thermoledger build: {len(result.fitted)} species fitted, "
             f"{len(result.quarantined)} table(s) quarantined, {n_err} error(s), "
             f"{n_warn} warning(s), {n_ack} acknowledged"]
    for sp in result.document["species"]:
        q = sp["quality"]
        flag = "  extrapolated: " + ", ".join(f"{e['t_min']:g}-{e['t_max']:g} K"
                                               for e in sp["extrapolated"]) if sp["extrapolated"] else ""
        span = f"{sp['ranges'][0]['t_min']:g}-{sp['ranges'][-1]['t_max']:g} K"
        breaks = "/".join(f"{r['t_max']:g}" for r in sp["ranges"][:-1])
        breaks = f"break {breaks:>6s} K" if breaks else "one range     "
        used = [f"{x['file']}" + (f" ({x['rows']} rows)" if i else "")
                for i, x in enumerate(s for s in sp["sources"] if s["used"])]
        dropped = f"  {len(sp['excluded'])} row(s) left out" if sp["excluded"] else ""
        lines.append(f"  fitted      {sp['id']:14s} {span:14s} {breaks}  "
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
        scope = "whole source" if file.endswith("/source.json") else "table not read"
        where = first.file + (f":{first.line}" if first.line is not None else "")
        col = f" [{first.column}]" if first.column else ""
        more = f" (+{len(errs) - 1} more)" if len(errs) > 1 else ""
        lines.append(f"  HELD BACK   {scope:14s} {where}{col}: {first.code} {first.message}{more}")
    lines.append(f"wrote {len(result.written)} files into {out}/ (manifest.json lists each with "
                 "its sha256; datapackage.json and provenance.json describe the release)")
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


def props_json(sps, temperatures, values: dict) -> dict:
    """The ``props --json`` document at ``temperatures`` [K]; ``sps`` the library entry
    evaluated at each temperature (one species, or the stable phase of each)."""
    keys = ("Cp", "u_Cp", "H", "u_H", "S", "u_S", "G")
    first = sps[0]
    return {"id": first["id"] if len({sp["id"] for sp in sps}) == 1 else None,
            "form": first["form"], "units": PROPS_UNITS,
            "rows": [{"T": t, "id": sp["id"], "phase": sp["phase"],
                      **{k: float(values[k][i]) for k in keys},
                      "extrapolated": bool(values["extrapolated"][i])}
                     for i, (t, sp) in enumerate(zip(temperatures, sps))]}


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
