"""Engines: where the chunks of a study are flown (this process, a pool of local processes, a Dask cluster).

A study is a table of designs (rows of SI parameter values). It is cut into
chunks of consecutive rows; a :class:`FlightTask` flies one chunk and returns
only its summary rows (:class:`ChunkRows`: status, note and outcome values),
never flight results, so memory stays flat however many designs there are.
At most a few chunks per worker are in flight at once.

Engines
-------
``serial``
    Every chunk in this process, one after another.
``processes``
    A :mod:`multiprocessing` pool over the local cores (what ``auto`` picks
    for studies large enough to pay for it). On Linux the workers are forked
    from this process (about 10 ms each: numpy, scipy, thrustgraph and the
    parsed model come with them; a fork server took about a second to start,
    which is the whole time of a 10,000-design ensemble); where forking is
    not safe (this process runs other threads) or not offered they start
    from a fork server. The flight task (the model) goes to each worker
    once, through the pool's initializer, and only summary rows come back,
    chunk by chunk, as they finish. Workers never see Ctrl-C or SIGTERM, not
    even while they start (both are held back while the pool starts, so they
    inherit them blocked): the parent stops the pool, and no worker prints a
    traceback.
``dask``
    A Dask distributed cluster, given a scheduler address (``tcp://host:8786``)
    or a :class:`distributed.Client`. An address that is not one, cannot be
    reached within ``timeout`` seconds, or answers as something other than a
    Dask scheduler (a web server...) gives one clear error within that time.

How a chunk is flown (``flights``) is independent of where: ``single`` flies
each design with :func:`thrustgraph.flight.integrate.fly_segments`; ``ensemble``
integrates the whole chunk as one vectorised array computation
(:mod:`thrustgraph.flight.ensemble`). Every row depends only on its own design, so
the same designs give the same table on every engine and with any chunk size.

Examples
--------
>>> import numpy as np
>>> from thrustgraph.models.modelfile import load_model, default_model_path
>>> task = FlightTask(load_model(default_model_path()), ("components.bottle.fill",), ("",), ("apogee",))
>>> rows = list(SerialEngine().run(task, chunks(np.array([[0.2], [0.3]]), 1)))
>>> [r.start for r in rows], [round(float(r.values[0, 0]), 2) for r in rows]
([0, 1], [53.99, 54.8])
"""

from __future__ import annotations

import ctypes
import difflib
import hashlib
import math
import multiprocessing
import os
import re
import signal
import socket
import struct
import sys
import threading
import time
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, Iterable, Iterator

import numpy as np

from ..base.errors import ModelError, screened_note
from ..base.interrupts import sigint_held
from ..models.model import Model
from ..models.designs import apply, bounds_text, resolve, within_bounds
from ..models.model import parse_model
from ..balance.outcomes import STATUS_SCREENED
from .studyflight import fly_design
from ..flight.ensemble import fly_designs

__all__ = ["FlightTask", "ChunkRows", "chunks", "SerialEngine", "ProcessEngine", "DaskEngine", "make_engine",
           "ENGINES", "FLIGHTS", "default_chunk_size", "ENSEMBLE_CHUNK", "STUDY_CLUSTER_CONFIG",
           "check_scheduler_address", "usable_cores", "idle_cores", "cpu_ticks", "IDLE_WINDOW", "start_method"]

ENGINES = ("serial", "processes", "dask")
FLIGHTS = ("single", "ensemble")


@dataclass
class ChunkRows:
    """Summary rows of one chunk: first row index, status and note per row, outcome values (rows x outputs, SI)."""

    start: int
    status: list[str]
    notes: list[str]
    values: np.ndarray
    flights: str = "single"
    seconds: float = 0.0
    cpu_seconds: float = 0.0

    def __len__(self) -> int:
        return len(self.status)


# Parsed base models, per worker process: parsing costs ~14 ms, a chunk reuses it.
_PARSED: dict[str, Any] = {}


