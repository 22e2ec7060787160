#!/usr/bin/env python3
"""Each analyzer's process() CPU on in-memory blocks, one thread, no engine: the per-analyzer
cost without decoding, scheduling or other threads in the way (a loaded machine still shows it).

Usage: ``bench/bench_analyzer_cpu.py [--root TREE] [--blocks 150] [--file bench/out/speed_10min_48k.wav]``
(the file is the one bench/bench_speed.py writes; ``--root`` a tree holding an older
``masterqc/`` package, e.g. ``git archive BASE masterqc | tar -x -C DIR``).  Prints thread
CPU seconds per analyzer over the first ``--blocks`` blocks of 65536 frames.
The programme peaks near 0 dBTP: turn monitors down before listening to it.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--root", default=str(Path(__file__).resolve().parent.parent))
    ap.add_argument("--blocks", type=int, default=150)
    ap.add_argument("--file", default=str(Path(__file__).resolve().parent / "out" / "speed_10min_48k.wav"))
    args = ap.parse_args(argv)
    sys.path.insert(0, args.root)
    from masterqc.audio.reader import open_stream
    from masterqc.measure import engine
    from masterqc.measure.options import MeasureOptions
    from masterqc.measure.registry import analyzer_classes
    options = MeasureOptions(threads=1)
    with open_stream(args.file) as stream:
        info = stream.info
        blocks = []
        for block in stream.blocks(options.block_frames):
            blocks.append(engine._prepare(block, info, True, True))
            if len(blocks) >= args.blocks:
                break
    analyzers = [cls(info, options) for cls in analyzer_classes() if cls.applies_to(info, options)]
    for a in analyzers:
        a.bind(analyzers)
    total = 0.0
    with engine.single_thread_blas():
        for a in analyzers:
            t = time.thread_time()
            for prepared in blocks:
                engine._feed(a, prepared)
            spent = time.thread_time() - t
            total += spent
            print(f"  {type(a).__name__:<30} {spent:7.3f}")
        for a in analyzers:
            a.finish()
    print(f"  {'total':<30} {total:7.3f}  ({len(blocks)} blocks, {args.root})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
