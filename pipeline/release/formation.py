"""Formation properties in a release: the elements' reference states recorded in the
library, and the findings about them.

- 'reference_states' of library.json: every element of the library's species, with the
  species ids it counts from (library/references.py), declared by the settings, the sources
  or the defaults.
- FORM-REF-UNCLEAR (warning) where a declared reference cannot be used, FORM-NO-REFERENCE
  (info) on each species that has no formation properties, and the cross-check of the
  formation properties a source states ("stated_formation" in source.json) against the
  library's: FORM-DISAGREE (warning) beyond twice the combined standard uncertainty,
  FORM-STATED-UNCHECKED (info) where no comparison is possible.
"""

import math

import numpy as np

from ..core.constants import GAS_CONSTANT as R
from ..core.errors import InputError, let_through
from ..core.findings import finding, stage_failed
from ..library import document, references
from ..library.entries import Entries, ids_of, merged_findings
from ..library.formation import Formation

#: the library value and its uncertainty compared with a stated kind, and its unit
_KINDS = {"enthalpy": ("dfH", "u_dfH", "ΔfH°", "kJ/mol", 1e-3),
          "gibbs_energy": ("dfG", "u_dfG", "ΔfG°", "kJ/mol", 1e-3),
          "log10_kf": ("log10Kf", "u_log10Kf", "log10 Kf", "", 1.0)}


def attach(doc: dict, declared, tables, u_stated: float) -> list:
    """Record the reference states in ``doc`` and add the formation findings to its species
    entries; returns those findings. ``declared`` is CheckResult.references, ``tables``
    every table read (their stated formation properties), ``u_stated`` [J/mol] the standard
    uncertainty assumed for a stated ΔfH° or ΔfG° (log10 Kf: the same in G)."""
    states = references.resolve(doc, {el: (name, origin) for el, name, origin in declared})
    doc["reference_states"] = states
    form = Formation(doc)
    metas = {t.meta.species_id: t.meta for t in tables}
    species = doc["species"]
    ids = ids_of(species)
    new = {sid: [] for sid in ids}
    out = _unclear(states, declared, metas)
    for sid in ids:
        missing = form.missing(sid)
        if missing:
            new[sid].append(finding(
                "FORM-NO-REFERENCE", f"{sid} has no formation properties: "
                + "; ".join(missing), **metas[sid].where))
    for t in tables:
        if t.meta.species_id in new and t.meta.stated_formation:
            try:
                new[t.meta.species_id] += _cross_check(doc, form, t.meta, u_stated)
            except Exception as exc:  # noqa: BLE001 - one bad table never stops the rest
                let_through(exc)
                new[t.meta.species_id].append(stage_failed("formation", exc, **t.meta.where))
    for i, sid in enumerate(ids):
        if new[sid]:
            if not isinstance(species, Entries):
                species[i]["findings"] = merged_findings(species[i]["findings"],
                                                         [f.to_dict() for f in new[sid]])
            out += new[sid]
    if isinstance(species, Entries):          # merged into the entry whenever it is read
        species.add_findings_to((i, [f.to_dict() for f in new[sid]])
                                for i, sid in enumerate(ids) if new[sid])
    return out


def _unclear(states, declared, metas) -> list:
    """FORM-REF-UNCLEAR of every reference state that was declared, or that names a species
    the library has, but cannot be used."""
    origin = {el: o for el, _, o in declared}
    out = []
    for st in states:
        if not st["problem"] or (st["origin"] == "default" and st["problem"].startswith("no ")):
            continue
        src = origin.get(st["element"], "default")
        where = {}
        if src.startswith("source "):
            meta = next((m for m in metas.values() if m.source.id == src[7:]), None)
            where = dict(source=src[7:], file=f"{meta.source.folder}/source.json") if meta \
                else dict(source=src[7:])
        out.append(finding("FORM-REF-UNCLEAR", f"reference state of {st['element']} "
                           f"({st['origin']}): {st['problem']}",
                           column=f"reference_states/{st['element']}", seen=st["species"],
                           **where))
    return out


def _cross_check(doc, form: Formation, meta, u_stated: float) -> list:
    """FORM-DISAGREE / FORM-STATED-UNCHECKED of one table's stated formation properties."""
    out = []
    linked = any(x["species"] == meta.species for x in doc.get("transitions", []))
    for t, kind, value, k in meta.stated_formation:
        where = dict(source=meta.source.id, file=f"{meta.source.folder}/source.json",
                     column=f"tables/{meta.index}/stated_formation/{k}",
                     extra={"table": meta.file})
        key, ukey, label, unit, scale = _KINDS[kind]
        try:
            sid = document.phases_at(doc, meta.species if linked else meta.species_id, [t])[0]
            document.check_range(form.budgets.by_id[sid], np.array([t]))
            got = form.at(sid, [t])
        except (InputError, KeyError) as exc:
            out.append(finding("FORM-STATED-UNCHECKED", f"{label}({t:g} K) of {meta.species_id} "
                               f"is not compared: {exc}", **where))
            continue
        if got is None or math.isnan(got[key][0]):
            why = "; ".join(form.missing(sid)) or "an element's reference species has no " \
                "phase in range there"
            out.append(finding("FORM-STATED-UNCHECKED", f"{label}({t:g} K) of {sid} is not "
                               f"compared: {why}", **where))
            continue
        u_src = u_stated / (R * t * math.log(10.0)) if kind == "log10_kf" else u_stated
        lib, u = float(got[key][0]), float(got[ukey][0])
        limit = 2.0 * math.hypot(u, u_src)
        if abs(lib - value) > limit:
            out.append(finding(
                "FORM-DISAGREE", f"{label}({t:g} K) of {sid}: the source states "
                f"{value * scale:.6g}{' ' + unit if unit else ''}, the library gives "
                f"{lib * scale:.6g} ± {u * scale:.2g} (difference {(value - lib) * scale:+.4g})",
                seen=f"{value * scale:.6g}", expected=f"{lib * scale:.6g} ± {limit * scale:.2g}",
                **where))
    return out
