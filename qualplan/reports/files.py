"""Writing document files whole or not at all.

Every file a renderer writes goes through :func:`write_atomic`: the bytes go into a
temporary file beside the target, are flushed to the disk (``fsync``) and the temporary
file is then renamed over the target (``os.replace``, atomic on POSIX and Windows). On a
full disk (``ENOSPC``) or any other write error the temporary file is removed and the
error goes on to the caller, naming the file: a reader never finds a truncated PDF,
JSON or CSV, and an older file of the same name stays as it was.
"""

from __future__ import annotations

import os
from pathlib import Path


def write_atomic(path: Path, data: bytes | str) -> Path:
    """Write `data` (text is UTF-8) to `path` atomically; return `path`."""
    path = Path(path)
    raw = data.encode("utf-8") if isinstance(data, str) else bytes(data)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
        try:
            view = memoryview(raw)
            while view:
                n = os.write(fd, view)
                view = view[n:]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        exc.filename = str(path)  # the file the caller asked for, not the temporary one
        raise
    return path
