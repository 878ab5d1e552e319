"""One bad value costs one table: every crash site of the reliability run, reproduced.

Each case writes a source with one bad table next to a good source, builds without writing,
and checks that the bad table is answered by an error finding that names its file (and row
and column where there is one) while the good species is still fitted.
"""

import json
import signal
from contextlib import contextmanager

import pytest
from hypothesis import given
from hypothesis import strategies as st
from thermoledger import build
from thermoledger.core import jsonread, units
from thermoledger.core.errors import InputError, UnitError
from thermoledger.core.settings import OutputSettings, Settings
from thermoledger.testing import table_entry

ROWS = [(200 + 100 * i, 29 + (200 + 100 * i) / 1000) for i in range(12)]
NO_REPORT = Settings(outputs=OutputSettings(report=False))


def write_case(raw, *, rows=ROWS, header="T [K],Cp [J/(mol*K)]", entry=None, doc=None,
               meta_text=None):
    lab = raw / "lab"
    lab.mkdir(parents=True)
    text = header + "\n" + "\n".join(",".join(str(c) for c in r) for r in rows) + "\n"
    (lab / "t.csv").write_text(text, encoding="utf-8")
    e = table_entry("t.csv", "N2", "N2", "linear")
    e.update(entry or {})
    d = {"source": "lab", "title": "t", "citation": "t", "method": "other",
         "standard_pressure": "1 bar", "priority": 1, "license": "-", "tables": [e]}
    d.update(doc or {})
    (lab / "source.json").write_text(meta_text if meta_text is not None else json.dumps(d),
                                     encoding="utf-8")
    good = raw / "good"
    good.mkdir()
    (good / "o2.csv").write_text("T [K],Cp [J/(mol*K)]\n" + "\n".join(
        f"{t},{29.3 + t / 900:.4f}" for t in range(200, 1500, 100)) + "\n")
    g = {"source": "good", "title": "t", "citation": "t", "method": "other",
         "standard_pressure": "1 bar", "priority": 1, "license": "-",
         "tables": [table_entry("o2.csv", "O2", "O2", "linear")]}
    (good / "source.json").write_text(json.dumps(g))


@contextmanager
def deadline(seconds):
    """Fail instead of hanging (a hang, not a speed, is what this catches)."""
    def fire(*_):
        raise AssertionError(f"still running after {seconds} s: a hang")
    old = signal.signal(signal.SIGALRM, fire)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def with_row(i, t=None, cp=None):
    return [((t if t is not None else r[0]) if k == i else r[0],
             (cp if cp is not None else r[1]) if k == i else r[1]) for k, r in enumerate(ROWS)]


