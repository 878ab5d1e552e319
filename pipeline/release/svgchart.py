"""Plain SVG line charts, written as text: the few shapes the report draws.

A ``Chart`` holds ``Panel`` s (one pair of linear axes each: ticks on round numbers, a grid,
a frame, labels) and turns into one SVG document (``to_bytes``), or into an ``svg`` element
written into an HTML page (``element``: a species' page holds its figures, so that the report
makes one file per species, not three). Coordinates are rounded to 0.01 px and
numbers are formatted by fixed rules, so the same data give the same bytes; text stays text
(the viewer's own sans-serif font; nothing is fetched). Drawing a species costs well under a
millisecond, against ~40 ms for a general-purpose plotting library.
"""

import math
from functools import lru_cache
from html import escape

import numpy as np

FONT = "font-family=\"sans-serif\""
#: the transform of a shape whose points are written in hundredths of a pixel (_hundredths)
SCALED = " transform=\"scale(.01)\""
#: the namespace an SVG file declares (an HTML page puts its svg elements in it itself)
NAMESPACE = " xmlns=\"http://www.w3.org/2000/svg\""


def nice_ticks(lo: float, hi: float, n: int = 5) -> list:
    """About ``n`` round tick values (1, 2, 2.5 or 5 times a power of ten) covering
    [lo, hi]; [lo] when the span is zero or not finite."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo] if math.isfinite(lo) else [0.0]
    raw = (hi - lo) / max(n, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 2.5, 5, 10) if m * power >= raw)
    first = math.ceil(lo / step - 1e-9)
    last = math.floor(hi / step + 1e-9)
    return [round(k * step, 12) for k in range(first, last + 1)]


def label(v: float) -> str:
    """A tick label: up to 6 significant digits, no trailing zeros, no '-0'."""
    text = f"{v:.6g}"
    return "0" if text in ("-0", "0") else text


def _finite(values) -> np.ndarray:
    a = np.asarray(values, dtype=float).ravel()
    return a[np.isfinite(a)]


def span_of(*arrays, pad: float = 0.05) -> tuple:
    """(lo, hi) around every finite value of ``arrays``, widened by ``pad`` of the span (or
    by 1 when all values are equal); (0, 1) when there are none."""
    values = np.concatenate([_finite(a) for a in arrays]) if arrays else np.zeros(0)
    if not values.size:
        return 0.0, 1.0
    lo, hi = float(values.min()), float(values.max())
    wide = (hi - lo) * pad if hi > lo else max(abs(lo) * 0.05, 1.0)
    return lo - wide, hi + wide


class Panel:
    """One pair of linear axes drawn into the box (left, top, width, height) [px]."""

    def __init__(self, box, xlim, ylim, *, title="", xlabel="", ylabel="", xticks=7,
                 yticks=5, x_labels=True, ids=""):
        self.left, self.top, self.width, self.height = box
        self.ids = ids         # prefix of the element ids (unique among a page's figures)
        self.xlim, self.ylim = self._limits(xlim), self._limits(ylim)
        self.title, self.xlabel, self.ylabel = title, xlabel, ylabel
        self.n_xticks, self.n_yticks, self.x_labels = xticks, yticks, x_labels
        self.parts = []        # SVG elements inside the plotting area, in drawing order

    @staticmethod
    def _limits(lim):
        lo, hi = float(lim[0]), float(lim[1])
        if not (math.isfinite(lo) and math.isfinite(hi)):
            return 0.0, 1.0
        return (lo, hi) if hi > lo else (lo - 1.0, hi + 1.0)

    def px(self, x) -> np.ndarray:
        lo, hi = self.xlim
        return self.left + (np.asarray(x, dtype=float) - lo) / (hi - lo) * self.width

    def py(self, y) -> np.ndarray:
        lo, hi = self.ylim
        return self.top + self.height - (np.asarray(y, dtype=float) - lo) / (hi - lo) * self.height

    def x(self, v) -> float:
        """``px`` of one value as a Python float: the same operations in the same order, so
        the same number, without numpy's cost per call (a frame places some 30 ticks)."""
        lo, hi = self.xlim
        return self.left + (float(v) - lo) / (hi - lo) * self.width

    def y(self, v) -> float:
        """``py`` of one value as a Python float (as ``x``)."""
        lo, hi = self.ylim
        return self.top + self.height - (float(v) - lo) / (hi - lo) * self.height

    # ---- shapes -------------------------------------------------------------------------
    def line(self, x, y, colour, width=1.4, dash=None, dots=None) -> None:
        """A polyline through (x, y); a NaN breaks it into pieces. With ``dots`` (a radius
        [px]) also a dot at each of its points (as ``dots`` draws them), the points written
        once for both."""
        px, py, ok = self._placed(x, y)
        text = _hundredths(px[ok], py[ok])
        if not text:
            return
        style = f" stroke-dasharray=\"{_scaled(dash)}\"" if dash else ""
        runs = np.flatnonzero(np.diff(np.flatnonzero(ok)) > 1) + 1   # where a piece begins
        if runs.size:
            items = text[:-1].split("\n")
            pieces = [" ".join(items[a:b]) for a, b in zip([0, *runs], [*runs, len(items)])]
        else:
            pieces = [text[:-1].replace("\n", " ")]
        for pts in pieces:
            self.parts.append(f"<polyline{SCALED} points=\"{pts}\" fill=\"none\" "
                              f"stroke=\"{colour}\" stroke-width=\"{_scaled(width)}\"{style}/>")
        if dots is not None:
            self._dots(text, colour, dots)

    def _placed(self, x, y) -> tuple:
        """(px, py) of the points (x, y), and where both are finite."""
        px, py = self.px(x), self.py(y)
        return px, py, np.isfinite(px) & np.isfinite(py)

    def _finite(self, x, y) -> tuple:
        """(px, py) of the points of (x, y) whose pixel coordinates are finite."""
        px, py, ok = self._placed(x, y)
        return px[ok], py[ok]

    def dots(self, x, y, colour, radius=2.2) -> None:
        """A round dot of ``radius`` [px] at each finite (x, y): one path of zero-length
        subpaths with round caps (SVG 1.1, 11.4: such a subpath is drawn as a disc), some
        14 bytes a dot ("M12345,23456h0") instead of a circle element's 55."""
        self._dots(_hundredths(*self._finite(x, y)), colour, radius)

    def _dots(self, text: str, colour, radius) -> None:
        if text:
            moves = text[:-1].replace("\n", "h0M")
            self.parts.append(f"<path{SCALED} d=\"M{moves}h0\" "
                              f"fill=\"none\" stroke=\"{colour}\" "
                              f"stroke-width=\"{_scaled(2 * radius)}\" stroke-linecap=\"round\"/>")

    def crosses(self, x, y, colour, size=3.5) -> None:
        for a, b in zip(*self._finite(x, y)):
            self.parts.append(f"<path d=\"M{a - size:.2f},{b - size:.2f}L{a + size:.2f},"
                              f"{b + size:.2f}M{a - size:.2f},{b + size:.2f}L{a + size:.2f},"
                              f"{b - size:.2f}\" stroke=\"{colour}\" stroke-width=\"1.3\"/>")

    def vspan(self, x0, x1, colour, opacity=0.3) -> None:
        a, b = sorted((self.x(x0), self.x(x1)))
        a, b = max(a, self.left), min(b, self.left + self.width)
        if b > a:
            self.parts.append(f"<rect x=\"{a:.2f}\" y=\"{self.top:.2f}\" width=\"{b - a:.2f}\" "
                              f"height=\"{self.height:.2f}\" fill=\"{colour}\" "
                              f"fill-opacity=\"{opacity}\"/>")

    def vline(self, x, colour, width=0.8, dash="2,2") -> None:
        a = self.x(x)
        if self.left <= a <= self.left + self.width:
            self.parts.append(f"<line x1=\"{a:.2f}\" y1=\"{self.top:.2f}\" x2=\"{a:.2f}\" "
                              f"y2=\"{self.top + self.height:.2f}\" stroke=\"{colour}\" "
                              f"stroke-width=\"{width}\" stroke-dasharray=\"{dash}\"/>")

    def hline(self, y, colour, width=0.8, dash=None) -> None:
        b = self.y(y)
        if self.top <= b <= self.top + self.height:
            style = f" stroke-dasharray=\"{dash}\"" if dash else ""
            self.parts.append(f"<line x1=\"{self.left:.2f}\" y1=\"{b:.2f}\" "
                              f"x2=\"{self.left + self.width:.2f}\" y2=\"{b:.2f}\" "
                              f"stroke=\"{colour}\" stroke-width=\"{width}\"{style}/>")

    def bars(self, x0, x1, heights, colour) -> None:
        """Vertical bars from 0 over [x0[i], x1[i]] (a histogram)."""
        base = self.y(max(self.ylim[0], 0.0))
        for a, b, h in zip(self.px(x0), self.px(x1), self.py(heights)):
            top = min(h, base)
            self.parts.append(f"<rect x=\"{a:.2f}\" y=\"{top:.2f}\" width=\"{max(b - a, 0):.2f}\" "
                              f"height=\"{abs(base - h):.2f}\" fill=\"{colour}\" "
                              "stroke=\"white\" stroke-width=\"0.5\"/>")

    def hbar(self, y, length, thickness, colour) -> None:
        """A horizontal bar from x = 0 to ``length``, centred on ``y``, ``thickness`` high
        (in data units)."""
        x0, x1 = self.x(0.0), self.x(length)
        y0, y1 = self.y(y + thickness / 2), self.y(y - thickness / 2)
        self.parts.append(f"<rect x=\"{x0:.2f}\" y=\"{y0:.2f}\" width=\"{x1 - x0:.2f}\" "
                          f"height=\"{y1 - y0:.2f}\" fill=\"{colour}\"/>")

    # ---- frame --------------------------------------------------------------------------
    def svg(self, grid: str, ink: str) -> str:
        out = [_x_grid((self.left, self.top, self.width, self.height), self.xlim,
                       self.n_xticks, self.x_labels, grid)]
        yt = _ticks(self.ylim, self.n_yticks)
        bottom = self.top + self.height
        for v in yt:
            b = self.y(v)
            out.append(f"<line x1=\"{self.left:.2f}\" y1=\"{b:.2f}\" x2=\"{self.left + self.width:.2f}"
                       f"\" y2=\"{b:.2f}\" stroke=\"{grid}\" stroke-width=\"0.5\"/>")
            out.append(f"<text x=\"{self.left - 4:.2f}\" y=\"{b + 3:.2f}\" text-anchor=\"end\">"
                       f"{label(v)}</text>")
        clip = f"{self.ids}c{int(self.left)}-{int(self.top)}"
        out.append(f"<clipPath id=\"{clip}\"><rect x=\"{self.left:.2f}\" y=\"{self.top:.2f}\" "
                   f"width=\"{self.width:.2f}\" height=\"{self.height:.2f}\"/></clipPath>")
        out.append(f"<g clip-path=\"url(#{clip})\">" + "".join(self.parts) + "</g>")
        out.append(f"<rect x=\"{self.left:.2f}\" y=\"{self.top:.2f}\" width=\"{self.width:.2f}\" "
                   f"height=\"{self.height:.2f}\" fill=\"none\" stroke=\"{ink}\" stroke-width=\"0.8\"/>")
        if self.title:
            out.append(f"<text x=\"{self.left + self.width / 2:.2f}\" y=\"{self.top - 7:.2f}\" "
                       f"text-anchor=\"middle\" font-size=\"12\">{escape(self.title)}</text>")
        if self.xlabel:
            out.append(f"<text x=\"{self.left + self.width / 2:.2f}\" y=\"{bottom + 30:.2f}\" "
                       f"text-anchor=\"middle\">{escape(self.xlabel)}</text>")
        if self.ylabel:
            x, y = self.left - 48, self.top + self.height / 2
            out.append(f"<text x=\"{x:.2f}\" y=\"{y:.2f}\" text-anchor=\"middle\" "
                       f"transform=\"rotate(-90 {x:.2f} {y:.2f})\">{escape(self.ylabel)}</text>")
        return "".join(out)


