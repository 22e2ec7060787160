"""Small, exact filter and window designs for the measurement path (numpy only).

The measurement needs three textbook designs; importing :mod:`scipy.signal` for them
costs more start-up time than a short file takes to measure, so they are written out
here, each from its published formula, step for step as the general-purpose
implementations compute it (so the coefficients agree with :mod:`scipy.signal` to the
last bit or within a few units in the last place; the tests compare them):

* :func:`blackman_harris`: the 4-term Blackman-Harris window (F. J. Harris, "On the use
  of windows for harmonic analysis with the discrete Fourier transform", Proc. IEEE 66
  (1978), table and eq. (33)): ``w[n] = sum_k (-1)**k a_k cos(2 pi k n / (N - 1))``,
  written as ``sum_k a_k cos(k t)`` with ``t`` from ``-pi`` to ``pi``.
* :func:`kaiser_window` and :func:`kaiser_lowpass_fir`: the window-method low-pass FIR
  ``h[m] = (2 fc / fs) sinc(2 fc m / fs) w[m]``, ``m = n - (N - 1) / 2``, with the Kaiser
  window ``w[n] = I0(beta sqrt(1 - (2n/(N-1) - 1)**2)) / I0(beta)`` (J. F. Kaiser,
  "Nonrecursive digital filter design using the I0-sinh window function", Proc. IEEE
  ISCAS 1974), scaled to a DC gain of exactly 1.
* :func:`butterworth_lowpass_sos`: the order-N Butterworth analogue low-pass (poles
  ``-exp(i pi m / 2N)``, ``m = -N+1, -N+3, ..., N-1``), its corner pre-warped
  (``wa = 4 tan(pi fc / fs)`` on the frequency axis normalised to ``fs = 2``), the
  bilinear transform ``z = (4 + s) / (4 - s)`` with the N zeros at ``z = -1``, and
  second-order sections ``[g, 2g, g, 1, -2 Re p, |p|**2]`` of conjugate pole pairs,
  the pair nearest the unit circle last and the overall gain in the first section.

All functions are pure; frequencies in Hz.
"""

from __future__ import annotations

import math

import numpy as np

#: Blackman-Harris 4-term coefficients (minimum 4-term, side lobes -92 dB), Harris (1978)
BLACKMAN_HARRIS_COEFFS = (0.35875, 0.48829, 0.14128, 0.01168)


def blackman_harris(n: int) -> np.ndarray:
    """Symmetric 4-term Blackman-Harris window of ``n`` points (float64)."""
    n = int(n)
    if n < 0:
        raise ValueError(f"window length must be >= 0, got {n}")
    if n <= 1:
        return np.ones(n)
    t = np.linspace(-np.pi, np.pi, n)
    w = np.zeros(n)
    for k, a in enumerate(BLACKMAN_HARRIS_COEFFS):
        w += a * np.cos(k * t)
    return w


def kaiser_window(n: int, beta: float) -> np.ndarray:
    """Symmetric Kaiser window of ``n`` points with shape parameter ``beta``."""
    from masterqc.measure.npkernels import bessel_i0 as i0   # scipy.special.i0's bits, without SciPy

    n = int(n)
    if n < 0:
        raise ValueError(f"window length must be >= 0, got {n}")
    if n <= 1:
        return np.ones(n)
    k = np.arange(0, n, dtype=np.float64)
    alpha = (n - 1) / 2.0
    return i0(beta * np.sqrt(1 - ((k - alpha) / alpha) ** 2.0)) / i0(np.asarray(beta, dtype=np.float64))


def kaiser_lowpass_fir(numtaps: int, cutoff_hz: float, fs_hz: float, beta: float) -> np.ndarray:
    """Linear-phase low-pass FIR of ``numtaps`` taps, cut-off ``cutoff_hz`` (-6 dB point),
    Kaiser window ``beta``, DC gain 1 (the window method; see the module docstring)."""
    numtaps = int(numtaps)
    if numtaps < 1:
        raise ValueError(f"numtaps must be >= 1, got {numtaps}")
    c = float(cutoff_hz) / (0.5 * float(fs_hz))          # fraction of the Nyquist frequency
    if not 0.0 < c < 1.0:
        raise ValueError(f"cut-off {cutoff_hz!r} Hz must lie strictly between 0 and fs/2 = {fs_hz / 2!r} Hz")
    m = np.arange(0, numtaps, dtype=np.float64) - 0.5 * (numtaps - 1)
    h = c * np.sinc(c * m)
    h *= kaiser_window(numtaps, beta)
    h /= np.sum(h)                                          # DC gain 1
    return h


def _conjugate_pairs(p: np.ndarray) -> np.ndarray:
    """The upper-half-plane member of each conjugate pair, as the mean of the pair
    (``(p + conj(p'))/2``), sorted by real part; ``p`` holds only complex pairs."""
    pos = np.sort_complex(p[p.imag > 0])
    neg = np.sort_complex(p[p.imag < 0])
    # sort both halves alike so each positive member meets its conjugate
    pos = pos[np.lexsort((abs(pos.imag), pos.real))]
    neg = neg[np.lexsort((abs(neg.imag), neg.real))]
    return (pos + neg.conj()) / 2


def butterworth_lowpass_sos(order: int, edge_hz: float, fs_hz: float) -> np.ndarray:
    """Digital Butterworth low-pass of even ``order`` with its -3 dB point at ``edge_hz``,
    as second-order sections (``order // 2`` rows ``[b0, b1, b2, 1, a1, a2]``)."""
    order = int(order)
    if order < 2 or order % 2:
        raise ValueError(f"Butterworth order must be even and >= 2, got {order}")
    wn = float(edge_hz) / (float(fs_hz) / 2)
    if not 0.0 < wn < 1.0:
        raise ValueError(f"edge {edge_hz!r} Hz must lie strictly between 0 and fs/2 = {fs_hz / 2!r} Hz")
    # analogue prototype poles, the corner pre-warped on the axis normalised to fs = 2
    m = np.arange(-order + 1, order, 2, dtype=np.float64)
    p = -np.exp(1j * np.pi * m / (2 * order))
    fs2 = 4.0                                              # 2 * fs with fs = 2
    warped = float(2 * 2.0 * math.tan(math.pi * wn / 2.0))
    p = warped * p
    k = 1.0 * warped ** order
    # bilinear transform; the zeros at infinity go to z = -1
    pz = (fs2 + p) / (fs2 - p)
    k = k * np.real(np.prod(fs2 - np.array([], dtype=complex)) / np.prod(fs2 - p))
    pairs = _conjugate_pairs(pz)
    n_sections = order // 2
    sos = np.zeros((n_sections, 6))
    left = list(pairs)
    for si in range(n_sections - 1, -1, -1):             # nearest the unit circle goes last
        dist = np.abs(1 - np.abs(np.array(left)))
        q = left.pop(int(np.argmin(dist)))
        b = np.real(np.convolve([1.0, 1.0], [1.0, 1.0]))          # two zeros at z = -1
        a = np.real(np.convolve(np.array([1.0, -q]), np.array([1.0, -q.conjugate()])))
        sos[si] = np.concatenate((b, a))
    sos[0, :3] *= k
    return sos
