"""Benchmark: a 10,000-design sweep flown as one ensemble, against the hand-written loop, in process and through
the command line (issue 18: "the ensemble at 200x").

    python benchmarks/ensemble_speed.py [--designs 10000] [--sample 40] [--repeat 3] [--models NAME ...]
                                        [--skip-cli] [--kernel numpy|numba|both]

For each of three bundled vehicles a grid of about ``--designs`` designs is flown

1. in process, as the study engine flies it (``thrustgraph.studies.studies.evaluate``, ``engine="serial"``,
   ``flights="ensemble"``, one core), after a 100-design warm-up; the median of ``--repeat`` sweeps;
2. through the command line, ``thrustgraph study MODEL sweep --vary ... --flights ensemble --engine serial
   --table FILE`` in a fresh process, with the start-up subtracted: the same command for one design (interpreter,
   imports, the model read and checked, one flight, the table written) is timed beside it, less the time that one
   design's ensemble takes in process (its fixed cost belongs to the study), and what is left of the large
   command's time is divided by its number of designs;

against the loop a user would write without thrustgraph: a hand-written single-function scipy model flown design
after design over an evenly spaced sample (``--sample``) of the same grid (benchmarks/handwritten_bottle.py, the
bottle rocket and, with two canted nozzles, the twin-nozzle bottle rocket; the script checks that it agrees with
thrustgraph's outcomes). The third vehicle, the small rocket in the 1976 atmosphere, has no hand-written model here
(the standard atmosphere with its wind profile and the Mach-table drag would make it long): it is measured against
thrustgraph's own single flights (integration only, ``fly_segments(audit=False)``, each design assembled afresh as
a study's loop does). How fast those run against the hand-written model is printed for the two bottle rockets
(the same loop over the same sampled designs), and the small rocket's ratio is also printed scaled by the bottles'
figure: an estimate of its ratio against a hand-written model.

``--kernel both`` (the default where numba is installed) flies each ensemble with the integrator's step arithmetic
in numpy and compiled by numba (:mod:`thrustgraph.flight.stepkernel`; ``THRUSTGRAPH_KERNEL`` for the command line),
the two alternating within each repeat so that both see the same load, and prints them side by side; the compiled
loops are compiled (or read from their cache) in the warm-up, and the command line's start-up is measured for each
kernel (it reads the compiled loops from the cache).

Times are CPU seconds of this process or of the child process (user + system), steadier than the wall clock on the
shared 2-core machine; the wall clock is printed beside them. Target: every ratio >= 200x. Nothing here is a unit
test.
"""

from __future__ import annotations

import argparse
import math
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import handwritten_bottle as hb  # noqa: E402

import thrustgraph as tg  # noqa: E402
from thrustgraph.flight import stepkernel  # noqa: E402
from thrustgraph.flight.integrate import fly_segments  # noqa: E402
from thrustgraph.models.designs import apply, resolve  # noqa: E402
from thrustgraph.models.model import parse_model  # noqa: E402
from thrustgraph.studies.studies import evaluate  # noqa: E402
from thrustgraph.studies.studyflight import fly_design  # noqa: E402


def _bottle(x):
    return hb.bottle(*x)


def _twin(x):
    return hb.bottle(x[0], 4.5e5, 0.015, x[1], nozzles=2, cant=math.radians(15.0), cd=0.45,
                     elevation=math.radians(85.0))


#: per vehicle: the varied parameters as (path, low SI, high SI, command-line text of LOW..HIGH) and the values
#: per axis for a 10,000-design grid, and the hand-written model's design constants (None: none here)
VEHICLES = {
    "bottle-rocket": ([("components.bottle.fill", 0.15, 0.5, "0.15..0.5"),
                       ("components.bottle.gauge_pressure", 3e5, 6e5, "3 bar..6 bar"),
                       ("components.neck.diameter", 0.015, 0.022, "15 mm..22 mm"),
                       ("components.airframe.dry_mass", 0.08, 0.16, "80 g..160 g")], _bottle),
    "twin-nozzle-bottle-rocket": ([("components.bottle.fill", 0.15, 0.5, "0.15..0.5"),
                                   ("components.airframe.dry_mass", 0.08, 0.16, "80 g..160 g")], _twin),
    "small-rocket-standard-atmosphere": ([("components.airframe.dry_mass", 0.3, 0.9, "300 g..900 g"),
                                          ("launch.elevation", math.radians(70.0), math.radians(89.0),
                                           "70 deg..89 deg")], None),
}


def grid(axes, n: int) -> tuple[np.ndarray, int]:
    """About ``n`` designs: the same number of evenly spaced values on every axis (SI), every combination."""
    k = max(2, int(round(n ** (1.0 / len(axes)))))
    cols = np.meshgrid(*[np.linspace(lo, hi, k) for _, lo, hi, _ in axes], indexing="ij")
    return np.column_stack([c.reshape(-1) for c in cols]), k


