"""Imaging: mirror images of the audio left by an upsampler without a proper filter.

A signal recorded at a rate ``r`` and converted up to the file's rate ``fs``
without a proper interpolation filter (sample hold, linear interpolation, zero
stuffing) carries copies of its baseband spectrum at ``q*r +- f``.  Such a copy
is a deterministic function of the baseband: the product ``X(f) * X(q*r - f)``
keeps its phase from frame to frame, which makes the signal cyclostationary at
the cycle frequency ``alpha = q*r`` (spectral correlation at cycle frequency
alpha, in the sense of Gardner's cyclostationary analysis; the periodic
correlations that resampling leaves, described by Popescu and Farid, are the
same property).  Natural audio has no spectral correlation at those cycle
frequencies, so the measure is a clean test:

    S(f) = sum_m X_m(f) X_m(alpha - f) exp(-j 2 pi alpha n_m / fs)
    gamma^2(f) = |S(f)|^2 / (sum_m |X_m(f)|^2  sum_m |X_m(alpha - f)|^2)

with ``X_m`` the Hann-windowed DFT of the frame starting at sample ``n_m``.
Frequencies are taken modulo ``fs`` on the two-sided DFT, so images folded at
the file's Nyquist are paired with their source automatically.  The frame
length is ``fs/20`` samples (20 Hz bins): every standard rate is a whole number
of 20 Hz, so ``q*r - f`` falls on a bin, and 20 Hz bins give twice as many
frames as 10 Hz bins for the same audio, which is what the coherence estimate
needs.  Frames are placed at irregular (stratified pseudo-random) positions:
on a regular grid two unrelated components could look phase-locked.

The estimator's bias under the null (no image) is not ``1/M`` for programme
material: where a few loud frames (drum hits, syllables) carry most of a bin's
power, ``|S|^2 / (P1 P2)`` is close to 1 whatever the phases.  Each pair's null
bias is therefore taken from the frames' own powers,
``b = sum_m P_m(f) P_m(alpha - f) / (sum_m P_m(f) sum_m P_m(alpha - f))``
(the squared coherence of independent components with those frame powers; 1/M for
steady material), and the null variance from an effective count of ``1/b`` frames.
Without it, music and speech look coherent at every cycle frequency, and the
leakage of a proper resampler's transition band passed for an image.

Guards against look-alikes, each reported as ``untestable`` with its reason:
periodic material whose fundamental meets the cycle frequency (its harmonics pair
up exactly like images), periodic material with folded partials (cyclostationary
at nearly every cycle frequency), and material that is just as coherent at
control cycle frequencies a few bins away.  Pairs of two spectral lines whose
frequencies do not sum to the cycle frequency are left out.

For each candidate source rate below the file's rate the analyzer reports

* ``coherence``: the fraction of the power in the weaker member of each
  (f, alpha - f) pair that the other member explains, power-weighted over all
  pairs, corrected for the estimator's bias, in [0, 1];
* ``image_level_db``: the coherent (image) power relative to the baseband power
  below ``r/2``, in dB (None when no coherent image was found);
* ``verdict``: "defect" (significant coherence with an image at or above
  :data:`DEFECT_IMAGE_LEVEL_DB`), "trace" (significant coherence with a deeper
  image: a resampler's trace), "none", or "untestable" (with a reason).

Cost: at most :data:`MAX_FRAMES` frames per file spread over it (one FFT of
``fs/20`` samples per frame and channel, and one product per candidate pair) plus
:data:`FOLD_CHECK_FRAMES` longer frames, independent of the file's length.
"""

from __future__ import annotations

import math

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.levels import power_ratio_db
from masterqc.measure.base import (BOOLEAN_OR_NULL, NUMBER_OR_NULL, Analyzer, AnalyzerResult, array_of)
from masterqc.measure.frames import FramePicker, frame_starts, harmonic_fundamental, refine_peak, refine_peaks

