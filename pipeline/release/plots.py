"""Plots of the build report, rendered at build time to SVG with matplotlib.

Figures are made directly (no pyplot state, no backend chosen) and the style applies only
inside our own drawing (``rc_context``): importing this module changes no global state. Each
kind of plot is one figure reused from species to species (only the data change), which
makes a thousand species a matter of seconds. Text stays text in the SVG (the viewer's own
sans-serif font; nothing is fetched), and the SVG hash salt and metadata are fixed so the
same inputs give byte-identical files."""

import functools
import io

import matplotlib
import numpy as np
from matplotlib.figure import Figure

from ..library import document as library
from ..physics import forms

STYLE = {"svg.hashsalt": "thermoledger", "svg.fonttype": "none", "font.size": 8,
         "axes.titlesize": 9, "axes.labelsize": 8, "font.family": "sans-serif"}


def styled(draw):
    """Run ``draw`` with the report's STYLE in force, and the caller's rcParams back after."""
    @functools.wraps(draw)
    def inner(*args, **kwargs):
        with matplotlib.rc_context(STYLE):
            return draw(*args, **kwargs)
    return inner

# our own palette
INK, DATA, FIT, BAD, SHADE, GRID = "#22313f", "#1f7a8c", "#d1495b", "#8f2d56", "#edae49", "#d9d9d9"


