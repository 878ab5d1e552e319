"""Benchmark: report generation (HTML pages and SVG plots) for N synthetic species.

    .venv/bin/python benchmarks/bench_report.py --species 1000

Builds the library without the report, then times the report alone and the tables [s], and
prints the time of bench_build's reference workload (``host_speed``).
"""

import argparse
import sys
import tempfile
import time
from pathlib import Path

from bench_build import make_raw, speed_line
from thermoledger import build
from thermoledger.core.settings import OutputSettings, Settings
from thermoledger.release import report, tables
from thermoledger.release.assemble import plot_points


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=1000)
    p.add_argument("--points", type=int, default=100)
    args = p.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        raw = Path(tmp) / "raw"
        make_raw(raw, args.species, args.points)
        ctx = Settings(outputs=OutputSettings(report=False))
        result = build.build(raw, Path(tmp) / "out", ctx, write=False)
        checked = build.examine(raw, ctx)
        points = plot_points(result.document["species"], checked)
        t0 = time.perf_counter()
        files = report.report_files(result.document, points, ctx.fit.accept_cp_max_rel)
        t_report = time.perf_counter() - t0
        t0 = time.perf_counter()
        tables.tables_parquet_bytes(result.document)
        t_tables = time.perf_counter() - t0
    size = sum(len(b) for b in files.values()) / 2**20
    print(f"report for {args.species} species: {t_report:.2f} s "
          f"({1000 * t_report / args.species:.3f} ms per species, {len(files)} files, "
          f"{size:.1f} MiB)")
    print(f"tables.parquet for {args.species} species: {t_tables:.2f} s")
    print(f"host speed: {speed_line()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
