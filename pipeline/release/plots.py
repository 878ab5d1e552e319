"""Plots of the build report, drawn at build time as plain SVG (svgchart.py).

Each function takes the numbers of one species (or of the whole build) and returns one
figure: a species' figures as ``svg`` elements its HTML page holds, the others as the bytes
of an SVG file; the same inputs give the same text."""

import numpy as np

from ..core import gridcache
from ..library import document as library
from ..physics import forms
from .svgchart import Chart, span_of

# our own palette
INK, DATA, FIT, BAD, SHADE, GRID = "#22313f", "#1f7a8c", "#d1495b", "#8f2d56", "#edae49", "#d9d9d9"
EMPTY = np.zeros(0)


def species_figure(sp, t, cp, t_out, cp_out, accept) -> str:
    """Cp of library entry ``sp`` with the rows used (t [K], cp [J/(mol K)]), the rows left
    out, breakpoints and extrapolated intervals, over the relative deviation of the fit with
    the acceptance threshold ``accept`` (a fraction): the ``svg`` element of its page."""
    lo, hi = sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"]
    ranges = library.ranges_of(sp)
    tf = gridcache.geomspace(lo, hi, 300)    # (read-only: made once for each range of use)
    # the curve and the fit at the rows in one pass (the same numbers as each alone)
    cp_fit, cp_at = (ev["Cp"] for ev in forms.evaluate_many([(ranges, tf), (ranges, t)],
                                                            sp["form"], ("Cp",)))
    dev = 100 * (cp_at - cp) / cp if len(t) else EMPTY
    span = max(float(np.max(np.abs(dev))) if len(dev) else 0.0, 100 * accept) * 1.2
    xlim = (lo - 0.02 * (hi - lo), hi + 0.02 * (hi - lo))
    chart = Chart(720, 500, grid=GRID, ink=INK, ids="cp-")
    top = chart.panel((72, 34, 626, 266), xlim, span_of(cp_fit, cp, cp_out),
                      title=f"{sp['id']}: heat capacity and deviation of the fit",
                      ylabel="Cp [J/(mol K)]", x_labels=False)
    bottom = chart.panel((72, 310, 626, 140), xlim, (-span, span), xlabel="T [K]",
                         ylabel="(fit - data)/data [%]")
    for panel in (top, bottom):
        for e in sp["extrapolated"]:
            panel.vspan(e["t_min"], e["t_max"], SHADE)
        for b in sp.get("breakpoints", []):
            panel.vline(b, INK)
    top.line(tf, cp_fit, FIT)
    top.dots(t, cp, DATA)
    top.crosses(t_out, cp_out, BAD)
    for y in (100 * accept, -100 * accept):
        bottom.hline(y, BAD, dash="5,3")
    bottom.hline(0.0, INK, width=0.6)
    bottom.line(t, dev, DATA, width=0.8, dots=2.2)
    return chart.element(f"Cp and deviation of {sp['id']}")


def deviation_figure(t_h, dh_dev, t_s, s_dev, species_id: str) -> str:
    """Fit − column for H − H298 [J/mol] at t_h [K] and S [J/(mol K)] at t_s [K] of species
    ``species_id`` (the ``svg`` element of its page); a table without the column gets no
    panel."""
    chart = Chart(720, 260, grid=GRID, ink=INK, ids="hs-")
    for k, (t, d, title) in enumerate(((t_h, dh_dev, "H - H298: fit - column [J/mol]"),
                                       (t_s, s_dev, "S: fit - column [J/(mol K)]"))):
        if not len(t):
            continue
        panel = chart.panel((72 + 360 * k, 34, 270, 168), span_of(t, pad=0.03),
                            span_of(d, [0.0]), title=title, xlabel="T [K]", xticks=5)
        panel.hline(0.0, INK, width=0.6)
        panel.line(t, d, DATA, width=0.8, dots=2.2)
    return chart.element(f"H and S deviation of {species_id}")

