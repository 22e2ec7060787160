"""Typed result of ``masterqc compare``: a deliverable measured against its master.

Every numeric field names its unit (``_s``, ``_hz``, ``_db``, ``_dbfs``, ``_lufs``,
``_dbtp``, ``_bits``, ``_ppm``); ratios and correlations are plain numbers in
-1..1 (``_corr``) or 0..1 (``_fraction``).  A value that cannot exist for the
pair (the level at 20 kHz of a 32 kHz deliverable, the folded residue of a
deliverable at a higher rate than its master) is ``None``.

:data:`RESULT_FORMAT_VERSION` is bumped whenever a key changes meaning or goes
away; new keys may appear within a version.
"""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

#: version of the comparison result format (``result_format_version``)
RESULT_FORMAT_VERSION = 1


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid")


class FileFacts(_Model):
    path: str
    sample_rate_hz: int
    bit_depth: int
    is_float: bool
    encoding: str
    channels: int
    channel_layout: list[str]
    duration_s: float
    frames: int


class Jump(_Model):
    """A step in the offset: an edit (section removed: negative size; repeated or inserted: positive)."""

    at_master_s: float = Field(description="master time where the deliverable's content jumps")
    at_deliverable_s: float = Field(description="deliverable time of the same place")
    size_ms: float = Field(description="new offset minus old offset (negative: master content missing)")
    offset_before_ms: float
    offset_after_ms: float


class Alignment(_Model):
    offset_ms: float | None = Field(description="deliverable time minus master time of the same content, "
                                                "median over the programme (positive: deliverable later)")
    offset_deliverable_samples: float | None = Field(description="the same in deliverable samples (fractional)")
    coarse_offset_ms: float | None = Field(description="whole-programme offset from the envelopes (first stage)")
    drift_ppm: float | None = Field(description="slope of the offset over time between jumps, parts per million")
    offset_spread_ms: float | None = Field(description="robust spread (1.4826 x MAD) of the per-frame offsets "
                                                       "around the piecewise-constant track")
    jumps: list[Jump] = Field(default_factory=list)
    aligned_fraction: float = Field(description="share of analysis frames whose offset was found with confidence")
    frame_s: float
    hop_s: float


class Identity(_Model):
    verdict: Literal["same", "different_mix", "different_programme"]
    correlation: float | None = Field(description="square root of the share of deliverable power, in the identity "
                                                  "band, that is a linear function of the master (bias corrected)")
    residual_re_signal_db: float | None = Field(description="power not explained by the master relative to the "
                                                            "deliverable's power in the identity band, dB")
    band_hz: list[float]
    same_min_correlation: float
    mix_min_correlation: float


class ChannelMatch(_Model):
    deliverable_channel: str
    master_channel: str
    correlation: float = Field(description="normalised correlation with that master channel after alignment")
    gain_db: float | None = Field(description="least-squares gain against that master channel, 50 Hz .. gain band top")
    polarity: Literal["normal", "inverted"]


class Channels(_Model):
    matches: list[ChannelMatch]
    correlation_matrix: list[list[float]] = Field(description="rows: deliverable channels, columns: master channels")
    order: Literal["same", "swapped", "remapped", "ambiguous"]
    polarity_inverted: list[str] = Field(description="deliverable channels found inverted")
    gain_db: float | None = Field(description="power-weighted mean gain over the matched channels, dB")
    gain_band_hz: list[float]


class Transfer(_Model):
    passband_ripple_db: float | None = Field(description="max - min of |H| re the broadband gain over the ripple band")
    ripple_band_hz: list[float]
    level_at_20khz_db: float | None = Field(description="|H| at 20 kHz re the broadband gain; None when 20 kHz is "
                                                        "outside the common band")
    minus_3db_hz: float | None = Field(description="lowest frequency above 1 kHz where |H| falls 3 dB below the gain")
    minus_3db_re_nyquist: float | None = Field(description="minus_3db_hz over the new (deliverable) Nyquist frequency")
    nyquist_new_hz: float
    common_band_hz: list[float]
    mean_coherence: float | None = Field(description="mean magnitude-squared coherence over the ripple band")


