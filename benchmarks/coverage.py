"""Coverage of the stated uncertainties against CoolProp's ideal-gas heat capacities.

    .venv/bin/python benchmarks/coverage.py                  # all 20 fluids
    .venv/bin/python benchmarks/coverage.py --fluids Nitrogen Methane --seeds 3

For every fluid of thermoledger.testing.coverage.FLUIDS (the ideal-gas part of its reference
equation of state in CoolProp; a test dependency), the exact Cp on a 25 K grid 200-2000 K is
fitted with the build's default settings:

* exact: no u(Cp) stated (the table's own scatter is the evaluation);
* noise: normal noise of 0.5 % added and stated as u(Cp), several seeds;
* cut 1000 / cut 1500: the data cut at 1000 K or 1500 K and the range of use kept at
  2000 K (the interval above the cut is extrapolated).

For each case it prints the fraction of points (the data grid and the midpoints between its
points) where |fit - reference| <= 2u for Cp, H - H298 and S, u the standard uncertainty the
library states; inside the data the target is 90-99 %, in extrapolated intervals >= 90 %.
With u(Cp) stated it also prints the Monte Carlo spread of the fitted Cp over noise draws
divided by the stated u (target 0.7-1.5).

Beyond the data (--beyond): each fluid's data to 1500 K fitted alone and with the range of
use extended to 6000 K: the largest relative Cp deviation inside the data of both (the
extension may add at most FitSettings.extension_tolerance) and the smallest relative step
of the stored polynomial's Cp on a 4000-point grid from 1500 to 6000 K (never negative:
no maximum beyond the data).
"""

import argparse
import time
from dataclasses import replace

import numpy as np
from thermoledger.core import chemistry
from thermoledger.core.errors import FitError
from thermoledger.core.settings import FitSettings
from thermoledger.physics import forms
from thermoledger.testing import coverage, fit_arrays

CASES = (("exact", {}, (200.0, 2000.0)),
         ("noise", {"noise": 0.005}, (200.0, 2000.0)),
         ("cut 1000", {"cut": 1000.0}, (1000.0, 2000.0)),
         ("cut 1500", {"cut": 1500.0}, (1500.0, 2000.0)))


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--fluids", nargs="+", default=list(coverage.FLUIDS))
    p.add_argument("--seeds", type=int, default=5, help="noise draws per fluid (5)")
    p.add_argument("--trials", type=int, default=20, help="Monte Carlo draws (20)")
    p.add_argument("--beyond", action="store_true", help="only the beyond-the-data table")
    args = p.parse_args(argv)
    if args.beyond:
        return beyond(args.fluids)
    t0 = time.perf_counter()
    totals = {name: {"Cp": [], "H": [], "S": []} for name, _, _ in CASES}
    spreads, rejected = [], []
    print(f"{'fluid':18s} " + " ".join(f"{name:>17s}" for name, _, _ in CASES)
          + "   MC spread/u")
    for fluid in args.fluids:
        ref = coverage.reference(fluid, 2.0)
        cells = []
        for name, kw, (lo, hi) in CASES:
            seeds = range(args.seeds) if "noise" in kw else (0,)
            hits = {"Cp": [], "H": [], "S": []}
            for seed in seeds:
                try:
                    fit = coverage.fit_fluid(ref, seed=seed, **kw)
                except FitError as exc:
                    rejected.append(f"{fluid} {name} seed {seed}: {exc}")
                    continue
                for q, v in coverage.covered(ref, fit, lo, hi).items():
                    hits[q].append(v)
                    totals[name][q].append(v)
            cells.append("/".join(f"{100 * np.concatenate(v).mean():3.0f}" if v else "  -"
                                  for v in hits.values()))
        ratio = coverage.spread_ratio(ref, 0.005, args.trials)
        spreads.append(ratio)
        print(f"{fluid:18s} " + " ".join(f"{c:>17s}" for c in cells) + f"   {ratio:9.2f}")
    print("\ncoverage of 2u (% of points, Cp / H-H298 / S):")
    for name, _, _ in CASES:
        parts = [f"{q} {100 * np.concatenate(v).mean():5.1f} %" for q, v in totals[name].items()
                 if v]
        print(f"  {name:9s} " + "  ".join(parts))
    print(f"Monte Carlo spread / stated u(Cp): {min(spreads):.2f}-{max(spreads):.2f} "
          f"(mean {np.mean(spreads):.2f}) over {len(spreads)} fluids")
    for r in rejected:
        print("rejected:", r)
    print(f"{len(args.fluids)} fluids in {time.perf_counter() - t0:.1f} s")


def beyond(fluids, cut=1500.0, top=6000.0):
    tol = FitSettings().extension_tolerance
    print(f"{'fluid':18s} {'worst alone':>12s} {'worst ext.':>11s} {'min step':>10s}")
    bad = 0
    for fluid in fluids:
        formula, geometry = coverage.FLUIDS[fluid]
        atoms = chemistry.composition(formula).atoms
        t = coverage.data_grid(cut)
        cp = coverage.cp0(fluid, t)
        fits = [fit_arrays(fluid, t, cp, None, 0.0, 200.0, replace(FitSettings(), use_t_max=u),
                           geometry=geometry, atoms=atoms) for u in (None, top)]
        r = fits[1]
        grid = np.geomspace(cut, top, 4000)
        c = forms.evaluate_ranges([(x.t_min, x.t_max, x.coefficients) for x in r.ranges], grid,
                                  r.form)["Cp"]
        step = float(np.min(np.diff(c) / c[:-1]))
        bad += step < -1e-9 or fits[1].cp_max_rel_dev > fits[0].cp_max_rel_dev + tol
        print(f"{fluid:18s} {100 * fits[0].cp_max_rel_dev:11.4f}% "
              f"{100 * fits[1].cp_max_rel_dev:10.4f}% {step:10.2e}")
    print(f"{bad} of {len(fluids)} fluids break a rule (data to {cut:g} K, use to {top:g} K)")


if __name__ == "__main__":
    main()
