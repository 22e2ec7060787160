"""The measurement's own filter designs and IIR runner against scipy.signal (the oracle).

Each design in masterqc.measure.filterdesign is written from its published formula
(see that module's docstring: Harris 1978 for the Blackman-Harris window, Kaiser 1974
for the Kaiser window and the window-method FIR, the Butterworth prototype with the
pre-warped bilinear transform); scipy.signal computes the same formulas, so the
coefficients must agree -- here to the bit, and at worst within 1e-12.
masterqc.measure.iir runs the transposed direct form II recursion in the order
scipy.signal.sosfilt does, so its output must be bit-for-bit that of sosfilt.
"""

from __future__ import annotations

import threading

import numpy as np
import pytest
import scipy.signal as ss

from masterqc.measure import dcoffset, filterdesign, iir
from masterqc.measure.conversion import KAISER_BETA as CONV_BETA
from masterqc.measure.conversion import ZERO_CROSSINGS, design_filter
from masterqc.measure.kweight import kweighting_sos

RATES_HZ = (8000, 22050, 44100, 48000, 88200, 96000, 192000, 384000)


@pytest.mark.parametrize("n", [0, 1, 2, 3, 64, 65, 1001, 4096])
def test_blackman_harris_equals_scipy(n):
    got = filterdesign.blackman_harris(n)
    ref = ss.windows.blackmanharris(n, sym=True)
    assert got.shape == ref.shape
    assert np.array_equal(got, ref)
    if n >= 3:   # symmetric, peak 1 at the centre of an odd window, ends at a0-a1+a2-a3 = 6e-5 (analytic)
        assert np.allclose(got, got[::-1], rtol=0, atol=1e-15)
        assert got[0] == pytest.approx(0.35875 - 0.48829 + 0.14128 - 0.01168, abs=1e-15)


@pytest.mark.parametrize("n,beta", [(2, 5.0), (9, 10.0), (64, 10.0), (1601, 5.0)])
def test_kaiser_window_equals_scipy(n, beta):
    assert np.array_equal(filterdesign.kaiser_window(n, beta), ss.windows.kaiser(n, beta, sym=True))


