"""The metadata spec section and its judge, on byte-built files measured end to end.

Truth for the bext loudness comparison: EBU Tech 3341 (2023) Table 1 case 1 --
a stereo 1 kHz sine at -23 dBFS per channel reads -23.0 +-0.1 LUFS (momentary,
short-term and integrated).  Its sample peak is exactly -23 dBFS (a 1 kHz sine
at 48 kHz starting at phase 0 hits its crest on sample 12, analytic) and its
true peak lies within the same 0.1 dB.  A steady tone has a loudness range of
0 LU (EBU Tech 3342: every short-term value is the same).
"""

from __future__ import annotations

import numpy as np
import pytest
from pydantic import ValidationError

import containerbytes as cb
from masterqc.judge import judge
from masterqc.measure import MeasureOptions, measure_file
from masterqc.spec.model import build_spec, measure_options_for

RATE = 48000


def _tone(seconds=4.0, dbfs=-23.0):
    t = np.arange(int(seconds * RATE))
    x = 10 ** (dbfs / 20) * np.sin(2 * np.pi * 1000 * t / RATE)
    codes = np.round(x * 2**23).astype(np.int64)
    return np.c_[codes, codes]


TONE = cb.chunk(b"data", cb.pcm24(_tone()))
FMT = cb.fmt_pcm(2, RATE, 24)


def _spec(metadata: dict):
    return build_spec({"spec_version": 1, "name": "fictional delivery", "metadata": metadata})


def _run(tmp_path, chunks, metadata, name="m.wav"):
    p = tmp_path / name
    p.write_bytes(cb.riff(chunks))
    spec = _spec(metadata)
    result = measure_file(p, measure_options_for(spec))
    findings, verdict = judge(spec, result)
    return {f.check: f for f in findings}, [f for f in findings], verdict, result


def _bext(loudness, **kw):
    return cb.chunk(b"bext", cb.bext_body(version=2, loudness=loudness, **kw))


@pytest.fixture(scope="module")
def measured_tone(tmp_path_factory):
    p = tmp_path_factory.mktemp("tone") / "tone.wav"
    p.write_bytes(cb.riff([FMT, TONE]))
    return measure_file(p)["measurements"]


def test_tone_measures_as_tech_3341_case_1(measured_tone):
    m = measured_tone
    # EBU Tech 3341 (2023) Table 1 case 1: -23.0 +-0.1 LUFS; true peak and LRA as in the module docstring
    assert m["integrated_lufs"] == pytest.approx(-23.0, abs=0.1)
    assert m["max_momentary_lufs"] == pytest.approx(-23.0, abs=0.1)
    assert m["max_short_term_lufs"] == pytest.approx(-23.0, abs=0.1)
    assert m["true_peak_dbtp"] == pytest.approx(-23.0, abs=0.1)
    assert m["loudness_range_lu"] == pytest.approx(0.0, abs=0.1)


def test_bext_loudness_agreeing_passes(tmp_path):
    stored = (-2300, 0, -2300, -2300, -2300)
    by, _all, verdict, _r = _run(tmp_path, [FMT, _bext(stored), TONE], {"bext_loudness": {"tolerance_lu": 0.5}})
    for suffix in ("loudness_value", "loudness_range", "max_true_peak_level", "max_momentary_loudness",
                   "max_short_term_loudness"):
        f = by[f"metadata.bext_loudness.{suffix}"]
        assert f.status == "pass", f.message
    assert verdict == "pass"
    assert "bext LoudnessValue -23.00 LUFS agrees with the measured integrated loudness" in \
        by["metadata.bext_loudness.loudness_value"].message


def test_bext_loudness_mismatch_fails_with_the_miss(tmp_path, measured_tone):
    # analytic from EBU Tech 3341 case 1: stored -21.00 LUFS, tolerance 0.5 LU: the file measures
    # -23.0 (+-0.1), so it misses the band -21.5 .. -20.5 by 1.5 (+-0.1) LU.  Stored true peak -1.50 dBTP
    # against a measured -23.0: 21.5 dB apart, 21.2 beyond the 0.3 dB tolerance
    stored = (-2100, 0x7FFF, -150, 0x7FFF, 0x7FFF)
    by, _all, verdict, _r = _run(tmp_path, [FMT, _bext(stored), TONE],
                                 {"bext_loudness": {"tolerance_lu": 0.5, "true_peak_tolerance_db": 0.3}})
    f = by["metadata.bext_loudness.loudness_value"]
    assert f.status == "fail"
    assert f.miss == pytest.approx(1.5, abs=0.1)
    assert f.miss == pytest.approx(-21.5 - measured_tone["integrated_lufs"], abs=0.051)  # judged at 0.1 LU
    assert "does not match" in f.message
    tp = by["metadata.bext_loudness.max_true_peak_level"]
    assert tp.status == "fail" and tp.miss == pytest.approx(21.5 - 0.3, abs=0.1)
    # unused fields (0x7FFF) are skipped when the spec does not require them
    assert by["metadata.bext_loudness.loudness_range"].status == "skipped"
    assert verdict == "fail"


