"""Planar blocks: the engine's one (channels, frames) copy per block, and the analyzers that take it.

An analyzer with ``planar_input`` gets ``process_planar(rows)`` with ``rows`` the cleaned
block transposed, C-contiguous and read-only; its results must be exactly those of feeding
the same blocks as (frames, channels) through ``process`` (the reference: the analyzer's own
interleaved path, which earlier releases used), value for value, whatever the block size and
channel count (by construction: the same products and sums in the same order).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf

from integrity_support import info_for
from masterqc.audio.reader import open_stream
from masterqc.measure.base import Analyzer, AnalyzerResult
from masterqc.measure.channels import ChannelRelationAnalyzer
from masterqc.measure.dcoffset import DcOffsetAnalyzer
from masterqc.measure.engine import run_analyzers
from masterqc.measure.loudness import LoudnessAnalyzer
from masterqc.measure.options import MeasureOptions
from masterqc.measure.peaks import TruePeakAnalyzer
from masterqc.measure.silence import SilenceAnalyzer

FS = 48000


def _programme(seconds: float, channels: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    t = np.arange(n) / FS
    x = np.stack([0.2 * np.sin(2 * np.pi * (220.0 + 110.0 * c) * t + c) for c in range(channels)], axis=1)
    x += 0.02 * rng.standard_normal((n, channels))
    x[n // 4:n // 4 + 9600] *= 4.0                  # a loud stretch
    x[n // 2:n // 2 + 4800] = 0.0                   # a silent gap
    if channels >= 2:
        x[: n // 8, 1] = -x[: n // 8, 0]            # an inverted stretch on the first pair
    return np.clip(x, -1.0, 1.0)


class _Rows(Analyzer):
    planar_input = True

    def __init__(self, info, options):
        super().__init__(info, options)
        self.seen = []

    def process(self, block):                      # pragma: no cover - the engine must not call it
        raise AssertionError("process() called for a planar analyzer")

    def process_planar(self, rows):
        assert rows.flags.c_contiguous and not rows.flags.writeable
        self.seen.append(rows.copy())

    def finish(self):
        return AnalyzerResult()


class _Raw(_Rows):
    raw_input = True


@pytest.mark.parametrize("threads", [1, 2])
def test_planar_rows_are_the_cleaned_block_transposed(tmp_path, threads):
    x = _programme(3.0, 3, 1).astype(np.float32)
    x[100, 1] = np.nan
    x[5000, 2] = np.inf
    path = tmp_path / "f.wav"
    sf.write(str(path), x, FS, subtype="FLOAT")
    seen = {}

    class Rows(_Rows):
        def finish(self):
            seen["rows"] = self.seen
            return AnalyzerResult()

    with open_stream(str(path)) as stream:
        run_analyzers(stream, MeasureOptions(threads=threads, block_frames=20000), classes=[Rows])
    got = np.concatenate(seen["rows"], axis=1)
    want = np.where(np.isfinite(x), x, 0.0).astype(np.float64).T     # clean, then transposed
    # analytic: 3 s at 48 kHz = 144000 frames = 7 blocks of 20000 and one of 4000
    assert [r.shape[1] for r in seen["rows"]] == [20000] * 7 + [4000]
    assert np.array_equal(got, want)


def test_raw_and_planar_together_are_refused(tmp_path):
    path = tmp_path / "f.wav"
    sf.write(str(path), _programme(0.5, 2, 2), FS, subtype="PCM_24")
    with open_stream(str(path)) as stream, pytest.raises(ValueError, match="planar"):
        run_analyzers(stream, MeasureOptions(threads=1), classes=[_Raw])


def _both_ways(cls, x, labels, block, peers=()):
    info = info_for(x, FS, labels=labels)
    results = []
    for planar in (False, True):
        a = cls(info, MeasureOptions())
        others = [p(info, MeasureOptions()) for p in peers]
        for o in [a, *others]:
            o.bind([a, *others])
        for i in range(0, x.shape[0], block):
            b = x[i:i + block]
            for o in [a, *others]:
                o.process_planar(np.ascontiguousarray(b.T)) if planar else o.process(b)
        for o in others:
            o.finish()
        r = a.finish()
        results.append(json.dumps([r.measurements, r.series, r.settings], sort_keys=True, default=str))
    return results


LAYOUTS = {1: ("C",), 2: ("L", "R"), 6: ("L", "R", "C", "LFE", "Ls", "Rs")}


@pytest.mark.parametrize("channels", [1, 2, 6])
@pytest.mark.parametrize("block", [65536, 4097, 480])
def test_loudness_planar_equals_interleaved(channels, block):
    x = _programme(4.0, channels, channels)
    interleaved, planar = _both_ways(LoudnessAnalyzer, x, LAYOUTS[channels], block)
    assert planar == interleaved


@pytest.mark.parametrize("channels", [2, 6])
@pytest.mark.parametrize("block", [65536, 4097])
@pytest.mark.parametrize("with_meter", [False, True])
def test_channel_relation_planar_equals_interleaved(channels, block, with_meter):
    """Without a loudness meter to take the K-weighted energies from, the analyzer filters
    the channels itself (along rows in the planar path)."""
    x = _programme(4.0, channels, 10 + channels)
    peers = (LoudnessAnalyzer,) if with_meter else ()
    interleaved, planar = _both_ways(ChannelRelationAnalyzer, x, LAYOUTS[channels], block, peers)
    assert planar == interleaved
    assert '"level_balance_lu"' in planar


@pytest.mark.parametrize("channels", [1, 2, 6])
@pytest.mark.parametrize("block", [65536, 4097, 1000])
def test_silence_planar_equals_interleaved(channels, block):
    """Head and tail silence, dropouts (digital silence and frozen values, on one channel and
    on all), across block boundaries."""
    x = _programme(4.0, channels, 20 + channels)
    x[:3000] = 0.0                                   # digital silence at the head
    x[3000:7000] *= 1e-6                             # then near-silence
    x[-5000:] = 0.0                                  # digital silence at the tail
    x[40000:44000, 0] = 0.25                         # a frozen value on the first channel
    x[90000:93000] = 0.0                             # a dropout on every channel
    x[150000:150600, -1] = 0.0                       # a short one on the last channel
    interleaved, planar = _both_ways(SilenceAnalyzer, x, LAYOUTS[channels], block)
    assert planar == interleaved
    measurements = json.loads(planar)[0]
    assert measurements["dropout_count"] >= 1                          # the dropouts were found
    assert measurements["head_digital_silence_s"] > 0.0


@pytest.mark.parametrize("channels", [1, 2, 6])
@pytest.mark.parametrize("block", [65536, 4097, 47])
def test_dc_offset_planar_equals_interleaved(channels, block):
    """Means, sums of squares and the decimated sub-sonic path, across block boundaries
    (47 frames: shorter than one decimator row of 48 frames at 48 kHz)."""
    x = _programme(4.0, channels, 30 + channels) + 0.003
    interleaved, planar = _both_ways(DcOffsetAnalyzer, x, LAYOUTS[channels], block)
    assert planar == interleaved
    assert json.loads(planar)[0]["subsonic_energy_db"] is not None


@pytest.mark.parametrize("channels", [1, 2])
@pytest.mark.parametrize("block", [65536, 4097])
def test_true_peak_planar_equals_interleaved(channels, block):
    x = _programme(4.0, channels, 40 + channels)
    interleaved, planar = _both_ways(TruePeakAnalyzer, x, LAYOUTS[channels], block)
    assert planar == interleaved
    assert json.loads(planar)[0]["true_peak_dbtp"] is not None
