"""Frame and peak helpers shared by the sampling analyzers (imaging, aliasing).

* :func:`frame_starts` and :class:`FramePicker`: a bounded number of frames at fixed,
  irregular positions spread over a file, cut out of the stream whatever the block size;
* spectral peaks: :func:`find_lines` over a :func:`local_floor`, :func:`refine_peaks`
  (parabolic interpolation of the log power), :func:`harmonic_fundamental`;
* the steady-tone fold test :func:`analyse_tonal_frame`: on a long frame whose lines form
  one harmonic series, the power at the fold positions ``|k*f0 - m*fs|`` of the partials
  above Nyquist against the harmonic power.  The aliasing analyzer reports it; the imaging
  analyzer uses it to recognise periodic material with folded partials.

No analyzer lives here, and this module imports no other analyzer module.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from masterqc.measure import filterdesign
from masterqc.measure.npkernels import default_rng_random


#: long frames: 5 Hz bins (fs/5 samples)
TONAL_BIN_HZ = 5.0
#: a spectral line stands this far above the local floor (median of +-25 bins).
#: Own reasoning: 20 dB is far outside the spread of a noise periodogram (an exponential
#: variable exceeds its median by 20 dB with probability 2**-100).
LINE_DB = 20.0
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


def frame_starts(total_frames: int, frame_len: int, max_frames: int, min_hop: int, seed: int = 0) -> np.ndarray:
    """Start positions of at most ``max_frames`` frames of ``frame_len`` samples spread over
    ``total_frames`` samples: one frame at a pseudo-random place inside each of ``count``
    equal strata (stratified jitter, fixed ``seed``, so results are reproducible).

    Irregular spacing matters: with frames on a regular grid of hop H, two unrelated
    components whose frequencies sum to alpha + k/H (any integer k) would look phase-locked.
    Strata are at least ``min_hop`` samples wide.  Integers, ascending.
    """
    if total_frames < frame_len:
        return np.zeros(0, dtype=np.int64)
    span = total_frames - frame_len
    count = int(min(max_frames, span // max(1, min_hop) + 1))
    if count <= 1:
        return np.zeros(1, dtype=np.int64)
    u = default_rng_random(seed, count)     # numpy.random.default_rng(seed).random(count)
    starts = np.floor((np.arange(count) + u) * (span + 1) / count).astype(np.int64)
    return np.clip(starts, 0, span)


class FramePicker:
    """Cut frames at fixed absolute sample positions out of a stream of blocks.

    Results never depend on the block size: frames are taken at the positions
    given up front, whatever blocks they straddle.  A frame inside one block is
    handed out as a view of that block (valid while the caller handles it); only
    the samples a pending frame needs are copied and kept between blocks (as a
    list of pieces, joined once when the frame completes), so blocks with no frame
    cost nothing and tiny blocks cost no repeated copying.
    """

    def __init__(self, starts, frame_len: int, channels: int):
        self.starts = np.asarray(starts, dtype=np.int64)
        self.frame_len = int(frame_len)
        self.channels = channels
        self.next = 0
        self.pos = 0          # absolute index of the next block's first sample
        self.pieces = []      # copies of consecutive samples from buf_start up to pos
        self.buf_start = 0

    def _joined(self):
        if len(self.pieces) != 1:
            self.pieces = [np.concatenate(self.pieces) if self.pieces else np.zeros((0, self.channels))]
        return self.pieces[0]

    def feed(self, block):
        """Yield ``(start, frame)`` for every frame that ``block`` completes."""
        blk_start = self.pos
        blk_end = blk_start + block.shape[0]
        self.pos = blk_end
        n = self.frame_len
        while self.next < len(self.starts):
            s = int(self.starts[self.next])
            if s + n > blk_end:
                break
            if s >= blk_start:
                yield s, block[s - blk_start:s - blk_start + n]
            else:
                # begun in earlier blocks: the kept samples from s on, then the head of this block
                kept = self._joined()
                yield s, np.concatenate([kept[s - self.buf_start:], block[:s + n - blk_start]])
            self.next += 1
        if self.next >= len(self.starts):
            self.pieces = []
            return
        # keep what the next frame needs, from its start on
        s = int(self.starts[self.next])
        if s >= blk_end:
            self.pieces, self.buf_start = [], blk_end
        elif s >= blk_start:
            self.pieces, self.buf_start = [block[s - blk_start:].copy()], s
        else:
            if s > self.buf_start:
                kept = self._joined()
                self.pieces, self.buf_start = [kept[s - self.buf_start:]], s
            self.pieces.append(block.copy())


def refine_peak(power: np.ndarray, k: int) -> float:
    """Fractional bin of the peak at ``k`` (parabola through the log powers of k-1, k, k+1)."""
    if k <= 0 or k >= len(power) - 1:
        return float(k)
    a, b, c = (math.log(max(float(v), 1e-300)) for v in power[k - 1:k + 2])
    den = a - 2 * b + c
    if den >= 0:
        return float(k)
    return k + 0.5 * (a - c) / den


def refine_peaks(power: np.ndarray, ks) -> np.ndarray:
    """Vectorised :func:`refine_peak` for an array of peak bins."""
    k = np.asarray(ks, dtype=np.int64)
    out = k.astype(float)
    inner = (k > 0) & (k < len(power) - 1)
    if not inner.any():
        return out
    ki = k[inner]
    a = np.log(np.maximum(power[ki - 1], 1e-300))
    b = np.log(np.maximum(power[ki], 1e-300))
    c = np.log(np.maximum(power[ki + 1], 1e-300))
    den = a - 2 * b + c
    shift = np.where(den < 0, 0.5 * (a - c) / np.where(den < 0, den, -1.0), 0.0)
    out[inner] = ki + shift
    return out


def harmonic_fundamental(freqs_hz, powers, min_f0_hz: float = 20.0, tolerance_hz: float = 3.0,
                         min_harmonics: int = 3, min_explained: float = 0.8, min_density: float = 0.3):
    """The fundamental of a harmonic series that explains the given spectral lines, or None.

    ``freqs_hz``/``powers``: line frequencies and powers.  A candidate fundamental
    (a line frequency divided by 1..8, at least ``min_f0_hz``) is accepted when the
    lines within ``tolerance_hz + 1e-4*f`` of its multiples carry
    at least ``min_explained`` of the line power, at least ``min_harmonics`` lines match
    and the matched harmonic numbers fill at least ``min_density`` of 1..highest match
    (a real series is dense; two unrelated lines always share some tiny common divisor).
    The largest accepted fundamental is returned, refined by least squares over the
    matched lines.
    """
    f = np.asarray(freqs_hz, dtype=float)
    p = np.asarray(powers, dtype=float)
    if f.size < min_harmonics:
        return None
    order = np.argsort(p)[::-1][:12]
    total = p.sum()
    best = None
    # every candidate (line i, divisor n) at once: the same element-wise operations as one at a time
    f0_all = f[order][:, None] / np.arange(1, 9)[None, :]              # (candidates, divisors)
    h_all = np.round(f[None, None, :] / f0_all[:, :, None])
    ok_all = (h_all >= 1) & (np.abs(f[None, None, :] - h_all * f0_all[:, :, None]) <= tolerance_hz + 1e-4 * f)
    count_all = ok_all.sum(axis=2)
    for a in range(order.size):
        for n in range(1, 9):
            f0 = f0_all[a, n - 1]
            if f0 < min_f0_hz:
                break
            if count_all[a, n - 1] < min_harmonics:
                continue
            h, ok = h_all[a, n - 1], ok_all[a, n - 1]
            if p[ok].sum() < min_explained * total:
                continue
            hs = np.unique(h[ok])
            if len(hs) < min_density * hs.max():
                continue
            f0_ls = float(np.sum(f[ok] * h[ok]) / np.sum(h[ok] ** 2))
            if best is None or f0_ls > best * 1.01:
                best = f0_ls
    return best


@lru_cache(maxsize=16)
def blackman_harris(n: int) -> np.ndarray:
    """4-term Blackman-Harris window (side lobes -92 dB), symmetric, ``n`` points.

    Designed once per length and process (the imaging and aliasing analyzers both use the
    same length, in every file of a batch); the array is shared, so it is read-only.
    """
    w = filterdesign.blackman_harris(n)
    w.flags.writeable = False
    return w


def local_floor(power: np.ndarray, halfwidth: int = 25) -> np.ndarray:
    """Local floor of a power spectrum: running median over ``2*halfwidth+1`` bins."""
    from masterqc.measure.npkernels import median_filter
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


def fold_plan(f0: float, fs: float, bin_hz: float, max_ratio: float = 1.5, max_fold_hz: float | None = None):
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
    if max_fold_hz is not None:
        ok &= folds < max_fold_hz
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


def analyse_tonal_frame(power: np.ndarray, bin_hz: float, fs: float, max_fold_hz: float | None = None):
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
    harmonics, folds, _orders = fold_plan(f0, fs, bin_hz, max_fold_hz=max_fold_hz)
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

