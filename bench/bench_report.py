#!/usr/bin/env python3
"""Report benchmark: rendering one report (HTML and PDF) against measuring the file.

Generates (in bench/out/, git-ignored) a short and a long stereo 48 kHz 24-bit
music-like master, measures and judges each (``measure_file`` + the judge,
file hash included), then renders its HTML report and its PDF, all in one run,
and prints side by side:

- render time (HTML, PDF, both) as a ratio to the measuring time of the same file;
- render time of the long file as a ratio to that of the short one, the
  median over repeats of renders made back to back: series arrive at display
  resolution, so a long file should render about as fast as a short one;
- the HTML and PDF sizes.

Targets (printed beside the figures): HTML+PDF of the short file <= 1.0x its
measuring time; long/short render ratio <= 1.5.  The machine is shared: read
the ratios, not the absolute times.  A missed target is reported, not fatal;
``--strict`` makes it exit 1.  Render times are the best of ``--repeat`` runs.

Each judged result is also saved as ``bench/out/report_<N>min.json`` (``masterqc report``
re-renders it).

Usage: ``bench/bench_report.py [--minutes 3] [--long-minutes 30] [--repeat 3] [--strict]``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
OUT = HERE / "out"
sys.path.insert(0, str(HERE.parent))

FS = 48000
CHUNK_S = 20.0

SPEC = """\
spec_version: 1
name: "Bench streaming stereo (fictional)"
loudness:
  integrated: {target_lufs: -14.0, tolerance_lu: 1.0}
  range: {max_lu: 15.0, severity: warn}
peaks:
  true_peak: {max_dbtp: -1.0}
