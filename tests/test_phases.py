"""Condensed phases and transitions, end to end: published melting points, enthalpies of
fusion and the aluminium functions (all from memory, named in thermoledger.testing.condensed)
against the stored coefficients, evaluated here by an evaluator of our own."""

import json
import re

import numpy as np
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from thermoledger import build
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.core.names import file_stem
from thermoledger.core.settings import OutputSettings, Settings
from thermoledger.testing import condensed as C

from .conftest import run_cli, species_page

QUICK = Settings(outputs=OutputSettings(report=False))


def by_hand(sp, t):
    """Cp, H, S of a nasa7 library entry at T [K], written out from NASA TM-4513 Eqs. 1-3."""
    r = next(r for r in sp["ranges"] if r["t_min"] - 1e-9 <= t <= r["t_max"] + 1e-9)
    a = r["coefficients"]
    cp = R * (a[0] + a[1] * t + a[2] * t ** 2 + a[3] * t ** 3 + a[4] * t ** 4)
    h = R * t * (a[0] + a[1] * t / 2 + a[2] * t ** 2 / 3 + a[3] * t ** 3 / 4
                 + a[4] * t ** 4 / 5 + a[5] / t)
    s = R * (a[0] * np.log(t) + a[1] * t + a[2] * t ** 2 / 2 + a[3] * t ** 3 / 3
             + a[4] * t ** 4 / 4 + a[6])
    return cp, h, s


class Built:
    """A release built by the ``thermoledger build`` command: its library and findings."""

    def __init__(self, out):
        self.document = json.loads((out / "library.json").read_text())
        self.findings = json.loads((out / "findings.json").read_text())["findings"]


@pytest.fixture(scope="module")
def aluminium(tmp_path_factory):
    from thermoledger.cli import main as cli

    root = tmp_path_factory.mktemp("al") / "raw"
    C.write_aluminium(root)
    out = root.parent / "out"
    assert cli.main(["build", "--raw", str(root), "--out", str(out), "--quiet"]) == 0
    return root, out, Built(out)


def test_crystal_liquid_gas_is_one_coherent_entry_set_without_invented_anchors(aluminium,
                                                                               capsys):
    root, out, result = aluminium
    code, text, _ = run_cli(capsys, "check", "--raw", root)
    assert code == 0 and "0 error(s)" in text
    lib = {s["id"]: s for s in result.document["species"]}
    assert set(lib) == {"Al(cr)", "Al(l)", "Al(g)"} and not result.document["quarantined"]
    liquid = lib["Al(l)"]
    # nothing was invented for the liquid: no ΔfH°, no S° at 298.15 K
    assert liquid["enthalpy_of_formation_298"] is None and liquid["entropy_298"] is None
    assert liquid["anchor"]["basis"] == "transition" and liquid["anchor"]["via"] == "Al(cr)"
    assert liquid["ranges"][0]["t_min"] == pytest.approx(933.47)
    assert lib["Al(g)"]["anchor"]["basis"] == "own"     # the vapour keeps its CODATA anchors
    assert [(x["from"], x["to"]) for x in result.document["transitions"]] == [
        ("Al(cr)", "Al(l)"), ("Al(l)", "Al(g)")]
    codes = {f["code"] for f in result.findings}
    assert not codes & {"TRS-GIBBS-MISMATCH", "TRS-ORDER", "ANCHOR-MISSING", "FIT-FAILED"}
    page = species_page(out / "current", "Al(l)")
    assert "Phases of Al" in page and "Al(cr) → Al(l)" in page and "10.71 ± 0.2" in page
    svg = next((out / "current" / "report" / "img").glob("Al-*-phases.svg")).read_text()
    assert svg.count("stroke-dasharray") >= 2 and "H - H298" in svg     # transitions marked


