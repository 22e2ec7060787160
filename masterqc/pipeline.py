"""The per-file pipeline: measure (or reuse stored measurements) -> judge -> render -> write.

:func:`check_file` is the one per-file step; ``masterqc check FILE`` and the
batch runner both call it.  It never raises for a bad master: a file that
cannot be read gives an *error result* (``verdict: "error"``, one finding with
status ``error`` naming the cause), which is written like any other result.

Measure once, judge many: a result records the key of the measurement settings
it was measured with (``provenance.measured_with``,
:meth:`masterqc.measure.options.MeasureOptions.measurement_key`).  When a spec
asks for the same settings, :func:`rejudge` judges the stored measurements
against it without reading any audio (``provenance.how: "rejudged"``); when it
asks for others (true-peak oversampling, conversion targets, thresholds, the
true-peak ceiling that locates overs, a layout override), the file is measured again.

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
from masterqc.contract import RESULT_FORMAT_VERSION, upgrade_result
from masterqc.errors import AudioReadError, UsageError
from masterqc.fileio import write_atomic  # noqa: F401  (part of this module's interface)
from masterqc.jsonutil import jsonable, result_json_text  # noqa: F401  (result_json_text: part of this module's interface)
from masterqc.stagelog import stage

# the output formats live in one module (parsing, defaults, whether reports can be rendered)
from masterqc.formats import ALL_FORMATS, DEFAULT_FORMATS, default_formats, parse_formats, reports_available  # noqa: E402,F401


def parse_result_text(text: str) -> tuple[dict, dict]:
    """``(result, encoded)`` of JSON text: ``encoded`` maps each top-level key written on a line of
    its own (the layout of :func:`result_json_text`) to ``(value, its text)``, so writing the value
    again costs no encoding; text in another layout gives an empty ``encoded``."""
    result = json.loads(text)
    encoded = {}
    lines = text.split("\n")
    if not isinstance(result, dict) or lines[0] != "{":
        return result, encoded
    decoder = json.JSONDecoder()
    for i, line in enumerate(lines[1:-1], start=1):
        if not line.startswith('  "'):
            continue  # a finding's line, or the end of the findings list
        try:
            key, end = decoder.raw_decode(line, 2)
        except ValueError:
            return result, {}
        if not isinstance(key, str) or not line.startswith(": ", end) or key not in result:
            return result, {}
        body = line[end + 2:]
        if body == "[":  # the findings list spans lines: encoded afresh
            continue
        if lines[i + 1] != "}":  # every key's line but the last ends with the separating comma
            if not body.endswith(","):
                return result, {}
            body = body[:-1]
        encoded[key] = (result[key], body)
    return result, encoded


def write_json(result: dict, path, durable: bool = True, encoded: dict | None = None) -> None:
    """The result as JSON (:func:`result_json_text`; non-finite floats as null), atomically
    (``durable``: see :func:`masterqc.fileio.write_atomic`; ``encoded``: see :func:`result_json_text`)."""
    try:  # fast path: a result that is already plain JSON (measured results are)
        data = result_json_text(result, encoded).encode("utf-8")
    except (TypeError, ValueError, UnicodeEncodeError):
        data = result_json_text(jsonable(result)).encode("utf-8")
    write_atomic(path, data, durable=durable)


def was_unreadable(result: dict) -> bool:
    """True when the master could not be read or checked at all (exit code 3).

    A master that was read but carries an error finding (e.g. NaN samples, a
    judge that failed) has verdict ``error`` yet was read: it counts as a
    failure (exit code 1), not as unreadable.
    """
    return "error" in result


def exit_code_for(results) -> int:
    """Exit code of a run over ``results`` (house choice, see README "Exit codes"): 3 if any master could not be
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
    return jsonable({
        "result_format": RESULT_FORMAT_VERSION,
        "tool": {"name": "masterqc", "version": __version__},
        "file": dict(facts) if facts else {"path": os.fspath(path)},
        "spec": loaded_spec.info(),
        "findings": [finding.to_dict()],
        "verdict": "error",
        "error": {"cause": cause, "offset": offset},
    })


def judge_result(result: dict, loaded_spec) -> dict:
    """Add ``spec``, ``normalisation``, ``findings`` and ``verdict`` to a measure result (pure)."""
    with stage("import_judge"):  # the judge and its sections: paid once per process
        from masterqc.judge import judge
        from masterqc.judge.normalisation import figures_for

    spec = loaded_spec.spec
    with stage("judge"):
        out = dict(result)  # measured results are plain JSON already (measure_file, or read from a file)
        out["spec"] = jsonable(loaded_spec.info())
        out["normalisation"] = jsonable(figures_for(spec.normalisation, out))
        findings, verdict = judge(spec, out)
        out["findings"] = jsonable([f.to_dict() for f in findings])
        out["verdict"] = verdict
    return out


