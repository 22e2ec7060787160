#!/usr/bin/env python3
"""True-peak meter cost: the true-peak analyzer against decode-only and pyebur128.

Uses the core benchmark's music-like stereo 48 kHz 24-bit programme
(bench/out/, git-ignored; made on first use by ``bench_core.make_file``) and a
"saturated master" version of it (the same loop through ``tanh(4x)``, peaks at
-1 dBFS, so that a large share of the frames sit within 0.7 dB of the -1 dBTP
over ceiling: the case where the meter's fine read is busiest).  Prints, from
one run, side by side (passes interleaved, best of ``--repeat``, CPU seconds
of the calling thread, since the machine is shared):

- a decode-only pass (soundfile, the engine's 65536-frame blocks);
- the true-peak analyzer's ``process()`` + ``finish()`` in an engine pass
  with only that analyzer (threads=1), for the current code and, with
  ``--before-rev REV``, for the analyzer and meter of that git revision
  (loaded from ``git show``, no checkout);
- pyebur128 in true-peak mode only, and with integrated loudness, LRA and
  true peak (as in ``bench_core``), decode included;

as ratios, plus the share of channel-frames the meter read on the fine grid.

``--accuracy`` first prints the worst deviation of the default meter (and of
the ``--before-rev`` one) from a 32x reference (scipy ``resample_poly`` with a
41 k-tap Kaiser-windowed filter, flat to 0.495*fs) at 44.1, 48, 88.2 and
96 kHz, over ``--seeds`` seeds of signals with most of their energy between
0.45 and 0.49*fs (band-limited runs of 1-4 equal-sign full-scale samples,
partials, a 0.49*fs sine, band-limited noise), and on the raw runs (content up
to fs/2, outside the 0.49*fs target band).

``--meter-rates`` times the meter alone (decoded input, the analyzer's settings) at 44.1,
48, 88.2, 96 and 192 kHz, current and ``--before-rev``, and prints how far their true peaks
and envelopes differ.

Usage: ``bench/bench_true_peak.py [--minutes 10] [--repeat 2] [--before-rev main] [--accuracy] [--seeds 4]
[--meter-rates]``.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
import types
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import bench_core as bc  # noqa: E402


def saturated_loop() -> np.ndarray:
    x = np.tanh(4.0 * bc.music_loop())
    return x / np.abs(x).max() * 10 ** (-1 / 20)


def load_before(rev: str):
    """The TruePeakAnalyzer class of git revision ``rev`` (its own meter module)."""
    def show(path):
        return subprocess.run(["git", "-C", str(HERE.parent), "show", f"{rev}:{path}"],
                              capture_output=True, text=True, check=True).stdout
    ov = types.ModuleType("masterqc_before_oversample")
    sys.modules[ov.__name__] = ov
    exec(compile(show("masterqc/measure/oversample.py"), f"{rev}:oversample.py", "exec"), ov.__dict__)
    pk = types.ModuleType("masterqc_before_peaks")
    sys.modules[pk.__name__] = pk
    src = show("masterqc/measure/peaks.py").replace("from masterqc.measure.oversample import",
                                                    "from masterqc_before_oversample import")
    exec(compile(src, f"{rev}:peaks.py", "exec"), pk.__dict__)
    return pk.TruePeakAnalyzer


def analyzer_cpu(path: Path, cls):
    """(CPU seconds in process()+finish() of ``cls``, measurements, the analyzer) of one engine pass."""
    from masterqc.audio.reader import open_stream
    from masterqc.measure.engine import run_analyzers
    from masterqc.measure.options import MeasureOptions
    spent = [0.0]
    made = []

    class Timed(cls):
        def __init__(self, *a, **k):
            super().__init__(*a, **k)
            made.append(self)

        def process(self, block):
            t = time.thread_time()
            super().process(block)
            spent[0] += time.thread_time() - t

        def finish(self):
            t = time.thread_time()
            r = super().finish()
            spent[0] += time.thread_time() - t
            return r
    Timed.__name__ = cls.__name__
    with open_stream(str(path)) as stream:
        m, _, _ = run_analyzers(stream, MeasureOptions(block_frames=bc.BLOCK, threads=1), classes=[Timed])
    return spent[0], m, made[0]


def cpu(fn, *args):
    t = time.thread_time()
    out = fn(*args)
    return time.thread_time() - t, out


def pyebur128_tp(path: Path):
    import pyebur128 as eb
    with sf.SoundFile(str(path)) as f:
        st = eb.R128State(f.channels, f.samplerate, eb.MeasurementMode.MODE_TRUE_PEAK)
        while True:
            b = f.read(bc.BLOCK, dtype="float64", always_2d=True)
            if not b.shape[0]:
                break
            st.add_frames(np.ascontiguousarray(b).ravel(), b.shape[0])
        return 20 * np.log10(max(eb.get_true_peak(st, c) for c in range(f.channels)))


def near_nyquist(seed: int, n: int = 3000) -> dict:
    """Signals with most of their energy between 0.45 and 0.49*fs, peak 0.7 (seeded)."""
    from scipy import signal
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    lp = signal.firwin(1201, 0.4925, window=("kaiser", 12.0), fs=1.0)
    runs = rng.integers(1, 5, size=n)
    sign = np.repeat(np.where(np.arange(n) % 2 == 0, 1.0, -1.0), runs)[:n]
    raw = np.where(rng.random(n) < 0.85, sign, -sign)
    alt = np.where(t % 2 == 0, 1.0, -1.0)
    for pos in rng.integers(100, n - 100, size=12):
        alt[pos:pos + rng.integers(1, 5)] = alt[pos]
    freqs = np.concatenate([[0.49], rng.uniform(0.40, 0.49, 5)])
    bp = signal.firwin(801, [0.45, 0.49], pass_zero=False, window=("kaiser", 10.0), fs=1.0)
    env = np.hanning(n) ** 0.1
    out = {"runs, band-limited": np.convolve(raw, lp, mode="same") * env,
           "runs in alternation, band-limited": np.convolve(alt, lp, mode="same") * env,
           "partials 0.40-0.49 fs": sum(np.cos(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi)) for f in freqs) * env,
           "sine 0.49 fs": np.cos(2 * np.pi * 0.49 * (t - n / 2 - rng.random())) * env,
           "noise 0.45-0.49 fs": np.convolve(rng.standard_normal(n), bp, mode="same") * env,
           "raw runs (to fs/2)": raw * 0.7}
    return {k: v / np.abs(v).max() * 0.7 if not k.startswith("raw") else v for k, v in out.items()}


def accuracy(before_ov, seeds: int) -> None:
    from scipy import signal
    from masterqc.measure import oversample as ov
    h = signal.firwin(32 * 2 * 640 + 1, 1 / 32, window=("kaiser", 10.0))
    meters = [("current", ov)] + ([("before", before_ov)] if before_ov is not None else [])
    print("\nworst deviation from the 32x reference, dB (min .. max over signals and seeds; "
          "Tech 3341 allows +0.2/-0.4)")
    for fs in (44100, 48000, 88200, 96000):
        dev = {(name, band): [] for name, _ in meters for band in ("to 0.49 fs", "raw runs")}
        for seed in range(seeds):
            for key, x in near_nyquist(fs + seed).items():
                ref = 20 * np.log10(np.abs(signal.resample_poly(x, 32, 1, window=h.copy())).max())
                band = "raw runs" if key.startswith("raw") else "to 0.49 fs"
                for name, mod in meters:
                    factor = mod.choose_factor(fs, 4)       # the analyzer's default request
                    got = 20 * np.log10(mod.true_peak_linear(x, fs, factor)[0])
                    dev[(name, band)].append(got - ref)
        for (name, band), d in dev.items():
            print(f"  {fs:>6} Hz  {name:<8} {band:<11} {min(d):+7.3f} .. {max(d):+7.3f}")


def meter_cpu(mod, x: np.ndarray, fs: int, block: int = 65536):
    """(CPU seconds of the calling thread, meter) of one TruePeakMeter of module ``mod``,
    set up as the analyzer sets it up (ceiling -1 dBTP, 2000 envelope buckets, per-channel
    frame callback), fed ``block``-frame blocks of ``x`` already decoded."""
    frames = x.shape[0]
    bf = max(1, -(-frames // 2000))
    kw = {"float32_exact": True} if "float32_exact" in mod.TruePeakMeter.__init__.__code__.co_varnames else {}
    meter = mod.TruePeakMeter(fs, x.shape[1], mod.choose_factor(fs, 4), "kaiser", ceiling_linear=10 ** (-1 / 20),
                              bucket_frames=bf, buckets=-(-frames // bf), on_channel_frames=lambda s, cp: None, **kw)
    t = time.thread_time()
    for i in range(0, frames, block):
        meter.process(x[i:i + block])
    meter.flush()
    return time.thread_time() - t, meter


def meter_rates(before_ov, repeat: int, minutes: float) -> None:
    """The meter alone at 44.1, 48, 88.2, 96 and 192 kHz (the music-like programme written
    at each rate, ``minutes`` at up to 48 kHz and the same frame count above), current and
    ``--before-rev``, interleaved, median CPU seconds."""
    from masterqc.measure import oversample as ov
    print("\ntrue-peak meter alone (decoded input, CPU s, median of", repeat, "interleaved passes)")
    for fs in (44100, 48000, 88200, 96000, 192000):
        mins = minutes * min(1.0, 48000 / fs)
        path = bc.make_file(bc.OUT / f"core_{mins:g}min_{fs}.wav", mins, fs=fs)
        x, _ = sf.read(str(path), dtype="float64", always_2d=True)
        runs: dict[str, list] = {}
        meters = {}
        for _ in range(max(1, repeat)):
            for name, mod in [("current", ov)] + ([("before", before_ov)] if before_ov is not None else []):
                t, meter = meter_cpu(mod, x, fs)
                runs.setdefault(name, []).append(t)
                meters[name] = meter
        med = {k: float(np.median(v)) for k, v in runs.items()}
        cur = meters["current"]
        line = (f"  {fs:>6} Hz {mins:5.2f} min  current {med['current']:6.3f} s "
                f"(scanned {100 * cur.scanned_frames / (x.size):5.2f} %, fine {100 * cur.refined_frames / x.size:5.3f} % "
                f"of channel-frames)")
        if "before" in med:
            b = meters["before"]
            dev = float(np.max(np.abs(20 * np.log10(cur.peak_linear / b.peak_linear))))
            env = np.abs(cur.envelope_linear - b.envelope_linear).max()
            line += (f"  before {med['before']:6.3f} s  ratio {med['current'] / med['before']:5.2f}x; "
                     f"true peak differs by {dev:.2e} dB, envelope by {env:.1e} at most")
        print(line)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--minutes", type=float, default=10.0, help="0 skips the timing")
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--before-rev", default=None, help="git revision whose analyzer is timed beside")
    ap.add_argument("--accuracy", action="store_true", help="print deviations from a 32x reference first")
    ap.add_argument("--seeds", type=int, default=4)
    ap.add_argument("--meter-rates", action="store_true",
                    help="time the meter alone at 44.1-192 kHz (current and --before-rev) and stop")
    args = ap.parse_args(argv)
    from masterqc.measure.peaks import TruePeakAnalyzer
    classes = [("current", TruePeakAnalyzer)]
    if args.before_rev:
        classes.append((f"before ({args.before_rev})", load_before(args.before_rev)))
    if args.accuracy:
        accuracy(sys.modules.get("masterqc_before_oversample"), args.seeds)
    if args.meter_rates:
        meter_rates(sys.modules.get("masterqc_before_oversample"), args.repeat, args.minutes)
        return 0
    if args.minutes <= 0:
        return 0
    files = [("music-like", bc.make_file(bc.OUT / f"core_{args.minutes:g}min.wav", args.minutes)),
             ("saturated", bc.make_file(bc.OUT / f"tp_saturated_{args.minutes:g}min.wav", args.minutes,
                                        loop_fn=saturated_loop))]
    print("caution: the generated programmes peak near 0 dBTP; turn monitors down before listening.")
    for label, path in files:
        info = sf.info(str(path))
        print(f"\n{label}: {path.name}, {info.duration / 60:g} min, {info.channels} ch, {info.samplerate} Hz")
        bc.decode_only(path)                                          # warm the page cache
        best: dict[str, float] = {}
        outs = {}
        for _ in range(max(1, args.repeat)):
            t, _ = cpu(bc.decode_only, path)
            best["decode"] = min(best.get("decode", 1e9), t)
            for name, cls in classes:
                t, m, an = analyzer_cpu(path, cls)
                best[name] = min(best.get(name, 1e9), t)
                outs[name] = (m, an)
            t, tp = cpu(pyebur128_tp, path)
            best["eb_tp"] = min(best.get("eb_tp", 1e9), t)
            outs["eb_tp"] = tp
            t, r = cpu(bc.run_pyebur128, path)
            best["eb_all"] = min(best.get("eb_all", 1e9), t)
        dec, eb_tp, eb_all = best["decode"], best["eb_tp"], best["eb_all"]
        print(f"  {'decode only':<36} {dec:7.2f} s")
        print(f"  {'pyebur128 true peak (decode incl.)':<36} {eb_tp:7.2f} s   {outs['eb_tp']:.4f} dBTP")
        print(f"  {'pyebur128 I + LRA + TP (decode incl.)':<36} {eb_all:7.2f} s")
        for name, _ in classes:
            m, an = outs[name]
            t = best[name]
            extra = ""
            refined = getattr(an.meter, "refined_frames", None)
            if refined is not None:
                extra = f"; fine read in {100 * refined / max(1, info.frames * info.channels):.2f} % of channel-frames"
            scanned = getattr(an.meter, "scanned_frames", None)
            if scanned is not None:
                extra += f", scanned {100 * scanned / max(1, info.frames * info.channels):.2f} %"
            print(f"  {'true-peak analyzer, ' + name:<36} {t:7.2f} s   {m['true_peak_dbtp']:.4f} dBTP, "
                  f"{m['true_peak_over_count']} over frames; / decode {t / dec:5.2f}x, / pyebur128 TP {t / eb_tp:5.2f}x, "
                  f"/ pyebur128 I+LRA+TP {t / eb_all:5.2f}x{extra}")
        if len(classes) > 1:
            print(f"  current / before: {best['current'] / best[classes[1][0]]:.2f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
