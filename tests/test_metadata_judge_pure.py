"""The metadata judge on synthetic results (pure: no files, fast enough for mutation runs).

Values: bext loudness fields as EBU Tech 3285 v2 names them (LoudnessValue, LoudnessRange,
MaxTruePeakLevel, MaxMomentaryLoudness, MaxShortTermLoudness; from memory), ISRC syntax per
ISO 3901, timecode arithmetic at 48 kHz and 25 fps (1920 samples a frame; 10 h =
1 728 000 000 samples since midnight).  The rules and wording are the judge's own (house
choice); the end-to-end tests on byte-built files are in tests/test_container_judge.py.
"""

from __future__ import annotations

from masterqc.judge.metadata import judge
from masterqc.spec.loader import load_spec_text

TEN_HOURS = 10 * 3600 * 48000


def section(body: str):
    return load_spec_text("spec_version: 1\nname: m\nmetadata:\n" + body).spec.metadata


def result(meta=None, measurements=None, rate=48000):
    m = {"integrated_lufs": -23.0, "loudness_range_lu": 5.0, "true_peak_dbtp": -2.0, "max_momentary_lufs": -15.0,
         "max_short_term_lufs": -18.0}
    m.update(measurements or {})
    return {"format": {"sample_rate_hz": rate}, "metadata": meta or {}, "measurements": m}


def by(findings):
    out = {}
    for f in findings:
        out.setdefault(f.check, []).append(f)
    return {k: v[0] if len(v) == 1 else v for k, v in out.items()}


def test_chunk_problems_default_warn_and_explicit():
    meta = {"problems": [{"offset": 36, "message": "chunk 'LIST' runs past the end"},
                         {"offset": 120, "message": "odd"}]}
    f = by(judge(section("  timecode_fps: '25'\n"), result(meta)))["metadata.chunk_problems"]
    assert [(x.status, x.severity, x.measured, x.measured_text, x.unit, x.limit) for x in f] == [
        ("warn", "warn", 36, "byte 36", "byte offset", "no malformed chunks"),
        ("warn", "warn", 120, "byte 120", "byte offset", "no malformed chunks")]
    assert f[0].message == "At byte 36: chunk 'LIST' runs past the end."
    s = section("  chunk_problems: {severity: fail}\n")
    assert by(judge(s, result(meta)))["metadata.chunk_problems"][0].status == "fail"
    ok = by(judge(s, result({})))["metadata.chunk_problems"]
    assert (ok.status, ok.measured, ok.measured_text, ok.message) == \
        ("pass", 0, "0", 'Container structure: no malformed chunks.')
    assert judge(section("  timecode_fps: '25'\n"), result({})) == []  # default: no finding when clean


def test_bext_present_version_and_fields():
    s = section("  bext: {required: true, min_version: 2, fields_required: [originator, time_reference_samples, "
                "description]}\n")
    bx = {"version": 1, "originator": "Harbour Desk", "time_reference_samples": 0, "description": ""}
    f = by(judge(s, result({"bext": bx})))
    assert (f["metadata.bext"].status, f["metadata.bext"].message, f["metadata.bext"].measured_text) == \
        ("pass", 'bext chunk version 1 present.', "version 1")
    v = f["metadata.bext.version"]
    assert (v.status, v.limit, v.message) == ("fail", 'version 2 or later', 'bext version 1 is older than the required version 2.')
    assert f["metadata.bext.originator"].message == "bext originator is 'Harbour Desk'."
    assert f["metadata.bext.originator"].status == "pass"
    # time reference 0 (midnight) is a value; an empty description is not
    assert (f["metadata.bext.time_reference_samples"].status, f["metadata.bext.time_reference_samples"].message) == \
        ("pass", 'bext time_reference_samples is 0.')
    assert (f["metadata.bext.description"].status, f["metadata.bext.description"].message) == \
        ("fail", 'bext description is empty, which the spec does not allow.')
    bx2 = dict(bx, version=2)
    assert by(judge(s, result({"bext": bx2})))["metadata.bext.version"].message == \
        'bext version 2 (required: version 2).'


