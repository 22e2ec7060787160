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

#: how many events (runs, positions) an analyzer keeps for the report; counts stay exact
MAX_EVENTS = 200
#: how many time ranges a measurement carries in its ``..._where_s`` key
MAX_WHERE = 100


def column_sum(a: np.ndarray) -> np.ndarray:
    """Sum of a (frames, channels) float array over frames, per channel.

    A matrix-vector product: much faster than ``a.sum(axis=0)`` for the few
    columns of an audio block (same value up to rounding).
    """
    n = a.shape[0]
    ones = _ONES.get(n)
    if ones is None:
        if len(_ONES) > 8:
            _ONES.clear()
        ones = _ONES[n] = np.ones(n)
        ones.flags.writeable = False
    return ones @ a


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
        n = labels.shape[0]
        if n == 0:
            return np.zeros(0, np.int64), np.zeros(0, np.int64), labels[:0]
        idx = np.flatnonzero(active)
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


def merge_ranges(ranges, limit: int = MAX_WHERE) -> list:
    """Sort ``[(start_s, end_s), ...]`` and merge overlapping or touching ranges; keep the first ``limit``."""
    out = []
    for a, b in sorted(ranges):
        if out and a <= out[-1][1]:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return out[:limit]
