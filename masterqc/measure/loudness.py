"""BS.1770 loudness: integrated (gated), momentary and short-term, loudness range.

Method (ITU-R BS.1770-5, EBU Tech 3341 (2023), EBU Tech 3342 (2023)):

* Each channel is K-weighted (:mod:`masterqc.measure.kweight`), squared and
  weighted by its channel weight G (LFE 0, surrounds 1.41, others and unknown
  layouts 1.0), and the weighted squares are summed over channels.
* The sums are collected per 1 ms *tick*: tick ``m`` covers samples
  ``[B(m), B(m+1))`` with ``B(m) = round(m * fs / 1000)`` (halves rounded up,
  integer arithmetic, counted from the first sample of the file).  100 ticks
  form a 100 ms *sub-block* ``k``, whose boundary ``B(100 k) = round(k * fs / 10)``.
  Only the per-100 ms sums are kept for the whole file (one float64 per 100 ms);
  ticks are kept for the last 3 s only.
* A 400 ms gating block is 4 consecutive sub-blocks (75 % overlap, hop 100 ms),
  its mean square is the sum of their sums divided by its sample count.  The 3 s
  short-term window is 30 sub-blocks.  A final incomplete sub-block (< 100 ms)
  is not used, so no incomplete gating block is ever used (BS.1770-5, Annex 1).
* Integrated loudness: absolute gate -70 LUFS, relative gate -10 LU below the
  loudness of the blocks above the absolute gate (BS.1770-5).
* Loudness range: short-term values at a 100 ms hop, absolute gate -70 LUFS,
  relative gate -20 LU below the power mean of the values above the absolute
  gate, LRA = 95th minus 10th percentile by linear interpolation between closest
  ranks (position ``p * (n - 1)`` in the sorted values; EBU Tech 3342).
* Momentary (400 ms) and short-term (3 s) are ungated sliding windows (Tech 3341).
  The 10 Hz series hold one value per sub-block boundary; a value exists only
  once its whole window lies inside the file, so the momentary series is null
  for the first 0.3 s (window ends 0.1..0.3 s) and the short-term series for the
  first 2.9 s.  ``max_momentary_lufs`` / ``max_short_term_lufs`` are the maxima
  over every window ending on a 1 ms tick (hop 1 ms).  With a 100 ms hop the best
  window can miss up to 50 ms of a 400 ms burst (0.58 LU low); with 1 ms it misses
  at most 0.5 ms (0.0054 LU low for momentary, 0.0007 LU for short-term).

Pure helpers (:func:`energy_to_lufs`, :func:`gated_integrated`,
:func:`loudness_range`, :func:`pooled_integrated_lufs`, ...) and the streaming
:class:`LoudnessMeter` (which can be fed blocks that another analyzer filtered
first, or already K-weighted power) are reused by other analyzers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from masterqc.contract import measured
from masterqc.measure.base import (INTEGER, NUMBER_OR_NULL, Analyzer,
                                   AnalyzerResult)
from masterqc.measure.kweight import MAX_RATE_HZ as KW_MAX_RATE_HZ
from masterqc.measure.kweight import MIN_RATE_HZ as KW_MIN_RATE_HZ
from masterqc.measure.iir import sosfilt
from masterqc.measure.kweight import kweighting_sos

#: -0.691 dB offset of the BS.1770 loudness formula
LOUDNESS_OFFSET_DB = -0.691
ABSOLUTE_GATE_LUFS = -70.0
RELATIVE_GATE_LU = -10.0
LRA_RELATIVE_GATE_LU = -20.0
LRA_LOW_PERCENTILE = 10.0
LRA_HIGH_PERCENTILE = 95.0

TICKS_PER_SECOND = 1000
TICKS_PER_SUBBLOCK = 100
SUBBLOCKS_PER_MOMENTARY = 4
SUBBLOCKS_PER_SHORT_TERM = 30
MOMENTARY_TICKS = SUBBLOCKS_PER_MOMENTARY * TICKS_PER_SUBBLOCK
SHORT_TERM_TICKS = SUBBLOCKS_PER_SHORT_TERM * TICKS_PER_SUBBLOCK

#: display series are decimated (max within each bucket) to at most this many points
MAX_SERIES_POINTS = 2000
#: width of a gating-block histogram bin, LU
HISTOGRAM_BIN_LU = 0.01

_FLUSH_TICKS = 2048


# ---------------------------------------------------------------- pure helpers

def energy_to_lufs(energy):
    """Loudness in LUFS of a channel-weighted K-weighted mean square ``energy``.

    ``-0.691 + 10*log10(energy)``; scalar in -> float (``-inf`` for 0), array in -> array.
    """
    e = np.asarray(energy, dtype=float)
    with np.errstate(divide="ignore"):
        out = LOUDNESS_OFFSET_DB + 10.0 * np.log10(e)
    return float(out) if out.ndim == 0 else out


def lufs_to_energy(lufs):
    """Inverse of :func:`energy_to_lufs`: ``10 ** ((lufs + 0.691) / 10)``."""
    out = 10.0 ** ((np.asarray(lufs, dtype=float) - LOUDNESS_OFFSET_DB) / 10.0)
    return float(out) if out.ndim == 0 else out


def _lufs_or_none(energy) -> float | None:
    if energy is None or not energy > 0.0 or not math.isfinite(energy):
        return None
    return energy_to_lufs(energy)


def tick_boundary(m, sample_rate_hz: int):
    """First sample of 1 ms tick ``m`` (int or int array): ``round(m * fs / 1000)``, halves up."""
    return (2 * np.asarray(m, dtype=np.int64) * int(sample_rate_hz) + TICKS_PER_SECOND) // (2 * TICKS_PER_SECOND)


def subblock_boundary(k, sample_rate_hz: int):
    """First sample of 100 ms sub-block ``k``: ``round(k * fs / 10)``, halves up."""
    return tick_boundary(np.asarray(k, dtype=np.int64) * TICKS_PER_SUBBLOCK, sample_rate_hz)


def window_energies(subblock_sums, sample_rate_hz: int, subblocks_per_window: int) -> np.ndarray:
    """Mean squares of every window of ``subblocks_per_window`` consecutive sub-blocks (hop 1).

    ``subblock_sums[k]`` is the sum of channel-weighted K-weighted squares over sub-block k;
    window j covers sub-blocks j .. j+n-1 and is divided by its exact sample count.
    Returns an empty array when there are fewer sub-blocks than one window.
    """
    s = np.asarray(subblock_sums, dtype=float)
    n = int(subblocks_per_window)
    count = s.size - n + 1
    if count <= 0:
        return np.zeros(0)
    total = s[0:count].copy()
    for i in range(1, n):
        total += s[i:i + count]
    j = np.arange(count, dtype=np.int64)
    samples = subblock_boundary(j + n, sample_rate_hz) - subblock_boundary(j, sample_rate_hz)
    return total / samples


@dataclass(frozen=True)
class GatedLoudness:
    """Outcome of BS.1770 gating.  Levels in LUFS, None where they cannot exist."""

    integrated_lufs: float | None
    relative_gate_lufs: float | None
    blocks_total: int
    blocks_above_absolute_gate: int
    blocks_gated: int


def gated_integrated(block_energies) -> GatedLoudness:
    """Integrated loudness of 400 ms gating-block mean squares (ITU-R BS.1770-5, Annex 1).

    A block counts when its loudness is strictly above -70 LUFS and strictly above
    the relative gate (-10 LU below the loudness of the blocks above -70 LUFS).
    """
    z = np.asarray(block_energies, dtype=float).ravel()
    above_abs = z[z > lufs_to_energy(ABSOLUTE_GATE_LUFS)]
    if above_abs.size == 0:
        return GatedLoudness(None, None, int(z.size), 0, 0)
    rel_gate_energy = above_abs.mean() * 10.0 ** (RELATIVE_GATE_LU / 10.0)
    gated = above_abs[above_abs > rel_gate_energy]
    return GatedLoudness(_lufs_or_none(gated.mean()) if gated.size else None,
                         _lufs_or_none(rel_gate_energy), int(z.size), int(above_abs.size),
                         int(gated.size))


@dataclass(frozen=True)
class LoudnessRange:
    """Outcome of the EBU Tech 3342 loudness-range computation."""

    range_lu: float | None
    low_lufs: float | None
    high_lufs: float | None
    relative_gate_lufs: float | None
    values_used: int


def loudness_range(short_term_energies) -> LoudnessRange:
    """Loudness range (EBU Tech 3342) of short-term (3 s) mean squares taken at a 100 ms hop.

    Absolute gate -70 LUFS, relative gate -20 LU below the power mean of the values
    above it; 10th and 95th percentiles of the gated loudness values by linear
    interpolation between closest ranks.  All None when no value passes the gates.
    """
    e = np.asarray(short_term_energies, dtype=float).ravel()
    above_abs = e[e > lufs_to_energy(ABSOLUTE_GATE_LUFS)]
    if above_abs.size == 0:
        return LoudnessRange(None, None, None, None, 0)
    gate_energy = above_abs.mean() * 10.0 ** (LRA_RELATIVE_GATE_LU / 10.0)
    used = above_abs[above_abs > gate_energy]
    if used.size == 0:  # pragma: no cover - the loudest value always passes
        return LoudnessRange(None, None, None, _lufs_or_none(gate_energy), 0)
    levels = np.sort(energy_to_lufs(used))
    low, high = np.percentile(levels, [LRA_LOW_PERCENTILE, LRA_HIGH_PERCENTILE], method="linear")
    return LoudnessRange(float(high - low), float(low), float(high), _lufs_or_none(gate_energy),
                         int(used.size))


def gating_block_histogram(block_energies) -> dict:
    """Sparse histogram of gating-block energies above -70 LUFS, for pooled gating.

    Bin ``i`` holds blocks with loudness in ``(-70 + i*0.01, -70 + (i+1)*0.01]`` LUFS
    (the lowest bin starts just above -70 LUFS).  Returns
    ``{"lower_lufs": -70.0, "bin_lu": 0.01, "bin": [...], "count": [...], "energy": [...]}``
    with one entry per occupied bin; ``energy`` is the sum of the blocks' mean squares.
    """
    z = np.asarray(block_energies, dtype=float).ravel()
    z = z[z > lufs_to_energy(ABSOLUTE_GATE_LUFS)]
    out = {"lower_lufs": ABSOLUTE_GATE_LUFS, "bin_lu": HISTOGRAM_BIN_LU,
           "bin": [], "count": [], "energy": []}
    if z.size == 0:
        return out
    idx = np.ceil((energy_to_lufs(z) - ABSOLUTE_GATE_LUFS) / HISTOGRAM_BIN_LU).astype(np.int64) - 1
    idx = np.maximum(idx, 0)
    bins, inverse = np.unique(idx, return_inverse=True)
    out["bin"] = bins.tolist()
    out["count"] = np.bincount(inverse).tolist()
    out["energy"] = np.bincount(inverse, weights=z).tolist()
    return out


def _histogram_entries(histograms):
    """Concatenate the (bin, count, energy) entries of several histograms, unmerged."""
    bins, counts, energies = [], [], []
    for h in histograms:
        if h is None:
            continue
        if h.get("bin_lu", HISTOGRAM_BIN_LU) != HISTOGRAM_BIN_LU or h.get("lower_lufs", ABSOLUTE_GATE_LUFS) != ABSOLUTE_GATE_LUFS:
            raise ValueError("gating-block histograms must use -70 LUFS lower edge and 0.01 LU bins")
        if not (len(h["bin"]) == len(h["count"]) == len(h["energy"])):
            raise ValueError("gating-block histogram lists 'bin', 'count', 'energy' differ in length")
        bins.append(np.asarray(h["bin"], dtype=np.int64))
        counts.append(np.asarray(h["count"], dtype=float))
        energies.append(np.asarray(h["energy"], dtype=float))
    if not bins:
        return np.zeros(0, np.int64), np.zeros(0), np.zeros(0)
    return np.concatenate(bins), np.concatenate(counts), np.concatenate(energies)


def _pooled(histograms):
    """(integrated mean square, error bound in LU), or (None, None) when nothing is above -70 LUFS.

    The relative gate ``g`` is exact (sums of energies and counts).  Entries are kept per
    histogram (not merged).  An entry wholly above the gate counts in, wholly below counts
    out; an entry of one block is classified exactly (its energy sum is the block's
    energy).  For an entry of ``c`` blocks, energy sum ``E``, whose bin ``(lo, hi]``
    straddles the gate, the number ``k`` of its blocks above the gate is confined by the
    energy sum: blocks above lie in ``(g, hi]``, blocks below in ``(lo, g]``, so
    ``(E - c g) / (hi - g) <= k < (E - c lo) / (g - lo)``.  The estimate takes the middle
    of that range with the entry's mean block energy; the bound is the spread between
    taking every such entry at its fewest blocks with the most energy and at its most
    blocks with the least energy.
    """
    bins, counts, energies = _histogram_entries(histograms)
    total = counts.sum()
    if total <= 0:
        return None, None
    gate = energies.sum() / total * 10.0 ** (RELATIVE_GATE_LU / 10.0)
    gate_lufs = energy_to_lufs(gate)
    lower = ABSOLUTE_GATE_LUFS + bins * HISTOGRAM_BIN_LU     # bin i holds (lower, upper]
    upper = lower + HISTOGRAM_BIN_LU
    single = counts == 1
    include = np.where(single, energies > gate, lower >= gate_lufs)
    straddle = ~single & (lower < gate_lufs) & (upper > gate_lufs)
    n_in, e_in = counts[include].sum(), energies[include].sum()
    c, e = counts[straddle], energies[straddle]
    e_lo, e_hi = lufs_to_energy(lower[straddle]), lufs_to_energy(upper[straddle])
    with np.errstate(divide="ignore", invalid="ignore"):
        k_min = np.clip(np.ceil((e - c * gate) / (e_hi - gate) - 1e-9), 0, c)
        k_max = np.clip(np.floor((e - c * e_lo) / (gate - e_lo) + 1e-9), 0, c)
    k_max = np.maximum(k_max, k_min)
    k_est = 0.5 * (k_min + k_max)
    mean = e / np.maximum(c, 1)
    n_est, e_est = n_in + k_est.sum(), e_in + (k_est * mean).sum()
    if n_est <= 0:   # pragma: no cover - the loudest block is always above the gate
        return None, None
    value = e_est / n_est
    # extremes: fewest blocks above, each as loud as its bin allows / most blocks, least energy
    hi_e = np.minimum(k_min * e_hi, e - (c - k_min) * e_lo)
    lo_e = np.maximum(k_max * gate, e - (c - k_max) * gate)
    candidates = []
    if n_in + k_min.sum() > 0:
        candidates.append((e_in + hi_e.sum()) / (n_in + k_min.sum()))
    candidates.append((e_in + lo_e.sum()) / (n_in + k_max.sum()))
    bound = max(abs(energy_to_lufs(v) - energy_to_lufs(value)) for v in candidates if v > 0)
    return value, bound


def pooled_integrated_lufs(histograms) -> float | None:
    """Integrated loudness of several programmes gated together (BS.1770-5 over all their blocks).

    ``histograms``: iterable of :func:`gating_block_histogram` dicts (None entries are
    skipped).  The relative gate is computed exactly from the bins' energy sums; only
    blocks in bins that the gate falls into are uncertain: a bin entry holding one block
    is classified exactly (its energy sum is the block's energy), entries of several
    blocks are apportioned by the share of the bin's 0.01 LU width above the gate.  :func:`pooled_integrated_error_bound_lu`
    gives the largest error that apportioning can cause.  None when no block is
    above -70 LUFS.
    """
    value, _bound = _pooled(histograms)
    return None if value is None else energy_to_lufs(value)


def pooled_integrated_error_bound_lu(histograms) -> float | None:
    """Largest difference (LU) between :func:`pooled_integrated_lufs` and exact pooling.

    That is the change from counting every block of the straddling bin in or out.
    """
    return _pooled(histograms)[1]


def decimate_max(values, times, max_points: int = MAX_SERIES_POINTS):
    """Reduce a series to at most ``max_points`` by the maximum within each bucket.

    ``values`` is float with NaN for missing; returns ``(values, times)`` as plain lists
    with None for missing.  The time of a bucket is the time of its first point.
    """
    v = np.asarray(values, dtype=float)
    t = np.asarray(times, dtype=float)
    if v.size > max_points:
        q = -(-v.size // max_points)
        starts = np.arange(0, v.size, q)
        with np.errstate(invalid="ignore"):
            v = np.fmax.reduceat(v, starts)
        t = t[starts]
    return [None if not math.isfinite(x) else float(x) for x in v.tolist()], [float(x) for x in t.tolist()]


# ---------------------------------------------------------------- streaming meter

@dataclass
class LoudnessSummary:
    """Everything :meth:`LoudnessMeter.summary` computes.  Energies are mean squares."""

    sample_rate_hz: int
    subblock_sums: np.ndarray
    momentary_energies: np.ndarray     # one per sub-block boundary k = 4..K
    short_term_energies: np.ndarray    # one per sub-block boundary k = 30..K
    gating: GatedLoudness
    lra: LoudnessRange
    max_momentary_energy: float | None
    max_momentary_end_s: float | None
    max_short_term_energy: float | None
    max_short_term_end_s: float | None
    analysed_s: float


def _stereo_power_numpy(y: np.ndarray, seg, end: int):
    """(energies (2,), ticks, rest) of a (2, n) block as :meth:`LoudnessMeter._process_rows` and
    :meth:`LoudnessMeter.process_power` compute them with numpy (weights 1, 1)."""
    sq = np.square(y)
    energy = sq.sum(axis=1)
    p = np.array([1.0, 1.0]) @ sq
    if seg is None:
        return energy, None, float(p.sum())
    return energy, np.add.reduceat(p[:end], seg), float(p[end:].sum())


def _stereo_power_self_check(fn) -> bool:
    """True when ``fn`` gives numpy's bits on blocks that take every branch of the sums (segments
    of 1 to 200 samples, a block without a boundary, one ending on a boundary, short blocks)."""
    k = np.arange(2 * 5003, dtype=np.float64)
    # deterministic irregular rows (numpy.random stays unimported on the measure path)
    y = (np.sin(k * 0.37) * np.cos(k * k * 1e-4) * 0.7 + 1e-9 * np.sin(k * 2.1)).reshape(2, 5003)
    y[1, 40:60] = -0.0
    cases = [(y, [0, 1, 3, 10, 48, 96, 300], 480), (y, [0, 47, 94, 141], 5003), (y, None, 0),
             (y[:, :5], [0, 2], 4), (y[:, :5], None, 0), (np.ascontiguousarray(y[:, 7:300]), [0, 200], 290)]
    for rows, seg, end in cases:
        rows = np.ascontiguousarray(rows)
        sg = None if seg is None else np.array(seg, dtype=np.int64)
        n = rows.shape[1]
        kk = 0 if sg is None else sg.shape[0]
        p = np.empty(n)
        ticks = np.empty(kk)
        out = np.empty(3)
        fn(rows, p, np.empty(0, np.int64) if sg is None else sg, ticks, out, n, kk, end)
        energy, want_ticks, rest = _stereo_power_numpy(rows, sg, end)
        if not (np.array_equal(out[:2], energy) and out[2] == rest
                and np.signbit(out[2]) == np.signbit(rest)):
            return False
        if want_ticks is not None and not np.array_equal(ticks, want_ticks):
            return False
    return True


def stereo_power_kernel():
    """``stereo_power`` of masterqc's optional compiled module (``masterqc/measure/_cascade.c``)
    when it is built, switched on (``MASTERQC_OWN_KERNEL``, :mod:`masterqc.measure.iir`) and gives
    numpy's bits in :func:`_stereo_power_self_check`; else None (numpy's steps run)."""
    from masterqc.measure import iir
    return iir.checked_kernel("stereo_power", _stereo_power_self_check)


class LoudnessMeter:
    """Streaming BS.1770 meter: feed blocks in order, then call :meth:`summary`.

    ``channel_weights``: G for each channel (0 drops the channel).  With
    ``kweighting=True`` (default) :meth:`process` K-weights the blocks itself;
    an analyzer may low-pass its blocks first and feed them here.  With
    ``kweighting=False`` the blocks are taken as already weighted.
    :meth:`process_power` takes the channel-summed weighted squares directly.
    Memory: one float64 per 100 ms plus 3 s of 1 ms ticks.
    """

    def __init__(self, sample_rate_hz: int, channel_weights, kweighting: bool = True):
        self.fs = int(sample_rate_hz)
        if self.fs < TICKS_PER_SECOND:
            raise ValueError(f"loudness meter needs a sample rate of at least {TICKS_PER_SECOND} Hz, got {sample_rate_hz!r}")
        w = np.asarray(channel_weights, dtype=float)
        self._active = np.flatnonzero(w != 0.0)
        self._all_active = self._active.size == w.size
        self._w = w[self._active]
        #: two channels, both of weight 1 (stereo): the compiled power kernel can take the block
        self._unit_stereo = self._w.shape == (2,) and bool(np.all(self._w == 1.0))
        self._sos = kweighting_sos(self.fs) if kweighting else None
        #: channels that are filtered (weight != 0), in order, and the sum over the file of each
        #: one's squared K-weighted samples (before the weights; fed through :meth:`process` only)
        self.active_channels = tuple(int(c) for c in self._active)
        self.channel_energy = np.zeros(self._active.size)
        self.filters_kweighting = self._sos is not None
        self._zi = None
        if self._sos is not None and self._active.size:
            # channels as rows: sosfilt along the last axis of a (channels, frames) array is
            # about 13 % faster than along axis 0 of (frames, channels); same arithmetic
            self._zi = np.zeros((self._sos.shape[0], self._active.size, 2))
        self._pos = 0                 # samples consumed
        self._ticks_done = 0          # completed 1 ms ticks
        self._next_b = int(tick_boundary(1, self.fs))
        self._carry = 0.0             # partial sum of the current tick
        self._pending: list[np.ndarray] = []
        self._pending_n = 0
        self._tail = np.zeros(0)      # last ticks (up to SHORT_TERM_TICKS - 1) already flushed
        self._group = np.zeros(0)     # flushed ticks not yet forming a full sub-block
        self._sub = np.zeros(1024)
        self._nsub = 0
        self._max = {MOMENTARY_TICKS: (-1.0, None), SHORT_TERM_TICKS: (-1.0, None)}

    # -- feeding
    def process(self, block) -> None:
        """Feed a float block of shape (frames, channels) (or (frames,) for mono): as
        :meth:`process_planar` of its transpose (the filter copies the rows it reads, whatever
        their memory order, so the values are the same)."""
        x = np.asarray(block, dtype=float)
        self.process_planar(x.T if x.ndim == 2 else x)

    def process_planar(self, rows) -> None:
        """Feed a float block of shape (channels, frames), one row per channel (the engine's
        planar blocks); the same arithmetic as :meth:`process` on its transpose."""
        x = np.asarray(rows, dtype=float)
        if x.ndim == 1:
            x = x[None, :]
        n = x.shape[1]
        if n == 0:
            return
        if self._active.size == 0:
            self.process_power(np.zeros(n))
            return
        self._process_rows(x if self._all_active else x[self._active])

    def _process_rows(self, xt) -> None:
        """Filter, square, weight and sum ``xt`` (active channels, frames), any memory order."""
        if self._sos is not None:
            xt, self._zi = sosfilt(self._sos, xt, axis=-1, zi=self._zi)   # a fresh array
        else:
            xt = xt.copy()
        if self._unit_stereo and xt.flags.c_contiguous and xt.dtype == np.float64:
            kernel = stereo_power_kernel()
            if kernel is not None:
                self._stereo_power(kernel, xt)
                return
        np.square(xt, out=xt)   # in place: a new temporary per block costs as much as the filter
        self.channel_energy += xt.sum(axis=1)
        p = self._w @ xt if xt.shape[0] > 1 else xt[0] * self._w[0]
        self.process_power(p)

    def _stereo_power(self, kernel, xt) -> None:
        """:meth:`_process_rows` after the filter, for two channels of weight 1, by the compiled
        kernel (:func:`stereo_power_kernel`): the same energies, power and tick sums, in one pass."""
        n = xt.shape[1]
        seg, end = self._tick_segments(n)
        k = 0 if seg is None else seg.shape[0]
        p = np.empty(n)
        ticks = np.empty(k)
        out = np.empty(3)
        kernel(xt, p, np.empty(0, np.int64) if seg is None else seg, ticks, out, n, k, end)
        self.channel_energy += out[:2]
        self._take_ticks(n, ticks if k else None, float(out[2]))

    def _tick_segments(self, n: int):
        """(seg, end) of a block of ``n`` samples: the offsets of the 1 ms ticks that end in it
        (each from the previous boundary; the first from the block start) and the last
        boundary's offset, or (None, 0) when no tick ends in it."""
        start, end = self._pos, self._pos + n
        if self._next_b > end:
            return None, 0
        est = (end * TICKS_PER_SECOND) // self.fs + 2
        js = np.arange(self._ticks_done + 1, est + 1, dtype=np.int64)
        bj = tick_boundary(js, self.fs)
        bj = bj[bj <= end]
        cuts = bj - start
        seg = np.empty(cuts.size, dtype=np.int64)
        seg[0] = 0
        seg[1:] = cuts[:-1]
        return seg, int(cuts[-1])

    def process_power(self, power) -> None:
        """Feed per-sample channel-weighted K-weighted squares (1-D, in file order)."""
        p = np.asarray(power, dtype=float).ravel()
        n = p.size
        if n == 0:
            return
        seg, end = self._tick_segments(n)
        if seg is None:
            self._take_ticks(n, None, float(p.sum()))
            return
        self._take_ticks(n, np.add.reduceat(p[:end], seg), float(p[end:].sum()))

    def _take_ticks(self, n: int, sums, rest: float) -> None:
        """Book a block of ``n`` samples: ``sums`` of the ticks that end in it (None: none does)
        and ``rest``, the sum of its samples after the last boundary."""
        self._pos += n
        if sums is None:
            self._carry += rest
            return
        sums[0] += self._carry
        self._carry = rest
        self._ticks_done += sums.size
        self._next_b = int(tick_boundary(self._ticks_done + 1, self.fs))
        self._pending.append(sums)
        self._pending_n += sums.size
        if self._pending_n >= _FLUSH_TICKS:
            self._flush()

    def _flush(self) -> None:
        if not self._pending_n:
            return
        new = np.concatenate(self._pending) if len(self._pending) > 1 else self._pending[0]
        self._pending, self._pending_n = [], 0
        first_new = self._ticks_done - new.size
        # 100 ms sub-blocks
        grp = np.concatenate([self._group, new]) if self._group.size else new
        k = grp.size // TICKS_PER_SUBBLOCK
        if k:
            sums = grp[:k * TICKS_PER_SUBBLOCK].reshape(k, TICKS_PER_SUBBLOCK).sum(axis=1)
            if self._nsub + k > self._sub.size:
                grown = np.zeros(max(2 * self._sub.size, self._nsub + k))
                grown[:self._nsub] = self._sub[:self._nsub]
                self._sub = grown
            self._sub[self._nsub:self._nsub + k] = sums
            self._nsub += k
        self._group = grp[k * TICKS_PER_SUBBLOCK:].copy()
        # sliding maxima at a 1 ms hop
        arr = np.concatenate([self._tail, new]) if self._tail.size else new
        g0 = first_new - self._tail.size
        c = np.concatenate([[0.0], np.cumsum(arr)])
        ends = np.arange(first_new + 1, self._ticks_done + 1, dtype=np.int64)
        for width in (MOMENTARY_TICKS, SHORT_TERM_TICKS):
            ee = ends[ends - width >= g0]
            if ee.size == 0:
                continue
            s = c[ee - g0] - c[ee - width - g0]
            samples = tick_boundary(ee, self.fs) - tick_boundary(ee - width, self.fs)
            energy = s / samples
            i = int(np.argmax(energy))
            if energy[i] > self._max[width][0]:
                self._max[width] = (float(energy[i]), int(ee[i]))
        keep = SHORT_TERM_TICKS - 1
        self._tail = arr[-keep:].copy() if arr.size > keep else arr.copy()

    # -- results
    def summary(self) -> LoudnessSummary:
        """Compute every result from what has been fed so far (feeding may not continue)."""
        self._flush()
        sub = self._sub[:self._nsub].copy()
        mom = window_energies(sub, self.fs, SUBBLOCKS_PER_MOMENTARY)
        st = window_energies(sub, self.fs, SUBBLOCKS_PER_SHORT_TERM)

        def peak(width):
            energy, end_tick = self._max[width]
            if end_tick is None:
                return None, None
            return energy, float(tick_boundary(end_tick, self.fs)) / self.fs

        mm, mm_t = peak(MOMENTARY_TICKS)
        ms, ms_t = peak(SHORT_TERM_TICKS)
        return LoudnessSummary(
            sample_rate_hz=self.fs, subblock_sums=sub, momentary_energies=mom, short_term_energies=st,
            gating=gated_integrated(mom), lra=loudness_range(st),
            max_momentary_energy=mm, max_momentary_end_s=mm_t,
            max_short_term_energy=ms, max_short_term_end_s=ms_t,
            analysed_s=float(subblock_boundary(self._nsub, self.fs)) / self.fs)


