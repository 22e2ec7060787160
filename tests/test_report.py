"""HTML report: well-formed, self-contained, escaped, deterministic, in the issue's order.

The result under test is a real one: a synthesized BWF measured by
``measure_file`` and judged by the real judge (tests/report_fixtures.py).
"""

from __future__ import annotations

import copy
import json
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from masterqc.report import fmt, plots
from masterqc.report.render import render_html, write_reports
from masterqc.report.view import build_view
from report_fixtures import HOSTILE_DESCRIPTION, measured_and_judged

SVG = "{http://www.w3.org/2000/svg}"
XLINK_HREF = "{http://www.w3.org/1999/xlink}href"


@pytest.fixture(scope="module")
def judged(tmp_path_factory):
    return measured_and_judged(tmp_path_factory.mktemp("report"))


@pytest.fixture(scope="module")
def html(judged):
    return render_html(judged[2])


@pytest.fixture(scope="module")
def tree(html):
    return ET.fromstring(html.split("\n", 1)[1] if html.startswith("<!DOCTYPE") else html)


def _text(el) -> str:
    """The element's text with runs of ASCII white space collapsed (no-break spaces kept)."""
    return re.sub(r"[ \t\r\n]+", " ", " ".join(el.itertext())).strip()


def test_html_is_well_formed_xml(html, tree):
    assert html.startswith("<!DOCTYPE html>\n")
    assert tree.tag == "html"
    assert [c.tag for c in tree] == ["head", "body"]


def test_no_external_requests_and_no_scripts(html, tree):
    for el in tree.iter():
        tag = el.tag.split("}")[-1]
        assert tag not in ("script", "link", "iframe", "object", "embed", "img", "base"), tag
        for name, value in el.attrib.items():
            if name.split("}")[-1] in ("href", "src", "srcset", "data", "action", "poster") or name == XLINK_HREF:
                assert value.startswith(("#", "data:")), (tag, name, value[:60])
    style = "".join(s.text or "" for s in tree.iter("style"))
    assert "@import" not in style
    for url in re.findall(r"url\(([^)]*)\)", html):
        assert url.strip("'\" ").startswith(("#", "data:")), url


def test_bext_markup_is_shown_as_text_only(html, tree):
    # the raw markup never appears; its escaped form does, and parses back to the exact string
    assert "<script>alert" not in html and "<b>Night" not in html
    assert "&lt;script&gt;alert(" in html
    cells = [td for td in tree.iter("td") if "Night" in _text(td)]
    assert cells and cells[0].text == HOSTILE_DESCRIPTION
    assert not any(el.tag == "b" for el in tree.iter())


def test_control_character_in_metadata_is_visible(tree):
    originator = [td for td in tree.iter("td") if (td.text or "").startswith("Tamberlo Lane Rooms")]
    assert originator and originator[0].text == "Tamberlo Lane Rooms\\x07"


def test_render_is_deterministic_and_survives_a_json_round_trip(judged, html):
    result = judged[2]
    assert render_html(copy.deepcopy(result)) == html
    again = json.loads(json.dumps(result, indent=2))
    again["outputs"] = {"json": "x.json"}  # written by check after rendering; must not change the page
    assert render_html(again) == html


def test_certificate_comes_first_then_what_to_fix(tree, judged):
    body = tree.find("body")
    certificate = body[0]
    assert certificate.get("id") == "certificate"
    verdict = [el for el in certificate.iter() if el.get("class", "").startswith("verdict ")][0]
    text = _text(verdict)
    assert text.startswith("FAIL Does not meet the spec")
    assert "2 checks failed" in text  # true peak, and true peak after conversion to 44.1 kHz
    problems = _text([el for el in certificate.iter() if el.get("class") == "problems"][0])
    # the true-peak failure with its value, limit and miss (-20.0 against -25.0: 5.0 dB), in one sentence
    assert "FAIL True peak is -20.0 dBTP, 5.0 dB above the limit of -25.0 dBTP." in problems
    # what to fix: advice with the amount, the first section after the certificate
    fixes = body.find("main")[0]
    assert fixes.get("id") == "fixes"
    assert ("Put a true-peak limiter at or below -25.0 dBTP (the peaks now reach -20.0 dBTP), or lower the gain "
            "by 5.0 dB.") in _text(fixes)
    # where, in the file's timecode, with the finding in the appendix
    findings = _text([s for s in tree.iter("section") if s.get("id") == "findings"][0])
    assert "Where: 01:00:00:00" in findings


def test_sections_in_the_issue_order(tree):
    ids = [s.get("id") for s in tree.iter("section")]
    assert ids == ["certificate", "fixes", "findings", "format", "loudness", "true-peak", "spectrum", "spectrogram",
                   "events", "conversions", "normalisation", "provenance"]


