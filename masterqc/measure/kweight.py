"""K-weighting of ITU-R BS.1770-5 (Annex 1) for any sample rate from 8 kHz to 384 kHz.

Both stages are second-order sections obtained from an analogue prototype through
the bilinear transform with the centre frequency pre-warped
(``K = tan(pi * f0 / fs)``):

* stage 1, high shelf: ``H(s) = (Vh s^2 + Vb (w0/Q) s + w0^2) / (s^2 + (w0/Q) s + w0^2)``
  with ``Vh = 10**(gain_db / 20)`` (gain above the shelf) and ``Vb = Vh**SHELF_MID_EXPONENT``
  (gain at the centre);
* stage 2, high-pass: ``H(s) = G s^2 / (s^2 + (w0/Q) s + w0^2)``.

The prototype figures (f0, gain, Q, the mid-gain exponent) are the ones that
reproduce the 48 kHz coefficients printed in BS.1770-5, Annex 1, to about 1e-15.
The printed high-pass numerator is ``(1, -2, 1)`` without normalisation, which
gives the 48 kHz stage a pass-band gain of ``1 + K48/Q + K48**2`` (+0.0433 dB).
BS.1770 asks that other sample rates reproduce the *48 kHz frequency response*,
so ``G`` is that 48 kHz constant at every rate: the pass-band gain, and so the
reading of a 997 Hz tone, is the same at 44.1, 96 or 192 kHz as at 48 kHz.
(Designs that keep the numerator at ``(1, -2, 1)`` at every rate read a few
hundredths of a dB lower at high rates: -0.022 dB at 96 kHz.)

The shelf is still warped differently at each rate.  Largest difference from the
48 kHz response between 10 Hz and min(5 kHz, 0.4 fs), computed: 0.0015 dB at
44.1 kHz, 0.006 dB at 96 kHz, 0.008 dB at 384 kHz, 0.010 dB at 32 kHz, 0.031 dB at
22.05 kHz, 0.066 dB at 16 kHz and 0.29 dB at 8 kHz, where the shelf's 1.68 kHz
centre sits close to the Nyquist frequency.

All functions are pure.  Frequencies in Hz, gains in dB.
"""

from __future__ import annotations

import math

import numpy as np

#: stage 1 (high shelf) centre frequency, Hz
SHELF_F0_HZ = 1681.974450955533
#: stage 1 gain above the shelf, dB
SHELF_GAIN_DB = 3.999843853973347
#: stage 1 quality factor
SHELF_Q = 0.7071752369554196
#: ``Vb = Vh ** SHELF_MID_EXPONENT``: gain of the shelf at its centre frequency
SHELF_MID_EXPONENT = 0.4996667741545416
#: stage 2 (high-pass) corner frequency, Hz
HIGHPASS_F0_HZ = 38.13547087602444
#: stage 2 quality factor
HIGHPASS_Q = 0.5003270373238773
#: the reference rate whose coefficients BS.1770-5 prints
REFERENCE_RATE_HZ = 48000

MIN_RATE_HZ = 8000
MAX_RATE_HZ = 384000


def _check_rate(sample_rate_hz) -> float:
    fs = float(sample_rate_hz)
    if not (MIN_RATE_HZ <= fs <= MAX_RATE_HZ) or not math.isfinite(fs):
        raise ValueError(f"K-weighting is defined here for {MIN_RATE_HZ}..{MAX_RATE_HZ} Hz, "
                         f"got sample rate {sample_rate_hz!r}")
    return fs


def _highpass_denominator(fs: float) -> tuple[float, float, float]:
    """Return ``(a0, a1, a2)`` of the bilinear high-pass before normalisation by a0."""
    k = math.tan(math.pi * HIGHPASS_F0_HZ / fs)
    return 1.0 + k / HIGHPASS_Q + k * k, 2.0 * (k * k - 1.0), 1.0 - k / HIGHPASS_Q + k * k


#: stage 2 pass-band gain G (linear) of the 48 kHz table, kept at every rate
HIGHPASS_GAIN = _highpass_denominator(float(REFERENCE_RATE_HZ))[0]


def shelf_coefficients(sample_rate_hz) -> tuple[np.ndarray, np.ndarray]:
    """Stage 1 (high shelf) as ``(b, a)``, each of length 3, with ``a[0] == 1``."""
    fs = _check_rate(sample_rate_hz)
    k = math.tan(math.pi * SHELF_F0_HZ / fs)
    vh = 10.0 ** (SHELF_GAIN_DB / 20.0)
    vb = vh ** SHELF_MID_EXPONENT
    a0 = 1.0 + k / SHELF_Q + k * k
    b = np.array([(vh + vb * k / SHELF_Q + k * k) / a0,
                  2.0 * (k * k - vh) / a0,
                  (vh - vb * k / SHELF_Q + k * k) / a0])
    a = np.array([1.0, 2.0 * (k * k - 1.0) / a0, (1.0 - k / SHELF_Q + k * k) / a0])
    return b, a


def highpass_coefficients(sample_rate_hz) -> tuple[np.ndarray, np.ndarray]:
    """Stage 2 (high-pass) as ``(b, a)`` with ``a[0] == 1``; at 48 kHz ``b == (1, -2, 1)``."""
    fs = _check_rate(sample_rate_hz)
    a0, a1, a2 = _highpass_denominator(fs)
    g = HIGHPASS_GAIN / a0
    b = np.array([g, -2.0 * g, g])
    a = np.array([1.0, a1 / a0, a2 / a0])
    return b, a


def kweighting_sos(sample_rate_hz) -> np.ndarray:
    """K-weighting filter at ``sample_rate_hz`` as second-order sections, shape (2, 6).

    Rows are ``[b0, b1, b2, a0, a1, a2]`` (stage 1 shelf, stage 2 high-pass), ready for
    :func:`scipy.signal.sosfilt`.  Raises ValueError outside 8 kHz..384 kHz.
    """
    b1, a1 = shelf_coefficients(sample_rate_hz)
    b2, a2 = highpass_coefficients(sample_rate_hz)
    return np.array([np.concatenate([b1, a1]), np.concatenate([b2, a2])])


def kweighting_gain_db(frequency_hz, sample_rate_hz) -> np.ndarray:
    """Magnitude response of :func:`kweighting_sos` at ``frequency_hz`` (scalar or array), dB."""
    f = np.asarray(frequency_hz, dtype=float)
    z = np.exp(1j * 2.0 * np.pi * f / float(sample_rate_hz))
    h = np.ones_like(z)
    for row in kweighting_sos(sample_rate_hz):
        b, a = row[:3], row[3:]
        h = h * (b[0] + b[1] / z + b[2] / z ** 2) / (a[0] + a[1] / z + a[2] / z ** 2)
    return 20.0 * np.log10(np.abs(h))
