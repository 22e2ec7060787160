#!/usr/bin/env python3
"""Batch benchmark: ``masterqc check FOLDER --jobs 2`` against ``--jobs 1``, as whole processes, per stage.

Generates (in bench/out/batch-<files>x<seconds>s/, git-ignored; kept between runs) a release
folder of ``--files`` stereo 48 kHz 24-bit noise-and-tone masters of ``--seconds`` each in two
sub-folders, then, in one run, side by side (``--repeat`` times, alternating the order):

1. ``masterqc check IN --jobs 1`` (inline, no worker processes) as its own process;
2. ``masterqc check IN --jobs 2`` (spawned worker pool, start-up included) as its own process;
3. once: the jobs 2 run again with nothing changed (ledger reuse: no file analysed);
4. once each, jobs 1 then jobs 2, into their own first run's output folder: a spec that moves a
   limit only (integrated loudness tolerance 1.0 -> 1.5 LU): every file re-judged from the
   ledger, no audio read, every HTML/PDF rendered again.

Each run is timed as a whole process tree: wall, and CPU time (user + system of the process
and its waited-for workers, ``RUSAGE_CHILDREN``).  With ``MASTERQC_STAGE_LOG`` set
(:mod:`masterqc.stagelog`) each process also logs its stages: start-up (parent and each
worker), plan, hash, triage, per file (measure, judge, render HTML, render PDF, write JSON+CSV,
the parent's bookkeeping and ledger writes), summarise, run outputs (summary/junit/index).

Printed: the load before and after, the whole-run table, the per-stage table (CPU and wall,
summed over files and processes), and the Amdahl figures of the jobs 2 run:

* serial CPU ``S``: what the parent process spent (start-up, plan, hash, per-file bookkeeping,
  ledger writes, unpickling results, summary and index) -- one core at most, while the
  workers wait or compete with it;
* parallel CPU ``P``: what the workers spent (start-up, per-file tasks);
* serial share ``f = S / (S + P)``; Amdahl's bound on 2 cores ``1 / (f + (1 - f) / 2)``;
* CPU-time efficiency: jobs 1 CPU per file over jobs 2 CPU per file (extra CPU the pool costs);
* projected speed-up on 2 free cores: ``CPU(jobs 1) / (S + P / 2)``, which assumes the jobs 1
  run would use one core (its measurement may use a second thread: then this is optimistic) and
  ignores the tail (at most one task's wall).

The machine is shared (load average, CPU pressure printed): the measured wall ratio may say
more about the other sessions than about masterqc, the CPU figures do not.  The summary.json
and index.csv of the jobs 1 and jobs 2 runs are compared (timings and paths aside): a
difference stops the bench.  Target (issue 15): jobs 2 throughput >= 1.7x jobs 1 on 2 cores,
or the serial part named with its share.  ``--strict`` exits 1 when neither the measured nor
the projected speed-up reaches the target.

Usage: ``bench/bench_batch.py [--files 100] [--seconds 30] [--format json,html,pdf] [--repeat 1] [--strict]``
(iterate with ``--files 4`` or ``--files 20``).  Run it with the project's interpreter
(``.venv/bin/python bench/bench_batch.py``) from a clean checkout: it makes its own folder.

Run time: the whole bench does about ``files x (2 x one file's CPU + 1.5 x its re-render CPU)``
of work; on 2 idle cores, at about 2.8 s CPU per 30 s master with HTML+PDF (1.4 s of it the
PDF), ``--files 100`` takes about 12-14 minutes (``--no-moved`` about 8), ``--files 4`` under
a minute.  The folder is made once (about 0.2 s per file) and kept for later runs.
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import os
import shutil
import subprocess
import sys
import time
from collections import defaultdict
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
sys.path.insert(0, str(REPO))

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

#: per-file stages, in pipeline order (masterqc.stagelog names)
FILE_STAGES = ("import_measure", "measure", "import_judge", "judge", "render_html", "render_pdf", "write_json_csv")
#: the parent's stages, in run order
PARENT_STAGES = ("startup", "plan", "hash", "triage", "parent_put_measurements", "parent_finish_file",
                 "summarise", "run_outputs")
TARGET = 1.7


def make_folder(root: Path, n: int, seconds: float, sr: int = 48000) -> float:
    rng = np.random.default_rng(42)
    t = np.arange(int(seconds * sr)) / sr
    for i in range(n):
        sub = root / ("album_a" if i % 2 == 0 else "album_b")
        sub.mkdir(parents=True, exist_ok=True)
        x = 0.05 * rng.standard_normal((t.size, 2))
        x += 0.2 * np.sin(2 * np.pi * (220 + 40 * i) * t)[:, None]
        x *= 10 ** ((-3.0 * (i % 3)) / 20)
        sf.write(sub / f"{i:03d}.wav", x, sr, subtype="PCM_24")
    return n * seconds


def cpu_pressure() -> str:
    """Linux PSI: share of the last 10 s in which some runnable task waited for a CPU."""
    try:
        with open("/proc/pressure/cpu") as f:
            first = f.readline().split()
        return next(x for x in first if x.startswith("avg10=")).split("=")[1] + " %"
    except (OSError, StopIteration):
        return "n/a"


def load_text() -> str:
    return f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores, CPU pressure {cpu_pressure()}"


def run_process(args: list[str], stage_log: Path, repo: Path = REPO) -> tuple[float, float, int]:
    """``(wall s, CPU s of the process tree, exit code)`` of ``python -m masterqc *args`` (from ``repo``)."""
    env = dict(os.environ, MASTERQC_STAGE_LOG=str(stage_log), PYTHONPATH=str(repo))
    before = os.times()
    t0 = time.perf_counter()
    # (cwd: ``-m`` puts the working folder first on sys.path, before PYTHONPATH)
    proc = subprocess.run([sys.executable, "-m", "masterqc", *args], env=env, stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE, text=True, cwd=str(repo))
    wall = time.perf_counter() - t0
    after = os.times()
    cpu = (after.children_user - before.children_user) + (after.children_system - before.children_system)
    if proc.returncode not in (0, 1):
        raise SystemExit(f"masterqc {' '.join(args)} ended with {proc.returncode}:\n{proc.stderr[-2000:]}")
    return wall, cpu, proc.returncode


def read_stages(path: Path) -> list[dict]:
    with open(path, encoding="utf-8") as f:
        return [json.loads(line) for line in f if line.strip()]


def stage_sums(rows: list[dict]) -> dict:
    """``{(role, stage): [count, wall s, CPU s]}``; start-up rows hold totals since process start."""
    out = defaultdict(lambda: [0, 0.0, 0.0])
    for r in rows:
        s = out[(r["role"], r["stage"])]
        s[0] += 1
        s[1] += r["wall_s"] or 0.0
        s[2] += r["cpu_s"] or 0.0
    return out


def comparable(out_dir: Path) -> tuple[list, list]:
    """summary.json file rows and index.csv rows without what may differ between two runs
    (timings, the run's own paths and ids, the backend)."""
    summary = json.loads((out_dir / "summary.json").read_text(encoding="utf-8"))
    files = []
    for f in summary["files"]:
        f = {k: v for k, v in f.items() if k not in ("elapsed_s", "cpu_s")}
        files.append(f)
    releases = summary["releases"]
    rows = list(csv.reader(io.StringIO((out_dir / "index.csv").read_text(encoding="utf-8"))))
    return [files, releases, summary["counts"], summary["exit_code"]], rows


def analyse(name: str, wall: float, cpu: float, rows: list[dict], n_files: int) -> dict:
    sums = stage_sums(rows)
    parent_cpu = sum(v[2] for (role, stage), v in sums.items()
                     if role == "parent" and stage in ("startup", "run_total"))
    workers = sums.get(("worker", "worker_startup"), [0, 0.0, 0.0])
    tasks = sums.get(("worker", "task"), [0, 0.0, 0.0])
    # the parent's own CPU is its start-up plus its run; what the tree spent beyond it, the workers did
    worker_cpu = max(0.0, cpu - parent_cpu) if workers[0] else 0.0
    return {"name": name, "wall": wall, "cpu": cpu, "sums": sums, "parent_cpu": parent_cpu, "worker_cpu": worker_cpu,
            "worker_startup": workers, "tasks": tasks, "n": n_files}


def print_tables(runs: list[dict], audio_s: float) -> None:
    print(f"\n{'run':<34}{'wall s':>9}{'CPU s':>9}{'CPU/wall':>10}{'CPU/file s':>12}{'files/min':>11}"
          f"{'parent CPU':>12}{'workers CPU':>13}")
    for r in runs:
        print(f"{r['name']:<34}{r['wall']:9.1f}{r['cpu']:9.1f}{r['cpu'] / r['wall']:10.2f}"
              f"{r['cpu'] / r['n']:12.3f}{60 * r['n'] / r['wall']:11.1f}{r['parent_cpu']:12.2f}{r['worker_cpu']:13.2f}")
    print("\nper stage (summed over files and processes; per file = CPU / files)")
    head = "".join(f"{r['name'][:22]:>34}" for r in runs)
    print(f"{'stage':<30}{head}")
    print(f"{'':<30}" + "".join(f"{'n':>6}{'wall s':>9}{'CPU s':>9}{'CPU/file':>10}" for _ in runs))
    keys = [("parent", s) for s in PARENT_STAGES[:4]] + [(None, s) for s in FILE_STAGES] \
        + [("worker", "task"), ("worker", "worker_startup")] + [("parent", s) for s in PARENT_STAGES[4:]] \
        + [("parent", "schedule"), ("parent", "run_total")]
    for role, stage in keys:
        label = stage if role is None else f"{role}: {stage}"
        line = f"{label:<30}"
        for r in runs:
            if role is None:  # a per-file stage: in the parent (jobs 1) or in the workers (jobs 2)
                v = [0, 0.0, 0.0]
                for rl in ("parent", "worker"):
                    w = r["sums"].get((rl, stage))
                    if w:
                        v = [v[0] + w[0], v[1] + w[1], v[2] + w[2]]
            else:
                v = r["sums"].get((role, stage), [0, 0.0, 0.0])
            line += f"{v[0]:6d}{v[1]:9.2f}{v[2]:9.2f}{v[2] / r['n']:10.4f}"
        print(line)


def amdahl(j1: dict, j2: dict) -> dict:
    s = j2["parent_cpu"]
    p = j2["worker_cpu"]
    f = s / (s + p) if s + p else float("nan")
    bound = 1.0 / (f + (1.0 - f) / 2.0)
    efficiency = (j1["cpu"] / j1["n"]) / (j2["cpu"] / j2["n"])
    projected = j1["cpu"] / (s + p / 2.0)
    return {"serial_cpu_s": s, "parallel_cpu_s": p, "serial_share": f, "amdahl_bound": bound,
            "cpu_efficiency": efficiency, "projected_speedup": projected, "measured_speedup": j1["wall"] / j2["wall"]}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=100)
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--format", default="json,html,pdf", help="per-file outputs (json, json,html, ...)")
    ap.add_argument("--repeat", type=int, default=1, help="pairs of runs (the order alternates)")
    ap.add_argument("--repo", default=str(REPO), help="run masterqc from this source tree (e.g. an older commit)")
    ap.add_argument("--no-moved", action="store_true", help="leave out the limits-moved re-judgement runs")
    ap.add_argument("--strict", action="store_true")
    args = ap.parse_args(argv)
    if args.files < 1 or args.seconds <= 0:
        ap.error("--files must be at least 1 and --seconds above 0")
    bench_t0 = time.perf_counter()
    repo = Path(args.repo).resolve()

    work = HERE / "out" / f"batch-{args.files}x{args.seconds:g}s"
    root = work / "in"
    stamp = work / "in.done"
    if not stamp.exists():  # (an interrupted run left no stamp: the folder is made again)
        if work.exists():
            shutil.rmtree(work)
        t_make = time.perf_counter()
        make_folder(root, args.files, args.seconds)
        stamp.write_text("ok\n")
        print(f"made the folder in {time.perf_counter() - t_make:.1f} s")
    audio_s = args.files * args.seconds
    spec = work / "spec.yaml"
    spec.write_text(SPEC)
    for old in work.glob("run-*"):
        shutil.rmtree(old)
    for old in work.glob("stages-*.jsonl"):
        old.unlink()

    def check(out: str, jobs: int, tag: str = "", spec_path: Path = spec) -> tuple[float, float, Path]:
        log = work / f"stages-{out}{tag}.jsonl"
        wall, cpu, _ = run_process([
            "check", str(root), "--spec", str(spec_path), "--out", str(work / f"run-{out}"), "--format", args.format,
            "--jobs", str(jobs), "--quiet"], log, repo)
        return wall, cpu, log

    print(f"masterqc from {repo}")
    print(f"folder: {args.files} files x {args.seconds:g} s stereo 48 kHz 24-bit = {audio_s / 60:.1f} min of audio, "
          f"outputs {args.format}")
    try:
        with open("/proc/sys/kernel/sched_autogroup_enabled") as f:
            print(f"scheduler autogroups: {'on' if f.read().strip() == '1' else 'off'}")
    except OSError:
        pass
    runs = []
    for k in range(args.repeat):
        order = (1, 2) if k % 2 == 0 else (2, 1)
        for jobs in order:
            before = load_text()
            wall, cpu, log = check(f"j{jobs}-{k}", jobs)
            print(f"jobs {jobs} (pair {k + 1}): {wall:.1f} s wall; before: {before}; after: {load_text()}")
            runs.append(analyse(f"jobs {jobs} (pair {k + 1})", wall, cpu, read_stages(log), args.files))
    a1, rows1 = comparable(work / "run-j1-0")
    a2, rows2 = comparable(work / "run-j2-0")
    strip = [{k: v for k, v in f.items() if k not in ("path",)} for f in a1[0]]
    strip2 = [{k: v for k, v in f.items() if k not in ("path",)} for f in a2[0]]
    same = strip == strip2 and a1[1:] == a2[1:] and rows1 == rows2
    if not same:
        print("jobs 1 and jobs 2 gave different summary.json/index.csv rows", file=sys.stderr)
        return 2
    print("summary.json (files, releases, counts, exit code) and index.csv: identical for jobs 1 and jobs 2")
    wall3, cpu3, log3 = check("j2-0", 2, "-again")
    runs.append(analyse("jobs 2, unchanged second run", wall3, cpu3, read_stages(log3), args.files))
    moved = work / "spec-moved.yaml"
    moved.write_text(SPEC.replace("tolerance_lu: 1.0}\npeaks", "tolerance_lu: 1.5}\npeaks"))
    assert moved.read_text() != SPEC
    rejudged = []
    for jobs in (() if args.no_moved else (1, 2)):
        before = load_text()
        wall, cpu, log = check(f"j{jobs}-0", jobs, "-moved", moved)
        print(f"jobs {jobs}, limits moved: {wall:.1f} s wall; before: {before}; after: {load_text()}")
        rejudged.append(analyse(f"jobs {jobs}, limits moved", wall, cpu, read_stages(log), args.files))
    runs += rejudged

    print_tables(runs, audio_s)
    j1 = [r for r in runs if r["name"].startswith("jobs 1")]
    j2 = [r for r in runs if r["name"].startswith("jobs 2 (")]
    print("\nAmdahl, per pair (CPU figures do not depend on the load; the wall ratio does)")
    best = 0.0
    for a, b in zip(j1, j2):
        m = amdahl(a, b)
        best = max(best, m["measured_speedup"], m["projected_speedup"])
        print(f"  serial CPU (parent) {m['serial_cpu_s']:.2f} s, parallel CPU (workers) {m['parallel_cpu_s']:.2f} s: "
              f"serial share {100 * m['serial_share']:.1f} %, Amdahl bound on 2 cores {m['amdahl_bound']:.2f}x")
        print(f"  CPU-time efficiency (jobs 1 CPU per file / jobs 2 CPU per file): {m['cpu_efficiency']:.2f}")
        print(f"  speed-up: measured {m['measured_speedup']:.2f}x (shared machine), projected on 2 free cores "
              f"{m['projected_speedup']:.2f}x (target >= {TARGET})")
    print(f"second run / first run (jobs 2): {wall3 / j2[0]['wall']:.3f} (target <= 0.10)")
    m = amdahl(*rejudged) if rejudged else None
    m and print(f"limits moved (re-judge, re-render): serial share {100 * m['serial_share']:.1f} %, "
          f"measured {m['measured_speedup']:.2f}x, projected on 2 free cores {m['projected_speedup']:.2f}x")
    first = amdahl(j1[0], j2[0])
    per_file = {st: sum((j1[0]["sums"].get((rl, st)) or [0, 0.0, 0.0])[2] for rl in ("parent", "worker")) / args.files
                for st in ("measure", "judge", "render_html", "render_pdf")}
    print(f"\nsummary: jobs 2 / jobs 1 throughput measured {first['measured_speedup']:.2f}x, projected on 2 free "
          f"cores {first['projected_speedup']:.2f}x (target >= {TARGET}); serial share {100 * first['serial_share']:.1f} % "
          f"(parent CPU {first['serial_cpu_s']:.2f} s of {first['serial_cpu_s'] + first['parallel_cpu_s']:.2f} s); "
          f"CPU per file (jobs 1): " + ", ".join(f"{k} {v:.3f} s" for k, v in per_file.items())
          + f"; bench run time {time.perf_counter() - bench_t0:.0f} s")
    return 1 if args.strict and best < TARGET else 0


if __name__ == "__main__":
    sys.exit(main())
