"""A design whose flight fails part-way is screened in an ensemble as in its single flight; the others fly on.

The balance stops a flight when a line can no longer pass the flow its supply fixes (a flow-fed hose asked for more
than its jet passes below 1e12 Pa: :func:`thrustgraph.balance.balance._solve_line`). Over arrays that check stops
the whole batch (``ops.refuse_any``); :func:`thrustgraph.flight.ensemble.fly_designs` then flies the batch again in
halves until the failing design is alone and screens it with its single flight's message. Every other design's
numbers are those of a batch without it, bit for bit (each design's steps depend on its own rows only). The
reference is the single flight of the same design and the same definition (an identity, no source needed); the
demo scenario (a hover rig held on a stand, fed a fixed flow ramped up over 1 s) is our own.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import thrustgraph as tg
from thrustgraph.flight.ensemble import fly_designs
from thrustgraph.models.designs import apply, resolve
from thrustgraph.models.model import parse_model
from thrustgraph.models.modelfile import save_model
from thrustgraph.studies.studyflight import fly_design

from conftest import HANG_GUARD

HOVER = Path(tg.default_model_path()).parent / "hose-fed-hover.toml"
OUTPUTS = ["run_time", "total_impulse", "launch_mass"]
#: mass flows (kg/s): 1e5 and 9e4 need over 1e12 Pa at the rig's 40 mm jet, the others fly
FLOWS = [6.0, 1e5, 7.0, 5.0, 9e4, 8.0, 6.5]


def _stand() -> tg.Model:
    m = tg.load_model(HOVER)
    m.set("launch.mount", "held")
    m.set("components.hose.supply", "flow")
    m.set("components.hose.mass_flow", "6 kg/s")
    m.set("components.hose.ramp_time", "1 s")
    m.set("run.end_time", "3 s")
    # the ensemble's integrator family and a tight tolerance: the single flights' numbers to compare with
    m.set("run.method", "RK45")
    m.set("run.rtol", 1e-9)
    m.set("run.atol", 1e-9)
    return m


def test_a_failing_design_is_screened_with_its_single_flights_message_and_the_others_fly():
    parsed = parse_model(_stand())
    params = [resolve(parsed, "components.hose.mass_flow")]
    x = np.array(FLOWS)[:, None]
    seen = []
    res = fly_designs(parsed, params, x, OUTPUTS, progress=seen.append)
    for r in range(len(x)):
        single = fly_design(apply(parsed, params, x[r]), OUTPUTS)
        assert (res.status[r], res.notes[r]) == (single.status, single.message), r
        if single.status == "ok":
            # on a stand nothing in this rig's state changes while its flow ramps up: the total impulse across
            # the ramp's end (tests/test_impulse_quadrature.py), 4.3e-5 apart before the Gauss-Kronrod check
            for k, name in enumerate(OUTPUTS):
                assert res.values[r, k] == pytest.approx(single.values[name], rel=1e-7), (r, name)
        else:
            assert "cannot pass the flow its supply fixes" in res.notes[r]
            assert np.isnan(res.values[r]).all()
    assert [s for s in res.status] == ["ok", "screened", "ok", "ok", "screened", "ok", "ok"]
    # the flying designs' numbers do not depend on the failing ones: an ensemble of them alone, bit for bit
    good = [r for r, s in enumerate(res.status) if s == "ok"]
    alone = fly_designs(parsed, params, x[good], OUTPUTS)
    np.testing.assert_array_equal(alone.values, res.values[good])
    # progress never goes back while a batch is flown again
    assert seen == sorted(seen) and (not seen or seen[-1] <= len(x))


def test_a_study_with_a_failing_design_writes_every_row(tmp_path):
    table = tmp_path / "t.csv"
    model = tmp_path / "stand.toml"
    save_model(_stand(), model)
    r = subprocess.run([sys.executable, "-m", "thrustgraph.cli", "study", str(model), "sweep", "--vary",
                        "components.hose.mass_flow=6 kg/s, 100000 kg/s, 7 kg/s", "--flights", "ensemble",
                        "--outputs", ",".join(OUTPUTS), "--table", str(table), "--quiet"],
                       capture_output=True, text=True, timeout=HANG_GUARD)
    assert r.returncode == 0, r.stderr
    rows = [ln for ln in table.read_text().splitlines() if not ln.startswith("#")]
    head = rows[0].split(",")
    status = [ln.split(",")[head.index("status")] for ln in rows[1:]]
    assert status == ["ok", "screened", "ok"]
