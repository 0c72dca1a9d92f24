"""Output files: checked before any work, written whole or not at all, one writer at a time.

Every command that writes a file (``run --out``, ``scan --out``, ``--plot``)
calls :func:`check_output` before it computes anything, so that a missing
folder, a read-only disk or a disk too small ends at once as bad input
(exit 2, the path named) rather than after hours of work.

:func:`commit` puts a finished file in place: the bytes go to
``FILE.partial``, are synced to the disk and renamed to ``FILE``. If the
write fails (the disk fills, the device goes away) the partial file is
removed and :class:`OutputError` says so; ``FILE`` never exists half
written.

:class:`OutputLock` keeps a second pumpsim from writing the same output (and
its scan journal) at the same time: ``FILE.lock`` holds an operating-system
lock (``flock``) and the holder's pid, host and command. The system drops the
lock when its holder ends in any way, so the lock of a killed process is
simply taken over by the next one.
"""

import contextlib
import datetime
import errno
import os
import shutil
import socket
import sys
from pathlib import Path

from .errors import InputError

SPARE = 1 << 20  # bytes: free space kept beyond an estimate (file-system overheads)


class OutputError(OSError):
    """A file could not be written (exit 1); the message says what is kept and where.
    An ``OSError``, so that callers that handle failed writes (the window) handle it."""


def partial_path(out) -> Path:
    """The temporary name of an output file until it is complete."""
    out = Path(out)
    return out.with_name(out.name + ".partial")


def lock_path(out) -> Path:
    """The lock file of an output."""
    out = Path(out)
    return out.with_name(out.name + ".lock")


def size_text(n) -> str:
    """Bytes for people: ``"3.2 MB"``."""
    for unit, scale in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= scale:
            return f"{n / scale:.3g} {unit}"
    return f"{int(n)} bytes"


def check_output(path, estimate=0, file=None, option="--out"):
    """Refuse an output path that cannot take the file, before any work.

    Parameters
    ----------
    path : str or Path
        The file to be written.
    estimate : int
        Bytes the output will need (with any journal written beside it).
    file : str, optional
        The setup, for the message.
    option : str
        The command-line option that named ``path``.

    Raises
    ------
    InputError
        If the folder is missing or not a folder, ``path`` is a folder, the
        folder cannot be written (permissions, a read-only file system) or
        its disk has less than ``estimate`` free.
    """
    p = Path(path)
    folder = p.parent

    def refuse(reason):
        raise InputError(f"{reason}; nothing was computed", file, option)

    if p.is_dir():
        refuse(f"{path} is a folder, not a file name")
    if not folder.exists():
        refuse(f"the folder {folder} of {path} does not exist")
    if not folder.is_dir():
        refuse(f"{folder} (in {path}) is not a folder")
    probe = folder / f".{p.name}.{os.getpid()}.probe"
    try:  # the only sure test: permissions, read-only mounts and root all answer here
        fd = os.open(probe, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        refuse(f"cannot write in the folder {folder} of {path} ({exc.strerror or exc})")
    free = shutil.disk_usage(folder).free
    if free < estimate + SPARE:
        refuse(f"{path} needs about {size_text(estimate + SPARE)} and its disk has "
               f"{size_text(free)} free")


def commit(path, data, what="the file"):
    """Write ``data`` (bytes) to ``path`` whole, or leave nothing there.

    Parameters
    ----------
    path : str or Path
    data : bytes
    what : str
        Said in the message if the write fails.

    Raises
    ------
    OutputError
        When the disk has not room for ``data`` or the write fails;
        ``FILE.partial`` is removed and ``FILE`` is untouched.
    """
    path = Path(path)
    tmp = partial_path(path)
    try:
        free = shutil.disk_usage(path.parent).free
        if free < len(data):
            raise OSError(28, f"it needs {size_text(len(data))}, the disk has "
                              f"{size_text(free)} free")
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())  # on the disk before the rename makes it the finished file
        os.replace(tmp, path)
    except BaseException as exc:
        tmp.unlink(missing_ok=True)
        if isinstance(exc, OSError):
            raise OutputError(f"could not write {what} {path}: {exc.strerror or exc}") from None
        raise


@contextlib.contextmanager
def written(path, what="the file"):
    """Around code that writes ``path`` directly (a figure): if it fails, no file is
    left, and a failed write is an :class:`OutputError`."""
    try:
        yield
    except BaseException as exc:
        Path(path).unlink(missing_ok=True)
        if isinstance(exc, OSError):
            raise OutputError(f"could not write {what} {path}: {exc.strerror or exc}") from None
        raise


class OutputLock:
    """Hold ``FILE.lock`` while this process writes ``FILE`` (module docstring).

    Parameters
    ----------
    out : str or Path
        The output file.
    command : str
        Stored in the lock file, shown to a second writer.
    file : str, optional
        The setup, for the message.

    Raises
    ------
    InputError
        On entry, if another live process holds the lock; the message names it.
    """

    def __init__(self, out, command="", file=None):
        self.out, self.path = Path(out), lock_path(out)
        self.command, self.file = command, file
        self.fd = None

    def __enter__(self):
        while True:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
            if not _try_lock(fd):
                try:
                    text = os.read(fd, 4096).decode("utf-8", "replace")
                except OSError:  # Windows refuses reads of a region another process locked
                    text = ""
                holder = text.partition("\n")[0].strip() or "unknown"
                os.close(fd)
                raise InputError(f"{self.out} is being written by another pumpsim ({holder}; "
                                 f"its command is in {self.path}); wait for it to end, or "
                                 "write to another file", self.file, "--out")
            try:  # its last holder may have removed the file between our open and lock
                if os.stat(self.path).st_ino == os.fstat(fd).st_ino:
                    break
            except FileNotFoundError:
                pass
            os.close(fd)
        started = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
        os.ftruncate(fd, 0)
        os.write(fd, f"pid {os.getpid()} on {socket.gethostname()}, since {started}\n"
                     f"{self.command}\n".encode())
        self.fd = fd
        return self

    def __exit__(self, *exc):
        if self.fd is not None:
            try:  # removed while still locked, so no one can take a file about to vanish
                os.unlink(self.path)
            except OSError:
                pass
            os.close(self.fd)
            self.fd = None
        return False


def _try_lock(fd) -> bool:
    """Take the exclusive lock of an open file without waiting; ``False`` if held."""
    if sys.platform == "win32":
        import msvcrt

        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
        except OSError:
            return False
        return True
    import fcntl

    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        return False
    except OSError as exc:  # a file system without locks: write unguarded, as before locks
        if exc.errno not in (errno.ENOLCK, errno.EOPNOTSUPP, errno.ENOSYS):
            raise
    return True
