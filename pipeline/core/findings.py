"""The registry of findings codes (our own) and the Finding record.

Every problem the pipeline reports is a Finding with a code from CODES. The
code fixes the severity and a default one-line fix, so the CLI, the docs and
the tests all read the same registry.

Severities: ``error`` quarantines the table; ``warning`` travels with the
species into the library; ``info`` records a decision (for example which
source was preferred).
"""

from dataclasses import dataclass, field, replace

from .slotstate import quick_state

ERROR, WARNING, INFO = "error", "warning", "info"
SEVERITY_ORDER = {ERROR: 0, WARNING: 1, INFO: 2}


@dataclass(frozen=True)
class Code:
    """One registered findings code: its severity, a one-line summary and a default fix."""

    code: str
    severity: str
    summary: str
    fix: str


_CODES = [
    # --- sources and files
    Code("SRC-UNREADABLE", ERROR, "source.json cannot be read as JSON",
         "save source.json as UTF-8 JSON"),
    Code("SRC-SCHEMA", ERROR, "source.json does not match schemas/source.schema.json",
         "correct the named field as the schema expects"),
    Code("SRC-QUANTITY", ERROR, "a quantity in source.json has no unit or the wrong dimension",
         "write the value with its unit, e.g. \"-393.51 kJ/mol\""),
    Code("SRC-FORMULA", ERROR, "the formula cannot be parsed into elements",
         "write a Hill-style formula such as CO2 or CH4"),
    Code("SRC-PATH", ERROR, "a table path leaves its source folder or is a link",
         "keep each table as a plain file inside its source folder"),
    Code("SRC-DUPLICATE-ID", ERROR, "two source folders declare the same source id",
         "give every source a unique id"),
    Code("TAB-MISSING", ERROR, "a table listed in source.json does not exist",
         "add the file or remove its entry"),
    Code("TAB-UNLISTED", WARNING, "a CSV file in a source folder is not listed in source.json",
         "list it under tables or move it out of raw/"),
    Code("TAB-ENCODING", ERROR, "the table is text in none of UTF-8, Windows-1252 or Latin-1",
         "save the table as UTF-8"),
    Code("TAB-LEGACY-ENCODING", INFO, "the table is not UTF-8 and was read as Windows-1252 "
         "(Latin-1 text reads the same)", "save the table as UTF-8 to be sure of ° and µ"),
    Code("TAB-SYNTAX", ERROR, "the file cannot be split into CSV rows",
         "save the table as plain comma-separated text"),
    Code("SRC-NO-METADATA", WARNING, "a folder under raw/ has no source.json; skipped",
         "add source.json or move the folder out of raw/"),
    Code("TAB-EMPTY", ERROR, "the table has no header or no data rows",
         "add the header row and the data rows"),
    Code("TAB-NOT-FILE", ERROR, "a listed table is a folder, a pipe or another non-file",
         "list a plain CSV file"),
    Code("TAB-TOO-LARGE", ERROR, "the table exceeds the size, row or column limit; not read",
         "split the table or thin its rows (limits in the README)"),
    Code("SRC-TOO-LARGE", ERROR, "source.json exceeds the size or table-count limit; not read",
         "split the source into several folders"),
    Code("SRC-TOO-DEEP", ERROR, "source.json is nested deeper than the limit; not read",
         "write source.json in the documented flat layout"),
    Code("SRC-DUPLICATE-KEY", ERROR, "the same key appears twice in one JSON object",
         "keep each key once; the meaning of a repeated key is ambiguous"),
    Code("STAGE-FAILED", ERROR, "an unexpected failure while processing this table; the table "
         "is held back and the build goes on", "report the message to the maintainers"),
    Code("SRC-NO-PHASE", ERROR, "a table has no phase: none in source.json and no phase column",
         "add \"phase\" to the table's entry, or a phase column to the CSV"),
    Code("SRC-PHASE-TWICE", ERROR, "a table has a phase column and a phase in source.json",
         "give the phase in one place"),
    Code("SRC-ANCHOR-PHASE", ERROR, "the anchors of a table with several phases do not say which "
         "phase they belong to", "add \"anchor_phase\" to the table's entry"),
    # --- header and cells
    Code("COL-NO-UNIT", ERROR, "a column name has no unit",
         "write the unit, e.g. 'Cp [J/(mol*K)]' or 'Cp/(J K-1 mol-1)', or add a units row"),
    Code("COL-UNKNOWN", WARNING, "a column name is not one of T, Cp, H-H298, S, u(Cp), "
         "u(H-H298), u(S); ignored",
         "rename the column, or map it in the table's 'columns' entry of source.json"),
    Code("COL-UNIT-CONFLICT", ERROR, "a column's own unit and the units row under it differ",
         "keep one of the two units"),
    Code("COL-MAP-UNUSED", ERROR, "the 'columns' mapping of source.json names a header cell the "
         "table does not have", "write the header cell exactly as the file has it"),
    Code("COL-REPEATED", ERROR, "a column appears twice", "keep one column of each quantity"),
    Code("COL-REQUIRED", ERROR, "a required column (T or Cp) is missing",
         "add the column with its unit"),
    Code("UNIT-UNKNOWN", ERROR, "a unit cannot be read", "use a unit such as K, degC, J/(mol*K)"),
    Code("UNIT-TOO-COMPLEX", ERROR, "a unit expression is too long, has large exponents or "
         "converts with a non-finite factor", "write a plain unit such as J/(mol*K)"),
    Code("VALUE-RANGE", ERROR, "a value is not finite or lies outside the physical range of "
         "its column after conversion to SI; the row is left out",
         "check the value and the unit of its column"),
    Code("UNIT-DIMENSION", ERROR, "a unit has the wrong dimension for its column",
         "use a unit of the expected dimension"),
    Code("ROW-WIDTH", ERROR, "a row has a different number of cells than the header",
         "give every row one cell per column"),
    Code("CELL-NOT-NUMBER", ERROR, "a cell is not a finite decimal number",
         "write a plain finite number"),
    Code("CELL-EMPTY", ERROR, "a required cell is empty", "fill in the value or remove the row"),
    Code("CELL-NOT-PHASE", ERROR, "a cell of the phase column is not a phase",
         "write g, l, cr or cr-<form> (e.g. cr-alpha)"),
    Code("CELL-AMBIGUOUS", ERROR, "a number with a comma in a comma-delimited file (1,234: "
         "decimal comma or thousands separator?)", "write a point as the decimal mark"),
    Code("TAB-DECIMAL-MIXED", ERROR, "the numbers of the file use both the point and the comma "
         "as decimal mark; not read", "use one decimal mark throughout"),
    Code("TAB-NO-ROWS", ERROR, "no data row could be read; the finding names the cause",
         "see the message: usually the delimiter, the decimal mark or the header"),
    Code("UCP-PARTIAL", ERROR, "u(Cp) is given for some rows but not all",
         "give u(Cp) on every row or on none"),
    # --- structure of the clean table
    Code("T-NOT-POSITIVE", ERROR, "a temperature is not above 0 K",
         "check the temperature unit and value"),
    Code("CP-NOT-POSITIVE", ERROR, "a heat capacity is not above zero",
         "check the sign and the value"),
    Code("UCP-NOT-POSITIVE", ERROR, "an uncertainty u(Cp) is not above zero",
         "give a positive standard uncertainty"),
    Code("T-DUPLICATE", ERROR, "the same temperature appears twice",
         "remove or merge the repeated row"),
    Code("TOO-FEW-POINTS", ERROR, "fewer points than the fit needs",
         "add data points"),
    Code("ANCHOR-OUT-OF-REACH", ERROR, "the data do not reach 298.15 K, where H and S are "
         "anchored, and the build cannot carry them there", "add data that contain 298.15 K"),
    Code("ANCHOR-MISSING", ERROR, "a phase has no ΔfH° and S° at 298.15 K and no transition "
         "links it to a phase that has", "give the anchors of the phase stable at 298.15 K and "
         "list the transitions"),
    Code("RANGE-EXTENDED", WARNING, "the fitted range was extended past the data to reach "
         "298.15 K (marked extrapolated, with its uncertainty)", "add data that contain 298.15 K"),
    # --- physics and units
    Code("CP-BELOW-EQUIPARTITION", ERROR, "Cp of an ideal gas below 5/2 R",
         "check the unit of the Cp column and the values"),
    Code("CP-BELOW-ROTOR-FLOOR", ERROR, "ideal-gas Cp below 7/2 R (linear) or 4 R (nonlinear) "
         "where rotation is fully excited", "check the unit, the geometry and the quantity"),
    Code("LABEL-CV-AS-CP", ERROR, "the Cp column probably holds Cv (Cp = Cv + R fits the "
         "physics)", "add R to every value, or correct the column"),
    Code("LABEL-MOLAR-MASS", ERROR, "a per-mass table times its formula's molar mass is no "
         "possible Cp of a gas of that formula (a wrong formula?)",
         "check the formula of the table in source.json"),
    Code("LABEL-CELSIUS-AS-KELVIN", ERROR, "the T column probably holds degrees Celsius under "
         "a kelvin label (the entropy below 298.15 K breaks its floor; T + 273.15 mends it)",
         "relabel the column T [degC]"),
    Code("S-BELOW-FLOOR", ERROR, "S°(T) from entropy_298 and the table falls below what "
         "translation and rotation alone give", "check Cp at the low end and entropy_298"),
    Code("CP-IMPLAUSIBLE", ERROR, "Cp of an ideal gas far above any physical value for its "
         "atoms", "check the unit of the Cp column and the values"),
    Code("CP-ABOVE-CLASSICAL", WARNING, "Cp above what the classical limit of its geometry "
         "and atoms, anharmonicity and electronic states allow",
         "check the values, the formula and the geometry"),
    Code("CP-ABOVE-DULONG-PETIT", WARNING, "condensed-phase Cp well above 3R per atom",
         "check the unit and the formula"),
    Code("UNIT-FACTOR", ERROR, "the whole table is off by a recognisable unit factor",
         "correct the unit in the header"),
    Code("UNIT-BLOCK", ERROR, "a block of rows is off by a recognisable unit factor",
         "correct the rows' values or unit"),
    # --- smoothness
    Code("SMOOTH-OUTLIER", WARNING, "a point departs from the smooth curve of its neighbours; "
         "excluded from the fit", "check the row against the original source"),
    Code("SMOOTH-JITTER", WARNING, "a run of rows scatters far more than the rest of the table",
         "check the rows against the original source"),
    Code("SMOOTH-SCATTER", WARNING, "the scatter of the table exceeds its stated u(Cp)",
         "check the stated uncertainty"),
    # --- columns
    Code("CONS-H", ERROR, "H-H298 does not equal the integral of Cp",
         "check the H-H298 column's unit and values"),
    Code("CONS-S", ERROR, "S - S(298.15) does not equal the integral of Cp/T",
         "check the S column's unit, values and standard pressure"),
    Code("CONS-S298", ERROR, "the S column at 298.15 K disagrees with entropy_298",
         "make entropy_298 and the S column agree"),
    Code("CONS-H298", ERROR, "the H-H298 column is not zero at 298.15 K",
         "H-H298 must vanish at 298.15 K"),
    Code("CONS-GEF", ERROR, "the -(G-H298)/T column disagrees with the Cp, H-H298 and S "
         "columns or with entropy_298", "check the column's unit, sign and values"),
    # --- coverage
    Code("COV-GAP", WARNING, "a gap in temperature leaves the fit ungrounded there",
         "add data inside the gap"),
    Code("COV-EXTRAPOLATED", WARNING, "the requested range of use extends beyond the data",
         "add data or narrow the range of use"),
    Code("COV-RANGE-POINTS", INFO, "the conventional breakpoint left too few points in a range; "
         "the breakpoint was moved", "add data on the short side"),
    # --- sources
    Code("SRC-DISAGREE", WARNING, "two sources of one species disagree beyond the tolerance",
         "check which source is right; the preferred one is fitted"),
    Code("SRC-T-SCALE", ERROR, "a table agrees with another source of the species only with "
         "its temperatures read on another scale (Celsius, Fahrenheit, Rankine, kelvin)",
         "relabel the T column of the mislabelled table"),
    Code("SRC-ANCHOR-DISAGREE", WARNING, "two sources of a species state ΔfH° or S° at 298.15 K "
         "that differ beyond 1 kJ/mol or 0.5 J/(mol K)",
         "check which value is right; the preferred source's is used"),
    Code("SRC-FACTOR", ERROR, "a table differs from another source of the species by a unit factor",
         "correct the unit in the header"),
    Code("SEL-MERGED", INFO, "rows of a lower-priority source fill the range outside the "
         "preferred source", "none needed"),
    # --- phases and transitions
    Code("TRS-NOT-ENDOTHERMIC", ERROR, "an enthalpy of transition is not positive on heating",
         "give ΔH_trs from the phase stable below to the one stable above"),
    Code("TRS-PHASE-MISSING", WARNING, "a transition names a phase with no table in the build; "
         "not used", "add the phase's table or remove the transition"),
    Code("TRS-OUTSIDE-DATA", ERROR, "a transition temperature lies outside the data of one "
         "of its phases", "check the temperature, or add data up to the transition"),
    Code("TRS-CHAIN", ERROR, "the transitions of a species do not form one chain of phases "
         "on heating", "list each transition once, from the phase stable below to the one "
         "stable above"),
    Code("TRS-DISAGREE", WARNING, "two sources state one transition differently",
         "check which is right; the preferred source's is used"),
    Code("TRS-GIBBS-MISMATCH", WARNING, "two phases' Gibbs energies differ at their transition "
         "beyond the stated uncertainties", "check the anchors and ΔH_trs of both phases"),
    Code("TRS-ORDER", WARNING, "a phase has a lower Gibbs energy than the phase the "
         "transitions make stable", "check the anchors, transitions and data of both phases"),
    Code("TRS-UNLISTED", ERROR, "Cp jumps inside one table: a probable phase transition that "
         "is not listed", "split the table by phase (a phase column) and list the transition"),
    # --- formation properties (release/formation.py)
    Code("FORM-NO-REFERENCE", INFO, "no formation properties for a species: one of its "
         "elements has no usable reference species in the library",
         "add the element's reference species (e.g. graphite for C) or declare another in "
         "source.json 'reference_states'"),
    Code("FORM-REF-UNCLEAR", WARNING, "the reference state of an element cannot be used as "
         "declared (unknown element, sources naming different species, several unlinked "
         "phases, not the element alone, or ΔfH° not 0)",
         "name one species or phase in source.json 'reference_states' or --reference-state"),
    Code("FORM-DISAGREE", WARNING, "a formation property the source states differs from the "
         "library's beyond their uncertainties",
         "check the source's value, the species' anchors and the elements' reference species"),
    Code("FORM-STATED-UNCHECKED", INFO, "a formation property the source states could not be "
         "compared (outside the range of use, or no formation properties)",
         "state values inside the range of use of the species and its elements' references"),
    # --- published coefficient sets (ingest/coefsets.py, checks/coefsets.py)
    Code("SET-LAYOUT", ERROR, "a coefficient-set file lacks a required column or repeats one",
         "give the header species, formula, phase, form, T_min [K], T_max [K], c1 ... c9"),
    Code("SET-CELL", ERROR, "a cell of a coefficient set cannot be read as what its column "
         "holds; the set is not read", "correct the cell as the message says"),
    Code("SET-OVERLAP", ERROR, "two ranges of a coefficient set overlap",
         "make each range start where the one below it ends"),
    Code("SET-GAP", ERROR, "the ranges of a coefficient set leave a gap",
         "make each range start where the one below it ends"),
    Code("SET-NO-298", WARNING, "the set does not contain 298.15 K, where its H and S are "
         "anchored (its H(298.15 K) and S° are read from the lowest range beyond its end)",
         "extend the lowest range down to 298.15 K or below"),
    Code("SET-STEP", ERROR, "Cp, H or S of a coefficient set jumps at a breakpoint beyond the "
         "stated thresholds (a warning when the set is repaired)",
         "check the coefficients against the original, or repair the set (--repair)"),
    Code("SET-STEP-STRICT", WARNING, "Cp, H or S of a coefficient set jumps at a breakpoint by "
         "more than programs loading a mechanism accept", "repair the set (--repair)"),
    Code("SET-KINK", WARNING, "dCp/dT of a coefficient set jumps at a breakpoint",
         "repair the set (--repair) if a smooth slope matters"),
    Code("SET-REPAIRED", INFO, "a defective coefficient set was refitted into a continuous one; "
         "the largest change it made", "compare the published and repaired sets in the report"),
    # --- acknowledgements
    Code("ACK-UNUSED", WARNING, "an acknowledgement in source.json matches no finding",
         "remove it or correct its code and line"),
    Code("ACK-NOT-ALLOWED", WARNING, "only warnings can be acknowledged; the error stands",
         "fix the error in the raw file"),
    # --- selection and fit
    Code("SEL-SUPERSEDED", INFO, "a table was not fitted because a higher-priority source has the species",
         "none needed; raise the priority to prefer this source"),
    Code("SEL-TIE", WARNING, "two sources of equal priority have the species; the first by id was used",
         "give the sources different priorities"),
    Code("FIT-SETTING", ERROR, "a fit setting of the table cannot be applied to its data",
         "correct the setting under 'fit' in source.json"),
    Code("FIT-BREAKPOINT", INFO, "where an optimised breakpoint is, and why",
         "none needed"),
    Code("FIT-FAILED", ERROR, "the fit could not be carried out", "see the message"),
    Code("FIT-EXTRAPOLATED", WARNING, "Cp was extended past the data with a physically shaped "
         "model before fitting", "treat the interval with its stated uncertainty"),
    Code("FIT-REJECTED", ERROR, "the fit fails the acceptance thresholds; not exported",
         "add ranges, change the form, or review the data"),
]

