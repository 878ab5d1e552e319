"""Species partitions: the engine's unit of parallel work.

Every table and coefficient set belongs to the partition of its species *name* (``Ti`` for
Ti(cr-alpha), Ti(l), ...), so the phases of a species, its sources and its transitions are
read, checked, reconciled and fitted together, with nothing shared between partitions. A
build runs its partitions in worker processes (``run``) and merges their results in one
canonical order (``merge``), so a release built from any number of partitions is byte for
byte the one built from a single partition: the partition count is a setting of the
machine, not of the release. Source-level findings (of a source.json) are found by every
partition alike and kept once.

A release home keeps the partitions of its last build (``PartStore``); a rebuild takes
those whose key (``part_keys``: everything a partition's result depends on) is unchanged.
"""

import hashlib
import json
import os
import pickle
import re
import stat
from contextlib import contextmanager
from dataclasses import dataclass
from functools import lru_cache, partial
from pathlib import Path

from .core import paths
from .core.errors import let_through
from .core.limits import MAX_SOURCE_BYTES, MAX_TABLE_BYTES
from .core.names import species_name
from .core.processes import aside, collector_paused, without_collector, worker_pool
from .core.records import CheckResult
from .release import publish

#: below this many listed tables and sets, a build runs in one process (forking workers
#: costs more than it saves) and in one partition
PARALLEL_FROM = 400
#: the progress stage of partitions worked (counted in partitions)
STAGE = "read, check and fit"
#: listed tables per partition of a large build, and the most partitions. An edited table
#: costs the refit of its partition: at 10 000 species a one-edit rebuild took 1.93-2.00 s
#: with 64 and 2.11-2.25 s with 128 (benchmarks/bench_incremental.py), while the full build
#: took some 3 % longer (13.5-13.7 against 12.9-13.3 s: a batch of breakpoint searches is
#: half as large)
PART_SIZE, MAX_PARTS = 64, 1024
#: a store of this many partitions or more (some 40 000 tables) is written through the page
#: cache (PartStore ``through``): at 100 000 species it is 1.6 GB that the build does not
#: read again, whose pages its scratch file then takes
THROUGH_FROM = 40000 // PART_SIZE


def hashed_partition(name: str, parts: int) -> int:
    """The partition (0 .. parts-1) of species name ``name``: a hash, the same in every
    process and on every machine. For names seen once per process (a source.json's tables
    grouped, the partitions' keys); ``partition_of`` remembers them."""
    if parts <= 1:
        return 0
    return int.from_bytes(hashlib.sha256(name.encode("utf-8")).digest()[:8], "big") % parts


@lru_cache(maxsize=1 << 17)
def partition_of(name: str, parts: int) -> int:
    """``hashed_partition``, remembered: for names every partition asks about (the
    transitions and sets each one reads). Not for a catalogue's every species name: at
    100 000 species the memory held 21 MB in each process that computes partitions."""
    return hashed_partition(name, parts)


@dataclass(frozen=True)
class Part:
    """Which partition to work on: ``index`` of ``count``."""

    index: int = 0
    count: int = 1

    def owns(self, name: str) -> bool:
        return partition_of(name, self.count) == self.index

    def index_of(self, name: str) -> int:
        """The partition of species name ``name`` in this cut (not remembered: asked once
        for each name)."""
        return hashed_partition(name, self.count)


@dataclass(frozen=True)
class PartResult:
    """What one partition produced: its check result and, for a build, its fits."""

    checked: CheckResult
    fitted: tuple = ()        # (release.held.Brief, FittedSpecies pickled) in species-id order
    lineages: tuple = ()      # (species id, compact JSON of its manifest lineage), as fitted
    quarantined: tuple = ()   # (TableMeta, findings), after fitting
    findings: tuple = ()      # every finding, after fitting
    entries: tuple = ()       # (species id, compact JSON of its library entry)
    points: tuple = ()        # (species id, report plot points; a build's pickled)
    rows: tuple = ()          # library.tables.pack_rows blocks: its species' evaluated tables
    outlines: tuple = ()      # (species id, compact JSON of library.entries.outline), as entries
    digests: tuple = ()       # (species id, sha256 of its entry's compact JSON, of its lineage's)


