"""Safe file input and output: bounded reads of regular files, atomic writes that respect what is there.

Reading (:func:`read_regular_file`): the file is opened with ``O_NONBLOCK`` (so a named pipe cannot
hang the open), the open handle is ``fstat``-ed and refused unless it is a regular file (a folder,
named pipe, device or socket is named as such), and its size is checked on that handle before
anything is read.

Writing (:func:`atomic_path`, :func:`atomic_write_bytes`, :func:`atomic_write_text`):

- the data go to a temporary file ``.NAME.XXXXXXXX.tmp`` in the target's folder, are flushed and
  fsync-ed, and the temporary file is renamed over the target only when complete;
- a symbolic link is written through: its target is replaced and the link stays a link;
- an existing file keeps its permission bits (and, where the system allows, its owner); a new file
  gets 0666 minus the umask (the temporary file is created with mode 0666 and the kernel applies
  the umask);
- a read-only existing file (no write permission bit, or not writable by this user), a file with
  more than one hard link (a rename would split the links) and anything that is not a regular
  file are refused with :class:`OutputPathError`, before anything is written;
- the temporary file is removed on every exit path: an error, KeyboardInterrupt (SIGINT) and,
  once :func:`install_signal_cleanup` has run (the command line does so), SIGTERM and SIGHUP.

:func:`check_outputs` runs the same checks on every output of a command before the command
computes anything, and also refuses an output that is one of the command's inputs or another of
its outputs (same resolved path, or the same file through a hard link).
"""

from __future__ import annotations

import contextlib
import os
import secrets
import signal
import stat
import threading
from collections.abc import Iterable, Mapping
from pathlib import Path

__all__ = [
    "InputFileError",
    "OutputPathError",
    "atomic_path",
    "atomic_write_bytes",
    "atomic_write_text",
    "check_outputs",
    "install_signal_cleanup",
    "read_regular_file",
]

_KIND = (
    (stat.S_ISDIR, "a folder"),
    (stat.S_ISFIFO, "a named pipe"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
)


def _kind(mode: int) -> str:
    return next((name for test, name in _KIND if test(mode)), "not a regular file")


class InputFileError(OSError):
    """An input path that is not a readable regular file of a sensible size; str() is ``PATH: problem``."""

    def __init__(self, path: str | os.PathLike, problem: str):
        super().__init__(problem)
        self.path = str(path)
        self.problem = problem

    def __str__(self) -> str:
        return f"{self.path}: {self.problem}"


class OutputPathError(OSError):
    """An output path that must not or cannot be written; str() is ``PATH (OPTION): problem``."""

    def __init__(self, path: str | os.PathLike, problem: str, label: str = ""):
        super().__init__(problem)
        self.path = str(path)
        self.problem = problem
        self.label = label

    def __str__(self) -> str:
        where = f"{self.path} ({self.label})" if self.label else self.path
        return f"{where}: {self.problem}"


# ----- reading ----------------------------------------------------------------------------------
def read_regular_file(path: str | os.PathLike, max_bytes: int) -> bytes:
    """The bytes of a regular file of at most ``max_bytes``.

    Raises InputFileError for a folder, named pipe, device or socket (checked on the open handle,
    which was opened without blocking) and for a file larger than ``max_bytes`` (checked on the
    handle before reading, and again while reading in case the file grows); OSError when the
    file cannot be opened or read.
    """
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0)
    fd = os.open(path, flags)
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise InputFileError(path, f"is {_kind(st.st_mode)}, not a regular file; not read")
        if st.st_size > max_bytes:
            raise InputFileError(path, f"file is {st.st_size:,} bytes, over the limit of {max_bytes:,}; not read")
        chunks, total = [], 0
        while True:
            chunk = os.read(fd, min(1 << 20, max_bytes + 1 - total))
            if not chunk:
                break
            chunks.append(chunk)
            total += len(chunk)
            if total > max_bytes:
                raise InputFileError(path, f"file grew past the limit of {max_bytes:,} bytes while being read")
        return b"".join(chunks)
    finally:
        os.close(fd)


# ----- output checks ----------------------------------------------------------------------------
def _same_file(a: str, b: str) -> bool:
    """Same resolved path, or the same existing file (hard links, bind mounts)."""
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist
        return False


def _check_target(path: str | os.PathLike, label: str = "") -> tuple[Path, os.stat_result | None]:
    """(resolved target, its stat or None when new) for an output path; OutputPathError when it may not be written."""
    p = os.fspath(path)
    if not p:
        raise OutputPathError(p, "empty file name", label)
    target = Path(os.path.realpath(p))
    folder = target.parent
    try:
        st = os.stat(target)
    except FileNotFoundError:
        st = None
    except OSError as e:
        raise OutputPathError(p, f"cannot be examined: {e.strerror or e}", label) from None
    if st is not None and stat.S_ISDIR(st.st_mode):
        raise OutputPathError(p, "is a folder; give a file name", label)
    if not folder.exists():
        raise OutputPathError(p, f"folder {folder} does not exist", label)
    if not folder.is_dir():
        raise OutputPathError(p, f"{folder} is not a folder", label)
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputPathError(p, f"folder {folder} is not writable", label)
    if st is not None:
        if not stat.S_ISREG(st.st_mode):
            raise OutputPathError(p, f"is {_kind(st.st_mode)}, not a regular file; not replaced", label)
        if not (st.st_mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH)) or not os.access(target, os.W_OK):
            raise OutputPathError(p, "is read-only; not replaced (make it writable or choose another name)", label)
        if st.st_nlink > 1:
            raise OutputPathError(
                p, f"has {st.st_nlink} hard links; replacing it would split them (choose another name)", label)
    return target, st


