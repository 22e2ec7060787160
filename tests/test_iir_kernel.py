"""masterqc.measure.iir.sosfilt against scipy.signal.sosfilt (the reference library).

iir.sosfilt calls masterqc's own compiled cascade kernel when it was built, else scipy's
(loaded from its extension module without importing scipy.signal), with the copies and axis
order scipy.signal.sosfilt makes, so every output must be the same bits in the same memory
order (the same operations in the same order per channel), fed in blocks of any size, for
any channel count, along either axis.  Both kernels are tested.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
import scipy.signal as ss

from masterqc.measure import filterdesign, iir
from masterqc.measure.kweight import kweighting_sos


def _noise(shape, seed):
    return 0.3 * np.random.default_rng(seed).standard_normal(shape)


def test_kernel_loads_without_importing_scipy_signal():
    code = ("import sys\nimport masterqc.measure.iir as iir\n"
            "assert iir.compiled_kernel() is not None\n"
            "print('scipy.signal' in sys.modules, 'scipy.stats' in sys.modules)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300, check=True)
    assert out.stdout.split() == ["False", "False"]


SOS_CASES = {
    "kweighting 44.1 kHz": lambda: kweighting_sos(44100),
    "kweighting 48 kHz": lambda: kweighting_sos(48000),
    "kweighting 192 kHz": lambda: kweighting_sos(192000),
    # poles close to the unit circle (the DC analyzer's 20 Hz low-pass at its 1 kHz rate)
    "butterworth 8th 20 Hz at 1 kHz": lambda: filterdesign.butterworth_lowpass_sos(8, 20.0, 1000.0),
}


def _kernel_of(path: str):
    if path == "own":
        k = iir._own_kernel()
        if k is None:
            pytest.skip("masterqc's own kernel (masterqc/measure/_cascade.c) was not built here")
        return k
    return iir._load_kernel_module()._sosfilt


@pytest.fixture(params=["own", "scipy"])
def kernel_path(request, monkeypatch):
    """Run the test with masterqc's own compiled kernel, then with scipy's."""
    monkeypatch.setattr(iir, "_kernel", _kernel_of(request.param))
    return request.param


@pytest.mark.parametrize("case", sorted(SOS_CASES))
@pytest.mark.parametrize("channels", [1, 2, 3, 6])
@pytest.mark.parametrize("axis", [-1, 0])
def test_streamed_blocks_equal_scipy_sosfilt_bit_for_bit(case, channels, axis, kernel_path):
    assert iir.compiled_kernel() is not None
    sos = SOS_CASES[case]()
    n = 20000
    x = _noise((channels, n) if axis == -1 else (n, channels), channels)
    zi0 = _noise((sos.shape[0], channels, 2) if axis == -1 else (sos.shape[0], 2, channels), 9) * 0.01
    ref, ref_z = ss.sosfilt(sos, x, axis=axis, zi=zi0)              # whole signal at once
    cuts = [0, 1, 8, 4104, 4105, 19999, n]                         # blocks of 1, 7, 4096, 1, 15894, 1 frames
    zi, parts = zi0.copy(), []
    for a, b in zip(cuts[:-1], cuts[1:]):
        xb = x[:, a:b] if axis == -1 else x[a:b]
        y, zi_next = iir.sosfilt(sos, xb, axis=axis, zi=zi)
        want, want_z = ss.sosfilt(sos, xb, axis=axis, zi=zi)       # the same block through scipy
        assert np.array_equal(y, want) and np.array_equal(zi_next, want_z)
        assert y.strides == want.strides and zi_next.strides == want_z.strides
        parts.append(y)
        zi = zi_next
    got = np.concatenate(parts, axis=1 if axis == -1 else 0)
    assert np.array_equal(got, ref) and np.array_equal(zi, ref_z)
    assert np.array_equal(zi0, _noise(zi0.shape, 9) * 0.01)        # the caller's state is never written


def test_wrong_zi_shape_is_refused():
    with pytest.raises(ValueError, match="zi must have shape"):
        iir.sosfilt(kweighting_sos(48000), np.zeros((2, 10)), axis=-1, zi=np.zeros((2, 3, 2)))


def test_a_kernel_that_differs_is_not_used():
    def wrong(sos, x, zi):                   # leaves x as it is: not a filter
        zi[...] = 0.0
    assert iir._kernel_self_check(wrong) is False
    assert iir._kernel_self_check(iir.compiled_kernel()) is True


@pytest.mark.parametrize("path", ["own", "scipy"])
def test_each_kernel_passes_the_self_check(path):
    assert iir._kernel_self_check(_kernel_of(path)) is True


def test_own_kernel_refuses_mismatched_buffers():
    own = pytest.importorskip(iir.OWN_KERNEL_MODULE)
    sos = np.ascontiguousarray(kweighting_sos(48000))
    with pytest.raises(ValueError, match="buffer sizes"):
        own.cascade(sos, np.zeros((2, 10)), np.zeros((2, 2, 2)), 2, 11, 2)


def test_own_kernel_can_be_switched_off():
    code = ("import masterqc.measure.iir as iir\n"
            "assert iir.compiled_kernel() is not None\n"
            "print(iir.kernel_source)\n")
    env = dict(__import__("os").environ, **{iir.OWN_KERNEL_ENV: "0"})
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300,
                         check=True, env=env)
    assert out.stdout.split() == ["scipy"]


def test_measurements_are_the_same_with_either_kernel(tmp_path, monkeypatch):
    """End to end: a stereo master measured with each kernel gives the same result, key for key."""
    import json

    import soundfile as sf

    from masterqc.measure.engine import measure_file
    from masterqc.measure.options import MeasureOptions
    path = tmp_path / "tone.wav"
    t = np.arange(3 * 48000) / 48000
    x = np.stack([0.3 * np.sin(2 * np.pi * 997 * t), 0.2 * np.sin(2 * np.pi * 61 * t)], axis=1)
    sf.write(str(path), x + _noise(x.shape, 3) * 0.01, 48000, subtype="PCM_24")
    got = {}
    for which in ("own", "scipy"):
        monkeypatch.setattr(iir, "_kernel", _kernel_of(which))
        r = measure_file(path, MeasureOptions(threads=1))
        got[which] = json.dumps([r["measurements"], r["series"]], sort_keys=True)
    assert got["own"] == got["scipy"]
    assert '"integrated_lufs": -' in got["own"]


@pytest.mark.parametrize("case", sorted(SOS_CASES))
@pytest.mark.parametrize("channels", [1, 2, 3, 6])
def test_own_kernel_out_of_place_equals_scipy_bit_for_bit(case, channels, monkeypatch):
    # C-ordered (channels, n) blocks (the engine's planar rows) are filtered straight from the
    # input into a fresh output (cascade_into): the same recursion, so scipy's bits (by
    # construction); the caller's block is never written
    k = _kernel_of("own")
    if getattr(k, "into", None) is None:
        pytest.skip("this build of masterqc's kernel has no cascade_into")
    monkeypatch.setattr(iir, "_kernel", k)
    used = []
    into = k.into
    monkeypatch.setattr(k, "into", lambda *a: (used.append(1), into(*a)))
    sos = SOS_CASES[case]()
    x = _noise((channels, 20000), channels)
    zi = _noise((sos.shape[0], channels, 2), 9) * 0.01
    for a, b in ((0, 1), (1, 4097), (4097, 20000)):
        xb = np.ascontiguousarray(x[:, a:b])
        xb.flags.writeable = False                                  # as the engine hands its blocks
        y, zi_next = iir.sosfilt(sos, xb, axis=-1, zi=zi)
        want, want_z = ss.sosfilt(sos, xb, axis=-1, zi=zi)
        assert np.array_equal(y, want) and np.array_equal(zi_next, want_z)
        assert y.strides == want.strides
        assert np.array_equal(xb, x[:, a:b])
        zi = zi_next
    assert len(used) == 3


def test_own_kernel_out_of_place_refuses_mismatched_buffers():
    own = pytest.importorskip(iir.OWN_KERNEL_MODULE)
    if not hasattr(own, "cascade_into"):
        pytest.skip("this build of masterqc's kernel has no cascade_into")
    sos = np.ascontiguousarray(kweighting_sos(48000))
    with pytest.raises(ValueError, match="buffer sizes"):
        own.cascade_into(sos, np.zeros((2, 10)), np.zeros((2, 11)), np.zeros((2, 2, 2)), 2, 10, 2)