def test_h_and_s_jump_by_the_transition_and_g_is_continuous(aluminium):
    lib = {s["id"]: s for s in aluminium[2].document["species"]}
    t = C.MELTING["Al"][1]                      # 933.47 K, ΔH_fus 10.71 kJ/mol (CRC, from memory)
    _, h_cr, s_cr = by_hand(lib["Al(cr)"], t)
    _, h_l, s_l = by_hand(lib["Al(l)"], t)
    assert h_l - h_cr == pytest.approx(10710.0, abs=1e-6)
    assert s_l - s_cr == pytest.approx(10710.0 / t, abs=1e-9)
    assert (h_l - t * s_l) - (h_cr - t * s_cr) == pytest.approx(0.0, abs=1e-6)
    # inside each phase H and S stay continuous at its own breakpoints
    for sp in lib.values():
        for b in sp["breakpoints"]:
            lo = next(r for r in sp["ranges"] if r["t_max"] == b)
            hi = next(r for r in sp["ranges"] if r["t_min"] == b)
            below = {**sp, "ranges": [lo]}
            above = {**sp, "ranges": [hi]}
            for k in (0, 1, 2):
                assert by_hand(below, b)[k] == pytest.approx(by_hand(above, b)[k], rel=1e-10)


def test_the_liquid_matches_the_published_enthalpy_and_the_vapour_its_gibbs_energy(aluminium):
    lib = {s["id"]: s for s in aluminium[2].document["species"]}
    # H(1500 K) - H(298.15 K) of Al(l) on the crystal's scale: 46.68 kJ/mol from the NIST
    # WebBook's liquid Shomate coefficients (from memory)
    published = C.shomate(C.AL_LIQUID, 1500.0)[1] - C.shomate(C.AL_CRYSTAL, 298.15)[1]
    assert by_hand(lib["Al(l)"], 1500.0)[1] == pytest.approx(published, abs=50.0)
    # at the normal boiling point (2792 K, CRC from memory) the vapour on its own CODATA
    # anchors and the liquid reached through fusion have one Gibbs energy, to within the
    # anchors' and ΔH_vap's uncertainties (a few kJ/mol)
    t = C.AL_BOILING[0]
    _, h_l, s_l = by_hand(lib["Al(l)"], t)
    _, h_g, s_g = by_hand(lib["Al(g)"], t)
    assert abs((h_g - t * s_g) - (h_l - t * s_l)) < 4000.0
    assert (h_g - h_l) / 1000 == pytest.approx(C.AL_BOILING[1], rel=0.03)


@pytest.fixture(scope="module")
def melting(tmp_path_factory):
    root = tmp_path_factory.mktemp("melt") / "raw"
    C.write_melting(root)
    return build.build(root, None, QUICK, write=False)


@pytest.mark.parametrize("name", sorted(C.MELTING))
def test_published_melting_points_and_enthalpies_of_fusion_are_kept(melting, name):
    _, t_fus, dh_kj, cp_l, *_ = C.MELTING[name]          # CRC / NIST-JANAF, from memory
    lib = {s["id"]: s for s in melting.document["species"]}
    (x,) = [x for x in melting.document["transitions"] if x["species"] == name]
    assert (x["temperature"], x["enthalpy"]) == (t_fus, 1000 * dh_kj)
    cr, liq = lib[f"{name}(cr)"], lib[f"{name}(l)"]
    _, h_cr, s_cr = by_hand(cr, t_fus)
    cp, h_l, s_l = by_hand(liq, t_fus)
    assert h_l - h_cr == pytest.approx(1000 * dh_kj, rel=1e-9)
    assert s_l - s_cr == pytest.approx(1000 * dh_kj / t_fus, rel=1e-9)
    assert cp == pytest.approx(cp_l, rel=1e-6)
    assert not [f for f in melting.findings if f.severity == "error"]