@pytest.mark.parametrize("fs_hz", RATES_HZ)
def test_dc_decimator_fir_and_subsonic_butterworth_equal_scipy(fs_hz):
    d = max(1, int(fs_hz // dcoffset.LOW_RATE_HZ))
    rate_hz = fs_hz / d
    if d > 1:
        n = dcoffset.TAPS_PER_PHASE * d
        got = filterdesign.kaiser_lowpass_fir(n, rate_hz / 2.0, fs_hz, dcoffset.KAISER_BETA)
        ref = ss.firwin(n, rate_hz / 2.0, window=("kaiser", dcoffset.KAISER_BETA), fs=fs_hz)
        assert np.max(np.abs(got - ref)) <= 1e-12
        assert np.array_equal(got, ref)
        assert got.sum() == pytest.approx(1.0, abs=1e-14)          # DC gain 1 by construction
    got = filterdesign.butterworth_lowpass_sos(dcoffset.SUBSONIC_ORDER, dcoffset.SUBSONIC_EDGE_HZ, rate_hz)
    ref = ss.butter(dcoffset.SUBSONIC_ORDER, dcoffset.SUBSONIC_EDGE_HZ, btype="lowpass", fs=rate_hz, output="sos")
    assert np.max(np.abs(got - ref)) <= 1e-12
    assert np.array_equal(got, ref)
    # Butterworth: -3.0103 dB (|H|^2 = 1/2) at the edge, 0 dB at DC (analytic)
    _, h = ss.sosfreqz(got, worN=[0.0, dcoffset.SUBSONIC_EDGE_HZ], fs=rate_hz)
    assert 20 * np.log10(abs(h[0])) == pytest.approx(0.0, abs=1e-9)
    assert 20 * np.log10(abs(h[1])) == pytest.approx(-10 * np.log10(2.0), abs=1e-9)


@pytest.mark.parametrize("order", [2, 4, 6, 10])
def test_butterworth_other_orders_equal_scipy(order):
    got = filterdesign.butterworth_lowpass_sos(order, 1000.0, 48000.0)
    ref = ss.butter(order, 1000.0, fs=48000.0, output="sos")
    assert np.max(np.abs(got - ref)) <= 1e-12


@pytest.mark.parametrize("up,down", [(160, 147), (147, 160), (2, 1), (1, 2), (4, 1), (441, 480)])
def test_resampler_filter_equals_resample_poly_default(up, down):
    """conversion.design_filter is resample_poly's default low-pass (firwin, Kaiser beta 5), gain ``up``."""
    mr = max(up, down)
    ref = ss.firwin(2 * ZERO_CROSSINGS * mr + 1, 1.0 / mr, window=("kaiser", CONV_BETA)) * up
    assert np.array_equal(design_filter(up, down), ref)


def test_bad_design_arguments_are_refused():
    with pytest.raises(ValueError, match="cut-off"):
        filterdesign.kaiser_lowpass_fir(16, 600.0, 1000.0, 10.0)
    with pytest.raises(ValueError, match="even"):
        filterdesign.butterworth_lowpass_sos(3, 20.0, 1000.0)
    with pytest.raises(ValueError, match="edge"):
        filterdesign.butterworth_lowpass_sos(8, 0.0, 1000.0)


def _signal(shape, seed):
    rng = np.random.default_rng(seed)
    return 0.3 * rng.standard_normal(shape)


@pytest.mark.parametrize("fs_hz", (44100, 48000, 96000))
def test_python_recursion_is_bit_identical_to_sosfilt(fs_hz):
    sos = kweighting_sos(fs_hz)
    x = _signal((3, 5000), fs_hz)
    zi = _signal((2, 3, 2), fs_hz + 1) * 0.01
    ref, ref_z = ss.sosfilt(sos, x, axis=-1, zi=zi)
    got, got_z = iir.sosfilt_python(sos, x, zi)
    assert np.array_equal(got, ref) and np.array_equal(got_z, ref_z)
    # an 8th-order Butterworth at a low rate: poles close to the unit circle
    sos = filterdesign.butterworth_lowpass_sos(8, 20.0, 1000.0)
    ref, ref_z = ss.sosfilt(sos, x, axis=-1, zi=np.zeros((4, 3, 2)))
    got, got_z = iir.sosfilt_python(sos, x, np.zeros((4, 3, 2)))
    assert np.array_equal(got, ref) and np.array_equal(got_z, ref_z)


def test_sosfilt_switches_kernel_mid_stream_without_changing_a_bit(monkeypatch):
    """Without the directly loaded kernel (iir.compiled_kernel), blocks run in Python until the
    budget is spent, then through scipy.signal: the stream is the same."""
    monkeypatch.setattr(iir, "_kernel", False)                       # as where it cannot be loaded
    monkeypatch.setattr(iir, "_python_left", 3 * 2 * 3 * 1000)     # three 1000-frame 3-channel blocks
    sos = kweighting_sos(48000)
    x = _signal((10000, 3), 7)                                       # (frames, channels), axis 0
    zi = _signal((2, 2, 3), 8) * 0.01                                # (sections, 2, channels) for axis 0
    ref, ref_z = ss.sosfilt(sos, x, axis=0, zi=zi)
    layout = ss.sosfilt(sos, x[:1000], axis=0, zi=zi)[0].flags.f_contiguous
    parts = []
    for k in range(0, 10000, 1000):
        y, zi = iir.sosfilt(sos, x[k:k + 1000], axis=0, zi=zi)
        assert y.shape == (1000, 3) and y.flags.f_contiguous == layout   # same memory order as sosfilt's
        parts.append(y)
    assert iir._python_left == 0
    assert np.array_equal(np.concatenate(parts), ref) and np.array_equal(zi, ref_z)


def test_sosfilt_budget_is_taken_once_across_threads(monkeypatch):
    monkeypatch.setattr(iir, "_python_left", 8 * 400)
    granted = []
    barrier = threading.Barrier(8)

    def take():
        barrier.wait()
        granted.append(iir._take_budget(500))

    threads = [threading.Thread(target=take) for _ in range(8)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    # 3200 section-samples cover six requests of 500; the seventh is refused and ends the budget
    assert sum(granted) == 6 and iir._python_left == 0
