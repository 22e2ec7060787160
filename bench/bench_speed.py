#!/usr/bin/env python3
"""Speed and memory of ``masterqc measure`` as whole processes, side by side in one run.

Every pass is a fresh process (``python -m masterqc measure FILE --json --quiet``
with every analyzer the registry runs by default, default threads), started and
reaped by this script: wall time from start to exit, CPU time (user + system,
all threads) from ``os.wait4``, peak resident memory from the child's own
``/proc/self/status`` VmHWM at exit (``ru_maxrss`` of a child can carry the
parent's peak across fork+exec on Linux).  Start-up (imports, filter design)
is included, as a user sees it.

Sections (each can be skipped):

1. ``speed``: 10-minute and 30-second stereo 48 kHz 24-bit music-like files;
   masterqc measure vs pyebur128 (integrated + LRA + true peak, fed in
   65536-frame blocks, decode included) vs a soundfile decode-only pass
   (65536-frame blocks, float64).  Passes are interleaved (decode, pyebur128,
   masterqc, then again), ``--repeat`` times; medians are reported.
2. ``rates``: the full pass / decode-only ratio on stereo 24-bit files of
   ``--rate-minutes`` at 44.1, 48, 96 and 192 kHz (interleaved, medians).
3. ``split``: the per-analyzer CPU split of measure runs on the 10-minute
   file (the engine's opt-in ``MASTERQC_ANALYZER_CPU_JSON``: each analyzer's
   thread CPU seconds in process() and finish(); the rest is decoding, hashing,
   start-up and the engine; an engine without the opt-in gets its analyzer
   classes wrapped the same way).
4. ``memory``: peak resident memory of measure on 6-channel 96 kHz 24-bit RF64
   files of 10 min, 1 h and 3 h (``--memory-minutes``; the 3-hour file is
   18.7 GB, the 1-hour one 6.2 GB: check the free disk space), each generated
   streaming under bench/out/ and deleted after its run (``--keep`` keeps
   them).  Target: flat in duration, < 300 MB at 3 h.

Targets (issue 15): 10 min: <= 0.5x pyebur128 wall and <= 4x decode-only wall;
30 s: <= 1.5x pyebur128 wall; memory flat and < 300 MB.  The machine is
shared: the load average is printed before and after each section, and the
ratios (not the absolute times) are what to read.  A missed target is
reported, not fatal (``--strict`` exits 1).

The generated programme peaks near 0 dBTP: turn monitors down before listening to it.

With ``--base-root DIR`` (a tree holding an older ``masterqc/`` package, e.g.
``git archive BASE masterqc | tar -x -C DIR``) the speed, rates and split
sections also run that version, interleaved with the others, as "base".

Usage: ``bench/bench_speed.py [--repeat 3] [--sections speed,rates,split,memory]
[--memory-minutes 10,60,180] [--rate-minutes 2] [--base-root DIR] [--keep] [--strict]``.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
OUT = HERE / "out"
BLOCK = 65536

# A child prints its VmHWM (MB) to the file named by this variable, at exit.
CHILD_PRELUDE = r"""
import atexit, os, sys
def _hwm():
    path = os.environ.get("BENCH_HWM_FILE")
    if not path:
        return
    mb = None
    try:
        for line in open("/proc/self/status"):
            if line.startswith("VmHWM:"):
                mb = int(line.split()[1]) / 1024
    except OSError:
        pass
    with open(path, "w") as f:
        f.write(str(mb))
atexit.register(_hwm)
"""

CHILD_MEASURE = CHILD_PRELUDE + r"""
sys.path.insert(0, sys.argv[1])
split_path = os.environ.get("BENCH_SPLIT_FILE")
if split_path:
    import masterqc.measure.engine as engine
    if hasattr(engine, "CPU_SPLIT_ENV"):          # the engine's own opt-in split
        os.environ[engine.CPU_SPLIT_ENV] = split_path
    else:                                          # an engine without it: wrap the analyzer classes
        import json, time
        import masterqc.measure.registry as registry
        spent, classes = {}, registry.analyzer_classes()
        def wrap(cls):
            rec = spent.setdefault(cls.__name__, [0.0, 0.0])
            def process(self, block, _cls=cls):
                t = time.thread_time(); _cls.process(self, block); rec[0] += time.thread_time() - t
            def finish(self, _cls=cls):
                t = time.thread_time(); r = _cls.finish(self); rec[1] += time.thread_time() - t
                return r
            return type(cls.__name__, (cls,), {"process": process, "finish": finish})
        wrapped = [wrap(c) for c in classes]
        registry.analyzer_classes = lambda: list(wrapped)
        engine.analyzer_classes = registry.analyzer_classes
        def dump():
            with open(split_path, "w") as f:
                json.dump({"process_cpu_s": None, "threads": None,
                           "analyzers": {k: v for k, v in spent.items() if sum(v)}}, f)
        atexit.register(dump)
