"""Every snippet of README.md and DEVELOPERS.md works: Python blocks run (doctests compare
their printed output), command lines of `thermoledger` parse with the real parser, and the
benchmark options they name exist."""

import doctest
import re
import shlex
import shutil
import subprocess
import sys

import pytest
from thermoledger.cli.parse import parser

from .conftest import PROJECT

DOCS = ("README.md", "DEVELOPERS.md")


def fenced(doc: str) -> list:
    """(language, text) of every fenced code block of ``doc``, in order."""
    out, language, lines = [], None, []
    for line in (PROJECT / doc).read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            if language is None:
                language, lines = line[3:].strip(), []
            else:
                out.append((language, "\n".join(lines) + "\n"))
                language = None
        elif language is not None:
            lines.append(line)
    return out


def blocks(doc: str, language: str) -> list:
    return [text for lang, text in fenced(doc) if lang == language]


def command_lines(doc: str) -> list:
    """Command lines shown in plain code blocks and `inline code`, without placeholders."""
    prose = "\n".join(line for line in (PROJECT / doc).read_text(encoding="utf-8").splitlines()
                      if not line.startswith("```"))
    found = blocks(doc, "") + re.findall(r"`([^`\n]+)`", prose)
    out = []
    for chunk in found:
        for line in chunk.splitlines():
            line = line.split("  #")[0].strip()
            m = re.match(r"^(?:\.venv/bin/)?thermoledger ([a-z]+(?: .*)?)$", line)
            if not m or re.search(r"\[|\.\.\.|…|\b[A-Z]{2,}\b", m.group(1)):
                continue
            out.append(m.group(1))
    return out


def python_snippets():
    return [pytest.param(doc, i, id=f"{doc}-python-{i}")
            for doc in DOCS for i, _ in enumerate(blocks(doc, "python"))]


@pytest.fixture
def project_like(tmp_path, demo_release, monkeypatch):
    """A folder like the project after the demo build: raw/ (a copy) and curated/."""
    shutil.copytree(PROJECT / "raw", tmp_path / "raw")
    (tmp_path / "curated").symlink_to(demo_release, target_is_directory=True)
    monkeypatch.chdir(tmp_path)
    return tmp_path


def test_the_docs_hold_python_snippets():
    assert len(blocks("README.md", "python")) >= 1 and len(blocks("DEVELOPERS.md", "python")) >= 1


@pytest.mark.parametrize("doc, index", python_snippets())
def test_python_snippet_runs(project_like, doc, index, capsys):
    code = blocks(doc, "python")[index]
    if ">>>" in code:
        test = doctest.DocTestParser().get_doctest(code, {}, f"{doc} block {index}", doc, 0)
        runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
        runner.run(test, out=lambda s: print(s, file=sys.stderr))
        result = runner.summarize(verbose=False)
        assert result.attempted > 0 and result.failed == 0, capsys.readouterr().err
    else:
        exec(compile(code, f"{doc} block {index}", "exec"), {"__name__": "snippet"})
        assert capsys.readouterr().out.strip()   # each plain snippet shows what it made


@pytest.mark.parametrize("doc", DOCS)
def test_command_lines_parse(doc):
    lines = command_lines(doc)
    assert lines, f"no thermoledger command line found in {doc}"
    for line in lines:
        try:
            parser().parse_args(shlex.split(line))
        except SystemExit:
            pytest.fail(f"{doc}: `thermoledger {line}` does not parse")


def test_benchmark_options_exist():
    shown = {}
    for doc in DOCS:
        text = (PROJECT / doc).read_text(encoding="utf-8")
        for script, args in re.findall(r"(benchmarks/\w+\.py)((?: --[\w-]+(?: \d+)?)*)", text):
            shown.setdefault(script, set()).update(re.findall(r"--[\w-]+", args))
    assert len(shown) >= 5
    running = {}
    for script in shown:              # the scripts' --help, all at once
        assert (PROJECT / script).is_file(), script
        running[script] = subprocess.Popen([sys.executable, str(PROJECT / script), "--help"],
                                           stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                           text=True)
    for script, options in shown.items():
        out, err = running[script].communicate(timeout=120)
        assert running[script].returncode == 0, err
        for option in options:
            assert option in out, f"{script} has no option {option}"
