"""Properties of the integrity analyzers on arbitrary signals (hypothesis).

* No result depends on the block size: random piecewise signals (silence,
  frozen values, full-scale codes, noise, NaN/Inf in float files) give the same
  measurements fed whole or in random block sizes.
* No input makes an analyzer raise, and every result fits its declared schema.
"""

from __future__ import annotations

import math

import jsonschema
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from integrity_support import info_for
from masterqc.jsonutil import jsonable
from masterqc.measure.bitdepth import BitDepthAnalyzer
from masterqc.measure.channels import ChannelRelationAnalyzer
from masterqc.measure.clipping import ClippingAnalyzer
from masterqc.measure.dcoffset import DcOffsetAnalyzer
from masterqc.measure.nonfinite import NonFiniteAnalyzer
from masterqc.measure.options import MeasureOptions
from masterqc.measure.silence import SilenceAnalyzer

ANALYZERS = [ClippingAnalyzer, DcOffsetAnalyzer, SilenceAnalyzer, NonFiniteAnalyzer, BitDepthAnalyzer,
             ChannelRelationAnalyzer]
FS = 8000  # the lowest rate K-weighting is defined for: short signals still span many windows

SEGMENT = st.tuples(
    st.sampled_from(["zero", "frozen", "top", "bottom", "noise", "tone", "nan", "inf"]),
    st.integers(1, 900),
    st.integers(0, 3),  # channel mask variant
)


def build(segments, channels, is_float, seed):
    rng = np.random.default_rng(seed)
    parts = []
    top = 1.0 if is_float else (2 ** 23 - 1) / 2 ** 23
    for kind, n, variant in segments:
        if kind == "zero":
            seg = np.zeros((n, channels))
        elif kind == "frozen":
            seg = np.full((n, channels), (variant + 1) * 1000 / 2 ** 23)
        elif kind == "top":
            seg = np.full((n, channels), top)
        elif kind == "bottom":
            seg = np.full((n, channels), -1.0)
        elif kind == "noise":
            seg = np.round(rng.normal(0, 0.1, (n, channels)) * 2 ** 23) / 2 ** 23
        elif kind == "tone":
            t = np.arange(n) / FS
            seg = np.round(0.3 * np.sin(2 * np.pi * 440 * t)[:, None] * np.ones(channels) * 2 ** 23) / 2 ** 23
            if variant == 1 and channels > 1:
                seg[:, 1] *= -1
        else:
            seg = np.round(rng.normal(0, 0.1, (n, channels)) * 2 ** 23) / 2 ** 23
            if is_float:
                seg[rng.integers(0, n), variant % channels] = np.nan if kind == "nan" else np.inf
        parts.append(np.clip(seg, -1.0, top) if not is_float else seg)
    return np.concatenate(parts)


def run(cls, x, info, sizes):
    a = cls(info, MeasureOptions(dropout_min_s=0.01))
    i = 0
    k = 0
    while i < x.shape[0]:
        n = sizes[k % len(sizes)]
        b = x[i:i + n]
        if not cls.raw_input and not np.isfinite(b).all():
            b = np.where(np.isfinite(b), b, 0.0)
        a.process(b)
        i += n
        k += 1
    r = a.finish()
    return jsonable(r.measurements), jsonable(r.series)


def same(a, b, path=""):
    if isinstance(a, dict):
        assert a.keys() == b.keys(), path
        for k in a:
            same(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list):
        assert len(a) == len(b), path
        for i, (u, v) in enumerate(zip(a, b)):
            same(u, v, f"{path}[{i}]")
    elif isinstance(a, float) and isinstance(b, float):
        assert math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-9), f"{path}: {a} vs {b}"
    else:
        assert a == b, f"{path}: {a!r} vs {b!r}"


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(segments=st.lists(SEGMENT, min_size=1, max_size=12),
       channels=st.integers(1, 3),
       is_float=st.booleans(),
       sizes=st.lists(st.integers(1, 3000), min_size=1, max_size=5),
       seed=st.integers(0, 2 ** 16))
def test_results_do_not_depend_on_block_size_and_fit_the_schema(segments, channels, is_float, sizes, seed):
    x = build(segments, channels, is_float, seed)
    info = info_for(x, fs=FS, bits=32 if is_float else 24, is_float=is_float)
    for cls in ANALYZERS:
        whole_m, whole_s = run(cls, x, info, [x.shape[0]])
        split_m, split_s = run(cls, x, info, sizes)
        same(whole_m, split_m, cls.__name__)
        same(whole_s, split_s, cls.__name__)
        assert set(whole_m) == set(cls.measurement_schema), cls.__name__
        for key, schema in cls.measurement_schema.items():
            jsonschema.validate(whole_m[key], schema)


FULL_SECTION = {
    "clipped_runs": {"max_count": 0}, "over_full_scale_samples": {"max_count": 0},
    "dc_offset": {"max_dbfs": -60.0}, "subsonic_energy": {"max_db": -30.0},
    "head_silence": {"min_s": 0.1, "max_s": 2.0}, "tail_silence": {"min_s": 0.1},
    "head_digital_silence": {"max_s": 1.0}, "tail_digital_silence": {"max_s": 1.0},
    "dropouts": {"max_count": 0}, "nonfinite_samples": True, "effective_bit_depth": {"min_bits": 24},
    "dual_mono": [False], "inverted_polarity": [False], "phase_correlation": {"min_corr": 0.0},
    "phase_correlation_below": {"max_percent": 5.0}, "level_balance": {"max_lu": 1.0},
}


def _base_result():
    x = build([("tone", 4000, 1), ("zero", 500, 0), ("top", 10, 0), ("nan", 300, 1), ("noise", 2000, 0)],
              2, True, 7)
    info = info_for(x, fs=FS, bits=32, is_float=True)
    m = {}
    for cls in ANALYZERS:
        m.update(run(cls, x, info, [4096])[0])
    return {"format": {"channels": 2, "channel_layout": ["L", "R"], "duration_s": x.shape[0] / FS},
            "measurements": m}


BASE = _base_result()


def _full_spec():
    from masterqc.spec import build_spec
    return build_spec({"spec_version": 1, "name": "property", "integrity": FULL_SECTION})


SPEC = _full_spec()


def _finding_validator():
    from masterqc.schema import FINDING_SCHEMA
    return jsonschema.Draft202012Validator(FINDING_SCHEMA)


FINDING_VALIDATOR = _finding_validator()


@settings(max_examples=60, deadline=None)
@given(drop=st.sets(st.sampled_from(sorted(BASE["measurements"]))),
       nulls=st.sets(st.sampled_from(sorted(BASE["measurements"]))))
def test_judge_never_raises_on_missing_or_null_measurements(drop, nulls):
    from masterqc.judge.integrity import judge
    m = {k: (None if k in nulls else v) for k, v in BASE["measurements"].items() if k not in drop}
    findings = judge(SPEC.integrity, dict(BASE, measurements=m))
    assert {f.check for f in findings} >= {"integrity.clipped_runs", "integrity.level_balance"}
    for f in findings:
        FINDING_VALIDATOR.validate(jsonable(f.to_dict()))
