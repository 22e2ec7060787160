"""The certificate (page one), the advice of "what to fix", and the wording of findings and reports.

The master is a real one: the synthesized BWF of tests/report_fixtures.py, measured by
``measure_file``; it is judged here against a strict spec that it misses in many ways, so
its certificate must hold many failures and warnings.  Page counts come from weasyprint's
own layout and from the PDF it writes (pypdf).
"""

from __future__ import annotations

import copy
import io
import re

import pytest
from pypdf import PdfReader

from masterqc.judge.core import check_allowed, check_limits
from masterqc.report import plots
from masterqc.report.advice import advice_for
from masterqc.report.render import pdf_page_count, render_html, render_pdf, write_reports
from masterqc.report.view import build_view, headline, setting_text
from masterqc.spec.types import Allowed, allowed, ceiling, target
from report_fixtures import measured_and_judged

#: a spec the -20 LUFS, -20 dBTP, 8 s, 48 kHz 24-bit tone master with a 30 ms dropout misses often
STRICT_SPEC = """\
spec_version: 1
name: "Ferrowby Post strict stereo (fictional)"
version: "2.1"
report:
  client: "Ferrowby Post (fictional)"
  job: "FP-0415"
  operator: "Ada Quell"
format:
  containers: [aiff]
  sample_rates_hz: [44100]
  bit_depths: [16]
duration:
  total: {min_s: 60.0}
loudness:
  integrated: {target_lufs: -14.0, tolerance_lu: 1.0}
  max_short_term: {max_lufs: -30.0}
  max_momentary: {max_lufs: -30.0, severity: warn}
peaks:
  true_peak: {max_dbtp: -25.0}
  sample_peak: {max_dbfs: -25.0, severity: warn}
integrity:
  dropouts: {max_count: 0}
  inverted_polarity: [false]
  clipped_runs: {max_count: 0}
"""


@pytest.fixture(scope="module")
def strict(tmp_path_factory):
    from masterqc.pipeline import judge_result
    from masterqc.spec.loader import load_spec

    tmp = tmp_path_factory.mktemp("certificate")
    _wav, _spec, result = measured_and_judged(tmp)
    path = tmp / "strict.yaml"
    path.write_text(STRICT_SPEC, encoding="utf-8")
    return judge_result(result, load_spec(path))


def _problems(result):
    return [f for f in result["findings"] if f["status"] in ("fail", "warn", "error")]


def _pdf_pages_text(data: bytes) -> list[str]:
    return [re.sub(r"\s+", " ", p.extract_text() or "") for p in PdfReader(io.BytesIO(data)).pages]


def test_the_strict_spec_gives_many_findings(strict):
    # the precondition of the page tests: at least 6 failures and warnings, both kinds present
    statuses = [f["status"] for f in _problems(strict)]
    assert len(statuses) >= 6, statuses
    assert "fail" in statuses and "warn" in statuses


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_the_certificate_is_one_page_holding_every_failure_and_warning(strict, paper):
    html = render_html(strict, paper=paper, pages="summary")
    assert pdf_page_count(html) == 1  # weasyprint's own layout
    data = render_pdf(strict, paper=paper, html=html)
    pages = _pdf_pages_text(data)
    assert len(pages) == 1  # the PDF as written
    for f in _problems(strict):
        assert headline(f["message"]) in pages[0], f["check"]
    # identity, spec, fields and the sign-off line are on the same page
    # a hash may wrap at the end of its cell: compared without the spaces text extraction puts there
    packed = pages[0].replace(" ", "")
    assert strict["file"]["sha256"] in packed and strict["spec"]["sha256"] in packed
    for text in ("Trevarrow_Glass_master.wav", "0:08.000",
                 "WAV, PCM 24-bit, 48 kHz", "2 (L R)", "Ferrowby Post strict stereo (fictional)", "2.1",
                 "Ferrowby Post (fictional)", "FP-0415", "Ada Quell",
                 "Checked by", "Signature", "Date", "monitoring level",
                 "The receiving party's own delivery spec and QC govern acceptance"):
        assert text in pages[0], text


