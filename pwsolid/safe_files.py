"""Writing files safely: atomic replacement, ordinary permissions, checksums (layer 0).

* :func:`atomic_write_bytes`: temporary file in the target's directory, fsync,
  rename: a reader sees either the old file or the complete new one, never half.
  The file gets the mode an ordinary ``open(path, "w")`` would give it (0666 less
  the umask, 0644 typically), not the owner-only 0600 of a temporary file, so that
  collaborators on a shared disk can read results.
* :func:`array_checksum`: SHA-256 over names, dtypes, shapes and bytes of arrays.

Saved records (checkpoints, densities, scan points, relaxation steps, ...) are
built on these by the one store, :mod:`pwsolid.store`, which adds the fingerprint
of the calculation.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
import threading
from pathlib import Path

import numpy as np

__all__ = ["atomic_write_bytes", "array_checksum", "new_file_mode"]

_UMASK_LOCK = threading.Lock()


def new_file_mode() -> int:
    """Mode of a newly created ordinary file under the current umask (0666 & ~umask)."""
    with _UMASK_LOCK:          # reading the umask means setting it: do it under a lock
        mask = os.umask(0o022)
        os.umask(mask)
    return 0o666 & ~mask


def atomic_write_bytes(path, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically (same-directory temporary file + rename)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        os.fchmod(fd, new_file_mode())      # mkstemp makes 0600 whatever the umask
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def array_checksum(arrays: dict) -> str:
    """SHA-256 over names, dtypes, shapes and bytes of the arrays (sorted by name)."""
    h = hashlib.sha256()
    for name in sorted(arrays):
        a = np.ascontiguousarray(arrays[name])
        h.update(name.encode())
        h.update(str(a.dtype).encode())
        h.update(str(a.shape).encode())
        h.update(a.tobytes())
    return h.hexdigest()
