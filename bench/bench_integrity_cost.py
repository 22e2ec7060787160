#!/usr/bin/env python3
"""Integrity benchmark: what the sample-level analyzers add to one measurement pass.

Uses the core benchmark's music-like stereo 48 kHz 24-bit file (bench/out/,
git-ignored; made on first use) and a hard-clipped copy of it (gain +6 dB,
clipped at full scale: thousands of clipped runs, the analyzers' slow path).
For each file it times, in one run and side by side: a decode-only pass
(soundfile, the engine's block size), pyebur128 (integrated + LRA + true
peak, same blocks, decode included) and the engine with every registered
analyzer on one thread, with the time spent inside each analyzer's
``process()`` and ``finish()``.  It prints the integrity analyzers' share (clipping, DC,
silence/dropouts, non-finite, bit depth, channel relations) as ratios to the
core analyzers (loudness, sample and true peak) of the same run, to
pyebur128 and to the decode-only pass.

Targets (printed beside the figures): integrity analyzers <= 1.0x the core
analyzers and <= 0.5x pyebur128.  The machine is shared: read the ratios, not
the absolute times.  A missed target is reported, not fatal; ``--strict``
makes it exit 1.

Usage: ``bench/bench_integrity_cost.py [--minutes 10] [--repeat 2] [--strict]``.
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import sys
import time
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import bench_core  # noqa: E402  (same folder: the shared programme and reference passes)

BLOCK = bench_core.BLOCK
CORE = ("LoudnessAnalyzer", "SamplePeakAnalyzer", "TruePeakAnalyzer")
INTEGRITY = ("ClippingAnalyzer", "DcOffsetAnalyzer", "SilenceAnalyzer", "NonFiniteAnalyzer",
             "BitDepthAnalyzer", "ChannelRelationAnalyzer")


def clipped_copy(src: Path, dst: Path) -> Path:
    """``src`` at +6 dB, clipped to the 24-bit full-scale codes, block by block."""
    if dst.exists() and sf.info(str(dst)).frames == sf.info(str(src)).frames:
        return dst
    tmp = dst.with_suffix(".tmp.wav")
    top = (2 ** 23 - 1) / 2 ** 23
    with sf.SoundFile(str(src)) as fin, sf.SoundFile(str(tmp), "w", fin.samplerate, fin.channels,
                                                      subtype="PCM_24", format="WAV") as fout:
        while True:
            b = fin.read(1 << 20, dtype="float64", always_2d=True)
            if not b.shape[0]:
                break
            fout.write(np.clip(b * 2.0, -1.0, top))
    os.replace(tmp, dst)
    return dst


def engine_pass(path: Path, classes, spent=None) -> dict:
    from masterqc.audio.reader import open_stream
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    opts = MeasureOptions(block_frames=BLOCK)
    if "threads" in {f.name for f in dataclasses.fields(opts)}:
        # one thread: the per-analyzer times then add up to the pass, and compare like with like
        opts = dataclasses.replace(opts, threads=1)
    with open_stream(str(path)) as stream:
        m, _s, _st = run_analyzers(stream, opts, classes=classes)
    return m


timing_wrappers = bench_core.timing_wrappers



def best(fn, repeat, *args):
    times, out = [], None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn(*args)
        times.append(time.perf_counter() - t)
    return min(times), out


def verdict(ok: bool) -> str:
    return "ok" if ok else "MISSED"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--minutes", type=float, default=10.0)
    ap.add_argument("--repeat", type=int, default=2, help="best of this many runs per pass")
    ap.add_argument("--strict", action="store_true", help="exit 1 when a target is missed")
    args = ap.parse_args(argv)

    from masterqc.measure.registry import analyzer_classes
    every = analyzer_classes()
    missing = [n for n in INTEGRITY if n not in {c.__name__ for c in every}]
    if missing:
        print(f"bench_integrity_cost: not registered: {', '.join(missing)}", file=sys.stderr)
        return 1

    t0 = time.perf_counter()
    music = bench_core.make_file(OUT / f"core_{args.minutes:g}min.wav", args.minutes)
    clipped = clipped_copy(music, OUT / f"integrity_clipped_{args.minutes:g}min.wav")
    print(f"bench_integrity_cost: files ready in {time.perf_counter() - t0:.1f} s ({music.name}, {clipped.name})")
    print("caution: both files peak at full scale, the clipped one is hard-clipped; turn monitors down "
          "before listening.")

    ok = True
    for label, path in (("music-like", music), ("hard-clipped", clipped)):
        bench_core.decode_only(path)  # warm the page cache
        t_dec, _ = best(bench_core.decode_only, args.repeat, path)
        t_eb, _ = best(bench_core.run_pyebur128, args.repeat, path)
        runs = []
        for _ in range(args.repeat):
            spent: dict[str, float] = {}
            t = time.perf_counter()
            m = engine_pass(path, timing_wrappers(every, spent))
            runs.append((time.perf_counter() - t, spent))
        t_all, spent = min(runs, key=lambda r: r[0])
        t_int = sum(v for k, v in spent.items() if k in INTEGRITY)
        t_core = sum(v for k, v in spent.items() if k in CORE)
        t_rest = sum(spent.values()) - t_int - t_core
        print(f"\n{label} {args.minutes:g}-minute file, one run, side by side (best of {args.repeat})")
        print(f"  decode only (soundfile, {BLOCK}-frame blocks)      {t_dec:8.2f} s")
        print(f"  pyebur128 I + LRA + true peak (blocks)          {t_eb:8.2f} s")
        print(f"  engine, every registered analyzer               {t_all:8.2f} s")
        print(f"    core analyzers (loudness, sample/true peak)   {t_core:8.2f} s")
        print(f"    integrity analyzers                           {t_int:8.2f} s: " +
              ", ".join(f"{k.replace('Analyzer', '')} {spent[k]:.2f}" for k in sorted(INTEGRITY, key=lambda k: -spent[k])))
        print(f"    other analyzers                               {t_rest:8.2f} s")
        r_core, r_eb, r_dec = t_int / t_core, t_int / t_eb, t_int / t_dec
        print(f"  target integrity / core analyzers <= 1.0x:      {r_core:6.2f}x  {verdict(r_core <= 1.0)}")
        print(f"  target integrity / pyebur128 <= 0.5x:           {r_eb:6.2f}x  {verdict(r_eb <= 0.5)}")
        print(f"  integrity / decode-only:                        {r_dec:6.2f}x")
        print(f"  measured: clipped runs {m['clipped_run_count']}, dropouts {m['dropout_count']}, "
              f"effective bits {m['effective_bit_depth_bits']}, phase correlation min {m['phase_correlation_min']:.2f}")
        ok = ok and r_core <= 1.0 and r_eb <= 0.5
    print(f"\nbench_integrity_cost done in {time.perf_counter() - t0:.1f} s")
    return 1 if (args.strict and not ok) else 0


if __name__ == "__main__":
    sys.exit(main())
