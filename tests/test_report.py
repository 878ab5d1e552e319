"""Evaluated tables, the HTML report, progress and JSON output."""

import hashlib
import json
import re
import shutil
import subprocess
from html.parser import HTMLParser

import numpy as np
import pyarrow.parquet as pq
import pytest
from thermoledger.core import names
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.release import tables

from .conftest import run_cli as run
from .conftest import species_page

N2 = names.file_stem("N2(g)")  # the file stem of N2(g): its page's section id and its table


@pytest.fixture
def release(demo_release):
    return demo_release


def by_hand(sp, t):
    """Cp, H, S written out from the published equations (NASA TM-4513 Eqs. 1-3; NASA/TP-2002-
    211556 Eqs. 2-4), independently of thermoledger.physics.forms."""
    r = next(x for x in sp["ranges"] if x["t_min"] <= t <= x["t_max"])
    a = r["coefficients"]
    if sp["form"] == "nasa7":
        cp = a[0] + a[1] * t + a[2] * t**2 + a[3] * t**3 + a[4] * t**4
        h = (a[0] + a[1] * t / 2 + a[2] * t**2 / 3 + a[3] * t**3 / 4 + a[4] * t**4 / 5
             + a[5] / t) * t
        s = (a[0] * np.log(t) + a[1] * t + a[2] * t**2 / 2 + a[3] * t**3 / 3 + a[4] * t**4 / 4
             + a[6])
    else:  # nasa9
        cp = a[0] / t**2 + a[1] / t + a[2] + a[3] * t + a[4] * t**2 + a[5] * t**3 + a[6] * t**4
        h = (-a[0] / t**2 + a[1] * np.log(t) / t + a[2] + a[3] * t / 2 + a[4] * t**2 / 3
             + a[5] * t**3 / 4 + a[6] * t**4 / 5 + a[7] / t) * t
        s = (-a[0] / t**2 / 2 - a[1] / t + a[2] * np.log(t) + a[3] * t + a[4] * t**2 / 2
             + a[5] * t**3 / 3 + a[6] * t**4 / 4 + a[8])
    return R * cp, R * h, R * s


def test_tables_equal_independent_evaluation_of_the_coefficients(release):
    lib = json.loads((release / "library.json").read_text())
    rows = pq.read_table(release / "tables.parquet").to_pylist()
    assert rows
    for sp in lib["species"]:
        mine = [r for r in rows if r["id"] == sp["id"]]
        assert mine[0]["T"] == sp["ranges"][0]["t_min"] and mine[-1]["T"] == sp["ranges"][-1]["t_max"]
        anchor = sp.get("anchor", {"basis": "own"})
        if anchor["basis"] == "own":
            assert any(r["T"] == 298.15 for r in mine)
            h298 = by_hand(sp, 298.15)[1]
        else:   # H - H298 counts from H(298.15 K) of the phase stable there
            h298 = anchor["enthalpy_zero"]
            assert any(r["T"] == anchor["temperature"] for r in mine)
        for r in mine:
            cp, h, s = by_hand(sp, r["T"])
            assert r["Cp"] == pytest.approx(cp, rel=1e-10)
            assert r["H"] == pytest.approx(h, rel=1e-10, abs=1e-6)
            assert r["H_minus_H298"] == pytest.approx(h - h298, rel=1e-9, abs=1e-6)
            assert r["S"] == pytest.approx(s, rel=1e-10)
            assert r["gef"] == pytest.approx(-((h - r["T"] * s) - h298) / r["T"], rel=1e-9)
            data = sp["data_range"]
            assert r["extrapolated"] == (r["T"] < data["t_min"] or r["T"] > data["t_max"])
            assert r["u_Cp"] >= 0
    n2 = [r for r in rows if r["id"] == "N2(g)"]
    assert [r["T"] for r in n2 if r["extrapolated"]][0] > 3000.0   # 3000-6000 K flagged


