"""Optional per-stage timing of a run, for the benchmarks (bench/bench_batch.py).

Off unless the environment variable ``MASTERQC_STAGE_LOG`` names a file: then every
timed stage of every process of a run (the batch parent and its workers) appends one
JSON line to it::

    {"pid": 123, "role": "worker", "stage": "render_pdf", "wall_s": 0.91, "cpu_s": 0.88, "file": "..."}

``cpu_s`` is the CPU time of the whole process over the stage (every thread of it, so a
measurement on two threads counts both).  Each line is one ``write`` to a file opened
for appending, so lines of concurrent processes do not interleave.  Nothing is timed,
and nothing is written, when the variable is unset.
"""

from __future__ import annotations

import json
import os
import time
from contextlib import contextmanager

ENV = "MASTERQC_STAGE_LOG"

#: "parent" in the process that runs the batch (or a single check), "worker" in a pool worker
ROLE = {"name": "parent"}


def enabled() -> bool:
    return bool(os.environ.get(ENV))


def note(stage: str, wall_s: float | None, cpu_s: float | None, **extra) -> None:
    """Append one stage's line (nothing when the log is off)."""
    path = os.environ.get(ENV)
    if not path:
        return
    row = {"pid": os.getpid(), "role": ROLE["name"], "stage": stage, "wall_s": wall_s, "cpu_s": cpu_s}
    row.update(extra)
    line = (json.dumps(row, default=str) + "\n").encode("utf-8")
    fd = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        os.write(fd, line)
    finally:
        os.close(fd)


@contextmanager
def stage(name: str, **extra):
    """Time the block as stage ``name`` (wall and process CPU), when the log is on."""
    if not os.environ.get(ENV):
        yield
        return
    w0, c0 = time.perf_counter(), time.process_time()
    try:
        yield
    finally:
        note(name, time.perf_counter() - w0, time.process_time() - c0, **extra)


def process_age_s() -> float | None:
    """Seconds since this process was created (Linux /proc), for the start-up figure; None elsewhere."""
    try:
        with open("/proc/self/stat", "rb") as f:
            raw = f.read()
        start_ticks = int(raw[raw.rindex(b")") + 2:].split()[19])
        with open("/proc/uptime") as f:
            uptime_s = float(f.read().split()[0])
        return uptime_s - start_ticks / os.sysconf("SC_CLK_TCK")
    except (OSError, ValueError, IndexError, AttributeError):
        return None


def note_startup(what: str = "startup") -> None:
    """The process's start-up so far: wall since it was created, CPU since it began."""
    if os.environ.get(ENV):
        note(what, process_age_s(), time.process_time())
