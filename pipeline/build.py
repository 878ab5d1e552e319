"""Orchestration: ingest -> validate -> reconcile -> fit -> release. Only wires the stages;
each stage's work, and its tests, live in its own sub-package."""

import pickle
import tempfile
from array import array
from collections.abc import Sequence
from contextlib import nullcontext
from dataclasses import dataclass, replace
from functools import partial
from pathlib import Path

import numpy as np

from . import __version__, fit, ingest, partitions
from .checks import acknowledge, reconcile, references, registry, transitions
from .core import paths, units
from .core.errors import FitError, OutputError, let_through
from .core.findings import ERROR, INFO, by_subject, concerns, finding, stage_failed, subject
from .core.processes import collector_paused, standby
from .core.records import CheckResult, CpData, FittedSpecies, SpeciesIdentity, Table
from .core.settings import Settings, for_table
from .core.spill import Spill, SpilledObjects
from .library import document as library
from .library.entries import compact, outline, outlines_of
from .release import assemble, formation, held, provenance, publish, reuse
from .release import audit as audit_stage
from .release import document as release_document
from .release.pages import Drawn


@dataclass(frozen=True)
class BuildResult:
    """What a build produced: the fitted species, the tables held back, every finding, the
    library document and the release files (written or not)."""

    fitted: Sequence       # FittedSpecies in species-id order, their fits without the
    #                        numbers of their entries (``_lineage_only``: the entries in
    #                        ``document`` hold them), each read from the build's scratch
    #                        file when asked for (release.held.HeldFitted)
    quarantined: tuple     # (TableMeta, findings)
    findings: tuple        # all findings
    document: dict         # library.json
    written: tuple         # paths written
    files: object = None   # publish.Release: the release's files (written or kept), .get(path)
    held_back: tuple = ()  # (file, error findings): sources and tables that could not be read
    inputs: tuple = ()     # InputFile of every raw input read
    reused: tuple = (0, 1)  # (partitions taken from the last build, partitions)
    linked: int = 0         # species whose report pages were linked from the last release
    placed: object = None   # release.reuse.Placed: where the species' pieces lie in its files


def examine(raw_dir, ctx: Settings = Settings(), workers: int = 1,
            rows: bool = True) -> CheckResult:
    """Ingest, validate and reconcile (the ``check`` command); no fitting, nothing written.
    ``workers`` processes check the species partitions (0: as many as suit the machine and
    the size of ``raw_dir``); the result does not depend on how many. Without ``rows``, its
    tables and selections come without their rows (the ``check`` command: the rows of
    100 000 tables would cost gigabytes)."""
    cut = partitions.plan(raw_dir, workers)
    return partitions.run(partial(_check_part, raw_dir, ctx, rows), cut)[0].checked


def _check_part(raw_dir, ctx, rows, part) -> partitions.PartResult:
    checked = examine_part(raw_dir, ctx, part)
    return partitions.PartResult(checked=checked if rows else _without_rows(checked, ())[0])


def examine_part(raw_dir, ctx: Settings = Settings(), part=None) -> CheckResult:
    """``examine`` of the species of one partition (partitions.Part; all by default), in
    this process."""
    got = ingest.ingest(raw_dir, part)
    tables, chains, linked = transitions.link(got.tables, got.transitions, ctx,
                                              got.findings)
    declared, unclear = references.declare(got.sources, ctx.references)
    found = list(got.findings) + list(linked) + list(unclear) + \
        list(registry.validate(tables, ctx, got.findings))
    about = by_subject(found)
    accepted, quarantined = [], []
    for table in tables:
        errors = [x for x in about.get(table.meta.file, ())
                  if x.severity == ERROR and concerns(x, table.meta.species_id)]
        if errors:
            quarantined.append((table.meta, tuple(sorted(errors, key=lambda f: f.sort_key()))))
        else:
            accepted.append(table)
    selections, more, dropped = reconcile.reconcile(accepted, found, ctx)
    for table in tables:              # the checks are done
        table.forget_valid()
    found += more
    quarantined += dropped
    found = acknowledge.apply(tables, found)
    return CheckResult(tables=tables, findings=tuple(found), inputs=got.inputs,
                       selections=tuple(selections), quarantined=tuple(quarantined),
                       held_back=held_back(tables, found), chains=chains, references=declared)


