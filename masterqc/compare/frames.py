"""Frames of equal duration in two files at any pair of rates, and a buffered cursor to cut them.

A frame lasts ``T`` seconds in both files, so its DFT bins fall at the same
frequencies ``k / T`` in the master and in the deliverable whatever their rates
(``T = 0.1 s``: 9600 samples at 96 kHz, 4410 at 44.1 kHz, bins every 10 Hz).
``T`` is a whole number of periods of the two rates' greatest common divisor,
so both frame lengths are whole numbers of samples; hops are half a frame
(Hann windows, 50 % overlap).  Cross-spectra and transfer functions then need
no resampler: a sub-sample offset is a linear phase across the bins.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from masterqc.errors import UsageError

#: frame duration aimed at (house choice: 10 Hz bins, 50 ms time resolution of the offset track)
TARGET_FRAME_S = 0.1
#: envelope hop aimed at for the coarse alignment (house choice)
TARGET_ENVELOPE_HOP_S = 0.0025
#: frames of the master kept behind the read position by :class:`Cursor` (seconds)
CURSOR_KEEP_S = 2.0


@dataclass(frozen=True)
class FrameGrid:
    rate_m_hz: int
    rate_d_hz: int
    frame_s: float
    hop_s: float
    n_m: int          # frame length, master samples
    n_d: int          # frame length, deliverable samples
    hop_m: int
    hop_d: int
    env_hop_s: float
    env_hop_m: int
    env_hop_d: int

    @property
    def common_bins(self) -> int:
        """Bins 0 .. K-1 lie below both Nyquist frequencies (the lower Nyquist bin itself excluded)."""
        return min(self.n_m, self.n_d) // 2

    @property
    def bin_hz(self) -> float:
        return 1.0 / self.frame_s


def frame_grid(rate_m_hz: int, rate_d_hz: int) -> FrameGrid:
    """The frame and envelope grids shared by two rates; UsageError when the rates share no usable grid."""
    g = math.gcd(int(rate_m_hz), int(rate_d_hz))
    hop_units = max(1, round(TARGET_FRAME_S / 2 * g))
    hop_s = hop_units / g
    if not 0.02 <= hop_s <= 0.2:
        raise UsageError(f"sample rates {rate_m_hz} Hz and {rate_d_hz} Hz share no time grid near "
                         f"{TARGET_FRAME_S / 2:g} s (greatest common divisor {g} Hz); compare needs rates "
                         "whose common divisor is at least 10 Hz")
    env_units = max(1, round(TARGET_ENVELOPE_HOP_S * g))
    return FrameGrid(
        rate_m_hz=int(rate_m_hz), rate_d_hz=int(rate_d_hz), frame_s=2 * hop_s, hop_s=hop_s,
        n_m=2 * hop_units * rate_m_hz // g, n_d=2 * hop_units * rate_d_hz // g,
        hop_m=hop_units * rate_m_hz // g, hop_d=hop_units * rate_d_hz // g,
        env_hop_s=env_units / g, env_hop_m=env_units * rate_m_hz // g, env_hop_d=env_units * rate_d_hz // g)


def hann(n: int) -> np.ndarray:
    """Periodic Hann window of ``n`` samples (the same continuous window at every rate)."""
    return 0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(n) / n)


class Cursor:
    """Cut arbitrary stretches ``[start, start + n)`` out of a stream read once, in order.

    Positions may move back by up to :data:`CURSOR_KEEP_S`; samples before the
    first or after the last frame are zeros.  Memory: the kept stretch plus one
    block.
    """

    def __init__(self, stream, block_frames: int = 65536):
        self.info = stream.info
        self.frames = stream.info.frames
        self.channels = stream.info.channels
        self._gen = stream.blocks(block_frames)
        # samples [self._start, self._start + self._len) live in self._arr[self._off:self._off + self._len];
        # blocks are copied into free room at the end, and the kept stretch moves to the front only when
        # the room runs out (each sample is copied a bounded number of times)
        self._arr = np.zeros((0, self.channels))
        self._off = 0
        self._len = 0
        self._start = 0
        self._eof = False
        self._keep = int(CURSOR_KEEP_S * stream.info.sample_rate_hz)

    def _append(self, block: np.ndarray) -> None:
        n = block.shape[0]
        if self._off + self._len + n > self._arr.shape[0]:
            need = self._len + n
            if need <= self._arr.shape[0] // 2:
                self._arr[:self._len] = self._arr[self._off:self._off + self._len]
            else:
                grown = np.empty((max(2 * need, 4 * n), self.channels))
                grown[:self._len] = self._arr[self._off:self._off + self._len]
                self._arr = grown
            self._off = 0
        self._arr[self._off + self._len:self._off + self._len + n] = block
        self._len += n

    def get(self, start: int, n: int) -> np.ndarray:
        start, n = int(start), int(n)
        end = start + n
        lo = max(start, 0)
        hi = min(end, self.frames)
        while not self._eof and self._start + self._len < hi:
            try:
                block = next(self._gen)
            except StopIteration:
                self._eof = True
                break
            self._append(block)
        if lo < self._start and lo < hi:
            raise RuntimeError(f"cursor asked for frame {lo}, already released (kept from {self._start})")
        base = self._off - self._start
        if lo == start and hi == end:   # wholly inside the file: a view of the buffer (callers never write)
            out = self._arr[base + lo:base + hi]
        else:
            out = np.zeros((n, self.channels))
            if lo < hi:
                out[lo - start:hi - start] = self._arr[base + lo:base + hi]
        drop = min(max(0, start - self._keep) - self._start, self._len)
        if drop > 0:
            self._off += drop
            self._len -= drop
            self._start += drop
        return out


def fractional_delay_taps(mu: float, length: int = 96, beta: float = 10.0) -> np.ndarray:
    """Kaiser-windowed sinc taps that read a signal ``mu`` (0 <= mu < 1) samples after its grid.

    ``y[n] = sum_j taps[j] * x[n + j - (length/2 - 1)]`` is ``x`` at ``n + mu``.
    With 96 taps and beta 10 the error is below -100 dB up to 0.4 of the rate
    (computed from the taps' response; the window's usual trade-off).
    """
    half = length // 2
    j = np.arange(length) - (half - 1) - mu
    w = np.i0(beta * np.sqrt(np.clip(1.0 - (j / half) ** 2, 0.0, None))) / np.i0(beta)
    taps = np.sinc(j) * w
    return taps / taps.sum()
