"""A deliverable against its master: alignment, identity, channels, transfer function, residues,
requantisation, peaks and loudness (``masterqc compare``).

Layers as in the rest of masterqc: :mod:`.measure` (streaming measurement, a typed
:class:`.model.Comparison`), :mod:`.judge` (pure: comparison + ``derivation:`` spec
section -> findings), :mod:`.render` (HTML/PDF), :mod:`.command` (the CLI wiring).
"""

from __future__ import annotations

__all__ = ["RESULT_FORMAT_VERSION", "Comparison", "compare_files"]


def __getattr__(name):
    # the typed model (pydantic) loads on first use: the command line only needs the parser
    if name in ("RESULT_FORMAT_VERSION", "Comparison"):
        from masterqc.compare import model
        return getattr(model, name)
    raise AttributeError(f"module 'masterqc.compare' has no attribute {name!r}")


def compare_files(master, deliverable, **kwargs):
    """See :func:`masterqc.compare.measure.compare_files`."""
    from masterqc.compare.measure import compare_files as _run
    return _run(master, deliverable, **kwargs)
