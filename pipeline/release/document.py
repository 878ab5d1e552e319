"""Export stage: the curated library as JSON and Parquet, schema-checked, atomic, deterministic.

``library_document`` turns fitted species into the library.json document;
``write_outputs`` checks it against schemas/library.schema.json and writes
library.json, library.parquet and findings.json. Floats are written with
Python's shortest round-trip repr, keys in a fixed order, no timestamps, so the
same inputs give byte-identical files.
"""

import json
import math
from array import array
from itertools import islice
from operator import methodcaller

from .. import __version__
from ..core import constants, schemas
from ..core.errors import OutputError
from ..core.lazy import Derived, LazyList, LazyMapping
from ..library import budget
from ..library.entries import Entries, compact
from .held import briefs_of, in_order

NOTICE = ("Curated property data for engineering use must be reviewed by a qualified person "
          "before use in design. Intervals marked 'extrapolated' lie outside the source data. "
          "Local codes and licensed engineering practice govern.")

UNITS = {"temperature": "K", "enthalpy": "J/mol", "entropy": "J/(mol*K)",
         "heat_capacity": "J/(mol*K)", "pressure": "Pa", "molar_mass": "g/mol",
         "coefficients": "published kelvin form named by 'form'; Cp/R, H/(RT), S/R dimensionless"}


UNCERTAINTY_CONVENTION = (
    "standard uncertainties (k = 1) after JCGM 100:2008: the coefficient covariance propagates "
    "the stated u(Cp), widened by the Birge ratio squared when above 1, never narrowed (with "
    "no u(Cp) stated, scaled by the residual scatter); plus the model error of the form per "
    "range; plus, in extrapolated intervals, the extrapolation model's uncertainty, integrated "
    "into H and S; shares added in quadrature")


PUBLISHED_BASIS = ("a published coefficient set adopted as published: no covariance; H and S "
                   "carry the uncertainty of their anchors only")


def extrapolated_intervals(fit) -> list:
    """Intervals of the range of use outside the data, with how they were filled."""
    out = []
    models = {(round(e["t_min"], 6), round(e["t_max"], 6)): e for e in fit.extrapolated}
    lo, hi = fit.ranges[0].t_min, fit.ranges[-1].t_max
    for a, b in ((lo, fit.data_t_min), (fit.data_t_max, hi)):
        if b - a <= 1e-9:
            continue
        e = models.get((round(a, 6), round(b, 6)))
        out.append({"t_min": a, "t_max": b, "model": e["model"] if e else "polynomial",
                    "holdout_error": e["holdout_error"] if e else None,
                    "u_rel_end": e["u_rel_end"] if e else None,
                    "u_rel_start": e["u_rel_start"] if e else None})
    return out


