"""DC offset per channel and the share of energy below 20 Hz.

DC offset is the mean sample value of a channel over the whole file, in dBFS
(``20*log10(|mean|)``, full scale = 1.0); a mean of exactly zero has no level
(null).  The sign is kept separately (``+1``/``-1``/``0``).

Energy below 20 Hz is the mean square of the channel after a low-pass at
20 Hz, relative to the mean square of the unfiltered channel, in dB; DC counts
as energy below 20 Hz.  To keep the cost small the channel is first decimated
to about 1 kHz by a linear-phase FIR (Kaiser window, about 100 dB stop-band
from 900 Hz, flat to well above 20 Hz, state carried across blocks), then an
8th-order Butterworth low-pass at 20 Hz runs at the low rate (-48 dB at 40 Hz,
-70 dB at 55 Hz), so the bass of a normal mix does not read as sub-sonic
energy.
"""

from __future__ import annotations

import math

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.filterdesign import butterworth_lowpass_sos, kaiser_lowpass_fir
from masterqc.measure.iir import sosfilt
from masterqc.measure.levels import amplitude_db, power_ratio_db
from masterqc.measure.base import (INTEGER_LIST, NUMBER_OR_NULL, NUMBER_OR_NULL_LIST, Analyzer,
                                   AnalyzerResult)
from masterqc.measure.runs import row_ones

SUBSONIC_EDGE_HZ = 20.0
SUBSONIC_ORDER = 8
#: the channel is decimated to about this rate before the 20 Hz low-pass
LOW_RATE_HZ = 1000.0
#: decimating FIR: taps per polyphase branch (length = TAPS_PER_PHASE * factor) and Kaiser beta
TAPS_PER_PHASE = 8
KAISER_BETA = 10.0
#: at the end of the file both filters are run out on this much silence, so the energy they
#: still hold (delay and ringing of the last samples) is counted (about 12 time constants
#: of the slowest 20 Hz pole)
FLUSH_S = 0.5
#: decimated samples collected before the 20 Hz low-pass runs on them
LOW_BATCH = 16384


