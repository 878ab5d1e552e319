"""Ingest of published coefficient sets (source.json "coefficient_sets").

A coefficient-set file is a CSV of our own layout, one row per temperature range::

    species,formula,phase,form,T_min [K],T_max [K],c1,c2,c3,c4,c5,c6,c7,c8,c9,geometry
    CO2,CO2,g,nasa7,200,1000,2.35677352,8.98459677E-03,...,9.90105222,,,linear

``form`` is nasa7, nasa9 or shomate (physics/forms.py); c1, c2, ... hold the form's
coefficients in its own order (nasa7: a1..a7; nasa9: a1..a7, b1, b2; shomate: A..H) and the
cells after them stay empty. The temperature columns carry their unit in brackets;
coefficients are plain numbers (a Fortran ``D`` exponent is read as ``E``). ``geometry``
(monatomic, linear, nonlinear) is optional. The rows of one species and phase make one set.

Each set becomes a Table: the set evaluated on a grid over its ranges (Cp, H − H298, S), so
that the physics, smoothness and reconcile checks that tables get apply to it unchanged;
``meta.published`` keeps the coefficients exactly as written. A bad cell holds back its own
set (a SET-CELL finding naming file, line and column); the other sets of the file go on.
"""

import csv
import re
from collections import defaultdict

import numpy as np

from ..core import chemistry, constants, phases, units
from ..core.errors import InputError
from ..core.findings import clip, finding
from ..core.limits import MAX_ROWS
from ..core.records import PublishedSet, Table, TableMeta
from ..core.rows import Rows
from ..physics.forms import FORMS, evaluate_ranges, range_of
from . import csvtable

REQUIRED = ("species", "formula", "phase", "form", "T_min", "T_max")
COEFFICIENT_COLUMNS = tuple(f"c{k}" for k in range(1, 10))
GEOMETRIES = ("monatomic", "linear", "nonlinear")
#: most ranges of one set (the library holds at most four)
MAX_RANGES = 4
#: grid spacing [K] at which a set is evaluated into its table
GRID_STEP = 50.0
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eEdD][+-]?\d+)?$")
_SPECIES = re.compile(r"^[A-Za-z0-9][A-Za-z0-9+_,-]{0,63}$")


def number(text: str) -> float:
    """The float a coefficient cell spells, exactly (a Fortran D exponent read as E);
    ValueError for anything else (no NaN, no infinity, no thousands separators)."""
    text = text.strip()
    if not _NUMBER.match(text):
        raise ValueError(text)
    value = float(text.replace("D", "E").replace("d", "e"))
    if not np.isfinite(value):
        raise ValueError(text)
    return value


def _header(cells, file):
    """({column name: index}, {name: temperature unit}, findings) of the header row."""
    where, units_of, problems = {}, {}, []
    for k, cell in enumerate(cells):
        name, _, rest = cell.strip().partition("[")
        name = name.strip()
        if name in where:
            problems.append(finding("SET-LAYOUT", f"column '{name}' appears twice", file=file,
                                    line=1, column=cell, expected="each column once"))
        where[name] = k
        if name in ("T_min", "T_max"):
            unit = rest.rstrip().rstrip("]").strip()
            try:
                units.check_unit(unit, "temperature")
                units_of[name] = unit
            except InputError as exc:
                problems.append(finding("SET-LAYOUT", f"column '{cell.strip()}' needs a "
                                        f"temperature unit in brackets: {exc.what}", file=file,
                                        line=1, column=cell, expected="e.g. 'T_min [K]'"))
    missing = [c for c in REQUIRED + ("c1",) if c not in where]
    if missing:
        problems.append(finding("SET-LAYOUT", "missing column(s) " + ", ".join(missing),
                                file=file, line=1, seen=clip(",".join(cells)),
                                expected=", ".join(REQUIRED) + ", c1 ... c9"))
    return where, units_of, problems


