"""``sampling:`` -- sampling integrity: bandwidth, upsampling, imaging, aliasing, ultrasonic content, conversions::

    sampling:
      effective_bandwidth: {min_hz: 20000, severity: warn}   # content reaches at least this high
      upsampled: [false]                  # no converter cliff at a lower standard rate's Nyquist
      upsampled_min_confidence: 0.5       # ... counted only at or above this confidence (0..1)
      band_limited: {allowed: [false], severity: warn}       # no steep low-pass at another frequency
      imaging: [false]                    # no mirror images left by an unfiltered upsampler
      aliasing: [false]                   # no folded partials
      alias_to_harmonic_ratio: {max_db: -40.0}   # alias-to-harmonic ratio where assessable
      ultrasonic_from_hz: 20000           # lower edge of the ultrasonic band
      ultrasonic_energy: {max_db: -30.0, severity: warn}     # whole file, relative to the audible band
      ultrasonic_energy_3s: {max_db: -20.0, severity: warn}  # worst 3 s window
      ultrasonic_tones: {max_dbfs: -60.0} # loudest stationary tone above ultrasonic_from_hz
      ultrasonic_loudness_change: {max_lu: 0.2}              # |change| a 20 kHz low-pass would cause
      conversions:                        # deliverables made from this master at other rates
        - target_rate_hz: 48000
          true_peak: {max_dbtp: -1.0}     # after a good conversion (default: peaks.true_peak)
          energy_above_nyquist: {max_db: -40.0, severity: warn}  # what a careless converter folds
        - target_rate_hz: 44100

Ultrasonic requirements apply to masters above 48 kHz; at 44.1 and 48 kHz
they are reported as not judged.  Every key is optional; what is left out is
still measured and reported, but not judged.

The thresholds in a spec are the receiving party's; the figures in the
example above are illustrations (own reasoning), not taken from a standard.
"""

from __future__ import annotations

from pydantic import Field

from masterqc.contract import NO_UNIT, Check
from masterqc.spec.types import SpecModel, allowed, ceiling, floor

_ULTRA_NULL = ("the master is at 48 kHz or below, its Nyquist frequency is not above the band edge, or the "
               "audible band holds no energy")

#: the section's checks, judged by masterqc.judge.sampling (their messages say where in frequency
#: the problem lies and add the analyzers' detail); ``check`` ending in ``*`` covers a family
CHECKS = (
    Check("effective_bandwidth", "sampling.effective_bandwidth", "effective_bandwidth_hz", "hz",
          "effective bandwidth", "no content above the noise floor (bandwidth_note says why)", kind="section"),
    Check("upsampled", "sampling.upsampled", "upsampled_from_hz", "hz", "upsampled from a lower rate",
          "no converter cliff or sample pattern of a lower standard rate: not upsampled", kind="section"),
    Check("band_limited", "sampling.band_limited", "band_limit_hz", "hz",
          "low-passed at a frequency no standard rate explains", "no such low-pass", kind="section"),
    Check("imaging", "sampling.imaging", "imaging_detected", NO_UNIT, "mirror images of an unfiltered upsampler",
          "no candidate source rate could be tested", kind="section"),
    Check("aliasing", "sampling.aliasing", "aliasing_detected", NO_UNIT, "folded (aliased) content",
          "not assessable on this material (aliasing_detail.reason says why)", kind="section"),
    Check("alias_to_harmonic_ratio", "sampling.alias_to_harmonic_ratio", "alias_to_harmonic_ratio_db", "db",
          "alias-to-harmonic ratio",
          "no alias line above the floor on assessable material (below the measurable range, meets a "
          "ceiling), or nothing assessable", kind="section"),
    Check("ultrasonic_energy", "sampling.ultrasonic_energy", "ultrasonic_energy_db", "db",
          "ultrasonic energy relative to the audible band", _ULTRA_NULL, kind="section"),
    Check("ultrasonic_energy_3s", "sampling.ultrasonic_energy_3s", "ultrasonic_energy_max_3s_db", "db",
          "ultrasonic energy relative to the audible band, worst 3 s", _ULTRA_NULL,
          where="ultrasonic_energy_max_3s_where_s", kind="section"),
    Check("ultrasonic_tones", "sampling.ultrasonic_tones", "ultrasonic_tones", NO_UNIT,
          "loudest ultrasonic tone (each tone's peak level in dBFS)", _ULTRA_NULL, kind="section"),
    Check("ultrasonic_loudness_change", "sampling.ultrasonic_loudness_change", "ultrasonic_loudness_change_lu",
          "lu", "loudness change a low-pass at the ultrasonic band edge would cause (magnitude)", _ULTRA_NULL,
          kind="section"),
    Check("conversions", "sampling.conversion_*", "conversions", NO_UNIT,
          "true peak after conversion and energy above the target's Nyquist, per target rate",
          "the conversion was not measured (the spec named no such target rate)", kind="section"),
)

