"""Parquet written a row group at a time, and what Arrow's allocator keeps of each group.

pyarrow's default memory pool (mimalloc in its wheels) keeps the pages it freed for reuse
instead of returning them to the operating system: after one row group of library.parquet
at 10 000 species the build's process held some 100 MB more for the rest of the build, and
400 MB at 100 000 species, which the report's forked workers then shared and the peak of
the build counted (measured with /proc/self/smaps; benchmarks/bench_build.py).

A release's Parquet files are handed on as byte pieces, one per row group, as they are
written (``parquet_chunks``): at 100 000 species tables.parquet is some 220 MB, which a
file written into memory first held whole, and twice while it was copied out.
"""


def arrow_array(values, arrow_type):
    """``pyarrow.array(values, type=arrow_type)``, the same array, built from its buffers
    (pyarrow.Array.from_buffers) for the types a release writes: float64, int32, bool,
    string and list of float64, from a list (None: null) or a numpy array. pyarrow.array
    asks pandas whether its argument is a pandas object, list or numpy array alike, and
    importing pandas for it cost each process that wrote a release's Parquet files 0.15-0.2
    s (python -X importtime); a build needs no pandas otherwise."""
    import numpy as np
    import pyarrow as pa

    n = len(values)
    if isinstance(values, np.ndarray) and values.dtype != object:
        present = np.ones(n, dtype=bool)
    else:
        present = np.fromiter((v is not None for v in values), dtype=bool, count=n)
    valid = None if present.all() else pa.py_buffer(np.packbits(present, bitorder="little"))
    if pa.types.is_string(arrow_type):
        encoded = [v.encode("utf-8") if v is not None else b"" for v in values]
        return pa.Array.from_buffers(arrow_type, n, [valid, _offsets(map(len, encoded), n),
                                                     pa.py_buffer(b"".join(encoded))])
    if pa.types.is_list(arrow_type):
        items = [v if v is not None else () for v in values]
        child = arrow_array([x for v in items for x in v], arrow_type.value_type)
        return pa.Array.from_buffers(arrow_type, n, [valid, _offsets(map(len, items), n)],
                                     children=[child])
    if pa.types.is_boolean(arrow_type):
        bits = np.fromiter((bool(v) for v in values), dtype=bool, count=n) \
            if not isinstance(values, np.ndarray) or values.dtype != bool else values
        return pa.Array.from_buffers(arrow_type, n, [valid, pa.py_buffer(
            np.packbits(bits, bitorder="little"))])
    dtype = np.dtype(arrow_type.to_pandas_dtype())
    if isinstance(values, np.ndarray) and values.dtype != object:
        data = np.ascontiguousarray(values, dtype=dtype)
    else:
        data = np.array([v if v is not None else 0 for v in values], dtype=dtype)
    return pa.Array.from_buffers(arrow_type, n, [valid, pa.py_buffer(data)])


def _offsets(lengths, n: int):
    """The int32 offsets buffer of ``n`` items of ``lengths``."""
    import numpy as np
    import pyarrow as pa

    out = np.zeros(n + 1, dtype=np.int32)
    np.cumsum(np.fromiter(lengths, dtype=np.int64, count=n), out=out[1:], dtype=np.int32) \
        if n else None
    return pa.py_buffer(out)


def give_back() -> None:
    """Return to the operating system the memory Arrow's default pool holds unused (a few
    milliseconds; called after each row group a release writes)."""
    import pyarrow as pa

    pa.default_memory_pool().release_unused()


class _Pieces:
    """A write-only file for pyarrow's Parquet writer that keeps what was written until it
    is taken, and counts the bytes written for the writer's offsets."""

    closed = False

    def __init__(self):
        self._pieces, self._at = [], 0

    def write(self, data) -> int:
        piece = bytes(data)
        self._pieces.append(piece)
        self._at += len(piece)
        return len(piece)

    def tell(self) -> int:
        return self._at

    def flush(self) -> None:
        pass

    def writable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return False

    def take(self) -> bytes:
        out, self._pieces = b"".join(self._pieces), []
        return out


def parquet_chunks(schema, groups, **options):
    """The bytes of a Parquet file of ``schema`` (pyarrow.parquet.ParquetWriter ``options``)
    in pieces: one per ``groups`` item (Arrow table, rows of its row group or None), each
    yielded as soon as written and its memory given back, then the footer."""
    import pyarrow.parquet as pq

    sink = _Pieces()
    with pq.ParquetWriter(sink, schema, **options) as writer:
        for table, rows in groups:
            writer.write_table(table, row_group_size=rows)
            del table
            give_back()
            yield sink.take()
    yield sink.take()


def regrouped(tables, size: int, schema):
    """(Arrow table, rows) of each row group ``parquet_chunks`` is to write: the rows of
    ``tables`` (Arrow tables of ``schema``, in order) cut into groups of ``size`` rows, the
    last one smaller and given with rows None (the writer's own cut: one group); one empty
    group when there are no rows. A table of ``size`` rows that starts a group is given as
    it came; the rest are joined and cut, each group's columns made one chunk
    (combine_chunks), so that its bytes do not depend on how its rows came (made, or read
    from another file), and what is left over copied out of the table it came from (a
    slice would keep all of it: at 100 000 species library.parquet's groups are some 80
    MB each)."""
    import pyarrow as pa

    pending, count, written = [], 0, 0
    for table in tables:
        if not table.num_rows:
            continue
        if not pending and table.num_rows == size:
            yield table, size
            written += 1
            continue
        pending.append(table)
        count += table.num_rows
        if count < size:
            continue
        whole, at = pa.concat_tables(pending), 0
        pending = []
        while count - at >= size:
            yield whole.slice(at, size).combine_chunks(), size
            at, written = at + size, written + 1
        if count > at:
            pending = [whole.slice(at).combine_chunks()]
        count -= at
        del whole
    if count or not written:
        yield (pa.concat_tables(pending).combine_chunks() if pending
               else schema.empty_table()), None


def _as_of(table, schema):
    """Arrow table ``table`` with ``schema``: its metadata given, its columns cast only when
    their types differ (a cast loads pyarrow.compute: 30 ms)."""
    if table.schema.equals(schema, check_metadata=False):
        return table.replace_schema_metadata(schema.metadata)
    return table.cast(schema)


class RowSource:
    """Rows of an existing Parquet file of ``schema``, read a row group at a time (the last
    one read kept) and given as Arrow tables of ``schema``."""

    def __init__(self, path, schema):
        import numpy as np
        import pyarrow.parquet as pq

        self._file, self._schema = pq.ParquetFile(path), schema
        meta = self._file.metadata
        self._ends = np.cumsum([meta.row_group(g).num_rows for g in range(meta.num_row_groups)],
                               dtype=np.int64)
        self._group, self._table = None, None

    def rows(self, start: int, stop: int):
        """Arrow tables of rows ``start`` to ``stop`` (excluded), in order (IndexError
        beyond the file's rows)."""
        import numpy as np

        while start < stop:
            g = int(np.searchsorted(self._ends, start, side="right"))
            if g >= len(self._ends):
                raise IndexError(f"row {start} is beyond the rows of the file")
            if g != self._group:
                self._table = None
                self._table = _as_of(self._file.read_row_group(g), self._schema)
                self._group = g
            first = int(self._ends[g]) - self._table.num_rows
            end = min(stop, int(self._ends[g]))
            yield self._table.slice(start - first, end - start)
            start = end

    def close(self) -> None:
        self._table = None
        self._file.close()
