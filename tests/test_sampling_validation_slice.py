"""Sampling detectors on the held-back validation slice, and the analytic facts its labels rest on.

1. The quick slices of the three held-back sets ``bench/corpus_validation.py``, ``bench/corpus_validation_b.py`` and
   ``bench/corpus_validation_c.py``
   (and of the tuning corpora ``bench/corpus_tuning_*.py``
   when they are present) is written to WAV and measured through ``masterqc measure --json``; the targets of
   issue 11 are asserted on it (house targets):
   upsampling found >= 95 % with the source rate right in >= 95 % of the found cases and <= 1 % false alarms;
   per-channel conversion found; imaging 100 % found with 0 false alarms; folded content found >= 90 % with
   0 false alarms.  The labels come from how each file was made, never from masterqc.
2. The tools the labels rely on, checked against their own documentation or against analysis: where each
   resampler's pass band ends, and the image levels of hold / linear / zero-stuffed upsampling.
"""

from __future__ import annotations

import importlib.util
import math
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

ROOT = Path(__file__).resolve().parent.parent
BENCH = ROOT / "bench"


def _load(name: str):
    path = BENCH / f"{name}.py"
    if not path.exists():
        return None
    spec = importlib.util.spec_from_file_location(name, path)
    mod = importlib.util.module_from_spec(spec)
    sys.modules[name] = mod
    spec.loader.exec_module(mod)
    return mod


pytest.importorskip("soxr")
cv = _load("corpus_validation")
scoring = _load("sampling_scoring")

#: the second held-back set (corpus_validation_b, built without sight of the detectors) enters at seed 6000,
#: the seed first scored at the end of the session that built it
#: the third (corpus_validation_c, also built without sight of the detectors) at seed 7000, likewise
CORPORA = [("corpus_validation", 5000), ("corpus_validation_b", 6000), ("corpus_validation_c", 7000),
           ("corpus_tuning_upsampling", 1000), ("corpus_tuning_aliasing", 1000)]


# ----------------------------------------------------------------------------------------------------------
# 1. The slice through the command line
# ----------------------------------------------------------------------------------------------------------

@pytest.fixture(scope="module", params=CORPORA, ids=[c[0] for c in CORPORA])
def slice_tally(request, tmp_path_factory):
    name, seed = request.param
    module = cv if name == "corpus_validation" else _load(name)
    if module is None:
        pytest.skip(f"bench/{name}.py is not on this branch")
    run = scoring.run_corpus(module, seed, quick=True, workers=2, progress=False,
                             out_dir=tmp_path_factory.mktemp(name))
    assert run["cases"], f"{name}: the quick slice is empty"
    errors = [(c["name"], c["error"]) for c in run["cases"] if c["error"]]
    assert not errors, f"{name}: masterqc could not measure {errors}"
    return name, scoring.tally(run["cases"]), run["cases"]


#: issue 11's targets not yet met on a slice, by (test, corpus).  strict: once a detector meets its
#: target the test XPASSes and fails, and the entry must go.
KNOWN_MISSES = {
    ("upsampling_false_alarms", "corpus_tuning_upsampling"):
        "three band limits in the tuning corpus' quick slice read as conversions (3/61): an 8th-order Chebyshev II "
        "low-pass at 17.6 kHz in a 96 kHz file, a transform coder's low-pass at a 44.1 kHz file, a 63-tap Hamming "
        "FIR at 21.4 kHz in a 48 kHz file; their falls sit where a converter's from a standard rate would; a rule that asked such a "
        "cliff for images in its stop band was removed (a limiter after a converter fills the stop band too)",
    ("upsampling_rate", "corpus_validation"):
        "a 22.05 kHz source converted up by FFT resampling (a brick wall at the old Nyquist) on music that rolls "
        "off below it is named 24 kHz: the start of the stop band is weighed towards 0.96 of a Nyquist (a brick wall "
        "at a standard Nyquist now names that rate and a centred design outranks a stop-band reading of the next "
        "higher rate; the slice still misses the target, its case not re-examined)",
    ("upsampling_false_alarms", "corpus_validation_b"):
        "an MP3 round trip at 128 kbit/s in a 44.1 kHz file (2.8 s) is read as converted up from 32 kHz: the "
        "codec's band limit ends in a cliff at 16 kHz that a converter from 32 kHz would leave; a rule that "
        "asked such a cliff for images where the stop band holds the programme cleared it, but was removed (a "
        "limiter after a converter fills the stop band too)",
    ("upsampling_rate", "corpus_validation_c"):
        "ffmpeg's cubic resampler from 32 to 48 kHz on noise is named 16 kHz: its response is already falling at "
        "half the source's Nyquist frequency (edge at 0.50 by the corpus' own measurement) and its images about "
        "8 kHz are as strong as those about 16 kHz (found when the third held-back set was first scored)",
    ("folded", "corpus_validation_c"):
        "the same fractional-step sample-and-hold is not found as folded: its period is not one a conversion "
        "between standard rates makes, so the drop-pattern test does not try it (found when the third "
        "held-back set was first scored)",
}


