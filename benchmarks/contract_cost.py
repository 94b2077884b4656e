"""Benchmark: what checking the plugin contract (thrustgraph.kinds.contract) costs, measured side by side.

    python benchmarks/contract_cost.py [--repeat N] [--designs N] [--single N]

1. Assembling the bundled bottle rocket, interleaved: without the check (``check_system`` bypassed), with the
   check the first time a vehicle's callables are seen (cache cleared before each assembly), and with the check
   as every later assembly meets it (callables already tried: only their code objects are looked up); and
   that look-up alone.
2. Registering the kinds (a fresh plugin manager and its kind tables) with the declaration check done (as every
   registration after the first in a process) and with the declaration cache cleared (the first).
3. A study of ``--designs`` designs of the bottle rocket's fill (flights "auto": the vectorised ensemble), and a
   single-flight loop of ``--single`` designs, with the number of times the callables were tried: once for the
   study, not once per design. The check's share of the study is the measured per-assembly cost times the
   assemblies, against the study's time.

Times are the least of N interleaved repeats, the run least disturbed by other work (machines are shared and
noisy: medians moved by 2-3x between runs here; only ratios side by side mean much).
"""

from __future__ import annotations

import argparse
import gc
import time

import numpy as np

import thrustgraph.flight.assembly as assembly_module
from thrustgraph.kinds import contract
from thrustgraph.flight.assembly import assemble
from thrustgraph.models.designs import resolve
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import default_model_path, load_model
from thrustgraph.models.plugins import component_kinds, environment_kinds, get_plugin_manager
from thrustgraph.studies.studies import evaluate


def per_call(fn, n: int) -> float:
    gc.collect()          # the garbage of the previous side is not collected on this side's time
    t0 = time.perf_counter()
    for _ in range(n):
        fn()
    return (time.perf_counter() - t0) / n


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=15, help="interleaved repeats per measurement (default 15)")
    ap.add_argument("--designs", type=int, default=10_000, help="designs in the ensemble study (default 10,000)")
    ap.add_argument("--single", type=int, default=300, help="designs in the single-flight study (default 300)")
    args = ap.parse_args()

    parsed = parse_model(load_model(default_model_path()))
    real_check = assembly_module.check_system
    bypass = lambda system: system  # noqa: E731

    def without():
        assembly_module.check_system = bypass
        try:
            assemble(parsed)
        finally:
            assembly_module.check_system = real_check

    def first_time():
        contract._PASSED.clear()
        assemble(parsed)

    def later():
        assemble(parsed)

    n = 200
    sides = {"without the check": without, "check, first assembly": first_time, "check, later assemblies": later}
    times = {k: [] for k in sides}
    for fn in sides.values():
        per_call(fn, 20)                                  # warm-up
    for _ in range(args.repeat):
        for k, fn in sides.items():
            times[k].append(per_call(fn, n))
    med = {k: min(v) for k, v in times.items()}
    base = med["without the check"]
    print("1. Assembling the default model (bottle-rocket.toml), least of", args.repeat, "x", n)
    for k, v in med.items():
        print(f"   {k:<26s} {v * 1e6:9.1f} us   {v / base:6.2f}x")
    print(f"   the check adds {(med['check, first assembly'] - base) * 1e6:.1f} us the first time a vehicle's "
          f"callables are seen, {(med['check, later assemblies'] - base) * 1e6:.1f} us to each later assembly")
    system = assemble(parsed)
    alone = min(per_call(lambda: contract.check_system(system), 2000) for _ in range(args.repeat))
    print(f"   check_system alone on an assembled vehicle whose callables are known: {alone * 1e6:.1f} us")

    def register():
        pm = get_plugin_manager()
        component_kinds(pm)
        environment_kinds(pm)

    def register_cold():
        contract._DECLARED.clear()
        register()

    reg = {"declarations known": [], "declarations checked": []}
    register()
    for _ in range(max(3, args.repeat // 3)):
        reg["declarations known"].append(per_call(register, 5))
        reg["declarations checked"].append(per_call(register_cold, 5))
    rmed = {k: min(v) for k, v in reg.items()}
    print("\n2. Registering every installed kind (fresh plugin manager, kind tables)")
    for k, v in rmed.items():
        print(f"   {k:<26s} {v * 1e3:9.2f} ms   {v / rmed['declarations known']:6.2f}x")

    tried = []
    real_run = contract._Trial.run

    def counting(self):
        tried.append(1)
        return real_run(self)

    contract._Trial.run = counting
    try:
        fill = [resolve(parsed, "components.bottle.fill")]
        for label, count, flights in (("ensemble", args.designs, "auto"), ("single flights", args.single, "single")):
            if count <= 0:
                continue
            x = np.linspace(0.15, 0.6, count).reshape(-1, 1)
            contract._PASSED.clear()
            tried.clear()
            t0 = time.perf_counter()
            table = evaluate(parsed.model, fill, x, ["apogee"], parsed=parsed, engine="serial", flights=flights,
                             quiet=True)
            secs = time.perf_counter() - t0
            assemblies = 1 if table.flights == "ensemble" else 1 + count
            cost = med["check, first assembly"] - base + (assemblies - 1) * (med["check, later assemblies"] - base)
            print(f"\n3. A study of {count:,} designs ({table.flights}): {secs:.2f} s; callables tried "
                  f"{len(tried)} time(s); {assemblies:,} scalar assemblies; the check's estimated share "
                  f"{cost * 1e3:.2f} ms = {cost / secs * 100:.3f} % of the study")
    finally:
        contract._Trial.run = real_run


if __name__ == "__main__":
    main()