def phase_figure(name, all_transitions, by_id) -> bytes:
    """SVG of every phase of species ``name``: Cp [J/(mol K)] over each phase's range of use
    and H − H298 [kJ/mol] with its jumps, solid where the phase is stable (between its
    transitions among the library's ``all_transitions``), dashed elsewhere, a dotted line
    at each transition."""
    transitions, order = library.chain(all_transitions, name)
    temps = [0.0] + [x["temperature"] for x in transitions] + [np.inf]
    colours = [DATA, FIT, SHADE, BAD, INK, GRID]
    curves = []
    for k, sid in enumerate(order):
        sp = by_id.get(sid)
        if sp is None:
            continue
        lo, hi = sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"]
        t = np.unique(np.concatenate([np.linspace(lo, hi, 300),
                                      np.clip(temps[k:k + 2], lo, hi)]))
        v = forms.evaluate_ranges(library.ranges_of(sp), t, sp["form"])
        zero = (sp.get("anchor") or {}).get("enthalpy_zero", sp["enthalpy_of_formation_298"])
        stable = (t >= temps[k]) & (t <= temps[k + 1])
        curves.append((sid, colours[k % len(colours)], t, v["Cp"], (v["H"] - zero) / 1000, stable))
    every_t = [c[2] for c in curves] or [EMPTY]
    xlim = span_of(*every_t, pad=0.02)
    chart = Chart(720, 500, grid=GRID, ink=INK)
    top = chart.panel((72, 34, 504, 208), xlim, span_of(*[c[3] for c in curves]),
                      title=f"{name}: every phase, transitions dotted", ylabel="Cp [J/(mol K)]",
                      x_labels=False)
    bottom = chart.panel((72, 252, 504, 208), xlim, span_of(*[c[4] for c in curves]),
                         xlabel="T [K]", ylabel="H - H298 [kJ/mol]")
    for k, (sid, colour, t, cp, h, stable) in enumerate(curves):
        for mask, dash in ((stable, None), (~stable, "6,3")):
            top.line(np.where(mask, t, np.nan), cp, colour, dash=dash)
            bottom.line(np.where(mask, t, np.nan), h, colour, dash=dash)
        chart.key(588, 48 + 18 * k, colour, sid)
    for x in transitions:
        for panel in (top, bottom):
            panel.vline(x["temperature"], INK)
    return chart.to_bytes()


def overview_figures(worst_percent, per_source) -> tuple:
    """SVGs of the distribution of the worst deviations [%] and of species per source."""
    worst = np.asarray(worst_percent, dtype=float)
    chart = Chart(500, 300, grid=GRID, ink=INK)
    if worst.size:
        counts, edges = np.histogram(worst, bins=min(30, max(5, worst.size // 3)))
    else:
        counts, edges = np.zeros(0), np.array([0.0, 1.0])
    panel = chart.panel((70, 36, 410, 210), (edges[0], edges[-1]),
                        (0.0, max(float(counts.max()) if counts.size else 1.0, 1.0) * 1.05),
                        title="How close are the fits?", ylabel="species",
                        xlabel="worst |(fit - data)/data| of a species [%]", xticks=6)
    panel.bars(edges[:-1], edges[1:], counts, DATA)
    hist = chart.to_bytes()
    names = sorted(per_source)
    rows = max(len(names), 1)
    chart = Chart(500, 70 + 24 * rows, grid=GRID, ink=INK)
    most = max(per_source.values(), default=1)
    panel = chart.panel((170, 30, 310, 24 * rows), (0.0, most * 1.05), (0.0, rows),
                        title="Where the data came from", xlabel="species fitted from the source",
                        yticks=0)
    for k, n in enumerate(names):
        y = rows - k - 0.5
        panel.hbar(y, per_source[n], 0.7, SHADE)
        chart.text(panel.left - 6, panel.y(y) + 3, n, anchor="end")
    return hist, chart.to_bytes()
