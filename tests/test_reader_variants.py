"""The tolerant reader: every way a table comes out of a spreadsheet or a paper reads to the
same SI table as the plain file; what cannot be read safely is refused with its cause.

The values are CoolProp's ideal-gas Cp of nitrogen (CoolProp 6, ``Cp0molar``), rounded to
six significant digits; only their reading is under test here."""

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.ingest import csvtable, dialect
from thermoledger.testing import table_entry, write_source
from thermoledger.testing.coverage import cp0

from .conftest import run_cli, tree_hashes

T = np.array([200.0, 250.0, 298.15, 350.0, 400.0, 500.0, 600.0, 800.0, 1000.0, 1200.0, 1500.0,
              1800.0, 2000.0])
CP = np.array([float(f"{v:.6g}") for v in cp0("Nitrogen", T)])
U = np.round(CP * 0.002, 6)
_H = np.concatenate(([0.0], np.cumsum(np.diff(T) * (CP[1:] + CP[:-1]) / 2)))  # trapezoids
DH = np.round(_H - _H[2], 3)

PLAIN = "T [K],Cp [J/(mol*K)],u(Cp) [J/(mol*K)],H-H298 [J/mol]\n" + "".join(
    f"{float(t)!r},{float(c)!r},{float(u)!r},{float(h)!r}\n" for t, c, u, h in zip(T, CP, U, DH))

CP_UNITS = ["J/(mol*K)", "J mol-1 K-1", "J·K⁻¹·mol⁻¹", "J K^-1 mol^-1", "J/(mol K)",
            "J mol⁻¹ K⁻¹"]
LATIN1_UNITS = ["J/(mol*K)", "J mol-1 K-1", "J K^-1 mol^-1", "J/(mol·K)"]


def read(raw: bytes, **kw):
    text, encoding, found = dialect.decode(raw, "x.csv")
    assert text is not None
    return csvtable.parse_table(text, file="x.csv", molar_mass=28.0134, encoding=encoding, **kw)


def assert_same_table(a, b):
    for col in ("T", "Cp", "u_Cp", "dH", "S"):
        x, y = a.data[col], b.data[col]
        assert np.array_equal(np.isnan(x), np.isnan(y)), col
        ok = ~np.isnan(x)
        np.testing.assert_allclose(x[ok], y[ok], rtol=1e-12, atol=0, err_msg=col)


def header_cells(style, columns):
    """(header cells, units row or None) of (name, unit) pairs in one of the header styles
    tables are written in."""
    if style == "bracket":
        return [f"{n} [{u}]" for n, u in columns], None
    if style == "slash":
        return [f"{n}/({u})" if " " in u or "/" in u else f"{n}/{u}" for n, u in columns], None
    if style == "spaced slash":
        return [f"{n} / ({u})" if "/" in u else f"{n} / {u}" for n, u in columns], None
    if style == "paren":
        return [f"{n} ({u})" for n, u in columns], None
    wrap = {"units row": "{}", "units row [ ]": "[{}]", "units row ( )": "({})"}[style]
    return [n for n, _ in columns], [wrap.format(u) for _, u in columns]


@st.composite
def variants(draw):
    delimiter = draw(st.sampled_from([",", ";", "\t"]))
    mark = draw(st.sampled_from([".", ","])) if delimiter != "," else "."
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "latin-1"]))
    cp_unit = draw(st.sampled_from(LATIN1_UNITS if encoding == "latin-1" else CP_UNITS))
    style = draw(st.sampled_from(["bracket", "slash", "spaced slash", "paren", "units row",
                                  "units row [ ]", "units row ( )"]))
    case = draw(st.sampled_from([str, str.lower, str.upper]))
    head, units_row = header_cells(style, [(case("T"), "K"), (case("Cp"), cp_unit),
                                           (case("u(Cp)"), cp_unit), (case("H-H298"), "J/mol")])
    quote = draw(st.booleans())
    trailing = draw(st.booleans())
    newline = draw(st.sampled_from(["\n", "\r\n"]))
    comments = draw(st.integers(0, 3))
    order = draw(st.permutations(range(len(T))))
    dash = draw(st.sampled_from(["", "-"] + (["–"] if encoding != "latin-1" else [])))
    blank_h = draw(st.sets(st.integers(0, len(T) - 1), max_size=3))

    def num(v):
        text = repr(float(v))
        if draw(st.booleans()):
            text = f"{v:.15e}"
        text = text.replace(".", mark)
        return f'"{text}"' if quote else text

    lines = [f"# exported at 2{i} °C" for i in range(comments)]
    lines.append(delimiter.join(head) + (delimiter if trailing else ""))
    if units_row:
        lines.append(delimiter.join(units_row) + (delimiter if trailing else ""))
    for i in order:
        h = dash if i in blank_h else num(DH[i])
        lines.append(delimiter.join([num(T[i]), num(CP[i]), num(U[i]), h])
                     + (delimiter if trailing else ""))
    text = newline.join(lines) + newline
    return text.encode(encoding), blank_h, dict(delimiter=delimiter, mark=mark,
                                                 style=style, encoding=encoding)


