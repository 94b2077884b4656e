"""Benchmark: studies on many workers, and a million-design dispersion in flat memory, measured side by side.

    python benchmarks/study_scale.py [--sizes 10000,40000] [--repeat 5] [--workers 2] [--dask]
                                     [--memory 100000,300000,1000000] [--skip-scale] [--skip-memory] [--before] [--quick]

1. Scale-out. Bottle-rocket ensembles of N designs (fill, pressure, nozzle diameter, dry mass drawn uniformly in
   the box of benchmarks/study_speed.py, seeded) flown through ``evaluate`` as a study flies them:
     a. one process, chunks as ``--engine serial`` cuts them (at most 20,000 designs)
     b. one process, the whole study as one chunk (when N > 20,000): the best one-process run is the faster of a, b
     c. a pool of W local processes, chunks as ``--engine processes`` cuts them, a fresh pool each time (start-up
        included, as every study pays it)
     d. ``--engine auto`` (what the command picks at this size)
     before. the pool as it was before this benchmark's session: workers from a fork server, ensemble chunks of
        N / 2W (at least 1,000), a fresh pool each time (with --before)
     e. with --dask: a Dask LocalCluster of W one-thread workers, started before and not timed (steady state)
   The runs alternate (a, b, c, d, e, a, b, ...) so a slow spell of the shared machine falls on every side; the
   figures are medians over --repeat rounds, with the load average (1 min) beside each round. Ratios: the best
   one-process median over each pool's median, by the wall clock and by CPU time. The CPU-time ratio is the
   one-process CPU time over (the parent's CPU time + the workers' CPU time / W): the speed-up the same work
   would give on W otherwise idle cores, steadier than the wall clock on a machine others load. The tables
   of every engine are compared (they must be equal bit for bit).
   Targets: W workers >= 0.9 W times the best one-process run from 40,000 designs; never slower at 10,000.

2. Memory of ``thrustgraph study dispersion`` (the command, in a subprocess) with ``--table`` and ``--summary``
   for --memory sizes of the bundled bottle rocket (four spreads; a pool of one worker per core unless
   --memory-engine says otherwise). Its standard error
   is a pseudo-terminal, so the progress line is drawn; the last line drawn with a time left is shown. Measured:
   the largest resident set of any one process of the command (getrusage RUSAGE_CHILDREN, maxrss: the
   command and its workers), the largest sum over the command's process tree (sampled from /proc every 0.2 s),
   the run time and the table's size. Target: within 2 GiB at 1,000,000 designs, flat in N.

Nothing here is a unit test; figures on this shared machine move with the load of others.
"""

from __future__ import annotations

import argparse
import os
import pty
import re
import resource
import select
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

import thrustgraph as tg
from thrustgraph.models.designs import resolve
from thrustgraph.models.model import parse_model
from thrustgraph.studies.engines import ENSEMBLE_CHUNK, ProcessEngine, start_method
from thrustgraph.studies.studies import evaluate

PATHS = ("components.bottle.fill", "components.bottle.gauge_pressure", "components.neck.diameter",
         "components.airframe.dry_mass")
LOW = np.array([0.15, 3e5, 0.015, 0.08])
HIGH = np.array([0.5, 6e5, 0.022, 0.16])
OUTPUTS = ("apogee", "range", "max_speed", "peak_acceleration", "impact_x", "impact_y", "impact_speed")
SPREADS = ("environment.medium.wind_x=normal(mean=0 m/s, sd=2 m/s)", "launch.elevation=normal(sd=2 deg)",
           "components.neck.discharge_coefficient=uniform(0.93, 0.99)", "components.airframe.dry_mass=normal(sd=5 g)")


def designs(n: int, seed: int = 1) -> np.ndarray:
    return LOW + (HIGH - LOW) * np.random.default_rng(seed).random((n, 4))


def _cpu(who: int) -> float:
    r = resource.getrusage(who)
    return r.ru_utime + r.ru_stime


def _timed(fn):
    """(result, wall s, CPU s of this process, CPU s of finished children) of fn()."""
    c0, k0, t0 = _cpu(resource.RUSAGE_SELF), _cpu(resource.RUSAGE_CHILDREN), time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0, _cpu(resource.RUSAGE_SELF) - c0, _cpu(resource.RUSAGE_CHILDREN) - k0


