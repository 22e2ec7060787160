#!/usr/bin/env python3
"""Core benchmark: masterqc against pyebur128, pyloudnorm and a decode-only pass.

Generates (in bench/out/, git-ignored) a 10-minute and a 60-minute stereo
48 kHz 24-bit music-like file, then prints, from one run, side by side:

- the time of a decode-only pass (soundfile block read, the engine's block size),
  of masterqc ``measure_file`` (every registered analyzer, file hash included)
  on one thread (``threads=1``, what batch jobs use) and with the default
  threads (``MeasureOptions().threads``),
  of pyebur128 (integrated + LRA + true peak, fed in the same blocks, decode
  included) and of pyloudnorm (integrated, ``filter_class="DeMan"``, whole-file
  read included), as ratios;
- the per-analyzer split: time spent in each analyzer's ``process()`` and
  ``finish()`` (one thread, so the parts add up), and from it the issue-4
  share (sampling analyses: spectrum, imaging, aliasing, ultrasonic,
  conversion, over the core: loudness and peaks; target <= 50 %) and the
  issue-5 share (sample-level analyzers: clipping, dc, silence, non-finite,
  bit depth, channel relations, over the core);
- masterqc's peak memory (peak resident set and the tracemalloc peak, in one fresh
  subprocess per file, tracing on) for the 10- and 60-minute files, to show it
  is flat.

Targets (printed beside the figures): <= 1.0x pyebur128 (aim 0.5x), <= 5x the
decode-only pass, peak memory < 300 MB and flat, sampling analyses <= 50 % of
the core.  The machine is shared: read
the ratios, not the absolute times.  A missed target is reported, not fatal;
``--strict`` makes it exit 1.

Usage: ``bench/bench_core.py [--minutes 10] [--long-minutes 60] [--repeat 2] [--strict]``.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"
sys.path.insert(0, str(HERE.parent))

FS = 48000
BLOCK = 65536
LOOP_S = 30.7          # length of the generated loop (not a multiple of the block size)


# --- test programme ----------------------------------------------------------------------------
def music_loop(seconds: float = LOOP_S, seed: int = 2026) -> np.ndarray:
    """A stereo, music-like loop: a chord progression with envelopes, a decaying
    low drum every half second, noise bursts, stereo spread; peaks near 0 dBTP."""
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    t = np.arange(n) / FS
    x = np.zeros((n, 2))
    roots = [110.0, 146.83, 98.0, 130.81]            # four chords, 2 s each
    chord = (np.floor(t / 2.0).astype(int)) % 4
    f0 = np.take(roots, chord)
    phase = 2 * np.pi * np.cumsum(f0) / FS
    note_env = np.exp(-((t % 2.0) * 1.2))
    for k, (ratio, amp) in enumerate([(1, 0.20), (1.26, 0.12), (1.5, 0.12), (2, 0.08), (3, 0.05), (4.5, 0.03), (8, 0.015)]):
        pan = 0.5 + 0.4 * np.sin(k)
        s = amp * note_env * np.sin(ratio * phase + k)
        x[:, 0] += s * (1 - pan) * 2
        x[:, 1] += s * pan * 2
    beat = t % 0.5
    drum = 0.6 * np.exp(-beat * 18) * np.sin(2 * np.pi * (55 + 90 * np.exp(-beat * 30)) * beat)
    x += drum[:, None]
    hat = (t % 0.25) < 0.03
    noise = rng.standard_normal((n, 2)) * 0.05
    x += noise * hat[:, None]
    x += rng.standard_normal((n, 2)) * 0.004
    x *= 0.98 / np.abs(x).max()
    return x


def section_gain(t_s: np.ndarray) -> np.ndarray:
    """Slow arrangement: quiet verses, loud choruses (about 12 dB apart), 90 s cycle."""
    return 0.25 + 0.75 * (0.5 + 0.5 * np.tanh(4 * np.sin(2 * np.pi * t_s / 90.0)))


def make_file(path: Path, minutes: float, fs: int = FS, loop_fn=None) -> Path:
    """Write the programme (the loop tiled with the arrangement gain), block by block, at ``fs``;
    ``loop_fn()`` gives another loop at that rate (default: :func:`music_loop`)."""
    frames = int(round(minutes * 60 * fs))
    if path.exists():
        try:
            if sf.info(str(path)).frames == frames:
                return path
        except RuntimeError:
            pass
    path.parent.mkdir(parents=True, exist_ok=True)
    loop = music_loop() if loop_fn is None else loop_fn()
    tmp = path.with_suffix(".tmp.wav")
    with sf.SoundFile(str(tmp), "w", fs, 2, subtype="PCM_24", format="WAV") as f:
        done = 0
        chunk = 1 << 20
        while done < frames:
            m = min(chunk, frames - done)
            idx = (np.arange(done, done + m)) % loop.shape[0]
            g = section_gain(np.arange(done, done + m) / fs)
            f.write(np.clip(loop[idx] * g[:, None], -1.0, 1.0 - 2.0 ** -23))
            done += m
    os.replace(tmp, path)
    return path


# --- timed passes --------------------------------------------------------------------------------
def decode_only(path: Path) -> float:
    peak = 0.0
    with sf.SoundFile(str(path)) as f:
        while True:
            b = f.read(BLOCK, dtype="float64", always_2d=True)
            if not b.shape[0]:
                break
            peak = max(peak, float(b[0, 0]))
    return peak


def run_masterqc(path: Path, threads: int | None = None):
    from masterqc.measure.engine import measure_file
    from masterqc.measure.options import MeasureOptions
    opts = MeasureOptions(block_frames=BLOCK)
    if threads is not None:
        opts = MeasureOptions(block_frames=BLOCK, threads=threads)
    return measure_file(str(path), opts)


#: analyzer classes of each group in the shares (class names)
CORE = ("LoudnessAnalyzer", "SamplePeakAnalyzer", "TruePeakAnalyzer")
SAMPLING = ("SamplingSpectrumAnalyzer", "ImagingAnalyzer", "AliasingAnalyzer", "UltrasonicAnalyzer",
            "ConversionAnalyzer")
SAMPLE_LEVEL = ("ClippingAnalyzer", "DcOffsetAnalyzer", "SilenceAnalyzer", "NonFiniteAnalyzer",
                "BitDepthAnalyzer", "ChannelRelationAnalyzer")


def run_subset(path: Path, names, threads: int | None = None):
    """One engine pass with only the analyzer classes named (default threads unless given)."""
    from masterqc.audio import open_stream
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    from masterqc.measure.registry import analyzer_classes
    opts = MeasureOptions(block_frames=BLOCK) if threads is None else MeasureOptions(block_frames=BLOCK,
                                                                                    threads=threads)
    classes = [c for c in analyzer_classes() if c.__name__ in names]
    with open_stream(str(path)) as stream:
        return run_analyzers(stream, opts, classes=classes)


def run_core(path: Path):
    return run_subset(path, CORE)


def run_core_and_sample_level(path: Path):
    return run_subset(path, CORE + SAMPLE_LEVEL)


def run_pyebur128(path: Path):
    import pyebur128 as eb
    mode = eb.MeasurementMode.MODE_I | eb.MeasurementMode.MODE_LRA | eb.MeasurementMode.MODE_TRUE_PEAK
    with sf.SoundFile(str(path)) as f:
        st = eb.R128State(f.channels, f.samplerate, mode)
        while True:
            b = f.read(BLOCK, dtype="float64", always_2d=True)
            if not b.shape[0]:
                break
            st.add_frames(np.ascontiguousarray(b).ravel(), b.shape[0])
        tp = max(eb.get_true_peak(st, c) for c in range(f.channels))
    return eb.get_loudness_global(st), eb.get_loudness_range(st), 20 * np.log10(tp)


def run_pyloudnorm(path: Path):
    import pyloudnorm
    data, rate = sf.read(str(path), dtype="float64", always_2d=True)
    return pyloudnorm.Meter(rate, filter_class="DeMan").integrated_loudness(data)


def timed(fn, *args, repeat: int = 1):
    """Best of ``repeat`` wall-clock times (seconds) and the last result."""
    best = float("inf")
    for _ in range(max(1, repeat)):
        t = time.perf_counter()
        out = fn(*args)
        best = min(best, time.perf_counter() - t)
    return best, out


def timed_cpu(fn, *args):
    """(wall seconds, CPU seconds of the whole process (all threads), result) of one call."""
    c, t = time.process_time(), time.perf_counter()
    out = fn(*args)
    return time.perf_counter() - t, time.process_time() - c, out


def timing_wrappers(classes, spent):
    """Subclasses of ``classes`` whose process() and finish() add their wall seconds to
    ``spent[class name]`` (for the cost benches of the analyzer groups)."""
    out = []
    for cls in classes:
        name = cls.__name__
        spent[name] = 0.0

        def process(self, block, _cls=cls, _name=name):
            t = time.perf_counter()
            _cls.process(self, block)
            spent[_name] += time.perf_counter() - t

        def finish(self, _cls=cls, _name=name):
            t = time.perf_counter()
            r = _cls.finish(self)
            spent[_name] += time.perf_counter() - t
            return r
        out.append(type(name, (cls,), {"process": process, "finish": finish}))
    return out


def analyzer_split(path: Path):
    """CPU seconds (``time.thread_time``: the machine is shared, waiting for a core is not
    counted) in process() and finish() of each registered analyzer (one extra run, one
    thread), the run's CPU seconds and the names of the analyzers that did not apply."""
    from masterqc.audio.reader import open_stream
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    from masterqc.measure.registry import analyzer_classes

    spent: dict[str, list[float]] = {}

    def wrap(cls):
        name = cls.__name__
        spent[name] = [0.0, 0.0]

        def process(self, block, _cls=cls):
            t = time.thread_time()
            _cls.process(self, block)
            spent[name][0] += time.thread_time() - t

        def finish(self, _cls=cls):
            t = time.thread_time()
            r = _cls.finish(self)
            spent[name][1] += time.thread_time() - t
            return r
        return type(name, (cls,), {"process": process, "finish": finish})

    classes = [wrap(c) for c in analyzer_classes()]
    opts = MeasureOptions(block_frames=BLOCK, threads=1)     # one thread: the parts add up
    t = time.thread_time()
    with open_stream(str(path)) as stream:
        applied = [c.__name__ for c in classes if c.applies_to(stream.info, opts)]
        run_analyzers(stream, opts, classes=classes)
    total = time.thread_time() - t
    return total, {k: v for k, v in spent.items() if k in applied}, [k for k in spent if k not in applied]


