"""Assemble every file of a release from the fitted library: library, findings, evaluated
tables, report, schemas, provenance, manifest and Data Package, as {relative path: bytes}."""

import os
from collections.abc import Sequence
from contextlib import ExitStack, contextmanager, nullcontext
from dataclasses import dataclass

import numpy as np

from ..core import processes
from ..core.names import file_stems
from ..core.records import CheckResult
from ..core.rows import concat
from ..core.settings import Settings
from ..library import document as library
from ..library.entries import Entries, ids_of
from ..physics import forms
from . import document, provenance, reuse
from .held import briefs_of


@dataclass(frozen=True)
class Outcome:
    """What the stages produced for one release."""

    document: dict         # library.json
    findings: tuple        # every finding of the build
    fitted: Sequence       # FittedSpecies in species-id order (release.held.HeldFitted)
    quarantined: tuple     # (TableMeta, findings)
    checked: CheckResult   # what was read and checked (tables without their rows)
    points: dict = None    # {species id: plot_points of it}, for the report
    rows: tuple = ()       # library.tables.pack_rows blocks of own_rows, made in the partitions


#: a release of ASIDE_FROM species or more, and fewer than ASIDE_UNTIL, has library.json and
#: tables.parquet written by a forked process (core.processes.aside) while the build's own
#: process checks the library against its schema and writes library.parquet and
#: findings.json (the two trade library.json and findings.json when most of library.json is
#: taken from the last release): at 10 000 species some 0.6 s of 1.8 s after the
#: partitions of a full build. The helper
#: shares the build's memory, but every page of it that the helper touches (an object read
#: raises its reference count) is copied: some 3.7 KB per species (375 MB at 100 000, where
#: a rebuild then peaked at 1 118 instead of 742 MiB). library.parquet, whose row groups
#: hold the most, is made here as without a helper. The report waits for the helper: its
#: workers take both cores, and more processes at once hold more memory
ASIDE_FROM, ASIDE_UNTIL = 2000, 40000
# A larger release, written without the report drawn meanwhile and taking nothing of
# library.json and tables.parquet from the last release, has both written by a process
# started fresh instead (``_fresh_aside``, core.processes.fresh_aside), which reads the
# entries and the evaluated tables from the build's scratch file itself (core.spill.
# dumps_across) and copies nothing of the build's heap: see ``_fresh_aside`` for what it
# saves. A forked helper at 100 000 species made the build peak at 1 021 MiB.


