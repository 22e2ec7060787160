"""JSON Schemas of the result object, generated from the code.

The result's shape comes from the typed models of :mod:`masterqc.contract`;
the ``measurements`` properties come from every analyzer's
``measurement_schema`` (each field declared with :func:`masterqc.contract.measured`:
unit and meaning), the ``series`` properties from their ``series_schema``, the
``metadata`` part from the container reader.  :func:`spec_schema` lives in
:mod:`masterqc.spec`.
"""

from __future__ import annotations

import functools

from masterqc.audio.container import METADATA_SCHEMA
from masterqc.contract import STATUSES as STATUS  # noqa: F401  (kept for callers)
from masterqc.contract import VERDICTS as VERDICT  # noqa: F401
from masterqc.contract import Finding, Normalisation, result_json_schema
from masterqc.measure.registry import analyzer_classes

#: JSON Schema of one finding and of the normalisation block (from the contract models)
FINDING_SCHEMA = Finding.model_json_schema()
NORMALISATION_SCHEMA = Normalisation.model_json_schema()


def measurement_properties() -> dict:
    """Every measurement key -> its declared fragment (unit in ``x-unit``, meaning in ``description``)."""
    props = {}
    for cls in analyzer_classes():
        props.update(cls.measurement_schema)
    return props


def series_properties() -> dict:
    props = {}
    for cls in analyzer_classes():
        props.update(getattr(cls, "series_schema", {}) or {})
    return props


@functools.cache
def _result_schema() -> dict:
    return result_json_schema(measurement_properties(), METADATA_SCHEMA, series_properties())


def result_schema() -> dict:
    """JSON Schema (draft 2020-12) of ``masterqc measure --json`` and of a check result."""
    import copy
    return copy.deepcopy(_result_schema())
