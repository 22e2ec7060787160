"""The file's facts for the result (path, size, SHA-256), computed on a thread of their own.

:func:`file_facts` reads the file in large chunks; hashlib and the reads release the GIL, so a
hash running beside other work costs that work little.  :func:`prefetch` starts the hash of a
file before anything else is imported (the command line does it for ``measure`` while Python
loads numpy and the analyzers, a phase that keeps one core busy at most), and the engine's
:func:`take` collects it, so the hash no longer competes with the analyzers for the cores.  The
facts are the same bytes either way: the same function on the same file.

Light on purpose (no numpy): imported by the command line before the measuring layers.
"""

from __future__ import annotations

import hashlib
import os
import threading
import time

#: bytes read and hashed per call (house choice, measured: 1 MiB costs the least CPU, 0.13 s for
#: 10 minutes of 24-bit stereo against 0.16-0.19 s with 16 MiB, whose buffer leaves the core's
#: cache; a larger chunk would let a hash waiting for the GIL between calls, while another thread
#: imports modules, spend more of the start-up hashing)
HASH_CHUNK_BYTES = 1 << 20


def file_facts(path) -> dict:
    """``{"path", "size_bytes", "sha256"}`` of a file, read in :data:`HASH_CHUNK_BYTES` chunks.

    Raises :class:`masterqc.errors.AudioReadError` when the file cannot be read (a FIFO or
    device is refused at once, never waited on)."""
    from masterqc.errors import AudioReadError
    from masterqc.fileio import NotRegularFile, open_regular_file
    digest = hashlib.sha256()
    size = 0
    buf = None
    try:
        with open_regular_file(path) as f:
            try:
                total = os.fstat(f.fileno()).st_size
            except (OSError, AttributeError, ValueError):
                total = HASH_CHUNK_BYTES
            # one buffer read into again and again, no larger than the file (+1 to see its end)
            buf = bytearray(max(1, min(HASH_CHUNK_BYTES, total + 1)))
            view = memoryview(buf)
            while True:
                n = f.readinto(buf)
                if not n:
                    break
                size += n
                digest.update(view[:n])
    except NotRegularFile as exc:
        raise AudioReadError(path, str(exc)) from None
    except OSError as exc:
        raise AudioReadError(path, f"cannot read file ({exc.strerror or exc})") from None
    return {"path": os.fspath(path), "size_bytes": size, "sha256": digest.hexdigest()}


class Background:
    """``fn(*args)`` in a daemon thread; :meth:`result` waits and returns it or raises its error;
    ``cpu_s``: the CPU seconds the thread spent (once it has finished)."""

    def __init__(self, fn, *args, name: str = "masterqc-hash"):
        self._value = self._error = None
        self.cpu_s = 0.0
        self._thread = threading.Thread(target=self._run, args=(fn, args), name=name, daemon=True)
        self._thread.start()

    def _run(self, fn, args):
        started = time.thread_time()
        try:
            self._value = fn(*args)
        except BaseException as exc:          # noqa: BLE001 - handed to the caller's thread
            self._error = exc
        finally:
            self.cpu_s = time.thread_time() - started

    def cpu_so_far(self):
        """CPU seconds the thread has spent so far (Linux: its CPU clock), or None where that clock
        cannot be read; once the thread has ended, :attr:`cpu_s`."""
        if not self._thread.is_alive():
            return self.cpu_s
        try:
            return time.clock_gettime(time.pthread_getcpuclockid(self._thread.ident))
        except (AttributeError, OSError, TypeError, ValueError):
            return None if self._thread.is_alive() else self.cpu_s

    def result(self):
        self._thread.join()
        if self._error is not None:
            raise self._error
        return self._value


_LOCK = threading.Lock()
_STARTED: dict = {}


def _key(path):
    try:
        return os.fspath(path)
    except TypeError:
        return None


def prefetch(path) -> None:
    """Start hashing ``path`` in the background (once per path); :func:`take` collects it."""
    key = _key(path)
    if key is None:
        return
    with _LOCK:
        if key not in _STARTED:
            _STARTED[key] = Background(file_facts, path)


def take(path):
    """The :class:`Background` hash :func:`prefetch` started for ``path`` (it is handed out once),
    or None."""
    key = _key(path)
    with _LOCK:
        return _STARTED.pop(key, None) if key is not None else None