def test_the_full_report_starts_with_the_same_certificate_and_fits_six_pages(strict):
    pages = _pdf_pages_text(render_pdf(strict))
    assert 2 <= len(pages) <= 6  # a stereo master: certificate plus appendix, at most 6 A4 pages
    first = pages[0]
    for f in _problems(strict):
        assert headline(f["message"]) in first, f["check"]
    assert "What to fix" not in first and first.index("Key figures") > first.index("Failures and warnings")
    assert "What to fix" in pages[1] or "WHAT TO FIX" in pages[1]


def test_key_figures_on_the_certificate(strict):
    # the measured values, formatted at their units' precision (the figures come from the result)
    m = strict["measurements"]
    figures = dict(build_view(strict)["certificate"]["figures"])
    assert figures["Integrated"] == f"{m['integrated_lufs']:.1f}\u00a0LUFS" == "-20.0\u00a0LUFS"
    assert figures["True peak"] == f"{m['true_peak_dbtp']:.1f}\u00a0dBTP"
    assert figures["Sample rate"] == "48\u00a0kHz" and figures["Bit depth"] == "24-bit"
    assert set(figures) == {"Integrated", "Loudness range", "Max momentary", "Max short-term", "True peak",
                            "Sample peak", "Sample rate", "Bit depth"}


def test_summary_pages_write_the_certificate_alone(strict, tmp_path):
    (pdf,) = write_reports(strict, tmp_path, "cert", ("pdf",), pages="summary")
    assert len(PdfReader(str(pdf)).pages) == 1
    html = render_html(strict, pages="summary")
    assert 'id="certificate"' in html and 'id="findings"' not in html and 'id="appendix"' not in html


def test_fields_from_the_command_line_override_the_spec(strict):
    from masterqc.errors import UsageError
    from masterqc.report.fields import parse_fields, with_fields

    fields = parse_fields(["client=Ostmere Sound (fictional)", "date=2026-12-05"])
    assert fields == {"client": "Ostmere Sound (fictional)", "date": "2026-12-05"}
    view = build_view(with_fields(strict, fields))["certificate"]
    assert dict(view["fields"]) == {"Client": "Ostmere Sound (fictional)", "Job / order no.": "FP-0415",
                                    "Operator": "Ada Quell"}
    assert view["date"] == "2026-12-05"
    with pytest.raises(UsageError, match="unknown field 'studio'"):
        parse_fields(["studio=x"])
    with pytest.raises(UsageError, match="NAME=VALUE"):
        parse_fields(["client"])


def test_report_command_takes_fields_and_pages(strict, tmp_path):
    import json

    from masterqc.cli import main
    saved = tmp_path / "take.json"
    saved.write_text(json.dumps(strict), encoding="utf-8")
    assert main(["report", str(saved), "--out", str(tmp_path), "--pages", "summary",
                 "--field", "operator=Bram Tilley"]) == 0
    assert len(PdfReader(str(tmp_path / "take.pdf")).pages) == 1
    assert "Bram Tilley" in (tmp_path / "take.html").read_text(encoding="utf-8")


def test_the_spec_report_section_and_version_reach_the_result(strict):
    spec = strict["spec"]
    assert spec["version"] == "2.1"
    assert spec["report"] == {"client": "Ferrowby Post (fictional)", "job": "FP-0415", "operator": "Ada Quell"}


# ------------------------------------------------------------------ what to fix: advice with amounts

def _judged(check, what, value, req, **kw):
    return check_limits(check, what, value, req, **kw)


def test_advice_lowers_the_gain_by_the_distance_to_the_target():
    # -18.6 LUFS against a -23 +- 1 LUFS target: 4.4 dB down reaches the target
    req = target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 1.0})
    f = _judged("loudness.integrated", "integrated loudness", -18.6, req)
    assert advice_for(f, {"measurements": {}}) == "Lower the gain by 4.4 dB to reach the -23.0 LUFS target."


