"""Outputs all or nothing: the write-then-rename helper, and every command's outputs.

The helper (:mod:`thrustgraph.base.outputfiles`): permissions kept, links written
through, FIFOs and devices refused, missing folders named and not created,
files and folders synced, nothing misleading left by a kill between the write
and the rename. The commands: every output path is checked before any work,
and a second output that cannot be written leaves no first output and no
temporary file.
"""

from __future__ import annotations

import errno
import os
import signal
import stat
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from thrustgraph.base.errors import OutputError
from thrustgraph.base.outputfiles import PARTIAL_TAG, atomic_write, check_output, remove_stale_partials, write_all


def listing(d: Path) -> list[str]:
    return sorted(str(p.relative_to(d)) for p in d.rglob("*"))


# ---------------------------------------------------------------------------
# the helper
# ---------------------------------------------------------------------------

def test_a_replaced_file_keeps_its_permissions(tmp_path):
    f = tmp_path / "secret.csv"
    f.write_text("old")
    for mode in (0o600, 0o640, 0o755):
        os.chmod(f, mode)
        atomic_write(f, f"new {mode:o}")
        assert stat.S_IMODE(os.stat(f).st_mode) == mode
        assert f.read_text() == f"new {mode:o}"
    assert listing(tmp_path) == ["secret.csv"]


@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_a_new_file_gets_the_mode_the_umask_allows(tmp_path, umask, mode):
    old = os.umask(umask)
    try:
        atomic_write(tmp_path / "new.csv", "data")
    finally:
        os.umask(old)
    assert stat.S_IMODE(os.stat(tmp_path / "new.csv").st_mode) == mode


def test_a_symlink_is_written_through_and_stays_a_link(tmp_path):
    (tmp_path / "data").mkdir()
    target = tmp_path / "data" / "real.json"
    target.write_text("old")
    os.chmod(target, 0o600)
    link = tmp_path / "latest.json"
    link.symlink_to(Path("data") / "real.json")
    atomic_write(link, "new")
    assert link.is_symlink() and os.readlink(link) == str(Path("data") / "real.json")
    assert target.read_text() == "new" and stat.S_IMODE(os.stat(target).st_mode) == 0o600
    assert listing(tmp_path) == ["data", "data/real.json", "latest.json"]
    dangling = tmp_path / "next.json"
    dangling.symlink_to(tmp_path / "data" / "later.json")   # its target does not exist yet: it is created
    atomic_write(dangling, "first")
    assert dangling.is_symlink() and (tmp_path / "data" / "later.json").read_text() == "first"


def test_a_symlink_loop_is_refused(tmp_path):
    (tmp_path / "a").symlink_to(tmp_path / "b")
    (tmp_path / "b").symlink_to(tmp_path / "a")
    with pytest.raises(OutputError, match="symbolic link that leads round in a loop"):
        atomic_write(tmp_path / "a", "x")
    assert (tmp_path / "a").is_symlink() and (tmp_path / "b").is_symlink()


def test_a_fifo_or_a_device_is_refused_and_left_alone(tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    with pytest.raises(OutputError, match=r"pipe.csv: it is a FIFO \(named pipe\), not a regular file.*Fix: give the "
                                          r"name of a regular file"):
        atomic_write(fifo, "x")
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode) and listing(tmp_path) == ["pipe.csv"]
    with pytest.raises(OutputError, match="/dev/null: it is a character device, not a regular file"):
        atomic_write("/dev/null", "x")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)
    via = tmp_path / "to-null"
    via.symlink_to("/dev/null")   # a link to a device: the device is what would be written, so it is refused too
    with pytest.raises(OutputError, match="character device"):
        atomic_write(via, "x")


def test_a_missing_folder_is_named_and_not_created(tmp_path):
    with pytest.raises(OutputError) as err:
        atomic_write(tmp_path / "out" / "deeper" / "a.csv", "x")
    missing = tmp_path / "out" / "deeper"
    assert str(err.value) == (f"cannot write {missing / 'a.csv'}: the folder {missing} does not exist. "
                              f"Fix: create it first (mkdir -p {missing}) or write somewhere else.")
    assert listing(tmp_path) == []
    (tmp_path / "file").write_text("x")
    with pytest.raises(OutputError, match=r"file is a file, not a folder"):
        atomic_write(tmp_path / "file" / "a.csv", "x")


