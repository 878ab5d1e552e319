"""Published coefficient sets: reading, audit, adoption bit for bit and repair
(ingest/coefsets.py, checks/coefsets.py, fit/published.py).

External reference data:
- 7-coefficient sets of N2, O2, CO and CO2 as distributed with the GRI-Mech 3.0
  thermodynamic data file (Smith et al., 1999; the form of McBride, Gordon & Reno, NASA
  TM-4513, 1993) and 9-coefficient sets of McBride, Zehe & Gordon, NASA/TP-2002-211556
  (2002), all from memory (thermoledger/testing/coefsets.py).
- The Shomate set of N2 of the NIST Chemistry WebBook (after Chase, NIST-JANAF 1998), from
  memory (below).
- Ideal-gas Cp from CoolProp's reference equations of state (ideal-gas parts): Span et al.,
  J. Phys. Chem. Ref. Data 29, 1361 (2000) (N2); Schmidt & Wagner, Fluid Phase Equilib. 19,
  175 (1985) (O2); Lemmon & Span, J. Chem. Eng. Data 51, 785 (2006) (CO); Span & Wagner,
  J. Phys. Chem. Ref. Data 25, 1509 (1996) (CO2).
- ΔfH° and S° at 298.15 K: CODATA Key Values (Cox, Wagman & Medvedev, 1989), from memory
  (thermoledger/testing/formation.py).

Tolerances: the recalled sets reproduce the CoolProp Cp within 0.5 % over 300-3000 K (the
compilations differ by up to ~0.3 % from the equations of state); their H(298.15 K) equals
the CODATA ΔfH° within 0.1 kJ/mol (the older anchors they were built on differ by up to
0.05 kJ/mol) and S° within 0.15 J/(mol K) (the old GRI N2 set is 0.1 below). A repair keeps
Cp within 0.3 %, H within 20 J/mol and S within 0.02 J/(mol K) of the published set inside
its range: well inside the set's own fit error against its source data (~0.2-0.5 % in Cp).
"""

import json

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from thermoledger import ingest, load_library
from thermoledger.checks.coefsets import steps
from thermoledger.core.records import PublishedSet
from thermoledger.physics.forms import evaluate_ranges
from thermoledger.testing import coefsets as cs
from thermoledger.testing import table_entry, write_source
from thermoledger.testing.formation import ANCHORS

from .conftest import run_cli, species_page

CP = pytest.importorskip("CoolProp.CoolProp")

FLUIDS = {"N2": "Nitrogen", "O2": "Oxygen", "CO": "CarbonMonoxide", "CO2": "CarbonDioxide"}
#: N2 Shomate set, NIST Chemistry WebBook (from memory): A..H per range
SHOMATE_N2 = ("N2", "linear", (
    (100.0, 500.0, (28.98641, 1.853978, -9.647459, 16.63537, 0.000117, -8.671914, 226.4168, 0.0)),
    (500.0, 2000.0, (19.50583, 19.88705, -8.598535, 1.369784, 0.527601, -4.935202, 212.3900, 0.0)),
    (2000.0, 6000.0, (35.51872, 1.128728, -0.196103, 0.014662, -4.553760, -18.97091, 224.9810,
                      0.0))))
N2_ANCHOR = (0.0, 191.609)   # CODATA Key Values, from memory
CP_TOL, H298_TOL, S298_TOL = 0.005, 100.0, 0.15
REPAIR_CP, REPAIR_H, REPAIR_S = 0.003, 20.0, 0.02


def _cp0(fluid, t):
    return CP.PropsSI("Cp0molar", "T", float(t), "Dmolar", 1e-6, fluid)


def _check(capsys, raw, *more):
    code, out, _ = run_cli(capsys, "check", "--raw", raw, "--json", *more)
    return code, json.loads(out)["findings"]


def _build(capsys, tmp_path, raw, *more):
    out = tmp_path / "out"
    code, text, err = run_cli(capsys, "build", "--raw", raw, "--out", out, "--quiet", *more)
    assert code == 0, err
    doc = json.loads((out / "library.json").read_text())
    return {sp["id"]: sp for sp in doc["species"]}, doc, out


def _codes(findings, species=None, severity=None):
    return {f["code"] for f in findings if (species is None or f["message"].startswith(species))
            and (severity is None or f["severity"] == severity)}


# --- published sets: sound ones pass -------------------------------------------------------

