"""The build report: static HTML in curated/report/, one index page and one page per species.

Self-contained: inline style and a small inline script (table sorting), SVG plots drawn at
build time (plots.py); no network, no external scripts or fonts. Every page carries the
safety caution. Wording, sections and colours are our own.
"""

import html
import json
import pickle
from collections import Counter, deque
from contextlib import contextmanager

import numpy as np

from ..checks.coefsets import steps
from ..core import fresh
from ..core.names import file_stem
from ..core.processes import give_back_memory, worker_pool
from ..core.records import PublishedSet
from ..core.spill import SpilledObjects
from ..library.entries import by_id as entries_by_id
from ..library.entries import held_of, ids_of, key_of, of_held
from ..physics import forms
from . import plots
from .document import NOTICE
from .pages import page_files, page_of

CSS = """
body{font-family:system-ui,sans-serif;margin:0;color:#22313f;background:#f7f5f0}
header{background:#22313f;color:#f7f5f0;padding:14px 24px}
header a{color:#edae49}
main{padding:16px 24px;max-width:1100px}
.caution{border-left:6px solid #d1495b;background:#fff;padding:10px 14px;margin:12px 0}
table{border-collapse:collapse;background:#fff;margin:8px 0}
th,td{border:1px solid #d9d9d9;padding:4px 8px;text-align:left;font-size:14px}
th{background:#e8eef0;cursor:pointer}
td.num{text-align:right;font-variant-numeric:tabular-nums}
.tag{border-radius:8px;padding:1px 8px;font-size:12px}
.ok{background:#d6ebe0}.watch{background:#fbe7c2}.held{background:#f3c9cf}
figure{margin:8px 0}img,figure svg{max-width:100%;height:auto;background:#fff}
code{font-size:12px;word-break:break-all}
.overview{display:flex;flex-wrap:wrap;gap:12px}
.pager{margin:8px 0}.pager input{padding:3px 6px;min-width:16em}.pager .info{font-size:13px}
.sp{display:none;scroll-margin-top:100vh}.sp:target{display:block}nav.sp-list{font-size:14px}
main:has(.sp:target)>nav.sp-list{display:none}
"""

PAGE_ROWS = 100   # rows of a long index table shown at once

PAGER_JS = """
document.querySelectorAll('table.paged').forEach(function(table){
  var rows = JSON.parse(document.getElementById(table.id + '-rows').textContent);
  var box = document.getElementById(table.id + '-pager');
  var q = '', page = 0, col = -1, up = true, size = PAGE_ROWS;
  var input = box.querySelector('input'), info = box.querySelector('.info');
  var prev = box.querySelector('.prev'), next = box.querySelector('.next');
  function readHash(){
    var h = new URLSearchParams(location.hash.slice(1));
    if (h.get('table') && h.get('table') !== table.id) return;
    q = (h.get('q') || '').toLowerCase(); input.value = h.get('q') || '';
    page = Math.max(0, (parseInt(h.get('page') || '1', 10) || 1) - 1);
  }
  function draw(){
    var shown = rows.filter(function(r){ return r.s.indexOf(q) >= 0; });
    if (col >= 0) shown.sort(function(a, b){
      var x = a.k[col], y = b.k[col];
      var c = (typeof x === 'number' && typeof y === 'number') ? x - y : String(x).localeCompare(String(y));
      return up ? c : -c;
    });
    var pages = Math.max(1, Math.ceil(shown.length / size));
    page = Math.min(page, pages - 1);
    var part = shown.slice(page * size, (page + 1) * size);
    table.tBodies[0].innerHTML = part.map(function(r){ return r.h; }).join('');
    info.textContent = shown.length ? ('rows ' + (page * size + 1) + '-' + (page * size + part.length) +
      ' of ' + shown.length + (shown.length < rows.length ? ' (filtered from ' + rows.length + ')' : '')) :
      'no row matches';
    prev.disabled = page === 0; next.disabled = page >= pages - 1;
  }
  input.addEventListener('input', function(){ q = input.value.toLowerCase(); page = 0; draw(); });
  prev.addEventListener('click', function(){ page -= 1; draw(); });
  next.addEventListener('click', function(){ page += 1; draw(); });
  table.querySelectorAll('th').forEach(function(th, i){
    th.addEventListener('click', function(){ up = (col === i) ? !up : true; col = i; page = 0; draw(); });
  });
  window.addEventListener('hashchange', function(){ readHash(); draw(); });
  readHash(); draw();
});
""".replace("PAGE_ROWS", str(PAGE_ROWS))


