"""Studies at scale: tables streamed to their file (the same table and statistics as in memory, whole or absent
when stopped), the time left on the progress line, the engine and chunks ``auto`` picks, and the same outcomes on
one process and on two workers, in a study and in a single run.

Nothing here is timed: speed and memory are measured by benchmarks/study_scale.py.
"""

from __future__ import annotations

import io
import os
import re
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from conftest import HANG_GUARD
import thrustgraph as tg
from thrustgraph.base.errors import OutputError
from thrustgraph.base.outputfiles import StreamedFile, write_all
from thrustgraph.models.designs import apply, resolve
from thrustgraph.models.model import parse_model
from thrustgraph.studies.dispersion import disperse
from thrustgraph.studies.engines import ENSEMBLE_CHUNK, SerialEngine, default_chunk_size
from thrustgraph.studies.studies import ENSEMBLE_FROM, POOL_FROM_ENSEMBLE, POOL_IDLE_CORES, choose_engine, \
    evaluate, sweep
from thrustgraph.studies.studyflight import fly_design
from thrustgraph.studies.studyprogress import StudyProgress
from thrustgraph.studies.tablestream import StreamedTable, TableStream

SPREADS = ["environment.medium.wind_x=normal(mean=0 m/s, sd=2 m/s)", "launch.elevation=normal(sd=2 deg)",
           "components.neck.discharge_coefficient=uniform(0.93, 0.99)",
           # wide enough that some fills fall outside their bounds (screened before flying) or fail to lift off
           "components.bottle.fill=normal(sd=0.3)"]


@pytest.fixture(scope="module")
def bottle():
    return tg.load_model(tg.default_model_path())


def _stats_equal(a, b):
    assert a.stats.keys() == b.stats.keys()
    for o in a.stats:
        for k, v in a.stats[o].items():
            assert v == b.stats[o][k] or (np.isnan(v) and np.isnan(b.stats[o][k])), (o, k, v, b.stats[o][k])


# --- streaming gives the table held in memory -------------------------------------------------------------------

# A table held in memory cuts an ensemble study into interleaved chunks (every k-th row), a streamed one into ranges
# of consecutive rows; a design's ensemble outcomes do not depend on its chunk (tests/test_ensemble_chunks.py), so
# either gives the same file.
@pytest.mark.parametrize("flights, engine, chunk", [("ensemble", "serial", None), ("single", "processes", 5),
                                                     ("single", "serial", 7)])
def test_a_streamed_dispersion_is_the_table_and_statistics_held_in_memory(bottle, tmp_path, flights, engine, chunk):
    kw = dict(samples=150, seed=5, quiet=True, flights=flights, engine=engine, workers=2, chunk_size=chunk)
    if flights == "single":
        kw.update(samples=30, outputs=["apogee", "range", "impact_x", "impact_y", "impact_speed"])
    held = disperse(bottle, SPREADS, **kw)
    streamed = disperse(bottle, SPREADS, table=TableStream(tmp_path / "t.csv"), **kw)
    assert isinstance(streamed.table, StreamedTable)
    c = held.table.counts
    assert c["ok"] and c["screened"], c        # both kinds of rows are in the comparison
    assert not (tmp_path / "t.csv").exists() and list(tmp_path.iterdir()) == []   # staged, nothing to see yet
    streamed.table.write()
    assert (tmp_path / "t.csv").read_text() == held.table.to_csv()
    assert [p.name for p in tmp_path.iterdir()] == ["t.csv"]
    _stats_equal(held, streamed)
    assert streamed.stats_csv() == held.stats_csv() and streamed.report() == held.report()
    np.testing.assert_array_equal(streamed.footprint.points, held.footprint.points)
    np.testing.assert_array_equal(streamed.table.values, held.table.values)
    assert streamed.table.counts == c and streamed.table.screened() == held.table.screened()[:8]


def test_a_streamed_grid_sweep_is_the_table_held_in_memory(bottle, tmp_path):
    vary = ["components.bottle.fill=0.1..0.98 in 7", "components.bottle.gauge_pressure=3 bar..6 bar in 5",
            "launch.elevation=70 deg, 80 deg, 90 deg"]   # the fullest bottles do not lift off: screened
    held = sweep(bottle, vary, engine="serial", quiet=True, outputs=["apogee", "range"])
    assert held.counts["screened"] > 0
    t = sweep(bottle, vary, engine="serial", quiet=True, outputs=["apogee", "range"], chunk_size=11,
              table=TableStream(tmp_path / "s.csv"))
    t.write()
    assert (tmp_path / "s.csv").read_text() == held.to_csv()
    assert t.report() == held.report()
    np.testing.assert_array_equal(t.x, held.x)


