"""Audit a release: are the inputs unchanged, is curated/ intact, and does a rebuild give
the same bytes? When not, which species differ, by how much, and why. This module compares;
``build.audit`` runs the rebuild.

Causes are told apart from the manifest: changed inputs (files whose sha256 differs, or that
appeared or vanished), changed settings (the effective settings of this run against those
recorded), changed dependency versions (numpy, scipy, pandas, pyarrow, pint, molmass).
"""

import json
from dataclasses import dataclass, field
from pathlib import Path

from ..core.errors import InputError
from ..core.settings import Settings
from ..library import diff
from . import provenance

PASS, DIFFERENCES, ERRORS = 0, 1, 2

#: the largest differences of a species (library.diff: relative Cp, H − H298 [J/mol], S
#: [J/(mol K)]) up to which a rebuild from the same inputs, settings and dependency versions
#: differs by rounding alone: another CPU, or another build of BLAS, rounds the last bits of
#: a solve otherwise (seen here: up to 4e-11 relative in Cp, 3e-6 J/mol in H for the demo).
#: Far below the digits a table states (common practice: Cp to 4 or 5 significant digits,
#: H to 1 J/mol, S to 0.01 J/(mol K)).
ROUNDING = {"cp_rel": 1e-8, "dH": 1e-3, "S": 1e-6}
ROUNDING_CAUSE = ("rounding: same inputs, settings and dependency versions, and the numbers "
                  "differ only in their last digits (below 1e-8 relative in Cp, 1e-3 J/mol in "
                  "H, 1e-6 J/(mol*K) in S), as the arithmetic of another CPU or BLAS build "
                  "gives them")


@dataclass
class AuditReport:
    """The outcome of an audit: integrity problems, changed inputs, settings and dependency
    versions, differing files, and the species that differ with their causes."""

    status: int = PASS
    integrity: list = field(default_factory=list)       # problems of curated/ itself
    inputs_changed: list = field(default_factory=list)
    inputs_added: list = field(default_factory=list)
    inputs_removed: list = field(default_factory=list)
    settings_changed: dict = field(default_factory=dict)
    dependencies_changed: dict = field(default_factory=dict)
    files_differing: list = field(default_factory=list)
    species: list = field(default_factory=list)          # diff entries, with causes
    rounding_only: bool = False     # every species that differs does so by ROUNDING alone

    def to_dict(self) -> dict:
        """The report as the JSON ``audit --json`` prints."""
        return {"audit_format": 1, "status": ["pass", "differences", "errors"][self.status],
                **{k: v for k, v in self.__dict__.items() if k != "status"}}


def _flat(d, prefix=""):
    out = {}
    for k, v in d.items():
        if isinstance(v, dict):
            out.update(_flat(v, f"{prefix}{k}."))
        else:
            out[f"{prefix}{k}"] = v
    return out


@dataclass(frozen=True)
class Recorded:
    """A release as written: its folder, manifest and library."""

    folder: Path
    manifest: dict
    library: dict


