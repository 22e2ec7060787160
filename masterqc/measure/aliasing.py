"""Folded content (aliasing): partials that a sampling process reflected below Nyquist.

Two complementary tests, each on a bounded number of frames spread over the file:

1. **Alias-to-harmonic ratio on tonal frames** (frames of fs/5 samples, 5 Hz
   bins, 4-term Blackman-Harris window: its -92 dB side lobes keep the skirts of
   strong harmonics from passing for alias lines).  In a frame whose spectral lines form a harmonic series, the
   fundamental f0 is estimated from all matched harmonics (least squares), and
   the power at the predicted fold frequencies ``|k*f0 - m*fs|`` of the partials
   above Nyquist (first two fold zones, ``k*f0 < 1.5*fs``) is compared with the
   harmonic power.  A frame is *not assessable* where the predicted folds land on
   the harmonics (fs a whole multiple of f0, or too close to one for the
   frequency resolution), and frames that are not tonal are not used at all:
   noise-like material carries no evidence of its own folding, so it is never
   flagged.  Alias lines must be found as spectral peaks at the predicted places,
   not just as energy.

2. **Reflection at Nyquist** (short frame pairs, fs/50 samples, 1.25 ms apart):
   partial tracks and their slopes.  A partial rising towards Nyquist whose
   continuation reappears *falling* at the mirrored place ``fs - (f + s*dt)``
   with the mirrored slope ``-s`` is a partial folded by the sampling (a sweep
   generated past Nyquist, or the harmonics of a naively generated moving tone,
   which fall while their fundamental rises).

``aliasing_score`` is the alias-to-harmonic energy ratio in dB, measured only
where alias lines were found: over the tonal frames whose predicted fold positions
show alias lines (at least :data:`MIN_FOUND_FRACTION` of them), when such frames
are at least half of the assessable ones.  Otherwise it is None: on clean material
the power at the fold positions is the floor and other notes' partials, not
aliases, and quoting it as a ratio would read as aliasing.  In that case
``aliasing_detail.score_upper_bound_db`` states the floor-limited upper bound: an
alias line strong enough to escape detection at every fold position tested would
give at most that ratio.  ``aliasing_detected`` is True when alias lines were
found with a ratio of at least :data:`ALIAS_SCORE_MIN_DB`, or when folded partial
tracks were found; None when nothing could be assessed.
"""

from __future__ import annotations

import math

import numpy as np

from masterqc.measure.base import BOOLEAN, BOOLEAN_OR_NULL, NUMBER_OR_NULL, Analyzer, AnalyzerResult
from masterqc.measure.frames import (  # noqa: F401  (re-exported: the steady-tone fold test and its constants)
    ALIAS_LINE_DB, ALIAS_SCORE_MIN_DB, CLEAR_BINS, LINE_DB, LOBE_BINS, MIN_CLEAR_FOLDS, MIN_F0_HZ,
    MIN_FOUND_FRACTION, MIN_TONAL_FRACTION, TONAL_BIN_HZ, UNDETECTED_LINE_POWER_FACTOR, FramePicker,
    analyse_tonal_frame, blackman_harris, find_lines, fold_frequency, fold_plan, frame_starts, local_floor,
    lobe_power, refine_peaks)

#: at most this many long frames per file (cost bound)
MAX_TONAL_FRAMES = 32
#: short frame pairs for partial tracks: fs/50 samples (50 Hz bins), second frame fs/800 later
TRACK_BIN_HZ = 50.0
TRACK_HOP_DIVISOR = 16
MAX_TRACK_PAIRS = 160
#: per track resolution: (bin Hz, hop divisor, minimum slope Hz/s, mirror position
#: tolerance Hz).  The minimum slope is a quarter of a bin per hop, the tolerance three
#: bins (own reasoning).  A coarser second resolution (200 Hz bins) was tried for the fast
#: high partials of moving naive waveforms at 96 kHz and found nothing more in the corpus.
TRACK_RESOLUTIONS = ((TRACK_BIN_HZ, TRACK_HOP_DIVISOR, 5000.0, 150.0),)
#: peaks used for partial tracks stand this far above the local floor; lower than
#: :data:`LINE_DB` because a chance peak cannot pass the reflection test, which asks for a
#: mirrored position and slope, seen twice (own reasoning)
TRACK_LINE_DB = 12.0
#: a reflected continuation must be seen in at least this many later frame pairs
MIN_REFLECTION_SIGHTINGS = 2
#: reflected partial: slope match (relative) and position match (Hz) of the mirrored track
REFLECT_SLOPE_TOLERANCE = 0.25
REFLECT_POSITION_TOLERANCE_HZ = 150.0
#: partial tracks only count when they move at least this fast (Hz/s), so that the slope
#: sign is certain (own reasoning: a quarter of a bin per hop, five times the error of
#: parabolic peak interpolation on clean lines)
MIN_TRACK_SLOPE_HZ_PER_S = 5000.0
#: look for the reflected continuation at most this long after the rising partial
REFLECT_MAX_GAP_S = 0.25


