"""Benchmark: the bundled bottle rocket flown by thrustgraph and by a hand-written single-function scipy model,
in the same run, with the same integrator and tolerances. Prints the time ratios, the evaluation counts and the
accuracy of both against tight-tolerance runs of themselves.

    python benchmarks/single_flight.py [--repeat N] [--instructions]

Targets: integration-time ratio <= 1.0 (issue "Design studies at scale"; it was <= 1.5 for the core slice),
apogee within 0.5 % of the hand-written model.

Times are CPU times of this process (steadier than the wall clock on a shared machine), medians of N repeats of
repeated flights of one vehicle (after warm-ups past the tracing of its phases), interleaved so that machine noise
hits both sides alike. The like-for-like line is
thrustgraph doing what the hand-written model does: phases and events, no dense output and no closure-audit
accumulators (``fly_segments(dense=False, audit=False)``, what design studies run). The audited integration and the
full result (signals and ledger) are printed beside it. ``--instructions`` also counts machine instructions per
flight under valgrind's callgrind (20 flights minus 5, in child processes), for the like-for-like flight and for
the full result (``thrustgraph.flight.integrate``: signals, ledger, outcomes): unlike times, the counts repeat exactly on a
shared, noisy machine.
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import handwritten_bottle  # noqa: E402

import thrustgraph as tg  # noqa: E402
from thrustgraph.balance.balance import SAMPLES_AFTER  # noqa: E402
from thrustgraph.flight.integrate import fly_segments  # noqa: E402


def apogee_of(segs) -> float:
    return max(float(sol.y[2].max()) for _, sol, _ in segs.segments)


def _child(which: str, n: int) -> None:
    """Fly n flights of one side after warm-ups; used under callgrind. The warm-ups go past the flight on which
    a phase's samples are traced (``thrustgraph.balance.balance.SAMPLES_AFTER``), so that the difference of two
    counts is the steady state of repeated flights, as the medians of the timed loop are."""
    system = tg.assemble(tg.load_model(tg.default_model_path()))
    handwritten_bottle.fly()
    for _ in range(SAMPLES_AFTER + 2):
        fly_segments(system, dense=False, audit=False)
        if which == "full":
            tg.integrate(system)
    for _ in range(n):
        if which == "hand":
            handwritten_bottle.fly()
        elif which == "full":
            tg.integrate(system)
        else:
            fly_segments(system, dense=False, audit=False)


def instructions_per_flight(which: str) -> float | None:
    if shutil.which("valgrind") is None:
        return None
    counts = []
    for n in (5, 20):
        out = subprocess.run(["valgrind", "--tool=callgrind", "--callgrind-out-file=/dev/null", sys.executable,
                              __file__, "--child", which, str(n)], capture_output=True, text=True,
                             env={**os.environ, "PYTHONHASHSEED": "0"})
        m = re.search(r"Collected : (\d+)", out.stderr)
        if m is None:
            return None
        counts.append(int(m.group(1)))
    return (counts[1] - counts[0]) / 15.0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=25)
    ap.add_argument("--instructions", action="store_true", help="also count instructions under callgrind")
    ap.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        _child(args.child[0], int(args.child[1]))
        return 0
    model = tg.load_model(tg.default_model_path())
    system = tg.assemble(model)
    t0 = time.perf_counter()
    fly_segments(tg.assemble(model), dense=False, audit=False)   # the first flight in the process compiles
    cold = time.perf_counter() - t0
    for _ in range(SAMPLES_AFTER + 2):       # repeated flights of one vehicle: past the tracing of its samples
        tg.integrate(system)
    hand, bare, audited, full = [], [], [], []
    for _ in range(args.repeat):
        t0 = time.process_time()
        ap_hand, _, nfev_hand = handwritten_bottle.fly()
        t1 = time.process_time()
        segs = fly_segments(system, dense=False, audit=False)
        t2 = time.process_time()
        nfev_aud = fly_segments(system, dense=False).nfev
        t3 = time.process_time()
        result = tg.integrate(system)
        t4 = time.process_time()
        hand.append(t1 - t0)
        bare.append(t2 - t1)
        audited.append(t3 - t2)
        full.append(t4 - t3)
    h, b, a, f = (statistics.median(v) for v in (hand, bare, audited, full))
    ap_tg = apogee_of(segs)
    # accuracy of each against itself at tight tolerances
    ap_hand_ref = handwritten_bottle.fly(rtol=1e-13, atol=1e-13)[0]
    ap_tg_ref = apogee_of(fly_segments(system, dense=False, audit=False, rtol=1e-13, atol=1e-13))
    print(f"hand-written scipy model        : {h * 1e3:8.2f} ms  ({nfev_hand} rhs evaluations), apogee {ap_hand:.6f} m,"
          f" error vs its tight run {abs(ap_hand - ap_hand_ref) / ap_hand_ref:.1e}")
    print(f"thrustgraph, like for like      : {b * 1e3:8.2f} ms  ({segs.nfev} rhs evaluations; phases and events, no"
          f" dense output, no audit accumulators), apogee {ap_tg:.6f} m, error vs its tight run"
          f" {abs(ap_tg - ap_tg_ref) / ap_tg_ref:.1e}")
    print(f"thrustgraph with closure audits : {a * 1e3:8.2f} ms  ({nfev_aud} rhs evaluations)")
    print(f"thrustgraph full result         : {f * 1e3:8.2f} ms  (signals and ledger at {len(result.t)} samples)")
    print(f"first flight in a process       : {cold * 1e3:8.2f} ms  (first assembly, contract check and imports of the run)")
    print(f"ratio like for like / hand      : {b / h:6.2f}   (target <= 1.0)")
    print(f"ratio with audits / hand        : {a / h:6.2f}")
    print(f"ratio full result / hand        : {f / h:6.2f}")
    print(f"apogee difference               : {abs(ap_tg - ap_hand) / ap_hand * 100:.2e} %  (target <= 0.5 %)")
    if args.instructions:
        ih, it = instructions_per_flight("hand"), instructions_per_flight("tg")
        if ih is None or it is None:
            print("instructions                    : valgrind not available")
        else:
            print(f"instructions per flight         : hand {ih / 1e6:.2f} M, thrustgraph {it / 1e6:.2f} M,"
                  f" ratio {it / ih:.3f}")
            ifull = instructions_per_flight("full")
            if ifull is not None:
                print(f"instructions per full result    : {ifull / 1e6:.2f} M, ratio to hand {ifull / ih:.3f}"
                      "  (target <= 1.5)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
