"""Sample peak and true peak (ITU-R BS.1770-5, Annex 2).

:class:`SamplePeakAnalyzer` reports the largest ``|x|`` per channel in dBFS.
:class:`TruePeakAnalyzer` reports the true peak per channel in dBTP from the
band-limited interpolator of :mod:`masterqc.measure.oversample`, its worst-case
under-read up to 0.45*fs and 0.49*fs, the time ranges where the true peak exceeds
``MeasureOptions.true_peak_ceiling_dbtp`` and a display envelope.

A level that cannot exist (the peak of an all-zero channel, -inf dB) is None.
The reported true peak of a channel is never below its sample peak: the
interpolator's phase 0 is the sample itself, and the maximum with the sample
peak is taken in float64 in any case.
"""

from __future__ import annotations

import math

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.levels import amplitude_db
from masterqc.measure.base import (INTEGER, INTEGER_LIST, NUMBER, NUMBER_LIST, NUMBER_OR_NULL,
                                   NUMBER_OR_NULL_LIST, TIME_RANGES, Analyzer, AnalyzerResult, array_of)
from masterqc.measure.runs import FrameRanges, channel_names
from masterqc.measure.oversample import (SCAN_BAND_FS, TruePeakMeter, column_abs_max, choose_factor, meter_underread_db,
                                         reading_filter_properties)

#: display envelopes hold at most this many buckets
ENVELOPE_BUCKETS = 2000
#: true-peak runs for mono and stereo files of 8 such runs or more (house choice: twice the meter's
#: default halves the per-run bookkeeping, about 10 % of the meter's CPU on 10 minutes of stereo,
#: measured; on a 30 s file it cost more; files of more channels keep the default, whose buffers
#: grow with the channel count); results equal a full evaluation either way
LONG_RUN_FRAMES = 262144
#: over-ceiling frames closer than this are merged into one time range
OVER_MERGE_GAP_S = 0.010

OVER_EVENT = {
    "type": "object",
    "required": ["channel", "channels", "start_s", "end_s", "peak_dbtp"],
    "properties": {"channel": {"type": "string"},
                   "channels": {"type": "array", "items": {"type": "string"}},
                   "start_s": {"type": "number"}, "end_s": {"type": "number"},
                   "peak_dbtp": {"type": ["number", "null"]}},
}


#: ``20*log10(value)``; None for 0 (or below), since -inf cannot exist in JSON
linear_to_db = amplitude_db


def samples_are_float32(info) -> bool:
    """Whether every decoded sample of the file is a float32 value: PCM up to 24 bits
    (codes / 2**(bits-1)) and 32-bit float; the engine's clean input only replaces
    non-finite samples by zero."""
    bits = int(getattr(info, "bit_depth", 64) or 64)
    return bits <= 24 or (bool(getattr(info, "is_float", False)) and bits == 32)


