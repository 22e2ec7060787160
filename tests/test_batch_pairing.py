"""Batch runs whose spec map pairs deliverables with their masters (``pairs:``).

One folder holds two masters at 96 kHz / 24-bit and deliverables at 44.1 kHz / 16-bit made from them,
plus one deliverable whose master is missing:

* ``alder_44k16.wav``: a careful conversion (long Kaiser-windowed polyphase filter, TPDF dither) of
  ``alder_96k24.wav``: meets the demo's derivation spec;
* ``birch_44k16.wav``: the same conversion of ``birch_96k24.wav`` scaled by 10^(-0.5/20) before
  the dither: 0.5 dB quieter (analytic: 20*log10 of the factor), outside the spec's +-0.1 dB;
* ``cedar_44k16.wav``: no ``cedar_96k24.wav`` beside it: unpaired.

Each file is 4 s long to keep the run short.
"""

from __future__ import annotations

import json
import os
import re

import jsonschema
import numpy as np
import pytest
import soundfile as sf
from scipy import signal

from masterqc.batch.runner import BatchConfig, run_batch
from masterqc.batch.specmap import load_spec_map
from masterqc.batch.summary_schema import summary_schema
from masterqc.compare.demo import _careful_resample, _to_16_bits
from masterqc.errors import SpecError

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DERIVATION_SPEC = os.path.join(ROOT, "specs_demo", "derivation-cd.yaml")
HOUSE_SPEC = os.path.join(ROOT, "specs_demo", "ostravel-house.yaml")


def _programme(seed, fs=96000, dur_s=4.0):
    """Stereo coloured noise with a slow level swell (invented test material)."""
    rng = np.random.default_rng(seed)
    n = int(fs * dur_s)
    x = signal.lfilter([1.0], [1.0, -0.9], rng.standard_normal((n, 2)), axis=0)
    x[:, 1] = 0.6 * x[:, 1] + 0.4 * x[:, 0]
    env = 0.5 + 0.5 * np.sin(2 * np.pi * 0.7 * np.arange(n) / fs) ** 2
    x = signal.sosfilt(signal.butter(8, 16000.0, fs=fs, output="sos"), x, axis=0)  # nothing for the filter to take
    return 0.3 * x / np.max(np.abs(x)) * env[:, None]


@pytest.fixture(scope="module")
def paired_run(tmp_path_factory):
    base = tmp_path_factory.mktemp("pairs")
    folder = base / "delivery"
    folder.mkdir()
    rng = np.random.default_rng(11)
    for name, seed, gain_db in (("alder", 1, 0.0), ("birch", 2, -0.5)):
        master = folder / f"{name}_96k24.wav"
        sf.write(master, _programme(seed), 96000, subtype="PCM_24")
        x24 = sf.read(master)[0]
        y = _careful_resample(x24, 96000, 44100) * 10 ** (gain_db / 20)
        sf.write(folder / f"{name}_44k16.wav", _to_16_bits(y, rng, dither=True), 44100, subtype="PCM_16")
    y = _careful_resample(_programme(3), 96000, 44100)
    sf.write(folder / "cedar_44k16.wav", _to_16_bits(y, rng, dither=True), 44100, subtype="PCM_16")
    spec_map = base / "map.yaml"
    spec_map.write_text(f"masterqc_spec_map: 1\nspecs:\n  - match: \"**\"\n    spec: {HOUSE_SPEC}\n"
                        f"pairs:\n  - deliverable: \"*_44k16.wav\"\n    master: \"*_96k24.wav\"\n"
                        f"    spec: {DERIVATION_SPEC}\n")
    out = base / "out"
    outcome = run_batch(BatchConfig(roots=[str(folder)], spec_path=str(spec_map), out_dir=str(out),
                                    formats=("json", "html"), jobs=1, quiet=True))
    return outcome, out


def _row(summary, name):
    return next(r for r in summary["pairs"] if r["deliverable"].endswith(name))


