#!/usr/bin/env python3
"""Per-analyzer CPU split of the sampling analyses against the core, optionally against an earlier revision.

One engine pass per file and variant, one thread, BLAS held to one thread; each analyzer's CPU seconds
(``time.thread_time``: waiting for a core on a shared machine is not counted) in its constructor,
``process()`` and ``finish()``; each figure the best of ``--repeat`` passes.  Core = loudness, sample
peak and true peak.  Files: the core benchmark's music-like stereo 48 kHz 24-bit programme and its
96 kHz version (bench/bench_sampling_cost.py), made on first use in bench/out/.

``--before REV`` also runs the spectral front end (``masterqc/measure/spectral.py``), the imaging
analyzer (``masterqc/measure/imaging.py``), the interpolation analyzer
(``masterqc/measure/interpolation.py``) and the aliasing analyzer (``masterqc/measure/aliasing.py``) as they
were at git revision REV, loaded from ``git show`` (the front end with its batched transform, ``rfft_rows`` of
``masterqc/measure/npkernels.py``, of REV too; and the bandwidth judgement its finish() makes,
``masterqc/measure/bandwidth.py``, of REV), with this tree's core analyzers and shared helpers
(``frames.py``), in the same process and interleaved pass by pass with this tree's, so that both columns see
the same machine load.

Usage: ``bench/bench_sampling_split.py [--files 0.5:48,10:48,0.5:96,10:96] [--repeat 3] [--before REV]``
(``minutes:kHz``).  Read the ratios, not the absolute times.
"""

from __future__ import annotations

import argparse
import importlib.util
import os
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

SAMPLING = ("Spectrum", "Imaging", "Interpolation", "Aliasing")
OLD_MODULES = {"Spectrum": ("masterqc/measure/spectral.py", "SamplingSpectrumAnalyzer"),
               "Imaging": ("masterqc/measure/imaging.py", "ImagingAnalyzer"),
               "Interpolation": ("masterqc/measure/interpolation.py", "InterpolationTraceAnalyzer"),
               "Aliasing": ("masterqc/measure/aliasing.py", "AliasingAnalyzer")}


def _module_at(rev: str, rel: str, tmp: Path):
    """The module file ``rel`` as it was at git revision ``rev``, imported under a private name."""
    text = subprocess.run(["git", "-C", str(ROOT), "show", f"{rev}:{rel}"], capture_output=True, text=True,
                          check=True).stdout
    name = "_before_" + Path(rel).stem
    path = tmp / f"{name}.py"
    path.write_text(text)
    spec = importlib.util.spec_from_file_location(name, path)
    mod = importlib.util.module_from_spec(spec)
    sys.modules[name] = mod          # (dataclasses look their module up while the class is made)
    spec.loader.exec_module(mod)
    return mod


def _with_module(cls, dotted: str, module):
    """A subclass of ``cls`` whose ``finish()`` finds ``module`` under the name ``dotted`` (in ``sys.modules``
    and as its package's attribute) for the length of the call, and the module it replaced afterwards."""
    import importlib
    parent_name, _dot, leaf = dotted.rpartition(".")
    parent = importlib.import_module(parent_name)

    def finish(self, _c=cls):
        was_mod, was_attr = sys.modules.get(dotted), getattr(parent, leaf, None)
        sys.modules[dotted] = module
        setattr(parent, leaf, module)
        try:
            return _c.finish(self)
        finally:
            sys.modules[dotted] = was_mod
            setattr(parent, leaf, was_attr)
    return type(cls.__name__, (cls,), {"finish": finish})


