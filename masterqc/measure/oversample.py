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
    32-phase filter, evaluated directly), and reads the other 28 phases only in
    the frames where the scan leaves open that a value could matter.  Before the
    scan, an analytic bound per group of 32 frames (:class:`TruePeakMeter`) rules
    out most groups of a programme from the samples alone.

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
    do not depend on the block size (runs sit at fixed frame positions).

Filter (``annex2`` design)
    The example 48-tap, 4-phase filter printed in BS.1770-5 Annex 2 (4x only,
    read on its own 4x grid, no refinement).  Its phases are not an exact
    identity at phase 0, so the meter still takes the maximum with the sample
    peak.

Streaming: :class:`TruePeakMeter` evaluates runs of ``RUN_FRAMES`` frames at
fixed positions in the file and keeps the unevaluated input (and the filter's
look-ahead) between blocks.  The signal is taken as zero before the first and
after the last sample; only the instants inside the file ``[0, frames)`` are
evaluated.

Precision: the pre-screen, the scan and the fine read run in float32 (24-bit
codes are exact in float32; a 192-term float32 dot product is within about
4e-5 of the local level, far inside the 0.5 % margin above, and the pre-screen
bound carries its own allowance for it); the sample peak is float64.  Tested
against a float64 full-grid evaluation.
"""

from __future__ import annotations

import contextlib
import math
import os
import threading
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.lib.stride_tricks import as_strided

from masterqc.measure import filterprops
from masterqc.measure.options import BLAS_PINNED_ENV

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
#: how many single_thread_blas() contexts are open (any thread), and the limiter the first one made
_BLAS_DEPTH = 0
_BLAS_LIMITER = None
_BLAS_LOCK = threading.Lock()


@contextlib.contextmanager
def single_thread_blas():
    """Context manager limiting BLAS to one thread (no-op without threadpoolctl).

    The limit is process-wide: the outermost context (in any thread) sets it and
    the last one to close restores it; contexts opened inside it cost nothing (the
    engine holds one for a whole run, so the true-peak meter's own per-block ones
    no longer re-inspect the loaded libraries each time)."""
    global _BLAS, _BLAS_DEPTH, _BLAS_LIMITER
    if _BLAS is None and os.environ.get(BLAS_PINNED_ENV) == "1":
        _BLAS = False              # BLAS was started with one thread (options.pin_blas_to_one_thread)
    if _BLAS is None:
        try:
            from threadpoolctl import ThreadpoolController
            _BLAS = ThreadpoolController().select(user_api="blas")
        except Exception:          # threadpoolctl missing or unable to inspect: leave BLAS as is
            _BLAS = False
    if _BLAS is False or not _BLAS.lib_controllers:
        yield
        return
    with _BLAS_LOCK:
        if _BLAS_DEPTH == 0:
            _BLAS_LIMITER = _BLAS.limit(limits=1)
        _BLAS_DEPTH += 1
    try:
        yield
    finally:
        with _BLAS_LOCK:
            _BLAS_DEPTH -= 1
            if _BLAS_DEPTH == 0:
                limiter, _BLAS_LIMITER = _BLAS_LIMITER, None
                limiter.restore_original_limits()


def prescreen_kernel():
    """``prescreen(x, ax, gm, gh, nr, channels, stride, frames, group, near)`` of masterqc's
    optional compiled module (``masterqc/measure/_cascade.c``), or None when it was not built
    or is switched off (``MASTERQC_OWN_KERNEL=0``, :mod:`masterqc.measure.iir`).  Checked
    once against numpy's path (:func:`_prescreen_numpy`) on a small buffer before it is used."""
    from masterqc.measure import iir
    return iir.checked_kernel("prescreen", _prescreen_self_check)


def _prescreen_numpy(x: np.ndarray, group: int, near: int):
    """(|x|, gm, gh, nr) of a (channels, L) float32 array as the compiled kernel defines them
    (``_cascade.c``), for the self-check and the tests; ``nr`` clipped at the ends."""
    C, L = x.shape
    ax = np.abs(x)
    ng = L // group
    gm = ax.reshape(C, ng, group).max(axis=2)
    dpad = np.zeros_like(x)
    d = np.subtract(x[:, 1:], x[:, :-1])
    dpad[:, 1:-1] = np.abs(np.subtract(d[:, 1:], d[:, :-1]))
    gh = dpad.reshape(C, ng, group).max(axis=2)
    nr = np.empty_like(gm)
    for g in range(ng):
        nr[:, g] = ax[:, max(0, g * group - near):min(L, g * group + group + near)].max(axis=1)
    return ax, gm, gh, nr