CODES: dict[str, Code] = {c.code: c for c in _CODES}

#: codes about reading the input (files, layout, units, cells): the root causes that later
#: findings of the same table (too few points, ...) follow from, so they are shown first
READING_PREFIXES = ("SRC-", "TAB-", "COL-", "ROW-", "CELL-", "UNIT-UNKNOWN", "UNIT-DIMENSION",
                    "UNIT-TOO-COMPLEX", "VALUE-RANGE", "UCP-PARTIAL")


@quick_state
@dataclass(frozen=True, slots=True)
class Finding:
    """One reported problem or decision.

    ``line`` is the line number in the file (the header is line 1); ``column``
    is a CSV column name or a source.json field path.
    """

    code: str
    severity: str
    message: str
    source: str = ""
    file: str = ""
    line: int | None = None
    column: str = ""
    seen: str = ""
    expected: str = ""
    fix: str = ""
    lines: tuple = ()          # every line concerned, when more than one
    acknowledged: str = ""     # the maintainer's reason, when acknowledged in source.json
    extra: dict = field(default_factory=dict, compare=False)

    def sort_key(self):
        """Sort order of findings: source, file, problems of reading the input before what
        follows from them (the root cause first), line, severity, code, column, message."""
        return _order(self.source, self.file, self.code, self.line, self.severity, self.column,
                      self.message)

    def to_dict(self) -> dict:
        """The finding as written into findings.json and the library (``extra`` left out)."""
        return {"code": self.code, "severity": self.severity, "message": self.message,
                "source": self.source, "file": self.file, "line": self.line,
                "column": self.column, "seen": self.seen, "expected": self.expected,
                "fix": self.fix, "lines": list(self.lines), "acknowledged": self.acknowledged}

    @classmethod
    def from_dict(cls, d: dict) -> "Finding":
        """The Finding ``to_dict`` wrote."""
        return cls(**{**d, "lines": tuple(d.get("lines", ()))})

    @property
    def counts(self) -> bool:
        """True when the finding counts towards the totals (not acknowledged)."""
        return not self.acknowledged

    def about_species(self, species_id: str) -> "Finding":
        """The same finding marked as about one species (one phase of a table that holds
        several): it travels with that species only."""
        return replace(self, extra={**self.extra, "species": species_id})

    def located(self, **fields) -> "Finding":
        """The same finding with ``fields`` (source, file, line, ...) replaced."""
        return replace(self, **fields)


