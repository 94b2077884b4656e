"""Benchmark: the bundled bottle rocket flown by thrustgraph and by a hand-written single-function scipy model,
in the same run, with the same integrator and tolerances. Prints the time ratios and the apogee difference.

    python benchmarks/single_flight.py [--repeat N]

Targets (issue "Core vertical slice"): integration-time ratio <= 1.5, apogee within 0.5 %.
Times are the median of N repeats, interleaved so that machine noise hits both sides alike.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import handwritten_bottle  # noqa: E402

import thrustgraph as tg  # noqa: E402
from thrustgraph.integrate import fly_segments  # noqa: E402


def apogee_of(events) -> float:
    for e in events:
        if e.name == "apogee":
            return float(e.detail.split()[1])
    return float("nan")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=15)
    args = ap.parse_args()
    model = tg.load_model(tg.default_model_path())
    system = tg.assemble(model)
    hand, seg, full = [], [], []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        ap_hand, _, nfev_hand = handwritten_bottle.fly()
        t1 = time.perf_counter()
        nfev_tg = fly_segments(system, dense=False).nfev
        t2 = time.perf_counter()
        result = tg.integrate(system)
        t3 = time.perf_counter()
        hand.append(t1 - t0)
        seg.append(t2 - t1)
        full.append(t3 - t2)
    h, s, f = statistics.median(hand), statistics.median(seg), statistics.median(full)
    # the apogee from the exact event state (the printed detail is rounded): use the result
    ap_tg = result.summary["apogee"]
    print(f"hand-written scipy model   : {h * 1e3:8.2f} ms  ({nfev_hand} rhs evaluations), apogee {ap_hand:.6f} m")
    print(f"thrustgraph integration    : {s * 1e3:8.2f} ms  ({nfev_tg} rhs evaluations; phases, events and"
          f" audits, no dense output, like the hand-written model)")
    print(f"thrustgraph incl. ledger   : {f * 1e3:8.2f} ms  (signals and ledger at {len(result.t)} samples),"
          f" apogee {ap_tg:.6f} m")
    print(f"ratio integration / hand   : {s / h:6.2f}   (target <= 1.5)")
    print(f"ratio with ledger / hand   : {f / h:6.2f}")
    print(f"apogee difference          : {abs(ap_tg - ap_hand) / ap_hand * 100:.2e} %  (target <= 0.5 %)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
