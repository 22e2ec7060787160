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
from masterqc.measure.runs import column_sum

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
    """Streaming decimation of (frames, channels) blocks by an integer factor with a linear-phase FIR.

    ``factor = max(1, fs // LOW_RATE_HZ)``; the FIR (``TAPS_PER_PHASE * factor``
    taps, cut-off at half the output rate, DC gain 1) runs as polyphase
    matrix-vector products on each channel's rows of ``factor`` frames.
    :meth:`process` returns the decimated samples as (channels, k); the state
    (left-over frames, last FIR rows) carries across blocks, so the output
    never depends on the block size.
    """

    def __init__(self, fs: float, channels: int):
        self.factor = max(1, int(fs // LOW_RATE_HZ))
        self.rate_hz = fs / self.factor
        self.channels = channels
        d, q = self.factor, TAPS_PER_PHASE
        if d > 1:
            h = kaiser_lowpass_fir(q * d, self.rate_hz / 2.0, fs, KAISER_BETA)
            self.hq = np.ascontiguousarray(h.reshape(q, d))
            self.tail = np.zeros((channels, q - 1, d))
            self.rest = np.zeros((0, channels))

    def _fir(self, rows: np.ndarray, n_out: int) -> np.ndarray:
        """``y[c, k] = sum over branches b of rows[c, k + b] . hq[b]`` for k < n_out."""
        y = rows[:, 0:n_out] @ self.hq[0]
        for b in range(1, TAPS_PER_PHASE):
            y += rows[:, b:b + n_out] @ self.hq[b]
        return y

    def process(self, block: np.ndarray) -> np.ndarray:
        if self.factor == 1:
            return block.T
        d, q, c = self.factor, TAPS_PER_PHASE, self.channels
        r = self.rest.shape[0]
        g = (r + block.shape[0]) // d
        if g == 0:
            self.rest = np.concatenate((self.rest, block))
            return np.zeros((c, 0))
        # the left-over frames and the block, transposed into per-channel rows in one copy
        used = g * d - r                   # frames of this block that fill whole rows (> 0)
        flat = np.empty((c, g * d))
        flat[:, :r] = self.rest.T
        flat[:, r:] = block[:used].T
        self.rest = block[used:].copy()
        rows = flat.reshape(c, g, d)
        if g < 2 * q:
            seq = np.concatenate((self.tail, rows), axis=1)
            y = self._fir(seq, g)
            self.tail = seq[:, -(q - 1):].copy()
            return y
        # outputs 0..q-2 reach back into the carried rows; the rest use this block's rows only
        head = self._fir(np.concatenate((self.tail, rows[:, :q - 1]), axis=1), q - 1)
        body = self._fir(rows, g - q + 1)
        self.tail = rows[:, -(q - 1):].copy()
        return np.concatenate((head, body), axis=1)


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

    def process(self, block):
        self.frames += block.shape[0]
        self.sum += column_sum(block)
        self.sumsq += column_sum(block * block)
        self._low(self.decimator.process(block))

    def finish(self):
        dec = self.decimator
        ch = self.info.channels
        if self.frames:
            self._low(dec.process(np.zeros(((TAPS_PER_PHASE + 1) * dec.factor, ch))))
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