def _svg(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    return buf.getvalue()


class SpeciesPlotter:
    """Cp with data, fit, breakpoints and extrapolated intervals, over the relative deviation
    of the fit with the acceptance threshold — one reusable figure."""

    @styled
    def __init__(self):
        self.fig = Figure(figsize=(7.2, 5.0))
        self.top, self.bottom = self.fig.subplots(2, 1, sharex=True,
                                                  gridspec_kw={"height_ratios": [3, 2]})
        self.fig.subplots_adjust(left=0.1, right=0.97, top=0.93, bottom=0.1, hspace=0.08)
        self.fit_line, = self.top.plot([], [], color=FIT, lw=1.4)
        self.data_pts, = self.top.plot([], [], "o", ms=3, color=DATA)
        self.out_pts, = self.top.plot([], [], "x", ms=6, color=BAD)
        self.dev_line, = self.bottom.plot([], [], "o-", ms=3, lw=0.8, color=DATA)
        self.accept_hi = self.bottom.axhline(0, color=BAD, lw=0.8, ls="--")
        self.accept_lo = self.bottom.axhline(0, color=BAD, lw=0.8, ls="--")
        self.bottom.axhline(0, color=INK, lw=0.6)
        self.title = self.top.set_title("")
        self.top.set_ylabel("Cp [J/(mol K)]")
        self.bottom.set_ylabel("(fit - data)/data [%]")
        self.bottom.set_xlabel("T [K]")
        for ax in (self.top, self.bottom):
            ax.grid(color=GRID, lw=0.5)
        from matplotlib.ticker import MaxNLocator

        for ax in (self.top, self.bottom):
            ax.yaxis.set_major_locator(MaxNLocator(5))
        self.bottom.xaxis.set_major_locator(MaxNLocator(7))
        self.marks = []

    @styled
    def render(self, sp, t, cp, t_out, cp_out, accept) -> bytes:
        """The SVG of library entry ``sp`` with the rows used (t [K], cp [J/(mol K)]), the
        rows left out, and the acceptance threshold ``accept`` (a fraction)."""
        for artist in self.marks:
            artist.remove()
        self.marks = []
        lo, hi = sp["ranges"][0]["t_min"], sp["ranges"][-1]["t_max"]
        for e in sp["extrapolated"]:
            for ax in (self.top, self.bottom):
                self.marks.append(ax.axvspan(e["t_min"], e["t_max"], color=SHADE, alpha=0.3,
                                             lw=0))
        for b in sp.get("breakpoints", []):
            for ax in (self.top, self.bottom):
                self.marks.append(ax.axvline(b, color=INK, lw=0.8, ls=":"))
        tf = np.geomspace(lo, hi, 300)
        self.fit_line.set_data(tf, forms.evaluate_ranges(library.ranges_of(sp), tf, sp["form"])["Cp"])
        self.data_pts.set_data(t, cp)
        self.out_pts.set_data(t_out, cp_out)
        dev = np.zeros(0)
        if len(t):
            fitted = forms.evaluate_ranges(library.ranges_of(sp), t, sp["form"])["Cp"]
            dev = 100 * (fitted - cp) / cp
        self.dev_line.set_data(t, dev)
        self.accept_hi.set_ydata([100 * accept] * 2)
        self.accept_lo.set_ydata([-100 * accept] * 2)
        self.title.set_text(f"{sp['id']}: heat capacity and deviation of the fit")
        self.top.relim()
        self.top.autoscale_view()
        span = max(float(np.max(np.abs(dev))) if len(dev) else 0.0, 100 * accept) * 1.2
        self.bottom.set_ylim(-span, span)
        self.bottom.set_xlim(lo - 0.02 * (hi - lo), hi + 0.02 * (hi - lo))
        return _svg(self.fig)


class DeviationPlotter:
    """H − H298 and S deviations of the fit from a table's columns."""

    @styled
    def __init__(self):
        self.fig = Figure(figsize=(7.2, 2.6))
        self.left, self.right = self.fig.subplots(1, 2)
        self.fig.subplots_adjust(left=0.1, right=0.97, top=0.86, bottom=0.2, wspace=0.3)
        self.h_line, = self.left.plot([], [], "o-", ms=3, lw=0.8, color=DATA)
        self.s_line, = self.right.plot([], [], "o-", ms=3, lw=0.8, color=DATA)
        self.left.set_title("H - H298: fit - column [J/mol]")
        self.right.set_title("S: fit - column [J/(mol K)]")
        for ax in (self.left, self.right):
            ax.axhline(0, color=INK, lw=0.6)
            ax.set_xlabel("T [K]")
            ax.grid(color=GRID, lw=0.5)

    @styled
    def render(self, t_h, dh_dev, t_s, s_dev) -> bytes:
        """The SVG of fit − column for H − H298 [J/mol] at t_h [K] and S [J/(mol K)] at t_s."""
        self.h_line.set_data(t_h, dh_dev)
        self.s_line.set_data(t_s, s_dev)
        for ax, t in ((self.left, t_h), (self.right, t_s)):
            ax.set_visible(len(t) > 0)         # a table without the column: no panel
            ax.relim()
            ax.autoscale_view()
        return _svg(self.fig)


@styled
def phase_figure(name, all_transitions, by_id) -> bytes:
    """SVG of every phase of species ``name``: Cp [J/(mol K)] over each phase's range of use
    and H − H298 [kJ/mol] with its jumps, solid where the phase is stable (between its
    transitions among the library's ``all_transitions``), dashed elsewhere, a dotted line
    at each transition."""
    fig = Figure(figsize=(7.2, 5.0))
    top, bottom = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [1, 1]})
    fig.subplots_adjust(left=0.1, right=0.8, top=0.93, bottom=0.1, hspace=0.08)
    transitions, order = library.chain(all_transitions, name)
    temps = [0.0] + [x["temperature"] for x in transitions] + [np.inf]
    colours = [DATA, FIT, SHADE, BAD, INK, GRID]
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
        colour = colours[k % len(colours)]
        for mask, style, label in ((stable, "-", sid), (~stable, "--", None)):
            top.plot(np.where(mask, t, np.nan), v["Cp"], style, color=colour, lw=1.4,
                     label=label)
            bottom.plot(np.where(mask, t, np.nan), (v["H"] - zero) / 1000, style,
                        color=colour, lw=1.4)
    for x in transitions:
        for ax in (top, bottom):
            ax.axvline(x["temperature"], color=INK, lw=0.8, ls=":")
    top.set_title(f"{name}: every phase, transitions dotted")
    top.set_ylabel("Cp [J/(mol K)]")
    bottom.set_ylabel("H - H298 [kJ/mol]")
    bottom.set_xlabel("T [K]")
    top.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    for ax in (top, bottom):
        ax.grid(color=GRID, lw=0.5)
    return _svg(fig)


@styled
def overview_figures(worst_percent, per_source) -> tuple:
    """SVGs of the distribution of the worst deviations [%] and of species per source."""

    fig = Figure(figsize=(5.0, 3.0))
    ax = fig.subplots()
    fig.subplots_adjust(left=0.14, right=0.96, top=0.88, bottom=0.17)
    if worst_percent:
        ax.hist(worst_percent, bins=min(30, max(5, len(worst_percent) // 3)), color=DATA,
                edgecolor="white")
    ax.set_xlabel("worst |(fit - data)/data| of a species [%]")
    ax.set_ylabel("species")
    ax.set_title("How close are the fits?")
    ax.grid(color=GRID, lw=0.5)
    hist = _svg(fig)
    fig = Figure(figsize=(5.0, 0.6 + 0.35 * max(len(per_source), 1)))
    ax = fig.subplots()
    fig.subplots_adjust(left=0.35, right=0.96, top=0.8, bottom=0.3)
    names = sorted(per_source)
    ax.barh(names, [per_source[n] for n in names], color=SHADE)
    ax.set_xlabel("species fitted from the source")
    ax.set_title("Where the data came from")
    return hist, _svg(fig)
