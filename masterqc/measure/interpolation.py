"""Sample patterns of an upsampler without an interpolation filter (hold, linear, zero stuffing).

An upsampler from a source rate ``r`` to the file's rate ``fs`` that holds, joins or
zero-stuffs the source samples leaves an exact pattern in the samples themselves,
whatever the material:

* sample hold (zero-order hold): the output is constant between source samples, so the
  first difference ``d1[n] = y[n] - y[n-1]`` is zero except where a source sample
  begins.  With ``fs / r = P / Q`` in lowest terms those places repeat every ``P``
  output samples, ``Q`` of them per period; for an integer factor ``L`` (``Q = 1``) the
  output is runs of exactly ``L`` equal samples;
* linear interpolation: the output is a straight line between source samples, so the
  second difference ``d2[n] = y[n+1] - 2 y[n] + y[n-1]`` is zero unless a source sample
  (a knot) lies in ``(n-1, n+1)``: at most ``2 Q`` of every ``P`` phases (``Q`` when
  the knots fall on output samples, as with an integer factor);
* zero stuffing: the samples themselves are zero except at ``Q = 1`` of every ``L``.

So the power of the difference of order ``k`` (0, 1, 2), averaged per phase
``n mod P``, is concentrated in ``m = Q`` (or ``2 Q``) phases and sits at the format's
quantisation noise in the rest.  Natural audio, and the output of any interpolating
resampler, spreads it evenly over the phases (to within estimation noise: a few dB).
The contrast (mean power of the ``m`` strongest phases over the mean of the others)
is therefore the test, and the lowest candidate rate that passes it names the
source: a multiple of the true rate passes too (its knots include the true ones),
a divisor does not.  Guard: the same test at ``r/2`` and ``r/3`` (with the same
``m/Q``) must fail, else the pattern is coarser than ``r`` (periodic material such as
a naive square wave whose period is a whole number of samples) and ``r`` is not named.

Cost: at most :data:`MAX_FRAMES` frames of :data:`FRAME_SAMPLES` samples per file,
spread over it; per frame and difference order one weighted histogram
(``numpy.bincount``) of the phase modulo one common period of every candidate.
Results do not depend on the block size (frames sit at fixed sample positions).
"""

from __future__ import annotations

import functools
import math
from fractions import Fraction

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import NUMBER_OR_NULL, STRING_OR_NULL, Analyzer, AnalyzerResult
from masterqc.measure.frames import FramePicker, frame_starts

#: standard source rates that are tested when below the file's rate
CANDIDATE_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400)
#: frames analysed per file, and their length (own reasoning: some 260 000 samples per
#: channel give every phase of the longest period (7680 at 192 kHz) 34 samples and more)
MAX_FRAMES = 32
FRAME_SAMPLES = 8192
#: minimum contrast, dB, between the strongest phases and the others (own reasoning: natural
#: audio and interpolating resamplers spread difference power evenly over the phases, within
#: a few dB of estimation noise on heavy-tailed programme; an unfiltered upsampler leaves only
#: the format's quantisation noise (or nothing) in the other phases, 40 dB and more below
#: the content at any usable level)
CONTRAST_MIN_DB = 20.0
#: the strongest phases must hold at least this much power per sample, in squared LSBs of the
#: format (own reasoning: a 24-bit TPDF dither gives about 0.17 LSB^2 per sample and its first
#: and second differences up to 1 LSB^2; content 100 times above that can show a pattern)
ACTIVE_MIN_LSB2 = 100.0
#: with ``2 Q`` active phases (linear interpolation, knots between output samples), at least this
#: fraction of them must have an active neighbour (own reasoning: every knot strictly between two
#: samples makes both non-zero; a few knots land on a sample or next to one, making one member weak)
PAIRED_MIN_FRACTION = 0.9
#: ... and the phase ranked at this fraction of the m strongest stands at least FILLED_MIN_DB above
#: the mean of the others (own reasoning: every source sample makes its phase active; a pattern
#: with fewer active phases than m is a coarser one, e.g. a naive square wave's transitions)
FILLED_FRACTION = 0.9
FILLED_MIN_DB = 10.0
#: a difference "moves" when its square exceeds this many squared LSBs (own reasoning: TPDF dither of
#: +-1 LSB makes second differences of up to 4 LSB, 16 LSB^2, out of constant or straight runs) ...
HIT_MIN_LSB2 = 64.0
#: ... and at the active phases most samples move (median over those phases, own reasoning: each
#: source sample brings a new value; a naive square wave whose transitions land on a few phases
#: moves there only once per half period)
BUSY_MIN_FRACTION = 0.5
#: ... while at each of the other phases at most this fraction of the samples moves (own reasoning: with
#: 24-bit TPDF dither the rounding error stays within 1.5 LSB, so zeroth, first and second differences of a
#: held, straight or zero run stay within 6 LSB, below HIT_MIN_LSB2; natural audio moves at every phase,
#: and a pattern with more active phases than m leaves busy phases among the others)
REST_BUSY_MAX_FRACTION = 0.25
#: ... except for this fraction of the other phases (plus one): the weak member of a linear pair whose knot
#: lies within a few per cent of an output sample can rank among the others (own reasoning)
REST_BUSY_SPARE = 0.005
#: sub-rates checked by the guard
GUARD_DIVISORS = (2, 3)
#: difference orders and the upsampler each one exposes
ORDERS = ((0, "zero-stuff"), (1, "hold"), (2, "linear"))