def test_a_phase_stable_below_298_k_is_reached_downwards(tmp_path):
    # NaCl with a made-up low-temperature crystal form below 250 K: only the chain rule is
    # checked here (the Einstein-model Cp is a test input, not a check value)
    folder = tmp_path / "raw" / "lab"
    folder.mkdir(parents=True)
    theta, dh = C.MELTING["NaCl"][6], 0.5
    for name, lo, hi in (("low", 150.0, 250.0), ("cr", 250.0, 900.0)):
        t = np.linspace(lo, hi, 15)
        C.write_csv(folder / f"{name}.csv", ["T [K]", "Cp [J/(mol*K)]"],
                    [[f"{x:.3f}", f"{c:.5f}"] for x, c in zip(t, C.einstein_cp(2, theta, t))])
    C.write_source(folder, C.source_doc("lab", [
        {"file": "low.csv", "species": "NaCl", "formula": "NaCl", "phase": "cr-low",
         "fit": {"ranges": 1}},
        {"file": "cr.csv", "species": "NaCl", "formula": "NaCl", "phase": "cr",
         "enthalpy_of_formation_298": "-411.12 kJ/mol", "entropy_298": "72.11 J/(mol*K)"}],
        [C.transition("NaCl", "cr-low", "cr", 250.0, dh)]))
    result = build.build(tmp_path / "raw", None, QUICK, write=False)
    lib = {s["id"]: s for s in result.document["species"]}
    low, cr = lib["NaCl(cr-low)"], lib["NaCl(cr)"]
    assert low["anchor"]["basis"] == "transition" and low["anchor"]["via"] == "NaCl(cr)"
    assert by_hand(cr, 250.0)[1] - by_hand(low, 250.0)[1] == pytest.approx(500.0, abs=1e-6)
    assert by_hand(cr, 250.0)[2] - by_hand(low, 250.0)[2] == pytest.approx(2.0, abs=1e-9)


def test_props_names_the_stable_phase_and_a_phase_can_be_asked_for(aluminium, capsys):
    out = aluminium[1]
    code, text, _ = run_cli(capsys, "props", out, "Al", "300", "1000", "3000", "--json")
    rows = json.loads(text)["rows"]
    assert code == 0 and [r["phase"] for r in rows] == ["cr", "l", "g"]
    code, text, _ = run_cli(capsys, "props", out, "Al", "300", "933.47", "1000")
    assert code == 0 and "phase" in text and text.count("  cr") == 2 and "  l" in text
    code, text, _ = run_cli(capsys, "props", out, "Al", "1000", "--phase", "g", "--json")
    assert code == 0 and json.loads(text)["rows"][0]["id"] == "Al(g)"
    code, _, err = run_cli(capsys, "props", out, "Al", "1000", "--phase", "cr")
    assert code == 2 and "outside the range of use of Al(cr)" in err


def test_tables_carry_the_phase_and_rows_on_both_sides_of_each_transition(aluminium):
    release = aluminium[1] / "current"
    rows = pq.read_table(release / "tables.parquet").to_pylist()
    at_fusion = [(r["id"], r["stable"]) for r in rows if r["T"] == pytest.approx(933.47)]
    assert ("Al(cr)", True) in at_fusion and ("Al(l)", True) in at_fusion
    lib = json.loads((release / "library.json").read_text())
    from thermoledger.library.tables import stable_rows
    from thermoledger.release.tables import csv_files

    table = stable_rows(lib, "Al")
    k = np.flatnonzero(table["T"] == 933.47)
    assert [table["phase"][i] for i in k] == ["cr", "l"]          # below, then above
    assert np.diff(table["H_minus_H298"][k])[0] == pytest.approx(10710.0, abs=1e-6)
    lines = csv_files(lib)[f"tables/{file_stem('Al')}.csv"].decode().splitlines()
    assert lines[1].startswith("species,phase,T [K]")
    at = [ln.split(",")[:3] for ln in lines[2:] if ln.split(",")[2] == "933.47"]
    assert at == [["Al(cr)", "cr", "933.47"], ["Al(l)", "l", "933.47"]]
    assert [ln.split(",")[1] for ln in lines[2:]][-1] == "g"     # the vapour at the top
    parquet = pq.read_table(release / "library.parquet").to_pylist()
    liquid = [r for r in parquet if r["id"] == "Al(l)"]
    assert liquid[0]["anchor_basis"] == "transition" and liquid[0]["entropy_298"] is None


