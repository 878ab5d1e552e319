"""The Arrow arrays a release's Parquet files are written from: built from their buffers
(release.arrowmem.arrow_array) so that no pandas is imported, they are pyarrow.array's own
arrays, value for value, null for null."""

import math
import subprocess
import sys

import numpy as np
import pyarrow as pa
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.release.arrowmem import arrow_array

FLOATS = st.floats(allow_nan=True, allow_infinity=True, allow_subnormal=True)
TEXT = st.text(max_size=12)


def _same(got: pa.Array, want: pa.Array) -> None:
    got.validate(full=True)
    assert got.type == want.type and len(got) == len(want)
    assert got.null_count == want.null_count
    assert _marked(got.to_pylist()) == _marked(want.to_pylist())


def _marked(value):
    """``value`` with every NaN replaced by a mark (NaN equals nothing) and every number
    paired with its type."""
    if isinstance(value, list):
        return [_marked(v) for v in value]
    if isinstance(value, float) and math.isnan(value):
        return "NaN"
    return (type(value).__name__, value)


@settings(max_examples=200, deadline=None)
@given(st.lists(FLOATS | st.none(), max_size=40))
def test_float_columns_are_pyarrow_s(values):
    _same(arrow_array(values, pa.float64()), pa.array(values, type=pa.float64()))
    plain = np.array([0.0 if v is None else v for v in values])
    _same(arrow_array(plain, pa.float64()), pa.array(plain, type=pa.float64()))


@settings(max_examples=200, deadline=None)
@given(st.lists(st.integers(-2 ** 31, 2 ** 31 - 1) | st.none(), max_size=40))
def test_integer_columns_are_pyarrow_s(values):
    _same(arrow_array(values, pa.int32()), pa.array(values, type=pa.int32()))


@settings(max_examples=200, deadline=None)
@given(st.lists(TEXT | st.none(), max_size=40))
def test_text_columns_are_pyarrow_s(values):
    _same(arrow_array(values, pa.string()), pa.array(values, type=pa.string()))


@settings(max_examples=200, deadline=None)
@given(st.lists(st.lists(FLOATS, max_size=9) | st.none(), max_size=30))
def test_list_columns_are_pyarrow_s(values):
    t = pa.list_(pa.float64())
    _same(arrow_array(values, t), pa.array(values, type=t))


@settings(max_examples=100, deadline=None)
@given(st.lists(st.booleans(), max_size=70))
def test_flag_columns_are_pyarrow_s(values):
    flags = np.array(values, dtype=bool)
    _same(arrow_array(flags, pa.bool_()), pa.array(flags, type=pa.bool_()))
    _same(arrow_array(values, pa.bool_()), pa.array(values, type=pa.bool_()))


def test_writing_a_release_s_parquet_files_imports_no_pandas(tmp_path):
    """library.parquet and tables.parquet of a small library written in a fresh process
    leave pandas unimported (pyarrow.array would import it)."""
    code = """
import sys
from pathlib import Path
from thermoledger.release import document, tables
from thermoledger.library.document import load
doc = load(Path(sys.argv[1]))
assert document.library_parquet_bytes(doc) and tables.tables_parquet_bytes(doc)
print("pandas" in sys.modules)
"""
    root = __import__("pathlib").Path(__file__).resolve().parents[1]
    got = subprocess.run([sys.executable, "-c", code, str(root / "curated")],
                         capture_output=True, text=True, check=True)
    assert got.stdout.strip() == "False"