def _known_miss(request, test, name):
    reason = KNOWN_MISSES.get((test, name))
    if reason:
        request.applymarker(pytest.mark.xfail(strict=True, reason=reason))


def _misses(cases, key, bad):
    return [c["name"] for c in cases if c["outcome"].get(key) in bad]


def test_slice_upsampling_found_with_the_right_rate(slice_tally, request):
    name, t, cases = slice_tally
    _known_miss(request, "upsampling_rate", name)
    if not t.get("up_pos"):
        pytest.skip(f"{name}: no upsampled case in the slice")
    found, pos = t.get("up_found", 0), t["up_pos"]
    assert found >= 0.95 * pos, (f"{name}: upsampling found in {found}/{pos} (target >= 95 %); missed: "
                                 f"{_misses(cases, 'upsampled_from_hz', {'missed', 'error'})}")
    right = t.get("up_rate-right", 0)
    assert right >= 0.95 * found, (f"{name}: source rate right in {right}/{found} found cases (target >= 95 %); "
                                   f"wrong: {_misses(cases, 'upsampled_rate', {'rate-wrong'})}")


def test_slice_upsampling_false_alarms(slice_tally, request):
    name, t, cases = slice_tally
    _known_miss(request, "upsampling_false_alarms", name)
    if not t.get("up_neg"):
        pytest.skip(f"{name}: no genuine (not upsampled) case in the slice")
    assert t.get("up_fa", 0) <= 0.01 * t["up_neg"], (  # house target: <= 1 % false alarms (module docstring)
        f"{name}: {t.get('up_fa', 0)}/{t['up_neg']} genuine files called upsampled (target <= 1 %): "
        f"{[c['name'] for c in cases if c['outcome'].get('upsampled_from_hz') == 'false-alarm' and c['group'] != 'ambiguous-lowpass']}")


def test_slice_per_channel_upsampling_named(slice_tally):
    name, t, cases = slice_tally
    if not t.get("ch_pos"):
        pytest.skip(f"{name}: no per-channel case in the slice")
    assert t.get("ch_found", 0) == t["ch_pos"], (
        f"{name}: one-channel conversions named in {t.get('ch_found', 0)}/{t['ch_pos']}: "
        f"{[(c['name'], (c['result'] or {}).get('upsampled_channels', 'key absent')) for c in cases if 'upsampled_channels' in c['expect']]}")


def test_slice_imaging_all_found_no_false_alarm(slice_tally, request):
    name, t, cases = slice_tally
    _known_miss(request, "imaging", name)
    if not (t.get("img_pos") or t.get("img_neg")):
        pytest.skip(f"{name}: no imaging labels in the slice")
    assert t.get("img_found", 0) == t.get("img_pos", 0), \
        f"{name}: imaging missed in {_misses(cases, 'imaging_detected', {'missed', 'not-assessable'})}"
    assert t.get("img_fa", 0) == 0, \
        f"{name}: imaging false alarms in {_misses(cases, 'imaging_detected', {'false-alarm'})}"


