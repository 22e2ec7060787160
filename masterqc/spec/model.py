"""The top-level delivery-spec model, generated from the section registry.

``Spec`` has the document keys (``spec_version``, ``name``, ``description``,
``extends``) and one optional field per registered section
(:data:`masterqc.registry.SECTIONS`).  :func:`build_spec` validates a
plain mapping (already merged over its ``extends:`` bases) and runs each
section's ``resolve`` hook.
"""

from __future__ import annotations

import functools
from typing import Literal

from pydantic import Field, create_model

from masterqc.measure.options import MeasureOptions
from masterqc.spec.sections import section_modules
from masterqc.spec.types import SpecModel

#: spec format versions this code reads
SPEC_VERSIONS = (1,)


class ReportFields(SpecModel):
    """The ``report:`` section: fields printed on every report's certificate (page one)."""

    client: str | None = Field(None, max_length=200, description="the client the masters are delivered for")
    job: str | None = Field(None, max_length=200, description="job or order number")
    operator: str | None = Field(None, max_length=200, description="who runs the check and signs the certificate")


class SpecDocument(SpecModel):
    """Keys every spec file has besides its sections."""

    spec_version: Literal[1] = Field(..., description="version of the masterqc delivery-spec format (1)")
    name: str = Field(..., min_length=1, description="name of the spec, shown in every report")
    description: str | None = Field(None, description="free text shown in reports")
    version: str | int | float | None = Field(None,
                                description="the spec's own version as its owner numbers it (e.g. \"2.1\" or "
                                            "\"2026-03\"), printed on the certificate; not the format version")
    report: ReportFields | None = Field(None, description="fields printed on the certificate (client, job, "
                                                          "operator); --field on the command line overrides them")
    extends: str | list[str] | None = Field(
        None, description="base spec file(s), relative to this file; this file's keys override theirs "
                          "(mappings merge key by key, lists are replaced, null removes a base key)")


@functools.cache
def spec_model() -> type[SpecModel]:
    """The ``Spec`` model class (built once from the registry)."""
    fields = {}
    for name, module in section_modules():
        # a subclass named after the key, so the published schema reads "LoudnessSection"
        base_cls = module.Section
        section_cls = type(f"{name.title().replace('_', '')}Section", (base_cls,),
                           {"__doc__": base_cls.__doc__, "__module__": base_cls.__module__})
        doc = (module.__doc__ or "").strip().splitlines()[0] if module.__doc__ else name
        if getattr(module, "ALWAYS", False):
            fields[name] = (section_cls, Field(default_factory=section_cls, description=doc))
        else:
            fields[name] = (section_cls | None, Field(None, description=doc))
    model = create_model("Spec", __base__=SpecDocument, **fields)
    model.__doc__ = "A masterqc delivery spec (YAML), version 1."
    return model


def build_spec(data: dict):
    """Validate ``data`` as a spec and resolve cross-section defaults.

    Raises :class:`pydantic.ValidationError`; the loader turns it into a
    :class:`masterqc.errors.SpecError` with key paths, lines and columns.
    """
    spec = spec_model().model_validate(data)
    updates = {}
    for name, module in section_modules():
        resolve = getattr(module, "resolve", None)
        section = getattr(spec, name)
        if resolve is not None and section is not None:
            updates[name] = resolve(section, spec)
    if updates:
        spec = spec.model_copy(update=updates)
    return spec


def measure_options_for(spec, base: MeasureOptions | None = None) -> MeasureOptions:
    """:class:`MeasureOptions` derived from every section's ``measure_options`` hook.

    ``extra`` dicts are merged key by key; other fields: the later section wins.
    """
    values: dict = {}
    extra: dict = dict((base or MeasureOptions()).extra)
    for name, module in section_modules():
        hook = getattr(module, "measure_options", None)
        section = getattr(spec, name, None)
        if hook is None or section is None:
            continue
        opts = dict(hook(section))
        extra.update(opts.pop("extra", {}) or {})
        values.update(opts)
    values["extra"] = extra
    from dataclasses import replace
    return replace(base or MeasureOptions(), **values)


def spec_json_schema() -> dict:
    """JSON Schema (draft 2020-12) of the delivery-spec format, generated from the models."""
    schema = spec_model().model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "masterqc delivery spec"
    return schema
