"""Evaluated tables: Cp, H − H298, S, −(G − H298)/T and H at standard temperatures.

For every species, at 298.15 K and then every ``step`` kelvin (or a given grid) over its
range of use, with the standard uncertainties of the fit and a flag for rows outside the
data (extrapolated). A phase linked to others by transitions also has a row at each of its
transition temperatures, and ``stable`` says where it is the stable phase; the stable rows
of all the phases of a species, in order of temperature, make the table published
thermochemical tables show, with H − H298 and S just below and just above each transition
(``stable_rows``). ΔfH°, ΔfG° and log10 Kf (library/formation.py) are given where the
species' elements have reference states. ``release.tables`` writes them as Parquet and CSV.
"""

from collections.abc import Mapping

import numpy as np

from ..core.constants import REFERENCE_TEMPERATURE
from ..physics import forms
from . import document as library
from .entries import by_id as entries_by_id
from .formation import COLUMNS as FORMATION
from .formation import Formation

COLUMNS = ("id", "phase", "T", "Cp", "u_Cp", "H_minus_H298", "u_H", "S", "u_S", "gef", "H",
           "dfH", "u_dfH", "dfG", "u_dfG", "log10Kf", "u_log10Kf", "stable", "extrapolated")
TEXT = ("id", "phase")
FLAGS = ("stable", "extrapolated")
HEADERS = {"gef": "gef = -(G-H298)/T"}  # the Gibbs energy function
UNITS = {"T": "K", "Cp": "J/(mol*K)", "u_Cp": "J/(mol*K)", "H_minus_H298": "J/mol",
         "u_H": "J/mol", "S": "J/(mol*K)", "u_S": "J/(mol*K)", "gef": "J/(mol*K)", "H": "J/mol",
         "dfH": "J/mol", "u_dfH": "J/mol", "dfG": "J/mol", "u_dfG": "J/mol", "log10Kf": "1",
         "u_log10Kf": "1"}


def grid(t_min, t_max, step=100.0, points=None, extra=()):
    """298.15 K (when in range), then every ``step`` K inside [t_min, t_max], ends and the
    ``extra`` temperatures inside included."""
    if points is not None:
        t = np.asarray(sorted(points), dtype=float)
        return t[(t >= t_min) & (t <= t_max)]
    t = np.arange(np.ceil(t_min / step) * step, t_max + step, step)
    t = np.concatenate([[t_min], t[(t > t_min) & (t < t_max)], [t_max],
                        [x for x in extra if t_min <= x <= t_max]])
    if t_min <= REFERENCE_TEMPERATURE <= t_max:
        t = np.append(t, REFERENCE_TEMPERATURE)
    return np.unique(t)


def transitions_of(transitions) -> dict:
    """{species id: the transitions into or out of it, in their order}: what ``species_rows``
    needs of a library's transitions, looked up once instead of scanned per species."""
    out = {}
    for x in transitions:
        out.setdefault(x["from"], []).append(x)
        if x["to"] != x["from"]:
            out.setdefault(x["to"], []).append(x)
    return out


def stable_interval(sp, transitions=()) -> tuple:
    """(T_lo, T_hi) [K] where the phase of entry ``sp`` is the stable one: between the
    transitions into and out of it, else its whole range of use."""
    lo, hi = sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"]
    for x in transitions:
        if x["to"] == sp["id"]:
            lo = x["temperature"]
        if x["from"] == sp["id"]:
            hi = x["temperature"]
    return lo, hi


def species_rows(sp, step=100.0, points=None, transitions=(), formation=None) -> dict:
    """Columns of the evaluated table of one library species entry; ``transitions`` those of
    the library (rows at the entry's transition temperatures, and where it is stable);
    ``formation`` the library's Formation (formation properties, NaN where there are none:
    no reference state for an element, or no reference phase in range)."""
    return with_formation(own_rows(sp, step, points, transitions), sp["id"], formation)


def own_rows(sp, step=100.0, points=None, transitions=()) -> dict:
    """``species_rows`` without the formation properties (NaN): what the entry alone gives,
    so that it can be evaluated where the species was fitted."""
    return own_rows_of([sp], step, points, {sp["id"]: transitions})[sp["id"]]


def own_rows_of(entries, step=100.0, points=None, transitions=None) -> dict:
    """{id: ``own_rows``} of library species ``entries`` (``transitions``: {id: its
    transitions}, as ``transitions_of`` gives them), their polynomials evaluated in one pass
    (library.document.evaluate_entries: the same numbers as one by one)."""
    transitions = transitions or {}
    grids = []
    for sp in entries:
        mine = [x["temperature"] for x in transitions.get(sp["id"], ())
                if sp["id"] in (x["from"], x["to"])]
        grids.append(grid(sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"], step, points,
                          mine))
    # H(298.15 K) of the entries that count H − H298 from their own coefficients
    # (library.enthalpy_zero), evaluated with the rest
    own_zero = [sp for sp in entries if not sp.get("anchor")]
    evs = library.evaluate_entries(list(zip(entries, grids)))
    at_zero = forms.evaluate_forms([(sp["form"], library.ranges_of(sp), [REFERENCE_TEMPERATURE])
                                    for sp in own_zero], ("H",))
    zeros = {sp["id"]: float(ev["H"][0]) for sp, ev in zip(own_zero, at_zero)}
    out = {}
    for sp, t, ev in zip(entries, grids, evs):
        h298 = zeros[sp["id"]] if sp["id"] in zeros else library.enthalpy_zero(sp)
        lo, hi = stable_interval(sp, transitions.get(sp["id"], ()))
        nothing = np.full(len(t), np.nan)
        out[sp["id"]] = {
            "id": [sp["id"]] * len(t), "phase": [sp.get("phase", "")] * len(t), "T": t,
            "Cp": ev["Cp"], "u_Cp": ev["u_Cp"], "H_minus_H298": ev["H"] - h298,
            "u_H": ev["u_H"], "S": ev["S"], "u_S": ev["u_S"], "gef": -(ev["G"] - h298) / t,
            "H": ev["H"], **{k: nothing for k in FORMATION},
            "stable": (t >= lo) & (t <= hi),
            "extrapolated": ev["extrapolated"].astype(bool)}
    return out


