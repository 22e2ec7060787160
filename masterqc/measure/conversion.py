"""Conversion safety: what happens when the master is converted to another rate.

For every target rate in ``MeasureOptions.conversion_targets_hz``:

- from the long-term spectrum (:mod:`masterqc.measure.spectral`): the energy
  above the target's Nyquist frequency, relative to the energy below it (dB)
  and as a level (dBFS, the peak level of a sine of the same power), and the
  bands a converter without an anti-alias filter would fold, with where they
  land: a component at ``f`` lands at ``|f - k * target|`` for the nearest
  multiple ``k`` (``f mod target``, mirrored about ``target / 2``);
- from a streamed conversion (:class:`StreamingResampler`, polyphase, the
  filter of scipy's ``resample_poly``: Kaiser-windowed sinc, beta 5.0, cutoff at
  the lower of the two Nyquist frequencies, 10 zero crossings each side): the
  true peak of the converted signal, metered as the core meters the master
  (:class:`masterqc.measure.oversample.TruePeakMeter`, factor per BS.1770-5
  Annex 2 for the target rate), per channel and overall (dBTP).

A band counts as "would fold" where the LTAS (smoothed over 50 Hz) is at least
:data:`FOLD_ABOVE_FLOOR_DB` above the format's floor and no more than
:data:`FOLD_BELOW_PEAK_DB` below the loudest bin of the file (own reasoning).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
from masterqc.measure.npkernels import uniform_filter1d

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.levels import amplitude_db
from masterqc.measure.base import array_of
from masterqc.measure.filterdesign import kaiser_lowpass_fir
from masterqc.measure.oversample import TruePeakMeter, choose_factor

#: resample_poly's default design
KAISER_BETA = 5.0
ZERO_CROSSINGS = 10
FOLD_ABOVE_FLOOR_DB = 10.0
FOLD_BELOW_PEAK_DB = 70.0
#: bands closer than this are merged, Hz
FOLD_MERGE_HZ = 100.0
#: at most this many fold bands per target (the most energetic)
FOLD_BANDS_MAX = 8

_ENTRY = {
    "type": "object",
    "required": ["target_rate_hz", "energy_above_target_nyquist_db", "fold_to_hz", "true_peak_after_dbtp", "filter"],
    "properties": {
        "target_rate_hz": {"type": "integer"},
        "energy_above_target_nyquist_db": {"type": ["number", "null"]},
        "energy_above_target_nyquist_dbfs": {"type": ["number", "null"]},
        "fold_to_hz": {"type": "array", "items": {"type": "array", "items": {"type": "number"},
                                                  "minItems": 2, "maxItems": 2}},
        "folds": {"type": "array", "items": {"type": "object"}},
        "true_peak_after_dbtp": {"type": ["number", "null"]},
        "true_peak_after_dbtp_per_channel": {"type": "array", "items": {"type": ["number", "null"]}},
        "filter": {"type": "string"},
    },
}

MEASUREMENT_SCHEMA = {
    "conversions": measured(array_of(_ENTRY), NO_UNIT,
        'per target rate: energy above its Nyquist, fold frequencies, true peak after conversion'),
}



def fold_frequency(f_hz: float, target_hz: float) -> float:
    """Where a component at ``f_hz`` lands after sampling at ``target_hz`` without a filter."""
    r = math.fmod(float(f_hz), float(target_hz))
    return target_hz - r if r > target_hz / 2.0 else r


def fold_range(lo_hz: float, hi_hz: float, target_hz: float) -> list:
    """Folded image of the band ``[lo_hz, hi_hz]`` as a list of ``[lo, hi]`` ranges."""
    half = target_hz / 2.0
    out = []
    a = lo_hz
    while a < hi_hz:
        seg_end = min(hi_hz, (math.floor(a / half) + 1) * half)
        fa, fb = fold_frequency(a, target_hz), fold_frequency(seg_end, target_hz)
        if seg_end == (math.floor(a / half) + 1) * half:
            # the end sits exactly on a multiple of half: fold of the limit from below
            k = round(seg_end / half)
            fb = half if k % 2 == 1 else 0.0
        out.append([round(min(fa, fb), 1), round(max(fa, fb), 1)])
        a = seg_end
    return out


def design_filter(up: int, down: int) -> np.ndarray:
    """The resample_poly default low-pass at the up-sampled rate, gain ``up``."""
    max_rate = max(up, down)
    half_len = ZERO_CROSSINGS * max_rate
    h = kaiser_lowpass_fir(2 * half_len + 1, 1.0 / max_rate, 2.0, KAISER_BETA)
    return h * up


class StreamingResampler:
    """Polyphase rate conversion of a stream, block by block, equal to
    ``scipy.signal.resample_poly(x, up, down, axis=0)`` on the whole signal
    (same filter, same alignment and length) within rounding.

    ``process(block)`` returns the output frames that became computable;
    ``flush()`` returns the rest.
    """

    def __init__(self, up: int, down: int, channels: int):
        g = math.gcd(int(up), int(down))
        self.up, self.down = int(up) // g, int(down) // g
        h = design_filter(self.up, self.down)
        self.half = (len(h) - 1) // 2
        # lead zeros so that the output alignment offset is a multiple of down
        d0 = (-self.half) % self.down
        self.h = np.concatenate([np.zeros(d0), h])
        self.half_p = self.half + d0
        self.M = len(self.h)
        self.channels = int(channels)
        self.buf = np.zeros((0, self.channels))
        self.buf_start = 0          # global index of buf[0]
        self.received = 0
        self.n_next = 0

    def _n_total(self) -> int:
        return -(-self.received * self.up // self.down)

    def _emit(self, n_max: int) -> np.ndarray:
        if n_max < self.n_next:
            return np.zeros((0, self.channels))
        up, down = self.up, self.down
        first_m = self.n_next * down + self.half_p
        k_need = max(0, -(-(first_m - self.M + 1) // up))
        # the buffer starts at a multiple of down, at or before k_need
        k0 = max((k_need // down) * down, self.buf_start)
        x = self.buf[k0 - self.buf_start:]
        from scipy.signal import upfirdn   # only when a rate conversion is replayed
        y = upfirdn(self.h, x, up, down, axis=0)
        j0 = self.n_next + (self.half_p - k0 * up) // down
        j1 = n_max + (self.half_p - k0 * up) // down
        out = y[j0:j1 + 1]
        self.n_next = n_max + 1
        # keep input from the next needed position, aligned to down
        m_next = self.n_next * down + self.half_p
        k_keep = max(0, -(-(m_next - self.M + 1) // up))
        k_keep = (k_keep // down) * down
        if k_keep > self.buf_start:
            self.buf = self.buf[k_keep - self.buf_start:]
            self.buf_start = k_keep
        return out

    def process(self, block) -> np.ndarray:
        block = np.asarray(block, dtype=np.float64)
        self.buf = np.concatenate([self.buf, block], axis=0)
        self.received += block.shape[0]
        k_avail = self.buf_start + self.buf.shape[0]
        n_max = min((k_avail * self.up - 1 - self.half_p) // self.down, self._n_total() - 1)
        return self._emit(n_max)

    def flush(self) -> np.ndarray:
        pad = self.M // self.up + 2 * self.down + 2
        self.buf = np.concatenate([self.buf, np.zeros((pad, self.channels))], axis=0)
        return self._emit(self._n_total() - 1)

    def response_db(self, freqs_hz, in_rate_hz: float) -> np.ndarray:
        """Magnitude response (dB, 0 dB = unity gain) of the conversion filter at ``freqs_hz``
        for an input at ``in_rate_hz``."""
        f = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
        work = float(in_rate_hz) * self.up
        n = np.arange(self.M)
        h = np.exp(-2j * np.pi * np.outer(f / work, n)) @ self.h
        return 20.0 * np.log10(np.maximum(np.abs(h) / self.up, 1e-300))

    def describe(self, in_rate_hz: float | None = None) -> str:
        text = (f"polyphase {self.up}/{self.down}, Kaiser-windowed sinc beta {KAISER_BETA:g}, "
                f"{self.M - ((-self.half) % self.down)} taps at {self.up}x, -6 dB at the lower Nyquist "
                "(scipy resample_poly default design)")
        if in_rate_hz:
            nyq = min(float(in_rate_hz), float(in_rate_hz) * self.up / self.down) / 2.0
            g = self.response_db([0.8 * nyq, 0.9 * nyq, 1.1 * nyq], in_rate_hz)
            text += (f"; {g[0]:.2f} dB at {0.8 * nyq / 1000:.1f} kHz, {g[1]:.2f} dB at {0.9 * nyq / 1000:.1f} kHz, "
                     f"{g[2]:.0f} dB at {1.1 * nyq / 1000:.1f} kHz")
        return text


class ConversionTracker:
    """Streams the master through one resampler and true-peak meter per target rate."""

    def __init__(self, info, options):
        self.fs = int(info.sample_rate_hz)
        self.channels = int(info.channels)
        self.bit_depth, self.is_float = info.bit_depth, info.is_float
        targets = []
        for t in getattr(options, "conversion_targets_hz", ()) or ():
            t = int(round(float(t)))
            if t > 0 and t != self.fs and t not in targets:
                targets.append(t)
        self.targets = targets
        self.design = getattr(options, "true_peak_filter", "kaiser")
        self.stages = []
        for t in targets:
            frac = Fraction(t, self.fs)
            rs = StreamingResampler(frac.numerator, frac.denominator, self.channels)
            factor = choose_factor(t, getattr(options, "true_peak_oversampling", 4))
            design = self.design if (self.design != "annex2" or factor == 4) else "kaiser"
            meter = TruePeakMeter(t, self.channels, factor, design)
            self.stages.append((t, rs, meter))

    def process(self, block) -> None:
        for _, rs, meter in self.stages:
            y = rs.process(block)
            if y.shape[0]:
                meter.process(y)

    def settings(self) -> dict:
        return {"targets_hz": self.targets,
                "filters": {str(t): rs.describe(self.fs) for t, rs, _ in self.stages},
                "fold_above_floor_db": FOLD_ABOVE_FLOOR_DB, "fold_below_peak_db": FOLD_BELOW_PEAK_DB}

    def finish(self, fe) -> dict:
        from masterqc.measure.bandwidth import format_floor_db
        entries = []
        total = fe.ltas_total
        freqs = fe.freqs_hz
        floor = format_floor_db(self.bit_depth, self.is_float, fe.frame_length)
        smooth = 10.0 * np.log10(np.maximum(uniform_filter1d(total, max(1, int(round(50.0 / fe.bin_hz)))), 1e-30))
        peak = float(smooth.max()) if smooth.size else -300.0
        for t, rs, meter in self.stages:
            y = rs.flush()
            if y.shape[0]:
                meter.process(y)
            meter.flush()
            tp_ch = [amplitude_db(v) for v in meter.peak_linear]
            tp = amplitude_db(meter.peak_linear.max()) if meter.peak_linear.size else None
            entry = {"target_rate_hz": t, "energy_above_target_nyquist_db": None,
                     "energy_above_target_nyquist_dbfs": None, "fold_to_hz": [], "folds": [],
                     "true_peak_after_dbtp": tp, "true_peak_after_dbtp_per_channel": tp_ch,
                     "filter": rs.describe(self.fs)}
            if t < self.fs:
                half = t / 2.0
                above_mask = freqs > half
                below_mask = (freqs > 0) & ~above_mask
                above, below = float(total[above_mask].sum()), float(total[below_mask].sum())
                if above > 0 and below > 0:
                    entry["energy_above_target_nyquist_db"] = 10.0 * math.log10(above / below)
                if above > 0:
                    entry["energy_above_target_nyquist_dbfs"] = 10.0 * math.log10(2.0 * above)
                sig = above_mask & (smooth >= floor + FOLD_ABOVE_FLOOR_DB) & (smooth >= peak - FOLD_BELOW_PEAK_DB)
                bands = _bands(np.nonzero(sig)[0], fe.bin_hz)
                scored = []
                for a, b in bands:
                    e = float(total[a:b + 1].sum())
                    scored.append((e, a, b))
                scored.sort(reverse=True)
                folds, ranges = [], []
                for e, a, b in scored[:FOLD_BANDS_MAX]:
                    lo, hi = freqs[a], freqs[b]
                    fr = fold_range(lo, hi, t)
                    folds.append({"from_hz": round(lo, 1), "to_hz": round(hi, 1), "fold_to_hz": fr,
                                  "level_dbfs": round(10.0 * math.log10(2.0 * e), 2) if e > 0 else None})
                    ranges.extend(fr)
                entry["folds"] = sorted(folds, key=lambda d: d["from_hz"])
                entry["fold_to_hz"] = sorted(ranges)
            entries.append(entry)
        return {"conversions": entries}


def _bands(idx: np.ndarray, bin_hz: float) -> list:
    """Contiguous runs of bin indices (gaps up to FOLD_MERGE_HZ merged) as (first, last)."""
    if idx.size == 0:
        return []
    gap = max(1, int(round(FOLD_MERGE_HZ / bin_hz)))
    breaks = np.nonzero(np.diff(idx) > gap)[0]
    starts = np.concatenate([[idx[0]], idx[breaks + 1]])
    ends = np.concatenate([idx[breaks], [idx[-1]]])
    return list(zip(starts.tolist(), ends.tolist()))