def _prescreen_self_check(fn) -> bool:
    for C, L, G, near in ((2, 256, 32, 4), (3, 96, 16, 3)):
        # a deterministic irregular signal (numpy.random stays unimported on the measure path)
        k = np.arange(C * (L + 7), dtype=np.float64)
        x = (0.6 * np.sin(k * 0.37) * np.cos(k * k * 1e-3) + 1e-3 * np.sin(k * 2.9)).astype(np.float32)
        x = x.reshape(C, L + 7)
        x[:, 5] = 0.0
        ax = np.zeros_like(x)
        stats = np.zeros((3, C, L // G), np.float32)
        if not fn(x, ax, stats[0], stats[1], stats[2], C, L + 7, L, G, near):
            return False
        want = _prescreen_numpy(np.ascontiguousarray(x[:, :L]), G, near)
        got = (ax[:, :L], stats[0], stats[1], stats[2])
        if not all(np.array_equal(w, g) for w, g in zip(want, got)):
            return False
    x = np.zeros((1, 64), np.float32)
    x[0, 7] = np.nan
    stats = np.zeros((3, 1, 2), np.float32)
    return not fn(x, np.zeros_like(x), stats[0], stats[1], stats[2], 1, 64, 64, 32, 4)


def local_bound_constants(flt: PolyphaseFilter, near: int = 4) -> tuple[float, float, float]:
    """Constants of the pre-screen bound (analytic, see :class:`TruePeakMeter`):
    ``(A_near, A_far, C_h)`` with ``g_p = h_p * b`` (``b = [1, 2, 1]/4``),
    ``A_near = max_p sum_{|k|<=near} |g_p[k]|``, ``A_far = max_p sum_{|k|>near} |g_p[k]|``
    and ``C_h = max_p sum_k |h_p[k]|``."""
    h = flt.taps
    b = np.array([0.25, 0.5, 0.25])
    g = np.stack([np.convolve(h[:, p], b) for p in range(h.shape[1])], axis=1)
    k = np.arange(g.shape[0]) - flt.lead - 1
    inner = np.abs(k) <= near
    return (float(np.abs(g[inner]).sum(axis=0).max()), float(np.abs(g[~inner]).sum(axis=0).max()),
            float(np.abs(h).sum(axis=0).max()))


def _group_max(a: np.ndarray, group: int, scratch=None) -> np.ndarray:
    """Maximum over consecutive runs of ``group`` (a power of two) columns of a 2-D
    array, by pairwise halving (numpy reduces short rows slowly); ``scratch``: two
    arrays of at least half ``a``'s columns to work in."""
    if scratch is None:
        scratch = (np.empty((a.shape[0], a.shape[1] // 2), a.dtype),) * 2
    m, k = a, 0
    while group > 1:
        n = m.shape[1] // 2
        out = scratch[k][:, :n]
        np.maximum(m[:, 0::2], m[:, 1::2], out=out)
        m, k = out, 1 - k
        group //= 2
    return m.copy()


def _near_max(ax: np.ndarray, gm: np.ndarray, group: int, near: int, n: int, first: int) -> np.ndarray:
    """``out[:, g]`` = max of ``ax`` over the columns ``near`` before group ``first + g`` to
    ``near`` after it (g < n): the group's own maximum ``gm``, the last ``near`` columns of
    the group before and the first ``near`` of the group after."""
    a3 = ax[:, (first - 1) * group:(first + n + 1) * group].reshape(ax.shape[0], n + 2, group)
    out = gm[:, first:first + n].copy()
    for j in range(near):
        np.maximum(out, a3[:, :n, group - 1 - j], out=out)
        np.maximum(out, a3[:, 2:, j], out=out)
    return out


def _window_max(a: np.ndarray, lo: int, hi: int, n: int, first: int) -> np.ndarray:
    """``out[:, g] = max(a[:, first + g + lo .. first + g + hi])`` for g < n (last axis)."""
    out = a[:, first + lo:first + lo + n].copy()
    for j in range(lo + 1, hi + 1):
        np.maximum(out, a[:, first + j:first + j + n], out=out)
    return out


class TruePeakMeter:
    """Streaming true-peak meter for ``channels`` channels.

    ``factor`` is the scan factor (:func:`choose_factor`; at least 4 and a
    divisor of ``READ_FACTOR`` for the kaiser design); the peaks are read on the
    ``READ_FACTOR`` grid (``self.factor``).  ``design="annex2"`` reads on the
    Annex 2 filter's own 4x grid.

    ``process(block)`` takes float arrays of shape (frames, channels) in order.
    After :meth:`flush` (or at any time for the frames evaluated so far):

    - ``peak_linear``: per-channel maximum of ``|x|`` over every instant of the
      reading grid (phase 0 included, so never below the sample peak), shape (C,);
    - ``sample_peak_linear``: per-channel maximum of ``|x|`` over the input samples
      received (evaluated, with ``float32_exact``), float64, exact, shape (C,);
    - ``envelope_linear``: with ``bucket_frames``, the maximum over channels and
      instants in each bucket of that many frames (``buckets`` of them; frames
      past the last bucket count in it);
    - ``frames_done``: input frames evaluated so far;
    - ``scanned_frames``, ``refined_frames``: channel-frames whose scan phases,
      and whose other phases, were evaluated (cost figures).

    ``on_frames(start_frame, frame_peak)`` is called, when given, with the
    per-frame maximum over channels and instants (float32 array) for every run
    of evaluated frames, in order.  Frame ``i`` covers the instants ``[i, i+1)``.
    A frame's value is exact wherever it can reach ``ceiling_linear`` (when
    given) or its bucket's maximum; elsewhere it is a lower bound below both:
    the scan's value (the largest ``|x|`` over the sample and the scan phases)
    where the frame was scanned, the sample's ``|x|`` where the pre-screen
    ruled the frame out.  Without ``ceiling_linear`` and ``bucket_frames``
    every frame value passed to ``on_frames`` is exact.

    ``on_channel_frames(start_frame, channel_peak)``, when given, is called
    likewise with the per-channel values, a (channels, frames) float32 array
    whose maximum over channels is ``frame_peak``; a channel's value is exact
    wherever that channel can reach ``ceiling_linear``, so overs can be
    attributed to the channels that hold them.  The arrays passed to both
    callbacks are valid during the call only (copy them to keep them).

    Evaluation, in three steps per run of ``RUN_FRAMES`` frames at fixed
    positions in the file (so that no result depends on the block size):

    1. Pre-screen (analytic bound), per group of ``GROUP`` frames and channel.
       With ``b = [1, 2, 1]/4`` and ``x_h = x - b*x`` (``x_h[j] = (2 x[j] -
       x[j-1] - x[j+1])/4``), each phase is ``h_p*x = (h_p*b)*x + h_p*x_h``,
       so every value in the group is at most ``A_near * max|x|`` within
       ``NEAR`` samples of the group, plus
       ``A_far * max|x|`` and ``C_h * max|x_h|`` over the filter's span
       (:func:`local_bound_constants`; 1.053, 0.008 and 3.65 for the default
       filter: ``h_p*b`` is a short, nearly positive kernel, since ``b``
       removes the band near fs/2 where the long filter rings), plus
       ``BOUND_ROUNDING * max|x|`` for float32 rounding.  Group maxima are
       taken over whole groups, so the windows only widen.  A group whose
       bound is below the floor (the smallest of the channel's peak so far,
       the ceiling and a lower bound of its bucket's maximum, all from values
       already known) cannot change the peak, hold an over or be its bucket's
       maximum; its frames keep ``|x|``.
    2. Scan: the scan phases of the reading filter, evaluated directly (one
       matrix product per batch of groups) in the groups the pre-screen kept.
    3. Fine read of the other phases where the scan cannot rule out the floor
       (the bound ``scan_threshold``, module docstring), as before.
    """

    #: frames per group of the pre-screen and of the scan's matrix product
    GROUP = 32
    #: frames per run by default (a multiple of GROUP; runs sit at fixed positions); a meter may
    #: be given another (``run_frames``): results equal a full evaluation whatever the run length
    RUN_FRAMES = 131072
    #: samples either side counted in the pre-screen's near term
    NEAR = 4
    #: relative allowance for float32 rounding in the pre-screen bound (house
    #: choice: a 192-term float32 dot product is within 192 * 2**-24 * 3.65 =
    #: 4.2e-5 of max|x|; twice that, rounded up)
    BOUND_ROUNDING = 1e-4
    #: candidate frames in a group from which the fine read takes the whole group at once
    #: (house choice: a whole group costs about as much as 11 single frames, measured)
    DENSE_FRAMES = 12
    #: groups per scan matrix product, frames per fine-read matrix product
    SCAN_CHUNK = 1024
    REFINE_CHUNK = 4096

    def __init__(self, sample_rate_hz: float, channels: int, factor: int = 4,
                 design: str = "kaiser", on_frames=None, ceiling_linear: float | None = None,
                 bucket_frames: int | None = None, buckets: int = 1, on_channel_frames=None,
                 float32_exact: bool = False, run_frames: int | None = None):
        self.sample_rate_hz = float(sample_rate_hz)
        self.channels = int(channels)
        if run_frames is not None:
            if run_frames < self.GROUP or run_frames % self.GROUP:
                raise ValueError(f"run_frames {run_frames}: a positive multiple of {self.GROUP}")
            self.RUN_FRAMES = int(run_frames)       # this meter's runs (the class default otherwise)
        #: the caller promises every sample is a float32 value (PCM up to 24 bits, 32-bit
        #: float): the sample peak is then taken from the float32 buffer, still exact
        self.float32_exact = bool(float32_exact)
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
        T, G = self.filter.taps_per_phase, self.GROUP
        lead = self.filter.lead
        self._T, self._lead, self._G = T, lead, G
        self._a_near, self._a_far, self._c_h = local_bound_constants(self.filter, self.NEAR)
        # group windows, in groups relative to a frame's own group: the far span of
        # h_p*b (offsets -lead-1 .. T-lead) and the span of h_p (offsets -lead .. T-1-lead)
        self._far = ((-lead - 1) // G, (G - 1 + T - lead) // G)
        self._hspan = (-lead // G, (G + T - 2 - lead) // G)
        self._pre_groups = 1 - self._far[0]                # x_h needs one sample before its groups
        self._post_groups = max(self._far[1], self._hspan[1] + 1)
        self._pre = self._pre_groups * G
        # scan phases as one matrix per group: row = inputs from frame gs - lead to
        # gs + G - 1 + T - 1 - lead; column q*G + b = scan phase q of frame gs + b
        self._wscan = _group_matrix(self.filter.taps, scan_phases, G)
        self._nscan = len(scan_phases)
        # the fine phases likewise, for groups where many frames need them
        self._wfine = _group_matrix(self.filter.taps, fine_phases, G)
        self._nfine = len(fine_phases)
        self._fine = np.ascontiguousarray(self.filter.taps[:, fine_phases], dtype=np.float32)
        self._on_frames = on_frames
        self._on_channel_frames = on_channel_frames
        self.ceiling_linear = None if ceiling_linear is None else float(ceiling_linear)
        self.bucket_frames = None if bucket_frames is None else max(1, int(bucket_frames))
        self.envelope_linear = np.zeros(max(1, int(buckets)) if bucket_frames else 0)
        self.peak_linear = np.zeros(self.channels)
        #: per-channel max |x| of the samples received so far (float64, exact)
        self.sample_peak_linear = np.zeros(self.channels)
        self.frames_done = 0
        self.scanned_frames = 0
        self.refined_frames = 0
        self._received = 0
        self._flushed = False
        # planar float32 buffer: input from frame (frames_done - pre) onwards,
        # the first ``_fill`` columns valid; the signal is zero before the file
        self._cap = self.RUN_FRAMES + self._pre + (self._post_groups + 1) * G
        self._buf = np.zeros((self.channels, self._cap), dtype=np.float32)
        self._fill = self._pre
        self._alloc_work()

    def _alloc_work(self) -> None:
        # |x| (then the frame values), 4*|x_h|, two halving scratch arrays, first differences
        C, cap = self.channels, self._cap
        self._work = (np.empty((C, cap), np.float32), np.empty((C, cap), np.float32),
                      np.empty((C, cap // 2), np.float32), np.empty((C, cap // 2), np.float32),
                      np.empty((C, cap), np.float32))

    def process(self, block) -> None:
        """Feed a (frames, channels) block."""
        block = np.asarray(block)
        if block.ndim == 1:
            block = block[:, None]
        self._check_block(block.shape[1])
        if block.shape[0] == 0:
            return
        if not self.float32_exact:
            np.maximum(self.sample_peak_linear, column_abs_max(block), out=self.sample_peak_linear)
        self._take(block.T)

    def process_planar(self, rows) -> None:
        """Feed a (channels, frames) block, one row per channel (the engine's planar blocks):
        the same values as :meth:`process` of its transpose, copied row by row into the
        float32 buffer (contiguous reads instead of strided ones)."""
        rows = np.asarray(rows)
        if rows.ndim == 1:
            rows = rows[None, :]
        self._check_block(rows.shape[0])
        if rows.shape[1] == 0:
            return
        if not self.float32_exact:      # max |x| per row: exact, so the same values as column_abs_max
            hi = np.maximum(rows.max(axis=1), -rows.min(axis=1)).astype(np.float64)
            np.maximum(self.sample_peak_linear, hi, out=self.sample_peak_linear)
        self._take(rows)

    def _check_block(self, channels: int) -> None:
        """Refuse a block after :meth:`flush`, or one with another channel count than the meter's."""
        if self._flushed:
            raise RuntimeError("TruePeakMeter.process after flush")
        if channels != self.channels:
            raise ValueError(f"block has {channels} channels, meter expects {self.channels}")

    def _take(self, rows) -> None:
        """Append ``rows`` (channels, frames), any memory layout, and evaluate every whole run."""
        n = rows.shape[1]
        self._received += n
        need = self.RUN_FRAMES + self._pre + self._post_groups * self._G
        done = 0
        while done < n:
            take = min(n - done, self._cap - self._fill)
            self._buf[:, self._fill:self._fill + take] = rows[:, done:done + take]   # to float32, rounded
            self._fill += take
            done += take
            with single_thread_blas():
                while self._fill >= need:
                    self._evaluate(self.RUN_FRAMES, self.RUN_FRAMES)
                    self._shift(self.RUN_FRAMES)

    def _shift(self, m: int) -> None:
        keep = self._fill - m
        self._buf[:, :keep] = self._buf[:, m:self._fill]
        self._fill = keep

    def flush(self) -> None:
        """Evaluate the remaining frames (the signal is zero after the end)."""
        if self._flushed:
            return
        G = self._G
        with single_thread_blas():
            while self._received > self.frames_done:
                m = min(self._received - self.frames_done, self.RUN_FRAMES)
                span = -(-m // G) * G
                need = self._pre + span + self._post_groups * G
                if need > self._cap:
                    grown = np.zeros((self.channels, need), dtype=np.float32)
                    grown[:, :self._fill] = self._buf[:, :self._fill]
                    self._buf, self._cap = grown, need
                    self._alloc_work()
                self._buf[:, self._fill:need] = 0.0
                self._fill = max(self._fill, need)
                self._evaluate(span, m)
                self._shift(m)
                self._buf[:, self._fill:] = 0.0
        np.maximum(self.peak_linear, self.sample_peak_linear, out=self.peak_linear)
        self._flushed = True
        self._buf = np.zeros((self.channels, 0), dtype=np.float32)

    # -- floors ------------------------------------------------------------------
    def _buckets_of(self, start: int, m: int):
        """(first bucket, per-frame cut offsets) of the run."""
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

    def _levels(self, start: int, m: int, known_of):
        """Pieces of the run (cut offsets, one level each) below which a frame's
        exact value is not needed; ``known_of(b0, cuts)`` gives a lower bound of
        each piece's bucket maximum from the run."""
        if self.bucket_frames is not None:
            b0, cuts = self._buckets_of(start, m)
            known = np.maximum(self.envelope_linear[b0:b0 + cuts.shape[0]], known_of(cuts))
            levels = known if self.ceiling_linear is None else np.minimum(known, self.ceiling_linear)
        elif self.ceiling_linear is not None:
            cuts, levels = np.array([0]), np.array([self.ceiling_linear])
        elif self._on_frames is not None or self._on_channel_frames is not None:
            cuts, levels = np.array([0]), np.array([0.0])
        else:
            cuts, levels = np.array([0]), np.array([np.inf])
        return cuts, levels

    def _group_floor(self, cuts, levels, ng: int, m: int) -> np.ndarray:
        """Lowest level of the pieces each group of the run overlaps."""
        G = self._G
        if cuts.shape[0] > 1 and self.bucket_frames < G:      # many pieces per group: per frame
            per_frame = np.full(ng * G, levels[-1])
            per_frame[:m] = np.repeat(levels, np.diff(np.append(cuts, m)))
            return per_frame.reshape(ng, G).min(axis=1)
        gstart = np.arange(ng) * G
        p_first = np.searchsorted(cuts, gstart, side="right") - 1
        p_last = np.searchsorted(cuts, gstart + G - 1, side="right") - 1
        return np.minimum(levels[p_first], levels[p_last])

    # -- evaluation ----------------------------------------------------------------
    def _group_stats(self, L: int, ng: int):
        """The pre-screen's statistics of the buffer's first ``L`` columns (whole groups), with
        ``|x|`` written into ``self._work[0]``: per channel and group the maximum of ``|x|``
        (``gm``), of ``4*|x_h|`` (``gh``, the second difference) and, for the ``ng`` groups from
        ``pre``, of ``|x|`` within ``NEAR`` columns of the group (``m_near``).  The compiled kernel
        (:func:`prescreen_kernel`) and numpy give the same values (exact maxima of the same float32
        numbers); numpy's path also takes blocks holding a non-finite sample."""
        G, C = self._G, self.channels
        a = self._pre_groups
        xb = self._buf[:, :L]
        ax = self._work[0][:, :L]
        kernel = prescreen_kernel()
        if kernel is not None:
            gm, gh, nr = stats = np.empty((3, C, L // G), np.float32)
            if kernel(self._buf, self._work[0], gm, gh, nr, C, self._buf.shape[1], L, G, self.NEAR):
                return gm, gh, nr[:, a:a + ng]
        np.abs(xb, out=ax)
        scratch = (self._work[2], self._work[3])
        gm = _group_max(ax, G, scratch)                               # per group max|x|
        diff, dpad = self._work[4][:, :L], self._work[1][:, :L]
        np.subtract(xb[:, 1:], xb[:, :-1], out=diff[:, 1:])             # x[j] - x[j-1] at column j
        np.subtract(diff[:, 2:], diff[:, 1:-1], out=dpad[:, 1:-1])       # -4*x_h at columns 1 .. L-2
        dpad[:, 0] = 0.0
        dpad[:, -1] = 0.0                                               # (never read: past the spans)
        np.abs(dpad, out=dpad)
        gh = _group_max(dpad, G, scratch)
        return gm, gh, _near_max(ax, gm, G, self.NEAR, ng, a)

    def _evaluate(self, span: int, m: int) -> None:
        """Evaluate ``m`` frames (``span`` = m rounded up to whole groups) from
        buffer column ``pre``."""
        G, T, lead, C, pre = self._G, self._T, self._lead, self.channels, self._pre
        ng = span // G
        start = self.frames_done
        L = pre + span + self._post_groups * G
        ax = self._work[0][:, :L]
        a = self._pre_groups
        gm, gh, m_near = self._group_stats(L, ng)
        m_far = _window_max(gm, self._far[0], self._far[1], ng, a)
        h_far = _window_max(gh, self._hspan[0], self._hspan[1], ng, a)
        bound = (self._a_near * m_near.astype(np.float64) + (self._a_far + self.BOUND_ROUNDING) * m_far
                 + (0.25 * self._c_h) * h_far) * (1.0 + self.BOUND_ROUNDING)
        vals = ax[:, pre:pre + span]                                  # frame values, |x| so far (in place)
        own = gm[:, a:a + ng]
        if m < span:
            vals[:, m:] = 0.0
        # floors from what is known before the scan: samples and earlier runs

        def known_samples(cuts):
            # groups lying wholly in a piece, and inside the file
            gmax = own.max(axis=0) if C > 1 else own[0]
            gfirst = -(-cuts // G)
            gend = np.append(cuts[1:], m) // G
            out = np.zeros(cuts.shape[0])
            whole = np.flatnonzero(gend > gfirst)
            if whole.size:        # max over [gfirst, gend) of each such piece: every other segment
                bounds = np.stack([gfirst[whole], gend[whole]], axis=1).ravel()
                ext = np.append(gmax, gmax[:1])       # gend may be the run's last group + 1
                out[whole] = np.maximum.reduceat(ext, bounds)[0::2]
            return out

        cuts, levels = self._levels(start, m, known_samples)
        gfloor = self._group_floor(cuts, levels, ng, m)
        run_peak = own.max(axis=1)                                     # frames past the end are zero
        if self.float32_exact:
            np.maximum(self.sample_peak_linear, run_peak, out=self.sample_peak_linear)
        peak1 = np.maximum(self.peak_linear, run_peak)
        scanned = [None] * C
        for c in range(C):
            cand = np.flatnonzero((bound[c] >= np.minimum(gfloor, peak1[c])) & (bound[c] > 0))
            if not cand.size:
                continue
            scanned[c] = cand
            self.scanned_frames += int(cand.size) * G
            s = self._buf[c]
            rows_all = as_strided(s[pre - lead:], shape=(ng, G + T - 1), strides=(G * s.itemsize, s.itemsize))
            vc = vals[c].reshape(ng, G)
            for idx, sv in _group_maxima(rows_all, cand, self._wscan, self._nscan, G, self.SCAN_CHUNK):
                vc[idx] = np.maximum(vc[idx], sv)
        if m < span:
            vals[:, m:] = 0.0
        fp = vals[0].copy()
        for c in range(1, C):
            np.maximum(fp, vals[c], out=fp)
        if self._fine.shape[1]:
            self._refine(vals, fp, ax, own, scanned, start, m, ng)
        self._bucket_update(start, fp[:m])
        for c in range(C):             # the frame values exceed |x| only in the scanned groups
            top = float(run_peak[c])
            if scanned[c] is not None:
                top = max(top, float(vals[c].reshape(ng, G)[scanned[c]].max()))
            self.peak_linear[c] = max(float(self.peak_linear[c]), top)
        self.frames_done += m
        if self._on_frames is not None:
            self._on_frames(start, fp[:m])
        if self._on_channel_frames is not None:
            self._on_channel_frames(start, vals[:, :m])

    def _refine(self, vals, fp, ax, own, scanned, start: int, m: int, ng: int) -> None:
        """Read the fine phases, in place, in the frames where the scan cannot rule
        out a value at or above the channel's peak, the ceiling or the bucket's
        maximum (only in scanned groups: the pre-screen ruled the others out
        against a floor no higher than this one)."""
        G, T, lead, C, pre = self._G, self._T, self._lead, self.channels, self._pre
        thr = self.threshold
        cuts, levels = self._levels(start, m, lambda cuts: np.maximum.reduceat(fp[:m], cuts))
        gfloor = self._group_floor(cuts, levels, ng, m)
        lane = np.arange(G)
        for c in range(C):
            groups = scanned[c]
            if groups is None:
                continue
            gv = vals[c].reshape(ng, G)[groups]
            gmax = np.maximum(gv.max(axis=1), np.abs(self._buf[c, pre + (groups + 1) * G]))  # + the sample after
            peak_c = max(float(self.peak_linear[c]), float(gmax.max()), float(own[c].max()))
            keep = (gmax >= thr * np.minimum(gfloor[groups], peak_c)) & (gmax > 0)
            groups = groups[keep]
            if not groups.size:
                continue
            frames = (groups[:, None] * G + lane[None, :]).ravel()
            ext = np.maximum(gv[keep].ravel(), np.abs(self._buf[c, pre + 1 + frames]))   # + the next sample
            ok = frames < m
            frames, ext = frames[ok], ext[ok]
            piece = np.searchsorted(cuts, frames, side="right") - 1
            cand = frames[(ext >= thr * np.minimum(levels[piece], peak_c)) & (ext > 0)]
            if not cand.size:
                continue
            s = self._buf[c]
            gid = cand // G
            ug, counts = np.unique(gid, return_counts=True)
            dense = ug[counts >= self.DENSE_FRAMES]
            if dense.size:                        # whole groups: one matrix product per batch of groups
                rows_all = as_strided(s[pre - lead:], shape=(ng, G + T - 1), strides=(G * s.itemsize, s.itemsize))
                vc, fc = vals[c].reshape(ng, G), fp.reshape(ng, G)
                for idx, v in _group_maxima(rows_all, dense, self._wfine, self._nfine, G, self.SCAN_CHUNK):
                    vc[idx] = np.maximum(vc[idx], v)
                    fc[idx] = np.maximum(fc[idx], v)
                self.refined_frames += int(dense.size) * G
                is_dense = np.zeros(ng, dtype=bool)
                is_dense[dense] = True
                cand = cand[~is_dense[gid]]
                if m < ng * G:
                    vals[c, m:] = 0.0
                    fp[m:] = 0.0
                if not cand.size:
                    continue
            self.refined_frames += int(cand.size)
            windows = as_strided(s[pre - lead:], shape=(ng * G, T), strides=(s.itemsize, s.itemsize))
            for j in range(0, cand.size, self.REFINE_CHUNK):
                idx = cand[j:j + self.REFINE_CHUNK]
                rows = windows[idx] if idx.size > 1 else windows[np.repeat(idx, 2)]
                v = np.abs(rows @ self._fine).max(axis=1)[:idx.size]
                vals[c, idx] = np.maximum(vals[c, idx], v)
                fp[idx] = np.maximum(fp[idx], v)


def _group_matrix(taps: np.ndarray, phases, group: int) -> np.ndarray:
    """The listed phases of a polyphase filter as one float32 matrix for a group of frames:
    row r = input sample (first frame of the group - lead + r), column q*group + b = phase
    ``phases[q]`` of frame b of the group.  ``taps`` is (taps per phase, factor).  Read-only,
    built once per process for each filter, phase list and group size."""
    return _group_matrix_cached(taps.tobytes(), taps.shape, tuple(int(p) for p in phases), int(group))


@lru_cache(maxsize=16)
def _group_matrix_cached(taps_bytes: bytes, shape: tuple, phases: tuple, group: int) -> np.ndarray:
    taps = np.frombuffer(taps_bytes, dtype=np.float64).reshape(shape)
    T = shape[0]
    w = np.zeros((group + T - 1, len(phases) * group))
    b = np.arange(group)
    t = np.arange(T)
    for q, ph in enumerate(phases):          # w[b + t, q*group + b] = taps[t, ph] for every b and t
        w[b[:, None] + t[None, :], q * group + b[:, None]] = taps[None, :, ph]
    w = w.astype(np.float32)
    w.flags.writeable = False
    return w


def _group_maxima(rows_all: np.ndarray, groups: np.ndarray, w: np.ndarray, phases: int, group: int,
                  chunk: int):
    """Per listed group, per frame, the maximum of ``|y|`` over the phases of ``w`` (a
    :func:`_group_matrix`), ``chunk`` groups per matrix product: yields (groups, maxima)."""
    for j in range(0, groups.size, chunk):
        idx = groups[j:j + chunk]
        rows = rows_all[idx] if idx.size > 1 else rows_all[np.repeat(idx, 2)]
        y = rows @ w
        np.abs(y, out=y)
        yield idx, y.reshape(y.shape[0], phases, group).max(axis=1)[:idx.size]


#: rows folded into one wide row by :func:`column_abs_max`
_FOLD_ROWS = 256


def column_abs_max(block: np.ndarray) -> np.ndarray:
    """Per-channel ``max(|x|)`` of a (frames, channels) block, in float64 (exact).

    Same values as ``np.abs(block).max(axis=0)``, computed on the block folded
    into rows of ``256 * channels`` values: numpy reduces a narrow (n, 2) array
    along axis 0 about 40x slower than a wide one (measured, numpy 2.4).
    """
    n, c = block.shape
    q = n - n % _FOLD_ROWS
    out = np.zeros(c)
    if q:
        wide = block[:q].reshape(-1, _FOLD_ROWS * c)
        hi = np.maximum(wide.max(axis=0), -wide.min(axis=0))
        out = hi.reshape(_FOLD_ROWS, c).max(axis=0).astype(np.float64)
    if q < n:
        out = np.maximum(out, np.abs(block[q:]).max(axis=0))
    return out


def true_peak_linear(x, sample_rate_hz: float, factor: int = 4, design: str = "kaiser") -> np.ndarray:
    """Per-channel true peak (linear) of a whole array (frames, channels) or (frames,)."""
    x = np.asarray(x, dtype=np.float64)
    if x.ndim == 1:
        x = x[:, None]
    meter = TruePeakMeter(sample_rate_hz, x.shape[1], factor, design)
    meter.process(x)
    meter.flush()
    return meter.peak_linear.copy()
