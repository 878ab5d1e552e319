"""Read and parse one heat-capacity CSV table (raw text -> clean SI table).

Format (our own, read tolerantly): a header row naming the quantities ``T``, ``Cp``,
``H-H298``, ``S`` and their standard uncertainties ``u(Cp)``, ``u(H-H298)``, ``u(S)``, each
with its unit (``header.py``: bracket, ``Q/unit`` and ``Q (unit)`` styles, or a units row),
then rows of plain decimal numbers; comma, semicolon or tab between cells, a decimal comma
where the delimiter is not a comma, ``#`` comment lines (``dialect.py``). ``T`` and ``Cp``
are required (``H-H298`` may stand in for ``Cp``: an enthalpy-increment table); a ``phase``
column names the phase of each row; ``-(G-H298)/T`` is the Gibbs energy function; empty (or
dash) cells are allowed in the optional columns only. Parsing never
raises on bad input: it returns the rows it could read, how it read them, and a finding for
each problem — or one finding naming the cause when no row could be read.
"""

import csv
import math
import re
from dataclasses import dataclass, field, replace
from functools import lru_cache
from operator import itemgetter

import numpy as np

from ..core import constants, phases, units
from ..core.errors import UnitError
from ..core.findings import Finding, clip, finding
from ..core.limits import MAX_COLUMNS, MAX_ROWS, PHYSICAL_RANGE
from ..core.records import DATA_COLUMNS
from ..core.rows import Rows
from ..physics import statmech
from . import dialect as dialects
from .header import COLUMNS, layout, looks_like_units_row

#: per-row findings of one code listed one by one before the rest are summed up in one
MAX_ROW_FINDINGS = 20

#: what an optional cell may hold to say "no value"
EMPTY_MARKS = ("", "-", "–", "—")

#: findings about single rows; when no row at all can be read they give way to one
#: finding naming the cause
ROW_CODES = ("ROW-WIDTH", "CELL-NOT-NUMBER", "CELL-EMPTY", "CELL-AMBIGUOUS")


@dataclass(frozen=True)
class ParsedTable:
    """One CSV table parsed into SI: rows, header as written, conversion notes, findings,
    and how the file was read (``reading``, recorded in the provenance)."""

    data: Rows                # columns DATA_COLUMNS, SI units
    columns: tuple            # header cells as written
    notes: tuple              # conversions and assumptions
    findings: tuple
    reading: dict = field(default_factory=dict)


def empty_rows() -> Rows:
    """A table with the documented columns and no rows."""
    return Rows({c: np.empty(0, dtype="int64" if c == "line" else float) for c in DATA_COLUMNS})


def parse_number(cell: str, mark: str = ".") -> float | None:
    """A finite float from a plain decimal literal (with ``mark`` as its decimal mark), else
    None (no 'nan', 'inf', '1_0', '0x1', no thousands separators)."""
    text = cell.strip()
    if mark == ",":
        if "." in text:
            return None
        text = text.replace(",", ".", 1)
    if not units.is_plain_number(text):
        return None
    value = float(text)
    return value if math.isfinite(value) else None


def _refused(finding_, reading=None):
    return ParsedTable(empty_rows(), (), (), (finding_,), dict(reading or {}))


#: the ASCII characters that ``str.strip`` takes off a cell split by each delimiter (line
#: breaks are gone already; a tab is no cell's part when it is the delimiter)
_SPACE = {d: re.compile("[" + re.escape("".join(c for c in " \t\x0b\x0c\x1c\x1d\x1e\x1f"
                                              if c != d)) + "]")
          for d in (",", ";", "\t")}


