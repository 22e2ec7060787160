"""The list of analyzers the engine runs.  Add a new analyzer class here (one line)."""

from __future__ import annotations


def analyzer_classes():
    """Return every analyzer class, in the order their results are merged."""
    classes = []
    # Imports are local so that a broken optional analyzer names itself clearly.
    from masterqc.measure import loudness, peaks
    classes += [loudness.LoudnessAnalyzer, peaks.SamplePeakAnalyzer, peaks.TruePeakAnalyzer]
    from masterqc.measure import bitdepth, channels, clipping, dcoffset, nonfinite, silence
    classes += [clipping.ClippingAnalyzer, dcoffset.DcOffsetAnalyzer, silence.SilenceAnalyzer, nonfinite.NonFiniteAnalyzer, bitdepth.BitDepthAnalyzer, channels.ChannelRelationAnalyzer]
    from masterqc.measure import spectral
    classes += [spectral.SamplingSpectrumAnalyzer]
    from masterqc.measure import aliasing, imaging
    classes += [imaging.ImagingAnalyzer, aliasing.AliasingAnalyzer]
    from masterqc.measure import interpolation
    classes += [interpolation.InterpolationTraceAnalyzer]
    return classes


def post_steps():
    """Pure functions ``measurements -> measurements`` run after every analyzer has finished,
    in order: they combine evidence that more than one analyzer holds."""
    from masterqc.measure import provenance
    # no step judges a converter cliff by what its stop band holds: a limiter after the converter fills the stop
    # band with its own products, as a low-pass leaves its own content there, so neither a level nor the absence of
    # images there tells a low-pass from a conversion
    return [provenance.combine]
