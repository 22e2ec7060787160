"""The run ledger: an SQLite file remembering every result and every run.

Tables
------
``measurements`` one measured result per (file content SHA-256, measurement key): the
               result JSON (zlib-compressed).  The measurement key
               (:meth:`masterqc.measure.options.MeasureOptions.measurement_key`) covers the
               settings that can change a number and the masterqc version, not the spec's
               limits -- a file whose bytes and measurement settings are unchanged is never
               measured again; a spec that moves only limits re-judges the stored measurements.
``results``    (unused since result format 2: judged results keyed by spec hash)
``runs``       one row per run: start/finish time (UTC, ISO 8601), status
               (``running``, ``complete``, ``interrupted``, ``failed``, ``abandoned``), folders,
               output folder, counts, and the host and process id that ran it.  A run whose
               process died without closing it (``kill -9``, a power cut) is marked
               ``abandoned`` by the next run on the same host; its finished files are reused.
``run_files``  one row per file per run: path, release, content hash, spec key,
               verdict, whether it was analysed or reused, first failing message.
``file_stat``  size, mtime and inode last seen for a path with its content hash, so an
               untouched file is not even read again to hash it.

Concurrency: the database is in WAL mode with a busy timeout, every write is
one short ``BEGIN IMMEDIATE`` transaction, and each finished file is recorded
the moment it is done -- two overlapping runs both complete, and a run that is
killed keeps what it finished (the next run reuses it).  WAL needs a local
file system (not NFS/SMB) for the ledger file itself.
"""

from __future__ import annotations

import json
import os
import sqlite3
import zlib
from contextlib import contextmanager
from datetime import datetime, timezone

SCHEMA_VERSION = 1
BUSY_TIMEOUT_MS = 60000

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS results (
    content_sha256 TEXT NOT NULL,
    spec_key TEXT NOT NULL,
    tool_version TEXT NOT NULL,
    verdict TEXT NOT NULL,
    result_z BLOB NOT NULL,
    created_utc TEXT NOT NULL,
    PRIMARY KEY (content_sha256, spec_key, tool_version)
);
CREATE TABLE IF NOT EXISTS measurements (
    content_sha256 TEXT NOT NULL,
    measure_key TEXT NOT NULL,
    result_z BLOB NOT NULL,
    created_utc TEXT NOT NULL,
    PRIMARY KEY (content_sha256, measure_key)
);
CREATE TABLE IF NOT EXISTS runs (
    run_id INTEGER PRIMARY KEY AUTOINCREMENT,
    started_utc TEXT NOT NULL,
    finished_utc TEXT,
    status TEXT NOT NULL,
    tool_version TEXT NOT NULL,
    roots_json TEXT NOT NULL,
    out_dir TEXT NOT NULL,
    spec_path TEXT NOT NULL,
    files INTEGER DEFAULT 0,
    analysed INTEGER DEFAULT 0,
    reused INTEGER DEFAULT 0,
    n_pass INTEGER DEFAULT 0,
    n_warn INTEGER DEFAULT 0,
    n_fail INTEGER DEFAULT 0,
    n_error INTEGER DEFAULT 0,
    elapsed_s REAL
);
CREATE TABLE IF NOT EXISTS run_files (
    run_id INTEGER NOT NULL REFERENCES runs(run_id),
    path TEXT NOT NULL,
    rel TEXT NOT NULL,
    release TEXT,
    content_sha256 TEXT,
    spec_key TEXT,
    verdict TEXT NOT NULL,
    analysed INTEGER NOT NULL,
    message TEXT,
    out_stem TEXT,
    PRIMARY KEY (run_id, path)
);
CREATE INDEX IF NOT EXISTS run_files_path ON run_files(path, run_id);
CREATE INDEX IF NOT EXISTS run_files_hash ON run_files(content_sha256);
CREATE TABLE IF NOT EXISTS file_stat (
    path TEXT PRIMARY KEY,
    size_bytes INTEGER NOT NULL,
    mtime_ns INTEGER NOT NULL,
    ctime_ns INTEGER NOT NULL,
    inode INTEGER NOT NULL,
    content_sha256 TEXT NOT NULL
);
"""


def _t(text):
    """A path or message as SQLite can store it: bytes of a name that are not UTF-8 shown as ``\\xNN``."""
    from masterqc.fileio import text_safe
    return text_safe(text) if isinstance(text, str) else text


def utc_now() -> str:
    """Current UTC time, ISO 8601 with seconds and a ``Z``."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def _host() -> str:
    import socket
    return socket.gethostname()