def held_back(tables, findings) -> tuple:
    """(file, error findings) for every input with errors that is not a table that was read:
    a source.json that failed (its whole source is held back), a listed table that could not
    be read at all, or a set of a coefficient-set file that could not be read (the findings
    marked with its species)."""
    files = {t.meta.file for t in tables}
    read = {(t.meta.file, t.meta.species_id) for t in tables}

    def unread(f) -> bool:
        species = f.extra.get("species")
        return (subject(f), species) not in read if species else subject(f) not in files

    about = by_subject(f for f in findings if f.severity == ERROR and unread(f)
                       and not (f.column or "").startswith("transitions/"))
    return tuple((k, tuple(sorted(v, key=lambda f: f.sort_key())))
                 for k, v in sorted(about.items()))


def fit_selection(sel, ctx: Settings, previous=None, who=None, searched=None):
    """Fit one reconciled species with the build's settings and its table's overrides;
    ``previous`` its breakpoints in the previous release (offered to the search); ``who``
    its identity and anchors (by default those of its preferred table); ``searched`` its
    (CpData, fit settings, Prepared fit, chosen breakpoints) from the batched path
    (``batch_searched``), or None."""
    meta = sel.primary.meta
    data, settings, prepared, chosen = searched or (
        CpData.of_rows(sel.data), for_table(ctx.fit, meta.fit_overrides), None, None)
    return fit.fit_species(who or SpeciesIdentity.of_table(meta), data, settings, previous,
                           chosen, prepared)


def batch_searched(order, ctx: Settings, previous: dict, chained) -> dict:
    """{species id: (CpData, fit settings, Prepared fit, chosen breakpoints)} of the
    selections of ``order`` that the batched path prepared and searched (fit/batched.py):
    those fitted from tables (not a published set), outside a chain of phases (``chained``:
    ids whose identity depends on another phase's fit)."""
    items = {}
    for sel in order:
        meta, sid = sel.primary.meta, sel.species_id
        if meta.published is not None or sid in chained:
            continue
        try:
            item = (sid, SpeciesIdentity.of_table(meta), CpData.of_rows(sel.data),
                    for_table(ctx.fit, meta.fit_overrides), previous.get(sid))
        except Exception as exc:  # noqa: BLE001 - fit_selection reports what is wrong
            let_through(exc)
            continue
        items[sid] = item
    return {sid: (items[sid][2], items[sid][3], *got)
            for sid, got in fit.batched.choices(items.values()).items()}


def settle_set(sel, ctx: Settings, about):
    """The result of a species whose preferred table is a published coefficient set: the set
    as published, or repaired when asked and defective (fit/published.py); its findings
    (``about``: findings by file) name its defects."""
    meta = sel.primary.meta
    defects = [f.code for f in about.get(meta.file, ()) if concerns(f, meta.species_id)
               and f.severity != INFO and f.code.startswith("SET-")]
    return fit.published.settle(meta, sel.primary.data, for_table(ctx.fit, meta.fit_overrides),
                            ctx.repairs(meta), defects)


#: the breakpoints of the last release, kept beside its partitions (``keep_breakpoints``)
KEPT_BREAKPOINTS = "breakpoints.json"


def _library_identity(out_dir) -> list:
    """[release folder name, core.paths.identity ...] of the library.json that ``out_dir``
    publishes (raises OSError when there is none)."""
    path = library.release_folder(Path(out_dir)) / "library.json"
    return [path.parent.name, *paths.identity(path.stat())]


