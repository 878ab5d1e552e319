"""Rows: named read-only numpy columns that behave like the numpy operations they stand for."""

import pickle

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.core.rows import Rows, concat

FLOATS = st.floats(allow_nan=True, allow_infinity=False, width=64)


def rows_of(t, cp):
    return Rows({"line": np.arange(2, len(t) + 2), "T": np.asarray(t, float),
                 "Cp": np.asarray(cp, float)})


@st.composite
def tables(draw):
    n = draw(st.integers(0, 30))
    return rows_of(draw(st.lists(FLOATS, min_size=n, max_size=n)),
                   draw(st.lists(FLOATS, min_size=n, max_size=n)))


@settings(max_examples=200, deadline=None)
@given(tables(), st.data())
def test_take_and_concat_are_the_numpy_selections(rows, data):
    n = len(rows)
    mask = np.asarray(data.draw(st.lists(st.booleans(), min_size=n, max_size=n)), dtype=bool)
    index = np.asarray(data.draw(st.lists(st.integers(0, max(n - 1, 0)), max_size=n if n else 0)),
                       dtype=int)
    for keep in (mask, index):
        got = rows.take(keep)
        assert got.columns == rows.columns and len(got) == len(rows["T"][keep])
        for name in rows.columns:
            np.testing.assert_array_equal(got[name], rows[name][keep])
    both = concat([rows, rows.take(mask)])
    for name in rows.columns:
        np.testing.assert_array_equal(both[name], np.r_[rows[name], rows[name][mask]])
    assert len(rows.head(0)) == 0 and rows.head(0).columns == rows.columns


def test_columns_are_read_only_and_new_columns_make_new_rows():
    cp = np.array([29.1, 29.2, 29.4])
    rows = rows_of([300.0, 400.0, 500.0], cp)
    with pytest.raises(ValueError):
        rows["Cp"][0] = 1.0
    cp[0] = 30.0          # the caller's array stays its own to change
    assert cp[0] == 30.0
    more = rows.with_columns(file="lab/x.csv", Cp=np.ones(3))
    assert more.columns == ("line", "T", "Cp", "file")
    assert more["file"].tolist() == ["lab/x.csv"] * 3 and more["Cp"].tolist() == [1.0] * 3
    assert rows["Cp"][1] == 29.2                        # the original is unchanged
    assert more.without("file").columns == rows.columns
    np.testing.assert_array_equal(rows.with_columns(S=np.nan).given("S"), [False] * 3)


def test_unequal_or_nested_columns_are_refused():
    with pytest.raises(ValueError, match="has 2 rows, not 3"):
        Rows({"T": np.ones(3), "Cp": np.ones(2)})
    with pytest.raises(ValueError, match="not one-dimensional"):
        Rows({"T": np.ones((3, 2))})
    with pytest.raises(ValueError, match="needs a column before it"):
        Rows({"file": "x.csv"})


def test_rows_survive_a_trip_to_a_worker_process_read_only():
    rows = rows_of([300.0, 400.0], [29.0, 30.0]).with_columns(file="a.csv")
    back = pickle.loads(pickle.dumps(rows))
    assert back.columns == rows.columns and back["file"].tolist() == ["a.csv", "a.csv"]
    np.testing.assert_array_equal(back["T"], rows["T"])
    with pytest.raises(ValueError):
        back["T"][0] = 0.0


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(FLOATS, FLOATS), max_size=12), st.booleans())
def test_the_valid_rows_and_the_first_of_each_temperature_are_numpy_s_selections(pairs, ordered):
    """valid_columns keeps the finite positive rows sorted by T (stably); rows that are all
    valid and sorted already are given back as they are. first_of_each_t keeps the first
    row of each run of equal T. Every column of the result is read-only."""
    from thermoledger.core.records import first_of_each_t, valid_columns

    if ordered:
        pairs = sorted(pairs, key=lambda p: (np.isnan(p[0]), p[0]))
    t = np.array([p[0] for p in pairs], dtype=float)
    cp = np.array([p[1] for p in pairs], dtype=float)
    rows = rows_of(t, cp)
    ok = np.flatnonzero(np.isfinite(t) & np.isfinite(cp) & (t > 0) & (cp > 0))
    order = ok[np.argsort(t[ok], kind="stable")]
    got = valid_columns(rows)
    for name in ("line", "T", "Cp"):
        assert np.array_equal(got[name], rows[name][order])
        assert not got[name].flags.writeable
    first = first_of_each_t(got)
    tv = got["T"]
    keep = np.r_[True, tv[1:] != tv[:-1]] if len(tv) else np.zeros(0, bool)
    for name in ("line", "T", "Cp"):
        assert np.array_equal(first[name], got[name][keep])
        assert not first[name].flags.writeable
    assert len(first) == int(keep.sum()) and len(got) == len(order)


def test_the_rows_a_fit_used_are_named_file_by_file_lines_ascending():
    """build.rows_used: each file once, in order, with its lines sorted (the provenance of a
    species); rows of one file take a shortcut that must give the same answer."""
    from array import array

    from thermoledger.build import rows_used

    one = {"file": np.array(["a.csv"] * 4), "line": np.array([7, 3, 5, 4])}
    assert rows_used(one) == (("a.csv", array("q", [3, 4, 5, 7])),)
    two = {"file": np.array(["b.csv", "a.csv", "b.csv", "a.csv"]),
           "line": np.array([9, 8, 2, 3])}
    assert rows_used(two) == (("a.csv", array("q", [3, 8])), ("b.csv", array("q", [2, 9])))
    assert rows_used({"file": np.array([], dtype=str), "line": np.array([], dtype=int)}) == ()


def test_rows_without_rows_pickle_as_names_and_dtypes_and_come_back_alike():
    """A partition keeps its tables without their rows; pickled, they carry each column's
    name and dtype alone and come back the same empty read-only columns."""
    empty = Rows({"T": np.zeros(0), "file": np.array([], dtype="<U12"),
                  "phase": np.array([], dtype=object), "line": np.zeros(0, dtype=np.int64)})
    data = pickle.dumps(empty, protocol=pickle.HIGHEST_PROTOCOL)
    assert b"numpy" not in data
    back = pickle.loads(data)
    assert back.columns == empty.columns and len(back) == 0
    for name in empty.columns:
        assert back[name].dtype == empty[name].dtype and not back[name].flags.writeable
    full = rows_of([300.0, 400.0], [29.1, 29.3])
    again = pickle.loads(pickle.dumps(full))
    assert again.columns == full.columns
    np.testing.assert_array_equal(again["Cp"], full["Cp"])