def test_findings_rows_carry_word_shape_and_numbers(tree):
    rows = [tr for tr in tree.iter("tr") if tr.get("class", "").startswith("row-")]
    by_check = {}
    for tr in rows:
        cells = tr.findall("td")
        by_check[cells[1].get("title")] = (tr.get("class"), cells)
    cls, cells = by_check["peaks.true_peak"]
    assert cls == "row-fail"
    assert _text(cells[0]) == "FAIL"
    icon = cells[0].find(f"{SVG}svg")
    assert icon is not None and icon.find(f"{SVG}rect") is not None  # fail: a square
    assert _text(cells[2]).startswith("True peak is -20.0 dBTP, 5.0 dB above the limit of -25.0 dBTP.")
    cls, cells = by_check["loudness.integrated"]
    assert cls == "row-pass" and _text(cells[0]) == "PASS"
    assert cells[0].find(f"{SVG}svg").find(f"{SVG}circle") is not None  # pass: a disc
    # worst first
    assert [r.get("class") for r in rows][0] == "row-fail"


def test_key_numbers_match_an_outside_meter(judged, html):
    """Integrated loudness shown equals pyloudnorm's (BS.1770, DeMan filter) at the shown precision.

    EBU Tech 3341 Table 1 case 1 shape: a 1 kHz stereo sine at -20 dBFS per channel reads -20.0 LUFS.
    """
    import pyloudnorm
    import soundfile as sf

    data, rate = sf.read(str(judged[0]))
    reference = pyloudnorm.Meter(rate, filter_class="DeMan").integrated_loudness(data)
    shown = f"{reference:.1f}"
    assert shown == "-20.0"
    assert f"<dt>Integrated</dt><dd>{shown}\u00a0LUFS</dd>" in html  # the certificate's key figures
    assert f"integrated -{shown[1:]} LUFS" in html  # the plot's legend


def test_plots_are_matplotlib_svg_with_timecode_axis(tree):
    plots_found = [el for el in tree.iter(f"{SVG}svg") if el.get("class") == "plot"]
    labels = [p.get("aria-label") for p in plots_found]
    assert labels[:3] == ["Loudness over time", "True peak over time", "Long-term spectrum per channel"]
    loud = plots_found[0]
    texts = [t for el in loud.iter(f"{SVG}text") for t in el.itertext()]
    assert any(t.strip() == "01:00:00:00" for t in texts)  # bext TimeReference 3600 s at 25 fps
    assert any("timecode (HH:MM:SS:FF at 25 fps)" in t for t in texts)


def test_conversion_table_and_target_nyquist_line(tree, judged):
    conv = [c for c in judged[2]["measurements"]["conversions"] if c["target_rate_hz"] == 44100][0]
    section = [s for s in tree.iter("section") if s.get("id") == "conversions"][0]
    rows = [[_text(td) for td in tr.findall("td")] for tr in section.iter("tr") if tr.findall("td")]
    assert rows and rows[0][0] == "44.1\u00a0kHz"
    heads = [_text(th) for th in section.iter("th")]
    shown_tp = rows[0][heads.index("True peak after conversion")]
    # a 1 kHz sine keeps its peak through a band-limited rate change (analytic): about -20 dBTP
    assert shown_tp == f"{conv['true_peak_after_dbtp']:.1f}\u00a0dBTP" == "-20.0\u00a0dBTP"
    spectrum = [el for el in tree.iter(f"{SVG}svg") if el.get("aria-label") == "Long-term spectrum per channel"][0]
    legend = " ".join(t for el in spectrum.iter(f"{SVG}text") for t in el.itertext())
    assert "44.1 kHz target: Nyquist 22.05 kHz" in legend and "Nyquist 24 kHz" in legend and "20 kHz" in legend


def test_dropout_is_located_in_the_events_section(tree, judged):
    """The 30 ms silence written at 3.000 s shows up as an event at the file's timecode 01:00:03:00."""
    m = judged[2]["measurements"]
    assert m["dropout_count"] >= 1  # the analyzer found it (precondition of what the page shows)
    section = [s for s in tree.iter("section") if s.get("id") == "events"][0]
    rows = [[_text(td) for td in tr.findall("td")] for tr in section.iter("tr") if tr.findall("td")]
    dropouts = [r for r in rows if r[0] == "Dropout" and len(r) == 5]
    # the silence is on both channels at one time: one dropout event naming both (house choice)
    assert m["dropout_count"] == 1 and [r[1] for r in dropouts] == ["L+R"]
    # 3.000 s at 25 fps after a 01:00:00:00 start (bext TimeReference)
    assert all(r[2] == "01:00:03:00 (0:03.00)" for r in dropouts), dropouts
    lanes = [el for el in section.iter(f"{SVG}svg") if el.get("aria-label") == "Event timeline"]
    assert lanes and "Dropout (1)" in " ".join(t for el in lanes[0].iter(f"{SVG}text") for t in el.itertext())