def paged_table(table_id, headings, rows) -> str:
    """A table that shows PAGE_ROWS rows at a time, with a filter box, pages and sorting by
    a click on a heading (PAGER_JS). ``rows`` are (row html, sort keys, search text); all of
    them travel as JSON in the page, and the first page is written out for readers without
    scripts. ``#q=text&page=N`` in the address opens a filtered page."""
    data = [{"h": h, "k": list(k), "s": text.lower()} for h, k, text in rows]
    blob = json.dumps(data, ensure_ascii=False, separators=(",", ":")).replace("</", "<\\/")
    first = "".join(h for h, _, _ in rows[:PAGE_ROWS])
    more = len(rows) - PAGE_ROWS
    note = f"first {PAGE_ROWS} of {len(rows)} rows" if more > 0 else f"{len(rows)} rows"
    return (f"<div class=\"pager\" id=\"{table_id}-pager\"><input type=\"search\" placeholder=\""
            f"filter rows\" aria-label=\"filter rows\"/> <button class=\"prev\">&#8592; previous"
            f"</button> <button class=\"next\">next &#8594;</button> <span class=\"info\">{note}"
            f"</span></div><table class=\"paged\" id=\"{table_id}\"><thead><tr>"
            + "".join(f"<th>{h}</th>" for h in headings) + f"</tr></thead><tbody>{first}</tbody>"
            f"</table><script type=\"application/json\" id=\"{table_id}-rows\">{blob}</script>")


LEGEND = ("<span style=\"color:#d1495b\">&#9473;</span> fitted curve · "
          "<span style=\"color:#1f7a8c\">&#9679;</span> data used · "
          "<span style=\"color:#8f2d56\">&#10005;</span> left out of the fit · "
          "dotted line: breakpoint · <span style=\"background:#f6dba6\">&#160;shaded&#160;</span>"
          " outside the data (extrapolated) · lower panel: deviation of the fit, dashed lines at "
          "the acceptance threshold")


def e(text) -> str:
    """``text`` escaped for HTML (quotes included); text without any of the five characters
    to escape is given back as it is (``html.escape`` would look for each in turn)."""
    text = str(text)
    if "&" in text or "<" in text or ">" in text or '"' in text or "'" in text:
        return html.escape(text, quote=True)
    return text


def page(title, body, depth=0, script="", heading=True) -> bytes:
    """A complete HTML page with the report's style, header and caution, as UTF-8 bytes;
    ``title`` its heading too unless not ``heading`` (a page file of species sections, each
    with its own)."""
    up = "../" * depth
    js = f"<script>{script}</script>" if script else ""
    h1 = f"<h1>{e(title)}</h1>" if heading else ""
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"/>"
            f"<title>{e(title)}</title><style>{CSS}</style></head><body>"
            f"<header><strong>thermoledger build report</strong> · <a href=\"{up}index.html\">"
            f"all species</a></header><main>{h1}"
            f"<p class=\"caution\"><strong>Caution.</strong> {e(NOTICE)}</p>{body}</main>"
            f"{js}</body></html>\n").encode("utf-8")


def status(sp) -> tuple:
    """(css class, label) of a species' status in the report: ok, watch or held."""
    counted = [f for f in sp["findings"] if f["severity"] == "warning" and not f["acknowledged"]]
    if sp["extrapolated"] and any(x["model"] != "polynomial" for x in sp["extrapolated"]):
        return "watch", "extrapolated"
    if counted:
        return "watch", f"{len(counted)} warning(s)"
    return "ok", "ok"


def _anchor_rows(sp) -> list:
    """(label, text) rows saying where H and S of the entry are fixed."""
    a = sp.get("anchor") or {}
    if a.get("basis") == "transition":
        return [("H and S fixed at", f"{a['temperature']:g} K through the transition from "
                 f"{a['via']}: H = {a['enthalpy'] / 1000:.4f} kJ/mol, S = {a['entropy']:.4f} "
                 "J/(mol K)"),
                ("H - H298 counted from", f"{a['enthalpy_zero'] / 1000:.4f} kJ/mol, H(298.15 K) "
                 "of the phase stable there")]
    return [("enthalpy of formation", f"{sp['enthalpy_of_formation_298'] / 1000:.4f} kJ/mol"),
            ("entropy at 298.15 K", f"{sp['entropy_298']:.4f} J/(mol K) at 1 bar")]


