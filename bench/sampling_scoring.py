#!/usr/bin/env python3
"""Score a sampling-detector corpus through the masterqc command line.

Any corpus module with the shared ``cases(seed, quick=False)`` generator can be scored (the validation set in
``bench/corpus_validation.py``; tuning sets such as ``bench/corpus_tuning_upsampling.py`` and
``bench/corpus_tuning_aliasing.py`` when present).  Each case is written as a WAV (PCM_24) into
``bench/out/sampling/<module>/``, measured by ``masterqc measure FILE --json`` in worker processes (2 by
default), and scored by the shared contract's rules:

- ``upsampled_from_hz``: expected a rate -> found if non-null, rate right if equal; expected None -> false
  alarm if non-null.
- ``upsampled_channels``: found if the result's ``upsampled_channels`` holds exactly the expected labels
  (a result without the key is a miss).
- ``imaging_detected``: expected True -> found if True; expected False -> false alarm if True.
- ``aliasing_detected``: expected True -> found if True (None, "not assessable", is a miss counted apart);
  expected False -> false alarm if True.

Usage::

    .venv/bin/python bench/sampling_scoring.py                       # the validation set, seed 5000
    .venv/bin/python bench/sampling_scoring.py --corpus bench/corpus_tuning_upsampling.py --seed 1000
    .venv/bin/python bench/sampling_scoring.py --quick --json out.json

The table has one block per corpus: per detector, per tool family and per group.  ``ambiguous-lowpass``
cases (steep low-passes whose edge sits where a lower rate's converter would cliff) are reported apart and
never counted in the false-alarm rate.
"""

from __future__ import annotations

import argparse
import hashlib
import importlib
import importlib.util
import json
import os
import re
import resource
import subprocess
import sys
import time
from collections import defaultdict
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
OUT_ROOT = HERE / "out" / "sampling"
NAME_RE = re.compile(r"^[a-z0-9_-]+$")
AMBIGUOUS_GROUPS = {"ambiguous-lowpass", "ambiguous-downconverted"}
# keys kept from each result for the JSON dump
KEEP_KEYS = ("upsampled_from_hz", "upsampled_confidence", "upsampled_channels", "effective_bandwidth_hz",
             "bandwidth_edge", "bandwidth_edge_depth_db", "bandwidth_edge_slope_db_per_khz", "bandwidth_note",
             "upsampled_where_s", "imaging_detected", "aliasing_detected", "aliasing_assessable",
             "aliasing_score", "aliasing_score_db", "aliasing_detail")


def masterqc_command() -> list[str]:
    exe = Path(sys.executable).with_name("masterqc")
    if exe.exists():
        return [str(exe)]
    return [sys.executable, "-m", "masterqc.cli"]


def load_corpus(spec: str):
    """A corpus module by file path (``bench/corpus_validation.py``) or by module name."""
    path = Path(spec)
    if path.suffix == ".py" or path.exists():
        if not path.exists():
            raise SystemExit(f"sampling_scoring: corpus file not found: {spec}")
        name = path.stem
        mod_spec = importlib.util.spec_from_file_location(name, path)
        module = importlib.util.module_from_spec(mod_spec)
        sys.modules[name] = module
        mod_spec.loader.exec_module(module)
        return module
    return importlib.import_module(spec)


def check_case(case, seen: set) -> None:
    where = f"case {getattr(case, 'name', '?')!r}"
    if not NAME_RE.match(case.name):
        raise ValueError(f"{where}: name must match [a-z0-9_-]+")
    if case.name in seen:
        raise ValueError(f"{where}: duplicate name")
    seen.add(case.name)
    a = case.audio
    if a.ndim != 2 or a.shape[0] < 1:
        raise ValueError(f"{where}: audio must be (frames, channels), got {a.shape}")
    if not np.all(np.isfinite(a)) or np.max(np.abs(a)) > 1.0:
        raise ValueError(f"{where}: audio must be finite with |x| <= 1")
    unknown = set(case.expect) - {"upsampled_from_hz", "upsampled_channels", "imaging_detected", "aliasing_detected"}
    if unknown:
        raise ValueError(f"{where}: unknown expect keys {sorted(unknown)}")