def test_missing_data_says_not_measured_and_never_raises(judged):
    result = copy.deepcopy(judged[2])
    result["series"] = {}
    for key in list(result["measurements"]):
        if key.startswith(("true_peak", "integrated", "loudness", "max_")) or key.endswith(("_where_s", "_ranges_s")):
            del result["measurements"][key]
    for key in ("head_silence_s", "tail_silence_s", "conversions"):
        result["measurements"].pop(key, None)
    result.pop("normalisation", None)
    for f in result["findings"]:
        f["where_s"] = []
    page = render_html(result)
    tree = ET.fromstring(page.split("\n", 1)[1])
    sections = {s.get("id"): _text(s) for s in tree.iter("section")}
    for sid in ("loudness", "true-peak", "spectrum", "spectrogram", "events", "conversions"):
        assert "Not measured" in sections[sid], sid
    assert "Not computed" in sections["normalisation"]
    assert not [el for el in tree.iter(f"{SVG}svg") if el.get("class") == "plot"]


def test_render_survives_missing_or_odd_keys(judged):
    """Every top-level key removed in turn, every measurement null, every series of the wrong type."""
    base = judged[2]
    for key in list(base):
        result = {k: v for k, v in copy.deepcopy(base).items() if k != key}
        ET.fromstring(render_html(result).split("\n", 1)[1])  # renders, and stays well-formed
    nulls = copy.deepcopy(base)
    nulls["measurements"] = {k: None for k in nulls["measurements"]}
    page = render_html(nulls)
    assert "<dt>Integrated</dt><dd>n/a</dd>" in page  # null shown as n/a
    odd = copy.deepcopy(base)
    odd["series"] = {k: "not a series" for k in odd["series"]}
    odd["settings"] = {"loudness": [1, 2, 3]}
    odd["findings"] = [{"check": "x.y", "status": "bogus", "message": 5, "where_s": "nowhere"}, "not a dict"]
    page = render_html(odd)
    assert "ERROR" in page  # an unknown status is shown as an error, never hidden


def test_error_result_of_an_unreadable_master_renders(tmp_path):
    from masterqc.pipeline import check_file
    from masterqc.spec.loader import load_spec
    from report_fixtures import SPEC_YAML

    bad = tmp_path / "truncated.wav"
    bad.write_bytes(b"RIFF\x10\x00\x00\x00WAVEfmt ")
    spec = tmp_path / "s.yaml"
    spec.write_text(SPEC_YAML)
    result = check_file(bad, load_spec(spec), tmp_path, ("json",))
    page = render_html(result)
    tree = ET.fromstring(page.split("\n", 1)[1])
    assert _text(tree.find("body")[0]).startswith("masterqc delivery QC certificate")
    assert "ERROR Could not be checked: the master could not be read" in _text(tree.find("body")[0])
    assert "cannot be checked" in page


def test_measure_only_result_is_marked_not_judged(judged):
    result = {k: v for k, v in judged[2].items() if k not in ("spec", "findings", "verdict", "normalisation")}
    view = build_view(result)
    assert view["verdict"]["word"] == "MEASURED ONLY"
    assert view["findings"] == []


def test_write_reports_is_atomic_when_rendering_fails(judged, tmp_path, monkeypatch):
    from masterqc.report import render

    old = tmp_path / "take.html"
    old.write_text("previous report")

    def broken(*_a, **_k):
        raise RuntimeError("printer on fire")

    monkeypatch.setattr(render, "render_pdf", broken)
    with pytest.raises(RuntimeError):
        write_reports(judged[2], tmp_path, "take", ("html", "pdf"))
    assert old.read_text() == "previous report"  # nothing written: every payload is rendered first
    assert sorted(p.name for p in tmp_path.iterdir()) == ["take.html"]


def test_write_reports_html_only(judged, tmp_path, html):
    paths = write_reports(judged[2], tmp_path, "take", "json,html")
    assert [p.name for p in paths] == ["take.html"]
    assert paths[0].read_text(encoding="utf-8") == html
    assert sorted(p.name for p in tmp_path.iterdir()) == ["take.html"]  # no temporary left behind


def test_css_is_safe_to_embed():
    import importlib.resources
    css = importlib.resources.files("masterqc.templates").joinpath("report.css").read_text()
    assert not set("<>&") & set(css)


# ------------------------------------------------------------------ formatting and plotting helpers