def _phase_section(sp, transitions) -> list:
    """The phases section of a species page: the plot of every phase of its species with
    the transitions marked, and the transition table (empty without transitions)."""
    mine = [x for x in transitions if sp["id"] in (x["from"], x["to"])]
    if not mine:
        return []
    name = mine[0]["species"]
    out = [f"<h2>Phases of {e(name)}</h2><figure><img src=\"../img/{e(file_stem(name))}-"
           f"phases.svg\" alt=\"Cp and H - H298 of every phase of {e(name)}\"/><figcaption>"
           "each phase over its own range of use; solid where it is the stable phase, dashed "
           "elsewhere; dotted lines at the transitions</figcaption></figure>",
           "<table><tr><th>transition</th><th>T [K]</th><th>ΔH_trs [kJ/mol]</th>"
           "<th>ΔS_trs [J/(mol K)]</th><th>source</th></tr>"]
    for x in transitions:
        if x["species"] != name:
            continue
        u = "" if x["u_enthalpy"] is None else f" ± {x['u_enthalpy'] / 1000:.3g}"
        out.append(f"<tr><td>{e(x['from'])} → {e(x['to'])}</td><td class=\"num\">"
                   f"{x['temperature']:g}</td><td class=\"num\">{x['enthalpy'] / 1000:.4g}{u}"
                   f"</td><td class=\"num\">{x['entropy']:.4f}</td><td>{e(x['source'])}</td>"
                   "</tr>")
    out.append("</table>")
    return out


def formation_rows(made, species) -> dict:
    """{species id: (rows, None) or (None, why)} of the entries ``species`` for their pages:
    ΔfH°, ΔfG° and log10 Kf [J/mol, -] with standard uncertainties at 298.15 K and every
    500 K of the range of use, and the reference species of the elements (``made``: the
    library's library.formation.Formation)."""
    from ..library.references import elements_of

    out = {}
    for sp in species:
        missing = made.missing(sp["id"])
        if missing:
            out[sp["id"]] = (None, "; ".join(missing))
            continue
        lo, hi = sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"]
        t = np.unique([x for x in [298.15, *np.arange(500.0, hi + 1.0, 500.0), hi]
                       if lo <= x <= hi])
        got = made.at(sp["id"], t)
        refs = {el: made.states[el]["ids"] for el, _ in elements_of(sp["formula"])}
        out[sp["id"]] = ({"T": t, **got, "refs": refs}, None)
    return out


def _formation_section(got) -> list:
    """The formation section of a species page."""
    rows, why = got
    if rows is None:
        return ["<h2>Formation from the elements</h2>",
                f"<p>No formation properties: {e(why)}.</p>"]
    refs = "; ".join(f"{el}: {' → '.join(ids)}" for el, ids in rows["refs"].items())
    out = ["<h2>Formation from the elements</h2>",
           f"<p>Elements in their reference states ({e(refs)}), at 1 bar; ± standard "
           "uncertainty, with those of ΔfH° and S°.</p>",
           "<table><tr><th>T [K]</th><th>ΔfH° [kJ/mol]</th><th>ΔfG° [kJ/mol]</th>"
           "<th>log10 Kf</th></tr>"]
    for i, t in enumerate(rows["T"]):
        if np.isnan(rows["dfH"][i]):
            out.append(f"<tr><td class=\"num\">{t:g}</td><td colspan=\"3\">no reference "
                       "phase of an element in range</td></tr>")
            continue
        flag = " (reference extrapolated)" if rows["ref_extrapolated"][i] else ""
        out.append(f"<tr><td class=\"num\">{t:g}</td>"
                   f"<td class=\"num\">{rows['dfH'][i] / 1000:.3f} ± "
                   f"{rows['u_dfH'][i] / 1000:.2g}</td>"
                   f"<td class=\"num\">{rows['dfG'][i] / 1000:.3f} ± "
                   f"{rows['u_dfG'][i] / 1000:.2g}</td>"
                   f"<td class=\"num\">{rows['log10Kf'][i]:.4f} ± "
                   f"{rows['u_log10Kf'][i]:.2g}{e(flag)}</td></tr>")
    out.append("</table>")
    return out


def _steps_of(form, ranges) -> list:
    """checks.coefsets.steps of library ranges (dicts)."""
    return steps(PublishedSet(form=form, ranges=tuple(forms.as_ranges(ranges)),
                              lines=tuple(range(len(ranges)))))


