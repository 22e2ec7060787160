"""Release folders: which files form a release, and the release-level figures and findings.

Grouping modes (``--releases`` or ``releases:`` in a spec map):

``top`` (default)     the top folder that holds audio is one release, and every
                      folder below it joins it (``album/bonus/``, ``album/alternates/``
                      count into ``album``); a folder that holds no audio itself
                      leaves each of its sub-folders that does a release of its own
``folder``            each folder that directly holds audio is one release
``root``              each folder named on the command line is one release
``depth:N``           the folder N levels below each named folder holds one release
                      (files less deep form a release of their own folder)
``none``              no release-level checks

The figures of a release (:func:`release_measurements`) come only from the
per-file results: the pooled integrated loudness gates the gating blocks of
every track together (:func:`masterqc.measure.loudness.pooled_integrated_lufs`
over the ``gating_block_histogram`` series), as ITU-R BS.1770-5 defines the
integrated loudness of one programme.
"""

from __future__ import annotations

import posixpath


RELEASE_MODES = ("top", "folder", "root", "depth:N", "none")
#: the grouping used when neither ``--releases`` nor the spec map names one
DEFAULT_RELEASE_MODE = "top"


def parse_release_mode(text) -> tuple[str, int]:
    """``"folder"`` -> ``("folder", 0)``, ``"depth:2"`` -> ``("depth", 2)``; ValueError naming the choices."""
    if isinstance(text, str):
        t = text.strip().lower()
        if t in ("top", "folder", "root", "none"):
            return t, 0
        if t.startswith("depth:"):
            try:
                n = int(t[6:])
            except ValueError:
                n = -1
            if n >= 0:
                return "depth", n
    raise ValueError(f"release grouping {text!r} is not one of {', '.join(RELEASE_MODES)} (N a whole number >= 0)")


def audio_folders(rels) -> set[str]:
    """The folders (``""`` for the root) that directly hold one of the files at ``rels`` below one root."""
    return {posixpath.dirname(r) for r in rels}


def release_of(root_label: str, rel: str, mode: tuple[str, int], folders_with_audio=None) -> str | None:
    """Release id (``root label/folder below it``) of the file at ``rel`` below its root, or None.

    ``folders_with_audio`` (:func:`audio_folders` of every file below the same root) is used by
    the ``top`` mode; without it ``top`` takes the file's own folder, as ``folder`` does."""
    kind, n = mode
    folder = posixpath.dirname(rel)
    if kind == "none":
        return None
    if kind == "top" and folders_with_audio is not None:
        parts = folder.split("/") if folder else []
        for depth in range(len(parts) + 1):       # the shallowest folder on the path holding audio
            candidate = "/".join(parts[:depth])
            if candidate in folders_with_audio:
                folder = candidate
                break
    elif kind == "root":
        folder = ""
    elif kind == "depth":
        parts = folder.split("/") if folder else []
        folder = "/".join(parts[:n])
    return f"{root_label}/{folder}" if folder else root_label


def sample_format(fmt: dict) -> str | None:
    """``"24-bit integer"`` / ``"32-bit float"`` from a result's ``format``, or None."""
    bits = fmt.get("bit_depth")
    if bits is None:
        return None
    kind = "float" if str(fmt.get("encoding", "")).startswith("float") or fmt.get("is_float") else "integer"
    return f"{bits}-bit {kind}"


def release_measurements(results: list[dict]) -> dict:
    """Figures of one release from its files' results (error results counted, not measured).

    Keys (units in the names): ``track_count``, ``unreadable_count``,
    ``pooled_integrated_lufs``, ``pooled_error_bound_lu``, ``loudest_track_lufs``,
    ``quietest_track_lufs``, ``track_loudness_spread_lu``, ``sample_rates_hz``,
    ``sample_formats``, ``channel_counts``, ``total_duration_s``.
    """
    measured = [r for r in results if "measurements" in r]
    hists = [(r.get("series") or {}).get("gating_block_histogram") for r in measured]
    hists = [h for h in hists if h is not None]
    # (imported here: a batch parent without releases does not load the loudness analyzer)
    from masterqc.measure.loudness import pooled_integrated_error_bound_lu, pooled_integrated_lufs
    pooled = pooled_integrated_lufs(hists) if hists else None
    bound = pooled_integrated_error_bound_lu(hists) if hists else None
    levels = [r["measurements"].get("integrated_lufs") for r in measured]
    levels = [x for x in levels if x is not None]
    fmts = [r.get("format") or {} for r in measured]
    return {
        "track_count": len(results),
        "unreadable_count": len(results) - len(measured),
        "pooled_integrated_lufs": pooled,
        "pooled_error_bound_lu": bound,
        "loudest_track_lufs": max(levels) if levels else None,
        "quietest_track_lufs": min(levels) if levels else None,
        "track_loudness_spread_lu": (max(levels) - min(levels)) if levels else None,
        "sample_rates_hz": sorted({f["sample_rate_hz"] for f in fmts if f.get("sample_rate_hz") is not None}),
        "sample_formats": sorted({s for s in (sample_format(f) for f in fmts) if s}),
        "channel_counts": sorted({f["channels"] for f in fmts if f.get("channels") is not None}),
        "total_duration_s": sum(float(f.get("duration_s") or 0.0) for f in fmts),
    }


def judge_release(release_id: str, folder: str, rels: list[str], results: list[dict], loaded_spec) -> dict:
    """The release result: ``{id, folder, files, spec, measurements, findings, verdict}``.

    ``loaded_spec`` is the spec of the release's first file; with no ``release:``
    section in it there are no findings and the verdict is ``pass`` -- unless a
    file could not be read, which is an ``error`` finding whenever the spec has
    release requirements.
    """
    from masterqc.judge.core import verdict
    from masterqc.judge.release import judge

    m = release_measurements(results)
    section = getattr(loaded_spec.spec, "release", None) if loaded_spec is not None else None
    findings = [f.to_dict() for f in judge(section, m)] if section is not None else []
    return {"id": release_id, "folder": folder, "files": list(rels),
            "spec": loaded_spec.spec.name if loaded_spec is not None else None,
            "judged": section is not None,
            "measurements": m, "findings": findings,
            "verdict": verdict(findings) if section is not None else None}
