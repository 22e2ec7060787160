"""A deliverable against its master: alignment, identity, channels, transfer function, residues,
requantisation, peaks and loudness (``masterqc compare``).

Layers as in the rest of masterqc: :mod:`.measure` (streaming measurement, a typed
:class:`.model.Comparison`), :mod:`.judge` (pure: comparison + ``derivation:`` spec
section -> findings), :mod:`.render` (HTML/PDF), :mod:`.command` (the CLI wiring).
"""

from __future__ import annotations

from masterqc.compare.model import RESULT_FORMAT_VERSION, Comparison

__all__ = ["RESULT_FORMAT_VERSION", "Comparison", "compare_files"]


def compare_files(master, deliverable, **kwargs) -> Comparison:
    """See :func:`masterqc.compare.measure.compare_files`."""
    from masterqc.compare.measure import compare_files as _run
    return _run(master, deliverable, **kwargs)