def release_files(outcome: Outcome, ctx: Settings, release, say=None, pages=None,
                  previous=None, placed=None):
    """Every file of the release into ``release`` (publish.Release: each written as soon as
    it is made), each checked against its schema where it has one; ``say(stage, i, n,
    label)`` hears of each step (the report species by species). ``pages`` (pages.Drawn)
    offers the report pages of the last release, linked where drawn from the same inputs.
    library.json and tables.parquet of a large release are written by a process of their
    own (``ASIDE_FROM``, ``ASIDE_UNTIL``): the same bytes, whichever process writes them.
    ``previous`` (reuse.Previous) offers the species' pieces of the last release, and
    ``placed`` (reuse.Placed) hears where this release's lie (both or neither given)."""

    from ..library.tables import unpack_rows
    from . import report, tables

    doc, checked = outcome.document, outcome.checked
    ids = ids_of(doc["species"])
    file_stems(ids)  # unique file names or stop
    out = ctx.outputs
    say = say or (lambda *a: None)
    own = unpack_rows(*outcome.rows)          # each species' rows made when written
    cores = os.cpu_count() or 1
    staging = release.staging() if ASIDE_FROM <= len(ids) < ASIDE_UNTIL and cores > 1 \
        else None
    takes = _takings(doc, outcome.fitted, previous, placed) if previous is not None else None
    # library.json goes aside unless most of it is taken from the last release: then it
    # costs less than tables.parquet, which is decompressed and compressed again, and
    # findings.json goes aside instead
    aside = ASIDE_NAMES if not takes or takes[0].share() < 0.5 else \
        ("tables.parquet", "findings.json")
    findings_doc = document.findings_document(outcome.findings)
    if out.report:
        report.start_drawing(len(ids))   # its workers' server imports while the files go
    say("write tables", 0, 0, "library.json, library.parquet, tables.parquet")
    if staging:
        processes.give_back_memory()         # before the helper forks: it shares less
    # a release written by this process alone has the report drawn meanwhile: its workers
    # take the other core, and are sent page files between the pieces written
    early = out.report and staging is None and \
        report.drawn_by_workers(len(ids), report.default_workers())
    with ExitStack() as kept:
        species = None         # the manifest's lineages, when made ahead
        drawing = kept.enter_context(ExitStack())
        drawn = drawing.enter_context(report.drawing(
            doc, outcome.points, ctx.fit.accept_cp_max_rel, say=say, release=release,
            pages=pages.into(release) if pages else None)) if early else None
        release.between = drawn.pump if drawn else None
        # beyond the window: the staging a fresh process writes into, when nothing of the
        # two files is taken from the last release
        fresh = release.staging() if staging is None and not early and \
            len(ids) >= ASIDE_UNTIL and cores > 1 and \
            not (takes and (takes[0].usable or takes[1].usable)) else None
        with (processes.aside(aside_files, doc, own, out.table_step, staging.write_chunks,
                              takes and takes[:2], aside, findings_doc)
              if staging else _fresh_aside(doc, own, out.table_step, fresh, takes and takes[:2])
              if fresh else nullcontext()) as helper:
            aside_findings = helper is not None and "findings.json" in aside
            document.release_files(doc, None if aside_findings else findings_doc, release,
                                   takes and takes[2])
            here = ASIDE_NAMES if helper is None else \
                tuple(name for name in ASIDE_NAMES if name not in aside)
            _, got = aside_files(doc, own, out.table_step, release.add_chunks,
                                 takes and takes[:2], here)
            if helper is not None or takes:    # the manifest's lineages, checked, written
                species = kept.enter_context(_lineages_ahead(outcome.fitted, release.folder,
                                                             takes and takes[3]))
            if out.tables_csv:
                release.update(tables.csv_files(doc, out.table_step))
            if helper is not None:
                sums, got_aside = helper.result()
                got.update(got_aside)
                for rel, summed in sums.items():
                    release.adopt(rel, summed)     # before the report's workers fork
        release.between = None
        if drawn is not None:
            drawn.finish()
            drawing.close()                        # its workers end here
        elif out.report:
            report.report_files(doc, outcome.points, ctx.fit.accept_cp_max_rel, say=say,
                                release=release,
                                pages=pages.into(release) if pages else None)
        say("write provenance", 0, 0, "provenance.json, manifest.json")
        release.add_chunks("provenance.json", document.json_chunks(
            provenance.prov_document(outcome.fitted, checked.inputs, release.outputs())))
        man = provenance.manifest(outcome.fitted, outcome.quarantined, checked.inputs,
                                  release.outputs(), ctx.to_dict(),
                                  doc["build"]["inputs_sha256"], species)
        document.require_valid(man, "manifest.schema.json", "manifest.json")
        release.add_chunks("manifest.json", document.json_chunks(man))
        if takes:
            _placed(placed, takes, got, species)
    sources = {t.meta.source.id: t.meta.source for t in checked.tables}.values()
    release.add_chunks("datapackage.json", document.json_chunks(
        provenance.datapackage(release.outputs(), sources, document.NOTICE)))
    return release


