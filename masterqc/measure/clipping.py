"""Clipping: runs of consecutive samples at the encoding's full-scale code, and overs in float files.

Full scale of integer PCM with ``b`` bits is the most positive code
``(2**(b-1) - 1) / 2**(b-1)`` and the most negative ``-1.0`` (two's complement,
as the reader delivers it).  Float files have no code limit; their full scale
is +-1.0, and samples beyond it are counted as *overs*.

A sample counts as clipped when it lies at or within ``clip_threshold_db`` dB
below full scale on its side.  A *clipped run* is at least
``clip_min_run_samples`` consecutive clipped samples of one polarity in one
channel (default 3: common practice, no source).  Runs are counted per
channel (``clipped_run_count_per_channel``); ``clipped_run_count`` counts
*events*: runs of any channels that overlap or touch in time are one event
(a clip on both channels of a stereo file at one moment is one event, with
both channels named).  Every event is listed and located in time (seconds
from the file start); nothing is capped.
"""

from __future__ import annotations

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import (INTEGER, INTEGER_LIST, INTEGER_OR_NULL, TIME_RANGES, Analyzer,
                                   AnalyzerResult, array_of)
from masterqc.measure.runs import ChannelRuns, RunTracker, channel_names, join_across_channels

RUN_EVENT = {
    "type": "object",
    "required": ["channel", "channels", "start_s", "end_s", "samples", "runs", "polarity"],
    "properties": {"channel": {"type": "string"},
                   "channels": {"type": "array", "items": {"type": "string"}},
                   "start_s": {"type": "number"}, "end_s": {"type": "number"},
                   "samples": {"type": "integer"}, "runs": {"type": "integer"},
                   "polarity": {"enum": ["positive", "negative", "both"]}},
}


def full_scale_levels(bit_depth: int, is_float: bool) -> tuple[float, float]:
    """Return ``(positive, negative)`` full-scale sample values of an encoding (linear, full scale = 1.0).

    Integer PCM of ``b`` bits: ``((2**(b-1) - 1) / 2**(b-1), -1.0)``; float: ``(1.0, -1.0)``.
    """
    if is_float:
        return 1.0, -1.0
    half = float(2 ** (bit_depth - 1))
    return (half - 1.0) / half, -1.0


def clip_levels(bit_depth: int, is_float: bool, threshold_db: float) -> tuple[float, float]:
    """Return ``(upper, lower)``: a sample >= upper or <= lower counts as clipped.

    ``threshold_db`` (>= 0) is how far below full scale a sample still counts as
    clipped; 0 means exactly at the full-scale code.  For integer PCM the
    levels are rounded outwards to the nearest code at or below the distance,
    so that 0 dB selects exactly the full-scale codes.
    """
    if threshold_db < 0:
        raise ValueError(f"clip threshold {threshold_db} dB: must be >= 0 dB below full scale")
    pos, neg = full_scale_levels(bit_depth, is_float)
    factor = 10.0 ** (-threshold_db / 20.0)
    if is_float:
        return pos * factor, neg * factor
    half = float(2 ** (bit_depth - 1))
    # smallest code at or above pos*factor, largest at or below neg*factor
    upper = np.ceil(pos * factor * half - 1e-9) / half
    lower = np.floor(neg * factor * half + 1e-9) / half
    return float(upper), float(lower)


