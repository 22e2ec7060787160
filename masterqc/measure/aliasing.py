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

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import BOOLEAN, BOOLEAN_OR_NULL, NUMBER_OR_NULL, Analyzer, AnalyzerResult
from masterqc.measure.imaging import FramePicker, frame_starts, harmonic_fundamental, refine_peaks

#: long frames: 5 Hz bins (fs/5 samples)
TONAL_BIN_HZ = 5.0
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
#: a spectral line stands this far above the local floor (median of +-25 bins).
#: Own reasoning: 20 dB is far outside the spread of a noise periodogram (an exponential
#: variable exceeds its median by 20 dB with probability 2**-100).
LINE_DB = 20.0
#: peaks used for partial tracks stand this far above the local floor; lower than
#: :data:`LINE_DB` because a chance peak cannot pass the reflection test, which asks for a
#: mirrored position and slope, seen twice (own reasoning)
TRACK_LINE_DB = 12.0
#: a reflected continuation must be seen in at least this many later frame pairs
MIN_REFLECTION_SIGHTINGS = 2
#: a predicted fold frequency counts as found when a peak stands this far above the local
#: floor within +-1 bin of it (own reasoning: 10 dB keeps chance peaks of the floor out,
#: since the test is made only at predicted places)
ALIAS_LINE_DB = 10.0
#: predicted folds closer than this to a harmonic (or to DC/Nyquist) cannot be told apart
#: from it: +-5 bins covers the Blackman-Harris main lobe (4 bins) plus the f0 uncertainty
CLEAR_BINS = 5
#: half-width of the window's main lobe in bins (power of a line is summed over it)
LOBE_BINS = 4
#: at least this many clear fold positions per frame, or the frame is not assessable
MIN_CLEAR_FOLDS = 3
#: alias lines found in at least this fraction of the clear fold positions of a frame make
#: the frame's aliasing evident (own reasoning)
MIN_FOUND_FRACTION = 0.25
#: alias-to-harmonic ratio at or above which found alias lines count as a defect.
#: Own reasoning: a proper anti-alias or interpolation filter (stop band 90 dB or more)
#: leaves folds below about -90 dB of the harmonics; a naive sawtooth folds at -15 to -35 dB
#: (see tests: from its Fourier series); -70 dB flags any converter worse than a short
#: windowed-sinc kernel while leaving margin above good ones.
ALIAS_SCORE_MIN_DB = -70.0
#: power of a line whose highest bin within +-1 bin of a fold position is just below the
#: detection level (:data:`ALIAS_LINE_DB` over the floor), in units of that level: the
#: Blackman-Harris 4-term window's noise-equivalent bandwidth (2.00 bins) times its worst
#: scalloping loss (0.83 dB at half a bin), 2.43 (own reasoning from the window's standard
#: figures, quoted from memory)
UNDETECTED_LINE_POWER_FACTOR = 2.43
#: fundamentals below this cannot be resolved at 5 Hz bins with clear fold positions
MIN_F0_HZ = 60.0
#: a tonal frame holds at least this fraction of its power in line main lobes (own reasoning)
MIN_TONAL_FRACTION = 0.5
#: reflected partial: slope match (relative) and position match (Hz) of the mirrored track
REFLECT_SLOPE_TOLERANCE = 0.25
REFLECT_POSITION_TOLERANCE_HZ = 150.0
#: partial tracks only count when they move at least this fast (Hz/s), so that the slope
#: sign is certain (own reasoning: a quarter of a bin per hop, five times the error of
#: parabolic peak interpolation on clean lines)
MIN_TRACK_SLOPE_HZ_PER_S = 5000.0
#: look for the reflected continuation at most this long after the rising partial
REFLECT_MAX_GAP_S = 0.25


def blackman_harris(n: int) -> np.ndarray:
    """4-term Blackman-Harris window (side lobes -92 dB), symmetric, ``n`` points."""
    from scipy.signal import windows
    return windows.blackmanharris(n, sym=True)


def local_floor(power: np.ndarray, halfwidth: int = 25) -> np.ndarray:
    """Local floor of a power spectrum: running median over ``2*halfwidth+1`` bins."""
    from scipy.ndimage import median_filter
    return median_filter(power, size=2 * halfwidth + 1, mode="nearest")


