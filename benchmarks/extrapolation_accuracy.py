"""Benchmark: how far the extensions beyond the data are from the exact Cp, and how often
the linear extrapolation models fail their hold-out test (the non-linear search runs).

    .venv/bin/python benchmarks/extrapolation_accuracy.py --seed 7
    .venv/bin/python benchmarks/extrapolation_accuracy.py --seed 7 --finest

* --species rigid-rotor/harmonic-oscillator molecules (physics/statmech.py) of seeded random
  wavenumbers (300-3500 cm⁻¹, 3-8 atoms), Cp on 200-2000 K with 0.1 % seeded noise,
  extended to 6000 K; the truth is their exact Cp (SYNTHETIC molecules, exact physics);
* CoolProp's 20 fluids (thermoledger.testing.coverage.FLUIDS, the ideal-gas parts of their
  reference equations of state; a test dependency), exact Cp to 1000 K and to 1500 K,
  extended to 2000 K.

For each set: the share of species searched, the mean, 95th percentile and largest of each
extension's largest relative error, the share of points within 2u, and the mean time of
``extrapolate.extend``. --finest uses the finest oscillator spectrum alone (the models of
pipeline 0.4.5) to compare.
"""

import argparse
import time

import numpy as np
from thermoledger.core import chemistry
from thermoledger.core.constants import GAS_CONSTANT as R
from thermoledger.fit import extrapolate
from thermoledger.physics import statmech
from thermoledger.testing import coverage
from thermoledger.testing.catalogue import random_molecule


def _line(label, rows, seconds) -> str:
    err = np.array([r[0] for r in rows])
    return (f"{label:24s} {len(rows):4d} species, searched {100 * np.mean([r[2] for r in rows]):5.1f} %, "
            f"largest error mean {100 * err.mean():.3f} % p95 {100 * np.quantile(err, 0.95):.3f} % "
            f"max {100 * err.max():.3f} %, within 2u {100 * np.mean([r[1] for r in rows]):.1f} %, "
            f"extend {1e3 * seconds / len(rows):.2f} ms")


def _judged(ext, truth) -> tuple:
    if ext is None:
        return (1.0, 0.0, True)
    err = np.abs(np.array(ext.cp) / truth(np.array(ext.t)) - 1)
    return (float(err.max()), float(np.mean(err <= 2 * np.array(ext.u_rel))), ext.searched)


def molecules(n: int, seed: int) -> str:
    rng = np.random.default_rng(seed)
    t = np.unique(np.append(np.geomspace(200.0, 2000.0, 80), 298.15))
    rows, seconds = [], 0.0
    for _ in range(n):
        geometry, atoms, nu = random_molecule(rng)

        def truth(x, geometry=geometry, nu=nu):
            return R * statmech.rrho_cp_over_r(x, geometry, nu)

        cp = truth(t) * (1 + 1e-3 * rng.standard_normal(t.size))
        t0 = time.perf_counter()
        ext = extrapolate.extend(t, cp, geometry, atoms, 6000.0)
        seconds += time.perf_counter() - t0
        rows.append(_judged(ext, truth))
    return _line("harmonic 2000->6000 K", rows, seconds)


def fluids(cut: float) -> str:
    rows, seconds = [], 0.0
    for fluid, (formula, geometry) in coverage.FLUIDS.items():
        t = coverage.data_grid(cut)
        t0 = time.perf_counter()
        ext = extrapolate.extend(t, coverage.cp0(fluid, t), geometry,
                                 chemistry.composition(formula).atoms, coverage.T_HIGH)
        seconds += time.perf_counter() - t0
        rows.append(_judged(ext, lambda x, fluid=fluid: coverage.cp0(fluid, x)))
    return _line(f"CoolProp {cut:.0f}->{coverage.T_HIGH:.0f} K", rows, seconds)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=300)
    p.add_argument("--seed", type=int, default=7)
    p.add_argument("--finest", action="store_true", help="the finest spectrum alone")
    args = p.parse_args(argv)
    if args.finest:
        extrapolate.SPECTRUM_SIZES = extrapolate.SPECTRUM_SIZES[-1:]
    print(molecules(args.species, args.seed))
    for cut in (1000.0, 1500.0):
        print(fluids(cut))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
