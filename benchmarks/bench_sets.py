"""Benchmark: auditing and adopting published coefficient sets.

    .venv/bin/python benchmarks/bench_sets.py --sets 1000

Writes (SYNTHETIC: copies of the 7-coefficient sets in thermoledger/testing/coefsets.py
under new species names, every tenth with a slip in a6 of its upper range: H steps by
2 R K at the breakpoint) one coefficient-set
file of N sets, then times ``check`` (ingest, evaluation, audit, reconcile) and a
``build --no-report`` (sound sets adopted, slipped ones held back) in this process, and a
build with ``--repair all`` (the slipped tenth refitted) [sets/s, s, peak MiB].
"""

import argparse
import resource
import sys
import tempfile
import time
from pathlib import Path

from thermoledger import build
from thermoledger.core.settings import OutputSettings, Settings
from thermoledger.testing import coefsets as cs


def make_sets(raw: Path, n: int) -> None:
    names = sorted(cs.NASA7)
    rows = []
    for k in range(n):
        name = names[k % len(names)]
        formula, geometry, ranges = cs.NASA7[name]
        if k % 10 == 9:
            ranges = cs.planted(ranges, 1, 5, ranges[1][2][5] + 2.0)
        rows += cs.set_rows(f"{name}-{k}", formula, "nasa7", ranges, geometry)
    cs.write_sets(raw, "bench", rows)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--sets", type=int, default=1000)
    args = p.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        raw = Path(tmp) / "raw"
        make_sets(raw, args.sets)
        t0 = time.perf_counter()
        checked = build.examine(raw)
        dt = time.perf_counter() - t0
        print(f"check of {args.sets} sets: {dt:.2f} s, {args.sets / dt:.0f} sets/s, "
              f"{len(checked.quarantined)} held back")
        ctx = Settings(outputs=OutputSettings(report=False))
        t0 = time.perf_counter()
        result = build.build(raw, Path(tmp) / "out", ctx)
        dt = time.perf_counter() - t0
        print(f"build --no-report of {args.sets} sets: {dt:.2f} s, {args.sets / dt:.0f} sets/s, "
              f"{len(result.fitted)} adopted")
        t0 = time.perf_counter()
        result = build.build(raw, Path(tmp) / "out2", Settings(outputs=ctx.outputs,
                                                               repair=("all",)))
        dt = time.perf_counter() - t0
        repaired = sum(1 for s in result.document["species"]
                       if (s.get("origin") or {}).get("repair") == "repaired")
        print(f"build --no-report --repair all: {dt:.2f} s, {repaired} repaired, "
              f"{len(result.fitted)} in the library")
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak memory: {peak:.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