def test_bext_missing():
    req = section("  bext: {required: true}\n")
    f = by(judge(req, result({"container_kind": "aiff"})))["metadata.bext"]
    assert (f.status, f.limit, f.message) == ("fail", "bext chunk present", 'No bext chunk (aiff files cannot carry one).')
    f = by(judge(req, result({"container_kind": "riff"})))["metadata.bext"]
    assert f.message == 'No bext chunk.'
    f = by(judge(req, result({})))["metadata.bext"]
    assert f.message == 'No bext chunk (this files cannot carry one).'
    opt = section("  bext: {required: false, severity: warn}\n")
    f = by(judge(opt, result({"container_kind": "rf64"})))["metadata.bext"]
    assert (f.status, f.severity, f.message) == ("skipped", "warn", 'No bext chunk; not required.')


BX2 = {"version": 2, "loudness_value_lufs": -23.1, "loudness_range_lu": 5.0, "max_true_peak_level_dbtp": -2.5,
       "max_momentary_loudness_lufs": -15.0, "max_short_term_lufs": None, "max_short_term_loudness_lufs": None}


def test_bext_loudness_against_the_measurement():
    s = section("  bext_loudness: {tolerance_lu: 0.5, true_peak_tolerance_db: 0.3, required: true}\n")
    f = by(judge(s, result({"bext": BX2})))
    lv = f["metadata.bext_loudness.loudness_value"]
    assert lv.status == "pass"
    assert lv.message == ('bext LoudnessValue -23.10 LUFS agrees with the measured integrated loudness -23.0 LUFS (difference 0.1 LU, tolerance 0.5 LU).')
    tp = f["metadata.bext_loudness.max_true_peak_level"]
    assert tp.status == "fail"
    assert tp.message == ('bext MaxTruePeakLevel -2.50 dBTP does not match the measured true peak -2.0 dBTP (difference 0.5 dB, tolerance 0.3 dB).')
    st = f["metadata.bext_loudness.max_short_term_loudness"]
    assert (st.status, st.limit, st.message) == (
        "fail", "MaxShortTermLoudness present",
        'Max short-term loudness: bext MaxShortTermLoudness is not filled in (0x7FFF or cut short).')
    assert f["metadata.bext_loudness.loudness_range"].status == "pass"
    assert f["metadata.bext_loudness.max_momentary_loudness"].status == "pass"


def test_bext_loudness_not_required_and_old_versions():
    s = section("  bext_loudness: {required: false}\n")
    f = by(judge(s, result({"bext": {"version": 1}})))
    x = f["metadata.bext_loudness.loudness_value"]
    assert (x.status, x.message) == ("skipped", 'Integrated loudness: not compared, bext version 1 has no loudness fields (they arrived in version 2).')
    f = by(judge(s, result({})))
    assert f["metadata.bext_loudness.loudness_range"].message == \
        'Loudness range: not compared, the file has no bext chunk.'
    assert len(f) == 5


def test_bext_loudness_missing_measurement_and_margin():
    s = section("  bext_loudness: {tolerance_lu: 1.0}\n")
    r = result({"bext": BX2}, {"integrated_lufs": None})
    del r["measurements"]["loudness_range_lu"]
    f = by(judge(s, r))
    assert f["metadata.bext_loudness.loudness_value"].message == (
        'bext LoudnessValue against the measured integrated loudness: not judged; the measurement does not exist for this file (e.g. digital silence).')
    assert f["metadata.bext_loudness.loudness_range"].message == (
        'bext LoudnessRange against the measured loudness range: not judged; the measurement loudness_range_lu is missing from the result.')
    w = section("  bext_loudness: {tolerance_lu: 1.0, severity: warn}\n")
    g = by(judge(w, result({"bext": BX2}, {"integrated_lufs": -21.0})))["metadata.bext_loudness.loudness_value"]
    assert g.status == "warn" and g.severity == "warn"
    assert g.message == ('bext LoudnessValue -23.10 LUFS does not match the measured integrated loudness -21.0 LUFS (difference 2.1 LU, tolerance 1.0 LU).')