@settings(max_examples=250, deadline=None)
@given(variants())
def test_every_variant_reads_to_the_plain_table(case):
    raw, blank_h, how = case
    plain = read(PLAIN.encode())
    got = read(raw)
    assert [f.code for f in got.findings if f.severity != "info"] == []
    # rows come back in the file's order: compare by temperature
    order = np.argsort(got.data["T"])
    got_sorted = csvtable.ParsedTable(got.data.take(order), (), (), ())
    dh = np.array(plain.data["dH"])
    dh[sorted(blank_h)] = np.nan
    expected = plain.data.with_columns(dH=dh)
    assert_same_table(got_sorted, csvtable.ParsedTable(expected, (), (), ()))
    r = got.reading
    assert r["delimiter"] == dialect.DELIMITERS[how["delimiter"]]
    assert r["decimal_mark"] == ("point" if how["mark"] == "." else "comma")
    assert (r["units_row"] is not None) == how["style"].startswith("units row")
    legacy = how["encoding"] == "latin-1" and max(raw) >= 0x80
    assert r["encoding"] == ("cp1252" if legacy else "utf-8")
    assert [c["quantity"] for c in r["columns"]] == ["T", "Cp", "u(Cp)", "H-H298"]


ALPHABET = st.sampled_from(list(",;\t\n\r#\"'-–.,0123456789 eE+KTCcpPsSuHh[]()/*·⁻¹°^kJmolg"))


@settings(max_examples=400, deadline=None)
@given(st.text(ALPHABET, max_size=300))
def test_random_dialects_never_raise(text):
    p = csvtable.parse_table(text, file="x.csv", molar_mass=30.0)
    assert all(f.file == "x.csv" for f in p.findings)
    assert set(p.data.columns) >= {"T", "Cp", "line"}


@pytest.mark.parametrize("text, code", [
    ("T [K];Cp [J/(mol*K)]\n200;29,11\n298.15;29.12\n", "TAB-DECIMAL-MIXED"),
    ("T [K];Cp [J/(mol*K)]\n200,5;29.11\n300;29.12\n", "TAB-DECIMAL-MIXED"),
])
def test_a_file_whose_decimal_mark_is_inconsistent_is_refused(text, code):
    p = read(text.encode())
    assert [f.code for f in p.findings] == [code] and len(p.data) == 0
    assert "'29,11'" in p.findings[0].message or "'200,5'" in p.findings[0].message


def test_decimal_commas_in_a_comma_file_get_one_finding_naming_the_cause():
    text = "T [K],Cp [J/(mol*K)]\n" + "".join(f"{t},{c:.3f}\n".replace(".", ",")
                                               for t, c in zip(T[3:], CP[3:]))
    p = read(text.encode())
    (f,) = p.findings
    assert f.code == "TAB-NO-ROWS" and len(f.lines) == len(T) - 3
    assert "decimal comma in a comma-delimited file" in f.message


def test_a_units_row_that_disagrees_with_the_header_is_refused():
    p = read(b"T [K],Cp [J/(mol*K)]\ndegC,J/(mol*K)\n200,29.1\n300,29.2\n")
    assert [(f.code, f.line, f.column) for f in p.findings] == [("COL-UNIT-CONFLICT", 2, "T"),
                                                               ("COL-REQUIRED", 1, "T")]


def test_a_dash_in_a_required_cell_is_an_empty_cell():
    p = read(b"T [K],Cp [J/(mol*K)]\n200,29.1\n300,-\n400,29.3\n")
    assert [(f.code, f.line) for f in p.findings] == [("CELL-EMPTY", 3)]