class Residue(_Model):
    """Deliverable power that does not come from the master's same frequencies, relative to its coherent power."""

    folded_re_signal_db: float | None = Field(description="power coherent with the master's mirrored bins "
                                                          "(n*fs_new +- f), i.e. folded from above the new Nyquist "
                                                          "frequency; None when the deliverable's rate is not lower")
    folded_power_dbfs: float | None
    folded_detection_floor_db: float | None = Field(description="what an estimate of zero reads at, from the "
                                                                "number of frames (values near it mean none found)")
    folded_found: bool | None
    other_re_signal_db: float | None = Field(description="the rest: requantisation, distortion, other processing")
    above_master_band_re_signal_db: float | None = Field(description="deliverable power above the master's Nyquist "
                                                                     "frequency (images of an upsampler); None "
                                                                     "when the deliverable's rate is not higher")


class Requantisation(_Model):
    residual_power_dbfs: float | None = Field(description="mean square of the residual after alignment, gain, H and "
                                                          "folded terms, extrapolated to the deliverable's full band, "
                                                          "dB re a full-scale square wave")
    expected_tpdf_power_dbfs: float | None = Field(description="quantisation plus TPDF dither power for the "
                                                               "deliverable's bit depth, Delta^2/4")
    residual_re_tpdf_db: float | None
    effective_bits: float | None = Field(description="word length whose plain rounding error (Delta^2/12) has "
                                                     "the residual's power")
    spectrum_spread_db: float | None = Field(description="loudest minus quietest of 10 equal-width bands of the "
                                                         "residual spectrum")
    spectrum_shape: Literal["flat", "shaped", "unknown"]
    signal_correlation: float | None = Field(description="correlation of per-frame residual level with signal "
                                                         "level over the quiet frames (signal below the residual)")
    quiet_residual_change_db: float | None = Field(description="median residual level in the quiet frames re the "
                                                               "level in loud frames (decides the verdict)")
    quiet_frames: int
    verdict: Literal["dithered", "signal_correlated", "unknown"]
    verdict_reason: str = Field("", description="why the verdict is unknown, when it is")


class Over(_Model):
    kind: Literal["clipped_run", "true_peak_over"]
    channel: str | None
    start_s: float
    end_s: float


class PeaksLoudness(_Model):
    master_true_peak_dbtp: float | None
    deliverable_true_peak_dbtp: float | None
    true_peak_change_db: float | None
    master_integrated_lufs: float | None
    deliverable_integrated_lufs: float | None
    loudness_change_lu: float | None
    overs_introduced: list[Over]
    overs_introduced_count: int


class Series(_Model):
    """Display series (fixed resolution)."""

    frequency_hz: list[float] = Field(default_factory=list)
    transfer_db: list[float | None] = Field(default_factory=list)
    coherence: list[float | None] = Field(default_factory=list)
    residual_psd_dbfs_per_hz: list[float | None] = Field(default_factory=list)
    expected_tpdf_psd_dbfs_per_hz: float | None = None
    offset_time_s: list[float] = Field(default_factory=list)
    offset_ms: list[float | None] = Field(default_factory=list)


class Comparison(_Model):
    result_format_version: int = RESULT_FORMAT_VERSION
    kind: Literal["comparison"] = "comparison"
    tool: dict
    master: FileFacts
    deliverable: FileFacts
    alignment: Alignment
    identity: Identity
    channels: Channels
    transfer: Transfer
    residue: Residue
    requantisation: Requantisation
    peaks_loudness: PeaksLoudness
    series: Series
    settings: dict
    spec: dict | None = None
    findings: list[dict] = Field(default_factory=list)
    verdict: str | None = None
    outputs: dict = Field(default_factory=dict)
