"""The problems of a result, worst first: one ordering for every place that lists them.

The console line of ``check``, the batch progress lines, the index rows and
the junit messages all list every error, failure and warning of a master (never
only the first), in this order: errors, then failures, then warnings; within
one state, the order of the findings (the spec's order).
"""

from __future__ import annotations

import re

#: state -> rank (lower is worse); states not listed are not problems
SEVERITY = {"error": 0, "fail": 1, "warn": 2}


def ranked_problems(findings, states=("error", "fail", "warn")) -> list[dict]:
    """``[{check, status, message}, ...]`` of the findings in ``states``, worst first."""
    out = [{"check": f.get("check", ""), "status": f["status"], "message": f.get("message", "")}
           for f in findings or [] if f.get("status") in states]
    return sorted(out, key=lambda p: SEVERITY.get(p["status"], 9))   # stable: spec order kept


_BYTES_LITERAL = re.compile(r"""\bb(['"])(?:\\.|(?!\1).)*\1""")


def readable_message(text, path: str = "") -> str:
    """A finding's message for a table row: the file's own path at its start (the row names
    the file) and Python byte-string dumps (``b'Jn)0\\xe4...'``) left out, the rest kept; at
    most 400 characters."""
    s = str(text or "")
    if path and s.startswith(f"{path}: "):
        s = s[len(path) + 2:]
        s = s[:1].upper() + s[1:]
    s = re.sub(r"first bytes " + _BYTES_LITERAL.pattern + r",?\s*", "", s)
    s = _BYTES_LITERAL.sub("(binary data)", s)
    s = re.sub(r"\(\s*\)", "", s).strip()
    return s if len(s) <= 400 else s[:399].rstrip() + "\u2026"


def problem_lines(problems, indent: str = "      ", path: str = "") -> list[str]:
    """One line per problem: ``indent + "FAIL  message"`` (:func:`readable_message`)."""
    return [f"{indent}{p['status'].upper():5s} {readable_message(p['message'], path)}" for p in problems]


def problems_text(problems, sep: str = "; ") -> str:
    """Every problem on one line, worst first: ``"FAIL a; FAIL b; WARN c"``."""
    return sep.join(f"{p['status'].upper()} {p['message']}" for p in problems)
