"""masterqc.jsonutil.jsonable: numpy values become plain JSON values, non-finite floats become null.

JSON (RFC 8259, section 6) has no NaN or Infinity; Python's json module writes them only when
allow_nan is true, so every result must encode with allow_nan=False.  The fast paths for exact
built-in types and whole numpy arrays must give what the element-by-element rules give: the
reference below spells those rules out (by construction, from the module's docstring).
"""

from __future__ import annotations

import json
import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from masterqc.jsonutil import jsonable


def reference(value):
    """The documented rules, one value at a time."""
    if isinstance(value, str):
        return value if not any(0xD800 <= ord(c) <= 0xDFFF for c in value) else "escaped"
    if isinstance(value, dict):
        return {str(k): reference(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [reference(v) for v in value]
    if isinstance(value, np.ndarray):
        return [reference(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(float(value)) else None
    return value


def _types(value):
    """The value's structure with each leaf's exact type: 1 == 1.0 == True must not hide a change."""
    if isinstance(value, dict):
        return {k: _types(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_types(v) for v in value]
    return type(value).__name__


def test_numpy_values_and_non_finite_floats():
    """Values written out by hand (by construction): every leaf a Python bool, int, float or None."""
    value = {
        "f64": np.array([0.5, -1.25]), "f32_nan": np.array([1.5, np.nan], dtype=np.float32),
        "f16": np.array([0.25], dtype=np.float16), "i2d": np.array([[1, 2], [3, 4]], dtype=np.int16),
        "u": np.array([7], dtype=np.uint64), "b": np.array([True, False]),
        "scalars": (np.float64(2.0), np.int32(3), np.bool_(True), float("inf"), -math.inf),
        "plain": [1, 2.5, None, True, "x", (4, 5.0)], 7: "key made text",
        "f2d_inf": np.array([[1.0, np.inf]]),
    }
    out = jsonable(value)
    assert out == {
        "f64": [0.5, -1.25], "f32_nan": [1.5, None], "f16": [0.25], "i2d": [[1, 2], [3, 4]],
        "u": [7], "b": [True, False], "scalars": [2.0, 3, True, None, None],
        "plain": [1, 2.5, None, True, "x", [4, 5.0]], "7": "key made text", "f2d_inf": [[1.0, None]],
    }
    assert _types(out) == _types(reference(value))
    json.dumps(out, allow_nan=False)  # RFC 8259 section 6: raises on NaN or Infinity


def test_a_surrogate_escaped_name_is_shown_as_bytes():
    """A file name byte that is not UTF-8 (kept by Python as a surrogate escape) shows as \\xNN."""
    name = b"take\xff.wav".decode("utf-8", "surrogateescape")
    assert jsonable({"path": name}) == {"path": "take\\xff.wav"}
    json.dumps(jsonable({"path": name}), ensure_ascii=False).encode("utf-8")


_leaf = st.one_of(st.integers(-2**40, 2**40), st.floats(allow_nan=True, allow_infinity=True), st.none(),
                  st.booleans(), st.text(alphabet="abc", max_size=3))
_arrays = st.one_of(
    st.lists(st.floats(allow_nan=True, allow_infinity=True, width=32), max_size=6).map(
        lambda v: np.array(v, dtype=np.float32)),
    st.lists(st.floats(allow_nan=True, allow_infinity=True), max_size=6).map(np.array),
    st.lists(st.integers(-100, 100), min_size=1, max_size=6).map(lambda v: np.array(v, dtype=np.int64)),
    st.lists(st.floats(allow_nan=True, allow_infinity=True), min_size=2, max_size=6).map(
        lambda v: np.array(v[: len(v) // 2 * 2]).reshape(-1, 2)),
)
_values = st.recursive(st.one_of(_leaf, _arrays),
                       lambda inner: st.one_of(st.lists(inner, max_size=4), st.tuples(inner, inner),
                                               st.dictionaries(st.text(alphabet="kl", max_size=2), inner,
                                                               max_size=3)),
                       max_leaves=12)


@settings(max_examples=200, deadline=None)
@given(_values)
def test_fast_paths_agree_with_the_rules(value):
    out = jsonable(value)
    ref = reference(value)
    assert json.dumps(out, allow_nan=False) == json.dumps(ref, allow_nan=False)
    assert _types(out) == _types(ref)
