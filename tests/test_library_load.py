"""A malformed library.json given to props or diff is a clear message (exit 2), never a
traceback: fuzzed mutations of a real demo library (hypothesis)."""

import json
import shutil

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from thermoledger.cli import main as cli
from thermoledger.core import jsonread
from thermoledger.core.errors import OutputError
from thermoledger.release.document import json_bytes

from .conftest import PROJECT


@pytest.fixture(scope="module")
def library_doc():
    return json.loads((PROJECT / "curated" / "library.json").read_text())


def _paths(doc, prefix=()):
    """Every (path, value) of a JSON document."""
    yield prefix, doc
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield from _paths(v, prefix + (i,))


def _set(doc, path, value):
    for key in path[:-1]:
        doc = doc[key]
    doc[path[-1]] = value


VALUES = st.one_of(st.none(), st.booleans(), st.integers(-10**30, 10**30),
                   st.floats(allow_nan=False), st.text(max_size=8),
                   st.lists(st.floats(allow_nan=False, width=32), max_size=3),
                   st.just({}), st.just([]))


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(data=st.data())
def test_mutated_libraries_are_messages(tmp_path_factory, capsys, library_doc, data):
    doc = json.loads(json.dumps(library_doc))
    paths = [p for p, _ in _paths(doc) if p]
    for _ in range(data.draw(st.integers(1, 3))):
        path = data.draw(st.sampled_from(paths))
        try:
            _set(doc, path, data.draw(VALUES))
        except (KeyError, IndexError, TypeError):
            pass
    folder = tmp_path_factory.mktemp("lib")
    try:             # as a build writes it (read at once), or by another writer (strictly)
        text = json_bytes(doc) if data.draw(st.booleans()) else json.dumps(doc).encode()
    except (TypeError, OutputError):      # an integer orjson cannot write
        text = json.dumps(doc).encode()
    (folder / "library.json").write_bytes(text)
    for argv in (["props", folder, "N2(g)", "300", "1000"], ["diff", folder, folder]):
        code = cli.main([str(a) for a in argv])
        err = capsys.readouterr().err
        assert code in (0, 2) and "Traceback" not in err and "internal error" not in err, err


@pytest.mark.parametrize("text, message", [
    ("{", "not valid JSON"), ('{"library_format": 1, "library_format": 1}', "appears twice"),
    ("[" * 100 + "]" * 100, "nested"), ('{"library_format": 1}', "breaks the library schema"),
    ('{"library_format": NaN}', "not valid JSON"), ("[]", "not a thermoledger library"),
])
def test_broken_library_files(tmp_path, capsys, text, message):
    (tmp_path / "library.json").write_text(text)
    code = cli.main(["props", str(tmp_path), "N2", "300"])
    err = capsys.readouterr().err
    assert code == 2 and message in err


def test_a_release_home_is_read_through_its_current_release(tmp_path, capsys):
    shutil.copytree(PROJECT / "curated", tmp_path / "c", symlinks=True)
    code = cli.main(["props", str(tmp_path / "c"), "N2(g)", "300"])
    assert code == 0 and "N2(g)" in capsys.readouterr().out


def _nested(levels: int) -> dict:
    doc = {"library_format": 1}
    for _ in range(levels - 1):
        doc = {"x": doc}
    return doc


@pytest.mark.parametrize("text, message", [
    (b'{\n  "library_format": 1,\n  "library_format": 1\n}\n', "appears twice"),
    (json_bytes(_nested(33)), "nested"),
    (json_bytes(_nested(32)), "not a thermoledger library"),
    (json_bytes(_nested(1)).replace(b"1\n", b"1.0\n"), "breaks the library schema"),
])
def test_a_library_written_as_a_build_writes_it_is_judged_the_same(tmp_path, capsys, text,
                                                                    message):
    """The bytes of a build are read at once (jsonread.canonical), and nothing that the
    strict reader refuses gets through that way: a key twice, too deep a nesting."""
    (tmp_path / "library.json").write_bytes(text)
    code = cli.main(["props", str(tmp_path), "N2", "300"])
    assert code == 2 and message in capsys.readouterr().err


DOCS = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-2**63, 2**63 - 1), st.text(max_size=4),
              st.floats(allow_nan=False, allow_infinity=False)),
    lambda inner: st.one_of(st.lists(inner, max_size=3),
                            st.dictionaries(st.text(max_size=3), inner, max_size=3)),
    max_leaves=30)


@settings(max_examples=300, deadline=None)
@given(DOCS, st.integers(1, 6))
def test_reading_at_once_gives_what_the_strict_reader_gives(doc, max_depth):
    """For any document a build could write: canonical reads what the strict reader reads,
    or leaves it to the strict reader (None), never accepting a nesting it refuses."""
    data = json_bytes(doc)
    fast = jsonread.canonical(data, max_depth=max_depth)
    try:
        strict = jsonread.loads(data.decode(), file="x", max_depth=max_depth)
    except Exception:  # noqa: BLE001 - refused by the strict reader: never read at once
        assert fast is None
        return
    assert fast is None or fast == strict
    if jsonread.depth(data.decode()) < max_depth:
        assert fast == strict
