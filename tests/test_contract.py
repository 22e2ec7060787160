"""The result contract (masterqc.contract): units, declarations, versions, generated schema.

House choices throughout (the result format is the project's own); the unit
spellings LUFS, LU, dBTP and dBFS are those of ITU-R BS.1770 and EBU R 128.
"""

from __future__ import annotations

import json

import jsonschema
import pytest

from masterqc.cli import main
from masterqc.contract import (RESULT_FORMAT_VERSION, UNITS, ResultFormatError, parse_result, unit_of_key,
                               upgrade_result)
from masterqc.report import fmt
from masterqc.report.text import TABLE_ROWS
from masterqc.schema import measurement_properties, result_schema
from masterqc.spec import types


def test_one_unit_table_read_by_judge_text_and_report():
    # percent was 1 decimal in the spec's table and 2 in the report's before; one table now
    for code, unit in UNITS.items():
        assert types.unit_decimals(code) == unit.decimals
        assert types.unit_label(code) == unit.label
        if unit.label:
            assert fmt.UNIT_DECIMALS[unit.label] == unit.decimals
    assert fmt.unit_of_key("phase_correlation_below_percent") == ("%", 1)
    for key, _label, unit, digits in TABLE_ROWS:
        assert (unit, digits) == (unit_of_key(key).label, unit_of_key(key).decimals)


def test_every_measurement_declares_unit_and_meaning():
    props = measurement_properties()
    assert len(props) > 80
    for key, frag in props.items():
        assert frag.get("description"), key
        unit = frag.get("x-unit")
        assert unit == "none" or unit in UNITS, (key, unit)
        named = unit_of_key(key)
        if f"_{unit}_" in key:  # the unit named inside the key (true_peak_underread_max_db_to_0_45fs)
            named = UNITS[unit]
        if named is not None and unit != "none" and key not in ("bandwidth_edge_slope_db_per_khz",):
            assert named.code == unit, f"{key}: key names {named.code}, declared {unit}"
        if frag.get("type") in ("number", ["number", "null"], "integer", ["integer", "null"]) :
            assert named is not None or unit in ("corr", "fraction"), f"{key}: a number without a unit in its key"


def test_upgrade_of_a_format_1_result_renames_keys_and_converts_fractions():
    old = {"tool": {"name": "masterqc", "version": "0.1.0"}, "file": {"path": "a.wav"},
           "measurements": {"gating_block_count": 12, "gated_block_count": 9, "clipped_runs": 2,
                            "phase_correlation_below_share": 0.25, "effective_bit_depth": 16,
                            "phase_correlation_below_share_per_pair": [0.25, None]}}
    new = upgrade_result(old)
    assert new["result_format"] == RESULT_FORMAT_VERSION
    m = new["measurements"]
    # by construction: the fraction 0.25 is 25.0 percent (house choice: results carry percents since format 2)
    assert m == {"loudness_block_count": 12, "loudness_block_above_gates_count": 9, "clipped_run_count": 2,
                 "phase_correlation_below_percent": 25.0, "effective_bit_depth_bits": 16,
                 "phase_correlation_below_percent_per_pair": [25.0, None]}
    assert "gating_block_count" in old["measurements"]  # the input is left alone


def test_newer_result_format_is_refused_with_a_clear_message(tmp_path, capsys):
    with pytest.raises(ResultFormatError, match="result format 99 by a newer masterqc"):
        upgrade_result({"result_format": 99, "tool": {"name": "masterqc", "version": "9"}, "file": {}}, "x.json")
    p = tmp_path / "future.json"
    p.write_text(json.dumps({"result_format": 99, "tool": {"name": "masterqc", "version": "9"},
                             "file": {"path": "a.wav"}, "format": {}, "measurements": {}}))
    assert main(["report", str(p), "--format", "html"]) == 2
    assert "newer masterqc" in capsys.readouterr().err


def test_parse_result_names_the_key_that_does_not_fit():
    with pytest.raises(ResultFormatError, match="findings.0.status"):
        parse_result({"result_format": RESULT_FORMAT_VERSION, "tool": {"name": "masterqc", "version": "1"},
                      "file": {"path": "a"}, "findings": [{"check": "x", "status": "nope", "message": "m"}]})


def test_schema_is_generated_from_the_models_and_rejects_a_wrong_finding():
    schema = result_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    assert schema["properties"]["result_format"] == {"const": RESULT_FORMAT_VERSION,
                                                     "description": "version of the result format"}
    bad = {"result_format": RESULT_FORMAT_VERSION, "tool": {"name": "masterqc", "version": "1"},
           "file": {"path": "a"}, "spec": {"name": "s", "path": "s.yaml", "sha256": "0"}, "verdict": "error",
           "findings": [{"check": "x", "status": "error", "message": "m", "limit_low": "high"}]}
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)
    bad["findings"][0]["limit_low"] = None
    jsonschema.validate(bad, schema)
