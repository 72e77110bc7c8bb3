"""Atomic file output: write to a temporary file in the target folder, then rename.

A failed write never leaves a half-written file at the target path (and no temporary
file behind); an existing file keeps its permission bits.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from ..ground.errors import InputError


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes,
                       error: type[InputError] = InputError, what: str = "write") -> Path:
    """Write ``data`` to ``path`` atomically; failures raise ``error`` naming the file."""
    target = Path(path)
    folder = target.resolve().parent
    if not folder.is_dir():
        why = "is not a folder" if folder.exists() else "does not exist"
        raise error(f"cannot {what}: {folder} {why}", file=str(target))
    try:
        mode = target.stat().st_mode & 0o777 if target.exists() else 0o644
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=folder)
    except OSError as err:
        raise error(f"cannot {what} in {folder}: {err.strerror or err}", file=str(target)) from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except OSError as err:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise error(f"cannot {what}: {err.strerror or err}", file=str(target)) from None
    return target


def write_text_atomic(path: str | os.PathLike[str], text: str,
                      error: type[InputError] = InputError, what: str = "write") -> Path:
    return write_bytes_atomic(path, text.encode("utf-8"), error, what)
