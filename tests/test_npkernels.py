"""masterqc.measure.npkernels against SciPy (the oracle: scipy.ndimage, scipy.special, scipy.fft).

The running filters and I0 must give SciPy's bits (the measurement's results then do not
depend on which one ran); the real FFT is NumPy's pocketfft, whose float32 results differ
from scipy.fft's float32 ones by rounding: the test bounds that difference and checks the
NumPy transform against a float64 reference.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.fft
import scipy.ndimage as ndi
import scipy.special

from masterqc.measure import npkernels as nk

MODES = ("reflect", "nearest", "wrap", "constant")


def _cases(seed: int, count: int):
    """Lines of 1..300 samples (some with ties, some all equal), windows of 1..120 samples,
    so windows longer than the line (the extension then repeats) are covered too."""
    rng = np.random.default_rng(seed)
    for i in range(count):
        n = int(rng.integers(1, 300))
        size = int(rng.integers(1, 120))
        x = rng.standard_normal(n) * 10.0 ** rng.uniform(-3, 3)
        if i % 7 == 0:
            x = np.round(x)                      # ties
        if i % 53 == 0:
            x = np.full(n, 0.25)                 # a flat line
        yield x, size, MODES[i % len(MODES)]


@pytest.mark.parametrize("name", ["maximum_filter1d", "minimum_filter1d", "uniform_filter1d"])
def test_running_filters_give_scipy_ndimage_bits(name):
    ours, ref = getattr(nk, name), getattr(ndi, name)
    checked = 0
    for x, size, mode in _cases(15, 900):
        got, want = ours(x, size, mode=mode), ref(x, size, mode=mode)
        assert got.dtype == want.dtype and got.shape == want.shape
        assert np.array_equal(got, want), (name, x.size, size, mode)
        checked += 1
    assert checked > 800


def test_running_filters_default_mode_is_reflect():
    x = np.array([5.0, 1.0, 4.0, 2.0, 8.0, 0.5])
    for name in ("maximum_filter1d", "minimum_filter1d", "uniform_filter1d"):
        assert np.array_equal(getattr(nk, name)(x, 4), getattr(ndi, name)(x, 4)), name
    # by hand (half-sample reflection 1 5 | 5 1 4 2 8 0.5 | 0.5): running maximum over 3
    assert nk.maximum_filter1d(x, 3).tolist() == [5.0, 5.0, 4.0, 8.0, 8.0, 8.0]


def test_uniform_filter_keeps_float32():
    x = np.linspace(-1.0, 1.0, 257, dtype=np.float32) ** 3
    got = nk.uniform_filter1d(x, 31, mode="nearest")
    assert got.dtype == np.float32
    assert np.array_equal(got, ndi.uniform_filter1d(x, 31, mode="nearest"))


def test_median_filter_gives_scipy_ndimage_bits():
    checked = 0
    for x, size, mode in _cases(16, 900):
        size |= 1                                     # odd windows (the measurement's)
        if mode == "reflect" and size > 2 * x.size + 1:
            with pytest.raises(ValueError, match="longer than 2 n"):
                nk.median_filter(x, size, mode=mode)
            continue
        got = nk.median_filter(x, size, mode=mode)
        assert np.array_equal(got, ndi.median_filter(x, size=size, mode=mode)), (x.size, size, mode)
        checked += 1
    assert checked > 700
    # the measurement's own use: a local floor of a power spectrum (51 bins, nearest)
    p = np.random.default_rng(3).exponential(size=4801) * np.logspace(0, -6, 4801)
    assert np.array_equal(nk.median_filter(p, 51, mode="nearest"), ndi.median_filter(p, size=51, mode="nearest"))


def test_bad_arguments_are_refused_by_name():
    x = np.arange(10.0)
    with pytest.raises(ValueError, match="odd"):
        nk.median_filter(x, 4)
    with pytest.raises(ValueError, match="mode 'edge'"):
        nk.maximum_filter1d(x, 3, mode="edge")
    with pytest.raises(ValueError, match="1-D"):
        nk.uniform_filter1d(np.ones((2, 3)), 3)
    with pytest.raises(ValueError, match="size"):
        nk.minimum_filter1d(x, 0)


def test_bessel_i0_gives_scipy_special_bits():
    rng = np.random.default_rng(4)
    x = np.concatenate([rng.uniform(0.0, 30.0, 20000), np.linspace(0.0, 40.0, 4001),
                        [0.0, 8.0, np.nextafter(8.0, 9.0), -3.5, 700.0, 710.0, 1e4, np.inf]])
    got = nk.bessel_i0(x)
    assert np.array_equal(got, scipy.special.i0(x), equal_nan=True)
    assert got[-3] == np.inf and nk.bessel_i0(0.0) == 1.0       # I0(0) = 1 (the series' first term)
    assert np.isnan(nk.bessel_i0(np.nan))
    # the Kaiser windows of the measurement (decimator beta 10, replay beta 5), to the bit
    for n, beta in ((801, 10.0), (1001, 5.0)):
        k = np.arange(n, dtype=np.float64)
        a = (n - 1) / 2.0
        arg = beta * np.sqrt(1 - ((k - a) / a) ** 2.0)
        assert np.array_equal(nk.bessel_i0(arg), scipy.special.i0(arg))


@pytest.mark.parametrize("n", [4410, 4800, 8820, 9600, 19200])
def test_rfft_rows_is_numpy_rfft_and_within_float32_rounding_of_scipy(n):
    """The frame lengths of the spectral front end (0.1 s at 44.1..192 kHz).  Bounds: against a
    float64 transform, NumPy's float32 result is within 1.2e-7 of the largest bin (two float32
    units in the last place of it; measured up to 4e-8); scipy.fft's float32 result differs
    from it by up to 5e-7 of the largest bin (measured up to 2e-7), so a bin 60 dB below a
    frame's strongest one (1e-3 of it) moves by at most 5e-4 of itself, 20 log10(1 + 5e-4)
    = 0.0043 dB (measured up to 0.0003 dB), and a bin about 126 dB down (5e-7 of the strongest)
    may change entirely (house bound: float32 rounding of the transform)."""
    rng = np.random.default_rng(n)
    frames = rng.standard_normal((13, 2, n)).astype(np.float32)
    got = nk.rfft_rows(frames)
    assert got.dtype == np.complex64 and got.shape == (13, 2, n // 2 + 1)
    assert np.array_equal(got, np.fft.rfft(frames, axis=-1))
    ref = np.fft.rfft(frames.astype(np.float64), axis=-1)
    peak = np.abs(ref).max(axis=-1, keepdims=True)
    assert np.max(np.abs(got - ref) / peak) <= 1.2e-7
    sp = scipy.fft.rfft(frames, axis=-1)
    assert np.max(np.abs(got - sp) / peak) <= 5e-7
    strong = np.abs(ref) >= peak * 10 ** (-60 / 20)
    assert np.max(np.abs(20 * np.log10(np.abs(got[strong]) / np.abs(sp[strong])))) <= 0.0043
    assert np.array_equal(nk.rfft_rows(frames.astype(np.float64)), ref)


def test_default_rng_random_gives_numpy_random_values():
    """numpy.random is the oracle: the same doubles for seeds of one to five 32-bit words
    (the seed's words feed NumPy's SeedSequence pool), and the measurement's own draws."""
    seeds = (0, 1, 2, 3, 7, 15, 2026, 2**31 - 1, 2**32 - 1, 2**32, 2**40 + 5, 2**64 + 3, 2**130 + 99)
    for seed in seeds:
        for count in (0, 1, 5, 257):
            got = nk.default_rng_random(seed, count)
            assert got.dtype == np.float64 and got.shape == (count,)
            assert np.array_equal(got, np.random.default_rng(seed).random(count)), (seed, count)
    with pytest.raises(ValueError, match="seed"):
        nk.default_rng_random(-1, 3)


def test_frame_starts_are_those_numpy_random_gave():
    """frames.frame_starts draws its jitter from default_rng_random: the positions are the ones
    ``numpy.random.default_rng(seed)`` gives (the formula of its docstring, written out here)."""
    from masterqc.measure.frames import frame_starts
    for total, frame_len, max_frames, min_hop, seed in ((48000, 4800, 40, 2400, 0), (10 ** 7, 8192, 300, 4096, 3),
                                                        (44100 * 30, 1024, 97, 512, 5)):
        span = total - frame_len
        count = int(min(max_frames, span // max(1, min_hop) + 1))
        u = np.random.default_rng(seed).random(count)
        want = np.clip(np.floor((np.arange(count) + u) * (span + 1) / count).astype(np.int64), 0, span)
        assert np.array_equal(frame_starts(total, frame_len, max_frames, min_hop, seed=seed), want)
