"""Which source rate an upsampled file names: interpolators' analytic responses, and images that name the rate.

Provenance: the interpolators' responses are analytic (derivations beside each check); the rate rules of
masterqc.measure.provenance follow from where an upsampler's images lie (analytic, written out in
``explained_rates``); the test signals are synthesised here with scipy (a reference library) and the numpy
converters of bench/corpus_tuning_upsampling.py, written from their published methods.
"""

from __future__ import annotations

import math
import sys
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
from scipy import signal as sps

from masterqc.measure import provenance as pv

BENCH = str(Path(__file__).resolve().parent.parent / "bench")
if BENCH not in sys.path:
    sys.path.insert(0, BENCH)

ct = pytest.importorskip("corpus_tuning_upsampling")


def _dtft(h, f_hz, fs):
    """|H(f)| of taps ``h`` at ``f_hz`` in a file of rate ``fs`` (scipy freqz)."""
    _w, r = sps.freqz(h, 1.0, worN=np.atleast_1d(np.asarray(f_hz, dtype=float)), fs=fs)
    return np.abs(r)


# ---------------------------------------------------------------- interpolators' responses (analytic)

def test_keys_cubic_response_at_the_old_nyquist_and_its_nulls():
    # Analytic: Keys' cubic convolution kernel with a = -0.5 has the Fourier transform
    #   H(v) = 3 sinc^4(v) - 2 sinc^2(v) sinc(2 v)      (v in units of the source rate, sinc(x) = sin(pi x)/(pi x)),
    # obtained by integrating W(s) cos(2 pi v s) over its two cubic pieces; at the old Nyquist (v = 1/2)
    # sinc(1/2) = 2/pi and sinc(1) = 0, so H(1/2) = 3 (2/pi)^4 = 48/pi^4 = 0.4928 (-6.15 dB): the cubic is as far
    # down at the old Nyquist as a windowed sinc centred on it, so its fall alone cannot tell the two apart.
    # At every non-zero integer v, sinc(v) = 0: nulls at every multiple of the source rate.
    # An integer-ratio (L) upsampler's taps are h[n] = W(n / L); by Poisson summation their DTFT at f is
    # L * sum_k H(f / fs_in + k L), so at f = fs_in / 2 it is L (H(1/2) + H(1/2 +- L) + ...): for L = 4 the
    # other terms are H(3.5), H(4.5), ...: from |sinc(x)| <= 1 / (pi |x|), |H(v)| <= 3 / (pi v)^4 + 1 / (pi v)^3,
    # below 1e-3 from v = 3.5 on and falling as 1/v^3, so together within the 2e-3 allowed below.
    src, up = 8000, 4
    # the taps W(n / L), read from the corpus' weights: for the output at offset t = p / L after input sample i,
    # the weight of input sample i - 1, i, i + 1, i + 2 is W(1 + t), W(t), W(1 - t), W(2 - t)
    w = ct.keys_cubic_weights(np.arange(up) / up)
    taps = np.zeros(4 * up + 1)                  # tap index n + 2 L for n = -2L .. 2L
    for p in range(up):
        for j, d in enumerate((1 + p / up, p / up, 1 - p / up, 2 - p / up)):
            for sgn in (1, -1):
                n = int(round(sgn * d * up))
                if abs(n) <= 2 * up:
                    taps[n + 2 * up] = w[p, j]
    # a partition of unity (each row sums to 1) that passes the sample itself at t = 0 (Keys' interpolation)
    assert np.allclose(w.sum(axis=1), 1.0, atol=1e-12)
    assert w[0] == pytest.approx([0.0, 1.0, 0.0, 0.0], abs=1e-12)
    # analytic: W(1/2) = 1.5/8 - 2.5/4 + 1 = 0.5625 and W(3/2) = -0.5 (27/8) + 2.5 (9/4) - 4 (3/2) + 2 = -0.0625
    assert taps[2 * up + 2] == pytest.approx(0.5625, abs=1e-12)
    assert taps[2 * up + 6] == pytest.approx(-0.0625, abs=1e-12)
    fs = src * up
    gain_at_nyquist = float(_dtft(taps, src / 2.0, fs)[0]) / up
    assert gain_at_nyquist == pytest.approx(48.0 / math.pi ** 4, abs=2e-3)
    assert 20 * math.log10(gain_at_nyquist) == pytest.approx(-6.15, abs=0.05)
    # nulls at the multiples of the source rate inside the file's band (analytic: exactly zero)
    assert np.all(_dtft(taps, [src, 2 * src], fs) < 1e-12)
    # and the corpus converter itself: a 1 kHz sine converted up has no other content at 8 kHz +- 1 kHz
    # than the images the response predicts: H(7/8) relative (analytic, same formula)
    x = np.sin(2 * np.pi * 1000.0 * np.arange(4000) / src)
    y = ct.keys_cubic(x, src, fs)
    spec = np.abs(np.fft.rfft(y[800:800 + 8000] * np.hanning(8000)))
    f = np.fft.rfftfreq(8000, 1.0 / fs)
    main = spec[np.argmin(np.abs(f - 1000.0))]
    image = spec[np.argmin(np.abs(f - 7000.0))]
    v1, v7 = 1.0 / 8.0, 7.0 / 8.0
    h = lambda v: 3 * np.sinc(v) ** 4 - 2 * np.sinc(v) ** 2 * np.sinc(2 * v)   # noqa: E731
    # (within 0.5 dB: house tolerance for the Hann window's leakage into the two bins)
    assert 20 * math.log10(image / main) == pytest.approx(20 * math.log10(abs(h(v7)) / h(v1)), abs=0.5)


