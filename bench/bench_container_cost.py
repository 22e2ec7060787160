#!/usr/bin/env python3
"""Container walker cost: walk() against a decode-only pass and the whole measurement.

Generates (in bench/out/, git-ignored) a 10-minute stereo 48 kHz 24-bit BWF
with bext v2 (1 KiB coding history), iXML, LIST/INFO and an id3 chunk, then
prints, from one run, side by side:

- the median time of ``container.walk`` (20 runs), of a decode-only pass
  (soundfile block read at the engine's block size) and of ``measure_file``
  (every registered analyzer), as ratios;
- a hostile file: the chunk limit's worth of tiny chunks plus a 16 MiB iXML
  chunk and a bext chunk declaring 3 GB: walk time and tracemalloc peak,
  against the 1 MiB per-chunk read cap.

Targets (printed beside the figures): walk <= 0.01x the decode-only pass on a
normal master; hostile file walked in < 2 s with a peak below 8 MiB (the 1 MiB
read cap, its decoded text and the chunk list, which is bounded by MAX_CHUNKS).  The
machine is shared: read the ratios, not the absolute times.  ``--strict`` makes
a missed target exit 1.

Usage: ``bench/bench_container_cost.py [--minutes 10] [--strict]``.
"""

from __future__ import annotations

import argparse
import statistics
import struct
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE.parent / "tests"))

import containerbytes as cb  # noqa: E402
from masterqc.audio.container import MAX_CHUNKS, MAX_TEXT_BYTES, walk  # noqa: E402
from masterqc.measure import measure_file  # noqa: E402

FS = 48000


def write_bwf(path: Path, minutes: float) -> None:
    frames = int(minutes * 60 * FS)
    rng = np.random.default_rng(3)
    bext = cb.chunk(b"bext", cb.bext_body(version=2, description="bench master (fictional)",
                                          originator="Tamberlo Lane Post", date="2026-11-30", time="10:00:00",
                                          time_reference=10 * 3600 * FS, loudness=(-2300, 700, -100, -1500, -1800),
                                          coding_history=b"A=PCM,F=48000,W=24,M=stereo,T=bench\r\n" * 28))
    ixml = cb.chunk(b"iXML", (b"<BWFXML><PROJECT>Bench</PROJECT>" + b"<NOTE>n</NOTE>" * 290 + b"</BWFXML>"))
    info = cb.list_info([(b"INAM", "Bench"), (b"ISRC", "XXQ7Z2600042")])
    id3 = cb.chunk(b"id3 ", cb.id3v2([(b"TIT2", "Bench"), (b"TSRC", "XXQ7Z2600042")]))
    fmt = cb.fmt_pcm(2, FS, 24)
    data_size = frames * 6
    head = fmt + bext + ixml
    tail = info + id3
    riff_size = 4 + len(head) + 8 + data_size + (data_size & 1) + len(tail)
    with open(path, "wb") as f:
        f.write(b"RIFF" + struct.pack("<I", riff_size) + b"WAVE" + head + b"data" + struct.pack("<I", data_size))
        block = 1 << 18
        done = 0
        while done < frames:
            n = min(block, frames - done)
            codes = rng.integers(-(1 << 22), 1 << 22, size=(n, 2))
            f.write(cb.pcm24(codes))
            done += n
        f.write(tail)


def write_hostile(path: Path) -> None:
    tiny = [cb.chunk(b"zzzz", b"") for _ in range(MAX_CHUNKS - 10)]
    chunks = [cb.fmt_pcm(1, FS, 16), cb.chunk(b"data", b"\0" * 960),
              cb.chunk(b"iXML", b"<BWFXML><NOTE>" + b"x" * (16 * MAX_TEXT_BYTES) + b"</NOTE></BWFXML>")] + tiny
    raw = cb.riff(chunks)
    raw = raw[:4] + struct.pack("<I", len(raw) - 8 + 3_000_000_008) + raw[8:] + b"bext" + \
        struct.pack("<I", 3_000_000_000) + b"\0" * 64
    path.write_bytes(raw)


def decode_only(path: Path, block: int = 65536) -> float:
    t = time.perf_counter()
    with sf.SoundFile(path) as f:
        while True:
            b = f.read(block, dtype="float64", always_2d=True)
            if b.shape[0] < block:
                break
    return time.perf_counter() - t


def median_walk(path: Path, runs: int = 20) -> float:
    times = []
    for _ in range(runs):
        t = time.perf_counter()
        walk(path)
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=10.0)
    ap.add_argument("--strict", action="store_true")
    args = ap.parse_args(argv)
    OUT.mkdir(exist_ok=True)
    master = OUT / f"container_{args.minutes:g}min.wav"
    if not master.exists():
        write_bwf(master, args.minutes)
    info = walk(master)
    assert info.problems == [], info.problems
    t_walk = median_walk(master)
    t_decode = decode_only(master)
    t = time.perf_counter()
    measure_file(master)
    t_measure = time.perf_counter() - t

    hostile = OUT / "container_hostile.wav"
    write_hostile(hostile)
    tracemalloc.start()
    t = time.perf_counter()
    hinfo = walk(hostile)
    t_hostile = time.perf_counter() - t
    _cur, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()

    ok_ratio = t_walk <= 0.01 * t_decode
    ok_hostile = t_hostile < 2.0 and peak < 8 * (1 << 20)
    print(f"master: {args.minutes:g} min stereo 48 kHz 24-bit BWF, {master.stat().st_size / 1e6:.0f} MB, "
          f"{len(info.chunks)} chunks")
    print(f"  walk (median of 20)        {t_walk * 1e3:9.3f} ms")
    print(f"  decode-only pass           {t_decode * 1e3:9.1f} ms   walk/decode = {t_walk / t_decode:.5f}x "
          f"(target <= 0.01x) {'ok' if ok_ratio else 'MISSED'}")
    print(f"  measure_file (all)         {t_measure * 1e3:9.1f} ms   walk/measure = {t_walk / t_measure:.2e}x")
    print(f"hostile: {hostile.stat().st_size / 1e6:.1f} MB, {MAX_CHUNKS - 10} tiny chunks, 16 MiB iXML, "
          "bext declaring 3 GB")
    print(f"  walk                       {t_hostile * 1e3:9.1f} ms   peak {peak / 2**20:.2f} MiB "
          f"(1 MiB read cap + the {MAX_CHUNKS}-entry chunk list; target < 2 s and < 8 MiB) "
          f"{'ok' if ok_hostile else 'MISSED'}")
    print(f"  problems reported          {len(hinfo.problems)}: "
          + "; ".join(p["message"][:70] for p in hinfo.problems[:3]))
    if args.strict and not (ok_ratio and ok_hostile):
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