MEASUREMENT_SCHEMA = {
    "interpolation_source_rate_hz": measured({"type": ["integer", "null"]}, 'hz',
        'source rate named by the sample pattern of a hold, linear or zero-stuffing upsampler; null when none'),
    "interpolation_kind": measured({"enum": ["zero-stuff", "hold", "linear", None]}, NO_UNIT,
        'which interpolating upsampler left the pattern'),
    "interpolation_contrast_db": measured(NUMBER_OR_NULL, 'db',
        'power at the pattern positions over the power elsewhere'),
    "interpolation_channels": measured({"type": ["array", "null"], "items": {"type": "string"}}, NO_UNIT,
        'the channels that carry the pattern'),
    "interpolation_note": measured(STRING_OR_NULL, NO_UNIT, 'what the pattern test found, in words'),
}


@functools.lru_cache(maxsize=256)
def period(fs: int, rate: float) -> tuple[int, int]:
    """``(P, Q)``: ``fs / rate = P / Q`` in lowest terms (``rate`` may be a half or third of a rate); worked out
    once per pair (the pattern search asks for the same few hundred times per file)."""
    fr = Fraction(int(fs)) / Fraction(rate).limit_denominator(1000)
    return fr.numerator, fr.denominator


def common_period(fs: int, rates) -> int:
    """The least common multiple of every candidate's and guard rate's period ``P``."""
    m = 1
    for r in rates:
        for k in (1,) + GUARD_DIVISORS:
            p, _q = period(fs, Fraction(r) / k)
            m = m * p // math.gcd(m, p)
    return m


def _phase_sums(values: np.ndarray, p: int, memo: dict | None) -> np.ndarray:
    """``values`` (kept modulo a multiple of ``p``) summed per phase modulo ``p``; with ``memo`` (a dict
    that lives while ``values`` does) each array's sums are made once per period."""
    if memo is None:
        return values.reshape(-1, p).sum(axis=0)
    key = (id(values), p)
    got = memo.get(key)
    if got is None:
        got = memo[key] = values.reshape(-1, p).sum(axis=0)
    return got


def phase_means(energy: np.ndarray, counts: np.ndarray, p: int, memo: dict | None = None) -> np.ndarray:
    """Per-phase mean power modulo ``p`` from sums and counts kept modulo a multiple of ``p`` (``memo``:
    see :func:`_phase_sums`; the same numbers either way)."""
    e = _phase_sums(energy, p, memo)
    n = _phase_sums(counts, p, memo)
    return e / np.maximum(n, 1)


def contrast_db(means: np.ndarray, m: int) -> float | None:
    """10 log10 of the mean of the ``m`` largest per-phase powers over the mean of the others
    (None when there are no others); capped at 200 dB where the others are exactly zero."""
    p = means.size
    if m <= 0 or m >= p:
        return None
    s = np.sort(means)[::-1]
    top, rest = float(np.mean(s[:m])), float(np.mean(s[m:]))
    if top <= 0.0:
        return None
    # the pattern has (nearly) m active phases, not fewer: the phase ranked FILLED_FRACTION * m
    # stands clear of the others too, else a coarser pattern (fewer active phases) is inside
    weak = float(s[max(0, int(math.ceil(FILLED_FRACTION * m)) - 1)])
    if weak < rest * 10 ** (FILLED_MIN_DB / 10.0) or weak <= 0.0:
        return 0.0
    if rest <= top * 1e-20:
        return 200.0
    return 10.0 * math.log10(top / rest)


def paired(means: np.ndarray, m: int) -> bool:
    """True when the ``m`` strongest phases come in neighbouring pairs (at least
    :data:`PAIRED_MIN_FRACTION` of them have a neighbour among them): the two output samples
    on either side of a knot that falls between them."""
    top = np.argsort(means)[::-1][:m]
    inside = np.zeros(means.size, dtype=bool)
    inside[top] = True
    nb = inside[(top + 1) % means.size] | inside[(top - 1) % means.size]
    return float(np.mean(nb)) >= PAIRED_MIN_FRACTION


