"""ISRC syntax (ISO 3901: 2-letter country code, 3-character registrant code,
2-digit year, 5-digit designation; printed CC-XXX-YY-NNNNN).  The structure is
from memory of ISO 3901; the codes below are invented."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from masterqc.audio.isrc import check_isrc, find_in_text, format_isrc, is_valid_isrc


@pytest.mark.parametrize("text,code", [
    ("XXQ7Z2600042", "XXQ7Z2600042"),
    ("XX-Q7Z-26-00042", "XXQ7Z2600042"),
    ("ISRC XX-Q7Z-26-00042", "XXQ7Z2600042"),
    ("ISRC:XXQ7Z2600042", "XXQ7Z2600042"),
    ("  XX9992600001 ", "XX9992600001"),   # an all-digit registrant code is allowed
    ("QZABC0000000", "QZABC0000000"),
])
def test_valid(text, code):
    r = check_isrc(text)
    assert r["valid"] is True and r["code"] == code and r["problem"] is None
    assert r["display"] == format_isrc(code)
    assert r["note"] is None


def test_lower_case_is_valid_with_a_note():
    r = check_isrc("xx-q7z-26-00042")
    assert r["valid"] and r["code"] == "XXQ7Z2600042"
    assert "lower case" in r["note"]


@pytest.mark.parametrize("text,why", [
    ("", "empty"),
    ("XXQ7Z260004", "11 characters"),
    ("XXQ7Z26000421", "13 characters"),
    ("X1Q7Z2600042", "country code"),
    ("XXQ-Z2600042", "hyphens"),
    ("XXQ7Z2A00042", "year"),
    ("XXQ7Z260004X", "designation"),
    ("XX-Q7Z2-6-00042", "hyphens"),
    ("XXQ7Z-26-00042", "hyphens"),
    ("XXQ_Z2600042", "registrant"),
    ("\u00c4XQ7Z2600042", "country code"),
])
def test_invalid(text, why):
    r = check_isrc(text)
    assert r["valid"] is False and r["code"] is None
    assert why in r["problem"]


def test_find_in_text():
    assert find_in_text("Final master. ISRC: XX-Q7Z-26-00042; mix 3") == ["XX-Q7Z-26-00042"]
    assert find_in_text("isrc=XXQ7Z2600042 and ISRC XXQ7Z2600043") == ["XXQ7Z2600042", "XXQ7Z2600043"]
    assert find_in_text("catalogue XXQ7Z2600042") == []   # no "ISRC" before it
    assert find_in_text("ISRC XXQ7Z26000421") == []       # 13 characters is not a code


@given(st.from_regex(r"\A[A-Z]{2}[A-Z0-9]{3}[0-9]{7}\Z"))
def test_every_well_formed_code_is_valid_in_both_spellings(code):
    assert is_valid_isrc(code)
    assert check_isrc(format_isrc(code))["code"] == code


@given(st.text(max_size=20))
def test_never_raises(text):
    r = check_isrc(text)
    assert isinstance(r["valid"], bool)
    if r["valid"]:
        assert len(r["code"]) == 12