def species_entry(fitted) -> dict:
    """library.json entry of one FittedSpecies."""
    meta, fit = fitted.table.meta, fitted.fit
    sources = [_source_ref(u) for u in fitted.uses]
    own = fitted.anchor.get("basis", "own") == "own"
    entry = {
        "id": meta.species_id,
        "formula": meta.formula,
        "phase": meta.phase,
        "geometry": meta.geometry,
        "molar_mass": meta.molar_mass,
        "enthalpy_of_formation_298": meta.enthalpy_of_formation_298 if own else None,
        "entropy_298": meta.entropy_298 if own else None,
        "anchor_uncertainty": budget.stated_anchor_u(
            meta.formula, meta.enthalpy_of_formation_298, meta.u_enthalpy_of_formation_298,
            meta.u_entropy_298) if own else None,
        "form": fit.form,
        "ranges": [{"t_min": r.t_min, "t_max": r.t_max, "coefficients": list(r.coefficients)}
                   for r in fit.ranges],
        "breakpoints": list(fit.breakpoints),
        "breakpoint_choice": fit.breakpoint_choice,
        "data_range": {"t_min": fit.data_t_min, "t_max": fit.data_t_max},
        "extrapolated": extrapolated_intervals(fit),
        "quality": {"cp_max_rel_dev": fit.cp_max_rel_dev, "cp_rms_rel_dev": fit.cp_rms_rel_dev,
                    "h_max_dev": fit.h_max_dev, "s_max_dev": fit.s_max_dev,
                    "points": fit.points, "worst_t": fit.worst_t, "weighting": fit.weighting,
                    "acceptance": dict(fit.acceptance)},
        "uncertainty": {"basis": PUBLISHED_BASIS if fit.acceptance.get("rule") == "published"
                        else "Cp/R = sum over p of c[j][p] * (T / 1000 K)^p in range j; "
                             "covariance of c, ranges stacked",
                        "powers": list(fit.powers),
                        "covariance": [list(row) for row in fit.covariance],
                        "convention": UNCERTAINTY_CONVENTION,
                        "covariance_scale": fit.covariance_scale,
                        "birge_ratio": fit.birge_ratio,
                        "model_error": [dict(m) for m in fit.model_error]},
        "sources": sources,
        "excluded": [{"file": f, "line": int(ln), "code": c} for f, ln, c in fitted.excluded],
        "conversions": list(meta.notes),
        "findings": [f.to_dict() for f in sorted(fitted.findings, key=lambda f: f.sort_key())],
    }
    if fitted.anchor:
        entry["anchor"] = dict(fitted.anchor)
    if fit.origin:
        entry["origin"] = dict(fit.origin)
    return entry


def transition_entries(chains, ids) -> list:
    """library.json 'transitions': every transition of ``chains`` whose two phases are among
    the species ``ids`` of the library, by species and temperature."""
    out = []
    for c in sorted(chains, key=lambda c: c.species):
        for x in c.transitions:
            if x.lower_id in ids and x.upper_id in ids:
                out.append({"species": c.species, "from": x.lower_id, "to": x.upper_id,
                            "temperature": x.temperature, "enthalpy": x.enthalpy,
                            "u_enthalpy": x.u_enthalpy, "entropy": x.entropy,
                            "source": x.source.id, "citation": x.source.citation})
    return out


def non_finite(doc, path="") -> str:
    """Path of the first NaN or infinity in a JSON-like document, or '' when all are finite
    (JSON cannot carry them, and a library must never hold them). A document that orjson
    writes and reads back as itself holds none (orjson writes both as null, which reads back
    as None); otherwise the json module's C encoder answers (a tuple reads back as a list),
    and the walk names the place of a bad one."""
    import orjson

    try:
        if orjson.loads(orjson.dumps(doc)) == doc:
            return ""
    except (TypeError, ValueError):       # (orjson's errors are ValueError and TypeError)
        pass
    try:
        json.dumps(doc, allow_nan=False, check_circular=False)
        return ""
    except (ValueError, TypeError):
        return _first_non_finite(doc, path)


def _first_non_finite(doc, path: str) -> str:
    if isinstance(doc, float):
        return "" if math.isfinite(doc) else (path or "(top)")
    if isinstance(doc, dict):
        items = doc.items()
    elif isinstance(doc, (list, tuple)):
        items = enumerate(doc)
    else:
        return ""
    for key, value in items:
        hit = _first_non_finite(value, f"{path}/{key}")
        if hit:
            return hit
    return ""


def _source_ref(use) -> dict:
    meta = use.meta
    return {"source": meta.source.id, "file": meta.file, "sha256": meta.sha256,
            "used": use.rows > 0, "rows": use.rows, "t_min": use.t_min, "t_max": use.t_max,
            "priority": meta.source.priority, "citation": meta.source.citation,
            "reading": dict(meta.reading)}