@pytest.mark.parametrize("library,form", [(cs.NASA7, "nasa7"), (cs.NASA9, "nasa9")])
def test_the_recalled_sets_match_the_reference_cp_and_anchors(library, form):
    """The sets from memory are the published ones: Cp against CoolProp, anchors against
    CODATA (otherwise the audit tests below would test a typo of ours)."""
    for name, (_, _, ranges) in library.items():
        t = np.linspace(max(300.0, ranges[0][0]), 3000.0, 28)
        got = evaluate_ranges(ranges, np.append(t, 298.15), form)
        ref = np.array([_cp0(FLUIDS[name], x) for x in t])
        assert np.max(np.abs(got["Cp"][:-1] / ref - 1)) < CP_TOL, name
        h, _, s, _ = ANCHORS.get(name, (0.0, 0.0, N2_ANCHOR[1], 0.0))
        assert abs(got["H"][-1] - 1000 * h) < H298_TOL, name
        assert abs(got["S"][-1] - s) < S298_TOL, name


def test_no_published_set_raises_an_error(tmp_path, capsys):
    raw = tmp_path / "raw"
    cs.write_sets(raw, "gri", cs.library_rows(cs.NASA7, "nasa7"), priority=3)
    cs.write_sets(raw, "tp2002", cs.library_rows(cs.NASA9, "nasa9"), priority=2)
    cs.write_sets(raw, "webbook", cs.set_rows("N2", "N2", "shomate", SHOMATE_N2[2], "linear"),
                  priority=1)
    code, found = _check(capsys, raw)
    assert code == 0
    assert not [f for f in found if f["severity"] == "error"]
    assert not _codes(found) & {"SET-STEP", "SET-GAP", "SET-OVERLAP", "SRC-DISAGREE",
                                "SRC-ANCHOR-DISAGREE"}
    # what the audit does say about sound sets: the GRI N2 set starts at 300 K, and the
    # WebBook Shomate ranges were fitted apart (H steps by 0.77 J/mol at 500 K)
    assert {(f["code"], f["message"][:5]) for f in found if f["code"].startswith("SET-")} == {
        ("SET-NO-298", "N2(g)"), ("SET-STEP-STRICT", "N2(g)")}


def test_a_sound_set_flows_into_the_library_bit_for_bit(tmp_path, capsys):
    raw = tmp_path / "raw"
    rows = cs.library_rows(cs.NASA9, "nasa9", ["CO2"])
    rows[0][6] = rows[0][6].replace("e", "D")        # a Fortran exponent reads the same
    cs.write_sets(raw, "tp2002", rows)
    species, _, out = _build(capsys, tmp_path, raw)
    sp = species["CO2(g)"]
    assert [tuple(r["coefficients"]) for r in sp["ranges"]] == [r[2] for r in cs.NASA9["CO2"][2]]
    assert sp["form"] == "nasa9" and sp["breakpoints"] == [1000.0]
    assert sp["origin"] == {"kind": "published set", "source": "tp2002",
                            "file": "tp2002/sets.csv", "lines": [2, 3], "form": "nasa9",
                            "defects": [], "repair": "not needed"}
    assert sp["quality"]["acceptance"] == {"rule": "published"}
    lineage = json.loads((out / "manifest.json").read_text())["species"][0]
    assert lineage["origin"]["kind"] == "published set"
    code, text, _ = run_cli(capsys, "props", out, "CO2", "298.15", "1500", "--json")
    assert code == 0
    rows = json.loads(text)["rows"]
    want = evaluate_ranges(cs.NASA9["CO2"][2], [298.15, 1500.0], "nasa9")
    assert [r["Cp"] for r in rows] == list(want["Cp"]) and [r["H"] for r in rows] == list(want["H"])
    assert abs(sp["enthalpy_of_formation_298"] - 1000 * ANCHORS["CO2"][0]) < H298_TOL


# --- planted defects are caught ------------------------------------------------------------

PLANTED = [
    # (label, library, species, form, range, coefficient, new value, columns that must step)
    ("digit slip in a2", cs.NASA7, "CO2", "nasa7", 0, 1, 8.89459677e-3, {"Cp", "H", "S"}),
    ("exponent slip in a4", cs.NASA7, "O2", "nasa7", 1, 3, 2.09470555e-11, {"Cp", "H", "S"}),
    ("slip in a6 (H only)", cs.NASA7, "CO", "nasa7", 1, 5, -14115.8724, {"H"}),
    ("slip in a7 (S only)", cs.NASA7, "N2", "nasa7", 0, 6, 3.590372, {"S"}),
    ("sign slip in b1", cs.NASA9, "N2", "nasa9", 1, 7, -1.283210415e4, {"H"}),
]


