"""The judge's comparison rule at the limits (masterqc/judge/core.py).

The rule under test: a value is rounded once to the judging decimals (0.1 for
dB-like units, more when the spec writes more), ties go towards the limit it
could miss, and that rounded value is both what is compared and what is shown.
Promise 1: a value shown as the limit never fails it.  Promise 2: a value that
fails is always shown beyond the limit, with a miss of at least one step.

Provenance: house choice, the project's own judging rule (DEVELOPERS.md, "judging precision";
masterqc/judge/core.py).  Every expected value here follows from that rule and the limits the
test writes by decimal arithmetic (e.g. 22.4 against a maximum of 18.0 misses by 4.4).
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
    assert "0.1 dB above the limit of -1.0 dBTP" in f.message


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
    assert w.status == "warn" and "less than the 0.3 dB margin" in w.message
    assert check_limits("p", "true peak", -0.96, req).status == "warn"   # shown -1.0: on the ceiling
    assert check_limits("p", "true peak", -0.94, req).status == "fail"


def test_severity_warn_turns_a_miss_into_a_warning():
    req = bounds("lu").model_validate({"max_lu": 18.0, "severity": "warn"})
    f = check_limits("loudness.range", "loudness range", 22.4, req)
    assert f.status == "warn" and f.miss == pytest.approx(4.4) and "the spec counts this as a warning" in f.message
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
    assert f.status == "fail" and "44100 Hz" in f.message and f.limit == "48000 Hz or 96000 Hz"
    w = allowed(int).model_validate({"allowed": [24], "severity": "warn"})
    assert check_allowed("format.bit_depth", "bit depth", 16, w).status == "warn"


def test_verdict_order():
    mk = lambda s: Finding(check="c", status=s, message="m")  # noqa: E731
    assert verdict([]) == "pass"
    assert verdict([mk("pass"), mk("skipped")]) == "pass"
    assert verdict([mk("pass"), mk("warn")]) == "warn"
    assert verdict([mk("warn"), mk("fail")]) == "fail"
    assert verdict([mk("fail"), mk("error")]) == "error"
    with pytest.raises(ValueError, match="status"):  # the contract model refuses an unknown status
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


# ------------------------------------------------------------------ the finding as other tools read it

def test_failing_finding_dict_is_the_contract():
    # every key of the result contract's ``findings`` items, with the values the rule gives
    f = check_limits("peaks.true_peak", "true peak", -0.94, tp(), where_s=[(1.5, 1.52)])
    assert f.to_dict() == {
        "check": "peaks.true_peak", "status": "fail", "severity": "fail",
        "measured": -0.9, "measured_raw": -0.94, "measured_text": "-0.9 dBTP", "decimals": 1,
        "limit": "<= -1.0 dBTP", "limit_low": None, "limit_high": -1.0,
        "miss": pytest.approx(0.1), "unit": "dBTP",
        "message": "True peak is -0.9 dBTP, 0.1 dB above the limit of -1.0 dBTP.",
        "where_s": [[1.5, 1.52]], "target": None, "miss_unit": "dB"}


def test_floor_miss_message_and_warn_severity_note():
    fl = floor("lufs").model_validate({"min_lufs": -20.0, "severity": "warn"})
    f = check_limits("x", "level", -20.26, fl, where_s=[[0.0, 1.0]])
    assert f.status == "warn" and f.miss == pytest.approx(0.3) and f.where_s == [[0.0, 1.0]]
    assert f.message == ("Level is -20.3 LUFS, 0.3 LU below the limit of -20.0 LUFS "
                         "(the spec counts this as a warning).")
    assert (f.limit_low, f.limit_high, f.severity) == (-20.0, None, "warn")


def test_pass_and_margin_messages():
    req = tp(-1.0, warn_margin_db=0.3)
    p = check_limits("p", "true peak", -3.0, req, where_s=[[1.0, 2.0]])
    # time ranges travel only with a warning or a failure (check_limits' docstring)
    assert p.message == "True peak is -3.0 dBTP (limit: at most -1.0 dBTP)." and p.where_s == []
    w = check_limits("p", "true peak", -1.1, req, where_s=[(1.0, 2.0)])
    assert w.where_s == [[1.0, 2.0]]
    assert w.message == "True peak is -1.1 dBTP: within the limit of -1.0 dBTP, but less than the 0.3 dB margin from it."
    assert w.miss is None
    lo = floor("lufs").model_validate({"min_lufs": -20.0, "warn_margin_lu": 0.5})
    w2 = check_limits("l", "level", -19.6, lo, where_s=[[3.0, 4.0]])
    assert w2.status == "warn" and w2.where_s == [[3.0, 4.0]]
    assert w2.message == "Level is -19.6 LUFS: within the limit of -20.0 LUFS, but less than the 0.5 LU margin from it."
    assert check_limits("l", "level", -19.5, lo).status == "pass"  # exactly 0.5 above: outside the margin


def test_a_zero_margin_never_warns():
    req = tp(-1.0, warn_margin_db=0.0)
    assert check_limits("p", "true peak", -1.0, req).status == "pass"


def test_ties_in_bounds_go_towards_the_nearer_limit():
    # bounds 10 .. 20: a tie above the middle (15) rounds up (towards 20), below it rounds down
    req = bounds("lu").model_validate({"min_lu": 10.0, "max_lu": 20.0})
    assert check_limits("b", "range", 20.05, req).measured == 20.1
    assert check_limits("b", "range", 15.05, req).measured == 15.1
    assert check_limits("b", "range", 14.95, req).measured == 14.9
    assert check_limits("b", "range", 9.95, req).measured == 9.9
    assert check_limits("b", "range", 9.95, req).status == "fail"
    f = check_limits("b", "range", 12.0, req)
    assert f.limit == "10.0 .. 20.0 LU" and (f.limit_low, f.limit_high) == (10.0, 20.0)


def test_limit_text_of_each_shape():
    assert limit_text(floor("lufs").model_validate({"min_lufs": -20.0})) == ">= -20.0 LUFS"
    assert limit_text(bounds("s").model_validate({"min_s": 10.0, "max_s": 60.0})) == "10.000 .. 60.000 s"
    assert limit_text(tp(-1.0), 2) == "<= -1.00 dBTP"
    # a target in a unit-less quantity has no unit word on either side
    assert limit_text(target("db").model_validate({"target_db": -3.0, "tolerance_db": 0.5})) == \
        "-3.0 dB \u00b1 0.5 dB"


def test_judging_decimals_follow_target_and_margin():
    # the target's own decimals count even when the limits need fewer (-23.5 .. -23.0)
    req = target("lufs").model_validate({"target_lufs": -23.25, "tolerance_lu": 0.25})
    assert req.limits() == (-23.5, -23.0)
    assert judging_decimals(req) == 2
    assert judging_decimals(tp(-1.0, warn_margin_db=0.25)) == 2
    assert judging_decimals(tp(-1.0)) == 1
    assert decimals_of(None) == 0 and decimals_of(1e-9) == 6  # at most MAX_DECIMALS


def test_skipped_carries_limit_unit_and_severity():
    req = tp(-1.0, severity="warn")
    f = check_limits("peaks.true_peak", "true peak", None, req)
    assert f.to_dict() == {
        "check": "peaks.true_peak", "status": "skipped", "severity": "warn", "measured": None,
        "measured_raw": None, "measured_text": None, "decimals": 1, "limit": "<= -1.0 dBTP",
        "limit_low": None, "limit_high": -1.0, "miss": None, "unit": "dBTP",
        "message": "True peak: not judged; the measurement does not exist for this file.", "where_s": [],
        "target": None, "miss_unit": "dB"}


def test_below_measurable_fails_a_floor_and_meets_a_ceiling():
    from masterqc.judge.core import check_below_measurable
    why = "the programme has no gated loudness"
    tgt = target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 1.0})
    f = check_below_measurable("loudness.integrated", "integrated loudness", tgt, why)
    assert f.to_dict() == {
        "check": "loudness.integrated", "status": "fail", "severity": "fail", "measured": None,
        "measured_raw": None, "measured_text": "below measurable range", "decimals": 1,
        "limit": "-23.0 LUFS \u00b1 1.0 LU", "limit_low": -24.0, "limit_high": -22.0, "miss": None,
        "unit": "LUFS",
        "message": "Integrated loudness: the programme has no gated loudness, so it is below the limit of -24.0 LUFS.",
        "where_s": [], "target": -23.0, "miss_unit": "LU"}
    w = check_below_measurable("l", "level", floor("lufs").model_validate({"min_lufs": -30.0, "severity": "warn"}),
                               why)
    assert w.status == "warn"
    assert w.message == ("Level: the programme has no gated loudness, so it is below the limit of -30.0 LUFS "
                         "(the spec counts this as a warning).")
    c = check_below_measurable("m", "maximum", ceiling("lufs").model_validate({"max_lufs": -10.0}), why)
    assert (c.status, c.miss, c.measured_text, c.limit_low, c.limit_high) == \
        ("pass", None, "below measurable range", None, -10.0)
    assert c.message == "Maximum: the programme has no gated loudness (limit: at most -10.0 LUFS)."
    assert (c.check, c.limit, c.unit, c.severity, c.decimals) == ("m", "<= -10.0 LUFS", "LUFS", "fail", 1)


def test_allowed_values_finding_fields_and_messages():
    req = allowed(int, "48000").model_validate([48000, 96000])
    show = lambda v: f"{v} Hz"  # noqa: E731
    p = check_allowed("format.sample_rate", "sample rate", 48000, req, show=show, unit="Hz")
    assert p.to_dict() == {
        "check": "format.sample_rate", "status": "pass", "severity": "fail", "measured": 48000,
        "measured_raw": 48000, "measured_text": "48000 Hz", "decimals": None,
        "limit": "48000 Hz or 96000 Hz", "limit_low": None, "limit_high": None, "miss": None,
        "unit": "Hz", "message": "Sample rate is 48000 Hz (allowed: 48000 Hz or 96000 Hz).", "where_s": [], "target": None, "miss_unit": None}
    f = check_allowed("format.sample_rate", "sample rate", 44100, req, show=show, unit="Hz")
    assert (f.status, f.measured, f.measured_raw, f.measured_text, f.unit, f.severity) == \
        ("fail", 44100, 44100, "44100 Hz", "Hz", "fail")
    assert f.message == "Sample rate is 44100 Hz, which the spec does not allow (allowed: 48000 Hz or 96000 Hz)."
    w = check_allowed("format.bit_depth", "bit depth", 16,
                      allowed(int).model_validate({"allowed": [24], "severity": "warn"}))
    assert w.message == "Bit depth is 16, which the spec does not allow (allowed: 24) (the spec counts this as a warning)."
    assert w.severity == "warn"
    s = check_allowed("format.sample_rate", "sample rate", None, req, show=show, unit="Hz")
    assert (s.status, s.limit, s.unit, s.severity) == ("skipped", "48000 Hz or 96000 Hz", "Hz", "fail")
    assert s.message == "Sample rate: not judged; the value is unknown for this file."
    s2 = check_allowed("c", "layout", None, req, missing_reason="no channel mask")
    assert s2.message == "Layout: not judged; no channel mask."


def test_error_finding():
    from masterqc.judge.core import error
    e = error("report", "the PDF could not be written")
    assert (e.check, e.status, e.message, e.severity, e.limit) == \
        ("report", "error", "The PDF could not be written.", None, None)
    assert verdict([e.to_dict(), Finding(check="c", status="fail", message="m")]) == "error"


@pytest.mark.parametrize("value, decimals, up, down", [
    (-0.95, 1, -0.9, -1.0), (0.95, 1, 1.0, 0.9), (0.05, 1, 0.1, 0.0), (-0.05, 1, 0.0, -0.1),
    (0.0, 1, 0.0, 0.0), (1.04, 1, 1.0, 1.0), (1.06, 1, 1.1, 1.1), (-1.06, 1, -1.1, -1.1),
    (2.5, 0, 3.0, 2.0), (-2.5, 0, -2.0, -3.0), (0.125, 2, 0.13, 0.12), (123.4565, 3, 123.457, 123.456),
    (48000.0, 0, 48000.0, 48000.0), (-23.45, 1, -23.4, -23.5)])
def test_quantize_table(value, decimals, up, down):
    # a tie (exactly half a step in the shortest decimal spelling) goes up or down as asked;
    # anything else goes to the nearest step either way
    assert quantize(value, decimals, "up") == up
    assert quantize(value, decimals, "down") == down


def test_quantize_refuses_an_unknown_tie_rule():
    with pytest.raises(ValueError, match="ties must be 'up' or 'down', not 'even'"):
        quantize(1.0, 1, "even")


def test_fmt_shows_fixed_decimals_and_no_negative_zero():
    from masterqc.judge.core import fmt
    assert fmt(None, 1) == "n/a"
    assert fmt(-1.0, 1) == "-1.0" and fmt(1.0, 0) == "1" and fmt(-0.95, 2) == "-0.95"
    assert fmt(-0.0, 1) == "0.0" and fmt(-0.04, 1) == "0.0" and fmt(-0.06, 1) == "-0.1"


def test_limit_text_of_unitless_quantities():
    # counts and correlations have no unit word: no trailing space, no unit after the tolerance
    assert limit_text(ceiling("count").model_validate({"max_count": 0})) == "<= 0"
    assert limit_text(floor("corr").model_validate({"min_corr": -0.3})) == ">= -0.30"
    assert limit_text(target("corr").model_validate({"target_corr": 0.5, "tolerance_corr": 0.1})) == "0.50 \u00b1 0.10"
    f = check_limits("c", "clipped runs", 2, ceiling("count").model_validate({"max_count": 0}))
    assert f.message == "2 clipped runs where the spec allows none." and f.measured_text == "2" and f.unit == ""


def test_a_tie_at_the_middle_of_bounds_goes_up():
    # bounds 10.0 .. 20.1 (middle 15.05) judged at 0.1: a value exactly in the middle is equally near
    # both limits; the rule sends it towards the upper one (house choice, judge/core.py)
    req = bounds("lu").model_validate({"min_lu": 10.0, "max_lu": 20.1})
    assert check_limits("b", "range", 15.05, req).measured == 15.1
    assert check_limits("b", "range", 15.049, req).measured == 15.0


def test_below_measurable_of_a_unitless_floor_has_no_trailing_space():
    from masterqc.judge.core import check_below_measurable
    f = check_below_measurable("c", "count", floor("count").model_validate({"min_count": 1}), "nothing to count")
    assert f.message == "Count: nothing to count, so it is below the limit of 1."
    assert (f.measured, f.measured_raw, f.miss) == (None, None, None)


# ------------------------------------------------------------------ wording helpers (house choice)

def test_counts_in_words_print_whole_numbers_plainly():
    from masterqc.judge.core import count_words
    assert count_words(2.0, "clipped runs") == "2 clipped runs"  # a float count drops its ".0"
    assert count_words(2.5, "s") == "2.5 s"
    assert count_words(1234567, "samples") == "1234567 samples"  # an int is never put in exponent form


def test_three_allowed_values_read_as_a_list_with_or():
    req = allowed(str, "wav").model_validate(["wav", "aiff", "flac"])
    f = check_allowed("format.container", "container", "mp3", req)
    assert f.limit == "wav, aiff or flac"
    assert f.message == "Container is mp3, which the spec does not allow (allowed: wav, aiff or flac)."


def test_a_dotted_field_outside_the_result_parts_is_a_measurement_key():
    from masterqc.judge.core import measured_field
    result = {"format": {"duration_s": 12.5}, "measurements": {"band.level_db": -3.0, "x": None}}
    assert measured_field(result, "format.duration_s") == (True, 12.5)
    assert measured_field(result, "band.level_db") == (True, -3.0)  # "band" is not a result part
    assert measured_field(result, "x") == (True, None)
    assert measured_field(result, "format.rate") == (False, None)
    assert measured_field({}, "metadata.bext") == (False, None)


def test_a_layout_measured_as_a_tuple_is_compared_as_a_list():
    from masterqc.judge.core import judge_checks
    from masterqc.spec.sections import format as fmt_section
    from masterqc.spec import build_spec
    sec = build_spec({"spec_version": 1, "name": "invented", "format": {"channel_layouts": [["L", "R"]]}}).format
    ok, = judge_checks(sec, {"format": {"channel_layout": ("L", "R"), "channel_layout_source": "mask"}},
                       fmt_section.CHECKS)
    assert (ok.check, ok.status, ok.measured) == ("format.channel_layout", "pass", ["L", "R"])
    bad, = judge_checks(sec, {"format": {"channel_layout": ("R", "L"), "channel_layout_source": "mask"}},
                        fmt_section.CHECKS)
    assert (bad.status, bad.message) == (
        "fail", "Channel layout is [R, L], which the spec does not allow (allowed: [L, R]).")


def test_a_yes_no_value_without_sentences_is_shown_as_yes_or_no():
    req = allowed(bool, "false").model_validate([False])
    f = check_allowed("integrity.dual_mono", "dual mono", True, req)
    assert (f.status, f.measured, f.measured_text, f.limit) == ("fail", True, "yes", "no")
    assert f.message == "Dual mono is yes, which the spec does not allow (allowed: no)."
    p = check_allowed("integrity.dual_mono", "dual mono", False, req)
    assert (p.status, p.measured_text, p.message) == ("pass", "no", "Dual mono is no (allowed: no).")
    # a value that is not yes/no is shown as it is, even against a yes/no requirement
    n = check_allowed("integrity.dual_mono", "dual mono", 0, req)
    assert n.measured_text == "0"
    # with sentences, a value that is not yes/no still reads "is ..."
    s = check_allowed("x", "flag", "maybe", req, says=("It is set", "It is not set"))
    assert s.message == "Flag is maybe, which the spec does not allow (allowed: no)."


def test_a_judged_finding_carries_the_target():
    req = target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 1.0})
    f = check_limits("loudness.integrated", "integrated loudness", -23.4, req)
    assert (f.status, f.target, f.limit_low, f.limit_high) == ("pass", -23.0, -24.0, -22.0)
    assert check_limits("loudness.integrated", "integrated loudness", -21.0, req).target == -23.0


def test_counts_are_shown_whole_or_at_the_decimals_the_spec_writes():
    # house choice: a count of a plural noun reads "N clipped runs"; a whole count is never in exponent form
    f = check_limits("integrity.clipping", "clipped runs", 1234567, ceiling("count").model_validate({"max_count": 0}))
    assert f.status == "fail" and f.message.startswith("1234567 clipped runs")
    # a limit written with one decimal judges and shows the count at 0.1 (the rule's display step)
    f = check_limits("integrity.clipping", "clipped runs", 2.7,
                     ceiling("count").model_validate({"max_count": 2.5}))
    assert f.status == "fail" and f.message.startswith("2.7 clipped runs")


def _check(spec_key, check, measurement, unit, **kw):
    from masterqc.contract import Check
    return Check(spec_key, check, measurement, unit, spec_key.replace("_", " "), "no value", **kw)


def test_judge_checks_leaves_section_checks_and_goes_on_after_a_missing_field():
    from masterqc.judge.core import judge_checks
    from masterqc.spec import build_spec
    sp = build_spec({"spec_version": 1, "name": "invented", "peaks": {"true_peak": {"max_dbtp": -1.0},
                                                                      "sample_peak": {"max_dbfs": -0.5}}})
    checks = [_check("true_peak", "peaks.true_peak", "true_peak_dbtp", "dbtp", kind="section"),
              _check("true_peak", "peaks.true_peak", "true_peak_dbtp", "dbtp"),
              _check("sample_peak", "peaks.sample_peak", "sample_peak_dbfs", "dbfs")]
    got = judge_checks(sp.peaks, {"measurements": {"sample_peak_dbfs": -0.2}}, checks)
    assert [(f.check, f.status) for f in got] == [("peaks.true_peak", "skipped"), ("peaks.sample_peak", "fail")]
    assert got[0].message == "True peak: not judged; the measurement true_peak_dbtp is missing from the result."
    with pytest.raises(ValueError, match="check peaks.true_peak: requirement unit 'dbtp' is not the measurement's 'db'"):
        judge_checks(sp.peaks, {"measurements": {}}, [_check("true_peak", "peaks.true_peak", "x", "db")])


def test_a_null_loudness_of_a_programme_one_gating_block_long_is_below_the_gate():
    # ITU-R BS.1770-4, section 2.1 (gating blocks of 400 ms): a programme of at least one block whose
    # integrated loudness is null lies below the gate; a shorter one has no block and is not judged
    from masterqc.judge.core import judge_checks
    from masterqc.spec import build_spec
    from masterqc.spec.sections import loudness
    sp = build_spec({"spec_version": 1, "name": "invented",
                     "loudness": {"integrated": {"target_lufs": -23.0, "tolerance_lu": 1.0}}})
    def status(duration_s):
        got = judge_checks(sp.loudness, {"format": {"duration_s": duration_s},
                                         "measurements": {"integrated_lufs": None}}, loudness.CHECKS)
        return [(f.check, f.status, f.measured_text) for f in got]
    assert status(0.4) == [("loudness.integrated", "fail", "below measurable range")]
    assert status(0.39) == [("loudness.integrated", "skipped", None)]


def test_count_and_zero_ceiling_messages():
    # the miss is the shown value minus the limit: 5 - 2 = 3 runs over, 3 - 1 = 2 runs short (house wording)
    f = check_limits("c", "clipped runs", 5, ceiling("count").model_validate({"max_count": 2}))
    assert (f.status, f.miss, f.message) == ("fail", 3.0, "5 clipped runs, 3 more than the limit of 2.")
    f = check_limits("c", "clipped runs", 1, floor("count").model_validate({"min_count": 3}))
    assert (f.status, f.miss, f.message) == ("fail", 2.0, "1 clipped run, 2 fewer than the limit of 3.")
    # "where the spec allows none" is for counts only: a level ceiling of 0 reads as a level
    f = check_limits("c", "level", 0.3, ceiling("dbfs").model_validate({"max_dbfs": 0}))
    assert f.message == "Level is 0.3 dBFS, 0.3 dB above the limit of 0.0 dBFS."


def test_limits_in_words():
    # house wording; the decimals are the rule's display step unless given
    from masterqc.judge.core import limit_words
    assert limit_words(ceiling("count").model_validate({"max_count": 0})) == "none"
    assert limit_words(ceiling("count").model_validate({"max_count": 2})) == "at most 2"
    assert limit_words(ceiling("dbfs").model_validate({"max_dbfs": 0})) == "at most 0.0 dBFS"
    assert limit_words(bounds("s").model_validate({"min_s": 10.0, "max_s": 60.0})) == "10.000 to 60.000 s"
    assert limit_words(floor("bits").model_validate({"min_bits": 24})) == "at least 24 bits"
    assert limit_words(tp(-1.0), 3) == "at most -1.000 dBTP"
    tgt = target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 1.0})
    assert limit_words(tgt) == "-23.0 LUFS \u00b1 1.0 LU"
    assert limit_words(tgt, 2) == "-23.00 LUFS \u00b1 1.00 LU"


def test_a_sentence_keeps_its_own_end_mark():
    from masterqc.judge.core import sentence
    assert sentence("level is loud!") == "Level is loud!"
    assert sentence("is it?") == "Is it?"
    assert sentence("  bext description is empty ") == "bext description is empty."