@pytest.mark.parametrize("src,dst", [(8000, 48000), (11025, 44100), (16000, 96000)])
def test_hold_upsampler_has_sinc_nulls_at_multiples_of_the_source_rate(src, dst):
    # Analytic: holding each sample for L = dst / src output samples is the filter h = [1] * L, whose response
    # |H(f)| = |sin(pi f L / dst) / (L sin(pi f / dst))| is zero at f = k dst / L = k src (k = 1 .. L - 1), and
    # 1 / (L sin(pi / (2 L))) at src / 2 (-3.92 dB, 2/pi, for large L).  The corpus' hold converter must have
    # exactly these nulls.
    up = dst // src
    x = np.zeros(64)
    x[10] = 1.0
    h = ct.upsample(x, src, dst, "hold")[10 * up:11 * up]
    assert np.allclose(h, 1.0)
    y = ct.upsample(x, src, dst, "hold")
    resp = _dtft(y, [k * src for k in range(1, up)] + [src / 2.0], dst) / up
    assert np.all(resp[:-1] < 1e-9)
    assert resp[-1] == pytest.approx(1.0 / (up * math.sin(math.pi / (2 * up))), rel=1e-9)
    # its images are coherent at the source rate and every multiple (analytic, see explained_rates) -- the
    # rates the provenance step counts as the same source
    assert {k * src for k in range(1, dst // src + 1)} <= pv.explained_rates(src, dst)


# ---------------------------------------------------------------- images name the rate (pure rules)

def test_explained_rates_are_multiples_and_folds():
    # Analytic: images of X(f) from a source r lie at k r +- f (pairs at cycle frequency k r); those past the
    # file's Nyquist fold to fs - k r -+ f (pairs at |fs - k r|).  A 32 kHz source in a 48 kHz file therefore
    # pairs at 16 kHz (= 48 - 32) as well: half the true rate, not a lower source.
    got = pv.explained_rates(32000, 48000)
    assert {32000, 64000, 16000} <= got
    assert 22050 not in got and 24000 not in got
    assert 24000 not in pv.explained_rates(22050, 176400)
    assert 22050 not in pv.explained_rates(24000, 176400)
    assert 16000 in pv.explained_rates(8000, 96000) and 32000 in pv.explained_rates(8000, 96000)


def _imaging(fs_rates, coherent, verdict="trace"):
    return [{"source_rate_hz": float(r), "verdict": verdict if r in coherent else "none",
             "coherence": 0.99 if r in coherent else 0.0, "image_level_db": -90.0 if r in coherent else None}
            for r in fs_rates]


def _below(fs):
    return [r for r in pv.STANDARD_RATES_HZ if r < fs]


def test_file_rate_is_read_from_the_candidate_list():
    assert pv.file_rate(_imaging(_below(176400), ())) == 176400
    assert pv.file_rate(_imaging(_below(48000), ())) == 48000
    assert pv.file_rate([]) is None


def test_a_cliff_read_as_the_next_rate_up_takes_the_rate_its_images_name():
    # by construction: a 22.05 kHz source's fall read at 10.36 kHz (0.94 of 11.025 kHz, 0.86 of 12 kHz) named
    # 24 kHz by the cliff; its images are coherent at 22.05, 44.1 and 88.2 kHz only
    m = {"upsampled_from_hz": 24000, "upsampled_evidence": "cliff", "effective_bandwidth_hz": 10360.0,
         "upsampled_edge_ratio": 0.863, "bandwidth_note": "x", "bandwidth_segments": [],
         "imaging": _imaging(_below(176400), (22050, 44100, 88200))}
    out = pv.rate_from_images(dict(m))
    assert out["upsampled_from_hz"] == 22050
    assert out["upsampled_evidence"] == "images"
    assert out["upsampled_edge_ratio"] == pytest.approx(10360.0 / 11025.0, abs=1e-3)
    assert "22.05 kHz" in out["bandwidth_note"]


def test_images_at_a_multiple_of_the_cliff_rate_confirm_it():
    # an 8 kHz source's images pair up at 32 kHz too (a multiple): the cliff's 8 kHz stands
    m = {"upsampled_from_hz": 8000, "upsampled_evidence": "cliff", "effective_bandwidth_hz": 3840.0,
         "imaging": _imaging(_below(96000), (32000,))}
    assert pv.rate_from_images(dict(m))["upsampled_from_hz"] == 8000


def test_images_do_not_move_a_rate_whose_nyquist_lies_below_the_edge():
    # a cliff at 21.3 kHz cannot come from a 22.05 kHz source (Nyquist 11.025 kHz): the cliff's 44.1 kHz stands
    m = {"upsampled_from_hz": 48000, "upsampled_evidence": "cliff", "effective_bandwidth_hz": 21300.0,
         "imaging": _imaging(_below(96000), (22050,))}
    assert pv.rate_from_images(dict(m))["upsampled_from_hz"] == 48000


def test_an_image_verdict_at_a_multiple_takes_the_lowest_coherent_rate_but_not_a_fold():
    # a 16 kHz source in a 96 kHz file: images coherent at 16, 32 and 48 kHz; the strongest defect names 32 kHz
    m = {"upsampled_from_hz": 32000, "upsampled_evidence": "images", "effective_bandwidth_hz": 40000.0,
         "imaging": _imaging(_below(96000), (16000, 32000, 48000))}
    assert pv.rate_from_images(dict(m))["upsampled_from_hz"] == 16000
    # a 32 kHz source in a 48 kHz file pairs at 16 kHz by the fold about 24 kHz (48 - 32): it stays 32 kHz
    m = {"upsampled_from_hz": 32000, "upsampled_evidence": "images", "effective_bandwidth_hz": 24000.0,
         "imaging": _imaging(_below(48000), (16000, 32000))}
    assert pv.rate_from_images(dict(m))["upsampled_from_hz"] == 32000


def test_rates_that_explain_each_other_are_told_apart_by_the_mirror():
    # in a 48 kHz file a 16 kHz source's images pair up at 32 kHz (a multiple) and a 32 kHz source's at 16 kHz
    # (a fold about 24 kHz): the coherence cannot decide.  The first images of a source mirror its content about
    # its own Nyquist frequency (the bandwidth analysis' mirror test), a fold only shifts it (analytic, see
    # explained_rates): the mirror rate decides
    base = {"upsampled_from_hz": 16000, "upsampled_evidence": "images", "effective_bandwidth_hz": 24000.0,
            "imaging": _imaging(_below(48000), (16000, 32000))}
    assert pv.rate_from_images(dict(base, upsampled_mirror_rate_hz=32000))["upsampled_from_hz"] == 32000
    assert pv.rate_from_images(dict(base, upsampled_mirror_rate_hz=16000))["upsampled_from_hz"] == 16000
    assert pv.rate_from_images(dict(base, upsampled_mirror_rate_hz=None))["upsampled_from_hz"] == 16000


def test_the_sample_pattern_is_never_overruled():
    m = {"upsampled_from_hz": 24000, "upsampled_evidence": "samples", "effective_bandwidth_hz": 10000.0,
         "imaging": _imaging(_below(48000), (22050, 44100))}
    assert pv.rate_from_images(dict(m))["upsampled_from_hz"] == 24000


def test_inconsistent_images_name_nothing():
    # 44.1 and 48 kHz both coherent: no one source explains both (analytic: neither is a multiple or a fold of
    # the other in a 96 kHz file)
    assert pv.image_rate(_imaging(_below(96000), (44100, 48000))) is None


def test_a_lower_rate_whose_own_multiples_are_quiet_is_not_named():
    # a 24 kHz source converted up to 96 kHz by a short sinc: images coherent at 24 and 48 kHz (its multiples),
    # and the candidate test at 8 kHz reads them through its own third and sixth multiples.  An 8 kHz source
    # would leave images at 16 and 32 kHz as well (analytic: images at k r +- f for every k the filter passes);
    # tested quiet, they rule 8 kHz out, and the verdict's 24 kHz (its images' mirror rate) stands
    imaging = _imaging(_below(96000), (8000, 24000, 48000))
    assert pv.skipped_multiples(8000, [8000, 24000, 48000], pv.quiet_rates(imaging)) == [16000, 32000]
    assert pv.skipped_multiples(24000, [8000, 24000, 48000], pv.quiet_rates(imaging)) == []
    m = {"upsampled_from_hz": 24000, "upsampled_evidence": "images", "effective_bandwidth_hz": 48000.0,
         "upsampled_mirror_rate_hz": 24000, "imaging": imaging}
    assert pv.rate_from_images(dict(m))["upsampled_from_hz"] == 24000
    # a true 8 kHz source: every multiple coherent, and an image verdict at 24 kHz still takes 8 kHz
    imaging = _imaging(_below(96000), (8000, 16000, 24000, 32000, 48000))
    assert pv.image_rate(imaging) == 8000
    m = {"upsampled_from_hz": 24000, "upsampled_evidence": "images", "effective_bandwidth_hz": 48000.0,
         "imaging": imaging}
    assert pv.rate_from_images(dict(m))["upsampled_from_hz"] == 8000


# ---------------------------------------------------------------- end to end (in process, the CLI's analyzers)

def _measure(y, fs):
    """The sampling analyzers and post-steps ``masterqc measure`` runs, in process (bench/score_upsampling.py)."""
    import score_upsampling as su
    case = type("Case", (), {"audio": y[:, None] if y.ndim == 1 else y, "rate_hz": fs, "channel_labels": None})()
    return su.measure_case(case)


def test_nearest_phase_converter_from_22k05_is_not_named_24k():
    # a 22.05 kHz source converted to 176.4 kHz by a 64-phase windowed sinc (16 zero crossings, cutoff 0.95 of the
    # old Nyquist, Kaiser beta 8) on speech: its fall reads 0.86 of 12 kHz as well as 0.94 of 11.025 kHz (the
    # case that named 24 kHz); its images are coherent about the multiples of 11.025 kHz only
    rng = np.random.default_rng([1001, 5])
    x = ct.set_rms(ct.low_material("speech", 22050, 1.5, rng)[:, None], -18.0)[:, 0]
    y = ct.quantise24(ct.nearest_phase(x, 22050, 176400, (64, 16, 0.95, 8.0))[:, None], rng)
    m = _measure(y, 176400)
    assert m["upsampled_from_hz"] == 22050, m.get("bandwidth_note")


def test_shape_of_a_fall_narrower_than_the_envelope_resolves_is_not_read_at_any_scale():
    # by construction: the fall of a libsamplerate sinc_best conversion from 8 kHz, read at scale 4 (frequencies
    # four times the file's): -6, -20 and -40 dB at 15238, 15565 and 16201 Hz on that scale, i.e. within 241 Hz of
    # the file's own frequencies, finer than the envelope's 1010 Hz closing (bandwidth.CLOSING_HZ) can resolve.
    # House rule (bandwidth.SHAPE_MIN_SPAN_HZ, in the file's own hertz): such a shape is not read (0), while the
    # same numbers read at scale 1 would be a 963 Hz fall with a shape ratio of (16201 - 15565) / (15565 - 15238)
    from masterqc.measure import bandwidth as bw
    cliff = {"edge_hz": 15238.0, "f20_hz": 15565.0, "f40_hz": 16201.0}
    assert bw.shape_ratio(cliff, 4) == 0.0
    assert bw.shape_ratio(cliff, 1) == pytest.approx((16201.0 - 15565.0) / (15565.0 - 15238.0))



def test_a_hold_read_from_the_samples_names_its_own_rate_over_coherent_standard_rates():
    # A hold of 4.8 samples at 48 kHz (an effective 10 kHz) repeats its pattern every 24 samples, so its images
    # are coherent about 8, 16 and 24 kHz too (analytic: 48 kHz / 24 = 2 kHz divides them all; 10 kHz is not a
    # standard rate, so the spectral test never tries it).  The runs of repeated samples name 10 kHz exactly:
    # house rule, exact sample evidence outranks coherence, as the sample patterns do.
    provenance = pv
    imaging = [{"source_rate_hz": 8000.0, "verdict": "defect", "coherence": 1.0, "image_level_db": -27.6,
                "channel": "L", "channels": ["L", "R"], "evidence": "spectrum"},
               {"source_rate_hz": 16000.0, "verdict": "defect", "coherence": 1.0, "image_level_db": -9.7,
                "channel": "L", "channels": ["L", "R"], "evidence": "spectrum"},
               {"source_rate_hz": 10000.0, "verdict": "defect", "coherence": None, "image_level_db": -7.9,
                "channel": "L", "channels": ["L", "R"], "evidence": "samples"}]
    assert provenance.image_source(imaging)["source_rate_hz"] == 10000.0
    m = provenance.combine({"upsampled_from_hz": None, "imaging": imaging})
    assert m["upsampled_from_hz"] == 10000 and m["upsampled_evidence"] == "images"
    assert m["upsampled_confidence_fraction"] == provenance.HELD_SAMPLES_CONFIDENCE
    assert "sample-and-hold at an effective 10 kHz" in m["bandwidth_note"]
    # the rate step that moves an image verdict down to a coherent divisor never overrules runs of repeated samples
    # (house rule: exact evidence first): samples held at 16 kHz with images also coherent about 8 kHz keep 16 kHz,
    # where a spectral defect at 16 kHz would move to 8 kHz
    held16 = [dict(imaging[0]), dict(imaging[2], source_rate_hz=16000.0)]
    assert provenance.combine({"upsampled_from_hz": None, "imaging": held16})["upsampled_from_hz"] == 16000
    spectral16 = [dict(imaging[0]), dict(imaging[2], source_rate_hz=16000.0, evidence="spectrum", coherence=1.0)]
    assert provenance.combine({"upsampled_from_hz": None, "imaging": spectral16})["upsampled_from_hz"] == 8000
    # without the sample evidence the most coherent (then loudest) spectral defect names the rate, as before
    assert provenance.image_source(imaging[:2])["source_rate_hz"] == 16000.0
