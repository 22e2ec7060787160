"""The result contract: typed models of what measure, judge and render hand each other.

This module is neutral: it imports nothing from the read, measure, spec, judge
or report layers, so every layer can import it.

* :data:`UNITS` -- the one unit table (label, difference unit, decimals shown
  and judged at); the judge, the terminal table and the report all read it.
* :func:`measured` -- how an analyzer declares one measurement field (JSON
  schema fragment, unit, meaning) in its ``measurement_schema``.
* :class:`Finding`, :class:`Result` and their parts -- pydantic models of the
  result object.  :func:`result_json_schema` generates ``masterqc schema
  result`` from them plus the analyzers' declarations.
* :data:`RESULT_FORMAT_VERSION` and :func:`upgrade_result` -- saved results
  carry the format version; an older saved result is upgraded on reading (the
  renames of ``CHANGELOG.md``), a newer one is refused with a clear message.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any, Callable, Literal


#: version of the result format written by this code (``result_format`` in every result)
RESULT_FORMAT_VERSION = 2

#: below this duration a loudness-range figure is shown with a caution (the judge's message and the
#: report's note both use it): the EBU R 128 s1
#: supplement (short-form content) finds LRA not meaningful for short programmes, and
#: EBU Tech 3341 (2016 revision) has meters signal that LRA is not stable in a
#: programme's first 60 s
SHORT_PROGRAMME_S = 60.0


# ---------------------------------------------------------------- units

@dataclass(frozen=True)
class Unit:
    """One unit: ``code`` is the key suffix (``dbtp``), ``label`` people's spelling (``dBTP``),
    ``difference`` the code of a difference of two such values (``db``), ``decimals`` the
    decimals a value is shown and judged at."""

    code: str
    label: str
    difference: str
    decimals: int


#: the one unit table: key suffix -> Unit (order matters for suffix matching: longer first)
UNITS: dict[str, Unit] = {u.code: u for u in (
    Unit("lufs", "LUFS", "lu", 1),
    Unit("lkfs", "LKFS", "lu", 1),
    Unit("lu", "LU", "lu", 1),
    Unit("dbtp", "dBTP", "db", 1),
    Unit("dbfs", "dBFS", "db", 1),
    Unit("db", "dB", "db", 1),
    Unit("khz", "kHz", "khz", 2),
    Unit("hz", "Hz", "hz", 0),
    Unit("ms", "ms", "ms", 1),
    Unit("s", "s", "s", 3),
    Unit("bytes", "bytes", "bytes", 0),
    Unit("bits", "bits", "bits", 0),
    Unit("samples", "samples", "samples", 0),
    Unit("frames", "frames", "frames", 0),
    Unit("percent", "%", "percent", 1),
    Unit("ratio", "", "ratio", 3),
    Unit("fraction", "", "fraction", 3),
    Unit("factor", "\u00d7", "factor", 0),
    Unit("count", "", "count", 0),
    Unit("corr", "", "corr", 2),       # a correlation coefficient, -1 .. +1
)}

#: declared unit of values that have none (booleans, text, structured records)
NO_UNIT = "none"


def unit_label(code: str) -> str:
    """People's spelling of a unit code: ``"dbtp"`` -> ``"dBTP"`` (unknown codes as given)."""
    return UNITS[code].label if code in UNITS else code


def difference_unit(code: str) -> str:
    """Code of a difference of ``code``: ``"lufs"`` -> ``"lu"``, ``"dbtp"`` -> ``"db"``."""
    return UNITS[code].difference


def unit_decimals(code: str) -> int:
    """Decimals a value in ``code`` is shown with and judged at (3 for an unknown unit)."""
    return UNITS[code].decimals if code in UNITS else 3


def unit_of_key(key: str) -> Unit | None:
    """The unit a key names by its suffix (``true_peak_dbtp_per_channel`` -> dBTP), or None."""
    k = key.lower()
    for tail in ("_per_channel", "_per_pair"):
        if k.endswith(tail):
            k = k[: -len(tail)]
    for code in sorted(UNITS, key=len, reverse=True):
        if k.endswith("_" + code) or k == code:
            return UNITS[code]
    return None