def keep_breakpoints(out_dir, doc: dict) -> None:
    """Keep the breakpoints of ``doc``, just published into ``out_dir``, in its store of
    partitions with the identity of its library.json: the next build reads them instead of
    the whole library (87 MB at 10 000 species). Written atomically."""
    import orjson

    folder = Path(out_dir) / partitions.STORE
    if not folder.is_dir():
        return
    kept = {"library": _library_identity(out_dir),
            "breakpoints": {sp["id"]: sp["breakpoints"] for sp in outlines_of(doc)}}
    paths.write_atomic(folder / KEPT_BREAKPOINTS, orjson.dumps(kept))


def previous_breakpoints(out_dir) -> dict:
    """{species id: breakpoints [K]} of the release published in ``out_dir``, offered to the
    breakpoint search so that breakpoints stay where they were unless the data say otherwise;
    empty when there is none or it cannot be read (a first build). Those kept by the build
    that published it (``keep_breakpoints``) when its library.json is still the one they
    were kept with; else only the breakpoints of library.json are read (orjson, no schema
    check: about a quarter of the time of a full load). An entry whose id or breakpoints
    are not what a release writes is not offered."""
    import orjson

    try:
        identity = _library_identity(out_dir)
        doc = orjson.loads((Path(out_dir) / partitions.STORE / KEPT_BREAKPOINTS).read_bytes())
        if isinstance(doc, dict) and doc.get("library") == identity and \
                isinstance(doc.get("breakpoints"), dict):
            return _well_formed(doc["breakpoints"].items())
    except (OSError, ValueError):
        pass
    try:
        doc = orjson.loads((library.release_folder(Path(out_dir)) / "library.json").read_bytes())
        species = doc["species"]
    except (OSError, ValueError, KeyError, TypeError):
        return {}
    return _well_formed((sp.get("id"), sp.get("breakpoints"))
                        for sp in (species if isinstance(species, list) else ())
                        if isinstance(sp, dict))


def _well_formed(pairs) -> dict:
    """{id: breakpoints} of the (id, breakpoints) ``pairs`` whose id is a string and
    breakpoints a list of finite numbers."""
    import math

    def number(x) -> bool:
        return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)

    return {sid: tuple(bps) for sid, bps in pairs
            if isinstance(sid, str) and isinstance(bps, list) and all(map(number, bps))}


def offered_breakpoints(doc: dict) -> dict:
    """{species id: breakpoints [K]} that a release's build was offered from its previous
    release (its recorded breakpoint choices): what a rebuild must be offered again."""
    out = {}
    for sp in doc["species"]:
        choice = sp.get("breakpoint_choice") or {}
        if choice.get("offered_by") == "previous release":
            out[sp["id"]] = tuple(choice["offered"])
    return out


def species_findings(sel, about) -> tuple:
    """Warnings and infos of every table used for a species (``about``: findings by file),
    leaving out those marked as about another phase of a shared file."""
    own = [f for u in sel.uses for f in about.get(u.meta.file, ()) if f.severity != ERROR
           and f.extra.get("species", sel.species_id) == sel.species_id]
    return tuple(dict.fromkeys(own))  # keep order, drop repeats


def build(raw_dir, out_dir, ctx: Settings = Settings(), *, write=True, progress=None,
          wait: float = 0.0, previous=None, workers: int = 0, parts: int = 0,
          fresh: bool = False) -> BuildResult:
    """Run every stage; publish the outputs as the new release of ``out_dir`` unless
    ``write`` is False. The output folder is vetted (publish.vet_output_folder) and locked
    before any work, so a refused or busy folder costs nothing. ``previous`` maps species
    ids to the breakpoints offered to the search; by default those of the release already
    published in ``out_dir``. ``workers`` processes read, check and fit the ``parts``
    species partitions (0: as suits the machine and the build, partitions.plan); the release
    does not depend on either. A partition whose inputs, settings, offered breakpoints and
    code are those of a partition of the last build into ``out_dir`` is taken from it
    (partitions.PartStore) unless ``fresh``."""
    with collector_paused():     # the release is assembled from millions of kept objects
        return _planned_build(raw_dir, out_dir, ctx, write, progress, wait, previous,
                              partitions.plan(raw_dir, workers, parts), fresh)


