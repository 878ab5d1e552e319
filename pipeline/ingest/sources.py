"""Ingest stage: discover raw sources, read source.json and the CSV tables.

``ingest(raw_dir)`` -> IngestResult: every table that could be read (in SI
units, with provenance), every input file with its hash, and a finding for
each problem. Nothing under raw/ is ever written; paths are confined to it.
"""

import hashlib
import os
from collections import OrderedDict
from dataclasses import dataclass
from fnmatch import fnmatchcase
from functools import lru_cache
from pathlib import Path
from stat import S_ISDIR, S_ISLNK, S_ISREG
from threading import Lock
from typing import NamedTuple

from ..core import chemistry, jsonread, paths, phases, schemas, units
from ..core.errors import InputError, let_through
from ..core.findings import Finding, clip, finding, stage_failed
from ..core.limits import ANCHOR_RANGE, MAX_SOURCE_BYTES, MAX_TABLE_BYTES, MAX_TABLES_PER_SOURCE
from ..core.names import sha256, species_name
from ..core.records import InputFile, SourceMeta, Table, TableMeta, Transition, alike
from . import coefsets, csvtable, dialect, phased


@dataclass(frozen=True)
class IngestResult:
    """Every table read, every finding of reading, every input file with its hash."""

    tables: tuple          # of Table (possibly with error findings against them)
    findings: tuple        # of Finding
    inputs: tuple          # of InputFile, sorted by path
    transitions: tuple = ()  # of Transition, as the sources state them
    sources: tuple = ()    # of SourceMeta, every source read


def discover(raw_dir: Path) -> tuple[list[Path], list[Finding]]:
    """Source folders under ``raw_dir`` (sorted), skipping links and folders without source.json."""

    raw_dir = Path(raw_dir)
    folders, problems = [], []
    for entry in sorted(raw_dir.iterdir(), key=lambda p: p.name):
        if entry.name.startswith((".", "_")) or not (entry.is_dir() or entry.is_symlink()):
            continue
        rel = entry.name
        if entry.is_symlink():
            problems.append(finding("SRC-PATH", "source folder is a symbolic link; not followed",
                                    file=rel))
            continue
        if not (entry / "source.json").is_file():
            problems.append(finding("SRC-NO-METADATA", "no source.json in this folder", file=rel))
            continue
        folders.append(entry)
    return folders, problems


def parse_source(text: str, *, file: str, folder: str, digest: str):
    """Parse source.json text -> (SourceMeta or None, the checked document or {}, findings):
    its "tables", "coefficient_sets" and "transitions" are read by the caller."""
    try:
        doc = jsonread.loads(text, file=file)
    except InputError as exc:
        return None, {}, [finding(exc.code, exc.what, file=file, line=exc.line,
                                  expected=exc.expected)]
    if isinstance(doc, dict) and isinstance(doc.get("tables"), list) and \
            len(doc["tables"]) > MAX_TABLES_PER_SOURCE:
        return None, {}, [finding("SRC-TOO-LARGE", f"{len(doc['tables'])} tables listed",
                                  file=file, column="tables",
                                  expected=f"at most {MAX_TABLES_PER_SOURCE} per source")]
    errors = schemas.errors_of(doc, "source.schema.json")
    if errors:
        return None, {}, [finding("SRC-SCHEMA", _schema_message(e), file=file,
                                  column=schemas.where(e),
                                  seen=clip(repr(e.instance)), expected=_expected(e))
                          for e in errors]
    try:
        pressure = quantity(doc["standard_pressure"], "pressure", "standard_pressure")
    except InputError as exc:
        return None, {}, [finding("SRC-QUANTITY", exc.what, file=file,
                                  column="standard_pressure",
                                  seen=clip(doc["standard_pressure"]),
                                  expected="'1 bar' or '1 atm'")]
    meta = SourceMeta(id=doc["source"], folder=folder, title=doc["title"],
                      citation=doc["citation"], method=doc["method"], license=doc["license"],
                      priority=int(doc["priority"]), standard_pressure=pressure, sha256=digest,
                      references=tuple(sorted(doc.get("reference_states", {}).items())))
    return meta, doc, []