def test_bext_loudness_required_but_missing(tmp_path):
    stored = (-2300, 0x7FFF, -2300, -2300, -2300)
    by, _all, _v, _r = _run(tmp_path, [FMT, _bext(stored), TONE],
                            {"bext_loudness": {"required": True, "severity": "warn"}})
    f = by["metadata.bext_loudness.loudness_range"]
    assert f.status == "warn" and "0x7FFF" in f.message
    v1 = cb.chunk(b"bext", cb.bext_body(version=1))
    by, _all, _v, _r = _run(tmp_path, [FMT, v1, TONE], {"bext_loudness": {"required": True}}, name="v1.wav")
    assert by["metadata.bext_loudness.loudness_value"].status == "fail"
    assert "version 1 has no loudness fields" in by["metadata.bext_loudness.loudness_value"].message


def test_isrc_agreement_and_syntax(tmp_path):
    same = [FMT, TONE, cb.list_info([(b"ISRC", "XXQ7Z2600042")]),
            cb.chunk(b"id3 ", cb.id3v2([(b"TSRC", "XX-Q7Z-26-00042")]))]
    by, _all, verdict, _r = _run(tmp_path, same, {"isrc": {"required": True}})
    assert by["metadata.isrc.present"].status == "pass"
    assert by["metadata.isrc.syntax"].status == "pass"
    assert by["metadata.isrc.consistent"].status == "pass"
    assert verdict == "pass"

    differ = [FMT, TONE, cb.list_info([(b"ISRC", "XXQ7Z2600042")]),
              cb.chunk(b"id3 ", cb.id3v2([(b"TSRC", "XXQ7Z2600043")]))]
    by, _all, verdict, _r = _run(tmp_path, differ, {"isrc": {}}, name="d.wav")
    f = by["metadata.isrc.consistent"]
    assert f.status == "fail" and f.measured == 2
    assert "XX-Q7Z-26-00042 in info.ISRC" in f.message and "XX-Q7Z-26-00043 in id3.TSRC" in f.message

    bad = [FMT, TONE, cb.list_info([(b"ISRC", "XXQ7Z26000")])]
    by, _all, verdict, _r = _run(tmp_path, bad, {"isrc": {"severity": "warn"}}, name="b.wav")
    assert by["metadata.isrc.syntax"].status == "warn"
    assert "10 characters" in by["metadata.isrc.syntax"].message
    assert verdict == "warn"

    by, _all, verdict, _r = _run(tmp_path, [FMT, TONE], {"isrc": {"required": True}}, name="none.wav")
    assert by["metadata.isrc.present"].status == "fail" and verdict == "fail"


def test_chunk_problems_are_findings_with_offsets(tmp_path):
    short_bext = cb.chunk(b"bext", cb.bext_body(version=2)[:400])
    chunks = [FMT, short_bext, TONE]
    _by, found, verdict, result = _run(tmp_path, chunks, {"chunk_problems": {"severity": "fail"}})
    probs = [f for f in found if f.check == "metadata.chunk_problems"]
    assert len(probs) == 1 and probs[0].status == "fail"
    assert probs[0].message.startswith("At byte 36: bext chunk is 400 bytes")
    assert verdict == "fail"
    # the audio was still measured (EBU Tech 3341 case 1 level, module docstring)
    assert result["measurements"]["integrated_lufs"] == pytest.approx(-23.0, abs=0.1)


def test_chunk_problems_default_to_warnings_without_a_metadata_section(tmp_path):
    p = tmp_path / "s.wav"
    p.write_bytes(cb.riff([FMT, cb.chunk(b"bext", b"short"), TONE]))
    spec = build_spec({"spec_version": 1, "name": "no metadata section"})
    findings, verdict = judge(spec, measure_file(p))
    assert [(f.check, f.status) for f in findings] == [("metadata.chunk_problems", "warn")]
    assert verdict == "warn"
    # a clean file adds no finding at all unless the spec asks for the check
    p.write_bytes(cb.riff([FMT, TONE]))
    assert judge(spec, measure_file(p))[0] == []