@dataclass(frozen=True)
class FlightTask:
    """Flies chunks of designs of one model; picklable, so it can travel to worker processes and Dask workers.

    Parameters
    ----------
    model : the base model (raw values, as after ``--set`` overrides)
    paths, units : key paths of the varied parameters and the units they are shown in
    outputs : outcome names to compute
    flights : ``single`` or ``ensemble``
    rtol, atol : integration tolerances (None: the model's ``[run]`` values)
    token : names the task in each worker's cache of parsed models and for a kept process pool; by default a
        hash of everything above, so that the same task again (a repeated study of an unchanged model) finds
        its model already parsed in the workers of a pool or cluster
    """

    model: Model
    paths: tuple[str, ...]
    units: tuple[str, ...]
    outputs: tuple[str, ...]
    flights: str = "single"
    rtol: float | None = None
    atol: float | None = None
    token: str = ""

    def __post_init__(self) -> None:
        if not self.token:
            content = repr((self.model, self.paths, self.units, self.outputs, self.flights, self.rtol, self.atol))
            object.__setattr__(self, "token", hashlib.sha256(content.encode()).hexdigest()[:32])

    def prepared(self) -> tuple[Any, list]:
        """The parsed base model and the resolved parameters (cached per process)."""
        hit = _PARSED.get(self.token)
        if hit is None:

            parsed = parse_model(self.model)
            params = [resolve(parsed, p, unit=u or None) for p, u in zip(self.paths, self.units)]
            if len(_PARSED) > 8:
                _PARSED.clear()
            hit = _PARSED[self.token] = (parsed, params)
        return hit

    def __call__(self, start: int, x: np.ndarray, progress: Any = None) -> ChunkRows:
        """Fly rows ``x`` (the chunk starting at row ``start``); ``progress(done)`` is told the designs finished
        so far in this chunk (in-process runs only)."""
        t0, c0 = time.perf_counter(), time.process_time()
        parsed, params = self.prepared()
        x = np.asarray(x, dtype=float).reshape(len(x), len(params))
        n, k = len(x), len(self.outputs)
        if self.flights == "ensemble":

            res = fly_designs(parsed, params, x, self.outputs, rtol=self.rtol, atol=self.atol, progress=progress)
            return ChunkRows(start, res.status, res.notes, res.values, "ensemble", time.perf_counter() - t0,
                             time.process_time() - c0)
        status, notes = [], []
        values = np.full((n, k), np.nan)
        for r in range(n):
            bad = [p for j, p in enumerate(params) if not within_bounds(p, x[r, j])]
            if bad:

                status.append(STATUS_SCREENED)
                notes.append(f"{bad[0].path} = {bad[0].text(x[r, params.index(bad[0])])} is outside its bounds "
                             f"({bounds_text(bad[0])})")
                continue
            try:
                design = apply(parsed, params, x[r])
            except ModelError as exc:
                status.append(STATUS_SCREENED)
                notes.append(screened_note(exc))
                continue
            out = fly_design(design, self.outputs, rtol=self.rtol, atol=self.atol)
            if progress is not None:
                progress(r + 1)
            status.append(out.status)
            notes.append(out.message)
            for j, name in enumerate(self.outputs):
                v = out.values.get(name)
                if v is not None:
                    values[r, j] = v
        return ChunkRows(start, status, notes, values, "single", time.perf_counter() - t0, time.process_time() - c0)


def chunks(x: np.ndarray, size: int) -> Iterator[tuple[int, np.ndarray]]:
    """Consecutive chunks ``(start, rows)`` of a design matrix.

    >>> [(s, len(c)) for s, c in chunks(np.zeros((5, 1)), 2)]
    [(0, 2), (2, 2), (4, 1)]
    """
    size = max(1, int(size))
    for s in range(0, len(x), size):
        yield s, x[s:s + size]


#: The most designs of one ensemble chunk. An ensemble chunk costs a fixed ~0.25 s of per-step work besides
#: ~0.09 ms per design (measured on the bottle rocket, CPU time: 0.30 ms a design in chunks of 1,250, 0.19 in
#: chunks of 2,500, 0.13 in 5,000, 0.11 in 10,000, 0.10 in 20,000), so chunks are as large as memory and the
#: progress display allow: 20,000 designs hold about 10 MB of stage arrays and take 2-4 s on a core.
ENSEMBLE_CHUNK = 20000


