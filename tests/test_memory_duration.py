"""What a long run keeps, and the largest temporary at its end, do not grow faster than they must with duration
(issue 15: peak memory flat in duration).  Peak figures of whole processes live in bench/ (bench_memory_duration.py);
here the structures themselves are checked, with analytic sizes."""

from __future__ import annotations

import math
import tracemalloc

import numpy as np

from masterqc.measure import aliasing as al
from masterqc.measure import loudness as ld


def _grid_rows(total_samples: float, n: int, seed: int):
    """Error-magnitude spectra of 12 frames of ``n`` samples spread over ``total_samples``, carrying a
    line locked to the absolute sample index (the irregular-grid signature) plus noise."""
    rng = np.random.default_rng(seed)
    frames = 12
    starts = np.floor((np.arange(frames) + rng.random(frames)) * total_samples / frames).astype(np.int64)
    alpha = 37.3 / n
    rows = []
    for s in starts:
        t = np.arange(n) + s
        x = np.cos(2 * math.pi * alpha * t) + 0.05 * rng.standard_normal(n)
        rows.append(np.fft.rfft(x * np.hanning(n), al.GRID_PAD * n))
    return np.stack(rows), starts, alpha


def _whole_table_coherence(spectra, starts, frame_len):
    """Reference: the search with the whole phase table (offsets x frames) in memory at once, candidate
    by candidate, np.argmax over all offsets (the arithmetic grid_coherence must reproduce bit for bit)."""
    nfft = 2 * (spectra.shape[1] - 1)
    cand, alpha, med = al.grid_candidates(spectra, frame_len)
    st = np.asarray(starts, dtype=float)
    span = float(st.max() - st.min() + frame_len)
    d = np.arange(-0.5 / nfft, 0.5 / nfft, 0.125 / span)
    ph = np.exp(-2j * math.pi * d[:, None] * (st[None, :] + frame_len / 2.0))
    best, coherent = (0.0, None, 0.0), []
    for k in cand:
        z = spectra[:, k] * np.exp(-2j * math.pi * alpha[k] * st)
        u = z / np.maximum(np.abs(z), 1e-300)
        r = np.abs(ph @ u) / u.size
        i = int(np.argmax(r))
        got = (float(r[i]), float(alpha[k] + d[i]), float(med[k]))
        best = got if got[0] > best[0] else best
        if got[0] >= al.GRID_MIN_COHERENCE:
            coherent.append(got)
    return (min(coherent, key=lambda g: g[1]) if coherent else best), d.size


def _traced_peak_mb(fn):
    tracemalloc.start()
    try:
        tracemalloc.reset_peak()
        out = fn()
        return out, tracemalloc.get_traced_memory()[1] / 2**20
    finally:
        tracemalloc.stop()


def test_grid_coherence_phase_table_is_bounded_and_exact():
    """The frequency offsets searched number 8 per 1/span (analytic: d runs over 1/nfft in steps of
    0.125/span), so a whole table would grow with the file; built GRID_PHASE_TABLE_ELEMENTS at a time its
    peak stays flat, and every offset's sum (hence the result) is the same bits."""
    n = 1024
    short_sp, short_st, alpha = _grid_rows(2e6, n, seed=3)     # fewer offsets than one table slice
    mid_sp, mid_st, _ = _grid_rows(5e7, n, seed=4)             # about 4 slices
    long_sp, long_st, _ = _grid_rows(1e8, n, seed=3)           # about 8 slices
    ref_long, offsets_long = _whole_table_coherence(long_sp, long_st, n)
    span_long = float(long_st.max() - long_st.min() + n)
    assert offsets_long == math.ceil((1.0 / (al.GRID_PAD * n)) / (0.125 / span_long))
    whole_table_mb = offsets_long * 12 * 16 / 2**20        # complex128 offsets x frames
    assert whole_table_mb > 30.0
    got_long, peak_long = _traced_peak_mb(lambda: al.grid_coherence(long_sp, long_st, n))
    got_short, _peak_short = _traced_peak_mb(lambda: al.grid_coherence(short_sp, short_st, n))
    _got_mid, peak_mid = _traced_peak_mb(lambda: al.grid_coherence(mid_sp, mid_st, n))
    assert got_long == ref_long
    assert got_short == _whole_table_coherence(short_sp, short_st, n)[0]
    # the locked line is found (coherence 1 up to the noise; analytic) at its rate
    assert got_long[0] > 0.99 and abs(got_long[1] - alpha) < 0.5 / (al.GRID_PAD * n)
    # peak: one table slice (4 MB) and its complex temporary, plus the offsets themselves (8 bytes each)
    table_slice_mb = al.GRID_PHASE_TABLE_ELEMENTS * 16 / 2**20
    assert peak_long < 3 * table_slice_mb + offsets_long * 8 / 2**20 + 1.0
    assert peak_long < whole_table_mb / 2
    # twice the span, twice the offsets: the peak grows by their 8 bytes each at most, not by the table
    assert peak_long - peak_mid < offsets_long * 8 / 2**20 / 2 + 1.0


def test_loudness_keeps_one_float64_per_100_ms():
    """The meter keeps one float64 sum per 100 ms sub-block (EBU Tech 3342 needs every short-term value
    for the LRA, so they are kept, compactly), in an array that doubles: after 10 minutes at a 1 kHz rate
    (600 s x 10 = 6000 sub-blocks) its capacity is 8192 (1024 doubled three times: analytic)."""
    fs, seconds, p = 1000, 600, 0.25
    meter = ld.LoudnessMeter(fs, (1.0,), kweighting=False)
    power = np.full(fs, p)
    for _ in range(seconds):
        meter.process_power(power)
    s = meter.summary()
    assert meter._nsub == seconds * 10
    assert meter._sub.dtype == np.float64 and meter._sub.size == 8192
    assert s.subblock_sums.dtype == np.float64 and s.subblock_sums.size == seconds * 10
    # constant power p: every 3 s window's mean square is p (analytic), one per boundary k = 30..K
    assert s.short_term_energies.size == seconds * 10 - ld.SUBBLOCKS_PER_SHORT_TERM + 1
    assert np.allclose(s.short_term_energies, p, rtol=1e-12)
    # the 1 ms tick state stays bounded: at most 3 s of ticks kept for the sliding maxima
    assert meter._tail.size <= ld.SHORT_TERM_TICKS - 1