def test_the_columns_mapping_reads_any_header_and_overrides_a_wrong_label():
    text = b"Temperature (deg. C),heat cap.,notes\n26.85,29.12,a\n126.85,29.25,b\n"
    mapping = {"Temperature (deg. C)": {"quantity": "T", "unit": "degC"},
               "heat cap.": {"quantity": "Cp", "unit": "J/(mol*K)"},
               "notes": {"quantity": "ignore"}}
    p = read(text, columns=mapping)
    assert p.findings == ()
    np.testing.assert_allclose(p.data["T"], [300.0, 400.0], rtol=1e-12)
    assert [c["from"] for c in p.reading["columns"]] == ["mapping", "mapping"]
    assert any("by the columns mapping" in n for n in p.notes)
    # a wrong label in the file is corrected by the mapping, and the note says so
    p = read(b"T [K],Cp [J/(mol*K)]\n26.85,29.12\n126.85,29.25\n",
             columns={"T [K]": {"quantity": "T", "unit": "degC"}})
    np.testing.assert_allclose(p.data["T"], [300.0, 400.0], rtol=1e-12)


def test_a_mapping_of_a_header_cell_the_file_does_not_have_is_an_error():
    p = read(b"T [K],Cp [J/(mol*K)]\n300,29.1\n400,29.2\n",
             columns={"Temp": {"quantity": "T", "unit": "K"}})
    assert [(f.code, f.column) for f in p.findings] == [("COL-MAP-UNUSED", "Temp")]


def test_variants_build_into_one_library_that_records_how_each_file_was_read(tmp_path, capsys):
    """End to end through the CLI: three writings of the same nitrogen table give the same
    fitted coefficients, and library.json records how each was read; raw/ is not written."""
    raw = tmp_path / "raw"
    semicolon = PLAIN.replace(",", ";").replace(".", ",")
    paper = "# nitrogen, CoolProp ideal gas\nt\tcp\tu(cp)\tH-H298\nK\tJ K-1 mol-1\tJ K-1 mol-1\tJ/mol\n" \
        + "".join(line.replace(",", "\t") + "\n" for line in PLAIN.splitlines()[1:])
    mapped = PLAIN.replace("T [K]", "Temp").replace("u(Cp) [J/(mol*K)]", "unc")
    texts = {"plain": PLAIN, "semicolon": semicolon, "paper": paper, "mapped": mapped}
    for i, (name, text) in enumerate(texts.items()):
        columns = {"columns": {"Temp": {"quantity": "T", "unit": "K"},
                               "unc": {"quantity": "u(Cp)", "unit": "J/(mol*K)"}}} \
            if name == "mapped" else {}
        write_source(raw, f"lab-{name}", [dict(table_entry(
            f"{name}.csv", f"N2{name}", "N2", "linear", s="191.609 J/(mol*K)", **columns),
            header=[], rows=[], text=text)])
    before = tree_hashes(raw)
    code, out, err = run_cli(capsys, "build", "--raw", raw, "--out", tmp_path / "curated", "--quiet")
    assert code == 0, out + err
    assert tree_hashes(raw) == before
    lib = json.loads((tmp_path / "curated" / "library.json").read_text())
    by_id = {sp["id"]: sp for sp in lib["species"]}
    assert len(by_id) == 4
    ref = by_id["N2plain(g)"]["ranges"]
    for name in texts:
        sp = by_id[f"N2{name}(g)"]
        for a, b in zip(sp["ranges"], ref):
            np.testing.assert_allclose(a["coefficients"], b["coefficients"], rtol=1e-9)
    reading = {name: by_id[f"N2{name}(g)"]["sources"][0]["reading"] for name in texts}
    assert reading["semicolon"]["delimiter"] == "semicolon"
    assert reading["semicolon"]["decimal_mark"] == "comma"
    assert reading["paper"]["comment_lines"] == [1] and reading["paper"]["units_row"] == 3
    assert reading["paper"]["delimiter"] == "tab"
    assert [c["from"] for c in reading["mapped"]["columns"]] == \
        ["mapping", "header", "mapping", "header"]


ROWS = [(200.0, 29.1075), (298.15, 29.1253), (400.0, 29.2497)]


def _rows(delimiter=",", mark=".", end=""):
    return "".join(delimiter.join(f"{v!r}".replace(".", mark) for v in row) + end + "\n"
                   for row in ROWS)


