#!/usr/bin/env python3
"""The full block-size sweep behind tests/test_block_size.py (the suite runs a slice).

Measures the 6 s music-like programme of the test with every registered analyzer at many
read block sizes (powers of two and their neighbours from 256 to 65536, plus ``--random N``
sizes drawn with a fixed seed) and compares every result with the 65536-frame reference by
the test's own rule (levels within 0.001 dB, integers exactly, other numbers to 1e-6).
Exits 1 if any block size gives a different result.  Prints the time per size as a ratio
to the reference run (the machine is shared: read ratios, not seconds).

Usage: ``bench/bench_block_size.py [--random 40] [--seed 7]``.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from test_block_size import FS, differences, measure, music_like  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--random", type=int, default=40, help="random block sizes to add (256..65536)")
    ap.add_argument("--seed", type=int, default=7)
    args = ap.parse_args(argv)
    sizes = sorted({s for k in range(8, 17) for s in (2 ** k - 1, 2 ** k, 2 ** k + 1) if 256 <= s <= 65536}
                   | set(np.random.default_rng(args.seed).integers(256, 65537, args.random).tolist()))
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "long.wav"
        sf.write(path, music_like(6.0), FS, subtype="PCM_24")
        t0 = time.perf_counter()
        ref = measure(path, 65536)
        t_ref = time.perf_counter() - t0
        bad = 0
        for bf in sizes:
            t0 = time.perf_counter()
            problems = differences(ref, measure(path, int(bf)))
            ratio = (time.perf_counter() - t0) / t_ref
            print(f"block {bf:6d}: {'same' if not problems else 'DIFFERENT'}  time x{ratio:.2f} of 65536")
            for p in problems:
                print(f"    {p}")
            bad += bool(problems)
    print(f"{len(sizes)} block sizes, {bad} with a different result")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