@contextmanager
def _fresh_aside(doc: dict, own, step: float, staging, takes=None):
    """``aside_files`` of ASIDE_NAMES in a process started fresh (core.processes.fresh_aside),
    written into ``staging``; with ``takes`` (the reuse.Takings of library.json and
    tables.parquet, taking nothing), where each species' pieces lie comes back with the
    files. None when no such process can read the build's scratch file or be started (the
    build's own process then writes them). At 100 000 species the release after the
    partitions took 15.9-16.6 instead of 22.4-23.0 s (the two codes in turn, twice each),
    and the build peaked at 913-921 MiB; what crosses is 1.4 MB at 10 000 species (the
    places of the entries and rows held compact: ``Entries.read_only``,
    ``PackedRows.read_only``)."""
    from ..core.spill import dumps_across

    placing = tuple(reuse.Taking.placing(t.name, len(t.keys)) for t in takes) \
        if takes else None
    try:
        species = doc["species"]
        data = dumps_across(({**doc, "species": species.read_only() if isinstance(
            species, Entries) else species}, own.read_only(), placing))
    except OSError:
        yield None
        return
    with processes.fresh_aside((__name__,), _aside_across, [data], step,
                               staging.write_chunks) as helper:
        yield helper


def _aside_across(box: list, step: float, write) -> tuple:
    """``aside_files`` of ASIDE_NAMES of the (document, evaluated tables, the Takings of
    ``_fresh_aside`` or None) pickled in ``box`` (core.spill.dumps_across; taken out of it,
    so that its bytes go once read), in the fresh process of ``_fresh_aside``."""
    from ..core.spill import loads_across

    doc, own, placing = loads_across(box.pop())
    return aside_files(doc, own, step, write, placing, ASIDE_NAMES)


def _takings(doc: dict, fitted, previous, placed) -> tuple:
    """(library.json, tables.parquet, library.parquet, manifest lineages) reuse.Takings of
    a release of library document ``doc`` and ``fitted``: the species' pieces it may take
    from the ``previous`` release (made before a helper forks: the keys read every entry)."""
    keys, ids = reuse.keys_of(doc["species"]), ids_of(doc["species"])
    lineages = provenance.lineages(fitted)
    placed.contexts["tables.parquet"] = t_ctx = reuse.tables_context(doc, keys)
    return (reuse.Taking(previous, "library.json", keys, ids),
            reuse.Taking(previous, "tables.parquet", keys, ids,
                         usable=previous.contexts.get("tables.parquet") == t_ctx),
            reuse.Taking(previous, "library.parquet", keys, ids),
            reuse.Taking(previous, "manifest.json", reuse.keys_of(lineages),
                         [x.species_id for x in briefs_of(fitted)]))


def _placed(placed, takes, got: dict, species) -> None:
    """Tell ``placed`` where the pieces of the release just written lie: library.json's and
    tables.parquet's as ``aside_files`` gave them (``got``), library.parquet's as its Taking
    heard them, the manifest's lineages (``species``, document.Rendered) from where their
    list begins in the file."""
    import numpy as np

    json_t, tables_t, parquet_t, manifest_t = takes
    placed.add("library.json", "entries", json_t.keys, got["library.json"])
    placed.add("tables.parquet", "entries", tables_t.keys, got["tables.parquet"])
    placed.add("library.parquet", "entries", parquet_t.keys, parquet_t.placed)
    if species is not None and species.start is not None:
        at = np.frombuffer(species.placed, dtype=np.int64).copy()
        at[0::2] += species.start
        placed.add("manifest.json", "lineages", manifest_t.keys, at)


@contextmanager
def _lineages_ahead(fitted, folder, taken=None):
    """The manifest's lineages of ``fitted``, checked and written ahead into a scratch file
    in ``folder`` (release.document.render_list), for as long as the block lasts; None
    when there are none. ``taken`` (reuse.Taking) gives those it takes from the last
    release."""
    from ..core.spill import Spill

    items = provenance.lineages(fitted)
    if not len(items):
        yield None
        return
    spill = Spill(folder)
    try:
        yield document.render_list(items, "manifest.schema.json", "species", "manifest.json",
                                   spill, taken.piece if taken else None)
    finally:
        spill.close()