def test_slice_folded_content_found_no_false_alarm(slice_tally, request):
    name, t, cases = slice_tally
    _known_miss(request, "folded", name)
    if not (t.get("alias_pos") or t.get("alias_neg")):
        pytest.skip(f"{name}: no folded-content labels in the slice")
    if t.get("alias_pos"):
        assert t.get("alias_found", 0) >= 0.90 * t["alias_pos"], (
            f"{name}: folded content found in {t.get('alias_found', 0)}/{t['alias_pos']} (target >= 90 %); "
            f"missed: {_misses(cases, 'aliasing_detected', {'missed'})}, "
            f"not assessable: {_misses(cases, 'aliasing_detected', {'not-assessable'})}")
    assert t.get("alias_fa", 0) == 0, \
        f"{name}: folded content claimed in {_misses(cases, 'aliasing_detected', {'false-alarm'})}"


def test_validation_slice_labels_are_well_formed():
    """Contract: names file-name safe and unique, float64 (frames, channels) within full scale, set/seed."""
    seen = set()
    groups = set()
    for case in cv.cases(5000, quick=True):
        scoring.check_case(case, seen)
        assert case.set == "validation" and case.audio.dtype == np.float64
        groups.add(case.group)
    assert {"upsampled", "imaging", "upsampled-one-channel", "native", "naive-synth", "band-limited-synth",
            "decimation", "filtered-decimation"} <= groups
    with pytest.raises(ValueError, match="5000-5999"):
        next(cv.cases(1000, quick=True))


# ----------------------------------------------------------------------------------------------------------
# 2. Analytic and documented facts behind the labels
# ----------------------------------------------------------------------------------------------------------