def test_csv_tables_and_neutralised_text_cells(release):
    lib = json.loads((release / "library.json").read_text())
    files = tables.csv_files(lib)
    text = files[f"tables/{N2}.csv"].decode()
    assert text.splitlines()[1].startswith("species,phase,T [K],Cp [J/(mol*K)]")
    sp = {"id": "=HYPERLINK(\"http://x\")", "form": "nasa7", "extrapolated": [],
          "data_range": {"t_min": 300.0, "t_max": 1000.0}, "breakpoints": [],
          "ranges": [{"t_min": 300.0, "t_max": 1000.0,
                      "coefficients": [3.5, 0, 0, 0, 0, -1000.0, 4.0]}], "uncertainty": {}}
    out = tables.csv_bytes(sp).decode()
    cells = [ln.split(",")[0] for ln in out.splitlines()[2:]]
    assert all(c.startswith("\"'=HYPERLINK") or c.startswith("'=HYPERLINK") for c in cells)
    for bad in ("=1+1", "+1", "-1", "@SUM(A1)", "\tx"):
        assert tables.neutralise(bad) == "'" + bad
    assert tables.neutralise("N2(g)") == "N2(g)"


class Strict(HTMLParser):
    VOID = {"meta", "img", "br", "hr", "link", "input"}

    def __init__(self):
        super().__init__()
        self.stack, self.refs, self.errors = [], [], []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "img":
            self.refs.append(a["src"])
        if tag == "a" and a.get("href"):
            self.refs.append(a["href"])
        if tag == "script" and a.get("src") or tag == "link" and a.get("href"):
            self.errors.append(f"external resource {a}")
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag(tag, attrs)
        if tag not in self.VOID:
            self.stack.pop()

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
        else:
            self.stack.pop()


def test_html_is_well_formed_and_every_reference_exists(release):
    pages = sorted((release / "report").rglob("*.html"))
    n = len(json.loads((release / "library.json").read_text())["species"])
    assert (release / "report" / "index.html") in pages and len(pages) >= 3   # index, 2 files
    assert sum(p.read_text().count("<section class=\"sp\"") for p in pages) == n
    for page in pages:
        text = page.read_text()
        p = Strict()
        p.feed(text)
        assert not p.errors and not p.stack, (page, p.errors, p.stack)
        assert "qualified person" in text
        assert "http://" not in text and "https://" not in text
        for ref in p.refs:
            target, _, section = ref.partition("#")
            target = page if not target else (page.parent / target).resolve()
            assert target.is_file(), (page, ref)
            if section:                        # a species' page: a section of that file
                assert f"id=\"{section}\"" in target.read_text(), (page, ref)


def test_species_page_shows_its_sections(release):
    text = species_page(release, "N2(g)")
    for section in ("At a glance", "Outside the data", "Curves", "Against the H and S columns",
                    "Findings", "Where the numbers came from", "Coefficients"):
        assert f"<h2>{section}" in text
    # the page holds its two figures (ids of their own: one page, two svg elements)
    assert text.count("<svg ") == 2 and "clip-path=\"url(#cp-c72-34)\"" in text
    assert "clip-path=\"url(#hs-c72-34)\"" in text and "<img" not in text
    assert "aria-label=\"Cp and deviation of N2(g)\"" in text


def test_progress_is_plain_lines_off_a_terminal_and_silent_when_quiet(demo_raw, tmp_path,
                                                                      capsys):
    _, _, err = run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "a")
    assert "fit (17 species)" in err and "\r" not in err
    # the write step, most of a build, shows its parts too
    for step in ("write tables", "write report (17 species)", "write provenance", "publish"):
        assert step in err
    _, _, err = run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "b", "--quiet")
    assert err == ""


