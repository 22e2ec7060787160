"""JSON Schema (draft 2020-12) of ``summary.json``, the machine-readable record of one batch run.

Printed by ``masterqc runs schema``; every summary the tests produce is validated against it.
"""

from __future__ import annotations

_NUM = {"type": ["number", "null"]}
_INT = {"type": "integer", "minimum": 0}
_STR_OR_NULL = {"type": ["string", "null"]}
_VERDICT = {"enum": ["pass", "warn", "fail", "error"]}
_STATUS = {"enum": ["pass", "warn", "fail", "skipped", "error"]}

_PROBLEM = {"type": "object", "required": ["check", "status", "message"], "additionalProperties": False,
            "properties": {"check": {"type": "string"}, "status": _STATUS, "message": {"type": "string"}}}

_FILE = {
    "type": "object", "additionalProperties": False,
    "required": ["path", "rel", "release", "verdict", "analysed", "change", "outputs", "problems", "counts"],
    "properties": {
        "path": {"type": "string", "description": "absolute path of the master as reached"},
        "rel": {"type": "string", "description": "folder label / path below the folder argument"},
        "release": _STR_OR_NULL,
        "verdict": _VERDICT,
        "analysed": {"type": "boolean", "description": "true: this file was analysed in this run"},
        "reused": {"type": "boolean", "description": "true: the result came from the ledger or an identical file "
                                                      "(false for a file that was neither analysed nor reused: "
                                                      "an error row)"},
        "spec_from_delivery_folder": {"type": "boolean",
                                      "description": "true: the spec came with the masters (spec_in_folder)"},
        "missing_audio": {"anyOf": [{"type": "null"}, {
            "type": "object", "required": ["missing_bytes", "missing_s", "missing_text"],
            "description": "a truncated master: audio its header declares that the file does not hold",
            "properties": {"missing_bytes": _INT, "missing_s": {"type": "number"},
                           "missing_text": {"type": "string"}}}]},
        "how": {"enum": ["measured", "rejudged", "identical", None],
                "description": "measured: the audio was read and measured in this run; rejudged: the stored "
                               "measurements (same content, same measurement settings) were judged again, no audio "
                               "read; identical: the result of an identical file in this run; null: not checked"},
        "elapsed_s": {"type": "number", "minimum": 0},
        "cpu_s": {"type": "number", "minimum": 0},
        "change": {"enum": ["new", "fixed", "newly_failing", "changed", "unchanged"]},
        "previous_verdict": {"anyOf": [_VERDICT, {"type": "null"}]},
        "sha256": {"type": ["string", "null"], "pattern": "^[0-9a-f]{64}$"},
        "size_bytes": _INT,
        "spec": _STR_OR_NULL,
        "spec_key": {"type": ["string", "null"], "pattern": "^[0-9a-f]{64}$"},
        "integrated_lufs": _NUM, "true_peak_dbtp": _NUM, "loudness_range_lu": _NUM, "duration_s": _NUM,
        "sample_rate_hz": {"type": ["integer", "null"]}, "bit_depth": {"type": ["integer", "null"]},
        "channels": {"type": ["integer", "null"]},
        "counts": {"type": "object", "additionalProperties": False,
                   "properties": {s: _INT for s in ("pass", "warn", "fail", "skipped", "error")}},
        "first_problem": _STR_OR_NULL,
        "problems": {"type": "array", "items": _PROBLEM,
                     "description": "every error, failure and warning of the file, worst first "
                                    "(errors, failures, warnings; the spec's order within one state)"},
        "outputs": {"type": "object", "description": "format -> path relative to the output folder",
                    "additionalProperties": {"type": "string", "pattern": "^files/"}},
    },
}