def _origin_section(sp) -> list:
    """The published-set section of a species page: where the set came from and what the
    audit found; for a repaired set, the published and repaired coefficients side by side,
    the steps at each breakpoint before and after, and the largest change."""
    o = sp.get("origin")
    if not o:
        return []
    lines = ", ".join(str(n) for n in o["lines"])
    found = ", ".join(o["defects"]) or "no defects"
    out = ["<h2>Published coefficient set</h2>",
           f"<p>From {e(o['file'])} (lines {e(lines)}, source {e(o['source'])}), "
           f"{e(o['form'])} form. Audit: {e(found)}. "]
    if o["repair"] != "repaired":
        out.append({"not needed": "Adopted as published: the coefficients below are the "
                                  "source's, unchanged.",
                    "not requested": "Adopted as published although defective: no repair "
                                     "was asked for."}[o["repair"]] + "</p>")
        return out
    keep = "its breakpoints kept" if o.get("keep_breakpoints") else "breakpoints chosen anew"
    out.append(f"Repaired: refitted into a continuous set ({e(keep)}), anchored to the set's "
               "own ΔfH° and S°.</p>")
    out.append("<table><tr><th>range [K]</th><th>published</th><th>repaired</th></tr>")
    for a, b in zip(o["published_ranges"], sp["ranges"]):
        out.append(f"<tr><td>{a['t_min']:g}-{a['t_max']:g}</td><td><code>"
                   + e(", ".join(repr(c) for c in a["coefficients"])) + "</code></td><td><code>"
                   + e(", ".join(repr(c) for c in b["coefficients"])) + "</code></td></tr>")
    out.append("</table><table><tr><th>breakpoint [K]</th><th>quantity</th>"
               "<th>step, published</th><th>step, repaired</th></tr>")
    before, after = _steps_of(o["form"], o["published_ranges"]), _steps_of(sp["form"], sp["ranges"])
    after_at = {round(x["t"], 6): x for x in after}
    for x in before:
        y = after_at.get(round(x["t"], 6))
        for name, (lo, hi, _, unit) in x["quantities"].items():
            now = "-" if y is None else f"{y['quantities'][name][1] - y['quantities'][name][0]:+.3g}"
            out.append(f"<tr><td class=\"num\">{x['t']:g}</td><td>{e(name)} [{e(unit)}]</td>"
                       f"<td class=\"num\">{hi - lo:+.3g}</td><td class=\"num\">{e(now)}</td></tr>")
    out.append("</table>")
    c = o["largest_change"]
    out.append(f"<p>Largest change the repair made inside the range: Cp {c['Cp']['change']:+.4g} "
               f"J/(mol K) ({100 * c['Cp']['relative']:+.3g} %) at {c['Cp']['temperature']:g} K; "
               f"H {c['H']['change']:+.4g} J/mol at {c['H']['temperature']:g} K; "
               f"S {c['S']['change']:+.4g} J/(mol K) at {c['S']['temperature']:g} K.</p>")
    return out