def library_document(fitted, quarantined, inputs_sha256: str, settings: dict,
                     entries=None, chains=(), spill=None, outlines=None, digests=None) -> dict:
    """The whole library.json document.

    ``quarantined`` is a sequence of (TableMeta, findings) for tables left out; ``entries``
    optionally maps species ids to their species_entry, already made, or to its compact
    JSON, as bytes or as its (offset, size) in ``spill`` (core.spill.Spill): the species are
    then held as library.entries.Entries, knowing their outlines when ``outlines`` maps
    every species id to the compact JSON of its library.entries.outline, and with
    ``digests`` (species id: sha256 of the compact JSON given) their keys known
    (library.entries.Entries.key); ``chains`` the phase chains of the build (their
    transitions between fitted phases are listed).
    """
    entries = entries or {}
    ordered, briefs = in_order(fitted), briefs_of(fitted)
    ids = {b.species_id for b in briefs}
    made = [(b.species_id, entries.get(b.species_id) or species_entry(ordered[k]))
            for k, b in enumerate(briefs)]
    if any(not isinstance(e, dict) for _, e in made):     # (an entry's formula is its table's)
        known = outlines or {}
        species = Entries(((sid, compact(e) if isinstance(e, dict) else e) for sid, e in made),
                          spill, [b.formula for b in briefs],
                          [known[sid] for sid, _ in made]
                          if all(sid in known for sid, _ in made) else None,
                          [digests.get(sid) if isinstance(e, bytes | tuple) else None
                           for sid, e in made] if digests else None)
    else:
        species = [e for _, e in made]
    return {
        "library_format": 1,
        "notice": NOTICE,
        "gas_constant": constants.GAS_CONSTANT,
        "reference_temperature": constants.REFERENCE_TEMPERATURE,
        "standard_pressure": constants.STANDARD_PRESSURE,
        "units": UNITS,
        "build": {"pipeline_version": __version__, "inputs_sha256": inputs_sha256,
                  "settings": settings, "manifest": "manifest.json"},
        "species": species,
        "transitions": transition_entries(chains, ids),
        "quarantined": [
            {"id": meta.species_id, "source": meta.source.id, "file": meta.file,
             "reasons": [f.to_dict() for f in sorted(reasons, key=lambda f: f.sort_key())]}
            for meta, reasons in sorted(quarantined, key=lambda q: (q[0].source.id, q[0].file))
        ],
    }


#: items of a LazyList checked against a schema at a time
CHECKED_AT_ONCE = 512


def require_valid(doc: dict, name: str, what: str, later=()) -> None:
    """Raise OutputError naming the first field where ``doc`` breaks schemas/``name``. Its
    top-level LazyLists (core.lazy) are checked CHECKED_AT_ONCE items at a time, never made
    all at once, except those named in ``later``, which the caller checks as it reads them
    (``_read_and_checked``); its Rendered lists were checked when they were made
    (``render_list``); the rest of the document once."""
    lazy = {k: v for k, v in doc.items() if isinstance(v, LazyList)}
    for key in later:
        if key in doc:
            doc = {**doc, key: []}
            lazy.pop(key, None)
    done = {k for k, v in doc.items() if isinstance(v, (Rendered, Pieced))}
    errors = schemas.errors_of({**doc, **{k: [] for k in lazy.keys() | done}}
                               if lazy or done else doc, name)
    if errors:
        e = errors[0]
        raise OutputError(f"{what} would break schemas/{name} at {schemas.where(e)}: "
                          f"{e.message} ({len(errors)} problem(s))")
    for key, items in lazy.items():
        for start in range(0, len(items), CHECKED_AT_ONCE):
            _require_part(items[start:start + CHECKED_AT_ONCE], name, key, start, what)


def _require_part(part: list, name: str, key: str, start: int, what: str) -> None:
    """OutputError unless items ``start`` onwards of list ``key`` of a document of
    schemas/``name`` follow it."""
    errors = schemas.part_errors(name, key, part, start)
    if errors:
        path, message = errors[0]
        raise OutputError(f"{what} would break schemas/{name} at {path}: {message} "
                          f"({len(errors)} problem(s) in {key} {start} to "
                          f"{start + CHECKED_AT_ONCE - 1})")


