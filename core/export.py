"""Atomic file output: write to a temporary file in the target folder, then rename.

A failed write never leaves a half-written file at the target path.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import InputError


def write_bytes_atomic(path: str | Path, data: bytes) -> Path:
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"folder {folder} does not exist", file=str(target))
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=folder)
    except OSError as err:
        raise InputError(f"cannot write here ({err.strerror})", file=str(target)) from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except OSError as err:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise InputError(f"cannot write ({err.strerror})", file=str(target)) from None
    return target


def write_text_atomic(path: str | Path, text: str) -> Path:
    return write_bytes_atomic(path, text.encode("utf-8"))
