"""Requirement shapes of the delivery spec (masterqc.spec.types): limits, validation messages,
units and the published schema.

Expected values are the spec format's own rules (house choice, written in specs_demo/FORMAT.md
and the module docstring) and decimal arithmetic: -23.0 +- 0.7 is exactly -23.7 .. -22.3.
"""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from masterqc.spec.types import (UNITS, allowed, bounds, ceiling, difference_unit, floor, target, unit_decimals,
                                 unit_label)


def _error(model, data) -> str:
    with pytest.raises(ValidationError) as exc:
        model.model_validate(data)
    errors = exc.value.errors()
    assert len(errors) == 1, errors
    return errors[0]["msg"]


def test_units_table():
    assert [unit_label(u) for u in ("lufs", "lu", "dbtp", "dbfs", "db", "s", "hz", "percent", "count")] == \
        ["LUFS", "LU", "dBTP", "dBFS", "dB", "s", "Hz", "%", ""]
    assert [difference_unit(u) for u in ("lufs", "lu", "dbtp", "dbfs", "db", "s", "hz")] == \
        ["lu", "lu", "db", "db", "db", "s", "hz"]
    # house choice: the project's unit table (masterqc/contract.py UNITS; DEVELOPERS.md, "The result contract")
    assert [unit_decimals(u) for u in ("lufs", "dbtp", "s", "ms", "hz", "percent", "count", "bits", "corr")] == \
        [1, 1, 3, 1, 0, 1, 0, 0, 2]
    # a unit outside the table is shown as written, at 3 decimals
    assert unit_label("furlong") == "furlong" and unit_decimals("furlong") == 3
    assert set(UNITS) >= {"lufs", "dbtp", "s", "hz", "corr"}


def test_ceiling_floor_bounds_limits_and_margin():
    c = ceiling("dbtp").model_validate({"max_dbtp": -1.0, "warn_margin_db": 0.3})
    assert c.limits() == (None, -1.0) and c.warn_margin == 0.3 and c.severity == "fail" and c.unit == "dbtp"
    f = floor("lufs").model_validate({"min_lufs": -30.0, "severity": "warn"})
    assert f.limits() == (-30.0, None) and f.warn_margin is None and f.severity == "warn"
    # by construction: limits() hands back the values validated here (the spec format's rule, house choice)
    b = bounds("s").model_validate({"min_s": 10.0})
    assert b.limits() == (10.0, None)
    assert bounds("s").model_validate({"max_s": 60.0}).limits() == (None, 60.0)
    assert bounds("s").model_validate({"min_s": 60.0, "max_s": 60.0}).limits() == (60.0, 60.0)


def test_bounds_messages():
    assert _error(bounds("s"), {}) == "Value error, give min_s, max_s or both"
    assert _error(bounds("s"), {"min_s": 61.0, "max_s": 60.0}) == \
        "Value error, contradictory limits: min_s (61) is above max_s (60)"


def test_target_limits_are_decimal_and_target_value():
    # house choice (the spec format): target +- tolerance in exact decimals, -23.0 -+ 0.7 = -23.7 .. -22.3;
    # a min/max pair has its middle as the target, (-24 + -20) / 2 = -22
    t = target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": 0.7})
    assert t.limits() == (-23.7, -22.3) and t.target_value == -23.0
    m = target("lufs").model_validate({"min_lufs": -24.0, "max_lufs": -20.0})
    assert m.limits() == (-24.0, -20.0) and m.target_value == -22.0
    assert target("lufs").model_validate({"max_lufs": -20.0}).target_value is None
    assert target("lufs").model_validate({"min_lufs": -20.0}).target_value is None
    assert target("lufs").model_validate({"target_lufs": -16.0, "tolerance_lu": 0.0}).limits() == (-16.0, -16.0)


@pytest.mark.parametrize("data, msg", [
    ({"target_lufs": -23.0}, "target_lufs needs tolerance_lu (e.g. tolerance_lu: 1.0)"),
    ({"target_lufs": -23.0, "tolerance_lu": 1.0, "max_lufs": -20.0},
     "give either target_lufs with tolerance_lu, or min_lufs/max_lufs, not both"),
    ({"target_lufs": -23.0, "tolerance_lu": 1.0, "min_lufs": -30.0},
     "give either target_lufs with tolerance_lu, or min_lufs/max_lufs, not both"),
    ({"tolerance_lu": 1.0}, "tolerance_lu needs target_lufs"),
    ({}, "give target_lufs with tolerance_lu, or min_lufs/max_lufs"),
    ({"min_lufs": -20.0, "max_lufs": -24.5}, "contradictory limits: min_lufs (-20) is above max_lufs (-24.5)"),
])
def test_target_messages(data, msg):
    assert _error(target("lufs"), data) == "Value error, " + msg


