"""Benchmark: the batched path of the fitting stage against the per-species path.

    .venv/bin/python benchmarks/bench_batched.py --species 2000

On the synthetic catalogue of bench_build.py (thermoledger.testing.catalogue: one
temperature grid for every species), in this process, after reading and checking it:

* the breakpoint search alone, species by species (breakchoice.choose) and batched
  (fit/batched.py, which also prepares each fit) [ms per species];
* the whole fit, species by species (fit.fit_species) and on the batched path (the batched
  searches, then fit_species with them) [ms per species];
* the largest relative difference of any coefficient between the two paths, and whether
  every breakpoint is the same (the bound is 1e-9 relative).

Each timing is the best of --repeat runs (the machine is shared and noisy).
"""

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from thermoledger import build, fit
from thermoledger.core.records import CpData, SpeciesIdentity
from thermoledger.core.settings import OutputSettings, Settings, for_table
from thermoledger.fit import batched, breakchoice
from thermoledger.physics import forms
from thermoledger.testing.catalogue import write_catalogue


def best(fn, repeat: int) -> float:
    """The least wall time [s] of ``repeat`` runs of fn()."""
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        dt = time.perf_counter() - t0
        out = dt if out is None else min(out, dt)
    return out


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=2000)
    p.add_argument("--repeat", type=int, default=3)
    args = p.parse_args(argv)
    ctx = Settings(outputs=OutputSettings(report=False))
    with tempfile.TemporaryDirectory() as tmp:
        write_catalogue(Path(tmp), args.species)
        checked = build.examine_part(tmp, ctx)
    items = [(s.species_id, SpeciesIdentity.of_table(s.primary.meta), CpData.of_rows(s.data),
              for_table(ctx.fit, s.primary.meta.fit_overrides), None)
             for s in checked.selections]
    n = len(items)

    def search_each():
        for _, _, data, fs, _ in items:
            sig = fs.inferred_cp_uncertainty * data.cp
            breakchoice.choose(data.t, data.cp / fit.species.R, sig / fit.species.R,
                               forms.FORMS[fs.form], fs)

    per_species = {}

    def fit_each():
        for sid, who, data, fs, prev in items:
            per_species[sid] = fit.fit_species(who, data, fs, prev)

    together = {}

    def fit_batched():
        chosen = batched.choices(items)
        for sid, who, data, fs, prev in items:
            prepared, roles = chosen[sid]
            together[sid] = fit.fit_species(who, data, fs, prev, roles, prepared)

    ms = {name: 1e3 * best(fn, args.repeat) / n for name, fn in (
        ("search, per species", search_each),
        ("search, batched", lambda: batched.choices(items)),
        ("fit, per species", fit_each),
        ("fit, batched path", fit_batched))}
    worst, same = 0.0, True
    for sid, one in per_species.items():
        two = together[sid]
        same &= one.breakpoints == two.breakpoints
        for a, b in zip(one.ranges, two.ranges):
            a, b = np.asarray(a.coefficients), np.asarray(b.coefficients)
            worst = max(worst, float(np.max(np.abs(a - b) / np.maximum(np.abs(a), 1e-300))))
    print(f"{n} species of one temperature grid, best of {args.repeat} runs")
    for name, value in ms.items():
        print(f"  {name:22s} {value:7.3f} ms per species")
    print(f"  search {ms['search, per species'] / ms['search, batched']:.1f}x, fit "
          f"{ms['fit, per species'] / ms['fit, batched path']:.1f}x faster batched")
    print(f"  breakpoints {'all the same' if same else 'DIFFER'}; largest relative "
          f"difference of a coefficient {worst:.1e} (bound 1e-9)")
    return 0 if same and worst <= 1e-9 else 1


if __name__ == "__main__":
    sys.exit(main())