def bucket_frames_for(frames: int, buckets: int = ENVELOPE_BUCKETS) -> int:
    """Frames per envelope bucket so that a file of ``frames`` needs at most ``buckets``."""
    return max(1, -(-int(frames) // buckets))


class SamplePeakAnalyzer(Analyzer):
    """Largest absolute sample value per channel.

    When a :class:`TruePeakAnalyzer` runs too (the default), its meter already
    takes the per-channel maximum of ``|x|`` over the same blocks in float64
    (``TruePeakMeter.sample_peak_linear``, every frame once flushed): this analyzer
    then takes that figure at :meth:`finish` instead of reading every block
    again (same value: a maximum of the same numbers is exact).
    """

    name = "sample_peak"
    measurement_schema = {
        "sample_peak_dbfs": measured(NUMBER_OR_NULL, 'dbfs',
            'highest absolute sample value of any channel'),
        "sample_peak_dbfs_per_channel": measured(NUMBER_OR_NULL_LIST, 'dbfs',
            'sample peak of each channel'),
        "sample_peak_linear_per_channel": measured(NUMBER_LIST, 'ratio',
            'sample peak of each channel as a linear amplitude (1.0 = full scale)'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        self.peak = np.zeros(info.channels)
        self.shared = None            # the TruePeakAnalyzer whose meter holds the sample peaks

    def bind(self, peers) -> None:
        for peer in peers:
            if isinstance(peer, TruePeakAnalyzer) and peer.raw_input == self.raw_input:
                self.shared = peer
                return

    def process(self, block) -> None:
        if self.shared is None:
            np.maximum(self.peak, column_abs_max(block), out=self.peak)

    def finish(self) -> AnalyzerResult:
        if self.shared is not None:
            meter = self.shared.meter
            meter.flush()             # idempotent; the true-peak analyzer's own finish flushes too
            self.peak = np.abs(meter.sample_peak_linear)     # an all-zero channel reads +0.0, not -0.0
        per = [linear_to_db(v) for v in self.peak]
        return AnalyzerResult(measurements={
            "sample_peak_dbfs": linear_to_db(self.peak.max()),
            "sample_peak_dbfs_per_channel": per,
            "sample_peak_linear_per_channel": [float(v) for v in self.peak],
        })


class TruePeakAnalyzer(Analyzer):
    """True peak per channel (dBTP), overs against the ceiling, display envelope.

    Options used: ``true_peak_oversampling`` (the scan factor of the kaiser
    design, at least 4 at every rate, which is at least BS.1770-5 Annex 2's
    minimum; peaks are read on a 32x grid whatever the scan, so the factor only
    moves the cost), ``true_peak_ceiling_dbtp`` and ``true_peak_filter``
    ("kaiser", default, or "annex2" for the standard's example filter, 4x, read
    on its own 4x grid).

    Keys: ``true_peak_dbtp`` (highest channel) and ``..._per_channel`` (None for
    an all-zero channel); ``true_peak_linear_per_channel``;
    ``true_peak_oversampling_factor``, the factor of the grid the peaks are read
    on (32 for kaiser, 4 for annex2); ``true_peak_underread_max_db_to_0_45fs``
    and ``true_peak_underread_max_db_to_0_49fs``, the worst under-read of a
    single sine peak up to 0.45*fs and 0.49*fs at any sub-sample position,
    computed from the filter and grid actually used (grid loss and passband
    loss);
    ``true_peak_ceiling_dbtp`` (the ceiling the overs refer to);
    ``true_peak_over_count``, the number of frames (sample periods) in which an
    interpolated value (on the same grid as the true peak) of any channel
    exceeds the ceiling, so a true peak above the ceiling always has an over;
    ``true_peak_over_ranges_s``, those frames merged into [start, end] ranges
    (frames closer than 10 ms join one range, whatever channels hold them;
    every range is listed, no cap), ``true_peak_over_range_count``, their
    number, ``true_peak_over_events`` (each range with the channels that hold
    overs in it and its highest true peak), and per channel
    ``true_peak_over_count_per_channel`` and
    ``true_peak_over_range_count_per_channel`` (each channel's overs merged
    alone).  Series:
    ``true_peak_envelope_dbtp`` (maximum over channels and the reading grid
    per bucket of at most 1/2000 of the file, None where silent) with
    ``true_peak_envelope_time_s``
    (bucket start times).
    """

    name = "true_peak"
    measurement_schema = {
        "true_peak_dbtp": measured(NUMBER_OR_NULL, 'dbtp',
            'true peak of the highest channel, band-limited oversampling (ITU-R BS.1770 Annex 2)'),
        "true_peak_dbtp_per_channel": measured(NUMBER_OR_NULL_LIST, 'dbtp',
            'true peak of each channel'),
        "true_peak_linear_per_channel": measured(NUMBER_OR_NULL_LIST, 'ratio',
            'true peak of each channel as a linear amplitude (null for a channel whose samples are not all finite)'),
        "true_peak_oversampling_factor": measured(INTEGER, 'factor',
            'factor of the grid the true peaks are read on (32 for kaiser, 4 for annex2)'),
        "true_peak_underread_max_db_to_0_45fs": measured(NUMBER, 'db',
            'worst-case under-read of a single sine peak up to 0.45 fs at any sub-sample position'),
        "true_peak_underread_max_db_to_0_49fs": measured(NUMBER, 'db',
            'worst-case under-read of a single sine peak up to 0.49 fs at any sub-sample position'),
        "true_peak_ceiling_dbtp": measured(NUMBER, 'dbtp',
            'level above which overs are located'),
        "true_peak_over_count": measured(INTEGER, 'count',
            'oversampled samples above the ceiling'),
        "true_peak_over_range_count": measured(INTEGER, 'count',
            'time ranges holding overs'),
        "true_peak_over_ranges_s": measured(TIME_RANGES, 's',
            'every time range [start, end] holding overs (any channel)'),
        "true_peak_over_events": measured(array_of(OVER_EVENT), NO_UNIT,
            'every over range, one record each: channels holding overs in it ("L+R"), start, end, '
            'highest true peak in it (dBTP)'),
        "true_peak_over_count_per_channel": measured(INTEGER_LIST, 'count',
            'frames in which each channel exceeds the ceiling'),
        "true_peak_over_range_count_per_channel": measured(INTEGER_LIST, 'count',
            'over ranges of each channel taken alone'),
    }
    series_schema = {
        "true_peak_envelope_dbtp": NUMBER_OR_NULL_LIST,
        "true_peak_envelope_time_s": NUMBER_LIST,
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        self.rate = float(info.sample_rate_hz)
        self.factor = choose_factor(self.rate, getattr(options, "true_peak_oversampling", 4))
        self.design = getattr(options, "true_peak_filter", "kaiser")
        if self.design == "annex2" and self.factor != 4:
            self.design = "kaiser"
        self.ceiling_dbtp = float(options.true_peak_ceiling_dbtp)
        self.ceiling_linear = 10.0 ** (self.ceiling_dbtp / 20.0)
        self.bucket_frames = bucket_frames_for(max(info.frames, 1))
        self.envelope = np.zeros(-(-max(info.frames, 1) // self.bucket_frames))   # filled by the meter
        self.merge_gap = max(1, int(round(OVER_MERGE_GAP_S * self.rate)))
        self.overs = FrameRanges(self.merge_gap, info.channels)           # any channel
        self.channel_overs = [FrameRanges(self.merge_gap) for _ in range(info.channels)]
        self.meter = TruePeakMeter(self.rate, info.channels, self.factor, self.design,
                                   on_channel_frames=self._frames, ceiling_linear=self.ceiling_linear,
                                   bucket_frames=self.bucket_frames, buckets=self.envelope.shape[0],
                                   float32_exact=samples_are_float32(info),
                                   run_frames=(LONG_RUN_FRAMES if info.channels <= 2
                                               and info.frames >= 8 * LONG_RUN_FRAMES else None))

    # -- per-frame bookkeeping -------------------------------------------------
    def _frames(self, start: int, cp) -> None:
        """``cp``: (channels, frames) per-channel frame peaks from ``start``."""
        if not cp.size or cp.max() <= self.ceiling_linear:     # one reduction; most runs hold no over
            return
        over = cp > self.ceiling_linear
        idx = np.flatnonzero(over.any(axis=0))
        if not idx.size:
            return
        self.overs.add(idx + start, cp[:, idx].max(axis=0), over[:, idx])
        for c, fr in enumerate(self.channel_overs):
            fr.add(np.flatnonzero(over[c]) + start)

    # -- analyzer interface ----------------------------------------------------
    #: the engine hands it (channels, frames) blocks: the meter copies each channel's row
    #: into its float32 buffer as it is (the same values as from the interleaved block)
    planar_input = True

    def process(self, block) -> None:
        self.meter.process(block)

    def process_planar(self, rows) -> None:
        self.meter.process_planar(rows)

    def finish(self) -> AnalyzerResult:
        self.meter.flush()
        r_start, r_end, r_peak, r_mask = self.overs.finish()
        for fr in self.channel_overs:
            fr.finish()
        layout = self.info.channel_layout
        over_events = []
        for s, e, p, mk in zip(r_start.tolist(), r_end.tolist(), r_peak.tolist(), r_mask):
            names = channel_names(mk, layout)
            over_events.append({"channel": "+".join(names), "channels": names, "start_s": s / self.rate,
                                "end_s": (e + 1) / self.rate, "peak_dbtp": linear_to_db(p)})
        self.envelope = self.meter.envelope_linear
        peak = self.meter.peak_linear
        rate = self.rate
        flt = self.meter.filter
        underread_45 = meter_underread_db(self.design, 0.45)
        underread_49 = meter_underread_db(self.design, 0.49)
        times = (np.arange(self.envelope.shape[0]) * self.bucket_frames) / rate
        measurements = {
            "true_peak_dbtp": linear_to_db(peak.max()) if peak.size else None,
            "true_peak_dbtp_per_channel": [linear_to_db(v) for v in peak],
            "true_peak_linear_per_channel": [float(v) for v in peak],
            "true_peak_oversampling_factor": int(self.meter.factor),
            "true_peak_underread_max_db_to_0_45fs": round(underread_45, 4),
            "true_peak_underread_max_db_to_0_49fs": round(underread_49, 4),
            "true_peak_ceiling_dbtp": self.ceiling_dbtp,
            "true_peak_over_count": int(self.overs.count),
            "true_peak_over_range_count": len(over_events),
            "true_peak_over_ranges_s": [[e["start_s"], e["end_s"]] for e in over_events],
            "true_peak_over_events": over_events,
            "true_peak_over_count_per_channel": [int(fr.count) for fr in self.channel_overs],
            "true_peak_over_range_count_per_channel": [int(fr.finish()[0].size) for fr in self.channel_overs],
        }
        series = {
            "true_peak_envelope_dbtp": [linear_to_db(v) for v in self.envelope],
            "true_peak_envelope_time_s": times.tolist(),
        }
        props = reading_filter_properties(self.design)
        settings = dict(flt.settings())
        settings.update({
            "oversampled_rate_hz": rate * self.meter.factor,
            "scan_factor": int(self.meter.scan_factor),
            "scan": ("kaiser: an analytic bound per group of frames from the samples, then a scan grid "
                     "of scan_factor per sample, find the frames that can hold "
                     "a peak, an over or an envelope maximum (bound cos(pi*B/(L*fs)), B = "
                     f"{SCAN_BAND_FS}*fs); those are read on the full grid" if self.design == "kaiser"
                     else "annex2: read on its own 4x grid"),
            "underread_band": "sines up to 0.45*fs and 0.49*fs, worst sub-sample position",
            "passband_ripple_db_to_0_375fs": round(props["passband_ripple_db_to_0_375fs"], 4),
            "passband_ripple_db_to_0_49fs": round(props["passband_ripple_db_to_0_49fs"], 4),
            "gain_db_at_0_45fs": round(props["gain_db_at_0_45fs"], 4),
            "stopband_gain_db_from_0_51fs": round(props["stopband_gain_db_from_0_51fs"], 2),
            "over_merge_gap_s": OVER_MERGE_GAP_S,
            "over_ranges_listed": "all (no cap)",
            "envelope_bucket_s": self.bucket_frames / rate,
            "outside_file": "signal taken as zero before the first and after the last sample; "
                            "only instants inside the file are evaluated",
        })
        return AnalyzerResult(measurements=measurements, series=series, settings=settings)
