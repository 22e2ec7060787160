"""Per-channel upsampling verdicts against the channel sum's band limit.

House rule (measure/bandwidth.py ``same_band_limit``), tested on
constructed results and on the wiring of ``bandwidth.assess``; the thresholds are the modules' own (own reasoning
beside them there), the signals analytic.
"""

from __future__ import annotations

import numpy as np
import pytest

from masterqc.audio.reader import StreamInfo
from masterqc.measure import bandwidth as bw
from masterqc.measure.spectral import SpectralFrontEnd


def _mix_band_limit(edge_hz=18780.0, depth_db=81.7):
    r = bw.BandwidthResult(effective_bandwidth_hz=edge_hz, edge="cliff", depth_db=depth_db, band_limit_hz=edge_hz)
    r.note = "band-limited"
    return r


def _channel_cliff(edge_hz=18790.0, rate=44100, evidence=None):
    return bw.BandwidthResult(effective_bandwidth_hz=edge_hz, edge="cliff", depth_db=82.0, upsampled_from_hz=rate,
                              confidence=0.9, evidence=evidence, note=f"converted up from {rate / 1000:g} kHz")


def test_a_channel_reading_the_sum_s_band_limit_is_the_same_fall():
    # house choice: two readings of one fall differ by less than twice the envelope's smoothing (SMOOTH_HZ)
    assert bw.SAME_FALL_HZ == pytest.approx(2.0 * bw.SMOOTH_HZ)
    mix = _mix_band_limit()
    assert bw.same_band_limit(mix, _channel_cliff(18790.0)) is True
    assert bw.same_band_limit(mix, _channel_cliff(18780.0 - bw.SAME_FALL_HZ)) is True
    # a cliff above the sum's -6 dB point counts while it lies inside the sum's fall (up to where its stop band
    # begins): a coder's stepped fall read on a lower step by one channel
    assert bw.same_band_limit(mix, _channel_cliff(18780.0 + bw.SAME_FALL_HZ + 10.0)) is False
    mix.fall_end_hz = 21240.0
    assert bw.same_band_limit(mix, _channel_cliff(21240.0 + bw.SAME_FALL_HZ)) is True
    # a cliff elsewhere in the band (past the sum's fall, or below it) is another fall: the channel's verdict stands
    assert bw.same_band_limit(mix, _channel_cliff(21240.0 + bw.SAME_FALL_HZ + 10.0)) is False
    assert bw.same_band_limit(mix, _channel_cliff(18780.0 - bw.SAME_FALL_HZ - 10.0)) is False
    # images (the mirror test) are not a cliff reading: left alone
    assert bw.same_band_limit(mix, _channel_cliff(18790.0, evidence="images")) is False
    # a sum whose fall is shallower than a converter's (a native channel fills the band) hides the cliff
    assert bw.same_band_limit(_mix_band_limit(depth_db=bw.UPSAMPLED_MIN_DEPTH_DB - 1.0), _channel_cliff()) is False
    # a sum that read no band limit (no cliff, or a conversion) has nothing to pass on
    assert bw.same_band_limit(bw.BandwidthResult(effective_bandwidth_hz=24000.0), _channel_cliff()) is False


def _front_end(fs=48000, seconds=1.0, seed=31):
    rng = np.random.default_rng(seed)
    x = 0.1 * rng.standard_normal((int(fs * seconds), 2))
    fe = SpectralFrontEnd(fs, 2, x.shape[0])
    fe.process(x)
    info = StreamInfo(path="<memory>", container="wav", encoding="pcm_24", sample_rate_hz=fs, bit_depth=24,
                      is_float=False, channels=2, frames=x.shape[0], channel_layout=("L", "R"),
                      layout_source="conventional", channel_weights=(1.0, 1.0))
    return fe.finish(), info


def _wired(monkeypatch, mix, channels):
    """``bandwidth.assess`` with the sum's and each channel's verdict given (assess_power called for the sum
    first, then per channel), every channel taken to the full analysis."""
    for r in [mix] + list(channels):
        r.settings.setdefault("testable_hz", [32000, 44100])      # the 48 kHz file's testable candidates
    calls = iter([mix] + list(channels))
    monkeypatch.setattr(bw, "assess_power", lambda *a, **k: next(calls))
    monkeypatch.setattr(bw, "drops_somewhere", lambda *a, **k: True)
    monkeypatch.setattr(bw, "assess_segments", lambda fe, info: [])
    fe, info = _front_end()
    return bw.assess(fe, info).measurements()


def test_the_sum_s_band_limit_is_not_overruled_by_one_channel(monkeypatch):
    # the held-back case: a 12th-order Butterworth at 19 kHz read on R alone as a 44.1 kHz converter's cliff at
    # 18.8 kHz, the sum's cliff at the same place judged a band limit
    m = _wired(monkeypatch, _mix_band_limit(), [bw.BandwidthResult(), _channel_cliff(18790.0)])
    assert m["upsampled_from_hz"] is None and m["upsampled_channels"] == []
    assert m["band_limit_hz"] == pytest.approx(18780.0)


def test_a_channel_whose_cliff_the_sum_does_not_show_is_still_found(monkeypatch):
    # one channel converted up beside a native one: the sum shows no cliff (the native channel fills the band)
    m = _wired(monkeypatch, bw.BandwidthResult(effective_bandwidth_hz=24000.0), [bw.BandwidthResult(),
                                                                               _channel_cliff(21000.0)])
    assert m["upsampled_from_hz"] == 44100 and m["upsampled_channels"] == ["R"]
    # the sum's band limit elsewhere (a shelf at 17 kHz in both) leaves a channel's cliff at 21 kHz standing
    m = _wired(monkeypatch, _mix_band_limit(edge_hz=17000.0), [_channel_cliff(21000.0), bw.BandwidthResult()])
    assert m["upsampled_from_hz"] == 44100 and m["upsampled_channels"] == ["L"]