def default_chunk_size(n: int, workers: int, flights: str) -> int:
    """Rows per chunk.

    Ensembles: as few chunks as the cap (:data:`ENSEMBLE_CHUNK`) allows, and a multiple of the workers, so
    that each worker flies one chunk (or a few equal ones) and pays the per-chunk cost as seldom as a single
    process does; more chunks than that only repeat that cost. Single flights are cut finely (about 8 chunks
    per worker, at most 64 designs) so the progress display moves and the load balances.

    >>> default_chunk_size(10000, 1, "ensemble"), default_chunk_size(10000, 2, "ensemble")
    (10000, 5000)
    >>> default_chunk_size(40000, 2, "ensemble"), default_chunk_size(1000000, 2, "ensemble")
    (20000, 20000)
    >>> default_chunk_size(50000, 2, "ensemble"), default_chunk_size(100, 2, "single")
    (12500, 7)
    """
    n, workers = max(int(n), 1), max(int(workers), 1)
    if flights == "ensemble":
        k = workers * math.ceil(n / (workers * ENSEMBLE_CHUNK))
        return int(max(1, math.ceil(n / k)))
    return int(min(max(math.ceil(n / max(1, 8 * workers)), 1), 64))


def usable_cores() -> int:
    """The cores this process may run on (its CPU affinity where the system says, else the machine's count)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


#: How long :func:`idle_cores` watches the cores, s (the study's process sleeps meanwhile, so it does not count
#: itself as a load): 5 clock ticks a core at the usual 100 a second, enough to tell 1.5 idle cores of 2 from 1;
#: 0.2 s was measured to cost a 10,000-design study 0.2 s of its 0.46 s on two workers.
IDLE_WINDOW = 0.05


def cpu_ticks(cpus: Iterable[int]) -> tuple[int, int] | None:
    """``(idle, total)`` clock ticks of the given cores since boot, from ``/proc/stat`` (idle and waiting for I/O
    count as idle; stolen time counts as busy); None where the system does not give them."""
    want = {f"cpu{c}" for c in cpus}
    idle = total = 0
    try:
        with open("/proc/stat", encoding="ascii") as fh:
            for line in fh:
                name, _, rest = line.partition(" ")
                if name in want:
                    v = [int(f) for f in rest.split()[:8]]
                    idle += v[3] + v[4]
                    total += sum(v)
                    want.discard(name)
    except (OSError, ValueError, IndexError):
        return None
    return None if want or total <= 0 else (idle, total)


def idle_cores(window: float = IDLE_WINDOW) -> float:
    """Cores the rest of the machine leaves idle now: the idle share of this process's usable cores over
    ``window`` seconds, while this process sleeps (``/proc/stat``); where the system does not give that, the
    usable cores less the one-minute load average (which counts the study's own process once it has run a while:
    a second study run after a first would see its own earlier load and keep to one core).

    >>> 0.0 <= idle_cores(0.05) <= usable_cores()
    True
    """
    try:
        cpus = sorted(os.sched_getaffinity(0))
    except (AttributeError, OSError):   # pragma: no cover - no affinity
        cpus = list(range(usable_cores()))
    a = cpu_ticks(cpus)
    if a is not None:
        time.sleep(window)
        b = cpu_ticks(cpus)
        if b is not None and b[1] > a[1]:
            return max(0.0, min(float(len(cpus)), len(cpus) * (b[0] - a[0]) / (b[1] - a[1])))
    try:
        load = os.getloadavg()[0]
    except (AttributeError, OSError):   # pragma: no cover - no load average
        load = 0.0
    return max(0.0, usable_cores() - load)


def start_method() -> str:
    """How pool workers start: ``fork`` where offered and this process runs no other thread (a fork copies
    only the calling thread: a lock held by another would stay locked in the child), else ``forkserver``,
    else ``spawn``.

    >>> start_method() in ("fork", "forkserver", "spawn")
    True
    """
    methods = multiprocessing.get_all_start_methods()
    if "fork" in methods and threading.active_count() == 1 and sys.platform.startswith("linux"):
        return "fork"
    return "forkserver" if "forkserver" in methods else "spawn"


class SerialEngine:
    """Every chunk in this process."""

    name = "serial"
    workers = 1

    def run(self, task: FlightTask, parts: Iterable[tuple[int, np.ndarray]], progress: Any = None
            ) -> Iterator[ChunkRows]:
        """``progress(start, done)`` hears about designs finished inside the chunk at ``start``."""
        for start, x in parts:
            yield task(start, x, None if progress is None else (lambda done, s=start: progress(s, done)))

    def close(self) -> None:
        pass


# --- process pool ---------------------------------------------------------------------------------------------
_TASK: FlightTask | None = None


def _end_with_parent() -> None:
    """Linux: this worker is killed when the study's process ends, however it ends (a SIGKILL leaves no
    orphaned workers waiting for chunks forever, holding the study's scratch files)."""
    if not sys.platform.startswith("linux"):
        return
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, signal.SIGKILL, 0, 0, 0)     # PR_SET_PDEATHSIG
    except (OSError, AttributeError):   # pragma: no cover - no prctl
        return
    if os.getppid() == 1:                # the parent was already gone before the request
        os._exit(1)


