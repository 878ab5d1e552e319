"""Peak memory and time of reading and checking one table at the input limits.

    .venv/bin/python benchmarks/bench_limits.py

Writes (SYNTHETIC data) one table of MAX_ROWS rows, one just over the row limit, and one
file just over the byte limit, runs ``thermoledger check`` on each in a fresh process and
prints wall time [s] and the peak resident memory of that process [MiB].
"""

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from thermoledger.core.limits import MAX_ROWS, MAX_TABLE_BYTES


def write(raw: Path, lines):
    lab = raw / "lab"
    lab.mkdir(parents=True)
    with open(lab / "t.csv", "w") as fh:
        fh.write("T [K],Cp [J/(mol*K)],u(Cp) [J/(mol*K)]\n")
        for line in lines:
            fh.write(line)
    doc = {"source": "lab", "title": "limits", "citation": "synthetic", "method": "other",
           "standard_pressure": "1 bar", "priority": 1, "license": "CC0-1.0",
           "tables": [{"file": "t.csv", "species": "N2", "formula": "N2", "phase": "g",
                       "geometry": "linear", "enthalpy_of_formation_298": "0 kJ/mol",
                       "entropy_298": "191.6 J/(mol*K)"}]}
    (lab / "source.json").write_text(json.dumps(doc))
    return (lab / "t.csv").stat().st_size


def rows(n):
    for i in range(n):
        t = 200.0 + 2800.0 * i / n
        yield f"{t:.6f},{29.1 + 4e-3 * t ** 0.8:.6f},0.09\n"


def run(raw):
    code = ("import sys, resource; from thermoledger.cli import main as cli; "
            f"cli.main(['check', '--raw', {str(raw)!r}]); "
            "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)")
    t0 = time.monotonic()
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    return time.monotonic() - t0, int(p.stderr.strip().splitlines()[-1]) / 1024


def main(argv=None) -> int:
    argparse.ArgumentParser(description=__doc__.splitlines()[0]).parse_args(argv)
    print(f"limits: {MAX_ROWS} rows, {MAX_TABLE_BYTES} bytes per table")
    cases = {"rows at the limit": lambda: rows(MAX_ROWS),
             "rows over the limit": lambda: rows(MAX_ROWS + 1000),
             "bytes over the limit": lambda: iter(["300,29.1," + "9" * MAX_TABLE_BYTES + "\n"])}
    for name, lines in cases.items():
        with tempfile.TemporaryDirectory() as tmp:
            size = write(Path(tmp) / "raw", lines())
            wall, peak = run(Path(tmp) / "raw")
            print(f"{name:22s} {size / 2**20:7.2f} MiB file  {wall:6.2f} s  peak {peak:7.1f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