def _warm_up(raw_dir: str, parts: int) -> None:
    """What the first partition a process computes loads before it starts (half a second):
    the checking and fitting modules with scipy, the unit registry, and every source.json
    read and parsed for a cut into ``parts`` partitions (partition 0's tables read too)."""
    from .fit import batched, extrapolate, species  # noqa: F401 - loaded, with scipy

    units.registry()
    ingest.ingest(raw_dir, partitions.Part(0, parts))


def _pint_version() -> str:
    import importlib.metadata as md

    try:
        return md.version("pint")
    except md.PackageNotFoundError:
        return "unknown"


def _planned_build(raw_dir, out_dir, ctx, write, progress, wait, previous, cut, fresh):
    if not write:
        return _build(raw_dir, None, ctx, progress, previous or {}, cut)
    real = publish.vet_output_folder(out_dir, [raw_dir])
    # a rebuild (several workers, partitions stored) has a process prepare itself to compute
    # a changed partition while this one finds out which partitions changed
    rebuild = not fresh and cut.workers > 1 and (real / partitions.STORE).is_dir()
    if (real / partitions.STORE).is_dir():         # its processes read pint's definitions kept
        units.keep_definitions(real / partitions.STORE / f"pint-{_pint_version()}")
    with publish.locked(real, wait), \
            (standby(_warm_up, str(raw_dir), cut.parts) if rebuild else nullcontext()) as ready:
        if previous is None:
            previous = previous_breakpoints(real)
        digests = partitions.Digests(real / partitions.STORE, use=not fresh)
        # the keys are made when first needed: before the workers start when there is a
        # store to look in, while they work on a first or fresh build
        store = partitions.PartStore(
            real / partitions.STORE, partial(partitions.part_keys, raw_dir, cut.parts,
                                             ctx.to_dict(), previous, digests), use=not fresh,
            through=cut.parts >= partitions.THROUGH_FROM)
        drawn = Drawn(real, partitions.code_digest(), use=not fresh) \
            if ctx.outputs.report else None
        context = reuse.context(partitions.code_digest(), __version__, ctx.to_dict())
        pieces = reuse.previous(real / partitions.STORE, real / publish.CURRENT, context,
                                use=not fresh)
        try:
            result = _build(raw_dir, real, ctx, progress, previous, cut, store, drawn, ready,
                            pieces)
        except BaseException:
            store.discard()
            if drawn:
                drawn.discard()
            raise
        finally:
            pieces.close()
        store.commit()
        keep_breakpoints(real, result.document)
        reuse.keep(real / partitions.STORE, real / publish.CURRENT, context, result.placed)
        digests.save()
        if drawn:
            drawn.save()
    return result