def parse_transitions(doc_entries, source: SourceMeta):
    """(Transition records, findings) of the 'transitions' of a source.json."""
    out, problems = [], []
    rel = f"{source.folder}/source.json"
    for index, entry in enumerate(doc_entries):
        values = {}
        for key, kind in (("temperature", "temperature"), ("enthalpy", "enthalpy"),
                          ("u_enthalpy", "enthalpy")):
            if key not in entry:
                values[key] = None
                continue
            try:
                values[key] = quantity(entry[key], kind, f"transition_{key}")
            except InputError as exc:
                values[key] = None
                problems.append(finding("SRC-QUANTITY", exc.what, source=source.id, file=rel,
                                        column=f"transitions/{index}/{key}",
                                        seen=clip(entry[key]), expected=exc.expected))
        if values["temperature"] is None or values["enthalpy"] is None or (
                "u_enthalpy" in entry and values["u_enthalpy"] is None):
            continue            # not used; its SRC-QUANTITY finding says why
        out.append(Transition(species=entry["species"], lower=entry["from"], upper=entry["to"],
                              temperature=values["temperature"], enthalpy=values["enthalpy"],
                              u_enthalpy=values["u_enthalpy"], source=source, index=index))
    return out, problems


def stated_formation(items, source: SourceMeta, index: int, table: str) -> tuple:
    """(((T [K], kind, value, position), ...), findings) of a table's "stated_formation":
    ΔfH°(T) and ΔfG°(T) as quantities with units, log10 Kf(T) as a plain number."""
    out, problems = [], []
    for k, item in enumerate(items):
        try:
            t = quantity(item["temperature"], "temperature", "stated_temperature")
            for key in ("enthalpy", "gibbs_energy", "log10_kf"):
                if key in item:
                    value = float(item[key]) if key == "log10_kf" else \
                        quantity(item[key], "enthalpy", f"stated_{key}")
                    out.append((t, key, value, k))
        except InputError as exc:
            problems.append(finding("SRC-QUANTITY", exc.what, source=source.id,
                                    file=f"{source.folder}/source.json",
                                    column=f"tables/{index}/stated_formation/{k}",
                                    extra={"table": table}, seen=clip(str(item)),
                                    expected=exc.expected))
    return tuple(out), problems


def quantity(text: str, kind: str, field: str) -> float:
    """A quantity of source.json in SI, checked against its physical range (ANCHOR_RANGE)."""
    value = units.parse_quantity(text, kind)
    lo, hi = ANCHOR_RANGE[field]
    if not lo <= value <= hi:
        raise InputError(f"{field} '{clip(text)}' is {value:g} {units.KINDS[kind][2]} in SI, "
                         "outside its physical range",
                         expected=f"{lo:g} to {hi:g} {units.KINDS[kind][2]}")
    return value


def _schema_message(error) -> str:
    path = "/".join(map(str, error.absolute_path)) or "the top level"
    return f"field {path}: {error.message}"


def _expected(error) -> str:
    if error.validator == "pattern" and error.validator_value == phases.PHASE_PATTERN:
        return "a phase: g, l, cr or cr-<form> (e.g. cr-alpha)"
    if error.validator == "enum":
        return "one of " + ", ".join(map(str, error.validator_value))
    if error.validator in ("type", "pattern", "minimum", "maximum", "minLength", "const"):
        return f"{error.validator} {error.validator_value}"
    if error.validator == "required":
        return "fields " + ", ".join(error.validator_value)
    if error.validator == "additionalProperties":
        return "only the fields listed in schemas/source.schema.json"
    return error.validator




