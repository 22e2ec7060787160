#!/usr/bin/env python3
"""CPU of the bandwidth verdict (``masterqc.measure.bandwidth.assess``) alone, this tree against an earlier
revision's ``bandwidth.py``, side by side in one process on the same front-end result, and whether both give
the same measurements.

The front end's result is captured from one measurement pass of each file (the sampling bench's 30 s
48 kHz and 96 kHz programmes, bench/bench_sampling_cost.py, made on first use in bench/out/); then both
revisions' ``assess`` run on it in turn, best of ``--repeat`` (thread CPU: waiting for a core is not counted).

Usage: ``bench/bench_bandwidth_assess.py --before REV [--repeat 15]``.  Read the ratios, not the times.
"""

from __future__ import annotations

import argparse
import importlib.util
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(HERE))

import bench_core  # noqa: E402
import bench_sampling_cost as bsc  # noqa: E402


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--before", required=True)
    ap.add_argument("--repeat", type=int, default=15)
    args = ap.parse_args(argv)
    from masterqc.measure import bandwidth
    from masterqc.measure.engine import measure_file
    from masterqc.measure.options import MeasureOptions
    text = subprocess.run(["git", "-C", str(ROOT), "show", f"{args.before}:masterqc/measure/bandwidth.py"],
                          capture_output=True, text=True, check=True).stdout
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "_before_bandwidth.py"
        path.write_text(text)
        spec = importlib.util.spec_from_file_location("_before_bandwidth", path)
        old = importlib.util.module_from_spec(spec)
        sys.modules["_before_bandwidth"] = old
        spec.loader.exec_module(old)
    files = [("30 s 48 kHz", bench_core.make_file(bsc.OUT / "core_0.5min.wav", 0.5)),
             ("30 s 96 kHz", bsc.make_96k(bsc.OUT / "sampling_96k_0.5min.wav", 0.5))]
    print(f"bench_bandwidth_assess: assess CPU ms, best of {args.repeat}, at {args.before} and this tree side by side")
    ok = True
    this = bandwidth.assess
    for label, wav in files:
        got = {}

        def capture(fe, info):
            got["fe"] = (fe, info)
            return this(fe, info)
        bandwidth.assess = capture
        try:
            measure_file(str(wav), MeasureOptions(threads=1))
        finally:
            bandwidth.assess = this
        fe, info = got["fe"]
        best, res = {}, {}
        for _ in range(args.repeat):
            for name, fn in (("before", old.assess), ("after", this)):
                t = time.thread_time()
                r = fn(fe, info)
                best[name] = min(best.get(name, float("inf")), time.thread_time() - t)
                res[name] = repr(r.measurements())
        same = res["before"] == res["after"]
        ok &= same
        print(f"  {label}: at {args.before} {best['before'] * 1e3:6.2f} ms, this tree {best['after'] * 1e3:6.2f} ms"
              f" = {best['after'] / best['before']:.2f}x; {'same measurements' if same else 'MEASUREMENTS DIFFER'}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