def read_release(curated_dir: Path) -> Recorded:
    """The manifest and library of the release in ``curated_dir``; InputError when it is not
    a release."""

    try:
        man = json.loads((curated_dir / "manifest.json").read_text(encoding="utf-8"))
        lib = json.loads((curated_dir / "library.json").read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise InputError(f"{curated_dir} is not a release with a manifest ({exc})",
                         expected="a folder written by thermoledger build") from None
    return Recorded(folder=curated_dir, manifest=man, library=lib)


def recorded_settings(recorded: Recorded) -> Settings:
    """The settings the release was built with (its manifest); InputError when this version
    cannot rebuild with them."""
    try:
        return Settings.from_dict(recorded.manifest.get("settings") or {})
    except (TypeError, ValueError) as exc:
        raise InputError(f"{recorded.folder}/manifest.json records settings this version cannot "
                         f"use ({exc})", expected="a release written by this version of "
                         "thermoledger, or the settings given on the command line") from None


def compare(recorded: Recorded, inputs, new_files: dict, new_doc: dict,
            settings: dict) -> AuditReport:
    """The audit of ``recorded`` against the current ``inputs`` (InputFile), the files and
    library of a rebuild, and the ``settings`` it used."""
    man, curated_dir = recorded.manifest, recorded.folder
    rep = AuditReport()
    rep.integrity = provenance.verify_release(curated_dir)
    now = {f.path: f for f in inputs}
    then = {f["path"]: f for f in man["inputs"]}
    rep.inputs_changed = sorted(p for p in set(now) & set(then)
                                if now[p].sha256 != then[p]["sha256"])
    rep.inputs_added = sorted(set(now) - set(then))
    rep.inputs_removed = sorted(set(then) - set(now))
    a, b = _flat(man["settings"]), _flat(settings)
    rep.settings_changed = {k: [a.get(k), b.get(k)] for k in sorted(set(a) | set(b))
                            if a.get(k) != b.get(k)}
    deps = provenance.dependency_versions()
    rep.dependencies_changed = {k: [man["dependencies"].get(k), v] for k, v in deps.items()
                                if man["dependencies"].get(k) != v}
    old_paths = {o["path"] for o in man["outputs"]} | {"manifest.json", "datapackage.json"}
    for path in sorted(old_paths | set(new_files)):
        old_file = curated_dir / path
        old_bytes = old_file.read_bytes() if old_file.is_file() else None
        if old_bytes != new_files.get(path):
            rep.files_differing.append(path)
    d = diff.diff(recorded.library, new_doc)
    lineage = {s["id"]: {x["file"] for x in s["sources"]} for s in man["species"]}
    new_sources = {s["id"]: {x["file"] for x in s["sources"]} for s in new_doc["species"]}
    touched = set(rep.inputs_changed) | set(rep.inputs_added) | set(rep.inputs_removed)
    for sid in d["added"] + d["removed"]:
        rep.species.append({"id": sid, "change": "added" if sid in d["added"] else "removed",
                            "causes": _causes(rep, lineage.get(sid, set()) & touched)})
    for c in d["changed"]:
        files = (lineage.get(c["id"], set()) | new_sources.get(c["id"], set())) & touched
        causes = _causes(rep, files)
        if _rounding(rep, files, c):
            causes = [ROUNDING_CAUSE]
        rep.species.append({"id": c["id"], "change": "changed", "largest": c["largest"],
                            "details": c["changes"], "causes": causes})
    rep.rounding_only = bool(rep.species) and not rep.integrity and all(
        s["causes"] == [ROUNDING_CAUSE] for s in rep.species)
    if rep.integrity or rep.files_differing or rep.species:
        rep.status = DIFFERENCES
    return rep


def _rounding(rep, files, change: dict) -> bool:
    """Whether a changed species differs by rounding alone: nothing it depends on changed,
    nothing but its numbers differs (sources, ranges, breakpoints, findings the same), and
    those by no more than ROUNDING."""
    g = change["largest"]
    return not (files or rep.settings_changed or rep.dependencies_changed or change["changes"]) \
        and g is not None and all(g[k] <= limit for k, limit in ROUNDING.items())


def _causes(rep, files):
    causes = []
    if files:
        causes.append("changed inputs: " + ", ".join(sorted(files)))
    if rep.settings_changed:
        causes.append("changed settings: " + ", ".join(rep.settings_changed))
    if rep.dependencies_changed:
        causes.append("changed dependency versions: " + ", ".join(
            f"{k} {a} -> {b}" for k, (a, b) in rep.dependencies_changed.items()))
    return causes or ["unexplained (same inputs, settings and dependency versions)"]


def render(rep: AuditReport) -> str:
    """The audit report as the lines ``thermoledger audit`` prints."""
    lines = []
    word = ["PASS: a rebuild gives byte-identical outputs", "DIFFERENCES", "ERRORS"][rep.status]
    lines.append(f"audit: {word}")
    if rep.rounding_only:
        lines.append("  every species that differs does so by rounding alone (its cause says "
                     "how little): to the digits a table states, this machine rebuilds the "
                     "same release")
    for p in rep.integrity:
        lines.append(f"  curated/ integrity: {p}")
    for label, items in (("input changed", rep.inputs_changed), ("input appeared", rep.inputs_added),
                         ("input vanished", rep.inputs_removed)):
        for p in items:
            lines.append(f"  {label}: {p}")
    for k, (a, b) in rep.settings_changed.items():
        lines.append(f"  setting changed: {k}: {a} -> {b}")
    for k, (a, b) in rep.dependencies_changed.items():
        lines.append(f"  dependency changed: {k}: {a} -> {b}")
    if rep.files_differing:
        lines.append("  outputs that would differ: " + ", ".join(rep.files_differing))
    for s in rep.species:
        head = f"  {s['change']:8s} {s['id']}"
        g = s.get("largest")
        if g:
            head += (f": max |dCp/Cp| {100 * g['cp_rel']:.4g} % at {g['cp_rel_at']:.5g} K, "
                     f"max |d(H-H298)| {g['dH']:.4g} J/mol, max |dS| {g['S']:.4g} J/(mol*K)")
        lines.append(head)
        for d in s.get("details", []):
            lines.append(f"      {d}")
        for c in s["causes"]:
            lines.append(f"      cause: {c}")
    return "\n".join(lines)
