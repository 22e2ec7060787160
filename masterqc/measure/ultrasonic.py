"""Ultrasonic content of masters above 48 kHz (sampling integrity).

Fed frame by frame with the power spectra of :mod:`masterqc.measure.spectral`
(10 Hz bins, Hann, 50 % overlap); all sums are over channels.

- ``ultrasonic_energy_db``: energy from ``MeasureOptions.ultrasonic_from_hz``
  (default 20 kHz) up to Nyquist relative to the audible band (10 Hz up to
  that frequency), over the whole file, dB.  None for files at 48 kHz or
  below (:data:`MIN_RATE_HZ`), when Nyquist is at or below the threshold
  frequency, or when the audible band holds no energy.
- ``ultrasonic_energy_max_3s_db`` and ``ultrasonic_energy_max_3s_where_s``: the
  same ratio in the worst 3 s window (stepped by one hop, 50 ms), and where it is.
  Files longer than 15 s are analysed on 1 frame in 4, files longer
  than 60 s on 1 frame in 6 and files longer than 5 minutes on 1 in 12 (see
  :mod:`masterqc.measure.spectral`): 100 ms of every 200, 300 or 600 ms, so the 3 s
  figure is then an estimate from fifteen, ten or five frames, and a burst much shorter
  than that spacing may fall between them; the location is the window's, not the burst's.
- ``ultrasonic_tones``: stationary tones above the threshold frequency: a bin
  that is a local maximum and stands :data:`TONE_MIN_PROMINENCE_DB` above the
  median of its +-500 Hz neighbourhood in the LTAS *and* whose median level over
  time stands :data:`TONE_MIN_STATIONARY_DB` above its neighbourhood (present in
  at least half of the frames).  Level: the power of the +-3 bins of the
  Hann main lobe minus the neighbourhood floor, expressed as the peak level of
  a sine (``20*log10(amplitude)``, dBFS), per channel (the loudest channel is
  given).  Frequency: parabolic interpolation of the log power of the peak bin
  and its neighbours.
- ``ultrasonic_loudness_change_lu``: the change of the integrated loudness
  (ITU-R BS.1770-5 gating: 400 ms blocks, 100 ms step, -70 LUFS absolute and
  -10 LU relative gates) that removing everything above the threshold
  frequency would cause, computed in the same pass from the K-weighted power
  spectra (Parseval): each frame's K-weighted power with and without the bins
  above the threshold, channel-weighted by the BS.1770 weights, averaged over
  the frames inside each block.  Negative: the low-passed master is quieter.
"""

from __future__ import annotations

import math

import numpy as np
from masterqc.measure.npkernels import median_filter

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.levels import power_ratio_db
from masterqc.measure.base import NUMBER_OR_NULL, TIME_RANGES, array_of
from masterqc.measure.kweight import kweighting_gain_db

#: a tone stands this far above its neighbourhood in the LTAS, dB (own reasoning: a noise bin averaged over
#: five or more frames is a Gamma variable that exceeds 16x its mean with negligible probability)
TONE_MIN_PROMINENCE_DB = 12.0
#: and its median level over time this far above the neighbourhood's median, dB (own reasoning)
TONE_MIN_STATIONARY_DB = 10.0
#: neighbourhood width for the tone floor, Hz
TONE_NEIGHBOURHOOD_HZ = 1010.0
#: at most this many tones are listed (the loudest)
TONES_MAX = 20
#: ultrasonic content is assessed for files above this rate (hi-res masters); at 44.1 and 48 kHz the band
#: above 20 kHz is the converter's transition band, not content a master carries on purpose (own reasoning)
MIN_RATE_HZ = 48000
#: window of the worst-window measure, s
WINDOW_S = 3.0
#: BS.1770-5 gating figures
BLOCK_S = 0.4
STEP_S = 0.1
ABSOLUTE_GATE_LUFS = -70.0
RELATIVE_GATE_LU = -10.0

MEASUREMENT_SCHEMA = {
    "ultrasonic_energy_db": measured(NUMBER_OR_NULL, 'db',
        'energy from ultrasonic_from_hz to Nyquist relative to the audible band, whole file; null at 48 kHz and below'),
    "ultrasonic_energy_max_3s_db": measured(NUMBER_OR_NULL, 'db',
        'the same in the worst 3 s window'),
    "ultrasonic_energy_max_3s_where_s": measured(TIME_RANGES, 's',
        'time range of that worst window'),
    "ultrasonic_from_hz": measured(NUMBER_OR_NULL, 'hz',
        'lower edge of the ultrasonic band'),
    "ultrasonic_tones": measured(array_of({"type": "object", "required": ["frequency_hz", "level_dbfs"],
        "properties": {"frequency_hz": {"type": "number"},
        "level_dbfs": {"type": "number"},
        "channel": {"type": "integer"}}}), NO_UNIT,
        'stationary tones above the ultrasonic edge (frequency, peak level, channel)'),
    "ultrasonic_loudness_change_lu": measured(NUMBER_OR_NULL, 'lu',
        'change of integrated loudness that removing the ultrasonic band would cause'),
}



