"""DC offset and energy below 20 Hz.

Analytic truth: the mean of a sine over whole periods is 0, so a constant
offset c reads 20*log10(|c|) dBFS; the mean square of a sum of sines of
distinct frequencies is the sum of a**2/2, and of a constant c is c**2.  The
sub-sonic filter is an order-8 Butterworth low-pass at 20 Hz (house choice,
``SUBSONIC_ORDER`` in masterqc/measure/dcoffset.py).  The Butterworth power
response of order N is |H(f)|**2 = 1 / (1 + (f/fc)**(2N)), so order 8 gives
1 / (1 + (f/20)**16): 5 Hz passes with (1/4)**16 = 2.3e-10 of loss (nil), 40 Hz
is -48.2 dB, 1 kHz far below -200 dB.  The filter is digital (scipy.signal.butter:
bilinear transform with the 20 Hz edge pre-warped) at the decimated rate r (1000 Hz
for 48 kHz input), so f/fc becomes tan(pi f/r) / tan(pi fc/r) exactly; at 55 Hz that
is 0.87 % above f/20 and reads 0.60 dB lower than the analogue formula.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf

from integrity_support import feed, info_for
from masterqc.measure.dcoffset import DcOffsetAnalyzer, energy_ratio_db, level_dbfs
from masterqc.measure.engine import measure_file

FS = 48000


def _tones(seconds=10, offset=(0.01, -0.001), fade_s=0.0):
    t = np.arange(seconds * FS) / FS
    tone = 0.5 * np.sin(2 * np.pi * 1000 * t)  # 48 samples per period: whole periods
    if fade_s:
        # raised-cosine fades: the tone's switching splatter below 20 Hz becomes negligible
        n = int(fade_s * FS)
        ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(n) / n)
        tone[:n] *= ramp
        tone[-n:] *= ramp[::-1]
    return np.stack([tone + offset[0], tone + offset[1]], axis=1)


@pytest.mark.parametrize("block", [65536, 4099])
def test_dc_offset_level_and_sign(block):
    x = _tones()
    m = feed(DcOffsetAnalyzer, x, info_for(x, bits=64, is_float=True), block=block).measurements
    # analytic: offsets 0.01 and -0.001 read 20*log10(0.01) = -40 and 20*log10(0.001) = -60 dBFS
    assert m["dc_offset_dbfs_per_channel"] == pytest.approx([-40.0, -60.0], abs=1e-9)
    assert m["dc_offset_sign_per_channel"] == [1, -1]
    assert m["dc_offset_dbfs"] == pytest.approx(-40.0, abs=1e-9)


def test_dc_energy_share_below_20_hz():
    x = _tones(fade_s=0.5)
    m = feed(DcOffsetAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    # DC c switched on for the whole file: its energy c**2 (Parseval: all of a 10 s rectangle's
    # energy but about 1/(pi**2 * 20 Hz * 10 s) = 0.05 % lies below 20 Hz); the total is the
    # mean square of the signal itself.
    for k, c in enumerate((0.01, -0.001)):
        expected = 10 * math.log10(c ** 2 / np.mean(x[:, k] ** 2))
        # 0.02 dB: house choice, a margin over the 0.05 % (0.002 dB) of the DC's energy above 20 Hz
        assert m["subsonic_energy_db_per_channel"][k] == pytest.approx(expected, abs=0.02)


def test_rumble_share_below_20_hz(tmp_path):
    t = np.arange(10 * FS) / FS  # 50 whole periods of 5 Hz
    x = 0.1 * np.sin(2 * np.pi * 5 * t) + 0.5 * np.sin(2 * np.pi * 1000 * t)
    path = tmp_path / "rumble.wav"
    sf.write(path, x[:, None], FS, subtype="DOUBLE")
    m = measure_file(path)["measurements"]
    gain = 1.0 / (1.0 + (5.0 / 20.0) ** 16)  # order-8 Butterworth power response at 5 Hz (docstring)
    expected = 10 * math.log10(gain * 0.1 ** 2 / 2 / (0.1 ** 2 / 2 + 0.5 ** 2 / 2))
    assert m["subsonic_energy_db_per_channel"][0] == pytest.approx(expected, abs=0.05)  # 0.05 dB: house choice
    assert m["dc_offset_dbfs"] < -100  # analytic: a sine over whole periods has no DC (float rounding only)


def test_silent_channel_has_no_levels():
    x = np.zeros((4800, 2))
    x[:, 1] = 0.25
    m = feed(DcOffsetAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    assert m["dc_offset_dbfs_per_channel"][0] is None
    assert m["dc_offset_dbfs_per_channel"][1] == pytest.approx(20 * math.log10(0.25), abs=1e-12)
    assert m["subsonic_energy_db_per_channel"][0] is None
    assert m["dc_offset_sign_per_channel"] == [0, 1]
    assert level_dbfs(0.0) is None and energy_ratio_db(1.0, 0.0) is None


def _faded(f, seconds=4, fs=FS):
    t = np.arange(seconds * fs) / fs
    x = 0.5 * np.sin(2 * np.pi * f * t)
    n = fs // 2
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(n) / n)
    x[:n] *= ramp
    x[-n:] *= ramp[::-1]
    return x[:, None]


@pytest.mark.parametrize("f", [30.0, 40.0, 55.0])
def test_bass_above_20_hz_follows_the_butterworth_response(f):
    # |H(f)|**2 = 1 / (1 + (tan(pi f/r) / tan(pi 20/r))**(2*8)) for the digital order-8
    # Butterworth low-pass at 20 Hz, r = 1000 Hz the decimated rate (analytic, see the module
    # docstring); the fades and the decimating FIR move it by a few hundredths of a dB.
    x = _faded(f)
    m = feed(DcOffsetAnalyzer, x, info_for(x, bits=64, is_float=True)).measurements
    ratio = math.tan(math.pi * f / 1000.0) / math.tan(math.pi * 20.0 / 1000.0)
    assert m["subsonic_energy_db"] == pytest.approx(10 * math.log10(1 / (1 + ratio ** 16)), abs=0.1)


@pytest.mark.parametrize("f, fs", [(997.0, 48000), (1000.0, 48000), (2000.0, 48000),
                                   (44100 / 44, 44100), (1000.0, 96000)])
def test_tones_at_the_decimated_rate_do_not_alias_below_20_hz(f, fs):
    # a tone at (a multiple of) the decimated rate would fold onto DC without the FIR
    x = _faded(f, seconds=2, fs=fs)
    m = feed(DcOffsetAnalyzer, x, info_for(x, fs=fs, bits=64, is_float=True), block=7777).measurements
    assert m["subsonic_energy_db"] < -100.0  # house choice: nothing but the FIR's residue may reach below 20 Hz


@pytest.mark.parametrize("blocks", [[65536], [4097], [47, 4097, 1, 95, 65536]])
def test_decimator_equals_direct_fir(blocks):
    """The streaming polyphase decimator against the direct form: ``y[k] = sum_i h[i] *
    x[k*d + d - 1 - i]`` (the FIR's output at every d-th input, the input zero before the
    file), by ``np.convolve`` in float64.  Different summation order only: equal within
    1e-12 of the signal's scale.  Blocks of varying length (fed cyclically) cross row boundaries."""
    from masterqc.measure.dcoffset import Decimator
    from masterqc.measure.filterdesign import kaiser_lowpass_fir
    from masterqc.measure import dcoffset
    rng = np.random.default_rng(7)
    x = rng.uniform(-1.0, 1.0, (3 * FS + 17, 2))
    dec = Decimator(FS, 2)
    d = dec.factor
    assert d == 48                              # analytic: 48000 // LOW_RATE_HZ (1000 Hz)
    got, i, k = [], 0, 0
    while i < x.shape[0]:
        n = blocks[k % len(blocks)]
        got.append(dec.process(x[i:i + n]) if k % 2 else dec.process_rows(np.ascontiguousarray(x[i:i + n].T)))
        i, k = i + n, k + 1
    got = np.concatenate(got, axis=1)
    h = kaiser_lowpass_fir(dcoffset.TAPS_PER_PHASE * d, dec.rate_hz / 2.0, FS, dcoffset.KAISER_BETA)
    for c in range(2):
        full = np.convolve(x[:, c], h)[:x.shape[0]]
        ref = full[d - 1::d]
        assert got.shape[1] == ref.shape[0] == x.shape[0] // d
        np.testing.assert_allclose(got[c], ref, rtol=0, atol=1e-12)
