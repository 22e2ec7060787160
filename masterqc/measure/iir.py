"""Cascaded second-order sections (transposed direct form II), without importing scipy.signal for short work.

:func:`sosfilt` takes and returns what ``scipy.signal.sosfilt(sos, x, axis=-1, zi=zi)``
does, and its output is bit-for-bit the same: the recursion per section is

    y[n]  = b0 x[n] + z0
    z0    = b1 x[n] - a1 y[n] + z1
    z1    = b2 x[n] - a2 y[n]

evaluated in that order in IEEE double precision, as the compiled scipy kernel does
(sections run one after the other over the whole block, which changes no operation).

Importing ``scipy.signal`` costs about half a second of CPU (it imports most of SciPy),
more than the K-weighting of a few seconds of stereo audio takes in plain Python
(about 0.1 us per sample and section).  So the first ``PYTHON_BUDGET`` section-samples
of a process run in Python; after that (a longer file) the compiled kernel is imported
and used.  Both give the same bits, so where the switch happens changes no result.
The budget is a house choice: about a third of the import's cost, so a long file pays
at most that on top of the import.  Thread-safe: the budget is taken under a lock.
"""

from __future__ import annotations

import threading

import numpy as np

#: section-samples (samples x channels x sections) run in Python per process before the
#: compiled kernel is imported (house choice, about 0.15 s of CPU)
PYTHON_BUDGET = 1_500_000

_lock = threading.Lock()
_python_left = PYTHON_BUDGET


def _take_budget(work: int) -> bool:
    """True when ``work`` section-samples may run in Python (and books them)."""
    global _python_left
    with _lock:
        if work <= _python_left:
            _python_left -= work
            return True
        _python_left = 0       # from now on the compiled kernel: it is imported anyway
        return False


def _section(b0: float, b1: float, b2: float, a1: float, a2: float, xs: list, z0: float, z1: float):
    out = [0.0] * len(xs)
    i = 0
    for x in xs:
        y = b0 * x + z0
        z0 = b1 * x - a1 * y + z1
        z1 = b2 * x - a2 * y
        out[i] = y
        i += 1
    return out, z0, z1


def sosfilt_python(sos: np.ndarray, x: np.ndarray, zi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The recursion of the module docstring in plain Python: ``x`` (channels, n) float64,
    ``zi`` (sections, channels, 2); returns fresh ``(y, zf)``."""
    y = np.empty(x.shape)
    zf = np.array(zi, dtype=np.float64)
    rows = sos.tolist()
    for c in range(x.shape[0]):
        xs = x[c].tolist()
        for s, (b0, b1, b2, _a0, a1, a2) in enumerate(rows):
            xs, zf[s, c, 0], zf[s, c, 1] = _section(b0, b1, b2, a1, a2, xs,
                                                    float(zf[s, c, 0]), float(zf[s, c, 1]))
        y[c] = xs
    return y, zf


def sosfilt(sos, x, axis: int = -1, zi=None):
    """``scipy.signal.sosfilt(sos, x, axis=axis, zi=zi)`` for float64 2-D ``x`` with
    ``axis`` -1 (channels, n; ``zi`` (sections, channels, 2)) or 0 (n, channels; ``zi``
    (sections, 2, channels), as scipy lays it out); ``zi`` is required.  Returns ``(y, zf)`` with ``y`` a fresh array shaped like ``x``."""
    sos = np.asarray(sos, dtype=np.float64)
    x = np.asarray(x)
    if zi is None or x.ndim != 2 or axis not in (0, 1, -1) or sos.ndim != 2 or sos.shape[1] != 6:
        raise ValueError("sosfilt here takes sos (sections, 6), a 2-D x, axis 0 or -1 and zi")
    if x.dtype != np.float64 or not np.all(sos[:, 3] == 1.0):
        from scipy.signal import sosfilt as compiled
        return compiled(sos, x, axis=axis, zi=zi)
    if _take_budget(x.size * sos.shape[0]):
        if axis in (1, -1):
            return sosfilt_python(sos, x, zi)
        # axis 0: zi is (sections, 2, channels); the compiled kernel works on (channels, n) and
        # hands back the transposed views: so do we (a reduction over a C- or F-ordered array
        # may add in a different order)
        y, zf = sosfilt_python(sos, x.T, np.swapaxes(zi, 1, 2))
        return y.T, np.swapaxes(zf, 1, 2)
    from scipy.signal import sosfilt as compiled
    return compiled(sos, x, axis=axis, zi=zi)
