"""A band end gated frame by frame (a lossy coder's, at low bit rates) against a resampler's cliff.

A resampler's pass band passes whatever the programme holds just under its edge in every frame; a transform or
sub-band coder at a low bit rate codes its bands from the bottom up out of each frame's bit budget and leaves the
top bands under its low-pass empty in the frames the budget does not reach (``bandwidth.frame_gated_spread_db``).
"""

from __future__ import annotations

import numpy as np
from scipy import signal as sps

from masterqc.measure import bandwidth as bw
from masterqc.measure.spectral import SpectralFrontEnd

from test_bandwidth import info_for, quantise24


def _upsampled_noise(seconds, rng):
    """White noise at 22.05 kHz converted up to 44.1 kHz by resample_poly (its default Kaiser design)."""
    x = 0.1 * rng.standard_normal(int(22050 * seconds))
    return sps.resample_poly(x, 2, 1)


def _front_end(y, fs):
    fe = SpectralFrontEnd(fs, 1, y.shape[0])
    fe.process(y[:, None])
    return fe.finish()


def _gated_top(y, fs, rng, split_hz=8500.0, share=0.3, block=16384):
    """``y`` with its band above ``split_hz`` switched off in a ``share`` of the blocks of ``block`` samples (passages of a few analysis frames: a budget falls short over a passage, not in one granule)
    (raised-cosine ramps of 256 samples), as a coder leaves its top bands empty in the frames its budget does
    not reach."""
    # a long linear-phase split (Kaiser beta 10: about 100 dB down 1 kHz above split_hz), so that the gated
    # frames hold nothing of the band under the edge
    h = sps.firwin(2001, split_hz, window=("kaiser", 10.0), fs=fs)
    low = np.convolve(y, h, mode="same")
    top = y - low
    gate = np.ones_like(y)
    blocks = y.size // block
    off = rng.permutation(blocks)[:int(round(share * blocks))]
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(256) / 256)
    for b in off:
        a = b * block
        gate[a:a + block] = 0.0
        gate[a:a + 256] = ramp[::-1]
        gate[a + block - 256:a + block] = ramp
    return low + top * gate


def test_stationary_programme_under_a_converter_cliff_has_no_extra_spread():
    # analytic: stationary noise has the same per-bin level statistics (chi-square, two degrees of freedom) in
    # every band, so the spread under the edge equals the reference band's, within the estimate's noise (1 dB
    # histogram steps, median over bins)
    rng = np.random.default_rng(11)
    y = quantise24(_upsampled_noise(4.0, rng), rng)
    fe = _front_end(y, 44100)
    floor = bw.format_floor_db(24, False, fe.frame_length)
    got = bw.frame_gated_spread_db(fe, 10900.0, floor)
    assert got is not None and abs(got) <= 2.0
    out = bw.assess(fe, info_for(44100, 1, y.shape[0]))
    assert out.upsampled_from_hz == 22050


def test_band_end_gated_frame_by_frame_is_a_band_limit():
    # analytic: the same conversion with the band under the cliff empty in 30 % of the blocks: the 10th-percentile
    # frame is an empty one there, so the spread under the edge exceeds the reference band's by most of the band's level
    # (more than GATED_MIN_EXTRA_SPREAD_DB), and the cliff is judged a coder's band end
    rng = np.random.default_rng(12)
    y = quantise24(_gated_top(_upsampled_noise(8.0, rng), 44100, rng), rng)
    fe = _front_end(y, 44100)
    floor = bw.format_floor_db(24, False, fe.frame_length)
    got = bw.frame_gated_spread_db(fe, 10900.0, floor)
    assert got is not None and got >= 30.0
    out = bw.assess(fe, info_for(44100, 1, y.shape[0]))
    assert out.upsampled_from_hz is None
    # the edge is resample_poly's -6 dB point at the old Nyquist, 11.025 kHz (analytic, its design centred there),
    # read within the envelope's smoothing
    assert out.band_limit_hz is not None and 10500.0 <= out.band_limit_hz <= 11100.0
    assert "lossy coder" in out.note


def test_quiet_reference_band_is_not_judged():
    # a reference band whose quiet frames sit at the format's floor (digital silence between passages) says
    # nothing about a coder's choices: no reading
    rng = np.random.default_rng(13)
    y = _upsampled_noise(4.0, rng)
    y[: y.size // 3] = 0.0
    fe = _front_end(quantise24(y, rng) * (np.arange(y.size) >= y.size // 3), 44100)
    floor = bw.format_floor_db(24, False, fe.frame_length)
    assert bw.frame_gated_spread_db(fe, 10900.0, floor) is None
