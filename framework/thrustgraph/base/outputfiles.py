"""Output files, written all or nothing: checked before the work, staged, then renamed into place together.

A command that writes several files (a CSV, a JSON file, a folder of plots)
must leave either all of them or none. :func:`check_outputs` refuses a path
that cannot be written *before* any flight is flown; :func:`write_all`
writes every file's bytes to a temporary file beside its target, flushes it
to disk (``fsync``), and only when every file is staged renames them all
into place and flushes their folders. Any failure before the renames removes
every temporary file and every folder the batch created: no first file
without the second. :func:`atomic_write` is the one-file case.

A file too large to hold in memory (a study's table of a million designs) is
written piece by piece into a :class:`StreamedFile`: its bytes go to the same
kind of temporary file as they come, and it is put in place by
:func:`write_all` (``streams=``) together with the other outputs, or by its own
:meth:`StreamedFile.commit`. Until then there is nothing at its path but what
was there before; if the process stops first (an error, Ctrl-C, a kill) the
temporary file goes with it.

What a careful tool does with the path it is given:

* A **symbolic link** is written through: its target gets the new content,
  the link stays a link.
* A **FIFO, device, socket or folder** at the path is refused with a clear
  message (thrustgraph writes regular files only; replacing ``/dev/null``
  or a named pipe with a regular file would be a surprise).
* A **missing parent folder** is an error naming it, never created silently;
  only an output *folder* the user named (``--plots DIR``, ``--out-dir DIR``)
  is created, and only when its own parent exists.
* An existing file keeps its **permissions** (600 stays 600) and, where the
  process may set it, its owner; a new file gets the usual ``0666 & ~umask``.

Temporary files, and what a kill leaves
---------------------------------------
On Linux the bytes go first into an *unnamed* file (``O_TMPFILE``) in the
target's folder: until it is linked there is nothing in the folder to see,
and a process killed while writing (even by SIGKILL) leaves nothing at all,
because the kernel frees an unnamed file when its last descriptor closes.
Only in the commit step, with SIGINT and SIGTERM held back, is each file
linked under a temporary name and renamed over its target, two system calls
apart. Where unnamed files are not supported (other systems, some file
systems) the temporary file is named from the start.

A temporary name is never hidden and says what it is:
``NAME.thrustgraph-partial-PID-XXXXXXXX`` (PID: the writing process). One
left by a killed process is removed by the next write of the same target,
once that process is gone; on any error or interrupt the writer removes its
own before it ends.

Examples
--------
>>> import tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> write_all([(d / "a.csv", "t,x\\n0,1\\n"), (d / "plots" / "x.svg", b"<svg/>")], directories=[d / "plots"])
>>> sorted(str(p.relative_to(d)) for p in d.rglob("*"))
['a.csv', 'plots', 'plots/x.svg']
>>> write_all([(d / "b.csv", "new"), (d / "nowhere" / "c.json", "{}")])
Traceback (most recent call last):
...
thrustgraph.base.errors.OutputError: cannot write ...c.json: the folder ...nowhere does not exist. Fix: create it first (mkdir -p ...nowhere) or write somewhere else.
>>> (d / "b.csv").exists()    # the first file was not written either
False
"""

from __future__ import annotations

import errno
import os
import re
import secrets
import signal
import stat
import threading
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterator, Sequence, Union

from .errors import OutputError

__all__ = ["atomic_write", "write_all", "check_outputs", "check_output", "PARTIAL_TAG", "remove_stale_partials",
           "StreamedFile"]

PathLike = Union[str, os.PathLike]

#: What every temporary file's name carries after its target's name.
PARTIAL_TAG = ".thrustgraph-partial-"

_KINDS = ((stat.S_ISFIFO, "a FIFO (named pipe)"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))
_NAME_MAX = 255


# --- checking ---------------------------------------------------------------------------------------------------

def _real(path: Path) -> Path:
    """The path that will be written: symbolic links followed (a link is written through, not replaced)."""
    real = Path(os.path.realpath(path))
    if os.path.islink(real):
        raise OutputError(str(path), "it is a symbolic link that leads round in a loop",
                          "point the link at a file, or write somewhere else")
    return real