def _fit_all(checked: CheckResult, ctx: Settings, say, previous: dict):
    """(fitted, quarantined, findings, entries) after fitting every selection, the phases of
    a species along their chain of transitions (fit/phases.py); a species whose fit fails
    or raises is quarantined with its finding, and the rest go on."""
    findings = list(checked.findings)
    quarantined = list(checked.quarantined)
    fitted, done = {}, {}
    order = fit.phases.fitting_order(checked.selections, checked.chains)
    chain_of = fit.phases.chains_by_id(checked.chains)
    about = by_subject(findings)
    searched = batch_searched(order, ctx, previous, chain_of)
    for k, sel in enumerate(order):
        meta = sel.primary.meta
        say("fit", k + 1, len(order), sel.species_id)
        try:
            chain = chain_of.get(sel.species_id)
            who, anchor = fit.phases.identity(meta, chain, done) if chain else (None, {})
            if meta.published is not None:
                result = settle_set(sel, ctx, about)
            else:
                result = fit_selection(sel, ctx, previous.get(sel.species_id), who,
                                       searched.get(sel.species_id))
            notes = [finding(code, msg, **meta.where) for code, msg in result.notes]
            notes = [f.about_species(sel.species_id) for f in notes] if meta.shared else notes
            rows = rows_used(sel.data)
            for f in notes:
                about.setdefault(meta.file, []).append(f)
        except Exception as exc:  # noqa: BLE001 - one bad table never stops the rest
            let_through(exc)
            f = _fit_failure(exc, meta)
            findings.append(f)
            quarantined.append((meta, (f,)))
            continue
        findings += notes
        done[sel.species_id] = (result, anchor)
        fitted[sel.species_id] = FittedSpecies(table=sel.primary, fit=result, uses=sel.uses,
                                               excluded=sel.excluded, rows=rows, anchor=anchor)
    metas = {sid: sp.table.meta for sid, sp in fitted.items()}
    for chain in checked.chains:
        more = fit.phases.check_chain(chain, done, metas)
        findings += more
        for f in more:
            about.setdefault(f.file, []).append(f)
    out, entries = [], {}
    selection = {s.species_id: s for s in order}
    for sid in sorted(fitted):
        done_ = replace(fitted[sid], findings=species_findings(selection[sid], about))
        try:
            entry = release_document.species_entry(done_)
            bad = release_document.non_finite(entry)
            if bad:
                raise FitError(sid, f"the fitted entry holds a non-finite number at {bad}")
        except Exception as exc:  # noqa: BLE001 - one bad table never stops the rest
            let_through(exc)
            f = _fit_failure(exc, done_.table.meta)
            findings.append(f)
            quarantined.append((done_.table.meta, (f,)))
            continue
        out.append(done_)
        entries[sid] = entry
    return out, quarantined, findings, entries


def rows_used(data) -> tuple:
    """(file, lines) of selection rows ``data``: each file once, files and lines ascending;
    the lines an array of 8-byte integers (a large build keeps these until its release is
    written: one string per file, not per row, and 8 bytes per line, not a Python int)."""
    files, lines = data["file"], data["line"]
    if len(files) and (files == files[0]).all():        # rows of one file: the usual case
        return ((str(files[0]), array("q", np.sort(lines).tolist())),)
    return tuple((str(f), array("q", np.sort(lines[files == f]).tolist()))
                 for f in np.unique(files))


def _fit_failure(exc, meta):
    """The finding of a species whose fit failed or raised."""
    if isinstance(exc, FitError):
        code = "FIT-REJECTED" if isinstance(exc, fit.FitRejected) else "FIT-FAILED"
        return finding(code, exc.reason, **meta.where)
    return stage_failed("fit", exc, **meta.where)


def _build_part(raw_dir, ctx: Settings, previous: dict, say, part) -> partitions.PartResult:
    """Read, check and fit the species of one partition, gather the rows its report plots
    (also without a report, so that the result does not depend on the outputs asked for)
    and evaluate its species' tables (all but the formation properties, which need the
    reference species of every partition); the tables go on without their rows (what
    follows needs their metadata only), the library entries and the manifest's lineages as
    compact JSON (library.entries: 4.9 instead of 11.8 KB per species) and the fitted
    species and the plot points pickled (the fitted species as (release.held.Brief,
    pickle)), put in the build's scratch file by ``_held``; no selections (what follows
    needs none: the build's process unpickled them to drop them, a third of the time it
    took to load the stored partitions of 10 000 species)."""
    checked = examine_part(raw_dir, ctx, part)
    fitted, quarantined, findings, entries = _fit_all(checked, ctx, say, previous)
    points = assemble.plot_points(entries.values(), checked)   # whatever the outputs
    rows = assemble.evaluated_rows(entries, checked.chains, ctx.outputs.table_step)
    checked, fitted = _without_rows(replace(checked, selections=()), _lineage_only(fitted))
    lineages = tuple((sp.table.meta.species_id, compact(provenance.lineage(sp))) for sp in fitted)
    blobs = tuple((sid, compact(e)) for sid, e in entries.items())
    return partitions.PartResult(
        checked=checked, fitted=tuple((held.brief(sp), held.pickled(sp)) for sp in fitted),
        lineages=lineages, quarantined=tuple(quarantined), findings=tuple(findings),
        entries=blobs, outlines=tuple((sid, compact(outline(e))) for sid, e in entries.items()),
        points=tuple((sid, pickle.dumps(p, protocol=pickle.HIGHEST_PROTOCOL))
                     for sid, p in points.items()),
        rows=(rows,), digests=_digests(blobs, lineages))