def _open_listed(folder: Path, entry: dict, source: SourceMeta, raw_dir: Path, listed: str):
    """(raw bytes or None, InputFile or None, findings) of a file listed in source.json at
    ``listed`` (e.g. 'tables/3'): confined to raw/, present, a plain file, within the size
    limit. One os.lstat tells what pathlib's is_symlink, exists, is_file and stat would (the
    name is a plain file name, by the schema: never a link's target is followed)."""
    rel = f"{source.folder}/{entry['file']}"
    where = dict(source=source.id, file=rel)
    folder_text, name = os.fspath(folder), entry["file"]
    path = os.path.join(folder_text, name)
    try:
        st = paths.lstat_or_none(path)
    except ValueError:                      # a NUL in the name: nothing there, for pathlib
        st = None
    if (st is not None and S_ISLNK(st.st_mode)) or not _inside_folder(folder_text, name,
                                                                      raw_dir):
        return None, None, [finding("SRC-PATH", "table is a link or lies outside raw/; not "
                                    "read", **where)]
    listed_at = dict(source=source.id, file=f"{source.folder}/source.json",
                     column=f"{listed}/file", seen=entry["file"], extra={"table": rel})
    if st is None:
        return None, None, [finding("TAB-MISSING", f"listed table {entry['file']} does not "
                                    "exist", **listed_at)]
    if not S_ISREG(st.st_mode):
        kind = "a folder" if S_ISDIR(st.st_mode) else "not a regular file (a pipe or device?)"
        return None, None, [finding("TAB-NOT-FILE", f"listed table {entry['file']} is {kind}",
                                    expected="a plain CSV file", **listed_at)]
    size = st.st_size
    if size > MAX_TABLE_BYTES:
        return None, None, [finding("TAB-TOO-LARGE", f"the file is {size} bytes; the limit is "
                                    f"{MAX_TABLE_BYTES}", seen=str(size),
                                    expected=f"<= {MAX_TABLE_BYTES} bytes", **where)]
    with open(path, "rb") as fh:
        raw = fh.read()
    return raw, InputFile(path=rel, sha256=sha256(raw), size=len(raw)), []


def read_sets(folder: Path, entry: dict, source: SourceMeta, raw_dir: Path, index: int = 0):
    """Read one coefficient-set file listed in source.json "coefficient_sets" -> (tables,
    InputFile or None, findings): one table per set (coefsets.py)."""
    raw, infile, problems = _open_listed(folder, entry, source, raw_dir,
                                         f"coefficient_sets/{index}")
    if raw is None:
        return [], infile, problems
    text, encoding, enc = dialect.decode(raw, infile.path)
    problems = [f.located(source=source.id) for f in enc]
    if text is None:
        return [], infile, problems
    base = TableMeta(source=source, file=infile.path, species="", formula="", phase="",
                     geometry=None, molar_mass=None, atoms=None,
                     enthalpy_of_formation_298=None, entropy_298=None, sha256=infile.sha256,
                     size=infile.size, index=index, reading={"encoding": encoding})
    tables, more = coefsets.set_tables(text, entry, base)
    return tables, infile, problems + [f.located(source=source.id) for f in more]


