#!/usr/bin/env python3
"""Cost of the folded-content (aliasing) analyzer against the core analyzers, side by side in one run.

Every configuration runs in the same process on the same file: the core analyzers (loudness,
sample peak, true peak), the current aliasing analyzer and, with ``--baseline COMMIT``, the
aliasing analyzer as it was at that commit (loaded from ``git show``), in one engine pass, each
timed in CPU seconds of its own process() and finish() calls (``time.thread_time``: the machine is
shared, waiting for a core is not counted).  Figures are the best of ``--repeat`` passes.

``--rate 96000`` times the 96 kHz version of the programme (bench/bench_sampling_cost.py's: the same loop
converted up with resample_poly, quiet ultrasonic noise).

Usage: ``bench/bench_aliasing_cost.py [--seconds 30] [--rate 48000|96000] [--baseline COMMIT_OR_FILE ...] [--repeat 3]``
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
OUT = HERE / "out"
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import bench_core  # noqa: E402

CORE = ("LoudnessAnalyzer", "SamplePeakAnalyzer", "TruePeakAnalyzer")


def cpu_wrappers(classes, spent, names):
    out = []
    for cls, name in zip(classes, names):
        spent[name] = 0.0

        def process(self, block, _cls=cls, _name=name):
            t = time.thread_time()
            _cls.process(self, block)
            spent[_name] += time.thread_time() - t

        def process_planar(self, rows, _cls=cls, _name=name):
            t = time.thread_time()
            _cls.process_planar(self, rows)
            spent[_name] += time.thread_time() - t

        def finish(self, _cls=cls, _name=name):
            t = time.thread_time()
            r = _cls.finish(self)
            spent[_name] += time.thread_time() - t
            return r
        # an analyzer that takes planar blocks is fed through process_planar: timed too
        out.append(type(name, (cls,), {"process": process, "process_planar": process_planar, "finish": finish}))
    return out


def baseline_class(commit: str):
    if Path(commit).is_file():
        src = Path(commit).read_text()
    else:
        src = subprocess.run(["git", "-C", str(HERE.parent), "show", f"{commit}:masterqc/measure/aliasing.py"],
                             capture_output=True, text=True, check=True).stdout
    d = Path(tempfile.mkdtemp())
    (d / "aliasing_baseline.py").write_text(src)
    spec = importlib.util.spec_from_file_location("aliasing_baseline", d / "aliasing_baseline.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod.AliasingAnalyzer


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--baseline", action="append", default=[],
                    help="commit (or file) whose aliasing analyzer is timed alongside (repeatable)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--rate", type=int, default=48000, choices=(48000, 96000))
    args = ap.parse_args(argv)
    try:
        from threadpoolctl import threadpool_limits
        threadpool_limits(limits=1, user_api="blas")
    except ImportError:
        pass
    from masterqc.audio.reader import open_stream
    from masterqc.measure.aliasing import AliasingAnalyzer
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    from masterqc.measure.registry import analyzer_classes
    every = {c.__name__: c for c in analyzer_classes()}
    classes = [every[n] for n in CORE if n in every] + [AliasingAnalyzer]
    names = [c.__name__ for c in classes[:-1]] + ["aliasing (this tree)"]
    for b in args.baseline:
        classes.append(baseline_class(b))
        names.append(f"aliasing ({Path(b).name if Path(b).is_file() else b})")
    if args.rate == 96000:
        import bench_sampling_cost
        path = bench_sampling_cost.make_96k(OUT / f"core96k_{args.seconds / 60:g}min.wav", args.seconds / 60.0)
    else:
        path = bench_core.make_file(OUT / f"core_{args.seconds / 60:g}min.wav", args.seconds / 60.0)
    best: dict[str, float] = {}
    results = {}
    for _ in range(args.repeat):
        spent: dict[str, float] = {}
        with open_stream(str(path)) as stream:
            m, _s, _st = run_analyzers(stream, MeasureOptions(block_frames=bench_core.BLOCK),
                                       classes=cpu_wrappers(classes, spent, names))
        results = m
        for k, v in spent.items():
            best[k] = min(best.get(k, v), v)
    core = sum(best[n] for n in names[:3])
    print(f"{path.name}: {args.seconds:g} s, {args.rate / 1000:g} kHz stereo; CPU seconds, best of {args.repeat} passes "
          "(shared, loaded machine: ratios in one run are what counts)")
    print(f"  core analyzers (loudness, sample/true peak)  {core:7.2f} s")
    for n in names[3:]:
        print(f"  {n:44s} {best[n]:7.2f} s = {best[n] / core:5.2f}x core")
    print(f"  aliasing_detected on this programme: {results.get('aliasing_detected')}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