@pytest.mark.parametrize("label,library,name,form,j,k,value,columns", PLANTED,
                         ids=[p[0].replace(" ", "-") for p in PLANTED])
def test_a_transcription_slip_is_caught(tmp_path, capsys, label, library, name, form, j, k,
                                        value, columns):
    formula, geometry, ranges = library[name]
    rows = cs.set_rows(name, formula, form, cs.planted(ranges, j, k, value), geometry)
    cs.write_sets(tmp_path / "raw", "slipped", rows)
    code, found = _check(capsys, tmp_path / "raw")
    steps_ = [f for f in found if f["code"] == "SET-STEP"]
    assert code == 1
    assert {f["column"] for f in steps_} == columns
    assert all(f["file"] == "slipped/sets.csv" and set(f["lines"]) <= {2, 3, 4} for f in steps_)


def test_swapped_coefficients_and_swapped_digits_are_caught(tmp_path, capsys):
    formula, geometry, ranges = cs.NASA7["CO"]
    rows = cs.set_rows("CO", formula, "nasa7", cs.swapped(ranges, 1, 3, 4), geometry)
    f2, g2, r2 = cs.NASA7["CO2"]
    rows += cs.set_rows("CO2", f2, "nasa7", cs.planted(r2, 1, 0, 3.87546029), g2)  # 3.857.. -> 3.875..
    cs.write_sets(tmp_path / "raw", "swapped", rows)
    code, found = _check(capsys, tmp_path / "raw")
    assert code == 1
    assert {"SET-STEP", "CP-IMPLAUSIBLE"} <= _codes(found, "CO(g)", "error")
    assert "SET-STEP" in _codes(found, "CO2(g)", "error")


def _unconstrained_o2():
    t = np.concatenate([[298.15], np.arange(300.0, 3501.0, 25.0)])
    cp = np.array([_cp0("Oxygen", x) for x in t])
    return cs.unconstrained_nasa7(t, cp, 0.0, ANCHORS["O2"][2], 1000.0)


def test_a_set_fitted_without_continuity_is_caught_and_held_back(tmp_path, capsys):
    rows = cs.set_rows("O2", "O2", "nasa7", _unconstrained_o2(), "linear")
    cs.write_sets(tmp_path / "raw", "apart", rows)
    code, found = _check(capsys, tmp_path / "raw")
    assert code == 1 and "SET-STEP" in _codes(found, "O2(g)", "error")
    assert "SET-STEP-STRICT" in _codes(found, "O2(g)", "warning")


# --- repair --------------------------------------------------------------------------------

def _max_steps(form, ranges):
    """Largest step of Cp, H and S relative to their scales over the breakpoints."""
    ps = PublishedSet(form=form, ranges=tuple((r["t_min"], r["t_max"], tuple(r["coefficients"]))
                                              for r in ranges), lines=tuple(range(len(ranges))))
    return max(abs(v[1] - v[0]) / v[2] for x in steps(ps)
               for k, v in x["quantities"].items() if k != "dCp/dT")


@pytest.mark.parametrize("how", ["source.json", "option", "all"])
def test_a_repaired_set_is_continuous_and_close_to_the_published_one(tmp_path, capsys, how):
    published = _unconstrained_o2()
    rows = cs.set_rows("O2", "O2", "nasa7", published, "linear")
    entry = {"repair": ["O2"]} if how == "source.json" else None
    cs.write_sets(tmp_path / "raw", "apart", rows, entry=entry)
    more = {"source.json": (), "option": ("--repair", "O2(g)"), "all": ("--repair", "all")}[how]
    code, found = _check(capsys, tmp_path / "raw", *more)
    assert code == 0 and "SET-STEP" in _codes(found, "O2(g)", "warning")
    species, doc, out = _build(capsys, tmp_path, tmp_path / "raw", *more)
    sp = species["O2(g)"]
    assert sp["origin"]["repair"] == "repaired" and sp["breakpoints"] == [1000.0]
    assert "SET-STEP" in sp["origin"]["defects"]
    assert _max_steps("nasa7", sp["origin"]["published_ranges"]) > 1e-3
    assert _max_steps("nasa7", sp["ranges"]) < 1e-9          # continuous to rounding
    ranges = [(r["t_min"], r["t_max"], r["coefficients"]) for r in sp["ranges"]]
    t = np.linspace(298.15, 3500.0, 700)
    a, b = evaluate_ranges(published, t, "nasa7"), evaluate_ranges(ranges, t, "nasa7")
    assert np.max(np.abs(b["Cp"] / a["Cp"] - 1)) < REPAIR_CP
    assert np.max(np.abs(b["H"] - a["H"])) < REPAIR_H
    assert np.max(np.abs(b["S"] - a["S"])) < REPAIR_S
    change = sp["origin"]["largest_change"]
    assert abs(change["Cp"]["relative"]) == pytest.approx(np.max(np.abs(b["Cp"] / a["Cp"] - 1)),
                                                          rel=0.05)
    assert sp["enthalpy_of_formation_298"] == pytest.approx(a["H"][0], abs=1e-6)
    assert any(f["code"] == "SET-REPAIRED" for f in sp["findings"])
    assert load_library(out)["O2"].origin["largest_change"] == change
    lineage = json.loads((out / "manifest.json").read_text())["species"][0]
    assert lineage["origin"]["largest_change"] == change
    page = species_page(out, "O2(g)")
    assert "Published coefficient set" in page and "step, repaired" in page
    assert repr(published[0][2][0]) in page and repr(sp["ranges"][0]["coefficients"][0]) in page


