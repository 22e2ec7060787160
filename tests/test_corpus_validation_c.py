"""The third validation corpus (bench/corpus_validation_c.py) checked as a corpus: contract shape, unique names,
sample bounds, and that every label's construction fact holds on the quick slice.  Nothing here runs masterqc:
the detectors are scored elsewhere, once, on the full set.

Facts are re-measured here from the audio itself where the audio alone carries them (images above the source
Nyquist, band content of native files); the rest are read from the facts the generator measured against the
thresholds the corpus documents (house choices).
"""
from __future__ import annotations

import importlib.util
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest

from corpus_checks import assert_case_shape, image_db, top_band_db

pytest.importorskip("resampy")
pytest.importorskip("pedalboard")
if not (shutil.which("sox") and shutil.which("ffmpeg")):
    pytest.skip("the corpus needs the sox and ffmpeg programs", allow_module_level=True)

ROOT = Path(__file__).resolve().parents[1]
_spec = importlib.util.spec_from_file_location("corpus_validation_c", ROOT / "bench" / "corpus_validation_c.py")
cvc = importlib.util.module_from_spec(_spec)
sys.modules["corpus_validation_c"] = cvc
_spec.loader.exec_module(cvc)

CONTRACT_KEYS = {"upsampled_from_hz", "upsampled_channels", "imaging_detected", "aliasing_detected"}
SEED = 7003


@pytest.fixture(scope="module")
def quick_cases():
    return list(cvc.cases(SEED, quick=True))


def test_quick_slice_shape(quick_cases):
    # contract: name [a-z0-9_-], set "validation", float64 (frames, channels), |x| <= 1, labels per channel count;
    # slice size 15-30, 1/2/6 channels, 2.5-12.5 s and RMS -31..-5.9 dBFS are the corpus' own design (house choice,
    # by construction: the generator draws 3-12 s and -30..-6 dBFS)
    assert 15 <= len(quick_cases) <= 30
    names = [c.name for c in quick_cases]
    assert len(set(names)) == len(names)
    for c in quick_cases:
        assert_case_shape(c, cvc, CONTRACT_KEYS, (2.5, 12.5))


def test_quick_slice_covers_groups(quick_cases):
    groups = {c.group for c in quick_cases}
    for g in ("upsampled", "imaging", "upsampled-one-channel", "naive-synth", "band-limited-synth", "decimation",
              "sample-hold", "native", "speech"):
        assert g in groups, (g, sorted(groups))
    assert groups & {"codec-shelf", "ambiguous-codec-shelf"}
    assert groups & {"lowpass", "ambiguous-lowpass"}
    assert groups & {"filtered-decimation", "downsampled"}


def test_upsampling_and_imaging_facts(quick_cases):
    for c in quick_cases:
        src = c.expect.get("upsampled_from_hz")
        if not src or c.group == "upsampled-one-channel":
            continue
        assert src in cvc.STANDARD_RATES_HZ and src < c.rate_hz, c.name
        img = image_db(c.audio, c.rate_hz, src)
        if c.expect.get("imaging_detected") is True:
            # images by construction: at least IMAGE_MIN_DB above the old Nyquist (3 dB slack for the estimator)
            assert img >= cvc.IMAGE_MIN_DB - 3, (c.name, img)
        elif c.expect.get("imaging_detected") is False:
            assert img <= cvc.IMAGE_MAX_NEG_DB + 3, (c.name, img)
        if c.group in ("upsampled", "upsampled-via-codec"):
            assert cvc.EDGE_LO_FRAC <= c.facts.get("edge_frac", c.facts.get("band_edge_frac")) <= cvc.CODEC_EDGE_HI_FRAC


def test_one_channel_fact(quick_cases):
    one = [c for c in quick_cases if c.group == "upsampled-one-channel"]
    assert one
    for c in one:
        (lab,) = c.expect["upsampled_channels"]
        i = c.channel_labels.index(lab)
        # the converted channel has nothing above 1.05x its source Nyquist; another full-band channel has
        # (by construction: native material fills its band; -40 dB is the corpus' own margin, house choice)
        src = c.facts["src_hz"]
        assert image_db(c.audio[:, [i]], c.rate_hz, src) <= cvc.IMAGE_MAX_NEG_DB + 3
        j = 0 if i != 0 else 1
        assert image_db(c.audio[:, [j]], c.rate_hz, src) >= -40.0


def test_folding_facts(quick_cases):
    # by construction: fold levels were measured when each case was made; 3 dB is the estimator's slack (house choice)
    for c in quick_cases:
        if c.expect.get("aliasing_detected") is True:
            assert c.facts["fold_db"] >= cvc.FOLD_MIN_DB, c.name
            if c.group == "sample-hold":
                # held at the lower rate: the source rate named is that rate, and the images are there
                assert c.expect["upsampled_from_hz"] < c.rate_hz and c.expect["imaging_detected"] is True
                assert image_db(c.audio, c.rate_hz, c.expect["upsampled_from_hz"]) >= cvc.IMAGE_MIN_DB - 3
            else:
                assert c.expect.get("upsampled_from_hz") is None, c.name
        if c.group in ("filtered-decimation", "downsampled"):
            assert c.facts["fold_db"] <= cvc.LEAK_MAX_DB, c.name


def test_native_material_reaches_nyquist(quick_cases):
    # by construction: native material is generated at the file's rate and fills its band; -80 dB of the total in
    # 0.9-0.99 of the Nyquist frequency is the corpus' own margin (house choice)
    for c in quick_cases:
        if c.group in ("native", "speech"):
            assert top_band_db(c.audio, c.rate_hz) > -80, c.name


def test_naive_twins_differ_only_by_folding():
    # analytic check of the band-limited pulse: its Fourier series (b_k = 4/(k pi) sin(k pi d)) summed to a high
    # order matches the naive +-1 pulse (mean removed) away from the edges (Gibbs region excluded)
    rate = 48000
    v = dict(pos=0, ln=4800, f0=50.0, vib_hz=5.0, vib=0.0, att=0.001, dec=10.0, sus=1.0, ph0=0.1,
             lfo_hz=0.0, width=0.3, ratio=2.0, index=1.0, ring_hz=500.0)
    naive = cvc.synth("pwm", 4800, rate * 4, [v], naive=True)        # rate*4: partials to 96 kHz summed
    blim = cvc.synth("pwm", 4800, rate * 4, [v], naive=False)
    ph = np.mod(v["ph0"] + np.cumsum(np.full(4800, v["f0"])) / (rate * 4), 1.0)
    away = (np.abs(ph - 0.0) > 0.02) & (np.abs(ph - 0.3) > 0.02) & (np.abs(ph - 1.0) > 0.02)
    away[:800] = False
    away[-800:] = False
    assert np.max(np.abs(naive[away] - blim[away])) < 0.05


def test_seed_range_is_enforced():
    with pytest.raises(ValueError, match="7000-7999"):
        next(cvc.cases(5000))
