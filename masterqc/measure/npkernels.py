"""NumPy-only kernels for the measurement path: running filters, a batched real FFT, ``I0`` and PCG64.

Importing SciPy's FFT, n-d image filters or special functions costs a short file more
start-up time (SciPy's array-API layer, about 0.2 s) than measuring it takes, and the
measurement uses only these few one-dimensional kernels, so they are written here:

* :func:`maximum_filter1d`, :func:`minimum_filter1d`, :func:`uniform_filter1d` and
  :func:`median_filter`: running maximum, minimum, mean and median over a window of
  ``size`` samples along a 1-D array, with the boundary modes and window placement of
  ``scipy.ndimage`` (the same keyword names and defaults, ``origin`` 0).  Each gives the
  bits ``scipy.ndimage`` gives (tests/test_npkernels.py compares them): the maximum,
  minimum and median pick input elements, and the mean follows the running-sum recurrence
  ``s0 = x[0] + ... + x[size-1]`` (left to right), ``s[i] = s[i-1] + (x[i+size-1] -
  x[i-1])`` on the extended line, ``out[i] = s[i] / size``, in IEEE double precision.
* :func:`rfft_rows`: the one-sided DFT of every row (last axis) of an array, by
  ``numpy.fft.rfft`` (NumPy's pocketfft), a few rows per call, written in place into the result
  (NumPy 2; a copy per call before).
* :func:`bessel_i0`: the modified Bessel function of the first kind, order 0, by the
  Chebyshev expansions of the Cephes library (S. L. Moshier, *Methods and Programs for
  Mathematical Functions*, 1989): ``exp(x) T_A(x/2 - 2)`` for ``|x| <= 8`` and
  ``exp(x) T_B(32/x - 2) / sqrt(x)`` above, each series summed by the Clenshaw recurrence
  ``b0 = y b1 - b2 + c_k``, ``0.5 (b0 - b2)``; ``exp`` is the C library's (``math.exp``),
  so the values are those of ``scipy.special.i0`` to the bit (``numpy.i0`` uses NumPy's
  vectorised ``exp`` and may differ from both in the last place).
* :func:`default_rng_random`: ``numpy.random.default_rng(seed).random(count)`` for the few
  hundred pseudo-random frame positions a measurement draws, without importing
  ``numpy.random`` (NumPy's SeedSequence and PCG64 written out; the same values).

Boundary modes (``mode``), as ``scipy.ndimage`` names them, for a line ``a b c d``:
``"reflect"`` (the default) extends it ``b a | a b c d | d c``, ``"nearest"`` ``a a | a b c d
| d d``, ``"wrap"`` ``c d | a b c d | a b`` and
``"constant"`` with zeros (``cval`` 0); ``scipy.ndimage``'s ``"mirror"`` is not offered.  A window of ``size`` samples at output ``i`` covers
the extended line's samples ``i - size // 2 .. i + (size - 1) // 2`` (centred when ``size``
is odd).  The median takes the middle element of an odd window; an even ``size`` is refused
(``scipy.ndimage`` then picks the upper of the two middle elements; the measurement never
asks for it), and so is a ``"reflect"`` window longer than ``2 n + 1`` on a line of ``n``
samples (``scipy.ndimage``'s median extends such a line its own way; the maximum, minimum and
mean agree with it for any length).  All functions take a 1-D array and return a new array of its length.
"""

from __future__ import annotations

import math

import numpy as np

#: scipy.ndimage boundary mode -> numpy.pad mode (see the module docstring)
_PAD_MODES = {"reflect": "symmetric", "nearest": "edge", "wrap": "wrap", "constant": "constant"}

#: rows per numpy.fft.rfft call in rfft_rows: NumPy transforms one row at a time; a few rows
#: per call keep input, buffers and output in cache (house choice from timing 4410..19200-point
#: rows on this machine: 4-8 rows per call were 2-4x faster per row than one call over
#: 50 rows, and faster than one row per call)
RFFT_ROWS_PER_CALL = 8

#: NumPy 2 transforms write into a given array (``out=``): a copy of every row's spectrum fewer
_RFFT_TAKES_OUT = int(np.__version__.split(".")[0]) >= 2

#: largest x whose exp(x) is a finite double (math.exp raises above it; I0 is then inf)
_LOG_MAX_FLOAT = math.log(np.finfo(np.float64).max)

