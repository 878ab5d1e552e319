"""Which column holds which quantity, in which unit: the header, a units row, a mapping.

A header cell names a quantity (case-insensitive: ``T``, ``Cp``, ``H-H298``, ``S``,
``-(G-H298)/T`` (or ``gef``, the Gibbs energy function), ``u(Cp)``, ``u(H-H298)``,
``u(S)``) followed by its unit in one of the styles tables are
written in: ``Cp [J/(mol*K)]``, ``Cp/(J K-1 mol-1)``, ``Cp / J·K⁻¹·mol⁻¹``, ``Cp (J/(mol K))``
(``Cp/R`` is Cp in units of R, as the quantity-calculus convention reads it). A header
without units may be followed by a units row (``K``, ``[K]`` or ``(K)`` under each column).
Anything else is mapped in source.json: ``"columns": {"Temp (C)": {"quantity": "T",
"unit": "degC"}}``; a mapping wins over what the file says, and says so in the notes.
A ``phase`` column (no unit) gives the phase of each row of a table that holds several.
``Cp`` may be missing when ``H-H298`` is given: an enthalpy-increment table.
"""

import re
from dataclasses import dataclass
from functools import lru_cache

from ..core import units
from ..core.findings import Finding, clip, finding

#: quantity -> (internal column, unit kind (None: text without unit), required)
COLUMNS = {
    "T": ("T", "temperature", True),
    "Cp": ("Cp", "heat_capacity", True),
    "H-H298": ("dH", "enthalpy", False),
    "S": ("S", "heat_capacity", False),
    "-(G-H298)/T": ("gef", "heat_capacity", False),
    "phase": ("phase", None, False),
    "u(Cp)": ("u_Cp", "heat_capacity", False),
    "u(H-H298)": ("u_dH", "enthalpy", False),
    "u(S)": ("u_S", "heat_capacity", False),
}

#: the quantity a column mapping may also name: read nothing from the column
IGNORE = "ignore"

_H298 = r"h°?\s*(?:\(\s*)?298(?:\.15)?(?:\s*k)?(?:\s*\))?"
_H = rf"h°?\s*-\s*{_H298}"
_NAME_PATTERNS = [(name, re.compile(pattern, re.IGNORECASE)) for name, pattern in (
    ("-(G-H298)/T", rf"(?:-\s*\(\s*g°?\s*-\s*{_H298}\s*\)\s*/\s*t\b|gef\b)"),
    ("phase", r"phase\b"),
    ("u(H-H298)", rf"u\(\s*{_H}\s*\)"),
    ("u(Cp)", r"u\(\s*c\s*p°?\s*\)"),
    ("u(S)", r"u\(\s*s°?\s*\)"),
    ("H-H298", _H),
    ("Cp", r"c\s*p°?"),
    ("S", r"s°?"),
    ("T", r"t"),
)]


@dataclass(frozen=True)
class Column:
    """One column the reader will use: where it is and how it was identified."""

    position: int
    header: str          # the header cell as written
    quantity: str        # a key of COLUMNS
    unit: str
    origin: str          # 'header', 'units row' or 'mapping'

    def to_dict(self) -> dict:
        return {"header": self.header, "quantity": self.quantity, "unit": self.unit,
                "from": self.origin}


#: header cells up to this long are remembered by ``split_cell`` (a catalogue's tables share
#: a few headers; a long cell, a malformed file's, is split anew each time)
REMEMBERED_CELL = 200


def split_cell(cell: str) -> tuple[str | None, str | None]:
    """(quantity, unit text or None) of a header cell; (None, None) when it names no
    known quantity; the unit is '' when the cell has a quantity but a malformed unit."""
    return _split_remembered(cell) if len(cell) <= REMEMBERED_CELL else _split(cell)


@lru_cache(maxsize=1024)
def _split_remembered(cell: str) -> tuple[str | None, str | None]:
    return _split(cell)


def _split(cell: str) -> tuple[str | None, str | None]:
    text = cell.strip().replace("−", "-")
    for name, pattern in _NAME_PATTERNS:
        m = pattern.match(text)
        if not m:
            continue
        rest = text[m.end():].strip()
        if not rest:
            return name, None
        if rest[0] == "[":
            return name, rest[1:-1].strip() if rest.endswith("]") else ""
        if rest[0] == "/":
            return name, rest[1:].strip()
        if rest[0] == "(":
            return name, rest[1:-1].strip() if rest.endswith(")") else ""
    return None, None


