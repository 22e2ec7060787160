"""``masterqc report RESULT.json``: re-render without re-measuring; clear exit-2 errors."""

from __future__ import annotations

import json

import pytest

from masterqc.cli import main
from report_fixtures import SPEC_YAML, tone_frames, write_bwf


@pytest.fixture(scope="module")
def checked(tmp_path_factory):
    """``masterqc check`` of one master with JSON and HTML written."""
    d = tmp_path_factory.mktemp("report_cli")
    wav = d / "Brelloway_take2.wav"
    write_bwf(wav, tone_frames(6.0))
    spec = d / "spec.yaml"
    spec.write_text(SPEC_YAML, encoding="utf-8")
    out = d / "out"
    rc = main(["check", str(wav), "--spec", str(spec), "--out", str(out), "--format", "json,html", "--quiet"])
    assert rc == 1  # the fixture spec's -25 dBTP ceiling fails the -20 dBFS tone
    return out


def test_rerender_from_json_gives_the_same_html(checked, tmp_path, capsys, monkeypatch):
    import masterqc.measure.engine as engine

    def no_measuring(*_a, **_k):  # re-rendering must never measure
        raise AssertionError("measure_file called by report")

    monkeypatch.setattr(engine, "measure_file", no_measuring)
    rc = main(["report", str(checked / "Brelloway_take2.json"), "--out", str(tmp_path), "--format", "html"])
    assert rc == 0
    assert (tmp_path / "Brelloway_take2.html").read_bytes() == (checked / "Brelloway_take2.html").read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["Brelloway_take2.html"]
    assert "FAIL" in capsys.readouterr().out


def test_missing_result_file_is_exit_2_naming_it(tmp_path, capsys):
    missing = tmp_path / "nowhere.json"
    assert main(["report", str(missing)]) == 2
    err = capsys.readouterr().err
    assert str(missing) in err and "no such result file" in err


def test_json_syntax_error_names_line_and_column(tmp_path, capsys):
    bad = tmp_path / "broken.json"
    bad.write_text('{\n  "tool": {"name": "masterqc"},\n  "file": {"path": "x.wav",}\n}\n')
    assert main(["report", str(bad)]) == 2
    err = capsys.readouterr().err
    # line 3 is '  "file": {"path": "x.wav",}': the "}" after the trailing comma is character 28
    assert f"{bad}: invalid JSON at line 3, column 28" in err


@pytest.mark.parametrize("content, words", [
    ("[1, 2]", "top level is a list"),
    ('{"tool": {"name": "other"}, "file": {}}', "tool.name is 'other'"),
    ('{"file": {"path": "a.wav"}, "format": {}}', "key 'measurements' is missing"),
])
def test_json_that_is_not_a_result_is_exit_2(tmp_path, capsys, content, words):
    p = tmp_path / "odd.json"
    p.write_text(content)
    assert main(["report", str(p)]) == 2
    assert words in capsys.readouterr().err


def test_bad_format_is_exit_2_and_nothing_written(checked, tmp_path, capsys):
    assert main(["report", str(checked / "Brelloway_take2.json"), "--out", str(tmp_path), "--format", "html,docx"]) == 2
    assert "unknown format docx" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []


def test_one_bad_name_stops_before_any_file_is_written(checked, tmp_path):
    rc = main(["report", str(checked / "Brelloway_take2.json"), str(tmp_path / "typo.json"),
               "--out", str(tmp_path / "o"), "--format", "html"])
    assert rc == 2
    assert not (tmp_path / "o").exists()


def test_saved_result_is_valid_json_for_the_renderer(checked):
    result = json.loads((checked / "Brelloway_take2.json").read_text())
    assert result["outputs"] == {"html": "Brelloway_take2.html", "json": "Brelloway_take2.json",
                                 "events": "Brelloway_take2.events.csv"}
