"""Benchmark: the vectorised ensemble against a loop of single flights, for every bundled vehicle it flies.

    python benchmarks/ensemble_vehicles.py [--designs N] [--sample K] [--models NAME ...]

For each bundled model the ensemble can fly, a sweep of N designs over two of its parameters is flown as one
ensemble on one core (after a 100-design warm-up), and K of the same designs are flown one at a time; the
script prints the time per flight of each, their ratio (target >= 100x; the goal is 200x; also the ratio of the
process's CPU times, steadier on a shared machine) and the largest relative difference of the outcomes the
ensemble computes on the sampled designs. Both sides use the model's own tolerances and run in this process,
side by side.
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

import numpy as np

import thrustgraph as tg
from thrustgraph.flight.arraysystem import unsupported
from thrustgraph.models.designs import apply, resolve
from thrustgraph.flight.ensemble import COMPUTED
from thrustgraph.models.model import parse_model
from thrustgraph.studies.studies import evaluate
from thrustgraph.studies.studyflight import fly_design

#: two varied parameters per vehicle, with ranges inside their declared bounds (SI)
SWEEPS = {
    "bottle-rocket": {"components.bottle.fill": (0.15, 0.5), "components.bottle.gauge_pressure": (3e5, 6e5)},
    "twin-nozzle-bottle-rocket": {"components.bottle.fill": (0.15, 0.5),
                                  "components.airframe.dry_mass": (0.08, 0.16)},
    "small-rocket-standard-atmosphere": {"components.airframe.dry_mass": (0.3, 0.9),
                                         "launch.elevation": (np.radians(70.0), np.radians(89.0))},
    "rocket-with-parachute": {"components.airframe.dry_mass": (0.9, 1.5),
                              "launch.elevation": (np.radians(75.0), np.radians(89.0))},
    # an ideal-gas tank blowing down through three converging-diverging nozzles, in free flight
    "cold-gas-free-floater": {"components.tank.gauge_pressure": (20e5, 40e5),
                              "components.main.throat_diameter": (0.6e-3, 1.0e-3)},
    # a hose feed whose line (hose loss, then the nozzle) is solved on every evaluation
    "hose-fed-hover": {"components.hose.supply_pressure": (1.9e5, 2.4e5),
                       "components.platform.dry_mass": (20.0, 32.0)},
    # each design separates its booster and lights its sustainer at its own time
    "two-stage-demo": {"components.upper_frame.dry_mass": (0.12, 0.3),
                       "components.booster_frame.dry_mass": (0.08, 0.2)},
    "water-jet-boat": {"components.pump.shaft_power": (800.0, 2500.0), "components.hull.dry_mass": (15.0, 40.0)},
}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--designs", type=int, default=10000)
    ap.add_argument("--sample", type=int, default=50)
    ap.add_argument("--models", nargs="*", default=list(SWEEPS), choices=list(SWEEPS), help="the vehicles to fly")
    args = ap.parse_args()
    folder = Path(tg.default_model_path()).parent
    print(f"{args.designs} designs per vehicle, {args.sample} of them also flown one at a time; "
          f"load average {os.getloadavg()[0]:.2f}")
    for name, sweep in ((n, SWEEPS[n]) for n in args.models):
        model = tg.load_model(folder / f"{name}.toml")
        parsed = parse_model(model)
        why = unsupported(parsed)
        if why:
            print(f"{name}: the ensemble cannot fly it ({why})")
            continue
        params = [resolve(parsed, p) for p in sweep]
        rng = np.random.default_rng(7)
        x = np.column_stack([rng.uniform(lo, hi, args.designs) for lo, hi in sweep.values()])
        outs = [o for o in COMPUTED]
        evaluate(model, params, x[:100], outs, parsed=parsed, engine="serial", flights="ensemble", quiet=True)
        t0, c0 = time.perf_counter(), time.process_time()
        table = evaluate(model, params, x, outs, parsed=parsed, engine="serial", flights="ensemble", quiet=True)
        t_ens, c_ens = (time.perf_counter() - t0) / len(x), (time.process_time() - c0) / len(x)
        pick = np.linspace(0, len(x) - 1, args.sample).astype(int)
        t0, c0 = time.perf_counter(), time.process_time()
        singles = [fly_design(apply(parsed, params, x[i]), outs) for i in pick]
        t_one, c_one = (time.perf_counter() - t0) / len(pick), (time.process_time() - c0) / len(pick)
        worst, which = 0.0, ""
        for k, o in enumerate(table.outputs):
            for i, s in zip(pick, singles):
                b = s.values.get(o, np.nan) if s.status == "ok" else np.nan
                a = table.values[i, k]
                if np.isfinite(a) and np.isfinite(b) and abs(b) > 1e-3 and o != "burn_time":
                    e = abs(a - b) / abs(b)
                    if e > worst:
                        worst, which = e, o
        print(f"{name:34s} ensemble {t_ens * 1e3:7.3f} ms/flight ({int(table.ok.sum())} flew), single "
              f"{t_one * 1e3:7.2f} ms/flight: {t_one / t_ens:6.1f}x (CPU time {c_one / c_ens:6.1f}x); largest "
              f"outcome difference {worst:.1e} ({which})")


if __name__ == "__main__":
    main()
