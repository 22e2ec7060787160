#!/usr/bin/env python3
"""Tuning scorer for the folded-content detector (the shared corpus contract's rules).

Runs the aliasing analyzer on every case of ``bench/corpus_tuning_aliasing.py`` (audio
quantised to 24-bit PCM as the contract's WAV files would be) and prints, per group and
family: cases, found (expected True and detected), not assessable (None), false alarms
(expected False and detected True), and the assessable share the analyzer reports.

``--cli`` runs ``masterqc measure FILE --json`` on written PCM_24 WAV files instead of the
analyzer in-process (slower, the contract's exact path).  ``--hold-out FAMILY`` prints the
figures of that family separately (tune on the rest, check the held-out one).

Usage: ``bench/score_tuning_aliasing.py [--seeds 1000 1001] [--quick] [--only GROUP...] [--cli]``
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent / "tests"))

import corpus_tuning_aliasing as corpus  # noqa: E402


def quantise_24(x: np.ndarray) -> np.ndarray:
    q = 2.0 ** 23
    return np.clip(np.round(x * q), -q, q - 1) / q


def measure_inprocess(case) -> dict:
    from corpus_sampling import analyse
    from masterqc.measure.aliasing import AliasingAnalyzer
    return analyse(quantise_24(case.audio), case.rate_hz, [AliasingAnalyzer], 24)


def measure_cli(case, tmp: Path) -> dict:
    import soundfile as sf
    path = tmp / f"{case.name}.wav"
    sf.write(str(path), case.audio, case.rate_hz, subtype="PCM_24")
    out = subprocess.run([sys.executable, "-m", "masterqc", "measure", str(path), "--json"],
                         capture_output=True, text=True)
    path.unlink()
    return json.loads(out.stdout)["measurements"]


def outcome(expect, got) -> str:
    if expect is True:
        return "found" if got is True else ("not-assessable" if got is None else "missed")
    return "false-alarm" if got is True else ("not-assessable" if got is None else "clean")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, nargs="+", default=[1000])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--only", nargs="*", default=None, help="groups or families to run")
    ap.add_argument("--hold-out", default=None, help="family reported separately")
    ap.add_argument("--cli", action="store_true")
    ap.add_argument("--corpus", default=None, help="another corpus module in the shared case format (file or "
                    "name), scored the same way on its cases labelled aliasing_detected")
    ap.add_argument("--verbose", "-v", action="store_true")
    args = ap.parse_args(argv)
    rows = []
    t0 = time.perf_counter()
    source = corpus
    if args.corpus:
        import importlib
        import importlib.util
        if args.corpus.endswith(".py"):
            spec = importlib.util.spec_from_file_location(Path(args.corpus).stem, args.corpus)
            source = importlib.util.module_from_spec(spec)
            sys.modules[spec.name] = source
            spec.loader.exec_module(source)
        else:
            source = importlib.import_module(args.corpus)
    with tempfile.TemporaryDirectory() as td:
        for seed in args.seeds:
            for case in source.cases(seed, quick=args.quick):
                if args.only and case.group not in args.only and case.family not in args.only:
                    continue
                if "aliasing_detected" not in case.expect:
                    continue
                m = measure_cli(case, Path(td)) if args.cli else measure_inprocess(case)
                exp = case.expect.get("aliasing_detected")
                got = m.get("aliasing_detected")
                o = outcome(exp, got)
                share = m.get("aliasing_assessable_fraction")
                rows.append((case.group, case.family, o, share, exp))
                if args.verbose or o in ("missed", "false-alarm", "not-assessable"):
                    d = m.get("aliasing_detail") or {}
                    print(f"  {o:15s} {case.name:45s} share={share} inst={d.get('polyphonic_instances_with_folds')}/{d.get('polyphonic_note_instances')}/{d.get('polyphonic_instances_expected_by_chance')} grid={d.get('grid_line_coherence')}@{d.get('grid_drop_interval_samples')} {str(d.get('reason'))[:100]}", flush=True)
    print(f"\n{'group':22s} {'family':22s} {'cases':>5s} {'found':>6s} {'n/a':>4s} {'FA':>4s} {'share':>6s}")
    table = defaultdict(list)
    for g, f, o, s, _e in rows:
        table[(g, f)].append((o, s))
    for (g, f), v in sorted(table.items()):
        n = len(v)
        found = sum(o == "found" for o, _ in v)
        na = sum(o == "not-assessable" for o, _ in v)
        fa = sum(o == "false-alarm" for o, _ in v)
        sh = [s for _, s in v if s is not None]
        mark = "  (held out)" if args.hold_out and f == args.hold_out else ""
        pos = any(e is True for gg, ff, _o, _s, e in rows if (gg, ff) == (g, f))
        print(f"{g:22s} {f:22s} {n:5d} {(str(found) if pos else '-'):>6s} {na:4d} {(str(fa) if not pos else '-'):>4s} "
              f"{(np.mean(sh) if sh else float('nan')):6.2f}{mark}")
    by_group = defaultdict(list)
    for g, _f, o, _s, e in rows:
        if e is True:
            by_group[g].append(o)
    for g, v in sorted(by_group.items()):
        print(f"positives {g}: found {sum(o == 'found' for o in v)}/{len(v)}")
    v = [o for _g, _f, o, _s, e in rows if e is True]
    if v:
        print(f"positives: found {sum(o == 'found' for o in v)}/{len(v)}")
    neg = [(o, f) for g, f, o, _s, e in rows if e is not True]
    if neg:
        print(f"negatives: false alarms {sum(o == 'false-alarm' for o, _ in neg)}/{len(neg)}")
    print(f"done in {time.perf_counter() - t0:.0f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
