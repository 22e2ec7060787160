"""Band-limited interpolation for true-peak metering (ITU-R BS.1770-5, Annex 2).

The interpolator estimates the band-limited signal between the samples: for an
oversampling factor ``L`` it computes, for every input frame ``i``, the values at
the instants ``i + p/L`` (p = 0 .. L-1, in input samples).  Phase 0 is the
sample itself, exactly: the kernel is a Kaiser-windowed sinc with its cutoff at
the input Nyquist frequency, whose zeros fall on the integers, so the reported
true peak can never be below the sample peak.

Filter (``kaiser`` design, the default)
    ``h_p[d] = sinc(p/L - d) * kaiser(p/L - d; beta) / sum_d(...)`` for the input
    offsets ``d = -(T/2 - 1) .. T/2`` (``T`` taps per phase), each phase scaled to
    unit gain at 0 Hz.  The defaults, ``T = 192``, ``beta = 5.5`` (house choice),
    make a narrow transition centred on fs/2 (half amplitude there, a Nyquist
    filter): every phase reproduces a sine up to 0.49*fs within 0.0021 of its
    amplitude and phase (0.018 dB) and the prototype is 59.7 dB or more down from 0.51*fs (-59.78 dB)
    (so the image of a 0.49*fs component is too).  Figures computed by
    :func:`filter_properties` and checked in ``tests/test_true_peak.py``.

Reading grid (``kaiser``): a scan, then a 32x read where it matters
    The meter reads every peak on a 32x grid (``READ_FACTOR``).  The grid loss
    of BS.1770-5 Annex 2, ``-20*log10(cos(pi*f/(L*fs)))``, is then 0.010 dB at
    0.49*fs; with the filter's own error the worst-case under-read of a sine is
    0.012 dB up to 0.45*fs and 0.023 dB up to 0.49*fs (:func:`meter_underread_db`).
    Evaluating 32 phases everywhere would cost 8x a 4x meter, so the meter first
    scans a coarse grid (4x by default, the phases 0, 8, 16 and 24 of the same
    32-phase filter, computed by FFT), and reads the other 28 phases only in the
    frames where the scan leaves open that a value could matter.

    Why the scan cannot miss a peak (analytic): for a real signal band-limited
    to ``B`` Hz, ``|f| <= M``, Bernstein's inequality in Szegő's form
    ``f'^2 + (2*pi*B)^2 f^2 <= (2*pi*B)^2 M^2`` gives ``f(t* + s) >= M
    cos(2*pi*B*s)`` around a maximum ``f(t*) = M``.  Every instant lies within
    half a scan step ``1/(2*L*fs)`` of a scan instant, so the scan value nearest
    a peak of height ``M`` is at least ``M*cos(pi*B/(L*fs))``; the same bound is
    Annex 2's grid-loss formula, here for any band-limited signal, not only a
    sine.  The interpolant's band ends where the filter's stopband starts
    (0.51*fs; ``B = 0.52*fs`` is used, with a further 0.5 % margin for the
    stopband's leakage and float32 rounding of the scan).  A frame whose scan
    values (and the next sample) are all below ``threshold * X`` therefore holds
    no fine-grid value above ``X``: with ``X`` the channel's peak so far, such
    a frame cannot change the true peak; with ``X`` the caller's floor (the
    over ceiling, the envelope bucket's maximum so far) it cannot change the
    overs or the envelope.  The bound is proven at the signal's largest value;
    at a smaller local maximum it holds as long as no larger value lies within
    about a sample (the curvature there is bounded by the larger value), so the
    overs and the envelope are checked against a full 32x evaluation on
    near-Nyquist signals in the tests.  Results equal a full 32x evaluation and
    do not depend on the block size (scan segments sit at fixed frame
    positions).

Filter (``annex2`` design)
    The example 48-tap, 4-phase filter printed in BS.1770-5 Annex 2 (4x only,
    read on its own 4x grid, no refinement).  Its phases are not an exact
    identity at phase 0, so the meter still takes the maximum with the sample
    peak.

Streaming: :class:`TruePeakMeter` evaluates fixed FFT segments of ``S`` frames
(overlap-save, ``N = 16384``, ``S = N - T + 1`` rounded down to a multiple of
64: 16128) at fixed positions in the file and keeps the unevaluated input
between blocks.  The signal is taken as zero
before the first and after the last sample; only the instants inside the file
``[0, frames)`` are evaluated.

Precision: the scan and the fine read run in float32 (24-bit codes are exact
in float32; the FFT's rounding is about 1e-7 of the segment's level, far inside
the 0.5 % margin above, and a 192-term float32 dot product is within about
1e-6 of the local level, < 0.0001 dB); the sample peak is float64.  Tested
against a float64 full-grid evaluation.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import scipy.fft as sfft
from numpy.lib.stride_tricks import as_strided

from masterqc.measure import filterprops

#: the example interpolation filter of ITU-R BS.1770-5 Annex 2 (phases 0 and 1;
#: phase 2 is phase 1 reversed, phase 3 is phase 0 reversed)
ANNEX2_PHASE0 = (0.0017089843750, 0.0109863281250, -0.0196533203125, 0.0332031250000,
                 -0.0594482421875, 0.1373291015625, 0.9721679687500, -0.1022949218750,
                 0.0476074218750, -0.0266113281250, 0.0148925781250, -0.0083007812500)
ANNEX2_PHASE1 = (-0.0291748046875, 0.0292968750000, -0.0517578125000, 0.0891113281250,
                 -0.1665039062500, 0.4650878906250, 0.7797851562500, -0.2003173828125,
                 0.1015625000000, -0.0582275390625, 0.0330810546875, -0.0189208984375)

DEFAULT_TAPS_PER_PHASE = 192
DEFAULT_KAISER_BETA = 5.5
#: accepted (requested) oversampling factors
FACTORS = (1, 2, 4, 8, 16)
#: the grid every peak is read on (kaiser design), house choice
READ_FACTOR = 32
#: coarsest scan grid (the scan factor is at least this, and at least the request)
SCAN_FACTOR_MIN = 4
#: band assumed for the interpolant in the scan bound, as a fraction of fs (the
#: filter's stopband starts at 0.51*fs)
SCAN_BAND_FS = 0.52
#: further factor on the scan threshold (stopband leakage, float32 scan)
SCAN_MARGIN = 0.995
#: FFT length of the scan (overlap-save)
SCAN_FFT_SIZE = 16384


def automatic_factor(sample_rate_hz: float) -> int:
    """Smallest factor BS.1770-5 Annex 2 asks for at a sample rate.

    4x up to 48 kHz, 2x up to 96 kHz (the oversampled rate then reaches
    176.4/192 kHz), 1x above.
    """
    if sample_rate_hz <= 48000:
        return 4
    if sample_rate_hz <= 96000:
        return 2
    return 1


def choose_factor(sample_rate_hz: float, requested: int | None) -> int:
    """Scan factor used: the requested one, but never below 4 (``SCAN_FACTOR_MIN``,
    which is also at least :func:`automatic_factor` at every rate)."""
    floor = max(SCAN_FACTOR_MIN, automatic_factor(sample_rate_hz))
    if requested is None:
        return floor
    if int(requested) not in FACTORS:
        raise ValueError(f"true-peak oversampling factor {requested} is not one of "
                         f"{', '.join(map(str, FACTORS))}")
    return max(floor, int(requested))


def scan_threshold(scan_factor: int) -> float:
    """Scan values below ``threshold * X`` prove that no fine-grid value within
    half a scan step exceeds ``X`` (module docstring): ``cos(pi*B/(L*fs))`` with
    ``B = 0.52*fs``, times the 0.5 % margin."""
    return math.cos(math.pi * SCAN_BAND_FS / scan_factor) * SCAN_MARGIN


@dataclass(frozen=True)
class PolyphaseFilter:
    """Interpolation filter as a (T, L) matrix: ``taps[k, p]`` weights input
    ``x[i + k - (T/2 - 1)]`` for the value at ``i + p/L``."""

    factor: int
    taps: np.ndarray           # (T, L) float64
    design: str
    beta: float | None = None
    #: instant of phase p is i + p/L + instant_offset (input samples)
    instant_offset: float = 0.0
    #: whether phase 0 is exactly the sample itself (then it is not computed)
    phase0_identity: bool = False

    @property
    def taps_per_phase(self) -> int:
        return self.taps.shape[0]

    @property
    def lead(self) -> int:
        """Input frames before frame ``i`` that the value at ``i + p/L`` uses."""
        return self.taps_per_phase // 2 - 1

    @property
    def max_gain(self) -> float:
        """Largest sum of absolute taps over the phases: no interpolated value
        exceeds ``max_gain * max|x|`` over the filter's span (a safe bound)."""
        return float(np.abs(self.taps).sum(axis=0).max())

    def settings(self) -> dict:
        out = {"design": self.design, "factor": self.factor, "taps_per_phase": self.taps_per_phase}
        if self.beta is not None:
            out["kaiser_beta"] = self.beta
        return out


