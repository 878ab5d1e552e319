"""Helpers for tests and benchmarks of thermoledger and of projects built on it: raw
sources written in the documented format, in-memory tables, reference tables with defects
injected (``trials``) and fuzzed inputs (``fuzzcases``). Nothing in the package imports
this sub-package."""

import json
from pathlib import Path

from ..core.records import CpData, FitResult, SpeciesIdentity
from ..core.settings import FitSettings


def fit_arrays(species_id: str, t, cp, u, h298: float, s298: float,
               settings: FitSettings = FitSettings(), *, dh=None, s=None, u_dh=None, u_s=None,
               geometry=None, atoms=None, phase="g") -> FitResult:
    """``fit.fit_species`` from plain arrays: T [K], Cp and u(Cp) [J/(mol K)] (u None when
    not stated), anchors ΔfH° [J/mol] and S° [J/(mol K)], optional H − H298 [J/mol] and S
    [J/(mol K)] columns."""
    from ..fit import fit_species

    who = SpeciesIdentity(species_id, h298, s298, phase, geometry, atoms)
    return fit_species(who, CpData(t, cp, u, dh, s, u_dh, u_s), settings)


def write_source(raw: Path, source_id: str, tables, *, priority=10, standard_pressure="1 bar",
                 method="other", extra=None):
    """Write raw/<source_id>/source.json and its CSV tables.

    ``tables`` is a list of dicts: the source.json table entry plus 'header' (list of
    column names with units) and 'rows' (list of lists of cells, written as given).
    """
    folder = raw / source_id
    folder.mkdir(parents=True, exist_ok=True)
    entries = []
    for t in tables:
        t = dict(t)
        header, rows = t.pop("header"), t.pop("rows")
        text = t.pop("text", None)
        if text is None:
            text = "\n".join([",".join(header)] + [",".join(str(c) for c in r) for r in rows]) + "\n"
        (folder / t["file"]).write_text(text, encoding="utf-8")
        entries.append(t)
    doc = {"source": source_id, "title": f"test source {source_id}", "citation": "test",
           "method": method, "standard_pressure": standard_pressure, "priority": priority,
           "license": "CC0-1.0", "tables": entries}
    doc.update(extra or {})
    (folder / "source.json").write_text(json.dumps(doc, indent=1), encoding="utf-8")
    return folder


def table_entry(file, species, formula, geometry, h="0 kJ/mol", s="200 J/(mol*K)", **more):
    d = {"file": file, "species": species, "formula": formula, "phase": "g",
         "geometry": geometry, "enthalpy_of_formation_298": h, "entropy_298": s}
    d.update(more)
    return d
