"""Orchestration: ingest -> validate -> reconcile -> fit -> export. Only wires the stages."""

from dataclasses import dataclass

import numpy as np

from . import acknowledge, export, fit, ingest, provenance, publish, reconcile, validate
from .errors import FitError, OutputError
from .findings import ERROR, finding, stage_failed
from .records import FittedSpecies
from .settings import Settings, for_table


@dataclass(frozen=True)
class CheckResult:
    tables: tuple          # every Table read
    findings: tuple        # all findings of ingest, validation and reconciliation
    inputs: tuple          # InputFile
    selections: tuple      # reconcile.Selection per species
    quarantined: tuple     # (TableMeta, error findings)
    held_back: tuple = ()  # (file, error findings): sources and tables that could not be read


@dataclass(frozen=True)
class BuildResult:
    fitted: tuple          # FittedSpecies
    quarantined: tuple     # (TableMeta, findings)
    findings: tuple        # all findings
    document: dict
    written: tuple         # paths written
    files: dict = None     # {relative path: bytes} of the release
    held_back: tuple = ()  # (file, error findings): sources and tables that could not be read


def table_findings(table, findings):
    """The findings that concern ``table`` (by its file, or by table in extra)."""
    f = table.meta.file
    return [x for x in findings if x.file == f or x.extra.get("table") == f]


def check(raw_dir, ctx: Settings = Settings()) -> CheckResult:
    """Ingest, validate and reconcile; no fitting, nothing written."""
    got = ingest.ingest(raw_dir)
    found = list(got.findings) + list(validate.validate(got.tables, ctx, got.findings))
    accepted, quarantined = [], []
    for table in got.tables:
        errors = [x for x in table_findings(table, found) if x.severity == ERROR]
        if errors:
            quarantined.append((table.meta, tuple(errors)))
        else:
            accepted.append(table)
    selections, more, dropped = reconcile.reconcile(accepted, found, ctx)
    found += more
    quarantined += dropped
    found = acknowledge.apply(got.tables, found)
    return CheckResult(tables=got.tables, findings=tuple(found), inputs=got.inputs,
                       selections=tuple(selections), quarantined=tuple(quarantined),
                       held_back=held_back(got.tables, found))


def held_back(tables, findings) -> tuple:
    """(file, error findings) for every input with errors that is not a table that was read:
    a source.json that failed (its whole source is held back) or a listed table that could not
    be read at all."""
    read = {t.meta.file for t in tables}
    out = {}
    for f in findings:
        key = f.extra.get("table") or f.file
        if f.severity == ERROR and key not in read:
            out.setdefault(key, []).append(f)
    return tuple((k, tuple(v)) for k, v in sorted(out.items()))


def species_settings(meta, ctx: Settings):
    """The build's fit settings with the table's own overrides from source.json ("fit")."""
    return for_table(ctx.fit, meta.fit_overrides)


def fit_selection(sel, ctx: Settings):
    data = sel.data
    def col(c):
        return data[c].to_numpy() if len(data) and data[c].notna().any() else None

    u = data["u_Cp"].to_numpy() if len(data) and data["u_Cp"].notna().all() else None
    meta = sel.primary.meta
    return fit.fit_species(sel.species_id, data["T"].to_numpy(), data["Cp"].to_numpy(), u,
                           meta.enthalpy_of_formation_298, meta.entropy_298,
                           species_settings(meta, ctx), dh=col("dH"), s=col("S"),
                           u_dh=col("u_dH"), u_s=col("u_S"),
                           geometry=meta.geometry, atoms=meta.atoms, phase=meta.phase)


def species_findings(sel, findings):
    """Warnings and infos of every table used for a species, plus its selection notes."""
    files = {u.meta.file for u in sel.uses}
    own = [f for f in findings if (f.file in files or f.extra.get("table") in files)
           and f.severity != ERROR]
    return tuple(dict.fromkeys(own))  # keep order, drop repeats


def build(raw_dir, out_dir, ctx: Settings = Settings(), *, write=True, progress=None,
          wait: float = 0.0) -> BuildResult:
    """Run every stage; publish the outputs as the new release of ``out_dir`` unless
    ``write`` is False. The output folder is checked (publish.check_output) and locked
    before any work, so a refused or busy folder costs nothing."""
    if not write:
        return _build(raw_dir, None, ctx, progress)
    real = publish.check_output(out_dir, [raw_dir])
    with publish.locked(real, wait):
        result = _build(raw_dir, real, ctx, progress)
    return result