def _row(cells, line, where, units_of, file):
    """(dict of the row's values, findings) of one range row."""
    got, problems = {}, []

    def bad(column, why, expected):
        problems.append(finding("SET-CELL", why, file=file, line=line, column=column,
                                seen=clip(cell(column)), expected=expected))

    def cell(column):
        k = where.get(column)
        return cells[k].strip() if k is not None and k < len(cells) else ""

    got["species"], got["formula"], got["phase"] = cell("species"), cell("formula"), cell("phase")
    got["form"], got["geometry"] = cell("form"), cell("geometry") or None
    if not _SPECIES.match(got["species"]):
        bad("species", "the species name is empty or holds characters other than letters, "
            "digits and + _ , -", "a name such as CO2")
    if not phases.is_phase(got["phase"]):
        bad("phase", f"'{got['phase']}' is not a phase", "g, l, cr or cr-<form>")
    try:
        got["composition"] = chemistry.composition(got["formula"])
    except InputError as exc:
        bad("formula", exc.what, exc.expected or "a formula such as CO2")
    if got["geometry"] is not None and got["geometry"] not in GEOMETRIES:
        bad("geometry", f"'{got['geometry']}' is not a geometry", ", ".join(GEOMETRIES))
    form = FORMS.get(got["form"])
    if form is None:
        bad("form", f"'{got['form']}' is not a coefficient form", ", ".join(FORMS))
    for name in ("T_min", "T_max"):
        try:
            value = units.to_si(np.array([number(cell(name))]), units_of[name], "temperature")[0]
            if not value > 0:
                raise ValueError(cell(name))
            got[name] = float(value)
        except (ValueError, InputError, KeyError):
            bad(name, "not a temperature above absolute zero", "a plain number, e.g. 1000")
    if "T_min" in got and "T_max" in got and not got["T_min"] < got["T_max"]:
        bad("T_max", f"the range ends at {got['T_max']:g} K, not above its start "
            f"{got['T_min']:g} K", f"> {got['T_min']:g} K")
    n = form.n_coefficients if form else 0
    coefficients = []
    for k, name in enumerate(COEFFICIENT_COLUMNS):
        text = cell(name)
        if k >= n:
            if text and form:
                bad(name, f"{got['form']} has {n} coefficients; this cell must stay empty",
                    "an empty cell")
            continue
        try:
            coefficients.append(number(text))
        except ValueError:
            bad(name, f"coefficient {k + 1} of {n} is not a number", "a plain number, e.g. "
                "3.5E-03" if text else f"all {n} coefficients of {got['form']}")
    got["coefficients"] = tuple(coefficients)
    return got, problems


def parse_sets(text: str, file: str) -> tuple[dict, dict, list]:
    """({(species, phase): [(line, row dict), ...]} of the sets read whole, {column:
    temperature unit}, findings): a set with any bad cell, or whose rows disagree on formula
    or form, is left out."""
    rows = list(csv.reader(text.splitlines()))
    numbered = [(k + 1, r) for k, r in enumerate(rows) if any(c.strip() for c in r)]
    if not numbered:
        return {}, {}, [finding("TAB-EMPTY", "the coefficient-set file is empty", file=file)]
    (_, head), body = numbered[0], numbered[1:]
    if len(body) > MAX_ROWS:
        return {}, {}, [finding("TAB-TOO-LARGE", f"{len(body)} rows", file=file,
                                expected=f"at most {MAX_ROWS}")]
    where, units_of, problems = _header(head, file)
    if problems:
        return {}, {}, problems
    sets, bad = defaultdict(list), set()
    for line, cells in body:
        got, more = _row(cells, line, where, units_of, file)
        key = (got["species"], got["phase"])
        sid = f"{key[0]}({key[1]})"
        problems += [f.located(message=f"{sid}: {f.message}").about_species(sid) for f in more]
        if more:
            bad.add(key)
        sets[key].append((line, got))
    for key, items in sets.items():
        first, sid = items[0][1], f"{key[0]}({key[1]})"
        for line, got in items[1:]:
            for column in ("formula", "form", "geometry"):
                if got[column] != first[column]:
                    problems.append(finding(
                        "SET-CELL", f"{sid}: {column} '{got[column]}' differs from "
                        f"'{first[column]}' on line {items[0][0]} of the same set", file=file,
                        line=line, column=column, expected=str(first[column])).about_species(sid))
                    bad.add(key)
        if len(items) > MAX_RANGES:
            problems.append(finding("SET-CELL", f"{sid}: the set has {len(items)} ranges",
                                    file=file, line=items[MAX_RANGES][0], column="T_min",
                                    expected=f"at most {MAX_RANGES} ranges").about_species(sid))
            bad.add(key)
    return {k: v for k, v in sets.items() if k not in bad}, units_of, problems