def species_page(sp, figures, transitions=None, formation=None) -> str:
    """The page of one library species entry with its ``figures`` (the ``svg`` elements of
    plots.species_figure and, or None, plots.deviation_figure): a section of its page file
    (``page_file``) whose id is the species' file stem, shown alone when the address names
    it; ``transitions`` those of the library, ``formation`` its entry of
    ``formation_rows``."""
    q = sp["quality"]
    rows = [("form", sp["form"]), ("range of use", f"{sp['ranges'][0]['t_min']:g}-"
                                                   f"{sp['ranges'][-1]['t_max']:g} K"),
            ("data", f"{sp['data_range']['t_min']:g}-{sp['data_range']['t_max']:g} K, "
                     f"{q['points']} points ({q['weighting']} weights)"),
            ("breakpoints", ", ".join(f"{b:g} K" for b in sp["breakpoints"]) or "none"),
            ("worst |dCp/Cp|", f"{100 * q['cp_max_rel_dev']:.4f} % at {q['worst_t']:g} K"),
            ("rms dCp/Cp", f"{100 * q['cp_rms_rel_dev']:.4f} %"),
            ("max |dH| vs column", "-" if q["h_max_dev"] is None else f"{q['h_max_dev']:.4g} J/mol"),
            ("max |dS| vs column", "-" if q["s_max_dev"] is None else f"{q['s_max_dev']:.4g} J/(mol K)"),
            *_anchor_rows(sp)]
    body = ["<h2>At a glance</h2><table>"]
    body += [f"<tr><th>{e(k)}</th><td>{e(v)}</td></tr>" for k, v in rows]
    body.append("</table>")
    body += _origin_section(sp)
    body += _phase_section(sp, transitions or [])
    if formation is not None:
        body += _formation_section(formation)
    if sp["extrapolated"]:
        body.append("<h2>Outside the data</h2><table><tr><th>interval [K]</th><th>how</th>"
                    "<th>hold-out error</th><th>uncertainty at the end</th></tr>")
        for x in sp["extrapolated"]:
            he = "-" if x["holdout_error"] is None else f"{100 * x['holdout_error']:.3g} %"
            ue = "-" if x["u_rel_end"] is None else f"{100 * x['u_rel_end']:.3g} %"
            body.append(f"<tr><td>{x['t_min']:g}-{x['t_max']:g}</td><td>{e(x['model'])}</td>"
                        f"<td>{e(he)}</td><td>{e(ue)}</td></tr>")
        body.append("</table>")
    cp_figure, hs_figure = figures
    body.append(f"<h2>Curves</h2><figure>{cp_figure}<figcaption>{LEGEND}</figcaption></figure>")
    if hs_figure is not None:
        body.append(f"<h2>Against the H and S columns</h2><figure>{hs_figure}</figure>")
    body.append("<h2>Findings</h2>")
    if sp["findings"]:
        body.append("<table><tr><th>severity</th><th>code</th><th>where</th><th>what</th></tr>")
        for f in sp["findings"]:
            where = f["file"] + (f":{f['line']}" if f["line"] is not None else "")
            ack = f" (acknowledged: {f['acknowledged']})" if f["acknowledged"] else ""
            body.append(f"<tr><td>{e(f['severity'])}</td><td>{e(f['code'])}</td>"
                        f"<td>{e(where)}</td><td>{e(f['message'] + ack)}</td></tr>")
        body.append("</table>")
    else:
        body.append("<p>none</p>")
    body.append("<h2>Where the numbers came from</h2><table><tr><th>source</th><th>file</th>"
                "<th>rows used</th><th>interval [K]</th><th>citation</th><th>sha256</th></tr>")
    for s in sp["sources"]:
        iv = "-" if s["t_min"] is None else f"{s['t_min']:g}-{s['t_max']:g}"
        body.append(f"<tr><td>{e(s['source'])}</td><td>{e(s['file'])}</td>"
                    f"<td class=\"num\">{s['rows']}</td><td>{e(iv)}</td>"
                    f"<td>{e(s['citation'])}</td><td><code>{e(s['sha256'])}</code></td></tr>")
    body.append("</table>")
    if sp["excluded"]:
        body.append("<p>Rows left out of the fit: " + e(", ".join(
            f"{x['file']}:{x['line']} ({x['code']})" for x in sp["excluded"])) + "</p>")
    body.append(f"<h2>Coefficients ({e(sp['form'])})</h2><table><tr><th>range [K]</th>"
                "<th>coefficients</th></tr>")
    for r in sp["ranges"]:
        body.append(f"<tr><td>{r['t_min']:g}-{r['t_max']:g}</td><td><code>"
                    + e(", ".join(repr(c) for c in r["coefficients"])) + "</code></td></tr>")
    body.append("</table>")
    return (f"<section class=\"sp\" id=\"{e(file_stem(sp['id']))}\"><h1>{e(sp['id'])}</h1>"
            + "".join(body) + "</section>")


def page_file(name, species, sections) -> bytes:
    """Page file ``name`` (pages.page_of) of the library entries ``species`` with their
    ``sections`` (``species_page``): the list of its species, each a link that shows its
    page alone."""
    links = ", ".join(f"<a href=\"#{e(file_stem(sp['id']))}\">{e(sp['id'])}</a>"
                      for sp in species)
    nav = (f"<nav class=\"sp-list\"><p>Species on this page (each link shows its page): "
           f"{links}</p></nav>")
    title = "Species pages " + name.rsplit("/", 1)[-1].removesuffix(".html")
    return page(title, nav + "".join(sections), depth=1, heading=False, script=TITLE_JS)


