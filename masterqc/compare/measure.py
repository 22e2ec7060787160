"""Measure a deliverable against its master, streaming, in four reads of each file.

1. **Meters and envelopes** (one read each): integrated loudness, true peak,
   clipped runs and overs with the project's meters, and the low-rate
   envelopes of :mod:`masterqc.compare.align`.
2. **Offset per frame**: frames of equal duration (:mod:`masterqc.compare.frames`),
   the deliverable cut at the coarse offset, GCC-PHAT for the fine offset; then
   a piecewise-constant track with its jumps (edits) and drift.
3. **Spectral statistics**: each master frame is read at the deliverable
   frame's exact instant (a Kaiser-windowed sinc fractional delay), and the
   deliverable's spectrum is regressed, bin by bin, on every master channel at
   the same frequency *and* at the mirrored frequencies ``n*fs_new +- f`` (what
   a converter without an anti-alias filter folds down).  That gives H(f),
   coherence, the channel matrix, gains, identity and the folded residue.
4. **Residual per frame** with those coefficients: its spectrum, level,
   effective bit depth and how its level follows the signal's.

Memory is constant apart from the per-frame offset and level series (a few
numbers per 50 ms) and the envelopes (one number per 2.5-3.3 ms).
"""

from __future__ import annotations

import math
import time

import numpy as np
from scipy import fft as sp_fft
from scipy import signal

from masterqc import __version__
from masterqc.audio.reader import open_stream
from masterqc.compare import align
from masterqc.compare.frames import Cursor, FrameGrid, fractional_delay_taps, frame_grid, hann
from masterqc.compare.model import (Alignment, ChannelMatch, Channels, Comparison, FileFacts, Identity, Jump, Over,
                                    PeaksLoudness, Requantisation, Residue, Series, Transfer)
from masterqc.errors import UsageError
from masterqc.measure.clipping import ClippingAnalyzer
from masterqc.measure.engine import run_analyzers
from masterqc.measure.loudness import LoudnessAnalyzer
from masterqc.measure.options import MeasureOptions
from masterqc.measure.peaks import TruePeakAnalyzer

# ---------------------------------------------------------------- thresholds (house choices unless said)

#: identity: "same" needs at least this correlation (residual 30 dB below the signal); a careful
#: conversion leaves far less (16-bit TPDF on a -20 dBFS programme: about -75 dB)
SAME_MIN_CORRELATION = math.sqrt(1.0 - 10 ** (-30 / 10))
#: identity: below this the two share too little to be one programme (residual within 1.25 dB of the signal)
MIX_MIN_CORRELATION = 0.5
#: identity band
IDENTITY_BAND_HZ = (40.0, 15000.0)
#: gain band
GAIN_BAND_HZ = (50.0, 10000.0)
#: ripple band: from 20 Hz to the lower of 20 kHz and this fraction of the new Nyquist frequency
RIPPLE_LOW_HZ = 20.0
RIPPLE_TOP_FRACTION = 0.9
#: bins below this coherence are left out of the ripple (no master content there)
RIPPLE_MIN_COHERENCE = 0.5
#: a jump is a step of the offset track larger than this (ms) that lasts
JUMP_MIN_MS = 0.1
#: frames around an edit are measured at this many positions per hop
JUMP_SUBFRAMES = 5
#: a frame places an edit only when both offsets' shares stand this far above the correlation floor
JUMP_MIN_SHARE_RE_FLOOR = 3.0
#: frames on each side used to measure a jump
JUMP_CONTEXT_FRAMES = 10
#: residual band: from 20 Hz to this fraction of the common band's top
RESIDUAL_LOW_HZ = 20.0
RESIDUAL_TOP_FRACTION = 0.95
#: residual spectrum: bands for the flatness figure, and the spread allowed for "flat"
SHAPE_BANDS = 10
FLAT_MAX_SPREAD_DB = 3.0
#: signal-correlated residual: frames whose signal lies below the residual level (plus this many dB)
#: are the quiet ones.  With TPDF dither the error's power does not depend on the signal (0 dB
#: change); truncated without dither, a signal well below the step leaves an error that is a square
#: wave following the signal's sign, about Delta^2/4 against Delta^2/12 on loud passages (+4.8 dB),
#: and nothing in digital silence; rounded without dither the error is the signal itself (its level
#: falls with it).  A change of 1.5 dB either way is taken as signal-correlated (house choice).
QUIET_WITHIN_DB = 0.0
QUIET_MIN_FRAMES = 8
CORRELATED_MIN_ABS_CHANGE_DB = 1.5
#: requantisation is assessed only when the residual lies within this many dB of the dither level
#: expected for the deliverable's word length (house choice); above it other errors dominate
REQUANT_DOMINATES_DB = 10.0
#: folded residue counts as found this many dB above its detection floor
FOLDED_FOUND_ABOVE_FLOOR_DB = 6.0
#: the offset is measured on every n-th analysis frame (2: frames that touch but do not overlap);
#: the frames between take the track's value
OFFSET_FRAME_STEP = 2
#: the fine offset of every n-th frame is searched afresh; the others start from the last confident one
FULL_SEARCH_EVERY = 8
#: a frame refined with its batch from the offset confident at the batch's start keeps that result while
#: the confident offset has moved less than this (deliverable samples) since; else it is refined alone
#: (Newton steps from a start this close end at the same optimum)
REFINE_SHARED_START_SAMPLES = 0.05
#: a master frame closer than this (samples) to the master's grid is read without interpolation; the
#: window misalignment it leaves (a thousandth of a sample) leaks far below any 24-bit residual
FD_SNAP_SAMPLES = 1e-3
#: display resolution
DISPLAY_POINTS = 600
OFFSET_POINTS = 1500


def _db(x, floor=1e-300):
    x = float(x)
    return 10.0 * math.log10(x) if x > floor else None


def _facts(info) -> FileFacts:
    return FileFacts(path=info.path, sample_rate_hz=info.sample_rate_hz, bit_depth=info.bit_depth,
                     is_float=info.is_float, encoding=info.encoding, channels=info.channels,
                     channel_layout=list(info.channel_layout), duration_s=info.duration_s, frames=info.frames)


