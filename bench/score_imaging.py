#!/usr/bin/env python3
"""Imaging detector alone on a sampling corpus: found / false alarms per tool family, in one process.

The contract scorer (``bench/sampling_scoring.py``) runs the whole ``masterqc measure`` per case; the
imaging verdict depends only on the imaging analyzer and the sample-pattern (interpolation) analyzer it
takes evidence from, so this runs just those two through the engine on each case, after a round trip
through a PCM_24 WAV in memory (the same samples the contract scorer measures).  Scoring follows the
shared contract: ``imaging_detected`` expected True -> found if True; expected False -> false alarm if
True.  Cases without an imaging label are not scored.

``--upsampling`` also runs the spectral sampling analyzer on the imaging positives (upsampled without a
proper filter), so that the engine's provenance step names ``upsampled_from_hz`` from the cliff, the
sample pattern or the images, and scores it there by the same contract: expected a rate -> found if
non-null, rate right if equal.  (The negatives' upsampling verdicts are the cliff's: scored by
``bench/sampling_scoring.py``.)

Usage::

    .venv/bin/python bench/score_imaging.py --corpus bench/corpus_validation.py --seed 5000
    .venv/bin/python bench/score_imaging.py --corpus bench/corpus_tuning_upsampling.py --seed 1000 --quick
    .venv/bin/python bench/score_imaging.py --corpus bench/corpus_tuning_upsampling.py --seed 1000 --upsampling
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


def measure(case, upsampling: bool = False):
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.imaging import ImagingAnalyzer
    from masterqc.measure.interpolation import InterpolationTraceAnalyzer
    from masterqc.measure.options import MeasureOptions
    from masterqc.measure.spectral import SamplingSpectrumAnalyzer
    buf = io.BytesIO()
    sf.write(buf, case.audio, case.rate_hz, subtype="PCM_24", format="WAV")
    buf.seek(0)
    data, fs = sf.read(buf, dtype="float64", always_2d=True)
    labels = case.channel_labels or {1: ["M"], 2: ["L", "R"], 6: ["L", "R", "C", "LFE", "Ls", "Rs"]}.get(
        data.shape[1], [f"ch{i + 1}" for i in range(data.shape[1])])
    if not upsampling:
        m, _s, _t = run_analyzers(_Stream(data, fs, labels), MeasureOptions(),
                                  classes=[ImagingAnalyzer, InterpolationTraceAnalyzer])
        return m
    # the spectral analyzer needs the reader's whole stream description (channel weights, layout): read
    # the same PCM_24 samples back from a temporary file, as the command line would
    import tempfile
    from masterqc.audio.reader import open_stream
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / f"{case.name}.wav"
        sf.write(path, case.audio, case.rate_hz, subtype="PCM_24")
        with open_stream(str(path), channel_layout=case.channel_labels) as stream:
            m, _s, _t = run_analyzers(stream, MeasureOptions(),
                                      classes=[SamplingSpectrumAnalyzer, ImagingAnalyzer, InterpolationTraceAnalyzer])
    return m


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--corpus", default=str(HERE / "corpus_validation.py"))
    ap.add_argument("--seed", type=int, default=5000)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--verbose", action="store_true", help="one line per scored case")
    ap.add_argument("--upsampling", action="store_true", help="also score upsampled_from_hz on these cases")
    args = ap.parse_args(argv)
    mod = _load(args.corpus)
    t0 = time.time()
    fam = defaultdict(lambda: [0, 0, 0, 0])   # found, positives, false alarms, negatives
    up = defaultdict(lambda: [0, 0, 0, 0, 0])  # found, rate right, positives, false alarms, negatives
    wrong, up_wrong = [], []
    for case in mod.cases(args.seed, quick=args.quick):
        want = case.expect.get("imaging_detected")
        if want is None:
            continue
        full = args.upsampling and want and "upsampled_from_hz" in case.expect
        m = measure(case, full)
        got = m.get("imaging_detected") is True
        if full:
            want_up, have_up = case.expect["upsampled_from_hz"], m.get("upsampled_from_hz")
            r = up[case.family]
            if want_up is not None:
                r[0] += have_up is not None
                r[1] += have_up is not None and int(have_up) == int(want_up)
                r[2] += 1
                if have_up is None or int(have_up) != int(want_up):
                    up_wrong.append(f"{case.name} (got {have_up})")
            else:
                r[3] += have_up is not None
                r[4] += 1
                if have_up is not None:
                    up_wrong.append(f"{case.name} (got {have_up})")
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
    if args.upsampling:
        print(f"\nupsampled_from_hz on the imaging positives\n{'family':40s} {'found':>8s} {'rate right':>11s} {'false alarms':>13s}")
        tot = [0, 0, 0, 0, 0]
        for name in sorted(up):
            r = up[name]
            tot = [a + b for a, b in zip(tot, r)]
            print(f"{name:40s} {f'{r[0]}/{r[2]}' if r[2] else '.':>8s} {f'{r[1]}/{r[0]}' if r[2] else '.':>11s} "
                  f"{f'{r[3]}/{r[4]}' if r[4] else '.':>13s}")
        print(f"{'all':40s} {f'{tot[0]}/{tot[2]}':>8s} {f'{tot[1]}/{tot[0]}':>11s} {f'{tot[3]}/{tot[4]}':>13s}")
        print(f"upsampling wrong: {up_wrong}")
    print(f"wall {time.time() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