def _probe(folder: Path, shown: PathLike) -> None:
    """Create and drop a file in ``folder``: the one sure test that it can be written (as root, too)."""
    try:
        fd = _unnamed(folder)
        if fd is None:
            name = folder / f".thrustgraph-probe-{os.getpid()}-{secrets.token_hex(4)}"
            fd = os.open(name, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
            os.unlink(name)
        os.close(fd)
    except OSError as exc:
        raise OutputError(str(shown), f"the folder {folder} cannot be written ({exc.strerror or exc})",
                          "check its permissions and that the file system is not read-only, or write elsewhere"
                          ) from None


def check_output(path: PathLike, *, directory: bool = False, new_folders: Sequence[PathLike] = ()) -> Path:
    """Refuse an output path that cannot be written; return the real path that will be written.

    Parameters
    ----------
    path : a file to write, or (``directory=True``) an output folder, which may be created if its parent exists
    new_folders : output folders that the same batch creates (a file may go into one of them)

    Raises
    ------
    OutputError
        The path is a folder (for a file), a file (for a folder), a FIFO, device or socket, a link loop; its
        parent folder is missing or is a file; or the folder cannot be written.

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> check_output(d / "a.csv") == (d / "a.csv").resolve()
    True
    >>> check_output(d)
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.OutputError: cannot write ...: it is a folder. Fix: give a file name.
    """
    p = Path(path)
    real = _real(p)
    pending = {Path(os.path.realpath(f)) for f in new_folders}
    try:
        st = os.stat(real)
    except (FileNotFoundError, NotADirectoryError):
        st = None
    except OSError as exc:
        raise OutputError(str(p), f"it cannot be examined ({exc.strerror or exc})", "write somewhere else") from None
    if st is not None:
        if directory:
            if not stat.S_ISDIR(st.st_mode):
                raise OutputError(str(p), "it is a file, not a folder", "name a folder for these outputs")
            _probe(real, p)
            return real
        if stat.S_ISDIR(st.st_mode):
            raise OutputError(str(p), "it is a folder", "give a file name")
        for test, what in _KINDS:
            if test(st.st_mode):
                raise OutputError(str(p), f"it is {what}, not a regular file; thrustgraph writes only regular "
                                  "files and does not replace anything else", "give the name of a regular file")
    parent = real.parent
    if parent in pending:
        return real
    try:
        pst = os.stat(parent)
    except (FileNotFoundError, NotADirectoryError):
        for up in parent.parents:   # the nearest thing that exists: a file in the way, or a folder to create in
            if os.path.lexists(up):
                if not up.is_dir():
                    raise OutputError(str(p), f"{up} is a file, not a folder", "choose another output folder") from None
                break
        raise OutputError(str(p), f"the folder {parent} does not exist",
                          f"create it first (mkdir -p {parent}) or write somewhere else") from None
    except OSError as exc:
        raise OutputError(str(p), f"the folder {parent} cannot be examined ({exc.strerror or exc})",
                          "write somewhere else") from None
    if not stat.S_ISDIR(pst.st_mode):
        raise OutputError(str(p), f"{parent} is a file, not a folder", "choose another output folder")
    _probe(parent, p)
    return real


def check_outputs(files: Sequence[PathLike] = (), directories: Sequence[PathLike] = ()) -> list[Path]:
    """Check every output of a command before it does its work (see :func:`check_output`).

    Returns the real paths of the files, in order. Two outputs that are the same file are refused.

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> check_outputs([d / "a.csv", d / "a.csv"])
    Traceback (most recent call last):
    ...
    thrustgraph.base.errors.OutputError: cannot write ...a.csv: it is named twice among this command's outputs. Fix: give each output its own file name.
    """
    for d in directories:
        check_output(d, directory=True)
    seen: dict[Path, PathLike] = {}
    out = []
    for f in files:
        real = check_output(f, new_folders=directories)
        if real in seen:
            raise OutputError(str(f), "it is named twice among this command's outputs",
                              "give each output its own file name")
        seen[real] = f
        out.append(real)
    return out


# --- staging and committing ------------------------------------------------------------------------------------

def _unnamed(folder: Path) -> int | None:
    """An unnamed file in ``folder`` (Linux ``O_TMPFILE``), or None where that is not supported or cannot be
    given a name afterwards (tried once per file system)."""
    flag = getattr(os, "O_TMPFILE", None)
    if flag is None or not os.path.isdir("/proc/self/fd"):
        return None
    try:
        fd = os.open(folder, flag | os.O_WRONLY, 0o666)
    except OSError as exc:
        if exc.errno in (errno.EOPNOTSUPP, errno.EISDIR, errno.EINVAL, errno.ENOENT) and folder.is_dir():
            return None
        raise
    dev = os.fstat(fd).st_dev
    if dev not in _LINKABLE:
        probe = folder / f".thrustgraph-probe-{os.getpid()}-{secrets.token_hex(4)}"
        try:
            _link(fd, probe)
            os.unlink(probe)
            _LINKABLE[dev] = True
        except OSError:
            _LINKABLE[dev] = False
    if not _LINKABLE[dev]:
        os.close(fd)
        return None
    return fd


#: File systems (by device number) on which an unnamed file can be linked into a folder.
_LINKABLE: dict[int, bool] = {}


def _link(fd: int, name: Path) -> None:
    """Give an unnamed file a name: linkat(AT_SYMLINK_FOLLOW) through /proc (plain link() does not follow it)."""
    proc = os.open("/proc/self/fd", os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    try:
        os.link(str(fd), name, src_dir_fd=proc, follow_symlinks=True)
    finally:
        os.close(proc)


def _partial_prefix(name: str) -> str:
    """``NAME.thrustgraph-partial-``, the name cut so that the whole temporary name fits a file system's limit."""
    room = _NAME_MAX - len(PARTIAL_TAG.encode()) - 32
    raw = name.encode("utf-8", "surrogateescape")
    if len(raw) > room:
        name = raw[:room].decode("utf-8", "ignore")
    return name + PARTIAL_TAG


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale_partials(target: PathLike) -> list[Path]:
    """Remove the temporary files of ``target`` left by processes that are gone (a kill between write and
    rename); return what was removed.

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.csv.thrustgraph-partial-999999999-0badf00d").write_text("half")
    >>> [p.name for p in remove_stale_partials(d / "a.csv")]
    ['a.csv.thrustgraph-partial-999999999-0badf00d']
    """
    t = Path(target)
    prefix = _partial_prefix(t.name)
    pattern = re.compile(re.escape(prefix) + r"(\d+)-[0-9a-f]{8}")
    removed = []
    try:
        names = os.listdir(t.parent)
    except OSError:
        return removed
    for name in names:
        m = pattern.fullmatch(name)
        if m and int(m.group(1)) != os.getpid() and not _alive(int(m.group(1))):
            try:
                os.unlink(t.parent / name)
                removed.append(t.parent / name)
            except OSError:
                pass
    return removed


@dataclass
class _Staged:
    """One file written but not yet in place."""

    target: Path
    fd: int | None = None          # an unnamed file, linked at commit
    temp: Path | None = None       # the named temporary file
    existed: bool = False
    placed: bool = False
    wfd: int | None = None         # the named temporary file's descriptor while it is written


def _open_staged(target: Path) -> _Staged:
    """A temporary file for ``target`` (unnamed where the system allows), open for writing, with the permissions
    (and, where allowed, the owner) of the file it will replace."""
    remove_stale_partials(target)
    try:
        st = os.stat(target)
    except FileNotFoundError:
        st = None
    item = _Staged(target, existed=st is not None)
    fd = _unnamed(target.parent)
    if fd is None:
        item.temp = _temp_name(target)
        fd = item.wfd = os.open(item.temp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    else:
        item.fd = fd
    try:
        if st is not None:   # keep the replaced file's permissions and, where allowed, its owner
            os.fchmod(fd, stat.S_IMODE(st.st_mode))
            if st.st_uid != os.geteuid() or st.st_gid != os.getegid():
                try:
                    os.fchown(fd, st.st_uid, st.st_gid)
                except OSError:
                    pass
    except BaseException:
        _discard(item)
        raise
    return item


def _write_fd(item: _Staged) -> int:
    fd = item.fd if item.fd is not None else item.wfd
    assert fd is not None, "the file was already sealed"
    return fd


def _append(item: _Staged, data: bytes) -> None:
    fd = _write_fd(item)
    view = memoryview(data)
    while view:
        view = view[os.write(fd, view):]


def _seal(item: _Staged) -> None:
    """Flush the staged bytes to disk; a named temporary file is closed (it is renamed at the commit)."""
    os.fsync(_write_fd(item))
    if item.wfd is not None:
        os.close(item.wfd)
        item.wfd = None


def _stage(target: Path, data: bytes) -> _Staged:
    item = _open_staged(target)
    try:
        _append(item, data)
        _seal(item)
    except BaseException:
        _discard(item)       # closes the unnamed file (the kernel frees it) or removes the named temporary file
        raise
    return item


def _temp_name(target: Path) -> Path:
    return target.parent / f"{_partial_prefix(target.name)}{os.getpid()}-{secrets.token_hex(4)}"


def _commit(item: _Staged) -> None:
    if item.fd is not None:
        item.temp = _temp_name(item.target)
        _link(item.fd, item.temp)
        os.close(item.fd)
        item.fd = None
    assert item.temp is not None
    os.replace(item.temp, item.target)
    item.temp = None
    item.placed = True


def _discard(item: _Staged) -> None:
    if item.wfd is not None:
        os.close(item.wfd)
        item.wfd = None
    if item.fd is not None:
        os.close(item.fd)
        item.fd = None
    if item.temp is not None:
        try:
            os.unlink(item.temp)
        except FileNotFoundError:
            pass
        item.temp = None


def _fsync_folder(folder: Path) -> None:
    fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    try:
        os.fsync(fd)
    except OSError as exc:   # some file systems cannot sync a folder; the files themselves are synced
        if exc.errno not in (errno.EINVAL, errno.ENOTSUP, errno.EBADF):
            raise
    finally:
        os.close(fd)


@contextmanager
def _signals_held() -> Iterator[None]:
    """Hold SIGINT and SIGTERM back (they are delivered after): the renames are not cut half-way."""
    if threading.current_thread() is not threading.main_thread() or not hasattr(signal, "pthread_sigmask"):
        yield
        return
    held = {signal.SIGINT, signal.SIGTERM}
    old = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _as_bytes(data: str | bytes) -> bytes:
    return data.encode("utf-8") if isinstance(data, str) else bytes(data)


def write_all(outputs: Sequence[tuple[PathLike, str | bytes]], *, directories: Sequence[PathLike] = (),
              streams: Sequence["StreamedFile"] = ()) -> None:
    """Write every output or none (text is written as UTF-8).

    Parameters
    ----------
    outputs : (path, content) pairs
    directories : output folders named by the user, created when missing (their parent must exist); a file of
        ``outputs`` may go into one of them. Folders this call created are removed again if it fails.
    streams : files already written piece by piece (:class:`StreamedFile`), put in place with the others; if
        anything fails they are discarded too

    Raises
    ------
    OutputError
        A path cannot be written (see :func:`check_output`), or writing failed (disk full...); nothing was left.
    """
    try:
        reals = check_outputs([p for p, _ in outputs] + [f.shown for f in streams], directories)[:len(outputs)]
    except BaseException:
        for f in streams:
            f.discard()
        raise
    created: list[Path] = []
    staged: list[_Staged] = []
    shown_all: list[PathLike] = []
    try:
        for d in directories:
            real = Path(os.path.realpath(d))
            if not real.exists():
                try:
                    os.mkdir(real)
                except OSError as exc:
                    raise OutputError(str(d), f"the folder cannot be created ({exc.strerror or exc})",
                                      "check the parent folder's permissions, or write elsewhere") from None
                created.append(real)
        for (shown, data), real in zip(outputs, reals):
            try:
                staged.append(_stage(real, _as_bytes(data)))
            except OSError as exc:
                raise OutputError(str(shown), f"writing failed ({exc.strerror or exc})",
                                  "check the space and permissions of its folder, or write elsewhere") from None
            shown_all.append(shown)
        for f in streams:
            staged.append(f._sealed())
            shown_all.append(f.shown)
        with _signals_held():
            for item, shown in zip(staged, shown_all):
                try:
                    _commit(item)
                except OSError as exc:
                    raise OutputError(str(shown), f"it could not be put in place ({exc.strerror or exc})",
                                      "check its folder, or write elsewhere") from None
            for folder in dict.fromkeys([i.target.parent for i in staged] + [c.parent for c in created]):
                _fsync_folder(folder)
    except BaseException:
        for item in staged:
            _discard(item)
            if item.placed and not item.existed:
                try:
                    os.unlink(item.target)
                except OSError:
                    pass
        for f in streams:
            f.discard()
        for folder in reversed(created):
            try:
                os.rmdir(folder)
            except OSError:
                pass
        raise


class StreamedFile:
    """An output file written piece by piece, all or nothing: the bytes go into a temporary file beside the
    target (unnamed where the system allows: nothing to see, and nothing left if the process is killed), and
    the file appears at its path only when it is committed (:meth:`commit`, or :func:`write_all` with
    ``streams=``, together with other outputs). :meth:`discard` (or leaving a ``with`` block by an exception)
    drops it.

    The path is checked when the file is opened (:func:`check_output`): a path that cannot be written is refused
    before any work.

    >>> import tempfile, pathlib, os
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with StreamedFile(d / "t.csv") as f:
    ...     f.write("a,b\\n")
    ...     f.write("1,2\\n")
    ...     os.listdir(d)
    []
    >>> f.commit()
    >>> (d / "t.csv").read_text(), os.listdir(d)
    ('a,b\\n1,2\\n', ['t.csv'])
    """

    def __init__(self, path: PathLike) -> None:
        self.shown = path
        self.real = check_output(path)
        self._item: _Staged | None = None
        try:
            self._item = _open_staged(self.real)
        except OSError as exc:
            raise OutputError(str(path), f"writing failed ({exc.strerror or exc})",
                              "check the space and permissions of its folder, or write elsewhere") from None
        self.size = 0

    def _live(self) -> _Staged:
        if self._item is None:
            raise OutputError(str(self.shown), "the file was already committed or discarded",
                              "open a new StreamedFile")
        return self._item

    def write(self, data: str | bytes) -> None:
        """Append text (as UTF-8) or bytes."""
        raw = _as_bytes(data)
        try:
            _append(self._live(), raw)
        except OSError as exc:
            self.discard()
            raise OutputError(str(self.shown), f"writing failed ({exc.strerror or exc})",
                              "check the space of its folder, or write elsewhere") from None
        self.size += len(raw)

    def copy_from(self, source: Any) -> None:
        """Append the whole content of an open file (a file object or descriptor), copied by the kernel where it
        can (``copy_file_range``), never held in memory."""
        src = source if isinstance(source, int) else source.fileno()
        dst = _write_fd(self._live())
        left = os.fstat(src).st_size
        offset = 0
        try:
            while left > 0:
                done = 0
                if hasattr(os, "copy_file_range"):
                    try:
                        done = os.copy_file_range(src, dst, min(left, 1 << 30), offset)
                    except OSError as exc:
                        if exc.errno not in (errno.EXDEV, errno.ENOSYS, errno.EINVAL, errno.EOPNOTSUPP,
                                             errno.EBADF, errno.EPERM):
                            raise
                        done = 0
                if done <= 0:
                    block = os.pread(src, min(left, 1 << 20), offset)
                    if not block:
                        break
                    view = memoryview(block)
                    while view:
                        view = view[os.write(dst, view):]
                    done = len(block)
                offset += done
                left -= done
                self.size += done
        except OSError as exc:
            self.discard()
            raise OutputError(str(self.shown), f"writing failed ({exc.strerror or exc})",
                              "check the space of its folder, or write elsewhere") from None

    def _sealed(self) -> _Staged:
        item = self._live()
        if item.wfd is not None or item.fd is not None and item.temp is None:
            try:
                _seal(item)
            except OSError as exc:
                self.discard()
                raise OutputError(str(self.shown), f"writing failed ({exc.strerror or exc})",
                                  "check the space of its folder, or write elsewhere") from None
        self._item = None     # write_all owns it now: it commits or discards it
        return item

    def commit(self) -> None:
        """Put the file in place (alone; :func:`write_all` puts it in place with other outputs)."""
        write_all([], streams=[self])

    def discard(self) -> None:
        """Drop the file: nothing is written (an existing file at the path is left as it was)."""
        if self._item is not None:
            _discard(self._item)
            self._item = None

    def __enter__(self) -> "StreamedFile":
        return self

    def __exit__(self, exc_type: Any, *exc: Any) -> None:
        if exc_type is not None:
            self.discard()

    def __del__(self) -> None:
        try:
            self.discard()
        except Exception:   # pragma: no cover - interpreter shutdown
            pass


def atomic_write(path: PathLike, data: str | bytes) -> None:
    """Write one file through an unnamed (or clearly named) temporary file and a rename: all or nothing.

    See the module's description for links, FIFOs, permissions and missing folders.

    >>> import tempfile, pathlib, os
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> atomic_write(d / "a.txt", "hello")
    >>> os.chmod(d / "a.txt", 0o600)
    >>> atomic_write(d / "a.txt", "hello again")
    >>> (d / "a.txt").read_text(), oct(os.stat(d / "a.txt").st_mode & 0o777), os.listdir(d)
    ('hello again', '0o600', ['a.txt'])
    """
    write_all([(path, data)])