def _init_worker(task: FlightTask) -> None:
    global _TASK
    _end_with_parent()
    signal.signal(signal.SIGINT, signal.SIG_IGN)   # Ctrl-C is the parent's to handle
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked worker inherits the parent's handler: the pool's
    if hasattr(signal, "pthread_sigmask"):         # terminate() must end it quietly, not raise in it
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGTERM})
    _TASK = task


def _run_chunk(part: tuple[int, np.ndarray]) -> ChunkRows:
    assert _TASK is not None
    return _TASK(*part)


@contextmanager
def _sigterm_held() -> Iterator[None]:
    if not hasattr(signal, "pthread_sigmask"):   # pragma: no cover - not POSIX
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGTERM})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


class ProcessEngine:
    """A pool of local worker processes (default: one per core), kept between batches of the same task."""

    name = "processes"

    def __init__(self, workers: int | None = None, *, method: str | None = None) -> None:
        if workers is not None and workers < 1:
            raise ModelError("--workers", f"must be at least 1, got {workers}", "give a positive number of workers")
        self.workers = workers or usable_cores()
        self.method = method
        self._pool = None
        self._token = None

    def _pool_for(self, task: FlightTask):
        if self._pool is None or self._token != task.token:
            self.close()
            method = self.method or start_method()
            ctx = multiprocessing.get_context(method)
            if method == "forkserver":
                ctx.set_forkserver_preload(["thrustgraph.studies.engines", "thrustgraph.balance.outcomes",
                                            "scipy.integrate"])
            # A Ctrl-C or SIGTERM while the workers start waits until they are up (they inherit both blocked:
            # they ignore SIGINT and take SIGTERM's default, silently), then stops this process, which stops the
            # pool.
            with sigint_held(), _sigterm_held():
                self._pool = ctx.Pool(self.workers, initializer=_init_worker, initargs=(task,))
                self._token = task.token
        return self._pool

    def run(self, task: FlightTask, parts: Iterable[tuple[int, np.ndarray]]) -> Iterator[ChunkRows]:
        done = False
        try:
            pool = self._pool_for(task)
            yield from pool.imap_unordered(_run_chunk, parts, chunksize=1)
            done = True
        finally:
            if not done:   # interrupted (Ctrl-C) or abandoned: stop the workers now
                self.close()

    def close(self) -> None:
        if self._pool is not None:
            self._pool.terminate()
            self._pool.join()
            self._pool = None
            self._token = None


# --- Dask -----------------------------------------------------------------------------------------------------
def _dask_chunk(task: FlightTask, start: int, x: np.ndarray) -> ChunkRows:
    return task(start, x)