def test_a_folder_that_cannot_be_written_is_refused_even_for_root():
    # /proc refuses new files whoever asks; a permission check (os.access) would let root through
    with pytest.raises(OutputError, match=r"cannot write /proc/thrustgraph-out.csv: the folder /proc cannot be written"):
        check_output("/proc/thrustgraph-out.csv")
    with pytest.raises(OutputError, match=r"the folder /proc/nope does not exist"):
        check_output("/proc/nope/x")


def test_the_file_and_then_its_folder_are_synced(tmp_path, monkeypatch):
    synced: list[str] = []
    real = os.fsync

    def spy(fd: int) -> None:   # the real fsync runs; the spy only notes what it was given
        synced.append(os.readlink(f"/proc/self/fd/{fd}"))
        real(fd)

    monkeypatch.setattr(os, "fsync", spy)
    (tmp_path / "sub").mkdir()
    write_all([(tmp_path / "a.csv", "1"), (tmp_path / "sub" / "b.csv", "2")])
    folders = [p for p in synced if p in (str(tmp_path), str(tmp_path / "sub"))]
    files = [p for p in synced if p not in folders]
    assert sorted(folders) == [str(tmp_path), str(tmp_path / "sub")]
    assert len(files) == 2 and all(Path(f.split(" (deleted)")[0]).parent in (tmp_path, tmp_path / "sub")
                                   for f in files)
    assert max(synced.index(f) for f in files) < min(synced.index(f) for f in folders)   # data first, then names


_KILLER = textwrap.dedent("""
    import os, signal, sys
    from thrustgraph.base import outputfiles

    target, where, named = sys.argv[1], sys.argv[2], sys.argv[3] == "named"

    def die_at(real):
        def wrapped(*args, **kw):
            if any(outputfiles.PARTIAL_TAG in str(a) for a in args):   # the probe of the file system passes
                sys.stdout.write("killed\\n"); sys.stdout.flush()
                os.kill(os.getpid(), signal.SIGKILL)
            return real(*args, **kw)
        return wrapped

    if named:
        outputfiles._unnamed = lambda folder: None          # as on a file system without unnamed files
    if where == "before-name":
        outputfiles._link = die_at(outputfiles._link)
    else:
        os.replace = die_at(os.replace)
    outputfiles.atomic_write(target, "new content")
""")


def _kill_during_write(target: Path, where: str, named: bool) -> subprocess.CompletedProcess:
    proc = subprocess.run([sys.executable, "-c", _KILLER, str(target), where, "named" if named else "unnamed"],
                          capture_output=True, text=True)
    assert proc.returncode == -signal.SIGKILL and proc.stdout == "killed\n", proc.stderr
    return proc


def test_a_kill_after_writing_and_before_naming_leaves_nothing(tmp_path):
    target = tmp_path / "table.csv"
    target.write_text("old content")
    _kill_during_write(target, "before-name", named=False)
    # the new bytes were written and synced into an unnamed file: the kernel freed it with the process
    assert listing(tmp_path) == ["table.csv"] and target.read_text() == "old content"


@pytest.mark.parametrize("named", [False, True], ids=["unnamed-then-linked", "named-from-the-start"])
def test_a_kill_before_the_rename_leaves_a_visible_partial_that_the_next_write_removes(tmp_path, named):
    target = tmp_path / "table.csv"
    target.write_text("old content")
    _kill_during_write(target, "before-rename", named=named)
    left = [p for p in listing(tmp_path) if p != "table.csv"]
    assert target.read_text() == "old content"
    assert len(left) == 1 and left[0].startswith("table.csv" + PARTIAL_TAG) and not left[0].startswith(".")
    assert (tmp_path / left[0]).read_text() == "new content"
    atomic_write(target, "newer content")   # the writer that left it is gone: the next write of the file removes it
    assert listing(tmp_path) == ["table.csv"] and target.read_text() == "newer content"


def test_a_partial_of_a_living_process_is_kept(tmp_path):
    mine = tmp_path / f"a.csv{PARTIAL_TAG}{os.getppid()}-0123abcd"   # pytest's parent is alive
    mine.write_text("being written")
    assert remove_stale_partials(tmp_path / "a.csv") == [] and mine.exists()


