"""Level conversions shared by every analyzer: the one place for ``log10`` of amplitudes and powers.

A level that cannot exist (the level of exact zero, a ratio with a zero or
non-finite side) is ``None``, never ``-inf`` or a sentinel number, because the
result contract maps it to JSON null.
"""

from __future__ import annotations

import math


def amplitude_db(value: float) -> float | None:
    """``20*log10(|value|)`` in dB re full scale 1.0; None for 0 or a non-finite value."""
    value = abs(float(value))
    if not value > 0.0 or not math.isfinite(value):
        return None
    return 20.0 * math.log10(value)


def power_ratio_db(power: float, reference: float = 1.0) -> float | None:
    """``10*log10(power/reference)`` in dB; None when either side is not a positive finite number."""
    power, reference = float(power), float(reference)
    if not (power > 0.0 and reference > 0.0) or not (math.isfinite(power) and math.isfinite(reference)):
        return None
    # difference of logs, not log of the quotient: power / reference may overflow or underflow
    return 10.0 * (math.log10(power) - math.log10(reference))