class Rendered:
    """The top-level list of a document, checked against its schema and written as
    ``json_chunks`` writes it (from its "[" to its "]") ahead of the rest of the document
    (``render_list``); ``json_chunks`` writes these bytes again, read back from the
    core.spill.Spill that holds them, and ``require_valid`` does not check it again.
    ``placed`` is the offset and size of each item (without its separator) from the start
    of these bytes, one after the other (an array of 8-byte integers); ``json_chunks`` sets
    ``start``, where they begin in the file."""

    def __init__(self, spill, where: list, items, placed=()):
        self._spill, self._where, self.items = spill, where, items
        self.placed, self.start = placed, None

    def __len__(self) -> int:
        return len(self.items)

    def pieces(self):
        """Its bytes, a piece at a time."""
        for offset, size in self._where:
            yield self._spill.get(offset, size)


def render_list(items, name: str, key: str, what: str, spill, taken=None) -> Rendered:
    """The non-empty top-level list ``items`` (a list or core.lazy.LazyList) of the list
    ``key`` of a document of schemas/``name`` (``what`` names it in errors), checked and
    written into ``spill`` CHECKED_AT_ONCE items at a time, each item read once: the bytes
    ``json_chunks`` would write for it, made while another process writes other files.
    ``taken(i)`` gives the bytes of item ``i`` taken from the last release
    (release/reuse.py), or None: an item taken is neither read nor checked again."""
    trusted = getattr(items, "from_json", False)
    n, where, first, placed, at = len(items), [], b"[\n", array("q"), 0
    if not n:
        raise OutputError(f"/{key} of {what} is empty: nothing to render")
    for start in range(0, n, CHECKED_AT_ONCE):
        stop = min(n, start + CHECKED_AT_ONCE)
        got = [taken(j) for j in range(start, stop)] if taken else [None] * (stop - start)
        values = _read_and_checked(items, start, stop, got, name, key, what)
        out, at = [first], at + len(first)
        for j, piece in enumerate(got, start):
            if piece is None:
                if not trusted:
                    _written_as_read(values[j], f"/{key}/{j}")
                piece = _item_bytes(None, values[j], b"")
            placed += array("q", (at, len(piece)))
            sep = b",\n" if j + 1 < n else b"\n  ]"
            out += (piece, sep)
            at += len(piece) + len(sep)
        where += spill.put_many([b"".join(out)])
        first = b""
    return Rendered(spill, where, items, placed)


def _read_and_checked(items, start: int, stop: int, got: list, name: str, key: str,
                      what: str) -> dict:
    """{index: item} of the items ``start`` to ``stop`` of list ``key`` (of a document of
    schemas/``name``) not given in ``got`` (None there), read and checked against the
    schema (OutputError naming the first that breaks it)."""
    fresh = [j for j, piece in enumerate(got, start) if piece is None]
    if len(fresh) == stop - start:
        part = items[start:stop]
        _require_part(part, name, key, start, what)
        return dict(enumerate(part, start))
    values = {j: items[j] for j in fresh}
    if values:
        errors = schemas.part_errors(name, key, list(values.values()))
        if errors:
            path, message = errors[0]
            steps = path.split("/")
            if len(steps) > 1 and steps[0] == key and steps[1].isdigit():
                steps[1] = str(fresh[int(steps[1])])
            raise OutputError(f"{what} would break schemas/{name} at {'/'.join(steps)}: "
                              f"{message} ({len(errors)} problem(s) in the {len(fresh)} "
                              f"{key} items made anew of {start} to {stop - 1})")
    return values


class Pieced:
    """A top-level list of a document given as the bytes of its items, each as
    ``json_chunks`` writes an item (``_item_bytes`` without its separator), made or taken as
    ``pieces()`` gives them; ``json_chunks`` writes them and notes in ``placed`` where each
    lies in the file: its offset and size, one after the other (an array of 8-byte
    integers). The caller checked them."""

    def __init__(self, n: int, pieces):
        self._n, self._pieces, self.placed = n, pieces, array("q")

    def __len__(self) -> int:
        return self._n

    def pieces(self):
        return self._pieces()


