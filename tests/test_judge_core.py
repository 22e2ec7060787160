"""The judge's comparison rule at the limits (masterqc/judge/core.py).

The rule under test: a value is rounded once to the judging decimals (0.1 for
dB-like units, more when the spec writes more), ties go towards the limit it
could miss, and that rounded value is both what is compared and what is shown.
Promise 1: a value shown as the limit never fails it.  Promise 2: a value that
fails is always shown beyond the limit, with a miss of at least one step.
"""

from __future__ import annotations

import math
import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from masterqc.judge.core import (Finding, check_allowed, check_limits, decimals_of, judging_decimals,
                                 limit_text, quantize, verdict)
from masterqc.spec.types import allowed, bounds, ceiling, floor, target

TP = ceiling("dbtp")


def tp(max_dbtp=-1.0, **kw):
    return TP.model_validate({"max_dbtp": max_dbtp, **kw})


# ------------------------------------------------------------------ the edges named in the brief

def test_exactly_on_the_ceiling_passes():
    f = check_limits("peaks.true_peak", "true peak", -1.0, tp())
    assert f.status == "pass"
    assert f.measured == -1.0 and f.measured_text == "-1.0 dBTP" and f.miss is None


def test_0_04_db_over_is_shown_as_the_ceiling_and_passes():
    # -0.96 dBTP is printed as -1.0 dBTP at 0.1 dB: it must not fail a -1.0 ceiling
    f = check_limits("peaks.true_peak", "true peak", -0.96, tp())
    assert f.status == "pass"
    assert f.measured_text == "-1.0 dBTP"
    assert f.measured_raw == -0.96


def test_0_06_db_over_fails_and_is_shown_over():
    f = check_limits("peaks.true_peak", "true peak", -0.94, tp())
    assert f.status == "fail"
    assert f.measured_text == "-0.9 dBTP"
    assert f.miss == pytest.approx(0.1)
    assert "above the limit -1.0 dBTP by 0.1 dB" in f.message


def test_half_way_tie_goes_to_the_failing_side():
    # -0.95 is exactly half-way between -1.0 and -0.9 and really is above -1.0: it is shown
    # as -0.9 and fails, never rounded onto the passing side
    f = check_limits("peaks.true_peak", "true peak", -0.95, tp())
    assert f.status == "fail" and f.measured_text == "-0.9 dBTP"
    # under a floor the failing side is below: -20.05 is shown as -20.1 and fails,
    # -19.95 (really above the floor) is shown as -20.0 and passes
    fl = floor("lufs").model_validate({"min_lufs": -20.0})
    g = check_limits("x", "level", -20.05, fl)
    assert g.status == "fail" and g.measured_text == "-20.1 LUFS"
    h = check_limits("x", "level", -19.95, fl)
    assert h.status == "pass" and h.measured_text == "-20.0 LUFS"


def test_floor_edges():
    fl = floor("lufs").model_validate({"min_lufs": -20.0})
    assert check_limits("x", "level", -20.04, fl).status == "pass"
    f = check_limits("x", "level", -20.06, fl)
    assert f.status == "fail" and f.measured_text == "-20.1 LUFS" and f.miss == pytest.approx(0.1)


def test_finer_limit_is_judged_at_its_own_precision():
    # a ceiling written as -0.95 is judged at 0.01 dB, so -0.944 (which misses it) cannot
    # hide behind a 0.1 dB display of -0.9 vs -1.0 either way
    req = tp(-0.95)
    assert judging_decimals(req) == 2
    assert limit_text(req) == "<= -0.95 dBTP"
    on = check_limits("p", "true peak", -0.948, req)          # shown -0.95: on the ceiling
    assert on.status == "pass" and on.measured_text == "-0.95 dBTP"
    f = check_limits("p", "true peak", -0.944, req)
    assert f.status == "fail" and f.measured_text == "-0.94 dBTP" and f.miss == pytest.approx(0.01)
    assert check_limits("p", "true peak", -0.954, req).status == "pass"


def test_target_with_tolerance_edges():
    req = target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 1.0})
    assert limit_text(req) == "-23.0 LUFS \u00b1 1.0 LU"
    assert check_limits("l", "integrated loudness", -21.96, req).status == "pass"   # shown -22.0
    assert check_limits("l", "integrated loudness", -24.04, req).status == "pass"   # shown -24.0
    hi = check_limits("l", "integrated loudness", -21.94, req)
    lo = check_limits("l", "integrated loudness", -24.06, req)
    assert (hi.status, hi.measured_text, hi.miss) == ("fail", "-21.9 LUFS", pytest.approx(0.1))
    assert (lo.status, lo.measured_text, lo.miss) == ("fail", "-24.1 LUFS", pytest.approx(0.1))