def pattern_holds(fs: int, rate, mult: int, energy, counts, hits, active_min: float, memo: dict | None = None):
    """The contrast (dB) when ``m = mult * Q`` phases of ``rate``'s period carry the pattern (contrast,
    activity, busy active phases, still other phases, pairs for ``mult`` 2), else None.  ``memo``: per-phase
    sums already made for these arrays (see :func:`_phase_sums`)."""
    p, q = period(fs, rate)
    m = mult * q
    if m >= p:
        return None
    means = phase_means(energy, counts, p, memo)
    if mult == 2 and not paired(means, m):
        return None
    c = contrast_db(means, m)
    if c is None or c < CONTRAST_MIN_DB:
        return None
    order = np.argsort(means)[::-1]
    if float(np.mean(means[order[:m]])) < active_min:
        return None
    if hits is not None:
        # most samples at the active phases move (every source sample brings a new value), and
        # at the other phases hardly any does (only the format's noise is left there)
        busy = phase_means(hits, counts, p, memo)
        rest = busy[order[m:]]
        if float(np.median(busy[order[:m]])) < BUSY_MIN_FRACTION \
                or int(np.count_nonzero(rest > REST_BUSY_MAX_FRACTION)) > REST_BUSY_SPARE * rest.size + 1:
            return None
    return c


def lowest_source(fs: int, rates, energy: np.ndarray, counts: np.ndarray, active_min: float, hits=None,
                  pairs: bool = False):
    """``(rate, contrast_db)`` of the lowest candidate whose phase pattern holds (:func:`pattern_holds`)
    while no coarser one (``rate / k`` for k in :data:`GUARD_DIVISORS`) does, from per-phase power sums
    ``energy``, move counts ``hits`` and ``counts`` kept modulo the common period; else (None, None).
    ``pairs``: also try ``2 Q`` phases in neighbouring pairs (second differences of linear interpolation
    by a ratio whose knots fall between output samples)."""
    memo = {}     # per-phase sums of these arrays, made once per period (the same numbers)
    for r in sorted(rates):
        for mult in ((1, 2) if pairs else (1,)):
            c = pattern_holds(fs, r, mult, energy, counts, hits, active_min, memo)
            if c is None:
                continue
            if any(pattern_holds(fs, Fraction(r) / k, mult, energy, counts, hits, active_min, memo) is not None
                   for k in GUARD_DIVISORS):
                continue
            return int(r), c
    return None, None


