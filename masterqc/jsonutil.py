"""Turning results into plain JSON values.

numpy scalars and arrays become Python numbers and lists; a float that cannot
exist (NaN, +-Inf) becomes ``None`` (JSON null), never a sentinel number.
Text holding bytes that are not valid UTF-8 (a file name, kept by Python as
surrogate escapes) shows them as ``\\xNN``, so every result encodes as UTF-8.
"""

from __future__ import annotations

import json
import math

import numpy as np

from masterqc.fileio import text_safe


def jsonable(value):
    """Return ``value`` with numpy types converted and non-finite floats as None."""
    t = type(value)
    # exact built-in types first (a measured result holds tens of thousands of them); each gives
    # what the general rules below give for it
    if t is int or value is None:
        return value
    if t is float:
        return value if _isfinite(value) else None
    if t is list or t is tuple:
        return _seq(value)
    if isinstance(value, str):
        return text_safe(value)
    if isinstance(value, dict):
        return {text_safe(str(k)): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        if value.ndim >= 1 and value.dtype.kind in "iub":
            return value.tolist()  # Python ints and bools, nested as the array
        if value.ndim == 1 and value.dtype in _FLOATS and bool(np.isfinite(value).all()):
            return value.tolist()  # Python floats, every one finite
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        value = float(value)
        return value if math.isfinite(value) else None
    return value


_isfinite = math.isfinite
#: float types whose ``tolist`` gives Python floats
_FLOATS = (np.dtype(np.float16), np.dtype(np.float32), np.dtype(np.float64))


def _seq(value) -> list:
    out = []
    append = out.append
    for v in value:
        t = type(v)
        if t is float:
            append(v if _isfinite(v) else None)
        elif t is int or v is None:
            append(v)
        else:
            append(jsonable(v))
    return out


def result_json_text(result: dict, encoded: dict | None = None, ascii_only: bool = False) -> str:
    """The result as JSON text: one top-level key per line and one finding per line, the rest compact.

    (Fully indented JSON goes through Python's pure encoder and costs more than judging; this layout
    keeps the C encoder and stays readable where people look: the verdict and the findings.)
    ``encoded``: ``{key: (value, text)}`` of values already encoded (:func:`parse_result_text`); a
    key's text is used as it is while the result holds that very value object.
    ``ascii_only``: other characters as ``\\uXXXX`` escapes (for a terminal of any encoding).
    """
    def dumps(v):
        return json.dumps(v, ensure_ascii=ascii_only, allow_nan=False)
    lines = []
    for key, value in result.items():
        hit = encoded.get(key) if encoded else None
        if hit is not None and hit[0] is value:
            body = hit[1]
        elif key == "findings" and isinstance(value, list) and value:
            body = "[\n" + ",\n".join(f"    {dumps(f)}" for f in value) + "\n  ]"
        else:
            body = dumps(value)
        lines.append(f"  {dumps(key)}: {body}")
    return "{\n" + ",\n".join(lines) + "\n}\n"
