"""Plan a batch: one :class:`Item` per discovered master, with its spec rule, release and output name.

Pure apart from nothing: no file is read or written here.  Output names come
from :class:`masterqc.batch.names.NameAllocator` (distinct, safe components),
below ``OUT/files/<folder label>/<sub folders>/``.
"""

from __future__ import annotations

import os
import posixpath
from dataclasses import dataclass

from masterqc.batch.names import NameAllocator, safe_component
from masterqc.batch.releases import release_of
from masterqc.batch.specmap import Unusable

FILES_DIR = "files"


@dataclass
class Item:
    """One master of a batch and everything the run learns about it."""

    found: object
    path: str          #: absolute path as reached (the ledger's key for a file)
    rel: str           #: shown name: folder label / path below it
    release: str | None
    rule: object       #: specmap.Rule or None
    out_folder: str    #: absolute output folder
    out_rel: str       #: output folder relative to OUT
    stem: str
    size_bytes: int = 0
    stat: object = None
    sha256: str | None = None
    result: dict | None = None
    analysed: bool = False
    reused: bool = False  #: the result came from the ledger or from an identical file (never for error rows)
    elapsed_s: float = 0.0
    cpu_s: float = 0.0
    rule_error: str | None = None  #: the folder spec governing this master does not validate
    measure_key: str | None = None  #: key of the measurement settings the file's spec asks for
    how: str | None = None  #: "measured", "rejudged" (stored measurements), "identical" (another file's result)
    hash_error: str | None = None

    @property
    def out_stem(self) -> str:
        """The output name relative to OUT, without extension (recorded in the ledger)."""
        return f"{self.out_rel}/{self.stem}"


def root_labels(roots) -> dict:
    """``{root as given: folder label}``: each root's folder name made safe, distinct case-insensitively."""
    labels, used = {}, set()
    for r in roots:
        key = os.fspath(r)
        base = os.path.abspath(key) if os.path.isdir(key) else os.path.dirname(os.path.abspath(key))
        label = safe_component(os.path.basename(base.rstrip(os.sep)) or "root")
        cand, n = label, 1
        while cand.lower() in used:
            n += 1
            cand = f"{label}-{n}"
        used.add(cand.lower())
        labels[key] = cand
    return labels


def plan_items(found_files, roots, specmap, release_mode, out_dir: str) -> list[Item]:
    """One :class:`Item` per discovered master (``found_files``: :class:`masterqc.batch.discover.Found`,
    in discovery order): its shown name, release, spec rule (or why none applies) and output name."""
    labels = root_labels(roots)
    names = NameAllocator()
    items: list[Item] = []
    for fnd in found_files:
        label = labels.get(fnd.root) or safe_component(os.path.basename(os.path.abspath(fnd.root)))
        rel_in_root = fnd.rel
        parts = [label] + rel_in_root.split("/")[:-1]
        stem = os.path.splitext(posixpath.basename(rel_in_root))[0] or "master"
        folder_rel, stem = names.allocate(parts, stem)
        rule = specmap.lookup(rel_in_root, fnd.root)
        items.append(Item(found=fnd, path=os.path.abspath(fnd.path), rel=f"{label}/{rel_in_root}",
                          release=release_of(label, rel_in_root, release_mode),
                          rule=None if isinstance(rule, Unusable) else rule,
                          rule_error=rule.message if isinstance(rule, Unusable) else None,
                          out_folder=os.path.join(out_dir, FILES_DIR, *folder_rel.split("/")),
                          out_rel=f"{FILES_DIR}/{folder_rel}", stem=stem))
    return items
