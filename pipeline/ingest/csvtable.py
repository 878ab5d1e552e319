"""Read and parse one heat-capacity CSV table (raw text -> clean SI table).

Format (our own): one header row whose cells are ``name [unit]``; known names
are ``T``, ``Cp``, ``H-H298``, ``S`` and their standard uncertainties ``u(Cp)``,
``u(H-H298)``, ``u(S)``. ``T`` and ``Cp`` are
required. Every data cell is a plain decimal number; empty cells are allowed
in the optional columns only. Parsing never raises on bad input: it returns the
rows it could read and a finding for each problem.
"""

import csv
import io
import itertools
import math
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..core import constants, units
from ..core.errors import UnitError
from ..core.findings import Finding, clip, finding
from ..core.limits import MAX_COLUMNS, MAX_ROWS, PHYSICAL_RANGE
from ..core.records import DATA_COLUMNS
from ..physics import statmech

#: per-row findings of one code listed one by one before the rest are summed up in one
MAX_ROW_FINDINGS = 20

#: raw column name -> (internal column, unit kind, required)
COLUMNS = {
    "T": ("T", "temperature", True),
    "Cp": ("Cp", "heat_capacity", True),
    "H-H298": ("dH", "enthalpy", False),
    "S": ("S", "heat_capacity", False),
    "u(Cp)": ("u_Cp", "heat_capacity", False),
    "u(H-H298)": ("u_dH", "enthalpy", False),
    "u(S)": ("u_S", "heat_capacity", False),
}

_HEADER = re.compile(r"^\s*(?P<name>[^\[\]]*?)\s*\[(?P<unit>[^\[\]]*)\]\s*$")


@dataclass(frozen=True)
class ParsedTable:
    """One CSV table parsed into SI: rows, header as written, conversion notes, findings."""

    data: pd.DataFrame        # columns DATA_COLUMNS, SI units
    columns: tuple            # header cells as written
    notes: tuple              # conversions and assumptions
    findings: tuple


def empty_frame() -> pd.DataFrame:
    """A table with the documented columns and no rows."""

    return pd.DataFrame({c: pd.Series(dtype="int64" if c == "line" else "float64")
                         for c in DATA_COLUMNS})


def parse_number(cell: str) -> float | None:
    """A finite float from a plain decimal literal, else None (no 'nan', 'inf', '1_0', '0x1')."""
    text = cell.strip()
    if not units.is_plain_number(text):
        return None
    value = float(text)
    return value if math.isfinite(value) else None


def decode(raw: bytes, file: str) -> tuple[str | None, list[Finding]]:
    """Decode raw bytes as UTF-8 (a BOM is allowed); name the line of the first bad byte."""
    try:
        return raw.decode("utf-8-sig"), []
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        return None, [finding("TAB-ENCODING", f"byte 0x{raw[exc.start]:02x} at offset {exc.start} "
                              "is not UTF-8", file=file, line=line, expected="UTF-8 text")]


def _read_header(cells, file):
    """Map header cells to (internal column, unit, kind) by position; findings for bad cells."""
    found, problems, seen = {}, [], set()
    for pos, cell in enumerate(cells):
        m = _HEADER.match(cell)
        if not m:
            problems.append(finding("COL-NO-UNIT", f"column '{cell.strip()}' has no [unit]",
                                    file=file, line=1, column=cell.strip(),
                                    expected="name [unit], e.g. 'Cp [J/(mol*K)]'"))
            continue
        name, unit = m.group("name"), m.group("unit").strip()
        if name not in COLUMNS:
            problems.append(finding("COL-UNKNOWN", f"column '{name}' is not a known quantity; "
                                    "its values are ignored", file=file, line=1, column=name,
                                    seen=cell.strip(),
                                    expected=", ".join(COLUMNS)))
            continue
        if name in seen:
            problems.append(finding("COL-REPEATED", f"column '{name}' appears more than once",
                                    file=file, line=1, column=name))
            continue
        seen.add(name)
        internal, kind, _ = COLUMNS[name]
        found[pos] = (name, internal, unit, kind)
    return found, problems


