"""Content hashes of a batch's masters: the ledger's stat cache first, then hashing what is new.

A file whose size, mtime, ctime and inode the ledger has seen with a hash is not
read at all; every other file is hashed (content SHA-256) through the backend, and
the hash is remembered with the file's stat.  A file that cannot be stat'ed or read
gets ``hash_error`` (it becomes an error row, not a crash).
"""

from __future__ import annotations

import os


def hash_items(items, ledger, backend, task) -> int:
    """Fill ``sha256``, ``stat`` and ``size_bytes`` (or ``hash_error``) of every item; return how many
    files had to be read.  ``task(path) -> {"sha256"} | {"error"}`` runs on ``backend``
    (:func:`masterqc.batch.work.hash_task`); the backend is started only when there is work."""
    to_hash = []
    known = ledger.known_hashes([it.path for it in items])
    for it in items:
        try:
            it.stat = os.stat(it.path)
            it.size_bytes = it.stat.st_size
        except OSError as exc:
            it.hash_error = f"cannot be read ({exc.strerror or exc})"
            continue
        row = known.get(it.path)
        st = it.stat
        if row is not None and row[:4] == (st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino):
            it.sha256 = row[4]
        else:
            to_hash.append(it)
    if not to_hash:
        return 0
    backend.start()  # new or changed files: there will be work, let the workers start up meanwhile
    for i, value, exc in backend.hash_unordered(task, [it.path for it in to_hash]):
        it = to_hash[i]
        if exc is not None:
            it.hash_error = f"cannot be hashed ({type(exc).__name__}: {exc})"
        elif "error" in value:
            it.hash_error = value["error"]
        else:
            it.sha256 = value["sha256"]
            ledger.remember_hash(it.path, it.stat, it.sha256)  # at once: an interrupted run keeps it
    return len(to_hash)
