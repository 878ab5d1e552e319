"""End-to-end through the CLI on real files in a temporary folder."""

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest
from thermoledger.cli import main as cli
from thermoledger.physics import forms
from thermoledger.release import document as export
from thermoledger.testing import table_entry, write_source

from .conftest import PROJECT, tree_hashes
from .conftest import run_cli as run


def test_demo_build_writes_library_and_reports_the_defective_table(demo_raw, tmp_path, capsys):
    before = tree_hashes(demo_raw)
    code, out, err = run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "cur")
    assert code == 0, err
    assert "isru-benchlog-2026/nh3.csv:9 [Cp]: CELL-NOT-NUMBER" in out
    assert "review" in out and "qualified person" in out
    lib = json.loads((tmp_path / "cur" / "library.json").read_text())
    export.require_valid_library(lib)
    ids = [s["id"] for s in lib["species"]]
    assert len(ids) >= 8 and "NH3(g)" not in ids
    assert [q["id"] for q in lib["quarantined"]] == ["CO(g)", "NH3(g)"]
    assert "isru-benchlog-2026/co-cal.csv:2 [Cp]: UNIT-FACTOR" in out
    assert len({s["sources"][0]["source"] for s in lib["species"]}) == 4
    assert tree_hashes(demo_raw) == before  # nothing under raw/ is written


def test_parquet_matches_json(demo_release, capsys):
    lib = json.loads((demo_release / "library.json").read_text())
    table = pq.read_table(demo_release / "library.parquet")
    assert table.num_rows == sum(len(s["ranges"]) for s in lib["species"])
    meta = table.schema.metadata
    assert json.loads(meta[b"thermoledger.build"]) == lib["build"]
    rows = table.to_pylist()
    for sp in lib["species"]:
        mine = [r for r in rows if r["id"] == sp["id"]]
        for r in mine:
            assert r["coefficients"] == sp["ranges"][r["range_index"]]["coefficients"]


def test_strict_fails_when_a_table_is_quarantined(demo_raw, tmp_path, capsys):
    code, _, _ = run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "out", "--strict")
    assert code == 1


def test_build_that_cannot_write_exits_non_zero(demo_raw, tmp_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    code, _, err = run(capsys, "build", "--raw", demo_raw, "--out", blocker)
    assert code == 2 and "error" in err and "Traceback" not in err


def test_missing_raw_folder(tmp_path, capsys):
    code, _, err = run(capsys, "build", "--raw", tmp_path / "nope", "--out", tmp_path / "o")
    assert code == 2 and "does not exist" in err


def test_check_prints_findings_and_exits_one_on_errors(demo_raw, capsys):
    code, out, _ = run(capsys, "check", "--raw", demo_raw)
    assert code == 1
    assert "isru-benchlog-2026/nh3.csv\n  ERROR   CELL-NOT-NUMBER        line 9 [Cp]" in out


def test_props_agrees_with_the_coefficients(demo_release, capsys):
    code, out, _ = run(capsys, "props", demo_release, "CO2", 298.15, 1500)
    assert code == 0
    lib = json.loads((demo_release / "library.json").read_text())
    sp = next(s for s in lib["species"] if s["id"] == "CO2(g)")
    ev = forms.evaluate_ranges([(r["t_min"], r["t_max"], r["coefficients"]) for r in sp["ranges"]],
                               [298.15, 1500.0], sp["form"])
    line = [ln for ln in out.splitlines() if ln.strip().startswith("1500.00")][0]
    cells = line.replace("±", " ").split()
    assert float(cells[1]) == pytest.approx(ev["Cp"][1], abs=1e-4)
    assert float(cells[3]) == pytest.approx(ev["H"][1] / 1000, abs=1e-4)
    assert float(cells[5]) == pytest.approx(ev["S"][1], abs=1e-4)
    assert float(cells[7]) == pytest.approx(ev["G"][1] / 1000, abs=1e-4)
    assert 0 < float(cells[2]) < 0.01 * ev["Cp"][1]  # a standard uncertainty is shown


def test_range_ends_are_the_data_s_and_props_accepts_them(demo_release, capsys):
    # the CO2 bench log's last row is 6740.33 degF: 4000 K, not 3999.999999999915 K
    lib = json.loads((demo_release / "library.json").read_text())
    co2 = next(s for s in lib["species"] if s["id"] == "CO2(g)")
    assert co2["ranges"][-1]["t_max"] == 4000.0 and co2["ranges"][0]["t_min"] == 200.0
    code, out, err = run(capsys, "props", demo_release, "CO2", 200, 4000)
    assert code == 0, err
    # a last-digit difference at an end is still the end
    code, _, err = run(capsys, "props", demo_release, "CO2", 4000.0000000000005)
    assert code == 0, err


@pytest.mark.parametrize("argv, message", [
    (["XeF6", "300"], "is not in the library"),
    (["CO2(g)", "9000"], "outside the range of use"),
])
def test_props_errors_are_messages(demo_release, capsys, argv, message):
    code, _, err = run(capsys, "props", demo_release, *argv)
    assert code == 2 and message in err


GOOD = [[t, f"{29.0 + 0.004 * t:.4f}"] for t in range(200, 1500, 100)]


def test_bad_inputs_each_give_one_clear_message_and_the_rest_build(tmp_path, capsys):
    raw = tmp_path / "raw"
    bad_cell = [r[:] for r in GOOD]
    bad_cell[4][1] = "29.8x"
    dup = [r[:] for r in GOOD]
    dup[6][0] = dup[5][0]
    h = ["T [K]", "Cp [J/(mol*K)]"]
    write_source(raw, "lab-a", [
        dict(table_entry("good.csv", "N2", "N2", "linear"), header=h, rows=GOOD),
        dict(table_entry("cell.csv", "CO", "CO", "linear"), header=h, rows=bad_cell),
        dict(table_entry("nocp.csv", "NO", "NO", "linear"), header=["T [K]", "S [J/(mol*K)]"],
             rows=GOOD),
        dict(table_entry("unit.csv", "O2", "O2", "linear"), header=["T [K]", "Cp [J/(mol*Kx)]"],
             rows=GOOD),
        dict(table_entry("dup.csv", "N2O", "N2O", "linear"), header=h, rows=dup),
    ])
    write_source(raw, "lab-b", [dict(table_entry("x.csv", "Ar", "Ar", "monatomic", phase="gas"),
                                     header=h, rows=GOOD)])
    code, out, err = run(capsys, "build", "--raw", raw, "--out", tmp_path / "out")
    assert code == 0 and "Traceback" not in out + err
    lib = json.loads((tmp_path / "out" / "library.json").read_text())
    assert [s["id"] for s in lib["species"]] == ["N2(g)"]
    quarantined = {q["file"]: q["reasons"] for q in lib["quarantined"]}
    expect = {"lab-a/cell.csv": ("CELL-NOT-NUMBER", 6, "Cp"),
              "lab-a/nocp.csv": ("COL-REQUIRED", 1, "Cp"),
              "lab-a/unit.csv": ("UNIT-UNKNOWN", 1, "Cp"),
              "lab-a/dup.csv": ("T-DUPLICATE", 8, "T")}
    for file, (code_, line, col) in expect.items():
        (reason,) = quarantined[file]
        assert (reason["code"], reason["line"], reason["column"]) == (code_, line, col)
        assert f"{file}:{line} [{col}]: {code_}" in out
    findings = json.loads((tmp_path / "out" / "findings.json").read_text())["findings"]
    schema = [f for f in findings if f["code"] == "SRC-SCHEMA"]
    assert len(schema) == 1 and schema[0]["file"] == "lab-b/source.json"
    assert schema[0]["column"] == "tables/0/phase" and "g, l, cr" in schema[0]["expected"]


@pytest.mark.parametrize("command", ["build", "check", "props"])
def test_help_for_every_command(command, capsys):
    with pytest.raises(SystemExit) as exc:
        cli.main([command, "--help"])
    assert exc.value.code == 0
    assert "usage: thermoledger" in capsys.readouterr().out


def test_console_script_runs_the_demo_build(tmp_path):
    script = shutil.which("thermoledger", path=str(Path(sys.executable).parent))
    if script is None:
        pytest.skip("the thermoledger console script is not installed in this environment")
    shutil.copytree(PROJECT / "raw", tmp_path / "raw")
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    done = subprocess.run([script, "build"], cwd=tmp_path, capture_output=True, text=True,
                          env=env, timeout=300)
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "curated" / "library.json").is_file()
    assert (tmp_path / "curated" / "library.parquet").is_file()