def _proc_start(pid: int) -> str | None:
    """When process ``pid`` started (clock ticks since boot, Linux /proc), to tell a reused pid apart."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as f:
            raw = f.read()
        return raw[raw.rindex(b")") + 2:].split()[19].decode("ascii")
    except (OSError, ValueError, IndexError):
        return None


def _alive(pid: int, start: str | None) -> bool:
    """True while process ``pid`` runs and is the one that started the run (same start time where known)."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass  # alive, another user's
    except OSError:
        return False
    try:
        with open(f"/proc/{pid}/stat", "rb") as f:
            raw = f.read()
        if raw[raw.rindex(b")") + 2:][:1] in (b"Z", b"X"):  # a zombie: dead, not yet reaped
            return False
    except (OSError, ValueError):
        pass
    if start is not None:
        now = _proc_start(pid)
        if now is not None and now != start:
            return False
    return True


def measurements_blob(result: dict) -> bytes:
    """A measured result as the ledger stores it: its JSON text (:func:`masterqc.pipeline.result_json_text`),
    zlib-compressed.  Pure, so a batch worker makes it and the parent only writes it."""
    from masterqc.jsonutil import jsonable
    from masterqc.pipeline import result_json_text
    try:
        data = result_json_text(result).encode("utf-8")
    except (TypeError, ValueError, UnicodeEncodeError):  # (a name's bytes that are not UTF-8: as \xNN)
        data = result_json_text(jsonable(result)).encode("utf-8")
    return zlib.compress(data, 6)


class LedgerError(Exception):
    """The ledger file cannot be opened or is not a masterqc ledger (message names the file)."""