def _digests(entries, lineages) -> tuple:
    """(species id, sha256 of its entry's compact JSON, of its lineage's) of a partition's
    ``entries`` and ``lineages`` ((species id, compact JSON) each; the same ids), made where
    the partition is: the keys of the pieces a release takes from the last
    (release/reuse.py)."""
    import hashlib

    lines = dict(lineages)
    return tuple((sid, hashlib.sha256(blob).hexdigest(),
                  hashlib.sha256(lines[sid]).hexdigest() if sid in lines else None)
                 for sid, blob in entries)


def _without_rows(checked: CheckResult, fitted) -> tuple:
    """(checked, fitted) with every table and selection emptied of its rows: a large build
    keeps about 25 KB less per species until its release is written. Tables with the same
    columns share one empty Rows (pickled once, not once per table)."""
    bare, no_rows = {}, {}

    def nothing(data):
        key = data.columns
        if key not in no_rows:                    # (made once: setdefault would make each)
            no_rows[key] = data.head(0)
        return no_rows[key]

    def empty(table):
        if id(table) not in bare:
            bare[id(table)] = Table(meta=table.meta, data=nothing(table.data))
        return bare[id(table)]

    checked = replace(checked, tables=tuple(empty(t) for t in checked.tables),
                      selections=tuple(replace(s, primary=empty(s.primary), data=nothing(s.data))
                                       for s in checked.selections))
    return checked, [replace(f, table=empty(f.table)) for f in fitted]


def _lineage_only(fitted) -> list:
    """The FittedSpecies of a partition as a build keeps them until its release is written:
    their fits without the numbers their library entries already hold (ranges, covariance,
    model error, acceptance, breakpoint choice, extrapolated intervals, notes; about 7 KB
    per species). What the release still takes from them is their lineage (provenance.py):
    the id, form, settings and origin of the fit, the tables used, the lines used and left
    out, and the findings."""
    return [replace(f, fit=replace(f.fit, ranges=(), covariance=(), model_error=(),
                                   acceptance={}, breakpoint_choice=None, powers=(),
                                   extrapolated=(), notes=())) for f in fitted]


def _held(spill, report: bool, result: partitions.PartResult) -> partitions.PartResult:
    """A partition's result as the build holds it until its release is written: its fitted
    species, their lineages, library entries and outlines, evaluated tables and report's
    plot points in the build's scratch file (core.spill.Spill, one write for each kind;
    some 14 KB per species, 19 with the plot points), only where they lie held; without a
    report, no plot points (the partition kept for the next build has them). Its species'
    file names are made now (core.names.file_stem keeps them): the release names every
    species' files, and the build's process, which waits on the partitions computed
    elsewhere, has the time now (0.05 s at 10 000)."""
    from .core.names import file_stem
    from .library.tables import spill_rows

    for sid, _ in result.entries:
        file_stem(sid)

    def put(pairs):
        return tuple(zip((key for key, _ in pairs), spill.put_many(blob for _, blob in pairs)))

    return replace(result, fitted=put(result.fitted), lineages=put(result.lineages),
                   entries=put(result.entries), outlines=put(result.outlines),
                   rows=tuple(spill_rows(block, spill) for block in result.rows),
                   points=put(result.points) if report else ())


def _quiet(stage, i=0, n=0, label=""):
    return None