@pytest.mark.parametrize("argv, status, said", [
    (["check", "--raw", "raw"], 1, "thermoledger check:"),
    (["props", "no-such-library.json", "N2", "300"], 2, "error:"),
])
def test_the_command_ends_with_its_status_and_all_it_printed(tmp_path, argv, status, said):
    """``python -m thermoledger`` (entry.run, as the console script) ends the process with
    the command's status, without the interpreter's shutdown, everything printed first."""
    shutil.copytree(PROJECT / "raw", tmp_path / "raw")
    done = subprocess.run([sys.executable, "-m", "thermoledger", *argv], cwd=tmp_path,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == status, done.stderr
    assert said in done.stdout + done.stderr and "Traceback" not in done.stderr
    if argv[0] == "check":
        ran = subprocess.run([sys.executable, "-c", "import sys; from thermoledger.cli import "
                              "main; sys.exit(main.main(sys.argv[1:]))", *argv], cwd=tmp_path,
                             capture_output=True, text=True, timeout=300)
        assert (done.returncode, done.stdout) == (ran.returncode, ran.stdout)


def test_readme_commands_are_the_ones_ci_runs():
    readme = (PROJECT / "README.md").read_text()
    ci = (PROJECT / ".ci" / "run").read_text()
    marked = [ln.strip() for ln in ci.splitlines() if ln.strip().endswith("# README")]
    assert len(marked) == 2
    for line in marked:
        assert line.removesuffix("# README").strip() in readme


def test_demo_tables_are_labelled_honestly():
    for folder in (PROJECT / "raw").iterdir():
        if (folder / "source.json").is_file():
            notes = json.loads((folder / "source.json").read_text())["notes"]
            assert "COMPUTED" in notes or "SYNTHETIC" in notes


def test_demo_fit_quality_is_recorded(demo_release, capsys):
    lib = json.loads((demo_release / "library.json").read_text())
    for sp in lib["species"]:
        q = sp["quality"]
        assert 0 <= q["cp_rms_rel_dev"] <= q["cp_max_rel_dev"] < 0.01
        assert q["points"] == sum(x["rows"] for x in sp["sources"])
        assert np.isfinite(q["worst_t"])
