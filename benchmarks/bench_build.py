"""Benchmark: fit time per species, whole-build throughput and peak memory.

    .venv/bin/python benchmarks/bench_build.py --species 1000 --points 100

Generates N synthetic ideal-gas species (rigid-rotor/harmonic-oscillator Cp from random
wavenumbers, 0.1 % seeded noise) as raw sources in a temporary folder, then measures

* ingest, validation and check (ingest + validate + reconcile) times [s],
* fit time per species (the fitting stage alone, median and mean) [ms],
* the whole build (ingest, validate, select, fit, export) [species/s],
* peak resident memory of the process [MiB].
"""

import argparse
import json
import resource
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from thermoledger import build
from thermoledger.checks import registry as validate
from thermoledger.core.constants import GAS_CONSTANT
from thermoledger.ingest import sources as ingest
from thermoledger.physics import statmech


def make_raw(raw: Path, n: int, points: int, seed: int = 1, flagged: bool = False) -> None:
    """Write n species into four sources; with flagged, every table has one outlier (+3 %)
    that its source.json acknowledges, so every table carries a finding."""
    rng = np.random.default_rng(seed)
    t = np.unique(np.append(np.geomspace(200.0, 3000.0, points - 1), 298.15))
    per_source = {}
    for i in range(n):
        atoms = int(rng.integers(2, 9))
        geometry = "linear" if atoms == 2 or rng.random() < 0.3 else "nonlinear"
        modes = 3 * atoms - (5 if geometry == "linear" else 6)
        nu = rng.uniform(300.0, 3500.0, modes)
        cp = GAS_CONSTANT * statmech.rrho_cp_over_r(t, geometry, nu)
        cp *= 1 + 1e-3 * rng.standard_normal(t.size)
        if flagged:
            cp[t.size // 2] *= 1.03
        formula = f"C{atoms - 1}O" if atoms > 2 else "CO"
        source = f"bench-{i % 4}"
        folder = raw / source
        folder.mkdir(parents=True, exist_ok=True)
        name = f"s{i:05d}"
        lines = ["T [K],Cp [J/(mol*K)]"] + [f"{a:.6g},{b:.6f}" for a, b in zip(t, cp)]
        (folder / f"{name}.csv").write_text("\n".join(lines) + "\n")
        per_source.setdefault(source, []).append(
            {"file": f"{name}.csv", "species": name, "formula": formula, "phase": "g",
             "geometry": geometry, "enthalpy_of_formation_298": "-100 kJ/mol",
             "entropy_298": "250 J/(mol*K)"})
        if flagged:
            per_source[source][-1]["acknowledge"] = [
                {"code": "SMOOTH-OUTLIER", "reason": "planted by the benchmark"}]
    for k, (source, tables) in enumerate(sorted(per_source.items())):
        doc = {"source": source, "title": "benchmark", "citation": "synthetic",
               "method": "estimation", "standard_pressure": "1 bar", "priority": k,
               "license": "CC0-1.0", "notes": "SYNTHETIC benchmark data", "tables": tables}
        (raw / source / "source.json").write_text(json.dumps(doc))


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=1000)
    p.add_argument("--points", type=int, default=100)
    args = p.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        raw, out = Path(tmp) / "raw", Path(tmp) / "curated"
        make_raw(raw, args.species, args.points)
        t0 = time.perf_counter()
        got = ingest.ingest(raw)
        t_ingest = time.perf_counter() - t0
        t0 = time.perf_counter()
        validate.validate(got.tables, build.Settings(), got.findings)
        t_validate = time.perf_counter() - t0
        t0 = time.perf_counter()
        checked = build.examine(raw)
        t_check = time.perf_counter() - t0
        fit_ms = []
        for sel in checked.selections:
            s = time.perf_counter()
            build.fit_selection(sel, build.Settings())
            fit_ms.append(1000.0 * (time.perf_counter() - s))
        t0 = time.perf_counter()
        result = build.build(raw, out)
        t_build = time.perf_counter() - t0
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(f"species: {args.species}, points per table: {args.points}")
    print(f"ingest: {t_ingest:.2f} s; validate: {t_validate:.2f} s "
          f"({1000 * t_validate / args.species:.2f} ms/species)")
    print(f"check (ingest + validate + reconcile): {t_check:.2f} s")
    print(f"fit per species: median {statistics.median(fit_ms):.3f} ms, "
          f"mean {statistics.mean(fit_ms):.3f} ms")
    print(f"whole build: {t_build:.2f} s, {len(result.fitted) / t_build:.1f} species/s "
          f"({len(result.fitted)} fitted, {len(result.quarantined)} quarantined)")
    print(f"peak memory (max RSS): {peak:.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
