"""International Standard Recording Code (ISO 3901) syntax.

An ISRC has twelve characters in four elements:

* country code: two letters (ISO 3166-1 alpha-2 style; the agency also hands
  out codes outside ISO 3166, so only the syntax is checked here),
* registrant code: three letters or digits,
* year of reference: two digits,
* designation code: five digits.

It is printed as ``CC-XXX-YY-NNNNN``, usually after the letters "ISRC"; in
metadata it is stored as the bare twelve characters.  :func:`check_isrc`
accepts both forms (hyphens either in all three places or in none) and
normalises to the bare form.
"""

from __future__ import annotations

import re

_HYPHENATED = re.compile(r"^([A-Za-z0-9]{2})-([A-Za-z0-9]{3})-([A-Za-z0-9]{2})-([A-Za-z0-9]{5})$")
_PREFIX = re.compile(r"^ISRC[\s:=]*", re.IGNORECASE)
#: finds an ISRC written inside free text such as "ISRC: XX-A1B-26-00001" (common practice, no source)
IN_TEXT = re.compile(r"ISRC[\s:=]*([A-Za-z]{2}-?[A-Za-z0-9]{3}-?[0-9]{2}-?[0-9]{5})(?![A-Za-z0-9])", re.IGNORECASE)


def _element_problem(code: str) -> str | None:
    """Say which element of a 12-character upper-case candidate breaks ISO 3901 syntax (None when none)."""
    if not code[:2].isascii() or not code[:2].isalpha():
        return f"country code {code[:2]!r} must be two letters"
    if not re.fullmatch(r"[A-Z0-9]{3}", code[2:5]):
        return f"registrant code {code[2:5]!r} must be three letters or digits"
    if not re.fullmatch(r"[0-9]{2}", code[5:7]):
        return f"year {code[5:7]!r} must be two digits"
    if not re.fullmatch(r"[0-9]{5}", code[7:]):
        return f"designation code {code[7:]!r} must be five digits"
    return None


def check_isrc(text) -> dict:
    """Check ``text`` against ISO 3901 syntax.

    Returns ``{"raw", "code", "display", "valid", "problem", "note"}``: ``code``
    is the bare 12-character form (upper case) when the syntax holds, else None;
    ``display`` is ``CC-XXX-YY-NNNNN``; ``problem`` says what is wrong when
    ``valid`` is False; ``note`` flags a valid code written in lower case
    (ISO 3901 uses capital letters).
    """
    raw = "" if text is None else str(text)
    out = {"raw": raw, "code": None, "display": None, "valid": False, "problem": None, "note": None}
    s = _PREFIX.sub("", raw.strip()).strip()
    if not s:
        out["problem"] = "empty ISRC"
        return out
    if "-" in s:
        m = _HYPHENATED.match(s)
        if not m:
            out["problem"] = (f"{raw!r} is not CC-XXX-YY-NNNNN: hyphens must separate "
                              "2, 3, 2 and 5 characters")
            return out
        s = "".join(m.groups())
    if len(s) != 12:
        out["problem"] = f"{raw!r} has {len(s)} characters, an ISRC has 12"
        return out
    upper = s.upper()
    problem = _element_problem(upper)  # every element checked: no problem means ISO 3901 syntax holds
    if problem:
        out["problem"] = problem
        return out
    out.update(code=upper, display=format_isrc(upper), valid=True)
    if upper != s:
        out["note"] = "written in lower case; ISO 3901 uses capital letters"
    return out


def is_valid_isrc(text) -> bool:
    """True when ``text`` is an ISRC in bare or hyphenated ISO 3901 form."""
    return check_isrc(text)["valid"]


def format_isrc(code: str) -> str:
    """``"XXA1B2600001"`` -> ``"XX-A1B-26-00001"`` (the printed form)."""
    c = str(code)
    return f"{c[0:2]}-{c[2:5]}-{c[5:7]}-{c[7:]}"


def find_in_text(text: str) -> list[str]:
    """Every ISRC-looking code that follows the word "ISRC" in free text (raw strings, in order)."""
    if not text:
        return []
    return [m.group(1) for m in IN_TEXT.finditer(text)]
