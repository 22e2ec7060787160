"""The quick look before the full cliff analysis (bandwidth._median_minus_p90) gives numpy's own numbers.

Oracle: numpy's np.median and np.percentile (method "linear", the default), compared bit for bit on
random slices with ties, smooth envelope-like runs, odd and even lengths and lengths 1 and 2.
"""

import struct

import numpy as np
import pytest

from masterqc.measure.bandwidth import _median_minus_p90


def _bits(x: float) -> bytes:
    return struct.pack("<d", x)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_same_bits_as_numpy(seed):
    rng = np.random.default_rng(seed)
    for trial in range(600):
        n, m = int(rng.integers(1, 300)), int(rng.integers(1, 600))
        kind = trial % 3
        if kind == 0:
            x = rng.normal(-60.0, 20.0, n + m)
        elif kind == 1:
            x = np.round(rng.normal(-60.0, 20.0, n + m), 1)          # many ties
        else:
            x = np.cumsum(rng.normal(0.0, 1.0, n + m)) - 80.0         # a smooth run, like an envelope in dB
        want = float(np.median(x[:n])) - float(np.percentile(x[n:], 90))
        assert _bits(_median_minus_p90(x[:n], x[n:])) == _bits(want), (seed, trial, n, m)


def test_small_and_known():
    # analytic: median of [1, 2, 3, 4] is 2.5; the 90th percentile of 0..10 is 9 (0.9 * 10 = 9 exactly)
    assert _median_minus_p90(np.array([4.0, 1.0, 3.0, 2.0]), np.arange(11.0)[::-1].copy()) == 2.5 - 9.0
    # one value each
    assert _median_minus_p90(np.array([5.0]), np.array([-7.0])) == 12.0


def test_nan_follows_numpy_and_input_untouched():
    below = np.array([1.0, np.nan, 3.0])
    above = np.arange(20.0)
    assert np.isnan(_median_minus_p90(below, above))
    x = np.arange(40.0)[::-1].copy()
    keep = x.copy()
    _median_minus_p90(x[:15], x[15:])
    assert np.array_equal(x, keep)
