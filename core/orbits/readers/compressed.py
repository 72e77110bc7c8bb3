"""Compressed orbit files as users download them: gzip (``.gz``) and Unix compress (``.Z``).

The kind is recognised from the first bytes, not the file name: gzip ``1F 8B``
[pub: RFC 1952, sec. 2.3.1], compress ``1F 9D`` [pub: compress(1) file format]. gzip is
expanded with the standard library, compress (LZW) with the ``unlzw3`` package. Other
archive kinds (zip, bzip2, xz) are refused with a message naming them.
"""

from __future__ import annotations

import gzip
import io
import zlib

import unlzw3

from ...ground.errors import OrbitFormatError

GZIP_MAGIC = b"\x1f\x8b"
COMPRESS_MAGIC = b"\x1f\x9d"
_REFUSED = ((b"PK\x03\x04", "zip"), (b"BZh", "bzip2"), (b"\xfd7zXZ", "xz"))
# An orbit file expands to a few MB; refuse a stream that would expand past this.
MAX_EXPANDED_BYTES = 512 * 1024 * 1024


def expand(data: bytes, source: str) -> bytes:
    """``data`` expanded when it is gzip or compress data, else returned unchanged.

    A damaged stream is an :class:`OrbitFormatError` naming ``source``."""
    if data.startswith(GZIP_MAGIC):
        try:
            with gzip.GzipFile(fileobj=io.BytesIO(data)) as fh:
                out = fh.read(MAX_EXPANDED_BYTES + 1)
        except (OSError, EOFError, zlib.error) as exc:
            raise OrbitFormatError(f"cannot expand the gzip (.gz) file: {exc}", file=source) from None
        if len(out) > MAX_EXPANDED_BYTES:
            raise OrbitFormatError("the gzip (.gz) file expands to more than 512 MB", file=source)
        if not out.strip():
            raise OrbitFormatError("the gzip (.gz) file holds no data", file=source)
        return out
    if data.startswith(COMPRESS_MAGIC):
        try:
            out = unlzw3.unlzw(data)
        except Exception as exc:  # noqa: BLE001 - the package raises plain ValueError/IndexError
            raise OrbitFormatError(f"cannot expand the compress (.Z) file: {exc}",
                                   file=source) from None
        if not out.strip():
            raise OrbitFormatError("the compress (.Z) file holds no data", file=source)
        return bytes(out)
    for magic, kind in _REFUSED:
        if data.startswith(magic):
            raise OrbitFormatError(f"this is a {kind} archive; expand it first (.gz and .Z "
                                   "files are read directly)", file=source)
    return data

