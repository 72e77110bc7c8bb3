"""Is a path a regular file? One answer, in one wording, for every reader and check.

A folder, a device (``/dev/null``, ``/dev/zero``) or a named pipe given where a file is
expected is "not a regular file", never "not found" (the path exists) and never read: a
device can be endless and a pipe with no writer would block the reader.
"""

from __future__ import annotations

import os
import stat


def file_problem(path: str | os.PathLike[str]) -> str | None:
    """None for an existing regular file (links followed); otherwise why it cannot be read
    as one: 'not found', 'is a folder, not a regular file', 'is a device, not a regular
    file', 'is a named pipe, not a regular file', ..."""
    try:
        st = os.stat(path)
    except (FileNotFoundError, NotADirectoryError):
        return "not found"
    except PermissionError:
        return "cannot be looked at (no permission)"
    except ValueError:                      # e.g. a NUL byte in the name
        return "is not a usable file name"
    except OSError as err:
        return f"cannot be looked at ({err.strerror or err})"
    mode = st.st_mode
    if stat.S_ISREG(mode):
        return None
    if stat.S_ISDIR(mode):
        return "is a folder, not a regular file"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "is a device, not a regular file"
    if stat.S_ISFIFO(mode):
        return "is a named pipe, not a regular file"
    return "is not a regular file"