def test_warning_margin_edges():
    req = tp(-1.0, warn_margin_db=0.3)
    assert check_limits("p", "true peak", -1.3, req).status == "pass"    # exactly 0.3 below: outside margin
    assert check_limits("p", "true peak", -1.34, req).status == "pass"   # shown -1.3
    assert check_limits("p", "true peak", -1.26, req).status == "pass"   # shown -1.3
    w = check_limits("p", "true peak", -1.2, req)
    assert w.status == "warn" and "within 0.3 dB" in w.message
    assert check_limits("p", "true peak", -0.96, req).status == "warn"   # shown -1.0: on the ceiling
    assert check_limits("p", "true peak", -0.94, req).status == "fail"


def test_severity_warn_turns_a_miss_into_a_warning():
    req = bounds("lu").model_validate({"max_lu": 18.0, "severity": "warn"})
    f = check_limits("loudness.range", "loudness range", 22.4, req)
    assert f.status == "warn" and f.miss == pytest.approx(4.4) and "severity warn" in f.message
    assert verdict([f]) == "warn"


def test_none_is_skipped_with_the_reason():
    f = check_limits("loudness.integrated", "integrated loudness", None,
                     target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 1.0}),
                     missing_reason="the programme is digital silence")
    assert f.status == "skipped" and "digital silence" in f.message and f.measured is None
    assert verdict([f]) == "pass"


def test_allowed_values():
    req = allowed(int, "48000").model_validate([48000, 96000])
    assert check_allowed("format.sample_rate", "sample rate", 48000, req).status == "pass"
    f = check_allowed("format.sample_rate", "sample rate", 44100, req, show=lambda v: f"{v} Hz")
    assert f.status == "fail" and "44100 Hz" in f.message and f.limit == "one of 48000 Hz, 96000 Hz"
    w = allowed(int).model_validate({"allowed": [24], "severity": "warn"})
    assert check_allowed("format.bit_depth", "bit depth", 16, w).status == "warn"


def test_verdict_order():
    mk = lambda s: Finding(check="c", status=s, message="m")  # noqa: E731
    assert verdict([]) == "pass"
    assert verdict([mk("pass"), mk("skipped")]) == "pass"
    assert verdict([mk("pass"), mk("warn")]) == "warn"
    assert verdict([mk("warn"), mk("fail")]) == "fail"
    assert verdict([mk("fail"), mk("error")]) == "error"
    with pytest.raises(ValueError):
        mk("ok")


def test_quantize_and_decimals():
    assert quantize(-0.95, 1, "up") == -0.9
    assert quantize(-0.95, 1, "down") == -1.0
    assert quantize(0.25, 1, "up") == 0.3 and quantize(0.25, 1, "down") == 0.2
    assert quantize(-0.96, 1) == -1.0
    assert decimals_of(-0.95) == 2 and decimals_of(-1.0) == 0 and decimals_of(48000.0) == 0
    assert decimals_of(0.3) == 1


# ------------------------------------------------------------------ both promises, for any value

_NUM = re.compile(r"-?\d+(?:\.\d+)?")


@settings(max_examples=400, deadline=None)
@given(value=st.floats(-60, 10, allow_nan=False), limit_tenths=st.integers(-600, 100),
       kind=st.sampled_from(["ceiling", "floor"]))
def test_shown_value_and_status_always_agree(value, limit_tenths, kind):
    limit = limit_tenths / 10.0
    if kind == "ceiling":
        req = tp(limit)
    else:
        req = floor("dbtp").model_validate({"min_dbtp": limit})
    f = check_limits("c", "v", value, req)
    shown = float(_NUM.match(f.measured_text).group())
    assert shown == f.measured
    # what is shown is the value rounded to 0.1 dB (never more than half a step away)
    assert abs(shown - value) <= 0.05 + 1e-9
    beyond = shown > limit if kind == "ceiling" else shown < limit
    # promise 1: shown at or inside the limit -> not a failure; promise 2: a failure is visibly beyond
    assert (f.status == "fail") == beyond
    if f.status == "fail":
        assert f.miss >= 0.1 - 1e-9
        assert math.isclose(f.miss, abs(shown - limit), abs_tol=1e-9)


def test_target_limits_are_exact_decimals():
    # 0.1 + 0.2 is 0.30000000000000004 in binary; the limit must stay 0.3 (judged at 0.1)
    req = target("db").model_validate({"target_db": 0.1, "tolerance_db": 0.2})
    assert req.limits() == (-0.1, 0.3) and judging_decimals(req) == 1
    assert check_limits("x", "level", 0.34, req).status == "pass"
    assert check_limits("x", "level", 0.36, req).status == "fail"


def test_numeric_limits_travel_with_the_finding():
    # EBU R 128 programme target -23.0 LUFS with +-1.0 LU (the live-programme tolerance):
    # the finding carries -24.0 and -22.0 as numbers for renderers.
    req = target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 1.0})
    d = check_limits("loudness.integrated", "integrated loudness", -23.4, req).to_dict()
    assert (d["limit_low"], d["limit_high"]) == (-24.0, -22.0)
    d = check_limits("peaks.true_peak", "true peak", -3.0, tp()).to_dict()
    assert (d["limit_low"], d["limit_high"]) == (None, -1.0)
