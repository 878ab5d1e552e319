"""Measured detection rates of the validation stage over seeded randomised trials.

    .venv/bin/python benchmarks/detection_rates.py --trials 200

Clean reference tables (CoolProp ideal-gas Cp of eight fluids, atomic oxygen with its
electronic levels, RRHO CH4 and N2O; see tests/trials.py for the sources) get 0.1 %
Gaussian noise and one defect each; a trial counts as caught when the right finding code
names the right row. Clean noisy tables count false errors and false warnings.

Labelling mistakes (thermoledger.testing.labelling): tables of 20 real gases (CoolProp
ideal-gas Cp, S° from published tables) with Cv under a Cp label, degrees Celsius under a
kelvin label, or a per-mass table given a lighter wrong formula; the rate is printed for all
trials, for Cv also for the gases whose vibrations are mostly frozen at the table's low end
(the class a single table's physics can reveal), with the gases that escaped. Temperature-
scale mix-ups between two sources are counted as named by the reconcile stage.
"""

import argparse
import sys
import time

from thermoledger.testing.labelling import labelling_rates, scale_rates
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
    rates, (fe, fw, n) = labelling_rates(args.trials, args.seed)
    print("labelling mistakes (20 real gases):")
    for label, got in rates.items():
        for part, name in (("all", "all trials"), ("frozen", "vibrations frozen at low end")):
            caught, trials = got[part]
            if part == "frozen" and (not label.startswith("Cv") or not trials):
                continue
            print(f"  {label:38s} {name:30s} caught {caught:4d} / {trials} "
                  f"({100 * caught / trials:.1f} %)")
        if got["missed"]:
            print(f"  {'':38s} missed: " + ", ".join(f"{k} {v}" for k, v in got["missed"].items()))
    print(f"  {'clean tables with a false error':69s} {fe:4d} / {n}")
    print(f"  {'clean tables with a false warning':69s} {fw:4d} / {n}")
    print("temperature-scale mix-ups between two sources (SRC-T-SCALE):")
    for label, (named, trials) in scale_rates(max(args.trials // 2, 1), args.seed).items():
        print(f"  {label:50s} named {named:4d} / {trials}")
    print(f"({time.perf_counter() - t0:.1f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
