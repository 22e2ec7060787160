"""The registry: every top-level section of a delivery spec, with its model, its checks and its judge.

One entry per section, built from real imports (no module-name strings).  The
spec model (and so ``masterqc schema spec``) is generated from it
(:func:`masterqc.spec.model.spec_model`), and the judge runs the entries in
order (:func:`masterqc.judge.judge`).

Adding a measurement end to end
-------------------------------
1. An analyzer (``masterqc/measure/<name>.py``) declaring its fields with
   :func:`masterqc.contract.measured`, added to :mod:`masterqc.measure.registry`.
2. A spec section (``masterqc/spec/sections/<name>.py``): ``Section`` (requirement
   fields built from :mod:`masterqc.spec.types`) and ``CHECKS``
   (:class:`masterqc.contract.Check`: spec key, measurement field, unit, what a null means).
3. One :class:`SectionEntry` below; its judge is :func:`declared_judge` unless the
   section needs more than its declared checks.
The report lists every measurement with its unit from the key, and every finding
the judge writes: no report code changes.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import ModuleType
from typing import Callable

from masterqc.judge import integrity as judge_integrity
from masterqc.judge import loudness as judge_loudness
from masterqc.judge import metadata as judge_metadata
from masterqc.judge import normalisation as judge_normalisation
from masterqc.judge import release as judge_release
from masterqc.judge import sampling as judge_sampling
from masterqc.judge.core import judge_checks
from masterqc.spec.sections import derivation, duration, format, integrity, loudness, metadata, normalisation, peaks, \
    release, sampling


@dataclass(frozen=True)
class SectionEntry:
    """One spec section: ``key`` in the spec, ``spec`` the module defining ``Section`` (and optionally
    ``CHECKS``, ``measure_options``, ``resolve``, ``ALWAYS``), ``judge(section, result) -> [Finding]``
    for one file's result (None for a section judged elsewhere, e.g. per release)."""

    key: str
    spec: ModuleType
    judge: Callable | None

    @property
    def checks(self) -> tuple:
        """The section's declared checks (``CHECKS``: spec key, measurement field, unit, what a null
        means, and whether :func:`judge_checks` or the section's own judge judges it)."""
        return tuple(getattr(self.spec, "CHECKS", ()))

    @property
    def settings(self) -> tuple:
        """The section's keys that set how something is measured or shown, not requirements (``SETTINGS``)."""
        return tuple(getattr(self.spec, "SETTINGS", ()))


def declared_judge(spec_module: ModuleType) -> Callable:
    """A judge that judges exactly the section's declared ``CHECKS`` (numeric limits and allowed-values lists)."""
    def judge(section, result: dict):
        return judge_checks(section, result, spec_module.CHECKS)
    judge.__doc__ = f"Judge of the declared checks of {spec_module.__name__}."
    return judge


#: every section, in the order sections are shown and findings are listed
SECTIONS: list[SectionEntry] = [
    SectionEntry("format", format, declared_judge(format)),
    SectionEntry("duration", duration, declared_judge(duration)),
    SectionEntry("loudness", loudness, judge_loudness.judge),
    SectionEntry("peaks", peaks, declared_judge(peaks)),
    SectionEntry("normalisation", normalisation, judge_normalisation.judge),
    SectionEntry("metadata", metadata, judge_metadata.judge),
    SectionEntry("integrity", integrity, judge_integrity.judge),
    SectionEntry("sampling", sampling, judge_sampling.judge),
    SectionEntry("release", release, None),  # judged once per release: judge_release.judge
    SectionEntry("derivation", derivation, None),  # judged by masterqc compare (a deliverable against its master)
]

#: the judge of the ``release:`` section (one release result at a time, see masterqc.batch.releases)
RELEASE_JUDGE = judge_release.judge

def section(key: str) -> SectionEntry:
    for entry in SECTIONS:
        if entry.key == key:
            return entry
    raise KeyError(f"no spec section named {key!r}")


def judged_sections() -> list[SectionEntry]:
    """The sections with a per-file judge, in the order findings are listed."""
    return [e for e in SECTIONS if e.judge is not None]
