"""Streaming spectral front end (sampling integrity), constant memory.

:class:`SpectralFrontEnd` cuts the stream into frames of ``N = round(fs / 10)``
samples (10 Hz bins: every standard rate's Nyquist and every mirror frequency
``R - f`` of a 10 Hz bin falls on a bin), periodic Hann window, hop ``N / 2``.
One frame of ``N / 2`` zeros is put before the file and the end is padded with
zeros, so every sample is covered by exactly two frames and the windows sum to
one everywhere (Hann at 50 % overlap is constant-overlap-add).  Frame ``j`` is
centred at sample ``j * hop``.

Power normalisation: ``P[k] = c_k * |X[k]|**2 / (N * sum(w**2))`` with
``c_k = 2`` except at 0 Hz and Nyquist (``c_k = 1``).  Then, for a stationary
signal, ``sum(P)`` is the mean square, and a sine of amplitude ``A`` puts
``A**2 / 2`` into its main lobe (+-2 bins): ``10*log10(2 * lobe power)`` is
``20*log10(A)`` dBFS (a full-scale sine reads 0 dBFS).

Precision: frames are windowed and transformed in float32 (24-bit codes are
exact in float32; the FFT's rounding noise lies some 130 dB below the frame's
level per bin, below every threshold the detectors use); sums over frames are
kept in float64.

What it keeps (memory independent of the file's length):

- ``ltas``: per-channel long-term average power per 10 Hz bin;
- a histogram per bin of the channel-mean frame level (1 dB steps from
  :data:`HIST_MIN_DB` to :data:`HIST_MAX_DB`, every :data:`HIST_STRIDE`-th
  analysed frame), giving low / median / high percentiles over time per bin
  (the low percentile is a noise floor; the median tells stationary tones);
- a display spectrogram of at most ``columns`` x ``rows`` (columns follow the
  file's known length; rows are equal-width frequency bands, channel-summed
  power, mean over the frames of each column);
- the channel-summed long-term spectrum of up to :data:`MAX_SEGMENTS` equal
  time segments (files of 10 s or more), so a part of a file can be judged on
  its own.

Consumers (callables ``fn(power, frame_index)`` with ``power`` of shape
(frames, channels, bins) and the frames' position indices) see every analysed
frame's power spectrum as it is computed, so several detectors share one FFT.
Frames are cut straight from the blocks (only the samples of analysed frames are
read) and transformed in batches of :data:`FRAME_BATCH` frames, whose bounds
follow the frame indices alone: what consumers are handed is the same for any
block size.

Files longer than :data:`FULL_ANALYSIS_S` are analysed on a regular subsample
of frames: 1 in :data:`MID_FILE_STRIDE` up to :data:`MID_ANALYSIS_S`,
1 in :data:`LONG_FILE_STRIDE` up to :data:`LONG_ANALYSIS_S`, 1 in
:data:`VERY_LONG_FILE_STRIDE` beyond; the long-term spectrum is then the mean over
those frames.

:class:`SamplingSpectrumAnalyzer` is the registered analyzer: it runs the
front end and hands its result to :mod:`masterqc.measure.bandwidth`,
:mod:`masterqc.measure.ultrasonic` and :mod:`masterqc.measure.conversion`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from masterqc.measure.npkernels import rfft_rows

from masterqc.measure.base import Analyzer, AnalyzerResult

#: target bin spacing (Hz); frames are round(fs / BIN_TARGET_HZ) samples long
BIN_TARGET_HZ = 10.0
#: files up to this long have every frame analysed; longer files a regular subsample:
#: 1 in MID_FILE_STRIDE frames (100 ms frames every 200 ms) up to MID_ANALYSIS_S,
#: 1 in LONG_FILE_STRIDE frames (100 ms frames every 300 ms) up to LONG_ANALYSIS_S,
#: 1 in VERY_LONG_FILE_STRIDE (100 ms frames every 600 ms) beyond.
#: Long-term spectra, level statistics and tones are statistics over time: a 15-second file
#: analysed in full and a 60-second one at 1 in 4 both give some 300 frames (a 30-second one
#: 150), a 5-minute one at 1 in 6 and a 10-minute one at 1 in 12 some 1000, and the subsample
#: keeps the cost of the analysis a small fraction of the core's (own reasoning; see
#: bench/bench_sampling_split.py: at every other frame the front end of a 30-second file cost
#: some 0.3 of the core's CPU time, at 1 in 4 half that).  At 1 in 12 a 3 s window still holds
#: five analysed frames (the ultrasonic worst-window figure) and every 5 s segment eight; at
#: 1 in 4 fifteen and twenty-five.
FULL_ANALYSIS_S = 15.0
MID_ANALYSIS_S = 60.0
LONG_ANALYSIS_S = 300.0
MID_FILE_STRIDE = 4
LONG_FILE_STRIDE = 6
VERY_LONG_FILE_STRIDE = 12
#: analysed frames are windowed into a batch of up to FRAME_BATCH frames (and at most BATCH_SAMPLES
#: samples, 4 MB of float32) before they are transformed and summed: a block of 65536 samples holds
#: two or three analysed frames of a long file, and per-call overheads then cost more than the
#: arithmetic (house choice from timing bench/bench_sampling_split.py)
FRAME_BATCH = 32
BATCH_SAMPLES = 1 << 20
#: time segments for the per-segment upsampling verdict (a spliced part of a file)
SEGMENT_S = 5.0
MAX_SEGMENTS = 8
#: the level histogram takes every HIST_STRIDE-th analysed frame
HIST_STRIDE = 2
#: level histogram range (dB of per-bin power, channel mean) and step
HIST_MIN_DB = -200.0
HIST_MAX_DB = 10.0
HIST_STEP_DB = 1.0
#: default display sizes
#: (about 29 000 cells, whole dB: some 140 kB of JSON)
SPECTROGRAM_COLUMNS = 300
SPECTROGRAM_ROWS = 96
#: display LTAS: points per octave and lowest frequency
DISPLAY_POINTS_PER_OCTAVE = 48
DISPLAY_LOW_HZ = 20.0
#: power below this counts as zero when converted to dB (1e-30 = -300 dB)
POWER_EPS = 1e-30


def segments_for(duration_s: float) -> int:
    """Equal time segments judged on their own for upsampling: one per
    :data:`SEGMENT_S` seconds, at most :data:`MAX_SEGMENTS`, none under two segments' worth."""
    n = int(duration_s // SEGMENT_S)
    return 0 if n < 2 else min(n, MAX_SEGMENTS)


def default_frame_stride(duration_s: float) -> int:
    """Frames analysed: all of them up to :data:`FULL_ANALYSIS_S`, 1 in :data:`MID_FILE_STRIDE` up to
    :data:`MID_ANALYSIS_S`, 1 in :data:`LONG_FILE_STRIDE` up to :data:`LONG_ANALYSIS_S`, else 1 in
    :data:`VERY_LONG_FILE_STRIDE`."""
    if duration_s <= FULL_ANALYSIS_S:
        return 1
    if duration_s <= MID_ANALYSIS_S:
        return MID_FILE_STRIDE
    return LONG_FILE_STRIDE if duration_s <= LONG_ANALYSIS_S else VERY_LONG_FILE_STRIDE


def frame_length_for(sample_rate_hz: float) -> int:
    """Frame length in samples for ~10 Hz bins: ``round(fs / 10)`` (4800 at 48 kHz)."""
    return max(16, int(round(float(sample_rate_hz) / BIN_TARGET_HZ)))


def power_db(power) -> np.ndarray:
    """``10*log10(power)`` with powers at or below :data:`POWER_EPS` read as -300 dB."""
    return 10.0 * np.log10(np.maximum(np.asarray(power, dtype=float), POWER_EPS))


@dataclass
class FrontEndResult:
    """What :class:`SpectralFrontEnd` hands to the detectors (all numpy)."""

    sample_rate_hz: float
    frame_length: int
    hop: int
    bin_hz: float
    freqs_hz: np.ndarray          # (bins,)
    frames: int                   # number of frames analysed
    ltas: np.ndarray              # (channels, bins) mean power per bin over the file's duration
    p10_db: np.ndarray | None     # (bins,) 10th percentile of channel-mean level over frames
    p50_db: np.ndarray | None
    p90_db: np.ndarray | None
    spectrogram_db: np.ndarray    # (columns, rows)
    spectrogram_time_s: np.ndarray  # (columns,) centre times
    spectrogram_freq_hz: np.ndarray  # (rows,) band centres
    frame_stride: int = 1         # 1 in frame_stride frame positions was analysed
    frame_positions: int = 0      # frame positions in the file (analysed or not)
    segment_ltas: np.ndarray | None = None   # (segments, bins) channel-summed mean power per time segment
    segment_bounds_s: list = None            # [(start_s, end_s)] per segment
    segment_frames: np.ndarray | None = None  # analysed frames per segment

    @property
    def ltas_total(self) -> np.ndarray:
        """Channel-summed mean power per bin."""
        return self.ltas.sum(axis=0)


class SpectralFrontEnd:
    """Framing, windowing and FFT of a stream; see the module docstring."""

    def __init__(self, sample_rate_hz: float, channels: int, total_frames: int, *,
                 columns: int = SPECTROGRAM_COLUMNS, rows: int = SPECTROGRAM_ROWS,
                 histogram: bool = True, consumers=(), frame_stride: int | None = None):
        self.fs = float(sample_rate_hz)
        self.channels = int(channels)
        self.N = frame_length_for(self.fs)
        self.hop = self.N // 2
        self.bins = self.N // 2 + 1
        self.bin_hz = self.fs / self.N
        self.window = np.hanning(self.N + 1)[:-1].astype(np.float32)          # periodic Hann
        scale = np.full(self.bins, 2.0 / (self.N * float(np.sum(self.window.astype(float) ** 2))))
        scale[0] *= 0.5
        if self.N % 2 == 0:
            scale[-1] *= 0.5
        self._scale = scale.astype(np.float32)
        self.total_samples = int(total_frames)
        #: number of frames the whole file gives: starts at -hop, hop, ... < total
        self.total_frame_count = max(1, -(-(self.total_samples + self.hop) // self.hop))
        self.consumers = list(consumers)
        if frame_stride is None:
            frame_stride = default_frame_stride(self.total_samples / self.fs)
        #: analyse every frame_stride-th frame (1: all of them)
        self.stride = max(1, int(frame_stride))
        self.frame_index = 0          # global index of the next frame position
        self.analysed = 0             # frames actually analysed
        # Stream positions count from the leading half frame of zeros (frame j starts at j * hop).
        # Only the samples of analysed frames are read: those inside a block straight from it, and
        # the one or two frames that straddle blocks from `_keep`, the received samples from the start
        # of the next analysed frame on (as given, float64 or float32: rounded to float32 where the
        # frame is windowed, as every sample always was).
        self._pos = self.hop          # stream position of the next block's first sample
        self._next = 0                # index of the next analysed frame (a multiple of stride)
        self._keep = np.zeros((self.channels, self.hop), dtype=np.float32)
        self._keep_start = 0          # stream position of _keep's first sample
        # windowed frames wait in a batch of up to FRAME_BATCH (at most BATCH_SAMPLES samples), so the
        # transform and the sums over frames run on many frames per call whatever the block size
        batch = max(1, min(FRAME_BATCH, BATCH_SAMPLES // (self.channels * self.N)))
        self._frames = np.empty((batch, self.channels, self.N), dtype=np.float32)
        self._fill = 0                # frames in the batch
        self._batch_first = 0         # index of the batch's first frame
        self.ltas_sum = np.zeros((self.channels, self.bins))
        self.histogram = histogram
        self.n_levels = int(round((HIST_MAX_DB - HIST_MIN_DB) / HIST_STEP_DB))
        # counts laid out (level steps, bins): a frame's neighbouring bins, mostly at neighbouring
        # levels, are counted in neighbouring cells, and the percentiles read contiguous rows
        self.hist = np.zeros((self.n_levels, self.bins), dtype=np.uint32) if histogram else None
        self._hist_offset = np.arange(self.bins)
        self._one = np.uint32(1)
        # each column spans at least `stride` frame positions, so it holds an analysed frame
        self.columns = int(max(1, min(columns, self.total_frame_count // self.stride)))
        self.rows = int(max(1, min(rows, self.bins - 1)))
        edges = np.linspace(1, self.bins, self.rows + 1).round().astype(int)
        edges = np.unique(edges)
        self._row_edges = edges[:-1]
        self._row_freqs = (0.5 * (edges[:-1] + edges[1:] - 1)) * self.bin_hz
        self.rows = len(self._row_edges)
        self._row_width = np.diff(edges).astype(float)
        # time segments for the upsampling verdict of parts of a file
        self.n_segments = segments_for(self.total_samples / self.fs)
        self.seg_sum = np.zeros((self.n_segments, self.bins))
        self.seg_frames = np.zeros(self.n_segments, dtype=np.int64)
        self.spec_sum = np.zeros((self.columns, self.rows))
        self.spec_count = np.zeros(self.columns)
        self._finished = False

    # -- streaming -------------------------------------------------------
    def process(self, block) -> None:
        """Feed a (frames, channels) float block."""
        block = np.asarray(block)
        if block.ndim == 1:
            block = block[:, None]
        self.process_planar(block.T)

    def process_planar(self, rows) -> None:
        """Feed a (channels, frames) float block (the same arithmetic as :meth:`process` of its
        transpose: the block is read in place, whatever its strides)."""
        rows = np.asarray(rows)
        n = rows.shape[1]
        if n == 0:
            return
        pos, end = self._pos, self._pos + n
        N, hop, step = self.N, self.hop, self.stride * self.hop
        # analysed frames that this block completes: j = _next, _next + stride, ... with j * hop + N <= end
        last = (end - N) // hop if end >= N else -1
        count = (last - self._next) // self.stride + 1 if last >= self._next else 0
        if count:
            start = self._next * hop
            done = 0
            while done < count:
                fill = self._fill
                if fill == 0:
                    self._batch_first = self._next + done * self.stride
                if start < pos:
                    # a frame begun in earlier blocks: the kept samples, then the head of this one
                    head = rows[:, :start + N - pos]
                    kept = self._keep[:, start - self._keep_start:]
                    frame = self._frames[fill]
                    np.copyto(frame, np.concatenate([kept, head], axis=1), casting="same_kind")
                    np.multiply(frame, self.window, out=frame)
                    k = 1
                else:
                    # frames inside the block: one strided view, rounded to float32 into the contiguous
                    # (frames, channels, N) batch, then windowed there (quicker than one mixed-type pass)
                    k = min(count - done, self._frames.shape[0] - fill)
                    c_stride, s_stride = rows.strides
                    view = np.lib.stride_tricks.as_strided(rows[:, start - pos:], (k, self.channels, N),
                                                           (step * s_stride, c_stride, s_stride), writeable=False)
                    frames = self._frames[fill:fill + k]
                    np.copyto(frames, view, casting="same_kind")
                    np.multiply(frames, self.window, out=frames)
                self._fill = fill + k
                done += k
                start += k * step
                if self._fill == self._frames.shape[0]:
                    self._flush()
            self._next += count * self.stride
        if last + 1 > self.frame_index:
            self.frame_index = last + 1
        # keep what the next analysed frame needs of the samples received so far
        start = self._next * hop
        if start >= end:
            self._keep, self._keep_start = self._keep[:, :0], end
        elif start >= pos:
            self._keep, self._keep_start = rows[:, start - pos:].copy(), start
        else:
            self._keep = np.concatenate([self._keep[:, start - self._keep_start:], rows], axis=1)
            self._keep_start = start
        self._pos = end

    def _flush(self) -> None:
        """Transform the batch of windowed frames and hand their power spectra on."""
        n = self._fill
        if n == 0:
            return
        spec = rfft_rows(self._frames[:n])
        # |X|^2 on the interleaved floats (re, im): squared in place, then the pairs added
        # (contiguous, hence quicker than the real and imaginary views; the same values)
        sq = spec.view(np.float32)
        np.square(sq, out=sq)
        power = np.add(sq[..., 0::2], sq[..., 1::2])
        power *= self._scale
        self._fill = 0
        self._accumulate(power, np.arange(self._batch_first, self._batch_first + n * self.stride, self.stride))

    def _accumulate(self, power: np.ndarray, index: np.ndarray) -> None:
        nfr = power.shape[0]
        self.ltas_sum += power.sum(axis=0, dtype=np.float64)
        total = power.sum(axis=1) if self.channels > 1 else power[:, 0]   # (frames, bins) channel sum
        if self.histogram:
            # level statistics from every HIST_STRIDE-th frame (a regular subsample: percentiles
            # over time need many frames, not every frame)
            first = (-self.analysed) % HIST_STRIDE
            if first < nfr:
                # level = power_db(channel mean) and its 1 dB step, in place (the same operations
                # in the same order as power_db, so the same steps)
                level = np.asarray(total[first::HIST_STRIDE] / self.channels, dtype=float)
                np.maximum(level, POWER_EPS, out=level)
                np.log10(level, out=level)
                np.multiply(level, 10.0, out=level)
                np.subtract(level, HIST_MIN_DB, out=level)
                if HIST_STEP_DB != 1.0:           # (x / 1.0 is x)
                    np.divide(level, HIST_STEP_DB, out=level)
                idx = level.astype(np.int64)
                np.clip(idx, 0, self.n_levels - 1, out=idx)
                idx *= self.bins
                idx += self._hist_offset          # flat index step * bins + bin
                np.add.at(self.hist.reshape(-1), idx.reshape(-1), self._one)   # (a uint32 one: the fast path)
        bands = np.add.reduceat(total[:, 1:], self._row_edges - 1, axis=1) / self._row_width
        cols = (index * self.columns) // self.total_frame_count
        cols = np.minimum(cols, self.columns - 1)
        np.add.at(self.spec_sum, cols, bands)
        np.add.at(self.spec_count, cols, 1.0)
        if self.n_segments:
            # frame j spans samples [(j-1)*hop, (j+1)*hop); frames that straddle a segment boundary
            # are left out, so a segment's spectrum holds nothing of its neighbours
            seg_len = self.total_samples / self.n_segments
            lo = np.floor((index - 1) * self.hop / seg_len).astype(np.int64)
            hi = np.floor(((index + 1) * self.hop - 1) / seg_len).astype(np.int64)
            keep = np.nonzero((lo == hi) & (lo >= 0) & (lo < self.n_segments))[0]
            if keep.size:
                g = lo[keep]
                starts = np.concatenate([[0], np.nonzero(np.diff(g))[0] + 1])   # runs of one segment
                ends = np.concatenate([starts[1:], [keep.size]])
                # a segment's kept frames are consecutive: each run is a slice of the block's frames, summed
                # row by row in float64 (the order of a reduction over rows, as reduceat's; each float32
                # row is widened as it is added, without a float64 copy of the slice)
                for a, b in zip(starts, ends):
                    self.seg_sum[g[a]] += np.add.reduce(total[keep[a]:keep[b - 1] + 1], axis=0, dtype=np.float64)
                self.seg_frames[g[starts]] += ends - starts
        for fn in self.consumers:
            fn(power, index)
        self.analysed += nfr

    def finish(self) -> FrontEndResult:
        """Flush the zero-padded tail and return the accumulated result."""
        if not self._finished:
            # pad so that the last real sample is covered by two frames
            need = self.total_frame_count - self.frame_index
            if need > 0:
                # zeros up to the end of the last frame position
                pad = (self.total_frame_count - 1) * self.hop + self.N - self._pos
                if pad > 0:
                    self.process_planar(np.zeros((self.channels, pad), dtype=np.float32))
            self._flush()
            self._finished = True
        # with every frame analysed, every sample is covered by the windows of two frames: the
        # sum over frames is the energy of total_samples / hop frames' worth of signal; a
        # regular subsample of 1 in `stride` frames holds 1/stride of that (exact for
        # stationary signals)
        ltas = self.ltas_sum / max(self.total_samples / (self.hop * self.stride), 1e-12)
        p10 = p50 = p90 = None
        if self.histogram and self.analysed > 0:
            p10, p50, p90 = self.percentile_db((0.10, 0.50, 0.90))
        with np.errstate(invalid="ignore", divide="ignore"):
            sg = self.spec_sum / np.maximum(self.spec_count, 1.0)[:, None]
        sg_db = power_db(sg)
        sg_db[self.spec_count == 0] = np.nan          # (cannot happen by construction; shown as null)
        t_cols = ((np.arange(self.columns) + 0.5) * self.total_frame_count / self.columns) * self.hop / self.fs
        seg_ltas = self.seg_sum / np.maximum(self.seg_frames, 1)[:, None]
        dur = self.total_samples / self.fs
        bounds = [(g * dur / self.n_segments, (g + 1) * dur / self.n_segments) for g in range(self.n_segments)]
        return FrontEndResult(
            sample_rate_hz=self.fs, frame_length=self.N, hop=self.hop, bin_hz=self.bin_hz,
            freqs_hz=np.arange(self.bins) * self.bin_hz, frames=self.analysed, ltas=ltas,
            frame_stride=self.stride, frame_positions=self.frame_index,
            segment_ltas=seg_ltas, segment_bounds_s=bounds, segment_frames=self.seg_frames.copy(),
            p10_db=p10, p50_db=p50, p90_db=p90, spectrogram_db=sg_db,
            spectrogram_time_s=t_cols, spectrogram_freq_hz=self._row_freqs)

    def percentile_db(self, q):
        """Per-bin level (dB, channel mean) below which a fraction ``q`` of the histogram's frames lie.

        Read from the 1 dB histogram: the centre of the first level step whose
        cumulative count reaches ``q`` of the frames.  ``q`` may be a sequence:
        then a tuple of arrays is returned.
        """
        # cumulative counts over the level steps, (steps, bins): each step adds one contiguous row
        # (quicker than numpy's cumsum along axis 0); integer sums, so exact (a bin's count, one per
        # histogram frame, stays far below 2**32)
        cum = self.hist.copy()
        for j in range(1, cum.shape[0]):
            cum[j] += cum[j - 1]
        total = cum[-1].astype(np.float64)
        cols = np.arange(cum.shape[1])
        qs = [q] if np.isscalar(q) else list(q)
        out = []
        for qq in qs:
            # cum holds whole numbers, so "cum < qq * total" is "cum < ceil(qq * total)", exact in integers
            level = np.ceil(qq * total).astype(cum.dtype)
            # k = the number of steps whose cumulative count is below level, per bin: cum rises along
            # the steps, so a bisection per bin (8 gathers of one row each, instead of comparing the table)
            lo = np.zeros(cum.shape[1], dtype=np.int64)
            hi = np.full(cum.shape[1], cum.shape[0], dtype=np.int64)
            while True:
                open_ = lo < hi
                if not open_.any():
                    break
                mid = (lo + hi) // 2
                below = cum.reshape(-1)[np.minimum(mid, cum.shape[0] - 1) * cum.shape[1] + cols] < level
                lo = np.where(open_ & below, mid + 1, lo)
                hi = np.where(open_ & ~below, mid, hi)
            k = lo
            out.append(HIST_MIN_DB + (k + 0.5) * HIST_STEP_DB)
        return out[0] if np.isscalar(q) else tuple(out)

    def settings(self) -> dict:
        return {"frame_length": self.N, "hop": self.hop, "bin_hz": self.bin_hz, "window": "hann (periodic)",
                "overlap": 0.5, "fft": "float32", "histogram_step_db": HIST_STEP_DB,
                "histogram_frame_stride": HIST_STRIDE,
                "frame_stride": self.stride, "frames_analysed": self.analysed,
                "spectrogram_columns": self.columns, "spectrogram_rows": self.rows}


# ---------------------------------------------------------------------------
# display helpers


def display_ltas(fe: FrontEndResult, points_per_octave: int = DISPLAY_POINTS_PER_OCTAVE,
                 low_hz: float = DISPLAY_LOW_HZ):
    """Smoothed LTAS for display: ``(freqs_hz, db_per_channel)``.

    Log-spaced centres from ``low_hz`` to Nyquist at ``points_per_octave``; each
    value is the mean power of the 10 Hz bins within +-1/(2*points_per_octave)
    octave of the centre (at least the nearest bin), in dB (a bin of a full-scale
    sine's main lobe reads about -6 dB; see the module docstring).
    """
    nyq = fe.sample_rate_hz / 2.0
    low = min(low_hz, nyq / 2)
    n = max(2, int(math.floor(math.log2(nyq / low) * points_per_octave)) + 1)
    n = min(n, 1000)
    centres = low * 2.0 ** (np.arange(n) / points_per_octave)
    centres = centres[centres <= nyq]
    half = 2.0 ** (0.5 / points_per_octave)
    lo = np.clip(np.floor(centres / half / fe.bin_hz).astype(int), 0, len(fe.freqs_hz) - 1)
    hi = np.clip(np.ceil(centres * half / fe.bin_hz).astype(int), 0, len(fe.freqs_hz) - 1)
    hi = np.maximum(hi, lo + 1)
    csum = np.concatenate([np.zeros((fe.ltas.shape[0], 1)), np.cumsum(fe.ltas, axis=1)], axis=1)
    hi_c = np.minimum(hi, fe.ltas.shape[1])
    mean = (csum[:, hi_c] - csum[:, lo]) / np.maximum(hi_c - lo, 1)
    return centres, np.round(power_db(mean), 2)


def display_floor(fe: FrontEndResult, centres_hz) -> list:
    """The noise floor (10th percentile over time of the channel-mean level per bin) at the
    display centres, dB; None where no frame was analysed."""
    if fe.p10_db is None:
        return [None] * len(centres_hz)
    k = np.clip(np.round(np.asarray(centres_hz) / fe.bin_hz).astype(int), 0, len(fe.p10_db) - 1)
    return [round(float(v), 1) for v in fe.p10_db[k]]


# ---------------------------------------------------------------------------
# the registered analyzer


def _whole_db(values: np.ndarray):
    """A dB matrix as whole dB (floored at -200), as a list of lists; non-finite cells as None."""
    v = np.asarray(values, dtype=float)
    if np.isfinite(v).all():
        return np.round(np.maximum(v, -200.0)).astype(int).tolist()
    return [[None if not np.isfinite(x) else int(round(max(x, -200.0))) for x in row] for row in v]


def _spectrum_options(options) -> dict:
    extra = getattr(options, "extra", {}) or {}
    return dict(extra.get("spectrum", {}) or {})


class SamplingSpectrumAnalyzer(Analyzer):
    """Spectral part of the sampling-integrity checks (bandwidth, ultrasonic, conversion).

    Options in ``MeasureOptions.extra["spectrum"]``: ``spectrogram_columns``,
    ``spectrogram_rows`` (display sizes), ``frame_stride`` (analyse 1 in this many
    frames; default: see :func:`default_frame_stride`).  ``MeasureOptions.ultrasonic_from_hz``
    and ``MeasureOptions.conversion_targets_hz`` are read by the detectors.
    """

    name = "sampling_spectrum"

    # the schema is the union of the detectors' schemas (filled below)
    measurement_schema: dict = {}
    series_schema = {
        "ltas_hz": {"type": "array", "items": {"type": "number"}},
        "ltas_db_per_channel": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}},
        "ltas_floor_db": {"type": "array", "items": {"type": ["number", "null"]}},
        "spectrogram": {"type": "object"},
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        from masterqc.measure import conversion, ultrasonic
        opts = _spectrum_options(options)
        self.ultra = ultrasonic.UltrasonicTracker(info, options)
        self.conv = conversion.ConversionTracker(info, options)
        stride = opts.get("frame_stride")
        self.fe = SpectralFrontEnd(info.sample_rate_hz, info.channels, info.frames,
                                   columns=int(opts.get("spectrogram_columns", SPECTROGRAM_COLUMNS)),
                                   rows=int(opts.get("spectrogram_rows", SPECTROGRAM_ROWS)),
                                   consumers=[self.ultra.frames],
                                   frame_stride=None if stride is None else int(stride))

    #: the engine hands the block over as (channels, frames) rows (see :class:`Analyzer`)
    planar_input = True

    def process(self, block) -> None:
        self.fe.process(block)
        self.conv.process(block)

    def process_planar(self, rows) -> None:
        self.fe.process_planar(rows)
        self.conv.process(rows.T)

    def finish(self) -> AnalyzerResult:
        from masterqc.measure import bandwidth
        fe = self.fe.finish()
        m = {}
        bw = bandwidth.assess(fe, self.info)
        m.update(bw.measurements())
        m.update(self.ultra.finish(fe))
        m.update(self.conv.finish(fe))
        hz, db = display_ltas(fe)
        series = {
            "ltas_hz": np.round(hz, 2),
            "ltas_db_per_channel": db,
            "ltas_floor_db": display_floor(fe, hz),
            "spectrogram": {
                "time_s": np.round(fe.spectrogram_time_s, 3),
                "frequency_hz": np.round(fe.spectrogram_freq_hz, 1),
                "db": _whole_db(fe.spectrogram_db),
                "note": "channel-summed power per band, mean over the frames of each column, whole dB",
            },
        }
        settings = {"front_end": self.fe.settings(), "bandwidth": bw.settings,
                    "ultrasonic": self.ultra.settings(), "conversion": self.conv.settings()}
        return AnalyzerResult(measurements=m, series=series, settings=settings)


def _collect_schema() -> dict:
    from masterqc.measure import bandwidth, conversion, ultrasonic
    out = {}
    out.update(bandwidth.MEASUREMENT_SCHEMA)
    out.update(ultrasonic.MEASUREMENT_SCHEMA)
    out.update(conversion.MEASUREMENT_SCHEMA)
    return out


# The detector modules import nothing from this one at import time.
SamplingSpectrumAnalyzer.measurement_schema = _collect_schema()