def pack_rows(rows_by_id: dict) -> dict:
    """The ``own_rows`` of several species as one block: every numeric column concatenated
    (a few arrays instead of some thirty per species: cheap to keep and to pickle), each
    species' id, phase and where its rows end. ``unpack_rows`` gives them back."""
    ids = sorted(rows_by_id)
    numeric = [c for c in COLUMNS if c not in TEXT]
    return {"ids": tuple(ids),
            "phases": tuple(rows_by_id[i]["phase"][0] if len(rows_by_id[i]["T"]) else ""
                            for i in ids),
            "ends": np.cumsum([len(rows_by_id[i]["T"]) for i in ids], dtype=np.int64),
            "columns": {c: np.concatenate([np.asarray(rows_by_id[i][c]) for i in ids])
                        if ids else np.zeros(0) for c in numeric}}


def spill_rows(block: dict, spill) -> dict:
    """A ``pack_rows`` block with its numeric columns written to ``spill`` (core.spill.Spill):
    each species' rows one record, all its columns after one another, read back at once;
    only the columns' dtypes and each record's (offset, size) are held."""
    cols = block["columns"]
    ends = block["ends"].tolist()
    n = ends[0] if ends else 0
    if n and ends == list(range(n, n * len(ends) + 1, n)):
        # every species the same number of rows (a catalogue's grid): the records are the
        # rows of one array of bytes, each column's bytes side by side, written at once
        records = np.concatenate([np.ascontiguousarray(v).view(np.uint8).reshape(len(ends), -1)
                                  for v in cols.values()], axis=1)
        offset, _ = spill.put(records)
        size = records.shape[1]
        where = [(offset + k * size, size) for k in range(len(ends))]
    else:
        where = spill.put_many(b"".join(np.ascontiguousarray(v[start:end]).tobytes()
                                        for v in cols.values())
                               for start, end in zip([0] + ends[:-1], ends))
    return {**block, "columns": {c: v.dtype for c, v in cols.items()}, "spill": spill,
            "spilled": where}


class PackedRows(Mapping):
    """{species id: its own_rows} of ``pack_rows`` blocks, each species' rows made when they
    are asked for (numeric columns are views of the block's, or read from the spill of a
    ``spill_rows`` block): a build holds its evaluated tables packed until they are written
    (all unpacked at once, some 2 KB of small objects per species)."""

    def __init__(self, blocks):
        self._blocks = tuple(blocks)
        self._where = {sid: (b, k) for b, block in enumerate(self._blocks)
                       for k, sid in enumerate(block["ids"])}

    def __getitem__(self, sid: str) -> dict:
        b, k = self._where[sid]
        block = self._blocks[b]
        start, end = (int(block["ends"][k - 1]) if k else 0), int(block["ends"][k])
        phase = block["phases"][k]
        rows = {"id": [sid] * (end - start), "phase": [phase] * (end - start)}
        if "spilled" not in block:
            return {**rows, **{c: v[start:end] for c, v in block["columns"].items()}}
        record, at, n = block["spill"].get(*block["spilled"][k]), 0, end - start
        for c, dtype in block["columns"].items():       # COLUMNS order
            rows[c] = np.frombuffer(record, dtype=dtype, count=n, offset=at)
            at += n * dtype.itemsize
        return rows

    def read_only(self) -> "PackedRows":
        """The same rows for another process (core.spill.dumps_across): the places of the
        spilled records held compact (core.spill.Places)."""
        from ..core.spill import Places

        return PackedRows({**b, "spilled": Places(b["spilled"])} if "spilled" in b else b
                          for b in self._blocks)

    def __contains__(self, sid) -> bool:
        return sid in self._where        # (Mapping's own would unpack the species' rows)

    def __iter__(self):
        return iter(self._where)

    def __len__(self) -> int:
        return len(self._where)


def unpack_rows(*blocks) -> PackedRows:
    """{species id: its rows} of ``pack_rows`` blocks, in their order (a read-only mapping
    that unpacks each species when asked for; numeric columns are views)."""
    return PackedRows(blocks)


def with_formation(rows: dict, sid: str, formation=None) -> dict:
    """``own_rows`` of species ``sid`` with the formation properties of the library's
    Formation filled in (unchanged when it has none)."""
    made = formation.at(sid, rows["T"]) if formation is not None else None
    return {**rows, **{k: made[k] for k in FORMATION}} if made else rows


def stable_rows(doc, name, step=100.0) -> dict:
    """The table of species ``name`` across its phases: at each temperature the stable
    phase (named in 'phase'), both phases at a transition (below, then above)."""
    links, ids = library.chain(doc.get("transitions", []), name)
    by_id = entries_by_id(doc)
    made = Formation(doc)
    parts = [species_rows(by_id[i], step, None, links, made) for i in ids if i in by_id]
    keep = [np.asarray(p["stable"]) for p in parts]
    out = {c: np.concatenate([np.asarray(p[c])[k] for p, k in zip(parts, keep)])
           for c in COLUMNS}
    order = np.argsort(out["T"], kind="stable")       # phases in order: below, then above
    return {c: v[order] for c, v in out.items()}