def _build(raw_dir, out_dir, ctx: Settings, progress, previous: dict,
           cut=partitions.Plan(), store=None, drawn=None, ready=None,
           pieces=None) -> BuildResult:
    say = progress or _quiet
    # the release home is judged before the partitions kept for the next build appear in it
    files = publish.Release() if out_dir is None else publish.Release.staged(out_dir)
    try:
        return _build_into(files, raw_dir, out_dir, ctx, say, previous, cut, store, drawn,
                           ready, pieces)
    except BaseException:
        files.discard()
        raise


def _build_into(files, raw_dir, out_dir, ctx: Settings, say, previous: dict, cut,
                store, drawn=None, ready=None, pieces=None) -> BuildResult:
    say("read and check", 0, 0, str(raw_dir))
    spill = Spill(out_dir)         # unnamed: gone with the last entry of the library read
    done, reused = partitions.run(partial(_build_part, raw_dir, ctx, previous,
                                          say if cut.parts == 1 else _quiet), cut, say, store,
                                  keep=partial(_held, spill, ctx.outputs.report),
                                  ready=ready)
    checked, entries = done.checked, dict(done.entries)
    digests = {sid: (entry, lineage) for sid, entry, lineage in done.digests}
    fitted = held.HeldFitted(spill, done.fitted, done.lineages,
                             [digests.get(sid, (None, None))[1] for sid, _ in done.lineages])
    quarantined, findings = list(done.quarantined), list(done.findings)
    points, rows = SpilledObjects(spill, dict(done.points)), done.rows
    outlines = dict(done.outlines)
    del done        # the partitions' results are not needed whole from here on
    digest = ingest.inputs_digest(checked.inputs)
    doc = release_document.library_document(fitted, quarantined, digest, ctx.to_dict(), entries,
                                            checked.chains, spill, outlines,
                                            {sid: d[0] for sid, d in digests.items()})
    del outlines
    del entries
    findings += formation.attach(doc, checked.references, checked.tables,
                                 ctx.checks.stated_formation_u)
    outcome = assemble.Outcome(document=doc, findings=tuple(findings), fitted=fitted,
                               quarantined=tuple(quarantined), checked=checked,
                               points=points, rows=rows)
    del points, rows
    placed = reuse.Placed() if pieces is not None else None
    assemble.release_files(outcome, ctx, files, say, drawn, pieces, placed)
    say("publish", 0, 0, str(out_dir or ""))
    written = [] if out_dir is None else publish.publish(
        out_dir, files, check=_verify, on_swap=lambda: say("published"))
    return BuildResult(fitted=fitted, quarantined=tuple(quarantined),
                       findings=tuple(findings), document=doc, written=tuple(written),
                       files=files, held_back=checked.held_back, inputs=checked.inputs,
                       reused=(reused, cut.parts), linked=drawn.linked if drawn else 0,
                       placed=placed)


def _verify(folder):
    problems = provenance.verify_release(folder)
    if problems:
        raise OutputError("the staged release fails its own manifest: " + "; ".join(problems))


def audit(raw_dir, curated_dir, ctx: Settings | None = None,
          override=None) -> audit_stage.AuditReport:
    """Compare the release in ``curated_dir`` with a rebuild of ``raw_dir`` in a temporary
    folder: inputs, settings, dependency versions, files and species. The rebuild uses the
    settings the release records, ``ctx`` instead when given, and ``override(settings)``
    (the options named on the command line) on top."""
    recorded = audit_stage.read_release(Path(curated_dir))
    if ctx is None:
        ctx = audit_stage.recorded_settings(recorded)
    if override is not None:
        ctx = override(ctx)
    with tempfile.TemporaryDirectory(prefix="thermoledger-audit-") as tmp:
        result = build(raw_dir, Path(tmp) / "release", ctx,
                       previous=offered_breakpoints(recorded.library))
        return audit_stage.compare(recorded, result.inputs, result.files, result.document,
                                   ctx.to_dict())   # the rebuilt files are read from tmp
