"""Measured detection rates of the validation stage over seeded randomised trials.

    .venv/bin/python benchmarks/detection_rates.py --trials 200

Clean reference tables (CoolProp ideal-gas Cp of eight fluids, atomic oxygen with its
electronic levels, RRHO CH4 and N2O; see tests/trials.py for the sources) get 0.1 %
Gaussian noise and one defect each; a trial counts as caught when the right finding code
names the right row. Clean noisy tables count false errors and false warnings.
"""

import argparse
import sys
import time

from thermoledger.testing.trials import detection_rates


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--trials", type=int, default=200)
    p.add_argument("--seed", type=int, default=2026)
    args = p.parse_args(argv)
    t0 = time.perf_counter()
    rates, (fe, fw, n) = detection_rates(args.trials, args.seed)
    for label, (caught, trials) in rates.items():
        print(f"{label:40s} caught {caught:4d} / {trials}  ({100 * caught / trials:.1f} %)")
    print(f"{'clean tables with a false error':40s} {fe:4d} / {n}")
    print(f"{'clean tables with a false warning':40s} {fw:4d} / {n}")
    print(f"({time.perf_counter() - t0:.1f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
