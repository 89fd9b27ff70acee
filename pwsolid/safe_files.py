"""Writing files safely: atomic replacement, ordinary permissions, checksums (layer 0).

* :func:`atomic_write_bytes`: temporary file in the target's directory, fsync,
  rename: a reader sees either the old file or the complete new one, never half.
  The file gets the mode an ordinary ``open(path, "w")`` would give it (0666 less
  the umask, 0644 typically), not the owner-only 0600 of a temporary file, so that
  collaborators on a shared disk can read results.
* :func:`array_checksum`: SHA-256 over names, dtypes, shapes and bytes of arrays.

Saved records (checkpoints, densities, scan points, relaxation steps, ...) are
built on these by the one store, :mod:`pwsolid.store`, which adds the fingerprint
of the calculation. :func:`write_archive` / :func:`read_archive` (a format name
and an array checksum, no fingerprint) remain for code not yet moved to the store.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import os
import tempfile
import threading
from pathlib import Path

import numpy as np

from .errors import InputError

__all__ = ["atomic_write_bytes", "array_checksum", "new_file_mode", "write_archive",
           "read_archive"]

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


def write_archive(path, fmt: str, arrays: dict, metadata: dict | None = None) -> None:
    """Save arrays and a metadata record (format, checksum, ``metadata``) atomically."""
    meta = dict(metadata or {})
    meta["format"] = fmt
    meta["checksum"] = array_checksum(arrays)
    buf = io.BytesIO()
    np.savez_compressed(buf, metadata=np.array(json.dumps(meta)), **arrays)
    atomic_write_bytes(path, buf.getvalue())


def read_archive(path, fmt: str, what: str = "file") -> tuple[dict, dict]:
    """Read an archive written by :func:`write_archive`; returns ``(arrays, metadata)``."""
    src = str(path)
    try:
        with open(path, "rb") as fh, np.load(fh, allow_pickle=False) as data:
            arrays = {k: data[k] for k in data.files}
    except FileNotFoundError:
        raise InputError(f"{what} not found", source=src) from None
    except Exception:  # noqa: BLE001 - zip, format and OS errors all mean 'unreadable'
        # numpy's own message suggests unpickling, which is never safe here: not repeated
        raise InputError(f"not a readable {what} (truncated, corrupted or foreign bytes)",
                         source=src) from None
    try:
        meta = json.loads(str(arrays.pop("metadata")))
    except (KeyError, ValueError):
        raise InputError(f"not a pwsolid {what} (no metadata)", source=src) from None
    if meta.get("format") != fmt:
        raise InputError(f"unsupported {what} format {meta.get('format')!r}; this version "
                         f"reads {fmt}", source=src)
    if array_checksum(arrays) != meta.get("checksum"):
        raise InputError(f"the {what} is corrupted (checksum mismatch)", source=src)
    return arrays, meta