def _records(lines, numbers, delimiter):
    """[(line number, cells)] of the content lines, each cell stripped, lines of empty cells
    left out. Lines without a quote and no longer than a csv field may be split by the
    delimiter alone: the csv module would split them so, one record per line."""
    limit = csv.field_size_limit()
    joined = "\n".join(lines)
    if '"' not in joined and max(map(len, lines), default=0) <= limit:
        if lines and joined.isascii() and not _SPACE[delimiter].search(joined, len(lines[0])):
            # no cell below the first line to strip: a line of delimiters alone is a line
            # of empty cells
            first = [c.strip() for c in lines[0].split(delimiter)]
            out = [(numbers[0], first)] if any(first) else []
            out += [(number, line.split(delimiter)) for number, line in
                    zip(numbers[1:], lines[1:]) if line.strip(delimiter)]
            return out[:MAX_ROWS + 2]                # never more than the limit
        out = []
        for number, line in zip(numbers, lines):
            cells = [c.strip() for c in line.split(delimiter)]
            if any(cells):
                out.append((number, cells))
                if len(out) > MAX_ROWS + 1:          # never more than the limit
                    break
        return out
    reader = csv.reader(lines, delimiter=delimiter, strict=True)
    out = []
    for cells in reader:
        if not any(c.strip() for c in cells):
            continue
        out.append((numbers[reader.line_num - 1], [c.strip() for c in cells]))
        if len(out) > MAX_ROWS + 1:                # never more than the limit
            break
    return out


