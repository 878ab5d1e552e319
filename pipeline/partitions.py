"""Species partitions: the engine's unit of parallel work.

Every table and coefficient set belongs to the partition of its species *name* (``Ti`` for
Ti(cr-alpha), Ti(l), ...), so the phases of a species, its sources and its transitions are
read, checked, reconciled and fitted together, with nothing shared between partitions. A
build runs its partitions in worker processes (``run``) and merges their results in one
canonical order (``merge``), so a release built from any number of partitions is byte for
byte the one built from a single partition: the partition count is a setting of the
machine, not of the release. Source-level findings (of a source.json) are found by every
partition alike and kept once.
"""

import hashlib
import os
from dataclasses import dataclass

from .core.records import CheckResult

#: below this many listed tables and sets, a build runs in one process (forking workers
#: costs more than it saves)
PARALLEL_FROM = 400


def partition_of(name: str, parts: int) -> int:
    """The partition (0 .. parts-1) of species name ``name``: a hash, the same in every
    process and on every machine."""
    if parts <= 1:
        return 0
    return int.from_bytes(hashlib.sha256(name.encode("utf-8")).digest()[:8], "big") % parts


@dataclass(frozen=True)
class Part:
    """Which partition to work on: ``index`` of ``count``."""

    index: int = 0
    count: int = 1

    def owns(self, name: str) -> bool:
        return partition_of(name, self.count) == self.index


WHOLE = Part()


@dataclass(frozen=True)
class PartResult:
    """What one partition produced: its check result and, for a build, its fits."""

    checked: CheckResult
    fitted: tuple = ()        # FittedSpecies
    quarantined: tuple = ()   # (TableMeta, findings), after fitting
    findings: tuple = ()      # every finding, after fitting
    entries: tuple = ()       # (species id, library entry)


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


def merge_checks(parts) -> CheckResult:
    """One CheckResult of the partitions' ``parts``, in the canonical order: tables by
    source folder and position in source.json, findings by their sort key, quarantined and
    held-back inputs by file, selections and chains by species."""
    first = parts[0]
    tables = sorted((t for p in parts for t in p.tables), key=_table_key)
    findings = sorted(_unique(f for p in parts for f in p.findings), key=_finding_order)
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
        quarantined=tuple(sorted((q for p in parts for q in p.quarantined),
                                 key=_quarantine_order)),
        held_back=tuple((k, tuple(sorted(_unique(v), key=_finding_order)))
                        for k, v in sorted(held.items())),
        chains=tuple(sorted((c for p in parts for c in p.chains), key=lambda c: c.species)),
        references=first.references)


def merge(parts) -> PartResult:
    """One PartResult of the partitions' results, in the canonical order (``merge_checks``;
    fitted species by id)."""
    return PartResult(
        checked=merge_checks([p.checked for p in parts]),
        fitted=tuple(sorted((s for p in parts for s in p.fitted),
                            key=lambda s: s.table.meta.species_id)),
        quarantined=tuple(sorted((q for p in parts for q in p.quarantined),
                                 key=_quarantine_order)),
        findings=tuple(sorted(_unique(f for p in parts for f in p.findings),
                              key=_finding_order)),
        entries=tuple(sorted((e for p in parts for e in p.entries), key=lambda e: e[0])))


def listed_entries(raw_dir) -> int:
    """How many tables and coefficient sets the source.json files under ``raw_dir`` list (a
    quick count to choose the number of workers; unreadable files count as none)."""
    import json
    from pathlib import Path

    n = 0
    for path in Path(raw_dir).glob("*/source.json"):
        try:
            doc = json.loads(path.read_bytes())
            n += len(doc.get("tables", ())) + len(doc.get("coefficient_sets", ()))
        except (OSError, ValueError, AttributeError, TypeError, RecursionError):
            continue
    return n


def worker_count(raw_dir, asked: int = 0) -> int:
    """``asked`` when given (> 0), else one process per core (at most 4) for a large build
    and one for a small one."""
    if asked > 0:
        return asked
    return min(_cores(), 4) if listed_entries(raw_dir) >= PARALLEL_FROM else 1


def _cores() -> int:
    """The cores this process may run on."""
    if hasattr(os, "sched_getaffinity"):
        return len(os.sched_getaffinity(0)) or 1
    return os.cpu_count() or 1


def run(work, count: int, say=None) -> PartResult:
    """``work(Part)`` for each of ``count`` partitions, in worker processes when ``count`` >
    1, merged (``merge``). A worker that dies or is interrupted stops the build."""
    say = say or (lambda *a: None)
    if count <= 1:
        return merge([work(WHOLE)])
    from concurrent.futures import ProcessPoolExecutor

    from .release.report import stop_workers, workers_die_with_parent

    pool = ProcessPoolExecutor(count, initializer=workers_die_with_parent,
                               initargs=(os.getpid(),))
    try:
        futures = [pool.submit(work, Part(k, count)) for k in range(count)]
        results = []
        for k, fut in enumerate(futures):
            results.append(fut.result())
            say("partitions", k + 1, count, f"partition {k + 1} of {count}")
    except BaseException:
        stop_workers(pool)
        raise
    pool.shutdown()
    return merge(results)
