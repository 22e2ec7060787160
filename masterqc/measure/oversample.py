"""Polyphase interpolation for true-peak metering (ITU-R BS.1770-5, Annex 2).

The interpolator estimates the band-limited signal between the samples: for an
oversampling factor ``L`` it computes, for every input frame ``i``, the values at
the instants ``i + p/L`` (p = 0 .. L-1, in input samples).  Phase 0 is the
sample itself, exactly: the kernel is a Kaiser-windowed sinc with its cutoff at
the input Nyquist frequency, whose zeros fall on the integers, so the reported
true peak can never be below the sample peak.

Filter (``kaiser`` design, the default)
    ``h_p[d] = sinc(p/L - d) * kaiser(p/L - d; beta) / sum_d(...)`` for the input
    offsets ``d = -(T/2 - 1) .. T/2`` (``T`` taps per phase), each phase scaled to
    unit gain at 0 Hz.  With ``T = 32``, ``beta = 5.0`` (the defaults) the response
    is half amplitude at fs/2 (a Nyquist filter), ripple within 0.011 dB up to
    0.375*fs, -0.015 dB at 0.45*fs, images of content up to 0.4*fs at least
    58 dB down and the image of 0.45*fs 54 dB down; the worst-case under-read of
    a sine up to 0.45*fs is 0.58 dB at 4x (grid-only figure of Annex 2: 0.554),
    0.17 dB at 8x (0.136) and 0.07 dB at 16x (0.034) (figures computed by :func:`filter_properties` and :func:`underread_db`;
    checked in ``tests/test_true_peak.py``).

Filter (``annex2`` design)
    The example 48-tap, 4-phase filter printed in BS.1770-5 Annex 2 (4x only).
    Its phases are not an exact identity at phase 0, so the meter still takes the
    maximum with the sample peak.

Streaming: :class:`TruePeakMeter` keeps only the last ``T`` input frames per
channel between blocks, so results do not depend on the block size.  The
signal is taken as zero before the first and after the last sample; only the
instants inside the file ``[0, frames)`` are evaluated.

Speed: the output of ``B = T/2`` consecutive frames depends on three contiguous
``B``-frame segments of the input, so the whole block is computed as three
matrix products of non-overlapping reshaped views (BLAS, no window copies), in
float32.  float32 is safe here: 24-bit codes are exact in float32 and the
rounding error of a 32-term dot product is below 1e-6 of full scale
(< 0.0001 dB at any level above -100 dBFS); the phase-0 values and the sample
peak are taken in float64.  The products are small, so BLAS runs them on one
thread (threadpoolctl): on a loaded machine, multi-threaded OpenBLAS workers
spin and made the meter over 100x slower in the benchmark.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.lib.stride_tricks import as_strided

#: the example interpolation filter of ITU-R BS.1770-5 Annex 2 (phases 0 and 1;
#: phase 2 is phase 1 reversed, phase 3 is phase 0 reversed)
ANNEX2_PHASE0 = (0.0017089843750, 0.0109863281250, -0.0196533203125, 0.0332031250000,
                 -0.0594482421875, 0.1373291015625, 0.9721679687500, -0.1022949218750,
                 0.0476074218750, -0.0266113281250, 0.0148925781250, -0.0083007812500)
ANNEX2_PHASE1 = (-0.0291748046875, 0.0292968750000, -0.0517578125000, 0.0891113281250,
                 -0.1665039062500, 0.4650878906250, 0.7797851562500, -0.2003173828125,
                 0.1015625000000, -0.0582275390625, 0.0330810546875, -0.0189208984375)

DEFAULT_TAPS_PER_PHASE = 32
DEFAULT_KAISER_BETA = 5.0
#: accepted oversampling factors
FACTORS = (1, 2, 4, 8, 16)


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
    """Factor used: the requested one, but never below :func:`automatic_factor`."""
    auto = automatic_factor(sample_rate_hz)
    if requested is None:
        return auto
    if int(requested) not in FACTORS:
        raise ValueError(f"true-peak oversampling factor {requested} is not one of "
                         f"{', '.join(map(str, FACTORS))}")
    return max(auto, int(requested))


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
    """Filter for ``factor`` in the named design ("kaiser" or "annex2")."""
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


def underread_db(flt: PolyphaseFilter, freqs_norm, offsets: int = 256) -> np.ndarray:
    """Worst-case under-read (dB, >= 0) of a single sine peak at each frequency.

    A full-scale sine ``cos(2*pi*f*(t - t0))`` is sampled; the meter's reading
    of the peak at ``t0`` is the largest interpolated value at the instants
    within half a period of ``t0``.  The under-read is the worst over ``t0``
    (``offsets`` positions in one sample period), and includes both the grid
    spacing (the analytic ``-20*log10(cos(pi*f/(L*fs)))``) and the filter's
    passband droop and phase error.
    """
    T, L = flt.taps.shape
    freqs = np.atleast_1d(np.asarray(freqs_norm, dtype=float))
    g = phase_responses(flt, freqs)                               # (F, L)
    out = np.empty(freqs.shape[0])
    # peak instants in [0, 1); a multiple of 2L positions includes the half-way
    # points between instants, where the grid loss is largest
    t0 = np.arange(offsets) / offsets
    for j, f in enumerate(freqs):
        w = 2 * np.pi * f
        half = 0.5 / f
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
    """Largest :func:`underread_db` for sines from 0.005*fs to ``up_to``*fs."""
    flt = get_filter(factor, design)
    freqs = np.linspace(0.005, up_to, 90)
    return float(underread_db(flt, freqs).max())


def filter_properties(flt: PolyphaseFilter) -> dict:
    """Computed properties of a filter, for settings and tests (dB)."""
    f_pass = np.linspace(0.0, 0.375, 151)
    return {
        "passband_ripple_db_to_0_375fs": float(np.abs(magnitude_db(flt, f_pass)).max()),
        "gain_db_at_0_417fs": float(magnitude_db(flt, [20000 / 48000])[0]),
        "gain_db_at_0_45fs": float(magnitude_db(flt, [0.45])[0]),
        "gain_db_at_0_5fs": float(magnitude_db(flt, [0.5])[0]),
        "image_rejection_db_to_0_4fs": float(image_rejection_db(flt, np.linspace(0.001, 0.4, 200)).max()),
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

    ``process(block)`` takes float arrays of shape (frames, channels) in order.
    After :meth:`flush` (or at any time for the frames seen so far, minus the
    filter's look-ahead of ``T/2`` frames):

    - ``peak_linear``: per-channel maximum of ``|x|`` over every interpolated
      instant (phase 0 included, so never below the sample peak), shape (C,);
    - ``frames_done``: input frames evaluated so far.

    ``on_frames(start_frame, frame_peak)`` is called, when given, with the
    per-frame maximum over channels and instants (float32 array, phase 0
    included) for every run of evaluated frames, in order, so callers can build
    envelopes and find overs.  Frame ``i`` covers the instants ``[i, i+1)``.
    """

    #: frames per internal run (multiple of T/2).  Longer runs mean fewer, larger products
    #: (32768 frames: 17 % less time than 8192 in the benchmark).  The float32 rounding of a
    #: product can depend on the BLAS kernel chosen for its shape, so the run length may move
    #: an interpolated value in its last float32 bits (seen: 3e-6 dB on display envelope
    #: points, none on the reported peaks), far inside the 0.0001 dB argued above.
    RUN_FRAMES = 32768

    def __init__(self, sample_rate_hz: float, channels: int, factor: int = 4,
                 design: str = "kaiser", on_frames=None):
        self.sample_rate_hz = float(sample_rate_hz)
        self.channels = int(channels)
        self.filter = get_filter(factor, design)
        self.factor = self.filter.factor
        T = self.filter.taps_per_phase
        self._T = T
        self._B = T // 2
        self._lead = self.filter.lead
        self._on_frames = on_frames
        self.peak_linear = np.zeros(self.channels)
        self.frames_done = 0
        self._received = 0
        self._flushed = False
        # buffer holds input from frame (frames_done - lead) onwards, (C, n)
        self._buf = np.zeros((self.channels, self._lead))
        self._mat = self._block_matrix()

    def _block_matrix(self):
        """(3B, P*B) float32 matrix: the P interpolated phases of the B frames of
        output block b are ``[S_b, S_b+1, S_b+2] @ M``, where S_s is the s-th
        B-frame segment of the buffer; column ``p*B + j`` is phase p of frame j.
        P = L-1 when phase 0 is the sample itself (it is then not computed)."""
        T, B = self._T, self._B
        taps = self.filter.taps[:, 1:] if self.filter.phase0_identity else self.filter.taps
        P = taps.shape[1]
        mat = np.zeros((3 * B, P * B))
        for j in range(B):                 # output frame within the block
            for k in range(T):             # tap: input j + k of the 3B-frame window
                mat[j + k, np.arange(P) * B + j] = taps[k]
        self._P = P
        return mat.astype(np.float32)

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
        self._run(final=False)

    def flush(self) -> None:
        """Evaluate the remaining frames (the signal is zero after the end)."""
        if self._flushed:
            return
        pad = self._T + self._B
        self._buf = np.concatenate([self._buf, np.zeros((self.channels, pad))], axis=1)
        self._run(final=True)
        self._flushed = True
        self._buf = np.zeros((self.channels, 0))

    def _run(self, final: bool) -> None:
        if self._buf.shape[1] - self._lead < self._T + self._B and not final:
            return                                       # not enough look-ahead yet
        with single_thread_blas():
            self._run_blocks(final)

    def _run_blocks(self, final: bool) -> None:
        B = self._B
        while True:
            todo = self._received - self.frames_done     # frames still to evaluate
            cap = (self._buf.shape[1] // B - 2) * B      # frames whose look-ahead is buffered
            m = min(todo, cap, self.RUN_FRAMES)
            if not final:
                m -= m % B
            if m <= 0:
                break
            self._evaluate(m)
            self._buf = self._buf[:, m:]

    def _evaluate(self, m: int) -> None:
        """Evaluate ``m`` frames from the buffer start (m <= available)."""
        B, lead, C, P = self._B, self._lead, self.channels, self._P
        xb = self._buf
        start = self.frames_done
        sample_peak = np.abs(xb[:, lead:lead + m]).max(axis=1)     # float64, per channel
        mb = -(-m // B)                                  # output blocks (last may be partial)
        seg = xb[:, :(mb + 2) * B].astype(np.float32)
        frame_peak = np.empty((C, mb * B), dtype=np.float32)
        for c in range(C):
            s = seg[c]
            win = as_strided(s, shape=(mb, 3 * B), strides=(B * s.itemsize, s.itemsize))
            y = np.ascontiguousarray(win) @ self._mat                 # (mb, P*B)
            np.abs(y, out=y)
            fp = frame_peak[c].reshape(mb, B)
            np.abs(s[lead:lead + mb * B].reshape(mb, B), out=fp)      # phase 0: the samples
            for p in range(P):
                np.maximum(fp, y[:, p * B:(p + 1) * B], out=fp)
        frame_peak = frame_peak[:, :m]
        np.maximum(self.peak_linear, sample_peak, out=self.peak_linear)
        np.maximum(self.peak_linear, frame_peak.max(axis=1), out=self.peak_linear)
        self.frames_done += m
        if self._on_frames is not None:
            self._on_frames(start, frame_peak.max(axis=0))


def true_peak_linear(x, sample_rate_hz: float, factor: int = 4, design: str = "kaiser") -> np.ndarray:
    """Per-channel true peak (linear) of a whole array (frames, channels) or (frames,)."""
    x = np.asarray(x, dtype=np.float64)
    if x.ndim == 1:
        x = x[:, None]
    meter = TruePeakMeter(sample_rate_hz, x.shape[1], factor, design)
    meter.process(x)
    meter.flush()
    return meter.peak_linear.copy()