class InterpolationTraceAnalyzer(Analyzer):
    """Phase patterns of the zeroth, first and second sample differences (see the module)."""

    name = "interpolation"
    measurement_schema = MEASUREMENT_SCHEMA

    def __init__(self, info, options):
        super().__init__(info, options)
        self.fs = int(info.sample_rate_hz)
        self.rates = [r for r in CANDIDATE_RATES_HZ if r < self.fs]
        self.channels = int(info.channels)
        self.M = common_period(self.fs, self.rates) if self.rates else 1
        starts = frame_starts(int(info.frames or 0), FRAME_SAMPLES, MAX_FRAMES, FRAME_SAMPLES)
        self.picker = FramePicker(starts, FRAME_SAMPLES, self.channels)
        self.energy = np.zeros((len(ORDERS), self.channels, self.M))
        self.counts = np.zeros((len(ORDERS), self.M))
        self.hits = np.zeros((len(ORDERS), self.channels, self.M))
        self.frames = 0
        bits = 24 if getattr(info, "is_float", False) else max(1, int(getattr(info, "bit_depth", 24) or 24))
        self.lsb = 2.0 ** -(bits - 1)
        self.hit_min = HIT_MIN_LSB2 * self.lsb * self.lsb

    def process(self, block) -> None:
        if not self.rates:
            return
        for start, frame in self.picker.feed(block):
            self.frames += 1
            x = np.asarray(frame, dtype=float)
            if x.shape[0] <= self.M:
                self._add_distinct(int(start), x)
            else:
                self._add_counted(int(start), x)

    def _add_counted(self, start: int, x: np.ndarray) -> None:
        """Add one frame (starting at sample ``start``) to the per-phase sums of every difference order:
        squared differences and moving differences per channel and phase, and samples per phase."""
        C, M = self.channels, self.M
        n = x.shape[0]
        pos = (start + np.arange(n, dtype=np.int64)) % M
        full = np.bincount(pos, minlength=M)
        idx0 = (pos[None, :] + (np.arange(C, dtype=np.int64) * M)[:, None])
        xt = x.T
        d1 = xt[:, 1:] - xt[:, :-1]
        diffs = (xt, d1, d1[:, 1:] - d1[:, :-1])
        for o, d in enumerate(diffs):
            # difference o covers samples 1..n-1 (o = 1) or 1..n-2 (o = 2), indexed by its middle sample
            idx = idx0[:, 1:n - 1] if o == 2 else idx0[:, 1:] if o == 1 else idx0
            sq = d * d
            idx = idx.ravel()
            sq = sq.ravel()
            self.energy[o] += np.bincount(idx, weights=sq, minlength=C * M).reshape(C, M)
            self.hits[o] += np.bincount(idx[sq > self.hit_min], minlength=C * M).reshape(C, M)
            c = full.astype(float)
            if o >= 1:
                c[pos[0]] -= 1
            if o == 2:
                c[pos[-1]] -= 1
            self.counts[o] += c

    def _add_distinct(self, start: int, x: np.ndarray) -> None:
        """:meth:`_add_counted` for a frame no longer than the common period: its samples fall on
        distinct phases (at most two runs, before and after the wrap), so each phase gets at most one
        term, added with slices instead of counted with ``bincount`` (the same sums)."""
        M = self.M
        xt = np.ascontiguousarray(x.T)     # (channels, samples): the differences run along contiguous rows
        d1 = xt[:, 1:] - xt[:, :-1]
        for o, d in enumerate((xt, d1, d1[:, 1:] - d1[:, :-1])):
            # difference o covers samples 1..n-1 (o = 1) or 1..n-2 (o = 2), indexed by its middle sample
            first = start + (1 if o else 0)
            sq = d * d
            hit = sq > self.hit_min          # (added to the float counts as 1.0 and 0.0)
            p0 = first % M
            head = min(sq.shape[1], M - p0)
            for lo, hi, a in ((p0, p0 + head, 0), (0, sq.shape[1] - head, head)):
                if hi > lo:
                    self.energy[o][:, lo:hi] += sq[:, a:a + hi - lo]
                    self.hits[o][:, lo:hi] += hit[:, a:a + hi - lo]
                    self.counts[o][lo:hi] += 1.0

    def finish(self) -> AnalyzerResult:
        settings = {"frames_analysed": self.frames, "frame_samples": FRAME_SAMPLES, "common_period_samples": self.M,
                    "contrast_min_db": CONTRAST_MIN_DB, "candidates_hz": list(self.rates)}
        return AnalyzerResult(measurements=dict(self.pattern()), settings=settings)

    def pattern(self) -> dict:
        """The measurements (see :data:`MEASUREMENT_SCHEMA`), computed once after the last block; the
        imaging analyzer takes them too (:meth:`ImagingAnalyzer.bind`)."""
        if getattr(self, "_pattern", None) is None:
            self._pattern = self._find_pattern()
        return self._pattern

    def _find_pattern(self) -> dict:
        labels = list(getattr(self.info, "channel_layout", None) or [])
        if len(labels) != self.channels:
            labels = [f"ch{i + 1}" for i in range(self.channels)]
        active = ACTIVE_MIN_LSB2 * self.lsb * self.lsb
        per_ch = []
        for c in range(self.channels):
            best = None
            for o, kind in ORDERS:
                if not self.frames:
                    break
                r, con = lowest_source(self.fs, self.rates, self.energy[o, c], self.counts[o], active, self.hits[o, c],
                                       pairs=(kind == "linear"))
                if r is not None and (best is None or r < best[0]):
                    best = (r, kind, con)
            per_ch.append(best)
        found = [b for b in per_ch if b is not None]
        out = {"interpolation_source_rate_hz": None, "interpolation_kind": None, "interpolation_contrast_db": None,
               "interpolation_channels": [] if self.frames and self.rates else None, "interpolation_note": None}
        if found:
            rates = [b[0] for b in found]
            rate = max(set(rates), key=lambda v: (rates.count(v), -v))
            hits = [b for b in found if b[0] == rate]
            kinds = [b[1] for b in hits]
            kind = max(set(kinds), key=kinds.count)
            con = min(b[2] for b in hits)
            chans = [labels[c] for c, b in enumerate(per_ch) if b is not None and b[0] == rate]
            p, q = period(self.fs, rate)
            what = {"hold": "held", "linear": "joined by straight lines", "zero-stuff": "zero-stuffed"}[kind]
            out.update(interpolation_source_rate_hz=rate, interpolation_kind=kind,
                       interpolation_contrast_db=round(min(con, 200.0), 1), interpolation_channels=chans,
                       interpolation_note=(f"samples {what} at {rate / 1000:g} kHz: every {p} samples the "
                                           f"{'first' if kind == 'hold' else 'second' if kind == 'linear' else 'zeroth'}"
                                           f" difference repeats the same pattern of {q} active phase"
                                           f"{'s' if q > 1 else ''}, {min(con, 200.0):.0f} dB above the others"))
        return out