def gated_loudness(z_blocks: np.ndarray) -> float | None:
    """Integrated loudness (LUFS) of channel-weighted block powers with BS.1770-5 gating."""
    z = np.asarray(z_blocks, dtype=float)
    if z.size == 0:
        return None
    with np.errstate(divide="ignore"):
        lk = -0.691 + 10.0 * np.log10(np.maximum(z, 1e-300))
    keep = lk > ABSOLUTE_GATE_LUFS
    if not keep.any():
        return None
    rel = -0.691 + 10.0 * math.log10(z[keep].mean()) + RELATIVE_GATE_LU
    keep &= lk > rel
    if not keep.any():
        return None
    return -0.691 + 10.0 * math.log10(z[keep].mean())


class UltrasonicTracker:
    """Per-frame consumer of the spectral front end; see the module docstring."""

    def __init__(self, info, options):
        self.fs = float(info.sample_rate_hz)
        self.channels = int(info.channels)
        self.from_hz = float(getattr(options, "ultrasonic_from_hz", 20000.0))
        self.active = self.fs > MIN_RATE_HZ and self.fs / 2.0 > self.from_hz
        self.weights = np.asarray(info.channel_weights, dtype=float)
        # per analysed frame: audible, ultrasonic, K-weighted full and low-passed power, kept in
        # arrays grown geometrically (a few allocations per file instead of five small arrays per
        # block, which stay behind in the heap among the blocks' temporaries)
        self._cols = np.zeros((0, 4))
        self._pos = np.zeros(0, dtype=np.int64)
        self._n = 0
        self._k2 = None

    def _setup(self, bins):
        n = (bins - 1) * 2
        freqs = np.arange(bins) * self.fs / n
        kf = int(math.ceil(self.from_hz / (self.fs / n) - 1e-9))
        k2 = 10.0 ** (kweighting_gain_db(np.maximum(freqs, 1e-3), self.fs) / 10.0)
        k2[0] = 0.0
        # one projection per frame and channel: audible, ultrasonic, K-weighted full, K-weighted low-passed
        proj = np.zeros((bins, 4))
        proj[1:kf, 0] = 1.0
        proj[kf:, 1] = 1.0
        proj[:, 2] = k2
        proj[:kf, 3] = k2[:kf]
        self._proj = proj.astype(np.float32)
        self._k2 = k2

    def frames(self, power, index) -> None:
        """Consume power spectra of shape (frames, channels, bins) at frame positions ``index``."""
        if not self.active:
            return
        if self._k2 is None:
            self._setup(power.shape[-1])
        nfr, ch, nb = power.shape
        q = (power.reshape(nfr * ch, nb) @ self._proj).astype(np.float64).reshape(nfr, ch, 4)
        index = np.asarray(index)
        n, k = self._n, index.size
        if n + k > self._pos.size:
            size = max(2 * self._pos.size, n + k, 1024)
            cols = np.zeros((size, 4))
            cols[:n] = self._cols[:n]
            pos = np.zeros(size, dtype=np.int64)
            pos[:n] = self._pos[:n]
            self._cols, self._pos = cols, pos
        self._cols[n:n + k, 0] = q[:, :, 0].sum(axis=1)
        self._cols[n:n + k, 1] = q[:, :, 1].sum(axis=1)
        self._cols[n:n + k, 2] = q[:, :, 2] @ self.weights
        self._cols[n:n + k, 3] = q[:, :, 3] @ self.weights
        self._pos[n:n + k] = index
        self._n = n + k

    def settings(self) -> dict:
        return {"from_hz": self.from_hz, "window_s": WINDOW_S,
                "tone_min_prominence_db": TONE_MIN_PROMINENCE_DB,
                "tone_min_stationary_db": TONE_MIN_STATIONARY_DB,
                "loudness_change": "BS.1770-5 gating on K-weighted power spectra, with and without the ultrasonic bins"}

    def finish(self, fe) -> dict:
        out = {"ultrasonic_energy_db": None, "ultrasonic_energy_max_3s_db": None,
               "ultrasonic_energy_max_3s_where_s": [], "ultrasonic_from_hz": self.from_hz,
               "ultrasonic_tones": [], "ultrasonic_loudness_change_lu": None}
        if not self.active or not self._n:
            return out
        aud = self._cols[:self._n, 0].copy()
        ult = self._cols[:self._n, 1].copy()
        hop_s = fe.hop / self.fs
        centres = self._pos[:self._n] * hop_s
        out["ultrasonic_energy_db"] = power_ratio_db(ult.sum(), aud.sum())
        duration = (fe.frame_positions - 1) * hop_s
        if duration <= WINDOW_S:
            r = power_ratio_db(ult.sum(), aud.sum())
            if r is not None:
                out["ultrasonic_energy_max_3s_db"] = r
                out["ultrasonic_energy_max_3s_where_s"] = [[0.0, round(duration, 3)]]
        else:
            # windows [t, t + 3 s) stepped by one hop; each sums the analysed frames centred inside it
            starts = np.arange(0.0, duration - WINDOW_S + 1e-9, hop_s)
            lo = np.searchsorted(centres, starts - 1e-9, side="left")
            hi = np.searchsorted(centres, starts + WINDOW_S - 1e-9, side="left")
            ca = np.concatenate([[0.0], np.cumsum(aud)])
            cu = np.concatenate([[0.0], np.cumsum(ult)])
            a = ca[hi] - ca[lo]
            u = cu[hi] - cu[lo]
            ok = (a > 0) & (u > 0)
            if ok.any():
                ratio = np.full(a.shape, -np.inf)
                ratio[ok] = u[ok] / a[ok]
                j = int(np.argmax(ratio))
                out["ultrasonic_energy_max_3s_db"] = 10.0 * math.log10(ratio[j])
                start = float(starts[j])
                out["ultrasonic_energy_max_3s_where_s"] = [[round(start, 3), round(start + WINDOW_S, 3)]]
        out["ultrasonic_tones"] = find_tones(fe, self.from_hz)
        out["ultrasonic_loudness_change_lu"] = self._loudness_change(fe, centres)
        return out

    def _loudness_change(self, fe, centres):
        zf = self._cols[:self._n, 2].copy()
        zl = self._cols[:self._n, 3].copy()
        hop_s = fe.hop / self.fs
        real_s = (fe.frame_positions - 1) * hop_s
        n_blocks = int(math.floor((real_s - BLOCK_S) / STEP_S + 1e-9)) + 1 if real_s >= BLOCK_S else 0
        if n_blocks <= 0:
            return None
        cf = np.concatenate([[0.0], np.cumsum(zf)])
        cl = np.concatenate([[0.0], np.cumsum(zl)])
        t0 = np.arange(n_blocks) * STEP_S
        # analysed frames whose window lies inside the block: centre in [t0 + hop, t0 + 0.4 - hop]
        lo = np.searchsorted(centres, t0 + hop_s - 1e-9, side="left")
        hi = np.searchsorted(centres, t0 + BLOCK_S - hop_s + 1e-9, side="right")
        cnt = hi - lo
        has = cnt > 0
        if not has.any():
            return None
        bf = (cf[hi] - cf[lo])[has] / cnt[has]
        bl = (cl[hi] - cl[lo])[has] / cnt[has]
        lf = gated_loudness(bf)
        ll = gated_loudness(bl)
        if lf is None or ll is None:
            return None
        return ll - lf


