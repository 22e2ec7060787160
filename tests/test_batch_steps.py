"""The steps of a batch run, each on its own: plan, hash, schedule, summarise.

References: content hashes against Python's hashlib SHA-256 (FIPS 180-4); the rest
are the batch's own rules (house choice), checked on small hand-made inputs.
"""

from __future__ import annotations

import hashlib
import os

import pytest

from masterqc.batch.discover import Found
from masterqc.batch.execute import InlineBackend
from masterqc.batch.hashing import hash_items
from masterqc.batch.ledger import Ledger
from masterqc.batch.plan import FILES_DIR, plan_items, root_labels
from masterqc.batch.releases import parse_release_mode
from masterqc.batch.schedule import Scheduler, first_problem, how_shown, slim
from masterqc.batch.specmap import Rule, Unusable
from masterqc.batch.summarise import change, file_row, missing_audio, problems
from masterqc.batch.work import hash_task


class _Map:
    """A spec map stand-in: ``bad/`` masters fall under an invalid folder spec, the rest under one rule."""

    path, libraries = "map.yaml", ()

    def lookup(self, rel, root=None):
        if rel.startswith("bad/"):
            return Unusable("bad/spec.yaml", "bad/spec.yaml: not a spec")
        return Rule("**", None, "spec.yaml", object(), "key-1")


def _found(root, rel):
    p = os.path.join(root, *rel.split("/"))
    return Found(path=p, real=p, root=root, rel=rel, by_content=True)


# ---------------------------------------------------------------- plan

def test_plan_gives_distinct_safe_names_releases_and_rules(tmp_path):
    root = str(tmp_path / "Album One")
    os.mkdir(root)  # a root that is a folder is labelled by its own name
    found = [_found(root, "disc 1/Mix.wav"), _found(root, "disc 1/mix.flac"), _found(root, "bad/x.wav")]
    items = plan_items(found, [root], _Map(), parse_release_mode("folder"), str(tmp_path / "out"))
    assert [it.stem for it in items] == ["Mix", "mix-2", "x"]  # case-folding file systems: -2
    assert [it.out_rel for it in items] == [f"{FILES_DIR}/Album_One/disc_1"] * 2 + [f"{FILES_DIR}/Album_One/bad"]
    assert items[0].out_folder == os.path.join(str(tmp_path / "out"), FILES_DIR, "Album_One", "disc_1")
    assert [it.rel for it in items] == ["Album_One/disc 1/Mix.wav", "Album_One/disc 1/mix.flac", "Album_One/bad/x.wav"]
    assert [it.release for it in items] == ["Album_One/disc 1", "Album_One/disc 1", "Album_One/bad"]
    assert items[0].rule.key == "key-1" and items[0].rule_error is None
    assert items[2].rule is None and items[2].rule_error == "bad/spec.yaml: not a spec"
    assert items[1].out_stem == f"{FILES_DIR}/Album_One/disc_1/mix-2"


def test_root_labels_are_distinct(tmp_path):
    a, b = tmp_path / "x" / "masters", tmp_path / "y" / "Masters"
    a.mkdir(parents=True)
    b.mkdir(parents=True)
    assert list(root_labels([str(a), str(b)]).values()) == ["masters", "Masters-2"]


# ---------------------------------------------------------------- hash

def test_hash_reads_only_new_or_changed_files(tmp_path):
    files = []
    for i in range(3):
        p = tmp_path / f"{i}.wav"
        p.write_bytes(bytes([i]) * (1000 + i))
        files.append(p)
    root = str(tmp_path)
    items = plan_items([_found(root, p.name) for p in files], [root], _Map(), parse_release_mode("folder"),
                       str(tmp_path / "out"))
    with Ledger(tmp_path / "l.sqlite") as ledger:
        assert hash_items(items, ledger, InlineBackend(), hash_task) == 3
        assert [it.sha256 for it in items] == [hashlib.sha256(p.read_bytes()).hexdigest() for p in files]
        assert [it.size_bytes for it in items] == [1000, 1001, 1002]  # by construction: 1000 + i bytes
        again = plan_items([_found(root, p.name) for p in files], [root], _Map(), parse_release_mode("folder"),
                           str(tmp_path / "out"))
        assert hash_items(again, ledger, InlineBackend(), hash_task) == 0  # the stat cache: nothing read
        assert [it.sha256 for it in again] == [it.sha256 for it in items]
        files[1].write_bytes(b"changed")
        os.remove(files[2])
        third = plan_items([_found(root, p.name) for p in files], [root], _Map(), parse_release_mode("folder"),
                           str(tmp_path / "out"))
        assert hash_items(third, ledger, InlineBackend(), hash_task) == 1
        assert third[1].sha256 == hashlib.sha256(b"changed").hexdigest()
        assert third[2].sha256 is None and third[2].hash_error.startswith("cannot be read")


