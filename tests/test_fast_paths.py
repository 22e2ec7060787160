"""Fast paths of the sample-level analyzers give the plain numpy formula's answer.

Each helper is checked against the direct expression it replaces, on blocks
with sound at the edges, in the middle only, in one frame, and none.
"""

from __future__ import annotations

import numpy as np
import pytest

from masterqc.measure.silence import _edge_frame


def _plain(block, level, from_end):
    rows = np.flatnonzero((np.abs(block) > level).any(axis=1))
    if rows.size == 0:
        return None
    return int(rows[-1] if from_end else rows[0])


@pytest.mark.parametrize("n", [1, 5, 1023, 1024, 1025, 5000, 65536])
@pytest.mark.parametrize("channels", [1, 2, 6])
def test_edge_frame_matches_the_plain_search(n, channels):
    rng = np.random.default_rng(n * 7 + channels)
    level = 10 ** (-60 / 20)
    quiet = rng.uniform(-level, level, (n, channels))      # never above the level
    cases = [quiet]
    for where in {0, n // 3, n // 2, n - 1}:
        b = quiet.copy()
        b[where, rng.integers(channels)] = -0.5
        cases.append(b)
    loud = quiet.copy()
    loud[n // 4:(3 * n) // 4 + 1] = 0.25
    cases.append(loud)
    cases.append(np.zeros((n, channels)))
    for b in cases:
        for level_used in (level, 0.0):
            for from_end in (True, False):
                assert _edge_frame(b, level_used, from_end) == _plain(b, level_used, from_end)
                # by construction: the planar form of the same block finds the same frame
                planar = np.ascontiguousarray(b.T)
                assert _edge_frame(planar, level_used, from_end, planar=True) == _plain(b, level_used, from_end)


def test_edge_frame_level_is_strict():
    b = np.zeros((3000, 2))
    b[2000, 1] = 0.001
    assert _edge_frame(b, 0.001, True) is None          # |x| > level, not >=
    assert _edge_frame(b, 0.0009, True) == 2000
    assert _edge_frame(b, 0.0009, False) == 2000
