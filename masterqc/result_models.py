"""The pydantic models of the result object (see :mod:`masterqc.contract`, which re-exports them).

They live here so that importing :mod:`masterqc.contract` (every analyzer does, for
:func:`~masterqc.contract.measured`) does not import pydantic and build the models: a
measurement never needs them; reading, validating or describing a result does.
"""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field

from masterqc.contract import RESULT_FORMAT_VERSION, Status, Verdict


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid")


class Tool(_Model):
    name: Literal["masterqc"]
    version: str


class FileFacts(_Model):
    path: str
    size_bytes: int | None = None
    sha256: str | None = Field(None, pattern="^[0-9a-f]{64}$")


class Format(_Model):
    container: str
    encoding: str
    sample_rate_hz: int
    bit_depth: int
    channels: int = Field(..., ge=1)
    channel_layout: list[str]
    channel_layout_source: Literal["channel_mask", "conventional", "override", "unknown"] | None = None
    channel_weights: list[float] | None = None
    channel_mask: int | None = None
    frames: int = Field(..., ge=1)
    duration_s: float


class SpecFile(_Model):
    path: str
    sha256: str


class SpecInfo(_Model):
    """The spec a result was judged against; all null when no spec applied (a file no spec-map rule matches)."""

    name: str | None
    path: str | None
    sha256: str | None
    files: list[SpecFile] | None = None
    from_delivery_folder: bool | None = Field(None, description="true: the spec came with the masters "
                                                                "(a spec map's spec_in_folder), not from the operator")
    version: str | None = Field(None, description="the spec's own version (its version: key), printed on the "
                                                 "certificate")
    report: dict[str, str] | None = Field(None, description="the certificate's fields: client, job, operator, date "
                                                            "(the spec's report: section, then --field)")


class Normalisation(_Model):
    """Headroom figures of :func:`masterqc.judge.normalisation.headroom`."""

    target_lufs: float | None
    target_source: str | None = None
    ceiling_dbtp: float | None
    ceiling_source: str | None = None
    gain_db: float | None
    true_peak_after_gain_dbtp: float | None
    limiting_needed_db: float | None = Field(..., ge=0)
    note: str | None = None


class Finding(_Model):
    """One judged requirement.

    ``measured`` is the value as judged and shown (rounded to ``decimals``),
    ``measured_raw`` the unrounded one; ``limit_low``/``limit_high`` are the
    numeric limits in ``unit`` (None for an open side), ``target`` the target
    of a target-with-tolerance requirement; ``miss`` is the distance beyond the
    limit in ``miss_unit``.  ``limit`` is the same limit as text for people.
    """

    check: str
    status: Status
    message: str
    severity: Literal["fail", "warn"] | None = None
    measured: Any = None
    measured_raw: Any = None
    measured_text: str | None = None
    decimals: int | None = None
    limit: str | None = None
    limit_low: float | None = None
    limit_high: float | None = None
    target: float | None = None
    miss: float | None = None
    unit: str | None = None
    miss_unit: str | None = None
    where_s: list[list[float]] = Field(default_factory=list)

    def to_dict(self) -> dict:
        """Plain JSON-ready dict (an item of the result's ``findings``)."""
        out = self.model_dump(mode="json")
        out["where_s"] = [[float(a), float(b)] for a, b in self.where_s]
        return out


class Spectrogram(_Model):
    """Channel-summed levels: ``db[i][j]`` at ``time_s[i]`` and ``frequency_hz[j]``."""

    time_s: list[float]
    frequency_hz: list[float]
    db: list[list[float | None]]
    note: str | None = None


class PhaseCorrelationSeries(_Model):
    pair: str
    hop_s: float
    window_s: float | None = None
    values: list[float | None]


class GatingBlockHistogram(_Model):
    lower_lufs: float
    bin_lu: float
    bin: list[int]
    count: list[int]
    energy: list[float]


class Series(BaseModel):
    """Display series: each value list with the time (or frequency) axis it belongs to named.

    ``momentary_lufs`` and ``short_term_lufs`` are at ``loudness_time_s``;
    ``true_peak_envelope_dbtp`` at ``true_peak_envelope_time_s``;
    ``ltas_db_per_channel[c][j]`` at ``ltas_hz[j]``.  Other series may be present.
    """

    model_config = ConfigDict(extra="allow")

    loudness_time_s: list[float] | None = None
    momentary_lufs: list[float | None] | None = None
    short_term_lufs: list[float | None] | None = None
    gating_block_histogram: GatingBlockHistogram | None = None
    true_peak_envelope_time_s: list[float] | None = None
    true_peak_envelope_dbtp: list[float | None] | None = None
    ltas_hz: list[float] | None = None
    ltas_db_per_channel: list[list[float | None]] | None = None
    ltas_floor_db: list[float | None] | None = None
    spectrogram: Spectrogram | None = None
    phase_correlation: PhaseCorrelationSeries | None = None

    def pair(self, values: str, axis: str):
        """``(axis values, values)`` when both are present and of one length, else None."""
        v, t = getattr(self, values), getattr(self, axis)
        if not v or t is None or len(t) != len(v):
            return None
        return list(t), list(v)


class ReadError(_Model):
    cause: str
    offset: int | None = None


class Analysis(_Model):
    elapsed_s: float | None = None
    block_frames: int | None = None
    measurement_settings: dict | None = Field(
        None, description="the measurement options that can change a number (MeasureOptions.measurement_settings)")


class Provenance(_Model):
    """How the findings of this result came about: measured now, or re-judged from stored measurements."""

    how: Literal["measured", "rejudged"]
    measured_with: str | None = Field(None, description="measurement key: SHA-256 of the settings that can change "
                                                        "a number and the masterqc version")


class Result(_Model):
    """The result object: ``masterqc measure --json``, and with spec/findings/verdict after a check."""

    result_format: int = Field(RESULT_FORMAT_VERSION, description="version of the result format")
    tool: Tool
    file: FileFacts
    format: Format | None = None
    metadata: dict | None = None
    measurements: dict | None = None
    series: Series | None = None
    settings: dict | None = None
    analysis: Analysis | None = None
    spec: SpecInfo | None = None
    normalisation: Normalisation | None = None
    findings: list[Finding] | None = None
    verdict: Verdict | None = None
    outputs: dict[str, str] | None = Field(None, description="file names written for this master, by format")
    error: ReadError | None = Field(None, description="why the master could not be read (error results only)")
    provenance: Provenance | None = None
