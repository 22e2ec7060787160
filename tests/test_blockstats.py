"""The compiled per-block statistics give numpy's bits (masterqc/measure/blockstats.py).

Reference: numpy itself (``np.add.reduceat`` of the products), the definition the kernel
reproduces; equality is bit for bit, signs of zero included (house choice: the compiled path
must change no result).
"""

from __future__ import annotations

import numpy as np
import pytest

from masterqc.measure import blockstats, iir
from masterqc.measure.blockstats import pair_window_sums, pair_window_sums_numpy


def compiled_pair_sums():
    module = iir.own_module()
    fn = getattr(module, "pair_sums", None) if module is not None else None
    if fn is None:
        pytest.skip("the optional compiled module is not built here")
    return fn


def window_cuts(n, window, first):
    cuts = np.arange(first, n, window)
    if cuts.size == 0 or cuts[0] != 0:
        cuts = np.concatenate(([0], cuts))
    return cuts.astype(np.int64)


@pytest.mark.parametrize("n", [1, 2, 7, 8, 9, 127, 128, 129, 4800, 8193, 65536])
def test_compiled_pair_sums_equal_numpy_reduceat_bit_for_bit(n):
    fn = compiled_pair_sums()
    rng = np.random.default_rng(n)
    for trial in range(6):
        scale = 10.0 ** rng.integers(-9, 1)
        x = rng.standard_normal(n) * scale
        y = rng.standard_normal(n)
        if trial == 1:                      # signed zeros
            x[:] = -0.0
            y[: n // 2] = 0.0
        elif trial == 2:                    # inverted pair
            y = -x
        elif trial == 3:                    # 24-bit codes
            x = np.round(x / scale * 2 ** 21) / 2 ** 23
            y = np.round(y * 2 ** 21) / 2 ** 23
        window = int(rng.integers(1, 6000))
        cuts = window_cuts(n, window, int(rng.integers(0, min(window, n))))
        out = np.empty((3, cuts.size))
        fn(x, y, cuts, out, n, cuts.size)
        want = np.stack([np.add.reduceat(x * y, cuts), np.add.reduceat(x * x, cuts),
                         np.add.reduceat(y * y, cuts)])
        assert np.array_equal(out, want), (n, trial)
        assert np.array_equal(np.signbit(out), np.signbit(want)), (n, trial)


def test_pair_window_sums_takes_the_kernel_and_matches_the_numpy_path():
    compiled_pair_sums()
    assert blockstats.pair_sums_kernel() is not None          # it passed its self-check here
    rng = np.random.default_rng(5)
    rows = rng.standard_normal((2, 70001))
    cuts = window_cuts(70001, 4800, 1234)
    got = pair_window_sums(rows[0], rows[1], cuts)
    assert np.array_equal(got, pair_window_sums_numpy(rows[0], rows[1], cuts))
    # strided rows (a transposed interleaved block) take numpy's path: the same values
    block = np.ascontiguousarray(rows.T)
    assert np.array_equal(pair_window_sums(block[:, 0], block[:, 1], cuts), got)


def test_self_check_refuses_a_kernel_that_rounds_otherwise():
    def plain_sum(x, y, cuts, out, n, k):           # left-to-right sums: not numpy's order
        ends = np.append(cuts[1:], n)
        for i, (a, b) in enumerate(zip(cuts, ends)):
            sxy = sxx = syy = 0.0
            for u, v in zip(x[a:b].tolist(), y[a:b].tolist()):
                sxy += u * v
                sxx += u * u
                syy += v * v
            out[:, i] = (sxy, sxx, syy)

    assert not blockstats._self_check(plain_sum)
    fn = compiled_pair_sums()
    assert blockstats._self_check(fn)


def test_pair_sums_refuses_bad_cuts():
    fn = compiled_pair_sums()
    x = np.zeros(10)
    out = np.empty((3, 2))
    with pytest.raises(ValueError):
        fn(x, x, np.array([0, 10], np.int64), out, 10, 2)      # a cut at the end
    with pytest.raises(ValueError):
        fn(x, x, np.array([3, 3], np.int64), out, 10, 2)       # not increasing


def compiled_active_positions():
    module = iir.own_module()
    fn = getattr(module, "active_positions", None) if module is not None else None
    if fn is None:
        pytest.skip("the optional compiled module is not built here")
    return fn


@pytest.mark.parametrize("n", [1, 2, 3, 9, 255, 256, 257, 513, 65536])
def test_compiled_active_positions_equal_the_numpy_masks(n):
    # The frozen-value candidates: samples equal to a neighbour (IEEE equality, as numpy
    # compares: NaN equals nothing, -0.0 equals 0.0), and the last sample always.
    fn = compiled_active_positions()
    rng = np.random.default_rng(n)
    for trial in range(5):
        row = np.round(rng.standard_normal(n) * 2 ** 20) / 2 ** 23
        if trial == 1:                                   # runs of equal values, signed zeros, NaN
            row[rng.integers(0, n, n // 3 + 1)] = 0.0
            row[rng.integers(0, n, n // 5 + 1)] = -0.0
            row[rng.integers(0, n, n // 7 + 1)] = np.nan
        elif trial == 2:                                 # a few equal pairs at piece edges
            for p in (255, 256, 511, n - 2):
                if 0 <= p < n - 1:
                    row[p + 1] = row[p]
        elif trial == 3:
            row[:] = 0.25
        prev = (np.nan, row[0], 0.0, 0.25, -0.0)[trial]
        idx = np.empty(n, np.int64)
        count = fn(row, float(prev), idx, n)
        want = blockstats.active_positions_numpy(row, prev)
        assert np.array_equal(idx[:count], want), (n, trial)
        assert np.array_equal(blockstats.active_positions(row, prev), want), (n, trial)


def test_silence_analyzer_gives_the_same_runs_without_the_compiled_kernels(monkeypatch):
    # The dropout runs found through the compiled positions equal those of numpy's masks
    # (silence.py's definition); a block with mutes, frozen values and a run across blocks.
    compiled_active_positions()
    from masterqc.measure.silence import SilenceAnalyzer
    from masterqc.measure.options import MeasureOptions

    class Info:
        sample_rate_hz = 48000
        channels = 2
        channel_layout = ("L", "R")
        bit_depth = 24
        is_float = False
        frames = 200000

    rng = np.random.default_rng(9)
    x = np.round(rng.standard_normal((2, Info.frames)) * 2 ** 20) / 2 ** 23
    x[0, 1000:6000] = 0.0
    x[1, 3000:9000] = 0.125
    x[:, 65530:70000] = -0.0
    x[0, 130000:140000] = 0.5

    def run():
        a = SilenceAnalyzer(Info, MeasureOptions())
        for i in range(0, Info.frames, 65536):
            a.process_planar(np.ascontiguousarray(x[:, i:i + 65536]))
        return a.finish().measurements

    with_kernel = run()
    monkeypatch.setitem(iir._CHECKED, "active_positions", False)
    without = run()
    assert with_kernel == without
    assert with_kernel["dropout_count"] == 3


# --- the loudness meter's stereo power kernel (masterqc/measure/loudness.py) ----------------------
def compiled_stereo_power():
    module = iir.own_module()
    fn = getattr(module, "stereo_power", None) if module is not None else None
    if fn is None:
        pytest.skip("the optional compiled module is not built here")
    return fn


@pytest.mark.parametrize("n", [1, 5, 8, 129, 4800, 65536])
def test_compiled_stereo_power_equals_numpy_steps_bit_for_bit(n):
    # energies (np.square then .sum(axis=1)), the (1, 1) channel sum and the 1 ms tick sums
    # (np.add.reduceat) with the rest after the last boundary: numpy's steps are the definition
    from masterqc.measure import loudness
    fn = compiled_stereo_power()
    rng = np.random.default_rng(n)
    for trial in range(4):
        y = np.ascontiguousarray(rng.standard_normal((2, n)) * 10.0 ** rng.integers(-6, 1))
        if trial == 1:
            y[:, : n // 2] = -0.0
        if trial == 2 or n < 3:
            seg, end = None, 0                           # no tick ends in the block
        else:
            step = int(rng.integers(1, 60))
            end = int(rng.integers(max(1, n // 2), n + 1))
            seg = np.arange(0, end, step, dtype=np.int64)
            if seg[-1] >= end:
                seg = seg[:-1]
        k = 0 if seg is None else seg.size
        p, ticks, out = np.empty(n), np.empty(k), np.empty(3)
        fn(y, p, np.empty(0, np.int64) if seg is None else seg, ticks, out, n, k, end)
        energy, want_ticks, rest = loudness._stereo_power_numpy(y, seg, end)
        assert np.array_equal(out[:2], energy), (n, trial)
        assert out[2] == rest and np.signbit(out[2]) == np.signbit(rest), (n, trial)
        assert np.array_equal(p, y[0] * y[0] + y[1] * y[1])
        if want_ticks is not None:
            assert np.array_equal(ticks, want_ticks), (n, trial)


def test_loudness_meter_gives_the_same_bits_without_the_stereo_power_kernel(monkeypatch):
    # ITU-R BS.1770-5 stereo weights (1, 1): the meter's integrated loudness, range, maxima and
    # channel energies are the same bits through the compiled kernel and through numpy
    from masterqc.measure import loudness
    compiled_stereo_power()
    assert loudness.stereo_power_kernel() is not None
    rng = np.random.default_rng(3)
    x = rng.standard_normal((2, 48000 * 8)) * np.linspace(0.01, 0.5, 48000 * 8)
    x[:, 48000:60000] = 0.0

    def run():
        meter = loudness.LoudnessMeter(48000, [1.0, 1.0])
        for i in range(0, x.shape[1], 65531):
            meter.process_planar(np.ascontiguousarray(x[:, i:i + 65531]))
        return repr(meter.summary()), meter.channel_energy.copy(), meter._sub[:meter._nsub].copy()

    with_kernel = run()
    monkeypatch.setitem(iir._CHECKED, "stereo_power", False)
    without = run()
    assert with_kernel[0] == without[0]
    assert np.array_equal(with_kernel[1], without[1]) and np.array_equal(with_kernel[2], without[2])