def cpu_children() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def run_cli(model: Path, vary: list[str], table: Path, kernel: str) -> tuple[float, float]:
    """CPU and wall seconds of one ``thrustgraph study`` in a fresh process, with the step kernel ``kernel``."""
    exe = Path(sys.executable).with_name("thrustgraph")
    cmd = [str(exe), "study", str(model), "sweep", *sum((["--vary", v] for v in vary), []), "--flights", "ensemble",
           "--engine", "serial", "--quiet", "--table", str(table)]
    c0, t0 = cpu_children(), time.perf_counter()
    subprocess.run(cmd, check=True, capture_output=True, env={**os.environ, "THRUSTGRAPH_KERNEL": kernel})
    return cpu_children() - c0, time.perf_counter() - t0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--designs", type=int, default=10000)
    ap.add_argument("--sample", type=int, default=40, help="designs of the grid flown one at a time")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--models", nargs="*", default=list(VEHICLES), choices=list(VEHICLES))
    ap.add_argument("--skip-cli", action="store_true")
    ap.add_argument("--kernel", choices=["numpy", "numba", "both"],
                    default="both" if stepkernel.AVAILABLE else "numpy",
                    help="the ensemble's step arithmetic: numpy, compiled by numba, or both side by side")
    args = ap.parse_args()
    kernels = ["numpy", "numba"] if args.kernel == "both" else [args.kernel]
    folder = Path(tg.default_model_path()).parent
    print(f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}; CPU times (wall clock in brackets); "
          f"kernels: {', '.join(kernels)}")
    summary = []
    single_over_hand: list[float] = []
    for name in args.models:
        axes, hand = VEHICLES[name]
        path = folder / f"{name}.toml"
        model = tg.load_model(path)
        parsed = parse_model(model)
        params = [resolve(parsed, p) for p, *_ in axes]
        x, k = grid(axes, args.designs)
        n = len(x)
        print(f"\n{name}: {n} designs, {' x '.join(str(k) for _ in axes)} grid over "
              f"{', '.join(p for p, *_ in axes)}")

        # 1. in process, the kernels alternating -----------------------------------------------------------------
        cpu = {kern: [] for kern in kernels}
        wall = {kern: [] for kern in kernels}
        tables = {}
        for kern in kernels:
            stepkernel.use(kern)
            evaluate(model, params, x[:100], parsed=parsed, engine="serial", flights="ensemble", quiet=True)
        for _ in range(args.repeat):
            for kern in kernels:
                stepkernel.use(kern)
                c0, t0 = time.process_time(), time.perf_counter()
                tables[kern] = evaluate(model, params, x, parsed=parsed, engine="serial", flights="ensemble",
                                        quiet=True)
                cpu[kern].append(time.process_time() - c0)
                wall[kern].append(time.perf_counter() - t0)
        stepkernel.use()
        per_ens = {kern: statistics.median(cpu[kern]) / n for kern in kernels}
        for kern in kernels:
            print(f"  ensemble in process, {kern:5s}: {per_ens[kern] * 1e6:7.1f} us a design "
                  f"({statistics.median(cpu[kern]):.3f} s for {n}, {int(tables[kern].ok.sum())} flew; "
                  f"[{statistics.median(wall[kern]) / n * 1e6:.1f} us])")
        if len(kernels) == 2:
            same = np.array_equal(tables["numpy"].values, tables["numba"].values, equal_nan=True)
            print(f"  the two kernels' outcomes are {'equal bit for bit' if same else 'NOT EQUAL'}; numba "
                  f"{per_ens['numpy'] / per_ens['numba']:.2f}x as fast")
        table = tables[kernels[-1]]

        # the loop, on a sample of the same designs ---------------------------------------------------------------
        pick = np.linspace(0, n - 1, min(args.sample, n)).astype(int)
        systems = [tg.assemble(apply(parsed, params, x[i])) for i in pick]
        c0, t0 = time.process_time(), time.perf_counter()
        for s in systems:
            fly_segments(s, audit=False)
        per_single, per_single_w = (time.process_time() - c0) / len(pick), (time.perf_counter() - t0) / len(pick)
        singles = [fly_design(apply(parsed, params, x[i]), ["apogee", "flight_time"]) for i in pick]
        k_ap = table.outputs.index("apogee")
        ens_err = max(abs(table.values[i, k_ap] - s.values["apogee"]) / abs(s.values["apogee"])
                      for i, s in zip(pick, singles) if s.status == "ok")
        if hand is not None:
            designs = [hand(x[i]) for i in pick]
            c0, t0 = time.process_time(), time.perf_counter()
            flown = [hb.fly(b=b) for b in designs]
            per_ref, per_ref_w = (time.process_time() - c0) / len(pick), (time.perf_counter() - t0) / len(pick)
            agree = max(max(abs(h[0] - s.values["apogee"]) / abs(s.values["apogee"]),
                            abs(h[1] - s.values["flight_time"]) / abs(s.values["flight_time"]))
                        for h, s in zip(flown, singles) if s.status == "ok")
            ref = "hand-written scipy model"
            print(f"  hand-written loop        : {per_ref * 1e3:7.3f} ms a design ({len(pick)} sampled designs; "
                  f"[{per_ref_w * 1e3:.3f} ms]); agrees with thrustgraph's single flights to {agree:.1e} "
                  f"(apogee, flight time)")
            print(f"  thrustgraph single flight: {per_single * 1e3:7.3f} ms a design, {per_single / per_ref:.2f}x "
                  f"the hand-written model (integration only)")
        else:
            per_ref, ref = per_single, "thrustgraph single flights"
            print(f"  thrustgraph single flight: {per_single * 1e3:7.3f} ms a design ({len(pick)} sampled designs, "
                  f"integration only; [{per_single_w * 1e3:.3f} ms]); no hand-written model of this vehicle here")
        print(f"  ensemble against single flights: apogee within {ens_err:.1e}")
        r_in = {kern: per_ref / per_ens[kern] for kern in kernels}
        for kern in kernels:
            print(f"  RATIO in process, {kern:5s}  : {r_in[kern]:7.1f}x against the {ref} (target >= 200x)")
        if hand is not None:
            single_over_hand.append(per_single / per_ref)
        elif single_over_hand:
            f = statistics.mean(single_over_hand)
            print(f"  (estimate against a hand-written model, single flights taken at {f:.2f}x one as for the "
                  f"bottle rockets: {', '.join(f'{kern} {r_in[kern] / f:.1f}x' for kern in kernels)})")
        rows = {kern: [per_ens[kern], r_in[kern], None, None] for kern in kernels}

        # 2. the command line, the kernels alternating -------------------------------------------------------------
        if not args.skip_cli:
            vary_all = [f"{p}={text} in {k}" for p, _, _, text in axes]
            one = [f"{p}={text.split('..')[0]}" for p, _, _, text in axes]       # the grid's first design
            with tempfile.TemporaryDirectory() as tmp:
                out = Path(tmp) / "sweep.csv"
                big = {kern: [] for kern in kernels}
                small = {kern: [] for kern in kernels}
                for kern in kernels:
                    run_cli(path, one, out, kern)        # warm the file system, byte-code and compiled caches
                for _ in range(args.repeat):
                    for kern in kernels:
                        small[kern].append(run_cli(path, one, out, kern))
                        big[kern].append(run_cli(path, vary_all, out, kern))
                written = sum(1 for line in out.read_text().splitlines() if line and not line.startswith("#")) - 1
            # the start-up: the one-design command less what flying its one design takes in process (an
            # ensemble's fixed cost, its steps' Python work, belongs to the study, not to the start-up)
            for kern in kernels:
                stepkernel.use(kern)
                one_cpu, one_wall = [], []
                for _ in range(args.repeat):
                    c0, t0 = time.process_time(), time.perf_counter()
                    evaluate(model, params, x[:1], parsed=parsed, engine="serial", flights="ensemble", quiet=True)
                    one_cpu.append(time.process_time() - c0)
                    one_wall.append(time.perf_counter() - t0)
                cb, wb = statistics.median(c for c, _ in big[kern]), statistics.median(w for _, w in big[kern])
                cs, ws = statistics.median(c for c, _ in small[kern]), statistics.median(w for _, w in small[kern])
                start, start_w = cs - statistics.median(one_cpu), ws - statistics.median(one_wall)
                per_cli = (cb - start) / n
                r_cli = per_ref / per_cli
                print(f"  command line, {kern:5s}      : {cb:.2f} s for {n} designs ({written} rows written), "
                      f"start-up {start:.2f} s (one design: {cs:.2f} s, less {statistics.median(one_cpu):.3f} s "
                      f"flying it in process); {per_cli * 1e6:.1f} us a design [{(wb - start_w) / n * 1e6:.1f} us]")
                print(f"  RATIO through the CLI, {kern:5s}: {r_cli:7.1f}x against the {ref} (target >= 200x)")
                rows[kern][2:] = [per_cli, r_cli]
            stepkernel.use()
        for kern in kernels:
            summary.append([name, kern, *rows[kern], per_ref])

    print("\nsummary (us a design; ratios against the reference loop)")
    print(f"  {'vehicle':34s} {'kernel':6s} {'in process':>10s} {'ratio':>7s} {'CLI':>8s} {'ratio':>7s} "
          f"{'reference ms':>12s}")
    for name, kern, pe, ri, pc, rc, pr in summary:
        cli = f"{pc * 1e6:8.1f} {rc:6.1f}x" if pc is not None else f"{'-':>8s} {'-':>7s}"
        print(f"  {name:34s} {kern:6s} {pe * 1e6:10.1f} {ri:6.1f}x {cli} {pr * 1e3:12.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