def test_negative_margin_and_tolerance_and_unknown_keys_are_refused():
    with pytest.raises(ValidationError, match="greater than or equal to 0"):
        ceiling("dbtp").model_validate({"max_dbtp": -1.0, "warn_margin_db": -0.1})
    with pytest.raises(ValidationError, match="greater than or equal to 0"):
        target("lufs").model_validate({"target_lufs": -23.0, "tolerance_lu": -1.0})
    with pytest.raises(ValidationError, match="Extra inputs are not permitted"):
        ceiling("dbtp").model_validate({"max_dbfs": -1.0})
    with pytest.raises(ValidationError):
        ceiling("dbtp").model_validate({"max_dbtp": "-1.0"})  # strict: a quoted number is not one
    with pytest.raises(ValidationError):
        ceiling("dbtp").model_validate({"max_dbtp": -1.0, "severity": "error"})


def test_factories_are_cached_and_named():
    assert ceiling("dbtp") is ceiling("dbtp") and target("lufs") is target("lufs")
    assert [ceiling("dbtp").__name__, floor("lufs").__name__, bounds("s").__name__, target("lufs").__name__] == \
        ["CeilingDbtp", "FloorLufs", "BoundsS", "TargetLufs"]
    assert allowed(int).__name__ == "AllowedInt"
    assert allowed(list[str]).__name__ == "AllowedListStr"
    assert allowed(int, name="SampleRates").__name__ == "SampleRates"


def test_schema_descriptions_name_units():
    s = ceiling("dbtp").model_json_schema()["properties"]
    assert s["max_dbtp"]["description"] == "highest allowed value, dBTP"
    assert s["warn_margin_db"]["description"] == "warn when a pass lies within this many dB of a limit"
    assert s["severity"]["description"] == "'fail' (default) or 'warn': what missing this requirement gives"
    assert floor("lufs").model_json_schema()["properties"]["min_lufs"]["description"] == "lowest allowed value, LUFS"
    b = bounds("s").model_json_schema()["properties"]
    assert (b["min_s"]["description"], b["max_s"]["description"]) == \
        ("lowest allowed value, s", "highest allowed value, s")
    t = target("lufs").model_json_schema()["properties"]
    assert t["target_lufs"]["description"] == "target value, LUFS"
    assert t["tolerance_lu"]["description"] == "allowed distance from the target, LU"
    assert t["min_lufs"]["description"] == "lowest allowed value, LUFS (instead of a target)"
    assert t["max_lufs"]["description"] == "highest allowed value, LUFS (instead of a target)"


def test_allowed_list_or_mapping_and_its_message():
    rates = allowed(int, "48000")
    a = rates.model_validate([48000, 96000])
    assert a.allowed == [48000, 96000] and a.severity == "fail"
    assert a.accepts(48000) and not a.accepts(44100)
    w = rates.model_validate({"allowed": [44100], "severity": "warn"})
    assert w.severity == "warn" and w.accepts(44100)
    assert _error(rates, 48000) == ("Value error, expected a list of allowed values (e.g. [48000]) or "
                                    "{allowed: [...], severity: warn}, got int 48000")
    assert _error(allowed(str), "wav") == ("Value error, expected a list of allowed values (e.g. [...]) or "
                                           "{allowed: [...], severity: warn}, got str 'wav'")
    with pytest.raises(ValidationError, match="at least 1 item"):
        rates.model_validate([])


def test_allowed_schema_is_a_list_or_the_mapping():
    s = allowed(int, "48000", name="RatesForSchemaTest").model_json_schema()
    assert s["description"] == "a list of allowed values, or {allowed: [...], severity: warn}"
    first, second = s["anyOf"]
    assert first == {"type": "array", "items": {"type": "integer"}, "minItems": 1}
    assert second["properties"]["allowed"]["description"] == "accepted values"
    assert second["properties"]["severity"]["description"] == "'fail' (default) or 'warn'"


def test_margin_field_and_an_absent_side():
    # the factories are cached and built at import, so the field recipe is checked directly
    from masterqc.spec.types import _margin_field
    annotation, field = _margin_field("db")
    assert annotation == (float | None)
    assert field.default is None
    assert field.description == "warn when a pass lies within this many dB of a limit"
    assert [m.ge for m in field.metadata] == [0.0]
    assert _margin_field("lu")[1].description == "warn when a pass lies within this many LU of a limit"
    # a requirement without a side answers None for it
    c = ceiling("dbtp").model_validate({"max_dbtp": -1.0})
    assert c._get("min") is None and c._get("max") == -1.0
