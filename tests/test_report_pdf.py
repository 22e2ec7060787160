"""PDF report: pages, page size, running heads and feet, extracted text (pypdf)."""

from __future__ import annotations

import io
import re

import pytest
from pypdf import PdfReader

from masterqc.report.render import render_html, render_pdf
from report_fixtures import measured_and_judged

# ISO 216 A4 is 210 x 297 mm, US Letter 8.5 x 11 in; PDF user space is 1/72 in.
# ISO 216 A4 is 210 x 297 mm; US Letter is 8.5 x 11 in (common practice, no source); a PDF point is
# 1/72 in (ISO 32000-1); 0.5 pt tolerance: house choice (renderers round the page box)
A4_PT = (210 / 25.4 * 72, 297 / 25.4 * 72)
LETTER_PT = (8.5 * 72, 11 * 72)


@pytest.fixture(scope="module")
def judged(tmp_path_factory):
    return measured_and_judged(tmp_path_factory.mktemp("report_pdf"))


@pytest.fixture(scope="module")
def a4(judged):
    log: list = []
    data = render_pdf(judged[2], paper="a4", fetch_log=log)
    return PdfReader(io.BytesIO(data)), log


def _pages_text(reader) -> list[str]:
    return [re.sub(r"\s+", " ", p.extract_text() or "") for p in reader.pages]


def test_a4_pages_with_running_heads_and_numbers(a4, judged):
    reader, _log = a4
    n = len(reader.pages)
    assert 3 <= n <= 6  # house choice: the report's length for this master (certificate, findings, plots, method)
    for page in reader.pages:
        w, h = float(page.mediabox.width), float(page.mediabox.height)
        assert w == pytest.approx(A4_PT[0], abs=0.5) and h == pytest.approx(A4_PT[1], abs=0.5)
    for i, text in enumerate(_pages_text(reader), start=1):
        assert "Trevarrow_Glass_master.wav" in text, i  # file name on every page
        assert "verdict: FAIL (2 fails)" in text, i  # and the verdict
        assert f"page {i} of {n}" in text, i
        assert "receiving party's own spec and QC govern acceptance" in text, i


def test_first_page_is_the_certificate_with_verdict_failures_and_key_numbers(a4):
    pages = _pages_text(a4[0])
    first = pages[0]
    assert first.index("FAIL") < first.index("Failures and warnings") < first.index("Key figures")
    assert "True peak is -20.0 dBTP, 5.0 dB above the limit of -25.0 dBTP." in first
    # integrated loudness of a -20 dBFS 1 kHz stereo sine (EBU Tech 3341 Table 1, case 1 shape)
    assert "-20.0 LUFS" in first
    # the appendix starts on page two with what to fix, in plain words with the amount
    assert "Findings" not in first
    assert "WHAT TO FIX" in pages[1] and "Put a true-peak limiter at or below -25.0 dBTP" in pages[1]


def test_sections_follow_in_order_in_at_most_six_pages(a4):
    pages = _pages_text(a4[0])
    assert len(pages) <= 6  # a stereo master (house choice: certificate plus a compact appendix)
    whole = " ".join(pages)
    order = ["Failures and warnings", "Key figures", "Checked by", "WHAT TO FIX", "Findings", "Format and metadata",
             "Loudness over time", "True peak over time", "Long-term spectrum", "Spectrogram",
             "Clipping, silence and dropouts", "Conversion safety", "Normalisation headroom",
             "Method and provenance", "State words"]
    positions = [whole.index(title) for title in order]
    assert positions == sorted(positions)


def test_pdf_rendering_fetches_nothing_outside_the_document(a4):
    log = a4[1]
    assert all(url.startswith("data:") for url in log), [u[:40] for u in log if not u.startswith("data:")]


def test_letter_paper(judged):
    html = render_html(judged[2], paper="letter")
    assert "size: letter" in html
    reader = PdfReader(io.BytesIO(render_pdf(judged[2], paper="letter", html=html)))
    page = reader.pages[0]
    # Letter 8.5 x 11 in at 72 pt/in (LETTER_PT above; 0.5 pt: house choice)
    assert float(page.mediabox.width) == pytest.approx(LETTER_PT[0], abs=0.5)
    assert float(page.mediabox.height) == pytest.approx(LETTER_PT[1], abs=0.5)
