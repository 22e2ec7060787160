"""Relations between channels: dual mono, inverted polarity, phase correlation over time, level balance.

Pairs are found by label: L/R, Ls/Rs, Lrs/Rrs (and the other left/right
label pairs of :data:`PAIR_LABELS`); a two-channel file of unknown layout
pairs its two channels.

* Identical channels: any two channels whose samples are equal throughout (and
  not all zero).  ``dual_mono`` is True when the first pair (normally L/R) is
  identical.
* Inverted polarity: a pair whose samples are exact negatives throughout, or
  whose whole-file correlation ``sum(x*y) / sqrt(sum(x*x) * sum(y*y))`` is at or
  below ``inverted_polarity_correlation`` (default -0.5; common practice, no
  source).
* Phase correlation over time: the same coefficient over consecutive 100 ms
  windows aligned to the file start (a final partial window of at least 50 ms
  counts).  Windows where either channel's RMS is below
  :data:`CORRELATION_FLOOR_DBFS` have no defined correlation and are left out.
  Reported: the minimum, and the share, duration and times of windows below
  ``phase_correlation_threshold`` (in the first pair for share and duration,
  in any pair for the times).
* Level balance: ``10*log10(zL / zR)`` in LU, ``z`` the mean square of the
  K-weighted channel over the whole file (ITU-R BS.1770-5 K-weighting,
  ungated); positive means the left channel of the pair is louder.
"""

from __future__ import annotations

import math

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import (BOOLEAN_OR_NULL, NUMBER_OR_NULL, TIME_RANGES, Analyzer,
                                   AnalyzerResult, array_of)
from masterqc.measure.blockstats import pair_window_sums
from masterqc.measure.iir import sosfilt
from masterqc.measure.kweight import kweighting_sos
from masterqc.measure.peaks import column_abs_max
from masterqc.measure.runs import column_sum

#: left/right label pairs, in the order they are reported (the first present one is primary)
PAIR_LABELS = [("L", "R"), ("Ls", "Rs"), ("Lrs", "Rrs"), ("Lss", "Rss"), ("Lc", "Rc"),
               ("Ltf", "Rtf"), ("Ltr", "Rtr")]
CORRELATION_WINDOW_S = 0.1
#: windows quieter than this (RMS, either channel) carry no correlation value
CORRELATION_FLOOR_DBFS = -70.0
#: most points of the displayed correlation series
SERIES_POINTS = 2000
#: identical / inverted channels are only compared for files with at most this many channels
MAX_COMPARED_CHANNELS = 32

STRING_PAIRS = {"type": "array", "items": {"type": "array", "items": {"type": "string"},
                                           "minItems": 2, "maxItems": 2}}


def channel_pairs(labels) -> list[tuple[int, int]]:
    """Index pairs (left, right) of the channel labels, in :data:`PAIR_LABELS` order."""
    labels = list(labels)
    out = []
    for a, b in PAIR_LABELS:
        if a in labels and b in labels:
            out.append((labels.index(a), labels.index(b)))
    if not out and len(labels) == 2:
        out.append((0, 1))
    return out


def correlation(xy: float, xx: float, yy: float) -> float | None:
    """``xy / sqrt(xx * yy)``, or None when either energy is zero."""
    if xx <= 0.0 or yy <= 0.0:
        return None
    return max(-1.0, min(1.0, xy / math.sqrt(xx * yy)))