def parse_table(text: str, *, file: str, molar_mass: float | None = None,
                standard_pressure: float = constants.STANDARD_PRESSURE,
                phase: str = "g") -> ParsedTable:
    """Parse CSV ``text`` into a clean table in SI units.

    Parameters
    ----------
    text : str, the decoded CSV
    file : str, the path shown in findings
    molar_mass : float [g/mol], for mass-based units
    standard_pressure : float [Pa], the pressure the S column refers to
    phase : str, 'g' for an ideal gas (its S column is moved to 1 bar)

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
        return ParsedTable(empty_frame(), (), (), (finding(
            "TAB-SYNTAX", "the file contains NUL characters (a binary file?)", file=file,
            line=line, expected="plain comma-separated text"),))
    try:
        rows = list(itertools.islice(_rows(text), MAX_ROWS + 2))  # never more than the limit
    except csv.Error as exc:
        return ParsedTable(empty_frame(), (), (), (finding(
            "TAB-SYNTAX", f"the CSV cannot be split into rows ({exc})", file=file),))
    if not rows:
        return ParsedTable(empty_frame(), (), (), (finding("TAB-EMPTY", "the file is empty", file=file,
                                                   expected="a header row and data rows"),))
    header_line, header = rows[0]
    if len(header) > MAX_COLUMNS or len(rows) - 1 > MAX_ROWS:
        return ParsedTable(empty_frame(), (), (), (finding(
            "TAB-TOO-LARGE", f"{len(header)} columns and {len(rows) - 1}"
            f"{'+' if len(rows) > MAX_ROWS + 1 else ''} data rows; the limit is "
            f"{MAX_COLUMNS} columns and {MAX_ROWS} rows", file=file,
            seen=f"{len(header)} columns, {len(rows) - 1} rows",
            expected=f"<= {MAX_COLUMNS} columns, <= {MAX_ROWS} rows"),))
    layout, problems = _read_header(header, file)
    findings += problems
    names = {v[0] for v in layout.values()}
    for name, (_, _, required) in COLUMNS.items():
        if required and name not in names:
            findings.append(finding("COL-REQUIRED", f"required column '{name}' is missing",
                                    file=file, line=header_line, column=name,
                                    seen=", ".join(c.strip() for c in header) or "(none)",
                                    expected=f"a column '{name} [unit]'"))
    # units: check each column's unit before reading cells
    usable = {}
    for pos, (name, internal, unit, kind) in layout.items():
        try:
            basis = units.check_unit(unit, kind)
            if basis == "mass" and molar_mass is None:
                raise UnitError(f"unit '{unit}' is per mass but the formula gave no molar mass")
        except UnitError as exc:
            code = getattr(exc, "code", None) or (
                "UNIT-UNKNOWN" if "cannot be read" in exc.what else "UNIT-DIMENSION")
            findings.append(finding(code, exc.what, file=file, line=header_line, column=name,
                                    seen=unit, expected=exc.expected or kind))
            continue
        usable[pos] = (name, internal, unit, kind, basis)
    if len(rows) == 1:
        findings.append(finding("TAB-EMPTY", "the table has a header but no data rows",
                                file=file, line=header_line, expected="data rows"))
    values = {pos: [] for pos in usable}
    lines = []
    for line, cells in rows[1:]:
        if len(cells) != len(header):
            findings.append(finding("ROW-WIDTH", f"row has {len(cells)} cells, header has "
                                    f"{len(header)}", file=file, line=line,
                                    seen=str(len(cells)), expected=str(len(header))))
            continue
        parsed, ok = {}, True
        for pos, (name, internal, unit, kind, basis) in usable.items():
            cell = cells[pos]
            required = COLUMNS[name][2]
            if not cell.strip():
                if required:
                    findings.append(finding("CELL-EMPTY", f"empty {name} cell", file=file,
                                            line=line, column=name, expected="a number"))
                    ok = False
                parsed[pos] = math.nan
                continue
            number = parse_number(cell)
            if number is None:
                findings.append(finding("CELL-NOT-NUMBER", f"'{clip(cell, 40)}' is not a finite "
                                        "decimal number", file=file, line=line, column=name,
                                        seen=clip(cell, 40), expected="a finite decimal number"))
                ok = False
                continue
            parsed[pos] = number
        if ok:
            lines.append(line)
            for pos in usable:
                values[pos].append(parsed[pos])
    frame = {c: np.full(len(lines), np.nan) for c in DATA_COLUMNS if c != "line"}
    frame["line"] = np.asarray(lines, dtype="int64")
    keep = np.ones(len(lines), dtype=bool)
    for pos, (name, internal, unit, kind, basis) in usable.items():
        frame[internal] = units.to_si(values[pos], unit, kind, molar_mass)
        notes += _conversion_notes(name, unit, kind, basis, molar_mass)
        bad = _out_of_range(frame[internal], internal)
        for i in np.flatnonzero(bad):
            lo, hi = PHYSICAL_RANGE[internal]
            findings.append(finding(
                "VALUE-RANGE", f"{name} = {values[pos][i]:.6g} [{unit}] is "
                f"{frame[internal][i]:.6g} {units.KINDS[kind][2]} in SI, outside the physical "
                "range of the column; the row is left out", file=file, line=int(lines[i]),
                column=name, seen=f"{values[pos][i]:.6g}",
                expected=f"{lo:g} to {hi:g} {units.KINDS[kind][2]}"))
        keep &= ~bad
    frame = {c: v[keep] for c, v in frame.items()}
    data = pd.DataFrame({c: frame[c] for c in DATA_COLUMNS})
    if "u_Cp" in {v[1] for v in usable.values()} and len(data):
        given = data["u_Cp"].notna()
        if given.any() and not given.all():
            first = int(data.loc[~given, "line"].iloc[0])
            findings.append(finding("UCP-PARTIAL", f"u(Cp) is missing on {int((~given).sum())} "
                                    f"of {len(data)} rows, first at line {first}", file=file,
                                    line=first, column="u(Cp)", expected="all rows or none"))
    if phase == "g" and data["S"].notna().any() and standard_pressure != constants.STANDARD_PRESSURE:
        shift = statmech.entropy_shift_to_standard(standard_pressure)
        data["S"] = data["S"] + shift
        notes.append(f"S moved from {standard_pressure:g} Pa to 1 bar: {shift:+.4f} J/(mol*K)")
    return ParsedTable(data, tuple(header), tuple(notes), tuple(_summarise(findings)))


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


def _rows(text: str):
    """Yield (line number, cells) for non-blank CSV records; line numbers count from 1."""
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    for cells in reader:
        if not cells or all(not c.strip() for c in cells):
            continue
        yield reader.line_num, [c.strip() for c in cells]




def _conversion_notes(name, unit, kind, basis, molar_mass):
    out = []
    si = units.KINDS[kind][2]
    if unit.replace(" ", "") != si:
        out.append(f"{name} converted from [{unit}] to [{si}]")
    if units.names_bare_calorie(unit):
        out.append(f"{name}: 'cal' read as the thermochemical calorie (4.184 J)")
    if basis == "mass":
        out.append(f"{name}: per-mass values multiplied by the molar mass {molar_mass:.6g} g/mol")
    return out
