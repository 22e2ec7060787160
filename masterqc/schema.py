"""JSON Schemas of the result object, generated from the code.

The ``measurements`` properties come from every analyzer's
``measurement_schema``; the spec part of a check result (``spec``, ``findings``,
``verdict``) is described here once.  :func:`spec_schema` lives in
:mod:`masterqc.spec`.
"""

from __future__ import annotations

from masterqc.audio.container import METADATA_SCHEMA
from masterqc.measure.registry import analyzer_classes

STATUS = ["pass", "warn", "fail", "skipped", "error"]
VERDICT = ["pass", "warn", "fail", "error"]

FINDING_SCHEMA = {
    "type": "object",
    "required": ["check", "status", "message"],
    "properties": {
        "check": {"type": "string"},
        "status": {"enum": STATUS},
        "severity": {"enum": ["fail", "warn", None]},
        "measured": {},
        "measured_raw": {},
        "measured_text": {"type": ["string", "null"]},
        "decimals": {"type": ["integer", "null"]},
        "limit": {"type": ["string", "null"]},
        "limit_low": {"type": ["number", "null"]},
        "limit_high": {"type": ["number", "null"]},
        "miss": {"type": ["number", "null"]},
        "unit": {"type": ["string", "null"]},
        "message": {"type": "string"},
        "where_s": {"type": "array", "items": {"type": "array", "items": {"type": "number"},
                                                "minItems": 2, "maxItems": 2}},
    },
}


_NUM = {"type": ["number", "null"]}
_TEXT = {"type": ["string", "null"]}
#: normalisation headroom figures (masterqc.judge.normalisation.headroom)
NORMALISATION_SCHEMA = {
    "type": "object",
    "required": ["target_lufs", "ceiling_dbtp", "gain_db", "true_peak_after_gain_dbtp", "limiting_needed_db"],
    "properties": {"target_lufs": _NUM, "target_source": _TEXT, "ceiling_dbtp": _NUM, "ceiling_source": _TEXT,
                   "gain_db": _NUM, "true_peak_after_gain_dbtp": _NUM,
                   "limiting_needed_db": {"type": ["number", "null"], "minimum": 0}, "note": _TEXT},
}


def measurement_properties() -> dict:
    props = {}
    for cls in analyzer_classes():
        props.update(cls.measurement_schema)
    return props


def result_schema() -> dict:
    """JSON Schema (draft 2020-12) of ``masterqc measure --json`` and of a check result."""
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "title": "masterqc result",
        "type": "object",
        "required": ["tool", "file"],
        # a check result for a file that could not be read (verdict "error") carries only
        # tool, file (path, and size/sha256 when readable), spec, findings and verdict
        "if": {"required": ["verdict"], "properties": {"verdict": {"const": "error"}}},
        "then": {"required": ["spec", "findings", "verdict"]},
        "else": {"required": ["format", "metadata", "measurements"],
                 "properties": {"file": {"required": ["path", "size_bytes", "sha256"]}}},
        "properties": {
            "tool": {"type": "object", "required": ["name", "version"],
                     "properties": {"name": {"const": "masterqc"}, "version": {"type": "string"}}},
            "file": {"type": "object", "required": ["path"],
                     "properties": {"path": {"type": "string"}, "size_bytes": {"type": "integer"},
                                    "sha256": {"type": "string", "pattern": "^[0-9a-f]{64}$"}}},
            "format": {"type": "object",
                       "required": ["container", "encoding", "sample_rate_hz", "bit_depth", "channels",
                                    "channel_layout", "frames", "duration_s"],
                       "properties": {
                           "container": {"type": "string"}, "encoding": {"type": "string"},
                           "sample_rate_hz": {"type": "integer"}, "bit_depth": {"type": "integer"},
                           "channels": {"type": "integer", "minimum": 1},
                           "channel_layout": {"type": "array", "items": {"type": "string"}},
                           "channel_layout_source": {"enum": ["channel_mask", "conventional", "override", "unknown"]},
                           "frames": {"type": "integer", "minimum": 1},
                           "duration_s": {"type": "number"}}},
            "metadata": METADATA_SCHEMA,
            "measurements": {"type": "object", "properties": measurement_properties(),
                             "required": sorted(measurement_properties())},
            "series": {"type": "object"},
            "settings": {"type": "object"},
            "spec": {"type": "object", "required": ["name", "path", "sha256"],
                     "properties": {"name": {"type": "string"}, "path": {"type": "string"},
                                    "sha256": {"type": "string"},
                                    "files": {"type": "array", "items": {
                                        "type": "object", "required": ["path", "sha256"],
                                        "properties": {"path": {"type": "string"},
                                                       "sha256": {"type": "string"}}}}}},
            "normalisation": NORMALISATION_SCHEMA,
            "outputs": {"type": "object", "additionalProperties": {"type": "string"},
                        "description": "file names written for this master, by format"},
            "error": {"type": "object", "required": ["cause"],
                      "properties": {"cause": {"type": "string"}, "offset": {"type": ["integer", "null"]}},
                      "description": "why the master could not be read (error results only)"},
            "findings": {"type": "array", "items": FINDING_SCHEMA},
            "verdict": {"enum": VERDICT},
        },
    }