def read_table(folder: Path, entry: dict, source: SourceMeta, raw_dir: Path, index: int = 0):
    """Read one table listed in source.json -> (tables, InputFile or None, findings): one
    table per phase it holds (phased.py); none when it cannot be read at all."""
    rel = f"{source.folder}/{entry['file']}"
    raw, infile, problems = _open_listed(folder, entry, source, raw_dir, f"tables/{index}")
    if raw is None:
        return [], infile, problems
    digest = infile.sha256
    comp = None
    try:
        comp = chemistry.composition(entry["formula"])
    except InputError as exc:
        problems.append(finding("SRC-FORMULA", exc.what, source=source.id,
                                file=f"{source.folder}/source.json",
                                column=f"tables/{index}/formula", extra={"table": rel},
                                seen=entry["formula"], expected=exc.expected))
    anchors = {}
    for key, kind in (("enthalpy_of_formation_298", "enthalpy"), ("entropy_298", "heat_capacity"),
                      ("u_enthalpy_of_formation_298", "enthalpy"),
                      ("u_entropy_298", "heat_capacity")):
        if key not in entry:           # a phase reached through its transitions
            anchors[key] = None
            continue
        try:
            anchors[key] = quantity(entry[key], kind, key)
        except InputError as exc:
            anchors[key] = None
            problems.append(finding("SRC-QUANTITY", exc.what, source=source.id,
                                    file=f"{source.folder}/source.json",
                                    column=f"tables/{index}/{key}", extra={"table": rel},
                                    seen=clip(entry[key]), expected=exc.expected))
    stated, more = stated_formation(entry.get("stated_formation", ()), source, index, rel)
    problems += more
    s298, note = anchors["entropy_298"], None
    if entry.get("phase") == "g":      # the pressure is > 0: checked against ANCHOR_RANGE
        s298, note = csvtable.at_one_bar(s298, source.standard_pressure, "entropy_298")
    notes = [note] if note else []
    text, encoding, enc = dialect.decode(raw, rel)
    problems += [f.located(source=source.id) for f in enc]
    molar_mass = comp.molar_mass if comp else None
    if text is None:
        parsed = None
    else:
        parsed = csvtable.parse_table(text, file=rel, molar_mass=molar_mass,
                                      standard_pressure=source.standard_pressure,
                                      phase=entry.get("phase"), columns=entry.get("columns"),
                                      encoding=encoding)
        problems += [f.located(source=source.id) for f in parsed.findings]
    meta = TableMeta(source=source, file=rel, species=entry["species"], formula=entry["formula"],
                     phase=entry.get("phase") or "", geometry=entry.get("geometry"),
                     molar_mass=molar_mass, atoms=comp.atoms if comp else None,
                     enthalpy_of_formation_298=anchors["enthalpy_of_formation_298"],
                     entropy_298=s298, sha256=digest, size=len(raw),
                     u_enthalpy_of_formation_298=anchors["u_enthalpy_of_formation_298"],
                     u_entropy_298=anchors["u_entropy_298"], stated_formation=stated,
                     columns=alike(parsed.columns) if parsed else (),
                     notes=tuple(notes) + (parsed.notes if parsed else ()),
                     acknowledgements=tuple(dict(a) for a in entry.get("acknowledge", ())),
                     index=index,
                     fit_overrides=tuple(sorted(
                         (k, tuple(v) if isinstance(v, list) and k != "breakpoints" else v)
                         for k, v in entry.get("fit", {}).items())),
                     reading=alike(parsed.reading) if parsed else {"encoding": encoding or None})
    data = parsed.data if parsed else csvtable.empty_rows()
    if text is None and entry.get("phase") is None:
        return [], infile, problems
    if text is None:
        return [Table(meta=meta, data=data)], infile, problems
    tables, more = phased.split(meta, data, entry)
    return tables, infile, problems + more


def _guarded_read(folder, entry, source, raw_dir, index, reader=read_table):
    """``reader`` (read_table or read_sets), with an unexpected exception turned into that
    file's finding."""
    try:
        return reader(folder, entry, source, raw_dir, index)
    except Exception as exc:  # noqa: BLE001 - one bad table never stops the rest
        let_through(exc)
        rel = f"{source.folder}/{entry.get('file', '?')}"
        return [], None, [stage_failed("ingest", exc, source=source.id, file=rel)]


def _inside(path: Path, root: Path) -> bool:
    """Whether ``path``, its links followed, lies in ``root`` (or is it). The real path of a
    folder is looked up once per ingest (``_real_dir``): a catalogue lists thousands of
    tables in a few folders."""
    name = path.name
    if name in ("", ".", "..") or os.path.islink(path):
        return _within(os.path.realpath(path), root)
    return _inside_folder(str(path.parent), name, root)


def _inside_folder(folder: str, name: str, root: Path) -> bool:
    """``_inside`` of the file ``name`` in ``folder``, which is no link."""
    if name in ("", ".", ".."):
        return _inside(Path(folder) / name, root)
    return _within(os.path.join(_real_dir(folder), name), root)


def _within(real: str, root: Path) -> bool:
    top = _real_dir(str(root))
    return real == top or real.startswith(top.rstrip(os.sep) + os.sep)


@lru_cache(maxsize=1024)
def _real_dir(folder: str) -> str:
    """os.path.realpath of ``folder``, remembered until the next ``ingest``."""
    return os.path.realpath(folder)


