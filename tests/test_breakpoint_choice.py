"""Breakpoints stay where they were unless the data say otherwise, the library says why a
breakpoint is where it is, and a release rebuilt from the same data is the same release.

Reference data: CoolProp's ideal-gas Cp of nitrogen (R. Span et al., J. Phys. Chem. Ref.
Data 29, 1361 (2000)) and carbon dioxide (R. Span & W. Wagner, J. Phys. Chem. Ref. Data 25,
1509 (1996)) on a 25 K grid, stated u(Cp) = 0.1 %; the perturbation (one point 0.3 % high)
is the audit's.
"""

import json
from dataclasses import replace

import pytest
from thermoledger.core.records import CpData, SpeciesIdentity
from thermoledger.core.settings import FitSettings
from thermoledger.fit import fit_species
from thermoledger.physics import forms
from thermoledger.testing import coverage, table_entry, write_source

from .conftest import run_cli as run

pytest.importorskip("CoolProp.CoolProp")


def fit(fluid, cp, settings=FitSettings(), previous=None):
    t = coverage.data_grid()
    return fit_species(SpeciesIdentity(fluid, 0.0, 200.0, "g", None, None),
                       CpData(t, cp, 0.001 * cp, None, None, None, None), settings, previous)


def cp_at(r, t):
    return forms.evaluate_ranges([(x.t_min, x.t_max, x.coefficients) for x in r.ranges], t,
                                 r.form)["Cp"]


@pytest.mark.parametrize("fluid", ["Nitrogen", "CarbonDioxide"])
@pytest.mark.parametrize("norm", ["rms", "max"])
def test_one_changed_point_does_not_move_the_previous_breakpoint(fluid, norm):
    settings = FitSettings(breakpoint_norm=norm)
    t = coverage.data_grid()
    cp = coverage.reference(fluid, 2.0).at(t)[0]
    before = fit(fluid, cp, settings)
    moved = 0.0
    for i in (5, 10, 30, 60):
        y = cp.copy()
        y[i] *= 1.003
        after = fit(fluid, y, settings, previous=before.breakpoints)
        assert after.breakpoints == before.breakpoints
        choice = after.breakpoint_choice
        if choice["offered_by"] == "previous release":
            assert choice["kept"] and choice["chi2_gain"] <= settings.breakpoint_stability
            assert any(code == "FIT-BREAKPOINT" and "previous release kept" in msg
                       for code, msg in after.notes)
        moved = max(moved, abs(cp_at(after, [200.0])[0] / cp_at(before, [200.0])[0] - 1))
    assert moved < 5e-4   # the audit saw 0.14 % from a moved break


def test_a_real_change_of_the_data_moves_the_breakpoint_and_says_so():
    t = coverage.data_grid()
    cp = coverage.reference("Nitrogen", 2.0).at(t)[0]
    r = fit("Nitrogen", cp, previous=(1300.0,))
    assert r.breakpoints != (1300.0,)
    c = r.breakpoint_choice
    assert c["offered"] == [1300.0] and not c["kept"] and c["chi2_gain"] > 1.0
    assert any(code == "FIT-BREAKPOINT" and "moved from 1300 K" in msg for code, msg in r.notes)


def test_unsuitable_previous_breakpoints_are_not_offered():
    t = coverage.data_grid()
    cp = coverage.reference("Nitrogen", 2.0).at(t)[0]
    for previous in [(210.0,), (500.0, 900.0), (1990.0,)]:
        r = fit("Nitrogen", cp, previous=previous)
        assert r.breakpoint_choice["offered_by"] != "previous release"


def write_n2(raw, bump=None):
    t = coverage.data_grid()
    cp = coverage.cp0("Nitrogen", t)
    if bump is not None:
        cp[bump] *= 1.003
    rows = [[f"{a:.10g}", f"{b:.10g}", f"{0.001 * b:.6g}"] for a, b in zip(t, cp)]
    write_source(raw, "lab", [dict(table_entry("n2.csv", "N2", "N2", "linear",
                                               s="191.609 J/(mol*K)"),
                                   header=["T [K]", "Cp [J/(mol*K)]", "u(Cp) [J/(mol*K)]"],
                                   rows=rows)])


def test_rebuilds_keep_breakpoints_reproduce_and_pass_the_audit(tmp_path, capsys):
    raw, out = tmp_path / "raw", tmp_path / "out"
    write_n2(raw)
    argv = ["--raw", raw, "--out", out, "--no-report", "--quiet",
            "--breakpoints", "optimise"]
    assert run(capsys, "build", *argv)[0] == 0
    first = json.loads((out / "library.json").read_text())
    assert run(capsys, "build", *argv)[0] == 0         # the same data: the same release
    assert len(list((out / "releases").iterdir())) == 1
    write_n2(raw, bump=30)
    assert run(capsys, "build", *argv)[0] == 0
    second = json.loads((out / "library.json").read_text())
    (a,), (b,) = first["species"], second["species"]
    assert b["breakpoints"] == a["breakpoints"]
    if b["breakpoint_choice"]["offered_by"] == "previous release":
        assert b["breakpoint_choice"]["kept"]
    code, text, _ = run(capsys, "audit", "--raw", raw, "--curated", out)
    assert code == 0, text