def test_isrc_found_agreeing_and_notes():
    s = section("  isrc: {required: true}\n")
    e1 = {"source": "bext description", "raw": "XX-Q7Z-26-00042", "code": "XXQ7Z2600042",
          "display": "XX-Q7Z-26-00042", "valid": True, "note": None}
    e2 = dict(e1, source="LIST/INFO ISRC", raw="xxq7z2600042", note="written in lower case")
    f = by(judge(s, result({"isrc": [e1, e2]})))
    p = f["metadata.isrc.present"]
    assert (p.status, p.measured, p.message) == ("pass", 2, 'ISRC found in bext description, LIST/INFO ISRC.')
    assert (p.limit, p.severity) == ("ISRC present", "fail")
    nameless = {k: v for k, v in e1.items() if k != "source"}
    assert by(judge(s, result({"isrc": [nameless]})))["metadata.isrc.present"].message == "ISRC found in ?"
    y = f["metadata.isrc.syntax"]
    assert (y.status, y.measured, y.measured_text) == ("pass", "XX-Q7Z-26-00042", "XX-Q7Z-26-00042")
    assert y.message == ('ISRC XX-Q7Z-26-00042 is well-formed (ISO 3901); LIST/INFO ISRC: written in lower case.')
    c = f["metadata.isrc.consistent"]
    assert (c.status, c.measured, c.message) == ("pass", 1, 'Every place carries the same ISRC XX-Q7Z-26-00042.')
    e3 = dict(e1, source="id3 TSRC", code="XXQ7Z2600043", display="XX-Q7Z-26-00043")
    f = by(judge(s, result({"isrc": [e1, e3]})))
    c = f["metadata.isrc.consistent"]
    assert (c.status, c.measured) == ("fail", 2)
    assert c.message == ('The file carries 2 different ISRCs: XX-Q7Z-26-00042 in bext description; XX-Q7Z-26-00043 in id3 TSRC.')
    assert f["metadata.isrc.syntax"].message == 'ISRC XX-Q7Z-26-00042, XX-Q7Z-26-00043 is well-formed (ISO 3901).'
    # one place only: no consistency finding
    assert "metadata.isrc.consistent" not in by(judge(s, result({"isrc": [e1]})))
    loose = section("  isrc: {required: true, consistent: false}\n")
    assert "metadata.isrc.consistent" not in by(judge(loose, result({"isrc": [e1, e3]})))


def test_isrc_malformed_and_missing():
    s = section("  isrc: {required: true, severity: warn}\n")
    bad = {"source": "bext description", "raw": "XX-Q7Z-26", "valid": False, "problem": "too short", "offset": 602}
    f = by(judge(s, result({"isrc": [bad]})))
    y = f["metadata.isrc.syntax"]
    assert (y.status, y.measured, y.limit) == ("warn", "XX-Q7Z-26", "ISO 3901: CC-XXX-YY-NNNNN")
    assert y.message == "ISRC 'XX-Q7Z-26' in bext description at byte 602 is malformed: too short."
    no_offset = dict(bad, offset=None)
    assert by(judge(s, result({"isrc": [no_offset]})))["metadata.isrc.syntax"].message == \
        "ISRC 'XX-Q7Z-26' in bext description is malformed: too short."
    m = by(judge(s, result({})))["metadata.isrc.present"]
    assert (m.status, m.limit, m.severity) == ("warn", "ISRC present", "warn")
    assert m.message == ('No ISRC found (bext text, LIST/INFO ISRC, id3 TSRC, Vorbis ISRC, FLAC cue sheet, iXML).')
    opt = section("  isrc: {required: false}\n")
    m = by(judge(opt, result({})))["metadata.isrc.present"]
    assert m.status == "skipped" and m.message.endswith("iXML); not required.")