"""


def music_chunk(start_s: float, seconds: float, rng) -> np.ndarray:
    """A music-like stereo chunk: chords with note envelopes, a drum, noise, a slow level arc."""
    n = int(seconds * FS)
    t = start_s + np.arange(n) / FS
    roots = np.array([110.0, 146.83, 98.0, 130.81])
    f0 = roots[(np.floor(t / 2.0).astype(int)) % 4]
    env = np.exp(-((t % 2.0) * 1.2))
    x = np.zeros((n, 2))
    for k, (ratio, amp) in enumerate([(1, 0.2), (1.26, 0.12), (1.5, 0.12), (2, 0.08), (3, 0.05), (8, 0.015)]):
        s = amp * env * np.sin(2 * np.pi * ratio * f0 * t + k)
        pan = 0.5 + 0.4 * np.sin(k)
        x[:, 0] += 2 * s * (1 - pan)
        x[:, 1] += 2 * s * pan
    beat = t % 0.5
    x += (0.6 * np.exp(-beat * 18) * np.sin(2 * np.pi * (55 + 90 * np.exp(-beat * 30)) * beat))[:, None]
    x += rng.standard_normal((n, 2)) * 0.01
    arc = 0.3 + 0.7 * (0.5 + 0.5 * np.tanh(4 * np.sin(2 * np.pi * t / 90.0)))
    return np.clip(0.55 * x * arc[:, None], -1.0, 1.0)


def make_master(path: Path, minutes: float) -> Path:
    """Write (once) a master of ``minutes`` length, in chunks so memory stays small."""
    if path.exists() and sf.info(str(path)).duration >= minutes * 60 - 1e-6:
        return path
    rng = np.random.default_rng(6)
    total = minutes * 60.0
    with sf.SoundFile(str(path), "w", samplerate=FS, channels=2, subtype="PCM_24") as f:
        t = 0.0
        while t < total - 1e-9:
            seconds = min(CHUNK_S, total - t)
            f.write(music_chunk(t, seconds, rng))
            t += seconds
    return path


def best_of(fn, repeat: int) -> tuple[float, object]:
    best, value = float("inf"), None
    for _ in range(repeat):
        t0 = time.perf_counter()
        value = fn()
        best = min(best, time.perf_counter() - t0)
    return best, value


def measure_one(path: Path, spec_path: Path) -> tuple[dict, float]:
    """The judged result of ``path`` (also saved beside it as JSON) and the seconds it took."""
    from masterqc.measure import measure_file
    from masterqc.pipeline import judge_result, write_json
    from masterqc.spec.loader import load_spec
    from masterqc.spec.model import measure_options_for

    loaded = load_spec(spec_path)
    t0 = time.perf_counter()
    result = judge_result(measure_file(path, measure_options_for(loaded.spec, None)), loaded)
    seconds = time.perf_counter() - t0
    write_json(result, path.with_suffix(".json"))
    return result, seconds


def render_times(results: list[dict], repeat: int) -> list[dict]:
    """Best-of-``repeat`` HTML and PDF render times of each result, the results taken in turn
    within every repeat so that load on the shared machine falls on all of them alike."""
    from masterqc.report.render import render_html, render_pdf

    out = [{"html_s": float("inf"), "pdf_s": float("inf"), "both_s": []} for _ in results]
    for _ in range(repeat):
        for r, o in zip(results, out):
            t0 = time.perf_counter()
            html = render_html(r)
            t1 = time.perf_counter()
            pdf = render_pdf(r, html=html)
            t2 = time.perf_counter()
            o["html_s"] = min(o["html_s"], t1 - t0)
            o["pdf_s"] = min(o["pdf_s"], t2 - t1)
            o["both_s"].append(t2 - t0)
            o["html_bytes"], o["pdf_bytes"] = len(html.encode()), len(pdf)
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=3.0)
    ap.add_argument("--long-minutes", type=float, default=30.0)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--strict", action="store_true")
    args, _unknown = ap.parse_known_args(argv)

    OUT.mkdir(exist_ok=True)
    spec = OUT / "bench_report_spec.yaml"
    spec.write_text(SPEC, encoding="utf-8")
    short = make_master(OUT / f"report_{args.minutes:g}min.wav", args.minutes)
    long_ = make_master(OUT / f"report_{args.long_minutes:g}min.wav", args.long_minutes)

    ra, ma = measure_one(short, spec)
    rb, mb = measure_one(long_, spec)
    render_times([ra], 1)  # warm-up: imports of matplotlib, jinja2 and weasyprint are not part of a render
    ta, tb = render_times([ra, rb], args.repeat)
    a = {**ta, "measure_s": ma, "duration_s": ra["format"]["duration_s"]}
    b = {**tb, "measure_s": mb, "duration_s": rb["format"]["duration_s"]}

    print("report rendering (best of %d) vs measuring (measure_file + judge, one run)" % args.repeat)
    print(f"{'file':>12} {'measure s':>10} {'html s':>8} {'pdf s':>8} {'html+pdf/measure':>17} "
          f"{'html kB':>8} {'pdf kB':>8}")
    for name, r in ((f"{args.minutes:g} min", a), (f"{args.long_minutes:g} min", b)):
        both = r["html_s"] + r["pdf_s"]
        print(f"{name:>12} {r['measure_s']:10.2f} {r['html_s']:8.3f} {r['pdf_s']:8.3f} "
              f"{both / r['measure_s']:16.3f}x {r['html_bytes'] / 1024:8.0f} {r['pdf_bytes'] / 1024:8.0f}")
    ratio_short = (a["html_s"] + a["pdf_s"]) / a["measure_s"]
    # long/short from the renders made side by side in each repeat (median of the pairs)
    flat = float(np.median([lb / la for la, lb in zip(a["both_s"], b["both_s"])]))
    ok1 = ratio_short <= 1.0
    ok2 = flat <= 1.5
    print(f"target: html+pdf of the {args.minutes:g}-min file <= 1.0x its measuring time: "
          f"{ratio_short:.3f}x {'ok' if ok1 else 'MISSED'}")
    print(f"target: render {args.long_minutes:g} min / render {args.minutes:g} min (median of paired runs) <= 1.5: "
          f"{flat:.2f} {'ok' if ok2 else 'MISSED'} (file length ratio {b['duration_s'] / a['duration_s']:.0f}x)")
    if args.strict and not (ok1 and ok2):
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