def test_json_summaries(demo_raw, tmp_path, capsys):
    code, out, _ = run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "a", "--json")
    doc = json.loads(out)
    assert code == 0 and "N2(g)" in doc["species"] and doc["errors"] == 2
    code, out, _ = run(capsys, "check", "--raw", demo_raw, "--json")
    assert code == 1 and json.loads(out)["counts"]["error"] == 2
    code, out, _ = run(capsys, "props", tmp_path / "a", "N2", "300", "5000", "--json")
    rows = json.loads(out)["rows"]
    assert rows[1]["extrapolated"] and not rows[0]["extrapolated"] and rows[0]["u_Cp"] > 0


CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed on this machine")
def test_report_renders_in_a_real_headless_browser(release, tmp_path):
    profile = tmp_path / "profile"

    def chromium(*args):
        return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args],
                              capture_output=True, text=True, timeout=120)

    index = (release / "report" / "index.html").as_uri()
    index_text = (release / "report" / "index.html").read_text()
    dom = chromium("--dump-dom", "--virtual-time-budget=2000", index).stdout
    assert "<table class=\"paged\" id=\"summary\">" in dom
    n = len(json.loads((release / "library.json").read_text())["species"])
    assert dom.count("<tr><td><a href=\"species/") == n
    shot = tmp_path / "index.png"           # kept out of the repository
    chromium("--window-size=1200,1400", f"--screenshot={shot}", index)
    assert shot.is_file() and shot.stat().st_size > 20000
    link = re.search(rf"<a href=\"(species/[^\"#]+)#{N2}\">", index_text).group(1)
    page = (release / "report" / link).as_uri()
    dom = chromium("--dump-dom", f"{page}#{N2}").stdout
    assert f"<section class=\"sp\" id=\"{N2}\">" in dom and \
        "aria-label=\"H and S deviation of N2(g)\"" in dom
    assert "<title>N2(g)</title>" in dom            # the tab is named for the species shown
    shots = {}
    for name, address in (("list", page), ("N2", f"{page}#{N2}")):
        shots[name] = tmp_path / f"species-{name}.png"
        chromium("--window-size=1200,1800", f"--screenshot={shots[name]}", address)
    # the page file alone shows the list of its species; with N2's id in the address, N2's
    # page with its plots (a far larger picture)
    assert shots["N2"].stat().st_size > 50000 > shots["list"].stat().st_size


def test_progress_bar_on_a_terminal_shows_stage_and_eta():
    import io

    from thermoledger.cli.progress import Progress

    class Terminal(io.StringIO):
        def isatty(self):
            return True

    term = Terminal()
    bar = Progress(stream=term, mininterval=0)
    for i in range(1, 6):
        bar("fit", i, 5, f"S{i}(g)")
    text = term.getvalue()
    bar.close()
    assert "fit" in text and "5/5" in text and "<" in text   # tqdm's elapsed<remaining


def _many_species(release, n):
    """A library document of ``n`` species made by renaming the demo's first entry."""
    doc = json.loads((release / "library.json").read_text())
    first = doc["species"][0]
    doc["species"] = [dict(first, id=f"X{k:04d}(g)") for k in range(n)]
    return doc


def test_index_pages_a_long_table_and_keeps_every_row_as_data(release):
    from thermoledger.release import report

    html = report.index_page(_many_species(release, 250)).decode()
    head, _, data = html.partition("id=\"summary-rows\">")
    assert head.count("<tr><td><a href=\"species/") == report.PAGE_ROWS   # first page only
    rows = json.loads(data.partition("</script>")[0])
    assert [r["k"][0] for r in rows] == [f"X{k:04d}(g)" for k in range(250)]
    assert "first 100 of 250 rows" in head


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed on this machine")
def test_index_filters_and_pages_in_a_real_headless_browser(release, tmp_path):
    from thermoledger.release import report

    index = tmp_path / "index.html"
    index.write_bytes(report.index_page(_many_species(release, 250)))

    def dom(fragment):
        out = subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={tmp_path / 'profile'}",
                              "--dump-dom", "--virtual-time-budget=2000",
                              index.as_uri() + fragment], capture_output=True, text=True,
                             timeout=120).stdout
        return re.findall(r"<tr><td><a href=\"species/[^\"]+\">([^<]+)</a>", out), out

    shown, _ = dom("")
    assert shown == [f"X{k:04d}(g)" for k in range(100)]
    shown, text = dom("#page=3")
    assert shown == [f"X{k:04d}(g)" for k in range(200, 250)] and "rows 201-250 of 250" in text
    shown, text = dom("#q=x012")
    assert shown == [f"X{k:04d}(g)" for k in range(120, 130)]
    assert "rows 1-10 of 10 (filtered from 250)" in text