def parse_table(text: str, *, file: str, molar_mass: float | None = None,
                standard_pressure: float = constants.STANDARD_PRESSURE,
                phase: str = "g", columns: dict | None = None,
                encoding: str = "utf-8", _fast: bool = True) -> ParsedTable:
    """Parse CSV ``text`` into a clean table in SI units.

    Parameters
    ----------
    text : str, the decoded CSV
    file : str, the path shown in findings
    molar_mass : float [g/mol], for mass-based units
    standard_pressure : float [Pa], the pressure the S column refers to
    phase : str, 'g' for an ideal gas (its S column is moved to 1 bar)
    columns : the table's ``columns`` mapping of source.json (header cell -> quantity, unit)
    encoding : how the bytes were decoded (recorded in ``reading``)

    A file that is one comma-separated header line over a block of plain numbers (the form
    of a computed catalogue's tables) is split and read as one block (``_numeric_block``);
    the result is the one the line-by-line reader gives (tests/test_csvtable.py).

    Notes
    -----
    Temperatures are converted affinely (degC, degF); a bare 'cal' is read as
    the thermochemical calorie (4.184 J); per-mass units are multiplied by the
    molar mass; an ideal-gas S column tabulated at pressure p is moved to
    1 bar by S(1 bar) = S(p) + R ln(p / 1 bar).
    """
    findings: list[Finding] = []
    notes: list[str] = []
    if "\0" in text:
        line = text[: text.index("\0")].count("\n") + 1
        return _refused(finding("TAB-SYNTAX", "the file contains NUL characters (a binary file?)",
                                file=file, line=line, expected="plain comma-separated text"))
    block = _numeric_block(text) if _fast else None
    if block is not None:              # one header line over plain numbers (rows: the header)
        header, block = block
        delimiter, header_line, units_row, rows = ",", 1, None, [(1, header)]
        reading = dialects.Dialect(encoding, delimiter, ".", ())
    else:
        lines, numbers, comments = dialects.content_lines(text)
        delimiter = dialects.sniff_delimiter(lines)
        reading = dialects.Dialect(encoding, delimiter, ".", comments)
        try:
            rows = _records(lines[: MAX_ROWS + 3], numbers, delimiter)
        except csv.Error as exc:
            return _refused(finding("TAB-SYNTAX", f"the CSV cannot be split into rows ({exc})",
                                    file=file), reading.to_dict())
        if not rows:
            return _refused(finding("TAB-EMPTY", "the file is empty", file=file,
                                    expected="a header row and data rows"), reading.to_dict())
        header_line, header = rows[0]
        while header and not header[-1]:                # a trailing delimiter
            header = header[:-1]
        units_row = None
        if len(rows) > 1 and looks_like_units_row(
                rows[1][1], lambda c: parse_number(c) is not None
                or parse_number(c, ",") is not None):
            units_row = rows[1][1]
            rows = [rows[0]] + rows[2:]
    if len(header) > MAX_COLUMNS or len(rows) - 1 > MAX_ROWS:
        return _refused(finding(
            "TAB-TOO-LARGE", f"{len(header)} columns and {len(rows) - 1}"
            f"{'+' if len(rows) > MAX_ROWS + 1 else ''} data rows; the limit is "
            f"{MAX_COLUMNS} columns and {MAX_ROWS} rows", file=file,
            seen=f"{len(header)} columns, {len(rows) - 1} rows",
            expected=f"<= {MAX_COLUMNS} columns, <= {MAX_ROWS} rows"), reading.to_dict())
    cols, problems = layout(header, units_row, columns, file, header_line)
    findings += problems
    numeric = [(line, c.header, cells[c.position]) for line, cells in rows[1:] for c in cols
               if c.position < len(cells)] if delimiter != "," else ()  # (then no mark but '.')
    mark, mixed = dialects.decimal_mark(numeric, delimiter, file)
    if mark is None:
        return _refused(mixed[0], reading.to_dict())
    reading = replace(reading, decimal_mark=mark)
    usable = []
    for col in cols:
        kind = COLUMNS[col.quantity][1]
        if kind is None:
            usable.append((col, None))
            continue
        try:
            basis = units.check_unit(col.unit, kind)
            if basis == "mass" and molar_mass is None:
                raise UnitError(f"unit '{col.unit}' is per mass but the formula gave no molar mass")
        except UnitError as exc:
            code = getattr(exc, "code", None) or (
                "UNIT-UNKNOWN" if "cannot be read" in exc.what else "UNIT-DIMENSION")
            findings.append(finding(code, exc.what, file=file, line=header_line,
                                    column=col.quantity, seen=clip(col.unit, 40),
                                    expected=exc.expected or kind))
            continue
        usable.append((col, basis))
    record = {**reading.to_dict(), "header_line": header_line,
              "units_row": header_line + 1 if units_row is not None else None,
              "columns": [c.to_dict() for c in cols]}
    notes += [f"column '{c.header}' read as {c.quantity} [{c.unit}] by the columns mapping of "
              "source.json" for c in cols if c.origin == "mapping"]
    if len(rows) == 1 and block is None:
        findings.append(finding("TAB-EMPTY", "the table has a header but no data rows",
                                file=file, line=header_line, expected="data rows"))
    have = {c.quantity for c, _ in usable}
    if "T" not in have or not have & {"Cp", "H-H298"}:
        rows, block = rows[:1], None    # no rows without T and Cp (or H-H298)
    if block is not None:
        if any(COLUMNS[c.quantity][1] is None for c, _ in usable):     # a phase column
            return parse_table(text, file=file, molar_mass=molar_mass,
                               standard_pressure=standard_pressure, phase=phase,
                               columns=columns, encoding=encoding, _fast=False)
        values, lines_read, row_problems = _block_values(block, len(header), usable)
    else:
        values, lines_read, row_problems = _read_rows(rows[1:], len(header), usable, mark,
                                                      delimiter, file)
    if not lines_read and len(row_problems) > 1:
        row_problems = [_root_cause(row_problems, len(rows) - 1, len(header), delimiter, file)]
    findings += row_problems
    blank = np.full(len(lines_read), np.nan)
    frame = {c: blank.copy() for c in DATA_COLUMNS if c != "line"}
    frame["line"] = np.asarray(lines_read, dtype="int64")
    keep = np.ones(len(lines_read), dtype=bool)
    for k, (col, basis) in enumerate(usable):
        name, unit = col.quantity, col.unit
        internal, kind, _ = COLUMNS[name]
        if kind is None:
            frame[internal] = np.asarray(values[k], dtype=object)
            continue
        frame[internal] = units.to_si(values[k], unit, kind, molar_mass)
        notes += _conversion_notes(name, unit, kind, basis, molar_mass)
        bad = _out_of_range(frame[internal], internal)
        for i in np.flatnonzero(bad):
            lo, hi = PHYSICAL_RANGE[internal]
            findings.append(finding(
                "VALUE-RANGE", f"{name} = {values[k][i]:.6g} [{unit}] is "
                f"{frame[internal][i]:.6g} {units.KINDS[kind][2]} in SI, outside the physical "
                "range of the column; the row is left out", file=file, line=int(lines_read[i]),
                column=name, seen=f"{values[k][i]:.6g}",
                expected=f"{lo:g} to {hi:g} {units.KINDS[kind][2]}"))
        keep &= ~bad
    frame = {c: v[keep] for c, v in frame.items()}
    if phase == "g" and not np.isnan(frame["S"]).all():
        frame["S"], note = at_one_bar(frame["S"], standard_pressure, "S")
        notes += [note] if note else []
    data = Rows({c: frame[c] for c in DATA_COLUMNS + (("phase",) if "phase" in frame else ())})
    if any(c.quantity == "u(Cp)" for c, _ in usable) and len(data):
        given = data.given("u_Cp")
        if given.any() and not given.all():
            first = int(data["line"][~given][0])
            findings.append(finding("UCP-PARTIAL", f"u(Cp) is missing on {int((~given).sum())} "
                                    f"of {len(data)} rows, first at line {first}", file=file,
                                    line=first, column="u(Cp)", expected="all rows or none"))
    return ParsedTable(data, tuple(header), tuple(notes), tuple(_summarise(findings)), record)


