#!/usr/bin/env python3
"""Sampling-integrity detection: detection and false-alarm rate per detector on the
ground-truth corpus (tests/corpus_sampling.py), over several noise seeds.

Every corpus signal is regenerated for each seed (the noise, dither and phases change;
the defects stay), run through the engine's ``run_analyzers`` with the registered
sampling analyzers, and judged against its labels.  Prints per detector and seed the
hits over the defective signals and the false alarms over the clean ones, the pooled
rates, every miss and false alarm by name, and the mean analysis time per signal.

Targets (printed beside the figures; the unit test holds seed 20261201 to them):
detection >= 95 %, false alarms <= 2 %, for every detector.  ``--strict`` makes a
missed target exit 1.

Usage: ``bench/bench_sampling_detection.py [--seeds 3] [--strict]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE.parent / "tests"))

from corpus_sampling import DETECTORS, corpus_names, score_corpus  # noqa: E402

MIN_DETECTION = 0.95
MAX_FALSE_ALARM = 0.02
FIRST_SEED = 20261201


def _pct(num, den):
    return "  n/a " if not den else f"{100.0 * num / den:5.1f}%"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, default=3, help="number of noise seeds (corpus realisations)")
    ap.add_argument("--strict", action="store_true", help="exit 1 when a target is missed")
    args = ap.parse_args(argv)

    n_signals = len(corpus_names())
    print(f"corpus: {n_signals} signals per seed, {args.seeds} seed(s)")
    pooled = {d: {"detected": 0, "positives": 0, "false_alarms": 0, "negatives": 0, "missing": 0}
              for d in DETECTORS}
    failures = []
    elapsed = 0.0
    for i in range(args.seeds):
        seed = FIRST_SEED + i
        t = time.perf_counter()
        rates, outcomes = score_corpus(seed)
        elapsed += time.perf_counter() - t
        print(f"\nseed {seed}")
        print(f"  {'detector':18s} {'hits/defective':>15s} {'rate':>7s}   {'alarms/clean':>13s} {'rate':>7s}")
        for d in DETECTORS:
            r = rates[d]
            for k in pooled[d]:
                pooled[d][k] += r[k]
            miss = f"  ({r['missing']} missing)" if r["missing"] else ""
            print(f"  {d:18s} {r['detected']:>7d}/{r['positives']:<7d} {_pct(r['detected'], r['positives'])}"
                  f"   {r['false_alarms']:>6d}/{r['negatives']:<6d} {_pct(r['false_alarms'], r['negatives'])}{miss}")
        for name, res, _facts in outcomes:
            for d, (o, note) in res.items():
                if o in ("miss", "false_alarm", "missing"):
                    failures.append((seed, d, o, name, note))

    print("\npooled over seeds (target: detection >= 95 %, false alarms <= 2 %)")
    ok = True
    for d in DETECTORS:
        r = pooled[d]
        det = r["detected"] / r["positives"] if r["positives"] else None
        fa = r["false_alarms"] / r["negatives"] if r["negatives"] else None
        good = (det is not None and det >= MIN_DETECTION and fa is not None and fa <= MAX_FALSE_ALARM
                and r["missing"] == 0)
        ok &= good
        print(f"  {d:18s} detection {_pct(r['detected'], r['positives'])}  false alarms "
              f"{_pct(r['false_alarms'], r['negatives'])}  {'ok' if good else 'MISSED TARGET'}"
              + (f"  ({r['missing']} results missing)" if r["missing"] else ""))
    if failures:
        print("\nmisses and false alarms:")
        for seed, d, o, name, note in failures:
            print(f"  seed {seed}  {d:18s} {o:12s} {name} {note}")
    print(f"\nmean time per signal (synthesis and analysis): "
          f"{elapsed / (args.seeds * n_signals) * 1000:.0f} ms")
    return 1 if (args.strict and not ok) else 0


if __name__ == "__main__":
    sys.exit(main())