def measure_file(path: Path, timeout_s: float = 900.0) -> tuple[dict | None, str | None, float]:
    """Run ``masterqc measure FILE --json``; return (measurements, error, wall seconds)."""
    t0 = time.perf_counter()
    try:
        proc = subprocess.run([*masterqc_command(), "measure", str(path), "--json", "--quiet"],
                              capture_output=True, text=True, timeout=timeout_s, cwd=str(ROOT))
    except subprocess.TimeoutExpired:
        return None, f"timeout after {timeout_s:.0f} s", time.perf_counter() - t0
    wall = time.perf_counter() - t0
    try:
        result = json.loads(proc.stdout)
    except json.JSONDecodeError:
        return None, f"exit {proc.returncode}, no JSON: {proc.stderr.strip()[-400:]}", wall
    meas = result.get("measurements")
    if not isinstance(meas, dict):
        return None, f"exit {proc.returncode}, no measurements object: {result.get('error')}", wall
    meas = dict(meas)
    meas["_channel_layout"] = result.get("format", {}).get("channel_layout")
    return meas, None, wall


def score_case(expect: dict, got: dict | None) -> dict:
    """Outcome per detector key: 'found' / 'missed' / 'not-assessable' (positives), 'false-alarm' / 'clean'
    (negatives); plus 'rate-right' / 'rate-wrong' for found upsampling; 'error' when there is no result."""
    out = {}
    for key, want in expect.items():
        if got is None:
            out[key] = "error"
            continue
        if key == "upsampled_from_hz":
            have = got.get("upsampled_from_hz")
            if want is None:
                out[key] = "false-alarm" if have is not None else "clean"
            else:
                out[key] = "missed" if have is None else "found"
                if have is not None:
                    out["upsampled_rate"] = "rate-right" if int(have) == int(want) else "rate-wrong"
        elif key == "upsampled_channels":
            have = got.get("upsampled_channels")
            if want:
                out[key] = "found" if have is not None and sorted(have) == sorted(want) else (
                    "key-absent" if have is None and "upsampled_channels" not in got else "missed")
            else:
                out[key] = "false-alarm" if have else "clean"
        elif key in ("imaging_detected", "aliasing_detected"):
            have = got.get(key)
            if want:
                out[key] = "found" if have is True else ("not-assessable" if have is None else "missed")
            else:
                out[key] = "false-alarm" if have is True else "clean"
    return out


def run_corpus(module, seed: int, quick: bool = False, workers: int = 2, reuse: bool = False,
               out_dir: Path | None = None, progress: bool = True, only_expect: str | None = None) -> dict:
    """Generate, write, measure and score every case of ``module``; returns a dict with per-case records.
    ``only_expect``: measure only the cases whose labels hold that key (the others are generated and
    skipped)."""
    tag = getattr(module, "__name__", "corpus").split(".")[-1]
    out_dir = out_dir or OUT_ROOT / f"{tag}-{seed}{'-quick' if quick else ''}"
    out_dir.mkdir(parents=True, exist_ok=True)
    records: list[dict] = []
    seen: set = set()
    gen_s = 0.0
    t_start = time.perf_counter()

    def job(rec: dict, path: Path, digest: str):
        cache = path.with_suffix(".result.json")
        if reuse and cache.exists():
            cached = json.loads(cache.read_text())
            if cached.get("sha256") == digest:
                return cached["measurements"], cached["error"], 0.0
        meas, err, wall = measure_file(path)
        kept = None if meas is None else {k: meas.get(k) for k in KEEP_KEYS if k in meas}
        if kept is not None:
            kept["_channel_layout"] = meas.get("_channel_layout")
        cache.write_text(json.dumps({"sha256": digest, "measurements": kept, "error": err}))
        return kept, err, wall

    futures = []
    cpu0_self = resource.getrusage(resource.RUSAGE_SELF)
    cpu0_children = resource.getrusage(resource.RUSAGE_CHILDREN)
    with ThreadPoolExecutor(max_workers=workers) as pool:
        it = iter(module.cases(seed, quick=quick))
        while True:
            t0 = time.perf_counter()
            try:
                case = next(it)
            except StopIteration:
                gen_s += time.perf_counter() - t0
                break
            check_case(case, seen)
            if only_expect and only_expect not in case.expect:
                gen_s += time.perf_counter() - t0
                continue
            path = out_dir / f"{case.name}.wav"
            pcm = np.clip(np.round(case.audio * 8388607.0), -8388608, 8388607).astype(np.int32)
            sf.write(str(path), pcm * 256, int(case.rate_hz), subtype="PCM_24")
            digest = hashlib.sha256(path.read_bytes()).hexdigest()
            gen_s += time.perf_counter() - t0
            rec = {"name": case.name, "set": case.set, "family": case.family, "group": case.group,
                   "rate_hz": int(case.rate_hz), "channels": int(case.audio.shape[1]),
                   "duration_s": round(case.audio.shape[0] / case.rate_hz, 3), "expect": case.expect,
                   "channel_labels": getattr(case, "channel_labels", None), "note": getattr(case, "note", ""),
                   "file": str(path)}
            records.append(rec)
            futures.append((rec, pool.submit(job, rec, path, digest)))
            del case
        for i, (rec, fut) in enumerate(futures):
            meas, err, wall = fut.result()
            rec["result"], rec["error"], rec["measure_wall_s"] = meas, err, round(wall, 2)
            rec["outcome"] = score_case(rec["expect"], meas)
            if progress:
                print(f"  [{i + 1}/{len(futures)}] {rec['name']}: {rec['outcome']}"
                      + (f" ERROR {err}" if err else ""), file=sys.stderr, flush=True)
    total_s = time.perf_counter() - t_start
    cpu1_self = resource.getrusage(resource.RUSAGE_SELF)
    cpu1_children = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu_self = (cpu1_self.ru_utime + cpu1_self.ru_stime) - (cpu0_self.ru_utime + cpu0_self.ru_stime)
    cpu_children = (cpu1_children.ru_utime + cpu1_children.ru_stime) - (cpu0_children.ru_utime + cpu0_children.ru_stime)
    return {"cpu_generation_s": round(cpu_self, 1), "cpu_children_s": round(cpu_children, 1),
            "load_average": [round(v, 1) for v in os.getloadavg()],"corpus": tag, "seed": seed, "quick": quick, "cases": records, "generation_s": round(gen_s, 1),
            "total_s": round(total_s, 1), "measure_wall_sum_s": round(sum(r["measure_wall_s"] for r in records), 1),
            "skipped_families": list(getattr(module, "SKIPPED_FAMILIES", []))}