class _Plan:
    """Bin bookkeeping shared by passes 3 and 4."""

    def __init__(self, grid: FrameGrid, cm: int, cd: int):
        self.grid = grid
        self.K = grid.common_bins
        self.cm, self.cd = cm, cd
        self.w_m = hann(grid.n_m)
        self.w_d = hann(grid.n_d)
        self.f = np.arange(self.K) / grid.frame_s
        k = np.arange(self.K)
        self.families = []      # (master bin index array, valid mask, conjugate?)
        if grid.rate_m_hz > grid.rate_d_hz:
            half_m = grid.n_m // 2
            n = 1
            while n * grid.n_d - (self.K - 1) < half_m:
                for conj, idx in ((True, n * grid.n_d - k), (False, n * grid.n_d + k)):
                    valid = (idx < half_m) & (idx > grid.n_d // 2)
                    if valid.any():
                        self.families.append((np.where(valid, idx, 0), valid, conj))
                n += 1
        self.Q = cm * (1 + len(self.families))
        self._ws_m = (self.w_m * (2.0 / grid.n_m))[:, None, None]
        self._ws_d = (self.w_d * (2.0 / grid.n_d))[:, None, None]

    def spectra(self, xm: np.ndarray, xd: np.ndarray):
        """(Xd (K, Cd), U (K, Q)): normalised spectra (a sine of amplitude A reads A/2 in both)."""
        Xm = sp_fft.rfft(xm * self.w_m[:, None], axis=0) / (self.grid.n_m / 2)
        Xd = sp_fft.rfft(xd * self.w_d[:, None], axis=0) / (self.grid.n_d / 2)
        parts = [Xm[:self.K]]
        for idx, valid, conj in self.families:
            z = Xm[idx]
            if conj:
                z = np.conj(z)
            parts.append(np.where(valid[:, None], z, 0.0))
        return Xd, Xd[:self.K], np.concatenate(parts, axis=1) if len(parts) > 1 else parts[0]

    def spectra_batch(self, xm: np.ndarray, xd: np.ndarray):
        """:meth:`spectra` of ``F`` frames at once, frames last: xm (F, n_m, Cm), xd (F, n_d, Cd) (views
        are fine) -> (Xd (K, Cd, F), U (K, Q, F), power of the deliverable above the common band)."""
        K, cm = self.K, self.cm
        # the windows carry the normalisation (a sine of amplitude A reads A/2)
        Xm = sp_fft.rfft(np.transpose(xm, (1, 2, 0)) * self._ws_m, axis=0)   # (n_m//2+1, Cm, F)
        Xd = sp_fft.rfft(np.transpose(xd, (1, 2, 0)) * self._ws_d, axis=0)
        tail = Xd[K + 1:]
        above = float(np.sum(tail.real ** 2 + tail.imag ** 2)) if tail.size else 0.0
        U = np.empty((K, self.Q, Xm.shape[2]), complex)
        U[:, :cm] = Xm[:K]
        for i, (idx, valid, conj) in enumerate(self.families):
            z = Xm[idx]
            if conj:
                np.conj(z, out=z)
            z[~valid] = 0.0
            U[:, cm * (1 + i):cm * (2 + i)] = z
        return Xd[:K], U, above

    def psd_scale(self) -> float:
        """|X|^2 of the normalised deliverable spectrum -> one-sided PSD (1/Hz)."""
        g = self.grid
        s1 = g.n_d / 2
        s2 = float(np.sum(self.w_d ** 2))
        return 2.0 * s1 * s1 / (g.rate_d_hz * s2)

    def effective_frames(self, m: int) -> float:
        """Independent averages in ``m`` half-overlapping Hann frames (Welch's variance argument)."""
        h = self.grid.hop_d
        w = self.w_d
        rho = float(np.sum(w[:-h] * w[h:]) / np.sum(w * w)) if h < w.size else 0.0
        return m / (1.0 + 2.0 * rho * rho)


def _frame_count(grid: FrameGrid, frames_m: int) -> int:
    return max(0, (frames_m - grid.n_m) // grid.hop_m + 1)


def _deliverable_inside(s_d: int, grid: FrameGrid, frames_d: int) -> bool:
    return s_d >= 0 and s_d + grid.n_d <= frames_d


def _master_at(cursor: Cursor, pos: float, n: int, taps_cache: dict) -> np.ndarray:
    """``n`` master samples starting at fractional index ``pos`` (band-limited interpolation)."""
    p0 = math.floor(pos)
    mu = pos - p0
    if mu < FD_SNAP_SAMPLES or mu > 1 - FD_SNAP_SAMPLES:
        return cursor.get(int(round(pos)), n)
    key = round(mu, 9)
    taps = taps_cache.get(key)
    if taps is None:
        if len(taps_cache) > 64:
            taps_cache.clear()
        taps = taps_cache[key] = fractional_delay_taps(mu)
    L = taps.size
    seg = cursor.get(p0 - (L // 2 - 1), n + L - 1)
    rev = taps[::-1]
    return np.stack([np.convolve(seg[:, c], rev, mode="valid") for c in range(seg.shape[1])], axis=1)


# ---------------------------------------------------------------- pass 1

def _meters(path, grid_hop: int, options: MeasureOptions, layout=None):
    classes = [LoudnessAnalyzer, TruePeakAnalyzer, ClippingAnalyzer, align.envelope_class(grid_hop)]
    with open_stream(path, channel_layout=layout) as stream:
        measurements, series, _settings = run_analyzers(stream, options, classes=classes)
        info = stream.info
    return info, measurements, series["compare_envelope"]


# ---------------------------------------------------------------- pass 2

def _offsets(path_m, path_d, grid: FrameGrid, info_m, info_d, track_t, track_o, block_frames):
    K = grid.common_bins
    aligner = align.FineAligner(K, grid.frame_s)
    w_m, w_d = hann(grid.n_m), hann(grid.n_d)
    n = _frame_count(grid, info_m.frames)
    offsets = np.full(n, np.nan)
    peaks = np.zeros(n)
    last = None

    def _offset_of(k, t, s_d, Xm, Xd, refined=None):
        nonlocal last
        delta, peak = None, 0.0
        if last is not None and k % FULL_SEARCH_EVERY:
            # next to a confident frame: start from its offset (no search), check the peak; ``refined`` is
            # the same, done for the whole batch from the offset confident at its start
            if refined is not None and abs(refined[0] - last) <= REFINE_SHARED_START_SAMPLES / grid.rate_d_hz:
                delta, peak = refined[1], refined[2]
            else:
                delta, peak = aligner.refine(Xd, Xm, s_d / grid.rate_d_hz - t - last)
        if peak < align.FINE_MIN_PEAK:
            delta, peak = aligner.estimate(Xd, Xm)
        peaks[k] = peak
        if peak >= align.FINE_MIN_PEAK:
            offsets[k] = last = s_d / grid.rate_d_hz - (t + delta)

    with open_stream(path_m) as sm, open_stream(path_d) as sd:
        cm, cd = Cursor(sm, block_frames), Cursor(sd, block_frames)
        ks = np.arange(0, n, OFFSET_FRAME_STEP)
        s_ms = ks * grid.hop_m
        ts = s_ms / grid.rate_m_hz
        s_ds = ks * grid.hop_d + np.array([int(round(align.track_at(track_t, track_o, t + grid.frame_s / 2)
                                                      * grid.rate_d_hz)) for t in ts], int)
        inside = (s_ds >= 0) & (s_ds + grid.n_d <= info_d.frames)
        ks, s_ms, ts, s_ds = ks[inside], s_ms[inside], ts[inside], s_ds[inside]
        for b in range(0, ks.size, BATCH_FRAMES):
            # a batch of frames read and transformed at once (the master frames lie on its grid)
            sl = slice(b, b + BATCH_FRAMES)
            m_lo, d_lo = int(s_ms[sl][0]), int(s_ds[sl].min())
            xm = _frames_of(cm.get(m_lo, int(s_ms[sl][-1]) + grid.n_m - m_lo), s_ms[sl] - m_lo, grid.n_m)
            xd = _frames_of(cd.get(d_lo, int(s_ds[sl].max()) + grid.n_d - d_lo), s_ds[sl] - d_lo, grid.n_d)
            XM = np.transpose(sp_fft.rfft(np.transpose(xm, (0, 2, 1)) * w_m, axis=-1)[:, :, :K], (0, 2, 1))
            XD = np.transpose(sp_fft.rfft(np.transpose(xd, (0, 2, 1)) * w_d, axis=-1)[:, :, :K], (0, 2, 1))
            refined = [None] * XM.shape[0]
            if last is not None:
                start = last
                tau0 = s_ds[sl] / grid.rate_d_hz - ts[sl] - start
                taus, pk = aligner.refine_many(XD, XM, tau0)
                refined = [(start, float(a), float(p)) for a, p in zip(taus, pk)]
            for j in range(XM.shape[0]):
                _offset_of(ks[b + j], ts[b + j], s_ds[b + j], XM[j], XD[j], refined[j])
    return offsets, peaks



def _running_median(x: np.ndarray, width: int) -> np.ndarray:
    out = np.empty_like(x)
    h = width // 2
    for i in range(x.size):
        out[i] = np.median(x[max(0, i - h):i + h + 1])
    return out


def _segment(offsets: np.ndarray, grid: FrameGrid):
    """Piecewise-constant offset track over confident frames: (track per frame, jumps as (index
    before, index after, offset before, offset after)), drift (ppm) and spread (s)."""
    idx = np.flatnonzero(np.isfinite(offsets))
    track = np.full(offsets.size, np.nan)
    if idx.size == 0:
        return track, [], None, None
    vals = offsets[idx]
    smooth = _running_median(vals, 5)
    thr = max(JUMP_MIN_MS / 1000.0, 2.0 / grid.rate_d_hz)
    # segment boundaries: consecutive smoothed values that differ by more than the threshold
    cuts = [0]
    for i in range(1, smooth.size):
        if abs(smooth[i] - smooth[i - 1]) > thr:
            cuts.append(i)
    cuts.append(smooth.size)
    segments = []
    for a, b in zip(cuts[:-1], cuts[1:]):
        if b - a >= 1:
            segments.append([a, b])
    # merge segments of fewer than 3 frames into a neighbour (transitions, outliers)
    merged = []
    for a, b in segments:
        if merged and (b - a < 3 or abs(np.median(vals[a:b]) - np.median(vals[merged[-1][0]:merged[-1][1]])) <= thr):
            merged[-1][1] = b
        else:
            merged.append([a, b])
    jumps = []
    slopes, resid = [], []
    for si, (a, b) in enumerate(merged):
        seg_vals = vals[a:b]
        seg_idx = idx[a:b]
        level = float(np.median(seg_vals))
        # the track follows the smoothed offsets inside a segment (clock drift), constant across none of it
        span = np.arange(idx[a], idx[b - 1] + 1)
        track[span] = np.interp(span, seg_idx, smooth[a:b]) if b - a >= 5 else level
        if b - a >= 10:
            t = seg_idx * grid.hop_s
            p = np.polyfit(t, seg_vals, 1)
            slopes.append((p[0], b - a))
            resid.append(seg_vals - np.polyval(p, t))
        if si > 0:
            pa, pb = merged[si - 1]
            before = vals[max(pa, pb - JUMP_CONTEXT_FRAMES):pb]
            after = vals[a:min(b, a + JUMP_CONTEXT_FRAMES)]
            jumps.append((int(idx[pb - 1]), int(idx[a]), float(np.median(before)), float(np.median(after))))
    drift = None
    if slopes:
        w = np.array([n for _, n in slopes], float)
        drift = float(np.sum(w * np.array([s for s, _ in slopes])) / w.sum() * 1e6)
    spread = None
    if resid:
        r = np.concatenate(resid)
        spread = float(1.4826 * np.median(np.abs(r - np.median(r))))
    # fill frames between confident ones: nearest confident value
    if np.isnan(track).any():
        known = np.flatnonzero(np.isfinite(track))
        pos = np.clip(np.searchsorted(known, np.arange(track.size)), 0, known.size - 1)
        prev = np.clip(pos - 1, 0, known.size - 1)
        choose = np.where(np.abs(known[prev] - np.arange(track.size)) <= np.abs(known[pos] - np.arange(track.size)),
                          known[prev], known[pos])
        track = np.where(np.isfinite(track), track, track[choose])
    return track, jumps, drift, spread


# ---------------------------------------------------------------- pass 3 and 4

def _frame_pair(k, grid, plan, track, cm, cd, info_d, taps_cache, offset_override=None, extra_d=0):
    """(xm, xd) for frame ``k``: the deliverable frame on its grid at the track's offset, the master
    read at the same instant; None when the deliverable frame is not wholly inside its file.
    ``extra_d`` moves the frame by that many deliverable samples (sub-frames around an edit)."""
    d = track[k] if offset_override is None else offset_override
    t = k * grid.hop_s
    s_d = k * grid.hop_d + int(round(d * grid.rate_d_hz)) + extra_d
    if not _deliverable_inside(s_d, grid, info_d.frames):
        return None
    pos = (s_d / grid.rate_d_hz - d) * grid.rate_m_hz
    if pos < -grid.n_m or t > info_d.duration_s + abs(d) + 10:
        return None
    xm = _master_at(cm, pos, grid.n_m, taps_cache)
    xd = cd.get(s_d, grid.n_d)
    return xm, xd, s_d


def _frame_batch(ks, grid, track, cm, cd, info_d, taps_cache):
    """:func:`_frame_pair` for frames ``ks`` (ascending, close together) at once:
    ``(kept frame indices, xm (F, n_m, Cm), xd (F, n_d, Cd))``.

    The master is read once over the stretch the frames cover; frames that share a fractional
    position (all of them while the offset holds) are interpolated with one FFT convolution of that
    stretch, the same taps and the same sums as the per-frame filter."""
    ks = np.asarray(ks, int)
    d = track[ks]
    s_d = ks * grid.hop_d + np.rint(d * grid.rate_d_hz).astype(int)
    pos = (s_d / grid.rate_d_hz - d) * grid.rate_m_hz
    t = ks * grid.hop_s
    ok = (s_d >= 0) & (s_d + grid.n_d <= info_d.frames) & (pos >= -grid.n_m) & ~(t > info_d.duration_s + np.abs(d) + 10)
    ks, s_d, pos = ks[ok], s_d[ok], pos[ok]
    F = ks.size
    if F == 0:
        return ks, None, None
    n_m, n_d = grid.n_m, grid.n_d
    xm = np.empty((F, n_m, cm.channels))
    p0 = np.floor(pos).astype(int)
    mu = pos - p0
    snap = (mu < FD_SNAP_SAMPLES) | (mu > 1 - FD_SNAP_SAMPLES)
    start = np.where(snap, np.rint(pos).astype(int), p0)
    keys = np.where(snap, -1.0, np.round(mu, 9))
    L = 96
    half = L // 2 - 1
    lo = int(start.min()) - half
    hi = int(start.max()) + n_m + L
    span = cm.get(lo, hi - lo)
    offs = np.arange(n_m)
    for key in np.unique(keys):
        sel = np.flatnonzero(keys == key)
        if key < 0:
            xm[sel] = _frames_of(span, start[sel] - lo, n_m)
            continue
        taps = taps_cache.get(key)
        if taps is None:
            if len(taps_cache) > 64:
                taps_cache.clear()
            taps = taps_cache[key] = fractional_delay_taps(float(key))
        a = int(start[sel].min()) - half - lo
        b = int(start[sel].max()) + n_m + taps.size - 1 - half - lo
        seg = span[a:b]
        if sel.size == 1:
            rev = taps[::-1]
            xm[sel[0]] = np.stack([np.convolve(seg[:, c], rev, mode="valid") for c in range(seg.shape[1])], axis=1)
            continue
        y = signal.oaconvolve(seg, taps[::-1, None], mode="valid", axes=0)
        xm[sel] = _frames_of(y, start[sel] - half - lo - a, n_m)
    d_lo = int(s_d.min())
    dspan = cd.get(d_lo, int(s_d.max()) + n_d - d_lo)
    return ks, xm, _frames_of(dspan, s_d - d_lo, n_d)


def _frames_of(x: np.ndarray, starts: np.ndarray, n: int) -> np.ndarray:
    """Frames ``x[s:s + n]`` for each start, (F, n, C): a strided view when the starts are evenly spaced."""
    starts = np.asarray(starts, int)
    step = np.diff(starts)
    if starts.size > 1 and step[0] > 0 and np.all(step == step[0]):
        s0, s1 = x.strides
        return np.lib.stride_tricks.as_strided(x[starts[0]:], shape=(starts.size, n, x.shape[1]),
                                               strides=(int(step[0]) * s0, s0, s1), writeable=False)
    return x[starts[:, None] + np.arange(n)]


#: frames read, transformed and accumulated together in passes 3 and 4 (house choice: about 1.6 s
#: of programme, a few MB at 96 kHz)
BATCH_FRAMES = 32


def _spectral_stats(path_m, path_d, grid, plan, track, skip, info_d, block_frames, jump_frames, jumps):
    K, Q, Cd = plan.K, plan.Q, plan.cd
    Suu = np.zeros((K, Q, Q), complex)
    Sdu = np.zeros((K, Cd, Q), complex)
    Sdd = np.zeros((K, Cd))
    above = 0.0
    m = 0
    aligner = align.FineAligner(K, grid.frame_s)
    jump_fracs = {j: [] for j in range(len(jumps))}
    taps_cache: dict = {}
    n = track.size
    pending: list = []
    with open_stream(path_m) as sm, open_stream(path_d) as sd:
        cm, cd = Cursor(sm, block_frames), Cursor(sd, block_frames)

        def flush():
            nonlocal above, m
            if not pending:
                return
            kept, xm, xd = _frame_batch(pending, grid, track, cm, cd, info_d, taps_cache)
            pending.clear()
            if not kept.size:
                return
            Xd, U, above_b = plan.spectra_batch(xm, xd)
            _accumulate(U, Xd, Suu, Sdu, Sdd)
            above += above_b
            m += kept.size

        for k in range(n):
            if k in jump_frames:
                flush()  # the batch first: the cursor moves on only after it
                # a frame around an edit: read at the mean of the two offsets, measure each one's share
                ji = jump_frames[k]
                _, _, d1, d2 = jumps[ji]
                mid = 0.5 * (d1 + d2)
                for sub in range(JUMP_SUBFRAMES):
                    pair = _frame_pair(k, grid, plan, track, cm, cd, info_d, taps_cache, offset_override=mid,
                                       extra_d=sub * grid.hop_d // JUMP_SUBFRAMES)
                    if pair is None:
                        continue
                    xm, xd, s_d = pair
                    Xd_all, Xd, U = plan.spectra(xm, xd)
                    t_m = (s_d / grid.rate_d_hz - mid)
                    # master frame starts at deliverable-frame start minus mid; lags relative to it
                    lags = [mid - d1, mid - d2]
                    span = max(abs(d2 - d1), 0.002)
                    lags += [mid + span * (1.5 + 0.37 * i) * (-1) ** i for i in range(12)]   # unrelated lags
                    a = aligner.lag_values(Xd, U[:, :plan.cm], lags)
                    jump_fracs[ji].append((k, s_d, t_m, a, np.einsum("nc,nc->n", xd, xd)))
                continue
            if skip[k]:
                continue
            pending.append(k)
            if len(pending) == BATCH_FRAMES:
                flush()
        flush()
    return Suu, Sdu, Sdd, above, m, jump_fracs


def _accumulate(U: np.ndarray, D: np.ndarray, Suu, Sdu, Sdd) -> None:
    """Add the auto- and cross-spectra of a batch of frames, U (K, Q, F) and D (K, Cd, F): one
    matrix product per bin for the whole batch."""
    Uc = np.conj(np.transpose(U, (0, 2, 1)))                  # (K, F, Q)
    Suu += np.matmul(U, Uc)
    Sdu += np.matmul(D, Uc)
    Sdd += np.sum(D.real ** 2 + D.imag ** 2, axis=2)


def _solve(Suu, Sdu, q=None):
    """Least-squares coefficients B (K, Cd, q) of the first q inputs, and the explained power (K, Cd)."""
    if q is not None:
        Suu = Suu[:, :q, :q]
        Sdu = Sdu[:, :, :q]
    Q = Suu.shape[1]
    tr = np.einsum("kqq->k", Suu).real / Q
    reg = (1e-10 * tr + 1e-30)[:, None, None] * np.eye(Q)[None]
    # B S = Sdu  ->  S^T B^T = Sdu^T  (S Hermitian)
    B = np.linalg.solve(np.transpose(Suu + reg, (0, 2, 1)), np.transpose(Sdu, (0, 2, 1)))
    B = np.transpose(B, (0, 2, 1))
    explained = np.einsum("kiq,kiq->ki", B, np.conj(Sdu)).real
    return B, explained


def _residual_pass(path_m, path_d, grid, plan, track, skip, info_d, B, block_frames, band):
    K, Cd = plan.K, plan.cd
    R2 = np.zeros((K, Cd))
    r_t, s_t, t_t = [], [], []
    taps_cache: dict = {}
    ks_all = np.flatnonzero(~skip)
    with open_stream(path_m) as sm, open_stream(path_d) as sd:
        cm, cd = Cursor(sm, block_frames), Cursor(sd, block_frames)
        for i in range(0, ks_all.size, BATCH_FRAMES):
            kept, xm, xd = _frame_batch(ks_all[i:i + BATCH_FRAMES], grid, track, cm, cd, info_d, taps_cache)
            if not kept.size:
                continue
            Xd, U, _ = plan.spectra_batch(xm, xd)
            fit = np.matmul(B, U)                  # (K, Cd, F): fit[k, i, f] = sum_q B[k, i, q] U[k, q, f]
            R = Xd - fit
            p = R.real ** 2 + R.imag ** 2
            R2 += p.sum(axis=2)
            r_t.extend(p[band].sum(axis=(0, 1)).tolist())
            fb = fit[band]
            s_t.extend((fb.real ** 2 + fb.imag ** 2).sum(axis=(0, 1)).tolist())
            t_t.extend((kept * grid.hop_s).tolist())
    return R2, np.array(r_t), np.array(s_t), np.array(t_t)


# ---------------------------------------------------------------- jumps: where exactly

def _jump_time(samples, grid: FrameGrid, d1: float, d2: float):
    """Master time of an edit from frames around it: each frame's share of the second offset,
    inverted through the frames' window overlap (stationary-signal model)."""
    estimates, weights = [], []
    n = grid.n_d
    t_rel = np.arange(n) / grid.rate_d_hz
    w_d = hann(n)
    T = grid.frame_s
    mid = 0.5 * (d1 + d2)

    def w_m(t):  # master window at master time t relative to the master frame start
        x = np.clip(t / T, 0.0, 1.0)
        return np.where((t >= 0) & (t < T), 0.5 - 0.5 * np.cos(2 * np.pi * x), 0.0)

    # content at deliverable time u (frame-relative) came from master time u + (s_d/fs - d) - t_m; each
    # part's cross-correlation is the sum of the two windows times the deliverable's own power there
    w1 = w_d * w_m(t_rel + (mid - d1))      # before the edit: offset d1
    w2 = w_d * w_m(t_rel + (mid - d2))
    for k, s_d, t_m, a, power in samples:
        c1 = np.concatenate([[0.0], np.cumsum(w1 * power)])     # share of d1 if the edit is at sample j
        c2 = np.concatenate([[0.0], np.cumsum((w2 * power)[::-1])])[::-1]
        # the cross-correlation of two stretches of programme is not zero at unrelated lags: take the
        # floor measured at such lags out of both values before sharing them out
        floor2 = float(np.mean(np.square(a[2:]))) if len(a) > 2 else 0.0
        v1 = math.sqrt(max(a[0] ** 2 - floor2, 0.0))
        v2 = math.sqrt(max(a[1] ** 2 - floor2, 0.0))
        tot = v1 + v2
        noise = math.sqrt(floor2) if floor2 > 0 else 0.0
        if tot <= 0 or min(v1, v2) < JUMP_MIN_SHARE_RE_FLOOR * noise:
            continue   # one side is lost in the floor: this frame cannot place the edit
        phi = v2 / tot
        model = c2 / np.maximum(c1 + c2, 1e-30)
        j = int(np.argmin(np.abs(model - phi)))
        u_d = s_d / grid.rate_d_hz + j / grid.rate_d_hz     # deliverable time of the edit
        estimates.append(u_d)
        weights.append(min(v1, v2) / noise if noise > 0 else min(phi, 1 - phi))
    if not estimates:
        return None
    return float(np.average(estimates, weights=weights))


# ---------------------------------------------------------------- helpers for the figures

def _band(f, lo, hi):
    return (f >= lo) & (f <= hi)


def _display_series(f, values, points=DISPLAY_POINTS, mode="mean"):
    """Buckets log-spaced from 20 Hz to 1 kHz, then linear to the top (so a converter's transition
    band keeps its detail); the mean of each bucket's finite values."""
    f = np.asarray(f)
    v = np.asarray(values, float)
    lo = max(20.0, f[1] if f.size > 1 else 20.0)
    knee = min(1000.0, f[-1] / 2)
    edges = np.unique(np.concatenate([np.geomspace(lo, knee, points // 6 + 1),
                                      np.linspace(knee, f[-1] * (1 + 1e-9), points - points // 6 + 1)]))
    idx = np.searchsorted(edges, f, side="right") - 1
    out_f, out_v = [], []
    for b in range(edges.size - 1):
        sel = (idx == b) & np.isfinite(v)
        if not sel.any():
            continue
        out_f.append(float(np.mean(f[sel])))
        out_v.append(float(np.mean(v[sel])) if mode == "mean" else float(np.min(v[sel])))
    return out_f, out_v


def _overlaps(a, ranges, pad=0.01):
    return any(a[0] < r[1] + pad and a[1] > r[0] - pad for r in ranges)


# ---------------------------------------------------------------- the whole comparison

def compare_files(master, deliverable, *, true_peak_ceiling_dbtp: float = 0.0, block_frames: int = 65536,
                  threads: int | None = None, progress=None) -> Comparison:
    """Compare ``deliverable`` with the ``master`` it was made from (see the module docstring)."""
    started = time.perf_counter()
    with open_stream(master) as s1, open_stream(deliverable) as s2:
        info_m, info_d = s1.info, s2.info
    grid = frame_grid(info_m.sample_rate_hz, info_d.sample_rate_hz)
    opts = dict(true_peak_ceiling_dbtp=true_peak_ceiling_dbtp, block_frames=block_frames)
    if threads:
        opts["threads"] = threads
    options = MeasureOptions(**opts)

    def step(name):
        if progress is not None:
            progress(name)

    step("meters")
    info_m, meas_m, env_m = _meters(master, grid.env_hop_m, options)
    info_d, meas_d, env_d = _meters(deliverable, grid.env_hop_d, options)
    n_frames = _frame_count(grid, info_m.frames)
    if n_frames < 4 or info_d.frames < grid.n_d * 2:
        raise UsageError(f"{master} and {deliverable}: compare needs at least {grid.frame_s * 2.5:.2f} s of audio "
                         "in each file")

    step("coarse alignment")
    coarse_s, _coarse_peak = align.coarse_offset(env_m, env_d, grid.env_hop_s)
    if coarse_s is None:
        coarse_s = 0.0
    track_t, track_o = align.coarse_track(env_m, env_d, grid.env_hop_s, coarse_s)

    step("offset track")
    offsets, _peaks = _offsets(master, deliverable, grid, info_m, info_d, track_t, track_o, block_frames)
    track, jumps, drift_ppm, spread_s = _segment(offsets, grid)
    aligned_fraction = float(np.mean(np.isfinite(offsets))) if offsets.size else 0.0
    if not np.isfinite(track).any():
        track = np.full(n_frames, coarse_s)

    # frames around a jump are measured for its time, and kept out of the statistics
    skip = np.zeros(n_frames, bool)
    jump_frames: dict = {}
    for ji, (kb, ka, _d1, _d2) in enumerate(jumps):
        for k in range(max(0, kb - 1), min(n_frames, ka + 2)):
            skip[k] = True
            jump_frames[k] = ji

    step("spectra")
    plan = _Plan(grid, info_m.channels, info_d.channels)
    Suu, Sdu, Sdd, above_sum, m, jump_fracs = _spectral_stats(master, deliverable, grid, plan, track, skip, info_d,
                                                              block_frames, jump_frames, jumps)
    if m < 4:
        raise UsageError(f"{master} and {deliverable}: fewer than 4 frames overlap after alignment; "
                         "the two files hold too little common audio to compare")
    m_eff = plan.effective_frames(m)
    f = plan.f
    K, cm, cd = plan.K, plan.cm, plan.cd
    B_all, expl_all = _solve(Suu, Sdu)
    _B_dir, expl_dir = _solve(Suu, Sdu, cm)
    dof_all = m_eff / max(m_eff - plan.Q, 1.0)
    dof_dir = m_eff / max(m_eff - cm, 1.0)
    resid_all = np.maximum(Sdd - expl_all, 0.0) * dof_all
    resid_dir = np.maximum(Sdd - expl_dir, 0.0) * dof_dir

    common_top = f[-1]
    nyq_new = info_d.sample_rate_hz / 2.0

    # ---- channels: correlation matrix, matches, gains
    ib = _band(f, IDENTITY_BAND_HZ[0], min(IDENTITY_BAND_HZ[1], 0.8 * common_top))
    gb = _band(f, GAIN_BAND_HZ[0], min(GAIN_BAND_HZ[1], 0.45 * common_top))
    Smm = np.einsum("kqq->kq", Suu[:, :cm, :cm]).real
    rho = np.zeros((cd, cm))
    for i in range(cd):
        for j in range(cm):
            den = math.sqrt(max(Sdd[ib, i].sum(), 1e-300) * max(Smm[ib, j].sum(), 1e-300))
            rho[i, j] = float(Sdu[ib, i, j].real.sum() / den)
    mapping = [int(np.argmax(np.abs(rho[i]))) for i in range(cd)]
    ambiguous = False
    for i in range(cd):
        srt = np.sort(np.abs(rho[i]))[::-1]
        if srt.size > 1 and srt[0] - srt[1] < 0.02:
            ambiguous = True
    # per deliverable channel: regression on its matched master channel and that channel's mirrored
    # bins only (the folded terms leave the direct estimate; a second, correlated master channel
    # would make it ill-posed)
    n_fam = len(plan.families)
    B_match = []
    for i, j in enumerate(mapping):
        sel = [j] + [cm * (1 + fi) + j for fi in range(n_fam)]
        Bi, _ = _solve(Suu[:, sel][:, :, sel], Sdu[:, i:i + 1, sel])
        B_match.append(Bi[:, 0, 0])
    matches, gains_lin, gain_w = [], [], []
    for i, j in enumerate(mapping):
        smm = Smm[gb, j].sum()
        g = float((B_match[i][gb] * Smm[gb, j]).real.sum() / smm) if smm > 0 else None
        gdb = 20 * math.log10(abs(g)) if g not in (None, 0.0) else None
        pol = "inverted" if rho[i, j] < 0 else "normal"
        matches.append(ChannelMatch(deliverable_channel=info_d.channel_layout[i],
                                    master_channel=info_m.channel_layout[j], correlation=float(rho[i, j]),
                                    gain_db=gdb, polarity=pol))
        if g:
            gains_lin.append(abs(g))
            gain_w.append(smm)
    if ambiguous:
        order = "ambiguous"
    elif cd == cm and mapping == list(range(cd)):
        order = "same"
    elif cd == cm == 2 and mapping == [1, 0]:
        order = "swapped"
    else:
        order = "remapped"
    gain_mean = (20 * math.log10(math.sqrt(np.average(np.square(gains_lin), weights=gain_w)))
                 if gains_lin else None)
    channels = Channels(matches=matches, correlation_matrix=rho.tolist(), order=order,
                        polarity_inverted=[mm.deliverable_channel for mm in matches if mm.polarity == "inverted"],
                        gain_db=gain_mean, gain_band_hz=[GAIN_BAND_HZ[0], float(min(GAIN_BAND_HZ[1], 0.45 * common_top))])

    # ---- identity
    tot = Sdd[ib].sum()
    if tot > 0:  # folded content is still the master's: the full model decides identity
        rsr = float(min(max(resid_all[ib].sum() / tot, 1e-30), 1.0))
        corr = math.sqrt(max(0.0, 1.0 - rsr))
    else:
        rsr, corr = None, None
    if corr is None:
        ident = "different_programme"
    elif corr >= SAME_MIN_CORRELATION:
        ident = "same"
    elif corr >= MIX_MIN_CORRELATION:
        ident = "different_mix"
    else:
        ident = "different_programme"
    identity = Identity(verdict=ident, correlation=corr, residual_re_signal_db=_db(rsr) if rsr else None,
                        band_hz=[IDENTITY_BAND_HZ[0], float(min(IDENTITY_BAND_HZ[1], 0.8 * common_top))],
                        same_min_correlation=SAME_MIN_CORRELATION, mix_min_correlation=MIX_MIN_CORRELATION)

    # ---- transfer function of the matched channels
    # the matched channels' coefficients averaged by their input power
    signs = np.array([-1.0 if mm.polarity == "inverted" else 1.0 for mm in matches])
    num = np.zeros(K, complex)
    den = np.zeros(K)
    expl = np.zeros(K)
    sdd_sum = np.zeros(K)
    for i, j in enumerate(mapping):
        num += signs[i] * B_match[i] * Smm[:, j]
        den += Smm[:, j]
        expl += np.abs(B_match[i]) ** 2 * Smm[:, j]
        sdd_sum += Sdd[:, i]
    with np.errstate(divide="ignore", invalid="ignore"):
        H = np.where(den > 0, num / den, np.nan)
        coh = np.where((den > 0) & (sdd_sum > 0), expl / sdd_sum, np.nan)
    g_lin = 10 ** (gain_mean / 20) if gain_mean is not None else 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        Hdb = 20 * np.log10(np.abs(H) / g_lin)
    ripple_top = min(20000.0, RIPPLE_TOP_FRACTION * nyq_new, common_top)
    rb = _band(f, RIPPLE_LOW_HZ, ripple_top) & (coh >= RIPPLE_MIN_COHERENCE) & np.isfinite(Hdb)
    ripple = float(np.max(Hdb[rb]) - np.min(Hdb[rb])) if rb.sum() >= 3 else None
    cband = coh[_band(f, RIPPLE_LOW_HZ, ripple_top)]
    mean_coh = float(np.mean(cband[np.isfinite(cband)])) if np.isfinite(cband).any() else None
    at20k = None
    if 20000.0 < common_top:
        k20 = int(round(20000.0 * grid.frame_s))
        sel = slice(max(k20 - 1, 0), k20 + 2)
        with np.errstate(invalid="ignore"):
            v = np.nanmean(np.abs(H[sel]) ** 2)
        at20k = float(10 * np.log10(v) - 20 * np.log10(g_lin)) if np.isfinite(v) and v > 0 else None
    m3 = None
    Hp = np.abs(H) ** 2
    smooth = np.convolve(np.nan_to_num(Hp), np.ones(3) / 3, mode="same")
    with np.errstate(divide="ignore"):
        sdb = 10 * np.log10(np.maximum(smooth, 1e-300)) - 20 * np.log10(g_lin)
    start = int(np.searchsorted(f, 1000.0))
    below = np.flatnonzero(sdb[start:K - 1] < -3.0)
    if below.size and below[0] > 0:   # (a response already 3 dB down at 1 kHz has no such point)
        kk = start + int(below[0])
        if kk > 0:
            y0, y1 = sdb[kk - 1], sdb[kk]
            frac = (y0 + 3.0) / (y0 - y1) if y0 != y1 else 0.0
            m3 = float(f[kk - 1] + frac * (f[kk] - f[kk - 1]))
    transfer = Transfer(passband_ripple_db=ripple, ripple_band_hz=[RIPPLE_LOW_HZ, float(ripple_top)],
                        level_at_20khz_db=at20k, minus_3db_hz=m3,
                        minus_3db_re_nyquist=(m3 / nyq_new) if m3 is not None else None,
                        nyquist_new_hz=nyq_new, common_band_hz=[0.0, float(common_top)], mean_coherence=mean_coh)

    # ---- residue
    rband = _band(f, RESIDUAL_LOW_HZ, RESIDUAL_TOP_FRACTION * common_top)
    coherent = float(expl_dir[rband].sum())
    n_alias_inputs = plan.Q - cm
    psd = plan.psd_scale()
    if n_alias_inputs:
        folded_raw = np.maximum(expl_all - expl_dir, 0.0)
        bias = resid_all * (n_alias_inputs / max(m_eff, 1.0))
        folded = float(np.maximum(folded_raw - bias, 0.0)[rband].sum())
        floor = float(bias[rband].sum())
        folded_db = _db(folded / coherent) if coherent > 0 and folded > 0 else None
        floor_db = _db(floor / coherent) if coherent > 0 and floor > 0 else None
        folded_found = bool(folded_db is not None and floor_db is not None
                            and folded_db > floor_db + FOLDED_FOUND_ABOVE_FLOOR_DB)
        frames_bins = m * cd
        folded_dbfs = _db(folded / frames_bins * psd / grid.frame_s) if folded > 0 else None
    else:
        folded_db = floor_db = folded_dbfs = None
        folded_found = None
    other = float(resid_all[rband].sum())
    above_db = None
    if info_d.sample_rate_hz > info_m.sample_rate_hz and coherent > 0:
        above_db = _db(above_sum / coherent) if above_sum > 0 else -300.0
    residue = Residue(folded_re_signal_db=folded_db, folded_power_dbfs=folded_dbfs,
                      folded_detection_floor_db=floor_db, folded_found=folded_found,
                      other_re_signal_db=_db(other / coherent) if coherent > 0 and other > 0 else None,
                      above_master_band_re_signal_db=above_db)

    # ---- pass 4: residual per frame
    step("residual")
    # the requantisation is measured where H is flat (its steep transition leaks through the window)
    qband = _band(f, RESIDUAL_LOW_HZ, ripple_top)
    R2, r_t, s_t, t_t = _residual_pass(master, deliverable, grid, plan, track, skip, info_d, B_all,
                                       block_frames, qband)
    R2 *= dof_all
    r_t = r_t * dof_all
    nres = max(len(r_t), 1)
    psd_res = R2.mean(axis=1) / nres * psd                        # per channel average, 1/Hz
    band_mean_psd = float(psd_res[qband].mean()) if qband.any() else 0.0
    res_power = band_mean_psd * nyq_new
    expected = None
    if not info_d.is_float:
        delta = 2.0 ** (1 - info_d.bit_depth)
        expected = delta * delta / 4.0
    eff_bits = (1.0 - math.log2(math.sqrt(12.0 * res_power))) if res_power > 0 else None
    edges = np.linspace(RESIDUAL_LOW_HZ, ripple_top, SHAPE_BANDS + 1)
    band_levels = []
    for a, b in zip(edges[:-1], edges[1:]):
        sel = _band(f, a, b)
        if sel.any() and psd_res[sel].mean() > 0:
            band_levels.append(10 * math.log10(psd_res[sel].mean()))
    spread = (max(band_levels) - min(band_levels)) if len(band_levels) == SHAPE_BANDS else None
    shape = "unknown" if spread is None else ("flat" if spread <= FLAT_MAX_SPREAD_DB else "shaped")
    corr_sig = change = None
    n_quiet = 0
    verdict_rq = "unknown"
    reason = "too few quiet passages (signal below the residual) to tell dither from truncation"
    dominated = expected is not None and res_power > expected * 10 ** (REQUANT_DOMINATES_DB / 10)
    if dominated:
        reason = (f"the residual lies {10 * math.log10(res_power / expected):.1f} dB above the {info_d.bit_depth}-bit "
                  "dither level, so other errors (the converter, processing) hide the requantisation")
    elif info_d.is_float:
        reason = "the deliverable is floating point: no word length was cut"
    elif r_t.size >= 4 and np.any(s_t > 0):
        loud = s_t >= np.percentile(s_t, 75)
        n_ref = float(np.median(r_t[loud])) if loud.any() else 0.0
        if n_ref > 0:
            quiet = (s_t > 0) & (s_t < n_ref * 10 ** (QUIET_WITHIN_DB / 10)) & (r_t > 0)
            n_quiet = int(quiet.sum())
            if n_quiet >= QUIET_MIN_FRAMES:
                lr, ls = np.log10(r_t[quiet]), np.log10(s_t[quiet])
                if np.std(lr) > 0 and np.std(ls) > 0:
                    corr_sig = float(np.corrcoef(lr, ls)[0, 1])
                else:
                    corr_sig = 0.0
                change = float(10 * math.log10(np.median(r_t[quiet]) / n_ref))
                correlated = abs(change) >= CORRELATED_MIN_ABS_CHANGE_DB
                verdict_rq = "signal_correlated" if correlated else "dithered"
                reason = ""
    requant = Requantisation(
        residual_power_dbfs=_db(res_power), expected_tpdf_power_dbfs=_db(expected) if expected else None,
        residual_re_tpdf_db=(_db(res_power) - _db(expected)) if expected and res_power > 0 else None,
        effective_bits=eff_bits, spectrum_spread_db=spread, spectrum_shape=shape, signal_correlation=corr_sig,
        quiet_residual_change_db=change, quiet_frames=n_quiet, verdict=verdict_rq, verdict_reason=reason)

    # ---- alignment figures (jump times from the frames measured around each edit)
    jump_models = []
    for ji, (kb, ka, d1, d2) in enumerate(jumps):
        u_d = _jump_time(jump_fracs.get(ji, []), grid, d1, d2)
        if u_d is None:  # fall back to the frame boundary between the two offsets
            u_d = 0.5 * (kb + ka) * grid.hop_s + grid.frame_s / 2 + d1
        jump_models.append(Jump(at_master_s=u_d - d1, at_deliverable_s=u_d, size_ms=(d2 - d1) * 1e3,
                                offset_before_ms=d1 * 1e3, offset_after_ms=d2 * 1e3))
    fin = offsets[np.isfinite(offsets)]
    med = float(np.median(fin)) if fin.size else None
    alignment = Alignment(offset_ms=med * 1e3 if med is not None else None,
                          offset_deliverable_samples=med * info_d.sample_rate_hz if med is not None else None,
                          coarse_offset_ms=coarse_s * 1e3, drift_ppm=drift_ppm,
                          offset_spread_ms=spread_s * 1e3 if spread_s is not None else None,
                          jumps=jump_models, aligned_fraction=aligned_fraction,
                          frame_s=grid.frame_s, hop_s=grid.hop_s)

    # ---- peaks and loudness
    tp_m, tp_d = meas_m.get("true_peak_dbtp"), meas_d.get("true_peak_dbtp")
    il_m, il_d = meas_m.get("integrated_lufs"), meas_d.get("integrated_lufs")
    shift = (med or 0.0)
    m_runs = [(e["start_s"] + shift, e["end_s"] + shift) for e in meas_m.get("clipped_run_events", [])]
    m_overs = [(a + shift, b + shift) for a, b in meas_m.get("true_peak_over_ranges_s", [])]
    overs = []
    for e in meas_d.get("clipped_run_events", []):
        if not _overlaps((e["start_s"], e["end_s"]), m_runs):
            overs.append(Over(kind="clipped_run", channel=e["channel"], start_s=e["start_s"], end_s=e["end_s"]))
    for a, b in meas_d.get("true_peak_over_ranges_s", []):
        if not _overlaps((a, b), m_overs):
            overs.append(Over(kind="true_peak_over", channel=None, start_s=a, end_s=b))
    overs.sort(key=lambda o: o.start_s)
    peaks = PeaksLoudness(
        master_true_peak_dbtp=tp_m, deliverable_true_peak_dbtp=tp_d,
        true_peak_change_db=(tp_d - tp_m) if tp_m is not None and tp_d is not None else None,
        master_integrated_lufs=il_m, deliverable_integrated_lufs=il_d,
        loudness_change_lu=(il_d - il_m) if il_m is not None and il_d is not None else None,
        overs_introduced=overs[:200], overs_introduced_count=len(overs))

    # ---- display series
    with np.errstate(divide="ignore", invalid="ignore"):
        ff, hd = _display_series(f[1:], Hdb[1:])
        _, cc = _display_series(f[1:], coh[1:])
        _, rr = _display_series(f[1:], 10 * np.log10(np.maximum(psd_res[1:], 1e-300)))
    step_o = max(1, offsets.size // OFFSET_POINTS)
    ot = (np.arange(0, offsets.size, step_o) * grid.hop_s + grid.frame_s / 2).tolist()
    ov = [None if not np.isfinite(v) else float(v * 1e3) for v in offsets[::step_o]]
    series = Series(frequency_hz=ff, transfer_db=hd, coherence=cc, residual_psd_dbfs_per_hz=rr,
                    expected_tpdf_psd_dbfs_per_hz=_db(expected / nyq_new) if expected else None,
                    offset_time_s=ot, offset_ms=ov)

    settings = {
        "frame_s": grid.frame_s, "hop_s": grid.hop_s, "window": "Hann, periodic, 50 % overlap",
        "frame_samples_master": grid.n_m, "frame_samples_deliverable": grid.n_d,
        "bin_hz": grid.bin_hz, "frames_used": m, "effective_frames": m_eff,
        "envelope_hop_s": grid.env_hop_s, "fractional_delay": "Kaiser-windowed sinc, 96 taps, beta 10",
        "mirror_families": len(plan.families), "inputs_per_bin": plan.Q,
        "identity_same_min_correlation": SAME_MIN_CORRELATION,
        "identity_mix_min_correlation": MIX_MIN_CORRELATION,
        "quiet_within_db": QUIET_WITHIN_DB, "flat_max_spread_db": FLAT_MAX_SPREAD_DB,
        "true_peak_ceiling_dbtp": true_peak_ceiling_dbtp,
        "elapsed_s": time.perf_counter() - started,
    }
    return Comparison(tool={"name": "masterqc", "version": __version__},
                      master=_facts(info_m), deliverable=_facts(info_d), alignment=alignment, identity=identity,
                      channels=channels, transfer=transfer, residue=residue, requantisation=requant,
                      peaks_loudness=peaks, series=series, settings=settings)