#: the layouts a new user's spreadsheets and papers produced that the reader once refused
REFUSED_BEFORE = {
    "semicolon, decimal comma": "T [K];Cp [J/(mol*K)]\n" + _rows(";", ","),
    "semicolon, decimal point": "T [K];Cp [J/(mol*K)]\n" + _rows(";"),
    "tab-separated": "T [K]\tCp [J/(mol*K)]\n" + _rows("\t"),
    "comment lines above the header": "# lab X\n# run 7\nT [K],Cp [J/(mol*K)]\n" + _rows(),
    "units row": "T,Cp\nK,J/(mol*K)\n" + _rows(),
    "units row in parentheses": "T,Cp\n(K),(J/(mol*K))\n" + _rows(),
    "T/K, Cp/(J K-1 mol-1)": "T/K,Cp/(J K-1 mol-1)\n" + _rows(),
    "T / K, Cp / J·K⁻¹·mol⁻¹": "T / K,Cp / J·K⁻¹·mol⁻¹\n" + _rows(),
    "Cp [J mol-1 K-1]": "T [K],Cp [J mol-1 K-1]\n" + _rows(),
    "a dash in an optional cell": "T [K],Cp [J/(mol*K)],S [J/(mol*K)]\n"
    + "".join(f"{t!r},{c!r},-\n" for t, c in ROWS),
    "a trailing delimiter": "T [K],Cp [J/(mol*K)],\n" + _rows(end=","),
    "lower-case t and cp": "t [K],cp [J/(mol*K)]\n" + _rows(),
}


@pytest.mark.parametrize("name", list(REFUSED_BEFORE))
def test_layouts_once_refused_now_read_to_the_plain_table(name):
    plain = read(("T [K],Cp [J/(mol*K)]\n" + _rows()).encode())
    got = read(REFUSED_BEFORE[name].encode())
    assert got.findings == () and len(got.data) == 3
    assert_same_table(got, plain)


def test_latin1_text_reads_to_the_plain_table_with_an_info_finding():
    text = "# messung bei 21 °C\nT [K],Cp [J/(mol*K)]\n" + _rows()
    raw = text.encode("latin-1")
    decoded, encoding, found = dialect.decode(raw, "x.csv")
    assert [f.code for f in found] == ["TAB-LEGACY-ENCODING"] and encoding == "cp1252"
    assert_same_table(read(raw), read(("T [K],Cp [J/(mol*K)]\n" + _rows()).encode()))


def test_the_build_summary_and_the_report_show_the_root_cause_first(tmp_path, capsys):
    raw = tmp_path / "raw"
    commas = "T [K],Cp [J/(mol*K)]\n" + "".join(f"{t:.2f},{c:.4f}\n".replace(".", ",")
                                                   for t, c in zip(T, CP))
    write_source(raw, "lab", [dict(table_entry("n2.csv", "N2", "N2", "linear",
                                               s="191.609 J/(mol*K)"),
                                   header=[], rows=[], text=commas)])
    code, out, err = run_cli(capsys, "build", "--raw", raw, "--out", tmp_path / "cur")
    (line,) = [x for x in out.splitlines() if "QUARANTINED" in x]
    assert "TAB-NO-ROWS" in line and "none of the 13 data row(s)" in line
    assert "decimal comma in a comma-delimited file" in line
    report = (tmp_path / "cur" / "report" / "index.html").read_text()
    row = report[report.index("n2.csv"):]
    assert row[:row.index("</tr>")].count("TAB-NO-ROWS") == 1 and \
        "TOO-FEW-POINTS" not in row[:row.index("</tr>")]


_CELL = st.text(alphabet="0123456789.eE-+ TCpK[]()/*ab", max_size=8)


@st.composite
def _delimited_lines(draw):
    """Lines of cells joined by one delimiter, as many cells on every line."""
    delimiter, width = draw(st.sampled_from([",", ";", "\t"])), draw(st.integers(2, 5))
    rows = st.lists(_CELL, min_size=width, max_size=width).map(delimiter.join)
    return draw(st.lists(rows, min_size=1, max_size=45))


@given(st.one_of(_delimited_lines(), st.lists(st.text(alphabet="0123456789.eE-+ TCpK[]()/*,;\tab",
                                          min_size=1, max_size=30), min_size=1, max_size=45)))
def test_the_quick_delimiter_answer_is_what_csv_sniffer_says(lines):
    """sniff_delimiter answers at once when one candidate delimiter stands on every line as
    often; that answer must be csv.Sniffer's own."""
    import csv

    from thermoledger.ingest.dialect import DELIMITERS, SNIFF_LINES, sniff_delimiter

    sample = "\n".join(lines[:SNIFF_LINES])
    try:
        sniffed = csv.Sniffer().sniff(sample, delimiters="".join(DELIMITERS)).delimiter
    except csv.Error:
        sniffed = ","
    if not any(d in sample for d in DELIMITERS):
        sniffed = ","
    assert sniff_delimiter(lines) == sniffed