# (case, write_case arguments, expected code, file, line, column)
CASES = [
    ("T >= 1e29 K (smoothness model fed inf)", dict(rows=with_row(3, t=1e29)),
     "VALUE-RANGE", "lab/t.csv", 5, "T"),
    ("T <= 1e-300 K", dict(rows=with_row(3, t=1e-300)), "VALUE-RANGE", "lab/t.csv", 5, "T"),
    ("JSON nested 5000 deep", dict(meta_text="[" * 5000 + "]" * 5000),
     "SRC-TOO-DEEP", "lab/source.json", None, ""),
    ("unit K**2**2**2**2**2 in a header", dict(header="T [K**2**2**2**2**2],Cp [J/(mol*K)]"),
     "UNIT-TOO-COMPLEX", "lab/t.csv", 1, "T"),
    ("unit K**2**2**2**2**2 in a quantity",
     dict(entry={"enthalpy_of_formation_298": "1 K**2**2**2**2**2"}),
     "SRC-QUANTITY", "lab/source.json", None, "tables/0/enthalpy_of_formation_298"),
    ("unit K**9**9**9 (hung the parser)", dict(header="T [K**9**9**9],Cp [J/(mol*K)]"),
     "UNIT-TOO-COMPLEX", "lab/t.csv", 1, "T"),
    ("enthalpy of formation 1e308 kJ/mol",
     dict(entry={"enthalpy_of_formation_298": "1e308 kJ/mol"}),
     "SRC-QUANTITY", "lab/source.json", None, "tables/0/enthalpy_of_formation_298"),
    ("u(Cp) = 1e300", dict(header="T [K],Cp [J/(mol*K)],u(Cp) [J/(mol*K)]",
                           rows=[(t, c, 1e300) for t, c in ROWS]),
     "VALUE-RANGE", "lab/t.csv", 2, "u(Cp)"),
    ("table x 1e300", dict(rows=[(t, c * 1e300) for t, c in ROWS]),
     "VALUE-RANGE", "lab/t.csv", 2, "Cp"),
    ("one Cp cell 1.79e308", dict(rows=with_row(3, cp=1.79e308)),
     "VALUE-RANGE", "lab/t.csv", 5, "Cp"),
    ("H-H298 overflowing to inf", dict(header="T [K],Cp [J/(mol*K)],H-H298 [kJ/mol]",
                                       rows=[(t, c, 1.7e308) for t, c in ROWS]),
     "VALUE-RANGE", "lab/t.csv", 2, "H-H298"),
    ("S overflowing to inf", dict(header="T [K],Cp [J/(mol*K)],S [kJ/(mol*K)]",
                                  rows=[(t, c, 1.7e308) for t, c in ROWS]),
     "VALUE-RANGE", "lab/t.csv", 2, "S"),
    ("standard pressure 0 bar", dict(doc={"standard_pressure": "0 bar"}),
     "SRC-QUANTITY", "lab/source.json", None, "standard_pressure"),
    ("standard pressure -1 bar", dict(doc={"standard_pressure": "-1 bar"}),
     "SRC-QUANTITY", "lab/source.json", None, "standard_pressure"),
    ("use_t_max 1.2e29", dict(entry={"fit": {"use_t_max": 123456789012345678901234567890}}),
     "FIT-SETTING", "lab/source.json", None, "tables/0/fit/use_t_max"),
    ("use_t_min 1e-300", dict(entry={"fit": {"use_t_min": 1e-300}}),
     "FIT-SETTING", "lab/source.json", None, "tables/0/fit/use_t_min"),
    ("breakpoints [1000, 1000, 1000]", dict(entry={"fit": {"breakpoints": [1000, 1000, 1000],
                                                           "ranges": 4}}),
     "FIT-SETTING", "lab/source.json", None, "tables/0/fit/breakpoints"),
    ("Unicode digits", dict(rows=[("\uff11\uff12\uff13", 29.1)] + ROWS),
     "CELL-NOT-NUMBER", "lab/t.csv", 2, "T"),
    ("Arabic-Indic digits", dict(rows=[("\u0661\u0662\u0663", 29.1)] + ROWS),
     "CELL-NOT-NUMBER", "lab/t.csv", 2, "T"),
    ("duplicate JSON key", dict(meta_text='{"source": "lab", "source": "lab2"}'),
     "SRC-DUPLICATE-KEY", "lab/source.json", None, ""),
    ("a gas Cp of 1e19", dict(rows=with_row(3, cp=1e19)), "VALUE-RANGE", "lab/t.csv", 5, "Cp"),
    ("a gas Cp of 1e5 (in range, not physical)", dict(rows=with_row(3, cp=1e5)),
     "CP-IMPLAUSIBLE", "lab/t.csv", 5, "Cp"),
]


@pytest.mark.parametrize("case, kw, code, file, line, column", CASES, ids=[c[0] for c in CASES])
def test_a_bad_value_costs_its_table_only(tmp_path, case, kw, code, file, line, column):
    write_case(tmp_path / "raw", **kw)
    with deadline(60):
        result = build.build(tmp_path / "raw", None, NO_REPORT, write=False)
    hits = [f for f in result.findings if f.code == code and f.severity == "error"]
    assert hits, f"{case}: no {code} among {[f.code for f in result.findings]}"
    f = hits[0]
    assert (f.file, f.line, f.column) == (file, line, column)
    assert [s["id"] for s in result.document["species"]] == ["O2(g)"]
    assert "N2(g)" not in [s["id"] for s in result.document["species"]]


def test_a_condensed_cp_overflowing_is_listed_not_dropped(tmp_path):
    write_case(tmp_path / "raw", rows=with_row(4, cp=1.7e308),
               header="T [K],Cp [kJ/(mol*K)]",
               entry={"phase": "cr", "geometry": None})
    doc = json.loads((tmp_path / "raw" / "lab" / "source.json").read_text())
    del doc["tables"][0]["geometry"]
    (tmp_path / "raw" / "lab" / "source.json").write_text(json.dumps(doc))
    result = build.examine(tmp_path / "raw")
    f = next(f for f in result.findings if f.code == "VALUE-RANGE")
    assert (f.file, f.line, f.column) == ("lab/t.csv", 6, "Cp")