def item_bytes(value) -> bytes:
    """One item of a top-level list as ``json_chunks`` writes it, without its separator
    (a Pieced list's piece)."""
    return _item_bytes(None, value, b"")


def require_valid_library(doc: dict) -> None:
    """OutputError unless ``doc`` follows schemas/library.schema.json."""
    require_valid(doc, "library.schema.json", "library.json")


def findings_document(findings) -> dict:
    """findings.json: every finding, sorted, with totals (acknowledged warnings not counted);
    each finding's dict is made as it is written (core.lazy.Derived)."""
    items = sorted(findings, key=lambda f: f.sort_key())
    counts = {s: sum(1 for f in items if f.severity == s and f.counts)
              for s in ("error", "warning", "info")}
    counts["acknowledged"] = sum(1 for f in items if not f.counts)
    return {"findings_format": 1, "notice": NOTICE, "counts": counts,
            "findings": Derived(items, methodcaller("to_dict"))}


def json_bytes(doc) -> bytes:
    """Deterministic JSON bytes of ``doc``: indented by two spaces, UTF-8, a final newline,
    written by orjson (25 times faster than the json module's indenting encoder); NaN and
    infinities refused (``json_chunks``, whose pieces these are)."""
    return b"".join(json_chunks(doc))


def json_chunks(doc):
    """The bytes of ``json_bytes(doc)`` in pieces: the items of a top-level list (the
    species of a library) or LazyMapping (core.lazy) one at a time, so that a large
    document is never held as one string. orjson writes NaN or an infinity as null, so
    each piece must read back as what was written (a null never equals a number); where one
    does not (such a number, or a tuple written as a list), ``non_finite`` decides, and a
    NaN or infinity is refused (OutputError naming where) before its piece is given out."""
    import orjson

    indent = orjson.OPT_INDENT_2
    lists = {k: v for k, v in doc.items() if isinstance(v, (list, LazyList, LazyMapping,
                                                            Rendered, Pieced))
             and len(v)} if isinstance(doc, dict) else {}
    marks = {k: f"\0thermoledger-list-{i}\0" for i, k in enumerate(lists)}
    head = {k: marks[k] if k in marks else _made(v) for k, v in doc.items()} \
        if isinstance(doc, dict) else doc       # (lazy values not marked are empty)
    _written_as_read(head, "")
    text = orjson.dumps(head, option=indent | orjson.OPT_APPEND_NEWLINE)
    if any(text.count(orjson.dumps(m)) != 1 for m in marks.values()):
        lists = {}                  # a value of the document is a mark: written whole
        doc = {k: _made(v) for k, v in doc.items()}
        _written_as_read(doc, "")
        text = orjson.dumps(doc, option=indent | orjson.OPT_APPEND_NEWLINE)
    at = 0                                    # bytes given so far
    for key, items in lists.items():
        before, text = text.split(orjson.dumps(marks[key]), 1)
        if isinstance(items, Rendered):       # its bytes made before
            yield before
            items.start = at = at + len(before)
            for piece in items.pieces():
                yield piece
                at += len(piece)
            continue
        pairs = isinstance(items, LazyMapping)
        head = before + (b"{\n" if pairs else b"[\n")
        yield head
        at += len(head)
        n, i = len(items), -1
        if isinstance(items, Pieced):
            for i, piece in enumerate(items.pieces()):
                sep = b",\n" if i + 1 < n else b"\n  ]"
                items.placed += array("q", (at, len(piece)))
                yield piece + sep
                at += len(piece) + len(sep)
        else:
            trusted = getattr(items, "from_json", False)
            source = iter(items.items() if pairs else items)
            while batch := list(islice(source, WRITTEN_AT_ONCE)):
                piece = _batch_bytes(batch, pairs, trusted, key, i + 1)
                i += len(batch)
                piece += b",\n" if i + 1 < n else (b"\n  }" if pairs else b"\n  ]")
                yield piece
                at += len(piece)
        if i + 1 != n:
            raise OutputError(f"/{key} gave {i + 1} items where it counted {n}")
    yield text


