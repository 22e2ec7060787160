"""The per-file pipeline of ``masterqc check``: measure -> judge -> write.

:func:`check_file` is what the CLI's check loop and the batch runner call for
each master.  It never raises for a bad master: a file that cannot be read
gives an *error result* (``verdict: "error"``, one finding with status
``error`` naming the cause), which is written like any other result.

Result object written (the contract of the design, plus):

``spec``           ``{name, path, sha256, files}`` -- ``files`` lists every spec file read
                   (the named one first, then its ``extends:`` bases) with its SHA-256
``normalisation``  the headroom figures of :func:`masterqc.judge.normalisation.headroom`
``findings``       list of finding dicts (:meth:`masterqc.judge.core.Finding.to_dict`)
``verdict``        ``pass | warn | fail | error``
``outputs``        ``{format: file name}`` of every file written for this master

Every file is written atomically: to a temporary name in the target folder,
then renamed, so no report is ever left half-written.
"""

from __future__ import annotations

import json
import os

from masterqc import __version__
from masterqc.errors import AudioReadError
from masterqc.fileio import write_atomic  # noqa: F401  (part of this module's interface)
from masterqc.jsonutil import jsonable

#: every output format ``check`` can write
ALL_FORMATS = ("json", "html", "pdf")
#: what ``check`` writes when ``--format`` is not given (json only while the
#: report renderer cannot be imported; see :func:`default_formats`)
DEFAULT_FORMATS = ("json", "html", "pdf")


def reports_available() -> str | None:
    """None when HTML/PDF rendering can be imported, else the reason it cannot."""
    try:
        from masterqc.report.render import write_reports  # noqa: F401
    except Exception as exc:  # ImportError or a broken renderer
        return f"{type(exc).__name__}: {exc}"
    return None


def default_formats() -> tuple[str, ...]:
    """:data:`DEFAULT_FORMATS`, or json only when the renderer is unavailable."""
    return DEFAULT_FORMATS if reports_available() is None else ("json",)


def parse_formats(text: str) -> tuple[str, ...]:
    """``"json,html"`` -> ``("json", "html")``; ValueError naming an unknown format."""
    out = []
    for part in text.split(","):
        f = part.strip().lower()
        if not f:
            continue
        if f not in ALL_FORMATS:
            raise ValueError(f"unknown output format {f!r} (choose from {', '.join(ALL_FORMATS)})")
        if f not in out:
            out.append(f)
    if not out:
        raise ValueError("no output format given")
    return tuple(out)


def write_json(result: dict, path) -> None:
    """The result as indented JSON (non-finite floats already turned into null), atomically."""
    text = json.dumps(jsonable(result), indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    write_atomic(path, text.encode("utf-8"))


def was_unreadable(result: dict) -> bool:
    """True when the master could not be read or checked at all (exit code 3).

    A master that was read but carries an error finding (e.g. NaN samples, a
    judge that failed) has verdict ``error`` yet was read: it counts as a
    failure (exit code 1), not as unreadable.
    """
    return "error" in result


def exit_code_for(results) -> int:
    """Exit code of a run over ``results`` (house choice, listed in the README): 3 if any master could not be
    read, else 1 if any failed or ended in error, else 0 (warnings allowed)."""
    results = list(results)
    if any(was_unreadable(r) for r in results):
        return 3
    if any(r.get("verdict") in ("fail", "error") for r in results):
        return 1
    return 0


def error_result(path, loaded_spec, cause: str, offset: int | None = None, facts: dict | None = None) -> dict:
    """The result written for a master that could not be read."""
    where = f" (at byte {offset})" if offset is not None else ""
    from masterqc.judge.core import Finding
    finding = Finding(check="file.read", status="error",
                      message=f"{os.fspath(path)}: cannot be checked: {cause}{where}")
    return {
        "tool": {"name": "masterqc", "version": __version__},
        "file": dict(facts) if facts else {"path": os.fspath(path)},
        "spec": loaded_spec.info(),
        "findings": [finding.to_dict()],
        "verdict": "error",
        "error": {"cause": cause, "offset": offset},
    }


def judge_result(result: dict, loaded_spec) -> dict:
    """Add ``spec``, ``normalisation``, ``findings`` and ``verdict`` to a measure result (pure)."""
    from masterqc.judge import judge
    from masterqc.judge.normalisation import figures_for

    spec = loaded_spec.spec
    out = dict(result)
    out["spec"] = loaded_spec.info()
    out["normalisation"] = jsonable(figures_for(spec.normalisation, out))
    findings, verdict = judge(spec, out)
    out["findings"] = [f.to_dict() for f in findings]
    out["verdict"] = verdict
    return jsonable(out)


def check_file(path, loaded_spec, out_dir, formats=("json",), *, stem: str | None = None,
               base_options=None, progress=None) -> dict:
    """Measure ``path``, judge it against ``loaded_spec`` and write ``<stem>.<format>`` into ``out_dir``.

    ``loaded_spec`` is a :class:`masterqc.spec.loader.LoadedSpec`; ``formats`` any of
    :data:`ALL_FORMATS`; ``stem`` defaults to the file name without extension;
    ``base_options`` (:class:`MeasureOptions`) are overridden by what the spec derives.
    Returns the result object (also written as JSON when "json" is in ``formats``).
    An unreadable master gives an error result, never an exception; a failing
    renderer adds an ``error`` finding (``report.render``) and the JSON is still written.
    """
    from masterqc.measure.engine import measure_file
    from masterqc.spec.model import measure_options_for

    stem = stem or os.path.splitext(os.path.basename(os.fspath(path)))[0]
    os.makedirs(out_dir, exist_ok=True)
    options = measure_options_for(loaded_spec.spec, base_options)
    try:
        measured = measure_file(path, options, progress=progress)
    except AudioReadError as exc:
        from masterqc.measure.engine import file_facts
        try:
            facts = file_facts(path)
        except AudioReadError:
            facts = None
        result = error_result(path, loaded_spec, exc.cause, exc.offset, facts)
    else:
        result = judge_result(measured, loaded_spec)

    outputs = {}
    rendered = [f for f in formats if f in ("html", "pdf")]
    if rendered:  # error results get their reports too: the page says why the file was not judged
        try:
            from masterqc.report.render import write_reports
            paths = write_reports(result, out_dir, stem, rendered)
            for p in paths or []:
                outputs[os.path.splitext(os.fspath(p))[1].lstrip(".")] = os.path.basename(os.fspath(p))
        except Exception as exc:  # a renderer bug must not lose the judged result
            from masterqc.judge.core import Finding, verdict
            result["findings"].append(Finding(
                check="report.render", status="error",
                message=f"the {'/'.join(rendered)} report could not be written: {type(exc).__name__}: {exc}"
            ).to_dict())
            result["verdict"] = verdict(result["findings"])
    if "json" in formats:
        outputs["json"] = f"{stem}.json"
    result["outputs"] = outputs
    if "json" in formats:
        write_json(result, os.path.join(out_dir, f"{stem}.json"))
    return result


def unique_stems(paths) -> list[str]:
    """One output stem per input path, distinct even when two files share a name (``mix``, ``mix-2``)."""
    used: set[str] = set()
    out = []
    for p in paths:
        stem = os.path.splitext(os.path.basename(os.fspath(p)))[0] or "master"
        candidate, n = stem, 1
        while candidate.lower() in used:  # case-insensitive: file systems that fold case
            n += 1
            candidate = f"{stem}-{n}"
        used.add(candidate.lower())
        out.append(candidate)
    return out
