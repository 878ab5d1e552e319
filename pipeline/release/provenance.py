"""Provenance of a build: the manifest, a Frictionless Data Package descriptor, and W3C PROV.

* ``manifest.json`` (schemas/manifest.schema.json, our own): every input with sha256 and
  size, every output with sha256 and size, the pipeline version, the versions of the
  numerical dependencies that can change results, the effective settings, and per species
  its lineage — sources and files, the rows that entered the fit (by line), the rows left
  out and why, its findings and acknowledgements, its fit settings. No wall-clock time and
  no machine path, so the manifest is itself reproducible.
* ``datapackage.json`` — the Frictionless Data Package v1 descriptor of curated/
  (https://specs.frictionlessdata.io/data-package/), with Table Schema for the Parquet table.
* ``provenance.json`` — lineage in the PROV-JSON serialisation of the W3C PROV data model
  (W3C Member Submission, 2013): entities, activities, used, wasGeneratedBy,
  wasDerivedFrom, wasAssociatedWith.

Only the standards' vocabulary is theirs; every other name is our own.
"""

import importlib.metadata as md
import re
from functools import partial

from .. import __version__
from ..core.lazy import Derived, LazyMapping
from ..core.names import file_stem, safe_name
from . import document
from .held import HeldFitted, briefs_of, in_order
from .publish import MANIFEST_HEAD, listed, manifest_outputs

DEPENDENCIES = ("numpy", "scipy", "pandas", "pyarrow", "pint", "molmass")


def dependency_versions() -> dict:
    """Installed versions of the numerical dependencies that can change results."""
    out = {}
    for name in DEPENDENCIES:
        try:
            out[name] = md.version(name)
        except md.PackageNotFoundError:
            out[name] = "absent"
    return out


def lineage(fitted) -> dict:
    """The manifest's lineage of one fitted species: files and lines used, lines left out,
    findings and fit settings."""
    meta, fit = fitted.table.meta, fitted.fit
    by_file = {file: list(lines) for file, lines in fitted.rows}
    sources = []
    for u in fitted.uses:
        sources.append({"source": u.meta.source.id, "file": u.meta.file,
                        "sha256": u.meta.sha256, "lines": by_file.get(u.meta.file, []),
                        "t_min": u.t_min, "t_max": u.t_max})
    out = {
        "id": meta.species_id,
        "form": fit.form,
        "fit_settings": fit.settings,
        "sources": sources,
        "excluded": [{"file": f, "line": int(ln), "code": c} for f, ln, c in fitted.excluded],
        "findings": [{"code": f.code, "file": f.file, "line": f.line,
                      "acknowledged": f.acknowledged} for f in
                     sorted(fitted.findings, key=lambda f: f.sort_key())],
    }
    if fit.origin:
        out["origin"] = dict(fit.origin)
    return out


def _output(output) -> dict:
    path, digest, size = output
    return {"path": path, "sha256": digest, "size": size}


def lineages(fitted):
    """The manifest's lineage of each species of ``fitted``, in order: made when read
    (core.lazy.Derived: written and checked a part at a time, never held for every species
    at once), or read from the compact JSON a HeldFitted holds."""
    return fitted.lineages if isinstance(fitted, HeldFitted) else \
        Derived(in_order(fitted), lineage)


def manifest(fitted, quarantined, inputs, outputs, settings: dict, inputs_digest: str,
             species=None) -> dict:
    """The manifest document; ``outputs`` is [(path, sha256, size)] of every other output;
    ``species`` the ``lineages`` of ``fitted`` when already made (release.document.Rendered),
    else they are."""
    return {
        "manifest_format": 1,
        "pipeline_version": __version__,
        "dependencies": dependency_versions(),
        "settings": settings,
        "inputs_sha256": inputs_digest,
        "inputs": [{"path": f.path, "sha256": f.sha256, "size": f.size} for f in inputs],
        "outputs": Derived(outputs, _output),
        "species": lineages(fitted) if species is None else species,
        "quarantined": [{"id": m.species_id, "file": m.file,
                         "codes": sorted({f.code for f in reasons})}
                        for m, reasons in sorted(quarantined, key=lambda q: (q[0].file,))],
    }


MEDIA = {".json": ("json", "application/json"),
         ".parquet": ("parquet", "application/vnd.apache.parquet"),
         ".html": ("html", "text/html"), ".svg": ("svg", "image/svg+xml"),
         ".csv": ("csv", "text/csv")}