def _table_key(table):
    meta = table.meta
    published = meta.published is not None
    return (meta.source.folder, published, meta.index,
            (meta.species, meta.phase) if published else ("", ""))


def _unique(items, key=repr) -> list:
    """``items`` without repeats (by ``key``: by default every field, a finding's ``extra``
    included), first kept."""
    seen, out = set(), []
    for x in items:
        k = key(x)
        if k not in seen:
            seen.add(k)
            out.append(x)
    return out


def _finding_order(f):
    return (f.sort_key(), repr(f))


def _quarantine_order(q):
    meta, reasons = q
    return (meta.file, meta.species_id, tuple(_finding_order(f) for f in reasons))


def _merged_findings(groups) -> tuple:
    """The findings of all ``groups``, each once (by every field: ``_unique``, the first
    kept), in the canonical order (``_finding_order``): sorted by sort key, and only among
    findings of one sort key told apart and ordered by their repr (of the 10 002 findings of
    the benchmark's 10 000 species, 2 share one: merged in 13 ms, 47 with every repr)."""
    items = sorted((f.sort_key(), k, f) for k, f in enumerate(f for g in groups for f in g))
    out, i = [], 0
    while i < len(items):
        j = i + 1
        while j < len(items) and items[j][0] == items[i][0]:
            j += 1
        if j == i + 1:
            out.append(items[i][2])
        else:                          # in the order they came: the first of a repr kept
            first = {}
            for _, _, f in items[i:j]:
                first.setdefault(repr(f), f)
            out.extend(f for _, f in sorted(first.items()))
        i = j
    return tuple(out)


def _merged_quarantined(groups) -> tuple:
    """The (TableMeta, findings) of all ``groups`` in the canonical order."""
    return tuple(sorted((q for g in groups for q in g), key=_quarantine_order))


def merge_checks(parts) -> CheckResult:
    """One CheckResult of the partitions' ``parts``, in the canonical order: tables by
    source folder and position in source.json, findings by their sort key, quarantined and
    held-back inputs by file, selections and chains by species."""
    first = parts[0]
    tables = sorted((t for p in parts for t in p.tables), key=_table_key)
    findings = _merged_findings(p.findings for p in parts)
    inputs = sorted(_unique((f for p in parts for f in p.inputs), key=lambda f: f.path),
                    key=lambda f: f.path)
    held = {}
    for p in parts:
        for file, reasons in p.held_back:
            held.setdefault(file, []).extend(reasons)
    return CheckResult(
        tables=tuple(tables), findings=tuple(findings), inputs=tuple(inputs),
        selections=tuple(sorted((s for p in parts for s in p.selections),
                                key=lambda s: s.species_id)),
        quarantined=_merged_quarantined(p.quarantined for p in parts),
        held_back=tuple((k, tuple(sorted(_unique(v), key=_finding_order)))
                        for k, v in sorted(held.items())),
        chains=tuple(sorted((c for p in parts for c in p.chains), key=lambda c: c.species)),
        references=first.references)


def merge(parts) -> PartResult:
    """One PartResult of the partitions' results, in the canonical order (``merge_checks``;
    fitted species by id)."""
    return PartResult(
        checked=merge_checks([p.checked for p in parts]),
        fitted=tuple(sorted((s for p in parts for s in p.fitted), key=lambda s: s[0].species_id)),
        lineages=tuple(sorted((e for p in parts for e in p.lineages), key=lambda e: e[0])),
        quarantined=_merged_quarantined(p.quarantined for p in parts),
        findings=_merged_findings(p.findings for p in parts),
        entries=tuple(sorted((e for p in parts for e in p.entries), key=lambda e: e[0])),
        points=tuple(sorted((e for p in parts for e in p.points), key=lambda e: e[0])),
        rows=tuple(block for p in parts for block in p.rows),
        outlines=tuple(sorted((e for p in parts for e in p.outlines), key=lambda e: e[0])),
        digests=tuple(sorted((e for p in parts for e in p.digests), key=lambda e: e[0])))


