"""Per-block sample statistics with an optional compiled kernel (the same bits either way).

:func:`pair_window_sums` gives, for two channels of a block and the window cuts of the phase
correlation (:mod:`masterqc.measure.channels`), the sums of ``x*y``, ``x*x`` and ``y*y`` per
segment: by definition ``np.add.reduceat`` of the three products, which makes three product
arrays and reads each of them again.  The optional compiled module
(``masterqc/measure/_cascade.c``, function ``pair_sums``, built at install time) walks both
rows once, in blocks of at most 128 samples that stay in cache, and adds the products in the
order numpy's pairwise summation adds them (the segment's first product, plus 8 accumulators
per block, blocks halved at a multiple of 8, a plain sum below 8 values), so the sums are the
same bits (about 3x less time per stereo block, measured).  Before its first use it is checked
once against numpy on rows that exercise every branch (lengths below 8, up to 128, above,
signed zeros); where it is absent, switched off (``MASTERQC_OWN_KERNEL=0``,
:mod:`masterqc.measure.iir`), fails that check, or the rows are not contiguous float64,
numpy's path runs.

:func:`active_positions` gives the positions of a channel's samples that equal a neighbour (the
candidates of frozen-value runs, :mod:`masterqc.measure.silence`), by definition
``np.flatnonzero`` of the mask numpy builds from two comparisons of the whole row; the compiled
``active_positions`` finds them in one pass without the masks (integers: the same positions by
construction, checked on load like the sums).

Thread-safe: the kernels are loaded under a lock and release the GIL.
"""

from __future__ import annotations

import numpy as np


def pair_window_sums_numpy(x: np.ndarray, y: np.ndarray, cuts: np.ndarray) -> np.ndarray:
    """(3, len(cuts)) float64: ``np.add.reduceat`` of ``x*y``, ``x*x`` and ``y*y`` at ``cuts``
    (increasing, the first 0; the last segment runs to the end)."""
    out = np.empty((3, cuts.shape[0]))
    out[0] = np.add.reduceat(x * y, cuts)
    out[1] = np.add.reduceat(x * x, cuts)
    out[2] = np.add.reduceat(y * y, cuts)
    return out


def _self_check(fn) -> bool:
    """True when ``fn`` gives numpy's bits (signs of zero included) on rows that take every
    branch of the pairwise sum."""
    k = np.arange(20000, dtype=np.float64)
    # deterministic irregular rows (numpy.random stays unimported on the measure path)
    x = np.sin(k * 0.37) * np.cos(k * k * 1e-4) * 0.7 + 1e-9 * np.sin(k * 2.1)
    y = np.cos(k * 0.11 + 0.3) * np.sin(k * 1.7) * 0.4
    x[100:140] = -0.0
    y[100:120] = 0.0
    y[120:140] = -0.0
    for cuts in ([0], [0, 3, 10, 17, 145, 300, 9000], [0, 1, 2, 133, 4933, 9733, 14533, 19333],
                 [0, 100, 105, 110, 121, 140]):
        c = np.array(cuts, dtype=np.int64)
        for a, b in ((x, y), (y, x), (x[100:140], y[100:140]), (x[:5], y[:5])):
            cc = c[c < a.shape[0]]
            out = np.empty((3, cc.shape[0]))
            fn(a, b, cc, out, a.shape[0], cc.shape[0])
            want = pair_window_sums_numpy(a, b, cc)
            if not (np.array_equal(out, want) and np.array_equal(np.signbit(out), np.signbit(want))):
                return False
    return True


def _kernel(name: str, check):
    """The compiled function ``name`` when it is built, switched on and passes ``check``; else None."""
    from masterqc.measure import iir
    return iir.checked_kernel(name, check)


def pair_sums_kernel():
    """The compiled ``pair_sums`` (checked by :func:`_self_check`), or None."""
    return _kernel("pair_sums", _self_check)


def pair_window_sums(x: np.ndarray, y: np.ndarray, cuts: np.ndarray) -> np.ndarray:
    """:func:`pair_window_sums_numpy` of two 1-D rows, by the compiled kernel where it can run
    (the same bits)."""
    kernel = pair_sums_kernel()
    if (kernel is not None and x.dtype == np.float64 and y.dtype == np.float64 and x.flags.c_contiguous
            and y.flags.c_contiguous and x.shape == y.shape and x.shape[0] > 0):
        c = np.ascontiguousarray(cuts, dtype=np.int64)
        out = np.empty((3, c.shape[0]))
        kernel(x, y, c, out, x.shape[0], c.shape[0])
        return out
    return pair_window_sums_numpy(x, y, cuts)


def active_positions_numpy(row: np.ndarray, prev: float) -> np.ndarray:
    """Positions (int64, increasing) of a 1-D row's samples equal to their predecessor (``prev``
    before the first) or their successor, and the last position always."""
    n = row.shape[0]
    eq = np.empty(n, dtype=bool)
    eq[0] = row[0] == prev
    np.equal(row[1:], row[:-1], out=eq[1:])
    active = eq.copy()
    active[:-1] |= eq[1:]
    active[-1] = True
    return np.flatnonzero(active)


def _active_self_check(fn) -> bool:
    k = np.arange(3000, dtype=np.float64)
    row = np.round(np.sin(k * 0.05) * 40.0) / 64.0          # runs of equal values of every length
    row[10:20] = 0.0
    row[20:23] = -0.0                                        # -0.0 equals 0.0
    row[500] = np.nan
    row[501] = np.nan                                        # NaN equals nothing
    for r, prev in ((row, np.nan), (row, row[0]), (row[:1], 0.5), (row[20:22], 0.0), (row[500:503], np.nan),
                    (row[1:2], row[0])):
        idx = np.empty(r.shape[0], np.int64)
        count = fn(r, float(prev), idx, r.shape[0])
        if not np.array_equal(idx[:count], active_positions_numpy(r, prev)):
            return False
    return True


def active_positions(row: np.ndarray, prev: float) -> np.ndarray:
    """:func:`active_positions_numpy`, by the compiled kernel where it can run (the same positions)."""
    kernel = _kernel("active_positions", _active_self_check)
    n = row.shape[0]
    if kernel is not None and n and row.dtype == np.float64 and row.flags.c_contiguous:
        idx = np.empty(n, np.int64)
        return idx[:kernel(row, float(prev), idx, n)]
    return active_positions_numpy(row, prev)