def unit_cell(cell: str) -> str:
    """The unit of a units-row cell: ``K``, ``[K]`` and ``(K)`` all give K."""
    text = cell.strip()
    if len(text) >= 2 and (text[0], text[-1]) in (("[", "]"), ("(", ")")):
        inner = text[1:-1].strip()
        if inner.count("(") == inner.count(")"):
            return inner
    return text


def looks_like_units_row(cells, is_number) -> bool:
    """True for a row under the header whose non-empty cells are all units, none a number."""
    given = [c for c in cells if c.strip()]
    if not given or any(is_number(c) for c in given):
        return False
    return all(units.is_unit(unit_cell(c)) for c in given)


def layout(header, units_row, mapping, file: str, line: int):
    """(columns, findings) of a table: which position holds which quantity in which unit.

    ``units_row`` is the row under the header when it holds units, else None; ``mapping``
    is the table's ``columns`` entry of source.json ({header cell: {quantity, unit}})."""
    found: list[Column] = []
    problems: list[Finding] = []
    seen = {}
    mapping = dict(mapping or {})
    used = set()
    for pos, cell in enumerate(header):
        written = cell.strip()
        if written in mapping:
            used.add(written)
            spec = mapping[written]
            if spec["quantity"] == IGNORE:
                continue
            name, unit, origin = spec["quantity"], spec.get("unit", ""), "mapping"
        else:
            name, unit = split_cell(written)
            origin = "header"
            if name is None:
                label = clip(written.split("[")[0].strip() or written, 40)
                problems.append(finding(
                    "COL-UNKNOWN", f"column '{label}' is not a known quantity; its "
                    "values are ignored", file=file, line=line, column=label,
                    seen=clip(written, 40), expected=", ".join(COLUMNS) + " with a unit, or a "
                    "'columns' mapping in source.json"))
                continue
            below = unit_cell(units_row[pos]) if units_row is not None and pos < len(units_row) \
                else ""
            if COLUMNS[name][1] is None:
                unit = ""              # a text column: no unit
            elif unit is None and below:
                unit, origin = below, "units row"
            elif unit and below and below.replace(" ", "") != unit.replace(" ", ""):
                problems.append(finding(
                    "COL-UNIT-CONFLICT", f"column '{clip(written, 40)}' says [{clip(unit, 30)}] "
                    f"but the units row under it says [{clip(below, 30)}]", file=file,
                    line=line + 1, column=name, seen=clip(below, 30), expected=clip(unit, 30)))
                continue
            if not unit and COLUMNS[name][1] is not None:
                problems.append(finding(
                    "COL-NO-UNIT", f"column '{clip(written, 40)}' has no unit", file=file,
                    line=line, column=clip(written, 40),
                    expected="name [unit], name/unit or a units row, e.g. 'Cp [J/(mol*K)]'"))
                continue
        if name in seen:
            problems.append(finding("COL-REPEATED", f"column '{name}' appears more than once "
                                    f"(positions {seen[name] + 1} and {pos + 1})", file=file,
                                    line=line, column=name))
            continue
        seen[name] = pos
        found.append(Column(pos, written, name, unit, origin))
    for key in sorted(set(mapping) - used):
        problems.append(finding("COL-MAP-UNUSED", f"the 'columns' mapping names '{clip(key, 40)}',"
                                " which is not a header cell of this table", file=file,
                                line=line, column=clip(key, 40), seen=clip(key, 40),
                                expected="a header cell as written: " +
                                clip(", ".join(c.strip() for c in header), 80)))
    for name, (_, _, required) in COLUMNS.items():
        increments = name == "Cp" and "H-H298" in seen   # Cp comes from fitting H - H298
        if required and name not in seen and not increments:
            problems.append(finding("COL-REQUIRED", f"required column '{name}' is missing",
                                    file=file, line=line, column=name,
                                    seen=clip(", ".join(c.strip() for c in header), 80) or "(none)",
                                    expected=f"a column '{name} [unit]'"))
    return found, problems
