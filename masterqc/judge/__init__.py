"""The judge: a pure function from a measure result and a delivery spec to findings and a verdict.

How a new section's judge plugs in
----------------------------------
Write ``masterqc/judge/<section>.py`` defining
``judge(section, result) -> list[Finding]`` (``section`` is the validated
model of that spec section, ``result`` the dict of
:func:`masterqc.measure.engine.measure_file`), built from the helpers in
:mod:`masterqc.judge.core` (:func:`~masterqc.judge.core.check_limits`,
:func:`~masterqc.judge.core.check_allowed`, :func:`~masterqc.judge.core.skipped`),
and add one line to :data:`JUDGES` below.  A judge never does I/O.

:func:`judge` calls each registered judge whose section is present in the
spec, in order.  A judge that raises gives one ``error`` finding naming the
section (so one bug never loses a batch), and the verdict is ``error``.
"""

from __future__ import annotations

import importlib

from masterqc.judge.core import Finding, error, verdict

#: (spec section key, judge module), in the order findings are listed
JUDGES: list[tuple[str, str]] = [
    ("format", "masterqc.judge.format"),
    ("duration", "masterqc.judge.duration"),
    ("loudness", "masterqc.judge.loudness"),
    ("peaks", "masterqc.judge.peaks"),
    ("normalisation", "masterqc.judge.normalisation"),
    ("metadata", "masterqc.judge.metadata"),
    ("integrity", "masterqc.judge.integrity"),
    ("sampling", "masterqc.judge.sampling"),
]


def judge(spec, result: dict) -> tuple[list[Finding], str]:
    """Judge ``result`` against ``spec`` (a validated :class:`masterqc.spec.Spec`).

    Returns ``(findings, verdict)``; verdict is ``pass | warn | fail | error``.
    """
    findings: list[Finding] = []
    for name, modname in JUDGES:
        section = getattr(spec, name, None)
        if section is None:
            continue
        try:
            module = importlib.import_module(modname)
            findings.extend(module.judge(section, result))
        except Exception as exc:  # one broken judge must not lose the rest of the report
            findings.append(error(name, f"the {name} requirements could not be judged: "
                                        f"{type(exc).__name__}: {exc}"))
    return findings, verdict(findings)


__all__ = ["Finding", "JUDGES", "judge", "verdict"]
