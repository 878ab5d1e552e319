"""What Arrow's allocator keeps of a written row group.

pyarrow's default memory pool (mimalloc in its wheels) keeps the pages it freed for reuse
instead of returning them to the operating system: after one row group of library.parquet
at 10 000 species the build's process held some 100 MB more for the rest of the build, and
400 MB at 100 000 species, which the report's forked workers then shared and the peak of
the build counted (measured with /proc/self/smaps; benchmarks/bench_build.py).
"""


def give_back() -> None:
    """Return to the operating system the memory Arrow's default pool holds unused (a few
    milliseconds; called after each row group a release writes)."""
    import pyarrow as pa

    pa.default_memory_pool().release_unused()
