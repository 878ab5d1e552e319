"""Findings report: acknowledgements, the JSON report and its schema, check's exit code,
and what the demo data exercise."""

import json

import jsonschema
import pytest
from thermoledger.testing import table_entry, write_source

from .conftest import PROJECT
from .conftest import run_cli as run

ROWS = [[t, f"{29.1 + 0.004 * (t - 200):.4f}", f"{29.1 + 0.004 * (t - 200) - 8.3145:.4f}"]
        for t in range(200, 1600, 50)]
HEADER = ["T [K]", "Cp [J/(mol*K)]", "Cv [J/(mol*K)]"]




def schema():
    return json.loads((PROJECT / "schemas" / "findings.schema.json").read_text())


def source_with(tmp_path, acknowledge):
    entry = table_entry("n2.csv", "N2", "N2", "linear", s="191.609 J/(mol*K)")
    if acknowledge is not None:
        entry["acknowledge"] = acknowledge
    write_source(tmp_path / "raw", "lab", [dict(entry, header=HEADER, rows=ROWS)])
    return tmp_path / "raw"


def test_acknowledged_warning_stays_but_does_not_count(tmp_path, capsys):
    raw = source_with(tmp_path, [{"code": "COL-UNKNOWN", "line": 1, "reason": "Cv kept on purpose"}])
    report = tmp_path / "findings.json"
    code, out, _ = run(capsys, "check", "--raw", raw, "--report", report)
    assert code == 0
    assert "0 warning(s), 1 acknowledged" in out and "acknowledged: Cv kept on purpose" in out
    doc = json.loads(report.read_text())
    jsonschema.validate(doc, schema())
    (f,) = doc["findings"]
    assert (f["code"], f["acknowledged"]) == ("COL-UNKNOWN", "Cv kept on purpose")
    assert doc["counts"] == {"error": 0, "warning": 0, "info": 0, "acknowledged": 1}
    # and it travels into the library's provenance
    run(capsys, "build", "--raw", raw, "--out", tmp_path / "out", "--strict")
    lib = json.loads((tmp_path / "out" / "library.json").read_text())
    assert [f["acknowledged"] for f in lib["species"][0]["findings"]
            if f["acknowledged"]] == ["Cv kept on purpose"]


def test_unused_and_error_acknowledgements_are_reported(tmp_path, capsys):
    raw = source_with(tmp_path, [{"code": "SMOOTH-OUTLIER", "line": 7, "reason": "checked it"}])
    code, out, _ = run(capsys, "check", "--raw", raw)
    assert "ACK-UNUSED" in out and "tables/0/acknowledge/0" in out
    bad = [r[:] for r in ROWS]
    bad[3][1] = "-5"
    entry = table_entry("n2.csv", "N2", "N2", "linear",
                        acknowledge=[{"code": "CP-NOT-POSITIVE", "reason": "I know"}])
    write_source(tmp_path / "raw2", "lab", [dict(entry, header=HEADER, rows=bad)])
    code, out, _ = run(capsys, "check", "--raw", tmp_path / "raw2")
    assert code == 1 and "ACK-NOT-ALLOWED" in out


def test_check_groups_by_file_and_exits_non_zero_on_errors(demo_raw, tmp_path, capsys):
    report = tmp_path / "r.json"
    code, out, _ = run(capsys, "check", "--raw", demo_raw, "--report", report)
    assert code == 1
    heads = [ln for ln in out.splitlines() if ln and not ln.startswith(" ")][:-1]
    assert heads == sorted(heads)
    doc = json.loads(report.read_text())
    jsonschema.validate(doc, schema())


def test_demo_exercises_at_least_four_different_findings(demo_raw, tmp_path, capsys):
    report = tmp_path / "r.json"
    run(capsys, "check", "--raw", demo_raw, "--report", report)
    found = {(f["code"], f["file"].split("/")[-1], f["line"])
             for f in json.loads(report.read_text())["findings"]}
    expected = {("CELL-NOT-NUMBER", "nh3.csv", 9), ("UNIT-FACTOR", "co-cal.csv", 2),
                ("SMOOTH-OUTLIER", "n2o.csv", 14), ("SRC-DISAGREE", "co2-benchlog.csv", None),
                ("SEL-MERGED", "co2-benchlog.csv", None), ("COL-UNKNOWN", "ar.csv", 1)}
    assert expected <= found


def test_build_findings_json_matches_schema(demo_release):
    jsonschema.validate(json.loads((demo_release / "findings.json").read_text()), schema())


@pytest.mark.parametrize("command", ["check", "build"])
def test_readme_shows_what_the_demo_prints(demo_raw, tmp_path, capsys, monkeypatch, command):
    assert demo_raw == tmp_path / "raw"
    monkeypatch.chdir(tmp_path)  # the README shows the default paths raw/ and curated/
    run(capsys, command)  # warm-up output is discarded
    _, out, _ = run(capsys, command)
    readme = (PROJECT / "README.md").read_text()
    for line in out.splitlines():
        assert line.rstrip() in readme, f"README.md lacks this line of '{command}': {line}"


def test_a_finding_as_written_has_every_field_but_extra_in_order():
    from dataclasses import fields

    from thermoledger.core.findings import Finding, finding

    f = finding("SMOOTH-OUTLIER", "x", source="s", file="f", line=3, lines=(3, 4),
                extra={"species": "a"})
    assert list(f.to_dict()) == [x.name for x in fields(Finding) if x.name != "extra"]
    assert f.to_dict()["lines"] == [3, 4] and Finding.from_dict(f.to_dict()) == f
