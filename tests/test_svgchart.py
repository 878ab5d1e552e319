"""The plain SVG charts of the report (release/svgchart.py)."""

import math
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st
from thermoledger.release.svgchart import Chart, label, nice_ticks, span_of


@pytest.mark.parametrize("lo,hi,n,want", [
    (0.0, 10.0, 5, [0, 2, 4, 6, 8, 10]),
    (200.0, 3000.0, 7, [500, 1000, 1500, 2000, 2500, 3000]),
    (-1.2, 1.2, 5, [-1, -0.5, 0, 0.5, 1]),
    (0.0, 0.001, 4, [0, 0.00025, 0.0005, 0.00075, 0.001]),
])
def test_ticks_fall_on_round_numbers(lo, hi, n, want):
    assert nice_ticks(lo, hi, n) == pytest.approx(want)


@given(st.floats(-1e6, 1e6), st.floats(1e-6, 1e6), st.integers(2, 10))
def test_ticks_lie_in_the_span_and_are_evenly_spaced(lo, width, n):
    assume(width > 1e-4 * abs(lo))   # a span not lost in the rounding of its offset
    hi = lo + width
    ticks = nice_ticks(lo, hi, n)
    assert 1 <= len(ticks) <= 2 * n + 2
    assert all(lo - 1e-6 * width <= v <= hi + 1e-6 * width for v in ticks)
    steps = np.diff(ticks)
    assert np.allclose(steps, steps[0], rtol=1e-6) if len(steps) else True
    mantissa = steps[0] / 10 ** math.floor(math.log10(steps[0])) if len(steps) else 1
    assert any(math.isclose(mantissa, m, rel_tol=1e-6) for m in (1, 2, 2.5, 5, 10))


def test_labels_and_spans():
    assert [label(v) for v in (0.0, -0.0, 1500.0, 2.5e-05, 123456789.0)] == \
        ["0", "0", "1500", "2.5e-05", "1.23457e+08"]
    assert span_of([np.nan, np.inf]) == (0.0, 1.0)
    assert span_of([2.0, 2.0]) == (1.0, 3.0)
    assert span_of([0.0, 10.0], pad=0.1) == (-1.0, 11.0)


def test_a_chart_is_deterministic_well_formed_and_breaks_lines_at_nan():
    def draw():
        chart = Chart(300, 200)
        p = chart.panel((40, 20, 240, 150), (0, 10), (0, 1), title="a <b> & c", xlabel="T [K]")
        p.line([0, 1, 2, np.nan, 4, 5], [0.1, 0.2, 0.3, 0.4, 0.5, 0.6], "#000")
        p.dots([1, 2], [0.5, np.nan], "#111")
        p.vspan(8, 20, "#222")           # clipped to the panel
        p.vline(50, "#333")              # outside: not drawn
        return chart.to_bytes()

    svg = draw()
    assert svg == draw()
    root = ET.fromstring(svg)
    ns = "{http://www.w3.org/2000/svg}"
    assert len(root.findall(f".//{ns}polyline")) == 2       # the NaN splits the line
    dots = [x for x in root.iter(f"{ns}path") if x.get("stroke-linecap") == "round"]
    assert len(dots) == 1 and dots[0].get("stroke") == "#111"    # the NaN point is not drawn
    # x = 1 of 0-10 over 240 px from 40, y = 0.5 of 0-1 over 150 px up from 170, written in
    # hundredths of a pixel in a shape scaled by 0.01 (its stroke 4.4 px wide)
    assert dots[0].get("d") == "M6400,9500h0" and dots[0].get("stroke-width") == "440"
    assert dots[0].get("transform") == "scale(.01)"
    lines = root.findall(f".//{ns}polyline")
    assert lines[0].get("points") == "4000,15500 6400,14000 8800,12500"
    assert {x.get("stroke-width") for x in lines} == {"140"}
    assert b"a &lt;b&gt; &amp; c" in svg
    span = [r for r in root.iter(f"{ns}rect") if r.get("fill") == "#222"][0]
    assert float(span.get("x")) + float(span.get("width")) == pytest.approx(280.0)
    assert not [x for x in root.iter(f"{ns}line") if x.get("stroke") == "#333"]