class Ledger:
    """An open ledger.  Use as a context manager or call :meth:`close`."""

    def __init__(self, path):
        self.path = os.fspath(path)
        folder = os.path.dirname(os.path.abspath(self.path))
        try:
            os.makedirs(folder, exist_ok=True)
            self.db = sqlite3.connect(self.path, timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None,
                                      check_same_thread=False)
            self.db.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
            self.db.execute("PRAGMA journal_mode = WAL")
            self.db.execute("PRAGMA synchronous = NORMAL")
            with self._tx():
                for stmt in _SCHEMA.split(";"):
                    if stmt.strip():
                        self.db.execute(stmt)
                have = {r[1] for r in self.db.execute("PRAGMA table_info(runs)").fetchall()}
                for col, kind in (("host", "TEXT"), ("pid", "INTEGER"), ("proc_start", "TEXT")):
                    if col not in have:  # ledgers written before these columns existed
                        self.db.execute(f"ALTER TABLE runs ADD COLUMN {col} {kind}")
                row = self.db.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
                if row is None:
                    self.db.execute("INSERT INTO meta(key, value) VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),))
                elif int(row[0]) != SCHEMA_VERSION:
                    raise LedgerError(f"{self.path}: ledger schema version {row[0]} is not {SCHEMA_VERSION}")
        except (sqlite3.DatabaseError, OSError) as exc:
            raise LedgerError(f"{self.path}: cannot open the run ledger ({exc})") from None

    # -------------------------------------------------------------- plumbing

    @contextmanager
    def _tx(self):
        self.db.execute("BEGIN IMMEDIATE")
        try:
            yield
        except BaseException:
            self.db.execute("ROLLBACK")
            raise
        else:
            self.db.execute("COMMIT")

    def close(self) -> None:
        self.db.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # -------------------------------------------------------------- results

    def get_result(self, content_sha256: str, spec_key: str, tool_version: str) -> dict | None:
        """The stored result for this key, or None."""
        row = self.db.execute("SELECT result_z FROM results WHERE content_sha256=? AND spec_key=? AND tool_version=?",
                              (content_sha256, spec_key, tool_version)).fetchone()
        if row is None:
            return None
        try:
            return json.loads(zlib.decompress(row[0]).decode("utf-8"))
        except (zlib.error, ValueError):
            return None  # a damaged row is treated as absent: the file is analysed again

    def put_result(self, content_sha256: str, spec_key: str, tool_version: str, result: dict) -> None:
        blob = zlib.compress(json.dumps(result, separators=(",", ":"), allow_nan=False).encode("utf-8"), 6)
        with self._tx():
            self.db.execute("INSERT OR REPLACE INTO results VALUES (?,?,?,?,?,?)",
                            (content_sha256, spec_key, tool_version, result.get("verdict", "error"), blob, utc_now()))

    def get_measurements(self, content_sha256: str, measure_key: str, with_encoded: bool = False):
        """The stored measured result of this content under these measurement settings, or None.

        ``with_encoded``: ``(result, encoded)`` instead, ``encoded`` being the values' JSON text as
        stored (:func:`masterqc.pipeline.parse_result_text`), so writing them again costs no encoding.
        """
        from masterqc.pipeline import parse_result_text
        row = self.db.execute("SELECT result_z FROM measurements WHERE content_sha256=? AND measure_key=?",
                              (content_sha256, measure_key)).fetchone()
        if row is None:
            return None
        try:
            result, encoded = parse_result_text(zlib.decompress(row[0]).decode("utf-8"))
        except (zlib.error, ValueError):
            return None  # a damaged row is treated as absent: the file is measured again
        if not isinstance(result, dict):
            return None
        return (result, encoded) if with_encoded else result

    def put_measurements(self, content_sha256: str, measure_key: str, result: dict | None = None, *,
                         blob: bytes | None = None) -> None:
        """Store a measured result (in the layout of :func:`masterqc.pipeline.result_json_text`);
        ``blob``: the result as :func:`measurements_blob` made it already (e.g. in a batch worker)."""
        if blob is None:
            blob = measurements_blob(result)
        with self._tx():
            self.db.execute("INSERT OR REPLACE INTO measurements VALUES (?,?,?,?)",
                            (content_sha256, measure_key, blob, utc_now()))

    # -------------------------------------------------------------- file stat cache

    def known_hash(self, path: str, st: os.stat_result) -> str | None:
        """The content hash recorded for ``path`` if its size, mtime, ctime and inode are unchanged."""
        row = self.db.execute("SELECT size_bytes, mtime_ns, ctime_ns, inode, content_sha256 FROM file_stat WHERE path=?",
                              (_t(path),)).fetchone()
        if row and tuple(row[:4]) == (st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino):
            return row[4]
        return None

    def known_hashes(self, paths) -> dict:
        """``{path: (size_bytes, mtime_ns, ctime_ns, inode, content_sha256)}`` of the ``paths`` the cache
        holds, in one query (compare the stat yourself, as :meth:`known_hash` does)."""
        wanted = {_t(p): p for p in paths}
        keys = list(wanted)
        out = {}
        for i in range(0, len(keys), 500):
            chunk = keys[i:i + 500]
            for row in self.db.execute("SELECT path, size_bytes, mtime_ns, ctime_ns, inode, content_sha256 FROM "
                                       f"file_stat WHERE path IN ({','.join('?' * len(chunk))})", chunk):
                out[wanted[row[0]]] = tuple(row[1:])
        return out

    def remember_hash(self, path: str, st: os.stat_result, content_sha256: str) -> None:
        with self._tx():
            self.db.execute("INSERT OR REPLACE INTO file_stat VALUES (?,?,?,?,?,?)",
                            (_t(path), st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino, content_sha256))

    # -------------------------------------------------------------- runs

    def start_run(self, roots, out_dir: str, spec_path: str, tool_version: str) -> int:
        """Open a run (first marking runs of this host whose process is gone as ``abandoned``)."""
        self.mark_abandoned()
        with self._tx():
            cur = self.db.execute(
                "INSERT INTO runs(started_utc, status, tool_version, roots_json, out_dir, spec_path, host, pid, "
                "proc_start) VALUES (?,?,?,?,?,?,?,?,?)",
                (utc_now(), "running", tool_version, json.dumps([_t(os.fspath(r)) for r in roots]), _t(out_dir),
                 _t(spec_path), _host(), os.getpid(), _proc_start(os.getpid())))
            return int(cur.lastrowid)

    def mark_abandoned(self) -> list[int]:
        """Mark ``abandoned`` every ``running`` run of this host whose process no longer runs; return their ids."""
        rows = self.db.execute("SELECT run_id, pid, proc_start FROM runs WHERE status='running' AND host=?",
                               (_host(),)).fetchall()
        dead = [run_id for run_id, pid, start in rows if pid is not None and not _alive(pid, start)]
        for run_id in dead:
            self.finish_run(run_id, "abandoned", None)
        return dead

    def record_file(self, run_id: int, *, path: str, rel: str, release: str | None, content_sha256: str | None,
                    spec_key: str | None, verdict: str, analysed: bool, message: str | None, out_stem: str | None) -> None:
        with self._tx():
            self.db.execute("INSERT OR REPLACE INTO run_files VALUES (?,?,?,?,?,?,?,?,?,?)",
                            (run_id, _t(path), _t(rel), _t(release), content_sha256, spec_key, verdict,
                             int(analysed), _t(message), _t(out_stem)))

    def finish_run(self, run_id: int, status: str, elapsed_s: float) -> dict:
        """Close a run with its counts (computed from its ``run_files``); returns the run row."""
        with self._tx():
            row = self.db.execute(
                "SELECT COUNT(*), COALESCE(SUM(analysed),0), "
                "COALESCE(SUM(verdict='pass'),0), COALESCE(SUM(verdict='warn'),0), "
                "COALESCE(SUM(verdict='fail'),0), COALESCE(SUM(verdict='error'),0) FROM run_files WHERE run_id=?",
                (run_id,)).fetchone()
            c = dict(zip(("files", "analysed", "n_pass", "n_warn", "n_fail", "n_error"), row))
            self.db.execute("UPDATE runs SET finished_utc=?, status=?, files=?, analysed=?, reused=?, n_pass=?, "
                            "n_warn=?, n_fail=?, n_error=?, elapsed_s=? WHERE run_id=?",
                            (utc_now(), status, c["files"], c["analysed"], c["files"] - c["analysed"], c["n_pass"],
                             c["n_warn"], c["n_fail"], c["n_error"], elapsed_s, run_id))
        return self.run(run_id)

    def run(self, run_id: int) -> dict | None:
        cur = self.db.execute("SELECT * FROM runs WHERE run_id=?", (run_id,))
        row = cur.fetchone()
        if row is None:
            return None
        out = dict(zip([d[0] for d in cur.description], row))
        out["roots"] = json.loads(out.pop("roots_json"))
        return out

    def runs(self, limit: int | None = None) -> list[dict]:
        """Runs, newest first."""
        q = "SELECT run_id FROM runs ORDER BY run_id DESC" + (f" LIMIT {int(limit)}" if limit else "")
        return [self.run(r[0]) for r in self.db.execute(q).fetchall()]

    def previous_run(self, run_id: int, out_dir: str) -> dict | None:
        """The latest complete run before ``run_id`` that wrote to the same output folder."""
        row = self.db.execute("SELECT run_id FROM runs WHERE run_id<? AND status='complete' AND out_dir=? "
                              "ORDER BY run_id DESC LIMIT 1", (run_id, _t(out_dir))).fetchone()
        return self.run(row[0]) if row else None

    def run_files(self, run_id: int) -> list[dict]:
        cur = self.db.execute("SELECT * FROM run_files WHERE run_id=? ORDER BY rel, path", (run_id,))
        names = [d[0] for d in cur.description]
        return [dict(zip(names, r)) for r in cur.fetchall()]

    def history(self, path: str) -> list[dict]:
        """Every recorded check of ``path`` (absolute), oldest first, with the run's start time."""
        cur = self.db.execute(
            "SELECT f.*, r.started_utc, r.status AS run_status FROM run_files f JOIN runs r USING(run_id) "
            "WHERE f.path=? ORDER BY f.run_id", (_t(path),))
        names = [d[0] for d in cur.description]
        return [dict(zip(names, r)) for r in cur.fetchall()]

    def history_by_hash(self, prefix: str) -> list[dict]:
        """Every recorded check of content whose SHA-256 (hex) starts with ``prefix``, oldest first."""
        prefix = "".join(c for c in prefix.lower() if c in "0123456789abcdef")
        cur = self.db.execute(
            "SELECT f.*, r.started_utc, r.status AS run_status FROM run_files f JOIN runs r USING(run_id) "
            "WHERE substr(f.content_sha256, 1, ?) = ? ORDER BY f.run_id, f.path", (len(prefix), prefix))
        names = [d[0] for d in cur.description]
        return [dict(zip(names, r)) for r in cur.fetchall()]