def test_an_enthalpy_increment_table_gives_cp_from_h(tmp_path):
    root = tmp_path / "raw"
    C.write_aluminium(root, gas=False, liquid_as_increments=True)
    result = build.build(root, None, QUICK, write=False)
    lib = {s["id"]: s for s in result.document["species"]}
    liquid = lib["Al(l)"]
    assert any("Cp derived from the H-H298 column" in c for c in liquid["conversions"])
    # the liquid's Cp, 31.75 J/(mol K) (WebBook, from memory), recovered from H alone
    assert by_hand(liquid, 1500.0)[0] == pytest.approx(31.751, rel=1e-3)
    assert liquid["quality"]["h_max_dev"] < 5.0
    published = C.shomate(C.AL_LIQUID, 2000.0)[1] - C.shomate(C.AL_CRYSTAL, 298.15)[1]
    assert by_hand(liquid, 2000.0)[1] == pytest.approx(published, abs=50.0)


def test_one_table_with_a_phase_column(tmp_path):
    folder = tmp_path / "raw" / "lab"
    folder.mkdir(parents=True)
    t_cr, t_l = np.linspace(298.15, 933.47, 20), np.linspace(933.47, 1800.0, 12)
    rows = [["cr", f"{x:.2f}", f"{c:.4f}"] for x, c in zip(t_cr, C.shomate(C.AL_CRYSTAL,
                                                                            t_cr)[0])]
    rows += [["l", f"{x:.2f}", "31.7510"] for x in t_l]
    C.write_csv(folder / "al.csv", ["phase", "T [K]", "Cp [J/(mol*K)]"], rows)
    entry = {"file": "al.csv", "species": "Al", "formula": "Al", "anchor_phase": "cr",
             "enthalpy_of_formation_298": "0 kJ/mol", "entropy_298": "28.30 J/(mol*K)",
             "fit": {"ranges": 1}}
    doc = C.source_doc("lab", [entry], [C.transition("Al", "cr", "l", 933.47, 10.71)])
    C.write_source(folder, doc)
    result = build.build(tmp_path / "raw", None, QUICK, write=False)
    assert sorted(s["id"] for s in result.document["species"]) == ["Al(cr)", "Al(l)"]
    del entry["anchor_phase"]
    C.write_source(folder, doc)
    checked = build.examine(tmp_path / "raw")
    (f,) = [f for f in checked.findings if f.code == "SRC-ANCHOR-PHASE"]
    assert f.file == "lab/source.json" and f.column == "tables/0/anchor_phase"
    rows[3][0] = "solid"
    C.write_csv(folder / "al.csv", ["phase", "T [K]", "Cp [J/(mol*K)]"], rows)
    entry["anchor_phase"] = "cr"
    C.write_source(folder, doc)
    checked = build.examine(tmp_path / "raw")
    (f,) = [f for f in checked.findings if f.code == "CELL-NOT-PHASE"]
    assert (f.line, f.column, f.seen) == (5, "phase", "solid")


def _examine_with(tmp_path, transitions, tables=None):
    root = tmp_path / "raw"
    C.write_aluminium(root, gas=False)
    doc = json.loads((root / "al" / "source.json").read_text())
    doc["transitions"] = transitions
    if tables is not None:
        doc["tables"] = tables(doc["tables"])
    C.write_source(root / "al", doc)
    return build.examine(root)


