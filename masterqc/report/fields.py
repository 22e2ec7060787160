"""The certificate's fields (client, job, operator, date): parsed from ``--field NAME=VALUE`` and put into a
result's ``spec.report``, where the certificate reads them (the spec's ``report:`` section puts them there too)."""

from __future__ import annotations

from masterqc.errors import UsageError


#: the certificate's fields that ``--field NAME=VALUE`` may set
FIELD_NAMES = ("client", "job", "operator", "date")


def parse_fields(items) -> dict:
    """``["client=Ferrowby Post", "job=A-113"]`` -> ``{"client": "Ferrowby Post", "job": "A-113"}``.

    :class:`UsageError` names the item that is not ``NAME=VALUE`` or names an unknown field.
    """
    out: dict = {}
    for item in items or ():
        name, sep, value = str(item).partition("=")
        name = name.strip().lower()
        if not sep or not name:
            raise UsageError(f"--field {item!r}: write NAME=VALUE, e.g. --field client=\"Ferrowby Post\"")
        if name not in FIELD_NAMES:
            raise UsageError(f"--field {item!r}: unknown field {name!r}; use one of {', '.join(FIELD_NAMES)}")
        if any(ord(c) < 32 for c in value):
            raise UsageError(f"--field {name}: the value holds a control character")
        out[name] = value.strip()
    return out


def with_fields(result: dict, fields: dict) -> dict:
    """``result`` with ``spec.report`` updated by ``fields`` (a copy; the certificate shows them)."""
    if not fields:
        return result
    out = dict(result)
    spec = dict(out.get("spec") or {})
    report = dict(spec.get("report") or {})
    report.update(fields)
    spec["report"] = report
    out["spec"] = spec
    return out