def _order(source, file, code, line, severity, column, message) -> tuple:
    return (source, file, not code.startswith(READING_PREFIXES), line if line is not None else -1,
            SEVERITY_ORDER[severity], code, column, message)


def dict_sort_key(d: dict) -> tuple:
    """``Finding.sort_key`` of the finding whose ``to_dict`` is ``d``."""
    return _order(d["source"], d["file"], d["code"], d["line"], d["severity"], d["column"],
                  d["message"])


def clip(text, n: int = 60) -> str:
    """``text`` on one line and at most ``n`` characters, for a finding's seen/expected."""

    text = str(text).strip().replace("\n", " ")
    return text if len(text) <= n else text[: n - 1] + "…"


def finding(code: str, message: str, **fields) -> Finding:
    """Build a Finding whose severity and default fix come from the registry."""
    entry = CODES[code]  # KeyError here is a programming error: unknown code
    fields.setdefault("fix", entry.fix)
    if fields.get("lines"):
        fields["lines"] = tuple(dict.fromkeys(fields["lines"]))  # rows of one line count once
    return Finding(code=code, severity=entry.severity, message=message, **fields)


def subject(f: Finding) -> str:
    """The file a finding is about: the table it names in ``extra`` (a source.json field of
    that table) or else its own file."""
    return f.extra.get("table") or f.file