def listed_entries(raw_dir) -> int:
    """How many tables and coefficient sets the source.json files under ``raw_dir`` list (a
    quick count to choose the number of workers; unreadable files count as none)."""
    n = 0
    for path in Path(raw_dir).glob("*/source.json"):
        try:
            if path.stat().st_size > MAX_SOURCE_BYTES:
                continue
            doc = json.loads(path.read_bytes())
            n += len(doc.get("tables", ())) + len(doc.get("coefficient_sets", ()))
        except (OSError, ValueError, AttributeError, TypeError, RecursionError):
            continue
    return n


@dataclass(frozen=True)
class Plan:
    """How a build is cut: ``parts`` partitions worked by ``workers`` processes."""

    parts: int = 1
    workers: int = 1


def plan(raw_dir, workers: int = 0, parts: int = 0) -> Plan:
    """``workers`` when given (> 0), else one process per core (at most 4) for a build of
    PARALLEL_FROM listed tables or more and one for a smaller one; ``parts`` when given,
    else about PART_SIZE listed tables per partition for a large build (so that an edited
    table costs the refit of its partition only) and one partition for a small one."""
    entries = listed_entries(raw_dir)
    large = entries >= PARALLEL_FROM
    w = workers if workers > 0 else (min(_cores(), 4) if large else 1)
    p = parts if parts > 0 else (max(w, min(MAX_PARTS, -(-entries // PART_SIZE))) if large
                                 else w)
    return Plan(parts=p, workers=w)


def _cores() -> int:
    """The cores this process may run on."""
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0)) or 1
    return os.cpu_count() or 1


def run(work, cut: Plan, say=None, store=None, keep=None, ready=None) -> tuple:
    """(merged PartResult, partitions reused): ``work(Part)`` for each partition of ``cut``
    that ``store`` (a PartStore, or None) does not already hold, in ``cut.workers`` worker
    processes when more than one; what was computed is saved into ``store`` whole, and
    ``keep(result)`` (when given) of each partition is what this process holds and merges
    (what the caller does not need, left out as soon as it is saved). A worker that dies or
    is interrupted stops the build. The cyclic garbage collector is paused meanwhile
    (core.processes.collector_paused). A rebuild computes what changed while it loads what
    is stored: one partition in ``ready`` (a core.processes.Standby, which a rebuild has
    prepare itself meanwhile) or a process forked for it, several in the workers."""
    try:
        with collector_paused():      # in this process and in the workers
            return _run(work, cut, say or (lambda *a: None), store, keep or (lambda r: r),
                        ready)
    finally:
        if ready is not None:
            ready.dismiss()           # not needed any more, used or not


def _run(work, cut: Plan, say, store, keep, ready=None) -> tuple:
    stored = [k for k in range(cut.parts) if store and store.holds(k)]
    held = set(stored)
    todo = [k for k in range(cut.parts) if k not in held]
    results = [None] * cut.parts
    parts = [Part(k, cut.parts) for k in todo]
    counted = []

    def done(k, result):
        if store:
            store.save(k, result)
        if isinstance(result, bytes):          # pickled by a worker (``_pickled``)
            result = pickle.loads(result)
        results[k] = keep(result)
        counted.append(k)
        say(STAGE, len(counted), len(todo), f"partition {k + 1} of {cut.parts}")

    def load_stored() -> list:
        """Load the stored partitions, each reduced by ``keep`` before the next is read;
        those that cannot be read (damaged files), to be computed."""
        for k in stored:
            results[k] = _kept(store.load(k), keep)
        lost = [k for k in stored if results[k] is None]
        todo.extend(lost)
        return lost

    # the partitions to compute run while the stored ones load: several in the workers
    # (submitted first, so that they fork from this process before it holds the stored
    # partitions), one in a helper process when there are stored ones to load meanwhile
    if len(parts) > 1 and cut.workers > 1:
        with worker_pool(min(cut.workers, len(parts))) as pool:
            computed = pool.map(partial(without_collector, _pickled, work), parts)
            lost = load_stored()
            for part, result in zip(parts, computed):
                done(part.index, result)
    elif len(parts) == 1 and stored and cut.workers > 1:
        with _helper(work, parts, ready) as helper:
            lost = load_stored()
            computed = helper.result()
        done(parts[0].index, computed[0])
    else:
        lost = load_stored()
        for part in parts:
            done(part.index, work(part))
    for k in lost:
        done(k, work(Part(k, cut.parts)))
    return merge(results), cut.parts - len(todo)


@contextmanager
def _helper(work, parts, ready):
    """A process computing ``_work_each(work, parts)``: ``ready`` (a core.processes.Standby,
    prepared for it) when given and still there, else one forked now (core.processes.aside)."""
    if ready is not None:
        try:
            ready.give(_work_each, work, parts)
        except OSError:            # it is gone (killed from outside): fork another
            ready = None
    if ready is not None:
        yield ready
    else:
        with aside(_work_each, work, parts) as helper:
            yield helper


def _pickled(work, part) -> bytes:
    """``work(part)`` pickled (in a worker): the bytes it sends are those the store keeps
    (``PartStore.save``), so that the build's process, whose own work competes with the
    workers for the cores, does not pickle every partition again (0.48 s of its time at
    10 000 species)."""
    return pickle.dumps(work(part), protocol=pickle.HIGHEST_PROTOCOL)


def _work_each(work, parts) -> list:
    """``work(part)`` of each of ``parts``, in order (the helper process of ``_run``)."""
    return [work(part) for part in parts]


def _kept(result, keep):
    """``keep(result)`` of a partition loaded from the store (None: not there), made before
    the next is loaded: a partition whole is some 30 KB per species, so a rebuild of 100 000
    species that loaded them all first held 2.4 GB."""
    return None if result is None else keep(result)


# ---- reuse of partitions between builds -------------------------------------------------
#: the folder of a release home that keeps the partitions of its last build
STORE = publish.STORE
_STORED = re.compile(r"^part-[0-9a-f]{64}\.pickle$")
#: pending files: partitions (``save``), and the digests and breakpoints a build keeps
#: (core.paths.write_atomic's temporary files)
_PENDING = re.compile(r"^(\.pending-\d+-part-[0-9a-f]{64}\.pickle|"
                      r"\.(breakpoints|digests|pieces)\.json\..*\.tmp)$")
STORE_FORMAT = 2


@lru_cache(maxsize=1)
def code_digest() -> str:
    """sha256 over the source of every module of the package: a partition computed by other
    code is never reused."""
    h = hashlib.sha256()
    root = Path(__file__).resolve().parent
    for path in sorted(root.rglob("*.py")):
        h.update(f"{path.relative_to(root)}\0".encode() + path.read_bytes())
    return h.hexdigest()


@lru_cache(maxsize=4096)
def _real_folder(folder: str) -> str:
    return os.path.realpath(folder)


class Digests:
    """The sha256 of files remembered between builds (``FILE`` in the store of partitions)
    by their identity on disk (core.paths.identity); a file not settled when it would be
    remembered (core.paths.settled) is hashed again by the next build. With ``use`` False
    (--fresh), every file is hashed."""

    FILE = "digests.json"

    def __init__(self, folder: Path, use: bool = True):
        self.path, self.known, self.seen = Path(folder) / self.FILE, {}, {}
        if use:
            try:
                known = json.loads(self.path.read_bytes())
                self.known = known if isinstance(known, dict) else {}
            except (OSError, ValueError):
                pass

    def of(self, path: str, st) -> str:
        """The sha256 of file ``path`` (hex; a string: pathlib's objects cost more than the
        rest), whose os.stat result is ``st``."""
        identity = list(paths.identity(st))
        kept = self.known.get(path)
        if isinstance(kept, list) and kept[:-1] == identity:
            digest = kept[-1]
        else:
            digest = _sha256_of(path)
        if paths.settled(st):
            self.seen[path] = identity + [digest]
        return digest

    def save(self) -> None:
        """Remember the digests of this build's settled files, written atomically, when the
        store exists."""
        import orjson

        if self.path.parent.is_dir():
            paths.write_atomic(self.path, orjson.dumps(self.seen, option=orjson.OPT_SORT_KEYS))


def _sha256_of(path: str) -> str:
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest()


def _file_digest(path, raw: str, digests=None) -> str:
    """What a listed file contributes to a key: its sha256 (remembered by ``digests``, a
    Digests, when given), or what ingest sees instead of content (a link, a folder,
    nothing, a path outside ``raw`` (a real path), a file too large to be read, by its
    size). A file that is not a link lies where its folder really is: one real path per
    folder, not per file."""
    text = os.fspath(path)             # (a string: pathlib's parts cost more than the rest)
    st = paths.lstat_or_none(text)
    if st is not None and stat.S_ISLNK(st.st_mode):
        return "link:" + os.readlink(text)
    folder, name = os.path.split(text)
    real = os.path.join(_real_folder(folder or "."), name) \
        if name not in ("", ".", "..") else os.path.realpath(text)
    if not _inside(real, raw):
        return "outside"
    if st is not None and stat.S_ISREG(st.st_mode):
        if st.st_size > MAX_TABLE_BYTES:
            return f"size:{st.st_size}"
        return digests.of(text, st) if digests else _sha256_of(text)
    return "dir" if st is not None and stat.S_ISDIR(st.st_mode) else "absent"


def _inside(real: str, raw: str) -> bool:
    """Whether real path ``real`` lies in or is real folder ``raw`` (what
    ``os.path.commonpath([real, raw]) == raw`` says of two absolute real paths, a tenth of
    its time)."""
    return real == raw or real.startswith(raw if raw.endswith(os.sep) else raw + os.sep)


def listed_paths(raw: Path) -> list:
    """Every path under ``raw`` relative to it, sorted: what ``sorted(str(p.relative_to(raw))
    for p in raw.rglob("*"))`` gives (links to folders listed, not followed), from one
    os.walk (a tenth of the time at 10 000 tables)."""
    out = []
    for root, dirs, files in os.walk(raw):
        rel = os.path.relpath(root, raw)
        prefix = "" if rel == "." else rel + os.sep
        out += [prefix + name for name in dirs + files]
    return sorted(out)


def part_keys(raw_dir, parts: int, settings: dict, previous: dict, digests=None) -> list:
    """The key of each partition: a sha256 of everything its result depends on. Shared by
    all: the code and the versions of the numerical libraries, the settings (of the outputs
    asked for only the step of the evaluated tables, made in the partitions), every path
    under ``raw_dir`` (unlisted files are findings), every source.json and coefficient-set
    file; its own: the tables its species names list and the breakpoints ``previous``
    offers them. ``digests`` (a Digests) remembers the files' sha256 between builds."""
    from .release.provenance import dependency_versions

    raw = Path(raw_dir)
    real = os.path.realpath(raw)
    _real_folder.cache_clear()       # the folders of this build, as they are now
    shared = hashlib.sha256(f"{STORE_FORMAT}\0{code_digest()}\0".encode())
    shared.update(json.dumps(dependency_versions(), sort_keys=True).encode())
    shared.update(json.dumps({k: v for k, v in settings.items() if k != "outputs"},
                             sort_keys=True, default=str).encode())   # outputs: release only
    shared.update(f"table_step {settings.get('outputs', {}).get('table_step')}".encode())
    shared.update("\n".join(listed_paths(raw)).encode())
    own = [hashlib.sha256() for _ in range(parts)]
    for sid, points in sorted(previous.items()):
        own[hashed_partition(species_name(sid), parts)].update(f"{sid}{points}\n".encode())

    def digest(folder: str, name) -> str:
        # a plain file name joined as a string (pathlib's objects cost more than the rest,
        # 10 000 times); any other as pathlib joins it, as ingest reads it
        plain = isinstance(name, str) and "/" not in name and name not in ("", ".", "..")
        return _file_digest(os.path.join(folder, name) if plain else Path(folder) / name,
                            real, digests)

    for src in sorted(raw.glob("*/source.json")):
        shared.update(f"{src.parent.name}\0{_file_digest(src, real, digests)}\n".encode())
        folder = str(src.parent)
        try:
            if src.stat().st_size > MAX_SOURCE_BYTES:
                continue      # refused by ingest: its size is in the key
            doc = json.loads(src.read_bytes())
            for entry in doc.get("coefficient_sets", ()):
                shared.update(f"{entry['file']}\0{digest(folder, entry['file'])}\n".encode())
            for entry in doc.get("tables", ()):
                part = hashed_partition(str(entry["species"]), parts)
                own[part].update(f"{entry['file']}\0{digest(folder, entry['file'])}\n".encode())
        except (OSError, ValueError, AttributeError, TypeError, KeyError, RecursionError):
            continue      # such a source.json is refused by ingest; its bytes are in the key
    base = shared.hexdigest()
    return [hashlib.sha256(f"{base}{k}{h.hexdigest()}".encode()).hexdigest()
            for k, h in enumerate(own)]


class PartStore:
    """The partitions of the last build kept in a release home (``STORE``): a partition whose
    key (``part_keys``) is unchanged is loaded instead of computed. The files are pickles
    written by thermoledger, trusted like its code; ``load`` treats a file it cannot read as
    absent. ``keys`` may be given as a function that makes them, called when they are first
    needed: a store that holds nothing (no folder yet, or not used) needs them only to save
    the first result, so that a first build's workers start while this process makes them."""

    def __init__(self, folder: Path, keys, use: bool = True, through: bool = False):
        self.folder, self._keys, self.use = Path(folder), keys, use
        self.through = through     # ``save`` leaves nothing of a file in the page cache
        self.pending = []
        self._made = False         # this build made the folder

    @property
    def keys(self) -> list:
        """The key of each partition (``part_keys``), made on first use when given as a
        function."""
        if callable(self._keys):
            self._keys = self._keys()
        return self._keys

    def _path(self, k: int) -> Path:
        return self.folder / f"part-{self.keys[k]}.pickle"

    def _pending_path(self, k: int) -> Path:
        return self.folder / f".pending-{os.getpid()}-part-{self.keys[k]}.pickle"

    def holds(self, k: int) -> bool:
        """Whether partition ``k`` has a stored file (``load`` may still find it damaged); no
        key is made to say so when there is no store."""
        return self.use and self.folder.is_dir() and self._path(k).is_file()

    def load(self, k: int):
        """The result kept for partition ``k``: a file holds two pickles, its format and key,
        then the result (read only when the first are this store's)."""
        if not self.use:
            return None
        try:
            with open(self._path(k), "rb") as fh:
                if pickle.load(fh) != (STORE_FORMAT, self.keys[k]):
                    return None
                return pickle.load(fh)
        except Exception as exc:  # noqa: BLE001 - a missing or damaged file is recomputed
            let_through(exc)
            return None

    def save(self, k: int, result) -> None:
        """Write ``result`` of partition ``k`` (or its pickle, as ``_pickled`` gives it) under
        a pending name, kept by ``commit`` and removed by ``discard``: pickled now, as the
        build goes on to add to the library entries it holds, and on disk, not held in
        memory until the release is written."""
        if not self.folder.is_dir():
            self.folder.mkdir(parents=True)
            self._made = True
        body = result if isinstance(result, bytes) else \
            pickle.dumps(result, protocol=pickle.HIGHEST_PROTOCOL)
        with open(self._pending_path(k), "wb") as fh:
            fh.write(pickle.dumps((STORE_FORMAT, self.keys[k]), protocol=pickle.HIGHEST_PROTOCOL))
            fh.write(body)
            fh.flush()
            os.fsync(fh.fileno())
            if self.through:
                paths.drop_cached(fh.fileno())
        self.pending.append(k)

    def commit(self) -> None:
        """Keep the partitions written by ``save`` (after the release was published) and
        delete the stored partitions this build did not use, and pending ones of killed
        builds (only files named as this class names them)."""
        for k in sorted(self.pending):
            os.replace(self._pending_path(k), self._path(k))
        self.pending = []
        keep = {self._path(k).name for k in range(len(self.keys))}
        if self.folder.is_dir():
            for path in self.folder.iterdir():
                if (_STORED.match(path.name) and path.name not in keep) or \
                        _PENDING.match(path.name):
                    path.unlink()

    def discard(self) -> None:
        """Remove what ``save`` wrote (a build that failed), and the folder if this build
        made it."""
        for k in self.pending:
            self._pending_path(k).unlink(missing_ok=True)
        self.pending = []
        if self._made and self.folder.is_dir() and not any(self.folder.iterdir()):
            self.folder.rmdir()
