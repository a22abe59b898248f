"""Content hash of a file handed in, for import batches: re-importing the same bytes is a no-op.

SHA-256 as specified in FIPS 180-4 (NIST 2015), over the file's bytes exactly as stored (no decoding,
no line-ending changes), so two files hash alike only if they are byte-for-byte the same.
"""

from __future__ import annotations

import hashlib
import os

from monitor.errors import InputError, InputProblem

CHUNK = 1 << 20


def content_hash(source: str | os.PathLike[str] | bytes) -> str:
    """Lower-case hex SHA-256 of a file's bytes (or of the bytes given)."""
    digest = hashlib.sha256()
    if isinstance(source, (bytes, bytearray, memoryview)):
        digest.update(source)
        return digest.hexdigest()
    try:
        with open(source, "rb") as handle:
            while chunk := handle.read(CHUNK):
                digest.update(chunk)
    except OSError as exc:
        raise InputError(InputProblem(os.path.basename(os.fspath(source)), None, None, None,
                                      f"a readable file ({exc.strerror})")) from None
    return digest.hexdigest()