#: items of a top-level list or mapping that ``json_chunks`` writes with one call of orjson
WRITTEN_AT_ONCE = 256


def _batch_bytes(batch: list, pairs: bool, trusted: bool, key: str, first: int) -> bytes:
    """The items ``batch`` (values, or (name, value) pairs of a mapping) of the top-level
    list or mapping ``key``, the first of them its item ``first``, as ``json_chunks`` writes
    them, joined by their separators (the last one's not given): ``_item_bytes`` of each,
    made by one orjson call of them all (provenance.json has some 90 000 small items at
    10 000 species). Unless ``trusted``, none may hold a NaN or an infinity."""
    import orjson

    value = dict(batch) if pairs else batch
    if pairs and len(value) != len(batch):        # a repeated name: as written one by one
        return b",\n".join(_checked_item(name, v, trusted, key) for name, v in batch)
    text = orjson.dumps(value, option=orjson.OPT_INDENT_2)
    if not trusted and b"null" in text and orjson.loads(text) != value:  # (NaN is null)
        for k, item in enumerate(batch):
            name, v = item if pairs else (None, item)
            _written_as_read(v, f"/{key}/{name if pairs else first + k}")
    return b"  " + text[2:-2].replace(b"\n", b"\n  ")


def _checked_item(name, value, trusted: bool, key: str) -> bytes:
    if not trusted:
        _written_as_read(value, f"/{key}/{name}")
    return _item_bytes(name, value, b"")


def _item_bytes(name, value, sep: bytes) -> bytes:
    """One item of a top-level list (``name`` None) or map of a document as ``json_chunks``
    writes it: indented by two levels, followed by ``sep``."""
    import orjson

    return b"    " + (orjson.dumps(name) + b": " if name is not None else b"") + \
        orjson.dumps(value, option=orjson.OPT_INDENT_2).replace(b"\n", b"\n    ") + sep


def _made(value):
    """``value``, a LazyList, LazyMapping, Rendered or Pieced made whole (a list, a dict)."""
    if isinstance(value, Rendered):
        return list(value.items)
    if isinstance(value, Pieced):
        import orjson

        return [orjson.loads(piece) for piece in value.pieces()]
    if isinstance(value, LazyList):
        return list(value)
    return dict(value.items()) if isinstance(value, LazyMapping) else value


def _written_as_read(piece, path: str) -> None:
    """OutputError when ``piece`` (at ``path`` of its document) holds a NaN or an infinity:
    written by orjson, it would not read back as itself."""
    import orjson

    if orjson.loads(orjson.dumps(piece)) != piece:
        bad = non_finite(piece, path)
        if bad:
            raise OutputError(f"a document to write holds a number JSON cannot carry at {bad}")


#: the columns of library.parquet: (name, Table Schema type, description); the Data Package
#: descriptor (provenance.py) and the Parquet writer both read this list
LIBRARY_PARQUET_COLUMNS = [
    ("id", "string", "species id, formula(phase)"), ("formula", "string", ""),
    ("phase", "string", "g, l, cr or cr-<form>"), ("geometry", "string", ""),
    ("molar_mass", "number", "g/mol"), ("enthalpy_of_formation_298", "number", "J/mol"),
    ("entropy_298", "number", "J/(mol K), 1 bar; empty for a phase reached through transitions"),
    ("anchor_basis", "string", "own (ΔfH°, S° at 298.15 K) or transition"),
    ("anchor_temperature", "number", "K, where H and S are fixed"),
    ("anchor_enthalpy", "number", "J/mol, H at anchor_temperature"),
    ("anchor_entropy", "number", "J/(mol K), S at anchor_temperature"),
    ("enthalpy_zero", "number", "J/mol, H(298.15 K) of the phase stable there: zero of H-H298"),
    ("form", "string", "nasa7, nasa9, shomate"),
    ("range_index", "integer", ""), ("t_min", "number", "K"), ("t_max", "number", "K"),
    ("coefficients", "array", "published form named by 'form'"),
    ("data_t_min", "number", "K"), ("data_t_max", "number", "K"),
    ("cp_max_rel_dev", "number", ""), ("cp_rms_rel_dev", "number", ""),
    ("points", "integer", ""), ("extrapolated", "string", "JSON"),
    ("sources", "string", "JSON"), ("findings", "string", "JSON"),
]


