"""Benchmark: whole-command throughput and peak memory at several sizes, against a naive script.

    .venv/bin/python benchmarks/bench_build.py --sizes 1000,10000,100000

Generates N synthetic ideal-gas species (rigid-rotor/harmonic-oscillator Cp from random
wavenumbers, 0.1 % seeded noise, 100 points 200-3000 K, in four sources) as raw sources in
a temporary folder, then runs the real commands in a child process and measures, per size:

* ``build --no-report`` and ``build`` (with the report), and ``check``: wall time, start-up
  included [s], species per second, and the peak memory of the whole process tree (the
  command and its workers: the sum of their proportional set sizes, so that pages a worker
  shares with its parent count once; sampled every 0.2 s) [MiB];
* the naive script a competent user would write instead (pandas read of each table, one
  least-squares fit of the nasa7 Cp polynomial in two ranges joined at 1000 K with Cp and
  dCp/dT continuous (the KKT system in scaled variables), no
  validation, no breakpoint search, no report): species per second, in this process.

``--flagged`` plants one outlier in every table and acknowledges it in source.json, so that
every table carries a finding (a quadratic scan of the findings would show at once).
Start-up of ``check`` (an empty folder) and ``props`` (the demo library) is printed too, and
the time of a fixed reference workload in this process at the start and at the end
(``host_speed``): figures taken on two machines, or hours apart, compare only beside it (the
same code ran half as fast on one machine of this kind as on another, and the workload took
60 % longer on one machine from one minute to the next).
"""

import argparse
import os
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np
from thermoledger.core.constants import GAS_CONSTANT
from thermoledger.testing.catalogue import write_catalogue

ROOT = Path(__file__).resolve().parent.parent
COMMAND = [str(Path(sys.executable).with_name("thermoledger"))]


def make_raw(raw: Path, n: int, points: int, seed: int = 1, flagged: bool = False) -> None:
    """The synthetic catalogue of n species (thermoledger.testing.catalogue)."""
    write_catalogue(raw, n, points, seed, flagged)


def _tree_rss(root: int) -> int:
    """Memory [KiB] of process ``root`` and all its descendants (the sum of their
    proportional set sizes)."""
    parent = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    parent[int(entry)] = int(fh.read().rsplit(")", 1)[1].split()[1])
            except (OSError, IndexError, ValueError):
                continue
    tree, grew = {root}, True
    while grew:
        more = {p for p, pp in parent.items() if pp in tree} - tree
        tree |= more
        grew = bool(more)
    total = 0
    for pid in tree:     # proportional set size: pages shared after a fork count once
        try:
            with open(f"/proc/{pid}/smaps_rollup") as fh:
                total += next(int(x.split()[1]) for x in fh if x.startswith("Pss:"))
        except (OSError, StopIteration):
            continue
    return total