def grid(published: PublishedSet) -> np.ndarray:
    """Temperatures [K] a set is evaluated at: every range from end to end at about
    GRID_STEP, plus 298.15 K when the set holds it."""
    parts = [np.linspace(a, b, int(np.ceil((b - a) / GRID_STEP)) + 1)
             for a, b, _, _ in published.ordered]
    t = np.concatenate(parts + [[constants.REFERENCE_TEMPERATURE]])
    lo, hi = published.ordered[0][0], max(r[1] for r in published.ordered)
    return np.unique(t[(t >= lo) & (t <= hi)])


def evaluate(published: PublishedSet, pressure: float, phase: str) -> tuple[Rows, dict]:
    """(table rows of the set evaluated on its grid, {'h298', 's298'} read from the set at
    298.15 K): H − H298 counted from the set's own H(298.15 K); S moved to 1 bar for a gas
    tabulated at another pressure."""
    ordered = published.ordered
    ranges = [(a, b, c) for a, b, c, _ in ordered]
    t = grid(published)
    props = evaluate_ranges(ranges, np.append(t, constants.REFERENCE_TEMPERATURE), published.form)
    h298, s298 = props["H"][-1], props["S"][-1]
    s = props["S"][:-1]
    if phases.is_gas(phase):
        s, _ = csvtable.at_one_bar(s, pressure, "S")
        s298, _ = csvtable.at_one_bar(s298, pressure, "S")
    index = range_of(t, published.breakpoints)
    rows = Rows({"line": np.asarray([ordered[k][3] for k in index], dtype="int64"),
                 "T": t, "Cp": props["Cp"][:-1], "u_Cp": np.nan,
                 "dH": props["H"][:-1] - h298, "S": s, "u_dH": np.nan,
                 "u_S": np.nan, "gef": np.nan})
    return rows, {"h298": float(h298), "s298": float(s298)}


def repair_wanted(entry: dict, species: str) -> bool:
    """True when the source.json entry of a set file asks to repair ``species``' set:
    ``"repair": true`` for every set of the file, or a list of species names."""
    wanted = entry.get("repair", False)
    return wanted is True or (isinstance(wanted, list) and species in wanted)


def reading(encoding: str, units_of: dict) -> dict:
    """How a coefficient-set file was read, in the shape of a table's reading record."""
    return {"encoding": encoding, "delimiter": "comma", "decimal_mark": "point",
            "comment_lines": [], "header_line": 1, "units_row": None,
            "columns": [{"header": f"{name} [{unit}]", "quantity": "T", "unit": unit,
                         "from": "header"} for name, unit in sorted(units_of.items())],
            "layout": "coefficient sets"}


def set_tables(text: str, entry: dict, base: TableMeta) -> tuple[list, list]:
    """(tables, findings) of a coefficient-set file's text: one Table per set read whole;
    ``base`` carries the file's source, path, hash, size and encoding."""
    sets, units_of, problems = parse_sets(text, base.file)
    how = reading(base.reading.get("encoding") or "utf-8", units_of)
    tables = []
    for (species, phase), items in sorted(sets.items()):
        first = items[0][1]
        published = PublishedSet(
            form=first["form"], ranges=tuple((g["T_min"], g["T_max"], g["coefficients"])
                                             for _, g in items),
            lines=tuple(line for line, _ in items), repair=repair_wanted(entry, species),
            keep_breakpoints=bool(entry.get("keep_breakpoints", True)))
        data, anchors = evaluate(published, base.source.standard_pressure, phase)
        comp = first["composition"]
        notes = ()
        if phases.is_gas(phase) and base.source.standard_pressure != constants.STANDARD_PRESSURE:
            notes = (csvtable.at_one_bar(0.0, base.source.standard_pressure, "S of the set")[1],)
        meta = TableMeta(
            source=base.source, file=base.file, species=species, formula=first["formula"],
            phase=phase, geometry=first["geometry"], molar_mass=comp.molar_mass,
            atoms=comp.atoms, enthalpy_of_formation_298=anchors["h298"],
            entropy_298=anchors["s298"], sha256=base.sha256, size=base.size,
            columns=base.columns, notes=notes, index=base.index, shared=True,
            published=published, reading=how)
        tables.append(Table(meta=meta, data=data))
    return tables, problems