#: a page file's title becomes that of the species its address names (tabs, bookmarks)
TITLE_JS = """
var first = document.title;
function named(){
  var s = document.getElementById(decodeURIComponent(location.hash.slice(1)));
  document.title = s && s.tagName === 'SECTION' ? s.querySelector('h1').textContent : first;
}
named(); window.addEventListener('hashchange', named);
"""


def summary(sp) -> tuple:
    """What the report's index shows of the library entry ``sp``: (id, form, first and last
    temperature of its range of use [K], worst |dCp/Cp| [%], findings, status class and
    label)."""
    cls, label = status(sp)
    return (sp["id"], sp["form"], sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"],
            100 * sp["quality"]["cp_max_rel_dev"], len(sp["findings"]), cls, label)


def index_page(doc, summaries=None) -> bytes:
    """The report's index: overview plots, then every species and every table held back in
    paged tables that filter and sort (PAGE_ROWS rows at a time). ``summaries`` ({species
    id: ``summary``}, of every species) spares decoding the entries again."""
    rows = []
    files = page_files(len(doc["species"]))
    listed = map(summary, doc["species"]) if summaries is None else \
        (summaries[sid] for sid in ids_of(doc["species"]))
    for sid, form, lo, hi, worst, n, cls, label in listed:
        path, section = page_of(sid, files)
        html_row = (f"<tr><td><a href=\"{e(path.removeprefix('report/'))}#{e(section)}\">"
                    f"{e(sid)}"
                    f"</a></td><td>{e(form)}</td><td>{lo:g}-{hi:g}</td><td class=\"num\">"
                    f"{worst:.4f}</td><td class=\"num\">{n}</td><td><span class=\"tag {cls}\">"
                    f"{e(label)}</span></td></tr>")
        rows.append((html_row, (sid, form, lo, worst, n, label), f"{sid} {form} {label}"))
    body = [f"<p>{len(doc['species'])} species fitted, {len(doc['quarantined'])} table(s) held "
            "back. Type in a box to filter a table; click a column heading to sort.</p>",
            "<div class=\"overview\"><figure><img src=\"img/overview-deviation.svg\" alt=\""
            "distribution of worst deviations\"/></figure><figure><img src=\"img/overview-"
            "sources.svg\" alt=\"species per source\"/></figure></div>",
            "<h2>Species</h2>",
            paged_table("summary", ("species", "form", "range of use [K]", "worst |dCp/Cp| [%]",
                                    "findings", "status"), rows)]
    if doc["quarantined"]:
        held = []
        for q in doc["quarantined"]:
            r = q["reasons"][0]
            where = q["file"] + (f":{r['line']}" if r["line"] is not None else "")
            held.append((f"<tr><td>{e(q['id'])}</td><td>{e(where)}</td><td><span class=\"tag "
                         f"held\">{e(r['code'])}</span> {e(r['message'])}</td></tr>",
                         (q["id"], where, r["code"]), f"{q['id']} {where} {r['code']}"))
        body += ["<h2>Held back</h2>", paged_table("held", ("species", "file", "first reason"),
                                                  held)]
    return page("Build report", "".join(body), script=PAGER_JS)


def report_files(doc, points, accept, workers=None, say=None, pages=None,
                 release=None) -> dict:
    """{relative path: bytes} of the report; with ``release`` (publish.Release), each file
    goes into it as soon as it is drawn instead (a large report is never held whole) and
    the dict is empty: the species pages drawn by workers are written into its staging
    folder by them (publish.Staging: no page passes through this process) and taken in by
    ``Release.adopt``. With ``pages``
    (release.pages.Drawn, into the release written to), the pages of a species drawn
    from the same inputs in the last release are linked from it instead of drawn.
    ``points`` maps species id to its data: t, cp (rows used), t_out, cp_out (rows left
    out), and optional (t, deviation) pairs 'dh' and 's' against the table's columns.
    Large reports are drawn by up to ``workers`` processes (default: the cores of the
    machine); the files do not depend on how many. The species are read a page file
    (pages.page_of: some pages.GROUP species) at a time (``Drawing``). ``say(stage, i, n,
    label)`` hears of every species drawn."""
    with drawing(doc, points, accept, workers, say, pages, release) as report:
        return report.finish()


