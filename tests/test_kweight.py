"""K-weighting filter: coefficients against ITU-R BS.1770-5, Annex 1, and analytic properties."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.signal import sosfilt, sosfreqz

from masterqc.measure import kweight as kw

# ITU-R BS.1770-5 (11/2023), Annex 1, the two tables of 48 kHz coefficients
# (stage 1 "pre-filter" shelf, stage 2 "RLB" high-pass), a0 = 1.
BS1770_48K_SHELF = ([1.53512485958697, -2.69169618940638, 1.19839281085285],
                    [1.0, -1.69065929318241, 0.73248077421585])
BS1770_48K_HIGHPASS = ([1.0, -2.0, 1.0], [1.0, -1.99004745483398, 0.99007225036621])

RATES = [8000, 11025, 16000, 22050, 32000, 44100, 48000, 88200, 96000, 176400, 192000, 352800, 384000]


def test_48k_coefficients_match_bs1770_table():
    # BS.1770-5 Annex 1 tables, printed with 14 decimals: agreement to 1e-12
    sos = kw.kweighting_sos(48000)
    assert sos.shape == (2, 6)
    np.testing.assert_allclose(sos[0, :3], BS1770_48K_SHELF[0], rtol=0, atol=1e-12)
    np.testing.assert_allclose(sos[0, 3:], BS1770_48K_SHELF[1], rtol=0, atol=1e-12)
    np.testing.assert_allclose(sos[1, :3], BS1770_48K_HIGHPASS[0], rtol=0, atol=1e-12)
    np.testing.assert_allclose(sos[1, 3:], BS1770_48K_HIGHPASS[1], rtol=0, atol=1e-12)


def test_gain_at_997_and_1000_hz_48k():
    # BS.1770-5: a 997 Hz tone is read with the -0.691 dB offset cancelling the filter
    # gain (0.691 dB, the offset of the Annex 1 loudness equation); at 1000 Hz the gain is 0.698 dB
    # (analytic: |H(e^jw)| of the two Annex 1 biquads at 48 kHz evaluated at w = 2*pi*1000/48000)
    assert kw.kweighting_gain_db(997.0, 48000) == pytest.approx(0.691, abs=0.0005)
    assert kw.kweighting_gain_db(1000.0, 48000) == pytest.approx(0.698, abs=0.0005)


@pytest.mark.parametrize("fs", [32000, 44100, 48000, 88200, 96000, 192000, 384000])
def test_gain_at_997_hz_other_rates(fs):
    # ITU-R BS.1770-5 Annex 1: the -0.691 offset of the loudness equation cancels the K-weighting's gain
    # at 997 Hz (checked at 48 kHz in the test above).
    # same 0.691 dB within 0.008 dB: the rates share the 48 kHz pass-band gain; what remains
    # is the bilinear warping of the shelf, which the 48 kHz table carries too (computed:
    # -0.007 dB at 32 kHz, -0.001 at 44.1 kHz, +0.004 at 96 kHz, +0.006 at 384 kHz)
    assert kw.kweighting_gain_db(997.0, fs) == pytest.approx(0.691, abs=0.008)


@pytest.mark.parametrize("fs", [32000, 44100, 88200, 96000, 176400, 192000, 352800, 384000])
def test_response_close_to_48k_response(fs):
    # BS.1770-5 Annex 1 asks other rates to give the 48 kHz frequency response.  The
    # 48 kHz filter is itself a warped image of the prototype, so higher rates differ by
    # the 48 kHz warping, lower rates by their own: within 0.011 dB up to 5 kHz here.
    f = np.geomspace(10.0, min(5000.0, 0.4 * fs), 400)
    diff = kw.kweighting_gain_db(f, fs) - kw.kweighting_gain_db(f, 48000)
    assert np.max(np.abs(diff)) < 0.011


@pytest.mark.parametrize("fs", RATES)
def test_stage_gains_analytic(fs):
    # bilinear transform with pre-warping maps DC, the corner f0 and Nyquist exactly
    # (analytic): high shelf -> 0 dB at DC, Vh at Nyquist, |(1 - Vh) + j Vb / Q| * Q at f0;
    # high-pass -> 0 at DC, G at Nyquist, G * Q at its f0.
    vh = 10 ** (kw.SHELF_GAIN_DB / 20)
    vb = vh ** kw.SHELF_MID_EXPONENT
    b, a = kw.shelf_coefficients(fs)
    _w, h = sosfreqz(np.concatenate([b, a])[None, :], worN=[0.0, kw.SHELF_F0_HZ, fs / 2], fs=fs)
    assert abs(h[0]) == pytest.approx(1.0, rel=1e-12)
    assert abs(h[1]) == pytest.approx(abs(complex(1 - vh, vb / kw.SHELF_Q)) * kw.SHELF_Q, rel=1e-9)
    assert abs(h[2]) == pytest.approx(vh, rel=1e-9)
    b, a = kw.highpass_coefficients(fs)
    assert sum(b) == pytest.approx(0.0, abs=1e-15)
    _w, h = sosfreqz(np.concatenate([b, a])[None, :], worN=[kw.HIGHPASS_F0_HZ, fs / 2], fs=fs)
    assert abs(h[0]) == pytest.approx(kw.HIGHPASS_GAIN * kw.HIGHPASS_Q, rel=1e-9)
    assert abs(h[1]) == pytest.approx(kw.HIGHPASS_GAIN, rel=1e-9)


def test_highpass_gain_is_the_48k_a0():
    # the printed stage 2 numerator (1, -2, 1) is unnormalised, so the stage's gain at
    # Nyquist is |b(-1)| / |a(-1)| = 4 / (1 - a1 + a2), computed from the BS.1770-5 table;
    # algebraically equal to the bilinear a0 = 1 + K/Q + K^2 at 48 kHz
    a1, a2 = BS1770_48K_HIGHPASS[1][1:]
    assert kw.HIGHPASS_GAIN == pytest.approx(4.0 / (1.0 - a1 + a2), rel=1e-11)
    assert 20 * math.log10(kw.HIGHPASS_GAIN) == pytest.approx(0.0433, abs=0.0001)


@pytest.mark.parametrize("fs", [8000, 44100, 48000, 96000, 192000])
def test_highpass_rejects_low_frequencies(fs):
    # high-pass of order 2: about -12 dB per octave below the corner (analytic slope), so
    # 10 Hz sits ~ 2*20*log10(38.1/10) - 6 dB down; and the filter is stable at every rate
    g10 = kw.kweighting_gain_db(10.0, fs)
    g5 = kw.kweighting_gain_db(5.0, fs)
    assert -25.0 < g10 < -20.0
    assert g10 - g5 == pytest.approx(12.0, abs=0.6)
    for row in kw.kweighting_sos(fs):
        assert np.all(np.abs(np.roots(row[3:])) < 1.0)


def test_filtering_a_tone_gives_the_gain():
    # steady state of a 997 Hz sine through sosfilt reproduces the computed gain
    fs = 48000
    t = np.arange(fs) / fs
    x = np.sin(2 * np.pi * 997 * t)
    y = sosfilt(kw.kweighting_sos(fs), x)
    rms_db = 10 * np.log10(np.mean(y[fs // 2:] ** 2) / 0.5)
    # analytic: a sine's steady-state power gain is |H(997)|^2; 0.002 dB: house choice for the
    # windowed mean over 0.5 s that is not a whole number of periods
    assert rms_db == pytest.approx(kw.kweighting_gain_db(997.0, fs), abs=0.002)


@pytest.mark.parametrize("bad", [7999, 384001, 0, -48000, float("nan")])
def test_rate_out_of_range_is_an_error(bad):
    with pytest.raises(ValueError, match="sample rate"):
        kw.kweighting_sos(bad)