def test_transition_checks_name_what_is_wrong(tmp_path):
    got = _examine_with(tmp_path, [C.transition("Al", "cr", "l", 933.47, -10.71)])
    (f,) = [f for f in got.findings if f.code == "TRS-NOT-ENDOTHERMIC"]
    assert f.file == "al/source.json" and f.column == "transitions/0"
    assert any(f.code == "ANCHOR-MISSING" and f.file == "al/al-l.csv" for f in got.findings)
    got = _examine_with(tmp_path, [C.transition("Al", "cr", "l", 1300.0, 10.71)])
    assert [f.code for f in got.findings if f.code.startswith("TRS")] == ["TRS-OUTSIDE-DATA"]
    got = _examine_with(tmp_path, [C.transition("Al", "cr", "l", 933.47, 10.71),
                                   C.transition("Al", "l", "g", 2792.0, 294.0)])
    (f,) = [f for f in got.findings if f.code.startswith("TRS")]
    assert f.code == "TRS-PHASE-MISSING" and "Al(g)" in f.message
    got = _examine_with(tmp_path, [])
    (f,) = [f for f in got.findings if f.code == "ANCHOR-MISSING"]
    assert f.file == "al/al-l.csv" and "no transition links it" in f.message


def test_a_second_table_of_an_anchored_phase_needs_no_anchors_of_its_own(tmp_path):
    root = tmp_path / "raw"
    C.write_aluminium(root, gas=False)
    folder = root / "lab2"
    t = np.linspace(298.15, 900.0, 12)
    folder.mkdir()
    C.write_csv(folder / "al.csv", ["T [K]", "Cp [J/(mol*K)]"],
                [[f"{x:.2f}", f"{c:.4f}"] for x, c in zip(t, C.shomate(C.AL_CRYSTAL, t)[0])])
    C.write_source(folder, C.source_doc("lab2", [{"file": "al.csv", "species": "Al",
                                                  "formula": "Al", "phase": "cr"}], priority=5))
    checked = build.examine(root)
    assert not [f for f in checked.findings if f.severity == "error"]
    result = build.build(root, None, QUICK, write=False)
    assert {s["id"] for s in result.document["species"]} == {"Al(cr)", "Al(l)"}


def test_a_metastable_phase_with_its_own_anchors_is_checked_by_gibbs_energy(tmp_path):
    def liquid_anchored(h_kj):
        def edit(tables):
            tables[1] = {**tables[1], "enthalpy_of_formation_298": f"{h_kj} kJ/mol",
                         "entropy_298": "35.00 J/(mol*K)"}
            return tables
        return edit

    # carried down to 298.15 K by its constant Cp, the liquid reached through fusion has
    # H = 8.52 kJ/mol and S = 35.00 J/(mol K): anchors near those agree, 8 kJ/mol off do not
    for h_kj, mismatch in ((8.5, False), (16.5, True)):
        got = _examine_with(tmp_path, [C.transition("Al", "cr", "l", 933.47, 10.71)],
                            liquid_anchored(h_kj))
        assert not [f for f in got.findings if f.severity == "error"]
        result = build.build(tmp_path / "raw", None, QUICK, write=False)
        lib = {s["id"]: s for s in result.document["species"]}
        assert lib["Al(l)"]["anchor"]["basis"] == "transition"     # the chain is used ...
        found = [f for f in result.findings if f.code == "TRS-GIBBS-MISMATCH"]
        assert bool(found) == mismatch                             # ... the anchors checked
        if mismatch:
            assert "Al(l)" in found[0].message and found[0].file == "al/al-l.csv"
            assert found[0] in [f for f in result.findings if f.severity == "warning"]


def test_a_vapour_whose_anchors_contradict_the_liquid_is_out_of_order(tmp_path):
    root = tmp_path / "raw"
    C.write_aluminium(root)
    doc = json.loads((root / "al" / "source.json").read_text())
    doc["tables"][2]["enthalpy_of_formation_298"] = "250.0 kJ/mol"   # CODATA: 330.0
    C.write_source(root / "al", doc)
    result = build.build(root, None, QUICK, write=False)
    found = {f.code: f for f in result.findings if f.code.startswith("TRS")}
    assert set(found) == {"TRS-GIBBS-MISMATCH", "TRS-ORDER"}
    assert "Al(g) has a Gibbs energy" in found["TRS-ORDER"].message
    assert "where the transitions make Al(l) the stable phase" in found["TRS-ORDER"].message