def test_time_reference():
    s = section("  timecode_fps: '25'\n  time_reference: {required: true, start_timecode: '10:00:00:00'}\n")
    f = by(judge(s, result({"time_reference_samples": TEN_HOURS, "time_reference_source": "iXML"})))
    t = f["metadata.time_reference"]
    assert (t.status, t.measured, t.measured_raw, t.measured_text, t.limit) == \
        ("pass", "10:00:00:00", TEN_HOURS, "10:00:00:00 (25 fps)", "starts at 10:00:00:00")
    assert t.message == 'Starts at 10:00:00:00 (25 fps) as required.'
    t = by(judge(s, result({"time_reference_samples": TEN_HOURS + 1920})))["metadata.time_reference"]
    assert (t.status, t.message) == ("fail", 'Starts at 10:00:00:01 (25 fps); the spec requires 10:00:00:00.')
    t = by(judge(s, result({"time_reference_samples": TEN_HOURS + 5})))["metadata.time_reference"]
    assert t.message == ('Starts at 10:00:00:00 (25 fps) but not on a frame boundary; the spec requires 10:00:00:00.')
    assert t.severity == "fail"
    t = by(judge(s, result({})))["metadata.time_reference"]
    assert (t.status, t.message) == ("fail", 'The file declares no time reference (no bext TimeReference, no iXML timestamp).')
    assert (t.limit, t.severity) == ("starts at 10:00:00:00", "fail")
    t = by(judge(s, result({"time_reference_samples": 0}, rate=0)))["metadata.time_reference"]
    assert (t.status, t.message) == ("skipped", 'Time reference: not judged; the sample rate is unknown.')
    assert (t.limit, t.severity) == ("starts at 10:00:00:00", "fail")
    # a required start time asks for a time reference even when `required` is off
    start_only = section("  time_reference: {required: false, start_timecode: '10:00:00:00', severity: warn}\n")
    t = by(judge(start_only, result({})))["metadata.time_reference"]
    assert (t.status, t.severity) == ("warn", "warn")
    any_start = section("  timecode_fps: '30'\n  time_reference: {required: true}\n")
    # 10 h + 1600 samples: one 30 fps frame past 10:00:00:00
    t = by(judge(any_start, result({"time_reference_samples": TEN_HOURS + 1600,
                                    "time_reference_source": "iXML"})))["metadata.time_reference"]
    assert (t.status, t.limit, t.measured) == ("pass", "time reference present", "10:00:00:01")
    assert t.message == 'Starts at 10:00:00:01 (30 fps; 1728001600 samples since midnight, from iXML).'
    t = by(judge(section("  time_reference: {required: true}\n"),
                 result({"time_reference_samples": TEN_HOURS})))["metadata.time_reference"]
    assert t.message == 'Starts at 10:00:00:00 (25 fps; 1728000000 samples since midnight, from bext).'
    optional = section("  time_reference: {required: false}\n")
    assert by(judge(optional, result({})))["metadata.time_reference"].status == "skipped"


def test_timecode_rate_against_the_file():
    s = section("  timecode_fps: '25'\n  timecode_fps_matches_file: true\n")
    f = by(judge(s, result({"declared_timecode_fps": "25"})))["metadata.timecode_fps"]
    assert (f.status, f.severity, f.measured_text, f.limit, f.message) == \
        ("pass", "warn", "25 fps", "25 fps", "The file's iXML declares 25 fps as the spec does.")
    f = by(judge(s, result({"declared_timecode_fps": "24"})))["metadata.timecode_fps"]
    assert (f.status, f.message) == ("warn", "The file's iXML declares 24 fps; the spec uses 25 fps.")
    f = by(judge(s, result({})))["metadata.timecode_fps"]
    assert (f.status, f.message) == ("skipped", 'Timecode rate: not compared, the file declares none (no iXML TIMECODE_RATE).')
    assert (f.limit, f.severity) == ("25 fps", "warn")
    f = by(judge(s, result({"declared_timecode_fps": "24"})))["metadata.timecode_fps"]
    assert f.measured == "24"
    # no rate in the spec: the file's own (recorded as timecode_fps), else 25
    d = section("  timecode_fps_matches_file: true\n")
    assert by(judge(d, result({"declared_timecode_fps": "24", "timecode_fps": "24"})))["metadata.timecode_fps"] \
        .status == "pass"
    assert by(judge(d, result({"declared_timecode_fps": "24"})))["metadata.timecode_fps"].limit == "25 fps"


def _fields(f):
    return (f.check, f.status, f.severity, f.measured, f.measured_text, f.limit)