def test_a_shomate_set_of_three_ranges_is_repaired_in_its_own_form(tmp_path, capsys):
    cs.write_sets(tmp_path / "raw", "webbook", cs.set_rows("N2", "N2", "shomate", SHOMATE_N2[2],
                                                           "linear"))
    species, _, _ = _build(capsys, tmp_path, tmp_path / "raw", "--repair", "webbook")
    sp = species["N2(g)"]
    assert sp["form"] == "shomate" and sp["breakpoints"] == [500.0, 2000.0]
    assert sp["origin"]["defects"] == ["SET-STEP-STRICT"] and sp["origin"]["repair"] == "repaired"
    assert _max_steps("shomate", sp["ranges"]) < 1e-9
    change = sp["origin"]["largest_change"]
    assert abs(change["Cp"]["relative"]) < REPAIR_CP and abs(change["H"]["change"]) < REPAIR_H
    assert abs(change["S"]["change"]) < REPAIR_S


def test_a_repair_can_choose_new_breakpoints(tmp_path, capsys):
    rows = cs.set_rows("O2", "O2", "nasa7", _unconstrained_o2(), "linear")
    cs.write_sets(tmp_path / "raw", "apart", rows, entry={"repair": True,
                                                          "keep_breakpoints": False})
    species, _, _ = _build(capsys, tmp_path, tmp_path / "raw")
    sp = species["O2(g)"]
    assert sp["origin"]["repair"] == "repaired" and sp["origin"]["keep_breakpoints"] is False
    assert sp["breakpoint_choice"] is not None


def test_a_sound_set_asked_to_be_repaired_is_kept_as_published(tmp_path, capsys):
    cs.write_sets(tmp_path / "raw", "gri", cs.library_rows(cs.NASA7, "nasa7", ["CO"]),
                  entry={"repair": True})
    species, _, _ = _build(capsys, tmp_path, tmp_path / "raw")
    assert species["CO(g)"]["origin"]["repair"] == "not needed"
    assert [tuple(r["coefficients"]) for r in species["CO(g)"]["ranges"]] == \
        [r[2] for r in cs.NASA7["CO"][2]]


# --- ranges --------------------------------------------------------------------------------

def test_overlapping_and_gapped_ranges_and_a_set_far_from_298_are_errors(tmp_path, capsys):
    _, _, r = cs.NASA7["CO"]
    overlap = ((r[0][0], r[0][1]), (900.0, r[1][1]))
    gap = ((r[0][0], r[0][1]), (1100.0, r[1][1]))
    rows = cs.set_rows("COa", "CO", "nasa7", [(*ab, x[2]) for ab, x in zip(overlap, r)])
    rows += cs.set_rows("COb", "CO", "nasa7", [(*ab, x[2]) for ab, x in zip(gap, r)])
    rows += cs.set_rows("COc", "CO", "nasa7", [(1000.0, 3500.0, r[1][2])])
    cs.write_sets(tmp_path / "raw", "ranges", rows)
    code, found = _check(capsys, tmp_path / "raw")
    assert code == 1
    assert "SET-OVERLAP" in _codes(found, "COa(g)", "error")
    assert "SET-GAP" in _codes(found, "COb(g)", "error")
    assert "ANCHOR-OUT-OF-REACH" in _codes(found, "COc(g)", "error")