def test_time_reference_and_rate(tmp_path):
    bext = cb.chunk(b"bext", cb.bext_body(version=1, time_reference=10 * 3600 * RATE))
    by, _all, verdict, result = _run(tmp_path, [FMT, bext, TONE],
                                     {"timecode_fps": 24, "time_reference": {"start_timecode": "10:00:00:00"}})
    assert result["metadata"]["timecode_fps"] == "24"
    assert result["metadata"]["start_timecode"] == "10:00:00:00"
    assert by["metadata.time_reference"].status == "pass"
    by, _all, verdict, _r = _run(tmp_path, [FMT, bext, TONE],
                                 {"time_reference": {"start_timecode": "01:00:00:00"}}, name="b.wav")
    f = by["metadata.time_reference"]
    assert f.status == "fail" and f.measured == "10:00:00:00" and "requires 01:00:00:00" in f.message
    by, _all, verdict, _r = _run(tmp_path, [FMT, TONE], {"time_reference": {}}, name="c.wav")
    assert by["metadata.time_reference"].status == "fail"


def test_ixml_rate_against_spec_rate(tmp_path):
    ixml = cb.chunk(b"iXML", b"<BWFXML><SPEED><TIMECODE_RATE>30000/1001</TIMECODE_RATE>"
                             b"<TIMECODE_FLAG>DF</TIMECODE_FLAG></SPEED></BWFXML>")
    by, _all, verdict, _r = _run(tmp_path, [FMT, ixml, TONE],
                                 {"timecode_fps": "25", "timecode_fps_matches_file": True})
    f = by["metadata.timecode_fps"]
    assert f.status == "warn" and "29.97df" in f.message
    by, _all, verdict, _r = _run(tmp_path, [FMT, ixml, TONE],
                                 {"timecode_fps": "29.97df", "timecode_fps_matches_file": True}, name="b.wav")
    assert by["metadata.timecode_fps"].status == "pass"


def test_bext_presence_and_fields(tmp_path):
    bext = cb.chunk(b"bext", cb.bext_body(version=1, originator="Tamberlo Lane Post", date="2026-11-30"))
    by, _all, verdict, _r = _run(tmp_path, [FMT, bext, TONE],
                                 {"bext": {"fields_required": ["originator", "origination_date",
                                                               "origination_time"], "min_version": 2}})
    assert by["metadata.bext"].status == "pass"
    assert by["metadata.bext.originator"].status == "pass"
    assert by["metadata.bext.origination_time"].status == "fail"
    assert by["metadata.bext.version"].status == "fail"


@pytest.mark.parametrize("bad,words", [
    ({"timecode_fps": 29.97}, "ambiguous"),
    ({"timecode_fps": "50"}, "timecode_fps"),
    ({"time_reference": {"start_timecode": "10:00:00:29"}}, "out of range"),
    ({"bext_loudness": {"tolerance_lu": -1}}, "greater than or equal"),
    ({"isrc": {"needed": True}}, "needed"),
])
def test_spec_errors(bad, words):
    with pytest.raises(ValidationError) as err:
        _spec(bad)
    assert words in str(err.value)


def test_spec_rate_sets_measure_option():
    assert measure_options_for(_spec({"timecode_fps": "29.97ndf"})).timecode_fps == "29.97ndf"
    assert measure_options_for(_spec({"timecode_fps": 23.976})).timecode_fps == "23.976"
    assert measure_options_for(_spec({})).timecode_fps == MeasureOptions().timecode_fps == "25"


def test_demo_archive_spec_on_a_good_and_a_bad_bwf(tmp_path):
    from pathlib import Path

    from masterqc.pipeline import judge_result
    from masterqc.spec.loader import load_spec

    spec_path = Path(__file__).resolve().parent.parent / "specs_demo" / "ostravel-bwf-archive.yaml"
    loaded = load_spec(spec_path)
    good = cb.chunk(b"bext", cb.bext_body(version=2, originator="Ostravel Post", date="2026-11-30",
                                          time="09:58:00", time_reference=10 * 3600 * RATE,
                                          loudness=(-2300, 0, -2300, -2300, -2300)))
    p = tmp_path / "good.wav"
    p.write_bytes(cb.riff([FMT, good, TONE]))
    result = judge_result(measure_file(p, measure_options_for(loaded.spec)), loaded)
    meta = [f for f in result["findings"] if f["check"].startswith("metadata.")]
    assert meta and all(f["status"] in ("pass", "skipped") for f in meta), meta
    assert result["metadata"]["start_timecode"] == "10:00:00:00"

    bad = cb.chunk(b"bext", cb.bext_body(version=1, originator="Ostravel Post",
                                         time_reference=9 * 3600 * RATE)[:500])
    p = tmp_path / "bad.wav"
    p.write_bytes(cb.riff([FMT, bad, TONE]))
    result = judge_result(measure_file(p, measure_options_for(loaded.spec)), loaded)
    failed = {f["check"] for f in result["findings"] if f["status"] == "fail"}
    assert {"metadata.chunk_problems", "metadata.bext.version", "metadata.bext.origination_date",
            "metadata.bext_loudness.loudness_value", "metadata.time_reference"} <= failed
    assert result["verdict"] == "fail"
