"""Alignment of a deliverable with its master: coarse from envelopes, fine from cross-spectra.

Stage 1 (coarse): the log-energy envelope of each file (channels summed,
low-passed at 5 kHz, one value per envelope hop of equal duration in both) is
cross-correlated over the whole programme, then in 4 s windows every 1 s
around that lag, giving a coarse offset track (resolution one envelope hop,
about 2.5-3.3 ms).

Stage 2 (fine, per analysis frame): generalised cross-correlation with phase
transform (GCC-PHAT) over the common band, all channel pairs summed in
magnitude (so polarity and channel order do not matter), peak found on a grid 4x
finer than the bins allow, then refined by Newton steps on the phase slope:
the offset to a small fraction of a sample.

Offsets are ``deliverable time - master time`` of the same content, in seconds.
"""

from __future__ import annotations

import numpy as np
from scipy import fft as sp_fft
from scipy import signal

from masterqc.measure.base import Analyzer, AnalyzerResult

#: low-pass of the envelopes (house choice: keeps the two files' envelopes alike whatever their bandwidth)
ENVELOPE_LOWPASS_HZ = 5000.0
#: coarse track: window and step (house choice)
TRACK_WINDOW_S = 4.0
TRACK_STEP_S = 1.0
TRACK_SEARCH_S = 1.0
#: fine stage: a frame's offset counts when its GCC-PHAT peak reaches this (house choice; the
#: peak of unrelated signals is about 4/sqrt(bins) -- 0.09 for 2000 bins -- well below)
FINE_MIN_PEAK = 0.25
#: lowest frequency used by the fine stage
FINE_LOW_HZ = 50.0
#: upsampling of the GCC grid
GCC_OVERSAMPLE = 4


class EnvelopeAnalyzer(Analyzer):
    """Log-energy envelope of the channel sum of squares, low-passed, one value per hop (frames of
    ``hop`` samples from the first sample).  Only used inside ``compare``; the array is returned
    under ``series["compare_envelope"]``."""

    name = "compare_envelope"
    hop = 0  # set by :func:`envelope_class`

    def __init__(self, info, options):
        super().__init__(info, options)
        fs = info.sample_rate_hz
        self.sos = signal.butter(4, min(ENVELOPE_LOWPASS_HZ, 0.45 * fs), fs=fs, output="sos")
        self.zi = np.zeros((self.sos.shape[0], info.channels, 2))
        self.carry = np.zeros(0)
        self.values: list[np.ndarray] = []

    def process(self, block) -> None:
        y, self.zi = signal.sosfilt(self.sos, block.T, axis=-1, zi=self.zi)
        p = np.einsum("cn,cn->n", y, y)
        if self.carry.size:
            p = np.concatenate([self.carry, p])
        k = p.size // self.hop
        if k:
            self.values.append(p[:k * self.hop].reshape(k, self.hop).mean(axis=1))
        self.carry = p[k * self.hop:]

    def finish(self) -> AnalyzerResult:
        env = np.concatenate(self.values) if self.values else np.zeros(0)
        return AnalyzerResult(series={"compare_envelope": env})


def envelope_class(hop: int):
    return type("EnvelopeAnalyzerHop", (EnvelopeAnalyzer,), {"hop": int(hop)})


#: the log envelopes are high-passed by subtracting this moving average (house choice), so fades and
#: slow level changes do not dominate the correlation
ENVELOPE_DETREND_S = 0.25


#: hops more than this far below the median envelope count as silent and are left out (house choice):
#: a stretch of digital silence would otherwise dominate the correlation of a steady programme
ENVELOPE_SILENT_DB = 40.0


