"""Put many generated bad model files through ``thrustgraph run`` and count what happened.

    python tools/bad_models.py --seed 1 --cases 100000 --workers 2
    python tools/bad_models.py --seed 1 --show 4711        # print one case's file and what it does

Prints one line per case that crashed, hung or printed a non-finite number (with its seed and index, which
reproduce it), then ``N cases: R refused, O ok, A nan, C crash, H hang``. Exit status 1 when any case
crashed, hung or printed a non-finite number. The generator is tests/badmodels.py; the test suite runs a
short run of it (tests/test_bad_models.py).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

from badmodels import KINDS, make_case, run_case, run_cases  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--seed", type=int, default=1, help="seed of the generator (default 1)")
    p.add_argument("--cases", type=int, default=100_000, help="how many cases (default 100000)")
    p.add_argument("--start", type=int, default=0, help="index of the first case (default 0)")
    p.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    p.add_argument("--budget", type=float, default=120.0,
                   help="seconds a case may run before it counts as a hang (default 120)")
    p.add_argument("--show", type=int, metavar="INDEX", help="print case INDEX's file and outcome, then exit")
    p.add_argument("--slowest", type=int, default=5, help="list the N slowest cases at the end (default 5)")
    p.add_argument("--minutes", type=float, default=None,
                   help="stop after this many minutes and count the cases done so far (default: run them all)")
    args = p.parse_args(argv)
    if args.show is not None:
        case = make_case(args.seed, args.show)
        print(f"# seed {case.seed} index {case.index}: from {case.base}; " + "; ".join(case.mutations))
        print(case.text[:20000] + ("\n# ... (cut)" if len(case.text) > 20000 else ""))
        with tempfile.TemporaryDirectory() as d:
            out = run_case(case, d)
        print(f"# -> {out.kind} in {out.seconds:.2f} s: {out.detail}")
        return 0
    counts: Counter[str] = Counter()
    times: list[tuple[float, int, str]] = []
    t0 = time.monotonic()
    done = 0
    for index, out in run_cases(args.seed, range(args.start, args.start + args.cases), workers=args.workers,
                                budget=args.budget):
        counts[out.kind] += 1
        done += 1
        times.append((out.seconds, index, out.kind))
        if out.kind in ("nan", "crash", "hang"):
            case = make_case(args.seed, index)
            detail = out.detail.strip().splitlines()
            print(f"{out.kind}: seed {args.seed} index {index} ({case.base}; {'; '.join(case.mutations)}): "
                  f"{detail[-1] if detail else ''}", flush=True)
        if args.minutes is not None and time.monotonic() - t0 > 60.0 * args.minutes:
            print(f"stopped after {args.minutes:g} minutes", file=sys.stderr)
            break
        if done % 1000 == 0:
            print(f"... {done} cases, {time.monotonic() - t0:.0f} s: "
                  + ", ".join(f"{counts[k]} {k}" for k in KINDS), file=sys.stderr, flush=True)
    wall = time.monotonic() - t0
    times.sort(reverse=True)
    for s, index, kind in times[:args.slowest]:
        print(f"slow: index {index} {kind} {s:.2f} s")
    print(f"{done} cases: " + ", ".join(f"{counts[k]} {k}" for k in KINDS) + f"  ({wall:.0f} s, {args.workers} "
          "workers)")
    return 1 if counts["nan"] or counts["crash"] or counts["hang"] else 0


if __name__ == "__main__":
    sys.exit(main())