def at_one_bar(entropy, pressure: float, label: str):
    """(entropy moved to 1 bar, the note saying so or None): an ideal gas's entropy [J/(mol K)],
    a number or a column, tabulated at ``pressure`` [Pa]: S(1 bar) = S(p) + R ln(p / 1 bar).
    Unchanged at 1 bar."""
    if entropy is None or pressure == constants.STANDARD_PRESSURE:
        return entropy, None
    shift = statmech.entropy_shift_to_standard(pressure)
    return entropy + shift, f"{label} moved from {pressure:g} Pa to 1 bar: {shift:+.4f} J/(mol*K)"


def _read_clean(rows, width, usable, mark):
    """(values per usable column, lines read) when every row has ``width`` cells and every
    usable cell is a plain finite number, read in one pass per column; else None (the
    row-by-row reader then says what is wrong where). The numbers are those ``parse_number``
    gives cell by cell."""
    if not rows or any(COLUMNS[c.quantity][1] is None for c, _ in usable):
        return None
    lines, records = zip(*rows)
    if set(map(len, records)) != {width}:
        return None
    values = []
    for col, _ in usable:
        cells = list(map(itemgetter(col.position), records))
        if mark == ",":
            if any("." in c for c in cells):
                return None
            cells = [c.replace(",", ".", 1) for c in cells]
        if not units.all_plain_numbers(cells):
            return None
        column = list(map(float, cells))
        if not all(map(math.isfinite, column)):
            return None
        values.append(column)
    return values, list(lines)


#: what a file may not hold to be read as one block: quotes, comments, other delimiters,
#: carriage returns and the whitespace ``str.strip`` takes off a cell (a space only in the
#: header line, whose cells are stripped)
_NOT_A_BLOCK = re.compile("[\"'#;\t\r\x0b\x0c\x1c-\x1f]")


@lru_cache(maxsize=64)
def _block_pattern(width: int):
    """Rows of ``width`` plain numbers (units.is_plain_number) between commas, one a line,
    the last line break optional."""
    row = rf"{units.PLAIN_NUMBER}(?:,{units.PLAIN_NUMBER}){{{width - 1}}}"
    return re.compile(rf"(?:{row}\n)*{row}\n?")