#: the columns of library.parquet written dictionary-encoded (Parquet's default is every
#: column): those of few distinct values. Tried on every column, the encoding is given up
#: for the others when their dictionary grows past its page, and the rows of 10 000 species
#: took 23 instead of 18 ms and 2.36 instead of 2.04 MB
LIBRARY_DICTIONARY_COLUMNS = ("id", "formula", "phase", "geometry", "form", "anchor_basis")


#: rows of each row group of library.parquet (one row per species and range): a group is
#: made and written at a time, so a large library is never held as one Arrow table. A row
#: holds its species' sources and findings as JSON text, some 5 KB in Arrow while its group
#: is written: 16 Ki rows hold some 80 MB at once (64 Ki held 330 MB)
LIBRARY_ROW_GROUP = 16 * 1024


def library_parquet_chunks(doc: dict, check: bool = False, taken=None):
    """library.parquet in byte pieces as it is written (release.arrowmem.parquet_chunks): one
    row per species and range, in row groups of LIBRARY_ROW_GROUP rows, each made and
    written in turn; build metadata as key-value metadata. With ``check``, each species
    entry is checked against schemas/library.schema.json as it is read (``_read_and_checked``;
    OutputError at the first that breaks it). ``taken`` (release.reuse.Taking) gives the
    rows of the species it can take from the last release's library.parquet (those are
    neither read nor checked again) and hears where every species' rows lie."""
    import pyarrow as pa  # here: checking and reading load no pyarrow

    from .arrowmem import arrow_array, parquet_chunks, regrouped

    arrow = {"string": pa.string(), "number": pa.float64(), "integer": pa.int32(),
             "array": pa.list_(pa.float64())}
    meta = {k: json.dumps(doc.get(k, []), ensure_ascii=False) for k in (
        "library_format", "notice", "gas_constant", "reference_temperature", "standard_pressure",
        "units", "build", "transitions", "reference_states")}
    schema = pa.schema([(name, arrow[kind]) for name, kind, _ in LIBRARY_PARQUET_COLUMNS],
                       metadata={f"thermoledger.{k}": v for k, v in meta.items()})
    cols = {name: [] for name, _, _ in LIBRARY_PARQUET_COLUMNS}
    if taken is not None:
        taken.schema = schema

    def made(rows: int = 0) -> pa.Table:
        """The first ``rows`` rows of ``cols`` (all by default) as an Arrow table, taken out
        of them."""
        rows = rows or len(cols["id"])
        table = pa.table({name: arrow_array(cols[name][:rows], schema.field(name).type)
                          for name in cols}, schema=schema)
        for name in cols:
            del cols[name][:rows]
        return table

    def tables():
        species = doc["species"]
        for start in range(0, len(species), CHECKED_AT_ONCE):
            stop = min(len(species), start + CHECKED_AT_ONCE)
            got = [taken.rows(j) if taken else None for j in range(start, stop)]
            values = _read_and_checked(species, start, stop, got, "library.schema.json",
                                       "species", "library.json") if check else \
                {j: species[j] for j, rows in enumerate(got, start) if rows is None}
            for j, rows in enumerate(got, start):
                if rows is None:
                    if taken:
                        yield from taken.flush()
                        taken.made(j, _add_library_rows(cols, values[j]))
                    else:
                        _add_library_rows(cols, values[j])
                    if len(cols["id"]) >= LIBRARY_ROW_GROUP:
                        yield made(LIBRARY_ROW_GROUP)
                    continue
                if cols["id"]:
                    yield made()
                yield from taken.take(j, rows)
        if taken:
            yield from taken.flush()
        if cols["id"]:
            yield made()

    return parquet_chunks(schema, regrouped(tables(), LIBRARY_ROW_GROUP, schema),
                          compression="zstd", write_statistics=True,
                          use_dictionary=list(LIBRARY_DICTIONARY_COLUMNS))


