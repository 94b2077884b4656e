"""Benchmark: small studies of every bundled model, flown one design at a time and as one ensemble, side by side.

    python benchmarks/small_studies.py [--sizes 4,8,16,32] [--models NAME ...] [--repeat 3]

For each bundled model one parameter it has (below) is swept over ``n`` evenly spaced values and the study engine
flies the designs (``thrustgraph.studies.studies.evaluate``, ``engine="serial"``) as single flights
(``flights="single"``: each design assembled and flown as ``thrustgraph run`` flies it) and as one vectorised
ensemble (``flights="ensemble"``), alternating, after a warm-up of each; CPU time of this process, the median of
``--repeat``. Printed: each way's seconds and the ensemble's share of the single flights' time. This is what
sets ``thrustgraph.studies.studies.ENSEMBLE_FROM``, the number of designs from which ``--flights auto`` flies an
ensemble. The machine is shared: figures move by 10-30 % between runs. Nothing here is a unit test.
"""

from __future__ import annotations

import argparse
import math
import os
import statistics
import time

import numpy as np

import thrustgraph as tg
from thrustgraph.flight import stepkernel
from thrustgraph.models.designs import resolve
from thrustgraph.models.model import parse_model
from thrustgraph.studies.studies import ENSEMBLE_FROM, evaluate

#: per bundled model: a parameter it has and the range it is swept over (SI)
SWEPT = {
    "bottle-rocket": ("components.bottle.fill", 0.2, 0.45),
    "twin-nozzle-bottle-rocket": ("components.bottle.fill", 0.2, 0.45),
    "small-rocket-standard-atmosphere": ("components.airframe.dry_mass", 0.4, 0.8),
    "rocket-with-parachute": ("launch.elevation", math.radians(80.0), math.radians(89.0)),
    "two-stage-demo": ("launch.elevation", math.radians(80.0), math.radians(89.0)),
    "cold-gas-track": ("launch.friction", 0.0, 0.05),
    "cold-gas-free-floater": ("launch.min_follow_speed", 0.5, 1.5),
    "gas-cartridge-cart": ("launch.friction", 0.01, 0.05),
    "hose-fed-hover": ("launch.min_follow_speed", 0.5, 1.5),
    "water-jet-boat": ("components.hull.dry_mass", 15.0, 40.0),
}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="4,8,16,32")
    ap.add_argument("--models", nargs="*", default=list(SWEPT), choices=list(SWEPT))
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    sizes = [int(s) for s in args.sizes.split(",")]
    print(f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}; kernel {stepkernel.use()}; "
          f"--flights auto flies an ensemble from {ENSEMBLE_FROM} designs")
    print(f"{'model':34s} " + " ".join(f"{'n=' + str(n):>24s}" for n in sizes))
    print(f"{'':34s} " + " ".join(f"{'single / ensemble s (share)':>24s}" for _ in sizes))
    for name in args.models:
        path, lo, hi = SWEPT[name]
        model = tg.load_model(name)
        parsed = parse_model(model)
        params = [resolve(parsed, path)]
        for flights in ("single", "ensemble"):          # warm-up: imports, compiled loops, property tables
            evaluate(model, params, np.linspace(lo, hi, 2)[:, None], parsed=parsed, engine="serial",
                     flights=flights, quiet=True)
        cells = []
        for n in sizes:
            x = np.linspace(lo, hi, n)[:, None]
            cpu: dict[str, list[float]] = {"single": [], "ensemble": []}
            for _ in range(args.repeat):
                for flights in cpu:
                    c0 = time.process_time()
                    evaluate(model, params, x, parsed=parsed, engine="serial", flights=flights, quiet=True)
                    cpu[flights].append(time.process_time() - c0)
            s, e = statistics.median(cpu["single"]), statistics.median(cpu["ensemble"])
            cells.append(f"{s:6.2f} / {e:5.2f} ({e / s:4.2f})")
        print(f"{name:34s} " + " ".join(f"{c:>24s}" for c in cells), flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
