"""The suite's own bad-model generator, a short run: every mutated file is refused with one clear message or
flies with finite numbers; none crashes, hangs or prints a non-finite number.

The generator and the runner are in tests/badmodels.py; tools/bad_models.py runs the long version (100,000
cases) and reproduces any case from its seed and index. Each case runs in a worker process with a budget of
wall time far above the slowest normal case (see :data:`BUDGET`); a case past it counts as a hang and fails
the test with its repro. The budget only bounds how long a broken case can stall the suite: no assertion is
made about how long anything takes.
"""

from __future__ import annotations

import os

import pytest

from badmodels import KINDS, make_case, run_cases

#: Cases in the CI run (the issue asks for at least 2,000).
CASES = 2000
SEED = 20240611
#: Seconds one case may run before it counts as a hang: far above the slowest case measured (see
#: docs/bad-input.md), so that only a case with no bound on its work can reach it.
BUDGET = 120.0


def test_generated_bad_models_never_crash_hang_or_print_nan():
    workers = max(2, min(4, os.cpu_count() or 2))
    counts = dict.fromkeys(KINDS, 0)
    failures = []
    for index, out in run_cases(SEED, range(CASES), workers=workers, budget=BUDGET):
        counts[out.kind] += 1
        if out.kind in ("nan", "crash", "hang"):
            case = make_case(SEED, index)
            failures.append(f"{out.kind}: python tools/bad_models.py --seed {SEED} --show {index}  "
                            f"({case.base}; {'; '.join(case.mutations)})\n    {out.detail.strip()[-600:]}")
    summary = f"{CASES} cases: " + ", ".join(f"{counts[k]} {k}" for k in KINDS)
    print(summary)
    assert not failures, summary + "\n" + "\n".join(failures[:20])
    # The generator must keep reaching both sides: files that fly and files that are refused.
    assert counts["ok"] >= CASES // 50 and counts["refused"] >= CASES // 2, summary


def test_the_generator_is_deterministic_and_varied():
    a = [make_case(5, k) for k in range(40)]
    b = [make_case(5, k) for k in range(40)]
    assert [c.text for c in a] == [c.text for c in b]
    assert len({c.text for c in a}) == 40
    assert len({c.base for c in a}) >= 5
    kinds = {m.split(":")[0] for c in a for m in c.mutations}
    assert len(kinds) >= 8, kinds


@pytest.mark.parametrize("index", range(3))
def test_a_generated_file_is_a_mutated_bundled_model(index):
    case = make_case(11, index)
    assert case.text.startswith('format = "thrustgraph-model"') or "format" in case.mutations[0]
    assert case.mutations
