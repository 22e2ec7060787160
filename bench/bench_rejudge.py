#!/usr/bin/env python3
"""Measure once, judge many: a catalogue checked, then re-checked after a spec change that moves only limits.

Generates (in bench/out/rejudge/, git-ignored) ``--files`` short stereo 48 kHz
24-bit masters (tone plus noise at three levels, ``--seconds`` each) in four
release folders, then, side by side in one run:

1. ``masterqc check`` of the catalogue against spec A (every file measured);
2. the same catalogue against spec B, which moves only limits (loudness target
   and tolerance, loudness range, sample peak): every file is judged again from
   the ledger's stored measurements, no audio is read;
3. ``masterqc judge`` of the 200 saved results of run 1 against spec B.

Runs 1 and 2 are in this process (``jobs=1``), so every audio read is counted
(:func:`masterqc.audio.reader.open_stream` calls).  Printed: each time, the audio
reads, and the ratios t2/t1 and t3/t1, in wall time and in CPU time (targets: run
2 reads no audio and takes at most 0.05 of run 1 on both; house choice).  The
machine is shared: read the ratios, not the absolute times; the CPU-time ratio is
the one a busy machine does not skew (run 1 waits for a core far longer than run 2).
A missed target is reported, not fatal; ``--strict`` exits 1.

Usage: ``bench/bench_rejudge.py [--files 200] [--seconds 2] [--strict]``.
"""

from __future__ import annotations

import argparse
import glob
import io
import shutil
import sys
import time
from contextlib import redirect_stdout
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
OUT = HERE / "out" / "rejudge"
sys.path.insert(0, str(HERE.parent))

SPEC_A = """\
spec_version: 1
name: Bench catalogue house spec (invented)
loudness:
  integrated: {target_lufs: -14.0, tolerance_lu: 1.0}
  range: {max_lu: 12.0, severity: warn}
peaks:
  true_peak: {max_dbtp: -1.0}
  sample_peak: {max_dbfs: -0.5}
integrity:
  clipped_runs: {max_count: 0}
"""
# the same measurement settings, other limits only
SPEC_B = SPEC_A.replace("{target_lufs: -14.0, tolerance_lu: 1.0}", "{target_lufs: -16.0, tolerance_lu: 2.0}") \
    .replace("{max_lu: 12.0, severity: warn}", "{max_lu: 8.0}").replace("{max_dbfs: -0.5}", "{max_dbfs: -1.5}") \
    .replace("house spec", "house spec, revised")


def make_catalogue(root: Path, n: int, seconds: float, sr: int = 48000) -> None:
    rng = np.random.default_rng(7)
    t = np.arange(int(seconds * sr)) / sr
    for i in range(n):
        sub = root / f"release_{i % 4}"
        sub.mkdir(parents=True, exist_ok=True)
        x = 0.05 * rng.standard_normal((t.size, 2))
        x += 0.2 * np.sin(2 * np.pi * (110 + 7 * i) * t)[:, None]
        x *= 10 ** ((-4.0 * (i % 3)) / 20)
        sf.write(sub / f"{i:03d}.wav", x, sr, subtype="PCM_24")


class ReadCounter:
    """Counts audio reads: every call of the engine's open_stream."""

    def __init__(self):
        import masterqc.measure.engine as engine
        self.engine, self.original, self.count = engine, engine.open_stream, 0

    def __enter__(self):
        def counted(*args, **kwargs):
            self.count += 1
            return self.original(*args, **kwargs)
        self.engine.open_stream = counted
        return self

    def __exit__(self, *exc):
        self.engine.open_stream = self.original


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=200)
    ap.add_argument("--seconds", type=float, default=2.0)
    ap.add_argument("--strict", action="store_true")
    args = ap.parse_args(argv)

    from masterqc.batch.runner import BatchConfig, run_batch
    from masterqc.cli import main as cli

    if OUT.exists():
        shutil.rmtree(OUT)
    root = OUT / "catalogue"
    make_catalogue(root, args.files, args.seconds)
    spec_a, spec_b = OUT / "house.yaml", OUT / "house-revised.yaml"
    spec_a.write_text(SPEC_A)
    spec_b.write_text(SPEC_B)
    out = OUT / "nightly"

    def run(spec):
        cfg = BatchConfig(roots=[str(root)], spec_path=str(spec), out_dir=str(out), formats=("json",),
                          jobs=1, quiet=True)
        with ReadCounter() as reads:
            t0, c0 = time.perf_counter(), time.process_time()
            outcome = run_batch(cfg)
            return time.perf_counter() - t0, time.process_time() - c0, reads.count, outcome

    print(f"catalogue: {args.files} masters x {args.seconds:g} s, outputs json, jobs 1")
    t1, c1, reads1, o1 = run(spec_a)
    saved = sorted(glob.glob(str(out / "files" / "**" / "*.json"), recursive=True))
    keep = OUT / "saved"
    keep.mkdir()
    for p in saved:  # the first run's results, as a client would have them
        shutil.copy(p, keep / Path(p).name)
    t2, c2, reads2, o2 = run(spec_b)
    with ReadCounter() as reads, redirect_stdout(io.StringIO()):
        t0, c0 = time.perf_counter(), time.process_time()
        code = cli(["judge", *sorted(str(p) for p in keep.glob("*.json")), "--spec", str(spec_b),
                    "--out", str(OUT / "judged"), "--quiet"])
        t3, c3 = time.perf_counter() - t0, time.process_time() - c0
        reads3 = reads.count
    counts1, counts2 = o1.summary["counts"], o2.summary["counts"]
    print()
    print(f"{'run':<58}{'time s':>9}{'CPU s':>9}{'audio reads':>13}")
    print(f"{'1. check, spec A (every file measured)':<58}{t1:9.2f}{c1:9.2f}{reads1:13d}")
    print(f"{'2. check again, spec B moves only limits (re-judged)':<58}{t2:9.2f}{c2:9.2f}{reads2:13d}")
    print(f"{'3. judge ' + str(len(saved)) + ' saved results against spec B':<58}{t3:9.2f}{c3:9.2f}{reads3:13d}")
    print(f"   run 1 counts: {counts1}")
    print(f"   run 2 counts: {counts2}   judge exit code {code}")
    r2, r3 = t2 / t1, t3 / t1
    q2, q3 = c2 / c1, c3 / c1  # CPU time: what a shared machine's load does not inflate
    ok2 = reads2 == 0 and r2 <= 0.05 and q2 <= 0.05
    ok3 = reads3 == 0
    print()
    print(f"re-check after a limits-only change / first check: {r2:6.3f} wall, {q2:6.3f} CPU  "
          f"(target: no audio read and <= 0.05 on both: {'met' if ok2 else 'MISSED'})")
    print(f"judge of {len(saved)} saved results / first check:       {r3:6.3f} wall, {q3:6.3f} CPU  "
          f"(no audio read: {'met' if ok3 else 'MISSED'})")
    return 1 if args.strict and not (ok2 and ok3) else 0


if __name__ == "__main__":
    sys.exit(main())
