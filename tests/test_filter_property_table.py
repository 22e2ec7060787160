"""The stored true-peak filter properties (masterqc.measure.filterprops) are what
masterqc.measure.oversample computes for the shipped filters (house choice: a stored
table must never drift from its computation; regenerate with tools/filter_property_table.py)."""

from __future__ import annotations

import pytest

from masterqc.measure import filterprops as fp
from masterqc.measure import oversample as ov

UP_TO = (0.45, 0.49)


@pytest.mark.parametrize("design", ["kaiser", "annex2"])
def test_every_shipped_reading_filter_is_stored_and_equals_its_computation(design):
    flt = ov.reading_filter(design)
    key = fp.fingerprint(flt.taps, flt.factor, flt.instant_offset)
    assert key in fp.PROPERTIES                                    # the table covers the shipped filter
    computed = ov.filter_properties(flt)
    stored = fp.PROPERTIES[key]
    assert sorted(stored) == sorted(computed)
    for name, value in computed.items():
        assert stored[name] == pytest.approx(float(value), rel=1e-12, abs=1e-15), name
    assert ov.reading_filter_properties(design) == stored            # the meter reads the table
    for up_to in UP_TO:
        stored_u = fp.WORST_UNDERREAD_DB[(key, up_to)]
        saved = dict(fp.WORST_UNDERREAD_DB)
        try:
            fp.WORST_UNDERREAD_DB.clear()                             # force the computation
            value = ov.worst_underread_db.__wrapped__(ov.reading_factor(design), design, up_to)
        finally:
            fp.WORST_UNDERREAD_DB.update(saved)
        assert stored_u == pytest.approx(value, rel=1e-12, abs=1e-15)
        assert ov.meter_underread_db(design, up_to) == stored_u


def test_a_changed_filter_is_computed_not_looked_up():
    flt = ov.reading_filter("kaiser")
    taps = flt.taps.copy()
    taps[0, 1] += 1e-12
    assert fp.fingerprint(taps, flt.factor, flt.instant_offset) not in fp.PROPERTIES
    assert fp.fingerprint(flt.taps, flt.factor, flt.instant_offset + 1e-9) not in fp.PROPERTIES
    # analytic: the worst under-read computed from the taps by oversample.worst_underread_db (house
    # design, documented in oversample's module docstring): 0.012 dB to 0.45 fs, read to half a step of 0.001 dB
    # the kaiser grid's documented under-read (module docstring of oversample): 0.012 dB to 0.45 fs
    assert fp.WORST_UNDERREAD_DB[(fp.fingerprint(flt.taps, flt.factor, flt.instant_offset), 0.45)] == \
        pytest.approx(0.012, abs=0.0005)