def find_tones(fe, from_hz: float) -> list:
    """Stationary tones above ``from_hz`` in a :class:`FrontEndResult` (see module docstring)."""
    bin_hz = fe.bin_hz
    k_from = int(math.ceil(from_hz / bin_hz))
    nb = fe.ltas.shape[1]
    k_top = nb - 4
    if k_top <= k_from + 4:
        return []
    width = max(3, int(round(TONE_NEIGHBOURHOOD_HZ / bin_hz)) | 1)
    found = {}
    p50 = fe.p50_db
    p50_floor = median_filter(p50, size=width, mode="nearest") if p50 is not None else None
    for c in range(fe.ltas.shape[0]):
        p = fe.ltas[c]
        lv = 10.0 * np.log10(np.maximum(p, 1e-30))
        floor_db = median_filter(lv, size=width, mode="nearest")
        cand = np.arange(max(k_from, 3), k_top)
        seg = lv[cand]
        is_max = (seg >= lv[cand - 1]) & (seg >= lv[cand + 1]) & (seg >= lv[cand - 2]) & (seg >= lv[cand + 2])
        prominent = seg - floor_db[cand] >= TONE_MIN_PROMINENCE_DB
        for k in cand[is_max & prominent]:
            if p50 is not None and p50[k] - p50_floor[k] < TONE_MIN_STATIONARY_DB:
                continue
            floor_p = 10.0 ** (floor_db[k] / 10.0)
            lobe = float(p[k - 3:k + 4].sum() - 7 * floor_p)
            if lobe <= 0:
                continue
            a, b, g = lv[k - 1], lv[k], lv[k + 1]
            den = a - 2 * b + g
            delta = 0.5 * (a - g) / den if den != 0 else 0.0
            freq = (k + float(np.clip(delta, -0.5, 0.5))) * bin_hz
            level = 10.0 * math.log10(2.0 * lobe)
            key = int(k)
            merged = None
            for kk in (key - 1, key, key + 1):
                if kk in found:
                    merged = kk
            if merged is not None:
                if level > found[merged]["level_dbfs"]:
                    found[merged] = {"frequency_hz": round(freq, 1), "level_dbfs": round(level, 2), "channel": c}
            else:
                found[key] = {"frequency_hz": round(freq, 1), "level_dbfs": round(level, 2), "channel": c}
    tones = sorted(found.values(), key=lambda t: -t["level_dbfs"])[:TONES_MAX]
    return sorted(tones, key=lambda t: t["frequency_hz"])