def _response_db(src_hz: int, dst_hz: int, family: str, seconds: float = 6.0):
    """Magnitude response of a conversion, measured on white noise: output PSD over the input's (flat) PSD,
    both in power per Hz; returns (frequencies in Hz, gain in dB)."""
    rng = np.random.default_rng(20261204)
    x = rng.standard_normal((int(src_hz * seconds), 1)) * 0.1
    y = cv.resample_tool(x, src_hz, dst_hz, family)[:, 0]
    nper = 8192
    f, p = signal.welch(y[dst_hz // 2:-dst_hz // 2], dst_hz, window="blackmanharris", nperseg=nper)
    flat = 2 * 0.1 ** 2 / src_hz      # one-sided PSD of the input noise
    return f, 10 * np.log10(p / flat + 1e-300)


def _crossing_hz(f, g_db, level_db, f_lo):
    """First frequency above f_lo where the (smoothed) response falls below level_db."""
    g = np.convolve(g_db, np.ones(5) / 5, mode="same")
    idx = np.nonzero((f > f_lo) & (g < level_db))[0]
    return float(f[idx[0]])


@pytest.mark.parametrize("preset", ["HQ", "VHQ"])
def test_soxr_pass_band_ends_where_its_design_says(preset):
    """libsoxr's quality spec (soxr.h, struct soxr_quality_spec): pass band to 0.913 of the Nyquist frequency
    at 0 dB ("passband_end ... 0.913"), stop band beginning at 1.0 ("stopband_begin ... 1"), roll-off
    <= 0.01 dB (SOXR_ROLLOFF_SMALL).  Upsampling 44.1 -> 96 kHz, the Nyquist meant is the source's, 22.05 kHz."""
    f, g = _response_db(44100, 96000, f"soxr-{preset}")
    nyq = 22050.0
    band = (f > 0.1 * nyq) & (f < 0.90 * nyq)
    smooth = np.convolve(g, np.ones(33) / 33, mode="same")     # Welch scatter of single bins is about +-1 dB
    assert abs(np.median(g[band])) < 0.1 and np.max(np.abs(smooth[band])) < 0.5
    edge_3db = _crossing_hz(f, g, -3.0, 0.5 * nyq)
    assert 0.913 * nyq <= edge_3db <= 1.0 * nyq
    stop = f >= 1.02 * nyq
    assert np.max(g[stop]) < -90.0


@pytest.mark.skipif(shutil.which("sox") is None, reason="sox not installed")
@pytest.mark.parametrize("quality,bandwidth", [("v", 0.95), ("h", 0.95), ("m", 0.95), ("l", 0.80)])
def test_sox_rate_bandwidth_matches_its_manual(quality, bandwidth):
    """sox(1), the rate effect: band-width 95 % for -m/-h/-v and 80 % for -l, "the percentage of the audio
    frequency band that is preserved", based on the 3 dB point (the -s option text: "from the default 95%
    (based on the 3dB point)").  When upsampling the band is the source's: 0.95 * 22.05 kHz ~ 21 kHz."""
    f, g = _response_db(44100, 96000, f"sox-cli-rate-{quality}")
    nyq = 22050.0
    edge_3db = _crossing_hz(f, g, -3.0, 0.5 * nyq)
    assert edge_3db == pytest.approx(bandwidth * nyq, abs=0.012 * nyq)


@pytest.mark.skipif(shutil.which("ffmpeg") is None, reason="ffmpeg not installed")
@pytest.mark.parametrize("family", ["ffmpeg-swr", "ffmpeg-swr-fs64-c095"])
def test_ffmpeg_swr_upsampling_filter_is_6db_down_at_the_source_nyquist(family):
    """ffmpeg-resampler(1): "cutoff: Set cutoff frequency (swr: 6dB point ...) ratio ... Default value is 0.97
    with swr".  When the output rate is the higher one, swr scales that ratio by out_rate / in_rate and caps
    the result at 1 (from memory of libswresample's filter set-up), so an upsampling filter is 6 dB down at
    the source Nyquist frequency itself whatever the cutoff option says: images just above it leak through
    the transition band.  Upsampling 44.1 -> 96 kHz: -6 dB at 22.05 kHz, for the default and for
    cutoff=0.95 alike."""
    f, g = _response_db(44100, 96000, family)
    nyq = 22050.0
    assert _crossing_hz(f, g, -6.0, 0.5 * nyq) == pytest.approx(1.0 * nyq, abs=0.01 * nyq)


def _tone_and_image_db(up, f0_hz: float, src_hz: int, factor: int):
    """Level of the tone at f0 and of its first image at src_hz - f0 after upsampling by ``factor``: both
    fall on exact FFT bins (a whole number of cycles of each in the analysis window), rectangular window."""
    n_src = src_hz                                  # 1 s: bins are 1 Hz apart
    t = np.arange(n_src) / src_hz
    x = np.cos(2 * np.pi * f0_hz * t)[:, None]
    y = up(x, src_hz, src_hz * factor)[:, 0]
    spec = np.abs(np.fft.rfft(y)) / len(y)
    return 20 * np.log10(spec[int(f0_hz)]), 20 * np.log10(spec[int(src_hz - f0_hz)])


@pytest.mark.parametrize("f0_hz,src_hz,factor", [(1000, 48000, 4), (15000, 44100, 2), (5000, 16000, 6)])
def test_hold_image_level_is_the_sinc_ratio(f0_hz, src_hz, factor):
    """Analytic: holding each sample for L output samples is a length-L box filter on the zero-stuffed
    signal, H(f) = sin(pi f L / fs_out) / (L sin(pi f / fs_out)) in magnitude.  Zero-stuffing leaves the tone
    and its image at fs_src - f0 equally strong, so the image lies below the tone by
    |H(fs_src - f0) / H(f0)| = sin(pi f0 / fs_out) / sin(pi (fs_src - f0) / fs_out)
    (the numerators are equal because sin(pi - a) = sin(a))."""
    tone_db, image_db = _tone_and_image_db(cv.hold_upsample, f0_hz, src_hz, factor)
    fs_out = src_hz * factor
    expected = 20 * math.log10(math.sin(math.pi * f0_hz / fs_out) / math.sin(math.pi * (src_hz - f0_hz) / fs_out))
    assert image_db - tone_db == pytest.approx(expected, abs=0.01)


@pytest.mark.parametrize("f0_hz,src_hz,factor", [(1000, 48000, 4), (15000, 44100, 2)])
def test_linear_interpolation_image_level_is_the_squared_sinc_ratio(f0_hz, src_hz, factor):
    """Analytic: linear interpolation is the triangle kernel, the box convolved with itself, so its response
    is the hold's squared and the image ratio in dB is twice the hold's."""
    tone_db, image_db = _tone_and_image_db(cv.linear_upsample, f0_hz, src_hz, factor)
    fs_out = src_hz * factor
    expected = 40 * math.log10(math.sin(math.pi * f0_hz / fs_out) / math.sin(math.pi * (src_hz - f0_hz) / fs_out))
    assert image_db - tone_db == pytest.approx(expected, abs=0.01)


def test_zero_stuffed_image_is_as_strong_as_the_tone():
    """Analytic: inserting zeros replicates the spectrum around every multiple of the source rate unchanged,
    so the image at fs_src - f0 has the tone's level (0 dB difference); the gain L restores the tone's level."""
    tone_db, image_db = _tone_and_image_db(cv.zero_stuff_upsample, 3000, 48000, 4)
    assert image_db == pytest.approx(tone_db, abs=1e-9)
    assert tone_db == pytest.approx(20 * math.log10(0.5), abs=1e-9)    # a unit cosine: two bins of 1/2


@pytest.mark.parametrize("shape,power_of_k", [("saw", lambda k: 2 / (math.pi ** 2 * k ** 2)),
                                              ("square", lambda k: 8 / (math.pi ** 2 * k ** 2) if k % 2 else 0.0)])
def test_naive_oscillator_folds_exactly_what_its_twin_leaves_out(shape, power_of_k):
    """Analytic: a naive oscillator is the continuous waveform sampled without band limiting, so every partial
    above Nyquist folds back.  The band-limited twin keeps the partials k <= K = floor(0.49 fs / f0) with the
    same phases, so naive - twin holds the folded partials only, whose power is the waveform's total power
    (saw 2u-1: 1/3; square: 1) minus the kept partials' (saw: 2/(pi k)^2 each; square: 8/(pi k)^2, odd k).
    f0 is not a divisor of fs, so the folded lines miss the harmonics and the powers add."""
    rate, f0 = 48000, 441.37
    note = dict(start_s=0.0, dur_s=2.0, f0=f0, vib_hz=5.0, vib_depth=0.0, vib_phase=0.0, phase0=0.1,
                env=(0.0, 0.0, 1.0, 0.0), gain=1.0)
    n = 2 * rate
    rng = np.random.default_rng(1)
    naive = cv.synth_voices(rate, n, rng, shape, True, [note], {})
    twin = cv.synth_voices(rate, n, rng, shape, False, [note], {})
    core = slice(rate // 4, n - rate // 4)         # away from the (flat, but ramped) envelope ends
    total = 1 / 3 if shape == "saw" else 1.0
    kmax = int(0.49 * rate / f0)
    expected = total - sum(power_of_k(k) for k in range(1, kmax + 1))
    measured = float(np.mean((naive[core] - twin[core]) ** 2))
    assert measured == pytest.approx(expected, rel=0.03)
    # and the folded part is a real fraction of the note: about -20 dB for this saw, -17 dB for the square
    assert 10 * math.log10(expected / total) > -25.0


def test_ambiguity_rule_places_steep_edges_against_lower_rates():
    """House rule of this corpus: a steep edge between 0.85 and 1.0 of a lower standard rate's Nyquist
    frequency (small margin either side) is reported apart as ambiguous with a conversion."""
    assert cv.conversion_cliff_rates(20000, 48000) == [44100]       # 0.907 of 22.05 kHz
    assert cv.conversion_cliff_rates(17500, 48000) == []            # 1.09 of 16 kHz, 0.79 of 22.05 kHz
    assert cv.conversion_cliff_rates(15000, 44100) == [32000]
    assert cv.conversion_cliff_rates(42000, 96000) == [88200]
    assert cv.conversion_cliff_rates(32000, 96000) == []