@given(st.lists(st.tuples(st.floats(-1e12, 1e12), st.floats(-1e12, 1e12)), min_size=1,
                max_size=50))
def test_points_are_written_in_hundredths_of_a_pixel_rounded_half_to_even(points):
    from thermoledger.release.svgchart import _hundredths

    def held(v):      # beyond 10⁹ px a point is held there (its line leaves the panel anyway)
        return round(min(max(v, -1e9), 1e9) * 100)

    a, b = (np.array(v) for v in zip(*points))
    assert _hundredths(a, b) == "".join(f"{held(x)},{held(y)}\n" for x, y in points)
    assert _hundredths(np.zeros(0), np.zeros(0)) == ""


def test_a_line_with_its_dots_is_the_line_and_the_dots_drawn_apart():
    x = np.array([1.0, 2.0, np.nan, 4.0, 5.0, 6.0])
    y = np.array([0.2, 0.4, 0.5, np.inf, 0.3, 0.1])

    def drawn(together):
        chart = Chart(300, 200)
        p = chart.panel((40, 20, 240, 150), (0, 10), (0, 1))
        if together:
            p.line(x, y, "#000", width=0.8, dash="5,3", dots=2.2)
        else:
            p.line(x, y, "#000", width=0.8, dash="5,3")
            p.dots(x, y, "#000")
        return chart.to_bytes()

    svg = drawn(True)
    assert svg == drawn(False)
    root = ET.fromstring(svg)
    ns = "{http://www.w3.org/2000/svg}"
    # broken at the NaN and at the infinity: the pieces (1, 2) and (5, 6), dashed 5,3 px
    lines = root.findall(f".//{ns}polyline")
    assert [x.get("points") for x in lines] == ["6400,14000 8800,11000", "16000,12500 18400,15500"]
    assert {x.get("stroke-dasharray") for x in lines} == {"500,300"}
    dots = [x for x in root.iter(f"{ns}path") if x.get("stroke-linecap") == "round"]
    assert dots[0].get("d") == "M6400,14000h0M8800,11000h0M16000,12500h0M18400,15500h0"


@given(st.tuples(st.floats(-1e6, 1e6), st.floats(-1e6, 1e6)),
       st.tuples(st.floats(-1e6, 1e6), st.floats(-1e6, 1e6)),
       st.lists(st.floats(-1e7, 1e7), min_size=1, max_size=20))
def test_one_value_is_placed_as_numpy_places_it(xlim, ylim, values):
    """``Panel.x`` and ``Panel.y`` (Python floats, for the ticks and lines of a frame) give
    the very numbers ``px`` and ``py`` give (numpy), to the last bit."""
    from thermoledger.release.svgchart import Panel

    p = Panel((72, 34, 626, 266), xlim, ylim)
    assert [p.x(v).hex() for v in values] == [float(a).hex() for a in p.px(values)]
    assert [p.y(v).hex() for v in values] == [float(b).hex() for b in p.py(values)]


def test_a_species_without_rows_gets_its_fitted_curve_alone():
    import json
    from pathlib import Path

    from thermoledger.release import plots

    library = Path(__file__).resolve().parent.parent / "curated" / "library.json"
    sp = json.loads(library.read_text())["species"][0]
    empty = np.zeros(0)
    svg = plots.species_figure(sp, empty, empty, empty, empty, 0.01)
    root = ET.fromstring(svg.replace("<svg", "<svg xmlns=\"http://www.w3.org/2000/svg\"", 1))
    ns = "{http://www.w3.org/2000/svg}"
    assert len(root.findall(f".//{ns}polyline")) == 1          # the fit, no deviation line
    assert not [x for x in root.iter(f"{ns}path") if x.get("stroke-linecap") == "round"]