#: Chebyshev coefficients of exp(-x) I0(x) on [0, 8] (argument x/2 - 2), Cephes i0.c
_I0_A = (
    -4.4153416464793395e-18, 3.3307945188222384e-17, -2.431279846547955e-16, 1.715391285555133e-15,
    -1.1685332877993451e-14, 7.676185498604936e-14, -4.856446783111929e-13, 2.95505266312964e-12,
    -1.726826291441556e-11, 9.675809035373237e-11, -5.189795601635263e-10, 2.6598237246823866e-09,
    -1.300025009986248e-08, 6.046995022541919e-08, -2.670793853940612e-07, 1.1173875391201037e-06,
    -4.4167383584587505e-06, 1.6448448070728896e-05, -5.754195010082104e-05, 0.00018850288509584165,
    -0.0005763755745385824, 0.0016394756169413357, -0.004324309995050576, 0.010546460394594998,
    -0.02373741480589947, 0.04930528423967071, -0.09490109704804764, 0.17162090152220877,
    -0.3046826723431984, 0.6767952744094761)
#: Chebyshev coefficients of exp(-x) sqrt(x) I0(x) on (8, inf) (argument 32/x - 2), Cephes i0.c
_I0_B = (
    -7.233180487874754e-18, -4.830504485944182e-18, 4.46562142029676e-17, 3.461222867697461e-17,
    -2.8276239805165836e-16, -3.425485619677219e-16, 1.7725601330565263e-15, 3.8116806693526224e-15,
    -9.554846698828307e-15, -4.150569347287222e-14, 1.54008621752141e-14, 3.8527783827421426e-13,
    7.180124451383666e-13, -1.7941785315068062e-12, -1.3215811840447713e-11, -3.1499165279632416e-11,
    1.1889147107846439e-11, 4.94060238822497e-10, 3.3962320257083865e-09, 2.266668990498178e-08,
    2.0489185894690638e-07, 2.8913705208347567e-06, 6.889758346916825e-05, 0.0033691164782556943,
    0.8044904110141088)


def _line(x) -> np.ndarray:
    a = np.asarray(x)
    if a.ndim != 1:
        raise ValueError(f"expected a 1-D array, got shape {a.shape}")
    return a


def _extended(a: np.ndarray, size: int, mode: str) -> np.ndarray:
    """``a`` with ``size // 2`` samples before and ``(size - 1) // 2`` after, by ``mode``."""
    if size < 1:
        raise ValueError(f"filter size must be >= 1, got {size}")
    try:
        pad_mode = _PAD_MODES[mode]
    except KeyError:
        raise ValueError(f"unknown boundary mode {mode!r}; expected one of {sorted(_PAD_MODES)}") from None
    before = size // 2
    n = a.shape[0]
    if n == 0:
        return np.array(a, copy=True)
    if pad_mode == "edge":
        # the measurement's usual mode, without numpy.pad's overhead (many short lines)
        e = np.empty(n + size - 1, dtype=a.dtype)
        e[:before] = a[0]
        e[before:before + n] = a
        e[before + n:] = a[-1]
        return e
    return np.pad(a, (before, size - 1 - before), mode=pad_mode)