def _log_env(env: np.ndarray, hop_s: float) -> np.ndarray:
    if env.size == 0:
        return env
    med = float(np.median(env))
    if med <= 0:
        med = float(np.mean(env)) or 1e-20
    silent = env < med * 10 ** (-ENVELOPE_SILENT_DB / 10)
    e = np.log10(np.maximum(env, med * 10 ** (-ENVELOPE_SILENT_DB / 10)))
    if (~silent).any():
        e[silent] = np.median(e[~silent])
    n = max(3, int(round(ENVELOPE_DETREND_S / hop_s)) | 1)
    if e.size > n:
        pad = np.pad(e, n // 2, mode="edge")
        e = e - np.convolve(pad, np.ones(n) / n, mode="valid")
    e[silent] = 0.0
    return e


def _xcorr(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, int]:
    """Cross-correlation c[lag] = sum_n a[n + lag] b[n] for every lag; returns (c, lag of c[0])."""
    n = a.size + b.size - 1
    nfft = 1 << (n - 1).bit_length()
    c = np.fft.irfft(np.fft.rfft(a, nfft) * np.conj(np.fft.rfft(b, nfft)), nfft)
    # lags -(b.size-1) .. a.size-1
    c = np.concatenate([c[nfft - (b.size - 1):], c[:a.size]])
    return c, -(b.size - 1)


def coarse_offset(env_m: np.ndarray, env_d: np.ndarray, hop_s: float):
    """Whole-programme offset (s) of the deliverable's envelope against the master's, and its peak
    normalised correlation; ``(None, 0.0)`` when either envelope is flat."""
    a = _log_env(env_d, hop_s)
    b = _log_env(env_m, hop_s)
    if a.size < 8 or b.size < 8:
        return None, 0.0
    a = a - a.mean()
    b = b - b.mean()
    na, nb = np.linalg.norm(a), np.linalg.norm(b)
    if na == 0 or nb == 0:
        return None, 0.0
    c, lag0 = _xcorr(a, b)
    # normalise by the overlap so short overlaps at extreme lags do not win
    lags = np.arange(c.size) + lag0
    overlap = np.minimum(a.size, lags + b.size) - np.maximum(0, lags)
    valid = overlap >= max(8, min(a.size, b.size) // 4)
    c = np.where(valid, c / (na * nb) * (min(a.size, b.size) / np.maximum(overlap, 1)), -np.inf)
    i = int(np.argmax(c))
    return float(lags[i] * hop_s), float(c[i])


def coarse_track(env_m: np.ndarray, env_d: np.ndarray, hop_s: float, global_s: float):
    """Coarse offset every :data:`TRACK_STEP_S` (times of window centres, offsets in s)."""
    a = _log_env(env_d, hop_s)
    b = _log_env(env_m, hop_s)
    win = int(round(TRACK_WINDOW_S / hop_s))
    step = int(round(TRACK_STEP_S / hop_s))
    search = int(round(TRACK_SEARCH_S / hop_s))
    g = int(round(global_s / hop_s))
    times, offsets = [], []
    prev = g
    for start in range(0, max(1, b.size - win + 1), step):
        seg = b[start:start + win]
        if seg.size < win // 2 or np.std(seg) < 1e-3:
            continue
        lo = start + g - search
        hi = start + g + search + seg.size
        ref = a[max(lo, 0):max(min(hi, a.size), 0)]
        if ref.size < seg.size:
            continue
        s = seg - seg.mean()
        # sliding normalised correlation of s over ref
        c = signal.correlate(ref - ref.mean(), s, mode="valid")
        energy = np.convolve((ref - ref.mean()) ** 2, np.ones(seg.size), mode="valid")
        c = c / (np.linalg.norm(s) * np.sqrt(np.maximum(energy, 1e-30)))
        i = int(np.argmax(c))
        lag = max(lo, 0) + i - start
        if c[i] < 0.3:
            lag = prev
        prev = lag
        times.append((start + win / 2) * hop_s)
        offsets.append(lag * hop_s)
    if not times:
        return np.array([0.0]), np.array([global_s])
    return np.array(times), np.array(offsets)


def track_at(times: np.ndarray, offsets: np.ndarray, t: float) -> float:
    """The coarse track's value nearest to time ``t`` (piecewise constant)."""
    i = int(np.clip(np.searchsorted(times, t), 0, times.size - 1))
    if i > 0 and abs(times[i - 1] - t) <= abs(times[i] - t):
        i -= 1
    return float(offsets[i])


class FineAligner:
    """GCC-PHAT of one pair of frame spectra over the common band.

    ``estimate(Xd, Xm)`` with Xd (K, Cd) and Xm (K, Cm) complex spectra on the
    same bins returns ``(delta_s, peak)``: the deliverable frame's content lies
    ``delta_s`` later in time than the master frame's (within +-T/4), and the
    normalised peak (1 for identical content).
    """

    def __init__(self, k_bins: int, frame_s: float, low_hz: float = FINE_LOW_HZ, high_fraction: float = 0.9):
        self.K = k_bins
        self.T = frame_s
        f = np.arange(k_bins) / frame_s
        self.f = f
        self.band = (f >= low_hz) & (f <= high_fraction * f[-1])
        self.L = GCC_OVERSAMPLE * 2 * k_bins

    def pair_spectra(self, Xd: np.ndarray, Xm: np.ndarray) -> np.ndarray:
        """PHAT-weighted conj cross-spectra D[k, i, j] for every channel pair, zero outside the band."""
        C = np.conj(Xd[:, :, None] * np.conj(Xm[:, None, :]))
        mag = np.abs(C)
        ok = (mag > 1e-30) & self.band[:, None, None]
        D = np.where(ok, C / np.where(ok, mag, 1.0), 0.0)
        return D, ok.sum(axis=0)

    def estimate(self, Xd: np.ndarray, Xm: np.ndarray):
        D, count = self.pair_spectra(Xd, Xm)
        cnt = np.maximum(count, 1).reshape(-1)
        Cd, Cm = D.shape[1], D.shape[2]
        flat = D.reshape(self.K, Cd * Cm)
        # coarse to fine: the whole search on the bins' own grid (one inverse transform of 2K points),
        # then the GCC_OVERSAMPLE-times finer grid only next to the coarse peak, summed directly
        L1 = 2 * self.K
        r1 = sp_fft.irfft(flat, L1, axis=0) * L1 / (2.0 * cnt)        # ~ Re sum D e^{+j2pi f tau}/cnt
        quarter = L1 // 4
        idx = np.r_[0:quarter, L1 - quarter:L1]
        n1 = int(idx[int(np.argmax(np.abs(r1[idx]).sum(axis=1)))])
        lag1 = n1 if n1 < L1 // 2 else n1 - L1
        G = self.L // L1
        cand = lag1 * G + np.arange(-G - 1, G + 2)                      # fine-grid lags, one spare each side
        e = np.exp(1j * 2 * np.pi * np.outer(cand * (self.T / self.L), self.f))
        r = (e @ flat).real / cnt                                        # (candidates, pairs)
        inner = np.abs(r[1:-1]).sum(axis=1)
        i = 1 + int(np.argmax(inner))
        pair_vals = r[i]
        peak = float(np.max(np.abs(pair_vals)))
        signs = np.sign(pair_vals)
        # parabolic refinement on the summed, sign-corrected score
        y0, y1, y2 = (float((r[j] * signs).sum()) for j in (i - 1, i, i + 1))
        den = y0 - 2 * y1 + y2
        frac = 0.5 * (y0 - y2) / den if den < 0 else 0.0
        lag = int(cand[i]) + float(np.clip(frac, -0.5, 0.5))
        tau = lag * self.T / self.L
        # Newton steps on J(tau) = sum_pairs sign * Re sum_k D e^{j 2 pi f tau}
        W = (D * signs.reshape(1, Cd, Cm)).sum(axis=(1, 2))
        w2 = 2 * np.pi * self.f
        for _ in range(3):
            e = W * np.exp(1j * w2 * tau)
            d1 = float(np.sum(-w2 * e.imag))
            d2 = float(np.sum(-(w2 ** 2) * e.real))
            if d2 >= 0:
                break
            step = -d1 / d2
            if abs(step) > self.T / self.L:
                step = np.sign(step) * self.T / self.L
            tau += step
        return tau, peak

    def refine(self, Xd: np.ndarray, Xm: np.ndarray, tau0: float):
        """Newton steps on the phase slope from ``tau0`` (no search): ``(delta_s, peak)`` as
        :meth:`estimate`, for a frame whose offset is close to a neighbour's (within a fraction of the
        period of the band's top frequency)."""
        D, count = self.pair_spectra(Xd, Xm)
        cnt = np.maximum(count, 1)
        w2 = 2 * np.pi * self.f
        e0 = np.exp(1j * w2 * tau0)[:, None, None]
        vals = (D * e0).real.sum(axis=0) / cnt
        signs = np.sign(vals)
        W = (D * signs[None]).sum(axis=(1, 2))
        tau = tau0
        limit = 0.25 / (self.f[self.band][-1] if self.band.any() else self.f[-1])
        for _ in range(3):
            e = W * np.exp(1j * w2 * tau)
            d1 = float(np.sum(-w2 * e.imag))
            d2 = float(np.sum(-(w2 ** 2) * e.real))
            if d2 >= 0:
                break
            step = float(np.clip(-d1 / d2, -limit, limit))
            tau += step
        vals = (D * np.exp(1j * w2 * tau)[:, None, None]).real.sum(axis=0) / cnt
        return tau, float(np.max(np.abs(vals)))

    def refine_many(self, Xd: np.ndarray, Xm: np.ndarray, tau0: np.ndarray):
        """:meth:`refine` of ``F`` frames at once: Xd (F, K, Cd), Xm (F, K, Cm), tau0 (F,) -> (taus (F,),
        peaks (F,)), the same steps frame by frame (a frame whose step turns uphill stops there)."""
        C = np.conj(Xd[:, :, :, None] * np.conj(Xm[:, :, None, :]))          # (F, K, Cd, Cm)
        mag = np.abs(C)
        ok = (mag > 1e-30) & self.band[None, :, None, None]
        D = np.where(ok, C / np.where(ok, mag, 1.0), 0.0)
        F = D.shape[0]
        D = D.reshape(F, self.K, -1)                                           # (F, K, P)
        cnt = np.maximum(ok.reshape(F, self.K, -1).sum(axis=1), 1)             # (F, P)
        w2 = 2 * np.pi * self.f
        tau = np.asarray(tau0, float).copy()

        def values(t):
            e = np.exp(1j * np.outer(t, w2))                                    # (F, K)
            return np.einsum("fkp,fk->fp", D, e).real / cnt

        signs = np.sign(values(tau))
        W = np.einsum("fkp,fp->fk", D, signs)
        limit = 0.25 / (self.f[self.band][-1] if self.band.any() else self.f[-1])
        going = np.ones(F, bool)
        for _ in range(3):
            e = W * np.exp(1j * np.outer(tau, w2))
            d1 = np.sum(-w2 * e.imag, axis=1)
            d2 = np.sum(-(w2 ** 2) * e.real, axis=1)
            going &= d2 < 0
            if not going.any():
                break
            step = np.clip(-d1 / np.where(going, d2, -1.0), -limit, limit)
            tau = np.where(going, tau + step, tau)
        return tau, np.max(np.abs(values(tau)), axis=1)

    def lag_values(self, Xd: np.ndarray, Xm: np.ndarray, taus) -> np.ndarray:
        """Sum over channel pairs of |plain cross-correlation| at each lag in ``taus`` (s); plain (energy
        weighted), so a frame holding two offsets shows each in proportion to its share."""
        C = np.conj(Xd[:, :, None] * np.conj(Xm[:, None, :])) * self.band[:, None, None]
        out = []
        for tau in taus:
            e = np.exp(1j * 2 * np.pi * self.f * tau)[:, None, None]
            out.append(float(np.abs((C * e).real.sum(axis=0)).sum()))
        return np.array(out)
