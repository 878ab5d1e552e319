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