#: Dask settings for a cluster that flies studies: long CPU-bound tasks, so the housekeeping loops of the
#: scheduler, nannies and workers can run rarely. With Dask's defaults (a 20 ms event-loop tick, a 10 ms
#: statistical profiler, 0.5 s system monitor, 0.1 s memory monitor) an idle 2-worker LocalCluster took 6.5 % of
#: one core here, with these 0.7 % (measured): on a machine whose cores are all workers, that is time taken from
#: the flights. Use them as ``dask.config.set(STUDY_CLUSTER_CONFIG)`` around a ``LocalCluster``, or as the
#: environment of ``dask scheduler`` and ``dask worker`` (docs/studies.md gives the variables).
STUDY_CLUSTER_CONFIG = {
    "distributed.worker.profile.enabled": False,
    "distributed.admin.tick.interval": "1s",
    "distributed.admin.system-monitor.interval": "5s",
    "distributed.worker.memory.monitor-interval": "1s",
}


_ADDRESS = re.compile(r"^(?:(?P<scheme>[a-z]+)://)?(?P<host>\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9._-]+):(?P<port>\d{1,5})/?$")
_SCHEMES = ("tcp", "tls", "ws", "wss", "ucx")
_ADDRESS_FIX = "write tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786 (start a scheduler with 'dask scheduler')"


def check_scheduler_address(address: str) -> tuple[str, str, int]:
    """``(scheme, host, port)`` of a Dask scheduler address; anything else is one clear error.

    >>> check_scheduler_address("tcp://10.0.0.5:8786"), check_scheduler_address("localhost:8786")
    (('tcp', '10.0.0.5', 8786), ('tcp', 'localhost', 8786))
    >>> check_scheduler_address("not a url")
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.ModelError: --scheduler: 'not a url' is not a scheduler address. Fix: write tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786 (start a scheduler with 'dask scheduler').
    """
    text = str(address).strip()
    shown = text if len(text) <= 80 else text[:77] + "..."
    m = _ADDRESS.match(text)
    if m is None:
        raise ModelError("--scheduler", f"{shown!r} is not a scheduler address", _ADDRESS_FIX)
    scheme = m.group("scheme") or "tcp"
    if scheme not in _SCHEMES:
        raise ModelError("--scheduler", f"{shown!r}: unknown protocol {scheme!r} (Dask speaks {', '.join(_SCHEMES)})",
                         _ADDRESS_FIX)
    port = int(m.group("port"))
    if not 0 < port < 65536:
        raise ModelError("--scheduler", f"{shown!r}: port {port} is not between 1 and 65535", _ADDRESS_FIX)
    return scheme, m.group("host").strip("[]"), port


_NOT_DASK_FIX = ("check the host and the port of the scheduler (a Dask scheduler listens on 8786 unless told "
                 "otherwise; 'dask scheduler' prints its address)")

#: The most a Dask scheduler's first message (its handshake) may announce, bytes; a web server's reply read as a
#: length announces exabytes.
_HANDSHAKE_LIMIT = 64 * 2 ** 20


def _probe_scheduler(address: str, host: str, port: int, timeout: float) -> None:
    """Check within ``timeout`` that a plain-TCP address answers as a Dask scheduler does: right after the
    connection it sends its handshake, an 8-byte length and then that many bytes."""
    deadline = time.monotonic() + timeout
    try:
        sock = socket.create_connection((host, port), timeout=timeout)
    except OSError:
        return   # unreachable: the client's own retries say so within the same timeout
    try:
        head = b""
        while len(head) < 8:
            sock.settimeout(max(deadline - time.monotonic(), 1e-3))
            try:
                part = sock.recv(8 - len(head))
            except socket.timeout:
                raise ModelError("--scheduler", f"{address!r} accepts connections but sends no Dask handshake within "
                                 f"{timeout:g} s: it is not a Dask scheduler", _NOT_DASK_FIX) from None
            except OSError as exc:
                raise ModelError("--scheduler", f"{address!r} closed the connection ({exc.strerror or exc}): it is not "
                                 "a Dask scheduler", _NOT_DASK_FIX) from None
            if not part:
                raise ModelError("--scheduler", f"{address!r} closed the connection without a Dask handshake: it is "
                                 "not a Dask scheduler", _NOT_DASK_FIX)
            head += part
        (size,) = struct.unpack("<Q", head)
        if not 0 < size <= _HANDSHAKE_LIMIT:
            raise ModelError("--scheduler", f"{address!r} answers, but not as a Dask scheduler (it began with "
                             f"{head!r})", _NOT_DASK_FIX)
    finally:
        sock.close()