def block_floor(power: np.ndarray, block: int = 25) -> np.ndarray:
    """Cheap local floor: medians of consecutive ``block``-bin blocks, interpolated linearly
    between block centres (about as robust as the running median, far cheaper)."""
    n = power.size
    nb = max(1, n // block)
    med = np.median(power[:nb * block].reshape(nb, block), axis=1)
    centres = (np.arange(nb) + 0.5) * block
    return np.interp(np.arange(n), centres, med)


def find_lines(power: np.ndarray, floor: np.ndarray, db: float):
    """Indices of local maxima standing ``db`` above ``floor``."""
    thr = floor * 10 ** (db / 10)
    p = power
    ok = (p[1:-1] >= p[:-2]) & (p[1:-1] > p[2:]) & (p[1:-1] >= thr[1:-1]) & (p[1:-1] > 0)
    return np.nonzero(ok)[0] + 1


def fold_frequency(f_hz, fs: float):
    """Where a component at ``f_hz`` (any frequency) lands after sampling at ``fs``:
    ``|f - m*fs|`` for the nearest whole m, in [0, fs/2]."""
    f = np.asarray(f_hz, dtype=float)
    return np.abs(f - fs * np.round(f / fs))


def fold_plan(f0: float, fs: float, bin_hz: float, max_ratio: float = 1.5):
    """Harmonics below Nyquist and clear fold positions of the partials above it.

    Returns ``(harmonic_hz, fold_hz, fold_order)``: harmonics ``k*f0 < fs/2``; for
    ``fs/2 < k*f0 < max_ratio*fs`` the fold frequencies that lie at least
    :data:`CLEAR_BINS` bins from every harmonic and from DC and Nyquist, and their
    orders k.
    """
    kh = int(math.floor((fs / 2.0) / f0))
    if kh * f0 >= fs / 2.0:
        kh -= 1
    harmonics = f0 * np.arange(1, kh + 1)
    k = np.arange(kh + 1, int(math.floor(max_ratio * fs / f0)) + 1)
    folds = fold_frequency(k * f0, fs)
    clear = CLEAR_BINS * bin_hz
    ok = (folds > clear) & (folds < fs / 2.0 - clear)
    if harmonics.size:
        nearest = np.abs(np.round(folds / f0) * f0 - folds)
        ok &= nearest > clear
    return harmonics, folds[ok], k[ok]


def lobe_power(power: np.ndarray, f_hz, bin_hz: float, half: int = LOBE_BINS) -> np.ndarray:
    """Power in +-``half`` bins around each frequency (the window's main lobe)."""
    idx = np.round(np.asarray(f_hz) / bin_hz).astype(int)
    out = np.zeros(idx.size)
    n = power.size
    for j in range(-half, half + 1):
        ii = np.clip(idx + j, 0, n - 1)
        out += power[ii]
    return out


def analyse_tonal_frame(power: np.ndarray, bin_hz: float, fs: float):
    """Alias analysis of one frame's power spectrum (one-sided, ``bin_hz`` spacing).

    Returns None when the frame is not tonal, else a dict with ``f0_hz``,
    ``assessable``, ``harmonic_power``, ``alias_power`` (excess over the floor at
    the clear fold positions), ``clear`` (number of clear positions) and ``found``
    (alias lines found there).
    """
    floor = local_floor(power)
    lines = find_lines(power, floor, LINE_DB)
    if lines.size < 3:
        return None
    lobe = np.zeros(power.size, dtype=bool)
    for k in lines:
        lobe[max(0, k - LOBE_BINS):k + LOBE_BINS + 1] = True
    total = float(power.sum())
    if not total > 0 or power[lobe].sum() < MIN_TONAL_FRACTION * total:
        return None
    freqs = refine_peaks(power, lines) * bin_hz
    f0 = harmonic_fundamental(freqs, power[lines], min_f0_hz=MIN_F0_HZ, tolerance_hz=0.3 * bin_hz)
    if f0 is None:
        return None
    harmonics, folds, _orders = fold_plan(f0, fs, bin_hz)
    h_pow = float(lobe_power(power, harmonics, bin_hz).sum())
    out = {"f0_hz": f0, "assessable": folds.size >= MIN_CLEAR_FOLDS, "harmonic_power": h_pow,
           "alias_power": 0.0, "clear": int(folds.size), "found": 0, "bound_power": 0.0}
    if not out["assessable"] or not h_pow > 0:
        out["assessable"] = False
        return out
    a_pow = lobe_power(power, folds, bin_hz)
    f_pow = lobe_power(floor, folds, bin_hz)
    out["alias_power"] = float(np.maximum(a_pow - f_pow, 0.0).sum())
    idx = np.round(folds / bin_hz).astype(int)
    n = power.size
    best = np.max(np.stack([power[np.clip(idx + j, 1, n - 2)] for j in (-1, 0, 1)]), axis=0)
    level = floor[np.clip(idx, 0, n - 1)] * 10 ** (ALIAS_LINE_DB / 10)
    out["found"] = int(np.sum(best >= level))
    # the most power undetected alias lines could hold at these positions
    out["bound_power"] = float(np.sum(level) * UNDETECTED_LINE_POWER_FACTOR)
    return out


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
        "aliasing_detected": measured(BOOLEAN_OR_NULL, NO_UNIT,
            'folded (aliased) partials found; null when not assessable'),
        "aliasing_score": measured({
            **NUMBER_OR_NULL,
            "description": ("alias-to-harmonic energy ratio, dB: power of the alias lines found at the "
            "predicted fold frequencies |k*f0 - m*fs| over the harmonic power, on the tonal "
            "frames where alias lines were found; null when no alias line was found above "
            "the floor (then aliasing_detail.score_upper_bound_db gives the floor-limited "
            "upper bound) or nothing was assessable"),
            }, 'db',
            'alias-to-harmonic energy ratio on tonal frames with alias lines; null when none found or not assessable'),
        "aliasing_assessable": measured(BOOLEAN, NO_UNIT,
            'the material had tonal frames on which aliasing could be assessed'),
        "aliasing_detail": measured({
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
            }, NO_UNIT,
            'the aliasing assessment in detail'),
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