def _numeric_block(text: str):
    """(header cells, (numbers, rows)) of ``text`` when it is one comma-separated header
    line (its cells stripped, none of them empty at the end) over 1 to MAX_ROWS lines of
    as many plain finite numbers, in ASCII, with no blank line; else None. The numbers are
    those of every cell row by row, each read by ``float`` as ``parse_number`` reads it."""
    if len(text) > csv.field_size_limit() or not text.isascii() or _NOT_A_BLOCK.search(text):
        return None                   # (a longer line is the csv module's to refuse)
    first, _, body = text.partition("\n")
    header = [c.strip() for c in first.split(",")]
    width = len(header)
    if width < 2 or width > MAX_COLUMNS or not header[-1] or " " in body or \
            body.count("\n") > MAX_ROWS + 1 or not _block_pattern(width).fullmatch(body):
        return None
    numbers = list(map(float, body.replace("\n", ",").rstrip(",").split(",")))
    rows = len(numbers) // width
    if rows > MAX_ROWS or not all(map(math.isfinite, numbers)):
        return None
    return header, (numbers, rows)


def _block_values(block, width, usable):
    """``_read_rows`` of a ``_numeric_block``: every row read, from line 2 on."""
    numbers, n = block
    return [numbers[c.position::width] for c, _ in usable], list(range(2, n + 2)), []


def _read_rows(rows, width, usable, mark, delimiter, file):
    """(values per usable column, lines read, findings) of the data rows."""
    clean = _read_clean(rows, width, usable, mark)
    return (*clean, []) if clean is not None else _read_each(rows, width, usable, mark,
                                                             delimiter, file)


def _read_each(rows, width, usable, mark, delimiter, file):
    """``_read_rows`` row by row and cell by cell, with a finding for each bad cell."""
    values = [[] for _ in usable]
    lines, problems = [], []
    for line, cells in rows:
        if len(cells) > width and not any(cells[width:]):
            cells = cells[:width]                       # a trailing delimiter
        if len(cells) != width:
            problems.append(finding("ROW-WIDTH", f"row has {len(cells)} cells, header has "
                                    f"{width}", file=file, line=line, seen=str(len(cells)),
                                    expected=str(width), extra={"cells": cells}))
            continue
        parsed, ok = [], True
        for col, _ in usable:
            cell = cells[col.position]
            required = COLUMNS[col.quantity][2] or COLUMNS[col.quantity][1] is None
            if cell in EMPTY_MARKS:
                if required:
                    problems.append(finding("CELL-EMPTY", f"empty {col.quantity} cell", file=file,
                                            line=line, column=col.quantity, seen=cell,
                                            expected="a number"))
                    ok = False
                parsed.append(math.nan)
                continue
            if COLUMNS[col.quantity][1] is None:         # the phase of the row
                if not phases.is_phase(cell):
                    problems.append(finding("CELL-NOT-PHASE", f"'{clip(cell, 40)}' is not a "
                                            "phase", file=file, line=line, column="phase",
                                            seen=clip(cell, 40),
                                            expected="g, l, cr or cr-<form>, e.g. cr-alpha"))
                    ok = False
                parsed.append(cell)
                continue
            number = parse_number(cell, mark)
            if number is None:
                problems.append(_not_a_number(cell, col.quantity, delimiter, file, line))
                ok = False
                continue
            parsed.append(number)
        if ok:
            lines.append(line)
            for k, v in enumerate(parsed):
                values[k].append(v)
    return values, lines, problems


def _not_a_number(cell, column, delimiter, file, line):
    if dialects.ambiguous_comma(cell, delimiter):
        return finding("CELL-AMBIGUOUS", f"'{clip(cell, 40)}' has a comma in a comma-delimited "
                       "file: a decimal comma and a thousands separator cannot be told apart",
                       file=file, line=line, column=column, seen=clip(cell, 40),
                       expected="a point as the decimal mark, or ';' between cells")
    return finding("CELL-NOT-NUMBER", f"'{clip(cell, 40)}' is not a finite decimal number",
                   file=file, line=line, column=column, seen=clip(cell, 40),
                   expected="a finite decimal number")


