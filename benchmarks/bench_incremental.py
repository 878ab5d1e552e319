"""Benchmark: rebuilding after one edited table, against a full build.

    .venv/bin/python benchmarks/bench_incremental.py --species 10000

Generates N synthetic species (bench_build.make_raw), builds them until the partitions are
stored (the first two builds compute everything: the second is offered the first one's
breakpoints), then times, as the command line runs them (start-up included) [s]:

* a rebuild with nothing changed (every partition taken from the last build);
* a rebuild after one Cp value of one table changed by 0.01 %;
* the same rebuild with --fresh (every partition recomputed), from a copy of the same
  release home, and whether its release is byte-identical to the incremental one.

What earlier commands and the copy wrote is flushed (os.sync) before each timed command:
unflushed, the 160 MB copy of a 10 000-species release home was written back during the
rebuild after it and added some 0.7 s to it.
"""

import argparse
import hashlib
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_build import COMMAND, make_raw


def _run(*argv) -> tuple:
    os.sync()        # what earlier commands (or copies) wrote is flushed before the timing
    t0 = time.perf_counter()
    done = subprocess.run(COMMAND + [str(a) for a in argv], capture_output=True, text=True)
    if done.returncode != 0:
        sys.exit(f"{' '.join(map(str, argv))} failed: {done.stderr[-400:]}")
    reused = next((line for line in done.stdout.splitlines() if line.startswith("reused")),
                  "reused nothing")
    return time.perf_counter() - t0, reused


def _tree(folder: Path) -> dict:
    folder = (folder / "current").resolve()
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=10000)
    p.add_argument("--report", action="store_true", help="build the report too")
    args = p.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        raw, out, copy = Path(tmp) / "raw", Path(tmp) / "out", Path(tmp) / "copy"
        make_raw(raw, args.species, 100)
        flags = ["--quiet"] + ([] if args.report else ["--no-report"])
        for _ in range(2):
            full, _ = _run("build", "--raw", raw, "--out", out, *flags)
        same, said = _run("build", "--raw", raw, "--out", out, *flags)
        print(f"{args.species} species, full build {full:.1f} s; nothing changed: {same:.1f} s "
              f"({said})")
        shutil.copytree(out, copy, symlinks=True)
        table = sorted(raw.glob("bench-0/*.csv"))[args.species // 8]
        lines = table.read_text().splitlines()
        t, cp = lines[40].split(",")
        lines[40] = f"{t},{float(cp) * 1.0001:.6f}"
        table.write_text("\n".join(lines) + "\n")
        edited, said = _run("build", "--raw", raw, "--out", out, *flags)
        fresh, _ = _run("build", "--raw", raw, "--out", copy, "--fresh", *flags)
        same_bytes = _tree(out) == _tree(copy)
        print(f"one table edited: {edited:.1f} s ({said}); --fresh: {fresh:.1f} s; "
              f"byte-identical: {same_bytes}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
