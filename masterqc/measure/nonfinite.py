"""Non-finite samples (NaN, +Inf, -Inf) in float files.

Integer PCM cannot hold a non-finite value, so its count is 0 by construction.
This analyzer sees the blocks as read (``raw_input``); every other analyzer
gets non-finite samples replaced by 0.0 by the engine, so the rest of the
measurement still completes.  The first positions are kept with their
channel, frame index and time (seconds from the file start).
"""

from __future__ import annotations

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import INTEGER, INTEGER_LIST, TIME_RANGES, Analyzer, AnalyzerResult, array_of
from masterqc.measure.runs import FrameRanges

#: how many positions are kept for the report (the counts stay exact)
FIRST_POSITIONS = 20

POSITION = {
    "type": "object",
    "required": ["channel", "frame", "time_s", "kind"],
    "properties": {"channel": {"type": "string"}, "frame": {"type": "integer"},
                   "time_s": {"type": "number"}, "kind": {"enum": ["nan", "+inf", "-inf"]}},
}


class NonFiniteAnalyzer(Analyzer):
    """Counts of NaN and infinite samples per channel, with the first positions."""

    name = "nonfinite"
    raw_input = True
    measurement_schema = {
        "nonfinite_sample_count": measured(INTEGER, 'count',
            'NaN and infinite samples, all channels'),
        "nonfinite_sample_count_per_channel": measured(INTEGER_LIST, 'count',
            'non-finite samples in each channel'),
        "nan_sample_count": measured(INTEGER, 'count',
            'NaN samples'),
        "inf_sample_count": measured(INTEGER, 'count',
            'infinite samples'),
        "nonfinite_first_positions": measured(array_of(POSITION), NO_UNIT,
            'the first non-finite samples (kind, channel, frame, time)'),
        "nonfinite_where_s": measured(TIME_RANGES, 's',
            'every time range holding non-finite samples (any channel; consecutive frames join)'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        ch = info.channels
        self.per_channel = np.zeros(ch, np.int64)
        self.nan = 0
        self.inf = 0
        self.first = []
        self.where = FrameRanges(1)
        self.pos = 0

    def process(self, block):
        if self.info.is_float:
            bad = ~np.isfinite(block)
            if bad.any():
                self.per_channel += bad.sum(axis=0)
                self.where.add(np.flatnonzero(bad.any(axis=1)) + self.pos)
                isnan = np.isnan(block)
                self.nan += int(isnan.sum())
                self.inf += int(bad.sum()) - int(isnan.sum())
                room = FIRST_POSITIONS - len(self.first)
                if room > 0:
                    frames, chans = np.nonzero(bad)  # row-major: ordered by frame, then channel
                    fs = self.info.sample_rate_hz
                    for f, c in zip(frames[:room].tolist(), chans[:room].tolist()):
                        v = block[f, c]
                        kind = "nan" if np.isnan(v) else ("+inf" if v > 0 else "-inf")
                        frame = self.pos + f
                        self.first.append({"channel": self.info.channel_layout[c], "frame": frame,
                                           "time_s": frame / fs, "kind": kind})
        self.pos += block.shape[0]

    def finish(self):
        fs = self.info.sample_rate_hz
        m = {
            "nonfinite_sample_count": int(self.per_channel.sum()),
            "nonfinite_sample_count_per_channel": self.per_channel.tolist(),
            "nan_sample_count": self.nan,
            "inf_sample_count": self.inf,
            "nonfinite_first_positions": self.first,
            "nonfinite_where_s": [[int(a) / fs, (int(b) + 1) / fs] for a, b in zip(*self.where.finish()[:2])],
        }
        return AnalyzerResult(measurements=m, settings={"positions_kept": FIRST_POSITIONS})
