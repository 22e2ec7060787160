"""The problems of a result, worst first: one ordering for every place that lists them.

The console line of ``check``, the batch progress lines, the index rows and
the junit messages all list every error, failure and warning of a master (never
only the first), in this order: errors, then failures, then warnings; within
one state, the order of the findings (the spec's order).
"""

from __future__ import annotations

#: state -> rank (lower is worse); states not listed are not problems
SEVERITY = {"error": 0, "fail": 1, "warn": 2}


def ranked_problems(findings, states=("error", "fail", "warn")) -> list[dict]:
    """``[{check, status, message}, ...]`` of the findings in ``states``, worst first."""
    out = [{"check": f.get("check", ""), "status": f["status"], "message": f.get("message", "")}
           for f in findings or [] if f.get("status") in states]
    return sorted(out, key=lambda p: SEVERITY.get(p["status"], 9))   # stable: spec order kept


def problem_lines(problems, indent: str = "      ") -> list[str]:
    """One line per problem: ``indent + "FAIL  message"``."""
    return [f"{indent}{p['status'].upper():5s} {p['message']}" for p in problems]


def problems_text(problems, sep: str = "; ") -> str:
    """Every problem on one line, worst first: ``"FAIL a; FAIL b; WARN c"``."""
    return sep.join(f"{p['status'].upper()} {p['message']}" for p in problems)