# ------------------------------------------------------------------------------------------------------
# Tallies and the table
# ------------------------------------------------------------------------------------------------------

def tally(records: list[dict]) -> dict:
    """Counts per detector over the given records (ambiguous-lowpass excluded from false alarms)."""
    t = defaultdict(int)
    for r in records:
        o = r["outcome"]
        amb = r["group"] in AMBIGUOUS_GROUPS
        for key, v in o.items():
            if key == "upsampled_rate":
                t[f"up_{v}"] += 1
                continue
            short = {"upsampled_from_hz": "up", "upsampled_channels": "ch", "imaging_detected": "img",
                     "aliasing_detected": "alias"}[key]
            want = r["expect"][key]
            positive = bool(want) if key != "upsampled_from_hz" else want is not None
            if amb and not positive:
                t[f"{short}_amb_n"] += 1
                t[f"{short}_amb_fa"] += v == "false-alarm"
                continue
            if positive:
                t[f"{short}_pos"] += 1
                t[f"{short}_found"] += v == "found"
                t[f"{short}_na"] += v == "not-assessable"
                t[f"{short}_err"] += v == "error"
                t[f"{short}_keyabsent"] += v == "key-absent"
            else:
                t[f"{short}_neg"] += 1
                t[f"{short}_fa"] += v == "false-alarm"
                t[f"{short}_err"] += v == "error"
    return dict(t)


def _pct(a: int, b: int) -> str:
    return f"{a}/{b} ({100.0 * a / b:.0f}%)" if b else "-"


def summary_row(t: dict) -> dict:
    return {
        "upsampling found": _pct(t.get("up_found", 0), t.get("up_pos", 0)),
        "rate right (of found)": _pct(t.get("up_rate-right", 0), t.get("up_found", 0)),
        "upsampling false alarms": _pct(t.get("up_fa", 0), t.get("up_neg", 0)),
        "ambiguous called upsampled": _pct(t.get("up_amb_fa", 0), t.get("up_amb_n", 0)),
        "per-channel found": _pct(t.get("ch_found", 0), t.get("ch_pos", 0)),
        "imaging found": _pct(t.get("img_found", 0), t.get("img_pos", 0)),
        "imaging false alarms": _pct(t.get("img_fa", 0), t.get("img_neg", 0)),
        "folded found": _pct(t.get("alias_found", 0), t.get("alias_pos", 0)),
        "folded not assessable": _pct(t.get("alias_na", 0), t.get("alias_pos", 0)),
        "folded false alarms": _pct(t.get("alias_fa", 0), t.get("alias_neg", 0)),
    }


