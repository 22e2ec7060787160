"""Silence at head and tail, and dropouts in the middle of the file.

Head and tail silence: a frame is *near-silent* when every channel's
``|sample|`` is at or below ``silence_threshold_dbfs`` (a sample-peak
criterion, full scale = 1.0), and *digitally silent* when every channel is
exactly zero.  ``head_silence_s`` is the time from the file start to the first
frame that is not near-silent, ``tail_silence_s`` the time from the end of the
last such frame to the file end (both equal the duration for a file that is
near-silent throughout); the ``..._digital_silence_s`` keys do the same for
exact zeros.

A *dropout* is a run, in one channel, of at least ``dropout_min_s`` of one
repeated sample value that neither touches the file start nor the file end:
digital silence (the value 0) or a frozen value.  Runs at the clipping
levels are clipping, not dropouts, and are left out.  Runs are counted per
channel (``dropout_count_per_channel``); ``dropout_count`` counts *events*:
runs of any channels that overlap or touch in time are one dropout, with the
channels named (a 50 ms mute on both channels of a stereo file is one
dropout on L+R).  Every event is listed; nothing is capped.
"""

from __future__ import annotations

import math

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import (INTEGER, INTEGER_LIST, NUMBER, NUMBER_OR_NULL, TIME_RANGES,
                                   Analyzer, AnalyzerResult, array_of)
from masterqc.measure.blockstats import active_positions
from masterqc.measure.clipping import clip_levels
from masterqc.measure.runs import ChannelRuns, RunTracker, channel_names, join_across_channels

DROPOUT_EVENT = {
    "type": "object",
    "required": ["channel", "channels", "start_s", "end_s", "kind", "value"],
    "properties": {"channel": {"type": "string"},
                   "channels": {"type": "array", "items": {"type": "string"}},
                   "start_s": {"type": "number"},
                   "end_s": {"type": "number"}, "kind": {"enum": ["silence", "frozen", "mixed"]},
                   "value": {"type": "number"}},
}


#: frames in the first piece :func:`_edge_frame` looks at (each next piece is 4x longer)
EDGE_PIECE_FRAMES = 1024


def _edge_frame(block, level: float, from_end: bool, planar: bool = False):
    """Index of the last (``from_end``) or first frame of a (frames, channels) block
    (``planar``: a (channels, frames) block) where ``|x| > level`` in any channel, or None
    when there is none."""
    c, n = block.shape if planar else block.shape[::-1]
    size, done = EDGE_PIECE_FRAMES, 0
    while done < n:
        k = min(size, n - done)
        start = n - done - k if from_end else done
        if planar:
            hit = np.flatnonzero((np.abs(block[:, start:start + k]) > level).any(axis=0))
        else:
            hit = np.flatnonzero(np.abs(block[start:start + k]).ravel() > level) // c
        if hit.size:
            return start + int(hit[-1] if from_end else hit[0])
        done += k
        size *= 4
    return None