def test_ranges_override_sets_the_points_needed(tmp_path):
    # 8 points: enough for one range (5), not for the default two (10)
    write_case(tmp_path / "raw", rows=ROWS[:8], entry={"fit": {"ranges": 1}})
    result = build.examine(tmp_path / "raw")
    assert not [f for f in result.findings if f.code == "TOO-FEW-POINTS"]
    write_case(tmp_path / "raw2", rows=ROWS[:12], entry={"fit": {"ranges": 3}})
    result = build.examine(tmp_path / "raw2")
    (f,) = [f for f in result.findings if f.code == "TOO-FEW-POINTS"]
    assert "3-range fit needs at least 15" in f.message


def test_a_narrow_table_is_not_split_below_the_range_ratio(tmp_path):
    rows = [(300 + i / 20, 29.1 + i / 1000) for i in range(21)]  # 300-301 K, points enough
    write_case(tmp_path / "raw", rows=rows)
    result = build.build(tmp_path / "raw", None, NO_REPORT, write=False)
    n2 = next(s for s in result.document["species"] if s["id"] == "N2(g)")
    assert len(n2["ranges"]) == 1 and n2["breakpoints"] == []
    assert any(f.code == "COV-RANGE-POINTS" and "too narrow" in f.message
               for f in result.findings)


def test_a_folder_or_a_pipe_listed_as_a_table(tmp_path):
    import os

    write_case(tmp_path / "raw")
    (tmp_path / "raw" / "lab" / "t.csv").unlink()
    os.mkfifo(tmp_path / "raw" / "lab" / "t.csv")          # reading it would block forever
    with deadline(60):
        result = build.examine(tmp_path / "raw")
    (f,) = [f for f in result.findings if f.code == "TAB-NOT-FILE"]
    assert "not a regular file" in f.message and f.column == "tables/0/file"
    (tmp_path / "raw" / "lab" / "t.csv").unlink()
    (tmp_path / "raw" / "lab" / "t.csv").mkdir()
    result = build.examine(tmp_path / "raw")
    (f,) = [f for f in result.findings if f.code == "TAB-NOT-FILE"]
    assert "is a folder" in f.message


def test_source_json_linked_out_of_raw_is_not_followed(tmp_path):
    write_case(tmp_path / "raw")
    outside = tmp_path / "elsewhere.json"
    (tmp_path / "raw" / "lab" / "source.json").rename(outside)
    (tmp_path / "raw" / "lab" / "source.json").symlink_to(outside)
    result = build.examine(tmp_path / "raw")
    (f,) = [f for f in result.findings if f.file == "lab/source.json"]
    assert f.code == "SRC-PATH" and "link" in f.message


def test_an_oversized_table_is_refused_before_it_is_read(tmp_path, monkeypatch):
    from thermoledger.ingest import sources as ingest

    write_case(tmp_path / "raw")
    monkeypatch.setattr(ingest, "MAX_TABLE_BYTES", 100)
    result = build.examine(tmp_path / "raw")
    (f,) = [f for f in result.findings if f.code == "TAB-TOO-LARGE" and f.file == "lab/t.csv"]
    assert "limit is 100" in f.message


def test_too_many_rows_is_one_finding(tmp_path, monkeypatch):
    from thermoledger.ingest import csvtable

    write_case(tmp_path / "raw")
    monkeypatch.setattr(csvtable, "MAX_ROWS", 5)
    result = build.examine(tmp_path / "raw")
    (f,) = [f for f in result.findings if f.code == "TAB-TOO-LARGE" and f.file == "lab/t.csv"]
    assert "6+ data rows" in f.message and "limit is 32 columns and 5 rows" in f.message


def test_many_bad_rows_are_summed_up(tmp_path):
    rows = [(200 + i, "x") for i in range(300)] + [(600, 29.9), (700, 30.1)]
    write_case(tmp_path / "raw", rows=rows)
    result = build.examine(tmp_path / "raw")
    bad = [f for f in result.findings if f.code == "CELL-NOT-NUMBER"]
    assert len(bad) == 21 and len(bad[-1].lines) == 280 and "280 more row(s)" in bad[-1].message


def test_a_table_no_row_of_which_can_be_read_gets_one_finding_naming_the_cause(tmp_path):
    rows = [(200 + i, "x") for i in range(300)]
    write_case(tmp_path / "raw", rows=rows)
    result = build.examine(tmp_path / "raw")
    (meta, reasons), = [q for q in result.quarantined if q[0].file == "lab/t.csv"]
    assert [f.code for f in reasons] == ["TAB-NO-ROWS"]  # the cause, not its consequences
    assert len(reasons[0].lines) == 300
    assert "none of the 300 data row(s)" in reasons[0].message and "'x'" in reasons[0].message
    assert [f.code for f in result.findings if f.code in ("CELL-NOT-NUMBER", "ROW-WIDTH")] == []


