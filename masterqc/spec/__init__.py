"""Delivery specs: YAML documents of requirements, validated by pydantic models.

* :mod:`masterqc.spec.types` -- the reusable requirement shapes (ceiling, floor,
  bounds, target, allowed values), each with ``severity`` and a warning margin.
* :mod:`masterqc.spec.sections` -- the registry of top-level sections.
* :mod:`masterqc.spec.model` -- the generated ``Spec`` model, option derivation
  and the JSON Schema of the format.
* :mod:`masterqc.spec.loader` -- safe YAML loading with line/column, ``extends:``.
"""

from __future__ import annotations

from masterqc.spec.model import build_spec, measure_options_for, spec_json_schema, spec_model


def spec_schema() -> dict:
    """JSON Schema of the delivery-spec format (``masterqc spec schema``)."""
    return spec_json_schema()


def load_spec(path):
    """Load, merge (``extends:``) and validate a spec file; see :func:`masterqc.spec.loader.load_spec`."""
    from masterqc.spec.loader import load_spec as _load
    return _load(path)


__all__ = ["build_spec", "load_spec", "measure_options_for", "spec_json_schema", "spec_model", "spec_schema"]