class SilenceAnalyzer(Analyzer):
    """Head and tail silence (near and digital) and mid-file dropouts (silence or frozen values)."""

    name = "silence"
    measurement_schema = {
        "head_silence_s": measured(NUMBER, 's',
            'near-silence at the start (every channel at or below silence_threshold_dbfs)'),
        "tail_silence_s": measured(NUMBER, 's',
            'near-silence at the end'),
        "head_digital_silence_s": measured(NUMBER, 's',
            'digital silence (exact zeros) at the start'),
        "tail_digital_silence_s": measured(NUMBER, 's',
            'digital silence (exact zeros) at the end'),
        "dropout_count": measured(INTEGER, 'count',
            'dropouts: mid-file runs of digital silence or of a frozen value, runs of several channels '
            'that overlap in time counted once'),
        "dropout_count_per_channel": measured(INTEGER_LIST, 'count',
            'dropout runs in each channel'),
        "dropout_channel_run_count": measured(INTEGER, 'count',
            'dropout runs summed over the channels (a mute on two channels at one time counts 2)'),
        "dropout_longest_s": measured(NUMBER_OR_NULL, 's',
            'longest dropout (its span across channels); null when there is none'),
        "dropout_where_s": measured(TIME_RANGES, 's',
            'time ranges of every dropout'),
        "dropout_events": measured(array_of(DROPOUT_EVENT), NO_UNIT,
            'every dropout, one record each: channels named ("L+R"), start, end, kind '
            '(silence, frozen, or mixed when its channels differ), value of its first run'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        self.fs = info.sample_rate_hz
        self.threshold_dbfs = float(options.silence_threshold_dbfs)
        self.threshold = 10.0 ** (self.threshold_dbfs / 20.0)
        self.dropout_min_s = float(options.dropout_min_s)
        if not self.dropout_min_s > 0:
            raise ValueError(f"dropout_min_s {self.dropout_min_s}: must be > 0 s")
        self.min_len = max(2, int(math.ceil(self.dropout_min_s * self.fs - 1e-9)))
        self.upper, self.lower = clip_levels(info.bit_depth, info.is_float, float(options.clip_threshold_db))
        self.pos = 0
        # first/last frame index that is not near-silent / not digitally silent
        self.first_loud = None
        self.last_loud = None
        self.first_nonzero = None
        self.last_nonzero = None
        ch = info.channels
        self.trackers = [RunTracker(self.min_len) for _ in range(ch)]
        self.prev = np.full(ch, np.nan)  # last sample of the previous block, per channel
        self.counts = np.zeros(ch, np.int64)
        self.all_runs = ChannelRuns()
        self.longest = 0                 # frames of the longest event

    def _collect(self, c, starts, lengths, values):
        if starts.size == 0:
            return
        keep = (starts > 0) & (values < self.upper) & (values > self.lower)
        starts, lengths, values = starts[keep], lengths[keep], values[keep]
        if starts.size == 0:
            return
        self.counts[c] += starts.size
        self.all_runs.add(c, starts, lengths, values)

    def _events(self) -> list[dict]:
        st, ln, ch, val = self.all_runs.arrays()
        group, first, ev_s, ev_e, mask = join_across_channels(st, ln, ch, self.info.channels)
        n_ev = first.size
        silent = np.zeros(n_ev, bool)
        frozen = np.zeros(n_ev, bool)
        silent[group[val == 0.0]] = True
        frozen[group[val != 0.0]] = True
        layout = self.info.channel_layout
        out = []
        for i in range(n_ev):
            names = channel_names(mask[i], layout)
            kind = "mixed" if silent[i] and frozen[i] else ("silence" if silent[i] else "frozen")
            self.longest = max(self.longest, int(ev_e[i] - ev_s[i]))
            out.append({"channel": "+".join(names), "channels": names, "start_s": int(ev_s[i]) / self.fs,
                        "end_s": int(ev_e[i]) / self.fs, "kind": kind, "value": float(val[first[i]]) + 0.0})
        return out

    def _extent(self, block, level, what):
        """Update the first/last frame index where ``|x| > level`` in any channel.

        Scans from the block's end (and, until one is found, from its start) in
        growing pieces, so a block with sound near both ends costs little."""
        last = _edge_frame(block, level, from_end=True)
        if last is None:
            return
        setattr(self, "last_" + what, self.pos + last)
        if getattr(self, "first_" + what) is None:
            setattr(self, "first_" + what, self.pos + _edge_frame(block, level, from_end=False))

    #: the engine hands it (channels, frames) blocks: each channel's runs are found on a contiguous row
    planar_input = True

    def process_planar(self, rows):
        """A (channels, frames) block: the same comparisons as :meth:`process`, row by row."""
        n = rows.shape[1]
        last = _edge_frame(rows, self.threshold, from_end=True, planar=True)
        if last is not None:
            self.last_loud = self.pos + last
            if self.first_loud is None:
                self.first_loud = self.pos + _edge_frame(rows, self.threshold, from_end=False, planar=True)
        last = _edge_frame(rows, 0.0, from_end=True, planar=True)
        if last is not None:
            self.last_nonzero = self.pos + last
            if self.first_nonzero is None:
                self.first_nonzero = self.pos + _edge_frame(rows, 0.0, from_end=False, planar=True)
        for c, tr in enumerate(self.trackers):      # the positions process() finds from its masks
            self._collect(c, *tr.feed_positions(rows[c], active_positions(rows[c], self.prev[c])))
        self.prev = rows[:, -1].copy()
        self.pos += n

    def process(self, block):
        n = block.shape[0]
        self._extent(block, self.threshold, "loud")
        self._extent(block, 0.0, "nonzero")
        # frozen runs: sample i belongs to a run when it equals a neighbour (labels = values)
        eq = np.empty_like(block, dtype=bool)
        eq[0] = block[0] == self.prev
        if n > 1:
            np.equal(block[1:], block[:-1], out=eq[1:])
        # a sample is active when it equals its predecessor or its successor; runs of equal
        # values are then joined by the tracker, which compares labels
        active = eq.copy()
        active[:-1] |= eq[1:]
        # the last sample may start a run that continues into the next block
        active[-1] = True
        for c, tr in enumerate(self.trackers):
            self._collect(c, *tr.feed(block[:, c], active[:, c]))
        self.prev = block[-1].copy()
        self.pos += n

    def _span(self, first, last):
        total = self.pos
        if first is None:
            return total / self.fs, total / self.fs
        return first / self.fs, (total - (last + 1)) / self.fs

    def finish(self):
        # a run still open at the file end touches the tail: tail silence, not a dropout
        for tr in self.trackers:
            tr.close()
        head, tail = self._span(self.first_loud, self.last_loud)
        dhead, dtail = self._span(self.first_nonzero, self.last_nonzero)
        events = self._events()
        longest = self.longest / self.fs if events else None
        m = {
            "head_silence_s": head,
            "tail_silence_s": tail,
            "head_digital_silence_s": dhead,
            "tail_digital_silence_s": dtail,
            "dropout_count": len(events),
            "dropout_count_per_channel": self.counts.tolist(),
            "dropout_channel_run_count": int(self.counts.sum()),
            "dropout_longest_s": longest,
            "dropout_where_s": [[e["start_s"], e["end_s"]] for e in events],
            "dropout_events": events,
        }
        settings = {"silence_threshold_dbfs": self.threshold_dbfs, "silence_criterion": "sample peak, all channels",
                    "dropout_min_s": self.dropout_min_s, "dropout_min_samples": self.min_len,
                    "events_listed": "all (no cap)",
                    "event_rule": "runs of any channels that overlap or touch in time form one dropout"}
        return AnalyzerResult(measurements=m, settings=settings)