def _resource(output) -> dict:
    """The Data Package resource of output (path, sha256, size)."""
    path, digest, size = output
    ext = "." + path.rsplit(".", 1)[-1]
    fmt, media = MEDIA.get(ext, ("bin", "application/octet-stream"))
    res = {"name": re.sub(r"[^a-z0-9._-]", "-", path.lower()), "path": path,
           "format": fmt, "mediatype": media, "bytes": size, "hash": f"sha256:{digest}"}
    if path == "library.parquet":
        res["profile"] = "tabular-data-resource"
        res["schema"] = {"fields": [{"name": n, "type": t, **({"description": d} if d else {})}
                                    for n, t, d in document.LIBRARY_PARQUET_COLUMNS],
                         "primaryKey": ["id", "range_index"]}
    return res


def datapackage(outputs, sources, notice: str) -> dict:
    """Data Package v1 descriptor for ``outputs`` [(path, sha256, size)] and ``sources``
    (SourceMeta). Its resources are made as they are written (core.lazy.Derived: with the
    report, a build of 100 000 species has some 100 000 outputs)."""
    resources = Derived(outputs, _resource)
    licenses = sorted({s.license for s in sources})
    return {
        "profile": "data-package",
        "name": "thermoledger-library",
        "title": "Curated thermodynamic coefficient library",
        "description": notice,
        "version": __version__,
        "licenses": [{"name": name, "title": name} for name in licenses] or
                    [{"name": "other-closed", "title": "no licence stated"}],
        "sources": [{"title": f"{s.id}: {s.title}", "path": s.citation}
                    for s in sorted(sources, key=lambda s: s.id)],
        "resources": resources,
    }


def _raw_entity(f) -> tuple:
    return "raw:" + safe_name(f.path), {"prov:type": "tl:RawFile", "tl:path": f.path,
                                        "tl:sha256": f.sha256}


def _output_entity(output) -> tuple:
    path, digest, _ = output
    return "out:" + safe_name(path), {"prov:type": "tl:Output", "tl:path": path,
                                      "tl:sha256": digest}


class _Unique:
    """The (id, entity) pairs of a sequence of them, each id once, in the place of its
    first pair and with the entity of its last (as a dict made of them has): a list of
    ids is held only while the repeated ones are found, and then only those."""

    def __init__(self, pairs):
        self._pairs, seen, self._last = pairs, set(), {}
        for key, value in pairs:
            if key in seen:
                self._last[key] = value
            seen.add(key)
        self._size = len(seen)

    def __len__(self) -> int:
        return self._size

    def __iter__(self):
        written = set()
        for key, value in self._pairs:
            if key not in self._last:
                yield key, value
            elif key not in written:
                written.add(key)
                yield key, self._last[key]


