"""``integrity:`` -- sample-level requirements: clipping, DC, silence, dropouts, bit depth, channels::

    integrity:
      clipped_runs: {max_count: 0}               # runs of >= clip_min_run_samples at full scale
      clip_min_run_samples: 3                    # common practice, no source
      clip_threshold_db: 0.0                     # how far below full scale still counts as clipped
      over_full_scale_samples: {max_count: 0}    # float files: samples beyond +-1.0
      dc_offset: {max_dbfs: -60.0}               # mean level of the worst channel
      subsonic_energy: {max_db: -30.0, severity: warn}   # energy below 20 Hz vs total
      head_silence: {min_s: 0.5, max_s: 2.0}     # near-silence at the start (sample peak)
      tail_silence: {min_s: 1.0}
      silence_threshold_dbfs: -60.0
      dropouts: {max_count: 0}                   # mid-file digital silence or frozen values
      dropout_min_s: 0.005
      effective_bit_depth: {min_bits: 24}        # judged on the lowest non-silent channel
      dual_mono: [false]
      inverted_polarity: [false]
      phase_correlation: {min_corr: -0.3, severity: warn}
      phase_correlation_below: {max_percent: 5.0}  # share of time below the threshold
      phase_correlation_threshold: 0.0
      level_balance: {max_lu: 1.5}               # |balance| of the worst channel pair, K-weighted
      truncated_audio: fail                      # default; warn or allow to accept a cut file

The section always exists: non-finite samples (NaN, +-Inf) in a float file
give an ``error`` finding with their first positions even when a spec leaves
the section out (``nonfinite_samples: false`` turns the check off; writing
``true`` also reports a pass when there are none).

Every key is optional; leave a key out and that property is measured and
reported but not judged.

Full scale is the encoding's own: a 16-bit master padded into a 24-bit file
tops out at code 0x7FFF00, 0.00027 dB below 24-bit full scale, so its clipped
runs count only with ``clip_threshold_db`` of at least 0.001 (the
``effective_bit_depth`` check finds the padding itself).
"""

from __future__ import annotations

from typing import Literal

from pydantic import Field

from masterqc.contract import NO_UNIT, Check
from masterqc.spec.types import SpecModel, allowed, bounds, ceiling, floor

_NO_PAIR = "no channel pair, or no window above the level floor"

#: the numeric checks judged from one measurement each (masterqc.judge.core.judge_checks); the
#: section's other checks (DC, silence ranges, bit depth, balance, pairs, non-finite) need more
#: than one field and are judged in masterqc.judge.integrity
CHECKS = (
    Check("clipped_runs", "integrity.clipped_runs", "clipped_run_count", "count", "clipped runs",
          "the measurement does not exist for this file", where="clipped_run_where_s"),
    Check("over_full_scale_samples", "integrity.over_full_scale_samples", "over_full_scale_sample_count", "count",
          "samples beyond full scale", "integer PCM cannot exceed full scale (only float files are judged)"),
    Check("subsonic_energy", "integrity.subsonic_energy", "subsonic_energy_db", "db",
          "energy below 20 Hz (worst channel)", "every channel is digital silence"),
    Check("dropouts", "integrity.dropouts", "dropout_count", "count", "dropouts",
          "the measurement does not exist for this file", where="dropout_where_s"),
    Check("phase_correlation", "integrity.phase_correlation", "phase_correlation_min", "corr",
          "lowest phase correlation (100 ms windows)", _NO_PAIR),
    Check("phase_correlation_below", "integrity.phase_correlation_below", "phase_correlation_below_percent",
          "percent", "share of time below the phase threshold", _NO_PAIR, where="phase_correlation_below_where_s"),
    # judged by masterqc.judge.integrity itself
    Check("dc_offset", "integrity.dc_offset", "dc_offset_dbfs", "dbfs", "DC offset (worst channel)",
          "every channel is digital silence", kind="section"),
    Check("head_silence", "integrity.head_silence", "head_silence_s", "s", "silence at the head",
          "the measurement does not exist for this file", kind="section"),
    Check("tail_silence", "integrity.tail_silence", "tail_silence_s", "s", "silence at the tail",
          "the measurement does not exist for this file", kind="section"),
    Check("head_digital_silence", "integrity.head_digital_silence", "head_digital_silence_s", "s",
          "digital silence at the head", "the measurement does not exist for this file", kind="section"),
    Check("tail_digital_silence", "integrity.tail_digital_silence", "tail_digital_silence_s", "s",
          "digital silence at the tail", "the measurement does not exist for this file", kind="section"),
    Check("nonfinite_samples", "integrity.nonfinite_samples", "nonfinite_sample_count", "count",
          "non-finite samples (NaN, +-Inf)", "integer PCM holds no non-finite values", kind="section"),
    Check("effective_bit_depth", "integrity.effective_bit_depth", "effective_bit_depth_bits_per_channel", "bits",
          "effective bit depth (lowest channel)", "every channel is digital silence", kind="section"),
    Check("dual_mono", "integrity.dual_mono", "dual_mono", NO_UNIT, "first channel pair identical (dual mono)",
          "the file has one channel, or the channels are digital silence", kind="section"),
    Check("inverted_polarity", "integrity.inverted_polarity", "inverted_polarity", NO_UNIT,
          "channel pair in inverted polarity", "the file has one channel, or the channels are digital silence",
          kind="section"),
    Check("level_balance", "integrity.level_balance", "level_balance_lu_per_pair", "lu",
          "level difference of the worst channel pair, K-weighted", _NO_PAIR, kind="section"),
    Check("truncated_audio", "integrity.truncated_audio", "metadata.audio_data", NO_UNIT,
          "audio data cut short (missing bytes)", "never null: a whole file records no missing bytes",
          kind="section"),
)