def test_a_jump_in_one_table_is_an_unlisted_transition_not_a_bad_fit(tmp_path):
    folder = tmp_path / "raw" / "lab"
    folder.mkdir(parents=True)
    t = np.linspace(298.15, 1500.0, 40)
    cp = np.where(t < 933.47, C.shomate(C.AL_CRYSTAL, t)[0], C.shomate(C.AL_LIQUID, t)[0])
    C.write_csv(folder / "al.csv", ["T [K]", "Cp [J/(mol*K)]"],
                [[f"{x:.2f}", f"{c:.4f}"] for x, c in zip(t, cp)])
    C.write_source(folder, C.source_doc("lab", [{
        "file": "al.csv", "species": "Al", "formula": "Al", "phase": "cr",
        "enthalpy_of_formation_298": "0 kJ/mol", "entropy_298": "28.30 J/(mol*K)"}]))
    checked = build.examine(tmp_path / "raw")
    (f,) = [f for f in checked.findings if f.code == "TRS-UNLISTED"]
    lo, hi = map(float, re.search(r"between ([\d.]+) and ([\d.]+) K", f.message).groups())
    assert lo < 933.47 < hi                 # the melting point of Al (CRC, from memory)
    assert f.severity == "error" and not [x for x in checked.findings if x.code.startswith(
        ("FIT", "SMOOTH"))]


# condensed-phase Cp near 298 K and near melting [J/(mol K)], from memory of the NIST-JANAF
# tables and the CRC Handbook: (formula, phase, T [K], Cp)
CONDENSED_CP = [("Al", "cr", 298.15, 24.20), ("Al", "cr", 930.0, 32.96),
                ("Al", "l", 1000.0, 31.75), ("Cu", "cr", 298.15, 24.44),
                ("Fe", "cr", 298.15, 25.10), ("NaCl", "cr", 298.15, 50.50),
                ("Al2O3", "cr", 298.15, 79.04), ("Al2O3", "l", 2400.0, 192.5),
                ("MgO", "cr", 298.15, 37.24), ("SiO2", "cr", 298.15, 44.43),
                ("TiO2", "cr", 298.15, 55.10), ("C", "cr", 298.15, 8.52),
                ("NaCl", "l", 1100.0, 66.9)]


def _condensed(formula, phase, t, cp):
    """A table of ``cp`` [J/(mol K)] within 5 % of ``t`` [K] (Cp taken as constant there)."""
    from thermoledger.testing.trials import make_table
    grid = np.linspace(0.95 * t, 1.05 * t, 9)
    return make_table(grid, np.full(len(grid), cp), formula, None, phase=phase)


@pytest.mark.parametrize("formula,phase,t,cp", CONDENSED_CP)
def test_real_condensed_heat_capacities_raise_nothing(formula, phase, t, cp):
    from thermoledger.checks.physical import check_condensed_bounds

    assert check_condensed_bounds(_condensed(formula, phase, t, cp), Settings()) == []


@pytest.mark.parametrize("formula,phase,t,cp", CONDENSED_CP)
@pytest.mark.parametrize("factor,name", [(1 / 4.184, "cal taken as J"),
                                         (4.184, "J taken as cal"), (1000.0, "J taken as kJ"),
                                         (1e-3, "kJ taken as J")])
def test_condensed_unit_mistakes_are_caught(formula, phase, t, cp, factor, name):
    from thermoledger.checks.physical import check_condensed_bounds

    (f,) = check_condensed_bounds(_condensed(formula, phase, t, cp * factor), Settings())
    assert f.code == "UNIT-FACTOR" and f.severity == "error"