def ingest(raw_dir, part=None) -> IngestResult:
    """Read every source under ``raw_dir``; never raises on bad input, never writes. With
    ``part`` (partitions.Part), read only the tables, sets and transitions of the species
    names it owns; every source.json is read, and its findings are found, by every part."""
    owns = part.owns if part is not None else (lambda name: True)
    _real_dir.cache_clear()          # the folders as they are now
    raw_dir = Path(raw_dir)
    if not raw_dir.is_dir():
        raise InputError(f"raw folder {raw_dir} does not exist", expected="a folder of sources")
    folders, findings = discover(raw_dir)
    tables, inputs, seen_ids, transitions, sources = [], [], {}, [], []
    for folder in folders:
        meta_path = folder / "source.json"
        rel = f"{folder.name}/source.json"
        if meta_path.is_symlink() or not _inside(meta_path, raw_dir):
            findings.append(finding("SRC-PATH", "source.json is a link or lies outside raw/; "
                                    "not followed", file=rel))
            continue
        size = meta_path.stat().st_size
        if size > MAX_SOURCE_BYTES:
            findings.append(finding("SRC-TOO-LARGE", f"source.json is {size} bytes", file=rel,
                                    seen=str(size), expected=f"<= {MAX_SOURCE_BYTES} bytes"))
            continue
        digest, size, parsed = _source(meta_path, rel, folder.name,
                                       type(part)(0, part.count) if part is not None else None)
        inputs.append(InputFile(path=rel, sha256=digest, size=size))
        if parsed is None:
            findings.append(finding("SRC-UNREADABLE", "source.json is not UTF-8", file=rel))
            continue
        source, doc, problems = parsed.source, parsed.doc, parsed.problems
        findings += problems
        if source is None:
            continue
        stated, problems = parse_transitions(doc.get("transitions", []), source)
        findings += problems
        if source.id in seen_ids:
            findings.append(finding("SRC-DUPLICATE-ID", f"source id '{source.id}' is also "
                                    f"declared in {seen_ids[source.id]}", file=rel,
                                    column="source", seen=source.id))
            continue
        seen_ids[source.id] = rel
        sources.append(source)
        transitions += [x for x in stated if owns(x.species)]
        for reader, entries in ((read_table, _own_tables(parsed, part)),
                                (read_sets, enumerate(doc.get("coefficient_sets", [])))):
            for index, entry in entries:
                read, infile, problems = _guarded_read(folder, entry, source, raw_dir, index,
                                                       reader)
                if reader is read_sets:       # a set file holds the sets of many species
                    read = [t for t in read if owns(t.meta.species)]
                    problems = [f for f in problems if _owned(f, owns)]
                findings += problems
                if infile:
                    inputs.append(infile)
                tables += read
        if part is not None and part.index != 0:
            continue          # a file-level scan: the first part reports it for all
        listed = _listed(parsed)
        for name in csv_names(folder):
            if name not in listed:
                findings.append(finding("TAB-UNLISTED", f"{name} is not listed in "
                                        "source.json; not read", source=source.id,
                                        file=f"{folder.name}/{name}"))
    inputs.sort(key=lambda f: f.path)
    return IngestResult(tables=tuple(tables), findings=tuple(findings), inputs=tuple(inputs),
                        transitions=tuple(transitions), sources=tuple(sources))


def csv_names(folder: Path) -> list:
    """The names in ``folder`` that ``sorted(folder.glob("*.csv"))`` gives, as strings: one
    scan, names compared as strings (pathlib's Paths compare by parts, 0.06 s of sorting for
    a source of 10 000 tables)."""
    with os.scandir(folder) as entries:
        return sorted(e.name for e in entries if fnmatchcase(e.name, "*.csv"))


#: source.json files remembered per process (every partition of a build reads every one,
#: and a worker works many partitions): beyond this many sources each would be read and
#: parsed again by every partition
SOURCES_REMEMBERED = 4096


class _Remembered:
    """The last SOURCES_REMEMBERED values put, by key (least recently asked for forgotten
    first); safe across threads."""

    def __init__(self):
        self._seen, self._lock = OrderedDict(), Lock()

    def get(self, key, default=None):
        with self._lock:
            if key not in self._seen:
                return default
            self._seen.move_to_end(key)
            return self._seen[key]

    def put(self, key, value) -> None:
        with self._lock:
            self._seen[key] = value
            if len(self._seen) > SOURCES_REMEMBERED:
                self._seen.popitem(last=False)