#: standard source rates that are tested when they are below the file's rate
CANDIDATE_RATES_HZ = (32000, 44100, 48000, 88200, 96000, 176400)
#: analysis bin spacing; fs/20 samples per frame puts every candidate's mirror on a bin
BIN_HZ = 20.0
#: at most this many frames per file are analysed (cost bound, independent of length)
MAX_FRAMES = 128
#: fewer frames than this and the coherence estimate is meaningless
MIN_FRAMES = 6
#: baseband bins below this are left out (DC offsets and rumble carry no image information)
LOW_EDGE_HZ = 20.0
#: pairs closer than this in frequency share the leakage of one component and are skipped
PAIR_GUARD_BINS = 3
#: z-score of the pooled coherence statistic above which the coherence is significant.
#: Own reasoning: the statistic is a sum over thousands of pairs, close to Gaussian under the
#: null (no image); 8 standard deviations keeps false alarms negligible over all candidates,
#: channels and files of a release, and covers the inflation by neighbouring-bin correlation
#: that :data:`NULL_VARIANCE_INFLATION` only approximates.
Z_SIGNIFICANT = 8.0
#: a pair of two spectral lines is an image pair only if their frequencies sum to the cycle
#: frequency: pairs whose refined line frequencies miss it by more than this are left out.
#: Own reasoning: parabolic interpolation of a Hann log-spectrum places a clean line within
#: about 0.05 bin (1 Hz at 20 Hz bins); 3 Hz leaves room for noise.  Without this check two
#: unrelated stationary lines can look phase-locked by chance over a short file, and every
#: pair of harmonics with the same order sum shares that one chance.
LINE_PAIR_TOLERANCE_HZ = 3.0
#: the image level is quoted only when the power-weighted statistic alone reaches this z
#: (own reasoning: below it the level estimate is dominated by its own noise)
Z_LEVEL = 5.0
#: pairs whose weaker member is this far below the stronger one give the image level when
#: the images fall on programme content (own reasoning: 10 dB)
ASYMMETRY_DB = 10.0
#: per-pair false-inclusion probability of the significant-pair image estimate, and the
#: number of such pairs it needs (own reasoning: with a few thousand pairs per candidate,
#: 1e-6 makes a chance inclusion a one-in-several-hundred-files event)
PAIR_P = 1e-6
MIN_SIGNIFICANT_PAIRS = 3
#: the image power seen across the file's two halves must reach this fraction of the
#: whole-file estimate (own reasoning: a true image gives 1 within noise; a pair drifting by
#: a quarter turn or more between halves gives 0 or less)
HALVES_AGREEMENT = 0.25
#: variance inflation of the null statistic: Hann-window leakage correlates adjacent bins
#: (own reasoning: the squared coherence between neighbouring Hann bins of white noise is
#: 0.25, which gives a factor of about 1.5; 2 is taken for margin)
NULL_VARIANCE_INFLATION = 2.0
#: images at or above this level relative to the baseband are a defect.  Own reasoning: a
#: sample-hold upsampler leaves images at about -15 to -30 dB of bright programme, a linear
#: interpolator about -25 to -45 dB, while purpose-built interpolation filters (even short
#: windowed-sinc kernels) keep them below about -50 dB; -45 dB separates the two groups.
DEFECT_IMAGE_LEVEL_DB = -45.0
#: control cycle frequencies, in bins from each candidate's: an upsampler's images are
#: coherent only at the exact cycle frequency, while material that is cyclostationary at
#: almost every cycle frequency (periodic material whose folded partials fill a dense comb)
#: shows the same coherence at the controls.  Own reasoning: 3 and 5 bins lie outside the
#: Hann main lobe (2 bins), so a true image is not seen at the controls.
CONTROL_OFFSETS_BINS = (-5, 3)
#: a control this significant (absolute, and relative to the candidate's z) makes the
#: candidate untestable (own reasoning)
CONTROL_Z_RELATIVE = 0.5
#: long frames checked for periodic material with folded partials (see :mod:`aliasing`)
FOLD_CHECK_FRAMES = 8
#: periodic material whose fundamental divides a candidate rate is itself cyclostationary at
#: that rate; its harmonics pair up like images.  Harmonic series are recognised from spectral
#: lines this far above the local floor (own reasoning).
LINE_PROMINENCE_DB = 20.0


def null_coherence_bias(starts, window) -> float:
    """Expected squared coherence of two independent noises over frames at ``starts``.

    For locally white Gaussian noise the DFT coefficients of two frames ``d`` samples
    apart correlate by rho(d) = sum w[n] w[n+d] / sum w^2 (the window's normalised
    autocorrelation), and the phase correction at the cycle frequency cancels the
    frequency-dependent phase of the pair, so E|S|^2 / (E P1 E P2) = sum_{m,m'} rho^2 / M^2.
    With non-overlapping frames this is 1/M.
    """
    s = np.asarray(starts, dtype=np.int64)
    m = s.size
    if m == 0:
        return 1.0
    w = np.asarray(window, dtype=float)
    n = w.size
    ac = np.fft.irfft(np.abs(np.fft.rfft(w, 2 * n)) ** 2, 2 * n)[:n]
    ac = ac / ac[0]
    d = np.abs(s[:, None] - s[None, :])
    rho = np.where(d < n, ac[np.minimum(d, n - 1)], 0.0)
    return float(np.sum(rho ** 2)) / (m * m)