@contextmanager
def drawing(doc, points, accept, workers=None, say=None, pages=None, release=None):
    """The report of ``report_files`` drawn while the block runs: what it gives
    (``Drawing``) sends page files to the workers and takes in those drawn when its
    ``pump`` is called (the writing of other files calls it between their pieces:
    publish.Release.between), and ``finish`` draws the rest, then the overview and the
    index. The workers, when there are any, are stopped when the block ends (killed when
    it raises)."""
    report = Drawing(doc, points, accept, workers, say, pages, release)
    if not drawn_by_workers(len(report.ids), report.workers):
        yield report
        return
    give_back_memory()
    # the workers start from a server process that holds nothing of this one (core.
    # fresh); an interrupted build waits for no worker
    with worker_pool(report.workers, fresh=DRAWING) as pool:
        report.pool = pool
        report.staging = release.staging() if release is not None else None
        yield report
        report.pool = None


class Drawing:
    """A report being drawn (``drawing``): page files sent a file at a time, at most twice
    as many out as there are workers; a file's entries go to its drawing as held and its
    points as pickled (decoded there: here they would cost the build's own process 1 s of
    CPU at 10 000 species), and the drawing gives back what the overview and the index
    show of them (``summary``)."""

    def __init__(self, doc, points, accept, workers=None, say=None, pages=None,
                 release=None):
        from ..library.formation import Formation

        self.doc, self.points, self.accept, self.pages = doc, points, accept, pages
        self.species = doc["species"]
        self.transitions = doc.get("transitions", [])
        self.made = Formation(doc)
        self.say = say or (lambda *a: None)
        self.workers = workers or default_workers()
        self.release, self.files = release, {}
        self.add = release.add if release is not None else self.files.__setitem__
        self.staging = None                 # where the workers write (``drawing``)
        self.pool, self.out, self.done, self.tallies = None, deque(), 0, {}
        self.heard = []                     # species drawn while pumped, told at ``finish``
        self.finishing = False
        self.ids = ids_of(self.species)
        held_in = page_files(len(self.ids))
        self.groups = {}
        for i, sid in enumerate(self.ids):
            self.groups.setdefault(page_of(sid, held_in)[0], []).append(i)
        self.base = pages.base(accept, self.transitions) if pages else None
        self.todo = self._chunks()

    def _chunks(self):
        # each file's entries go to its drawing as held (compact JSON, nothing decoded
        # here) and its plot points as pickled: the drawing decodes them
        species, ids, made, pages = self.species, self.ids, self.made, self.pages
        for name in sorted(self.groups):
            at = self.groups[name]
            own = [_pickled_points(self.points, ids[i]) for i in at]
            # only a species with formation properties is decoded for its rows here
            formed = formation_rows(made, [{"id": ids[i]} if made.missing(ids[i])
                                           else species[i] for i in at])
            if pages:                      # a file drawn from the same inputs is linked
                key = pages.key(self.base, [key_of(species, i) for i in at], own, formed)
                if pages.take(name, key, len(at)):
                    self.tallies[name] = _tally([species[i] for i in at])
                    self._counted(name)
                    continue
                pages.wait(name, key)
            yield ([held_of(species, i) for i in at], own, self.accept, self.transitions,
                   formed, name)

    def _counted(self, name):
        for i in self.groups[name]:
            self.done += 1
            if self.finishing:
                self.say("write report", self.done, len(self.species), self.ids[i])
            else:
                self.heard.append(i)

    def _added(self, name, part):
        drawn, self.tallies[name] = part
        for path, data in drawn.items():    # written by a worker: their sha256 and size
            (self.add if self.staging is None else self.release.adopt)(path, data)
        del part, drawn
        if self.pages:
            self.pages.drew(name)
        self._counted(name)
        if self.done % TRIM_EVERY < len(self.groups[name]):
            give_back_memory()

    def pump(self, wait: bool = False) -> None:
        """Take in the page files drawn and send more, keeping twice as many out as there
        are workers; never waits, unless ``wait``: then until every file is drawn. Without
        workers, only ``wait`` draws (here)."""
        if self.pool is None:
            if wait:
                for args in self.todo:
                    self._added(args[-1], _species_files(*args))
            return
        while True:
            while self.out and self.out[0][1].done():
                name, future = self.out.popleft()
                self._added(name, future.result())
            if len(self.out) < 2 * self.workers:
                args = next(self.todo, None)
                if args is not None:
                    self.out.append((args[-1], self.pool.submit(_species_files, *args,
                                                                self.staging)))
                    continue
                if not self.out:
                    return
            if not wait:
                return
            name, future = self.out.popleft()
            self._added(name, future.result())

    def finish(self) -> dict:
        """Draw every page file not drawn yet, then the overview and the index: {relative
        path: bytes} of the report, empty when written into a release."""
        self.finishing = True
        for k, i in enumerate(self.heard, 1):
            self.say("write report", k, len(self.species), self.ids[i])
        self.heard = []
        self.pump(wait=True)
        # the overview counts every species in the order of the page files, however drawn
        worst, per_source, summaries = [], Counter(), {}
        for name in sorted(self.tallies):
            sources, shown = self.tallies[name]
            per_source.update(sources)
            worst += [x[4] for x in shown]
            summaries.update((x[0], x) for x in shown)
        by_id = entries_by_id(self.doc)
        for name in sorted({x["species"] for x in self.transitions}):
            self.add(f"report/img/{file_stem(name)}-phases.svg", plots.phase_figure(
                name, self.transitions, by_id))
        hist, bars = plots.overview_figures(worst, per_source)
        self.add("report/img/overview-deviation.svg", hist)
        self.add("report/img/overview-sources.svg", bars)
        self.add("report/index.html", index_page(self.doc, summaries))
        return dict(sorted(self.files.items()))


