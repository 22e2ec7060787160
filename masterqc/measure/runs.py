"""Streaming detection of runs of consecutive samples, shared by the integrity analyzers.

A *run* is a maximal stretch of consecutive samples of one channel that are all
*active* and carry the same *label* (for clipping the label is the polarity of
the clipped sample, for frozen values it is the sample value itself).  Runs
that cross block boundaries are joined, so the result never depends on the
block size.  Everything is vectorised over the block; there is no per-sample
Python loop.
"""

from __future__ import annotations

import numpy as np



def column_sum(a: np.ndarray) -> np.ndarray:
    """Sum of a (frames, channels) float array over frames, per channel.

    A matrix-vector product: much faster than ``a.sum(axis=0)`` for the few
    columns of an audio block (same value up to rounding).
    """
    return row_ones(a.shape[0]) @ a


def row_ones(n: int) -> np.ndarray:
    """A read-only float64 vector of ``n`` ones, kept for the few block lengths in use
    (``rows @ row_ones(n)`` sums each row of a (channels, frames) block)."""
    ones = _ONES.get(n)
    if ones is None:
        if len(_ONES) > 8:
            _ONES.clear()
        ones = np.ones(n)
        ones.flags.writeable = False
        _ONES[n] = ones
    return ones


_ONES: dict = {}


class RunTracker:
    """Find runs of at least ``min_len`` samples in one channel, fed block by block.

    :meth:`feed` takes the labels and the active mask of the next block and
    returns the runs that ended inside it as two int64 arrays ``(starts,
    lengths)`` (start = frame index from the file start, length in samples) and
    the label of each run.  A run still open at the end of a block is carried
    to the next one; :meth:`close` returns it at the end of the file.
    """

    def __init__(self, min_len: int):
        if min_len < 1:
            raise ValueError("min_len must be >= 1 sample")
        self.min_len = int(min_len)
        self.pos = 0                # frame index of the next sample fed
        self._open_start = None     # start frame of the run open at the block end
        self._open_label = None

    def feed(self, labels: np.ndarray, active: np.ndarray):
        """Feed one block; return ``(starts, lengths, labels)`` of the runs that ended in it.

        Works on the positions of the active samples only, so a block with few
        active samples costs little more than finding them.
        """
        return self.feed_positions(labels, np.flatnonzero(active))

    def feed_positions(self, labels: np.ndarray, idx: np.ndarray):
        """:meth:`feed` with the positions of the active samples (``np.flatnonzero(active)``)."""
        n = labels.shape[0]
        if n == 0:
            return np.zeros(0, np.int64), np.zeros(0, np.int64), labels[:0]
        if idx.size == 0:
            return self.skip(n)
        offset = self.pos
        self.pos += n
        lab = labels[idx]
        k = idx.size
        cont = np.empty(k, dtype=bool)  # active sample j continues the run of active sample j-1
        if k > 1:
            np.equal(idx[1:], idx[:-1] + 1, out=cont[1:])
            cont[1:] &= lab[1:] == lab[:-1]
        carried = self._open_start is not None
        cont[0] = bool(carried and idx[0] == 0 and lab[0] == self._open_label)
        out_s, out_l, out_lab = [], [], []
        if carried and not cont[0]:
            out_s.append(np.array([self._open_start], np.int64))
            out_l.append(np.array([offset - self._open_start], np.int64))
            out_lab.append(np.array([self._open_label], dtype=labels.dtype))
        seg = np.flatnonzero(~cont)
        if cont[0]:
            seg = np.concatenate(([0], seg))
        seg_end = np.append(seg[1:], k) - 1
        starts = idx[seg].astype(np.int64) + offset
        ends = idx[seg_end].astype(np.int64) + offset
        if cont[0]:
            starts[0] = self._open_start
        run_labels = lab[seg_end]
        self._open_start = None
        self._open_label = None
        if idx[-1] == n - 1:  # the last run reaches the block end: it stays open
            self._open_start = int(starts[-1])
            self._open_label = run_labels[-1]
            starts, ends, run_labels = starts[:-1], ends[:-1], run_labels[:-1]
        out_s.append(starts)
        out_l.append(ends - starts + 1)
        out_lab.append(run_labels)
        st = np.concatenate(out_s)
        ln = np.concatenate(out_l)
        lb = np.concatenate(out_lab)
        keep = ln >= self.min_len
        return st[keep], ln[keep], lb[keep]

    def skip(self, n: int):
        """Feed ``n`` inactive samples at once; return the run they close, as :meth:`feed` does."""
        out = self.close() if self._open_start is not None else (
            np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0))
        self.pos += int(n)
        return out

    def close(self):
        """End of file: return the run still open, as ``feed`` does, and whether one was open."""
        if self._open_start is None:
            return np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0)
        start, label = self._open_start, self._open_label
        self._open_start = None
        self._open_label = None
        length = self.pos - start
        if length < self.min_len:
            return np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0)
        return np.array([start], np.int64), np.array([length], np.int64), np.array([label])