def _root_cause(problems, n_rows, width, delimiter, file):
    """One finding for a table none of whose rows could be read, naming the likely cause."""
    by_code = {}
    for f in problems:
        by_code.setdefault(f.code, []).append(f)
    code, group = max(by_code.items(), key=lambda kv: (len(kv[1]), kv[0]))
    first = group[0]
    lines = tuple(sorted({f.line for f in problems}))
    if code == "ROW-WIDTH":
        widths = sorted({len(f.extra["cells"]) for f in group})
        cause = (f"rows have {'/'.join(map(str, widths))} cells where the header has {width}")
        commas = delimiter == "," and widths[0] > width and all(
            any(dialects.ambiguous_comma(a + "," + b, ",") for a, b in
                zip(f.extra["cells"], f.extra["cells"][1:])) for f in group)
        hint = ("the numbers look written with a decimal comma in a comma-delimited file: "
                "write them with a point, or put ';' between cells") if commas else \
            ("check the delimiter and the header: the file was read as "
             f"{dialects.DELIMITERS[delimiter]}-delimited")
    else:
        columns = sorted({f.column for f in group})
        cause = f"{first.message} (column {', '.join(columns)})"
        hint = f"expected {first.expected}"
    return finding("TAB-NO-ROWS", f"none of the {n_rows} data row(s) could be read: {cause} "
                   f"(first at line {first.line}); {hint}", file=file, line=first.line,
                   column=first.column, lines=lines, seen=first.seen,
                   expected="rows the header can read")


def _out_of_range(values: np.ndarray, column: str) -> np.ndarray:
    """Mask of given (non-NaN) values that are not finite or lie outside PHYSICAL_RANGE."""
    lo, hi = PHYSICAL_RANGE[column]
    given = ~np.isnan(values)
    with np.errstate(invalid="ignore"):
        out = given & ~((values >= lo) & (values <= hi))
        if column in ("T", "u_Cp"):  # values <= 0 have their own check (T-, UCP-NOT-POSITIVE)
            out &= ~(np.isfinite(values) & (values <= 0))
    return out


def _summarise(findings):
    """Per-row findings beyond MAX_ROW_FINDINGS of one code become one finding listing the
    remaining lines, so a file of a million bad rows is reported in a few lines."""
    out, counts, rest = [], {}, {}
    for f in findings:
        n = counts[f.code] = counts.get(f.code, 0) + 1
        if f.line is None or n <= MAX_ROW_FINDINGS:
            out.append(f)
        else:
            rest.setdefault(f.code, []).append(f)
    for code, more in rest.items():
        first = more[0]
        out.append(first.located(
            message=f"{len(more)} more row(s) with this problem, first: {first.message}",
            lines=tuple(f.line for f in more)))
    return out


def _conversion_notes(name, unit, kind, basis, molar_mass) -> list:
    """The notes of a column read as ``name`` [``unit``] (of ``kind``, per ``basis``): what it
    was converted from, a bare calorie, a per-mass column multiplied by ``molar_mass``;
    made once per column, unit and molar mass (a catalogue's tables share them)."""
    return list(_notes_of(name, unit, kind, basis, molar_mass))


@lru_cache(maxsize=1024)
def _notes_of(name, unit, kind, basis, molar_mass) -> tuple:
    out = []
    si = units.KINDS[kind][2]
    if units.to_si([0.0, 1.0], unit, kind, molar_mass or 1.0).tolist() != [0.0, 1.0] or \
            basis == "mass":
        out.append(f"{name} converted from [{unit}] to [{si}]")
    if units.names_bare_calorie(unit):
        out.append(f"{name}: 'cal' read as the thermochemical calorie (4.184 J)")
    if basis == "mass":
        out.append(f"{name}: per-mass values multiplied by the molar mass {molar_mass:.6g} g/mol")
    return tuple(out)
