"""Output names that stay inside the output folder, whatever the input names hold.

Every path component of an input file becomes a *safe component*
(:func:`safe_component`): letters, digits, ``_``, ``-`` and ``.`` only, no leading
dot, no device names, at most :data:`MAX_COMPONENT_CHARS` characters.  Two inputs
that would map to the same output (also when a file system folds case) get
``-2``, ``-3``... (:class:`NameAllocator`), and :func:`inside` refuses any target
that resolves outside the output folder (e.g. through a link planted there).
"""

from __future__ import annotations

import os
import re
import unicodedata

MAX_COMPONENT_CHARS = 96
_RESERVED = {"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(1, 10)), *(f"LPT{i}" for i in range(1, 10))}


def safe_component(name: str) -> str:
    """One path component made safe: ``"../a b?.wav"`` -> ``"a_b_.wav"``, ``""`` -> ``"_"``."""
    s = unicodedata.normalize("NFC", name)
    s = re.sub(r"[^\w.\-]", "_", s)          # separators, controls, quotes, spaces...
    s = re.sub(r"_+", "_", s)
    s = s.lstrip(".").rstrip(". ")
    if not s:
        s = "_"
    if s.split(".")[0].upper() in _RESERVED:
        s = "_" + s
    if len(s) > MAX_COMPONENT_CHARS:
        s = s[:MAX_COMPONENT_CHARS].rstrip(".") or "_"
    return s


class NameAllocator:
    """Hands out distinct (case-insensitively) relative output paths."""

    def __init__(self):
        self._used: set[str] = set()

    def allocate(self, parts: list[str], stem: str) -> tuple[str, str]:
        """``(relative folder, stem)`` for an input whose folders are ``parts`` and name stem ``stem``."""
        folder = "/".join(safe_component(p) for p in parts)
        base = safe_component(stem)
        candidate, n = base, 1
        while f"{folder}/{candidate}".lower() in self._used:
            n += 1
            candidate = f"{base}-{n}"
        self._used.add(f"{folder}/{candidate}".lower())
        return folder, candidate


def inside(out_dir: str, target: str) -> bool:
    """True when ``target`` resolves (links followed) to ``out_dir`` or below it."""
    base = os.path.realpath(out_dir)
    real = os.path.realpath(target)
    return real == base or real.startswith(base.rstrip(os.sep) + os.sep)