def merge_ranges(ranges, limit: int | None = None) -> list:
    """Sort ``[(start_s, end_s), ...]`` and merge overlapping or touching ranges.

    Every merged range is returned unless ``limit`` (a count) is given."""
    out = []
    for a, b in sorted(ranges):
        if out and a <= out[-1][1]:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return out if limit is None else out[:limit]


class ChannelRuns:
    """Every run of every channel, kept as arrays (start frame, length, channel, label).

    Nothing is dropped: a file with a million runs keeps a million (a few
    dozen bytes each)."""

    def __init__(self):
        self._parts: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []

    def add(self, channel: int, starts, lengths, labels) -> None:
        if len(starts):
            self._parts.append((np.asarray(starts, np.int64), np.asarray(lengths, np.int64),
                                np.full(len(starts), int(channel), np.int64), np.asarray(labels, np.float64)))

    def arrays(self):
        """``(starts, lengths, channels, labels)`` sorted by start, then channel."""
        if not self._parts:
            z = np.zeros(0, np.int64)
            return z, z, z, np.zeros(0)
        st, ln, ch, lb = (np.concatenate(a) for a in zip(*self._parts))
        order = np.lexsort((ch, st))
        return st[order], ln[order], ch[order], lb[order]


def join_across_channels(starts, lengths, channels, n_channels: int):
    """Group per-channel runs into events: one per time span, across channels.

    Runs (sorted by start) that overlap or touch (the next starts at or before
    the running end, end exclusive) join one event.  Returns ``(group, first,
    ev_start, ev_end, ev_mask)``: the event index of every run, the index of
    each event's first run, event start and end frames (end exclusive) and a
    (events, channels) boolean array of the channels each event touches.
    """
    k = len(starts)
    if k == 0:
        z = np.zeros(0, np.int64)
        return z, z, z, z, np.zeros((0, n_channels), bool)
    ends = starts + lengths
    reach = np.maximum.accumulate(ends)
    new = np.ones(k, bool)
    new[1:] = starts[1:] > reach[:-1]
    first = np.flatnonzero(new)
    group = np.cumsum(new) - 1
    ev_start = starts[first]
    ev_end = np.maximum.reduceat(ends, first)
    mask = np.zeros((first.size, n_channels), bool)
    mask[group, channels] = True
    return group, first, ev_start, ev_end, mask


def channel_names(mask_row, layout) -> list[str]:
    """Channel labels of the True entries of one row of an event mask."""
    return [str(layout[c]) if c < len(layout) else f"ch{c + 1}" for c in np.flatnonzero(mask_row).tolist()]


class FrameRanges:
    """Frame indices (increasing, fed in pieces) merged into ranges: indices no more than
    ``gap`` frames apart join one range.  Keeps every range, its peak value and, when
    a channel mask is fed, the channels that took part."""

    def __init__(self, gap: int, channels: int = 0):
        self.gap = int(gap)
        self.channels = int(channels)
        self.count = 0              # indices fed
        self._closed: list[tuple] = []
        self._open = None           # [start, end, peak, mask]

    def add(self, idx: np.ndarray, values: np.ndarray | None = None, mask: np.ndarray | None = None) -> None:
        """``idx`` increasing frame indices after every earlier one; ``values`` one per index;
        ``mask`` (channels, len(idx)) booleans."""
        if idx.size == 0:
            return
        self.count += int(idx.size)
        breaks = np.flatnonzero(np.diff(idx) > self.gap)
        seg = np.concatenate(([0], breaks + 1))
        s = idx[seg].astype(np.int64)
        e = idx[np.append(breaks, idx.size - 1)].astype(np.int64)
        pk = np.maximum.reduceat(values, seg).astype(np.float64) if values is not None else np.zeros(s.size)
        mk = (np.logical_or.reduceat(mask, seg, axis=1).T if mask is not None
              else np.zeros((s.size, self.channels), bool))
        i0 = 0
        if self._open is not None and s[0] - self._open[1] <= self.gap:
            o = self._open
            o[1] = int(e[0])
            o[2] = max(o[2], float(pk[0]))
            o[3] = o[3] | mk[0]
            i0 = 1
        if i0 < s.size:
            self._close()
            if s.size - 1 > i0:
                self._closed.append((s[i0:-1], e[i0:-1], pk[i0:-1], mk[i0:-1]))
            self._open = [int(s[-1]), int(e[-1]), float(pk[-1]), mk[-1].copy()]

    def _close(self) -> None:
        if self._open is not None:
            o = self._open
            self._closed.append((np.array([o[0]]), np.array([o[1]]), np.array([o[2]]), o[3][None, :]))
            self._open = None

    def finish(self):
        """``(starts, ends, peaks, masks)`` of every range (ends inclusive frame indices)."""
        self._close()
        if not self._closed:
            z = np.zeros(0, np.int64)
            return z, z, np.zeros(0), np.zeros((0, self.channels), bool)
        st, en, pk, mk = (np.concatenate(a) for a in zip(*self._closed))
        self._closed = [(st, en, pk, mk)]
        return st, en, pk, mk