#: the keys a judgement adds to a measured result (dropped before judging it again)
JUDGED_KEYS = ("spec", "normalisation", "findings", "verdict", "outputs")


class NeedsMeasuring(UsageError):
    """A saved result cannot be judged against a spec: the spec asks for other measurement settings."""


def options_for(loaded_spec, base_options=None):
    """The :class:`MeasureOptions` a spec asks for (over ``base_options``)."""
    from masterqc.spec.model import measure_options_for
    return measure_options_for(loaded_spec.spec, base_options)


def _settings_difference(result: dict, options) -> str:
    had = ((result.get("analysis") or {}).get("measurement_settings")) or {}
    want = options.measurement_settings()
    diff = [f"{k} {had.get(k)!r} -> {want[k]!r}" for k in sorted(want) if had.get(k) != want[k]]
    if not had:
        return "the result does not record its measurement settings (written by an older masterqc)"
    if not diff:
        return "it was measured by another masterqc version"
    return "the spec asks for other measurement settings: " + "; ".join(diff)


def can_rejudge(result: dict, options) -> bool:
    """True when ``result`` holds measurements made with exactly ``options``' measurement settings."""
    return ("measurements" in result and
            (result.get("provenance") or {}).get("measured_with") == options.measurement_key())


def rejudge(result: dict, loaded_spec, base_options=None, source: str = "result") -> dict:
    """Judge a saved result's measurements against ``loaded_spec`` (pure; no audio is read).

    The file's layout override, when it had one, is kept.  Raises :class:`NeedsMeasuring`
    naming ``source`` when the spec needs other measurement settings.  An error result
    (the master could not be read) stays an error result, under the new spec.
    """
    from dataclasses import replace

    from masterqc.measure.options import MeasureOptions
    result = upgrade_result(result, source)
    if "measurements" not in result:
        err = result.get("error") or {}
        out = error_result((result.get("file") or {}).get("path", source), loaded_spec,
                           err.get("cause", "it could not be read"), err.get("offset"), result.get("file"))
        out["provenance"] = {"how": "rejudged", "measured_with": None}
        return out
    fmt = result.get("format") or {}
    layout = tuple(fmt["channel_layout"]) if fmt.get("channel_layout_source") == "override" else None
    options = options_for(loaded_spec, replace(base_options or MeasureOptions(), channel_layout=layout))
    if not can_rejudge(result, options):
        raise NeedsMeasuring(f"{source}: cannot be judged again without measuring: {_settings_difference(result, options)}"
                             " (run masterqc check on the master)")
    return judge_stored(result, loaded_spec, options.measurement_key())


def judge_stored(stored: dict, loaded_spec, measurement_key: str) -> dict:
    """Stored measurements (made under ``measurement_key``) judged against ``loaded_spec`` (pure)."""
    measured = {k: v for k, v in stored.items() if k not in JUDGED_KEYS}
    out = judge_result(measured, loaded_spec)
    out["provenance"] = {"how": "rejudged", "measured_with": measurement_key}
    return out


def write_outputs(result: dict, out_dir, stem: str, formats, *, keep=(), durable: bool = True,
                  encoded: dict | None = None, pages: str = "all") -> dict:
    """Render and write ``result`` as ``<stem>.<format>`` in ``out_dir``, and its events as
    ``<stem>.events.csv``; return it with ``outputs``.

    ``keep``: rendered formats already on disk and fresh (not written again).  A failing
    renderer adds an ``error`` finding (``report.render``) and the JSON is still written;
    error results get their reports too (the page says why the file was not judged).
    ``durable``: the JSON is flushed to disk before it replaces the old one
    (:func:`masterqc.fileio.write_atomic`); ``encoded``: values already encoded (:func:`result_json_text`).
    ``pages``: "all" (certificate and appendix) or "summary" (the certificate alone).
    """
    result = dict(result)
    os.makedirs(out_dir, exist_ok=True)
    outputs = {f: f"{stem}.{f}" for f in formats if f in keep and f != "json"}
    todo = [f for f in formats if f in ("html", "pdf") and f not in keep]
    if todo:
        try:
            from masterqc.report.render import write_reports
            for p in write_reports(result, out_dir, stem, todo, pages=pages) or []:
                outputs[os.path.splitext(os.fspath(p))[1].lstrip(".")] = os.path.basename(os.fspath(p))
        except Exception as exc:  # a renderer bug must not lose the judged result
            from masterqc.judge.core import Finding, verdict
            result["findings"] = list(result.get("findings") or []) + [Finding(
                check="report.render", status="error",
                message=f"the {'/'.join(todo)} report could not be written: {type(exc).__name__}: {exc}"
            ).to_dict()]
            result["verdict"] = verdict(result["findings"])
    if "json" in formats:
        outputs["json"] = f"{stem}.json"
    # every located event as CSV beside the reports (a header alone when there is none or the
    # file could not be read, so an old list never outlives a new check)
    from masterqc.exports import events_csv
    with stage("write_json_csv"):
        write_atomic(os.path.join(out_dir, f"{stem}.events.csv"), events_csv(result), durable=durable)
        outputs["events"] = f"{stem}.events.csv"
        result["outputs"] = outputs
        if "json" in formats:
            write_json(result, os.path.join(out_dir, f"{stem}.json"), durable=durable, encoded=encoded)
    return result


