"""Benchmark: rebuilding after one edited table, against a full build.

    .venv/bin/python benchmarks/bench_incremental.py --species 10000

Generates N synthetic species (bench_build.make_raw), builds them until the partitions are
stored (the first two builds compute everything: the second is offered the first one's
breakpoints), then times, as the command line runs them (start-up included) [s]:

* a rebuild with nothing changed (every partition taken from the last build), --repeat
  times, the fastest and each;
* a rebuild after one Cp value of one table changed by 0.01 % (0.02 %, ... : each edit
  another value), --repeat times, the fastest and each;
* the last rebuild's inputs built with --fresh (every partition recomputed), from a copy of
  the same release home, and whether its release is byte-identical to the incremental
  one.

What earlier commands and the copy wrote is flushed (os.sync) before each timed command:
unflushed, the 160 MB copy of a 10 000-species release home was written back during the
rebuild after it and added some 0.7 s to it. The time of bench_build's reference workload
(``host_speed``) is printed at the start and the end.
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

from bench_build import COMMAND, make_raw, speed_line


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


def _edit(table: Path, factor: float) -> None:
    """Change one Cp value of ``table`` (its 40th row) by ``factor`` of the original."""
    lines = table.read_text().splitlines()
    t, cp = lines[40].split(",")
    lines[40] = f"{t},{float(cp) * factor:.6f}"
    table.write_text("\n".join(lines) + "\n")


def _times(values) -> str:
    return f"{min(values):.1f} s (fastest of {len(values)}: " + \
        ", ".join(f"{v:.2f}" for v in values) + ")"


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=10000)
    p.add_argument("--report", action="store_true", help="build the report too")
    p.add_argument("--repeat", type=int, default=3,
                   help="rebuilds of each kind (each edit another value of the same table)")
    args = p.parse_args(argv)
    print(f"host speed at the start: {speed_line()}")
    with tempfile.TemporaryDirectory() as tmp:
        raw, out, copy = Path(tmp) / "raw", Path(tmp) / "out", Path(tmp) / "copy"
        make_raw(raw, args.species, 100)
        flags = ["--quiet"] + ([] if args.report else ["--no-report"])
        for _ in range(2):
            full, _ = _run("build", "--raw", raw, "--out", out, *flags)
        same = [_run("build", "--raw", raw, "--out", out, *flags) for _ in range(args.repeat)]
        print(f"{args.species} species, full build {full:.1f} s; nothing changed: "
              f"{_times([t for t, _ in same])} ({same[-1][1]})")
        table = sorted(raw.glob("bench-0/*.csv"))[args.species // 8]
        original = table.read_text()
        edited = []
        for k in range(args.repeat):
            table.write_text(original)
            _edit(table, 1.0 + 1e-4 * (k + 1))
            edited.append(_run("build", "--raw", raw, "--out", out, *flags))
        shutil.copytree(out, copy, symlinks=True)
        fresh, _ = _run("build", "--raw", raw, "--out", copy, "--fresh", *flags)
        same_bytes = _tree(out) == _tree(copy)
        print(f"one table edited: {_times([t for t, _ in edited])} ({edited[-1][1]}); "
              f"--fresh: {fresh:.1f} s; byte-identical: {same_bytes}")
    print(f"host speed at the end: {speed_line()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
