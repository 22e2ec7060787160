"""Fast paths of the sample-level analyzers give what the general path gives.

ClippingAnalyzer skips a block with two reductions (its minimum and maximum) when nothing in
it reaches either clipping level.  The reference is the same analyzer fed blocks that each
hold a clipped sample, so that the general path runs on every block: the results must be
identical (by construction: a block skipped holds no clipped and no over-full-scale sample).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from integrity_support import feed, info_for, pcm
from masterqc.measure.clipping import ClippingAnalyzer


def _clipped_programme(bits: int, is_float: bool, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n = 48000 * 3
    x = 0.3 * rng.standard_normal((n, 2))
    if is_float:
        x[20000:20010, 0] = 1.0                   # a run at full scale
        x[70000:70004, 1] = -1.2                  # a run over full scale
        x[100000, 0] = 1.5                        # a single over
    else:
        half = 2 ** (bits - 1)
        x = np.clip(np.round(x * half), -half, half - 1)
        x[20000:20010, 0] = half - 1              # a run at the most positive code
        x[70000:70004, 1] = -half                 # a run at the most negative code
        x = pcm(x, bits)
    return x


def _text(r):
    return json.dumps([r.measurements, r.settings], sort_keys=True)


@pytest.mark.parametrize("bits,is_float", [(16, False), (24, False), (32, True)])
@pytest.mark.parametrize("threshold_db", [0.0, 0.5])
def test_clipping_skip_changes_no_result(bits, is_float, threshold_db):
    x = _clipped_programme(bits, is_float, bits)
    info = info_for(x, 48000, bits=bits, is_float=is_float)
    fast = feed(ClippingAnalyzer, x, info, block=4096, clip_threshold_db=threshold_db)
    # the general path on every block: each block carries one extra clipped sample at its
    # start, where it stays a run of one (below the 3-sample minimum run)
    y = x.copy()
    starts = np.arange(0, y.shape[0], 4096)
    top = 1.0 if is_float else (2 ** (bits - 1) - 1) / 2 ** (bits - 1)    # full scale (module docstring)
    y[starts, 1] = np.where(np.arange(starts.size) % 2, top, -1.0)
    general = feed(ClippingAnalyzer, y, info, block=4096, clip_threshold_db=threshold_db)
    a, b = fast.measurements, general.measurements
    # the extra single samples are not runs: every run figure is the same
    for key in ("clipped_run_count", "clipped_run_count_per_channel", "clipped_sample_count_per_channel",
                "clipped_run_longest_samples", "clipped_run_where_s", "clipped_run_events"):
        assert a[key] == b[key], key
    assert a["clipped_run_count"] >= 2
    if is_float:
        # by construction: |x| > 1 counted on the programme itself (the +-1.0 markers are not over)
        overs = np.count_nonzero(np.abs(x) > 1.0, axis=0).tolist()
        assert a["over_full_scale_sample_count_per_channel"] == overs == b["over_full_scale_sample_count_per_channel"]


@pytest.mark.parametrize("size_bytes", [0, 7, (1 << 20), (5 << 19) + 7])
def test_file_hash_read_into_one_buffer_is_sha256(tmp_path, size_bytes):
    """The file's hash (read in 1 MiB pieces into one reused buffer) is hashlib's SHA-256 of
    its bytes (reference library), for sizes below, at and across the piece size."""
    import hashlib

    from masterqc.filehash import file_facts
    data = np.random.default_rng(size_bytes).integers(0, 256, size_bytes, dtype=np.uint8).tobytes()
    path = tmp_path / "bytes.bin"
    path.write_bytes(data)
    facts = file_facts(path)
    assert facts["sha256"] == hashlib.sha256(data).hexdigest()
    assert facts["size_bytes"] == len(data)
