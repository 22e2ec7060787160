#!/usr/bin/env python3
"""``masterqc compare`` on a 10-minute 96 kHz master against its 44.1 kHz deliverable.

Generates (in bench/out/, git-ignored) a stereo 96 kHz 24-bit music-like master
(bench_core's loop, converted to 96 kHz) and its deliverable at 44.1 kHz / 16
bits (soxr HQ, streamed, TPDF dither), then prints, from one run, side by side:

- the time of decoding both files (soundfile block reads, the engine's block size);
- the time of ``compare_files`` (four streaming reads of each file, meters, offset
  track, spectra, residual), as a ratio to that decode time;
- the peak resident memory of ``compare`` in a fresh subprocess for a short and a
  long pair (``--short-minutes``), to show it stays flat.

The machine is shared: read the ratios, not the absolute times.  Both are given
as wall-clock time and as CPU time (this process for the decoding, the child's
own CPU time for ``compare``): on a loaded machine the CPU ratio is the steadier
one.  No target is enforced here; the figures are reported.

Usage: ``bench/bench_compare.py [--minutes 10] [--short-minutes 2]``.
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
sys.path.insert(0, str(HERE))

import bench_core  # noqa: E402

FS_M = 96000
FS_D = 44100


def loop_96k() -> np.ndarray:
    from scipy import signal
    return signal.resample_poly(bench_core.music_loop(), 2, 1, axis=0) * 0.9


def make_pair(minutes: float) -> tuple[Path, Path]:
    master = bench_core.make_file(OUT / f"compare_master_{minutes:g}min_96k.wav", minutes, fs=FS_M, loop_fn=loop_96k)
    deliv = OUT / f"compare_deliverable_{minutes:g}min_44k16.wav"
    want = int(sf.info(str(master)).frames * FS_D // FS_M)
    if deliv.exists() and abs(sf.info(str(deliv)).frames - want) < FS_D:
        return master, deliv
    import soxr
    rng = np.random.default_rng(7)
    tmp = deliv.with_suffix(".tmp.wav")
    delta = 2.0 ** -15
    rs = soxr.ResampleStream(FS_M, FS_D, 2, dtype="float64", quality="HQ")
    with sf.SoundFile(str(master)) as fin, sf.SoundFile(str(tmp), "w", FS_D, 2, subtype="PCM_16", format="WAV") as fo:
        while True:
            b = fin.read(1 << 18, dtype="float64", always_2d=True)
            last = b.shape[0] < (1 << 18)
            y = rs.resample_chunk(b, last=last)
            if y.shape[0]:
                tpdf = rng.uniform(-0.5, 0.5, y.shape) + rng.uniform(-0.5, 0.5, y.shape)
                fo.write(np.clip(np.round(y / delta + tpdf), -32768, 32767) * delta)
            if last:
                break
    os.replace(tmp, deliv)
    return master, deliv


CHILD = r"""
import json, sys, time
sys.path.insert(0, sys.argv[3])
from masterqc.compare.measure import compare_files
t = time.perf_counter()
c = time.process_time()
r = compare_files(sys.argv[1], sys.argv[2])
el = time.perf_counter() - t
cpu = time.process_time() - c
rss = 0
for line in open("/proc/self/status"):
    if line.startswith("VmHWM:"):
        rss = int(line.split()[1]) / 1024
print(json.dumps({"elapsed_s": el, "cpu_s": cpu, "maxrss_mb": rss, "identity": r.identity.verdict,
                  "residual_re_tpdf_db": r.requantisation.residual_re_tpdf_db,
                  "minus_3db_hz": r.transfer.minus_3db_hz}))
"""


def child(master: Path, deliv: Path) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, str(master), str(deliv), str(HERE.parent)],
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--minutes", type=float, default=10.0)
    ap.add_argument("--short-minutes", type=float, default=2.0)
    args = ap.parse_args(argv)
    master, deliv = make_pair(args.minutes)
    t = time.perf_counter()
    c = time.process_time()
    bench_core.decode_only(master)
    bench_core.decode_only(deliv)
    decode_s = time.perf_counter() - t
    decode_cpu_s = time.process_time() - c
    long = child(master, deliv)
    print(f"{args.minutes:g}-minute 96 kHz/24-bit master against its 44.1 kHz/16-bit deliverable (soxr HQ, TPDF)")
    print(f"  decode both files        {decode_s:8.2f} s wall {decode_cpu_s:8.2f} s CPU")
    print(f"  masterqc compare         {long['elapsed_s']:8.2f} s wall {long['cpu_s']:8.2f} s CPU   = "
          f"{long['elapsed_s'] / decode_s:6.1f}x decoding both files (wall), "
          f"{long['cpu_s'] / decode_cpu_s:6.1f}x (CPU)  ({args.minutes * 60 / long['elapsed_s']:.1f}x real time)")
    print(f"  result: identity {long['identity']}, residual {long['residual_re_tpdf_db']:+.2f} dB re 16-bit TPDF, "
          f"-3 dB at {long['minus_3db_hz']:.0f} Hz")
    sm, sd = make_pair(args.short_minutes)
    short = child(sm, sd)
    print(f"  peak resident memory     {short['maxrss_mb']:8.1f} MB ({args.short_minutes:g} min)   "
          f"{long['maxrss_mb']:8.1f} MB ({args.minutes:g} min)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