def _running_extreme(x, size: int, mode: str, op) -> np.ndarray:
    """Running ``op`` (np.maximum or np.minimum) over ``size`` samples: the extended line is cut
    into blocks of ``size``; every window spans the tail of one block and the head of the next,
    so its extreme is ``op(suffix extreme of the first, prefix extreme of the second)``."""
    a = _line(x)
    size = int(size)
    e = _extended(a, size, mode)
    n = a.shape[0]
    if n == 0 or size == 1:
        return np.array(a, copy=True)
    blocks = -(-e.shape[0] // size)
    tail = blocks * size - e.shape[0]
    if tail:
        e = np.concatenate([e, np.repeat(e[-1:], tail)])
    e = e.reshape(blocks, size)
    prefix = op.accumulate(e, axis=1).ravel()
    suffix = op.accumulate(e[:, ::-1], axis=1)[:, ::-1].ravel()
    return op(suffix[:n], prefix[size - 1:size - 1 + n])


def maximum_filter1d(x, size: int, mode: str = "reflect") -> np.ndarray:
    """Running maximum of a 1-D array over ``size`` samples (``scipy.ndimage.maximum_filter1d``)."""
    return _running_extreme(x, size, mode, np.maximum)


def minimum_filter1d(x, size: int, mode: str = "reflect") -> np.ndarray:
    """Running minimum of a 1-D array over ``size`` samples (``scipy.ndimage.minimum_filter1d``)."""
    return _running_extreme(x, size, mode, np.minimum)


def uniform_filter1d(x, size: int, mode: str = "reflect") -> np.ndarray:
    """Running mean of a 1-D float array over ``size`` samples (``scipy.ndimage.uniform_filter1d``):
    computed in float64 by the running-sum recurrence of the module docstring, returned in the
    input's float dtype (float64 for other input)."""
    a = _line(x)
    size = int(size)
    e = _extended(np.asarray(a, dtype=np.float64), size, mode)
    n = a.shape[0]
    run = np.empty(n)
    if n:
        run[0] = np.cumsum(e[:size])[-1]                   # left to right, as the recurrence
        np.subtract(e[size:size + n - 1], e[:n - 1], out=run[1:])
        np.cumsum(run, out=run)
        run /= size
    return run.astype(a.dtype, copy=False) if a.dtype.kind == "f" else run


def median_filter(x, size: int, mode: str = "reflect") -> np.ndarray:
    """Running median of a 1-D array over an odd ``size`` samples (``scipy.ndimage.median_filter``
    with an integer ``size`` on a 1-D array)."""
    a = _line(x)
    size = int(size)
    if size % 2 == 0:
        raise ValueError(f"median filter size must be odd, got {size}")
    if mode == "reflect" and size > 2 * a.shape[0] + 1:
        raise ValueError(f"median filter size {size} is longer than 2 n + 1 for a line of n = {a.shape[0]} "
                         "samples in mode 'reflect'")
    e = _extended(a, size, mode)
    step = e.strides[0]
    windows = np.lib.stride_tricks.as_strided(e, (a.shape[0], size), (step, step), writeable=False)
    rows = windows.copy()                       # (n, size): row i is the window of output i
    rows.sort(axis=-1)
    return rows[:, size // 2].copy()


def rfft_rows(frames: np.ndarray) -> np.ndarray:
    """``numpy.fft.rfft(frames, axis=-1)`` of a float32 or float64 array, computed
    :data:`RFFT_ROWS_PER_CALL` rows at a time (each row's transform is the same either way);
    complex64 for float32 input, complex128 for float64."""
    frames = np.asarray(frames)
    n = frames.shape[-1]
    rows = frames.reshape(-1, n)
    out_dtype = np.complex64 if frames.dtype == np.float32 else np.complex128
    out = np.empty((rows.shape[0], n // 2 + 1), dtype=out_dtype)
    if _RFFT_TAKES_OUT:
        for i in range(0, rows.shape[0], RFFT_ROWS_PER_CALL):
            np.fft.rfft(rows[i:i + RFFT_ROWS_PER_CALL], axis=-1, out=out[i:i + RFFT_ROWS_PER_CALL])
    else:
        for i in range(0, rows.shape[0], RFFT_ROWS_PER_CALL):
            out[i:i + RFFT_ROWS_PER_CALL] = np.fft.rfft(rows[i:i + RFFT_ROWS_PER_CALL], axis=-1)
    return out.reshape(frames.shape[:-1] + (n // 2 + 1,))


def _clenshaw(y: np.ndarray, coeffs) -> np.ndarray:
    b0 = np.full_like(y, coeffs[0])
    b1 = np.zeros_like(y)
    b2 = b1
    for c in coeffs[1:]:
        b2 = b1
        b1 = b0
        b0 = y * b1 - b2 + c
    return 0.5 * (b0 - b2)


def bessel_i0(x) -> np.ndarray:
    """Modified Bessel function of the first kind, order 0, elementwise (float64; see the
    module docstring for the method)."""
    a = np.abs(np.asarray(x, dtype=np.float64))
    flat = a.ravel()
    growth = np.array([math.exp(v) if not v > _LOG_MAX_FLOAT else math.inf for v in flat.tolist()],
                      dtype=np.float64)
    out = np.empty_like(flat)
    low = flat <= 8.0
    out[low] = growth[low] * _clenshaw(flat[low] / 2.0 - 2.0, _I0_A)
    high = ~low
    with np.errstate(invalid="ignore"):       # inf / inf at x = inf: NaN, as scipy.special.i0
        out[high] = growth[high] * _clenshaw(32.0 / flat[high] - 2.0, _I0_B) / np.sqrt(flat[high])
    return out.reshape(a.shape)


# ---- numpy.random.default_rng(seed).random(count), without importing numpy.random
# (about as long to import as the rest of the measurement's NumPy use on a short file)
_MASK32 = 0xFFFFFFFF
_MASK64 = (1 << 64) - 1
_MASK128 = (1 << 128) - 1
#: SeedSequence hashing constants (O'Neill's seed_seq_fe, as NumPy's SeedSequence uses them)
_SS_INIT_A, _SS_MULT_A = 0x43B0D7E5, 0x931E8875
_SS_INIT_B, _SS_MULT_B = 0x8B51F9DD, 0x58F38DED
_SS_MIX_L, _SS_MIX_R = 0xCA01F9DD, 0x4973F715
_SS_POOL = 4
#: PCG64's 128-bit LCG multiplier (M. E. O'Neill, "PCG: a family of simple fast space-efficient
#: statistically good algorithms for random number generation", 2014)
_PCG_MULT = 0x2360ED051FC65DA44385DF649FCCF645


def _seed_pool(seed: int) -> list[int]:
    """The 4-word entropy pool NumPy's ``SeedSequence(seed)`` mixes from a non-negative int."""
    words = []
    while True:
        words.append(seed & _MASK32)
        seed >>= 32
        if not seed:
            break
    const = _SS_INIT_A

    def hashmix(value: int) -> int:
        nonlocal const
        value = (value ^ const) & _MASK32
        const = (const * _SS_MULT_A) & _MASK32
        value = (value * const) & _MASK32
        return value ^ (value >> 16)

    def mix(x: int, y: int) -> int:
        r = (_SS_MIX_L * x - _SS_MIX_R * y) & _MASK32
        return r ^ (r >> 16)

    pool = [hashmix(words[i] if i < len(words) else 0) for i in range(_SS_POOL)]
    for src in range(_SS_POOL):
        for dst in range(_SS_POOL):
            if src != dst:
                pool[dst] = mix(pool[dst], hashmix(pool[src]))
    for src in range(_SS_POOL, len(words)):
        for dst in range(_SS_POOL):
            pool[dst] = mix(pool[dst], hashmix(words[src]))
    return pool


def _seed_state64(pool: list[int], n_words64: int) -> list[int]:
    """``SeedSequence.generate_state(n_words64, np.uint64)`` from its pool."""
    const = _SS_INIT_B
    out32 = []
    for i in range(2 * n_words64):
        v = (pool[i % _SS_POOL] ^ const) & _MASK32
        const = (const * _SS_MULT_B) & _MASK32
        v = (v * const) & _MASK32
        out32.append(v ^ (v >> 16))
    return [out32[2 * i] | (out32[2 * i + 1] << 32) for i in range(n_words64)]


def default_rng_random(seed: int, count: int) -> np.ndarray:
    """``numpy.random.default_rng(seed).random(count)`` (float64, the same values) for a
    non-negative integer ``seed``: NumPy's ``SeedSequence`` turns the seed into PCG64's
    128-bit state and increment, PCG64 (XSL-RR output) gives 64-bit words, and each double is
    ``(word >> 11) * 2**-53``.  Plain Python: meant for a few hundred values."""
    seed, count = int(seed), int(count)
    if seed < 0:
        raise ValueError(f"seed must be a non-negative integer, got {seed}")
    if count < 0:
        raise ValueError(f"count must be >= 0, got {count}")
    s0, s1, i0, i1 = _seed_state64(_seed_pool(seed), 4)
    inc = ((((i0 << 64) | i1) << 1) | 1) & _MASK128
    state = (inc + ((s0 << 64) | s1)) & _MASK128            # srandom: step from 0, add the seed,
    state = (state * _PCG_MULT + inc) & _MASK128            # step again
    out = []
    for _ in range(count):
        state = (state * _PCG_MULT + inc) & _MASK128
        rot = state >> 122
        word = ((state >> 64) ^ state) & _MASK64
        word = ((word >> rot) | (word << (64 - rot))) & _MASK64
        out.append((word >> 11) * (1.0 / 9007199254740992.0))
    return np.array(out, dtype=np.float64)
