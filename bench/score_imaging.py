#!/usr/bin/env python3
"""Imaging detector alone on a sampling corpus: found / false alarms per tool family, in one process.

The contract scorer (``bench/sampling_scoring.py``) runs the whole ``masterqc measure`` per case; the
imaging verdict depends only on the imaging analyzer and the sample-pattern (interpolation) analyzer it
takes evidence from, so this runs just those two through the engine on each case, after a round trip
through a PCM_24 WAV in memory (the same samples the contract scorer measures).  Scoring follows the
shared contract: ``imaging_detected`` expected True -> found if True; expected False -> false alarm if
True.  Cases without an imaging label are not scored.

Usage::

    .venv/bin/python bench/score_imaging.py --corpus bench/corpus_validation.py --seed 5000
    .venv/bin/python bench/score_imaging.py --corpus bench/corpus_tuning_upsampling.py --seed 1000 --quick
"""

from __future__ import annotations

import argparse
import importlib.util
import io
import sys
import time
from collections import defaultdict
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))


def _load(path: str):
    p = Path(path)
    spec = importlib.util.spec_from_file_location(p.stem, p)
    mod = importlib.util.module_from_spec(spec)
    sys.modules[p.stem] = mod
    spec.loader.exec_module(mod)
    return mod


class _Stream:
    """An in-memory stream for the engine (the same shape as the reader's)."""

    def __init__(self, data: np.ndarray, fs: int, labels):
        from types import SimpleNamespace
        self.data = data
        self.info = SimpleNamespace(sample_rate_hz=int(fs), channels=data.shape[1], frames=data.shape[0],
                                    bit_depth=24, is_float=False,
                                    channel_layout=list(labels) if labels else None)

    def blocks(self, n):
        for i in range(0, self.data.shape[0], n):
            yield self.data[i:i + n]


def measure(case):
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.imaging import ImagingAnalyzer
    from masterqc.measure.interpolation import InterpolationTraceAnalyzer
    from masterqc.measure.options import MeasureOptions
    buf = io.BytesIO()
    sf.write(buf, case.audio, case.rate_hz, subtype="PCM_24", format="WAV")
    buf.seek(0)
    data, fs = sf.read(buf, dtype="float64", always_2d=True)
    labels = case.channel_labels or {1: ["M"], 2: ["L", "R"], 6: ["L", "R", "C", "LFE", "Ls", "Rs"]}.get(
        data.shape[1], [f"ch{i + 1}" for i in range(data.shape[1])])
    m, _s, _t = run_analyzers(_Stream(data, fs, labels), MeasureOptions(),
                              classes=[ImagingAnalyzer, InterpolationTraceAnalyzer])
    return m


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--corpus", default=str(HERE / "corpus_validation.py"))
    ap.add_argument("--seed", type=int, default=5000)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--verbose", action="store_true", help="one line per scored case")
    args = ap.parse_args(argv)
    mod = _load(args.corpus)
    t0 = time.time()
    fam = defaultdict(lambda: [0, 0, 0, 0])   # found, positives, false alarms, negatives
    wrong = []
    for case in mod.cases(args.seed, quick=args.quick):
        want = case.expect.get("imaging_detected")
        if want is None:
            continue
        got = measure(case).get("imaging_detected") is True
        row = fam[case.family]
        if want:
            row[0] += got
            row[1] += 1
        else:
            row[2] += got
            row[3] += 1
        if got != want:
            wrong.append(case.name)
        if args.verbose:
            print(f"  {'ok' if got == want else '!!'} {case.name}", flush=True)
    print(f"imaging on {Path(args.corpus).name} seed {args.seed}{' (quick)' if args.quick else ''}")
    print(f"{'family':40s} {'found':>8s} {'false alarms':>13s}")
    tot = [0, 0, 0, 0]
    for name in sorted(fam):
        r = fam[name]
        tot = [a + b for a, b in zip(tot, r)]
        print(f"{name:40s} {f'{r[0]}/{r[1]}' if r[1] else '.':>8s} {f'{r[2]}/{r[3]}' if r[3] else '.':>13s}")
    print(f"{'all':40s} {f'{tot[0]}/{tot[1]}':>8s} {f'{tot[2]}/{tot[3]}':>13s}")
    print(f"wrong: {wrong}")
    print(f"wall {time.time() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
