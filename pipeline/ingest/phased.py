"""One table per phase: split a table with a ``phase`` column, place its anchors, and give an
enthalpy-increment table its Cp.

A table listed with a ``phase`` in source.json is one phase. A table whose CSV has a
``phase`` column holds several: it becomes one table per phase (same file, rows by their
phase), and its ΔfH° and S°, when given, belong to the phase named by ``anchor_phase``
(never guessed). A phase without anchors of its own is reached through its transitions.
"""

from dataclasses import replace

import numpy as np

from ..core import phases
from ..core.findings import finding
from ..core.records import Table
from . import csvtable
from .increments import cp_from_increments


def split(meta, data, entry) -> tuple[list, list]:
    """(tables, findings) of one listed table read into ``meta`` and ``data`` (its rows, a
    'phase' column when the CSV has one); ``entry`` is its source.json entry."""
    listed = entry.get("phase")
    anchor_phase = entry.get("anchor_phase")
    at = dict(source=meta.source.id, file=f"{meta.source.folder}/source.json",
              extra={"table": meta.file})
    col = f"tables/{meta.index}"
    if "phase" not in data:
        if listed is None and not len(data):
            return [], []              # nothing read: the reading findings say why
        if listed is None:
            return [], [finding("SRC-NO-PHASE", "the table has neither a 'phase' in source.json "
                                "nor a phase column", column=f"{col}/phase",
                                expected="\"phase\": \"g\", \"l\", \"cr\" or \"cr-<form>\"",
                                **at)]
        if anchor_phase is not None:
            return [], [finding("SRC-ANCHOR-PHASE", "anchor_phase applies only to a table with "
                                "a phase column", column=f"{col}/anchor_phase",
                                seen=anchor_phase, expected="no anchor_phase", **at)]
        return [_with_cp(Table(meta=meta, data=data))], []
    if listed is not None:
        return [], [finding("SRC-PHASE-TWICE", "the table has a phase column and a 'phase' in "
                            "source.json; give the phase in one place", column=f"{col}/phase",
                            seen=listed, expected="no 'phase' for a table with a phase column",
                            **at)]
    present = list(dict.fromkeys(data["phase"].tolist()))
    if meta.anchored and anchor_phase not in present:
        return [], [finding("SRC-ANCHOR-PHASE", "the table holds several phases; say which one "
                            "enthalpy_of_formation_298 and entropy_298 belong to",
                            column=f"{col}/anchor_phase", seen=str(anchor_phase),
                            expected="one of " + ", ".join(present), **at)]
    if "g" in present and not meta.geometry:
        return [], [finding("SRC-SCHEMA", "the table holds ideal-gas rows (phase g) but "
                            "source.json gives no geometry", column=f"{col}/geometry",
                            expected="monatomic, linear or nonlinear", **at)]
    out = []
    for phase in present:
        rows = data.take(data["phase"] == phase).without("phase")
        s298, anchor_note = csvtable.at_one_bar(meta.entropy_298, meta.source.standard_pressure,
                                                "entropy_298") if phases.is_gas(phase) \
            else (meta.entropy_298, None)
        notes = [f"rows of phase {phase} of a table with a phase column"] + \
            ([anchor_note] if anchor_note and phase == anchor_phase else [])
        if phases.is_gas(phase) and rows.given("S").any():
            s, note = csvtable.at_one_bar(rows["S"], meta.source.standard_pressure, "S")
            rows = rows.with_columns(S=s)
            notes += [note] if note else []
        part = replace(meta, phase=phase, geometry=meta.geometry if phase == "g" else None,
                       shared=len(present) > 1,
                       enthalpy_of_formation_298=meta.enthalpy_of_formation_298
                       if phase == anchor_phase else None,
                       entropy_298=s298 if phase == anchor_phase else None,
                       u_enthalpy_of_formation_298=meta.u_enthalpy_of_formation_298
                       if phase == anchor_phase else None,
                       u_entropy_298=meta.u_entropy_298 if phase == anchor_phase else None,
                       stated_formation=meta.stated_formation
                       if phase == (anchor_phase or present[0]) else (),
                       notes=meta.notes + tuple(notes))
        out.append(_with_cp(Table(meta=part, data=rows)))
    return out, []


def _with_cp(table: Table) -> Table:
    """``table``, with Cp derived from its H − H298 column when it has no Cp at all."""
    d = table.data
    if not len(d) or d.given("Cp").any() or d.given("dH").sum() < 3:
        return table
    m = d.given("dH") & np.isfinite(d["T"])
    u = d["u_dH"][m]
    got = cp_from_increments(d["T"][m], d["dH"][m], u if np.all(np.isfinite(u)) else None)
    if got is None:
        return table
    cp, degree, rms = got
    full = np.array(d["Cp"])
    full[m] = cp
    d = d.with_columns(Cp=full)
    note = (f"Cp derived from the H-H298 column (an enthalpy-increment table): the derivative of "
            f"a least-squares polynomial with Cp of degree {degree} in T, rms residual "
            f"{rms:.3g} J/mol")
    return Table(meta=replace(table.meta, notes=table.meta.notes + (note,), derived=("Cp",)),
                 data=d)