def test_plots_are_plain_svg_with_the_data_drawn(release):
    import re
    import xml.etree.ElementTree as ET

    for svg in (release / "report" / "img").glob("*.svg"):
        root = ET.fromstring(svg.read_bytes())        # well-formed XML
        assert root.tag == "{http://www.w3.org/2000/svg}svg"
    lib = json.loads((release / "library.json").read_text())
    n2 = next(s for s in lib["species"] if s["id"] == "N2(g)")
    page = species_page(release, "N2(g)")
    figures = re.findall(r"<svg .*?</svg>", page)
    for figure in figures:                            # each a well-formed svg element
        assert ET.fromstring(figure).tag == "svg"
    text = figures[0]
    assert "N2(g): heat capacity" in text and "<polyline" in text
    assert text.count("<rect") >= 3          # background, frames, and the extrapolated span
    assert len(n2["breakpoints"]) == 2 and text.count("stroke-dasharray=\"2,2\"") == 4
    points = next(x for x in ET.fromstring(text).iter("path")
                  if x.get("stroke-linecap") == "round")       # the rows used, one dot each
    assert points.get("d").count("h0") == n2["quality"]["points"]


def test_workers_write_the_pages_into_the_staged_release_themselves(tmp_path, monkeypatch):
    """Into a staged release, the workers that draw the species pages write them there
    (publish.Staging) and this process only takes in their sha256 and size: the same files
    and sums as drawn in one process; a page is never written twice."""
    import copy

    from thermoledger.core.errors import OutputError
    from thermoledger.release import publish, report

    from .conftest import PROJECT

    doc = json.loads((PROJECT / "curated" / "library.json").read_text())
    doc["species"] = [dict(copy.deepcopy(s), id=f"{s['id']}#{k}") for k in range(4)
                      for s in doc["species"]]
    one = report.report_files(doc, {}, 0.01, workers=1)
    (tmp_path / "home").mkdir()
    release = publish.Release.staged(tmp_path / "home")
    added = []
    real_add = release.add
    monkeypatch.setattr(release, "add", lambda rel, data: added.append(rel) or real_add(rel, data))
    assert report.report_files(doc, {}, 0.01, workers=2, release=release) == {}
    assert sorted(release) == sorted(one)
    assert all(release.get(rel) == data for rel, data in one.items())
    assert all(release.summary(rel) == (hashlib.sha256(data).hexdigest(), len(data))
               for rel, data in one.items())
    assert not [rel for rel in added if rel.startswith("report/species/")]   # all adopted
    assert "report/index.html" in added
    page = next(rel for rel in one if rel.startswith("report/species/"))
    with pytest.raises(FileExistsError):
        release.staging().write(page, b"again")
    with pytest.raises(OutputError, match="written twice"):
        release.adopt(page, b"0" * 40)
    release.discard()


