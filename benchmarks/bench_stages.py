"""Benchmark: what each stage of a build costs per species, in one process.

    .venv/bin/python benchmarks/bench_stages.py --species 1000

On the synthetic catalogue of bench_build.py (thermoledger.testing.catalogue), one
partition worked in this process as a build's workers work it (build._build_part), stage by
stage (with --range-of-use LO HI, every species extrapolated to that range), after a first
run that loads the libraries, with Python's cyclic garbage collector paused as in a build's
workers (core.processes.collector_paused); prints the wall time of each stage [ms per
species] and their sum, best of --repeat runs:

* read: the source.json files and tables (ingest.ingest);
* check: the per-table checks (checks.registry.validate);
* read and check: the whole of build.examine_part (with transitions, references,
  reconciliation and acknowledgements);
* fit: every species (build._fit_all: the batched searches, the per-species fits, the
  library entries), of which the batched breakpoint searches alone (build.batch_searched);
* evaluated tables and plot points (release.assemble);
* kept for the release: the entries and lineages as compact JSON, the fitted species
  pickled.

With --checks, each registered check alone (checks.registry.CHECKS) over every table [ms per
table], best of --repeat runs: where the check stage's time goes.

What a build adds beyond its partitions (the release files, the report) is timed by
bench_build.py as a whole. The time of its reference workload (bench_build.host_speed) is
printed after the runs.
"""

import argparse
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

from bench_build import speed_line
from thermoledger import build, fit, ingest, partitions
from thermoledger.checks import registry, transitions
from thermoledger.core.processes import collector_paused
from thermoledger.core.settings import OutputSettings, Settings
from thermoledger.library.entries import compact
from thermoledger.release import assemble, held, provenance
from thermoledger.testing.catalogue import write_catalogue


def stages(raw: Path, ctx: Settings) -> dict:
    """{stage: seconds} of one pass over ``raw``."""
    out = {}

    def timed(name, f, *args):
        t0 = time.perf_counter()
        got = f(*args)
        out[name] = time.perf_counter() - t0
        return got

    got = timed("read", ingest.ingest, raw, None)
    tables, _, _ = transitions.link(got.tables, got.transitions, ctx, got.findings)
    timed("check", lambda: list(registry.validate(tables, ctx, got.findings)))
    checked = timed("read and check", build.examine_part, raw, ctx)
    fitted, _, _, entries = timed("fit", build._fit_all, checked, ctx, build._quiet, {})
    order = fit.phases.fitting_order(checked.selections, checked.chains)
    timed("  of which the search", build.batch_searched, order, ctx, {},
          fit.phases.chains_by_id(checked.chains))
    timed("plot points", assemble.plot_points, entries.values(), checked)
    timed("evaluated tables", assemble.evaluated_rows, entries, checked.chains,
          ctx.outputs.table_step)
    timed("kept for the release", lambda: (
        [compact(e) for e in entries.values()], [held.pickled(sp) for sp in fitted],
        [compact(provenance.lineage(sp)) for sp in fitted]))
    out["species"] = len(entries)
    return out


def each_check(raw: Path, ctx: Settings) -> dict:
    """{check name: seconds} of each registered check alone over every table of ``raw``
    (the tables as validate sees them: read, transitions linked, valid rows made once)."""
    got = ingest.ingest(raw, None)
    tables, _, _ = transitions.link(got.tables, got.transitions, ctx, got.findings)
    for t in tables:
        t.valid                                        # noqa: B018 - made once, as validate does
    out = {}
    for check in registry.CHECKS:
        t0 = time.perf_counter()
        for t in tables:
            check(t, ctx)
        out[check.__name__] = time.perf_counter() - t0
    out["tables"] = len(tables)
    return out


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--species", type=int, default=1000)
    p.add_argument("--repeat", type=int, default=3)
    p.add_argument("--checks", action="store_true",
                   help="also time each registered check alone [ms per table]")
    p.add_argument("--range-of-use", type=float, nargs=2, metavar=("LO", "HI"),
                   help="extrapolate every species to this range of use [K]")
    args = p.parse_args(argv)
    ctx = Settings(outputs=OutputSettings(report=False))
    if args.range_of_use:
        ctx = replace(ctx, fit=replace(ctx.fit, use_t_min=args.range_of_use[0],
                                       use_t_max=args.range_of_use[1]))
    with tempfile.TemporaryDirectory() as tmp:
        raw = Path(tmp)
        write_catalogue(raw, args.species)
        with collector_paused():
            build._build_part(raw, ctx, {}, build._quiet, partitions.Part(0, 1))   # warm
            runs = [stages(raw, ctx) for _ in range(args.repeat)]
            checks = [each_check(raw, ctx) for _ in range(args.repeat)] if args.checks else []
    speed = speed_line()
    n = runs[0].pop("species")
    for r in runs[1:]:
        r.pop("species")
    best = {k: min(r[k] for r in runs) for k in runs[0]}
    print(f"{n} species in one process, best of {args.repeat} runs [ms per species]")
    for name, seconds in best.items():
        print(f"  {name:22s} {1e3 * seconds / n:7.3f}")
    total = sum(v for k, v in best.items() if k in PARTITION)
    print(f"  {'sum of a partition':22s} {1e3 * total / n:7.3f}  (read and check, fit, "
          "evaluated tables, plot points, kept)")
    if checks:
        tables = checks[0].pop("tables")
        for r in checks[1:]:
            r.pop("tables")
        each = {k: min(r[k] for r in checks) for k in checks[0]}
        print(f"each check alone over {tables} tables, best of {args.repeat} runs "
              "[ms per table]")
        for name, seconds in sorted(each.items(), key=lambda kv: -kv[1]):
            print(f"  {name:30s} {1e3 * seconds / tables:7.4f}")
        print(f"  {'sum':30s} {1e3 * sum(each.values()) / tables:7.4f}")
    print(f"host speed after the runs: {speed}")
    return 0


#: the stages that add up to a partition (read and check are part of "read and check", the
#: search part of "fit")
PARTITION = ("read and check", "fit", "plot points", "evaluated tables", "kept for the release")


if __name__ == "__main__":
    sys.exit(main())