def check_outputs(outputs: Mapping[str, str | os.PathLike | None],
                  inputs: Iterable[str | os.PathLike | None] = ()) -> dict[str, Path]:
    """Check every output of one command before it computes anything.

    Parameters
    ----------
    outputs : {option label: path or None}
        The command's outputs, e.g. ``{"-o": "r.pdf", "--csv": None}`` (None: not asked for).
    inputs : paths
        The command's input files.

    Returns
    -------
    {option label: resolved target path} of the outputs that were given.

    Raises
    ------
    OutputPathError
        For the first output that is a folder, lies in a missing or unwritable folder, is an
        existing read-only, hard-linked or non-regular file, is one of the inputs, or is the same
        file as another output.
    """
    ins = [os.fspath(i) for i in inputs if i]
    done: dict[str, Path] = {}
    given: list[tuple[str, str]] = []
    for label, path in outputs.items():
        if path is None:
            continue
        p = os.fspath(path)
        for i in ins:
            if _same_file(p, i):
                raise OutputPathError(p, f"is an input of this command ({i}); refusing to overwrite it", label)
        for other_label, other in given:
            if _same_file(p, other):
                raise OutputPathError(p, f"is the same file as the {other_label} output", label)
        done[label], _ = _check_target(p, label)
        given.append((label, p))
    return done


# ----- atomic writes ----------------------------------------------------------------------------
_LIVE_TEMPS: set[str] = set()
_LIVE_LOCK = threading.Lock()


def _remove_live_temps() -> None:
    with _LIVE_LOCK:
        names = list(_LIVE_TEMPS)
    for name in names:
        with contextlib.suppress(OSError):
            os.unlink(name)


def _new_temp(target: Path) -> str:
    """Create and register an empty temporary file beside ``target`` (mode 0666 minus the umask)."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0)
    while True:
        name = str(target.parent / f".{target.name}.{secrets.token_hex(4)}.tmp")
        with _LIVE_LOCK:
            _LIVE_TEMPS.add(name)  # registered before it exists: a signal can never leave it unknown
        try:
            os.close(os.open(name, flags, 0o666))
            return name
        except FileExistsError:
            with _LIVE_LOCK:
                _LIVE_TEMPS.discard(name)
        except BaseException:
            with _LIVE_LOCK:
                _LIVE_TEMPS.discard(name)
            raise


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike):
    """Yield a temporary path beside ``path`` to write; when the block ends without error, give it the
    existing file's permission bits (a new file keeps 0666 minus the umask), fsync it and rename it over
    the target (a symbolic link's target: the link stays). On any error or interruption the temporary
    file is removed and an existing file is left untouched. Raises OutputPathError (before creating
    anything) for a path that may not be written: see the module notes.
    """
    target, st = _check_target(path)
    tmp = _new_temp(target)
    try:
        try:
            yield tmp
            if st is not None:
                os.chmod(tmp, stat.S_IMODE(st.st_mode))
                with contextlib.suppress(OSError):  # keeps the owner where allowed (root, or own group)
                    os.chown(tmp, st.st_uid, st.st_gid)
            with open(tmp, "rb+") as fh:
                os.fsync(fh.fileno())
            os.replace(tmp, target)
        except OSError as e:
            if e.filename == tmp and not isinstance(e, OutputPathError):  # name the target, not the temporary file
                raise type(e)(e.errno, e.strerror, os.fspath(path)) from None
            raise
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    finally:
        with _LIVE_LOCK:
            _LIVE_TEMPS.discard(tmp)
    _fsync_folder(target.parent)


def _fsync_folder(folder: Path) -> None:
    """Make the rename durable (best effort: not every file system lets a folder be fsync-ed)."""
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> None:
    """Write bytes to ``path`` atomically (see :func:`atomic_path`)."""
    with atomic_path(path) as tmp, os.fdopen(os.open(tmp, os.O_WRONLY | os.O_TRUNC), "wb") as f:
        f.write(data)
        f.flush()


def atomic_write_text(path: str | os.PathLike, text: str) -> None:
    """Write UTF-8 text to ``path`` atomically (see :func:`atomic_path`)."""
    atomic_write_bytes(path, text.encode("utf-8"))


def install_signal_cleanup(signums: Iterable[int] = ()) -> None:
    """Make SIGTERM and SIGHUP (or the given signals) end the program through an exception.

    The handler removes every temporary file still being written, then raises SystemExit(128 +
    signal number), so ``with`` blocks and ``finally`` clauses run as they do for an error. SIGINT
    already raises KeyboardInterrupt. Does nothing outside the main thread (Python runs signal
    handlers only there).
    """
    if threading.current_thread() is not threading.main_thread():
        return

    def handler(signum, _frame):
        _remove_live_temps()
        raise SystemExit(128 + signum)

    for s in tuple(signums) or tuple(getattr(signal, n) for n in ("SIGTERM", "SIGHUP") if hasattr(signal, n)):
        signal.signal(s, handler)