#: keys that set how a measurement is made, not requirements
SETTINGS = ("clip_min_run_samples", "clip_threshold_db", "silence_threshold_dbfs", "dropout_min_s",
            "phase_correlation_threshold", "inverted_polarity_correlation")

ALWAYS = True


class Section(SpecModel):
    """Sample-level integrity requirements (clipping, DC, silence, dropouts, non-finite, bit depth, channels)."""

    clipped_runs: ceiling("count") | None = Field(
        None, description="most clipped runs allowed, counted over all channels (e.g. {max_count: 0})")
    clip_min_run_samples: int | None = Field(
        None, ge=1, le=1000, description="a clipped run is at least this many consecutive full-scale samples "
                                         "(default 3; common practice)")
    clip_threshold_db: float | None = Field(
        None, ge=0.0, le=6.0, description="how far below full scale, dB, a sample still counts as clipped "
                                          "(default 0: exactly the full-scale code)")
    over_full_scale_samples: ceiling("count") | None = Field(
        None, description="float files: most samples allowed beyond full scale (+-1.0)")
    dc_offset: ceiling("dbfs") | None = Field(
        None, description="highest DC offset (mean level) of any channel, dBFS")
    subsonic_energy: ceiling("db") | None = Field(
        None, description="highest energy below 20 Hz relative to the channel's total energy, dB")
    head_silence: bounds("s") | None = Field(
        None, description="near-silence at the start of the file, s (frames where every channel is at or "
                          "below silence_threshold_dbfs)")
    tail_silence: bounds("s") | None = Field(None, description="near-silence at the end of the file, s")
    head_digital_silence: bounds("s") | None = Field(
        None, description="digital silence (exact zeros) at the start of the file, s")
    tail_digital_silence: bounds("s") | None = Field(
        None, description="digital silence (exact zeros) at the end of the file, s")
    silence_threshold_dbfs: float | None = Field(
        None, le=0.0, ge=-200.0, description="sample level at or below which a frame counts as near-silent, dBFS "
                                             "(default -60)")
    dropouts: ceiling("count") | None = Field(
        None, description="most dropouts allowed (mid-file runs of digital silence or of a frozen value), "
                          "counted per channel")
    dropout_min_s: float | None = Field(
        None, gt=0.0, le=10.0, description="shortest run reported as a dropout, s (default 0.005)")
    nonfinite_samples: bool = Field(
        True, description="judge non-finite samples (NaN, +-Inf): an error finding with the first positions")
    effective_bit_depth: floor("bits") | None = Field(
        None, description="fewest bits of resolution any non-silent channel may actually use (e.g. {min_bits: 24})")
    dual_mono: allowed(bool, "false") | None = Field(
        None, description="allowed values of 'the first channel pair is identical', e.g. [false]")
    inverted_polarity: allowed(bool, "false") | None = Field(
        None, description="allowed values of 'a channel pair is in inverted polarity', e.g. [false]")
    inverted_polarity_correlation: float | None = Field(
        None, ge=-1.0, le=0.0, description="a pair whose whole-file correlation is at or below this counts as "
                                           "inverted polarity (default -0.5)")
    phase_correlation: floor("corr") | None = Field(
        None, description="lowest phase correlation allowed in any 100 ms window of any channel pair")
    phase_correlation_below: ceiling("percent") | None = Field(
        None, description="largest share of time, %, of the first pair below phase_correlation_threshold")
    phase_correlation_threshold: float | None = Field(
        None, ge=-1.0, le=1.0, description="correlation below which time is counted for phase_correlation_below "
                                           "(default 0.0)")
    truncated_audio: Literal["fail", "warn", "allow"] = Field(
        "fail", description="a master whose audio data ends before its header says (a cut file): "
                            "'fail' (default), 'warn', or 'allow' (reported as a pass with what is missing)")
    level_balance: ceiling("lu") | None = Field(
        None, description="largest level difference between the channels of a pair (L/R, Ls/Rs, ...), "
                          "K-weighted, LU")


#: spec key -> MeasureOptions field
_OPTIONS = {
    "clip_min_run_samples": "clip_min_run_samples",
    "clip_threshold_db": "clip_threshold_db",
    "silence_threshold_dbfs": "silence_threshold_dbfs",
    "dropout_min_s": "dropout_min_s",
    "phase_correlation_threshold": "phase_correlation_threshold",
    "inverted_polarity_correlation": "inverted_polarity_correlation",
}


def measure_options(section: Section) -> dict:
    """The measurement choices the section sets (only those given)."""
    out = {}
    for key, option in _OPTIONS.items():
        value = getattr(section, key)
        if value is not None:
            out[option] = value
    return out