def library_parquet_bytes(doc: dict) -> bytes:
    """library.parquet whole (``library_parquet_chunks`` joined)."""
    return b"".join(library_parquet_chunks(doc))


def _add_library_rows(cols: dict, sp: dict) -> int:
    """Add the library.parquet rows of species entry ``sp``, one per range, to the columns
    ``cols`` (lists by column name): its own values repeated on each of its rows, those of
    each range once (a column at a time: 0.17 instead of 0.30 s at 10 000 species). An entry
    without 'anchor' is anchored at 298.15 K by its ΔfH° and S°. Returns how many."""
    import orjson

    ranges = sp["ranges"]
    n = len(ranges)
    a = sp.get("anchor") or {"basis": "own", "temperature": constants.REFERENCE_TEMPERATURE,
                             "enthalpy": sp["enthalpy_of_formation_298"],
                             "entropy": sp["entropy_298"],
                             "enthalpy_zero": sp["enthalpy_of_formation_298"]}
    quality, data = sp["quality"], sp["data_range"]
    for key, value in (
            ("id", sp["id"]), ("formula", sp["formula"]), ("phase", sp["phase"]),
            ("geometry", sp["geometry"]), ("molar_mass", sp["molar_mass"]),
            ("enthalpy_of_formation_298", sp["enthalpy_of_formation_298"]),
            ("entropy_298", sp["entropy_298"]), ("anchor_basis", a["basis"]),
            ("anchor_temperature", a["temperature"]), ("anchor_enthalpy", a["enthalpy"]),
            ("anchor_entropy", a["entropy"]), ("enthalpy_zero", a["enthalpy_zero"]),
            ("form", sp["form"]), ("data_t_min", data["t_min"]), ("data_t_max", data["t_max"]),
            ("cp_max_rel_dev", quality["cp_max_rel_dev"]),
            ("cp_rms_rel_dev", quality["cp_rms_rel_dev"]), ("points", quality["points"]),
            *((key, orjson.dumps(sp[key]).decode())
              for key in ("extrapolated", "sources", "findings"))):
        cols[key].extend([value] * n)
    cols["range_index"].extend(range(n))
    cols["t_min"].extend([r["t_min"] for r in ranges])
    cols["t_max"].extend([r["t_max"] for r in ranges])
    cols["coefficients"].extend([r["coefficients"] for r in ranges])
    return n


SCHEMA_COPIES = ("library.schema.json", "findings.schema.json", "manifest.schema.json")


def release_files(doc: dict, findings_doc, release, taken=None) -> None:
    """The library checked against its schema (its species as library.parquet reads them),
    and library.parquet, findings.json (unless ``findings_doc`` is None: another process
    writes it, ``findings_file``) and the schemas they follow into ``release``
    (publish.Release). library.json is written with the evaluated tables (release.assemble:
    in another process while this one works, for a large library)."""
    # the species entries are checked as library.parquet reads them: each decoded once
    require_valid(doc, "library.schema.json", "library.json", later=("species",))
    release.add_chunks("library.parquet", library_parquet_chunks(doc, check=True, taken=taken))
    if taken is not None:
        taken.close()
    if findings_doc is not None:
        findings_file(findings_doc, release.add_chunks)
    for name in SCHEMA_COPIES:  # the release describes itself
        release.add(f"schemas/{name}", schemas.schema_bytes(name))


def findings_file(findings_doc: dict, write):
    """findings.json of ``findings_doc``, checked against its schema, given to ``write(
    relative path, byte pieces)`` (piece by piece); what ``write`` returned."""
    require_valid(findings_doc, "findings.schema.json", "findings.json")
    return write("findings.json", json_chunks(findings_doc))