def _build(raw_dir, out_dir, ctx: Settings, progress) -> BuildResult:
    say = progress or (lambda stage, i=0, n=0, label="": None)
    say("read and check", 0, 0, str(raw_dir))
    checked = check(raw_dir, ctx)
    findings = list(checked.findings)
    quarantined = list(checked.quarantined)
    fitted, entries = [], {}
    n_sel = len(checked.selections)
    for k, sel in enumerate(checked.selections):
        meta = sel.primary.meta
        say("fit", k + 1, n_sel, sel.species_id)
        where = dict(source=meta.source.source, file=meta.file)
        try:
            result = fit_selection(sel, ctx)
            notes = [finding(code, msg, **where) for code, msg in result.notes]
            rows = tuple(sorted(zip(sel.data["file"].tolist(),
                                    (int(x) for x in sel.data["line"]))))
            done = FittedSpecies(table=sel.primary, fit=result,
                                 findings=species_findings(sel, findings + notes), uses=sel.uses,
                                 excluded=sel.excluded, rows=rows)
            entry = export.species_entry(done)
            bad = export.non_finite(entry)
            if bad:
                raise FitError(sel.species_id, f"the fitted entry holds a non-finite number at "
                               f"{bad}")
        except Exception as exc:  # noqa: BLE001 - one bad table never stops the rest
            if isinstance(exc, FitError):
                code = "FIT-REJECTED" if isinstance(exc, fit.FitRejected) else "FIT-FAILED"
                f = finding(code, exc.reason, **where)
            else:
                f = stage_failed("fit", exc, **where)
            findings.append(f)
            quarantined.append((meta, (f,)))
            continue
        findings += notes
        fitted.append(done)
        entries[sel.species_id] = entry
    digest = ingest.inputs_digest(checked.inputs)
    doc = export.library_document(fitted, quarantined, digest, ctx.to_dict(), entries)
    say("write", 0, 0, str(out_dir or ""))
    files = release(doc, export.findings_document(findings), fitted, quarantined, checked,
                    ctx, digest, plot_points(doc, checked) if ctx.outputs.report else None)
    written = [] if out_dir is None else publish.publish(
        out_dir, files, check=_verify, on_swap=lambda: say("published"))
    return BuildResult(fitted=tuple(fitted), quarantined=tuple(quarantined),
                       findings=tuple(findings), document=doc, written=tuple(written),
                       files=files, held_back=checked.held_back)


def plot_points(doc, checked) -> dict:
    """Per species: the rows used and left out, and deviations from H and S columns."""
    from . import forms, library

    by_sel = {s.species_id: s for s in checked.selections}
    tables = {t.meta.file: t.data for t in checked.tables}
    out = {}
    for sp in doc["species"]:
        sel = by_sel[sp["id"]]
        d = sel.data
        p = {"t": d["T"].to_numpy(), "cp": d["Cp"].to_numpy()}
        t_out, cp_out = [], []
        for x in sp["excluded"]:
            rows = tables[x["file"]]
            hit = rows[rows["line"] == x["line"]]
            t_out += hit["T"].tolist()
            cp_out += hit["Cp"].tolist()
        p["t_out"], p["cp_out"] = np.array(t_out), np.array(cp_out)
        rr = library.ranges_of(sp)
        h298 = forms.evaluate(rr, [298.15], sp["form"])["H"][0]
        for col, key in (("dH", "dh"), ("S", "s")):
            m = d[col].notna().to_numpy()
            if m.any():
                t = d["T"].to_numpy()[m]
                ev = forms.evaluate(rr, t, sp["form"])
                fitted_v = ev["H"] - h298 if col == "dH" else ev["S"]
                p[key] = (t, fitted_v - d[col].to_numpy()[m])
        out[sp["id"]] = p
    return out


def release(doc, findings_doc, fitted, quarantined, checked, ctx, digest, points=None) -> dict:
    """Every file of a release: library, findings, tables, report, schemas, provenance,
    manifest, data package."""
    from . import report, tables

    provenance.file_stems([sp["id"] for sp in doc["species"]])  # unique file names or stop
    files = export.release_files(doc, findings_doc)
    out = ctx.outputs
    files["tables.parquet"] = tables.parquet_bytes(doc, out.table_step)
    if out.tables_csv:
        files.update(tables.csv_files(doc, out.table_step))
    if out.report:
        files.update(report.report_files(doc, points or {}, ctx.fit.accept_cp_max_rel))
    files["provenance.json"] = export.json_bytes(
        provenance.prov_document(fitted, checked.inputs, sorted(files.items())))
    man = provenance.manifest(fitted, quarantined, checked.inputs, sorted(files.items()),
                              ctx.to_dict(), digest)
    export.check_against(man, "manifest.schema.json", "manifest.json")
    files["manifest.json"] = export.json_bytes(man)
    sources = {t.meta.source.source: t.meta.source for t in checked.tables}.values()
    files["datapackage.json"] = export.json_bytes(
        provenance.datapackage(sorted(files.items()), sources, export.NOTICE))
    return files


def _verify(folder):
    problems = provenance.verify_release(folder)
    if problems:
        raise OutputError("the staged release fails its own manifest: " + "; ".join(problems))