#: keys that set how a measurement is counted or made, not requirements
SETTINGS = ("upsampled_min_confidence", "ultrasonic_from_hz")


class ConversionTarget(SpecModel):
    """One deliverable rate made from the master."""

    target_rate_hz: int = Field(..., ge=8000, le=768000, description="rate of the deliverable, Hz")
    true_peak: ceiling("dbtp") | None = Field(
        None, description="true-peak ceiling of the converted deliverable, dBTP (default: the peaks.true_peak "
                          "ceiling when the spec has one)")
    energy_above_nyquist: ceiling("db") | None = Field(
        None, description="most energy allowed above the target's Nyquist frequency, relative to the energy "
                          "below it, dB (what a converter without an anti-alias filter would fold)")


class Section(SpecModel):
    """Sampling-integrity requirements."""

    effective_bandwidth: floor("hz") | None = Field(
        None, description="lowest effective bandwidth allowed, Hz (highest frequency with content clearly above "
                          "the floor; at a cliff, its -6 dB point)")
    upsampled: allowed(bool, "false") | None = Field(
        None, description="allowed values of 'upsampled from a lower standard rate', e.g. [false]")
    upsampled_min_confidence: float | None = Field(
        None, ge=0.0, le=1.0, description="an upsampling verdict counts only at or above this confidence "
                                          "(default 0: every verdict counts)")
    band_limited: allowed(bool, "false") | None = Field(
        None, description="allowed values of 'low-passed at a frequency no standard rate explains', e.g. [false]")
    imaging: allowed(bool, "false") | None = Field(
        None, description="allowed values of 'mirror images of an unfiltered upsampler found', e.g. [false]")
    aliasing: allowed(bool, "false") | None = Field(
        None, description="allowed values of 'folded (aliased) content found', e.g. [false]")
    alias_to_harmonic_ratio: ceiling("db") | None = Field(
        None, description="highest alias-to-harmonic ratio allowed on tonal passages, dB")
    ultrasonic_from_hz: float | None = Field(
        None, ge=10000.0, le=96000.0, description="lower edge of the ultrasonic band, Hz (default 20000)")
    ultrasonic_energy: ceiling("db") | None = Field(
        None, description="most energy allowed from ultrasonic_from_hz to Nyquist, relative to the audible band, "
                          "over the whole file, dB (masters above 48 kHz)")
    ultrasonic_energy_3s: ceiling("db") | None = Field(
        None, description="the same in the worst 3 s window, dB")
    ultrasonic_tones: ceiling("dbfs") | None = Field(
        None, description="highest level allowed for a stationary tone above ultrasonic_from_hz, dBFS "
                          "(peak level of the sine)")
    ultrasonic_loudness_change: ceiling("lu") | None = Field(
        None, description="largest change of integrated loudness allowed that removing the ultrasonic band "
                          "would cause (its magnitude), LU")
    conversions: list[ConversionTarget] | None = Field(
        None, description="deliverable rates made from this master: each is converted in the same pass and "
                          "judged (true peak after conversion, energy above the target's Nyquist)")


def measure_options(section: Section) -> dict:
    """Conversion targets and the ultrasonic band edge, when given."""
    out = {}
    if section.conversions:
        targets = []
        for c in section.conversions:
            if c.target_rate_hz not in targets:
                targets.append(c.target_rate_hz)
        out["conversion_targets_hz"] = tuple(targets)
    if section.ultrasonic_from_hz is not None:
        out["ultrasonic_from_hz"] = float(section.ultrasonic_from_hz)
    return out


def resolve(section: Section, spec) -> Section:
    """A conversion without its own true-peak ceiling takes the spec's ``peaks.true_peak``."""
    peaks = getattr(spec, "peaks", None)
    ceiling_req = getattr(peaks, "true_peak", None) if peaks is not None else None
    if not section.conversions or ceiling_req is None:
        return section
    convs = [c if c.true_peak is not None else c.model_copy(update={"true_peak": ceiling_req})
             for c in section.conversions]
    return section.model_copy(update={"conversions": convs})