def measure_and_judge(path, loaded_spec, *, base_options=None, progress=None, stored: dict | None = None,
                      options=None) -> dict:
    """The judged result of one master: from ``stored`` measurements when they were made with the
    settings the spec asks for (no audio read; ``file.path`` becomes ``path``), else measured now.
    ``options``: the :class:`MeasureOptions` the spec asks for, when the caller has them already
    (:func:`options_for`).  Never raises for a bad master."""
    options = options if options is not None else options_for(loaded_spec, base_options)
    if stored is not None and "measurements" not in stored and "error" in stored:
        # the stored outcome of an earlier read under the same settings: the file could not be read
        err = stored["error"]
        return error_result(path, loaded_spec, err.get("cause", "it could not be read"), err.get("offset"),
                            stored.get("file"))
    if stored is not None and "measurements" in stored:
        key = options.measurement_key()
        if (stored.get("provenance") or {}).get("measured_with") == key:  # can_rejudge
            out = judge_stored(stored, loaded_spec, key)
            out["file"] = dict(out.get("file") or {}, path=os.fspath(path))  # the same bytes, maybe another name
            return out
    with stage("import_measure"):  # the engine and its analyzers: paid once per process
        from masterqc.measure.engine import measure_file
    try:
        with stage("measure"):
            measured = measure_file(path, options, progress=progress)
    except AudioReadError as exc:
        from masterqc.filehash import file_facts
        try:
            facts = file_facts(path)
        except AudioReadError:
            facts = None
        return error_result(path, loaded_spec, exc.cause, exc.offset, facts)
    return judge_result(measured, loaded_spec)


def check_file(path, loaded_spec, out_dir, formats=("json",), *, stem: str | None = None,
               base_options=None, progress=None, stored: dict | None = None, keep=(), options=None,
               durable: bool = True, encoded: dict | None = None, pages: str = "all") -> dict:
    """The per-file step: measure ``path`` (or judge ``stored`` measurements again, see
    :func:`measure_and_judge`), judge it against ``loaded_spec`` and write ``<stem>.<format>``
    into ``out_dir`` (:func:`write_outputs`; ``keep``: fresh reports not written again).

    ``loaded_spec`` is a :class:`masterqc.spec.loader.LoadedSpec`; ``formats`` any of
    :data:`ALL_FORMATS`; ``stem`` defaults to the file name without extension;
    ``base_options`` (:class:`MeasureOptions`) are overridden by what the spec derives.
    ``options``: the spec's :class:`MeasureOptions` when the caller has them already;
    ``durable``, ``encoded`` (the stored result's values already encoded): see :func:`write_outputs`.
    Returns the result object (also written as JSON when "json" is in ``formats``).
    """
    stem = stem or os.path.splitext(os.path.basename(os.fspath(path)))[0]
    result = measure_and_judge(path, loaded_spec, base_options=base_options, progress=progress, stored=stored,
                               options=options)
    return write_outputs(result, out_dir, stem, formats, keep=keep, durable=durable, encoded=encoded, pages=pages)


def unique_stems(paths) -> list[str]:
    """One output stem per input path, distinct even when two files share a name (``mix``, ``mix-2``)."""
    used: set[str] = set()
    out = []
    for p in paths:
        stem = os.path.splitext(os.path.basename(os.fspath(p)))[0] or "master"
        # a name's bytes that are not UTF-8, and control characters, become "_" in the output name
        stem = "".join("_" if (0xDC80 <= ord(c) <= 0xDCFF or not c.isprintable()) else c for c in stem)
        candidate, n = stem, 1
        while candidate.lower() in used:  # case-insensitive: file systems that fold case
            n += 1
            candidate = f"{stem}-{n}"
        used.add(candidate.lower())
        out.append(candidate)
    return out