def track_peaks(spec_a: np.ndarray, spec_b: np.ndarray, bin_hz: float, dt_s: float):
    """Partials of two short frames ``dt_s`` apart in the upper half of the band (where a
    fold at Nyquist shows): ``(freq_hz, slope_hz_per_s, power)`` arrays for every peak of
    frame a (at least :data:`TRACK_LINE_DB` above the local floor) matched to the nearest
    peak of frame b within 4 bins."""
    lo = spec_a.size // 2 - 30
    pa, pb = spec_a[lo:], spec_b[lo:]
    la = find_lines(pa, local_floor(pa) + 1e-300, TRACK_LINE_DB)
    lb = find_lines(pb, local_floor(pb) + 1e-300, TRACK_LINE_DB)
    if la.size == 0 or lb.size == 0:
        return np.zeros(0), np.zeros(0), np.zeros(0)
    fa = refine_peaks(pa, la)
    fb = refine_peaks(pb, lb)
    j = np.searchsorted(fb, fa)
    cand = np.stack([np.clip(j - 1, 0, fb.size - 1), np.clip(j, 0, fb.size - 1)])
    d = np.abs(fb[cand] - fa[None, :])
    pick = cand[np.argmin(d, axis=0), np.arange(fa.size)]
    ok = np.abs(fb[pick] - fa) <= 4.0
    # lines within 3 bins of Nyquist interfere with their own mirror image in the DFT,
    # which moves the interpolated peak from frame to frame: no slope there
    edge = pa.size - 1
    ok &= (fa > 30.0) & (fa < edge - 3.0)
    f = (fa[ok] + lo) * bin_hz
    slope = (fb[pick][ok] - fa[ok]) * bin_hz / dt_s
    return f, slope, pa[la][ok]


def find_reflections(tracks, fs: float, min_slope: float = None, position_tolerance_hz: float = None):
    """Folded partial tracks: a rising partial (time t, frequency f, slope s > 0) whose
    mirrored continuation ``fs - (f + s*(t2 - t))`` appears at a later time t2 with slope
    close to ``-s``, after crossing Nyquist (``f + s*(t2 - t) > fs/2``).

    ``tracks``: list of ``(time_s, freq_hz, slope_hz_per_s)`` arrays per frame pair,
    in time order.  Returns a list of ``(t_rise, f_rise, t_fall, f_fall)``.
    """
    min_slope = MIN_TRACK_SLOPE_HZ_PER_S if min_slope is None else min_slope
    tol = REFLECT_POSITION_TOLERANCE_HZ if position_tolerance_hz is None else position_tolerance_hz
    found = []
    hits = {}
    nyq = fs / 2.0
    for i, (t1, f1, s1) in enumerate(tracks):
        up = (s1 >= min_slope) & (f1 > 0.5 * nyq)
        if not up.any():
            continue
        for t2, f2, s2 in tracks[i + 1:]:
            gap = t2 - t1
            if gap > REFLECT_MAX_GAP_S:
                break
            down = s2 <= -min_slope
            if not down.any():
                continue
            for fr, sr in zip(f1[up], s1[up]):
                ahead = fr + sr * gap
                if ahead <= nyq:
                    continue
                mirror = fs - ahead
                ok = (np.abs(f2[down] - mirror) <= tol) & \
                     (np.abs(-s2[down] - sr) <= REFLECT_SLOPE_TOLERANCE * sr)
                if ok.any():
                    hits.setdefault((i, float(fr)), []).append((float(t2), float(f2[down][ok][0])))
    for (i, fr), seen in hits.items():
        if len(seen) >= MIN_REFLECTION_SIGHTINGS:
            found.append((float(tracks[i][0]), fr, seen[0][0], seen[0][1]))
    return found