def test_advice_for_a_quiet_master_names_the_limiter_when_the_gain_would_overshoot():
    req = target("lufs").model_validate({"target_lufs": -14.0, "tolerance_lu": 1.0})
    f = _judged("loudness.integrated", "integrated loudness", -20.0, req)
    tp = ceiling("dbtp").model_validate({"max_dbtp": -1.0})
    peak = _judged("peaks.true_peak", "true peak", -3.0, tp)
    result = {"measurements": {"true_peak_dbtp": -3.0}, "findings": [peak.to_dict()]}
    # +6.0 dB puts a -3.0 dBTP peak at +3.0 dBTP, over the -1.0 dBTP ceiling
    assert advice_for(f, result) == ("Raise the gain by 6.0 dB to reach the -14.0 LUFS target; the true peak would "
                                     "then reach 3.0 dBTP, so put a true-peak limiter at or below -1.0 dBTP.")


def test_advice_for_true_peak_and_upsampling():
    tp = ceiling("dbtp").model_validate({"max_dbtp": -1.0})
    f = _judged("peaks.true_peak", "true peak", 0.4, tp)
    assert advice_for(f, {}) == ("Put a true-peak limiter at or below -1.0 dBTP (the peaks now reach 0.4 dBTP), or "
                                 "lower the gain by 1.4 dB.")
    req = allowed(bool).model_validate([False])
    up = check_allowed("sampling.upsampled", "upsampling", True, req,
                       says=("Upsampling: the file was converted up from 44.1 kHz", "not used"))
    assert advice_for(up, {"measurements": {"upsampled_from_hz": 44100}}) == \
        "Reconvert from the original 44.1 kHz master instead of delivering an upsampled file."


def test_advice_for_a_conversion_target_names_the_new_ceiling():
    # -0.3 dBTP after conversion to 48 kHz against -1.0: the master's limiter 0.7 dB lower, at -1.7 dBTP
    tp = ceiling("dbtp").model_validate({"max_dbtp": -1.0})
    f = _judged("sampling.conversion_48000.true_peak", "true peak after conversion to 48 kHz", -0.3, tp)
    assert advice_for(f, {}).startswith("The 48 kHz deliverable will peak 0.7 dB over the ceiling: set the "
                                        "true-peak limiter of the master 0.7 dB lower (at or below -1.7 dBTP)")


def test_every_problem_of_the_strict_master_gets_advice_in_the_appendix(strict):
    view = build_view(strict)
    fixes = view["verdict"]["fixes"]
    assert fixes and all(f["advice"] and "Kaiser" not in f["advice"] for f in fixes)
    advice = {f["check"]: f["advice"] for f in fixes}
    # -20.0 LUFS against -14 +- 1: raise by 6.0 dB; the -20.0 dBTP peak then reaches -14.0 dBTP, over the
    # -25.0 dBTP ceiling, so the limiter is named
    assert advice["loudness.integrated"] == ("Raise the gain by 6.0 dB to reach the -14.0 LUFS target; the true "
                                             "peak would then reach -14.0 dBTP, so put a true-peak limiter at or "
                                             "below -25.0 dBTP.")
    assert advice["format.sample_rate"].startswith("Deliver at 44100 Hz")


# ------------------------------------------------------------------ wording

def test_findings_read_as_sentences():
    none_allowed = ceiling("count").model_validate({"max_count": 0})
    assert check_limits("integrity.clipped_runs", "clipped runs", 0, none_allowed).message == \
        "No clipped runs (limit: none)."
    assert check_limits("integrity.clipped_runs", "clipped runs", 1, none_allowed).message == \
        "1 clipped run where the spec allows none."
    req = allowed(bool).model_validate([False])
    f = check_allowed("integrity.inverted_polarity", "polarity", False, req,
                      says=("Polarity: the channels are inverted", "Polarity: the channels are not inverted"))
    assert f.message == "Polarity: the channels are not inverted." and f.limit == "no"
    tp = ceiling("dbtp").model_validate({"max_dbtp": -1.0})
    assert check_limits("peaks.true_peak", "true peak", -3.0, tp).message == \
        "True peak is -3.0 dBTP (limit: at most -1.0 dBTP)."


def test_judged_polarity_and_band_limit_sentences(strict):
    messages = {f["check"]: f["message"] for f in strict["findings"]}
    assert messages["integrity.inverted_polarity"] == "Polarity: the channels are not inverted."
    assert messages["integrity.clipped_runs"] == "No clipped runs (limit: none)."