def measured(schema: dict, unit: str, meaning: str) -> dict:
    """Declare one measurement field: its JSON-schema fragment, unit code and meaning.

    The returned fragment is what ``measurement_schema`` maps the key to; the
    published result schema carries ``description`` and ``x-unit``.
    """
    if unit != NO_UNIT and unit not in UNITS:
        raise ValueError(f"unknown unit {unit!r} (see masterqc.contract.UNITS)")
    # a fragment that already says more about itself keeps its own description
    return {"description": meaning, **schema, "x-unit": unit}


# ---------------------------------------------------------------- checks

@dataclass(frozen=True)
class Check:
    """One numeric requirement a spec section declares, judged by :func:`masterqc.judge.core.judge_checks`.

    ``spec_key``: the requirement's key in its section (``integrated``).
    ``check``: the finding's check id (``loudness.integrated``).
    ``measurement``: the measured field, a key of ``measurements`` or ``format.<key>``.
    ``unit``: unit code of the measured field (must match the requirement's unit).
    ``what``: the quantity in words, for messages.
    ``null_means``: why the measured value can be null (the skipped finding says it).
    ``where``: a measurement key of time ranges attached to a missed finding, or None.
    ``below_gate_after_s``: for loudness values, a programme at least this long whose value
        is null lies below the -70 LUFS gate (judged as below the measurable range, not skipped).
    ``kind``: how it is judged -- ``"limits"`` (a numeric requirement, :func:`check_limits`),
        ``"allowed"`` (an allowed-values list, :func:`check_allowed`), both by
        :func:`masterqc.judge.core.judge_checks`; or ``"section"``: judged by the section's own
        judge (the declaration still names the spec key, field, unit and null meaning, and
        ``check`` may end in ``*`` for a family of finding ids such as one per bext field).
    ``show``: for ``"allowed"``, how a value is written in the message (default ``str``).
    ``null_when``: ``(field, value)``: the measured value counts as null when that other field
        has that value (a channel layout guessed from nothing is not a layout).
    """

    spec_key: str
    check: str
    measurement: str
    unit: str
    what: str
    null_means: str
    where: str | None = None
    below_gate_after_s: float | None = None
    kind: Literal["limits", "allowed", "section"] = "limits"
    show: Callable[[Any], str] | None = None
    null_when: tuple[str, Any] | None = None

    def covers(self, finding_check: str) -> bool:
        """True when a finding with check id ``finding_check`` is one of this declaration's."""
        if self.check.endswith("*"):
            return finding_check.startswith(self.check[:-1])
        return finding_check == self.check or finding_check.startswith(self.check + ".")


# ---------------------------------------------------------------- models

Status = Literal["pass", "warn", "fail", "skipped", "error"]
Verdict = Literal["pass", "warn", "fail", "error"]
STATUSES: tuple[str, ...] = ("pass", "warn", "fail", "skipped", "error")
VERDICTS: tuple[str, ...] = ("pass", "warn", "fail", "error")


#: the pydantic models of the result live in :mod:`masterqc.result_models` and load on first use
_MODEL_NAMES = frozenset(('Analysis', 'FileFacts', 'Finding', 'Format', 'GatingBlockHistogram', 'Normalisation', 'PhaseCorrelationSeries', 'Provenance', 'ReadError', 'Result', 'Series', 'SpecFile', 'SpecInfo', 'Spectrogram', 'Tool', '_Model'))