class _StopsAfter(SerialEngine):
    """This process's engine, stopped as Ctrl-C stops it after ``k`` chunks have come back."""

    def __init__(self, k: int) -> None:
        self.k = k

    def run(self, task, parts, progress=None):
        for i, rows in enumerate(super().run(task, parts, progress)):
            if i == self.k:
                raise KeyboardInterrupt
            yield rows


def test_a_stopped_streamed_study_writes_the_same_whole_table(bottle, tmp_path):
    """Stopped after three chunks of ten single flights (spreads that stay in bounds, so both sides cut the same
    chunks): the rows back and the rest 'not run', the same file as a table held in memory."""
    kw = dict(samples=60, seed=9, quiet=True, flights="single", chunk_size=10)
    held = disperse(bottle, SPREADS[:3], engine=_StopsAfter(3), **kw)
    streamed = disperse(bottle, SPREADS[:3], engine=_StopsAfter(3), table=TableStream(tmp_path / "t.csv"), **kw)
    assert held.table.interrupted and streamed.table.interrupted
    assert held.table.counts["not run"] == 30
    streamed.table.write()
    text = (tmp_path / "t.csv").read_text()
    assert text == held.table.to_csv() and "# interrupted: 30 of 60 designs were flown" in text
    assert len([ln for ln in text.splitlines() if not ln.startswith("#")]) == 61
    _stats_equal(held, streamed)


def test_a_failing_output_drops_the_streamed_file_too(tmp_path):
    (tmp_path / "t.csv").write_text("an earlier table\n")
    f = StreamedFile(tmp_path / "t.csv")
    f.write("design,status\n0,ok\n")
    with pytest.raises(OutputError, match="does not exist"):
        write_all([(tmp_path / "nowhere" / "s.csv", "x")], streams=[f])
    assert (tmp_path / "t.csv").read_text() == "an earlier table\n"
    assert [p.name for p in tmp_path.iterdir()] == ["t.csv"]
    with pytest.raises(OutputError, match="already committed or discarded"):
        f.write("more")


def test_a_streamed_file_keeps_the_permissions_of_the_file_it_replaces(tmp_path):
    target = tmp_path / "t.csv"
    target.write_text("old")
    os.chmod(target, 0o600)
    with StreamedFile(target) as f:
        f.write("new\n")
        assert target.read_text() == "old"
    f.commit()
    assert target.read_text() == "new\n" and oct(target.stat().st_mode & 0o777) == "0o600"


# --- the command: streamed, whole or absent ---------------------------------------------------------------------

DISPERSION = ["dispersion", "--spread", "launch.elevation=normal(sd=2 deg)", "--spread",
              "environment.medium.wind_x=normal(mean=0 m/s, sd=2 m/s)", "--seed", "3"]


def _cli(*args, cwd):
    return subprocess.run([sys.executable, "-m", "thrustgraph.cli", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=HANG_GUARD)


def test_the_command_streams_the_table_the_python_study_holds(bottle, tmp_path):
    r = _cli("study", *DISPERSION, "--samples", "300", "--engine", "processes", "--workers", "2", "--table",
             "t.csv", "--summary", "s.csv", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert "wrote t.csv" in r.stdout and "wrote s.csv" in r.stdout
    held = disperse(bottle, [DISPERSION[2], DISPERSION[4]], samples=300, seed=3, engine="serial", quiet=True)
    assert (tmp_path / "t.csv").read_text() == held.table.to_csv()
    assert (tmp_path / "s.csv").read_text() == held.stats_csv()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.csv", "t.csv"]


def test_a_killed_streaming_study_leaves_no_file_at_all(tmp_path):
    """SIGKILL mid-study (nothing can clean up): the table, staged in unnamed files, is simply not there; an
    earlier table at the path is untouched. The event: the first chunk has come back (its rows went to the
    scratch file), seen on the progress line of a terminal."""
    import pty
    import select

    out = tmp_path / "t.csv"
    out.write_text("an earlier, good table\n")
    master, slave = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "thrustgraph.cli", "study", *DISPERSION, "--samples", "3000",
                             "--engine", "serial", "--flights", "ensemble", "--chunk", "100", "--table", str(out)],
                            cwd=tmp_path, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=slave,
                            start_new_session=True)
    os.close(slave)
    shown = ""
    while not any(int(n) >= 100 for n in re.findall(r"(\d+)/3000 designs", shown)):
        ready, _, _ = select.select([master], [], [], HANG_GUARD)
        assert ready, f"no output for {HANG_GUARD} s\n{shown[-2000:]}"
        data = os.read(master, 4096)
        assert data, shown
        shown += data.decode("utf-8", "replace")
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait(HANG_GUARD)
    os.close(master)
    assert out.read_text() == "an earlier, good table\n"
    assert [p.name for p in tmp_path.iterdir()] == ["t.csv"]     # no scratch, staged or partial file