@lru_cache(maxsize=32)
def kaiser_filter(factor: int, taps_per_phase: int = DEFAULT_TAPS_PER_PHASE,
                  beta: float = DEFAULT_KAISER_BETA) -> PolyphaseFilter:
    """Kaiser-windowed sinc interpolator with cutoff at the input Nyquist frequency."""
    if taps_per_phase < 2 or taps_per_phase % 2:
        raise ValueError("taps_per_phase must be an even number >= 2")
    T, L = taps_per_phase, int(factor)
    d = np.arange(T) - (T // 2 - 1)                      # input offsets
    p = np.arange(L) / L                                 # fractional instants
    t = p[None, :] - d[:, None]                          # (T, L), |t| < T/2
    half = T / 2.0
    window = np.i0(beta * np.sqrt(np.clip(1.0 - (t / half) ** 2, 0.0, None))) / np.i0(beta)
    h = np.sinc(t) * window
    h /= h.sum(axis=0, keepdims=True)                     # unit gain at 0 Hz per phase
    h[:, 0] = (d == 0)                                    # sinc zeros on the integers, exactly
    return PolyphaseFilter(factor=L, taps=h, design="kaiser", beta=float(beta), phase0_identity=True)


@lru_cache(maxsize=1)
def annex2_filter() -> PolyphaseFilter:
    """The BS.1770-5 Annex 2 example filter, 4 phases of 12 taps.

    The printed phase order runs the taps oldest-first for a convolution; here
    they are re-indexed so that ``taps[k, p]`` weights ``x[i + k - 5]`` for the
    value at ``i + p/4``.  Phase 0 peaks at its 7th tap (0.972), i.e. it is the
    value near the sample itself.  The prototype is symmetric about its
    half-way point, so the phases sit at ``i + 1/8, i + 3/8, i + 5/8, i + 7/8``
    (not on the sample): ``instant_offset = 1/8``.
    """
    ph0 = np.array(ANNEX2_PHASE0)
    ph1 = np.array(ANNEX2_PHASE1)
    phases = [ph0, ph1, ph1[::-1], ph0[::-1]]
    # Each printed phase is a convolution kernel: y = sum_j c[j] x[n - j]; its
    # largest tap (index 6 for phase 0) marks the sample that phase sits on.
    # Re-express as correlation weights over offsets d = -5 .. 6 around frame i.
    taps = np.stack([ph[::-1] for ph in phases], axis=1)
    return PolyphaseFilter(factor=4, taps=taps, design="annex2", instant_offset=0.125)


def get_filter(factor: int, design: str = "kaiser") -> PolyphaseFilter:
    """Filter for ``factor`` in the named design ("kaiser" or "annex2"); the
    kaiser filters of every factor are the same prototype (phase ``p`` of factor
    ``L`` is phase ``p*32/L`` of the 32-phase filter)."""
    if design == "kaiser":
        return kaiser_filter(int(factor))
    if design == "annex2":
        if int(factor) != 4:
            raise ValueError("the Annex 2 example filter is defined for 4x only")
        return annex2_filter()
    raise ValueError(f"unknown true-peak filter design {design!r} (kaiser, annex2)")


# ---------------------------------------------------------------------------
# Filter properties, computed from the taps


def phase_responses(flt: PolyphaseFilter, freqs_norm: np.ndarray) -> np.ndarray:
    """Complex response of each phase relative to its ideal fractional delay.

    ``freqs_norm``: frequencies as a fraction of the input sample rate.
    Returns (F, L): 1.0 means the phase reproduces a sine at that frequency
    exactly at its instant ``p/L``.
    """
    T, L = flt.taps.shape
    d = np.arange(T) - flt.lead
    w = 2 * np.pi * np.asarray(freqs_norm, dtype=float)
    g = np.exp(1j * np.outer(w, d)) @ flt.taps                   # (F, L)
    return g * np.exp(-1j * np.outer(w, np.arange(L) / L + flt.instant_offset))


def magnitude_db(flt: PolyphaseFilter, freqs_norm) -> np.ndarray:
    """Magnitude response (dB) of the whole interpolator at the input-rate
    normalised frequencies ``freqs_norm`` (the mean over phases of the complex
    phase responses, i.e. the response of the length T*L prototype)."""
    g = phase_responses(flt, np.atleast_1d(freqs_norm)).mean(axis=1)
    return 20 * np.log10(np.maximum(np.abs(g), 1e-300))


def image_rejection_db(flt: PolyphaseFilter, freqs_norm) -> np.ndarray:
    """Level (dB, relative to the wanted component) of the strongest image of a
    sine at ``freqs_norm`` that survives in the oversampled signal.

    The oversampled output of a sine at f holds the wanted component at f and
    images at k*fs +- f; their amplitudes are the DFT over phases of the phase
    responses.
    """
    g = phase_responses(flt, np.atleast_1d(freqs_norm))          # (F, L)
    L = g.shape[1]
    if L == 1:
        return np.full(g.shape[0], -np.inf)
    spec = np.fft.fft(g, axis=1) / L                              # component k of the phase sequence
    wanted = np.abs(spec[:, 0])
    images = np.abs(spec[:, 1:]).max(axis=1)
    return 20 * np.log10(np.maximum(images, 1e-300) / wanted)


def underread_db(flt: PolyphaseFilter, freqs_norm, offsets: int | None = None) -> np.ndarray:
    """Worst-case under-read (dB, >= 0) of a single sine peak at each frequency.

    A full-scale sine ``cos(2*pi*f*(t - t0))`` is sampled; the meter's reading
    of the peak at ``t0`` is the largest interpolated value at the instants
    near ``t0`` (within half a period and one sample).  The under-read is the
    worst over ``t0`` (``offsets`` positions in one sample period, by default
    ``max(64, 2*L)``: they include the half-way points between instants), and
    includes both the grid spacing (the analytic
    ``-20*log10(cos(pi*f/(L*fs)))``) and the filter's passband droop and phase
    error.
    """
    T, L = flt.taps.shape
    offsets = max(64, 2 * L) if offsets is None else int(offsets)
    freqs = np.atleast_1d(np.asarray(freqs_norm, dtype=float))
    g = phase_responses(flt, freqs)                               # (F, L)
    out = np.empty(freqs.shape[0])
    # peak instants in [0, 1); a multiple of 2L positions includes the half-way
    # points between instants, where the grid loss is largest
    t0 = np.arange(offsets) / offsets
    for j, f in enumerate(freqs):
        w = 2 * np.pi * f
        half = min(0.5 / f, 1.0)
        n = np.arange(math.floor(-half) - 1, math.ceil(1 + half) + 2)
        inst = n[:, None] + np.arange(L)[None, :] / L + flt.instant_offset  # (N, L) instants
        # reading at instant n + p/L of cos(w (t - t0)): Re(g_p e^{i w (inst - t0)})
        val = np.real(g[j][None, None, :] * np.exp(1j * w * (inst[None, :, :] - t0[:, None, None])))
        near = np.abs(inst[None, :, :] - t0[:, None, None]) <= half
        val = np.where(near, val, -np.inf)
        reading = val.reshape(offsets, -1).max(axis=1)
        out[j] = -20 * math.log10(max(reading.min(), 1e-300))
    return np.maximum(out, 0.0)


def analytic_underread_db(factor: int, freq_norm: float) -> float:
    """Grid-only worst-case under-read ``-20*log10(cos(pi*f/(L*fs)))`` (Annex 2)."""
    return -20 * math.log10(math.cos(math.pi * freq_norm / factor))


@lru_cache(maxsize=32)
def worst_underread_db(factor: int, design: str = "kaiser", up_to: float = 0.45) -> float:
    """Largest :func:`underread_db` for sines from 0.005*fs to ``up_to``*fs
    (90 frequencies, denser in the top 10 % of the band where it is largest)."""
    flt = get_filter(factor, design)
    stored = filterprops.WORST_UNDERREAD_DB.get((_fingerprint(flt), up_to))
    if stored is not None:      # the same computation, done once for the shipped filters
        return stored
    freqs = np.unique(np.concatenate([np.linspace(0.005, up_to, 60),
                                      np.linspace(0.9 * up_to, up_to, 30)]))
    return float(underread_db(flt, freqs).max())


def reading_factor(design: str = "kaiser") -> int:
    """Factor of the grid the meter reads peaks on: ``READ_FACTOR`` (kaiser), 4 (annex2)."""
    return READ_FACTOR if design == "kaiser" else 4


def meter_underread_db(design: str = "kaiser", up_to: float = 0.45) -> float:
    """The meter's worst-case under-read of a sine up to ``up_to``*fs (dB): that
    of its reading grid and filter (the scan only skips frames that cannot hold
    the peak, see the module docstring)."""
    return worst_underread_db(reading_factor(design), design, up_to)


def reading_filter(design: str = "kaiser") -> PolyphaseFilter:
    """The filter whose grid the meter reads peaks on."""
    return get_filter(reading_factor(design), design)


@lru_cache(maxsize=4)
def reading_filter_properties(design: str = "kaiser") -> dict:
    """:func:`filter_properties` of :func:`reading_filter` (computed once; stored for the
    shipped filters, see :mod:`masterqc.measure.filterprops`)."""
    flt = reading_filter(design)
    stored = filterprops.PROPERTIES.get(_fingerprint(flt))
    return dict(stored) if stored is not None else filter_properties(flt)


def _fingerprint(flt: PolyphaseFilter) -> str:
    return filterprops.fingerprint(flt.taps, flt.factor, flt.instant_offset)


def filter_properties(flt: PolyphaseFilter) -> dict:
    """Computed properties of a filter, for settings and tests (dB)."""
    f_pass = np.linspace(0.0, 0.375, 151)
    f_top = np.linspace(0.0, 0.49, 491)
    f_stop = np.linspace(0.51, 3.0, 2491)
    g_top = phase_responses(flt, f_top)
    return {
        "passband_ripple_db_to_0_375fs": float(np.abs(magnitude_db(flt, f_pass)).max()),
        "passband_ripple_db_to_0_49fs": float(np.abs(magnitude_db(flt, f_top)).max()),
        "phase_error_max_to_0_49fs": float(np.abs(g_top - 1).max()),
        "gain_db_at_0_417fs": float(magnitude_db(flt, [20000 / 48000])[0]),
        "gain_db_at_0_45fs": float(magnitude_db(flt, [0.45])[0]),
        "gain_db_at_0_49fs": float(magnitude_db(flt, [0.49])[0]),
        "gain_db_at_0_5fs": float(magnitude_db(flt, [0.5])[0]),
        "stopband_gain_db_from_0_51fs": float(magnitude_db(flt, f_stop).max()),
        "image_rejection_db_to_0_4fs": float(image_rejection_db(flt, np.linspace(0.001, 0.4, 200)).max()),
        "image_rejection_db_to_0_49fs": float(image_rejection_db(flt, np.linspace(0.001, 0.49, 491)).max()),
        "max_gain": flt.max_gain,
    }


# ---------------------------------------------------------------------------
# Streaming meter

_BLAS = None


def single_thread_blas():
    """Context manager limiting BLAS to one thread (no-op without threadpoolctl)."""
    global _BLAS
    if _BLAS is None:
        try:
            from threadpoolctl import ThreadpoolController
            _BLAS = ThreadpoolController().select(user_api="blas")
        except Exception:          # threadpoolctl missing or unable to inspect: leave BLAS as is
            _BLAS = False
    if _BLAS is False or not _BLAS.lib_controllers:
        return contextlib.nullcontext()
    return _BLAS.limit(limits=1)


class TruePeakMeter:
    """Streaming true-peak meter for ``channels`` channels.

    ``factor`` is the scan factor (:func:`choose_factor`; at least 4 and a
    divisor of ``READ_FACTOR`` for the kaiser design); the peaks are read on the
    ``READ_FACTOR`` grid (``self.factor``).  ``design="annex2"`` reads on the
    Annex 2 filter's own 4x grid.

    ``process(block)`` takes float arrays of shape (frames, channels) in order.
    After :meth:`flush` (or at any time for the frames seen so far, minus the
    look-ahead):

    - ``peak_linear``: per-channel maximum of ``|x|`` over every instant of the
      reading grid (phase 0 included, so never below the sample peak), shape (C,);
    - ``sample_peak_linear``: per-channel maximum of ``|x|`` over the input samples
      (float64, exact), shape (C,);
    - ``envelope_linear``: with ``bucket_frames``, the maximum over channels and
      instants in each bucket of that many frames (``buckets`` of them; frames
      past the last bucket count in it);
    - ``frames_done``: input frames evaluated so far;
    - ``refined_frames``: channel-frames read on the fine grid (cost figure; it
      depends on the block size, the results do not).

    ``on_frames(start_frame, frame_peak)`` is called, when given, with the
    per-frame maximum over channels and instants (float32 array) for every run
    of evaluated frames, in order.  Frame ``i`` covers the instants ``[i, i+1)``.
    A frame's value is exact wherever it can reach ``ceiling_linear`` (when
    given) or its bucket's maximum; elsewhere it is the scan's value, below
    both.  Without ``ceiling_linear`` and ``bucket_frames`` every frame value
    passed to ``on_frames`` is exact.

    ``on_channel_frames(start_frame, channel_peak)``, when given, is called
    likewise with the per-channel values, a (channels, frames) float32 array
    whose maximum over channels is ``frame_peak``; a channel's value is exact
    wherever that channel can reach ``ceiling_linear``, so overs can be
    attributed to the channels that hold them.
    """

    #: FFT segments evaluated per run
    SEGMENTS_PER_RUN = 8
    #: frames per group of the candidate pre-screen
    GROUP = 64
    #: candidate frames read per matrix product
    REFINE_CHUNK = 4096

    def __init__(self, sample_rate_hz: float, channels: int, factor: int = 4,
                 design: str = "kaiser", on_frames=None, ceiling_linear: float | None = None,
                 bucket_frames: int | None = None, buckets: int = 1, on_channel_frames=None):
        self.sample_rate_hz = float(sample_rate_hz)
        self.channels = int(channels)
        if design == "kaiser":
            scan = max(SCAN_FACTOR_MIN, int(factor))
            if READ_FACTOR % scan:
                raise ValueError(f"true-peak scan factor {scan} does not divide {READ_FACTOR}")
            self.filter = kaiser_filter(READ_FACTOR)
            step = READ_FACTOR // scan
            scan_phases = list(range(step, READ_FACTOR, step))
            fine_phases = [p for p in range(1, READ_FACTOR) if p % step]
            self.threshold = scan_threshold(scan)
        else:
            self.filter = get_filter(factor, design)          # annex2: 4x only
            scan = self.filter.factor
            scan_phases = list(range(scan))
            fine_phases = []
            self.threshold = None
        self.scan_factor = scan
        self.factor = self.filter.factor if fine_phases else scan
        self.design = design
        T = self.filter.taps_per_phase
        self._T, self._lead = T, self.filter.lead
        self._N = max(SCAN_FFT_SIZE, 1 << int(math.ceil(math.log2(4 * T))))
        G = self.GROUP
        self._S = (self._N - T + 1) // G * G                 # hop: a whole number of groups
        g = np.zeros((len(scan_phases), self._N))
        g[:, :T] = self.filter.taps[::-1, scan_phases].T     # correlation as convolution
        self._H = sfft.rfft(g, axis=1).astype(np.complex64)[:, None, :]
        self._fine = np.ascontiguousarray(self.filter.taps[:, fine_phases], dtype=np.float32)
        self._on_frames = on_frames
        self._on_channel_frames = on_channel_frames
        self.ceiling_linear = None if ceiling_linear is None else float(ceiling_linear)
        self.bucket_frames = None if bucket_frames is None else max(1, int(bucket_frames))
        self.envelope_linear = np.zeros(max(1, int(buckets)) if bucket_frames else 0)
        self.peak_linear = np.zeros(self.channels)
        #: per-channel max |x| of the samples evaluated so far (float64, exact)
        self.sample_peak_linear = np.zeros(self.channels)
        self.frames_done = 0
        self.refined_frames = 0
        self._received = 0
        self._flushed = False
        # buffer holds input from frame (frames_done - lead) onwards, (C, n)
        self._buf = np.zeros((self.channels, self._lead))

    def process(self, block) -> None:
        """Feed a (frames, channels) block."""
        if self._flushed:
            raise RuntimeError("TruePeakMeter.process after flush")
        block = np.asarray(block)
        if block.ndim == 1:
            block = block[:, None]
        if block.shape[1] != self.channels:
            raise ValueError(f"block has {block.shape[1]} channels, meter expects {self.channels}")
        if block.shape[0] == 0:
            return
        self._received += block.shape[0]
        self._buf = np.concatenate([self._buf, block.T], axis=1)
        if self._buf.shape[1] >= self._N:
            self._run(final=False)

    def flush(self) -> None:
        """Evaluate the remaining frames (the signal is zero after the end)."""
        if self._flushed:
            return
        rem = self._received - self.frames_done
        if rem > 0:
            k = -(-rem // self._S)
            need = (k - 1) * self._S + self._N
            pad = max(0, need - self._buf.shape[1])
            self._buf = np.concatenate([self._buf, np.zeros((self.channels, pad))], axis=1)
            self._run(final=True)
        self._flushed = True
        self._buf = np.zeros((self.channels, 0))

    def _run(self, final: bool) -> None:
        with single_thread_blas():
            N, S = self._N, self._S
            while True:
                rem = self._received - self.frames_done
                avail = self._buf.shape[1]
                if rem <= 0 or avail < N:
                    break
                k = (avail - N) // S + 1                 # segments whose input is buffered
                k = min(k, -(-rem // S) if final else rem // S, self.SEGMENTS_PER_RUN)
                if k <= 0:
                    break
                m = min(k * S, rem)
                self._evaluate(k, m)
                self._buf = self._buf[:, m:]

    def _evaluate(self, k: int, m: int) -> None:
        """Evaluate ``m`` frames (``k`` segments) from the buffer start."""
        N, S, T, lead, C = self._N, self._S, self._T, self._lead, self.channels
        xb = self._buf
        start = self.frames_done
        own = xb[:, lead:lead + m]
        sample_peak = np.maximum(own.max(axis=1), -own.min(axis=1))     # float64
        seg32 = xb[:, :(k - 1) * S + N].astype(np.float32)
        scan = np.zeros((C, k * S), dtype=np.float32)
        for c in range(C):
            s = seg32[c]
            segs = as_strided(s, shape=(k, N), strides=(S * s.itemsize, s.itemsize))
            y = sfft.irfft(sfft.rfft(segs, axis=1)[None] * self._H, n=N, axis=2)[:, :, T - 1:T - 1 + S]
            np.abs(y, out=y)
            sc = scan[c].reshape(k, S)
            np.abs(s[lead:lead + k * S].reshape(k, S), out=sc)       # phase 0: the samples
            np.maximum(sc, y.max(axis=0), out=sc)
        scan[:, m:] = 0.0                                             # past the end of the file
        if self._fine.shape[1]:
            fp = self._refine(scan, seg32, start, m)
        else:
            fp = scan.max(axis=0)
            self._bucket_update(start, fp[:m])
        np.maximum(self.sample_peak_linear, sample_peak, out=self.sample_peak_linear)
        np.maximum(self.peak_linear, sample_peak, out=self.peak_linear)
        np.maximum(self.peak_linear, scan.max(axis=1), out=self.peak_linear)
        self.frames_done += m
        if self._on_frames is not None:
            self._on_frames(start, fp[:m])
        if self._on_channel_frames is not None:
            self._on_channel_frames(start, scan[:, :m])

    def _buckets_of(self, start: int, m: int):
        """(first bucket, per-frame cut offsets, frames per piece) of the run."""
        bf = self.bucket_frames
        last = self.envelope_linear.shape[0] - 1
        b0, b1 = min(start // bf, last), min((start + m - 1) // bf, last)
        cuts = np.maximum(np.arange(b0, b1 + 1) * bf - start, 0)
        cuts[0] = 0
        return b0, cuts

    def _bucket_update(self, start: int, fp: np.ndarray) -> None:
        if self.bucket_frames is None:
            return
        b0, cuts = self._buckets_of(start, fp.shape[0])
        env = self.envelope_linear[b0:b0 + cuts.shape[0]]
        np.maximum(env, np.maximum.reduceat(fp, cuts), out=env)

    def _refine(self, scan: np.ndarray, seg32: np.ndarray, start: int, m: int) -> np.ndarray:
        """Read the fine phases, in place, in the frames where the scan cannot rule
        out a value at or above the channel's peak, the ceiling or the bucket's
        maximum; returns the per-frame maximum over channels (length k*S)."""
        G, T, lead, C = self.GROUP, self._T, self._lead, self.channels
        thr = self.threshold
        n = scan.shape[1]
        ng = n // G
        fp = scan.max(axis=0)
        # per-frame floor below which a frame's exact value is not needed, as pieces
        # (cut offsets into the run, one level per piece), and per group
        if self.bucket_frames is not None:
            b0, cuts = self._buckets_of(start, m)
            known = np.maximum(self.envelope_linear[b0:b0 + cuts.shape[0]], np.maximum.reduceat(fp[:m], cuts))
            levels = known if self.ceiling_linear is None else np.minimum(known, self.ceiling_linear)
        elif self.ceiling_linear is not None:
            cuts, levels = np.array([0]), np.array([self.ceiling_linear])
        elif self._on_frames is not None or self._on_channel_frames is not None:
            cuts, levels = np.array([0]), np.array([0.0])
        else:
            cuts, levels = np.array([0]), np.array([np.inf])
        # a group's floor: the lowest level of the pieces it overlaps
        if cuts.shape[0] > 1 and self.bucket_frames < G:      # many pieces per group: per frame
            per_frame = np.full(n, levels[-1])
            per_frame[:m] = np.repeat(levels, np.diff(np.append(cuts, m)))
            gfloor = per_frame.reshape(ng, G).min(axis=1)
        else:                                                  # at most two pieces per group
            gstart = np.arange(ng) * G
            p_first = np.searchsorted(cuts, gstart, side="right") - 1
            p_last = np.searchsorted(cuts, gstart + G - 1, side="right") - 1
            gfloor = np.minimum(levels[p_first], levels[p_last])
        nxt = np.abs(seg32[:, lead + G:lead + n + 1:G])                # sample after each group
        gmax = np.maximum(scan.reshape(C, ng, G).max(axis=2), nxt)
        lane = np.arange(G)
        for c in range(C):
            peak_c = max(float(self.peak_linear[c]), float(gmax[c].max()))
            groups = np.flatnonzero(gmax[c] >= thr * np.minimum(gfloor, peak_c))
            if not groups.size:
                continue
            frames = (groups[:, None] * G + lane[None, :]).ravel()
            frames = frames[frames < m]
            ext = np.maximum(scan[c, frames], np.abs(seg32[c, lead + 1 + frames]))  # + the next sample
            piece = np.searchsorted(cuts, frames, side="right") - 1
            cand = frames[ext >= thr * np.minimum(levels[piece], peak_c)]
            if not cand.size:
                continue
            self.refined_frames += int(cand.size)
            windows = as_strided(seg32[c], shape=(seg32.shape[1] - T + 1, T), strides=(4, 4))  # frame i: from i - lead
            for j in range(0, cand.size, self.REFINE_CHUNK):
                idx = cand[j:j + self.REFINE_CHUNK]
                v = np.abs(windows[idx] @ self._fine).max(axis=1)
                scan[c, idx] = np.maximum(scan[c, idx], v)
                fp[idx] = np.maximum(fp[idx], v)
        self._bucket_update(start, fp[:m])
        return fp


def true_peak_linear(x, sample_rate_hz: float, factor: int = 4, design: str = "kaiser") -> np.ndarray:
    """Per-channel true peak (linear) of a whole array (frames, channels) or (frames,)."""
    x = np.asarray(x, dtype=np.float64)
    if x.ndim == 1:
        x = x[:, None]
    meter = TruePeakMeter(sample_rate_hz, x.shape[1], factor, design)
    meter.process(x)
    meter.flush()
    return meter.peak_linear.copy()
