"""Turning results into plain JSON values.

numpy scalars and arrays become Python numbers and lists; a float that cannot
exist (NaN, +-Inf) becomes ``None`` (JSON null), never a sentinel number.
Text holding bytes that are not valid UTF-8 (a file name, kept by Python as
surrogate escapes) shows them as ``\\xNN``, so every result encodes as UTF-8.
"""

from __future__ import annotations

import math

import numpy as np

from masterqc.fileio import text_safe


def jsonable(value):
    """Return ``value`` with numpy types converted and non-finite floats as None."""
    if isinstance(value, str):
        return text_safe(value)
    if isinstance(value, dict):
        return {text_safe(str(k)): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    return value
