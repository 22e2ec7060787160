"""DC offset per channel and the share of energy below 20 Hz.

DC offset is the mean sample value of a channel over the whole file, in dBFS
(``20*log10(|mean|)``, full scale = 1.0); a mean of exactly zero has no level
(null).  The sign is kept separately (``+1``/``-1``/``0``).

Energy below 20 Hz is the mean square of the channel after a 4th-order
Butterworth low-pass at 20 Hz (state carried across blocks), relative to the
mean square of the unfiltered channel, in dB.  DC counts as energy below
20 Hz.  The filter lets through -24 dB at 40 Hz and -48 dB at 80 Hz, so a mix
with strong bass reads a little above its true sub-20 Hz share; the figure
is meant to find rumble, DC and sub-sonic build-up, not to measure bass.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import signal

from masterqc.measure.base import (INTEGER_LIST, NUMBER_OR_NULL, NUMBER_OR_NULL_LIST, Analyzer,
                                   AnalyzerResult)
from masterqc.measure.runs import column_sum

SUBSONIC_EDGE_HZ = 20.0
SUBSONIC_ORDER = 4


def level_dbfs(value: float) -> float | None:
    """``20*log10(|value|)`` in dBFS, or None for exactly zero."""
    value = abs(float(value))
    return 20.0 * math.log10(value) if value > 0.0 else None


def energy_ratio_db(part: float, total: float) -> float | None:
    """``10*log10(part/total)`` in dB, or None when either energy is zero."""
    if total <= 0.0 or part <= 0.0:
        return None
    return 10.0 * math.log10(part / total)


class DcOffsetAnalyzer(Analyzer):
    """Mean (DC) level per channel in dBFS and energy below 20 Hz relative to the total, in dB."""

    name = "dc_offset"
    measurement_schema = {
        "dc_offset_dbfs": NUMBER_OR_NULL,
        "dc_offset_dbfs_per_channel": NUMBER_OR_NULL_LIST,
        "dc_offset_sign_per_channel": INTEGER_LIST,
        "subsonic_energy_db": NUMBER_OR_NULL,
        "subsonic_energy_db_per_channel": NUMBER_OR_NULL_LIST,
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        ch = info.channels
        self.sum = np.zeros(ch)
        self.sumsq = np.zeros(ch)
        self.low_sumsq = np.zeros(ch)
        self.frames = 0
        self.sos = signal.butter(SUBSONIC_ORDER, SUBSONIC_EDGE_HZ, btype="lowpass",
                                 fs=info.sample_rate_hz, output="sos")
        self.zi = np.zeros((self.sos.shape[0], 2, ch))

    def process(self, block):
        self.frames += block.shape[0]
        self.sum += column_sum(block)
        self.sumsq += column_sum(block * block)
        low, self.zi = signal.sosfilt(self.sos, block, axis=0, zi=self.zi)
        self.low_sumsq += column_sum(low * low)

    def finish(self):
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
        settings = {"subsonic_filter": f"Butterworth low-pass, order {SUBSONIC_ORDER}, "
                                       f"{SUBSONIC_EDGE_HZ:g} Hz, second-order sections"}
        return AnalyzerResult(measurements=m, settings=settings)