@pytest.mark.parametrize("named", [False, True], ids=["unnamed", "named"])
def test_a_failing_second_write_leaves_no_first_file_and_no_temporary(tmp_path, monkeypatch, named):
    from thrustgraph.base import outputfiles

    if named:
        monkeypatch.setattr(outputfiles, "_unnamed", lambda folder: None)   # as without O_TMPFILE
    (tmp_path / "full").mkdir()
    real = os.write

    def disk_full_in(folder: Path):
        def write(fd: int, data) -> int:
            if os.readlink(f"/proc/self/fd/{fd}").startswith(str(folder) + "/"):
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
            return real(fd, data)
        return write

    monkeypatch.setattr(os, "write", disk_full_in(tmp_path / "full"))
    with pytest.raises(OutputError, match=r"full/b.json: writing failed \(No space left on device\)"):
        write_all([(tmp_path / "a.csv", "first"), (tmp_path / "full" / "b.json", "second")])
    assert listing(tmp_path) == ["full"]


def test_a_failing_rename_undoes_the_files_already_put_in_place(tmp_path, monkeypatch):
    real = os.replace
    calls = []

    def replace(src, dst, **kw):
        calls.append(dst)
        if len(calls) == 2:
            raise OSError(errno.EIO, os.strerror(errno.EIO))
        return real(src, dst, **kw)

    monkeypatch.setattr(os, "replace", replace)
    with pytest.raises(OutputError, match=r"b.json: it could not be put in place"):
        write_all([(tmp_path / "a.csv", "first"), (tmp_path / "b.json", "second")])
    assert listing(tmp_path) == []


def test_an_output_folder_is_created_only_when_named_and_removed_again_on_failure(tmp_path):
    plots = tmp_path / "plots"
    with pytest.raises(OutputError, match="the folder .*plots does not exist"):
        write_all([(plots / "a.png", b"x")])   # not named as an output folder: not created
    with pytest.raises(OutputError, match="nope/b.json: the folder .*nope does not exist"):
        write_all([(plots / "a.png", b"x"), (tmp_path / "nope" / "b.json", "{}")], directories=[plots])
    assert listing(tmp_path) == []
    write_all([(plots / "a.png", b"x")], directories=[plots])
    assert listing(tmp_path) == ["plots", "plots/a.png"]
    with pytest.raises(OutputError, match="the folder .*deep does not exist"):
        write_all([], directories=[tmp_path / "deep" / "er"])   # only the named folder, never its parents
    assert listing(tmp_path) == ["plots", "plots/a.png"]


def test_the_same_file_twice_is_refused(tmp_path):
    (tmp_path / "link.csv").symlink_to(tmp_path / "a.csv")
    with pytest.raises(OutputError, match="named twice"):
        write_all([(tmp_path / "a.csv", "1"), (tmp_path / "link.csv", "2")])
    assert listing(tmp_path) == ["link.csv"]


# ---------------------------------------------------------------------------
# every command: a second output that cannot be written leaves nothing
# ---------------------------------------------------------------------------

def run_here(capsys, args: list[str], cwd: Path) -> tuple[int, str, str]:
    from thrustgraph.cli import main

    old = os.getcwd()
    os.chdir(cwd)
    try:
        rc = main(args)
    finally:
        os.chdir(old)
    out, err = capsys.readouterr()
    return rc, out, err


RECORD = ["--map", "load=thrust", "--start-at", "0 s"]
FIT = ["--fit", "components.neck.discharge_coefficient=0.5..1.0"]

