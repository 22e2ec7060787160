"""Results never depend on the block size (house choice, DEVELOPERS.md "Rules the layers keep":
filter state carries across blocks).

Every numeric measurement that the engine's whole registry produces, whatever
analyzers are registered now or later, is compared between block sizes from 1 to
65536 frames: levels (keys in dB, dBFS, dBTP, LUFS, LU) within 0.001 dB, counts
and other integers exactly, other numbers to a relative 1e-6, None/booleans/
strings exactly.  Tiny block sizes run on 0.2 s and 0.5 s files, the others on
a 6 s file.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from masterqc.audio.reader import open_stream
from masterqc.measure.engine import run_analyzers
from masterqc.measure.options import MeasureOptions
from masterqc.measure.registry import analyzer_classes

FS = 48000
LEVEL_SUFFIXES = ("_db", "_dbfs", "_dbtp", "_lufs", "_lu")


def music_like(seconds: float, seed: int = 5) -> np.ndarray:
    """Stereo test programme: chords with envelopes, noise, a silent gap, a few
    clipped samples, a small DC offset on one channel and an over-ceiling burst."""
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    t = np.arange(n) / FS
    x = np.zeros((n, 2))
    for f, a in ((110.0, 0.20), (220.0 * 1.26, 0.12), (330.0, 0.10), (1760.0, 0.05), (7040.0, 0.02)):
        env = 0.6 + 0.4 * np.sin(2 * np.pi * 0.7 * t + f)
        x[:, 0] += a * env * np.sin(2 * np.pi * f * t)
        x[:, 1] += a * env * np.sin(2 * np.pi * f * t + 0.3)
    x += 0.02 * rng.standard_normal((n, 2))
    x[:, 1] += 0.003                                        # DC on the right channel
    gap = slice(int(0.30 * n), int(0.30 * n) + FS // 20)    # 50 ms of digital silence
    x[gap] = 0.0
    hot = slice(int(0.6 * n), int(0.6 * n) + FS // 50)       # 20 ms burst into clipping
    x[hot] *= 5.0
    return np.clip(x, -1.0, 1.0 - 2.0 ** -23)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("blocks")
    paths = {}
    for name, seconds in (("long", 6.0), ("short", 0.5), ("tiny", 0.2)):
        p = d / f"{name}.wav"
        sf.write(p, music_like(seconds), FS, subtype="PCM_24")
        paths[name] = p
    return paths


def options(block_frames: int) -> MeasureOptions:
    # ask for the optional analyzers too (conversion safety needs a target rate)
    return MeasureOptions(block_frames=block_frames, conversion_targets_hz=(44100,))


def measure(path, block_frames: int) -> dict:
    with open_stream(path) as stream:
        measurements, _, _ = run_analyzers(stream, options(block_frames))
    return measurements


def leaves(value, prefix):
    """Flatten nested lists/dicts into (path, scalar) pairs."""
    if isinstance(value, dict):
        for k, v in value.items():
            yield from leaves(v, f"{prefix}.{k}")
    elif isinstance(value, (list, tuple)):
        yield (f"{prefix}#len", len(value))
        for i, v in enumerate(value):
            yield from leaves(v, f"{prefix}[{i}]")
    else:
        yield (prefix, value)


def is_level(path: str) -> bool:
    """Whether a leaf is a level in dB: its own key (or the top key) names a dB unit."""
    names = [part.split("[")[0].split("#")[0] for part in path.split(".")]
    return any(n.endswith(LEVEL_SUFFIXES) or any(s + "_" in n for s in LEVEL_SUFFIXES) for n in names)


def differences(ref: dict, got: dict) -> list[str]:
    problems = []
    if set(ref) != set(got):
        problems.append(f"keys differ: {sorted(set(ref) ^ set(got))}")
    for key in sorted(set(ref) & set(got)):
        a_items = dict(leaves(ref[key], key))
        b_items = dict(leaves(got[key], key))
        if a_items.keys() != b_items.keys():
            problems.append(f"{key}: shape differs")
            continue
        for path, a in a_items.items():
            b = b_items[path]
            if isinstance(a, bool) or isinstance(b, bool) or a is None or b is None \
                    or isinstance(a, str) or isinstance(b, str):
                if a != b:
                    problems.append(f"{path}: {a!r} != {b!r}")
            elif isinstance(a, int) and isinstance(b, int):
                if a != b:
                    problems.append(f"{path}: {a} != {b}")
            elif is_level(path):
                if abs(a - b) > 1e-3:
                    problems.append(f"{path}: {a} vs {b} (> 0.001 dB)")
            elif not math.isclose(a, b, rel_tol=1e-6, abs_tol=1e-9):
                problems.append(f"{path}: {a} vs {b}")
    return problems


@pytest.fixture(scope="module")
def reference(files):
    return {name: measure(p, 65536) for name, p in files.items()}


def numeric_key_count(m: dict) -> int:
    return sum(1 for k, v in m.items()
               for _, x in leaves(v, k) if isinstance(x, (int, float)) and not isinstance(x, bool))


def test_reference_covers_the_registry(reference):
    # the comparison is only meaningful if the registry's numeric keys are there
    m = reference["long"]
    declared = {}
    for cls in analyzer_classes():
        declared.update(cls.measurement_schema)
    assert numeric_key_count(m) >= 20
    for key in ("integrated_lufs", "true_peak_dbtp", "sample_peak_dbfs"):
        assert isinstance(m[key], float)
    assert set(m) <= set(declared), sorted(set(m) - set(declared))


# block size 1 runs on a 0.2 s file (one Python call per frame per analyzer is slow);
# loudness there has no complete gating block, so block 7 and the small sizes
# below run on the 0.5 s file
@pytest.mark.parametrize("block_frames,which", [(1, "tiny"), (7, "short"), (4799, "long"), (65535, "long")])
def test_fixed_extremes(files, reference, block_frames, which):
    got = measure(files[which], block_frames)
    assert differences(reference[which], got) == []


# A representative slice of block sizes per run (each example measures the 6 s file with every
# analyzer); the fixed extremes above always run, hypothesis draws new sizes on every run and
# bench/bench_block_size.py sweeps many more.
@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(block_frames=st.integers(min_value=256, max_value=65536))
def test_any_block_size_gives_the_same_results(files, reference, block_frames):
    got = measure(files["long"], block_frames)
    assert differences(reference["long"], got) == []


@settings(max_examples=2, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(block_frames=st.integers(min_value=2, max_value=255))
def test_small_block_sizes_give_the_same_results(files, reference, block_frames):
    got = measure(files["short"], block_frames)
    assert differences(reference["short"], got) == []