def _hundredths(px, py) -> str:
    """'x,y' and a line break for each point (px[i], py[i]) [px], in hundredths of a pixel
    rounded to integers (half to even; beyond ±10⁹ px held there): one C-level formatting of
    the whole run, and an integer formats in half the time of a float's '.2f'. Shapes drawn
    from it are scaled by 0.01 (``SCALED``)."""
    if not len(px):
        return ""
    held = np.clip(np.column_stack([px, py]), -1e9, 1e9)
    return ("%d,%d\n" * len(px)) % tuple(np.rint(held * 100).astype(np.int64).ravel().tolist())


def _scaled(value) -> str:
    """A length [px] (or a dash pattern of lengths, "a,b") in hundredths of a pixel, for a
    shape scaled by 0.01."""
    if isinstance(value, str):
        return ",".join(_scaled(float(v)) for v in value.split(","))
    return f"{round(value * 100, 6):g}"


@lru_cache(maxsize=64)
def _x_grid(box, xlim, n, labels: bool, grid: str) -> str:
    """The vertical grid lines of a panel in ``box`` with x limits ``xlim`` at its ``n``
    round ticks, and their labels when ``labels``: made once for the species of a catalogue,
    which share their ranges of use and so their x axes."""
    panel = Panel(box, xlim, (0.0, 1.0), xticks=n)
    top, bottom = panel.top, panel.top + panel.height
    out = []
    for v in _ticks(panel.xlim, n):
        a = panel.x(v)
        out.append(f"<line x1=\"{a:.2f}\" y1=\"{top:.2f}\" x2=\"{a:.2f}\" y2=\"{bottom:.2f}\""
                   f" stroke=\"{grid}\" stroke-width=\"0.5\"/>")
        if labels:
            out.append(f"<text x=\"{a:.2f}\" y=\"{bottom + 13:.2f}\" text-anchor=\"middle\">"
                       f"{label(v)}</text>")
    return "".join(out)


