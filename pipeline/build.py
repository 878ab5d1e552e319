"""Orchestration: ingest -> validate -> select -> fit -> export. Only wires the stages."""

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import export, fit, ingest, validate
from .errors import FitError
from .findings import ERROR, finding
from .records import FittedSpecies
from .settings import FitSettings


@dataclass(frozen=True)
class CheckResult:
    tables: tuple          # every Table read
    findings: tuple        # all findings of ingest and validation
    inputs: tuple          # InputFile


@dataclass(frozen=True)
class BuildResult:
    fitted: tuple          # FittedSpecies
    quarantined: tuple     # (TableMeta, findings)
    findings: tuple        # all findings
    document: dict
    written: tuple         # paths written


def table_findings(table, findings):
    """The findings that concern ``table`` (by its file, or by table in extra)."""
    f = table.meta.file
    return [x for x in findings if x.file == f or x.extra.get("table") == f]


def check(raw_dir, settings: FitSettings = FitSettings()) -> CheckResult:
    """Ingest and validate only."""
    got = ingest.ingest(raw_dir)
    found = got.findings + validate.validate(got.tables, settings)
    return CheckResult(tables=got.tables, findings=tuple(found), inputs=got.inputs)


def select(tables, findings):
    """Split tables into accepted and quarantined, and pick one table per species by priority.

    Rule: among the accepted tables of one species (id and phase), the highest ``priority``
    wins; on equal priority the source id first in alphabetical order wins (with a
    warning). The other tables are recorded as alternatives in the provenance.

    Returns (chosen: list of (Table, own findings, alternatives), quarantined, new findings).
    """
    accepted, quarantined = [], []
    for table in tables:
        own = table_findings(table, findings)
        if any(x.severity == ERROR for x in own):
            quarantined.append((table.meta, tuple(x for x in own if x.severity == ERROR)))
        else:
            accepted.append((table, own))
    groups = {}
    for table, own in accepted:
        groups.setdefault(table.meta.species_id, []).append((table, own))
    chosen, extra = [], []
    for sid in sorted(groups):
        ranked = sorted(groups[sid], key=lambda g: (-g[0].meta.source.priority,
                                                    g[0].meta.source.source))
        best, own = ranked[0]
        notes = list(own)
        for other, _ in ranked[1:]:
            where = dict(source=other.meta.source.source, file=other.meta.file)
            if other.meta.source.priority == best.meta.source.priority:
                f = finding("SEL-TIE", f"{sid}: {best.meta.source.source} and "
                            f"{other.meta.source.source} have equal priority; "
                            f"{best.meta.source.source} used", **where)
            else:
                f = finding("SEL-SUPERSEDED", f"{sid}: {best.meta.file} (priority "
                            f"{best.meta.source.priority}) preferred over this table (priority "
                            f"{other.meta.source.priority})", **where)
            notes.append(f)
            extra.append(f)
        chosen.append((best, tuple(notes), tuple(o.meta for o, _ in ranked[1:])))
    return chosen, quarantined, extra


def fit_table(table, settings: FitSettings):
    data = table.data
    u = data["u_Cp"].to_numpy() if data["u_Cp"].notna().all() and len(data) else None
    return fit.fit_species(table.meta.species_id, data["T"].to_numpy(), data["Cp"].to_numpy(),
                           u, table.meta.enthalpy_of_formation_298, table.meta.entropy_298,
                           settings)


def build(raw_dir, out_dir, settings: FitSettings = FitSettings(), *, write=True,
          progress=None) -> BuildResult:
    """Run every stage; write the outputs into ``out_dir`` unless ``write`` is False."""
    checked = check(raw_dir, settings)
    findings = list(checked.findings)
    chosen, quarantined, extra = select(checked.tables, findings)
    findings += extra
    fitted = []
    for table, own, alternatives in chosen:
        if progress:
            progress(table.meta.species_id)
        try:
            result = fit_table(table, settings)
        except FitError as exc:
            f = finding("FIT-FAILED", exc.reason, source=table.meta.source.source,
                        file=table.meta.file)
            findings.append(f)
            quarantined.append((table.meta, (f,)))
            continue
        if not np.isfinite(result.cp_max_rel_dev):
            f = finding("FIT-FAILED", "fit quality is not finite", source=table.meta.source.source,
                        file=table.meta.file)
            findings.append(f)
            quarantined.append((table.meta, (f,)))
            continue
        fitted.append(FittedSpecies(table=table, fit=result, findings=own,
                                    alternatives=alternatives))
    doc = export.library_document(fitted, quarantined, ingest.inputs_digest(checked.inputs),
                                  {"fit": settings.to_dict()})
    findings_doc = findings_document(findings)
    written = export.write_outputs(Path(out_dir), doc, findings_doc) if write else []
    return BuildResult(fitted=tuple(fitted), quarantined=tuple(quarantined),
                       findings=tuple(findings), document=doc, written=tuple(written))


def findings_document(findings) -> dict:
    items = sorted(findings, key=lambda f: f.sort_key())
    counts = {s: sum(1 for f in items if f.severity == s) for s in ("error", "warning", "info")}
    return {"findings_format": 1, "counts": counts, "findings": [f.to_dict() for f in items]}