#: what the report's workers import before they start, and from how many species a report
#: is drawn by workers
DRAWING, POOL_FROM = (__name__,), 61
#: the build's own process gives back the heap its freed pages leave (core.processes.
#: give_back_memory) after about this many species, whose pages passed through it (all of
#: them when they are drawn here or kept in memory; the linked ones otherwise)
TRIM_EVERY = 2000


def default_workers() -> int:
    """The report's workers when none are asked for: the cores of the machine, at most 4."""
    import os

    return min(os.cpu_count() or 1, 4)


def drawn_by_workers(species: int, workers: int) -> bool:
    """Whether the report of ``species`` species is drawn by ``workers`` worker processes
    (else in the build's own process)."""
    return workers > 1 and species >= POOL_FROM


def start_drawing(species: int) -> None:
    """Start the server the report's workers of a release of ``species`` species start from
    (core.fresh), when it will have workers: a new interpreter that imports this module,
    which took some 0.14 s before the first two of them answered (against 0.014 s forked
    from the asking process); started while the release's other files are written, it is
    ready when the report begins."""
    if drawn_by_workers(species, default_workers()):
        fresh.server(DRAWING)


def _species_files(held, points, accept, transitions, formed, name, staging=None) -> tuple:
    """({``name``: bytes} of the page file ``name`` holding the pages of the species held
    as ``held`` (library.entries.held_of) with their ``points`` pickled (b"" for none);
    with ``staging`` (publish.Staging), written into it and given as its sha256 and size
    instead) and ``_tally`` of the species."""
    species = [of_held(h) for h in held]
    files = _drawn(species, {sp["id"]: pickle.loads(p) for sp, p in zip(species, points) if p},
                   accept, transitions, formed, name)
    if staging is not None:
        files = {rel: staging.write(rel, data) for rel, data in files.items()}
    return files, _tally(species)


def _tally(species) -> tuple:
    """(first source, ``summary``) of each of the entries ``species``: what the report's
    overview counts and its index shows."""
    return [s["sources"][0]["source"] for s in species], [summary(s) for s in species]


def _pickled_points(points, sid: str) -> bytes:
    """The plot points of ``sid`` in ``points`` pickled (as a build's scratch file holds
    them: core.spill.SpilledObjects), or b"" when it has none."""
    if sid not in points:
        return b""
    if isinstance(points, SpilledObjects):
        return points.pickled(sid)
    return pickle.dumps(points[sid], protocol=pickle.HIGHEST_PROTOCOL)


def _drawn(species, points, accept, transitions, formed, name) -> dict:
    sections = []
    for sp in species:
        p = points.get(sp["id"], {})
        cp_figure = plots.species_figure(
            sp, p.get("t", np.zeros(0)), p.get("cp", np.zeros(0)), p.get("t_out", np.zeros(0)),
            p.get("cp_out", np.zeros(0)), accept)
        hs_figure = None
        if "dh" in p or "s" in p:
            th, dh = p.get("dh", (np.zeros(0), np.zeros(0)))
            ts, ds = p.get("s", (np.zeros(0), np.zeros(0)))
            hs_figure = plots.deviation_figure(th, dh, ts, ds, sp["id"])
        sections.append(species_page(sp, (cp_figure, hs_figure), transitions,
                                     (formed or {}).get(sp["id"])))
    return {name: page_file(name, species, sections)}
