"""Measuring: streaming analyzers fed by one engine from a single read of the file.

The names below are imported on first use (PEP 562 ``__getattr__``): importing a submodule such as
:mod:`masterqc.measure.options` (the batch parent, the judge, the spec model) must not import the
engine and, through the analyzers, numpy's FFT and SciPy.
"""

from __future__ import annotations

__all__ = ["MeasureOptions", "measure_file", "run_analyzers"]

_WHERE = {"MeasureOptions": "masterqc.measure.options", "measure_file": "masterqc.measure.engine",
          "run_analyzers": "masterqc.measure.engine"}


def __getattr__(name: str):
    where = _WHERE.get(name)
    if where is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    import importlib
    value = getattr(importlib.import_module(where), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
