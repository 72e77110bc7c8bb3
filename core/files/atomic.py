"""Atomic file output: write to a temporary file in the target folder, then rename.

A failed write never leaves a half-written file at the target path (and no temporary
file behind); an existing file keeps its permission bits.

- A symbolic link is followed: the file it points to is replaced, atomically in THAT
  file's folder (so a link onto another file system works, and the link itself stays).
- A named pipe or a device (``-o /dev/stdout``, ``-o some.fifo``) is written directly:
  nothing can be renamed onto it. A pipe with no reader is waited for a few seconds, then
  refused with a clear message instead of hanging.
- :func:`write_set_atomic` writes several files all or nothing: every file is first
  written to its temporary neighbour; only when all of them are complete are they renamed
  into place (and if a rename fails, the ones already renamed are put back).
"""

from __future__ import annotations

import contextlib
import errno
import os
import stat
import tempfile
import time
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import TextIO

from ..ground.errors import InputError

# How long a named pipe without a reader is waited for before giving up (seconds).
PIPE_READER_WAIT_S = 5.0


def _write_fd(fd: int, data: bytes) -> None:
    """Write all of ``data`` to ``fd`` (one place, so a test can inject a full disk)."""
    view = memoryview(data)
    while view:
        n = os.write(fd, view)
        view = view[n:]


def _real_target(path: str | os.PathLike[str]) -> Path:
    """The file a write to ``path`` should change: symbolic links followed (even a link
    whose target does not exist yet, which is then created)."""
    return Path(os.path.realpath(os.fspath(path)))


def _check_folder(target: Path, shown: Path, error: type[InputError], what: str) -> None:
    folder = target.parent
    if not folder.is_dir():
        why = "is not a folder" if folder.exists() else "does not exist"
        raise error(f"cannot {what}: {folder} {why}", file=str(shown))


def _special(target: Path) -> bool:
    """True for an existing named pipe, character or block device (written in place)."""
    try:
        mode = os.stat(target).st_mode
    except OSError:
        return False
    return stat.S_ISFIFO(mode) or stat.S_ISCHR(mode) or stat.S_ISBLK(mode)


def _write_special(target: Path, shown: Path, data: bytes, error: type[InputError],
                   what: str) -> None:
    flags = os.O_WRONLY | getattr(os, "O_NONBLOCK", 0)
    deadline = time.monotonic() + PIPE_READER_WAIT_S
    while True:
        try:
            fd = os.open(target, flags)
            break
        except OSError as err:
            if err.errno == errno.ENXIO and time.monotonic() < deadline:
                time.sleep(0.05)        # a named pipe nobody reads yet
                continue
            if err.errno == errno.ENXIO:
                raise error(f"cannot {what}: nothing reads the named pipe "
                            f"(waited {PIPE_READER_WAIT_S:g} s)", file=str(shown)) from None
            raise error(f"cannot {what}: {err.strerror or err}", file=str(shown)) from None
    try:
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)   # the reader sets the pace from here on
        _write_fd(fd, data)
    except OSError as err:
        raise error(f"cannot {what}: {err.strerror or err}", file=str(shown)) from None
    finally:
        os.close(fd)


def _stage(target: Path, shown: Path, data: bytes, error: type[InputError], what: str) -> str:
    """Write ``data`` to a new temporary file beside ``target``; return its path."""
    if target.is_dir():
        raise error(f"cannot {what}: it is a folder", file=str(shown))
    folder = target.parent
    try:
        mode = target.stat().st_mode & 0o777 if target.exists() else 0o644
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=folder)
    except OSError as err:
        raise error(f"cannot {what} in {folder}: {err.strerror or err}", file=str(shown)) from None
    try:
        try:
            _write_fd(fd, data)
            os.fsync(fd)
        finally:
            os.close(fd)
        os.chmod(tmp, mode)
    except OSError as err:
        _unlink_quietly(tmp)
        raise error(f"cannot {what}: {err.strerror or err}", file=str(shown)) from None
    return tmp


