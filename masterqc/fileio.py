"""Writing files so that no reader ever sees a half-written one."""

from __future__ import annotations

import os
import tempfile


def write_atomic(path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder, then ``os.replace``.

    A reader sees the old file or the whole new one, never a partial one; on any
    error (including KeyboardInterrupt) the temporary file is removed and the
    error propagates.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(prefix=".masterqc-", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
