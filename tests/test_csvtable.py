"""Parsing of raw CSV tables: conversions, findings for bad cells, never a traceback."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.core import constants
from thermoledger.ingest import csvtable, dialect


def parse(text, **kw):
    return csvtable.parse_table(text, file="src/t.csv", **kw)


def codes(parsed):
    return [(f.code, f.line, f.column) for f in parsed.findings]


def test_clean_table_in_si():
    p = parse("T [K],Cp [J/(mol*K)],u(Cp) [J/(mol*K)]\n200,29.11,0.03\n298.15,29.12,0.03\n")
    assert not p.findings
    np.testing.assert_array_equal(p.data["line"], [2, 3])
    np.testing.assert_allclose(p.data["T"], [200, 298.15])
    np.testing.assert_allclose(p.data["u_Cp"], [0.03, 0.03])


def test_calorie_and_celsius_columns_are_converted_with_notes():
    p = parse("T [degC],Cp [cal/(mol*K)]\n25,7.0\n")
    assert p.data["T"][0] == pytest.approx(298.15)
    assert p.data["Cp"][0] == pytest.approx(7.0 * 4.184)
    assert any("thermochemical calorie" in n for n in p.notes)


def test_mass_based_cp_uses_molar_mass():
    p = parse("T [K],Cp [J/(g*K)]\n300,1.0\n", molar_mass=44.0095)
    assert p.data["Cp"][0] == pytest.approx(44.0095)
    assert any("molar mass" in n for n in p.notes)


def test_entropy_column_moved_from_atm_to_bar():
    p = parse("T [K],Cp [J/(mol*K)],S [J/(mol*K)]\n300,29.0,191.5\n",
              standard_pressure=constants.ATMOSPHERE)
    assert p.data["S"][0] == pytest.approx(191.5 + constants.ENTROPY_ATM_TO_BAR, rel=1e-12)


def test_non_numeric_cell_names_line_and_column():
    p = parse("T [K],Cp [J/(mol*K)]\n200,29.1\n300,abc\n400,29.2\n")
    assert codes(p) == [("CELL-NOT-NUMBER", 3, "Cp")]
    assert "abc" in p.findings[0].message
    assert list(p.data["line"]) == [2, 4]


@pytest.mark.parametrize("cell", ["nan", "inf", "-inf", "1e400", "0x1A", "1_000", "1.234,5"])
def test_non_finite_or_odd_numbers_are_rejected(cell):
    p = parse(f'T [K],Cp [J/(mol*K)]\n200,"{cell}"\n300,29.2\n')
    assert [c for c, *_ in codes(p)] == ["CELL-NOT-NUMBER"]


@pytest.mark.parametrize("cell", ["29,1", "1,234"])
def test_a_comma_in_a_number_of_a_comma_delimited_file_is_refused(cell):
    p = parse(f'T [K],Cp [J/(mol*K)]\n200,"{cell}"\n300,29.2\n')
    assert codes(p) == [("CELL-AMBIGUOUS", 2, "Cp")]
    assert list(p.data["line"]) == [3]


def test_missing_cp_column():
    p = parse("T [K],S [J/(mol*K)]\n300,0.05\n")
    assert ("COL-REQUIRED", 1, "Cp") in codes(p)
    assert "expected" not in p.findings[0].message  # message is plain; expectation separate
    assert p.findings[0].expected == "a column 'Cp [unit]'"


def test_an_enthalpy_increment_table_needs_no_cp_column():
    p = parse("T [K],H-H298 [kJ/mol]\n300,0.05\n400,2.5\n")
    assert codes(p) == []
    assert np.isnan(p.data["Cp"]).all() and list(p.data["dH"]) == [50.0, 2500.0]


def test_unknown_unit():
    p = parse("T [K],Cp [J/(mol*Kelvinz)]\n300,29\n")
    (f,) = p.findings
    assert (f.code, f.line, f.column, f.seen) == ("UNIT-UNKNOWN", 1, "Cp", "J/(mol*Kelvinz)")


def test_wrong_dimension():
    p = parse("T [K],Cp [kJ/mol]\n300,29\n")
    assert [f.code for f in p.findings] == ["UNIT-DIMENSION"]


def test_column_without_unit_and_unknown_column():
    p = parse("T,Cp [J/(mol*K)],Cv [J/(mol*K)]\n300,29,21\n")
    assert ("COL-NO-UNIT", 1, "T") in codes(p)
    assert ("COL-UNKNOWN", 1, "Cv") in codes(p)


def test_row_width():
    p = parse("T [K],Cp [J/(mol*K)]\n300,29,1\n400,30\n")
    assert codes(p) == [("ROW-WIDTH", 2, "")]


def test_partial_uncertainty_column():
    p = parse("T [K],Cp [J/(mol*K)],u(Cp) [J/(mol*K)]\n300,29,0.1\n400,30,\n")
    assert codes(p) == [("UCP-PARTIAL", 3, "u(Cp)")]


@pytest.mark.parametrize("text, code", [("", "TAB-EMPTY"), ("T [K],Cp [J/(mol*K)]\n", "TAB-EMPTY"),
                                        ("a\0b\n", "TAB-SYNTAX")])
def test_empty_and_headers_only(text, code):
    assert code in [c for c, *_ in codes(parse(text))]


def test_bytes_that_are_text_in_no_encoding_name_their_line():
    # 0x81 is undefined in Windows-1252 and a control code in Latin-1: not text
    text, _, found = dialect.decode(b"T [K],Cp [J/(mol*K)]\n300,29\n\xff\x81,1\n", "x.csv")
    assert text is None
    assert (found[0].code, found[0].line) == ("TAB-ENCODING", 3)


def test_latin1_text_is_read_with_an_info_finding():
    text, _, found = dialect.decode("T [°C],Cp [J/(mol*K)]\n25,29.1\n".encode("latin-1"), "x.csv")
    assert text.startswith("T [°C]")
    assert [(f.code, f.severity, f.line) for f in found] == [("TAB-LEGACY-ENCODING", "info", 1)]


@settings(max_examples=300, deadline=None)
@given(st.binary(max_size=300))
def test_random_bytes_never_raise(raw):
    text, _, found = dialect.decode(raw, "x.csv")
    if text is not None:
        p = parse(text, molar_mass=30.0)
        assert list(p.data.columns)[:9] == ["line", "T", "Cp", "u_Cp", "dH", "S", "u_dH", "u_S",
                                            "gef"]
        assert list(p.data.columns)[9:] in ([], ["phase"])


cells = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr),
                  st.text(alphabet="0123456789.eE+-, naif\"", max_size=8))


@settings(max_examples=300, deadline=None)
@given(st.lists(st.lists(cells, min_size=1, max_size=4), max_size=6),
       st.sampled_from(["T [K],Cp [J/(mol*K)]", "T [degF],Cp [cal/(g*K)],u(Cp) [J/(g*K)]",
                        "T [K],Cp [J/(mol*K)],S [J/(mol*K)],H-H298 [kJ/mol]"]))
def test_random_cells_give_findings_not_tracebacks(rows, header):
    text = header + "\n" + "\n".join(",".join(r) for r in rows)
    p = parse(text, molar_mass=28.0)
    n_cols = header.count(",") + 1
    good_rows = sum(1 for r in rows if len(r) == n_cols)
    assert len(p.data) <= max(good_rows, 0) + text.count("\n")
    assert np.all(np.isfinite(p.data["T"]))  # only finite numbers get through


CELLS = st.one_of(
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.integers(-10**6, 10**6).map(str),
    st.sampled_from(["", "-", "1e999", "nan", "1.5.2", ".5", "5.", "+3e-2", "1_0", "0x1A",
                     "1,5", "2,5e3", "1\n2", " 7", "٣", "1.0e", "−1"]))


@settings(max_examples=400, deadline=None)
@given(st.lists(st.lists(CELLS, min_size=2, max_size=3), min_size=1, max_size=12),
       st.sampled_from([".", ","]))
def test_the_one_pass_reader_gives_what_the_cell_by_cell_reader_gives(rows, mark):
    """A clean table is read one column at a time (one regular expression per column); it
    must give exactly the numbers and lines of the cell-by-cell reader, and leave every
    table with a bad cell or row to it."""
    from thermoledger.ingest.header import Column

    usable = [(Column(0, "T [K]", "T", "K", "header"), "molar"),
              (Column(1, "Cp [J/(mol*K)]", "Cp", "J/(mol*K)", "header"), "molar")]
    numbered = [(k + 2, cells) for k, cells in enumerate(rows)]
    clean = csvtable._read_clean(numbered, 2, usable, mark)
    values, lines, problems = csvtable._read_each(numbered, 2, usable, mark, ";", "x.csv")
    if clean is None:       # the cells the reader gets are stripped (_records)
        assert problems or any(len(c) != 2 or any(x != x.strip() for x in c)
                               for _, c in numbered)
    else:
        assert problems == [] and clean[1] == lines
        assert [list(map(repr, v)) for v in clean[0]] == [list(map(repr, v)) for v in values]


def _records_by_csv(lines, numbers, delimiter):
    """What the csv module makes of the content lines: the reference of the split reader."""
    import csv

    reader = csv.reader(lines, delimiter=delimiter, strict=True)
    out = []
    for cells in reader:
        if any(c.strip() for c in cells):
            out.append((numbers[reader.line_num - 1], [c.strip() for c in cells]))
    return out


@settings(max_examples=400, deadline=None)
@given(st.lists(st.text(alphabet=",;\t .-eE019aé\u2028\x0b\"", min_size=0, max_size=12),
                min_size=1, max_size=10),
       st.sampled_from([",", ";", "\t"]))
def test_lines_split_by_their_delimiter_are_the_rows_the_csv_module_reads(lines, delimiter):
    """A table without quotes is split by its delimiter alone; the rows, their cells and
    their line numbers are what the csv module reads (a quoted table goes to it)."""
    import csv

    numbers = [3 * k + 1 for k in range(len(lines))]
    try:
        expected = _records_by_csv(lines, numbers, delimiter)
    except csv.Error:
        return                            # refused (TAB-SYNTAX) either way: only quotes do it
    assert csvtable._records(lines, numbers, delimiter) == expected


@settings(max_examples=400, deadline=None)
@given(st.text(alphabet=",; \t#\r\n\x0b\x1c\u2028\u3000.1e", max_size=40))
def test_content_lines_are_those_of_the_line_by_line_reading(text):
    """Text without '#' is split into content lines in one pass; the lines, their numbers
    and the comment lines are those of reading line by line (the blank ones by strip)."""
    import re

    expected = dialect.lines_one_by_one(re.split(r"\r\n|\r|\n", text))
    assert dialect.content_lines(text) == expected


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet=",;\t .-1aé", min_size=1, max_size=12),
       st.lists(st.text(alphabet=",;\t.-eE019", min_size=1, max_size=12), max_size=8),
       st.sampled_from([",", ";", "\t"]))
def test_rows_under_a_header_with_spaces_are_split_as_the_csv_module_splits_them(
        header, lines, delimiter):
    """The usual table: spaces in its header, none below it. The rows below are split
    without stripping their cells; they must be what the csv module reads."""
    lines = [header] + lines
    numbers = [2 * k + 1 for k in range(len(lines))]
    assert csvtable._records(lines, numbers, delimiter) == _records_by_csv(lines, numbers,
                                                                           delimiter)


def _same_parse(a, b) -> bool:
    """Whether two ParsedTables hold the same rows (to the last bit, NaN where NaN), header,
    notes, findings and record of how the file was read."""
    names = ("T", "Cp", "u_Cp", "H-H298", "S", "line")
    same_rows = len(a.data) == len(b.data) and all(
        np.array_equal(a.data[c], b.data[c], equal_nan=c != "line") for c in names
        if c in a.data or c in b.data)
    return same_rows and (a.columns, a.notes, a.findings, a.reading) == \
        (b.columns, b.notes, b.findings, b.reading)


BLOCK_CELLS = st.one_of(
    st.floats(1e-3, 1e5, allow_nan=False).map(lambda v: f"{v:.6g}"),
    st.integers(-50, 5000).map(str),
    st.sampled_from(["", "-", "1e999", "nan", "inf", "1.5.2", ".5", "5.", "+3e-2", "1_0",
                     "0x1A", " 7", "7 ", "٣", "1.0e", "−1", "\"2\"", "'2'", "2;3", "3\t4",
                     "g", "cr"]))
BLOCK_HEADERS = st.sampled_from([
    ["T [K]", "Cp [J/(mol*K)]"], ["T [K]", "Cp [J/(mol*K)]", "u(Cp) [J/(mol*K)]"],
    [" T [degC] ", "Cp [cal/(mol*K)]"], ["T [K]", "Cp [J/(g*K)]"], ["T [K]", "H-H298 [kJ/mol]"],
    ["T [K]", "Cp [J/(mol*K)]", "S [J/(mol*K)]"], ["T [K]", "Cp [J/(mol*K)]", "phase"],
    ["T [K]", "Cp [J/(mol*K)]", ""], ["T", "Cp"], ["T [K]", "notes"], ["T [K]", "Cp [K]"],
    ["T [K]", "Cp [J/(mol*K)]", "T [K]"]])


@settings(max_examples=500, deadline=None)
@given(BLOCK_HEADERS, st.lists(st.lists(BLOCK_CELLS, min_size=1, max_size=4), min_size=0,
                               max_size=8),
       st.sampled_from(["\n", "", "\n\n", "\r\n"]), st.sampled_from(["", "\n", "# c\n"]),
       st.booleans())
def test_a_numeric_block_is_read_as_the_line_by_line_reader_reads_it(header, rows, end, lead,
                                                                      units_row):
    """A file that is a header line over plain numbers is split and read as one block
    (``_numeric_block``); whatever the file, the table, notes, findings and reading record
    are those the line-by-line reader gives, to the last bit."""
    lines = [",".join(header)] + (["K,J/(mol*K)"] if units_row else []) + \
        [",".join(r) for r in rows]
    text = lead + "\n".join(lines) + end
    for molar_mass in (None, 28.0):
        fast = csvtable.parse_table(text, file="x.csv", molar_mass=molar_mass)
        slow = csvtable.parse_table(text, file="x.csv", molar_mass=molar_mass, _fast=False)
        assert _same_parse(fast, slow), text


def test_a_catalogue_table_is_read_as_one_block():
    """The form of a computed catalogue's table takes the block reader, and gives the
    line-by-line reader's table."""
    text = "T [K],Cp [J/(mol*K)]\n" + "".join(f"{200 + 10 * k},{29.1 + 0.01 * k:.6f}\n"
                                            for k in range(101))
    header, (numbers, rows) = csvtable._numeric_block(text)
    assert header == ["T [K]", "Cp [J/(mol*K)]"] and rows == 101 and numbers[:2] == [200.0, 29.1]
    fast = csvtable.parse_table(text, file="x.csv")
    assert _same_parse(fast, csvtable.parse_table(text, file="x.csv", _fast=False))
    assert list(fast.data["line"]) == list(range(2, 103))
    for spoilt in (text.replace("\n", "\r\n"), text + "\n", "# c\n" + text,
                   text.replace("29.1", "29,1", 1), text.replace("200,", "200, ", 1)):
        assert csvtable._numeric_block(spoilt) is None