def timed(argv, expect: str = "") -> tuple:
    """(wall seconds, peak tree memory [MiB], exit code) of one command; stops the benchmark
    unless its summary says ``expect`` (e.g. '1000 species fitted')."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(COMMAND + argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    peak = [0]

    def sample():
        while proc.poll() is None:
            peak[0] = max(peak[0], _tree_rss(proc.pid))
            time.sleep(0.2)      # reading smaps of big processes costs CPU itself

    thread = threading.Thread(target=sample, daemon=True)
    thread.start()
    out, err = proc.communicate()
    wall = time.perf_counter() - t0
    thread.join()
    if proc.returncode not in (0, 1):
        sys.exit(f"{' '.join(argv)} failed ({proc.returncode}): {err.decode()[-400:]}")
    if expect not in out.decode():
        sys.exit(f"{' '.join(argv)} did not do the work: {out.decode()[:400]}")
    return wall, peak[0] / 1024.0, proc.returncode


def host_speed(repeat: int = 5) -> tuple:
    """(pure Python [ms], small numpy solves [ms]) of a fixed workload, the fastest of
    ``repeat``: a sum of 200 000 squares in a generator, and 2 000 solves of a 12 x 12
    system (a build's work is made of both kinds)."""
    rng = np.random.default_rng(0)
    a = rng.standard_normal((12, 12)) + 12.0 * np.eye(12)
    b = rng.standard_normal(12)

    def best(f) -> float:
        times = []
        for _ in range(repeat):
            t0 = time.perf_counter()
            f()
            times.append(time.perf_counter() - t0)
        return 1e3 * min(times)

    return (best(lambda: sum(i * i for i in range(200_000))),
            best(lambda: [np.linalg.solve(a, b) for _ in range(2_000)]))


def speed_line() -> str:
    """``host_speed`` as the benchmarks print it."""
    py_ms, np_ms = host_speed()
    return f"python {py_ms:.1f} ms, numpy {np_ms:.1f} ms (reference workload; lower is faster)"


def naive(raw: Path, limit: int) -> float:
    """Species per second of the naive script on the first ``limit`` tables of ``raw``."""
    import pandas as pd

    files = sorted(raw.glob("*/*.csv"))[:limit]
    powers = np.arange(5)
    at = 1000.0 ** powers                                   # Cp basis at the joint
    slope = np.r_[0.0, powers[1:] * 1000.0 ** (powers[1:] - 1)]
    c = np.array([np.r_[at, -at], np.r_[slope, -slope]])    # Cp and dCp/dT continuous
    t0 = time.perf_counter()
    for path in files:
        d = pd.read_csv(path)
        t, cp = d.iloc[:, 0].to_numpy(), d.iloc[:, 1].to_numpy() / GAS_CONSTANT
        low = t <= 1000.0
        a = np.zeros((len(t), 10))
        a[low, :5] = t[low, None] ** powers
        a[~low, 5:] = t[~low, None] ** powers
        scale = np.abs(a).max(axis=0)                       # scaled variables
        a_s, c_s = a / scale, c / scale
        kkt = np.block([[a_s.T @ a_s, c_s.T], [c_s, np.zeros((2, 2))]])
        np.linalg.solve(kkt, np.r_[a_s.T @ cp, 0.0, 0.0])
    return len(files) / (time.perf_counter() - t0)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--sizes", default="1000,10000",
                   help="comma-separated numbers of species (1000,10000)")
    p.add_argument("--points", type=int, default=100)
    p.add_argument("--workers", type=int, default=0, help="passed to build and check (0: auto)")
    p.add_argument("--flagged", action="store_true",
                   help="one acknowledged outlier in every table")
    p.add_argument("--skip-report", action="store_true", help="do not time the default build")
    args = p.parse_args(argv)
    sizes = [int(x) for x in args.sizes.split(",")]
    with tempfile.TemporaryDirectory() as tmp:
        empty = Path(tmp) / "empty"
        empty.mkdir()
        start_check = min(timed(["check", "--raw", str(empty)])[0] for _ in range(3))
        start_props = min(timed(["props", str(ROOT / "curated"), "N2", "1000"])[0]
                          for _ in range(3))
        print(f"start-up: check {start_check:.2f} s (empty folder), props {start_props:.2f} s")
        print(f"host speed at the start: {speed_line()}")
        print(f"{'species':>8} {'command':<22} {'wall [s]':>9} {'species/s':>10} {'peak [MiB]':>11}")
        for n in sizes:
            raw, out = Path(tmp) / f"raw{n}", Path(tmp) / f"out{n}"
            make_raw(raw, n, args.points, flagged=args.flagged)
            w = ["--workers", str(args.workers)]
            built = f"{n} species fitted, 0 table(s) quarantined"
            runs = [("check", ["check", "--raw", str(raw), *w], f"{n} table(s) read, "),
                    ("build --no-report", ["build", "--raw", str(raw), "--out", str(out),
                                           "--quiet", "--no-report", *w], built)]
            if not args.skip_report:
                runs.append(("build (with report)", ["build", "--raw", str(raw), "--out",
                                                      str(out) + "r", "--quiet", *w], built))
            for label, cmd, expect in runs:
                wall, peak, _ = timed(cmd, expect)
                print(f"{n:>8} {label:<22} {wall:>9.1f} {n / wall:>10.0f} {peak:>11.0f}",
                      flush=True)
            rate = naive(raw, min(n, 2000))
            print(f"{n:>8} {'naive script':<22} {n / rate:>9.1f} {rate:>10.0f} {'-':>11}",
                  flush=True)
            import shutil

            for folder in (raw, out, Path(str(out) + "r")):
                shutil.rmtree(folder, ignore_errors=True)
    print(f"host speed at the end: {speed_line()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