@pytest.mark.parametrize("formula,phase,t,cp", CONDENSED_CP)
def test_a_per_gram_condensed_table_is_caught(formula, phase, t, cp):
    from thermoledger.checks.physical import check_condensed_bounds
    from thermoledger.core.chemistry import composition

    m = composition(formula).molar_mass
    (f,) = check_condensed_bounds(_condensed(formula, phase, t, cp / m), Settings())
    assert f.code == "UNIT-FACTOR" and "per gram" in f.message


def test_gibbs_energy_function_column_is_checked(tmp_path):
    from thermoledger.checks.columns import check_columns
    from thermoledger.testing.trials import make_table

    t = np.linspace(298.15, 900.0, 20)
    cp, h, s = C.shomate(C.AL_CRYSTAL, t)
    h298 = C.shomate(C.AL_CRYSTAL, 298.15)[1]
    gef = s - (h - h298) / t
    s298 = float(C.shomate(C.AL_CRYSTAL, 298.15)[2])
    for kw in ({"s": s, "dh": h - h298}, {}):
        table = make_table(t, cp, "Al", None, phase="cr", gef=gef, s298=s298, **kw)
        assert check_columns(table, Settings()) == []
        bad = gef.copy()
        bad[10:] += 1.0
        table = make_table(t, cp, "Al", None, phase="cr", gef=bad, s298=s298, **kw)
        assert [f.code for f in check_columns(table, Settings())] == ["CONS-GEF"]
    table = make_table(t, cp, "Al", None, phase="cr", gef=gef, s298=s298 + 2.0)
    (f,) = check_columns(table, Settings())
    assert f.code == "CONS-GEF" and "entropy_298" in f.message


def test_an_old_gas_only_library_still_loads(demo_release, tmp_path):
    from thermoledger import load_library

    doc = json.loads((demo_release / "library.json").read_text())
    doc.pop("transitions")
    doc["species"] = [s for s in doc["species"] if s["phase"] == "g"]
    for s in doc["species"]:
        s.pop("anchor", None)
    for s in doc["species"]:
        for src in s["sources"]:
            for c in src["reading"].get("columns", []):
                assert c["quantity"] not in ("phase", "-(G-H298)/T")
    path = tmp_path / "library.json"
    path.write_text(json.dumps(doc))
    lib = load_library(path)
    n2 = lib["N2(g)"]
    assert n2.h_minus_h298(298.15) == pytest.approx(0.0, abs=1e-6)
    assert lib.to_pandas()["stable"].all()


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(st.lists(st.sampled_from(["cr", "l", "g", "cr-alpha", "", "solid", "L", "cr-", "-",
                                 "cr_a", "crα", "l l"]), min_size=1, max_size=6),
       st.text(max_size=12), st.text(max_size=12))
def test_random_phase_cells_and_transition_quantities_are_answered(tmp_path_factory, cells,
                                                                   t_text, h_text):
    root = tmp_path_factory.mktemp("fuzz") / "raw"
    folder = root / "lab"
    folder.mkdir(parents=True)
    rows = [[cells[i % len(cells)], f"{300 + 50 * i}", "24.5"] for i in range(12)]
    C.write_csv(folder / "t.csv", ["phase", "T [K]", "Cp [J/(mol*K)]"], rows)
    trs = [{"species": "Al", "from": "cr", "to": "l", "temperature": t_text,
            "enthalpy": h_text}]
    C.write_source(folder, C.source_doc("lab", [{
        "file": "t.csv", "species": "Al", "formula": "Al", "anchor_phase": "cr",
        "enthalpy_of_formation_298": "0 kJ/mol", "entropy_298": "28.3 J/(mol*K)"}], trs))
    checked = build.examine(root)                      # never raises
    assert all(f.file and f.file.startswith("lab/") for f in checked.findings)
    codes = {f.code for f in checked.findings}
    bad = [c for c in set(cells) if c not in ("cr", "l", "g", "cr-alpha")]
    if bad and "SRC-SCHEMA" not in codes:       # a bad transition text refuses the source
        assert codes & {"CELL-NOT-PHASE", "CELL-EMPTY", "TAB-NO-ROWS"}