#: the files ``aside_files`` writes
ASIDE_NAMES = ("library.json", "tables.parquet")


def aside_files(doc: dict, own, step: float, write, takes=None, names=ASIDE_NAMES,
                findings_doc=None) -> tuple:
    """The files ``names`` of library.json and tables.parquet of library document ``doc``
    (``own``: the species' evaluated rows, library.tables.unpack_rows), and findings.json
    of ``findings_doc`` when named, each given to ``write(relative path, byte pieces)``:
    ({relative path: what ``write`` returned}, {relative path: where each species' piece
    lies in it}, the latter only with ``takes``, the reuse.Takings of library.json and
    tables.parquet). library.json is checked against its schema by
    ``document.release_files``, which a build calls at the same time."""
    from . import tables

    json_t, tables_t = takes or (None, None)
    sums, placed = {}, {}
    if "findings.json" in names:
        sums["findings.json"] = document.findings_file(findings_doc, write)
    if "library.json" in names:
        if json_t is None:
            sums["library.json"] = write("library.json", document.json_chunks(doc))
        else:
            species = doc["species"]

            def pieces():
                for j in range(len(species)):
                    yield json_t.piece(j) or document.item_bytes(species[j])

            listed = document.Pieced(len(species), pieces)
            sums["library.json"] = write("library.json",
                                         document.json_chunks({**doc, "species": listed}))
            placed["library.json"] = listed.placed
    if "tables.parquet" in names:
        sums["tables.parquet"] = write("tables.parquet", tables.tables_parquet_chunks(
            doc, step, own=own, taken=tables_t))
        if tables_t is not None:
            tables_t.close()
            placed["tables.parquet"] = tables_t.placed
    return sums, placed


def evaluated_rows(entries: dict, chains, step: float) -> dict:
    """library.tables.own_rows of the fitted ``entries`` of one partition, packed in one
    block (library.tables.pack_rows), with the transitions between its fitted phases
    (``chains``: a species' phases are fitted in one partition), every ``step`` K."""
    from ..library.tables import own_rows_of, pack_rows, transitions_of

    trs = transitions_of(document.transition_entries(chains, set(entries)))
    return pack_rows(own_rows_of(list(entries.values()), step, None, trs))


def plot_points(species, checked: CheckResult) -> dict:
    """Per species entry of ``species``: the rows used [K, J/(mol K)] and left out, and the
    deviations of the fit from the table's H-H298 [J/mol] and S [J/(mol K)] columns, for
    the report's plots (computed where the rows are: in the species' partition)."""
    by_sel = {s.species_id: s for s in checked.selections}
    parts_of = {}
    for t in checked.tables:               # the phases of one file together
        parts_of.setdefault(t.meta.file, []).append(t.data)
    rows_of = {file: parts[0] if len(parts) == 1 else concat(parts)
               for file, parts in parts_of.items()}
    out = {}
    for sp in species:
        d = by_sel[sp["id"]].data
        p = {"t": d["T"], "cp": d["Cp"]}
        t_out, cp_out = [], []
        for x in sp["excluded"]:
            rows = rows_of[x["file"]]
            hit = rows["line"] == x["line"]
            t_out += rows["T"][hit].tolist()
            cp_out += rows["Cp"][hit].tolist()
        p["t_out"], p["cp_out"] = np.array(t_out), np.array(cp_out)
        rr = library.ranges_of(sp)
        for col, key in (("dH", "dh"), ("S", "s")):
            m = d.given(col)
            if m.any():
                t = d["T"][m]
                ev = forms.evaluate_ranges(rr, t, sp["form"])
                fitted_v = ev["H"] - library.enthalpy_zero(sp) if col == "dH" else ev["S"]
                p[key] = (t, fitted_v - d[col][m])
        out[sp["id"]] = p
    return out