def mirror_pairs(fs: int, rate: float, n_fft: int, rate_for_band: float | None = None):
    """Bin pairs of the two-sided DFT linked by the images of an upsampler from ``rate``.

    Returns ``(ka, kb, alpha_bins)``: full-DFT indices (0..n_fft-1) of a baseband
    bin (``|f| < rate/2``) and of its image at ``q*rate - f`` (modulo fs), and the
    cycle frequency ``q*rate`` in bins (modulo n_fft), for every image order
    ``q`` whose images reach the band below fs (``q*rate - rate/2 < fs``).
    Conjugate duplicates and pairs closer than :data:`PAIR_GUARD_BINS` are removed.
    ``rate_for_band`` (default ``rate``) sets the baseband edge, so that control cycle
    frequencies near a candidate pair the same baseband bins.
    """
    bin_hz = fs / n_fft
    lo = int(math.ceil(LOW_EDGE_HZ / bin_hz))
    hi = int(math.ceil((rate if rate_for_band is None else rate_for_band) / 2.0 / bin_hz)) - 1
    base = np.arange(lo, hi + 1, dtype=np.int64)
    n = int(n_fft)
    parts_a, parts_b, parts_al = [], [], []
    q = 1
    while q * rate - rate / 2.0 < fs:
        alpha = int(round(q * rate / bin_hz)) % n
        q += 1
        if alpha == 0:
            continue
        for sign in (1, -1):
            ka = (sign * base) % n
            parts_a.append(ka)
            parts_b.append((alpha - ka) % n)
            parts_al.append(np.full(ka.size, alpha, dtype=np.int64))
    if not parts_a:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty
    a = np.concatenate(parts_a)
    b = np.concatenate(parts_b)
    al = np.concatenate(parts_al)
    fa = np.minimum(a, n - a)
    fb = np.minimum(b, n - b)
    ok = (fb >= lo) & (np.abs(fa - fb) >= PAIR_GUARD_BINS)
    a, b, al = a[ok], b[ok], al[ok]
    # canonical key of the unordered pair and its conjugate (-a, -b, -alpha)
    na, nb, nal = (n - a) % n, (n - b) % n, (n - al) % n
    k1 = (np.minimum(a, b) * n + np.maximum(a, b)) * n + al
    k2 = (np.minimum(na, nb) * n + np.maximum(na, nb)) * n + nal
    key = np.minimum(k1, k2)
    _u, first = np.unique(key, return_index=True)
    first = np.sort(first)
    return a[first], b[first], al[first]


def spectral_lines(power: np.ndarray, prominence_db: float = LINE_PROMINENCE_DB, halfwidth: int = 25):
    """Indices of spectral lines in a power spectrum: local maxima standing at least
    ``prominence_db`` above the median of the surrounding ``2*halfwidth+1`` bins."""
    p = np.asarray(power, dtype=float)
    if p.size < 5:
        return np.zeros(0, dtype=np.int64)
    from scipy.ndimage import median_filter
    floor = median_filter(p, size=2 * halfwidth + 1, mode="nearest")
    tiny = max(float(p.max()) * 1e-30, 1e-300)
    ratio = p / np.maximum(floor, tiny)
    peak = (p[1:-1] >= p[:-2]) & (p[1:-1] >= p[2:]) & (ratio[1:-1] >= 10 ** (prominence_db / 10))
    return np.nonzero(peak)[0] + 1


