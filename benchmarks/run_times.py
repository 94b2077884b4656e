"""Benchmark: end-to-end time of ``thrustgraph run`` and ``thrustgraph plot --format both`` for every bundled model.

    python benchmarks/run_times.py [--repeat N] [--only NAME ...] [--no-plots] [--against DIR]

Targets (issue "Speed at every scale", end to end): every bundled model's ``thrustgraph run`` <= 1.5 s, its
``thrustgraph plot ... --format both`` <= 3 s, on the project's 2-core machine.

Each command runs as a user runs it: a fresh process of the installed ``thrustgraph`` console script (found beside
this interpreter), output thrown away, plots written into a fresh temporary directory. Rounds are interleaved (one
run of every command, then the next round) so that machine noise hits every command alike; one warm-up round first
(compiled bytecode, font cache). Printed per command: the median wall-clock seconds, the median CPU seconds of the
child (user + system: on a shared machine the wall clock includes time spent waiting for a core, the CPU time much
less so), min-max of the wall clock, the target, and the load average before and after.

``--against DIR`` runs the same commands from another source tree (e.g. ``git worktree add /tmp/before COMMIT``)
interleaved with this one and prints the ratios this/against of the CPU and wall medians, measured side by side.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

MODELS_DIR = Path(__file__).resolve().parent.parent / "models"
RUN_TARGET, PLOT_TARGET = 1.5, 3.0
MAIN = "import sys; from thrustgraph.cli import main; sys.exit(main())"


def bundled_models() -> list[str]:
    return sorted(p.stem for p in MODELS_DIR.glob("*.toml"))


def entry_point() -> list[str]:
    """The installed console script beside this interpreter (what a user types), else ``python -c main()``."""
    script = Path(sys.executable).with_name("thrustgraph")
    return [str(script)] if script.exists() else [sys.executable, "-c", MAIN]


def environment(tree: Path | None) -> dict[str, str]:
    env = dict(os.environ)
    if tree is not None:      # ahead of this environment's editable install on sys.path
        env["PYTHONPATH"] = os.pathsep.join([str(tree / "framework"), str(tree / "plugins"), str(tree)])
    return env


def one_run(argv: list[str], env: dict[str, str]) -> tuple[float, float]:
    """Wall-clock and CPU seconds of one run in a fresh process (output discarded; a failure stops the script)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    proc = subprocess.run(argv, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(argv)} failed ({proc.returncode}): {proc.stderr.decode()[-800:]}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def commands(models: list[str], plots: bool, out: Path) -> list[tuple[str, list[str], float]]:
    rows = []
    for m in models:
        rows.append((f"run {m}", ["run", m, "--quiet"], RUN_TARGET))
    if plots:
        for m in models:
            rows.append((f"plot {m} --format both", ["plot", m, "--format", "both", "--quiet", "--out-dir",
                                                    str(out / m)], PLOT_TARGET))
    return rows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5, help="counted runs of each command (default 5)")
    ap.add_argument("--only", nargs="*", default=None, metavar="NAME", help="only these bundled models")
    ap.add_argument("--no-plots", action="store_true", help="time `run` only")
    ap.add_argument("--against", type=Path, default=None, metavar="DIR",
                    help="another source tree to run beside this one (ratios this/against)")
    opts = ap.parse_args()

    models = opts.only or bundled_models()
    trees = {"this": environment(None)}
    if opts.against is not None:
        trees["against"] = environment(opts.against.resolve())
    exe = entry_point()
    load0 = os.getloadavg()
    print(f"entry point: {' '.join(exe)}; {os.cpu_count()} cores; load average at the start "
          f"{load0[0]:.2f} {load0[1]:.2f} {load0[2]:.2f}; {opts.repeat} counted runs after one warm-up")
    walls: dict[tuple[str, str], list[float]] = {}
    cpus: dict[tuple[str, str], list[float]] = {}
    with tempfile.TemporaryDirectory() as tmp:
        rows = commands(models, not opts.no_plots, Path(tmp))
        for rnd in range(opts.repeat + 1):
            for label, args, _ in rows:
                for tree, env in trees.items():
                    wall, cpu = one_run(exe + args, env)
                    if rnd:
                        walls.setdefault((label, tree), []).append(wall)
                        cpus.setdefault((label, tree), []).append(cpu)
    load1 = os.getloadavg()
    width = max(len(r[0]) for r in rows)
    head = f"{'command':<{width}}  {'tree':<7} {'wall med':>8} {'wall min-max':>13} {'cpu med':>8} {'target':>6}  ok"
    print(head)
    print("-" * len(head))
    for label, _, target in rows:
        for tree in trees:
            w, c = walls[(label, tree)], cpus[(label, tree)]
            wm = statistics.median(w)
            print(f"{label:<{width}}  {tree:<7} {wm:8.2f} {min(w):6.2f}-{max(w):<6.2f} {statistics.median(c):8.2f} "
                  f"{target:6.1f}  {'yes' if wm <= target else 'NO'}")
        if len(trees) == 2:
            rw = statistics.median([a / b for a, b in zip(walls[(label, 'this')], walls[(label, 'against')])])
            rc = statistics.median([a / b for a, b in zip(cpus[(label, 'this')], cpus[(label, 'against')])])
            print(f"{'':<{width}}  ratio this/against, pair by pair: wall {rw:.2f}, cpu {rc:.2f}")
    print(f"load average at the end {load1[0]:.2f} {load1[1]:.2f} {load1[2]:.2f}")


if __name__ == "__main__":
    main()