def __getattr__(name):
    if name in _MODEL_NAMES:
        from masterqc import result_models
        return getattr(result_models, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def result_json_schema(measurement_fields: dict, metadata_schema: dict, series_fields: dict) -> dict:
    """JSON Schema (draft 2020-12) of the result object, from :class:`Result` and the analyzers'
    declarations (``measurement_fields``: key -> fragment of :func:`measured`)."""
    from masterqc.result_models import Result
    schema = Result.model_json_schema(ref_template="#/$defs/{model}")
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "masterqc result"
    props = schema["properties"]
    props["result_format"] = {"const": RESULT_FORMAT_VERSION, "description": "version of the result format"}
    props["metadata"] = metadata_schema
    props["measurements"] = {"type": "object", "properties": dict(measurement_fields),
                             "required": sorted(measurement_fields)}
    # the series model's fields, plus any further series an analyzer declares
    series = schema["$defs"]["Series"]
    for key, frag in series_fields.items():
        series["properties"].setdefault(key, frag)
    # a master that could not be read carries only tool, file, spec, findings, verdict and error
    schema["if"] = {"required": ["verdict"], "properties": {"verdict": {"const": "error"}}}
    schema["then"] = {"required": ["spec", "findings", "verdict"]}
    schema["else"] = {"required": ["format", "metadata", "measurements"],
                      "properties": {"file": {"required": ["path", "size_bytes", "sha256"]}}}
    return schema


# ---------------------------------------------------------------- versions

class ResultFormatError(ValueError):
    """A saved result this code cannot read (newer format, or not a result); the message says why."""


#: measurement renames from result format 1 to 2 (also in CHANGELOG.md): old key -> new key
RENAMED_MEASUREMENTS_1_TO_2 = {
    "gating_block_count": "loudness_block_count",
    "gated_block_count": "loudness_block_above_gates_count",
    "true_peak_oversample_factor": "true_peak_oversampling_factor",
    "clipped_runs": "clipped_run_count",
    "clipped_runs_per_channel": "clipped_run_count_per_channel",
    "clipped_samples_per_channel": "clipped_sample_count_per_channel",
    "over_full_scale_samples_per_channel": "over_full_scale_sample_count_per_channel",
    "nonfinite_samples_per_channel": "nonfinite_sample_count_per_channel",
    "effective_bit_depth": "effective_bit_depth_bits",
    "effective_bit_depth_per_channel": "effective_bit_depth_bits_per_channel",
    "upsampled_confidence": "upsampled_confidence_fraction",
    "aliasing_score": "alias_to_harmonic_ratio_db",
}
#: fractions (0..1) in format 1 that format 2 gives as percent (0..100): old key -> new key
FRACTION_TO_PERCENT_1_TO_2 = {
    "phase_correlation_below_share": "phase_correlation_below_percent",
    "phase_correlation_below_share_per_pair": "phase_correlation_below_percent_per_pair",
}


def _percent(v):
    if isinstance(v, list):
        return [_percent(x) for x in v]
    return None if v is None else 100.0 * float(v)


def upgrade_result(data: dict, source: str = "result") -> dict:
    """A saved result in the current format: format 1 (no ``result_format`` key) is upgraded
    (keys renamed, fractions turned into percent); a newer format is refused.

    Raises :class:`ResultFormatError` naming ``source`` and the version.
    """
    if not isinstance(data, dict):
        raise ResultFormatError(f"{source}: not a masterqc result (not a JSON object)")
    version = data.get("result_format", 1)
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise ResultFormatError(f"{source}: result_format {version!r} is not a result-format version")
    if version > RESULT_FORMAT_VERSION:
        raise ResultFormatError(
            f"{source}: written in result format {version} by a newer masterqc; this masterqc reads "
            f"formats 1 to {RESULT_FORMAT_VERSION} (upgrade masterqc to read it)")
    if version == RESULT_FORMAT_VERSION:
        return data
    out = copy.deepcopy(data)
    m = out.get("measurements")
    if isinstance(m, dict):
        for old, new in RENAMED_MEASUREMENTS_1_TO_2.items():
            if old in m and new not in m:
                m[new] = m.pop(old)
        for old, new in FRACTION_TO_PERCENT_1_TO_2.items():
            if old in m and new not in m:
                m[new] = _percent(m.pop(old))
    out = {"result_format": RESULT_FORMAT_VERSION, **{k: v for k, v in out.items() if k != "result_format"}}
    return out


def parse_result(data: dict, source: str = "result") -> Result:
    """The typed :class:`Result` of a (possibly older) saved result; :class:`ResultFormatError`
    names ``source`` and the first key that does not fit."""
    from pydantic import ValidationError
    from masterqc.result_models import Result
    data = upgrade_result(data, source)
    try:
        return Result.model_validate(data)
    except ValidationError as exc:
        first = exc.errors()[0]
        where = ".".join(str(p) for p in first.get("loc", ())) or "(top level)"
        raise ResultFormatError(f"{source}: not a valid masterqc result at {where}: {first.get('msg')}") from None


def parse_series(data) -> Series:
    """The typed :class:`Series` of a result's ``series`` (empty when absent or not series)."""
    from pydantic import ValidationError
    from masterqc.result_models import Series
    try:
        return Series.model_validate(data or {})
    except ValidationError:
        return Series()


def parse_finding(data) -> Finding | None:
    """A finding dict as a :class:`Finding`, or None when it is not one."""
    from pydantic import ValidationError
    from masterqc.result_models import Finding
    try:
        return Finding.model_validate(data)
    except ValidationError:
        return None