def _ticks(lim, n) -> list:
    """The round ticks within ``lim`` (none when ``n`` is 0)."""
    return [v for v in nice_ticks(*lim, n) if lim[0] <= v <= lim[1]] if n else []


class Chart:
    """An SVG document of ``width`` × ``height`` px holding panels and free text; ``ids``
    prefixes the ids of its elements, so that several charts can share one HTML page."""

    def __init__(self, width: int, height: int, *, grid="#d9d9d9", ink="#22313f", ids=""):
        self.width, self.height, self.grid, self.ink = width, height, grid, ink
        self.ids = ids
        self.panels, self.extra = [], []

    def panel(self, *args, **kwargs) -> Panel:
        p = Panel(*args, ids=self.ids, **kwargs)
        self.panels.append(p)
        return p

    def text(self, x, y, text, colour=None, anchor="start") -> None:
        fill = f" fill=\"{colour}\"" if colour else ""
        self.extra.append(f"<text x=\"{x:.2f}\" y=\"{y:.2f}\" text-anchor=\"{anchor}\"{fill}>"
                          f"{escape(text)}</text>")

    def key(self, x, y, colour, text, dash=None) -> None:
        """A legend entry: a short line and its text."""
        style = f" stroke-dasharray=\"{dash}\"" if dash else ""
        self.extra.append(f"<line x1=\"{x:.2f}\" y1=\"{y - 4:.2f}\" x2=\"{x + 18:.2f}\" "
                          f"y2=\"{y - 4:.2f}\" stroke=\"{colour}\" stroke-width=\"1.6\"{style}/>")
        self.text(x + 23, y, text)

    def element(self, label: str = "") -> str:
        """The ``svg`` element of the chart, as an HTML page holds it (the HTML parser puts
        it in the SVG namespace): ``label`` (when given) names it for a screen reader (role
        img), as an image's alt text would."""
        named = f" role=\"img\" aria-label=\"{escape(label)}\"" if label else ""
        return self._svg("", named)

    def _svg(self, namespace: str, named: str = "") -> str:
        body = "".join(p.svg(self.grid, self.ink) for p in self.panels) + "".join(self.extra)
        return (f"<svg{namespace} width=\"{self.width}\" height=\"{self.height}\" "
                f"viewBox=\"0 0 {self.width} {self.height}\"{named} {FONT} font-size=\"10\" "
                f"fill=\"{self.ink}\"><rect width=\"100%\" height=\"100%\" fill=\"white\"/>"
                f"{body}</svg>")

    def to_bytes(self) -> bytes:
        """The chart as an SVG file."""
        return f"<?xml version=\"1.0\" encoding=\"utf-8\"?>\n{self._svg(NAMESPACE)}\n".encode()
