#!/usr/bin/env python3
"""CPU of the imaging analyzer's per-process pair plan (``_pair_plan`` and ``_main_pairs`` of
``masterqc/measure/imaging.py``, built once per process and sample rate, then cached), cold, against
an earlier revision's, side by side in one process, and a check that both build the same arrays.

The first file of each rate a process measures pays this (a one-file command-line run pays it every
time); the other benches warm it up outside their timed passes.

Usage: ``bench/bench_pair_plan.py [--before REV] [--repeat 7]``.  Read the ratios, not the times.
"""

from __future__ import annotations

import argparse
import importlib.util
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))


def _module_at(rev: str, rel: str, tmp: Path):
    text = subprocess.run(["git", "-C", str(ROOT), "show", f"{rev}:{rel}"], capture_output=True, text=True,
                          check=True).stdout
    path = tmp / "_before_imaging.py"
    path.write_text(text)
    spec = importlib.util.spec_from_file_location("_before_imaging", path)
    mod = importlib.util.module_from_spec(spec)
    sys.modules["_before_imaging"] = mod
    spec.loader.exec_module(mod)
    return mod


def _same(x, y) -> bool:
    if isinstance(x, dict):
        return x.keys() == y.keys() and all(_same(x[k], y[k]) for k in x)
    if isinstance(x, (list, tuple)):
        return len(x) == len(y) and all(_same(a, b) for a, b in zip(x, y))
    if isinstance(x, np.ndarray):
        return x.dtype == y.dtype and x.shape == y.shape and bool(np.array_equal(x, y))
    return x == y


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--before", default="2f50b72")
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args(argv)
    from masterqc.measure import imaging as new
    with tempfile.TemporaryDirectory() as tmp:
        old = _module_at(args.before, "masterqc/measure/imaging.py", Path(tmp))
    offsets = tuple(new.CONTROL_OFFSETS_BINS) + new.NULL_SPREAD_OFFSETS_BINS
    print(f"bench_pair_plan: pair plan built cold, CPU ms, best of {args.repeat}, side by side in one process")
    ok = True
    for fs in (44100, 48000, 96000, 192000):
        n_fft = int(round(fs / new.BIN_HZ))
        rates = tuple(float(r) for r in new.CANDIDATE_RATES_HZ if r < fs)
        best = {}
        for _ in range(args.repeat):
            for name, mod in (("before", old), ("after", new)):
                mod._pair_plan.cache_clear()
                mod._main_pairs.cache_clear()
                t = time.thread_time()
                mod._pair_plan(fs, n_fft, rates, offsets)
                mod._main_pairs(fs, n_fft, rates, offsets)
                best[name] = min(best.get(name, float("inf")), time.thread_time() - t)
        same = (_same(old._pair_plan(fs, n_fft, rates, offsets), new._pair_plan(fs, n_fft, rates, offsets))
                and _same(old._main_pairs(fs, n_fft, rates, offsets), new._main_pairs(fs, n_fft, rates, offsets)))
        ok &= same
        print(f"  {fs / 1000:5g} kHz: at {args.before} {best['before'] * 1e3:6.2f} ms, this tree "
              f"{best['after'] * 1e3:6.2f} ms = {best['after'] / best['before']:.2f}x; "
              f"{'same arrays' if same else 'ARRAYS DIFFER'}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