class AliasingAnalyzer(Analyzer):
    """Alias-to-harmonic ratio on tonal frames and folded partial tracks."""

    name = "aliasing"
    measurement_schema = {
        "aliasing_detected": BOOLEAN_OR_NULL,
        "aliasing_score": {
            **NUMBER_OR_NULL,
            "description": ("alias-to-harmonic energy ratio, dB: power of the alias lines found at the "
                            "predicted fold frequencies |k*f0 - m*fs| over the harmonic power, on the tonal "
                            "frames where alias lines were found; null when no alias line was found above "
                            "the floor (then aliasing_detail.score_upper_bound_db gives the floor-limited "
                            "upper bound) or nothing was assessable"),
        },
        "aliasing_assessable": BOOLEAN,
        "aliasing_detail": {
            "type": "object",
            "properties": {
                "reason": {"type": ["string", "null"]},
                "tonal_frames": {"type": "integer"},
                "assessable_frames": {"type": "integer"},
                "frames_with_alias_lines": {"type": "integer"},
                "median_f0_hz": NUMBER_OR_NULL,
                "alias_lines_found": {"type": "integer"},
                "fold_positions_tested": {"type": "integer"},
                "score_upper_bound_db": {
                    **NUMBER_OR_NULL,
                    "description": ("when aliasing_score is null on assessable material: the highest "
                                    "alias-to-harmonic ratio, dB, that alias lines escaping detection at "
                                    "every fold position tested could reach (floor-limited)"),
                },
                "folded_partials": {"type": "integer"},
                "where_s": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}},
                "fold_examples": {"type": "array", "items": {"type": "object"}},
            },
        },
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        extra = dict(getattr(options, "extra", {}) or {}).get("aliasing", {})
        self.fs = int(info.sample_rate_hz)
        ch = info.channels
        # long frames
        self.n_long = int(round(self.fs / TONAL_BIN_HZ))
        self.bin_long = self.fs / self.n_long
        self.win_long = blackman_harris(self.n_long)
        starts = frame_starts(int(info.frames), self.n_long, int(extra.get("max_tonal_frames", MAX_TONAL_FRAMES)),
                              self.n_long // 2, seed=1)
        self.pick_long = FramePicker(starts, self.n_long, ch)
        # short frame pairs, at each track resolution: one frame of n + hop samples holds both
        self.trackers = []
        n_pairs = int(extra.get("max_track_pairs", MAX_TRACK_PAIRS))
        for j, (bin_hz, div, min_slope, tol) in enumerate(TRACK_RESOLUTIONS):
            n = int(round(self.fs / bin_hz))
            hop = max(1, n // div)
            starts = frame_starts(int(info.frames), n + hop, n_pairs, hop * 2, seed=2 + j)
            self.trackers.append({"n": n, "hop": hop, "bin_hz": self.fs / n, "min_slope": min_slope,
                                  "tolerance_hz": tol, "window": np.hanning(n + 2)[1:-1],
                                  "picker": FramePicker(starts, n + hop, ch), "tracks": []})
        self.frames = []   # per tonal long frame: (start, result dict)

    def process(self, block) -> None:
        for start, frame in self.pick_long.feed(block):
            spec = np.fft.rfft(frame.T * self.win_long, axis=-1)
            power = np.sum(spec.real ** 2 + spec.imag ** 2, axis=0)
            r = analyse_tonal_frame(power, self.bin_long, self.fs)
            if r is not None:
                self.frames.append((int(start), r))
        for tr in self.trackers:
            n, hop, win = tr["n"], tr["hop"], tr["window"]
            for start, frame in tr["picker"].feed(block):
                a = np.fft.rfft(frame[:n].T * win, axis=-1)
                b = np.fft.rfft(frame[hop:hop + n].T * win, axis=-1)
                pa = np.sum(a.real ** 2 + a.imag ** 2, axis=0)
                pb = np.sum(b.real ** 2 + b.imag ** 2, axis=0)
                f, s, _p = track_peaks(pa, pb, tr["bin_hz"], hop / self.fs)
                tr["tracks"].append(((start + hop / 2.0 + n / 2.0) / self.fs, f, s))

    def finish(self) -> AnalyzerResult:
        tonal = [r for _s, r in self.frames]
        assess = [(s, r) for s, r in self.frames if r["assessable"]]
        h = sum(r["harmonic_power"] for _s, r in assess)
        a = sum(r["alias_power"] for _s, r in assess)
        evident = [(s, r) for s, r in assess if r["found"] >= max(MIN_CLEAR_FOLDS, MIN_FOUND_FRACTION * r["clear"])]
        # the ratio is quoted only where alias lines were found, in enough of the frames
        enough = bool(evident) and len(evident) >= max(1, 0.5 * len(assess))
        score = None
        if enough:
            h_e = sum(r["harmonic_power"] for _s, r in evident)
            a_e = sum(r["alias_power"] for _s, r in evident)
            score = 10.0 * math.log10(a_e / h_e) if a_e > 0 and h_e > 0 else None
        bound = None
        if score is None and assess and h > 0:
            b = sum(r["bound_power"] for _s, r in assess)
            bound = 10.0 * math.log10(b / h) if b > 0 else None
        reflections = []
        for tr in self.trackers:
            reflections += find_reflections(tr["tracks"], self.fs, tr["min_slope"], tr["tolerance_hz"])
        detail = {
            "reason": None,
            "tonal_frames": len(tonal),
            "assessable_frames": len(assess),
            "frames_with_alias_lines": len(evident),
            "median_f0_hz": round(float(np.median([r["f0_hz"] for r in tonal])), 3) if tonal else None,
            "alias_lines_found": int(sum(r["found"] for _s, r in assess)),
            "fold_positions_tested": int(sum(r["clear"] for _s, r in assess)),
            "score_upper_bound_db": None if bound is None else round(bound, 2),
            "folded_partials": len(reflections),
            "where_s": [],
            "fold_examples": [],
        }
        line_hit = enough and score is not None and score >= ALIAS_SCORE_MIN_DB
        detected = line_hit or bool(reflections)
        assessable = bool(assess) or bool(reflections)
        if line_hit:
            dur = self.n_long / self.fs
            detail["where_s"] = [(s / self.fs, s / self.fs + dur) for s, _r in evident]
        if reflections:
            detail["where_s"] = list(detail["where_s"]) + [(t1, t2) for t1, _f1, t2, _f2 in reflections]
            detail["fold_examples"] = [{"rising_hz": round(f1, 1), "at_s": round(t1, 3),
                                        "folded_hz": round(f2, 1), "folded_at_s": round(t2, 3)}
                                       for t1, f1, t2, f2 in reflections[:5]]
        if not assessable:
            if self.pick_long.starts.size == 0:
                detail["reason"] = (f"not assessable: shorter than one analysis frame "
                                    f"({self.n_long / self.fs:.2f} s)")
            elif not tonal:
                detail["reason"] = "not assessable: no tonal passage (noise-like material is never judged)"
            else:
                detail["reason"] = ("not assessable: the fold frequencies land on the harmonics (the "
                                    "sampling rate is a whole multiple of the fundamental, or too close)")
            detected = None
        elif detected:
            parts = []
            if line_hit:
                parts.append(f"alias lines at the predicted fold frequencies of partials above Nyquist, "
                             f"{score:.1f} dB relative to the harmonics")
            if reflections:
                parts.append(f"{len(reflections)} partial track(s) reflected at Nyquist (falling while "
                             "rising partials approach it)")
            detail["reason"] = "; ".join(parts)
        else:
            if score is not None:
                detail["reason"] = f"no alias lines above {ALIAS_SCORE_MIN_DB:.0f} dB at the fold frequencies"
            elif evident:
                detail["reason"] = (f"alias lines in only {len(evident)} of {len(assess)} assessable tonal "
                                    "frames: too few to call the material aliased or to quote a ratio")
            elif bound is not None:
                detail["reason"] = (f"no alias lines found above the floor at the {detail['fold_positions_tested']} "
                                    f"fold positions tested (alias-to-harmonic ratio below about {bound:.0f} dB, "
                                    "floor-limited)")
            else:
                detail["reason"] = "no folded partials found"
        detail["where_s"] = _merge(detail["where_s"])
        measurements = {
            "aliasing_detected": detected,
            "aliasing_score": None if score is None else round(score, 2),
            "aliasing_assessable": assessable,
            "aliasing_detail": detail,
        }
        settings = {"tonal_frame_samples": self.n_long, "tonal_frames_max": self.pick_long.starts.size,
                    "track_frame_samples": [tr["n"] for tr in self.trackers],
                    "track_hop_samples": [tr["hop"] for tr in self.trackers],
                    "track_pairs": [int(tr["picker"].starts.size) for tr in self.trackers],
                    "alias_score_min_db": ALIAS_SCORE_MIN_DB,
                    "line_db": LINE_DB, "alias_line_db": ALIAS_LINE_DB}
        return AnalyzerResult(measurements=measurements, settings=settings)


def _merge(ranges, gap: float = 0.05):
    out = []
    for a, b in sorted(ranges):
        if out and a <= out[-1][1] + gap:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return [[round(a, 3), round(b, 3)] for a, b in out[:50]]