class Decimator:
    """Streaming decimation of blocks by an integer factor with a linear-phase FIR.

    ``factor = max(1, fs // LOW_RATE_HZ)``; the FIR (``TAPS_PER_PHASE * factor``
    taps, cut-off at half the output rate, DC gain 1) runs in polyphase form on
    each channel's rows of ``factor`` frames: one matrix product per block gives
    every row's product with every branch (``P[j, b] = row_j . hq[b]``), and
    output ``k`` is ``sum over b of P[k + b, b]`` (branches added in order 0 ..
    TAPS_PER_PHASE - 1).  The products of the last ``TAPS_PER_PHASE - 1`` rows
    and the frames left over that do not fill a row carry across blocks, so the
    output never depends on the block size.  :meth:`process_rows` takes
    (channels, frames) blocks, :meth:`process` (frames, channels) ones; both
    return the decimated samples as (channels, k).
    """

    def __init__(self, fs: float, channels: int):
        self.factor = max(1, int(fs // LOW_RATE_HZ))
        self.rate_hz = fs / self.factor
        self.channels = channels
        d, q = self.factor, TAPS_PER_PHASE
        if d > 1:
            h = kaiser_lowpass_fir(q * d, self.rate_hz / 2.0, fs, KAISER_BETA)
            self.hq_t = np.ascontiguousarray(h.reshape(q, d).T)      # (factor, branches)
            self.carry = np.zeros((channels, q - 1, q))              # branch products of the last rows
            self.rest = np.zeros((channels, 0))                      # frames not yet filling a row

    def process(self, block: np.ndarray) -> np.ndarray:
        return self.process_rows(block.T)

    def process_rows(self, rows: np.ndarray) -> np.ndarray:
        if self.factor == 1:
            return rows
        d, q, c = self.factor, TAPS_PER_PHASE, self.channels
        r, n = self.rest.shape[1], rows.shape[1]
        g = (r + n) // d
        if g == 0:
            self.rest = np.concatenate((self.rest, rows), axis=1)
            return np.zeros((c, 0))
        used = g * d - r                   # frames of this block that fill whole rows (> 0)
        parts = [self.carry]
        if r:                              # the row the left-over frames start
            parts.append((np.concatenate((self.rest, rows[:, :d - r]), axis=1) @ self.hq_t)[:, None, :])
        body = rows[:, used - (g - (1 if r else 0)) * d:used]
        if body.shape[1]:                  # whole rows of this block: a (channels, rows, factor) view
            parts.append(body.reshape(c, -1, d) @ self.hq_t)
        p = np.concatenate(parts, axis=1)  # (channels, q - 1 + g, branches)
        self.rest = rows[:, used:].copy()
        y = p[:, 0:g, 0].copy()
        for b in range(1, q):
            y += p[:, b:b + g, b]
        self.carry = p[:, g:, :].copy()
        return y


#: ``20*log10(|value|)`` in dBFS, or None for exactly zero
level_dbfs = amplitude_db
#: ``10*log10(part/total)`` in dB, or None when either energy is zero
energy_ratio_db = power_ratio_db


class DcOffsetAnalyzer(Analyzer):
    """Mean (DC) level per channel in dBFS and energy below 20 Hz relative to the total, in dB."""

    name = "dc_offset"
    measurement_schema = {
        "dc_offset_dbfs": measured(NUMBER_OR_NULL, 'dbfs',
            'mean level (DC) of the worst channel; null when every mean is exactly zero'),
        "dc_offset_dbfs_per_channel": measured(NUMBER_OR_NULL_LIST, 'dbfs',
            'mean level of each channel'),
        "dc_offset_sign_per_channel": measured(INTEGER_LIST, NO_UNIT,
            "sign of each channel's mean (-1, 0, +1)"),
        "subsonic_energy_db": measured(NUMBER_OR_NULL, 'db',
            "energy below 20 Hz relative to the channel's total, worst channel"),
        "subsonic_energy_db_per_channel": measured(NUMBER_OR_NULL_LIST, 'db',
            'energy below 20 Hz relative to the total, each channel'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        ch = info.channels
        self.sum = np.zeros(ch)
        self.sumsq = np.zeros(ch)
        self.low_sumsq = np.zeros(ch)
        self.frames = 0
        self.decimator = Decimator(info.sample_rate_hz, ch)
        self.sos = butterworth_lowpass_sos(SUBSONIC_ORDER, SUBSONIC_EDGE_HZ, self.decimator.rate_hz)
        self.zi = np.zeros((self.sos.shape[0], ch, 2))
        self.pending = []
        self.pending_n = 0

    def _low(self, y, flush=False):
        """Queue decimated samples (channels, k); filter them in batches (fewer calls, same result)."""
        if y.shape[1]:
            self.pending.append(y)
            self.pending_n += y.shape[1]
        if self.pending_n and (flush or self.pending_n >= LOW_BATCH):
            y = np.concatenate(self.pending, axis=1) if len(self.pending) > 1 else self.pending[0]
            self.pending, self.pending_n = [], 0
            low, self.zi = sosfilt(self.sos, y, axis=-1, zi=self.zi)
            self.low_sumsq += np.einsum("ij,ij->i", low, low) * self.decimator.factor

    #: the engine hands it (channels, frames) blocks: each channel's sums run along a
    #: contiguous row, and the decimator reads its rows of ``factor`` frames from them
    planar_input = True

    def process(self, block):
        """A (frames, channels) block: transposed once, then as :meth:`process_planar`."""
        self.process_planar(np.ascontiguousarray(np.asarray(block).T))

    def process_planar(self, rows):
        """A (channels, frames) block.  Sum and sum of squares per row (float64; the order of
        the additions is BLAS's and einsum's own, so the last bits may differ from a column
        sum of the interleaved block: a relative difference of the order of 1e-16 * sqrt(n))."""
        n = rows.shape[1]
        self.frames += n
        self.sum += rows @ row_ones(n)
        self.sumsq += np.einsum("ij,ij->i", rows, rows)
        self._low(self.decimator.process_rows(rows))

    def finish(self):
        dec = self.decimator
        ch = self.info.channels
        if self.frames:
            self._low(dec.process_rows(np.zeros((ch, (TAPS_PER_PHASE + 1) * dec.factor))))
            self._low(np.zeros((ch, int(FLUSH_S * dec.rate_hz))), flush=True)
        mean = self.sum / max(self.frames, 1)
        per = [level_dbfs(x) for x in mean]
        sub = [energy_ratio_db(lo, tot) for lo, tot in zip(self.low_sumsq, self.sumsq)]
        known = [x for x in per if x is not None]
        known_sub = [x for x in sub if x is not None]
        m = {
            "dc_offset_dbfs": max(known) if known else None,
            "dc_offset_dbfs_per_channel": per,
            "dc_offset_sign_per_channel": [int(np.sign(x)) for x in mean],
            "subsonic_energy_db": max(known_sub) if known_sub else None,
            "subsonic_energy_db_per_channel": sub,
        }
        settings = {"subsonic_filter": f"decimation by {dec.factor} to {dec.rate_hz:g} Hz "
                                       f"(Kaiser FIR, {TAPS_PER_PHASE * dec.factor} taps), then Butterworth "
                                       f"low-pass, order {SUBSONIC_ORDER}, {SUBSONIC_EDGE_HZ:g} Hz"}
        return AnalyzerResult(measurements=m, settings=settings)