def concerns(f: Finding, species_id: str) -> bool:
    """True unless ``f`` is marked as about another species of a file that holds several
    (Finding.about_species)."""
    return f.extra.get("species", species_id) == species_id


def by_subject(findings) -> dict:
    """{file: [findings about it]}, built in one pass (see ``subject``)."""
    out = {}
    for f in findings:
        out.setdefault(subject(f), []).append(f)
    return out


def stage_failed(stage: str, exc: BaseException, **where) -> Finding:
    """The error finding of an unexpected exception while a stage processed one table: the
    table is held back with the exception's type and message, and the build goes on."""
    text = str(exc).replace("\n", " ")
    text = text if len(text) <= 160 else text[:159] + "…"
    return finding("STAGE-FAILED", f"unexpected {type(exc).__name__} in the {stage} stage: "
                   f"{text}", seen=type(exc).__name__, **where)


def format_block(f: Finding) -> str:
    """Two or three lines for a report grouped by file: the where is the file heading."""
    where = f"line {f.line}" if f.line is not None else "table"
    if len(f.lines) > 1:
        where = f"lines {_ranges(f.lines)}"
    if f.column:
        where += f" [{f.column}]"
    head = f"  {f.severity.upper():7s} {f.code:22s} {where}"
    lines = [head, f"      {f.message}"]
    detail = []
    if f.seen or f.expected:
        detail.append(f"seen {f.seen or '-'}, expected {f.expected or '-'}")
    if f.fix:
        detail.append(f"fix: {f.fix}")
    if detail:
        lines.append("      " + "; ".join(detail))
    if f.acknowledged:
        lines.append(f"      acknowledged: {f.acknowledged} (not counted)")
    return "\n".join(lines)


def _ranges(lines) -> str:
    """'3-7, 9, 12-13' from a sorted sequence of line numbers."""
    parts, start, prev = [], None, None
    for x in sorted(lines):
        if start is None:
            start = prev = x
        elif x == prev + 1:
            prev = x
        else:
            parts.append(f"{start}-{prev}" if prev != start else f"{start}")
            start = prev = x
    if start is not None:
        parts.append(f"{start}-{prev}" if prev != start else f"{start}")
    return ", ".join(parts)