# ---------------------------------------------------------------- schedule

def _result(*statuses):
    return {"verdict": "x", "findings": [{"check": f"c{i}", "status": s, "message": f"m{i} {s}"}
                                         for i, s in enumerate(statuses)],
            "series": {"gating_block_histogram": [1, 2], "momentary_lufs": [0.0] * 10},
            "metadata": {"audio_data": {"missing_bytes": 0}, "bext": None}}


def test_first_problem_prefers_errors_then_failures_then_warnings():
    assert first_problem(_result("pass", "warn", "fail")) == "m2 fail"
    assert first_problem(_result("warn", "error", "fail")) == "m1 error"
    assert first_problem(_result("pass", "skipped")) is None


def test_slim_keeps_what_the_run_outputs_need():
    s = slim(_result("pass"))
    assert s["series"] == {"gating_block_histogram": [1, 2]} and s["metadata"] == {"audio_data": {"missing_bytes": 0}}
    assert "momentary_lufs" not in s["series"]


def test_scheduler_refuses_an_output_folder_a_link_leads_outside(tmp_path):
    out, elsewhere = tmp_path / "out", tmp_path / "elsewhere"
    out.mkdir()
    elsewhere.mkdir()
    os.symlink(elsewhere, out / "files")
    s = Scheduler(out_dir=str(out), formats=("json",), ledger=None, run_id=1, progress=None, base_options=None,
                  specmap=_Map(), prev_rows={})
    assert s.safe_folder(str(out / "files" / "a")) is False
    assert not (elsewhere / "a").exists()  # not even created
    assert s.safe_folder(str(out / "inside" / "a")) is True and (out / "inside" / "a").is_dir()


def test_fresh_reports_need_the_same_content_spec_and_name(tmp_path):
    root = str(tmp_path)
    (it,) = plan_items([_found(root, "a.wav")], [root], _Map(), parse_release_mode("folder"), str(tmp_path / "out"))
    it.sha256 = "ab" * 32
    os.makedirs(it.out_folder)
    (tmp_path / "out" / FILES_DIR / tmp_path.name / "a.html").write_text("old page")
    prev = {"content_sha256": it.sha256, "spec_key": "key-1", "out_stem": it.out_stem}
    s = Scheduler(out_dir=str(tmp_path / "out"), formats=("json", "html", "pdf"), ledger=None, run_id=1,
                  progress=None, base_options=None, specmap=_Map(), prev_rows={it.path: prev})
    assert s.fresh_reports(it) == ["html"]  # the PDF was never written
    s.prev_rows[it.path] = dict(prev, spec_key="key-2")
    assert s.fresh_reports(it) == []


def test_how_a_file_was_done_in_words():
    class It:
        analysed, reused, how = False, True, "rejudged"
    assert how_shown(It) == "re-judged"
    It.how = "identical"
    assert how_shown(It) == "reused"
    It.analysed = True
    assert how_shown(It) == "checked"


# ---------------------------------------------------------------- summarise

@pytest.mark.parametrize("before,now,had,expected", [
    (None, "pass", False, "new"), ("pass", "fail", False, "new"), (None, "fail", True, "new"),
    ("fail", "warn", True, "fixed"), ("error", "pass", True, "fixed"), ("warn", "error", True, "newly_failing"),
    ("pass", "warn", True, "changed"), ("fail", "error", True, "changed"), ("pass", "pass", True, "unchanged"),
])
def test_change_since_the_previous_run(before, now, had, expected):
    assert change(before, now, had) == expected


def test_file_row_counts_findings_and_lists_problems(tmp_path):
    root = str(tmp_path)
    (it,) = plan_items([_found(root, "a.wav")], [root], _Map(), parse_release_mode("folder"), str(tmp_path / "out"))
    it.result = dict(_result("pass", "fail", "warn", "skipped", "fail"), verdict="fail",
                     outputs={"json": "a.json"}, measurements={"integrated_lufs": -14.2})
    it.result["metadata"]["audio_data"] = {"missing_bytes": 96000, "missing_s": 0.5}
    row = file_row(it, {"verdict": "pass"}, True)
    assert row["counts"] == {"pass": 1, "warn": 1, "fail": 2, "skipped": 1, "error": 0}
    # worst first (fails before warns), spec order kept within a state
    assert [p["check"] for p in problems(it.result)] == ["c1", "c4", "c2"]
    assert row["change"] == "newly_failing" and row["previous_verdict"] == "pass"
    assert row["integrated_lufs"] == -14.2 and row["outputs"] == {"json": f"{it.out_rel}/a.json"}
    assert row["missing_audio"] == missing_audio(it.result)
    assert row["missing_audio"]["missing_text"] == "0:00:00.500 (96,000 bytes) of audio missing"