def test_finding_fields_of_every_metadata_check():
    # the fields renderers read (check, status, severity, measured, measured_text, limit)
    s = section("  bext: {required: true, min_version: 2, fields_required: [originator], severity: warn}\n"
                "  bext_loudness: {required: true}\n  isrc: {required: true}\n")
    e1 = {"source": "bext description", "raw": "XX-Q7Z-26-00042", "code": "XXQ7Z2600042",
          "display": "XX-Q7Z-26-00042", "valid": True}
    e2 = dict(e1, source="id3 TSRC", code="XXQ7Z2600043", display="XX-Q7Z-26-00043")
    bad = {"source": "LIST/INFO ISRC", "raw": "XX-1", "valid": False, "problem": "too short"}
    f = by(judge(s, result({"bext": {"version": 2, "originator": "Desk"}, "isrc": [e1, e2, bad]})))
    assert _fields(f["metadata.bext"]) == ("metadata.bext", "pass", "warn", 2, "version 2", "bext chunk present")
    assert _fields(f["metadata.bext.version"]) == ("metadata.bext.version", "pass", "warn", 2, "version 2",
                                                  'version 2 or later')
    assert _fields(f["metadata.bext.originator"]) == ("metadata.bext.originator", "pass", "warn", "Desk", None,
                                                     "non-empty")
    lv = f["metadata.bext_loudness.loudness_value"]
    assert _fields(lv) == ("metadata.bext_loudness.loudness_value", "fail", "fail", None, None, "LoudnessValue present")
    assert lv.message == 'Integrated loudness: bext LoudnessValue is not filled in (0x7FFF or cut short).'
    assert _fields(f["metadata.isrc.present"]) == ("metadata.isrc.present", "pass", "fail", 3, None, "ISRC present")
    assert _fields(f["metadata.isrc.syntax"]) == ("metadata.isrc.syntax", "fail", "fail", "XX-1", "XX-1",
                                                 "ISO 3901: CC-XXX-YY-NNNNN")
    assert _fields(f["metadata.isrc.consistent"]) == ("metadata.isrc.consistent", "fail", "fail", 2, None,
                                                     "one ISRC per file")
    one = by(judge(s, result({"bext": {"version": 0}, "isrc": [e1, dict(e1, source="iXML")]})))
    assert _fields(one["metadata.isrc.consistent"]) == ("metadata.isrc.consistent", "pass", "fail", 1, None,
                                                       "one ISRC per file")
    assert _fields(one["metadata.isrc.syntax"]) == ("metadata.isrc.syntax", "pass", "fail", "XX-Q7Z-26-00042",
                                                   "XX-Q7Z-26-00042", "ISO 3901: CC-XXX-YY-NNNNN")
    assert one["metadata.bext.version"].status == "warn"
    assert one["metadata.bext_loudness.loudness_range"].message == \
        'Loudness range: bext version 0 has no loudness fields (they arrived in version 2).'
    missing = by(judge(s, result({"container_kind": "bw64"})))["metadata.bext"]
    assert _fields(missing) == ("metadata.bext", "warn", "warn", None, None, "bext chunk present")
    assert missing.message == 'No bext chunk.'
    assert by(judge(s, result({"container_kind": "rifx"})))["metadata.bext"].message == 'No bext chunk.'
    assert by(judge(s, result({"bext": {"version": 1, "originator": 0}})))["metadata.bext.originator"].status == "warn"
    opt = section("  bext_loudness: {required: false, severity: warn}\n")
    sk = by(judge(opt, result({})))["metadata.bext_loudness.loudness_value"]
    assert (sk.status, sk.severity) == ("skipped", "warn")
    nov = by(judge(opt, result({"bext": {}})))["metadata.bext_loudness.loudness_value"]
    assert nov.message == 'Integrated loudness: not compared, bext version None has no loudness fields (they arrived in version 2).'
    req = section("  bext_loudness: {required: true, severity: warn}\n")
    r = by(judge(req, result({})))["metadata.bext_loudness.max_true_peak_level"]
    assert _fields(r) == ("metadata.bext_loudness.max_true_peak_level", "warn", "warn", None, None,
                          "MaxTruePeakLevel present")


def test_bext_loudness_inside_the_tolerance():
    s = section("  bext_loudness: {tolerance_lu: 1.0, true_peak_tolerance_db: 0.5}\n")
    # a stored value 0.5 LU off with a 1.0 LU tolerance passes; the stored figure is shown with two decimals
    f = by(judge(s, result({"bext": dict(BX2, loudness_value_lufs=-23.5)})))["metadata.bext_loudness.loudness_value"]
    assert f.message == ('bext LoudnessValue -23.50 LUFS agrees with the measured integrated loudness -23.0 LUFS (difference 0.5 LU, tolerance 1.0 LU).')
