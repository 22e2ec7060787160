#!/usr/bin/env python3
"""Do the sampling verdicts of longer files hold when the spectral front end analyses fewer frames?

Builds the upsampling tuning cases (``bench/corpus_tuning_upsampling.py``, seed and plan as given) at a
length above :data:`masterqc.measure.spectral.FULL_ANALYSIS_S` (the corpus itself is 1.5-2 s long, where
every frame is analysed), runs the sampling analyzers (spectrum, imaging, interpolation) on each case at
two front-end frame strides (``MeasureOptions.extra["spectrum"]["frame_stride"]``) and prints, per stride,
the upsampling score (found, rate right, false alarms) and every case whose ``upsampled_from_hz``,
``upsampled_channels``, ``bandwidth_limited`` or ``ultrasonic_*`` verdict differs between the strides.

Usage: ``bench/check_frame_stride.py [--seed 1000] [--quick] [--seconds 20] [--strides 2,4] [--step 1] [--offset 0]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from collections import Counter
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import corpus_tuning_upsampling as ctu  # noqa: E402
import score_upsampling as su  # noqa: E402

VERDICT_KEYS = ("upsampled_from_hz", "upsampled_channels", "bandwidth_limited", "imaging_detected",
                "ultrasonic_energy_ratio_db", "ultrasonic_tones")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seed", type=int, default=1000)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--seconds", type=float, default=20.0)
    ap.add_argument("--strides", default="2,4")
    ap.add_argument("--step", type=int, default=1)
    ap.add_argument("--offset", type=int, default=0, help="build the cases i with i %% step == offset")
    args = ap.parse_args(argv)
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    strides = [int(s) for s in args.strides.split(",")]
    classes = su.sampling_classes()
    plan = ctu._plan(args.seed, args.quick)
    tallies = {s: Counter() for s in strides}
    moved, t0, n = [], time.time(), 0
    for i, (name, family, group, spec) in enumerate(plan):
        if i % args.step != args.offset:
            continue
        rng = ctu._case_rng(args.seed, i)
        fs, y, expect, labels = ctu._build(spec, rng, args.seconds)
        case = ctu.tuning_case(name, family, group, fs, y, expect, labels, args.seed, rng)
        labels = case.channel_labels or [f"ch{k + 1}" for k in range(case.audio.shape[1])]
        got = {}
        for s in strides:
            m, _s, _t = run_analyzers(su.CaseStream(case.audio, case.rate_hz, labels),
                                      MeasureOptions(extra={"spectrum": {"frame_stride": s}}), classes=classes)
            got[s] = m
            if group != "ambiguous-lowpass":
                for key, outcome in su.score_case(case, m).items():
                    tallies[s][f"{key}:{outcome}"] += 1
        n += 1
        a, b = got[strides[0]], got[strides[-1]]
        diff = [k for k in VERDICT_KEYS if k in a and (a.get(k) != b.get(k)) and not (
            k == "ultrasonic_energy_ratio_db" and a.get(k) is not None and b.get(k) is not None
            and abs(a[k] - b[k]) < 1.0)]
        if diff:
            moved.append((name, group, {k: (a.get(k), b.get(k)) for k in diff}))
    print(f"check_frame_stride: seed {args.seed}{' quick' if args.quick else ''}, {n} cases at {args.seconds:g} s, "
          f"strides {strides} ({time.time() - t0:.0f} s)")
    for s in strides:
        t = tallies[s]
        print(f"  stride {s}: upsampled_from_hz hit {t['upsampled_from_hz:hit']}, wrong rate "
              f"{t['upsampled_from_hz:wrong_rate']}, miss {t['upsampled_from_hz:miss']}, false alarm "
              f"{t['upsampled_from_hz:false_alarm']}, correct reject {t['upsampled_from_hz:correct_reject']}; "
              f"channels hit {t['upsampled_channels:hit']}, miss {t['upsampled_channels:miss']}, false alarm "
              f"{t['upsampled_channels:false_alarm']}")
    print(f"  cases whose verdicts differ between strides {strides[0]} and {strides[-1]}: {len(moved)}")
    for name, group, d in moved:
        print(f"    {name} [{group}]: " + "; ".join(f"{k} {v[0]!r} -> {v[1]!r}" for k, v in d.items()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