from masterqc.cli import main
sys.exit(main(["measure", sys.argv[2], "--json", "--quiet"]))
"""

CHILD_EBUR = CHILD_PRELUDE + r"""
import numpy as np, soundfile as sf, pyebur128 as eb
mode = eb.MeasurementMode.MODE_I | eb.MeasurementMode.MODE_LRA | eb.MeasurementMode.MODE_TRUE_PEAK
with sf.SoundFile(sys.argv[2]) as f:
    st = eb.R128State(f.channels, f.samplerate, mode)
    while True:
        b = f.read(65536, dtype="float64", always_2d=True)
        if not b.shape[0]:
            break
        st.add_frames(np.ascontiguousarray(b).ravel(), b.shape[0])
    tp = max(eb.get_true_peak(st, c) for c in range(f.channels))
print(eb.get_loudness_global(st), eb.get_loudness_range(st), tp)
"""

CHILD_DECODE = CHILD_PRELUDE + r"""
import soundfile as sf
peak = 0.0
with sf.SoundFile(sys.argv[2]) as f:
    while True:
        b = f.read(65536, dtype="float64", always_2d=True)
        if not b.shape[0]:
            break
        peak = max(peak, float(b[0, 0]))
print(peak)
"""

CHILDREN = {"decode": CHILD_DECODE, "pyebur128": CHILD_EBUR, "masterqc": CHILD_MEASURE,
            "base": CHILD_MEASURE}
#: source tree each masterqc kind imports from ("base": --base-root, an older checkout to compare with)
ROOTS = {"masterqc": ROOT}


# --- test programme ------------------------------------------------------------------------------
def programme_loop(fs: int, channels: int = 2, seconds: float = 30.7, seed: int = 2026) -> np.ndarray:
    """A music-like loop at ``fs``: chords with envelopes, a decaying low drum every
    half second, noise bursts, a spread over the channels; peaks near 0 dBFS."""
    rng = np.random.default_rng(seed)
    n = int(seconds * fs)
    t = np.arange(n) / fs
    x = np.zeros((n, channels))
    roots = np.array([110.0, 146.83, 98.0, 130.81])
    f0 = roots[(np.floor(t / 2.0).astype(int)) % 4]
    phase = 2 * np.pi * np.cumsum(f0) / fs
    env = np.exp(-((t % 2.0) * 1.2))
    for k, (ratio, amp) in enumerate([(1, 0.20), (1.26, 0.12), (1.5, 0.12), (2, 0.08), (3, 0.05),
                                      (4.5, 0.03), (8, 0.015)]):
        s = amp * env * np.sin(ratio * phase + k)
        for c in range(channels):
            x[:, c] += s * (0.6 + 0.8 * (0.5 + 0.5 * np.sin(k + 1.7 * c)))
    beat = t % 0.5
    drum = 0.6 * np.exp(-beat * 18) * np.sin(2 * np.pi * (55 + 90 * np.exp(-beat * 30)) * beat)
    x += drum[:, None]
    hat = (t % 0.25) < 0.03
    x += rng.standard_normal((n, channels)) * 0.05 * hat[:, None]
    x += rng.standard_normal((n, channels)) * 0.004
    x *= 0.98 / np.abs(x).max()
    return x


def arrangement_gain(t_s: np.ndarray) -> np.ndarray:
    """Quiet verses, loud choruses (about 12 dB apart), 90 s cycle."""
    return 0.25 + 0.75 * (0.5 + 0.5 * np.tanh(4 * np.sin(2 * np.pi * t_s / 90.0)))


def make_file(path: Path, seconds: float, fs: int, channels: int = 2, fmt: str = "WAV",
              loop_s: float = 30.7, tiled: bool = False) -> Path:
    """Write the programme, 24-bit, streaming in 1 Mi-frame chunks (reused when present).

    ``tiled``: the arrangement gain is applied once over a ``loop_s`` loop, which is
    converted to 24-bit codes once and written again and again (for the multi-GB
    memory files: the writer then costs little more than the disk)."""
    frames = int(round(seconds * fs))
    if path.exists():
        try:
            if sf.info(str(path)).frames == frames:
                return path
        except RuntimeError:
            pass
    path.parent.mkdir(parents=True, exist_ok=True)
    loop = programme_loop(fs, channels, loop_s)
    tmp = path.with_name(path.name + ".part")
    with sf.SoundFile(str(tmp), "w", fs, channels, subtype="PCM_24", format=fmt) as f:
        if tiled:
            t = np.arange(loop.shape[0]) / fs
            codes = np.round(np.clip(loop * arrangement_gain(t)[:, None], -1.0, 1.0 - 2.0 ** -23) * 2.0 ** 23)
            codes = (codes.astype(np.int32) << 8)             # int32 full scale: 24-bit codes, exact
            del loop
            done = 0
            while done < frames:
                m = min(codes.shape[0], frames - done)
                f.write(codes[:m])
                done += m
        else:
            done, chunk = 0, 1 << 20
            while done < frames:
                m = min(chunk, frames - done)
                pos = np.arange(done, done + m)
                f.write(np.clip(loop[pos % loop.shape[0]] * arrangement_gain(pos / fs)[:, None], -1.0,
                                1.0 - 2.0 ** -23))
                done += m
    os.replace(tmp, path)
    return path


# --- whole-process runs --------------------------------------------------------------------------
def run_child(kind: str, path: Path, env_extra: dict | None = None) -> dict:
    """One fresh process; wall, CPU (user+sys) and peak RSS (MB)."""
    fd, hwm = tempfile.mkstemp(prefix="bench_hwm_")
    os.close(fd)
    env = dict(os.environ, BENCH_HWM_FILE=hwm, **(env_extra or {}))
    t = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-c", CHILDREN[kind], str(ROOTS.get(kind, ROOT)), str(path)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)
    _, status, ru = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode(errors="replace")
    proc.stderr.close()
    try:
        rss = float(Path(hwm).read_text() or "nan")
    except (OSError, ValueError):
        rss = float("nan")
    os.unlink(hwm)
    if proc.returncode != 0:
        raise RuntimeError(f"{kind} on {path.name} exited {proc.returncode}: {err[-2000:]}")
    return {"wall_s": wall, "cpu_s": ru.ru_utime + ru.ru_stime, "rss_mb": rss}


def load() -> str:
    a, b, c = os.getloadavg()
    return f"load average {a:.2f} {b:.2f} {c:.2f} (2 cores)"


def interleaved(files: dict, kinds, repeat: int) -> dict:
    """``{(file label, kind): [runs]}``: every kind on every file, interleaved, ``repeat`` rounds."""
    runs: dict = {}
    for _ in range(max(1, repeat)):
        for label, path in files.items():
            for kind in kinds:
                runs.setdefault((label, kind), []).append(run_child(kind, path))
    return runs


def med(runs, key="wall_s") -> float:
    return statistics.median(r[key] for r in runs)


def spread(runs, key="wall_s") -> str:
    v = [r[key] for r in runs]
    return f"{min(v):.2f}-{max(v):.2f}"


def verdict(ok: bool) -> str:
    return "ok" if ok else "MISSED"


# --- sections --------------------------------------------------------------------------------------
def section_speed(args, results: dict) -> bool:
    files = {"10 min": make_file(OUT / "speed_10min_48k.wav", 600, 48000),
             "30 s": make_file(OUT / "speed_30s_48k.wav", 30, 48000)}
    for p in files.values():                                   # warm the page cache and imports
        run_child("decode", p)
    run_child("masterqc", files["30 s"])
    print(f"\n[speed] stereo 48 kHz 24-bit, whole processes, interleaved, {args.repeat} rounds, medians; {load()}")
    kinds = ("decode", "pyebur128", "masterqc") + (("base",) if "base" in ROOTS else ())
    runs = interleaved(files, kinds, args.repeat)
    print(f"  after: {load()}")
    ok = True
    print(f"  {'file':<7} {'pass':<10} {'wall s (med)':>12} {'range':>12} {'CPU s (med)':>11} {'peak MB':>8}")
    for label in files:
        for kind in kinds:
            r = runs[(label, kind)]
            print(f"  {label:<7} {kind:<10} {med(r):12.2f} {spread(r):>12} {med(r, 'cpu_s'):11.2f} "
                  f"{med(r, 'rss_mb'):8.0f}")
    for label in files:
        mq, eb, dec = (runs[(label, k)] for k in ("masterqc", "pyebur128", "decode"))
        r_eb, r_dec = med(mq) / med(eb), med(mq) / med(dec)
        # per-round ratios (side by side in the same round), median
        rr_eb = statistics.median(a["wall_s"] / b["wall_s"] for a, b in zip(mq, eb))
        rr_dec = statistics.median(a["wall_s"] / b["wall_s"] for a, b in zip(mq, dec))
        c_eb = med(mq, "cpu_s") / med(eb, "cpu_s")
        c_dec = med(mq, "cpu_s") / med(dec, "cpu_s")
        goal_eb = 0.5 if label == "10 min" else 1.5
        line = (f"  {label:<7} masterqc/pyebur128 wall {r_eb:5.2f}x (per-round median {rr_eb:5.2f}x, "
                f"target <= {goal_eb}x: {verdict(r_eb <= goal_eb)}); CPU {c_eb:5.2f}x")
        if label == "10 min":
            line += (f"\n  {'':<7} masterqc/decode wall    {r_dec:5.2f}x (per-round median {rr_dec:5.2f}x, "
                     f"target <= 4x: {verdict(r_dec <= 4.0)}); CPU {c_dec:5.2f}x")
            ok = ok and r_dec <= 4.0
        if "base" in ROOTS:
            bs = runs[(label, "base")]
            line += (f"\n  {'':<7} base (--base-root): /pyebur128 wall {med(bs) / med(eb):5.2f}x, /decode wall "
                     f"{med(bs) / med(dec):5.2f}x, CPU {med(bs, 'cpu_s') / med(eb, 'cpu_s'):5.2f}x pyebur128; "
                     f"masterqc/base wall {med(mq) / med(bs):5.2f}x, CPU {med(mq, 'cpu_s') / med(bs, 'cpu_s'):5.2f}x")
        print(line)
        ok = ok and r_eb <= goal_eb
    results["speed"] = {f"{l}/{k}": v for (l, k), v in runs.items()}
    return ok


def section_rates(args, results: dict) -> bool:
    rates = (44100, 48000, 96000, 192000)
    files = {f"{r / 1000:g} kHz": make_file(OUT / f"speed_rate_{r}.wav", args.rate_minutes * 60, r)
             for r in rates}
    for p in files.values():
        run_child("decode", p)
    print(f"\n[rates] full pass / decode-only, stereo 24-bit, {args.rate_minutes:g} min each, "
          f"{args.repeat} rounds, medians; {load()}")
    kinds = ("decode", "masterqc") + (("base",) if "base" in ROOTS else ())
    runs = interleaved(files, kinds, args.repeat)
    print(f"  after: {load()}")
    for label in files:
        mq, dec = runs[(label, "masterqc")], runs[(label, "decode")]
        line = (f"  {label:>9}: decode {med(dec):6.2f} s, masterqc {med(mq):6.2f} s -> wall {med(mq) / med(dec):5.2f}x, "
                f"CPU {med(mq, 'cpu_s') / med(dec, 'cpu_s'):5.2f}x")
        if "base" in ROOTS:
            bs = runs[(label, "base")]
            line += f";  base {med(bs):6.2f} s -> wall {med(bs) / med(dec):5.2f}x, CPU {med(bs, 'cpu_s') / med(dec, 'cpu_s'):5.2f}x"
        print(line)
    results["rates"] = {f"{l}/{k}": v for (l, k), v in runs.items()}
    return True


def _split_once(kind: str, path: Path) -> dict:
    fd, out = tempfile.mkstemp(prefix="bench_split_", suffix=".json")
    os.close(fd)
    try:
        whole = run_child(kind, path, {"BENCH_SPLIT_FILE": out})
        data = json.loads(Path(out).read_text())
    finally:
        os.unlink(out)
    return {"whole": whole, **data}


def section_split(args, results: dict) -> bool:
    path = make_file(OUT / "speed_10min_48k.wav", 600, 48000)
    kinds = ("masterqc",) + (("base",) if "base" in ROOTS else ())
    print(f"\n[split] per-analyzer CPU seconds (each analyzer's thread CPU in process() and finish()), "
          f"10 min stereo 48 kHz, default threads, {args.split_repeat} runs per tree, medians; {load()}")
    got = {k: [] for k in kinds}
    for _ in range(max(1, args.split_repeat)):
        for kind in kinds:
            got[kind].append(_split_once(kind, path))
    print(f"  after: {load()}")
    names = sorted({n for k in kinds for r in got[k] for n in r["analyzers"]},
                   key=lambda n: -statistics.median(sum(r["analyzers"].get(n, [0, 0])) for r in got["masterqc"]))
    head = "".join(f" {k:>16}" for k in kinds)
    print(f"  {'analyzer':<30}{head}   (CPU s: process + finish, % of the whole process)")

    def cell(kind, n):
        v = statistics.median(sum(r["analyzers"].get(n, [0, 0])) for r in got[kind])
        tot = statistics.median(r["whole"]["cpu_s"] for r in got[kind])
        return f" {v:8.2f} {100 * v / tot:5.1f} %"
    for n in names:
        print(f"  {n:<30}" + "".join(cell(k, n) for k in kinds))
    rest = "".join(f" {statistics.median(r['whole']['cpu_s'] - sum(map(sum, r['analyzers'].values())) for r in got[k]):8.2f}       "
                   for k in kinds)
    whole = "".join(f" {statistics.median(r['whole']['cpu_s'] for r in got[k]):8.2f}       " for k in kinds)
    walls = "".join(f" {statistics.median(r['whole']['wall_s'] for r in got[k]):8.2f}       " for k in kinds)
    print(f"  {'(decode, hash, start-up, engine)':<30}{rest}")

    def part(kind, fn):
        vals = [fn(r) for r in got[kind]]
        vals = [v for v in vals if v is not None]
        return f" {statistics.median(vals):8.2f}       " if vals else f" {'-':>8}       "

    def threads_cpu(key):
        return lambda r: (r.get("threads_cpu_s") or {}).get(key)

    def scheduling(r):
        t = r.get("threads_cpu_s") or {}
        if "analyze_s" not in t:
            return None
        # finish() calls the analyzer threads took (an engine that finishes analyzers early)
        return t["analyze_s"] - sum(v[0] for v in r["analyzers"].values()) - t.get("finish_s", 0.0)

    def other(r):
        t = r.get("threads_cpu_s") or {}
        if "analyze_s" not in t or r.get("process_cpu_s") is None:
            return None
        return (r["process_cpu_s"] - (t["hash_s"] - r.get("hash_before_measure_s", 0.0)) - t["read_s"]
                - t["analyze_s"] - sum(v[1] for v in r["analyzers"].values()) + t.get("finish_s", 0.0))
    # the engine's own opt-in split of that rest (older engines: '-'); a hash the command line
    # started before the measurement (hash_before_measure_s) is counted in the hash row only
    for label, fn in (("  start-up (before measuring)",
                       lambda r: r["whole"]["cpu_s"] - r["process_cpu_s"] - r.get("hash_before_measure_s", 0.0)
                       if r.get("process_cpu_s") is not None else None),
                      ("  hash (SHA-256 of the file)", threads_cpu("hash_s")),
                      ("  decode + block preparation", threads_cpu("read_s")),
                      ("  scheduling (analyzer threads)", scheduling),
                      ("  open, set-up, result", other)):
        print(f"  {label:<30}" + "".join(part(k, fn) for k in kinds))
    print(f"  {'whole process CPU':<30}{whole}")
    print(f"  {'whole process wall':<30}{walls}")
    results["split"] = got
    return True


def section_memory(args, results: dict) -> bool:
    mem = {}
    print(f"\n[memory] peak resident memory of measure, 6 channels 96 kHz 24-bit RF64, default threads; {load()}")
    for minutes in args.memory_minutes:
        path = OUT / f"memory_{minutes:g}min_6ch_96k.rf64"
        need = minutes * 60 * 96000 * 6 * 3
        OUT.mkdir(parents=True, exist_ok=True)
        free = shutil.disk_usage(OUT).free
        if not path.exists() and free < need * 1.1:
            print(f"  {minutes:>6g} min: skipped, needs {need / 1e9:.1f} GB under {OUT}, {free / 1e9:.1f} GB free")
            continue
        t = time.perf_counter()
        make_file(path, minutes * 60, 96000, channels=6, fmt="RF64", loop_s=45.3, tiled=True)
        gen = time.perf_counter() - t
        try:
            r = run_child("masterqc", path)
        finally:
            size_gb = path.stat().st_size / 1e9
            if not args.keep:
                path.unlink()
        mem[minutes] = r
        print(f"  {minutes:>6g} min ({size_gb:5.2f} GB, written in {gen:5.0f} s): peak resident {r['rss_mb']:6.1f} MB, "
              f"wall {r['wall_s']:7.1f} s, CPU {r['cpu_s']:7.1f} s; {load()}", flush=True)
    if not mem:
        return False
    peaks = [r["rss_mb"] for r in mem.values()]
    under = max(peaks) < 300
    flat = max(peaks) <= min(peaks) * 1.15 + 10
    print(f"  target < 300 MB: {verdict(under)}; flat (largest within 15 % + 10 MB of smallest): {verdict(flat)}")
    results["memory"] = {str(k): v for k, v in mem.items()}
    return under and flat


SECTIONS = {"speed": section_speed, "rates": section_rates, "split": section_split, "memory": section_memory}


def write_bytecode(roots) -> None:
    """Write the bytecode caches of each tree's ``masterqc`` package first, as an installed package
    has them: with ``PYTHONDONTWRITEBYTECODE`` set (or a tree never imported before) every child
    would compile every module it imports again, a start-up cost (tenths of a second) that no
    installed copy pays and that pyebur128's and soundfile's installed modules do not pay."""
    import compileall
    for root in sorted(roots):
        compileall.compile_dir(str(Path(root) / "masterqc"), quiet=1)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=3, help="interleaved rounds; medians are reported")
    ap.add_argument("--sections", default="speed,rates,split,memory")
    ap.add_argument("--rate-minutes", type=float, default=2.0)
    ap.add_argument("--memory-minutes", default="10,60,180",
                    type=lambda s: [float(v) for v in s.split(",") if v])
    ap.add_argument("--keep", action="store_true", help="keep the memory-bench files")
    ap.add_argument("--split-repeat", type=int, default=2, help="measure runs per tree in the split section")
    ap.add_argument("--base-root", help="a source tree holding an older masterqc/ package, measured side by side "
                                        "as 'base' (e.g. an export of the commit before a change)")
    ap.add_argument("--json", help="also write the raw figures here")
    ap.add_argument("--strict", action="store_true", help="exit 1 when a target is missed")
    args = ap.parse_args(argv)
    if args.base_root:
        base = Path(args.base_root).resolve()
        if not (base / "masterqc" / "__init__.py").is_file():
            ap.error(f"--base-root {base}: no masterqc/__init__.py there")
        ROOTS["base"] = base
    print("bench_speed: caution: the generated programme peaks near 0 dBTP; turn monitors down before listening.")
    write_bytecode(set(ROOTS.values()))
    t0 = time.perf_counter()
    ok, results = True, {}
    for name in [s.strip() for s in args.sections.split(",") if s.strip()]:
        if name not in SECTIONS:
            ap.error(f"unknown section {name!r} (choose from {', '.join(SECTIONS)})")
        ok = SECTIONS[name](args, results) and ok
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=1))
    print(f"\nbench_speed done in {time.perf_counter() - t0:.0f} s; {load()}")
    return 1 if (args.strict and not ok) else 0


if __name__ == "__main__":
    sys.exit(main())
