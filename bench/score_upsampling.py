#!/usr/bin/env python3
"""Score the upsampling detector on a corpus in the shared case format.

For every case the registered sampling analyzers are run on the case's audio through the
engine's ``run_analyzers`` (the same code path as ``masterqc measure``, without writing a
WAV: the audio is 24-bit quantised already) and the result keys are scored by the shared
rules: ``upsampled_from_hz`` expected int -> found when non-null, rate right when equal;
expected None -> false alarm when non-null; ``upsampled_channels`` expected list -> found
when the result holds exactly those labels.  Group "ambiguous-lowpass" is listed apart.

Prints one row per tool family (found / rate right / false alarms), the totals, and with
``--hold-out FAMILY[,FAMILY]`` the held-out families' totals separately, then every miss,
wrong rate and false alarm by name.

Usage: ``bench/score_upsampling.py [--corpus corpus_tuning_upsampling] [--seeds 1000,1001]
[--quick] [--hold-out libsamplerate] [--only PREFIX]``.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import time
from collections import defaultdict
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import numpy as np  # noqa: E402

from masterqc.audio.layout import bs1770_weight  # noqa: E402
from masterqc.audio.reader import StreamInfo  # noqa: E402

TARGET_FOUND = 0.95
TARGET_RATE_RIGHT = 0.95
TARGET_FALSE_ALARM = 0.01


class CaseStream:
    """An in-memory stream with the case's channel labels (24-bit PCM)."""

    def __init__(self, audio: np.ndarray, fs: int, labels):
        self.data = np.asarray(audio, dtype=float)
        labels = tuple(labels)
        try:
            weights = tuple(bs1770_weight(x) for x in labels)
        except Exception:       # noqa: BLE001 - a label set the layout module does not know
            weights = tuple(1.0 for _ in labels)
        self.info = StreamInfo(path="<memory>", container="wav", encoding="pcm_24", sample_rate_hz=int(fs),
                               bit_depth=24, is_float=False, channels=self.data.shape[1], frames=self.data.shape[0],
                               channel_layout=labels, layout_source="conventional", channel_weights=weights)

    def blocks(self, block_frames: int = 65536):
        for i in range(0, self.data.shape[0], block_frames):
            yield self.data[i:i + block_frames]


def sampling_classes(with_aliasing: bool = False):
    from masterqc.measure.registry import analyzer_classes
    names = {"ImagingAnalyzer", "SamplingSpectrumAnalyzer", "InterpolationTraceAnalyzer"} | ({"AliasingAnalyzer"} if with_aliasing else set())
    return [c for c in analyzer_classes() if c.__name__ in names]


def measure_case(case, classes=None) -> dict:
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    labels = case.channel_labels or [f"ch{i + 1}" for i in range(case.audio.shape[1])]
    m, _s, _t = run_analyzers(CaseStream(case.audio, case.rate_hz, labels), MeasureOptions(),
                              classes=classes or sampling_classes())
    return m


def score_case(case, m: dict) -> dict:
    """``{"upsampled_from_hz": outcome, "upsampled_channels": outcome}`` for the keys the case expects;
    outcome is one of "hit", "wrong_rate", "miss", "false_alarm", "correct_reject"."""
    out = {}
    e = case.expect
    if "upsampled_from_hz" in e:
        got = m.get("upsampled_from_hz")
        if e["upsampled_from_hz"] is None:
            out["upsampled_from_hz"] = "false_alarm" if got is not None else "correct_reject"
        elif got is None:
            out["upsampled_from_hz"] = "miss"
        else:
            out["upsampled_from_hz"] = "hit" if int(got) == int(e["upsampled_from_hz"]) else "wrong_rate"
    if "upsampled_channels" in e:
        got = m.get("upsampled_channels")
        want = sorted(e["upsampled_channels"])
        ok = got is not None and sorted(got) == want
        if want:
            out["upsampled_channels"] = "hit" if ok else "miss"
        else:
            out["upsampled_channels"] = "correct_reject" if (got is None or got == []) else "false_alarm"
    return out


def tally(rows):
    t = {"pos": 0, "found": 0, "right": 0, "neg": 0, "fa": 0, "ch_pos": 0, "ch_hit": 0, "ch_neg": 0, "ch_fa": 0}
    for r in rows:
        o = r["outcome"].get("upsampled_from_hz")
        if o in ("hit", "wrong_rate", "miss"):
            t["pos"] += 1
            t["found"] += o != "miss"
            t["right"] += o == "hit"
        elif o in ("false_alarm", "correct_reject"):
            t["neg"] += 1
            t["fa"] += o == "false_alarm"
        c = r["outcome"].get("upsampled_channels")
        if c in ("hit", "miss"):
            t["ch_pos"] += 1
            t["ch_hit"] += c == "hit"
        elif c in ("false_alarm", "correct_reject"):
            t["ch_neg"] += 1
            t["ch_fa"] += c == "false_alarm"
    return t


def _pct(a, b):
    return "   -  " if not b else f"{100.0 * a / b:5.1f}%"


