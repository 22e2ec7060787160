"""Peak resident memory of ``masterqc measure FILE --json --quiet`` against duration, two trees side by side.

For each duration a 6-channel 96 kHz 24-bit RF64 file is written (bench_speed's programme, tiled),
then measured by two whole processes started together, one importing this tree's ``masterqc``
and one importing ``--base-root``'s; the file is deleted before the next one is written, so at
most one long file is on disk at a time.  Prints each process's peak resident memory (VmHWM),
wall and CPU time, and the slope of the peak in MB per minute of audio between the shortest and
each longer duration.  Caution: the programme peaks near 0 dBTP; turn monitors down before listening.

Usage: ``bench/bench_memory_duration.py --base-root DIR [--minutes 10,40,80,180] [--out DIR]``
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import bench_speed as bs  # noqa: E402


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--base-root", required=True)
    ap.add_argument("--minutes", default="10,40,80,180")
    ap.add_argument("--out", default=str(bs.OUT))
    args = ap.parse_args()
    bs.ROOTS["base"] = Path(args.base_root).resolve()
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    minutes = [float(m) for m in args.minutes.split(",")]
    print(f"bench_memory_duration: 6 ch 96 kHz 24-bit RF64; base {bs.ROOTS['base']}, this tree {bs.ROOT}; {bs.load()}")
    print("  caution: the generated programme peaks near 0 dBTP; turn monitors down before listening.")
    got = {}
    for m in minutes:
        path = out / f"memdur_{m:g}min_6ch_96k.rf64"
        need = m * 60 * 96000 * 6 * 3
        if shutil.disk_usage(out).free < need * 1.1 + 4e9:
            print(f"  {m:6g} min: skipped, needs {need / 1e9:.1f} GB")
            continue
        t = time.perf_counter()
        bs.make_file(path, m * 60, 96000, channels=6, fmt="RF64", loop_s=45.3, tiled=True)
        gen = time.perf_counter() - t
        res = {}
        try:
            def run(kind):
                try:
                    res[kind] = bs.run_child("base" if kind == "base" else "masterqc", path)
                except Exception as exc:  # noqa: BLE001 - reported below
                    res[kind] = exc
            ths = [threading.Thread(target=run, args=(k,)) for k in ("base", "after")]
            for th in ths:
                th.start()
            for th in ths:
                th.join()
        finally:
            size = path.stat().st_size / 1e9
            path.unlink()
        bad = [r for r in res.values() if isinstance(r, Exception)]
        if bad:
            raise bad[0]
        got[m] = res
        print(f"  {m:6g} min ({size:5.2f} GB, written in {gen:4.0f} s): "
              f"base {res['base']['rss_mb']:6.1f} MB (wall {res['base']['wall_s']:6.1f} s, CPU {res['base']['cpu_s']:6.1f} s); "
              f"this tree {res['after']['rss_mb']:6.1f} MB (wall {res['after']['wall_s']:6.1f} s, "
              f"CPU {res['after']['cpu_s']:6.1f} s); {bs.load()}", flush=True)
    if len(got) >= 2:
        ms = sorted(got)
        m0 = ms[0]
        for m in ms[1:]:
            for kind in ("base", "after"):
                slope = (got[m][kind]["rss_mb"] - got[m0][kind]["rss_mb"]) / (m - m0)
                print(f"  slope {m0:g} -> {m:g} min, {'base' if kind == 'base' else 'this tree'}: {slope:+.3f} MB/min")
    return 0


if __name__ == "__main__":
    sys.exit(main())