# --- the progress line: the time left ---------------------------------------------------------------------------

def test_the_progress_line_gives_the_time_left_from_the_rate():
    now = [100.0]
    out = io.StringIO()
    bar = StudyProgress(10000, "dispersion", stream=out, enabled=True, every=0.0, clock=lambda: now[0])
    bar.update(0)
    now[0] += 4.0
    bar.update(2000, screened=3)            # 500 designs a second: 8,000 left, 16 s
    last = out.getvalue().rsplit("\r", 1)[-1]
    assert "2000/10000 designs" in last and "500/s, 16 s left, 3 screened" in last, last
    now[0] += 2.0
    bar.update(10000, screened=3)           # done: no time left is shown
    last = out.getvalue().rsplit("\r", 1)[-1]
    assert "10000/10000" in last and "left" not in last, last
    bar.close()


# --- the engine and chunks auto picks ---------------------------------------------------------------------------

def test_auto_flies_small_ensembles_in_this_process_and_large_ones_on_idle_cores(bottle, monkeypatch):
    parsed = parse_model(bottle)
    monkeypatch.setattr("thrustgraph.studies.studies.usable_cores", lambda: 2)
    monkeypatch.setattr("thrustgraph.studies.studies.idle_cores", lambda: 2.0)
    assert choose_engine(POOL_FROM_ENSEMBLE - 1, parsed) == ("serial", "ensemble")
    assert choose_engine(POOL_FROM_ENSEMBLE, parsed) == ("processes", "ensemble")
    assert choose_engine(10 ** 6, parsed, flights="single") == ("processes", "single")
    monkeypatch.setattr("thrustgraph.studies.studies.idle_cores", lambda: POOL_IDLE_CORES - 0.1)   # a busy machine
    assert choose_engine(10 ** 6, parsed) == ("serial", "ensemble")
    monkeypatch.setattr("thrustgraph.studies.studies.usable_cores", lambda: 1)
    monkeypatch.setattr("thrustgraph.studies.studies.idle_cores", lambda: 1.0)
    assert choose_engine(10 ** 6, parsed) == ("serial", "ensemble")


def test_auto_flies_an_ensemble_from_a_dozen_designs(bottle, monkeypatch):
    # from ENSEMBLE_FROM designs (measured: benchmarks/small_studies.py) where the outcomes allow it; one design
    # at a time below, and for outcomes the ensemble does not compute
    parsed = parse_model(bottle)
    monkeypatch.setattr("thrustgraph.studies.studies.usable_cores", lambda: 1)
    assert choose_engine(ENSEMBLE_FROM - 1, parsed) == ("serial", "single")
    assert choose_engine(ENSEMBLE_FROM, parsed) == ("serial", "ensemble")
    assert choose_engine(ENSEMBLE_FROM, parsed, outputs=["apogee", "peak_thrust"]) == ("serial", "single")
    # and the study flies it so: the same rows as the ensemble asked for by name
    p = [resolve(parsed, "components.bottle.fill")]
    x = np.linspace(0.2, 0.45, ENSEMBLE_FROM)[:, None]
    auto = evaluate(bottle, p, x, parsed=parsed, quiet=True)
    named = evaluate(bottle, p, x, parsed=parsed, flights="ensemble", engine="serial", quiet=True)
    assert np.array_equal(auto.values, named.values, equal_nan=True)


def test_idle_cores_are_the_idle_share_of_the_usable_cores_while_the_study_sleeps(monkeypatch):
    from thrustgraph.studies import engines

    ticks = iter([(1000, 4000), (1150, 4200)])      # 150 of 200 ticks idle over the window, on 2 cores
    monkeypatch.setattr(engines.os, "sched_getaffinity", lambda _: {0, 1})
    monkeypatch.setattr(engines, "cpu_ticks", lambda cpus: next(ticks))
    assert engines.idle_cores(0.0) == pytest.approx(1.5)


