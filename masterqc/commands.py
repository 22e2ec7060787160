"""Sub-commands beyond ``measure`` and ``schema``: each adds its parser here.

Each command's function lives in the layer that owns the work (spec, pipeline,
report, batch); this module only wires arguments to them.
"""

from __future__ import annotations


def add_parsers(sub) -> None:
    """Add the sub-parsers of check, spec, report, demo and runs."""
    # (filled in by the spec/check, report and batch work)
    return None