def test_a_report_drawn_by_worker_processes_is_the_one_drawn_in_one(monkeypatch):
    """A large report is drawn in chunks by worker processes: the files do not depend on
    how many (the demo's species four times over, under other ids, to pass the size at
    which workers are used)."""
    import copy
    from collections import Counter

    from thermoledger.release import pages, report

    from .conftest import PROJECT

    doc = json.loads((PROJECT / "curated" / "library.json").read_text())
    doc["species"] = [dict(copy.deepcopy(s), id=f"{s['id']}#{k}") for k in range(4)
                      for s in doc["species"]]
    assert len(doc["species"]) > 60
    one = report.report_files(doc, {}, 0.01, workers=1)
    trims = []
    monkeypatch.setattr(report, "give_back_memory", lambda: trims.append(1))
    monkeypatch.setattr(report, "TRIM_EVERY", 20)
    assert report.report_files(doc, {}, 0.01, workers=2) == one
    files = pages.page_files(len(doc["species"]))
    held = Counter(pages.page_of(sp["id"], files)[0] for sp in doc["species"])
    assert sorted(p for p in one if p.startswith("report/species/")) == sorted(held)
    # the build's own process gives its freed heap back before the workers fork and after
    # every TRIM_EVERY species drawn (each page file's species counted when it returns)
    ends = list(np.cumsum([held[name] for name in sorted(held)]))
    crossed = [end // 20 > start // 20 for start, end in zip([0] + ends, ends)]
    assert len(trims) == 1 + sum(crossed) and sum(crossed) >= 2


def test_a_report_drawn_from_spilled_points_by_workers_is_the_one_drawn_here(tmp_path):
    """The report's workers are sent each page file's entries as held and its plot points
    as pickled in the build's scratch file, and decode them there: the demo's species four
    times over (under other ids, to pass the size at which workers are used), with their
    real plot points, give the same files as drawn in this process from the points
    themselves."""
    import copy

    from thermoledger import build
    from thermoledger.core.settings import Settings
    from thermoledger.core.spill import Spill, SpilledObjects
    from thermoledger.library.entries import Entries
    from thermoledger.release import report
    from thermoledger.release.assemble import plot_points

    from .conftest import PROJECT

    raw = PROJECT / "raw"
    doc = build.build(raw, None, write=False).document
    drawn = plot_points(doc["species"], build.examine(raw, Settings()))
    species, points = [], {}
    for k in range(4):
        for s in doc["species"]:
            species.append(dict(copy.deepcopy(s), id=f"{s['id']}#{k}"))
            points[species[-1]["id"]] = drawn[s["id"]]
    here = report.report_files({**doc, "species": species}, points, 0.01, workers=1)
    spill = Spill(tmp_path)
    spilled = SpilledObjects(spill, {sid: spill.put_object(p) for sid, p in points.items()})
    assert report.report_files({**doc, "species": Entries.of(species)}, spilled, 0.01,
                               workers=2) == here
    assert any(b"<path" in data for rel, data in here.items() if rel.startswith("report/species"))


def test_a_report_drawn_while_the_release_is_written_is_the_one_drawn_after(tmp_path,
                                                                          monkeypatch):
    """A release the build's own process writes alone has its report drawn meanwhile: page
    files go to the workers between the pieces of the other files (Release.between). The
    release is byte for byte the one whose report is drawn in this process afterwards."""
    from thermoledger import build
    from thermoledger.core.settings import Settings
    from thermoledger.release import report
    from thermoledger.testing.catalogue import write_catalogue

    raw = tmp_path / "raw"
    write_catalogue(raw, report.POOL_FROM + 9, points=30)
    sent = []
    real_finish = report.Drawing.finish

    def finish(self):
        sent.append(len(self.out) + len(self.tallies))   # files sent before finishing
        return real_finish(self)

    monkeypatch.setattr(report.Drawing, "finish", finish)
    build.build(raw, tmp_path / "early", Settings())
    assert sent and sent[0] > 0
    monkeypatch.setattr(report, "default_workers", lambda: 1)
    build.build(raw, tmp_path / "after", Settings())
    early, after = (sorted(p.relative_to(tmp_path / k / "current")
                           for p in (tmp_path / k / "current").rglob("*") if p.is_file())
                    for k in ("early", "after"))
    assert early == after and any(str(p).startswith("report/species/") for p in early)
    assert all((tmp_path / "early" / "current" / p).read_bytes()
               == (tmp_path / "after" / "current" / p).read_bytes() for p in early)