def _unlink_quietly(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes,
                       error: type[InputError] = InputError, what: str = "write") -> Path:
    """Write ``data`` to ``path`` atomically; failures raise ``error`` naming the file.

    Returns ``path`` as given (a link stays a link; the file it points to is written).
    """
    shown = Path(path)
    target = _real_target(path)
    if _special(target):
        _write_special(target, shown, data, error, what)
        return shown
    _check_folder(target, shown, error, what)
    tmp = _stage(target, shown, data, error, what)
    try:
        os.replace(tmp, target)
    except OSError as err:
        _unlink_quietly(tmp)
        raise error(f"cannot {what}: {err.strerror or err}", file=str(shown)) from None
    return shown


@contextlib.contextmanager
def open_text_atomic(path: str | os.PathLike[str], error: type[InputError] = InputError,
                     what: str = "write") -> Iterator[TextIO]:
    """A text file to write an output as it is produced, for outputs too large to build in
    memory: the text goes to a temporary file beside ``path``, renamed onto it when the
    block ends without an exception (removed otherwise), as :func:`write_bytes_atomic`. A
    named pipe or a device is written directly."""
    shown = Path(path)
    target = _real_target(path)
    if _special(target):
        try:
            with open(target, "w", encoding="utf-8", newline="") as f:
                yield f
        except OSError as err:
            raise error(f"cannot {what}: {err.strerror or err}", file=str(shown)) from None
        return
    _check_folder(target, shown, error, what)
    tmp = _stage(target, shown, b"", error, what)
    mode = os.stat(tmp).st_mode & 0o777
    try:
        with open(tmp, "w", encoding="utf-8", newline="") as f:
            yield f
            f.flush()
            os.fsync(f.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except OSError as err:
        _unlink_quietly(tmp)
        raise error(f"cannot {what}: {err.strerror or err}", file=str(shown)) from None
    except BaseException:
        _unlink_quietly(tmp)
        raise


def write_text_atomic(path: str | os.PathLike[str], text: str,
                      error: type[InputError] = InputError, what: str = "write") -> Path:
    return write_bytes_atomic(path, text.encode("utf-8"), error, what)


def write_set_atomic(items: Sequence[tuple[str | os.PathLike[str], bytes]],
                     error: type[InputError] = InputError, what: str = "write") -> list[Path]:
    """Write several files all or nothing.

    Every file is staged first (a full disk or a missing permission then leaves every
    target as it was, and no temporary file behind); the complete set is then renamed into
    place. Should a rename fail half-way, the files already replaced get their previous
    content back (kept as hard links until the set is complete). Named pipes and devices
    cannot be part of a set.
    """
    plan: list[tuple[Path, Path]] = []
    for path, _ in items:
        shown, target = Path(path), _real_target(path)
        if _special(target):
            raise error(f"cannot {what}: not a regular file (a set of files is written "
                        "only to regular files)", file=str(shown))
        _check_folder(target, shown, error, what)
        plan.append((shown, target))
    staged: list[str] = []
    try:
        for (shown, target), (_, data) in zip(plan, items):
            staged.append(_stage(target, shown, data, error, what))
    except BaseException:
        for tmp in staged:
            _unlink_quietly(tmp)
        raise
    done: list[tuple[Path, str | None, bool]] = []   # (target, backup of old content, existed)
    try:
        for (shown, target), tmp in zip(plan, staged):
            backup, existed = None, target.exists()
            if existed:
                backup = f"{tmp}.old"
                try:
                    os.link(target, backup)
                except OSError:
                    backup = None       # no hard links here: the old file cannot come back
            try:
                os.replace(tmp, target)
            except OSError as err:
                if backup:
                    _unlink_quietly(backup)
                raise error(f"cannot {what}: {err.strerror or err}", file=str(shown)) from None
            done.append((target, backup, existed))
    except BaseException:
        for target, backup, existed in reversed(done):
            try:
                if backup:
                    os.replace(backup, target)
                elif not existed:
                    os.unlink(target)
            except OSError:
                pass
        for tmp in staged:
            _unlink_quietly(tmp)
        raise
    for _, backup, _ in done:
        if backup:
            _unlink_quietly(backup)
    return [shown for shown, _ in plan]


def write_texts_atomic(items: Sequence[tuple[str | os.PathLike[str], str]],
                       error: type[InputError] = InputError, what: str = "write") -> list[Path]:
    return write_set_atomic([(p, t.encode("utf-8")) for p, t in items], error, what)