def test_idle_cores_fall_back_to_the_load_average_without_proc_stat(monkeypatch):
    from thrustgraph.studies import engines

    monkeypatch.setattr(engines, "cpu_ticks", lambda cpus: None)
    monkeypatch.setattr(engines, "usable_cores", lambda: 2)
    monkeypatch.setattr(engines.os, "getloadavg", lambda: (0.4, 0.0, 0.0))
    assert engines.idle_cores(0.0) == pytest.approx(1.6)
    monkeypatch.setattr(engines.os, "getloadavg", lambda: (7.5, 0.0, 0.0))
    assert engines.idle_cores(0.0) == 0.0


@pytest.mark.skipif(not os.path.exists("/proc/stat"), reason="the system gives no /proc/stat")
def test_cpu_ticks_read_this_machines_cores():
    from thrustgraph.studies import engines

    cpus = sorted(os.sched_getaffinity(0))
    idle, total = engines.cpu_ticks(cpus)
    assert 0 <= idle <= total
    assert engines.cpu_ticks([10 ** 6]) is None       # a core the machine does not have


@pytest.mark.parametrize("n", [1, 999, 4000, 10000, 39999, 40000, 40001, 123457, 1000000])
@pytest.mark.parametrize("workers", [1, 2, 3])
def test_ensemble_chunks_are_few_equal_and_shared_evenly(n, workers):
    size = default_chunk_size(n, workers, "ensemble")
    k = -(-n // size)
    assert size <= ENSEMBLE_CHUNK
    assert k % workers == 0 or k < workers      # every worker gets as many chunks as the others
    assert k <= workers * -(-n // (workers * ENSEMBLE_CHUNK))   # no more chunks than the cap asks for


# --- one process, two workers, a single run: the same outcomes ---------------------------------------------------

def test_one_process_two_workers_and_single_runs_give_the_same_outcomes(bottle, tmp_path):
    """A study's rows do not depend on where they fly: one process and two workers give the same table bit for
    bit (single flights; ensembles, held or streamed, in the same chunks or in others: one chunk in one process,
    one per worker on two); a single flight in a study is the single run of that design bit for bit, and the
    ensemble agrees with it to the tolerance of the one-balance property (1e-6)."""
    parsed = parse_model(bottle)
    outs = ["apogee", "range", "max_speed", "peak_acceleration", "impact_x", "impact_y", "impact_speed"]
    kw = dict(samples=40, seed=11, quiet=True, outputs=outs)
    spreads = SPREADS[:3] + ["components.airframe.dry_mass=normal(sd=5 g)"]
    tables = {}
    for flights in ("single", "ensemble"):
        one = disperse(bottle, spreads, engine="serial", flights=flights, chunk_size=20, **kw).table
        two = disperse(bottle, spreads, engine="processes", workers=2, flights=flights, chunk_size=20, **kw).table
        streamed = disperse(bottle, spreads, engine="processes", workers=2, flights=flights, chunk_size=20,
                            table=TableStream(tmp_path / f"{flights}.csv"), **kw).table
        streamed.write()
        assert one.to_csv() == two.to_csv()
        np.testing.assert_array_equal(streamed.values, one.values)
        tables[flights] = one
    auto_one = disperse(bottle, spreads, engine="serial", flights="ensemble", **kw).table       # one chunk
    auto_two = disperse(bottle, spreads, engine="processes", workers=2, flights="ensemble", **kw).table   # two
    np.testing.assert_array_equal(auto_two.values, auto_one.values)
    single, ens = tables["single"], tables["ensemble"]
    np.testing.assert_array_equal(single.status, ens.status)
    ok = single.ok
    assert ok.sum() == 40
    for i in range(0, 40, 8):
        alone = fly_design(apply(parsed, single.params, single.x[i]), outs)
        assert [alone.values[o] for o in outs] == single.values[i].tolist()
    np.testing.assert_allclose(ens.values[ok], single.values[ok], rtol=1e-6, atol=1e-9)


def test_the_benchmark_script_runs(tmp_path):
    """benchmarks/study_scale.py --quick: the scale-out and the memory measurement end to end on tiny sizes
    (what it prints is measured, not checked here)."""
    script = Path(__file__).resolve().parents[1] / "benchmarks" / "study_scale.py"
    r = subprocess.run([sys.executable, str(script), "--quick"], capture_output=True, text=True, cwd=tmp_path,
                       timeout=HANG_GUARD)
    assert r.returncode == 0, r.stdout + r.stderr
    assert "ratio" in r.stdout and "resident" in r.stdout