def test_labels_and_units_from_key_names():
    assert fmt.unit_of_key("true_peak_dbtp_per_channel") == ("dBTP", 1)
    assert fmt.unit_of_key("dropout_longest_s") == ("s", 3)
    assert fmt.value_for_key("bandwidth_edge_slope_db_per_khz", 8.6) == "8.60\u00a0dB/kHz"
    assert fmt.label_of_key("max_short_term_lufs") == "Max short-term loudness"
    assert fmt.label_of_key("dc_offset_dbfs", with_unit_text=True) == "DC offset (dBFS)"
    assert fmt.value_for_key("sample_peak_dbfs_per_channel", [-1.04, -0.96]) == "-1.0, -1.0\u00a0dBFS"
    assert fmt.value_for_key("integrated_lufs", None) == "n/a"
    assert fmt.number(-0.04, 1) == "0.0"  # no negative zero


def test_clock_and_timecode_text():
    assert fmt.clock(0.0) == "0:00.00"
    assert fmt.clock(3725.456, 2) == "1:02:05.46"
    assert fmt.timecode(3600.0 + 12.4, 25) == "01:00:12:10"  # 0.4 s = 10 frames at 25 fps
    assert fmt.timecode(86400.0 + 1.0, None) == "00:00:01.00"  # wraps at 24 h


def test_display_merge_bounds_the_shapes_drawn():
    ranges = [(i * 0.001, i * 0.001 + 0.0001) for i in range(100_000)]  # 100 000 events in 100 s
    merged = plots.merge_for_display(ranges, 100.0 / 600)
    # by construction: the last range ends at 99999 * 0.001 + 0.0001 = 99.9991 s
    assert len(merged) == 1 and merged[0][0] == 0.0 and merged[0][1] == pytest.approx(99.9991)
    assert plots.merge_for_display([(5, 6), (1, 2), (2.05, 3)], 0.1) == [(1.0, 3.0), (5.0, 6.0)]


def test_thinning_keeps_every_bucket_extreme():
    rng = np.random.default_rng(7)
    y = rng.normal(-20, 3, 100_000)
    y[54_321] = 3.5  # one over
    y[77_777] = -90.0
    t = np.arange(y.size) * 0.01
    tt, yy = plots.thin(t, y, 3000)
    assert len(yy) <= 3000
    assert yy.max() == 3.5 and yy.min() == -90.0
    assert tt[int(np.argmax(yy))] == t[54_321]
    assert np.all(np.diff(tt) > 0)


def test_view_reads_numbers_from_finding_attributes_never_from_text(judged):
    """The plot band comes from limit_low/limit_high; the limit text is for people only (house rule)."""
    result = copy.deepcopy(judged[2])
    f = next(f for f in result["findings"] if f["check"] == "loudness.integrated")
    f["limit"] = "-99.0 LUFS \u00b1 9.0 LU"  # text that disagrees with the numbers
    f["limit_low"], f["limit_high"] = -21.5, -18.5
    view = build_view(result)
    assert "-21.5 to -18.5 LUFS" in view["loudness"]["note"]
    assert "-99" not in view["loudness"]["note"]


def test_view_adopts_no_unnamed_time_axis(judged):
    """A series is drawn only against the axis its contract names (loudness_time_s), never a look-alike."""
    result = copy.deepcopy(judged[2])
    series = result["series"]
    series["other_time_s"] = series.pop("loudness_time_s")  # same length, other name
    view = build_view(result)
    assert view["loudness"]["svg"] is None and "Not measured" in view["loudness"]["note"]


def test_view_source_has_no_key_guessing():
    """report/view.py reads the contract: no alias lists, no limit-text parsing, no substring search of checks."""
    import inspect

    from masterqc.report import view
    src = inspect.getsource(view)
    for banned in ("_first(", "_parse_band", "_finding_for", "normalization", "ltas_freq_hz", "leading_silence_s",
                   "re.match(", "in check"):
        assert banned not in src, banned


def test_tone_labels_close_in_frequency_get_rows_of_their_own():
    """Three ultrasonic tones 1.3-1.8 kHz apart (an upper panel 28 kHz wide): their labels must not share
    a line, or they print over each other (house choice: one row per label, lowest tone on top)."""
    f_hz = np.linspace(0.0, 48000.0, 4801)
    flat_db = [np.full_like(f_hz, -70.0), np.full_like(f_hz, -71.0)]
    marks = [(25080.0, "tone 25.08 kHz"), (22000.0, "tone 22.00 kHz"), (23760.0, "tone 23.76 kHz")]
    svg = plots.spectrum_plot(f_hz, flat_db, ["L", "R"], 96000, [], marks)
    rows = {}
    for m in re.finditer(r'<text [^>]*\by="([0-9.]+)"[^>]*>(tone [^<]*)</text>', svg):
        rows[m.group(2)] = float(m.group(1))
    assert sorted(rows) == sorted(text for _f, text in marks)
    ys = [rows[text] for _f, text in sorted(marks)]
    # SVG y grows downwards: the lowest tone's label is highest, each next one a full line lower
    assert ys[0] < ys[1] < ys[2]
    assert min(np.diff(ys)) > 6.5          # more than the 6.5 px font height apart