_RELEASE = {
    "type": "object", "additionalProperties": False,
    "required": ["id", "files", "measurements", "findings", "verdict", "judged"],
    "properties": {
        "id": {"type": "string"}, "folder": {"type": "string"},
        "files": {"type": "array", "items": {"type": "string"}},
        "spec": _STR_OR_NULL, "judged": {"type": "boolean"}, "mixed_specs": {"type": "boolean"},
        "verdict": {"anyOf": [_VERDICT, {"type": "null"}]},
        "findings": {"type": "array", "items": {"type": "object", "required": ["check", "status", "message"]}},
        "measurements": {
            "type": "object", "additionalProperties": False,
            "properties": {
                "track_count": _INT, "unreadable_count": _INT,
                "pooled_integrated_lufs": _NUM, "pooled_error_bound_lu": _NUM,
                "loudest_track_lufs": _NUM, "quietest_track_lufs": _NUM, "track_loudness_spread_lu": _NUM,
                "sample_rates_hz": {"type": "array", "items": {"type": "integer"}},
                "sample_formats": {"type": "array", "items": {"type": "string"}},
                "channel_counts": {"type": "array", "items": {"type": "integer"}},
                "total_duration_s": {"type": "number", "minimum": 0},
            },
        },
    },
}


_PAIR = {
    "type": "object", "additionalProperties": False,
    "required": ["deliverable", "master", "rule", "verdict", "outputs"],
    "description": "a deliverable compared with its master (spec map pairs:, see masterqc.batch.pairing)",
    "properties": {
        "deliverable": {"type": "string", "description": "folder label / path of the deliverable"},
        "master": {"type": ["string", "null"], "description": "the master it was compared with; null: none found"},
        "rule": {"type": "string", "description": "the pairing rule, DELIVERABLE_GLOB=MASTER_GLOB"},
        "spec": _STR_OR_NULL,
        "verdict": {"enum": ["pass", "warn", "fail", "error", "measured", "unpaired"],
                    "description": "the derivation: section's verdict; measured: the spec has none; unpaired: "
                                   "no master in the deliverable's folder"},
        "identity": {"enum": ["same", "different_mix", "different_programme", None]},
        "summary": _STR_OR_NULL, "first_problem": _STR_OR_NULL,
        "outputs": {"type": "object", "description": "format -> comparison report, relative to the output folder",
                    "additionalProperties": {"type": "string", "pattern": "^files/"}},
    },
}


def summary_schema() -> dict:
    """The schema of ``summary.json``."""
    names = {"type": "array", "items": {"type": "string"}}
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "title": "masterqc batch run summary",
        "type": "object",
        "required": ["tool", "run", "exit_code", "counts", "previous_run", "changes", "releases", "files",
                     "skipped_paths"],
        "additionalProperties": False,
        "properties": {
            "tool": {"type": "object", "required": ["name", "version"]},
            "run": {"type": "object", "required": ["id", "started_utc", "elapsed_s", "roots", "out_dir", "ledger"],
                    "properties": {"id": _INT, "started_utc": {"type": "string"}, "finished_utc": {"type": "string"},
                                   "elapsed_s": {"type": "number"}, "roots": names, "out_dir": {"type": "string"},
                                   "ledger": {"type": "string"}, "spec": {"type": "string"},
                                   "spec_map": {"type": "boolean"}, "backend": {"type": "string"},
                                   "formats": names, "releases_mode": {"type": "string",
                                                                     "description": "release grouping: top "
                                                                     "(default), folder, root, depth:N or none"}}},
            "exit_code": {"enum": [0, 1, 3]},
            "counts": {"type": "object", "additionalProperties": False,
                       "properties": {k: _INT for k in ("pass", "warn", "fail", "error", "files", "analysed",
                                                        "reused", "not_analysed", "measured", "rejudged",
                                                        "releases",
                                                        "releases_failed", "pairs", "pairs_failed")}},
            "previous_run": {"anyOf": [{"type": "null"},
                                       {"type": "object", "required": ["run_id", "started_utc"]}]},
            "changes": {"type": "object", "additionalProperties": False,
                        "required": ["new", "fixed", "newly_failing", "gone"],
                        "properties": {k: names for k in ("new", "fixed", "newly_failing", "gone")}},
            "releases": {"type": "array", "items": _RELEASE},
            "files": {"type": "array", "items": _FILE},
            "pairs": {"type": "array", "items": _PAIR},
            "skipped_paths": {"type": "array", "items": {"type": "object", "required": ["path", "message"]}},
        },
    }
