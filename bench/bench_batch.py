#!/usr/bin/env python3
"""Batch benchmark: ``--jobs 2`` against ``--jobs 1`` on one folder, and the unchanged second run.

Generates (in bench/out/batch/, git-ignored) a release folder of ``--files`` stereo
48 kHz 24-bit noise-and-tone masters of ``--seconds`` each in two sub-folders, then,
in one run, side by side:

1. a fresh batch with ``jobs=1`` (inline, no worker processes);
2. a fresh batch with ``jobs=2`` (spawned worker pool, start-up included);
3. the same batch again with nothing changed (ledger reuse: no file analysed);
4. optionally (``--dask``) a fresh batch on a dask LocalCluster of two worker processes.

Printed: the speed-up t(jobs 1) / t(jobs 2), the second run's time as a ratio of the
first (t3 / t2), the audio real-time factor of each run, and the load average (the
machine is shared: read the ratios, not the absolute times).  Targets, printed beside
the figures: speed-up >= 1.5 on 2 free cores, second run <= 0.10 of the first.
"cores used" is the CPU time of the per-file checks over the wall time: with the
Linux scheduler's autogroups on, every process of one session shares that session's
CPU share, so on a machine other sessions keep busy (CPU pressure near 100 %) two
workers cannot get more CPU than one, and the speed-up stays near 1 or below.  A
missed target is reported, not fatal; ``--strict`` makes it exit 1.

Usage: ``bench/bench_batch.py [--files 20] [--seconds 60] [--format json] [--dask] [--strict]``.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import time
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
OUT = HERE / "out" / "batch"
sys.path.insert(0, str(HERE.parent))

SPEC = """\
spec_version: 1
name: Bench release label
loudness:
  integrated: {target_lufs: -14.0, tolerance_lu: 1.0}
peaks:
  true_peak: {max_dbtp: -1.0}
release:
  pooled_loudness: {target_lufs: -14.0, tolerance_lu: 1.0}
  track_loudness_spread: {max_lu: 6.0}
  consistent_format: {}
"""


def make_folder(root: Path, n: int, seconds: float, sr: int = 48000) -> float:
    rng = np.random.default_rng(42)
    t = np.arange(int(seconds * sr)) / sr
    for i in range(n):
        sub = root / ("album_a" if i % 2 == 0 else "album_b")
        sub.mkdir(parents=True, exist_ok=True)
        x = 0.05 * rng.standard_normal((t.size, 2))
        x += 0.2 * np.sin(2 * np.pi * (220 + 40 * i) * t)[:, None]
        x *= 10 ** ((-3.0 * (i % 3)) / 20)
        sf.write(sub / f"{i:02d}.wav", x, sr, subtype="PCM_24")
    return n * seconds


def cpu_pressure() -> str:
    """Linux PSI: share of the last 10 s in which some runnable task waited for a CPU."""
    try:
        with open("/proc/pressure/cpu") as f:
            first = f.readline().split()
        return next(x for x in first if x.startswith("avg10=")).split("=")[1] + " %"
    except (OSError, StopIteration):
        return "n/a"


def autogroup() -> str:
    try:
        with open("/proc/sys/kernel/sched_autogroup_enabled") as f:
            return "on" if f.read().strip() == "1" else "off"
    except OSError:
        return "n/a"


def timed(cfg):
    from masterqc.batch.runner import run_batch
    t0 = time.perf_counter()
    outcome = run_batch(cfg)
    return time.perf_counter() - t0, outcome


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=20)
    ap.add_argument("--seconds", type=float, default=60.0)
    ap.add_argument("--format", default="json", help="per-file outputs (json, json,html, ...)")
    ap.add_argument("--dask", action="store_true", help="also run on a dask LocalCluster (2 worker processes)")
    ap.add_argument("--strict", action="store_true")
    args = ap.parse_args(argv)

    from masterqc.batch.runner import BatchConfig
    from masterqc.formats import parse_formats

    if OUT.exists():
        shutil.rmtree(OUT)
    root = OUT / "in"
    audio_s = make_folder(root, args.files, args.seconds)
    spec = OUT / "spec.yaml"
    spec.write_text(SPEC)
    formats = parse_formats(args.format)

    def cfg(out, jobs=None, scheduler=None):
        return BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(OUT / out), formats=formats,
                           jobs=jobs, scheduler=scheduler, quiet=True)

    print(f"folder: {args.files} files x {args.seconds:g} s = {audio_s / 60:.1f} min of audio, outputs {args.format}")
    print(f"before: load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores, CPU pressure {cpu_pressure()}, "
          f"scheduler autogroups {autogroup()}")
    t1, o1 = timed(cfg("jobs1", jobs=1))
    t2, o2 = timed(cfg("jobs2", jobs=2))
    t3, o3 = timed(cfg("jobs2", jobs=2))
    assert o1.summary["counts"]["analysed"] == args.files and o3.summary["counts"]["analysed"] == 0
    v1 = {f["rel"]: (f["verdict"], f["integrated_lufs"]) for f in o1.summary["files"]}
    v2 = {f["rel"]: (f["verdict"], f["integrated_lufs"]) for f in o2.summary["files"]}
    assert v1 == v2, "jobs 1 and jobs 2 must give the same results"
    rows = [("jobs 1 (fresh)", t1, o1), ("jobs 2 (fresh)", t2, o2), ("jobs 2, unchanged second run", t3, o3)]
    td = None
    if args.dask:
        from distributed import LocalCluster
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cl:
            td, od = timed(cfg("dask", scheduler=cl.scheduler_address))
        vd = {f["rel"]: (f["verdict"], f["integrated_lufs"]) for f in od.summary["files"]}
        assert vd == v1, "the dask run must give the same results"
        rows.append(("dask LocalCluster, 2 processes (fresh)", td, od))
    print(f"after:  load average {os.getloadavg()[0]:.2f}, CPU pressure {cpu_pressure()}")
    print()
    print(f"{'run':<42}{'time s':>9}{'x real time':>13}{'check CPU s':>13}{'cores used':>12}")
    for name, t, o in rows:
        cpu = sum(f.get("cpu_s") or 0.0 for f in o.summary["files"])
        print(f"{name:<42}{t:9.2f}{audio_s / t:13.1f}{cpu:13.2f}{cpu / t:12.2f}")
    speedup = t1 / t2
    second = t3 / t2
    print()
    ok1, ok2 = speedup >= 1.5, second <= 0.10
    print(f"speed-up jobs 2 over jobs 1:        {speedup:5.2f}x   (target >= 1.5 on 2 free cores: {'met' if ok1 else 'MISSED'})")
    print(f"second run / first run (jobs 2):    {second:5.3f}    (target <= 0.10: {'met' if ok2 else 'MISSED'})")
    if td is not None:
        print(f"dask (2 processes) / jobs 2:        {td / t2:5.2f}")
    return 1 if args.strict and not (ok1 and ok2) else 0


if __name__ == "__main__":
    sys.exit(main())
