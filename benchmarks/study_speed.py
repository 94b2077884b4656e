"""Benchmark: design studies of the bundled bottle rocket, measured side by side in one run.

    python benchmarks/study_speed.py [--designs 10000] [--sample 200] [--repeat 7] [--skip-dask] [--dask-repeat 5]

1. A 10,000-design sweep (fill x pressure x nozzle diameter x dry mass, a 10^4 grid) flown as one
   vectorised ensemble on one core (median of 3 sweeps after a warm-up), against a loop of single flights
   measured on an evenly spaced sample of the same designs (``--sample``) and scaled per flight; both at the
   model's tolerance (rtol = atol = 1e-9) and both computing the same outcomes. Target: ensemble >= 100x
   faster per flight.
2. One single flight (integration only) against the hand-written single-function scipy model of the same vehicle
   (benchmarks/handwritten_bottle.py); medians of interleaved repeats. Target: ratio <= 1.0.
3. The same sweep on a Dask LocalCluster with 2 workers against 1 worker (one thread each, ensemble chunks),
   with Dask's default settings and with thrustgraph.studies.engines.STUDY_CLUSTER_CONFIG (housekeeping loops run
   rarely); one cluster up at a time, alternating, start-up and a first sweep untimed (steady state), medians.
   Target: >= 1.8x on a 2-core machine.
4. Peak memory of the 10,000-design sweep with summary outputs: the Python heap peak (tracemalloc, numpy
   arrays included) and the process's maximum resident set. Target: < 1 GiB.

The machine is shared and noisy: figures move by 10-30 % between runs. Nothing here is a unit test.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import handwritten_bottle  # noqa: E402

import thrustgraph as tg  # noqa: E402
from thrustgraph.models.designs import apply, resolve  # noqa: E402
from thrustgraph.flight.integrate import fly_segments  # noqa: E402
from thrustgraph.models.model import parse_model  # noqa: E402
from thrustgraph.studies.studyflight import fly_design  # noqa: E402
from thrustgraph.studies.studies import evaluate  # noqa: E402

PATHS = ("components.bottle.fill", "components.bottle.gauge_pressure", "components.neck.diameter",
         "components.airframe.dry_mass")


def designs(n: int) -> np.ndarray:
    """A grid of about n designs over fill 0.15-0.5, 3-6 bar gauge, 15-22 mm nozzle, 80-160 g dry mass."""
    k = max(2, int(round(n ** 0.25)))
    axes = [np.linspace(0.15, 0.5, k), np.linspace(3e5, 6e5, k), np.linspace(0.015, 0.022, k),
            np.linspace(0.08, 0.16, k)]
    return np.array(np.meshgrid(*axes, indexing="ij")).reshape(4, -1).T


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--designs", type=int, default=10000)
    ap.add_argument("--sample", type=int, default=200)
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--skip-dask", action="store_true")
    ap.add_argument("--dask-repeat", type=int, default=5, help="timed Dask sweeps per cluster kind")
    args = ap.parse_args()

    model = tg.load_model(tg.default_model_path())
    parsed = parse_model(model)
    params = [resolve(parsed, p) for p in PATHS]
    x = designs(args.designs)
    n = len(x)
    print(f"bottle-rocket sweep: {n} designs ({', '.join(PATHS)}), rtol = atol = {parsed.run.rtol:g}, "
          f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}")

    # 1. ensemble on one core vs a loop of single flights ------------------------------------------------------
    # steady state on both sides: a warm-up ensemble of 100 designs, then the median of 3 full sweeps (the loop
    # below is an average over its sampled flights)
    evaluate(model, params, x[:100], parsed=parsed, engine="serial", flights="ensemble", quiet=True)
    runs = []
    for _ in range(3):
        t0 = time.perf_counter()
        table = evaluate(model, params, x, parsed=parsed, engine="serial", flights="ensemble", quiet=True)
        runs.append(time.perf_counter() - t0)
    t_ens = statistics.median(runs)
    ok = int(table.ok.sum())
    pick = np.linspace(0, n - 1, min(args.sample, n)).astype(int)
    t0 = time.perf_counter()
    singles = [fly_design(apply(parsed, params, x[i])) for i in pick]
    t_loop = time.perf_counter() - t0
    t0 = time.perf_counter()
    for i in pick:
        fly_segments(tg.assemble(apply(parsed, params, x[i])), audit=False)
    t_int = time.perf_counter() - t0
    per_ens = t_ens / n
    per_loop = t_loop / len(pick)
    per_int = t_int / len(pick)
    k_ap = table.outputs.index("apogee")
    err = max(abs(table.values[i, k_ap] - s.values["apogee"]) / s.values["apogee"]
              for i, s in zip(pick, singles) if s.status == "ok" and table.ok[i])
    worst = {}
    for k, name in enumerate(table.outputs):
        if name in ("impact_y", "burn_time"):
            continue
        e = [abs(table.values[i, k] - s.values[name]) / abs(s.values[name])
             for i, s in zip(pick, singles) if s.status == "ok" and table.ok[i] and s.values[name]]
        worst[name] = max(e) if e else float("nan")
    print()
    print("1. vectorised ensemble (one core) vs a loop of single flights")
    print(f"   ensemble, {n} designs                  : {t_ens:8.2f} s  = {per_ens * 1e3:7.3f} ms per flight "
          f"({ok} flew; median of {', '.join(f'{r:.2f}' for r in runs)} s)")
    print(f"   loop of single flights ({len(pick)} sampled)      : {per_loop * 1e3:7.2f} ms per flight "
          f"(outcomes included)")
    print(f"   loop, integration only (fly_segments)  : {per_int * 1e3:7.2f} ms per flight")
    print(f"   speed-up per flight                    : {per_loop / per_ens:7.1f}x   (target >= 100x; "
          f"{per_int / per_ens:.1f}x against integration only)")
    print(f"   apogee difference, sample              : {err:.2e} relative (largest); other outcomes: "
          f"{max(v for v in worst.values()):.2e} ({max(worst, key=worst.get)})")

    t0 = time.perf_counter()
    tp = evaluate(model, params, x, parsed=parsed, engine="processes", workers=2, flights="ensemble", quiet=True)
    t_pool = time.perf_counter() - t0
    print(f"   the same sweep on a pool of 2 local processes: {t_pool:.2f} s (pool start-up included), "
          f"{t_ens / t_pool:.2f}x the one-core ensemble; table equal: "
          f"{np.array_equal(tp.values, table.values, equal_nan=True)}")

    # 2. single flight vs the hand-written model --------------------------------------------------------------
    system = tg.assemble(parsed)
    hand, ours, ours_nd = [], [], []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        handwritten_bottle.fly()
        t1 = time.perf_counter()
        fly_segments(system, audit=False)
        t2 = time.perf_counter()
        fly_segments(system, dense=False, audit=False)
        t3 = time.perf_counter()
        hand.append(t1 - t0)
        ours.append(t2 - t1)
        ours_nd.append(t3 - t2)
    h, o, ond = statistics.median(hand), statistics.median(ours), statistics.median(ours_nd)
    print()
    print("2. one single flight vs the hand-written scipy model (medians of interleaved repeats)")
    print(f"   hand-written: {h * 1e3:.2f} ms; thrustgraph fly_segments (no audit accumulators): {o * 1e3:.2f} ms "
          f"with dense output (what studies use), {ond * 1e3:.2f} ms without")
    print(f"   ratio {o / h:.2f} with dense output, {ond / h:.2f} without  (target <= 1.0)")

    # 3. Dask 2 workers vs 1 -----------------------------------------------------------------------------------
    if not args.skip_dask:
        try:
            from distributed import LocalCluster
        except ImportError:
            print("\n3. Dask: not installed (pip install 'thrustgraph[dask]')")
        else:
            import dask

            from thrustgraph.studies.engines import STUDY_CLUSTER_CONFIG

            configs = {"Dask's default settings": {}, "thrustgraph.studies.engines.STUDY_CLUSTER_CONFIG": STUDY_CLUSTER_CONFIG}
            runs = {(c, w): [] for c in configs for w in (1, 2)}
            chunk = max(1, n // 4)
            same = True
            # one cluster up at a time: the event loops of an idle cluster are not free (two idle LocalClusters
            # took 9-14 % of one core here, measured), and a busy 2-worker cluster on 2 cores would pay for them.
            # Clusters of 1 and 2 workers, with Dask's default settings and with the study settings, alternate so
            # that a slow spell of the shared machine falls on every side. Steady state, as for the one-core
            # ensemble above: start-up and one untimed sweep (imports, the model parsed in each worker, the
            # workers' heaps grown to the chunks' arrays) before the timed one; medians of --dask-repeat
            for _ in range(args.dask_repeat):
                for cname, cfg in configs.items():
                    for workers in (1, 2):
                        with dask.config.set(cfg), LocalCluster(n_workers=workers, threads_per_worker=1,
                                                                processes=True, dashboard_address=None) as c:
                            evaluate(model, params, x, parsed=parsed, engine="dask", flights="ensemble",
                                     scheduler=c.scheduler_address, chunk_size=chunk, quiet=True)
                            t0 = time.perf_counter()
                            td = evaluate(model, params, x, parsed=parsed, engine="dask", flights="ensemble",
                                          scheduler=c.scheduler_address, chunk_size=chunk, quiet=True)
                            runs[cname, workers].append(time.perf_counter() - t0)
                            same = same and np.array_equal(td.values, table.values, equal_nan=True)
            print()
            print(f"3. Dask LocalCluster, the same {n}-design sweep, ensemble chunks of {chunk}, one cluster at a "
                  f"time, alternating; tables equal to the local one: {same}")
            for cname in configs:
                r1, r2 = runs[cname, 1], runs[cname, 2]
                t1, t2 = statistics.median(r1), statistics.median(r2)
                print(f"   {cname}: 1 worker {t1:.2f} s, 2 workers {t2:.2f} s (medians of "
                      f"{', '.join(f'{a:.2f}' for a in r1)} and {', '.join(f'{b:.2f}' for b in r2)} s), "
                      f"speed-up {t1 / t2:.2f}x (target >= 1.8x)")

    # 4. memory (tracemalloc slows numpy-heavy code ~8x, so this is a separate run; the resident set is
    #    measured in a fresh process that does nothing but the sweep) ----------------------------------------------
    tracemalloc.start()
    evaluate(model, params, x, parsed=parsed, engine="serial", flights="ensemble", quiet=True)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    import subprocess

    code = ("import resource, sys; sys.path.insert(0, %r); import study_speed as s, thrustgraph as tg; "
            "from thrustgraph.models.model import parse_model; from thrustgraph.models.designs import resolve; "
            "from thrustgraph.studies.studies import evaluate; m = tg.load_model(tg.default_model_path()); "
            "p = parse_model(m); ps = [resolve(p, q) for q in s.PATHS]; "
            "evaluate(m, ps, s.designs(%d), parsed=p, engine='serial', flights='ensemble', quiet=True); "
            "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)") % (str(Path(__file__).resolve().parent), n)
    rss = float(subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
                .stdout.split()[-1]) / 1024.0
    print()
    print(f"4. peak memory of the {n}-design sweep (summary outputs): Python heap peak {peak / 2 ** 20:.1f} MiB "
          f"(tracemalloc, numpy arrays included); maximum resident set of a process doing only the sweep "
          f"{rss:.0f} MiB, interpreter and libraries included (target < 1024 MiB)")
    print(f"   the table of {len(table.outputs)} outcomes per design: {table.values.nbytes / 2 ** 20:.2f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