# --- memory, in a fresh subprocess ---------------------------------------------------------------
# Peak resident memory is read from /proc/self/status VmHWM (reset at exec);
# ru_maxrss of a child can carry the parent's peak across fork+exec on Linux.
CHILD = r"""
import json, resource, sys, time, tracemalloc
def hwm_mb():
    try:
        for line in open("/proc/self/status"):
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
sys.path.insert(0, sys.argv[2])
from masterqc.measure.engine import measure_file
from masterqc.measure.options import MeasureOptions
if sys.argv[3] == "trace":
    tracemalloc.start()
t = time.perf_counter()
r = measure_file(sys.argv[1], MeasureOptions(block_frames=65536))
el = time.perf_counter() - t
peak = tracemalloc.get_traced_memory()[1] if tracemalloc.is_tracing() else None
print(json.dumps({"elapsed_s": el, "maxrss_mb": hwm_mb(),
                  "traced_peak_mb": None if peak is None else peak / 2**20,
                  "integrated_lufs": r["measurements"].get("integrated_lufs")}))
"""


def child_memory(path: Path, mode: str) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, str(path), str(HERE.parent), mode],
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def verdict(ok: bool) -> str:
    return "ok" if ok else "MISSED"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--minutes", type=float, default=10.0)
    ap.add_argument("--long-minutes", type=float, default=60.0)
    ap.add_argument("--repeat", type=int, default=2, help="timings are the best of this many runs")
    ap.add_argument("--strict", action="store_true", help="exit 1 when a target is missed")
    args = ap.parse_args(argv)

    t0 = time.perf_counter()
    short = make_file(OUT / f"core_{args.minutes:g}min.wav", args.minutes)
    long = make_file(OUT / f"core_{args.long_minutes:g}min.wav", args.long_minutes)
    print(f"bench_core: files ready in {time.perf_counter() - t0:.1f} s "
          f"({short.name}, {long.name}; stereo 48 kHz 24-bit, music-like)")
    print("caution: the generated programme peaks near 0 dBTP; turn monitors down before listening.")

    decode_only(short)                                  # warm the page cache
    run_masterqc(make_file(OUT / "core_warmup_0.1min.wav", 0.1))   # imports, filter design
    from masterqc.measure.options import MeasureOptions
    default_threads = MeasureOptions().threads
    rep = args.repeat
    # interleaved, so that a change of machine load hits every pass alike
    best, cpu = {}, {}
    result = None
    passes = [("dec", decode_only, ()), ("mq1", run_masterqc, (1,)), ("mqN", run_masterqc, (None,)),
              ("core", run_core, ()), ("core5", run_core_and_sample_level, ()),
              ("eb", run_pyebur128, ()), ("pln", run_pyloudnorm, ())]
    outs = {}
    for _ in range(max(1, rep)):
        for key, fn, extra in passes:
            t, c, out = timed_cpu(fn, short, *extra)
            best[key] = min(best.get(key, float("inf")), t)
            cpu[key] = min(cpu.get(key, float("inf")), c)
            outs[key] = out
    t_dec, t_mq1, t_mq, t_eb, t_pln = (best[k] for k in ("dec", "mq1", "mqN", "eb", "pln"))
    result, (eb_i, eb_lra, eb_tp), pln_i = outs["mqN"], outs["eb"], outs["pln"]
    m = result["measurements"]
    same = {k: v for k, v in outs["mq1"]["measurements"].items()} == dict(m)

    print(f"\n{args.minutes:g}-minute file, one run, side by side (best of {rep}, passes interleaved; "
          "seconds; ratio = masterqc (default threads) / other)")
    rows = [("decode only (soundfile, 65536-frame blocks)", t_dec),
            ("masterqc measure_file, threads=1", t_mq1),
            (f"masterqc measure_file, threads={default_threads} (default)", t_mq),
            ("pyebur128 I + LRA + true peak (blocks)", t_eb),
            ("pyloudnorm integrated, DeMan (whole file)", t_pln)]
    for name, t in rows:
        print(f"  {name:<50} {t:8.2f} s   masterqc/this = {t_mq / t:5.2f}x   "
              f"masterqc threads=1/this = {t_mq1 / t:5.2f}x")
    c_dec, c_mq1, c_mq, c_eb = (cpu[k] for k in ("dec", "mq1", "mqN", "eb"))
    print(f"  CPU seconds (all threads; robust to a loaded machine): decode {c_dec:.2f}, masterqc threads=1 "
          f"{c_mq1:.2f}, threads={default_threads} {c_mq:.2f}, pyebur128 {c_eb:.2f}, pyloudnorm {cpu['pln']:.2f};"
          f"  masterqc threads=1 CPU / pyebur128 CPU = {c_mq1 / c_eb:.2f}x, / decode CPU = {c_mq1 / c_dec:.2f}x")
    r_eb, r_dec = t_mq / t_eb, t_mq / t_dec
    r_eb1, r_dec1 = t_mq1 / t_eb, t_mq1 / t_dec
    print(f"  target masterqc/pyebur128 <= 1.0x (aim 0.5x): default {r_eb:.2f}x  {verdict(r_eb <= 1.0)};"
          f"  threads=1 {r_eb1:.2f}x  {verdict(r_eb1 <= 1.0)}")
    print(f"  target masterqc/decode-only <= 5x:           default {r_dec:.2f}x  {verdict(r_dec <= 5.0)};"
          f"  threads=1 {r_dec1:.2f}x  {verdict(r_dec1 <= 5.0)}")
    t_core, t_core5 = best["core"], best["core5"]
    print(f"  scope of the core issue (loudness + sample peak + true peak), default threads: {t_core:.2f} s = "
          f"{t_core / t_eb:.2f}x pyebur128 {verdict(t_core / t_eb <= 1.0)}, {t_core / t_dec:.2f}x decode-only "
          f"{verdict(t_core / t_dec <= 5.0)}")
    print(f"  core + sample-level analyzers, default threads: {t_core5:.2f} s = {t_core5 / t_eb:.2f}x pyebur128 "
          f"{verdict(t_core5 / t_eb <= 1.0)}, {t_core5 / t_dec:.2f}x decode-only {verdict(t_core5 / t_dec <= 5.0)}")
    print(f"  threads=1 and threads={default_threads} measurements identical: {same}")
    print(f"  agreement: integrated masterqc {m.get('integrated_lufs'):.3f} / pyebur128 {eb_i:.3f} / "
          f"pyloudnorm {pln_i:.3f} LUFS; LRA {m.get('loudness_range_lu'):.3f} / {eb_lra:.3f} LU; "
          f"true peak {m.get('true_peak_dbtp'):.3f} / {eb_tp:.3f} dBTP")

    total, split, skipped = analyzer_split(short)
    print(f"\nper-analyzer split ({args.minutes:g}-minute file, threads=1; CPU seconds of the engine run "
          f"with timing wrappers: {total:.2f} s)")
    inside = sum(p + f for p, f in split.values())
    for name, (p, f) in sorted(split.items(), key=lambda kv: -(kv[1][0] + kv[1][1])):
        print(f"  {name:<30} process {p:7.3f} s  finish {f:6.3f} s  {100 * (p + f) / total:5.1f} %")
    print(f"  {'(decode, engine)':<30} {total - inside:15.3f} s")
    if skipped:
        print(f"  not applicable with default options: {', '.join(skipped)}")

    def group(names):
        return sum(p + f for k, (p, f) in split.items() if k in names)
    core, sampling, sample_level = group(CORE), group(SAMPLING), group(SAMPLE_LEVEL)
    share4 = sampling / core if core else float("nan")
    share5 = sample_level / core if core else float("nan")
    print(f"  core (loudness + sample peak + true peak): {core:.3f} s")
    print(f"  issue-4 share, sampling analyses / core:     {100 * share4:5.1f} %  (target <= 50 %: {verdict(share4 <= 0.5)})")
    print(f"  issue-5 share, sample-level analyzers / core: {100 * share5:5.1f} %  (the whole must stay within "
          f"the core targets above)")

    print(f"\npeak memory of masterqc measure_file (default threads), fresh subprocess per file")
    mem = {}
    for label, path in ((f"{args.minutes:g} min", short), (f"{args.long_minutes:g} min", long)):
        rss = child_memory(path, "trace")
        mem[label] = rss
        print(f"  {label:>7}: peak resident {rss['maxrss_mb']:7.1f} MB   tracemalloc peak {rss['traced_peak_mb']:6.1f} MB"
              f"   ({rss['elapsed_s']:.1f} s with tracing on)")
    a_rss, b_rss = mem.values()
    flat = b_rss["maxrss_mb"] <= a_rss["maxrss_mb"] * 1.15 + 10
    under = max(a_rss["maxrss_mb"], b_rss["maxrss_mb"]) < 300
    print(f"  target peak memory < 300 MB: {verdict(under)};  flat (60 vs 10 min within 15 %): {verdict(flat)}")
    print(f"\nbench_core done in {time.perf_counter() - t0:.1f} s")
    ok = r_eb <= 1.0 and r_dec <= 5.0 and under and flat
    return 1 if (args.strict and not ok) else 0


if __name__ == "__main__":
    sys.exit(main())