# --- against other sources of the species ---------------------------------------------------

def test_a_set_is_compared_with_the_tables_and_anchors_of_other_sources(tmp_path, capsys):
    raw = tmp_path / "raw"
    t = np.append(np.arange(300.0, 3001.0, 100.0), 298.15)
    t.sort()
    rows = [[f"{x:g}", f"{_cp0('CarbonDioxide', x):.4f}"] for x in t]
    write_source(raw, "eos", [{**table_entry("co2.csv", "CO2", "CO2", "linear",
                                             h="-393.51 kJ/mol", s="213.785 J/(mol*K)"),
                               "header": ["T [K]", "Cp [J/(mol*K)]"], "rows": rows}],
                 priority=20)
    f, g, r = cs.NASA7["CO2"]
    shifted = cs.planted(cs.planted(r, 0, 5, r[0][2][5] + 300.0), 1, 5, r[1][2][5] + 300.0)
    cs.write_sets(raw, "offset", cs.set_rows("CO2", f, "nasa7", shifted, g))
    code, found = _check(capsys, raw)
    assert "SRC-ANCHOR-DISAGREE" in {x["code"] for x in found if x["source"] == "offset"}
    scaled = tuple((a, b, tuple(c * 1.03 for c in cc)) for a, b, cc in r)  # Cp, H, S by 3 %
    cs.write_sets(raw, "offset", cs.set_rows("CO2", f, "nasa7", scaled, g))
    code, found = _check(capsys, raw)
    assert "SRC-DISAGREE" in {x["code"] for x in found if x["source"] == "offset"}


def test_a_preferred_set_is_never_filled_from_a_table_beyond_its_range(tmp_path, capsys):
    raw = tmp_path / "raw"
    t = np.arange(300.0, 5001.0, 100.0)
    rows = [[f"{x:g}", f"{_cp0('Oxygen', x):.4f}"] for x in t]
    write_source(raw, "eos", [{**table_entry("o2.csv", "O2", "O2", "linear",
                                             s="205.152 J/(mol*K)"),
                               "header": ["T [K]", "Cp [J/(mol*K)]"], "rows": rows}],
                 priority=1)
    cs.write_sets(raw, "gri", cs.library_rows(cs.NASA7, "nasa7", ["O2"]), priority=9)
    species, _, _ = _build(capsys, tmp_path, raw)
    sp = species["O2(g)"]
    assert [tuple(r["coefficients"]) for r in sp["ranges"]] == [r[2] for r in cs.NASA7["O2"][2]]
    assert [(s["source"], s["used"]) for s in sp["sources"]] == [("gri", True), ("eos", False)]
    assert any(f["code"] == "SEL-SUPERSEDED" and "published coefficient set" in f["message"]
               for f in sp["findings"])


def test_a_set_tabulated_at_one_atmosphere_moves_to_one_bar(tmp_path, capsys):
    rows = cs.library_rows(cs.NASA7, "nasa7", ["O2"])
    cs.write_sets(tmp_path / "raw", "atm", rows, standard_pressure="1 atm")
    species, _, _ = _build(capsys, tmp_path, tmp_path / "raw")
    sp = species["O2(g)"]
    published = cs.NASA7["O2"][2]
    assert sp["ranges"][0]["coefficients"][:6] == list(published[0][2][:6])
    # S(1 bar) = S(1 atm) + R ln(1.01325): a7 rises by ln(1.01325) (IUPAC standard state)
    assert sp["ranges"][0]["coefficients"][6] == pytest.approx(published[0][2][6]
                                                               + np.log(1.01325), abs=1e-12)
    assert any("1 bar" in note for note in sp["conversions"])


# --- bad input -----------------------------------------------------------------------------

def _text_with(cells_of_row2):
    rows = cs.library_rows(cs.NASA7, "nasa7", ["CO", "O2"])
    rows[1] = cells_of_row2(list(rows[1]))
    return "\n".join(",".join(r) for r in [cs.HEADER] + rows) + "\n"


BAD_CELLS = [
    ("a coefficient that is no number", lambda r: r[:8] + ["abc"] + r[9:], "c3"),
    ("a missing coefficient", lambda r: r[:12] + [""] + r[13:], "c7"),
    ("a coefficient too many", lambda r: r[:13] + ["1.0"] + r[14:], "c8"),
    ("an unknown form", lambda r: r[:3] + ["nasa8"] + r[4:], "form"),
    ("a range that ends below its start", lambda r: r[:5] + ["150"] + r[6:], "T_max"),
    ("a bad formula", lambda r: r[:1] + ["Qx2"] + r[2:], "formula"),
    ("an infinite coefficient", lambda r: r[:6] + ["inf"] + r[7:], "c1"),
    ("a formula that differs from the set's first row", lambda r: r[:1] + ["CO2"] + r[2:],
     "formula"),
]