def format_tables(runs: list[dict]) -> str:
    lines = []
    # 1. side by side, one column per corpus
    heads = [f"{r['corpus']} (seed {r['seed']}{', quick' if r['quick'] else ''}, {len(r['cases'])} cases)" for r in runs]
    rows = [summary_row(tally(r["cases"])) for r in runs]
    w0 = max(len(k) for k in rows[0]) + 2
    ws = [max(len(h), 18) + 2 for h in heads]
    lines.append("Sampling detectors: found / false alarms per detector (contract scoring)")
    lines.append("".ljust(w0) + "".join(h.ljust(w) for h, w in zip(heads, ws)))
    for key in rows[0]:
        lines.append(key.ljust(w0) + "".join(row[key].ljust(w) for row, w in zip(rows, ws)))
    errors = [sum(1 for c in r["cases"] if c.get("error")) for r in runs]
    lines.append("measurement errors".ljust(w0) + "".join(str(e).ljust(w) for e, w in zip(errors, ws)))
    # 2. per family and per group, per corpus
    cols = ("up found", "rate ok", "up FA", "chan", "img found", "img FA", "fold found", "fold n/a", "fold FA")

    def brief(t: dict) -> list[str]:
        def f(a, b):
            return f"{t.get(a, 0)}/{t.get(b, 0)}" if t.get(b, 0) else "."
        up_fa = f("up_fa", "up_neg") if t.get("up_neg") else (
            f"({t.get('up_amb_fa', 0)}/{t.get('up_amb_n', 0)})" if t.get("up_amb_n") else ".")
        return [f("up_found", "up_pos"), f("up_rate-right", "up_found"), up_fa, f("ch_found", "ch_pos"),
                f("img_found", "img_pos"), f("img_fa", "img_neg"), f("alias_found", "alias_pos"),
                f("alias_na", "alias_pos"), f("alias_fa", "alias_neg")]

    for r in runs:
        for by in ("family", "group"):
            groups = defaultdict(list)
            for c in r["cases"]:
                groups[c[by]].append(c)
            lines.append("")
            lines.append(f"{r['corpus']}: per {by}   (a/b = count of b; '(a/b)' = ambiguous, reported apart)")
            wn = max(len(by) + 2, max(len(k) for k in groups) + 2)
            lines.append(f"{by:<{wn}}{'n':>4}  " + "".join(f"{c:>11}" for c in cols))
            for k in sorted(groups):
                lines.append(f"{k:<{wn}}{len(groups[k]):>4}  " + "".join(f"{v:>11}" for v in brief(tally(groups[k]))))
        lines.append(f"{r['corpus']}: generation {r['generation_s']:.0f} s, wall {r['total_s']:.0f} s "
                     f"(sum of measure wall times {r['measure_wall_sum_s']:.0f} s); CPU: generation "
                     f"{r.get('cpu_generation_s', 0):.0f} s, masterqc + sox + ffmpeg {r.get('cpu_children_s', 0):.0f} s "
                     f"(load average at the end {r.get('load_average')})"
                     + (f"; skipped families: {', '.join(r['skipped_families'])}" if r["skipped_families"] else ""))
    return "\n".join(lines)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Score sampling-detector corpora through `masterqc measure --json`.")
    ap.add_argument("--corpus", action="append",
                    help="corpus module file or name (repeatable); default bench/corpus_validation.py")
    ap.add_argument("--seed", type=int, action="append",
                    help="seed per corpus (repeatable, in --corpus order); default 5000 for validation, 1000 otherwise")
    ap.add_argument("--quick", action="store_true", help="only the quick slice of each corpus")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--reuse", action="store_true", help="reuse cached results of byte-identical files")
    ap.add_argument("--only-expect", default=None, metavar="KEY",
                    help="measure only the cases labelled with KEY (e.g. aliasing_detected): that detector's rows")
    ap.add_argument("--json", help="write per-case results here (default bench/out/sampling/<corpora>.json)")
    args = ap.parse_args(argv)
    corpora = args.corpus or [str(HERE / "corpus_validation.py")]
    seeds = args.seed or []
    runs = []
    for i, spec in enumerate(corpora):
        module = load_corpus(spec)
        seed = seeds[i] if i < len(seeds) else (5000 if "validation" in Path(spec).stem else 1000)
        print(f"scoring {spec} (seed {seed}{', quick' if args.quick else ''}) ...", file=sys.stderr, flush=True)
        runs.append(run_corpus(module, seed, quick=args.quick, workers=args.workers, reuse=args.reuse,
                               only_expect=args.only_expect))
    print(format_tables(runs))
    dump = Path(args.json) if args.json else OUT_ROOT / ("-".join(r["corpus"] for r in runs)
                                                         + ("-quick" if args.quick else "") + "-results.json")
    dump.parent.mkdir(parents=True, exist_ok=True)
    dump.write_text(json.dumps(runs, indent=1, default=str))
    print(f"\nper-case results: {os.path.relpath(dump, ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
