"""Effective bit depth: how many bits of resolution the samples actually use.

Every sample value is ``k / 2**(n-1)`` for some integer ``k`` and smallest
``n``; the effective bit depth of a channel is the largest such ``n`` over
all its non-zero samples.  Integer PCM arrives from the reader as
``code / 2**(bits-1)`` exactly, so a 24-bit file carrying 16-bit audio padded
with zeros (the 8 low bits of every code zero) reads 16.  For integer PCM the
figure is computed from the OR of the integer codes (trailing zero bits); for
float files from the exponent and mantissa of every sample (``numpy.frexp``),
so a float file carrying 24-bit integers reads 24.  A float file whose values
lie on no grid of at most 32 bits reads its container depth (32 or 64): it
uses float resolution.  A channel without a single non-zero sample has no
effective depth (null).
"""

from __future__ import annotations

import numpy as np

from masterqc.contract import measured
from masterqc.measure.base import INTEGER_OR_NULL, Analyzer, AnalyzerResult, array_of

#: a float file whose grid is finer than this reads its container depth
FLOAT_GRID_MAX_BITS = 32


def lowest_bit_exponent(x: np.ndarray) -> np.ndarray:
    """Per column, the smallest exponent ``e`` such that a non-zero value has its lowest set bit at ``2**e``.

    Returns int64 per column; a column holding no non-zero finite value gives
    ``2**62`` (internal only: :class:`BitDepthAnalyzer` turns it into null).
    """
    mant, exp = np.frexp(x)  # x = mant * 2**exp, 0.5 <= |mant| < 1
    m = np.abs(mant * 2.0 ** 53).astype(np.int64)  # exact integer mantissa (53 bits)
    low = m & -m  # lowest set bit (0 for zero)
    _lm, lexp = np.frexp(low.astype(np.float64))  # low = 2**(lexp-1)
    e = exp.astype(np.int64) - 53 + (lexp.astype(np.int64) - 1)
    e = np.where((m != 0) & np.isfinite(x), e, np.int64(2 ** 62))
    return e.min(axis=0)


class BitDepthAnalyzer(Analyzer):
    """Effective bit depth per channel (bits actually used) and for the file (largest over channels)."""

    name = "bit_depth"
    measurement_schema = {
        "effective_bit_depth_bits": measured(INTEGER_OR_NULL, 'bits',
            'bits of resolution the highest non-silent channel uses; null when all silent'),
        "effective_bit_depth_bits_per_channel": measured(array_of(INTEGER_OR_NULL), 'bits',
            'bits of resolution each channel uses; null for a silent channel'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        ch = info.channels
        self.scale = float(2 ** (info.bit_depth - 1))
        self.ored = np.zeros(ch, np.int64)          # PCM: OR of the codes
        self.min_exp = np.full(ch, 2 ** 62, np.int64)  # float: smallest lowest-bit exponent

    def process(self, block):
        # once every channel uses its full resolution the answer cannot change: skip the work
        if self.info.is_float:
            if (self.min_exp < 1 - FLOAT_GRID_MAX_BITS).all():
                return
            self.min_exp = np.minimum(self.min_exp, lowest_bit_exponent(block))
        else:
            if (self.ored & 1).all():
                return
            codes = (block * self.scale).astype(np.int64)  # exact: block holds code / 2**(bits-1)
            self.ored |= np.bitwise_or.reduce(codes, axis=0)

    def _channel_depth(self, c) -> int | None:
        bits = self.info.bit_depth
        if self.info.is_float:
            e = int(self.min_exp[c])
            if e == 2 ** 62:
                return None
            n = 1 - e  # values are k / 2**(n-1)
            return max(n, 1) if n <= FLOAT_GRID_MAX_BITS else bits
        v = int(self.ored[c])
        if v == 0:
            return None
        tz = (v & -v).bit_length() - 1
        return bits - tz

    def finish(self):
        per = [self._channel_depth(c) for c in range(self.info.channels)]
        known = [x for x in per if x is not None]
        m = {"effective_bit_depth_bits": max(known) if known else None,
             "effective_bit_depth_bits_per_channel": per}
        return AnalyzerResult(measurements=m, settings={"method": "float grid (frexp)" if self.info.is_float
                                                        else "OR of integer codes"})
