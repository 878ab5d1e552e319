"""Fuzzed raw input never produces a traceback: always findings (hypothesis)."""

import json

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from thermoledger import build
from thermoledger.core.findings import subject
from thermoledger.testing import table_entry

GOOD = "T [K],Cp [J/(mol*K)]\n" + "\n".join(f"{t},{29 + t / 1000:.4f}" for t in range(200, 1300, 100))


def write(raw, table_bytes, meta_bytes=None):
    folder = raw / "lab"
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "t.csv").write_bytes(table_bytes)
    doc = {"source": "lab", "title": "t", "citation": "t", "method": "other",
           "standard_pressure": "1 bar", "priority": 1, "license": "-",
           "tables": [table_entry("t.csv", "N2", "N2", "linear")]}
    (folder / "source.json").write_bytes(meta_bytes if meta_bytes is not None
                                         else json.dumps(doc).encode())


FUZZ = settings(max_examples=60, deadline=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture])
TABLE = "lab/t.csv"


def accounted_for(result) -> bool:
    """The fuzzed table either carries an error finding and is held back (quarantined, or
    not read at all), or has none and reaches the fit as the species N2(g)."""
    errors = [f for f in result.findings if f.severity == "error" and subject(f) == TABLE]
    held = {m.file for m, _ in result.quarantined} | {f for f, _ in result.held_back}
    if errors:
        return TABLE in held and all(f.message for f in errors)
    return [s.species_id for s in result.selections] == ["N2(g)"] and TABLE not in held


@FUZZ
@given(st.binary(max_size=400))
def test_random_table_bytes(tmp_path_factory, data):
    raw = tmp_path_factory.mktemp("raw")
    write(raw, data)
    result = build.examine(raw)
    assert accounted_for(result)


@FUZZ
@given(st.binary(max_size=300))
def test_random_source_json_bytes(tmp_path_factory, data):
    raw = tmp_path_factory.mktemp("raw")
    write(raw, GOOD.encode(), data)
    result = build.examine(raw)
    assert result.findings and not result.tables


@FUZZ
@given(st.integers(min_value=0, max_value=len(GOOD)))
def test_truncated_tables(tmp_path_factory, cut):
    raw = tmp_path_factory.mktemp("raw")
    write(raw, GOOD[:cut].encode())
    result = build.examine(raw)
    assert accounted_for(result)


@FUZZ
@given(st.sampled_from(["latin-1", "utf-16", "cp1252"]), st.sampled_from(["°", "é", "µ"]))
def test_wrong_encodings(tmp_path_factory, encoding, char):
    raw = tmp_path_factory.mktemp("raw")
    text = GOOD.replace("T [K]", f"T{char} [K]")
    write(raw, text.encode(encoding))
    result = build.examine(raw)
    assert result.findings


@FUZZ
@given(st.sampled_from(["1e308", "1e309", "-1e308", "9" * 400, "1e-320", "0"]))
def test_huge_and_tiny_numbers(tmp_path_factory, number):
    raw = tmp_path_factory.mktemp("raw")
    lines = GOOD.splitlines()
    lines[4] = f"600,{number}"
    write(raw, ("\n".join(lines) + "\n").encode())
    result = build.examine(raw)
    assert any(f.file == "lab/t.csv" and f.line == 5 for f in result.findings)


def test_empty_and_header_only(tmp_path):
    for i, data in enumerate([b"", b"T [K],Cp [J/(mol*K)]\n", b"\n\n\n"]):
        write(tmp_path / str(i), data)
        result = build.examine(tmp_path / str(i))
        assert any(f.code == "TAB-EMPTY" for f in result.findings)


def test_fuzzed_build_still_writes_a_library(tmp_path):
    write(tmp_path / "raw", b"\x00\xff garbage")
    result = build.build(tmp_path / "raw", tmp_path / "out")
    assert (tmp_path / "out" / "library.json").is_file() and result.quarantined