def test_every_deliverable_is_listed_with_its_master(paired_run):
    outcome, _ = paired_run
    pairs = outcome.summary["pairs"]
    assert [(r["deliverable"], r["master"]) for r in pairs] == [
        ("delivery/alder_44k16.wav", "delivery/alder_96k24.wav"),
        ("delivery/birch_44k16.wav", "delivery/birch_96k24.wav"),
        ("delivery/cedar_44k16.wav", None)]
    assert outcome.summary["counts"]["pairs"] == 3
    # every file is still checked against its own spec besides
    assert len(outcome.summary["files"]) == 5
    jsonschema.validate(outcome.summary, summary_schema())


def test_careful_deliverable_meets_the_derivation_spec(paired_run):
    outcome, out = paired_run
    row = _row(outcome.summary, "alder_44k16.wav")
    assert row["verdict"] == "pass", row
    assert row["identity"] == "same"
    result = json.loads((out / row["outputs"]["json"]).read_text())
    # analytic: no gain was applied, TPDF dither adds no gain; the spec's limit is +-0.1 dB
    assert abs(result["channels"]["gain_db"]) < 0.01


def test_a_gain_change_fails_the_pair_and_the_run(paired_run):
    outcome, out = paired_run
    row = _row(outcome.summary, "birch_44k16.wav")
    assert row["verdict"] == "fail"
    result = json.loads((out / row["outputs"]["json"]).read_text())
    # analytic: the deliverable was scaled by 10^(-0.5/20), i.e. -0.5 dB (issue 14: within 0.01 dB)
    assert result["channels"]["gain_db"] == pytest.approx(-0.5, abs=0.01)
    # ITU-R BS.1770-5 §2: loudness is 10*log10 of the weighted mean square (the relative gate moves with
    # it), so a gain of -0.5 dB lowers integrated loudness by 0.5 LU; the spec allows +-0.2 LU
    assert result["peaks_loudness"]["loudness_change_lu"] == pytest.approx(-0.5, abs=0.01)
    failed = [f["check"] for f in result["findings"] if f["status"] == "fail"]
    assert failed == ["derivation.gain", "derivation.loudness_change"]
    # the summary says it as an engineer would, to 0.01 dB (the analytic -0.50 dB)
    from masterqc.compare.render import summary_sentences
    assert summary_sentences(result)[2].startswith(
        "The deliverable is 0.50 dB quieter than the master on both channels, with its channels in the master's "
        "order and the master's polarity.")
    # judged at the spec's 0.1 dB step, in words
    assert row["first_problem"] == ("The deliverable is 0.5 dB quieter than the master on both channels. "
                                    "The spec allows -0.1 to 0.1 dB.")
    assert outcome.summary["counts"]["pairs_failed"] == 2
    assert outcome.exit_code == 1


def test_a_deliverable_without_its_master_is_unpaired(paired_run):
    outcome, _ = paired_run
    row = _row(outcome.summary, "cedar_44k16.wav")
    assert row["verdict"] == "unpaired"
    assert row["outputs"] == {}
    assert "cedar_96k24.wav" in row["first_problem"]


def test_index_links_each_comparison_report(paired_run):
    outcome, out = paired_run
    page = (out / "index.html").read_text()
    section = page[page.index('<section id="pairs">'):]
    section = section[:section.index("</section>")]
    hrefs = re.findall(r'href="([^"]+)"', section)
    assert sorted(os.path.basename(h) for h in hrefs) == [
        "alder_44k16.from.alder_96k24.html", "alder_44k16.from.alder_96k24.json",
        "birch_44k16.from.birch_96k24.html", "birch_44k16.from.birch_96k24.json"]
    for h in hrefs:
        assert (out / h).is_file(), h
    assert "NO MASTER" in section and "cedar_44k16.wav" in section


def test_a_bad_pairing_rule_names_its_key(tmp_path):
    spec_map = tmp_path / "map.yaml"
    spec_map.write_text(f"masterqc_spec_map: 1\nspecs:\n  - match: \"**\"\n    spec: {HOUSE_SPEC}\n"
                        "pairs:\n  - deliverable: \"*_44k16_*.wav\"\n    master: \"*_96k24.wav\"\n")
    with pytest.raises(SpecError) as err:
        load_spec_map(str(spec_map))
    assert "pairs[0].deliverable" in str(err.value)
    assert "exactly one '*'" in str(err.value)
