"""Benchmark: how long the command line takes to start, command by command, and how many modules each imports.

    python benchmarks/cli_startup.py [--repeat N] [--against DIR] [--instructions]

Targets (issue "The practitioner's workflow", speed of the command line): ``thrustgraph --version`` and
``thrustgraph --help`` <= 0.3 s, ``thrustgraph check`` of the default model <= 1 s. ``python -c pass`` is the
baseline: the interpreter's own start, which no command can beat.

Every command runs in a fresh process, as a user runs it (the console script's two lines: ``from thrustgraph.cli
import main; sys.exit(main())``). Runs are interleaved (one of each command, then the next round) so that machine
noise hits every command alike, and the medians are printed: wall-clock seconds, and the CPU seconds the child
process used (user + system; on a shared, loaded machine the wall clock includes the time spent waiting for a
core, the CPU time much less so). The module count is what ``python -X importtime`` lists for the command.

``--against DIR`` runs the same commands from another source tree beside this one (e.g. a worktree of an older
commit: ``git worktree add /tmp/before COMMIT``), interleaved with them, and prints the ratios. ``--instructions``
also counts the machine instructions of one run of each command under valgrind's callgrind: unlike times, the
counts repeat exactly on a noisy machine.
"""

from __future__ import annotations

import argparse
import os
import re
import resource
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

#: (label, arguments of thrustgraph or None for the baseline, target wall seconds or None)
COMMANDS = [
    ("python -c pass", None, None),
    ("thrustgraph --version", ["--version"], 0.3),
    ("thrustgraph --help", ["--help"], 0.3),
    ("thrustgraph check", ["check"], 1.0),
    ("thrustgraph run --help", ["run", "--help"], None),
    ("thrustgraph kinds --brief", ["kinds", "--brief"], None),
]

MAIN = "import sys; from thrustgraph.cli import main; sys.exit(main())"


def argv_of(args: list[str] | None, importtime: bool = False) -> list[str]:
    flags = ["-X", "importtime"] if importtime else []
    if args is None:
        return [sys.executable, *flags, "-c", "pass"]
    return [sys.executable, *flags, "-c", MAIN, *args]


def environment(tree: Path | None) -> dict[str, str]:
    """The environment that runs ``tree``'s thrustgraph (None: the one installed here)."""
    env = dict(os.environ)
    if tree is not None:   # ahead of this environment's editable install on sys.path
        env["PYTHONPATH"] = os.pathsep.join([str(tree / "framework"), str(tree / "plugins")])
    return env


def one_run(args: list[str] | None, env: dict[str, str]) -> tuple[float, float]:
    """Wall-clock and CPU seconds of one run of a command in a fresh process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    proc = subprocess.run(argv_of(args), env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode != 0:
        raise SystemExit(f"{args} failed ({proc.returncode}): {proc.stderr.decode()[-500:]}")
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def modules_imported(args: list[str] | None, env: dict[str, str]) -> int:
    proc = subprocess.run(argv_of(args, importtime=True), env=env, stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE, text=True)
    return sum(1 for line in proc.stderr.splitlines() if line.startswith("import time:") and "|" in line
               and not line.rstrip().endswith("imported package"))


def instructions(args: list[str] | None, env: dict[str, str]) -> int | None:
    """Machine instructions of one run under callgrind (None when valgrind is missing)."""
    if shutil.which("valgrind") is None:
        return None
    proc = subprocess.run(["valgrind", "--tool=callgrind", "--callgrind-out-file=/dev/null", *argv_of(args)],
                          env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    found = re.search(r"Collected\s*:\s*([\d,]+)", proc.stderr)
    return int(found.group(1).replace(",", "")) if found else None


def which_file(env: dict[str, str]) -> str:
    return subprocess.run([sys.executable, "-c", "import thrustgraph; print(thrustgraph.__file__)"], env=env,
                          capture_output=True, text=True).stdout.strip()


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=9, help="runs of each command (default 9)")
    ap.add_argument("--against", type=Path, default=None, metavar="DIR",
                    help="another source tree to run beside this one (e.g. a worktree of an older commit)")
    ap.add_argument("--instructions", action="store_true", help="also count instructions under callgrind")
    opts = ap.parse_args()

    trees = {"this": environment(None)}
    if opts.against is not None:
        trees["against"] = environment(opts.against.resolve())
    for name, env in trees.items():
        print(f"{name}: {which_file(env)}")
    print(f"load average at the start: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")

    walls: dict[tuple[str, str], list[float]] = {}
    cpus: dict[tuple[str, str], list[float]] = {}
    for label, args, _ in COMMANDS:       # a warm-up of each, so that every run below finds compiled bytecode
        for tree, env in trees.items():
            one_run(args, env)
    for _ in range(opts.repeat):
        for label, args, _ in COMMANDS:
            for tree, env in trees.items():
                wall, cpu = one_run(args, env)
                walls.setdefault((label, tree), []).append(wall)
                cpus.setdefault((label, tree), []).append(cpu)
    print(f"load average at the end:   {os.getloadavg()[0]:.1f}")
    print()
    print(f"median of {opts.repeat} interleaved runs; wall and CPU seconds of the child process")
    head = f"{'command':<28s} {'wall s':>7s} {'cpu s':>7s} {'modules':>8s}"
    if "against" in trees:
        head += f" {'against wall':>13s} {'cpu':>7s} {'modules':>8s} {'wall ratio':>11s} {'cpu ratio':>10s}"
    head += "   target"
    print(head)
    base = statistics.median(walls[("python -c pass", "this")])
    for label, args, target in COMMANDS:
        w = statistics.median(walls[(label, "this")])
        c = statistics.median(cpus[(label, "this")])
        line = f"{label:<28s} {w:7.3f} {c:7.3f} {modules_imported(args, trees['this']):8d}"
        if "against" in trees:
            wa = statistics.median(walls[(label, "against")])
            ca = statistics.median(cpus[(label, "against")])
            line += (f" {wa:13.3f} {ca:7.3f} {modules_imported(args, trees['against']):8d} {w / wa:11.2f}"
                     f" {c / ca:10.2f}")
        if target is not None:
            verdict = "met" if w <= target else "missed on the wall clock" + (
                ", met in CPU time" if c <= target else "")
            line += f"   <= {target:g} s: {verdict}"
        elif args is None:
            line += "   (baseline)"
        print(line)
    print(f"(the interpreter's own start, python -c pass, is {base:.3f} s of every command's wall time)")

    if opts.instructions:
        print()
        print("instructions of one run (callgrind)")
        for label, args, _ in COMMANDS:
            counts = {tree: instructions(args, env) for tree, env in trees.items()}
            if counts["this"] is None:
                print("valgrind is not installed")
                break
            line = f"{label:<28s} {counts['this'] / 1e6:10.1f} M"
            if "against" in counts and counts["against"]:
                line += f"   against {counts['against'] / 1e6:10.1f} M   ratio {counts['this'] / counts['against']:.3f}"
            print(line)


if __name__ == "__main__":
    main()
