"""False-rejection and detection rates of the acceptance rule (fit/acceptance.py).

    .venv/bin/python benchmarks/acceptance.py --tables 100

Honest tables: CoolProp ideal-gas Cp (thermoledger.testing.coverage) of a few fluids on a
25 K grid 200-2000 K, with normal noise of 0.3 %, 0.5 % and 1 % stated as u(Cp): the
fraction rejected (target <= 1 %). Genuine misfits, each of which must be rejected: one
range over 200-2000 K at u(Cp) = 0.1 %, a point 5 % off, a block of ten rows 3 % high,
and a table whose stated u(Cp) is ten times smaller than its noise.
"""

import argparse
from dataclasses import replace

import numpy as np
from thermoledger.core.errors import FitRejected
from thermoledger.core.settings import FitSettings
from thermoledger.testing import coverage, fit_arrays

FLUIDS = ("Nitrogen", "Methane", "CarbonDioxide", "Ammonia", "Propane")


def misfits(t, cp, rng):
    """(name, cp, stated u, settings) of tables the rule must reject."""
    u = 0.003 * cp
    noisy = cp * (1 + 0.003 * rng.standard_normal(len(t)))
    fine = cp * (1 + 0.001 * rng.standard_normal(len(t)))
    spike = noisy.copy()
    spike[len(t) // 3] *= 1.05
    block = noisy.copy()
    block[20:30] *= 1.03
    rough = cp * (1 + 0.01 * rng.standard_normal(len(t)))
    return (("one range at u = 0.1 %", fine, 0.001 * cp, replace(FitSettings(), ranges=1)),
            ("a point 5 % off", spike, u, FitSettings()),
            ("ten rows 3 % high", block, u, FitSettings()),
            ("u stated 10x too small", rough, 0.001 * cp, FitSettings()))


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--tables", type=int, default=100, help="honest tables per fluid and u")
    args = p.parse_args(argv)
    refs = {f: coverage.reference(f, 2.0) for f in FLUIDS}
    t = coverage.data_grid()
    for u in (0.003, 0.005, 0.01):
        rejected = total = 0
        for k, (fluid, ref) in enumerate(refs.items()):
            for seed in range(args.tables):
                total += 1
                try:  # independent noise for every fluid and table
                    coverage.fit_fluid(ref, noise=u, seed=100_000 * k + seed)
                except FitRejected:
                    rejected += 1
        print(f"honest, u(Cp) = {100 * u:g} %: {rejected} of {total} rejected "
              f"({100 * rejected / total:.2f} %)")
    rng = np.random.default_rng(7)
    for name in ("one range at u = 0.1 %", "a point 5 % off", "ten rows 3 % high", "u stated 10x too small"):
        caught = total = 0
        for fluid, ref in refs.items():
            cp = ref.at(t)[0]
            case = {m[0]: m for m in misfits(t, cp, rng)}[name]
            total += 1
            try:
                fit_arrays(fluid, t, case[1], case[2], 0.0, 200.0, case[3])
            except FitRejected:
                caught += 1
        print(f"misfit, {name}: {caught} of {total} rejected")


if __name__ == "__main__":
    main()