def locked_order(f0: float, rate: float, fs: float, tolerance_hz: float, max_order: int | None = None):
    """Smallest K (1..max_order, default fs/f0) with K*f0 within ``tolerance_hz`` of
    ``rate`` modulo ``fs``, or None.  Periodic material at f0 is cyclostationary at every
    K*f0 (mod fs, once sampled), so at such a cycle frequency a test for images says
    nothing."""
    if not f0 or f0 <= 0:
        return None
    top = int(max_order if max_order is not None else max(1, fs // f0))
    k = np.arange(1, top + 1)
    resid = np.mod(k * f0 - rate + fs / 2.0, fs) - fs / 2.0
    hit = np.nonzero(np.abs(resid) <= tolerance_hz)[0]
    return int(k[hit[0]]) if hit.size else None


def periodic_fundamental(power: np.ndarray, bin_hz: float):
    """Fundamental (Hz) of line-dominated periodic material in a long-term power spectrum, or None.

    Lines must hold most of the power for the material to count as periodic.
    """
    lines = spectral_lines(power)
    if lines.size < 3:
        return None
    lobe = np.zeros(power.size, dtype=bool)
    for k in lines:
        lobe[max(0, k - 2):k + 3] = True
    if power[lobe].sum() < 0.5 * power.sum():
        return None
    freqs = refine_peaks(power, lines) * bin_hz
    return harmonic_fundamental(freqs, power[lines])


class ImagingAnalyzer(Analyzer):
    """Spectral correlation at the cycle frequencies of every candidate source rate."""

    name = "imaging"
    measurement_schema = {
        "imaging_detected": measured(BOOLEAN_OR_NULL, NO_UNIT,
            'mirror images of an unfiltered upsampler found; null when untestable'),
        "imaging": measured(array_of({
            "type": "object",
            "properties": {
                "source_rate_hz": {"type": "number"},
                "coherence": NUMBER_OR_NULL,
                "image_level_db": NUMBER_OR_NULL,
                "z_score": NUMBER_OR_NULL,
                "verdict": {"enum": ["defect", "trace", "none", "untestable"]},
                "reason": {"type": ["string", "null"]},
                "channel": {"type": ["string", "null"]},
                "channels": {"type": "array", "items": {"type": "string"}},
            },
            "required": ["source_rate_hz", "coherence", "image_level_db", "verdict"],
            }), NO_UNIT,
            'the imaging test per candidate source rate'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        extra = dict(getattr(options, "extra", {}) or {}).get("imaging", {})
        self.fs = int(info.sample_rate_hz)
        self.n_fft = int(round(self.fs / BIN_HZ))
        self.bin_hz = self.fs / self.n_fft
        rates = extra.get("candidate_rates_hz", CANDIDATE_RATES_HZ)
        self.rates = [float(r) for r in rates if r < self.fs]
        self.max_frames = int(extra.get("max_frames", MAX_FRAMES))
        self.window = np.hanning(self.n_fft + 2)[1:-1]
        starts = frame_starts(int(info.frames), self.n_fft, self.max_frames, self.n_fft // 2)
        self.null_bias = null_coherence_bias(starts, self.window)
        self.span_s = (float(starts[-1] - starts[0]) + self.n_fft) / self.fs if starts.size else 0.0
        self.picker = FramePicker(starts, self.n_fft, info.channels)
        self.frames = 0
        nb = self.n_fft // 2 + 1
        self.power = np.zeros((info.channels, nb))
        # a few long Blackman-Harris frames to recognise periodic material with folded partials
        from masterqc.measure import frames as _al
        self._al = _al
        self.n_tonal = int(round(self.fs / _al.TONAL_BIN_HZ))
        self.win_tonal = _al.blackman_harris(self.n_tonal)
        self.pick_tonal = FramePicker(frame_starts(int(info.frames), self.n_tonal, FOLD_CHECK_FRAMES,
                                                   self.n_tonal // 2, seed=3), self.n_tonal, info.channels)
        self.folded_frames = 0
        self.tonal_frames = 0
        self._lines = {}
        self.cands = []
        parts = []
        pos = 0
        for r in self.rates:
            cand = {"rate": r, "cycles": []}
            for off in (0,) + tuple(extra.get("control_offsets_bins", CONTROL_OFFSETS_BINS)):
                ka, kb, al = mirror_pairs(self.fs, r + off * self.bin_hz, self.n_fft, rate_for_band=r)
                cand["cycles"].append({"offset": off, "ka": ka, "kb": kb, "alpha": al,
                                       "slice": slice(pos, pos + ka.size)})
                parts.append((ka, kb, al))
                pos += ka.size
            self.cands.append(cand)
        cat = (lambda i: np.concatenate([p[i] for p in parts]) if parts else np.zeros(0, dtype=np.int64))
        self.all_ka, self.all_kb, self.all_alpha = cat(0), cat(1), cat(2)
        self.S = np.zeros((info.channels, self.all_ka.size), dtype=complex)
        # per pair, sum over frames of |X_m(a)|^2 |X_m(b)|^2: with it the null bias of each
        # pair's coherence follows the material's own frame-to-frame power changes
        self.Q = np.zeros((info.channels, self.all_ka.size))
        # the first half of the frames separately: a true image keeps its phase over the
        # whole file, a chance alignment of two unrelated components drifts between halves
        self.half = int(self.picker.starts.size) // 2
        self.S_first = np.zeros_like(self.S)
        self.power_first = np.zeros_like(self.power)

    def process(self, block) -> None:
        for _start, frame in self.pick_tonal.feed(block):
            spec = np.fft.rfft(frame.T * self.win_tonal, axis=-1)
            r = self._al.analyse_tonal_frame(np.sum(spec.real ** 2 + spec.imag ** 2, axis=0),
                                             self.fs / self.n_tonal, self.fs)
            if r is not None:
                self.tonal_frames += 1
                if r["assessable"] and r["found"] >= max(self._al.MIN_CLEAR_FOLDS,
                                                         self._al.MIN_FOUND_FRACTION * r["clear"]) \
                        and r["alias_power"] >= r["harmonic_power"] * 10 ** (self._al.ALIAS_SCORE_MIN_DB / 10):
                    self.folded_frames += 1
        for start, frame in self.picker.feed(block):
            # the windowed frame rotated circularly by its start (mod N): X(k) exp(-j 2 pi k n_m / N),
            # so that X(a) X(b) carries the phase correction exp(-j 2 pi alpha n_m / N) of every
            # pair at once (a + b = alpha mod N); magnitudes, hence powers, are unchanged
            spec = np.fft.rfft(np.roll(frame.T * self.window, int(start % self.n_fft), axis=-1), axis=-1)
            pw = spec.real ** 2 + spec.imag ** 2
            self.power += pw
            first = self.frames < self.half
            if first:
                self.power_first += pw
            self.frames += 1
            if self.all_ka.size == 0:
                continue
            # two-sided spectrum of the real frame: X[N-k] = conj(X[k])
            full = np.concatenate([spec, np.conj(spec[:, (self.n_fft - 1) // 2:0:-1])], axis=1)
            prod = np.take(full, self.all_ka, axis=1)
            prod *= np.take(full, self.all_kb, axis=1)
            # |X(a) X(b)|^2 = P(a) P(b): the per-pair null-bias sum, from the product itself
            q = prod.real * prod.real
            q += prod.imag * prod.imag
            self.Q += q
            self.S += prod
            if first:
                self.S_first += prod

    def _line_map(self, ch: int) -> np.ndarray:
        """Per one-sided bin: the refined frequency (Hz) of the spectral line whose main lobe
        covers it, NaN elsewhere."""
        if ch in self._lines:
            return self._lines[ch]
        pw = self.power[ch]
        out = np.full(pw.size, np.nan)
        for k in spectral_lines(pw):
            f = refine_peak(pw, int(k)) * self.bin_hz
            lo, hi = max(0, k - 2), min(pw.size, k + 3)
            seg = out[lo:hi]
            seg[np.isnan(seg)] = f
        self._lines[ch] = out
        return out

    def _stats(self, c, ch: int):
        """Pooled statistics of one cycle frequency on one channel:
        ``(z_weighted, z_unweighted, coherent_power, coherence)``, or None without pairs."""
        if c["ka"].size == 0:
            return None
        pw = self.power[ch]
        ka, kb = c["ka"], c["kb"]
        ia, ib = np.minimum(ka, self.n_fft - ka), np.minimum(kb, self.n_fft - kb)
        p1, p2 = pw[ia], pw[ib]
        g2 = np.minimum(np.abs(self.S[ch, c["slice"]]) ** 2 / np.maximum(p1 * p2, 1e-300), 1.0)
        w = np.minimum(p1, p2)
        lines = self._line_map(ch)
        la = np.where(ka > self.n_fft // 2, -lines[ia], lines[ia])
        lb = np.where(kb > self.n_fft // 2, -lines[ib], lines[ib])
        delta = np.mod(la + lb - c["alpha"] * self.bin_hz + self.fs / 2.0, self.fs) - self.fs / 2.0
        keep = ~(np.abs(delta) > LINE_PAIR_TOLERANCE_HZ)  # NaN (not two lines) is kept
        # cross-half coherence Re(gamma_first * conj(gamma_second)): unbiased for gamma^2, and
        # near zero or negative for two components whose phase drifts over the file
        pf = self.power_first[ch]
        ps = pw - pf
        s_all = self.S[ch, c["slice"]]
        s_first = self.S_first[ch, c["slice"]]
        den = np.sqrt(np.maximum(pf[ia] * pf[ib], 1e-300) * np.maximum(ps[ia] * ps[ib], 1e-300))
        cross = np.clip(np.real(s_first * np.conj(s_all - s_first)) / den, -1.0, 1.0)
        # null bias of each pair: sum_m P_m(a) P_m(b) / (sum_m P_m(a) sum_m P_m(b)), which is 1/M
        # for steady material and larger where a few loud frames (drum hits) carry the power;
        # scaled by the window-overlap inflation of :func:`null_coherence_bias`
        overlap = max(1.0, self.null_bias * self.frames)
        bias = np.clip(overlap * self.Q[ch, c["slice"]] / np.maximum(p1 * p2, 1e-300), self.null_bias, 0.999)
        if not keep.all():
            g2, w, p1, p2, cross, bias = g2[keep], w[keep], p1[keep], p2[keep], cross[keep], bias[keep]
            if g2.size == 0:
                return None
        wsum = float(w.sum())
        if not wsum > 0.0:
            return None
        m_eff = 1.0 / bias
        # null variance of a squared coherence over m_eff frames (Beta(1, m_eff - 1))
        v0 = (m_eff - 1.0) / (m_eff * m_eff * (m_eff + 1.0))
        # two pooled statistics: power-weighted (tones, strong images) and unweighted
        # (images spread thinly over many bins, e.g. folded onto programme content)
        t = float(np.sum((g2 - bias) * w))
        sd = math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0 * w * w)))
        z_w = t / sd if sd > 0 else 0.0
        z_u = float(np.sum(g2 - bias)) / math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0)))
        coh = float(np.sum((g2 - bias) / (1.0 - bias) * w)) / wsum
        # where images fall on programme content, the pairs with two strong members carry most
        # of the weight and most of the noise; the pairs whose weaker member is at least
        # ASYMMETRY_DB below the stronger one carry the image itself
        asym = w * 10 ** (ASYMMETRY_DB / 10) <= np.maximum(p1, p2)
        wa = w[asym]
        t_a = float(np.sum((g2[asym] - bias[asym]) * wa))
        sd_a = math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0[asym] * wa * wa)))
        z_a = t_a / sd_a if sd_a > 0 else 0.0
        # and pairs that are individually significant (false inclusion PAIR_P each) give a
        # lower bound of the coherent power that does not depend on the weighting
        x_q = 1.0 - PAIR_P ** (1.0 / np.maximum(m_eff - 1.0, 1.0))
        sig = g2 > x_q
        t_s = float(np.sum(g2[sig] * w[sig])) if int(sig.sum()) >= MIN_SIGNIFICANT_PAIRS else 0.0
        # the same three estimates from the cross-half coherence
        x_all = float(np.sum(cross * w))
        x_asym = float(np.sum(cross[asym] * wa))
        x_sig = float(np.sum(cross[sig] * w[sig])) if int(sig.sum()) >= MIN_SIGNIFICANT_PAIRS else 0.0
        return {"z_w": z_w, "z_u": z_u, "t": t, "coh": min(1.0, max(0.0, coh)), "t_a": t_a, "z_a": z_a,
                "t_s": t_s, "x": x_all, "x_a": x_asym, "x_s": x_sig}

    def _assess(self, cand, ch: int, f0):
        m = self.frames
        rate = cand["rate"]
        base = {"source_rate_hz": rate, "coherence": None, "image_level_db": None, "z_score": None,
                "verdict": "untestable", "reason": None, "channel": self.info.channel_layout[ch]}
        if m < MIN_FRAMES:
            base["reason"] = f"too short: {m} analysis frames of {self.n_fft} samples, {MIN_FRAMES} needed"
            return base
        pw = self.power[ch]
        lo = int(math.ceil(LOW_EDGE_HZ / self.bin_hz))
        hi = int(math.ceil(rate / 2.0 / self.bin_hz)) - 1
        base_power = float(pw[lo:hi + 1].sum())
        if not base_power > 0.0:
            base["reason"] = "no signal below the candidate's Nyquist frequency"
            return base
        if self.folded_frames and self.folded_frames >= 0.5 * self.tonal_frames:
            base["reason"] = ("periodic material with folded partials: it is cyclostationary at "
                              "nearly every cycle frequency, so images cannot be told from it")
            return base
        if f0 is not None:
            k = locked_order(f0, rate, self.fs, tolerance_hz=max(0.05, 1.0 / max(self.span_s, 1e-9)))
            if k is not None:
                base["reason"] = (f"periodic material (fundamental {f0:.3f} Hz) whose {k}th multiple "
                                  f"meets {rate:.0f} Hz modulo the sampling rate: its partials pair up "
                                  "like images")
                return base
        main = self._stats(cand["cycles"][0], ch)
        if main is None:
            base["reason"] = "no signal at the mirror frequencies"
            return base
        z_w, z_u, coh = main["z_w"], main["z_u"], main["coh"]
        z = max(z_w, z_u)
        base["coherence"] = round(coh, 4)
        base["z_score"] = round(z, 2)
        controls = [self._stats(c, ch) for c in cand["cycles"][1:]]
        z_ctrl = max([max(c["z_w"], c["z_u"]) for c in controls if c is not None], default=0.0)
        if z < Z_SIGNIFICANT:
            base["verdict"] = "none"
            return base
        if z_ctrl >= max(Z_SIGNIFICANT, CONTROL_Z_RELATIVE * z):
            base["reason"] = ("the material is coherent at neighbouring cycle frequencies too (z "
                              f"{z_ctrl:.0f} against {z:.0f}): periodic or strongly modulated content, "
                              "not an upsampler's images")
            return base
        full = [main["t_s"]] + ([main["t"]] if z_w >= Z_LEVEL else []) + \
            ([main["t_a"]] if main["z_a"] >= Z_LEVEL else [])
        halves = [main["x_s"]] + ([main["x"]] if z_w >= Z_LEVEL else []) + \
            ([main["x_a"]] if main["z_a"] >= Z_LEVEL else [])
        if max(full) > 0 and max(halves) < HALVES_AGREEMENT * max(full):
            base["verdict"] = "none"
            base["reason"] = ("coherence not kept between the two halves of the file: a chance "
                              "alignment of unrelated components, not an image")
            return base
        level = power_ratio_db(min(max(full), max(halves)) / base_power)
        base["image_level_db"] = None if level is None else round(level, 2)
        if level is not None and level >= DEFECT_IMAGE_LEVEL_DB:
            base["verdict"] = "defect"
            base["reason"] = (f"mirror images of the content below {rate / 2000:.2f} kHz at "
                              f"{level:.1f} dB: upsampled from {rate / 1000:g} kHz without a proper filter")
        else:
            base["verdict"] = "trace"
            base["reason"] = (f"coherent images {'' if level is None else f'at {level:.1f} dB '}"
                              f"of the content below {rate / 2000:.2f} kHz: a resampler's trace")
        return base

    def finish(self) -> AnalyzerResult:
        rank = {"defect": 3, "trace": 2, "none": 1, "untestable": 0}
        out = []
        f0s = [periodic_fundamental(self.power[ch], self.bin_hz) if self.frames >= MIN_FRAMES else None
               for ch in range(self.info.channels)]
        for cand in self.cands:
            best = None
            defects = []
            for ch in range(self.info.channels):
                a = self._assess(cand, ch, f0s[ch])
                if a["verdict"] == "defect":
                    defects.append(a["channel"])
                key = (rank[a["verdict"]], a["z_score"] if a["z_score"] is not None else -1e9)
                if best is None or key > best[0]:
                    best = (key, a)
            best[1]["channels"] = defects
            out.append(best[1])
        tested = [a for a in out if a["verdict"] != "untestable"]
        detected = None if not tested else any(a["verdict"] == "defect" for a in tested)
        settings = {"frame_samples": self.n_fft, "bin_hz": self.bin_hz, "frames_analysed": self.frames,
                    "max_frames": self.max_frames, "window": "hann",
                    "null_coherence_bias": round(self.null_bias, 5),
                    "z_significant": Z_SIGNIFICANT, "defect_image_level_db": DEFECT_IMAGE_LEVEL_DB}
        return AnalyzerResult(measurements={"imaging_detected": detected, "imaging": out}, settings=settings)

