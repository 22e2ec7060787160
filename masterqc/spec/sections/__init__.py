"""The spec sections: one module per top-level section of a delivery spec.

Each module defines ``Section`` (a :class:`masterqc.spec.types.SpecModel` whose
fields are built from the requirement factories of :mod:`masterqc.spec.types`,
every key naming its unit, every field optional with a ``description``) and may
define ``CHECKS`` (:class:`masterqc.contract.Check`: spec key, measurement
field, unit, what a null means), ``measure_options(section) -> dict`` (the
:class:`masterqc.measure.options.MeasureOptions` fields it sets),
``resolve(section, spec) -> section`` (defaults from other sections) and
``ALWAYS = True`` (present with its defaults even when a spec leaves it out).

The list of sections, paired with their judges, is :data:`masterqc.registry.SECTIONS`.
"""

from __future__ import annotations


def section_modules() -> list[tuple[str, object]]:
    """``[(key, module), ...]`` for every registered section, in order (from :mod:`masterqc.registry`)."""
    from masterqc.registry import SECTIONS
    return [(entry.key, entry.spec) for entry in SECTIONS]