CASES = {
    "run": ["run", "--csv", "ok.csv", "--json", "nope/b.json"],
    "run-plots": ["run", "--json", "ok.json", "--plots", "nope/plots"],
    "export": ["export", "--csv", "ok.csv", "--json", "nope/b.json"],
    "export-out-dir": ["export", "--json", "ok.json", "--out-dir", "nope/out"],
    "export-device": ["export", "--csv", "ok.csv", "--json", "/dev/null"],
    "graph": ["graph", "--out", "nope/graph.svg"],
    "plot": ["plot", "--out-dir", "nope/plots"],
    "report": ["report", "--out", "nope/report.html"],
    "new": ["new", "nope/model.toml"],
    "study-table": ["study", "sweep", "--vary", "components.bottle.fill=0.2, 0.3", "--engine", "serial",
                    "--table", "ok.csv", "--plots", "nope/plots"],
    "study-summary": ["study", "dispersion", "--spread", "launch.elevation=normal(sd=1 deg)", "--samples", "3",
                      "--engine", "serial", "--table", "ok.csv", "--summary", "nope/s.csv"],
    "compare": ["compare", "held.toml", "stand.csv", *RECORD, "--plot", "ok.png", "--json", "nope/c.json"],
    "calibrate": ["calibrate", "held.toml", "stand.csv", *RECORD, *FIT, "--out", "cal.toml", "--report",
                  "/proc/nope/x"],
    "calibrate-plot": ["calibrate", "held.toml", "stand.csv", *RECORD, *FIT, "--out", "cal.toml", "--report",
                       "fit.json", "--plot", "nope/fit.png"],
    "overlay": ["overlay", "held.toml", "stand.csv", *RECORD, "--table", "ok.csv", "--plots", "nope/plots"],
}


@pytest.mark.parametrize("case", list(CASES))
def test_a_second_output_that_cannot_be_written_leaves_nothing(case, stand, tmp_path, capsys):
    for name in ("held.toml", "stand.csv"):
        (tmp_path / name).write_bytes((stand / name).read_bytes())
    before = listing(tmp_path)
    rc, out, err = run_here(capsys, CASES[case], tmp_path)
    assert rc == 2, out + err
    assert err.startswith("thrustgraph: error: cannot write ") and err.count("\n") == 1, err
    assert "nope" in err or "/dev/null: it is a character device" in err
    assert out == ""                      # refused before flying or fitting: no summary, no report printed
    assert listing(tmp_path) == before    # no first output, no temporary file, no folder


def test_every_writing_command_is_covered():
    from thrustgraph.cli import COMMANDS

    writers = {"run", "compare", "overlay", "calibrate", "new", "export", "graph", "plot", "report", "study"}
    assert writers | {"check", "kinds"} == set(COMMANDS)
    assert writers == {args[0] for args in CASES.values()}


# ---------------------------------------------------------------------------
# every command: a second output that fails while it is written (a full disk) leaves nothing
# ---------------------------------------------------------------------------

@pytest.fixture
def full_disk(tmp_path):
    """``tmp_path/tiny``: a real 16 KiB file system (tmpfs), too small for a time series or a set of plots."""
    tiny = tmp_path / "tiny"
    tiny.mkdir()
    proc = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=16k", "tmpfs", str(tiny)], capture_output=True,
                          text=True)
    if proc.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here (needs root): {proc.stderr.strip()}")
    try:
        yield tiny
    finally:
        subprocess.run(["umount", str(tiny)], check=True)


FULL_CASES = {
    "run": ["run", "--json", "ok.json", "--csv", "tiny/series.csv"],
    "export": ["export", "--json", "ok.json", "--csv", "tiny/series.csv"],
    "plot": ["plot", "--out-dir", "tiny/plots"],
    "study": ["study", "sweep", "--vary", "components.bottle.fill=0.2, 0.3", "--engine", "serial", "--table",
              "ok.csv", "--plots", "tiny/plots"],
    "compare": ["compare", "held.toml", "stand.csv", *RECORD, "--json", "ok.json", "--plot", "tiny/c.png"],
    "calibrate": ["calibrate", "held.toml", "stand.csv", *RECORD, *FIT, "--out", "cal.toml", "--report", "fit.json",
                  "--plot", "tiny/fit.png"],
    "overlay": ["overlay", "held.toml", "stand.csv", *RECORD, "--table", "ok.csv", "--plots", "tiny/plots"],
}


@pytest.mark.parametrize("case", list(FULL_CASES))
def test_a_second_output_that_fills_the_disk_leaves_nothing(case, stand, tmp_path, full_disk, capsys):
    for name in ("held.toml", "stand.csv"):
        (tmp_path / name).write_bytes((stand / name).read_bytes())
    before = listing(tmp_path)
    rc, out, err = run_here(capsys, FULL_CASES[case], tmp_path)
    assert rc == 2, out + err
    assert "tiny/" in err and "No space left on device" in err and err.count("\n") == 1, err
    assert listing(tmp_path) == before    # no first output, no temporary file, no plots folder
    assert "wrote" not in out
