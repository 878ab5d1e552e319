"""The README's validation table lists every findings code the program can emit, each with
its severity, and no code the program does not have."""

import re

from thermoledger.core.findings import CODES

from .conftest import PROJECT

CODE = re.compile(r"`([A-Z][A-Z0-9]*(?:-[A-Z0-9]+)+)`")


def _rows():
    text = (PROJECT / "README.md").read_text()
    start = text.index("### What validation catches")
    end = text.index("\n## ", start)
    return [line for line in text[start:end].splitlines() if line.startswith("| ")
            and CODE.search(line)]


def test_the_readme_lists_every_code_and_only_those():
    listed = [c for row in _rows() for c in CODE.findall(row.split(" | ")[1])]
    assert sorted(listed) == sorted(set(listed)), "a code is listed twice"
    assert set(listed) == set(CODES)


def test_each_code_is_listed_with_its_severity():
    for row in _rows():
        cells = [c.strip() for c in row.strip("|").split(" | ")]
        codes, severity = CODE.findall(cells[1]), cells[2]
        named = dict(re.findall(r"`([A-Z0-9-]+)` (error|warning|info)", severity))
        default = severity.split(";")[0].strip()
        for code in codes:
            assert CODES[code].severity == named.get(code, default), (code, severity)
