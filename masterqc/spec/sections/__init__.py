"""The registry of spec sections: one line per top-level section of a delivery spec.

How a new section plugs in
--------------------------
1. Write ``masterqc/spec/sections/<name>.py`` defining ``Section``, a subclass of
   :class:`masterqc.spec.types.SpecModel` whose fields are built from the
   requirement factories of :mod:`masterqc.spec.types` (``ceiling("db")``,
   ``bounds("s")``, ``allowed(int)``, ...), every key naming its unit, every
   field optional (``... | None = None``) with a ``description``.
2. Optionally define in the same module
   ``measure_options(section) -> dict`` returning
   :class:`masterqc.measure.options.MeasureOptions` field values the section
   needs (merged over all sections by :func:`masterqc.spec.measure_options_for`;
   ``extra`` dicts are merged key by key), and
   ``resolve(section, spec) -> section`` to fill values from other sections
   after validation, and ``ALWAYS = True`` if the section exists (with its
   defaults) even when a spec leaves it out.
3. Add one line to :data:`SECTIONS` below, and a judge module registered in
   :data:`masterqc.judge.JUDGES`.

The top-level spec model (and so ``masterqc spec schema``) is generated from
this list, so the new keys are validated and published with no other change.
"""

from __future__ import annotations

import importlib

#: (top-level key, module defining ``Section``), in the order sections are shown
SECTIONS: list[tuple[str, str]] = [
    ("format", "masterqc.spec.sections.format"),
    ("loudness", "masterqc.spec.sections.loudness"),
    ("peaks", "masterqc.spec.sections.peaks"),
    ("duration", "masterqc.spec.sections.duration"),
    ("normalisation", "masterqc.spec.sections.normalisation"),
    ("metadata", "masterqc.spec.sections.metadata"),
    ("integrity", "masterqc.spec.sections.integrity"),
    ("sampling", "masterqc.spec.sections.sampling"),
    ("release", "masterqc.spec.sections.release"),
    ("derivation", "masterqc.spec.sections.derivation"),
]


def section_module(name: str):
    """The module of section ``name`` (ImportError names the section when it is broken)."""
    for key, modname in SECTIONS:
        if key == name:
            try:
                return importlib.import_module(modname)
            except ImportError as exc:
                raise ImportError(f"spec section {name!r} ({modname}) cannot be imported: {exc}") from exc
    raise KeyError(f"no spec section named {name!r}")


def section_modules() -> list[tuple[str, object]]:
    """``[(name, module), ...]`` for every registered section, in order."""
    return [(name, section_module(name)) for name, _ in SECTIONS]