def test_no_machine_phrases_in_the_rendered_report(strict):
    html = render_html(strict)
    for phrase in ("meets <=", "meets >=", "one of false", "one of true", "gain -0.0", ">Miss<", "(dB re. below)",
                   "That energy as a level", "level (dB)", "NOT JUDGED", "is allowed", "severity warn"):
        assert phrase not in html, phrase
    # every finding's message is a sentence: a capital (or a lower-case term of the trade) first, a full stop last
    for f in strict["findings"]:
        assert f["message"].endswith("."), f["message"]
        assert f["message"][0].isupper() or f["message"].startswith(("bext", "1", "2", "3", "4", "5", "6", "7", "8",
                                                                      "9")), f["message"]


def test_normalisation_message_never_says_minus_zero_gain():
    from masterqc.judge.normalisation import judge
    from masterqc.spec.sections.normalisation import Section

    section = Section.model_validate({"target_lufs": -14.0, "ceiling_dbtp": -1.0, "limiting": {"max_db": 0.0}})
    # -13.96 LUFS to -14 LUFS is a gain of -0.04 dB: shown as no gain change, never "-0.0 dB"
    (f,) = judge(section, {"measurements": {"integrated_lufs": -13.96, "true_peak_dbtp": 0.5}})
    assert "no gain change" in f.message and "-0.0" not in f.message


def test_settings_keep_their_real_precision():
    assert setting_text("threshold_below_full_scale_db", 0.01) == "0.01\u00a0dB"
    assert setting_text("gating_block_s", 0.4) == "0.4\u00a0s"
    assert setting_text("kaiser_beta", 5.5) == "5.5"
    assert setting_text("table", [1, 2]) is None  # lists stay in the JSON


def test_axis_labels_say_what_db_is_relative_to(strict):
    html = render_html(strict)
    assert plots.SPECTRUM_LEVEL_LABEL in html and "dBFS" in plots.SPECTRUM_LEVEL_LABEL
    assert plots.SPECTROGRAM_LEVEL_LABEL in html and "dBFS" in plots.SPECTROGRAM_LEVEL_LABEL


def test_state_words_are_one_set_each_with_its_own_icon():
    from masterqc.report.view import STATUS_MEANINGS, STATUS_WORDS
    words = [w for w, _shape in STATUS_WORDS.values()]
    shapes = [s for _w, s in STATUS_WORDS.values()]
    assert len(set(words)) == len(words) == len(set(shapes)) == 6
    assert sorted(k for k, _t in STATUS_MEANINGS) == sorted(STATUS_WORDS)
    import pathlib
    doc = pathlib.Path(__file__).resolve().parents[1].joinpath("DEVELOPERS.md").read_text(encoding="utf-8")
    for w in words:
        assert f"**{w}**" in doc, w  # documented once, in DEVELOPERS.md "State words"


# ------------------------------------------------------------------ overs: every range shaded

def test_every_over_range_is_shaded_merged_where_they_touch():
    # 1,430 over ranges of 20 ms every 0.12 s from 0:05 to 2:56 of a 3-minute master
    ranges = [(5.0 + 0.12 * i, 5.0 + 0.12 * i + 0.02) for i in range(1430)]
    spans = plots.over_spans(ranges, 180.0)
    # at 1/800 of 180 s (0.225 s) per pixel (house choice, the plot width) the gaps of 0.1 s close: one span
    # from the first start to the last end (by construction: range 1429 is the last)
    assert spans == [(5.0, pytest.approx(5.0 + 0.12 * 1429 + 0.02))]
    # ranges far apart stay apart, touching ones merge (by construction: the ranges written here)
    assert plots.over_spans([(1.0, 2.0), (2.0, 3.0), (100.0, 101.0)], 180.0) == [(1.0, 3.0), (100.0, 101.0)]


def test_the_true_peak_plot_counts_every_over(strict):
    result = copy.deepcopy(strict)
    result["measurements"]["true_peak_over_ranges_s"] = [[0.1 * i, 0.1 * i + 0.01] for i in range(70)]
    svg = build_view(result)["true_peak"]["svg"]
    assert "over the ceiling (70 ranges)" in svg
