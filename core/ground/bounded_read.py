"""Reading an input file with a size limit and a time limit.

Every reader of user files (orbit files, mapping files, scenarios) goes through
:func:`read_bytes_bounded`, so that no input can exhaust memory or hang the program:

* a regular file larger than the limit is refused from its size, before it is read, and
  at most ``limit + 1`` bytes are ever read (a file growing while read is refused too);
* a device (``/dev/zero``, ``/dev/null``, a disk) is refused at once: "not a regular file";
* a named pipe or socket is read without blocking, up to the limit, and refused when no
  data arrives within ``timeout_s`` (a pipe with no writer) or the whole read takes longer;
* a name with a NUL byte, a folder, a missing file, no permission: one clear message.

Errors are raised as ``error_type(message, file=name)``: each reader passes its own
(:class:`OrbitFormatError`, :class:`ScenarioError`), so the message is one line naming
the file.
"""

from __future__ import annotations

import os
import select
import stat
import time
from pathlib import Path

from .errors import InputError

MB = 1024 * 1024
# Size limits. A full public TLE catalogue (about 28,000 objects) is about 5 MB, a daily
# multi-GNSS broadcast navigation file 5-10 MB [trade]; 32 MB leaves room. A scenario or a
# mapping file is a page of text.
ORBIT_FILE_LIMIT_BYTES = 32 * MB
TEXT_FILE_LIMIT_BYTES = 1 * MB
# A pipe that delivers nothing for this long has no writer [trade: interactive latency].
PIPE_TIMEOUT_S = 5.0


def _mb(n: int) -> str:
    return f"{n / MB:.1f} MB"


def read_bytes_bounded(path: str | os.PathLike[str], *, limit_bytes: int, what: str,
                       error_type: type[InputError] = InputError,
                       timeout_s: float = PIPE_TIMEOUT_S) -> bytes:
    """The bytes of ``path`` (see the module docstring); ``what`` names the kind of file
    in messages ('orbit file', 'scenario file')."""
    name = str(path)

    def fail(message: str) -> InputError:
        return error_type(message, file=name.replace("\x00", "\\0"))

    if "\x00" in name:
        raise fail("the file name contains a NUL byte (\\0); no file can have that name")
    p = Path(path)
    try:
        st = os.stat(p)
    except FileNotFoundError:
        raise fail("file not found") from None
    except PermissionError:
        raise fail("no permission to look at the file") from None
    except (OSError, ValueError) as exc:
        raise fail(f"cannot open the file ({getattr(exc, 'strerror', None) or exc})") from None
    mode = st.st_mode
    if stat.S_ISDIR(mode):
        raise fail(f"is a folder, not an {what}" if what[0] in "aeiou" else
                   f"is a folder, not a {what}")
    if stat.S_ISREG(mode):
        if st.st_size > limit_bytes:
            raise fail(f"the file is {_mb(st.st_size)}, larger than any {what} "
                       f"(limit {_mb(limit_bytes)})")
        try:
            with open(p, "rb") as fh:
                data = fh.read(limit_bytes + 1)
        except PermissionError:
            raise fail("no permission to read the file") from None
        except OSError as exc:
            raise fail(f"cannot read the file ({exc.strerror or exc})") from None
        if len(data) > limit_bytes:
            raise fail(f"the file grew past {_mb(limit_bytes)} while it was read")
        return data
    if stat.S_ISFIFO(mode) or stat.S_ISSOCK(mode):
        return _read_pipe(p, limit_bytes, timeout_s, what, fail)
    kind = "a device" if (stat.S_ISCHR(mode) or stat.S_ISBLK(mode)) else "a special file"
    raise fail(f"not a regular file ({kind}); give the {what} itself")


def _read_pipe(p: Path, limit_bytes: int, timeout_s: float, what: str, fail) -> bytes:
    try:
        fd = os.open(p, os.O_RDONLY | os.O_NONBLOCK)
    except OSError as exc:
        raise fail(f"cannot open the pipe ({exc.strerror or exc})") from None
    chunks: list[bytes] = []
    total = 0
    deadline = time.monotonic() + 4.0 * timeout_s
    got_any = False
    try:
        poller = select.poll()
        poller.register(fd, select.POLLIN | select.POLLHUP)
        while True:
            now = time.monotonic()
            if now > deadline:
                raise fail(f"reading the pipe took longer than {4.0 * timeout_s:g} s")
            events = poller.poll(1000.0 * min(timeout_s, deadline - now))
            if not events:
                if not got_any:
                    raise fail(f"no data arrived within {timeout_s:g} s (a named pipe with "
                               f"no writer?); give the {what} itself")
                raise fail(f"the pipe stopped sending for {timeout_s:g} s")
            try:
                chunk = os.read(fd, 1 << 16)
            except BlockingIOError:
                continue
            if not chunk:
                if got_any or any(ev & select.POLLHUP for _, ev in events):
                    break            # the writer closed its end
                time.sleep(0.05)     # EOF before any writer opened it: wait on
                continue
            got_any = True
            chunks.append(chunk)
            total += len(chunk)
            if total > limit_bytes:
                raise fail(f"the pipe sent more than {_mb(limit_bytes)}, more than any {what}")
    finally:
        os.close(fd)
    return b"".join(chunks)