def scale_out(sizes: list[int], repeat: int, workers: int, dask: bool, before: bool) -> None:
    model = tg.load_model(tg.default_model_path())
    parsed = parse_model(model)
    params = [resolve(parsed, p) for p in PATHS]
    print(f"1. scale-out: {', '.join(PATHS)}; outputs {', '.join(OUTPUTS)}; {workers} workers; "
          f"{len(os.sched_getaffinity(0))} usable cores")
    startup(workers, max(1, repeat))
    evaluate(model, params, designs(300), OUTPUTS, parsed=parsed, engine="serial", flights="ensemble", quiet=True)
    cluster = None
    if dask:
        import dask as dask_

        from distributed import LocalCluster

        from thrustgraph.studies.engines import STUDY_CLUSTER_CONFIG
        with dask_.config.set(STUDY_CLUSTER_CONFIG):
            cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None)
    try:
        for n in sizes:
            x = designs(n)
            sides = {"one process, chunks of <= 20,000": dict(engine="serial")}
            if n > ENSEMBLE_CHUNK:
                sides["one process, one chunk"] = dict(engine="serial", chunk_size=n)
            sides[f"pool of {workers} processes"] = dict(engine="processes", workers=workers)
            sides["--engine auto"] = dict(engine="auto")
            if before:
                sides[f"before: fork server, {workers} workers"] = dict(
                    engine=lambda: ProcessEngine(workers, method="forkserver"),
                    chunk_size=int(min(max(-(-n // (2 * workers)), 1000 if n > 1000 else n, 1), 20000)))
            if cluster is not None:
                sides[f"Dask, {workers} workers (up before)"] = dict(engine="dask", scheduler=cluster.scheduler_address)
                evaluate(model, params, x, OUTPUTS, parsed=parsed, flights="ensemble", quiet=True,
                         **sides[f"Dask, {workers} workers (up before)"])   # the workers parse the model once
            runs: dict[str, list[tuple[float, float, float, float]]] = {s: [] for s in sides}
            tables: dict[str, object] = {}
            engines: dict[str, str] = {}
            for _ in range(repeat):
                for side, kw in sides.items():
                    load = os.getloadavg()[0]

                    def study(kw=kw):
                        if not callable(kw["engine"]):
                            return evaluate(model, params, x, OUTPUTS, parsed=parsed, flights="ensemble", quiet=True,
                                            **kw)
                        eng = kw["engine"]()      # an engine object: started and closed here, as a study does
                        try:
                            return evaluate(model, params, x, OUTPUTS, parsed=parsed, flights="ensemble",
                                            quiet=True, **dict(kw, engine=eng))
                        finally:
                            eng.close()
                    t, wall, cpu, kids = _timed(study)
                    runs[side].append((wall, cpu, kids, load))
                    tables[side] = t
                    engines[side] = t.engine
            ref = tables[next(iter(sides))]
            same = all(np.array_equal(t.values, ref.values, equal_nan=True) and
                       np.array_equal(t.status, ref.status) for t in tables.values())
            print(f"\n   N = {n}: medians of {repeat} alternating rounds (wall s; CPU s here + in workers; load "
                  f"average of each round); tables equal on every side: {same}")
            med = {}
            for side, r in runs.items():
                wall = statistics.median(a for a, _, _, _ in r)
                cpu = statistics.median(b for _, b, _, _ in r)
                kids = statistics.median(c for _, _, c, _ in r)
                med[side] = (wall, cpu, kids)
                print(f"   {side:<36s} {wall:7.2f} s  CPU {cpu:6.2f} + {kids:6.2f} s  ({engines[side]}; rounds "
                      f"{', '.join(f'{a:.2f}' for a, _, _, _ in r)} s at load {', '.join(f'{d:.1f}' for *_, d in r)})")
            forked = start_method() == "fork"
            one = [s for s in sides if s.startswith("one process")]
            best = min(one, key=lambda s: med[s][0])
            best_cpu = min(med[s][1] + med[s][2] for s in one)
            for side in sides:
                if side in one:
                    continue
                wall, cpu, kids = med[side]
                w = workers if engines[side] in ("processes", "dask") else 1
                if side.startswith("before"):
                    w = workers
                # a pool's workers are this process's children (their CPU time counted once they end) only when
                # forked: from a fork server (this process runs other threads, e.g. a local Dask cluster's) they
                # are the server's children
                counted = engines[side] == "serial" or (engines[side] == "processes" and not side.startswith("before")
                                                        and forked)
                by_cpu = best_cpu / (cpu + kids / w) if counted else float("nan")
                print(f"   ratio {side} / best one process ({best}): {med[best][0] / wall:.2f}x by the wall clock, "
                      + (f"{by_cpu:.2f}x by CPU time" if by_cpu == by_cpu else "(its workers' CPU time is not "
                         "counted here: they are not this process's children)")
                      + (f"  (target >= {0.9 * workers:.1f}x)" if n >= 40000 and w > 1 else
                         "  (target >= 1.0x)" if w > 1 else ""))
    finally:
        if cluster is not None:
            cluster.close()


def _answer(_: int) -> int:
    return os.getpid()


def startup(workers: int, repeat: int) -> None:
    """Wall time from creating a pool of ``workers`` to every worker's first answer, forked and from a fork server
    (the fork server started afresh each time, as in a new study command), alternating; medians."""
    import multiprocessing

    from thrustgraph.studies.engines import FlightTask, _init_worker

    task = FlightTask(tg.load_model(tg.default_model_path()), PATHS[:1], ("",), ("apogee",), "ensemble")
    times: dict[str, list[float]] = {"fork": [], "forkserver": []}
    for _ in range(repeat):
        for method in times:
            ctx = multiprocessing.get_context(method)
            if method == "forkserver":
                from multiprocessing import forkserver

                forkserver._forkserver._stop()     # a new study command starts its own fork server
                ctx.set_forkserver_preload(["thrustgraph.studies.engines", "thrustgraph.balance.outcomes",
                                            "scipy.integrate"])
            t0 = time.perf_counter()
            pool = ctx.Pool(workers, initializer=_init_worker, initargs=(task,))
            pids = set()
            while len(pids) < workers:
                pids.update(pool.map(_answer, range(4 * workers), chunksize=1))
            times[method].append(time.perf_counter() - t0)
            pool.terminate()
            pool.join()
    print(f"   pool start-up ({workers} workers, to every worker's first answer; medians of {repeat}, load "
          f"{os.getloadavg()[0]:.1f}): forked {statistics.median(times['fork']) * 1e3:.0f} ms, from a fork server "
          f"{statistics.median(times['forkserver']) * 1e3:.0f} ms")


def _tree(root: int) -> list[int]:
    """root and its descendants (from /proc)."""
    parent = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                with open(f"/proc/{d}/stat") as f:
                    parent[int(d)] = int(f.read().rsplit(")", 1)[1].split()[1])
            except (OSError, IndexError, ValueError):
                pass
    out, todo = [], [root]
    while todo:
        p = todo.pop()
        out.append(p)
        todo += [c for c, pp in parent.items() if pp == p]
    return out


def _rss(pid: int) -> int:
    try:
        with open(f"/proc/{pid}/statm") as f:
            return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, IndexError, ValueError):
        return 0


WRAPPER = ("import resource, subprocess, sys; r = subprocess.run(sys.argv[1:]); "
           "print('maxrss', resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss, r.returncode, file=sys.stderr)")


def memory(sizes: list[int], engine: str) -> None:
    print(f"\n2. memory of 'thrustgraph study dispersion --samples N --table t.csv --summary s.csv --engine {engine}' "
          f"(the bundled bottle rocket, {len(SPREADS)} spreads)")
    for n in sizes:
        with tempfile.TemporaryDirectory(dir=os.getcwd()) as d:
            cmd = [sys.executable, "-c", WRAPPER, sys.executable, "-m", "thrustgraph.cli", "study", "dispersion",
                   "--samples", str(n), "--seed", "1", "--table", "t.csv", "--summary", "s.csv", "--engine", engine]
            for s in SPREADS:
                cmd += ["--spread", s]
            master, slave = pty.openpty()
            load = os.getloadavg()[0]
            t0 = time.perf_counter()
            proc = subprocess.Popen(cmd, cwd=d, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=slave)
            os.close(slave)
            shown, peak, last_poll = "", 0, 0.0
            while True:
                ready, _, _ = select.select([master], [], [], 0.2)
                if ready:
                    try:
                        data = os.read(master, 65536)
                    except OSError:
                        data = b""
                    if not data:
                        break
                    shown = (shown + data.decode("utf-8", "replace"))[-20000:]
                if time.perf_counter() - last_poll >= 0.2:
                    last_poll = time.perf_counter()
                    peak = max(peak, sum(_rss(p) for p in _tree(proc.pid)[1:]))   # the command and its workers
            out = proc.stdout.read().decode()
            rc = proc.wait()
            os.close(master)
            wall = time.perf_counter() - t0
            m = re.search(r"maxrss (\d+) (-?\d+)", shown)
            if rc != 0 or m is None or m.group(2) != "0":
                print(out[-3000:], shown[-3000:])
                raise SystemExit(f"the dispersion of {n} failed")
            maxrss = int(m.group(1)) / 1024.0
            size = os.path.getsize(os.path.join(d, "t.csv"))
            left = [ln.strip() for ln in re.split(r"[\r\n]", shown) if "left" in ln]
            print(f"   N = {n:>9d}: {wall:7.1f} s ({n / wall:8.0f} designs/s, load {load:.1f} at the start); largest "
                  f"resident set of one process {maxrss:7.1f} MiB; process tree at most {peak / 2 ** 20:7.1f} MiB "
                  f"resident (sampled); table {size / 2 ** 20:.1f} MiB")
            if left:
                print(f"      progress line, {len(left)} drawn with a time left; the middle one: {left[len(left) // 2]}")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="10000,40000")
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--dask", action="store_true")
    ap.add_argument("--before", action="store_true", help="also the pool as it was before (fork server, N/2W chunks)")
    ap.add_argument("--memory", default="100000,300000,1000000")
    ap.add_argument("--memory-engine", default="processes", help="engine of the memory runs (default: a pool, "
                    "the command and its workers)")
    ap.add_argument("--skip-scale", action="store_true")
    ap.add_argument("--skip-memory", action="store_true")
    ap.add_argument("--quick", action="store_true", help="tiny sizes, one round: checks that the script runs")
    a = ap.parse_args()
    if a.quick:
        a.sizes, a.repeat, a.memory = "600", 1, "300"
    print(f"study_scale: load average {' '.join(f'{v:.2f}' for v in os.getloadavg())} at the start")
    if not a.skip_scale:
        scale_out([int(s) for s in a.sizes.split(",")], a.repeat, a.workers, a.dask, a.before)
    if not a.skip_memory:
        memory([int(s) for s in a.memory.split(",")], a.memory_engine)
    return 0


if __name__ == "__main__":
    sys.exit(main())