@pytest.mark.parametrize("label,edit,column", BAD_CELLS, ids=[b[0].replace(" ", "-") for b in BAD_CELLS])
def test_a_bad_cell_names_file_line_and_column_and_holds_back_only_its_set(tmp_path, capsys,
                                                                          label, edit, column):
    cs.write_sets(tmp_path / "raw", "bad", [], files={"sets.csv": _text_with(edit)})
    code, found = _check(capsys, tmp_path / "raw")
    bad = [f for f in found if f["severity"] == "error"]
    assert code == 1
    assert any(f["file"] == "bad/sets.csv" and f["line"] == 3 and f["column"] == column
               for f in bad), bad
    got = ingest.ingest(tmp_path / "raw")
    assert [t.meta.species_id for t in got.tables] == ["O2(g)"]


def test_a_set_not_read_is_named_in_the_build_summary(tmp_path, capsys):
    cs.write_sets(tmp_path / "raw", "bad", [], files={"sets.csv": _text_with(
        lambda r: r[:8] + ["abc"] + r[9:])})
    code, text, _ = run_cli(capsys, "build", "--raw", tmp_path / "raw", "--out",
                            tmp_path / "out", "--quiet")
    assert code == 0
    assert "set not read: CO(g) bad/sets.csv:3 [c3]: SET-CELL" in text
    assert "published   O2(g)" in text


def test_a_set_of_five_ranges_is_refused(tmp_path, capsys):
    _, _, r = cs.NASA7["CO"]
    edges = [200.0, 400.0, 700.0, 1000.0, 2000.0, 3500.0]
    ranges = [(a, b, r[0][2] if b <= 1000.0 else r[1][2]) for a, b in zip(edges, edges[1:])]
    cs.write_sets(tmp_path / "raw", "many", cs.set_rows("CO", "CO", "nasa7", ranges))
    code, found = _check(capsys, tmp_path / "raw")
    assert code == 1
    assert [(f["code"], f["line"]) for f in found if f["severity"] == "error"] == [("SET-CELL", 6)]


def test_a_missing_column_is_a_layout_error(tmp_path, capsys):
    text = _text_with(lambda r: r).replace("T_max [K]", "T_top [K]")
    cs.write_sets(tmp_path / "raw", "bad", [], files={"sets.csv": text})
    code, found = _check(capsys, tmp_path / "raw")
    assert code == 1
    assert [(f["code"], f["line"]) for f in found if f["severity"] == "error"] == \
        [("SET-LAYOUT", 1)]


_CELL = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",),
                              exclude_characters=",\n\r\""), max_size=12)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cells=st.lists(st.tuples(st.integers(0, 15), _CELL), min_size=1, max_size=6))
def test_fuzzed_cells_never_raise_and_every_finding_is_located(tmp_path_factory, cells):
    def edit(row):
        for k, text in cells:
            row[k] = text
        return row
    raw = tmp_path_factory.mktemp("fuzz") / "raw"
    cs.write_sets(raw, "fuzz", [], files={"sets.csv": _text_with(edit)})
    got = ingest.ingest(raw)
    assert all(f.file for f in got.findings)
    assert all(f.line is not None for f in got.findings if f.code.startswith("SET-"))
    assert "O2(g)" in [t.meta.species_id for t in got.tables]


def test_check_audits_a_folder_of_sets_alone(tmp_path, capsys):
    cs.write_sets(tmp_path / "raw", "gri", cs.library_rows(cs.NASA7, "nasa7", ["CO2"]))
    code, text, _ = run_cli(capsys, "check", "--raw", tmp_path / "raw")
    assert code == 0 and "0 error(s)" in text
    formula, geometry, ranges = cs.NASA7["CO2"]
    cs.write_sets(tmp_path / "raw", "gri", cs.set_rows("CO2", formula, "nasa7",
                                                      cs.planted(ranges, 1, 1, 4.41437026e-2),
                                                      geometry))
    code, text, _ = run_cli(capsys, "check", "--raw", tmp_path / "raw")
    assert code == 1 and "SET-STEP" in text and "gri/sets.csv" in text