class ClippingAnalyzer(Analyzer):
    """Clipped runs per channel with their times; overs (samples beyond full scale) in float files."""

    name = "clipping"
    measurement_schema = {
        "clipped_run_count": measured(INTEGER, 'count',
            'clipping events: runs of consecutive full-scale samples at least clip_min_run_samples long, '
            'runs of several channels that overlap in time counted once'),
        "clipped_run_count_per_channel": measured(INTEGER_LIST, 'count',
            'clipped runs in each channel'),
        "clipped_sample_count_per_channel": measured(INTEGER_LIST, 'count',
            'samples inside clipped runs in each channel'),
        "clipped_run_longest_samples": measured(INTEGER, 'samples',
            'length of the longest clipped run'),
        "clipped_run_channel_run_count": measured(INTEGER, 'count',
            'clipped runs summed over the channels (a run on two channels at one time counts 2)'),
        "clipped_run_where_s": measured(TIME_RANGES, 's',
            'time ranges of every clipping event'),
        "clipped_run_events": measured(array_of(RUN_EVENT), NO_UNIT,
            'every clipping event, one record each: channels named ("L+R"), start, end, '
            'frames spanned, runs joined, polarity'),
        "over_full_scale_sample_count": measured(INTEGER_OR_NULL, 'count',
            'float files: samples beyond +-1.0; null for integer PCM'),
        "over_full_scale_sample_count_per_channel": measured({"type": ["array", "null"], "items": {"type": "integer"}}, 'count',
            'samples beyond full scale in each channel; null for integer PCM'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        self.min_run = int(options.clip_min_run_samples)
        self.threshold_db = float(options.clip_threshold_db)
        self.upper, self.lower = clip_levels(info.bit_depth, info.is_float, self.threshold_db)
        ch = info.channels
        self.trackers = [RunTracker(self.min_run) for _ in range(ch)]
        self.runs = np.zeros(ch, np.int64)
        self.samples = np.zeros(ch, np.int64)
        self.longest = 0
        self.all_runs = ChannelRuns()
        self.overs = np.zeros(ch, np.int64)

    def _collect(self, c, starts, lengths, labels):
        if starts.size == 0:
            return
        self.runs[c] += starts.size
        self.samples[c] += int(lengths.sum())
        self.longest = max(self.longest, int(lengths.max()))
        self.all_runs.add(c, starts, lengths, labels)

    def _events(self) -> list[dict]:
        fs = self.info.sample_rate_hz
        st, ln, ch, lb = self.all_runs.arrays()
        group, first, ev_s, ev_e, mask = join_across_channels(st, ln, ch, self.info.channels)
        n_ev = first.size
        pos = np.zeros(n_ev, bool)
        neg = np.zeros(n_ev, bool)
        pos[group[lb > 0]] = True
        neg[group[lb < 0]] = True
        runs = np.bincount(group, minlength=n_ev) if n_ev else np.zeros(0, np.int64)
        layout = self.info.channel_layout
        out = []
        for i in range(n_ev):
            names = channel_names(mask[i], layout)
            s, e = int(ev_s[i]), int(ev_e[i])
            out.append({"channel": "+".join(names), "channels": names, "start_s": s / fs, "end_s": e / fs,
                        "samples": e - s, "runs": int(runs[i]),
                        "polarity": "both" if pos[i] and neg[i] else ("positive" if pos[i] else "negative")})
        return out

    def process(self, block):
        if block.size and self.lower < block.min() and block.max() < self.upper:
            # nothing at either clipping level (two reductions, no temporaries), so nothing
            # over full scale either (upper <= 1.0 and lower >= -1.0): close carried runs
            for c, tr in enumerate(self.trackers):
                self._collect(c, *tr.skip(block.shape[0]))
            return
        pos = block >= self.upper
        neg = block <= self.lower
        if self.info.is_float:
            over = np.abs(block) > 1.0
            if over.any():
                self.overs += np.count_nonzero(over, axis=0)
        active = pos | neg
        if not active.any():
            # nothing clipped in this block: close any carried runs cheaply
            for c, tr in enumerate(self.trackers):
                self._collect(c, *tr.skip(block.shape[0]))
            return
        labels = pos.astype(np.int8) - neg.astype(np.int8)
        for c, tr in enumerate(self.trackers):
            self._collect(c, *tr.feed(labels[:, c], active[:, c]))

    def finish(self):
        for c, tr in enumerate(self.trackers):
            self._collect(c, *tr.close())
        events = self._events()
        m = {
            "clipped_run_count": len(events),
            "clipped_run_channel_run_count": int(self.runs.sum()),
            "clipped_run_count_per_channel": self.runs.tolist(),
            "clipped_sample_count_per_channel": self.samples.tolist(),
            "clipped_run_longest_samples": self.longest,
            "clipped_run_where_s": [[e["start_s"], e["end_s"]] for e in events],
            "clipped_run_events": events,
            "over_full_scale_sample_count": int(self.overs.sum()) if self.info.is_float else None,
            "over_full_scale_sample_count_per_channel": self.overs.tolist() if self.info.is_float else None,
        }
        settings = {"min_run_samples": self.min_run, "threshold_below_full_scale_db": self.threshold_db,
                    "upper_level": self.upper, "lower_level": self.lower,
                    "events_listed": "all (no cap)",
                    "event_rule": "runs of any channels that overlap or touch in time form one event"}
        return AnalyzerResult(measurements=m, settings=settings)
