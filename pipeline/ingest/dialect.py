"""How a CSV table is written: its encoding, comment lines, delimiter and decimal mark.

Forgiving where the meaning is certain, refusing where it is not:

* encoding: UTF-8 (a byte-order mark allowed); otherwise Windows-1252, which reads Latin-1
  text identically (the two differ only in 0x80-0x9F, control codes in Latin-1 that no
  text uses) and is recorded with an info finding; bytes that neither reads are refused;
* comment lines: a line whose first non-blank character is ``#`` is skipped;
* delimiter: the standard library's ``csv.Sniffer`` over the first lines, choosing among
  comma, semicolon and tab; a comma when there is nothing to tell (a single column);
* decimal mark: the point, or the comma when the delimiter is not a comma and the numbers
  use it; a file whose numbers use both is refused, as is a number with a comma in a
  comma-delimited file (``1,234`` may be 1.234 or 1234).
"""

import csv
import re
from dataclasses import dataclass

from ..core.findings import Finding, clip, finding

DELIMITERS = {",": "comma", ";": "semicolon", "\t": "tab"}

#: lines the sniffer looks at (the header and the first rows)
SNIFF_LINES = 40

_LINE_BREAK = re.compile(r"\r\n|\r|\n")
_COMMA_DECIMAL = re.compile(r"^[+-]?[0-9]*,[0-9]+([eE][+-]?[0-9]+)?$|^[+-]?[0-9]+,[0-9]*([eE][+-]?[0-9]+)?$")
_POINT_DECIMAL = re.compile(r"^[+-]?([0-9]+\.[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?$")


@dataclass(frozen=True)
class Dialect:
    """How one file was read (recorded in the provenance of its table)."""

    encoding: str               # 'utf-8' or 'cp1252'
    delimiter: str              # ',', ';' or '\t'
    decimal_mark: str = "."     # '.' or ','
    comment_lines: tuple = ()   # line numbers skipped as comments

    def to_dict(self) -> dict:
        return {"encoding": self.encoding, "delimiter": DELIMITERS[self.delimiter],
                "decimal_mark": "point" if self.decimal_mark == "." else "comma",
                "comment_lines": list(self.comment_lines)}


def decode(raw: bytes, file: str) -> tuple[str | None, str, list[Finding]]:
    """(text, encoding, findings): UTF-8 first, then Windows-1252 with an info finding."""
    try:
        return raw.decode("utf-8-sig"), "utf-8", []
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        first = f"byte 0x{raw[exc.start]:02x} at offset {exc.start}"
    try:
        text = raw.decode("cp1252")
    except UnicodeDecodeError as exc:
        bad = raw[: exc.start].count(b"\n") + 1
        return None, "", [finding("TAB-ENCODING", f"{first} is not UTF-8, and byte "
                                  f"0x{raw[exc.start]:02x} at offset {exc.start} is not text in "
                                  "Windows-1252 or Latin-1 either", file=file, line=bad,
                                  expected="UTF-8 text")]
    return text, "cp1252", [finding("TAB-LEGACY-ENCODING", f"{first} is not UTF-8; the file "
                                    "was read as Windows-1252 (Latin-1 text reads the same)",
                                    file=file, line=line, expected="UTF-8 text")]


def content_lines(text: str) -> tuple[list[str], list[int], tuple]:
    """(lines, their numbers from 1, comment line numbers) without blank and ``#`` lines.
    Text without '#' has no comment: its lines are only told from blank ones (a line is
    blank when ``strip`` leaves nothing, that is when it is empty or all ``isspace``)."""
    parts = text.split("\n") if "\r" not in text else _LINE_BREAK.split(text)
    if "#" not in text:
        numbers = [n for n, line in enumerate(parts, start=1) if line and not line.isspace()]
        return [parts[n - 1] for n in numbers], numbers, ()
    return lines_one_by_one(parts)


def lines_one_by_one(parts: list[str]) -> tuple[list[str], list[int], tuple]:
    """``content_lines`` of the lines ``parts``, each judged alone."""
    lines, numbers, comments = [], [], []
    for number, line in enumerate(parts, start=1):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            comments.append(number)
            continue
        lines.append(line)
        numbers.append(number)
    return lines, numbers, tuple(comments)


def sniff_delimiter(lines: list[str]) -> str:
    """The delimiter of ``lines`` by csv.Sniffer among comma, semicolon and tab; a comma when
    no candidate splits the lines consistently."""
    sample = "\n".join(lines[:SNIFF_LINES])
    present = [d for d in DELIMITERS if d in sample]
    if not present:
        return ","
    if len(present) == 1 and "\"" not in sample and "'" not in sample:
        counts = {line.count(present[0]) for line in lines[:SNIFF_LINES]}
        if len(counts) == 1:     # one candidate, as often on every line: what csv.Sniffer says
            return present[0]
    try:
        return csv.Sniffer().sniff(sample, delimiters="".join(DELIMITERS)).delimiter
    except csv.Error:
        return ","


def decimal_mark(cells, delimiter: str, file: str) -> tuple[str | None, list[Finding]]:
    """The decimal mark of the number cells ``cells`` ((line, column, text) triples): '.' or
    ','; None with a finding when they mix both marks, which cannot be read safely. Between
    commas a comma is never a decimal mark: '.' without a look at the cells."""
    if delimiter == ",":
        return ".", []
    first = {}
    for line, column, text in cells:
        for mark, pattern in ((",", _COMMA_DECIMAL), (".", _POINT_DECIMAL)):
            if mark not in first and pattern.match(text):
                first[mark] = (line, column, text)
        if len(first) == 2:
            break
    if "," not in first:
        return ".", []
    if "." not in first:
        return ",", []
    (lc, cc, tc), (lp, cp, tp) = first[","], first["."]
    return None, [finding("TAB-DECIMAL-MIXED", f"the numbers use both decimal marks: "
                          f"'{clip(tc, 20)}' (line {lc}, {cc}) and '{clip(tp, 20)}' (line {lp}, "
                          f"{cp}); the table is not read rather than guessed", file=file,
                          line=min(lc, lp), column=cc, seen=f"{clip(tc, 20)} / {clip(tp, 20)}",
                          expected="one decimal mark in the whole file")]


def ambiguous_comma(text: str, delimiter: str) -> bool:
    """True for a number with a comma in a comma-delimited file (decimal or thousands?)."""
    return delimiter == "," and bool(_COMMA_DECIMAL.match(text.strip()))