# ---------------------------------------------------------------- analyzer

def _time_if(energy, time_s):
    """The time of a maximum, or None when the maximum itself cannot exist (silence)."""
    return time_s if _lufs_or_none(energy) is not None else None


STANDARDS = "ITU-R BS.1770-5 (11/2023); EBU Tech 3341 (2023); EBU Tech 3342 (2023)"


class LoudnessAnalyzer(Analyzer):
    """Integrated loudness, loudness range, max momentary / short-term, and their series."""

    name = "loudness"
    measurement_schema = {
        "integrated_lufs": measured(NUMBER_OR_NULL, 'lufs',
            'integrated (programme) loudness, ITU-R BS.1770 gated; null for silence or below the -70 LUFS gate'),
        "relative_gate_lufs": measured(NUMBER_OR_NULL, 'lufs',
            'relative gate of the integrated loudness (-10 LU below the absolute-gated loudness)'),
        "loudness_block_count": measured(INTEGER, 'count',
            '400 ms gating blocks in the programme, before any gate'),
        "loudness_block_above_gates_count": measured(INTEGER, 'count',
            'gating blocks above both the absolute and the relative gate (those the integrated loudness averages)'),
        "loudness_range_lu": measured(NUMBER_OR_NULL, 'lu',
            'loudness range, EBU Tech 3342'),
        "loudness_range_low_lufs": measured(NUMBER_OR_NULL, 'lufs',
            '10th percentile of the gated short-term loudness (low end of the range)'),
        "loudness_range_high_lufs": measured(NUMBER_OR_NULL, 'lufs',
            '95th percentile of the gated short-term loudness (high end of the range)'),
        "loudness_range_gate_lufs": measured(NUMBER_OR_NULL, 'lufs',
            'relative gate of the loudness range (-20 LU)'),
        "loudness_range_value_count": measured(INTEGER, 'count',
            'short-term values above both range gates'),
        "max_momentary_lufs": measured(NUMBER_OR_NULL, 'lufs',
            'highest momentary (400 ms) loudness, windows stepped every 1 ms'),
        "max_momentary_end_s": measured(NUMBER_OR_NULL, 's',
            'end time of the loudest momentary window'),
        "max_short_term_lufs": measured(NUMBER_OR_NULL, 'lufs',
            'highest short-term (3 s) loudness, windows stepped every 1 ms'),
        "max_short_term_end_s": measured(NUMBER_OR_NULL, 's',
            'end time of the loudest short-term window'),
        "loudness_analysed_s": measured(NUMBER_OR_NULL, 's',
            'duration the loudness meter analysed'),
    }
    series_schema = {
        "loudness_time_s": {"type": "array", "items": {"type": "number"}},
        "momentary_lufs": {"type": "array", "items": {"type": ["number", "null"]}},
        "short_term_lufs": {"type": "array", "items": {"type": ["number", "null"]}},
        "gating_block_histogram": {
            "type": "object", "required": ["lower_lufs", "bin_lu", "bin", "count", "energy"],
            "properties": {"lower_lufs": {"type": "number"}, "bin_lu": {"type": "number"},
                           "bin": {"type": "array", "items": INTEGER},
                           "count": {"type": "array", "items": INTEGER},
                           "energy": {"type": "array", "items": {"type": "number"}}}},
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        self.weights = tuple(float(w) for w in info.channel_weights)
        self.unsupported = None
        fs = info.sample_rate_hz
        if not (KW_MIN_RATE_HZ <= fs <= KW_MAX_RATE_HZ):
            # every loudness value is then null (cannot exist for this analyzer), said in settings
            self.unsupported = (f"sample rate {fs} Hz is outside the {KW_MIN_RATE_HZ}..{KW_MAX_RATE_HZ} Hz "
                                "for which K-weighting is designed here; loudness not measured")
            self.meter = None
        else:
            self.meter = LoudnessMeter(fs, self.weights)

    #: the engine hands it (channels, frames) blocks: the K-weighting runs along rows with no transpose
    planar_input = True

    def process(self, block) -> None:
        if self.meter is not None:
            self.meter.process(block)

    def process_planar(self, rows) -> None:
        if self.meter is not None:
            self.meter.process_planar(rows)

    def finish(self) -> AnalyzerResult:
        if self.meter is None:
            measurements = {key: None for key in self.measurement_schema}
            measurements.update(loudness_block_count=0, loudness_block_above_gates_count=0, loudness_range_value_count=0)
            series = {"loudness_time_s": [], "momentary_lufs": [], "short_term_lufs": [],
                      "gating_block_histogram": gating_block_histogram([])}
            return AnalyzerResult(measurements, series, {"standards": STANDARDS, "not_measured": self.unsupported})
        s = self.meter.summary()
        fs = s.sample_rate_hz
        g, lra = s.gating, s.lra
        measurements = {
            "integrated_lufs": g.integrated_lufs,
            "relative_gate_lufs": g.relative_gate_lufs,
            "loudness_block_count": g.blocks_total,
            "loudness_block_above_gates_count": g.blocks_gated,
            "loudness_range_lu": lra.range_lu,
            "loudness_range_low_lufs": lra.low_lufs,
            "loudness_range_high_lufs": lra.high_lufs,
            "loudness_range_gate_lufs": lra.relative_gate_lufs,
            "loudness_range_value_count": lra.values_used,
            "max_momentary_lufs": _lufs_or_none(s.max_momentary_energy),
            "max_momentary_end_s": _time_if(s.max_momentary_energy, s.max_momentary_end_s),
            "max_short_term_lufs": _lufs_or_none(s.max_short_term_energy),
            "max_short_term_end_s": _time_if(s.max_short_term_energy, s.max_short_term_end_s),
            "loudness_analysed_s": s.analysed_s,
        }
        k = s.subblock_sums.size
        times = subblock_boundary(np.arange(1, k + 1), fs) / fs
        mom = np.full(k, np.nan)
        st = np.full(k, np.nan)
        with np.errstate(divide="ignore"):
            if s.momentary_energies.size:
                mom[SUBBLOCKS_PER_MOMENTARY - 1:] = energy_to_lufs(s.momentary_energies)
            if s.short_term_energies.size:
                st[SUBBLOCKS_PER_SHORT_TERM - 1:] = energy_to_lufs(s.short_term_energies)
        mom_list, t_list = decimate_max(mom, times)
        st_list, _ = decimate_max(st, times)
        series = {
            "loudness_time_s": t_list,
            "momentary_lufs": mom_list,
            "short_term_lufs": st_list,
            "gating_block_histogram": gating_block_histogram(s.momentary_energies),
        }
        settings = {
            "standards": STANDARDS,
            "kweighting": "bilinear transform of the analogue prototype; 48 kHz pass-band gain kept at every rate",
            "channel_weights": list(self.weights),
            "channel_layout": list(self.info.channel_layout),
            "subblock_s": 0.1,
            "subblock_boundaries": "round(k * fs / 10) samples from the first sample, halves rounded up",
            "gating_block_s": 0.4,
            "gating_block_overlap": 0.75,
            "incomplete_final_block": "not used",
            "absolute_gate_lufs": ABSOLUTE_GATE_LUFS,
            "relative_gate_lu": RELATIVE_GATE_LU,
            "short_term_s": 3.0,
            "series_hop_s": 0.1,
            "series_first_value": "momentary from 0.4 s, short-term from 3.0 s (whole window in the file); earlier points null",
            "series_decimation": f"max within buckets, at most {MAX_SERIES_POINTS} points; time of a bucket = its first point",
            "max_window_hop_s": 1.0 / TICKS_PER_SECOND,
            "lra_hop_s": 0.1,
            "lra_absolute_gate_lufs": ABSOLUTE_GATE_LUFS,
            "lra_relative_gate_lu": LRA_RELATIVE_GATE_LU,
            "lra_percentiles": [LRA_LOW_PERCENTILE, LRA_HIGH_PERCENTILE],
            "lra_percentile_method": "linear interpolation between closest ranks, position p*(n-1) in sorted values",
            "histogram_bin_lu": HISTOGRAM_BIN_LU,
        }
        return AnalyzerResult(measurements, series, settings)