#: (sha256, size) of each settled source.json by its identity on disk; its _Parsed (None:
#: not UTF-8) by its sha256, name and cut
_DIGESTS, _PARSED = _Remembered(), _Remembered()
_UNSEEN = object()


def _source(path: Path, file: str, folder: str, cut) -> tuple:
    """(sha256, size, ``_parsed_source`` or None when not UTF-8) of the source.json at
    ``path``, its tables grouped by ``cut``: parsed once per process for each content, and
    read once for a file as it is on disk (core.paths.identity), again each time while it
    is not settled (core.paths.settled). The text is not kept: at 100 000 species it was
    17 MB in every process that computes partitions."""
    st = path.stat()
    on_disk = (str(path), *paths.identity(st)) if paths.settled(st) else None
    known = _DIGESTS.get(on_disk) if on_disk else None
    if known is not None:
        parsed = _PARSED.get((known[0], file, folder, cut), _UNSEEN)
        if parsed is not _UNSEEN:
            return (*known, parsed)
    digest, size, text = _read_source_text(str(path))
    if on_disk:
        _DIGESTS.put(on_disk, (digest, size))
    key = (digest, file, folder, cut)
    parsed = _PARSED.get(key, _UNSEEN)
    if parsed is _UNSEEN:
        parsed = None if text is None else _parsed_source(text, file, folder, digest, cut)
        _PARSED.put(key, parsed)
    return digest, size, parsed


def _read_source_text(path: str) -> tuple:
    raw = Path(path).read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = None
    return sha256(raw), len(raw), text


class _Parsed(NamedTuple):
    """A source.json as a process remembers it (``_parsed_source``)."""

    source: object       # SourceMeta, or None when the file is refused
    doc: dict            # the document without its tables
    problems: list       # findings
    tables: dict         # {partition: its (index, table entry) pairs, pickled}


def _parsed_source(text: str, file: str, folder: str, digest: str, cut=None) -> _Parsed:
    """``parse_source``, as a process remembers it (``_source``): every partition of a build
    reads every source.json. Its tables grouped by the partitions of ``cut`` (a
    partitions.Part of the same count; None: all in one). The tables are grouped by
    partition once per process, not walked through for each partition, and held pickled: a
    worker of a 100 000-species build held every table entry of every source as Python
    objects, some 150 MB. Callers must not change the document it returns."""
    import pickle

    source, doc, problems = parse_source(text, file=file, folder=folder, digest=digest)
    by_part = {}
    for i, e in enumerate(doc.get("tables", [])):
        by_part.setdefault(cut.index_of(e["species"]) if cut else 0, []).append((i, e))
    slim = {k: v for k, v in doc.items() if k != "tables"}
    return _Parsed(source, slim, problems,
                   {k: pickle.dumps(v, pickle.HIGHEST_PROTOCOL) for k, v in by_part.items()})


def _listed(parsed: _Parsed) -> frozenset:
    """Every file a ``_parsed_source`` lists (its tables and coefficient sets), made when
    asked: only the partition that scans for unlisted files needs them, and every process
    held them for every source (12 MB at 100 000 species)."""
    import pickle

    tables = (e for blob in parsed.tables.values() for _, e in pickle.loads(blob))
    return frozenset(e["file"] for e in (*tables, *parsed.doc.get("coefficient_sets", [])))


def _own_tables(parsed: _Parsed, part) -> list:
    """The (index, table entry) pairs of the species ``part`` owns (all when None) of a
    ``_parsed_source``, fresh objects."""
    import pickle

    blob = parsed.tables.get(part.index if part else 0)
    return pickle.loads(blob) if blob else []


def _owned(f, owns) -> bool:
    """True when a finding of a set file is about a species ``owns`` names, or about the
    file as a whole (every part keeps those)."""
    sid = f.extra.get("species")
    return not sid or owns(species_name(sid))


def inputs_digest(inputs) -> str:
    """One sha256 over all input paths and hashes (order-independent, path-sorted)."""
    h = hashlib.sha256()
    for f in sorted(inputs, key=lambda f: f.path):
        h.update(f"{f.path}\0{f.sha256}\n".encode())
    return h.hexdigest()
