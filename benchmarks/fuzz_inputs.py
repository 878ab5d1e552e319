"""Fuzz benchmark: seeded malformed and extreme raw inputs of every kind, each answered by
findings, never by an exception or a hang.

    .venv/bin/python benchmarks/fuzz_inputs.py --cases 12000 --workers 2

The cases (tests/fuzzcases.py) are random and mutated CSV, bad and extreme cells, unit
strings, scaled columns, encodings, oversize files, broken structure and mutated
source.json of every kind. Each runs the whole pipeline short of writing (ingest,
validation, reconciliation, fit, release assembly; every 20th case the whole build with its
report, published into a temporary release home) in a worker process with a time limit per
input. Printed: cases per kind, uncaught exceptions, hangs, inputs not answered by a
finding that names the file, and the rate.
"""

import argparse
import sys
import time
from collections import Counter
from concurrent.futures import ProcessPoolExecutor

from thermoledger.testing.fuzzcases import PUBLISH_EVERY, answer, cases


def _run(case, limit):
    i, kind, table, meta = case
    out = answer(kind, table, meta, limit, publish=i % PUBLISH_EVERY == 0)
    out["index"] = i
    return out


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--cases", type=int, default=12000)
    p.add_argument("--seed", type=int, default=2026)
    p.add_argument("--workers", type=int, default=2)
    p.add_argument("--limit", type=int, default=20, help="seconds per input")
    args = p.parse_args(argv)
    t0 = time.monotonic()
    counts, bad = Counter(), []
    with ProcessPoolExecutor(args.workers) as pool:
        futures = pool.map(_run, cases(args.cases, args.seed), [args.limit] * args.cases,
                           chunksize=16)
        for r in futures:
            counts[(r["kind"], r["outcome"])] += 1
            if r["outcome"] != "answered":
                bad.append(r)
    wall = time.monotonic() - t0
    kinds = sorted({k for k, _ in counts})
    print(f"fuzz benchmark: {args.cases} inputs, seed {args.seed}, {args.workers} workers, "
          f"limit {args.limit} s per input, {wall:.0f} s wall ({args.cases / wall:.1f} inputs/s)")
    print(f"{'kind':16s} {'inputs':>7s} {'answered':>9s} {'exception':>10s} {'hang':>5s} "
          f"{'unanswered':>11s}")
    for k in kinds:
        row = [counts[(k, o)] for o in ("answered", "exception", "hang", "unanswered")]
        print(f"{k:16s} {sum(row):7d} {row[0]:9d} {row[1]:10d} {row[2]:5d} {row[3]:11d}")
    tot = [sum(counts[(k, o)] for k in kinds) for o in ("answered", "exception", "hang",
                                                        "unanswered")]
    print(f"{'all':16s} {sum(tot):7d} {tot[0]:9d} {tot[1]:10d} {tot[2]:5d} {tot[3]:11d}")
    for r in bad[:20]:
        print(f"  case {r['index']} ({r['kind']}): {r['outcome']} {r['detail']}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