class ChannelRelationAnalyzer(Analyzer):
    """Dual mono, inverted polarity, phase correlation over time and level balance of paired channels."""

    name = "channels"
    measurement_schema = {
        "dual_mono": measured(BOOLEAN_OR_NULL, NO_UNIT,
            'the first channel pair is sample-identical; null for one channel or silence'),
        "identical_channel_pairs": measured(STRING_PAIRS, NO_UNIT,
            'channel pairs that are sample-identical'),
        "inverted_polarity": measured(BOOLEAN_OR_NULL, NO_UNIT,
            "a channel pair's whole-file correlation is at or below inverted_polarity_correlation"),
        "inverted_polarity_pairs": measured(STRING_PAIRS, NO_UNIT,
            'the channel pairs in inverted polarity'),
        "channel_pairs": measured(STRING_PAIRS, NO_UNIT,
            'the channel pairs compared (L/R, Ls/Rs, ...)'),
        "channel_correlation_per_pair": measured(array_of(NUMBER_OR_NULL), 'corr',
            'whole-file correlation of each pair'),
        "phase_correlation_min": measured(NUMBER_OR_NULL, 'corr',
            'lowest phase correlation in any 100 ms window of any pair'),
        "phase_correlation_min_per_pair": measured(array_of(NUMBER_OR_NULL), 'corr',
            'lowest phase correlation of each pair'),
        "phase_correlation_below_percent": measured(NUMBER_OR_NULL, 'percent',
            'share of time of the first pair below phase_correlation_threshold'),
        "phase_correlation_below_s": measured(NUMBER_OR_NULL, 's',
            'time of the first pair below phase_correlation_threshold'),
        "phase_correlation_below_percent_per_pair": measured(array_of(NUMBER_OR_NULL), 'percent',
            'share of time below the threshold, each pair'),
        "phase_correlation_below_where_s": measured(TIME_RANGES, 's',
            'time ranges of the first pair below the threshold'),
        "level_balance_lu": measured(NUMBER_OR_NULL, 'lu',
            'K-weighted level difference of the most unbalanced pair (first minus second)'),
        "level_balance_lu_per_pair": measured(array_of(NUMBER_OR_NULL), 'lu',
            'K-weighted level difference of each pair'),
    }
    series_schema = {
        "phase_correlation": {"type": "object", "required": ["pair", "hop_s", "values"],
                              "properties": {"pair": {"type": "string"}, "hop_s": {"type": "number"},
                                             "window_s": {"type": "number"},
                                             "values": array_of(NUMBER_OR_NULL)}},
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        fs = info.sample_rate_hz
        ch = info.channels
        self.labels = list(info.channel_layout)
        self.pairs = channel_pairs(self.labels) if ch >= 2 else []
        self.threshold = float(options.phase_correlation_threshold)
        self.inverted_limit = float(options.inverted_polarity_correlation)
        # exact comparisons between every two channels
        self.compared = [(i, j) for i in range(ch) for j in range(i + 1, ch)] if 2 <= ch <= MAX_COMPARED_CHANNELS else []
        self.same = {p: True for p in self.compared}
        self.negated = {p: True for p in self.compared}
        self.nonzero = np.zeros(ch, bool)
        # correlation sums
        npairs = len(self.pairs)
        self.left = [a for a, _ in self.pairs]
        self.right = [b for _, b in self.pairs]
        self.total = np.zeros((3, npairs))  # xy, xx, yy over the whole file
        self.window = max(1, int(round(CORRELATION_WINDOW_S * fs)))
        self.acc = np.zeros((3, npairs))
        self.acc_frames = 0
        self.pos = 0
        self.floor_ms = 10.0 ** (CORRELATION_FLOOR_DBFS / 10.0)
        self.min_r = np.full(npairs, np.inf)
        self.below = np.zeros(npairs, np.int64)
        self.valid = np.zeros(npairs, np.int64)
        self.below_frames = np.zeros(npairs, np.int64)
        windows_total = max(1, -(-info.frames // self.window))
        self.bucket = max(1, -(-windows_total // SERIES_POINTS))
        self.series = np.full(-(-windows_total // self.bucket) + 1, np.inf)
        self.window_index = 0
        self.below_where = []  # [start_frame, end_frame] of windows below the threshold in any pair
        # K-weighted energy of the paired channels
        self.kchannels = sorted({c for p in self.pairs for c in p})
        try:
            self.sos = kweighting_sos(fs)
        except ValueError:  # a rate K-weighting is not defined for: no balance
            self.sos = None
        self.zi = np.zeros((2, 2, len(self.kchannels)))
        self.kenergy = np.zeros(len(self.kchannels))
        self.kshared = None  # the loudness meter whose K-weighted channel energies are taken (bind)

    def bind(self, peers):
        """Take the K-weighted energies of the paired channels from the run's loudness meter
        when it filters every one of them: the same K-weighting filter, from rest, on the
        same samples, so the same values, and the block is not filtered twice."""
        from masterqc.measure.loudness import LoudnessAnalyzer
        if self.sos is None or not self.kchannels:
            return
        for peer in peers:
            meter = getattr(peer, "meter", None) if isinstance(peer, LoudnessAnalyzer) else None
            if (meter is not None and meter.filters_kweighting
                    and set(self.kchannels) <= set(meter.active_channels)):
                self.kshared = meter
                return

    def _windows(self, sums: np.ndarray, frames: np.ndarray):
        """Take completed windows: ``sums`` (3, k, pairs), ``frames`` (k,)."""
        xy, xx, yy = sums
        n = frames[:, None].astype(float)
        ok = (xx / n >= self.floor_ms) & (yy / n >= self.floor_ms)
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.clip(xy / np.sqrt(xx * yy), -1.0, 1.0)
        r = np.where(ok, r, np.nan)
        valid = ~np.isnan(r)
        self.valid += valid.sum(axis=0)
        low = valid & (r < self.threshold)
        self.below += low.sum(axis=0)
        self.below_frames += (low * frames[:, None]).sum(axis=0)
        self.min_r = np.minimum(self.min_r, np.where(valid, r, np.inf).min(axis=0))
        if self.pairs:
            prim = np.where(valid[:, 0], r[:, 0], np.inf)
            idx = (self.window_index + np.arange(len(frames))) // self.bucket
            idx = np.minimum(idx, len(self.series) - 1)
            np.minimum.at(self.series, idx, prim)
        low_any = np.flatnonzero(low.any(axis=1))
        if low_any.size:
            w = self.window
            for i in low_any.tolist():      # every range is kept (one per window at most)
                start = (self.window_index + i) * w
                end = start + int(frames[i])
                if self.below_where and self.below_where[-1][1] == start:
                    self.below_where[-1][1] = end
                else:
                    self.below_where.append([start, end])
        self.window_index += len(frames)

    #: the engine hands it (channels, frames) blocks: every channel a contiguous row
    planar_input = True

    def process(self, block):
        """A (frames, channels) block."""
        if not self.nonzero.all():
            # per-channel max |x| on a folded view: (block != 0).any(axis=0) reduces a narrow
            # array along axis 0, about 40x slower; the engine's blocks hold no NaN here
            self.nonzero |= column_abs_max(block) > 0.0
        self._process(block.T, block)

    def process_planar(self, rows):
        """A (channels, frames) block: the same arithmetic on contiguous rows (the products and
        their sums are taken element by element in the same order, so the same bits)."""
        if not self.nonzero.all():
            self.nonzero |= (rows != 0.0).any(axis=1)      # no NaN in the engine's clean blocks
        self._process(rows, None)

    def _process(self, cols, block):
        """``cols[c]``: channel c as a 1-D array; ``block``: the (frames, channels) block, or
        None when the block came planar (``cols`` C-contiguous)."""
        n = cols.shape[1]
        for p in self.compared:
            i, j = p
            if self.same[p] and not np.array_equal(cols[i], cols[j]):
                self.same[p] = False
            if self.negated[p] and not np.array_equal(cols[i], -cols[j]):
                self.negated[p] = False
        if not self.pairs:
            self.pos += n
            return
        w = self.window
        first = (-self.pos) % w  # frames until the next window boundary
        cuts = np.arange(first, n, w)
        if cuts.size == 0 or cuts[0] != 0:
            cuts = np.concatenate(([0], cuts))
        # per pair on 1-D column views: reduceat over a (frames, 1) array is many times slower
        sums = np.empty((3, cuts.size, len(self.pairs)))  # (xy, xx, yy) per segment and pair
        for k, (a, b) in enumerate(self.pairs):   # np.add.reduceat of x*y, x*x, y*y: one pass
            sums[:, :, k] = pair_window_sums(cols[a], cols[b], cuts)
        self.total += sums.sum(axis=1)
        lengths = np.diff(np.append(cuts, n))
        sums[:, 0] += self.acc
        lengths = lengths.copy()
        lengths[0] += self.acc_frames
        ends = self.pos + np.append(cuts[1:], n)
        complete = (ends % w) == 0
        if complete.any():
            self._windows(sums[:, complete], lengths[complete])
        if complete[-1]:
            self.acc = np.zeros_like(self.acc)
            self.acc_frames = 0
        else:
            self.acc = sums[:, -1].copy()
            self.acc_frames = int(lengths[-1])
        self.pos += n
        if self.sos is not None and self.kshared is None:
            every = self.kchannels == list(range(cols.shape[0]))
            if block is not None:
                # every channel paired (stereo): filter the block itself, no copy
                src = block if every else block[:, self.kchannels]
                kw, self.zi = sosfilt(self.sos, src, axis=0, zi=self.zi)
            else:
                # along rows: the state is (sections, channels, 2) there, (sections, 2, channels) here;
                # the result is the transpose of the one above, the same bits in the same memory
                src = cols if every else cols[self.kchannels]
                kw, zi = sosfilt(self.sos, src, axis=-1, zi=np.swapaxes(self.zi, 1, 2))
                kw, self.zi = kw.T, np.swapaxes(zi, 1, 2)
            self.kenergy += column_sum(kw * kw)

    def _name(self, p):
        return [self.labels[p[0]], self.labels[p[1]]]

    def finish(self):
        if self.pairs and self.acc_frames >= self.window // 2:
            self._windows(self.acc[:, None, :], np.array([self.acc_frames]))
        identical = [p for p in self.compared if self.same[p] and self.nonzero[p[0]]]
        negated = [p for p in self.compared if self.negated[p] and self.nonzero[p[0]]]
        whole = [correlation(*self.total[:, k]) for k in range(len(self.pairs))]
        inverted = [p for k, p in enumerate(self.pairs)
                    if p in negated or (whole[k] is not None and whole[k] <= self.inverted_limit)]
        inverted += [p for p in negated if p not in inverted]
        fs = self.info.sample_rate_hz
        min_per = [float(v) if np.isfinite(v) else None for v in self.min_r]
        share_per = [float(b / v) if v else None for b, v in zip(self.below, self.valid)]
        kidx = {c: k for k, c in enumerate(self.kchannels)}
        if self.kshared is not None:
            pos = {c: k for k, c in enumerate(self.kshared.active_channels)}
            self.kenergy = np.array([self.kshared.channel_energy[pos[c]] for c in self.kchannels])
        balance = []
        for a, b in self.pairs:
            za, zb = self.kenergy[kidx[a]], self.kenergy[kidx[b]]
            balance.append(10.0 * math.log10(za / zb) if za > 0 and zb > 0 else None)
        known_min = [v for v in min_per if v is not None]
        known_bal = [v for v in balance if v is not None]
        if self.pairs:
            first = self.pairs[0]
            dual = bool(first in identical) if self.nonzero[first[0]] or self.nonzero[first[1]] else None
        else:
            dual = None
        pct_per = [None if v is None else 100.0 * v for v in share_per]
        m = {
            "dual_mono": dual,
            "identical_channel_pairs": [self._name(p) for p in identical],
            "inverted_polarity": (bool(inverted) if self.pairs or self.compared else None),
            "inverted_polarity_pairs": [self._name(p) for p in inverted],
            "channel_pairs": [self._name(p) for p in self.pairs],
            "channel_correlation_per_pair": whole,
            "phase_correlation_min": min(known_min) if known_min else None,
            "phase_correlation_min_per_pair": min_per,
            "phase_correlation_below_percent": pct_per[0] if pct_per else None,
            "phase_correlation_below_s": (float(self.below_frames[0]) / fs
                                          if self.pairs and self.valid[0] else None),
            "phase_correlation_below_percent_per_pair": pct_per,
            "phase_correlation_below_where_s": [[a / fs, b / fs] for a, b in self.below_where],
            "level_balance_lu": max(known_bal, key=abs) if known_bal else None,
            "level_balance_lu_per_pair": balance,
        }
        series = {}
        if self.pairs:
            used = -(-self.window_index // self.bucket) if self.window_index else 0
            vals = [float(v) if np.isfinite(v) else None for v in self.series[:used]]
            series["phase_correlation"] = {"pair": "/".join(self._name(self.pairs[0])),
                                           "window_s": self.window / fs,
                                           "hop_s": self.window * self.bucket / fs, "values": vals}
        settings = {"correlation_window_s": self.window / fs, "correlation_floor_dbfs": CORRELATION_FLOOR_DBFS,
                    "phase_correlation_threshold": self.threshold,
                    "inverted_polarity_correlation": self.inverted_limit,
                    "balance_weighting": "K-weighting (ITU-R BS.1770-5), ungated mean square",
                    "series_reduction": f"minimum over {self.bucket} window(s) per point"}
        return AnalyzerResult(measurements=m, series=series, settings=settings)
