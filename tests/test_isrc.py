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


# exact results (the messages are what a report prints; ISO 3901 element names)
@pytest.mark.parametrize("text, problem", [
    ("", "empty ISRC"),
    (None, "empty ISRC"),
    ("ISRC:  ", "empty ISRC"),
    ("XXQ7Z260004", "'XXQ7Z260004' has 11 characters, an ISRC has 12"),
    ("XX-Q7Z2-6-00042", "'XX-Q7Z2-6-00042' is not CC-XXX-YY-NNNNN: hyphens must separate 2, 3, 2 and 5 characters"),
    ("X1Q7Z2600042", "country code 'X1' must be two letters"),
    ("\u00c4XQ7Z2600042", "country code '\u00c4X' must be two letters"),
    ("XXQ_Z2600042", "registrant code 'Q_Z' must be three letters or digits"),
    ("XXQ7Z2A00042", "year '2A' must be two digits"),
    ("XXQ7Z260004X", "designation code '0004X' must be five digits"),
])
def test_problem_messages(text, problem):
    r = check_isrc(text)
    assert r == {"raw": "" if text is None else text, "code": None, "display": None, "valid": False,
                 "problem": problem, "note": None}


def test_valid_result_in_full():
    assert check_isrc(" ISRC: XX-Q7Z-26-00042 ") == {
        "raw": " ISRC: XX-Q7Z-26-00042 ", "code": "XXQ7Z2600042", "display": "XX-Q7Z-26-00042",
        "valid": True, "problem": None, "note": None}
    r = check_isrc("isrc=xxq7z2600042")
    assert (r["code"], r["note"]) == ("XXQ7Z2600042", "written in lower case; ISO 3901 uses capital letters")
    assert check_isrc("XXQ7Z2600042")["note"] is None
    assert format_isrc("XXA1B2600001") == "XX-A1B-26-00001"
    assert is_valid_isrc("XX-A1B-26-00001") is True and is_valid_isrc("XX-A1B-26-0000") is False


def test_find_in_text_edges():
    assert find_in_text("") == [] and find_in_text(None) == []
    assert find_in_text("ISRC:XXQ7Z2600042") == ["XXQ7Z2600042"]
    assert find_in_text("ISRC XX-Q7Z-26-00042X") == []  # followed by a letter: not a whole code


def test_a_non_ascii_registrant_is_the_registrant_s_problem():
    assert check_isrc("XX\u00c47Z2600042")["problem"] == "registrant code '\u00c47Z' must be three letters or digits"