def prov_document(fitted, inputs, outputs) -> dict:
    """PROV-JSON: raw files and species as entities, the build and each fit as activities;
    ``outputs`` [(path, sha256, size)] of the files written before it. The entities, the
    activities and each kind of relation are core.lazy.LazyMappings, made item by item as
    they are written (at 100 000 species, some 600 000 relations)."""
    agent = f"tl:thermoledger-{__version__}"
    fitted = briefs_of(fitted)
    raw_id = {f.path: "raw:" + safe_name(f.path) for f in inputs}
    out = Derived(outputs, _output_entity)     # some 200 000 at 100 000 species
    files = (_Unique(Derived(inputs, _raw_entity)), _Unique(out))   # paths may share an id
    stems = [file_stem(sp.species_id) for sp in fitted]
    used = [[raw_id[file] for file in sp.used if file in raw_id] for sp in fitted]
    # every relation has a number, counted over all kinds in the order: the build's agent,
    # each output's generation, then per species its generation, agent, (used, derived
    # from) per raw file used and its place in library.json: 3 + 2 per file
    first = [2 + len(out)]
    for files_used in used[:-1]:
        first.append(first[-1] + 3 + 2 * len(files_used))

    def relations(kind):
        """(key, body) of every relation of ``kind``, in the order they are numbered."""
        if kind == "wasAssociatedWith":
            yield "_:r1", {"prov:activity": "tl:build", "prov:agent": agent}
        if kind == "wasGeneratedBy":
            for n, (eid, _) in enumerate(out, 2):
                yield f"_:r{n}", {"prov:entity": eid, "prov:activity": "tl:build"}
        for n, stem, files_used in zip(first, stems, used):
            eid, aid = f"tl:species-{stem}", f"tl:fit-{stem}"
            if kind == "wasGeneratedBy":
                yield f"_:r{n}", {"prov:entity": eid, "prov:activity": aid}
            elif kind == "wasAssociatedWith":
                yield f"_:r{n + 1}", {"prov:activity": aid, "prov:agent": agent}
            for j, rid in enumerate(files_used):
                if kind == "used":
                    yield f"_:r{n + 2 + 2 * j}", {"prov:activity": aid, "prov:entity": rid}
                elif kind == "wasDerivedFrom":
                    yield f"_:r{n + 3 + 2 * j}", {"prov:generatedEntity": eid,
                                                  "prov:usedEntity": rid}
            if kind == "wasDerivedFrom":
                yield f"_:r{n + 2 + 2 * len(files_used)}", {
                    "prov:generatedEntity": "out:library.json", "prov:usedEntity": eid}

    def entities():
        for made in files:
            yield from made
        for sp, stem in zip(fitted, stems):
            yield f"tl:species-{stem}", {"prov:type": "tl:FittedSpecies",
                                         "tl:id": sp.species_id, "tl:form": sp.form}

    def activities():
        yield "tl:build", {"prov:type": "tl:Build"}
        for stem in stems:
            yield f"tl:fit-{stem}", {"prov:type": "tl:Fit"}

    n_used = sum(len(u) for u in used)
    counts = {"used": n_used, "wasGeneratedBy": len(out) + len(fitted),
              "wasDerivedFrom": n_used + len(fitted), "wasAssociatedWith": 1 + len(fitted)}
    return {"prefix": {"tl": "https://thermoledger.invalid/ns#",
                       "raw": "https://thermoledger.invalid/raw/",
                       "out": "https://thermoledger.invalid/curated/"},
            "entity": LazyMapping(entities, sum(map(len, files)) + len(fitted)),
            "activity": LazyMapping(activities, 1 + len(fitted)),
            "agent": {agent: {"prov:type": "prov:SoftwareAgent"}},
            **{kind: LazyMapping(partial(relations, kind), counts[kind]) for kind in (
                "used", "wasGeneratedBy", "wasDerivedFrom", "wasAssociatedWith")}}


READABLE_MANIFEST = "thermoledger manifest (manifest_format 1 with a list of outputs)"


def verify_release(folder) -> list:
    """Problems of a release folder against its own manifest and data package ([] = intact).
    Each file is read once, in pieces (a large library is never held whole); of the
    manifest only its list of outputs, and that list and the data package's resources an
    item at a time as they are read (publish.listed: at 100 000 species each lists some
    100 000 files); the data package holds the manifest's own sha256."""
    import hashlib
    from pathlib import Path

    import orjson

    folder = Path(folder)
    problems, digests = [], {}

    def digest(path: Path) -> str:
        key = str(path)
        if key not in digests:
            with open(path, "rb") as fh:
                digests[key] = hashlib.file_digest(fh, "sha256").hexdigest()
        return digests[key]

    man = folder / "manifest.json"
    try:
        outputs = listed(man, "outputs", MANIFEST_HEAD)
    except OSError:
        outputs = None
    if outputs is None:                  # not laid out as a build writes it: read whole
        outputs = manifest_outputs(man)
    if outputs is None:
        return [f"manifest.json cannot be read as a {READABLE_MANIFEST}"]
    try:
        for out in outputs:
            path = folder / out["path"]
            if not path.is_file():
                problems.append(f"{out['path']} is missing")
            elif digest(path) != out["sha256"]:
                problems.append(f"{out['path']} differs from its manifest hash")
    except (OSError, ValueError, KeyError, TypeError) as exc:
        problems.append(f"manifest.json cannot be read as a {READABLE_MANIFEST}: {exc}")
    del outputs          # read before the data package: never both at once
    try:
        dp = folder / "datapackage.json"
        resources = listed(dp, "resources")
        for res in resources if resources is not None else \
                orjson.loads(dp.read_bytes()).get("resources", []):
            path = folder / res["path"]
            if not path.is_file() or f"sha256:{digest(path)}" != res.get("hash"):
                problems.append(f"{res['path']} does not match datapackage.json")
    except (OSError, ValueError, KeyError, TypeError) as exc:
        problems.append(f"datapackage.json cannot be read: {exc}")
    return problems