def test_the_audit_rebuilds_with_the_release_s_own_settings(tmp_path, capsys):
    raw, out = tmp_path / "raw", tmp_path / "out"
    write_n2(raw)
    assert run(capsys, "build", "--raw", raw, "--out", out, "--no-report", "--tables-csv",
               "--table-step", "50", "--range-of-use", "200", "3000", "--form", "nasa9",
               "--quiet")[0] == 0
    code, text, _ = run(capsys, "audit", "--raw", raw, "--curated", out)
    assert code == 0 and "PASS" in text
    # an option named on the audit's command line replaces the recorded one
    code, text, _ = run(capsys, "audit", "--raw", raw, "--curated", out, "--form", "nasa7")
    assert code == 1 and "fit.form: nasa9 -> nasa7" in text


def test_recorded_settings_round_trip():
    from thermoledger.core.settings import Settings

    s = Settings(fit=replace(FitSettings(), breakpoint_mode="fixed",
                             fixed_breakpoints=(800.0, 2500.0), ranges=3, use_t_max=5000.0))
    assert Settings.from_dict(json.loads(json.dumps(s.to_dict()))) == s
    with pytest.raises(ValueError, match="unknown setting"):
        Settings.from_dict({"fit": {"no_such": 1}})


def test_settings_equal_in_value_keep_their_own_numbers():
    """Settings that compare equal (6000 == 6000.0, 1 == True) still record what they hold:
    no cache may hand one the other's dict (its JSON would differ)."""
    from dataclasses import asdict

    for s in (FitSettings(use_t_max=6000.0), FitSettings(use_t_max=6000), FitSettings(),
              FitSettings(fixed_breakpoints=(800.0, 2000.0), breakpoint_mode="fixed")):
        expected = {**asdict(s), "fixed_breakpoints": list(s.fixed_breakpoints)}
        assert json.dumps(s.to_dict()) == json.dumps(expected)


def test_only_well_formed_breakpoints_of_the_last_release_are_offered(tmp_path):
    """A rebuild reads the last release's breakpoints without its schema check (fast), so
    an entry edited by hand is skipped, and an unreadable library offers nothing."""
    from thermoledger import build

    lib = tmp_path / "library.json"
    lib.write_text(json.dumps({"species": [
        {"id": "N2(g)", "breakpoints": [1000.0]}, {"id": "CO(g)", "breakpoints": ["1000"]},
        {"id": 7, "breakpoints": [900.0]}, {"id": "Ar(g)", "breakpoints": []},
        {"id": "O2(g)", "breakpoints": [True]}, "junk"]}))
    assert build.previous_breakpoints(tmp_path) == {"N2(g)": (1000.0,), "Ar(g)": ()}
    lib.write_text('{"species": [{"id": "N2(g)", "breakpoints": [NaN]}]}')
    assert build.previous_breakpoints(tmp_path) == {}
    lib.write_bytes(b"\xff\xfe not json")
    assert build.previous_breakpoints(tmp_path) == {}
    assert build.previous_breakpoints(tmp_path / "absent") == {}


def test_a_rebuild_takes_the_breakpoints_kept_with_the_last_release_while_it_is_unchanged(
        tmp_path, monkeypatch):
    """The build that publishes a release keeps its breakpoints beside its partitions; the
    next build reads them, not the whole library.json, as long as the library is the one
    they were kept with: the same as library.json gives, and library.json again once the
    release is another."""
    import shutil
    from pathlib import Path

    from thermoledger import build
    from thermoledger.library.document import release_folder

    raw, out = tmp_path / "raw", tmp_path / "out"
    shutil.copytree(Path(__file__).resolve().parent.parent / "raw", raw)
    built = build.build(raw, out)
    kept = out / ".parts" / build.KEPT_BREAKPOINTS
    assert kept.is_file()
    want = {sp["id"]: tuple(sp["breakpoints"]) for sp in built.document["species"]}
    lib = release_folder(out) / "library.json"
    reads = []
    real_read = Path.read_bytes
    monkeypatch.setattr(Path, "read_bytes", lambda p: reads.append(p.name) or real_read(p))
    assert build.previous_breakpoints(out) == want
    assert reads == [build.KEPT_BREAKPOINTS]
    doc = json.loads(lib.read_text())          # the release's library edited in place
    doc["species"][0]["breakpoints"] = [777.0]
    lib.chmod(0o644)
    lib.write_text(json.dumps(doc))
    assert build.previous_breakpoints(out)[doc["species"][0]["id"]] == (777.0,)
    kept.write_text("{damaged")
    assert build.previous_breakpoints(out)[doc["species"][0]["id"]] == (777.0,)