def fmt_row(name, t):
    return (f"{name:34s} found {t['found']:3d}/{t['pos']:<3d} {_pct(t['found'], t['pos'])}  "
            f"rate right {t['right']:3d}/{t['found']:<3d} {_pct(t['right'], t['found'])}  "
            f"false alarms {t['fa']:2d}/{t['neg']:<3d} {_pct(t['fa'], t['neg'])}  "
            f"channels {t['ch_hit']}/{t['ch_pos']} (fa {t['ch_fa']}/{t['ch_neg']})")


def cached_cases(corpus: str, seed: int, quick: bool, cache: str | None, only: str | None = None):
    """The corpus' cases, kept in ``cache`` (a folder; one pickle per corpus, seed and size) when given."""
    import pickle
    path = None if not cache else Path(cache) / f"{corpus}_{seed}_{'quick' if quick else 'full'}.pkl"
    if path is not None and path.exists():
        with open(path, "rb") as f:
            yield from pickle.load(f)
        return
    mod = importlib.import_module(corpus)
    kept = []
    import inspect
    kw = {"prefix": only} if only and "prefix" in inspect.signature(mod.cases).parameters else {}
    for case in mod.cases(seed, quick=quick, **kw):
        if path is not None:
            kept.append(case)
        yield case
    if path is not None:
        path.parent.mkdir(parents=True, exist_ok=True)
        with open(path, "wb") as f:
            pickle.dump(kept, f)


def run(corpus: str, seeds, quick: bool, only: str | None = None, progress=True, cache: str | None = None,
        rows_out: str | None = None):
    import json
    rows = []
    sink = open(rows_out, "a") if rows_out else None
    for seed in seeds:
        for case in cached_cases(corpus, seed, quick, cache if not only else None, only):
            if only and not case.name.startswith(only):
                continue
            if not ({"upsampled_from_hz", "upsampled_channels"} & set(case.expect)) and not case.group.startswith("ambiguous"):
                continue        # a case the upsampling verdict does not speak to (folded content, imaging alone)
            t0 = time.perf_counter()
            m = measure_case(case)
            rows.append({"name": case.name, "family": case.family, "group": case.group, "expect": case.expect,
                         "outcome": score_case(case, m), "elapsed_s": time.perf_counter() - t0,
                         "got": {k: m.get(k) for k in ("upsampled_from_hz", "upsampled_channels",
                                                       "upsampled_confidence_fraction", "effective_bandwidth_hz",
                                                       "bandwidth_note", "imaging_detected",
                                                       "interpolation_source_rate_hz", "interpolation_kind")}})
            if sink is not None:
                sink.write(json.dumps({k: rows[-1][k] for k in ("name", "family", "group", "expect", "outcome")},
                                      default=str) + "\n")
                sink.flush()
            if progress:
                print(".", end="", flush=True, file=sys.stderr)
    if progress:
        print(file=sys.stderr)
    return rows


def family_key(family: str) -> str:
    return family


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--corpus", default="corpus_tuning_upsampling")
    ap.add_argument("--seeds", default="1000")
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--hold-out", default="", help="comma-separated family prefixes reported apart")
    ap.add_argument("--only", default=None, help="only cases whose name starts with this")
    ap.add_argument("--cache", default=None, help="folder to keep generated cases in between runs")
    ap.add_argument("--rows-out", default=None, help="append each case's outcome to this file as a JSON line")
    args = ap.parse_args(argv)
    seeds = [int(s) for s in args.seeds.split(",")]
    rows = run(args.corpus, seeds, args.quick, args.only, cache=args.cache, rows_out=args.rows_out)
    held = [h for h in args.hold_out.split(",") if h]
    by_family = defaultdict(list)
    for r in rows:
        by_family[r["family"]].append(r)
    print(f"corpus {args.corpus}, seeds {seeds}, {len(rows)} cases, "
          f"{sum(r['elapsed_s'] for r in rows) / max(1, len(rows)):.2f} s per case")
    for fam in sorted(by_family):
        print(fmt_row(fam, tally(by_family[fam])))
    scored = [r for r in rows if not r["group"].startswith("ambiguous")]
    tuned = [r for r in scored if not any(r["family"].startswith(h) for h in held)]
    print(fmt_row("ALL (scored)", tally(scored)))
    if held:
        print(fmt_row("tuned-on families", tally(tuned)))
        print(fmt_row("held-out " + "+".join(held), tally([r for r in scored if r not in tuned])))
    amb = [r for r in rows if r["group"].startswith("ambiguous")]
    if amb:
        print("ambiguous (not scored): " + ", ".join(f"{r['name']}={r['got']['upsampled_from_hz']}"
                                                             for r in amb))
    for r in rows:
        bad = [k for k, o in r["outcome"].items() if o in ("miss", "wrong_rate", "false_alarm")]
        if bad:
            what = ", ".join(f"{k} {r['outcome'][k]}" for k in bad)
            print(f"  {r['name']}: {what}; expected {r['expect']}; got {r['got']}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
