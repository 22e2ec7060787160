"""The tuning corpus of the upsampling verdict labels its mastering low-pass sweep as built.

Provenance: the filter responses are read with scipy.signal.freqz (a reference library); the labels are by
construction (bench/corpus_tuning_upsampling.py, ``_plan_lowpass_sweep``); the 0.88-1.0 ambiguity window is a
house choice.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal as sps

BENCH = str(Path(__file__).resolve().parent.parent / "bench")
if BENCH not in sys.path:
    sys.path.insert(0, BENCH)

ct = pytest.importorskip("corpus_tuning_upsampling")


def _gain_db(h, f_hz, fs):
    _w, r = sps.freqz(h, 1.0, worN=[f_hz], fs=fs)
    return 20.0 * np.log10(abs(r[0]))


@pytest.mark.parametrize("taps,width", [(127, 1500.0), (255, 800.0), (511, 600.0)])
def test_remez_minus_6_db_point_is_mid_transition(taps, width):
    # the sweep reads an equiripple design's -6 dB point at the middle of its transition band (scipy freqz as
    # the reference: within 1.5 dB of -6 dB there, house tolerance), the pass-band edge itself near 0 dB
    fs, corner = 48000, 18000.0
    h = ct.sweep_filter(np.r_[1.0, np.zeros(2047)][:, None], fs, "remez", corner, {"taps": taps, "width": width})[:, 0]
    assert abs(_gain_db(h, corner + 0.5 * max(width, 2.0 * fs / taps), fs) + 6.0) <= 1.5
    assert abs(_gain_db(h, corner - 200.0, fs)) <= 1.0


def test_sweep_labels_are_as_built():
    # Butterworth and Bessel low-passes are always scored negatives (slopes no converter makes); a steep design
    # whose -6 dB point lies at 0.88-1.0 of a lower standard Nyquist is ambiguous and carries no expectation
    seen = {"lowpass": 0, "ambiguous-lowpass": 0, "upsampled": 0}
    for seed in (1000, 1001):
        for name, family, group, spec in ct._plan_lowpass_sweep(seed, quick=False):
            seen[group] += 1
            if spec[0] != "sweep":
                assert group == "upsampled" and spec[1] < spec[2]
                continue
            _k, fs, kind, corner, p, _mat, _level = spec
            if kind in ("butter", "bessel"):
                assert group == "lowpass", name
            minus6 = corner + 0.5 * max(p["width"], 2.0 * fs / p["taps"]) if kind == "remez" else corner
            assert (group == "ambiguous-lowpass") == (kind not in ("butter", "bessel")
                                                      and ct._ambiguous_cutoff(minus6, fs)), name
            assert p["ambiguous"] == (group == "ambiguous-lowpass")
    assert all(v > 0 for v in seen.values()), seen
    assert ct._ambiguous_cutoff(20800.0, 48000)           # 0.943 of 22.05 kHz (by construction)
    assert not ct._ambiguous_cutoff(17500.0, 48000)       # 0.794 of 22.05 kHz, 0.729 of 24 kHz