def _timed(cls, name: str, spent: dict):
    spent[name] = 0.0

    def __init__(self, info, options, _c=cls):
        t = time.thread_time()
        _c.__init__(self, info, options)
        spent[name] += time.thread_time() - t

    def process(self, block, _c=cls):
        t = time.thread_time()
        _c.process(self, block)
        spent[name] += time.thread_time() - t

    def process_planar(self, rows, _c=cls):
        t = time.thread_time()
        _c.process_planar(self, rows)
        spent[name] += time.thread_time() - t

    def finish(self, _c=cls):
        t = time.thread_time()
        r = _c.finish(self)
        spent[name] += time.thread_time() - t
        return r
    # (an analyzer that takes planar blocks is fed through process_planar: timed too)
    return type(name, (cls,), {"__init__": __init__, "process": process, "process_planar": process_planar,
                               "finish": finish})


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--files", default="0.5:48,10:48,0.5:96,10:96", help="comma-separated minutes:kHz (48 or 96)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--before", default=None, help="git revision whose spectral front end, imaging, "
                                                    "interpolation and aliasing analyzers run beside this tree's")
    args = ap.parse_args(argv)
    try:
        from threadpoolctl import threadpool_limits
        threadpool_limits(limits=1, user_api="blas")
    except ImportError:
        print("bench_sampling_split: threadpoolctl not installed; BLAS threads as configured")
    from masterqc.audio.reader import open_stream
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    from masterqc.measure.registry import analyzer_classes
    every = {c.__name__: c for c in analyzer_classes()}
    tree = {"Spectrum": every["SamplingSpectrumAnalyzer"], "Imaging": every["ImagingAnalyzer"],
            "Aliasing": every["AliasingAnalyzer"], "Interpolation": every["InterpolationTraceAnalyzer"]}
    variants = {"this tree": tree}
    tmpdir = tempfile.TemporaryDirectory()
    if args.before:
        old = dict(tree)
        for key, (rel, cls_name) in OLD_MODULES.items():
            mod = _module_at(args.before, rel, Path(tmpdir.name))
            if key == "Spectrum" and hasattr(mod, "rfft_rows"):
                # the front end's batched transform as it was then too (it lives in npkernels.py)
                mod.rfft_rows = _module_at(args.before, "masterqc/measure/npkernels.py", Path(tmpdir.name)).rfft_rows
            old[key] = getattr(mod, cls_name)
        # the front end's finish() judges the bandwidth through masterqc.measure.bandwidth, looked up when it
        # runs: the earlier column's finish() is given REV's bandwidth module for the length of the call
        old_bw = _module_at(args.before, "masterqc/measure/bandwidth.py", Path(tmpdir.name))
        old["Spectrum"] = _with_module(old["Spectrum"], "masterqc.measure.bandwidth", old_bw)
        if hasattr(old["Imaging"], "bind"):
            # the imaging analyzer takes the interpolation analyzer's verdict from its peers by class: the
            # earlier tree's interpolation class is not this tree's, so the earlier imaging is bound to it here
            # (else it would skip that step, and the pattern's cost would fall to the other analyzer than in
            # this tree's column)
            def bind(self, peers, _orig=old["Imaging"].bind, _peer=old["Interpolation"]):
                _orig(self, peers)
                if getattr(self, "_pattern_peer", None) is None:
                    self._pattern_peer = next((p for p in peers if isinstance(p, _peer)), None)
            old["Imaging"].bind = bind
        variants = {f"at {args.before}": old, "this tree": tree}

    def classes(which, spent):
        out = [_timed(every[n], n, spent) for n in bsc.CORE]
        return out + [_timed(variants[which][k], k, spent) for k in SAMPLING]

    files = []
    for item in args.files.split(","):
        minutes, khz = item.split(":")
        minutes = float(minutes)
        if khz == "48":
            path = bench_core.make_file(bsc.OUT / f"core_{minutes:g}min.wav", minutes)
        elif khz == "96":
            path = bsc.make_96k(bsc.OUT / f"sampling_96k_{minutes:g}min.wav", minutes)
        else:
            raise SystemExit(f"bench_sampling_split: --files item {item!r}: the rate must be 48 or 96")
        files.append((f"{minutes * 60:g} s {khz} kHz", path))
    opts = MeasureOptions(block_frames=bench_core.BLOCK, threads=1)
    print(f"bench_sampling_split: load average {os.getloadavg()[0]:.1f} at start "
          f"({os.cpu_count()} CPUs); CPU seconds, best of {args.repeat}")
    for which in variants:           # warm-up: imports and per-process caches, outside the timed passes
        with open_stream(str(files[0][1])) as s:
            run_analyzers(s, opts, classes=classes(which, {}))
    for label, path in files:
        best: dict = {}
        for _ in range(args.repeat):
            for which in variants:
                spent: dict = {}
                with open_stream(str(path)) as s:
                    run_analyzers(s, opts, classes=classes(which, spent))
                b = best.setdefault(which, {})
                for k, v in spent.items():
                    b[k] = min(b.get(k, float("inf")), v)
        print(f"\n{label} stereo 24-bit")
        print("  " + f"{'':14s}" + "".join(f"{w:>24s}" for w in variants))
        core = {w: sum(best[w][n] for n in bsc.CORE) for w in variants}
        rows = [("core", lambda w: core[w])] + [(k, lambda w, k=k: best[w][k]) for k in SAMPLING] + \
               [("all sampling", lambda w: sum(best[w][k] for k in SAMPLING))]
        for name, get in rows:
            print("  " + f"{name:14s}" + "".join(f"{get(w):10.3f} s = {get(w) / core[w]:5.2f}x  " for w in variants))
    print(f"\nbench_sampling_split: load average {os.getloadavg()[0]:.1f} at end. Targets (issue 11): all "
          "sampling <= 0.50x core on a 10-minute file, <= 1.00x on a 30-second file")
    tmpdir.cleanup()
    return 0


if __name__ == "__main__":
    sys.exit(main())