class DaskEngine:
    """A Dask distributed cluster: a scheduler address or a ``distributed.Client``.

    Raises
    ------
    ModelError
        Dask is not installed; the address is not one; the scheduler cannot be reached, or the address does not
        answer as a Dask scheduler, within ``timeout`` seconds.
    """

    name = "dask"

    def __init__(self, scheduler: Any, *, timeout: float = 10.0) -> None:
        try:
            from distributed import Client
        except ImportError:
            raise ModelError("--engine dask", "needs the Dask distributed package, which is not installed",
                             "pip install 'thrustgraph[dask]' (or dask[distributed])") from None
        self._own = False
        if isinstance(scheduler, Client):
            self.client = scheduler
        else:
            if not scheduler:
                raise ModelError("--scheduler", "the dask engine needs the address of a scheduler",
                                 "give --scheduler tcp://HOST:8786 (start one with 'dask scheduler')")
            if isinstance(timeout, bool) or not isinstance(timeout, (int, float)) or not (
                    math.isfinite(timeout) and timeout > 0):
                raise ModelError("--wait", f"must be a positive number of seconds, got {timeout!r}",
                                 "use e.g. --wait 10")
            scheme, host, port = check_scheduler_address(scheduler)
            if scheme == "tcp":
                _probe_scheduler(str(scheduler), host, port, float(timeout))
            try:
                self.client = Client(scheduler, timeout=timeout, set_as_default=False)
            except (OSError, TimeoutError) as exc:
                raise ModelError("--scheduler", f"cannot reach the Dask scheduler at {scheduler!r} within "
                                 f"{timeout:g} s ({type(exc).__name__})",
                                 "check the address, or start a scheduler with 'dask scheduler' and workers with "
                                 "'dask worker ADDRESS'") from None
            self._own = True
        self._futures: list = []
        threads = sum(self.client.nthreads().values())
        self.workers = max(1, threads)

    def run(self, task: FlightTask, parts: Iterable[tuple[int, np.ndarray]]) -> Iterator[ChunkRows]:
        from distributed import as_completed

        remote = self.client.scatter(task, broadcast=True)
        it = iter(parts)
        first = []
        for start, x in it:
            first.append(self.client.submit(_dask_chunk, remote, start, x, pure=False))
            if len(first) >= 2 * self.workers:
                break
        if not first:
            return
        ac = as_completed(first, loop=self.client.loop)
        try:
            for fut in ac:
                rows = fut.result()
                fut.release()
                yield rows
                nxt = next(it, None)
                if nxt is not None:
                    ac.add(self.client.submit(_dask_chunk, remote, nxt[0], nxt[1], pure=False))
        finally:
            for fut in list(ac.futures):
                fut.cancel()

    def close(self) -> None:
        if self._own:
            self.client.close()
            self._own = False


def make_engine(name: str, *, workers: int | None = None, scheduler: Any = None,
                timeout: float = 10.0) -> SerialEngine | ProcessEngine | DaskEngine:
    """An engine by name (``serial``, ``processes``, ``dask``)."""
    if name == "serial":
        return SerialEngine()
    if name == "processes":
        return ProcessEngine(workers)
    if name == "dask":
        return DaskEngine(scheduler, timeout=timeout)

    c = difflib.get_close_matches(str(name), ENGINES, n=1)
    raise ModelError("--engine", f"unknown engine {name!r}",
                     f"did you mean {c[0]!r}?" if c else f"choose one of {', '.join(ENGINES)}")
