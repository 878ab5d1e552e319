"""Benchmark: what extrapolating to a range of use costs per species.

    .venv/bin/python benchmarks/bench_extrapolate.py --species 200

On the synthetic species of bench_build.py (rigid-rotor/harmonic-oscillator Cp, 0.1 %
noise, 100 points 200-3000 K), prints:

* the wall time of ``build --no-report --workers 1`` with and without ``--range-of-use 200
  6000`` (the fastest of --repeat builds of each, made in turn), and the difference per
  species [ms] (what extrapolation adds to a build: the
  extension models, the fit with its extension, the extrapolated uncertainty in the release);
* in this process, ``extrapolate.extend`` of each table to 6000 K: the share of species
  whose linear models fail their hold-out test (the non-linear search runs), and the mean
  and median time per species [ms];
* the time of bench_build's reference workload (``host_speed``) at the start and the end.
"""

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from bench_build import COMMAND, make_raw, speed_line
from thermoledger.core import chemistry
from thermoledger.fit import extrapolate


def build_seconds(raw: Path, out: Path, extra: list) -> float:
    t0 = time.perf_counter()
    done = subprocess.run(COMMAND + ["build", "--raw", str(raw), "--out", str(out), "--quiet",
                                     "--no-report", "--workers", "1", "--fresh", *extra],
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    if done.returncode not in (0, 1):
        sys.exit(done.stderr.decode()[-400:])
    return time.perf_counter() - t0


def extend_each(raw: Path, t_to: float) -> tuple:
    """(seconds per species, True where the non-linear search ran) of extend on every
    table of ``raw``."""
    listed = {}
    for doc in raw.glob("*/source.json"):
        for entry in json.loads(doc.read_text())["tables"]:
            listed[doc.parent / entry["file"]] = entry
    times, slow = [], []
    for path, entry in sorted(listed.items()):
        data = np.loadtxt(path, delimiter=",", skiprows=1)
        atoms = chemistry.composition(entry["formula"]).atoms
        t0 = time.perf_counter()
        ext = extrapolate.extend(data[:, 0], data[:, 1], entry["geometry"], atoms, t_to)
        times.append(time.perf_counter() - t0)
        slow.append(ext is None or ext.searched)
    return times, slow


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=200)
    p.add_argument("--repeat", type=int, default=3,
                   help="builds of each kind, taken in turn; the fastest of each counts")
    args = p.parse_args(argv)
    n = args.species
    print(f"host speed at the start: {speed_line()}")
    with tempfile.TemporaryDirectory() as tmp:
        raw = Path(tmp) / "raw"
        make_raw(raw, n, 100)
        plain, wide = [], []
        for _ in range(args.repeat):     # in turn, so that a slow spell of the machine
            plain.append(build_seconds(raw, Path(tmp) / "a", []))      # touches both
            wide.append(build_seconds(raw, Path(tmp) / "b", ["--range-of-use", "200", "6000"]))
        plain, wide = min(plain), min(wide)
        print(f"build --no-report, {n} species, one process, fastest of {args.repeat}: "
              f"{plain:.2f} s; with --range-of-use 200 6000: {wide:.2f} s; extrapolation adds "
              f"{1e3 * (wide - plain) / n:.2f} ms per species")
        times, slow = extend_each(raw, 6000.0)
        print(f"extend to 6000 K: {100 * sum(slow) / n:.1f} % of species take the non-linear "
              f"search; {1e3 * statistics.mean(times):.2f} ms per species on average, "
              f"median {1e3 * statistics.median(times):.2f} ms")
    print(f"host speed at the end: {speed_line()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
