"""The judge: a pure function from a measure result and a delivery spec to findings and a verdict.

Each section's judge is registered beside its spec model in
:data:`masterqc.registry.SECTIONS` (real imports).  A judge is
``judge(section, result) -> list[Finding]`` (``section`` the validated model of
that spec section, ``result`` the dict of
:func:`masterqc.measure.engine.measure_file`), built from the helpers in
:mod:`masterqc.judge.core` (:func:`~masterqc.judge.core.judge_checks` for a
section's declared ``CHECKS``, :func:`~masterqc.judge.core.check_limits`,
:func:`~masterqc.judge.core.check_allowed`, :func:`~masterqc.judge.core.skipped`).
A judge never does I/O.

:func:`judge` calls each registered judge whose section is present in the
spec, in order.  A judge that raises gives one ``error`` finding naming the
section (so one bug never loses a batch), and the verdict is ``error``.
"""

from __future__ import annotations

from masterqc.judge.core import Finding, error, verdict


def judge(spec, result: dict, sections=None) -> tuple[list[Finding], str]:
    """Judge ``result`` against ``spec`` (a validated :class:`masterqc.spec.Spec`).

    Returns ``(findings, verdict)``; verdict is ``pass | warn | fail | error``.
    ``sections``: the registry entries to run (default: :func:`masterqc.registry.judged_sections`).
    """
    from masterqc.registry import judged_sections  # the registry imports every judge module

    findings: list[Finding] = []
    for entry in (judged_sections() if sections is None else sections):
        section = getattr(spec, entry.key, None)
        if section is None:
            continue
        try:
            findings.extend(entry.judge(section, result))
        except Exception as exc:  # one broken judge must not lose the rest of the report
            findings.append(error(entry.key, f"the {entry.key} requirements could not be judged: "
                                             f"{type(exc).__name__}: {exc}"))
    return findings, verdict(findings)


__all__ = ["Finding", "judge", "verdict"]
