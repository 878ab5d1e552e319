"""Benchmark: audit of the demo library and of a synthetic library of N species.

    .venv/bin/python benchmarks/bench_audit.py --species 1000

Builds each library once into a temporary folder, then times ``audit`` (integrity check,
input hashes, rebuild into a temporary folder, byte and species comparison) [s].
"""

import argparse
import sys
import tempfile
import time
from pathlib import Path

from bench_build import make_raw
from thermoledger import build
from thermoledger.release import audit

ROOT = Path(__file__).resolve().parent.parent


def timed_audit(raw: Path, out: Path):
    build.build(raw, out)
    t0 = time.perf_counter()
    rep = audit.audit(raw, out)
    return time.perf_counter() - t0, rep


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=1000)
    p.add_argument("--points", type=int, default=100)
    args = p.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        dt, rep = timed_audit(ROOT / "raw", Path(tmp) / "demo")
        print(f"audit of the demo library: {dt:.2f} s ({audit.render(rep).splitlines()[0]})")
        raw = Path(tmp) / "raw"
        make_raw(raw, args.species, args.points)
        dt, rep = timed_audit(raw, Path(tmp) / "big")
        print(f"audit of {args.species} synthetic species: {dt:.2f} s "
              f"({audit.render(rep).splitlines()[0]})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
