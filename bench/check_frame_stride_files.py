#!/usr/bin/env python3
"""Which measured values of given files move between two spectral front-end frame strides.

Each file is measured (``measure_file``, default options, one thread) with
``MeasureOptions.extra["spectrum"]["frame_stride"]`` set to each stride, and every measurement key whose value
differs is printed (numbers with both values; lists and objects by their first difference).

Usage: ``bench/check_frame_stride_files.py [--strides 2,4] FILE...``
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))


def _short(v) -> str:
    text = json.dumps(v, default=str)
    return text if len(text) <= 90 else text[:87] + "..."


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--strides", default="2,4")
    ap.add_argument("files", nargs="+")
    args = ap.parse_args(argv)
    from masterqc.measure.engine import measure_file
    from masterqc.measure.options import MeasureOptions
    a_s, b_s = (int(s) for s in args.strides.split(","))
    for path in args.files:
        got = [measure_file(path, MeasureOptions(threads=1, extra={"spectrum": {"frame_stride": s}}))["measurements"]
               for s in (a_s, b_s)]
        keys = sorted(k for k in set(got[0]) | set(got[1]) if json.dumps(got[0].get(k), default=str, sort_keys=True)
                      != json.dumps(got[1].get(k), default=str, sort_keys=True))
        print(f"{Path(path).name}: {len(keys)} keys differ between strides {a_s} and {b_s}")
        for k in keys:
            print(f"  {k}: {_short(got[0].get(k))} -> {_short(got[1].get(k))}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