def test_an_unexpected_exception_becomes_the_tables_finding(tmp_path, monkeypatch):
    from thermoledger.checks import registry as validate
    from thermoledger.checks import smoothness as checks_smooth

    def broken(table, ctx):
        raise ZeroDivisionError("float division by zero")
    monkeypatch.setattr(validate, "QUALITY_CHECKS", (broken,) + validate.QUALITY_CHECKS)
    write_case(tmp_path / "raw")
    result = build.build(tmp_path / "raw", None, NO_REPORT, write=False)
    stage = [f for f in result.findings if f.code == "STAGE-FAILED"]
    assert {f.file for f in stage} == {"lab/t.csv", "good/o2.csv"}
    assert all("ZeroDivisionError" in f.message and f.seen == "ZeroDivisionError" for f in stage)
    assert checks_smooth  # the real checks are untouched
    assert not result.document["species"]


def test_an_exception_in_one_fit_leaves_the_others(tmp_path, monkeypatch):
    real = build.fit_selection

    def flaky(sel, ctx, *more):
        if sel.species_id == "N2(g)":
            raise IndexError("index 0 is out of bounds")
        return real(sel, ctx, *more)
    monkeypatch.setattr(build, "fit_selection", flaky)
    write_case(tmp_path / "raw")
    result = build.build(tmp_path / "raw", None, NO_REPORT, write=False)
    assert [s["id"] for s in result.document["species"]] == ["O2(g)"]
    (f,) = [f for f in result.findings if f.code == "STAGE-FAILED"]
    assert f.file == "lab/t.csv" and "IndexError in the fit stage" in f.message


@pytest.mark.parametrize("text, code", [
    ('{"a": 1, "a": 2}', "SRC-DUPLICATE-KEY"),
    ('{"a": NaN}', "SRC-UNREADABLE"),
    ('{"a": Infinity}', "SRC-UNREADABLE"),
    ('[' * 40 + ']' * 40, "SRC-TOO-DEEP"),
    ('{"a": "[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[["}', None),  # brackets inside a string
])
def test_strict_json(text, code):
    if code is None:
        assert jsonread.loads(text, file="x.json")["a"].startswith("[")
        return
    with pytest.raises(InputError) as err:
        jsonread.loads(text, file="x.json")
    assert err.value.code == code and "x.json" in str(err.value)


@pytest.mark.parametrize("unit", ["K**2**2**2**2**2", "K**9**9**9", "K^99", "K**(1e9)",
                                  "J/(mol*K)" * 20, "K*" + "9" * 5000])
def test_unit_complexity_is_bounded(unit):
    with deadline(30), pytest.raises(UnitError) as err:
        units.check_unit(unit, "temperature")
    assert err.value.code == "UNIT-TOO-COMPLEX" or "cannot be read" in err.value.what


def test_ordinary_units_still_read():
    assert units.check_unit("J/(mol*K)", "heat_capacity") == "molar"
    assert units.check_unit("K**-1*J/mol", "heat_capacity") == "molar"
    assert units.to_si([25.0], "degC", "temperature")[0] == pytest.approx(298.15)


@pytest.mark.parametrize("text", ["\uff11\uff12 kJ/mol", "nan kJ/mol", "inf kJ/mol",
                                  "1_000 kJ/mol", "0x10 kJ/mol"])
def test_quantities_take_plain_ascii_numbers_only(text):
    with pytest.raises(UnitError):
        units.parse_quantity(text, "enthalpy")


def _depth_by_hand(text: str) -> int:
    """Nesting depth by a character-by-character reading (the reference for jsonread.depth)."""
    level = deepest = 0
    in_string = escaped = False
    for ch in text:
        if in_string:
            if escaped:
                escaped = False
            elif ch == "\\":
                escaped = True
            elif ch == '"':
                in_string = False
        elif ch == '"':
            in_string = True
        elif ch in "[{":
            level += 1
            deepest = max(deepest, level)
        elif ch in "]}":
            level -= 1
    return deepest


_JSON = st.recursive(st.none() | st.booleans() | st.floats(allow_nan=False)
                     | st.text(alphabet='ab"\\[]{}\n é'),
                     lambda inner: st.lists(inner) | st.dictionaries(
                         st.text(alphabet='"\\[{ab'), inner), max_leaves=30)


@given(_JSON, st.booleans())
def test_json_depth_skips_brackets_in_strings_and_escaped_quotes(doc, indent):
    text = json.dumps(doc, indent=2 if indent else None, ensure_ascii=False)
    assert jsonread.depth(text) == _depth_by_hand(text)
