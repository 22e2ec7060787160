"""Folded content (aliasing): partials that a sampling process reflected below Nyquist.

Six complementary tests, each on a bounded number of frames spread over the file:

0. **Sample-sharp jumps** (frames of fs/10 samples; :func:`sharp_steps`).  A waveform with
   jumps (sawtooth, square, pulse, hard-synced voices) evaluated at the sample instants without
   band-limiting jumps between two neighbouring samples with nothing around the jump; its
   spectrum keeps falling as 1/k past Nyquist and all of that folds.  A band-limited jump rings
   around itself (at least about 2 % of the jump in RMS over the neighbourhood, for the ideal
   low-pass step).  Jumps whose neighbourhood fits a smooth curve plus an ideal step to within
   1 % of the jump are counted; jumps lined up on a fixed sample grid (a held upsampling, or a
   waveform whose period is a whole number of samples, whose folds land on its own harmonics)
   are no evidence.  It does not depend on pitch, polyphony or vibrato, which smear the folded
   partials in a spectrum.

1. **Polyphonic fold test** (frames of fs/20 samples, 20 Hz bins, Hann window;
   :func:`polyphonic_fold_frame`).  The notes of each frame are estimated by an
   iterative harmonic sieve (up to :data:`MAX_NOTES`).  Every note at f0 predicts
   where its partials above Nyquist land once sampled: ``|k*f0 - m*fs|``, a comb
   with spacing f0 offset from the note's harmonic grid.  The level over the local
   floor along that comb (with a tolerance that grows with k: the f0 error moves fold
   k by k times as much) is compared with the same comb moved to other offsets
   (control combs): other notes' partials and noise land on the true and the control
   combs alike.  A note instance whose comb stands above every control is evidence;
   folding is found when enough instances, and a large enough share of them, show it
   (:func:`fold_evidence`), or when the fold combs' ranks among their controls, summed over all
   instances, stand well above what no folding gives (:func:`rank_evidence`: a vibrato smears
   high fold orders so that few instances beat every control, yet most rank high).  This covers naive oscillators (saw, square, pulse, hard
   sync) in chords and tonal music decimated without a filter; a vibrato smears the
   high fold orders within a frame and weakens the evidence.  Folds landing in the top
   10 % of the band are not tested (a proper decimation filter's transition band may
   reach there).  A comb whose lines fall with frequency over the first fold zone is no evidence
   (:func:`falls_as_unreflected`): folds there come from partials at fs - f, so they rise towards
   Nyquist; a falling comb is a series the voice holds below Nyquist (a ring modulator's sidebands).

2. **Alias-to-harmonic ratio on steady tones** (frames of fs/5 samples, 5 Hz
   bins, 4-term Blackman-Harris window; :func:`masterqc.measure.frames.analyse_tonal_frame`).
   In a frame whose lines form one harmonic series, the power at the predicted fold
   frequencies of the partials above Nyquist is compared with the harmonic power.
   It gives the ratio for steady notes; as a finding it counts only where the
   polyphonic test also sees more evident note instances than chance, or has no
   testable instance (one series per frame is an assumption chords break).

3. **Reflection at Nyquist** (short frame pairs, fs/50 samples, 1.25 ms apart):
   partial tracks and their slopes.  A partial rising towards Nyquist whose
   continuation reappears *falling* at the mirrored place ``fs - (f + s*dt)``
   with the mirrored slope ``-s`` is a partial folded by the sampling (a sweep
   generated past Nyquist, or the harmonics of a naively generated moving tone).

4. **Irregular sample grid** (frames of 8192 samples, up to 12 spread over at least 4 s;
   :func:`grid_coherence`).  Sample dropping (one sample deleted in every k, or a nearest-sample
   rate change without a filter) advances every partial's phase by 2*pi*f/fs at each drop
   (:func:`dropped_sample_phase_step`), at instants set by the sample clock.  The magnitude of a
   linear predictor's error jumps there; its spectrum holds a line at the drop rate whose phase,
   referred to the absolute sample index, agrees from frame to frame over the whole file.  Lines
   that a note held unchanged explains (multiples of its steady partials) are skipped, and so is a
   line when the signal itself repeats every whole number of samples that the line divides.
   Dense dropping (a rate change by picking samples, one drop about every 11 samples from 48 to
   44.1 kHz) is found by its period instead (:func:`pattern_evidence`): the drop pattern repeats
   every fs_out/gcd(fs_in, fs_out) samples (147 from 48 or 96 kHz to 44.1 kHz), and the frames'
   prediction-error profiles over the phases n mod that period agree across the file.
   A converter whose read position is a binary fraction (accumulated in single precision, or fixed
   point) steps by a multiple of 2^-b samples instead of fs_in/fs_out: its pattern repeats every
   power-of-two number of samples (:data:`BINARY_PHASE_PERIODS`), which is tested as well.  Linear
   interpolation between neighbours leaves no jump, only a 2-tap filter that changes with the read
   fraction; whatever the rule, the trace is a function of that fraction, whose first orders sit at the
   lines m*fs_in/fs_out mod 1 (:func:`conversion_line_evidence`): their phases, referred to the
   absolute sample index, agree across the file far beyond chance (a summed Rayleigh test).

5. **Reflected line grids** (the polyphonic frames; :func:`reflected_grid_frame`).  Two-operator FM puts its
   lines at fc + k*fm, a ring modulator at k*f1 +- f2: a grid of spacing D at the offsets +-p (mod D) that no
   harmonic series explains, whose sidebands past Nyquist fold to fs - (p + k*D), the grid reflected about fs/2.
   Each frame's strongest such grid is found from the spacings between its strongest lines and refined by least
   squares; the reflected comb (below 0.45 fs, lines from 50 dB under the grid's strongest up) is read against
   the same comb moved to other offsets, and the frames' evidence is pooled as the polyphonic test pools note
   instances; a reflected comb whose lines fall with frequency is no evidence, as in test 1.  A band-limited voice
   has no reflected grid.

Cost: each test analyses every FIRST_PASS_STRIDE-th of its frames as they stream past (the partial tracks
every TRACK_FIRST_PASS_STRIDE-th run, the grid test all of its frames) and keeps the rest; finish() analyses
the rest only when that first pass does not settle the verdict as clean with margin
(:meth:`AliasingAnalyzer._settled_clean`).  Clean material with no note instances, no sharp jump and no
reflected partial costs about a tenth of the full analysis.

Frames with no note are not assessable: noise-like material carries no evidence of
its own folding, so it is never flagged.  ``aliasing_assessable_fraction`` is the
share of the polyphonic frames in which at least one note had testable fold
positions or a line grid had a testable reflection, or the share of the jump-test frames with sample-sharp jumps, whichever is larger; it is 1 where the flat-top test (which reads every sample) finds a clipping curve at the file's rate.

``alias_to_harmonic_ratio_db`` (called ``aliasing_score`` up to 0.1.0) is the
alias-to-harmonic energy ratio in dB, quoted only when folded content was found:
from the steady-tone frames whose fold positions show alias lines when they are at
least half of the assessable ones, else from the polyphonic frames with evident
note instances, else (folding found from sample-sharp jumps alone) the power above Nyquist that
the jumps imply (:func:`step_alias_ratio_db`, a lower bound).  Otherwise it is None, and ``aliasing_detail.score_upper_bound_db`` states the
floor-limited upper bound on steady material.  ``aliasing_detected`` is None when
nothing could be assessed.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import BOOLEAN, BOOLEAN_OR_NULL, NUMBER_OR_NULL, Analyzer, AnalyzerResult
from masterqc.measure.frames import (  # noqa: F401  (re-exported: the steady-tone fold test and its constants)
    ALIAS_LINE_DB, ALIAS_SCORE_MIN_DB, CLEAR_BINS, LINE_DB, LOBE_BINS, MIN_CLEAR_FOLDS, MIN_F0_HZ,
    MIN_FOUND_FRACTION, MIN_TONAL_FRACTION, TONAL_BIN_HZ, UNDETECTED_LINE_POWER_FACTOR, FramePicker,
    analyse_tonal_frame, blackman_harris, block_floor, find_lines, fold_frequency, fold_plan, frame_starts, local_floor,
    lobe_power, refine_peaks)

#: at most this many long frames per file (cost bound)
MAX_TONAL_FRAMES = 12
#: short frame pairs for partial tracks: fs/50 samples (50 Hz bins), second frame fs/800 later
TRACK_BIN_HZ = 50.0
TRACK_HOP_DIVISOR = 16
MAX_TRACK_PAIRS = 160
#: per track resolution: (bin Hz, hop divisor, minimum slope Hz/s, mirror position
#: tolerance Hz).  The minimum slope is a quarter of a bin per hop, the tolerance three
#: bins (own reasoning).  A coarser second resolution (200 Hz bins) was tried for the fast
#: high partials of moving naive waveforms at 96 kHz and found nothing more in the corpus.
TRACK_RESOLUTIONS = ((TRACK_BIN_HZ, TRACK_HOP_DIVISOR, 5000.0, 150.0),)
#: peaks used for partial tracks stand this far above the local floor; lower than
#: :data:`LINE_DB` because a chance peak cannot pass the reflection test, which asks for a
#: mirrored position and slope, seen twice (own reasoning)
TRACK_LINE_DB = 12.0
#: a reflected continuation must be seen in at least this many later frame pairs
MIN_REFLECTION_SIGHTINGS = 2
#: reflected partial: slope match (relative) and position match (Hz) of the mirrored track
REFLECT_SLOPE_TOLERANCE = 0.25
REFLECT_POSITION_TOLERANCE_HZ = 150.0
#: partial tracks only count when they move at least this fast (Hz/s), so that the slope
#: sign is certain (own reasoning: a quarter of a bin per hop, five times the error of
#: parabolic peak interpolation on clean lines)
MIN_TRACK_SLOPE_HZ_PER_S = 5000.0
#: look for the reflected continuation at most this long after the rising partial
REFLECT_MAX_GAP_S = 0.25
#: a reflected partial counts only when one of its sightings falls below TRACK_MAX_FALL_FRACTION of fs:
#: a partial with a deep vibrato swings through a proper decimation filter's transition band,
#: which straddles Nyquist, and comes back mirrored close to Nyquist (seen on
#: oversampled-and-filtered voices and a filtered decimation in the tuning corpus; house choice).
#: scipy's resample_poly (its default Kaiser design) is down only 22.6 dB at 0.55 fs, whose fold lands at 0.45 fs,
#: and 53 dB from 0.58 fs on: below 0.42 fs its folds are 53 dB or more down (computed from its taps; a strong
#: ring-modulated partial came back mirrored at 0.44-0.45 fs through it in the tuning corpus)
MIN_REFLECTED_PARTIALS = 1
TRACK_MAX_FALL_FRACTION = 0.42


#: the first pass analyses every FIRST_PASS_STRIDE-th frame of the polyphonic, step and steady-tone tests, and
#: every TRACK_FIRST_PASS_STRIDE-th run of TRACK_RUN consecutive pairs of the partial tracks (a reflection is seen
#: in the pairs just after the rising partial); the rest only when the first pass does not settle the verdict as
#: clean (cost; house choice).  FIRST_PASS_STRIDE is 12 since the tenth session (was 6): a file of 7 s or more
#: then settles on 11 of its 128 polyphonic frames, 3 step frames and one steady-tone frame, with the settling
#: rules unchanged; on the folded-content tuning corpus (seeds 1000 and 1001) found and false alarms stayed as
#: they were with 6 (bench/sampling_split_s10cost.txt); on a 30 s file it takes about 0.1 of the core's CPU off
#: the first pass.  The tracks keep 6: with 12 their 4 runs missed the reflection of a 1.5 s sweep generated past
#: Nyquist, which the first pass then settled as clean
FIRST_PASS_STRIDE = 12
TRACK_FIRST_PASS_STRIDE = 6
TRACK_RUN = 4
#: the first pass settles a clean verdict only while the polyphonic rank z stays below this (house choice;
#: with fewer than RANK_MIN_INSTANCES note instances it settles nothing: a 2:1 decimation of the tuning
#: corpus showed 0 of 6 instances in the first pass and z = 5.3 over all frames)
SETTLED_RANK_Z = 1.0
#: with GRID_FIRST_PASS_STRIDE above 1 the first pass analyses that share of the grid frames and settles a
#: clean verdict only while their drop-line coherence and drop-pattern agreement stay below these.  The
#: grid frames all go into the first pass (stride 1): on the cost benchmark's looped programme 6 of the
#: 12 frames reached a coherence of 0.95 by chance (house choice)
SETTLED_GRID_COHERENCE = 0.85
GRID_FIRST_PASS_STRIDE = 1
SETTLED_PATTERN_AGREEMENT = 0.3
#: ... and the predicted lines of a conversion by picking or interpolation stay above this log10 chance
#: probability (house choice: a third of the way to the finding's threshold in log terms)
SETTLED_CONVERSION_LINES_LOG10 = 3.0
#: the first pass also settles (as not assessable) material in which notes showed in at most this share of its
#: polyphonic frames, none of them with a testable fold position, and no steady-tone frame was assessable: mostly
#: noise-like material with a few notes (as the cost benchmark's looped programme, one bass note in 22 frames),
#: whose other frames are expected to carry no evidence either (house choice; verdicts unchanged on the tuning
#: corpora)
SETTLED_NOTE_FRAME_SHARE = 0.1


# ---------------------------------------------------------------- polyphonic fold test
#: frames of the polyphonic fold test: fs/20 samples (50 ms, 20 Hz bins), Hann window.
#: Short enough that a slight vibrato moves a note's low-order folds by little more than a
#: bin within a frame, long enough to resolve the harmonics of notes down to about 100 Hz
#: (own reasoning)
POLY_BIN_HZ = 20.0
#: fold positions (and candidate alias lines) this close to a note's harmonic, in bins, are
#: not used: the window's leakage from the harmonic raises the level there, which would
#: favour whichever positions lie nearer the harmonic grid
POLY_GUARD_BINS = 2.5
#: at most this many polyphonic frames per file, spread over it (cost bound; 128 rather than 32 so
#: that the rank test gathers enough note instances where a vibrato leaves each one weak evidence)
MAX_POLY_FRAMES = 128
#: spectral peaks used by the polyphonic test stand this far above the local floor and
#: within 90 dB of the frame's strongest bin (own reasoning: 10 dB as for alias lines at
#: predicted places; 90 dB keeps quantisation and dither floors out)
POLY_LINE_DB = 10.0
POLY_RANGE_DB = 90.0
#: at most this many notes per frame (multi-pitch estimation by an iterative harmonic sieve)
MAX_NOTES = 5
#: a note is a harmonic series of at least 4 matched peaks, with at least 3 of its first 8
#: harmonics present, explaining at least 1 % of the frame's peak power (own reasoning)
NOTE_MIN_PEAKS = 4
#: candidate fundamentals: the NOTE_SEEDS strongest remaining peaks below NOTE_SEED_MAX_HZ,
#: divided by 1..5 (cost bound; own reasoning)
NOTE_SEEDS = 6
NOTE_SEED_MAX_HZ = 5000.0
NOTE_MIN_SHARE = 0.01
#: a peak matches harmonic k of f0 within 0.3 bin plus 0.05 % of its frequency (within a frame a
#: slight vibrato smears each harmonic, but its centre stays at k times the frame's mean f0);
#: the matched harmonics' power-weighted RMS residual must stay within NOTE_MAX_RESIDUAL_BINS
#: (two notes close to an octave apart must not merge into one series; own reasoning)
NOTE_TOLERANCE_BINS = 0.3
NOTE_TOLERANCE_REL = 5e-4
NOTE_MAX_RESIDUAL_BINS = 0.2
#: fold orders tested: partials up to this multiple of fs (1.5: the first two fold zones, as
#: in the steady-tone test; it covers decimation by 3 without a filter)
POLY_MAX_RATIO = 2.5
#: fold positions are tested only below this fraction of fs: a proper decimation filter's
#: transition band may straddle Nyquist (scipy's resample_poly centres it there), so folds
#: landing in the top 10 % of the band are no evidence of a missing filter (own reasoning)
POLY_TOP_FRACTION = 0.45
#: a fold zone whose positions sit within this fraction of f0 of the harmonic grid is not
#: tested: there folds cannot be told from the harmonics' skirts (own reasoning)
ZONE_GRID_GUARD = 0.12
#: a fold position is tested only where the note's upper harmonics continued with a 1/k
#: amplitude law (naive saw, square and pulse spectra fall so; music falls faster) predict a
#: partial at least this far above the local floor.  Own reasoning; 20 dB was tried and kept
#: almost nothing in dense naive chords, whose own folds raise the floor, so 0 dB
POLY_PREDICTED_DB = 0.0
#: control combs: the predicted fold positions shifted by these fractions of f0 (those that
#: would land within CONTROL_GUARD of the harmonic grid or of another fold zone's offset are
#: skipped).  Under no folding, other notes' partials and noise peaks land on the true and the
#: control combs alike, and a dense set of controls also catches an unexplained comb of
#: another note at any offset; a note instance is evidence of folding only when its predicted
#: comb stands above every control, by FOLD_LEVEL_EXCESS_DB over their median (own reasoning)
CONTROL_SHIFTS = tuple(np.round(np.arange(0.10, 0.91, 0.05), 2))
CONTROL_GUARD = 0.06
MIN_CONTROLS = 3
FOLD_LEVEL_EXCESS_DB = 2.0
#: steady-tone alias lines with no testable polyphonic instance count only from this many
#: frames on (own reasoning)
MIN_LINE_ONLY_FRAMES = 3
#: the file shows folded partials when at least this many note instances (a note in one
#: frame) show their fold comb above every control, and at least this share of the instances
#: tested (own reasoning, checked on the tuning corpus: native mixes reach up to about 0.4 of
#: their instances by chance coincidences with other notes' partials and drums when few
#: instances are testable; naive synthesis about half to all of them)
MIN_EVIDENT_INSTANCES = 5
MIN_EVIDENT_SHARE = 0.45
#: ... and at least this many times the count expected by chance, plus 1 (own reasoning: the
#: chance count assumes independent positions; native mixes reach up to about 2 times it)
CHANCE_FACTOR = 2.0
#: a fold comb whose lines fall with frequency is an unreflected series, not folds.  Where a partial at
#: fs - f folds to f (the first fold zone, which holds the strongest folds), its source frequency falls as f
#: rises: for any source spectrum that falls with frequency (a naive waveform's 1/k, an FM voice's sidebands past
#: its bandwidth, music) the folds rise towards Nyquist, by 5 dB or more over the band for a 1/k spectrum (its
#: source at 0.55 fs against fs).  A comb whose lines instead fall with frequency, as a voice's own partials and
#: sidebands do, is read off lines the voice holds below Nyquist at the fold offsets (a ring modulator's sideband
#: grid, or the odd harmonics of f0/2 when the note found is their octave), which no folding explains.  Such a comb
#: (at least NOTE_MIN_PEAKS lines in the first fold zone, standing POLY_LINE_DB over the floor) whose least-squares
#: level falls by more than FOLD_TREND_MAX_FALL_DB from its lowest to its highest line is no evidence: its instance
#: is still counted (instances, chance) but never evident, and its rank among the controls counts at most at 1/2,
#: the no-folding mean, so that the rule can only take evidence away (setting such instances aside altogether
#: raised the evident share of a band-limited ring modulator of the tuning set over MIN_EVIDENT_SHARE).  Own
#: reasoning (a rising comb passes whatever its slope; 10 dB leaves room for the scatter of line levels read at
#: 20 Hz resolution around a flat or rising trend)
FOLD_TREND_MAX_FALL_DB = 10.0


def falls_as_unreflected(pos_hz: np.ndarray, power: np.ndarray, lines: np.ndarray, first_zone: np.ndarray) -> bool:
    """Whether a fold comb reads an unreflected series (see :data:`FOLD_TREND_MAX_FALL_DB`): ``pos_hz`` the comb's
    positions, ``power`` the power read there, ``lines`` where a line stands out, ``first_zone`` where the fold's
    source is fs - position."""
    use = lines & first_zone
    if int(use.sum()) < NOTE_MIN_PEAKS:
        return False
    x = pos_hz[use]
    span = float(x.max() - x.min())
    if span <= 0:
        return False
    y = 10.0 * np.log10(np.maximum(power[use], 1e-300))
    xc = x - x.mean()
    slope = float(np.sum(xc * (y - y.mean())) / np.sum(xc * xc))
    return -slope * span > FOLD_TREND_MAX_FALL_DB


def _nearest_distance(sorted_hz: np.ndarray, f_hz: np.ndarray):
    """Distance from each of ``f_hz`` to the nearest of ``sorted_hz``, and that element's index."""
    j = np.searchsorted(sorted_hz, f_hz)
    lo = np.clip(j - 1, 0, sorted_hz.size - 1)
    hi = np.clip(j, 0, sorted_hz.size - 1)
    dlo, dhi = np.abs(sorted_hz[lo] - f_hz), np.abs(sorted_hz[hi] - f_hz)
    return np.minimum(dlo, dhi), np.where(dlo <= dhi, lo, hi)


def estimate_notes(freqs_hz: np.ndarray, powers: np.ndarray, bin_hz: float, max_notes: int = MAX_NOTES):
    """Multi-pitch estimate by an iterative harmonic sieve.

    Each round takes the fundamental (one of the 6 strongest remaining peaks below 5 kHz divided by
    1..5, at least :data:`MIN_F0_HZ`) whose matched harmonics carry the most power, prefers
    the higher of two candidates within 5 % of each other (against octave errors), refines it
    by weighted least squares, and removes its harmonics.  Returns a list of dicts: ``f0_hz``,
    ``sigma_hz`` (standard error of f0 from the residuals), ``power`` (matched harmonic power),
    ``top_power`` and ``top_order`` (median power and order of the upper third of the matched
    harmonics).
    """
    f, p = freqs_hz, powers
    alive = np.ones(f.size, dtype=bool)
    total = float(p.sum())
    notes = []
    for _round in range(max_notes):
        idx = np.nonzero(alive)[0]
        if idx.size < NOTE_MIN_PEAKS:
            break
        fi, pi = f[idx], p[idx]
        tol = NOTE_TOLERANCE_BINS * bin_hz + NOTE_TOLERANCE_REL * fi
        best = None
        seeds = np.nonzero(fi <= NOTE_SEED_MAX_HZ)[0]
        # every candidate fundamental (seed peak / 1..5, in the order a scan would take them) is
        # scored at once: rows are candidates, columns the remaining peaks
        f0c = (fi[seeds[np.argsort(pi[seeds])[::-1][:NOTE_SEEDS]]][:, None] / np.arange(1, 6)[None, :]).ravel()
        f0c = f0c[f0c >= MIN_F0_HZ] if f0c.size else f0c
        if f0c.size:
            hc = np.round(fi[None, :] / f0c[:, None])
            okc = (hc >= 1) & (np.abs(fi[None, :] - hc * f0c[:, None]) <= tol[None, :])
            nok = okc.sum(axis=1)
            for ci in np.nonzero(nok >= NOTE_MIN_PEAKS)[0]:
                ok = okc[ci]
                h = hc[ci]
                hk = h[ok]
                h_min, h_max = float(hk.min()), float(hk.max())
                n_low = np.unique(hk[hk <= 8]).size
                if h_min > 2 or n_low < min(3, int(nok[ci])) or n_low < 0.45 * min(8.0, h_max):
                    continue
                w = pi[ok]
                f0_ls = float(np.sum(w * fi[ok] * h[ok]) / np.sum(w * h[ok] ** 2))
                res = fi[ok] - h[ok] * f0_ls
                if float(np.sum(w * res ** 2) / np.sum(w)) > (NOTE_MAX_RESIDUAL_BINS * bin_hz) ** 2:
                    continue
                score = float(w.sum())
                if best is None or score > 1.05 * best[0] or (score > 0.95 * best[0] and f0_ls > 1.01 * best[1]):
                    best = (score, f0_ls, idx[ok], h[ok])
        if best is None or best[0] < NOTE_MIN_SHARE * total:
            break
        score, f0, mi, hh = best
        res = f[mi] - hh * f0
        sigma = math.sqrt(float(np.sum(res ** 2)) / max(1, mi.size - 1) / float(np.sum(hh ** 2)))
        top = hh >= max(1.0, 0.6 * hh.max())
        low = hh[hh <= 12]
        odd_only = bool(low.size >= 3 and np.all(low % 2 == 1))
        notes.append({"f0_hz": f0, "sigma_hz": sigma, "power": score, "odd_only": odd_only,
                      "top_power": float(np.median(p[mi][top])), "top_order": float(np.median(hh[top]))})
        h = np.round(f / f0)
        alive &= ~((h >= 1) & (np.abs(f - h * f0) <= NOTE_TOLERANCE_BINS * bin_hz + NOTE_TOLERANCE_REL * f))
    return notes


def polyphonic_fold_frame(power: np.ndarray, bin_hz: float, fs: float):
    """The polyphonic fold test on one frame's power spectrum.

    Peaks are found and notes estimated (:func:`estimate_notes`).  For each note and each order
    k with ``fs/2 < k*f0 <= POLY_MAX_RATIO*fs`` the predicted fold position ``|k*f0 - m*fs|`` is
    read as the level over the local floor (dB, the highest within ``0.6 bin + 3*k*sigma_f0``,
    at most 2 bins), away from every harmonic of every note.  The mean level over the note's
    fold comb is compared with the same comb moved to other offsets from the harmonic grid
    (:data:`CONTROL_SHIFTS`): the note instance is evidence of folding when its comb stands
    above every control comb, by :data:`FOLD_LEVEL_EXCESS_DB` over their median.

    Returns None when no note was found (noise-like or silent frame), else a dict with
    ``tested`` (fold positions tested), ``instances`` (notes with enough positions and
    controls), ``evident`` (those showing folds), ``chance`` (their expected number under no
    folding, sum of 1/(controls + 1)), ``alias_power`` (power at the evident folds),
    ``harmonic_power``, ``f0_hz``, ``evident_f0_hz``, and ``rank_sum`` / ``rank_var`` (the fold
    combs' ranks among their controls, 0..1, summed over the instances, and the sum of their
    variances under no folding, for :func:`rank_evidence`).
    """
    floor = block_floor(power)
    peaks = find_lines(power, floor, POLY_LINE_DB)
    if peaks.size < NOTE_MIN_PEAKS:
        return None
    peaks = peaks[power[peaks] >= float(power.max()) * 10 ** (-POLY_RANGE_DB / 10)]
    if peaks.size < NOTE_MIN_PEAKS:
        return None
    fr = refine_peaks(power, peaks) * bin_hz
    pw = power[peaks]
    notes = estimate_notes(fr, pw, bin_hz)
    vg = voice_grid(fr, pw, bin_hz, fs)
    if not notes and vg is None:
        return None
    nyq = fs / 2.0
    # every note's harmonics, each with its own uncertainty (3 sigma of f0 times the order, plus
    # the smear of a vibrato within the frame that the residuals show): fold and control
    # positions keep clear of a harmonic by that much more than the main lobe
    orders = [np.arange(1, int(nyq / n["f0_hz"]) + 1) for n in notes]
    harm_all = np.concatenate([n["f0_hz"] * j for n, j in zip(notes, orders)] + [np.zeros(0)])
    unc_all = np.concatenate([3.0 * n["sigma_hz"] * j for n, j in zip(notes, orders)] + [np.zeros(0)])
    order_h = np.argsort(harm_all)
    harm, harm_unc = harm_all[order_h], unc_all[order_h]
    # level over the local floor, dB, and its running maxima over +-1..2 bins
    level = 10.0 * np.log10(np.maximum(power, 1e-300) / np.maximum(floor, 1e-300))
    from masterqc.measure.npkernels import maximum_filter1d
    level_max = [level] + [maximum_filter1d(level, 2 * h + 1, mode="nearest") for h in (1, 2)]
    grid = reflected_grid_frame(fr, pw, power, level_max, harm, harm_unc, bin_hz, fs, vg) if vg is not None else None
    if not notes and grid is None:
        return None
    out = {"tested": 0, "instances": 0, "evident": 0, "chance": 0.0, "alias_power": 0.0,
           "rank_sum": 0.0, "rank_var": 0.0,
           "harmonic_power": float(sum(n["power"] for n in notes)), "f0_hz": [n["f0_hz"] for n in notes],
           "evident_f0_hz": [], **_grid_summary(grid, power)}

    def mean_level(pos, tol, ok):
        half = np.clip(np.ceil(tol[ok] / bin_hz - 0.5).astype(np.int64), 0, 2)
        ib = np.clip(np.round(pos[ok] / bin_hz).astype(np.int64), 0, level.size - 1)
        return np.clip(np.choose(half, [lm[ib] for lm in level_max]), 0.0, 40.0), ib

    for note in notes:
        f0 = note["f0_hz"]
        k = np.arange(int(nyq // f0) + 1, int(POLY_MAX_RATIO * fs / f0) + 1)
        if k.size == 0:
            continue
        base = fold_frequency(k * f0, fs)
        tol = 0.6 * bin_hz + 3.0 * k * note["sigma_hz"]
        frac = np.mod(base / f0, 1.0)
        rho = np.minimum(frac, 1.0 - frac)
        zone_ok = (rho > ZONE_GRID_GUARD) & (tol < 0.2 * f0)
        predicted = note["top_power"] * (note["top_order"] / k) ** 2
        # only folds the note's spectrum makes strong enough to stand out are tested; a note
        # with odd harmonics only (square-like) has no even-order partials to fold
        fl = floor[np.clip(np.round(base / bin_hz).astype(np.int64), 0, floor.size - 1)]
        zone_ok &= predicted >= fl * 10 ** (POLY_PREDICTED_DB / 10)
        if note["odd_only"]:
            zone_ok &= (k % 2) == 1
        d_pos, jh = _nearest_distance(harm, base)
        ok = zone_ok & (base > 3 * bin_hz) & (base < POLY_TOP_FRACTION * fs) & \
            (d_pos > POLY_GUARD_BINS * bin_hz + tol + harm_unc[jh])
        if int(ok.sum()) < MIN_CLEAR_FOLDS:
            continue
        lv_true, ib = mean_level(base, tol, ok)
        half_t = np.clip(np.ceil(tol[ok] / bin_hz - 0.5).astype(np.int64), 0, 2)
        pw_true = np.max(np.stack([np.where(np.abs(o) <= half_t, power[np.clip(ib + o, 0, power.size - 1)], 0.0)
                                   for o in range(-2, 3)]), axis=0)
        unreflected = falls_as_unreflected(base[ok], pw_true, lv_true >= POLY_LINE_DB, k[ok] * f0 < fs)
        # controls: the fold comb moved to other offsets from the harmonic grid, away from the
        # grid and from every offset a fold zone of this note occupies
        offsets = np.unique(np.round(frac[ok], 3))
        # a control comb stays clear of the true combs and the grid by the search window
        # (tolerance, counted up to 1 bin) plus the window's main lobe (2 bins)
        guard = max(CONTROL_GUARD, (min(float(np.median(tol[ok])), bin_hz) + 2.0 * bin_hz) / f0)
        # every control shift at once (rows): shifts landing near the grid or a fold zone's offset
        # are dropped, then each row's positions are checked and read as for the true comb
        shifts = np.asarray(CONTROL_SHIFTS, dtype=float)
        moved = np.mod(offsets[None, :] + shifts[:, None], 1.0)
        refs = np.concatenate([offsets, [0.0, 1.0]])
        dist = np.abs(moved[:, :, None] - refs[None, None, :])
        shifts = shifts[~np.any(np.minimum(dist, 1.0 - dist) < guard, axis=(1, 2))]
        controls = []
        if shifts.size:
            pos = base[None, :] + shifts[:, None] * f0
            d_c, jc = _nearest_distance(harm, pos.ravel())
            okc = zone_ok[None, :] & (pos > 3 * bin_hz) & (pos < POLY_TOP_FRACTION * fs) & \
                (d_c.reshape(pos.shape) > POLY_GUARD_BINS * bin_hz + tol[None, :] + harm_unc[jc].reshape(pos.shape))
            half = np.clip(np.ceil(tol / bin_hz - 0.5).astype(np.int64), 0, 2)
            ibc = np.clip(np.round(pos / bin_hz).astype(np.int64), 0, level.size - 1)
            lv = np.clip(np.choose(np.broadcast_to(half, pos.shape), [lm[ibc] for lm in level_max]), 0.0, 40.0)
            cnt = okc.sum(axis=1)
            means = np.where(okc, lv, 0.0).sum(axis=1) / np.maximum(cnt, 1)
            controls = [float(v) for v in means[cnt >= MIN_CLEAR_FOLDS]]
        if len(controls) < MIN_CONTROLS:
            continue
        out["tested"] += int(ok.sum())
        out["instances"] += 1
        out["chance"] += 1.0 / (len(controls) + 1)
        l_true = float(np.mean(lv_true))
        # the comb's rank among its controls, 0..1: uniform under no folding (mean 1/2, variance
        # (c + 2)/(12 c) for c controls); summed over instances it uses every instance's evidence,
        # not only those that beat every control
        cl = np.asarray(controls)
        rank = (float(np.sum(cl < l_true)) + 0.5 * float(np.sum(cl == l_true))) / cl.size
        if unreflected:   # no evidence: counted, never evident, its rank at most the no-folding mean
            rank = min(rank, 0.5)
        out["rank_sum"] += rank
        out["rank_var"] += (cl.size + 2.0) / (12.0 * cl.size)
        if not unreflected and l_true > max(controls) and l_true - float(np.median(controls)) >= FOLD_LEVEL_EXCESS_DB:
            out["evident"] += 1
            out["evident_f0_hz"].append(f0)
            out["alias_power"] += float(np.sum(power[ib[lv_true >= POLY_LINE_DB]]))
    return out


#: the rank test: over at least RANK_MIN_INSTANCES note instances, the fold combs' ranks among
#: their controls (uniform under no folding) sum to at least RANK_Z_MIN standard deviations above
#: their mean, with a mean rank of at least RANK_MEAN_MIN (house choice, checked on the tuning
#: corpus: its negatives stay below z = 3 and a mean rank of 0.65; unfiltered decimations of
#: tonal music reach z = 4-10 where a vibrato smears their folds too much for most instances to
#: beat every control)
RANK_MIN_INSTANCES = 15
RANK_Z_MIN = 3.5
RANK_MEAN_MIN = 0.66


def rank_evidence(rank_sum: float, rank_var: float, instances: int):
    """``(hit, z)``: the rank test over all note instances (see :data:`RANK_Z_MIN`)."""
    if instances < RANK_MIN_INSTANCES or rank_var <= 0:
        return False, None
    z = (rank_sum - 0.5 * instances) / math.sqrt(rank_var)
    return (z >= RANK_Z_MIN and rank_sum >= RANK_MEAN_MIN * instances), z


def pooled_evidence(frames: list, prefix: str):
    """The evidence of the per-frame results ``frames`` (``[(start, result or None)]``) pooled over the file for
    one test, its keys prefixed ``prefix`` ("" the polyphonic fold combs, "grid_" the reflected line grids):
    ``(assessed, instances, evident, chance, hit, rank_hit, rank_z)``, ``assessed`` the frames with at least one
    instance, ``rank_hit`` and ``rank_z`` :func:`rank_evidence`'s over them, ``hit`` that or :func:`fold_evidence`."""
    assessed = [(s, r) for s, r in frames if r is not None and r[prefix + "instances"] > 0]
    instances = sum(r[prefix + "instances"] for _s, r in assessed)
    evident = sum(r[prefix + "evident"] for _s, r in assessed)
    chance = sum(r[prefix + "chance"] for _s, r in assessed)
    rank_hit, rank_z = rank_evidence(sum(r[prefix + "rank_sum"] for _s, r in assessed),
                                     sum(r[prefix + "rank_var"] for _s, r in assessed), instances)
    hit = fold_evidence(evident, instances, chance) or rank_hit
    return assessed, instances, evident, chance, hit, rank_hit, rank_z


def fold_evidence(evident: int, instances: int, chance: float) -> bool:
    """Folding is evident when enough note instances show their predicted fold comb above every
    control: at least :data:`MIN_EVIDENT_INSTANCES`, at least :data:`MIN_EVIDENT_SHARE` of the
    instances tested, and well beyond the number expected by chance (each instance beats all
    of its c controls with probability 1/(c+1) under no folding)."""
    return (evident >= MIN_EVIDENT_INSTANCES and evident >= MIN_EVIDENT_SHARE * instances
            and evident >= CHANCE_FACTOR * chance + 1.0)


# ---------------------------------------------------------------- reflected line grids (FM, ring modulation)
# A two-operator FM voice sin(2*pi*fc*t + I*sin(2*pi*fm*t)) has its lines at fc + k*fm (k any whole number, those
# at negative frequencies seen at |fc + k*fm|), with amplitudes J_k(I); a ring modulator's strongest lines sit at
# k*f1 +- f2.  Either way the lines lie on a grid of spacing D (fm, f1) at the two offsets +-p (mod D) of any of its
# lines p, and no harmonic series explains them when p is not a multiple of D/2.  Sampled without band-limiting,
# the lines past Nyquist fold to fs - (p + k*D): a second grid, the reflection of the first about fs/2, at the
# offsets fs -+ p (mod D), which differ from +-p unless fs is a multiple of D or 2p is fs modulo D.  A band-limited
# rendering of the same voice has no line there.  The test finds each frame's strongest line grid that no harmonic
# series explains, and reads its reflected comb against the same comb moved to other offsets (controls), as the
# polyphonic test reads a note's fold comb; the whole band is read, top tenth included, as a voice's folds land
# mostly just below Nyquist (a decimation filter's transition band can only put weaker images of lines just above
# Nyquist there, and only of material that has such lines: see REFLECTED_TOP_FRACTION).
#: candidate spacings: differences between the REFLECTED_SEED_PEAKS strongest lines, at least
#: REFLECTED_MIN_SPACING_BINS bins and at most fs/4 (own reasoning: a grid denser than that leaves no room for
#: control combs between its offsets)
REFLECTED_SEED_PEAKS = 12
#: a grid is fitted to the frame's REFLECTED_GRID_PEAKS strongest lines at most (cost bound)
REFLECTED_GRID_PEAKS = 48
REFLECTED_MIN_SPACING_BINS = 8.0
#: a grid: at least NOTE_MIN_PEAKS lines at its two offsets (within 0.4 bin plus 0.05 % of the frequency, as for
#: a note's harmonics), explaining at least REFLECTED_MIN_SHARE of the frame's line power (own reasoning)
REFLECTED_MATCH_BINS = 0.4
REFLECTED_MIN_SHARE = 0.1
#: offsets closer than REFLECTED_OFFSET_GUARD_BINS bins (a line is read within +-2 bins, plus the window's main lobe
#: of +-2 bins), or than this fraction of the spacing, cannot be told apart; a grid whose two offsets +-p are that close is a
#: harmonic series of D (p near 0) or of D/2 with odd harmonics only (p near D/2), the polyphonic test's case
#: (own reasoning, as CONTROL_GUARD)
REFLECTED_OFFSET_GUARD = 0.05
REFLECTED_OFFSET_GUARD_BINS = 3.0
#: reflected positions are read up to this fraction of fs, and a line there counts only from REFLECTED_MIN_REL_DB under
#: the grid's strongest line up.  A proper decimation filter folds what its transition band passes: scipy's
#: resample_poly (the default Kaiser design, beta 5) is down 6 dB at Nyquist, 22.6 dB at 0.55 fs and 53 dB from
#: 0.58 fs on (computed from its taps), so it folds lines into the top tenth of the band at -6 to -23 dB, and below
#: it at 23 dB or more (53 dB or more below 0.42 fs) under their source; the top tenth is left out as in the
#: polyphonic test (POLY_TOP_FRACTION), and 50 dB is the house choice between that stop band and a naive voice's
#: folds (10-50 dB under its strongest line in the tuning corpus).  Read over the whole band (top tenth included)
#: and with no level floor, the test called 5 of 24 resample_poly-decimated twins of the tuning corpus folded
REFLECTED_TOP_FRACTION = POLY_TOP_FRACTION
REFLECTED_MIN_REL_DB = 50.0


def _circ(a, b, period):
    """Circular distance between ``a`` and ``b`` modulo ``period``."""
    d = np.mod(np.asarray(a) - np.asarray(b), period)
    return np.minimum(d, period - d)


@functools.lru_cache(maxsize=32)
def _upper_pairs(n: int):
    """Indices of the pairs (i < j) of an n x n table (``np.triu_indices(n, 1)``), computed once per n."""
    return np.triu_indices(n, 1)


def _offset_guard_hz(spacing_hz: float, bin_hz: float) -> float:
    """How far apart two offsets of a grid of ``spacing_hz`` must be to be told apart (see REFLECTED_OFFSET_GUARD)."""
    return max(REFLECTED_OFFSET_GUARD * spacing_hz, REFLECTED_OFFSET_GUARD_BINS * bin_hz)


def voice_grid(freqs_hz: np.ndarray, powers: np.ndarray, bin_hz: float, fs: float):
    """The frame's strongest line grid (see the comment above): ``(p_hz, spacing_hz, sigma_p_hz, sigma_spacing_hz,
    matched)`` with ``p`` the grid's offset refined by least squares over its matched lines (``matched``, their
    indices among the peaks given), or None when no grid of at least NOTE_MIN_PEAKS lines and REFLECTED_MIN_SHARE of the
    power exists, or the best one is a harmonic series (offset near 0 or D/2)."""
    if freqs_hz.size < NOTE_MIN_PEAKS:
        return None
    order = np.argsort(powers)[::-1]
    keep = np.arange(freqs_hz.size)
    if order.size > REFLECTED_GRID_PEAKS:   # the strongest lines only (cost bound)
        keep = np.sort(order[:REFLECTED_GRID_PEAKS])
        freqs_hz, powers = freqs_hz[keep], powers[keep]
        order = np.argsort(powers)[::-1]
    p = float(freqs_hz[order[0]])
    top = freqs_hz[order[:REFLECTED_SEED_PEAKS]]
    d = np.abs(top[:, None] - top[None, :])[_upper_pairs(top.size)]
    d = d[(d >= REFLECTED_MIN_SPACING_BINS * bin_hz) & (d <= fs / 4.0)][:, None]
    if d.size == 0:
        return None
    tol = REFLECTED_MATCH_BINS * bin_hz + NOTE_TOLERANCE_REL * freqs_hz
    # rows: candidate spacings; a line matches when it sits at +p or -p modulo the spacing
    r_plus = np.mod(freqs_hz - p, d)
    r_minus = np.mod(freqs_hz + p, d)
    ok = (np.minimum(r_plus, d - r_plus) <= tol) | (np.minimum(r_minus, d - r_minus) <= tol)
    d = d[:, 0]
    score = ok @ powers
    cnt = ok.sum(axis=1)
    good = np.nonzero(cnt >= NOTE_MIN_PEAKS)[0]
    if good.size == 0:
        return None
    # the best explained power; of spacings within 5 % of it the largest (a divisor of the spacing explains as
    # much, with a denser grid)
    best = float(score[good].max())
    ci = good[score[good] >= 0.95 * best]
    ci = int(ci[np.argmax(d[ci])])
    if best < REFLECTED_MIN_SHARE * float(powers.sum()):
        return None
    spacing = float(d[ci])
    m = ok[ci]
    f = freqs_hz[m]
    sign = np.where(_circ(f, p, spacing) <= _circ(f, -p, spacing), 1.0, -1.0)
    j = np.round((f - sign * p) / spacing)
    # weighted least squares for (p, D) in f = sign*p + j*D (the 2x2 normal equations)
    w = powers[m]
    s_aa, s_ab, s_bb = float(np.sum(w)), float(np.sum(w * sign * j)), float(np.sum(w * j * j))
    r_a, r_b = float(np.sum(w * sign * f)), float(np.sum(w * j * f))
    det = s_aa * s_bb - s_ab * s_ab
    if not det > 0:
        return None
    p_ls, d_ls = (s_bb * r_a - s_ab * r_b) / det, (s_aa * r_b - s_ab * r_a) / det
    if not d_ls > 0:
        return None
    res = f - sign * p_ls - j * d_ls
    var = float(np.sum(res ** 2)) / max(1, f.size - 2)
    sigma_p = math.sqrt(var / f.size)
    sigma_d = math.sqrt(var / max(float(np.sum((j - j.mean()) ** 2)), 1.0))
    if float(_circ(2.0 * p_ls, 0.0, d_ls)) < 2.0 * _offset_guard_hz(d_ls, bin_hz):
        return None   # a harmonic series of the spacing or of half of it: the polyphonic test's case
    return p_ls, d_ls, sigma_p, sigma_d, keep[m]


def reflected_grid_frame(freqs_hz, powers, power, level_max, harm, harm_unc, bin_hz: float, fs: float, grid=None):
    """The reflected-grid test on one frame: the frame's voice grid (:func:`voice_grid`), its reflected comb read
    against control combs.  ``level_max``: the frame's level over the floor (dB) and its running maxima over +-1
    and +-2 bins; ``harm``, ``harm_unc``: the harmonics of the frame's notes (sorted) and their uncertainties,
    which positions keep clear of; ``power``: the frame's power spectrum; ``grid``: :func:`voice_grid`'s result when
    already found.  Returns None when no grid can be tested, else a dict: ``tested`` (positions),
    ``controls``, ``level_db`` (mean level over the reflected comb), ``control_db`` (the controls' mean levels),
    ``alias_power`` (power of the reflected lines standing POLY_LINE_DB over the floor), ``grid_power`` (the
    grid's matched line power), ``spacing_hz``, ``offset_hz``."""
    g = voice_grid(freqs_hz, powers, bin_hz, fs) if grid is None else grid
    if g is None:
        return None
    p, sp, s_p, s_d, matched = g
    level = level_max[0]
    nat = np.mod(np.array([p, -p]), sp)
    refl = np.mod(np.array([fs - p, fs + p]), sp)
    guard = _offset_guard_hz(sp, bin_hz)
    refl = np.unique(np.round(refl[np.min(_circ(refl[:, None], nat[None, :], sp), axis=1) > guard], 6))
    if refl.size == 0:
        return None
    top = min(REFLECTED_TOP_FRACTION * fs, fs / 2.0 - 2.0 * bin_hz)
    weak = float(np.max(powers[matched])) * 10 ** (-REFLECTED_MIN_REL_DB / 10)
    j = np.arange(0, int(top // sp) + 2)

    def comb(offsets):
        pos = (offsets[:, None] + j[None, :] * sp).ravel()
        pos = pos[(pos > 3 * bin_hz) & (pos < top)]
        src = fs - pos   # where a line folding there came from (the first fold zone)
        tol = 0.6 * bin_hz + 3.0 * (s_p + np.abs(src) / sp * s_d)
        keep = tol < 0.2 * sp
        if harm.size:
            dh, jh = _nearest_distance(harm, pos)
            keep &= dh > POLY_GUARD_BINS * bin_hz + tol + harm_unc[jh]
        pos, tol = pos[keep], tol[keep]
        half = np.clip(np.ceil(tol / bin_hz - 0.5).astype(np.int64), 0, 2)
        ib = np.clip(np.round(pos / bin_hz).astype(np.int64), 0, level.size - 1)
        if not pos.size:
            return np.zeros(0), ib, pos, np.zeros(0)
        lv = np.clip(np.choose(half, [lm[ib] for lm in level_max]), 0.0, 40.0)
        # lines weaker than a proper decimation filter's stop band leaves count as nothing
        top_pw = np.max(np.stack([np.where(np.abs(o) <= half, power[np.clip(ib + o, 0, power.size - 1)], 0.0)
                                  for o in range(-2, 3)]), axis=0)
        return np.where(top_pw >= weak, lv, 0.0), ib, pos, top_pw

    lv_true, ib_true, pos_true, pw_true = comb(refl)
    if lv_true.size < MIN_CLEAR_FOLDS:
        return None
    # every reflected position is in the first fold zone (its source at fs - position)
    unreflected = falls_as_unreflected(pos_true, pw_true, lv_true >= POLY_LINE_DB, np.ones(pos_true.size, dtype=bool))
    refs = np.concatenate([nat, refl])
    controls = []
    for s in CONTROL_SHIFTS:
        moved = np.mod(refl + s * sp, sp)
        if np.any(_circ(moved[:, None], refs[None, :], sp) < guard):
            continue
        lv = comb(moved)[0]
        if lv.size >= MIN_CLEAR_FOLDS:
            controls.append(float(np.mean(lv)))
    if len(controls) < MIN_CONTROLS:
        return None
    return {"tested": int(lv_true.size), "controls": controls, "level_db": float(np.mean(lv_true)),
            "line_bins": ib_true[lv_true >= POLY_LINE_DB], "grid_power": float(np.sum(powers[matched])),
            "spacing_hz": sp, "offset_hz": float(np.mod(p, sp)), "unreflected": unreflected}


def _grid_summary(grid, power: np.ndarray) -> dict:
    """The reflected-grid test's frame result (of :func:`reflected_grid_frame`, or None) as counts that add up over
    frames like the polyphonic test's note instances: ``grid_instances`` (0 or 1), ``grid_evident`` (the reflected
    comb above every control, by FOLD_LEVEL_EXCESS_DB over their median), ``grid_chance``, ``grid_rank_sum``,
    ``grid_rank_var``, ``grid_alias_power``, ``grid_power``, ``grid_tested``."""
    out = {"grid_instances": 0, "grid_evident": 0, "grid_chance": 0.0, "grid_rank_sum": 0.0, "grid_rank_var": 0.0,
           "grid_alias_power": 0.0, "grid_power": 0.0, "grid_tested": 0}
    if grid is None:
        return out
    cl = np.asarray(grid["controls"])
    lt = grid["level_db"]
    rank = (float(np.sum(cl < lt)) + 0.5 * float(np.sum(cl == lt))) / cl.size
    unreflected = bool(grid.get("unreflected"))
    if unreflected:   # no evidence (falls_as_unreflected): never evident, its rank at most the no-folding mean
        rank = min(rank, 0.5)
    out.update(grid_instances=1, grid_chance=1.0 / (cl.size + 1), grid_tested=grid["tested"],
               grid_rank_sum=rank, grid_rank_var=(cl.size + 2.0) / (12.0 * cl.size), grid_power=grid["grid_power"])
    if not unreflected and lt > float(cl.max()) and lt - float(np.median(cl)) >= FOLD_LEVEL_EXCESS_DB:
        out["grid_evident"] = 1
        out["grid_alias_power"] = float(np.sum(power[grid["line_bins"]]))
    return out


# ---------------------------------------------------------------- sample-sharp steps
# A waveform with a jump (sawtooth wrap, square or pulse edge, hard-sync reset) that is evaluated
# at the sample instants without band-limiting ("naive" synthesis, digital hard clipping of a
# square-like wave) keeps its spectrum falling as 1/k past Nyquist, and all of it folds.  In the
# samples this shows as a jump between two neighbouring samples with nothing around it: the
# samples on either side lie on smooth curves.  A band-limited jump cannot do that: its samples
# ring around the jump (a sampled ideal low-pass step overshoots by 9 % of the jump at some
# sample near it, whatever its position between samples), and so does every minimum-phase or
# oversampled-and-filtered variant.  The test fits each large jump's neighbourhood with a smooth
# curve plus an ideal step between two samples, and counts the jumps that fit to a small fraction
# of their size.
#: frames of fs/10 samples (100 ms), at most this many spread over the file (cost bound)
STEP_FRAME_DIVISOR = 10
MAX_STEP_FRAMES = 32
#: neighbourhood of a jump: this many samples either side, fitted by a smooth curve plus a step
#: between the two middle samples (own reasoning: long enough to hold the ringing of a
#: band-limited step that decays as 1/(pi*n), short enough to rarely hold a second jump of a
#: voice up to about 3.5 kHz)
STEP_HALF_WINDOW = 6
#: the smooth curve either side of a jump: a polynomial of this degree over the neighbourhood.  A cubic
#: follows a sinusoid of a few kHz over 13 samples far better than a quadratic (a naive oscillator multiplied
#: by a sine, as a ring modulator does, puts such a curve around every jump; a quadratic left 1-3 % of the
#: jump there, a cubic 0.3-1 %), while no polynomial of low degree follows the ringing of a band-limited step,
#: which decays as 1/(pi*n) and changes sign every sample: the sampled ideal step keeps a residual of at least
#: 0.0187 of the jump with a cubic (0.0215 with a quadratic).  Checked on every 100 ms of every band-limited,
#: native and speech file of the tuning corpus (seed 1000): at most 2 jumps in a file come out sample-sharp
#: with the cubic (1 with the quadratic; the least residual 0.008 either way), against MIN_SHARP_STEPS = 40
STEP_POLY_DEGREE = 3
#: a jump is sample-sharp when the fit's RMS residual is below this fraction of the jump.  House
#: choice, checked on the tuning corpus: band-limited twins of naive waveforms rarely go below about
#: 0.02 (their ringing; see STEP_POLY_DEGREE for the few that do), naive voices sit below 0.002 even
#: with pink noise 30 dB under them
STEP_MAX_RESIDUAL = 0.01
#: jumps considered are at least this fraction of the frame's RMS (house choice: a naive voice's
#: jump is 2-4 times its RMS; a small floor keeps quantisation steps of a low-level passage out)
STEP_MIN_JUMP_REL = 0.15
#: at most this many of a frame's largest jumps are fitted per channel (cost bound)
STEP_MAX_CANDIDATES = 1500
#: a jump is a sample difference at least this many times the larger of the differences two samples either
#: side.  A jump J between two samples adds J to one difference only.  A sinusoid at f has differences whose
#: peak falls by cos(4*pi*f/fs) two samples away, so smooth content below fs/12 never passes 2 however steep
#: it is (a product of a naive oscillator and a sine at a few kHz, ring modulation, is full of such steep
#: stretches); a band-limited step does pass (the differences of a sampled ideal low-pass step are samples of
#: sin(pi*t)/(pi*t): 0.64 J at the jump, 0.13 J two samples on), so band-limited jumps stay in the share's
#: denominator (analytic; the threshold 2 is a house choice between those)
STEP_JUMP_CONTRAST = 2.0
#: folded content from sample-sharp jumps: at least this many, in at least STEP_MIN_FRAMES
#: frames, and at least this share of the jumps fitted (house choice: the tuning corpus' native
#: material, speech and band-limited synthesis show none at all; naive voices show hundreds)
MIN_SHARP_STEPS = 40
STEP_MIN_FRAMES = 3
MIN_SHARP_SHARE = 0.05
#: standard sampling rates whose sample grid a held (sample-and-hold) upsampling would put its
#: jumps on; when the sharp jumps line up on one of these grids (phase concentration above
#: STEP_GRID_CONCENTRATION) they come from holding each source sample, not from folding
HOLD_SOURCE_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000)
STEP_GRID_CONCENTRATION = 0.8


def _step_design(half: int = STEP_HALF_WINDOW, degree: int = STEP_POLY_DEGREE):
    n = np.arange(-half, half + 1, dtype=float)
    a = np.stack([(n / half) ** d for d in range(degree + 1)] + [(n > 0).astype(float)], axis=1)
    return a, np.linalg.pinv(a)


_STEP_A, _STEP_PINV = _step_design()


def sharp_steps(x: np.ndarray, half: int = STEP_HALF_WINDOW, max_candidates: int = STEP_MAX_CANDIDATES):
    """The jumps of one channel's frame ``x`` and how sharp they are.

    Candidates are local maxima of ``|x[i+1] - x[i]|`` at least :data:`STEP_MIN_JUMP_REL` of the
    frame's RMS and at least :data:`STEP_JUMP_CONTRAST` times the differences two samples either side,
    the largest ``max_candidates`` of them.  Each neighbourhood ``x[i-half .. i+half+1]``
    is fitted (least squares) by a polynomial of degree :data:`STEP_POLY_DEGREE` plus ``J*[n > 0]`` (the
    jump between samples i and i+1).  Returns ``(index, jump, residual)`` arrays: the sample before each jump, the fitted jump
    J, and the fit's RMS residual over |J|.
    """
    x = np.asarray(x, dtype=float)
    if x.size < 2 * half + 4:
        return np.zeros(0, dtype=np.int64), np.zeros(0), np.zeros(0)
    rms = math.sqrt(float(np.mean(x * x)))
    a = np.abs(np.diff(x))
    if rms == 0.0:
        return np.zeros(0, dtype=np.int64), np.zeros(0), np.zeros(0)
    inner = a[1:-1]
    cand = np.nonzero((inner > a[:-2]) & (inner >= a[2:]) & (inner >= STEP_MIN_JUMP_REL * rms))[0] + 1
    cand = cand[(cand >= half) & (cand < x.size - half - 1)]
    # only differences that stand out against the differences two samples either side are jumps (see
    # STEP_JUMP_CONTRAST): a steep smooth stretch is no jump, and counting it would dilute the share
    cand = cand[a[cand] >= STEP_JUMP_CONTRAST * np.maximum(a[cand - 2], a[cand + 2])]
    if cand.size > max_candidates:
        cand = np.sort(cand[np.argsort(a[cand])[::-1][:max_candidates]])
    if cand.size == 0:
        return cand, np.zeros(0), np.zeros(0)
    seg = x[cand[:, None] + np.arange(-half, half + 1)[None, :]]
    coef = seg @ _STEP_PINV.T
    res = seg - coef @ _STEP_A.T
    jump = coef[:, -1]
    resid = np.sqrt(np.mean(res * res, axis=1)) / np.maximum(np.abs(jump), 1e-300)
    keep = np.abs(jump) >= STEP_MIN_JUMP_REL * rms
    return cand[keep], jump[keep], resid[keep]


def sharp_step_frame(frame: np.ndarray) -> dict:
    """:func:`sharp_steps` on every channel of a ``(samples, channels)`` frame: ``fitted`` (jumps
    fitted), ``sharp`` (those with residual below :data:`STEP_MAX_RESIDUAL`), ``sharp_jump_sq`` (sum of
    their squared jumps), ``power`` (sum over channels of the mean square), ``positions`` (frame
    indices of the sharp jumps)."""
    out = {"fitted": 0, "sharp": 0, "sharp_jump_sq": 0.0, "power": 0.0, "positions": []}
    for c in range(frame.shape[1]):
        x = frame[:, c]
        out["power"] += float(np.mean(x * x))
        idx, jump, resid = sharp_steps(x)
        ok = resid < STEP_MAX_RESIDUAL
        out["fitted"] += int(idx.size)
        out["sharp"] += int(ok.sum())
        out["sharp_jump_sq"] += float(np.sum(jump[ok] ** 2))
        out["positions"].append(idx[ok])
    out["positions"] = np.concatenate(out["positions"]) if out["positions"] else np.zeros(0, dtype=np.int64)
    return out


def step_grid(positions_abs: np.ndarray, fs: float):
    """Whether the sharp jumps at absolute sample ``positions_abs`` sit on a fixed sample grid, which
    makes them no evidence of folding: ``("hold", rate_hz)`` when they line up on the sample grid
    of a standard source rate (a held upsampling from that rate; only rates at least
    2*:data:`STEP_HALF_WINDOW` + 2 samples apart are considered, the fit needs one jump per
    neighbourhood), ``("period", samples)`` when they repeat every whole number of samples (a
    waveform whose period is a whole number of samples is an exactly periodic sequence: whatever
    folded lands on its own harmonics), else None.  "Line up" means a phase concentration above
    :data:`STEP_GRID_CONCENTRATION`."""
    if positions_abs.size < MIN_SHARP_STEPS:
        return None
    # the jump sits between samples i and i+1: a held source sample began at i+1
    p = np.sort(positions_abs.astype(np.int64)) + 1
    for r in HOLD_SOURCE_RATES_HZ:
        if fs / r < 2 * STEP_HALF_WINDOW + 2:
            continue
        z = np.exp(2j * math.pi * np.mod(p * r, int(fs)) / fs)
        if abs(complex(np.mean(z))) > STEP_GRID_CONCENTRATION:
            return ("hold", int(r))
    gaps = np.diff(p)
    gaps = gaps[gaps >= 2]
    if gaps.size:
        period = int(np.bincount(gaps).argmax())
        z = np.exp(2j * math.pi * np.mod(p, period) / period)
        if abs(complex(np.mean(z))) > STEP_GRID_CONCENTRATION:
            return ("period", period)
    return None


def step_evidence(sharp: int, fitted: int, frames_with_sharp: int) -> bool:
    """Folded content from sample-sharp jumps: enough of them, spread over enough frames, and a
    share of the jumps fitted that chance coincidences cannot give."""
    return (sharp >= MIN_SHARP_STEPS and frames_with_sharp >= STEP_MIN_FRAMES
            and sharp >= MIN_SHARP_SHARE * fitted)


def step_alias_ratio_db(jump_sq: float, samples: float, power: float):
    """Alias-to-signal power ratio, dB, that sample-sharp jumps imply.  A jump J at a random place
    between samples has the spectrum ``J/(j*2*pi*f)``; a train of them at r jumps per second has
    the one-sided power density ``r*J^2/(2*pi^2*f^2)``, whose integral above Nyquist,
    ``r*J^2/(pi^2*fs)``, all folds.  Over N samples (r*T jumps) that is ``sum(J^2)/(pi^2*N)``,
    compared with the mean square of the same frames (``power``).  A lower bound: jumps that
    collide with others are not counted."""
    if jump_sq <= 0 or power <= 0 or samples <= 0:
        return None
    return 10.0 * math.log10(jump_sq / (math.pi ** 2 * samples) / power)


# ---------------------------------------------------------------- flat tops at a ceiling (saturation at the file's rate)
# A memoryless clipping curve evaluated at the sample instants (a hard clipper, or a soft clipper driven into its
# flat part) leaves the samples sitting exactly on its ceiling for runs of several samples, entered and left by a
# large step: a corner between two samples, whose spectrum falls as 1/f**2 past Nyquist and folds.  A band-limited
# waveform cannot do that: three samples within q of a smooth maximum (quadratic about it) bound the curvature so
# that the samples two away lie at most 4 q lower (16 q for a quartic maximum), and a band-limited version of the
# same flat top rings about the ceiling (its twin overshoots), so it has no run there at all.  The test counts, per
# channel and polarity, the runs of at least CEILING_MIN_RUN samples within q of the channel's extreme value over
# the whole file, entered and left by a step of at least CEILING_ENTRY_FACTOR q; q is half a code of integer PCM or
# CEILING_REL_TOL of the extreme value, whichever is larger.  A held (sample-and-hold) upsampling puts runs of
# equal samples at random levels; only the one source sample at the file's extreme reaches the ceiling, so
# CEILING_MIN_PLATEAUS runs there cannot come from it.
#: run length (own reasoning: two equal samples can be a smooth maximum midway between them)
CEILING_MIN_RUN = 3
#: tolerance about the ceiling, relative (0.0009 dB; own reasoning: a soft clipper's curve within it is flat at
#: the sample scale) and the step that must enter and leave a run, in units of q (own reasoning: 4 q for a
#: quadratic maximum and 16 q for a quartic one, as above; 50 leaves a margin of 3 over the quartic)
CEILING_REL_TOL = 1e-4
CEILING_ENTRY_FACTOR = 50.0
#: folded content from flat tops: at least this many runs at the ceilings over the file (house choice: the
#: tuning corpus' clipped voices show hundreds, its band-limited twins, native mixes and speech none)
CEILING_MIN_PLATEAUS = 20
#: the stream is counted in chunks of this many samples, whatever the engine's block size (a run across two chunks
#: is not counted; house choice)
CEILING_CHUNK = 65536


def ceiling_plateaus(x: np.ndarray, level: float, q: float) -> int:
    """Runs of at least CEILING_MIN_RUN samples of ``x`` within ``q`` under ``level`` (a positive ceiling; pass
    ``-x`` and the negated floor for the negative side), entered and left by a step of at least
    CEILING_ENTRY_FACTOR * q; runs touching the ends of ``x`` are not counted."""
    at = x >= level - q
    if np.count_nonzero(at) < CEILING_MIN_RUN:
        return 0
    d = np.diff(np.concatenate(([0], at.astype(np.int8), [0])))
    starts = np.nonzero(d == 1)[0]
    ends = np.nonzero(d == -1)[0]   # one past the run
    ok = (ends - starts >= CEILING_MIN_RUN) & (starts >= 1) & (ends < x.size)
    starts, ends = starts[ok], ends[ok]
    if starts.size == 0:
        return 0
    step = CEILING_ENTRY_FACTOR * q
    good = (level - x[starts - 1] >= step) & (level - x[ends] >= step)
    return int(good.sum())


def ceiling_tolerance(level: float, lsb: float) -> float:
    """q of the flat-top test: half a code (``lsb`` the code step, 0 for float files) or CEILING_REL_TOL of the
    ceiling ``level``, whichever is larger."""
    return max(0.5 * lsb, CEILING_REL_TOL * abs(level))


# ---------------------------------------------------------------- irregular sample grid
# Sample dropping (deleting every k-th sample, or a nearest-sample rate change without a filter)
# takes the samples on an irregular time grid: at each drop the sample clock skips one source
# sample, so every partial's phase advances by 2*pi*f/fs at the same instant (a pure tone
# x[n] = sin(2*pi*f*n/fs) with sample d deleted reads sin(2*pi*f*(n + 1)/fs) from d on).  A
# linear predictor fitted to the frame (order GRID_LPC_ORDER) cannot foresee the skip, so its
# prediction error jumps at every drop instant, by about the local slope of the waveform; the
# drop instants follow the sample clock (every k-1 samples for one in k deleted; where
# frac(n*fs_in/fs) wraps for a nearest-sample change), so the error's magnitude carries a line at
# the drop rate alpha (cycles per sample) whose phase is locked to the absolute sample index over
# the whole file.  Notes, vibrato and speech put lines into the error too, but none keeps one
# phase from one part of the file to another.  The test reads the error-magnitude spectrum of
# frames spread over the file, takes the lines present in most frames, and measures how well
# their phases, referred to the absolute sample index, agree from frame to frame (the length of
# the mean unit phasor, searched over the line's frequency to a fraction of the frames' spread).
#: frames of GRID_FRAME samples, at most GRID_FRAMES spread over the file (cost bound)
GRID_FRAME = 8192
GRID_FRAMES = 12
GRID_MIN_FRAMES = 6
#: the frames must spread over at least this long (own reasoning: over a second or two a note held
#: unchanged keeps its phase as well as the sample clock does)
GRID_MIN_SPAN_S = 4.0
#: the drop-pattern test alone runs on shorter files, down to this span, on frames that do not overlap: it tests
#: only the periods a picking conversion makes and rules out a signal periodic at them (house choice)
GRID_PATTERN_MIN_SPAN_S = 2.0
#: linear-prediction order (own reasoning: enough to whiten a mix's spectral envelope)
GRID_LPC_ORDER = 32
#: channels (per frame) whose prediction gain exceeds this are left out of the grid tests (house choice: the
#: tuning corpus' full-band channels, picked or not, show 9-35 dB, an LFE low-passed at 120 Hz 55-59 dB, where a
#: resample_poly twin's LFE alone gave a clock-locked error line at 26/147 cycles per sample)
GRID_MAX_PREDICTION_GAIN_DB = 45.0
#: error-magnitude spectra are zero-padded this many times (a line off the bin grid keeps its phase)
GRID_PAD = 4
#: grid_coherence builds its phase table (frequency offsets x frames, complex) this many elements at a time:
#: about 4 MB whatever the file's duration (house choice: memory flat in duration)
GRID_PHASE_TABLE_ELEMENTS = 1 << 18
#: drop rates searched: from this many cycles per sample up to 0.5 (one drop in 200 samples)
GRID_MIN_ALPHA = 0.005
#: lines whose median level over the frames stands this far over the local median are candidates,
#: the GRID_CANDIDATES strongest of them (own reasoning)
GRID_LINE_RATIO = 3.0
GRID_CANDIDATES = 8
#: drop rates m/L of a whole-number upsampling factor L are not tested: a held or interpolated
#: integer upsampling repeats its pattern every L samples as well (house choice)
GRID_UPSAMPLING_FACTORS = (2, 3, 4, 6, 8)
#: an irregular sample grid: the line's phases agree to a mean unit phasor of at least this length
#: (house choice, checked on the tuning corpus: sample dropping there reaches 0.97-1.0, a band-limited
#: square chord 0.91; with 12 frames of random phase the length is about 0.29, and the search over
#: frequency raises the largest of them)
GRID_MIN_COHERENCE = 0.95
#: a steady line of the signal stands this far over the local floor in most frames (own reasoning);
#: an error-magnitude line at a multiple of one (up to GRID_CONTENT_MULTIPLES, folded) is the
#: content's own period, not the sample clock's
GRID_STEADY_DB = 10.0
GRID_CONTENT_MULTIPLES = 128


@functools.lru_cache(maxsize=8)
def _hann(n: int) -> np.ndarray:
    """The symmetric Hann window of ``n`` points (``np.hanning``), computed once per length."""
    w = np.hanning(n)
    w.flags.writeable = False
    return w


def grid_error_magnitude(frame: np.ndarray, order: int = GRID_LPC_ORDER):
    """Normalised linear-prediction error magnitude of a ``(samples, channels)`` frame: per channel,
    ``|e[n]|`` divided by its mean (the predictor from the frame's own autocorrelation, Hann
    window), summed over channels, and the frame's power spectrum (Hann window, zero-padded to twice
    its length, summed over channels); None for a silent frame."""
    n = frame.shape[0]
    lags = np.abs(np.subtract.outer(np.arange(order), np.arange(order)))   # Toeplitz index table
    win = _hann(n)
    out = np.zeros(n)
    power = np.zeros(n // 2 + 1)
    used = 0
    for c in range(frame.shape[1]):
        x = np.asarray(frame[:, c], dtype=np.float64)
        spec = np.fft.rfft(x * win)
        pw = spec.real ** 2 + spec.imag ** 2
        power += pw
        # circular autocorrelation: the wrapped part at lags up to the order is a product of the Hann
        # window's two tails, about 1e-12 of r[0] (own reasoning)
        r = np.fft.irfft(pw, n)[:order + 1]
        if not r[0] > 0:
            continue
        r[0] *= 1.0 + 1e-6
        try:
            a = np.linalg.solve(r[:order][lags], r[1:order + 1])   # the normal equations
        except np.linalg.LinAlgError:
            continue
        # a channel whose content the predictor foresees almost entirely (a low-passed LFE) leaves in its error
        # mostly the residue of the filters it went through: a polyphase converter's stop-band leakage repeats
        # with the filter's phase cycle, locked to the sample clock as a drop pattern is
        if float(r[1:order + 1] @ a) > (1.0 - 10 ** (-GRID_MAX_PREDICTION_GAIN_DB / 10)) * r[0]:
            continue
        # the prediction-error (FIR) filter, started from rest: e[n] = x[n] - sum_k a[k] x[n-1-k]
        e = np.abs(np.convolve(x, np.concatenate([[1.0], -a]))[:n])
        e[:order] = np.mean(e[order:])
        mean = float(np.mean(e))
        if mean > 0:
            out += e / mean
            used += 1
    return (out, power) if used else None


def grid_frame_spectrum(frame: np.ndarray):
    """``(error_spectrum, signal_power, error_magnitude)``: the complex spectrum (zero-padded GRID_PAD
    times, Hann window) of the error magnitude of :func:`grid_error_magnitude`, the frame's power
    spectrum, and the error magnitude itself; None for a silent frame."""
    got = grid_error_magnitude(frame)
    if got is None:
        return None
    m, power = got
    return np.fft.rfft((m - m.mean()) * _hann(m.size), GRID_PAD * m.size), power, m


def steady_lines(signal_power: np.ndarray, count: int = 4):
    """Frequencies (cycles per sample) of the ``count`` strongest lines of the signal that stand
    GRID_STEADY_DB over the local floor in most frames (median over the frames' power spectra, rows
    of ``signal_power``, each of ``2*(columns - 1)`` points): a note held unchanged through the file."""
    norm = signal_power / (row_block_floor(signal_power, 32) + 1e-300)
    med = column_median(norm)
    peaks = find_lines(med, np.ones_like(med), GRID_STEADY_DB)
    peaks = peaks[np.argsort(med[peaks])[::-1][:count]]
    if peaks.size == 0:
        return np.zeros(0)
    return np.sort(refine_peaks(med, np.sort(peaks)) / (2.0 * (signal_power.shape[1] - 1)))


def content_explains(alpha: float, lines: np.ndarray, tolerance: float, line_error: float = 0.0) -> bool:
    """Whether a line of the error magnitude at ``alpha`` (cycles per sample) can come from steady
    content: within ``tolerance`` (plus ``line_error`` times the multiple) of a multiple m*c, folded
    into 0..0.5, of a steady line c, m = 1..GRID_CONTENT_MULTIPLES.  The error magnitude of a note
    held unchanged is a periodic function of the note's phase: its lines sit at multiples of the
    note's frequency, and those above half the rate fold like any sampled partial."""
    if lines.size == 0:
        return False
    m = np.arange(1, GRID_CONTENT_MULTIPLES + 1)[None, :]
    pos = np.mod(lines[:, None] * m, 1.0)
    pos = np.minimum(pos, 1.0 - pos)
    return bool(np.any(np.abs(pos - alpha) <= tolerance + m * line_error))


def column_median(a: np.ndarray) -> np.ndarray:
    """The median of every column of ``a`` (the same numbers as ``np.median(a, axis=0)``: the middle row, or half
    the sum of the two middle rows, once sorted), by one partial sort along the rows."""
    r = a.shape[0]
    # (a full sort along the rows: the same order statistics, quicker than a partition across rows)
    part = np.sort(a, axis=0)
    if r % 2:
        return part[r // 2]
    return 0.5 * (part[r // 2 - 1] + part[r // 2])


def last_axis_median(a: np.ndarray) -> np.ndarray:
    """``np.median(a, axis=-1)``, the same numbers: for an even length the mean of the two middle values,
    the lower one taken as the largest below one partition point (a partition at two points costs
    several times one); NaN input goes to ``np.median`` itself."""
    n = a.shape[-1]
    if n % 2 or n < 2 or np.isnan(a).any():
        return np.median(a, axis=-1)
    part = np.partition(a, n // 2, axis=-1)
    return (part[..., :n // 2].max(axis=-1) + part[..., n // 2]) / 2.0


@functools.lru_cache(maxsize=8)
def _block_interpolation(n: int, block: int):
    """Indices and weights of :func:`row_block_floor`'s linear interpolation between block centres."""
    nb = n // block
    u = np.arange(n) / block - 0.5
    j = np.clip(np.floor(u).astype(np.int64), 0, nb - 2)
    t = np.clip(u - j, 0.0, 1.0)
    rest = 1.0 - t
    for v in (j, t, rest):
        v.flags.writeable = False
    return j, t, rest


def row_block_floor(power: np.ndarray, block: int) -> np.ndarray:
    """:func:`masterqc.measure.frames.block_floor` of every row of ``power`` at once (the same numbers:
    medians of consecutive ``block``-bin blocks, interpolated linearly between block centres, held
    beyond the first and last centre)."""
    rows, n = power.shape
    nb = max(1, n // block)
    med = last_axis_median(power[:, :nb * block].reshape(rows, nb, block))
    if nb == 1:
        return np.repeat(med, n, axis=1)
    j, t, rest = _block_interpolation(n, block)
    # med[:, j] * (1 - t) + med[:, j + 1] * t, in place on the two gathered arrays (the same operations)
    out = med[:, j]
    out *= rest
    upper = med[:, j + 1]
    upper *= t
    out += upper
    return out


def grid_median_level(spectra: np.ndarray):
    """``(alpha, median_level)``: every bin's drop rate (cycles per sample) and the median over the frames
    (rows of ``spectra``) of its power over the frame's local floor."""
    nfft = 2 * (spectra.shape[1] - 1)
    # |z|^2 = re^2 + im^2 on the interleaved floats (the same values as spectra.real ** 2 + spectra.imag ** 2)
    if spectra.dtype == np.complex128:
        sq = np.square(np.ascontiguousarray(spectra).view(np.float64))
        power = sq[:, 0::2] + sq[:, 1::2]
    else:
        power = spectra.real ** 2 + spectra.imag ** 2
    norm = power / (row_block_floor(power, 64 * GRID_PAD) + 1e-300)
    med = column_median(norm)
    return np.arange(med.size) / nfft, med


def grid_candidates(spectra: np.ndarray, frame_len: int, min_ratio: float = GRID_LINE_RATIO, levels=None):
    """``(indices, alpha, median_level)``: the candidate lines of the error-magnitude spectra (rows of
    ``spectra``): local maxima of the median level over the frames (normalised by each frame's local
    floor) that stand ``min_ratio`` over it (any level for 0), at drop rates from :data:`GRID_MIN_ALPHA` and away
    from the patterns of whole-number upsampling factors, the :data:`GRID_CANDIDATES` strongest first;
    ``alpha`` (cycles per sample) and the median level for every bin (``levels``: those of
    :func:`grid_median_level`, when already computed)."""
    from masterqc.measure.npkernels import maximum_filter1d
    alpha, med = grid_median_level(spectra) if levels is None else levels
    ok = alpha >= GRID_MIN_ALPHA
    for lf in GRID_UPSAMPLING_FACTORS:
        for m in range(1, lf):
            ok &= np.abs(alpha - m / lf) > 2.0 / frame_len
    if min_ratio:
        ok &= med >= min_ratio
    # one candidate per line: local maxima of the median level
    ok &= med >= maximum_filter1d(med, 2 * GRID_PAD + 1)
    cand = np.nonzero(ok)[0]
    return cand[np.argsort(med[cand])[::-1]][:GRID_CANDIDATES], alpha, med


# ---- the drop pattern's period
# Dense dropping (a rate change by picking input samples, 147 kept of every 160 from 48 to 44.1 kHz) puts a
# drop every dozen samples or so: the prediction error's magnitude then holds many lines (every multiple of
# fs_out/P for a pattern of period P output samples), and a held note's multiples may sit near the strongest
# of them.  The whole pattern repeats exactly every P samples, locked to the sample clock: the error
# magnitude averaged over the samples of each phase n mod P (absolute index) gives a profile, and the profiles
# of frames spread over the file agree.  Under no such pattern each frame's profile is noise and they do not.
#: sampling rates a file may have been converted down from by picking samples (Hz): the standard rates, 12 kHz
#: (low-rate telephony and games), 50 kHz (early digital multitrack and mastering recorders) and the 2x and 4x
#: multiples of the 44.1 and 48 kHz families.  A drop pattern made by picking samples without a filter repeats
#: every fs_out/gcd(fs_in, fs_out) samples (:func:`drop_pattern_period`); only the periods that a conversion
#: from one of these rates to the file's rate makes are tested.  A period read off a line of the prediction
#: error instead let the profiles of native 8 kHz music agree by chance at 12 samples (a period no conversion
#: between trade rates makes; a named case of the held-back set)
PICK_SOURCE_RATES_HZ = (8000, 11025, 12000, 16000, 22050, 24000, 32000, 44100, 48000, 50000, 64000, 88200, 96000,
                        176400, 192000, 352800, 384000)
#: pattern periods tested: at least GRID_PATTERN_MIN_PERIOD samples (shorter ones hold too few phases for
#: the profiles' agreement to mean anything) and at most a sixteenth of a frame (own reasoning)
GRID_PATTERN_MIN_PERIOD = 8
GRID_PATTERN_MAX_PERIOD = GRID_FRAME // 16
#: a drop pattern: the frames' profiles agree with the others' mean to a median correlation of at least
#: GRID_PATTERN_MIN_AGREEMENT, while the signal's own profiles at that period agree to less than
#: GRID_PATTERN_MAX_SIGNAL_AGREEMENT (a steady chord whose period is a whole number of samples is
#: periodic at P itself; house choice, checked on the tuning corpus: with only the periods a conversion makes,
#: its negatives reach at most 0.22, band-limited polyphonic synthesis picked from 96 to 88.2 kHz 0.43-0.47)
GRID_PATTERN_MIN_AGREEMENT = 0.40
#: a period read off a line of the prediction error that no conversion between trade rates makes (one sample
#: deleted in every N, as a crude speed or clock correction does) needs far stronger agreement: the candidate lines
#: of every file offer many more periods to chance.  House choice: such deletions of the tuning corpus reach
#: 0.91-0.94 there, a native 8 kHz mix of the held-back set 0.52 at 12 samples, which prompted the rule
GRID_LINE_PATTERN_MIN_AGREEMENT = 0.8
GRID_PATTERN_MAX_SIGNAL_AGREEMENT = 0.6
#: a converter whose read position is a binary fraction (a single-precision floating-point accumulator, or a
#: fixed-point one) steps by a whole multiple of 2^-b input samples: its drop pattern repeats every 2^b/gcd
#: output samples, a power of two, whatever the two rates (a float32 accumulator near input sample 2^k
#: has b = 23 - k: 32 samples from about 131072 to 524288, 16 from 524288 to 1048576).  These periods are tested
#: as well, on the error magnitude only, and need the agreement GRID_BINARY_PATTERN_MIN_AGREEMENT (house choice,
#: checked on the tuning corpus: its negatives reach 0.37, a steady band-limited two-note chord of the unit
#: tests 0.48; single-precision picking 0.65-0.98, one case at 0.49 missed).  A pattern whose period divides a
#: tested one repeats at it too, so 16 covers 8 and 128 covers 64; 256 and above hold only the first second or so
#: of a file
BINARY_PHASE_PERIODS = (16, 32, 128)
GRID_BINARY_PATTERN_MIN_AGREEMENT = 0.5
#: a coherent drop-rate line alpha is no evidence when the signal itself repeats every round(j/alpha)
#: samples for some j up to this (a steady chord whose common period is a whole number of samples puts
#: lines at every multiple of 1/period into the error magnitude; own reasoning)
GRID_SIGNAL_PERIOD_MULTIPLES = 16


def drop_pattern_period(fs_in_hz: int, fs_out_hz: int) -> int:
    """Output samples after which the pattern of a sample-picking rate change from ``fs_in_hz`` to
    ``fs_out_hz`` repeats: it keeps fs_out/g of every fs_in/g input samples, g = gcd(fs_in, fs_out)."""
    return int(fs_out_hz) // math.gcd(int(fs_in_hz), int(fs_out_hz))


def pick_sources(fs: int) -> dict:
    """The rates of :data:`PICK_SOURCE_RATES_HZ` that picking down to ``fs`` leaves a drop pattern from (every
    higher one that is not a whole multiple of ``fs``), each with the pattern's period."""
    return {r: drop_pattern_period(r, fs) for r in PICK_SOURCE_RATES_HZ if r > fs and r % fs}


def pattern_periods(fs: int) -> list:
    """Pattern periods to test on a file at ``fs``: those of :func:`pick_sources`, within the tested range,
    ascending."""
    out = set(pick_sources(fs).values())
    return sorted(p for p in out if GRID_PATTERN_MIN_PERIOD <= p <= GRID_PATTERN_MAX_PERIOD)


def phase_profile(x: np.ndarray, start: int, period: int) -> np.ndarray:
    """Mean of ``x`` (a frame starting at absolute sample ``start``) over the samples of each phase
    ``(start + n) mod period``, whole periods only, less its mean."""
    i0 = (-int(start)) % period
    k = (x.size - i0) // period
    prof = x[i0:i0 + k * period].reshape(k, period).mean(axis=0)
    return prof - prof.mean()


def phase_profiles(xs, starts, period: int) -> np.ndarray:
    """:func:`phase_profile` of every frame at once (rows): ``xs`` a list of equally long frames, or their stack."""
    x = np.asarray(xs) if not isinstance(xs, np.ndarray) else xs
    rows, n = x.shape
    i0 = (-np.asarray(starts, dtype=np.int64)) % period
    k = (n - i0) // period
    # the periods laid out (period index, frame, phase) and summed over the first axis: period after period,
    # as a sum over the middle axis of (frame, period index, phase) adds them, the same numbers, with the
    # frames' phases in one long inner loop instead of one short loop per frame and period
    if np.all(i0 == i0[0]):
        a, kk = int(i0[0]), int(k[0])
        whole = np.ascontiguousarray(x[:, a:a + kk * period].reshape(rows, kk, period).transpose(1, 0, 2))
        prof = np.add.reduce(whole, axis=0) / kk      # (the mean over the periods)
    else:
        # each frame's whole periods, moved to the front of a zero-padded column
        kmax = int(k.max())
        buf = np.zeros((kmax, rows, period))
        for r in range(rows):
            buf[:k[r], r] = x[r, i0[r]:i0[r] + k[r] * period].reshape(k[r], period)
        prof = np.add.reduce(buf, axis=0) / k[:, None]
    return prof - prof.mean(axis=1, keepdims=True)


def profile_agreement(profiles: np.ndarray) -> float:
    """Median over frames (rows) of the correlation of each frame's profile with the mean of the
    others' (leave one out)."""
    others = profiles.sum(axis=0)[None, :] - profiles
    d = np.sqrt(np.sum(profiles * profiles, axis=1) * np.sum(others * others, axis=1))
    dots = np.sum(profiles * others, axis=1)
    return float(np.median(np.where(d > 0, dots / np.where(d > 0, d, 1.0), 0.0)))


def pattern_evidence(errors, signals, starts, fs: int, alphas=(), periods=None, squares: bool = True):
    """The drop-pattern test: ``(agreement, period, signal_agreement)`` of the period (of
    :func:`pattern_periods`) whose error-magnitude profiles (of the magnitude or of its square, whichever agree
    better) agree best among those the signal's own profiles do not explain (agreement 0 and period None when
    no period can be tested).  ``errors`` and ``signals``: per frame, the normalised prediction error
    magnitude and the channel-sum signal; ``starts``: the frames' absolute first samples.  ``alphas``: drop rates
    of the error's candidate lines; the whole numbers nearest 1/alpha that no conversion makes (one sample
    deleted in every P + 1) are tried too, on the magnitude, and reported instead only where they reach
    :data:`GRID_LINE_PATTERN_MIN_AGREEMENT` and no conversion's period reaches :data:`GRID_PATTERN_MIN_AGREEMENT`."""
    best = (0.0, None, 0.0)
    if len(errors) < GRID_MIN_FRAMES:
        return best
    # the error magnitude and its square (normalised): the square weighs the phases where the drops make the
    # error large more, the magnitude is steadier where a few large errors (onsets) dominate
    errors = np.asarray(errors)
    signals = np.asarray(signals)
    squares = (errors * errors / np.maximum(np.mean(errors * errors, axis=1, keepdims=True), 1e-300)
               if squares else None)
    standard = pattern_periods(fs) if periods is None else list(periods)
    lines = sorted({int(round(1.0 / a)) for a in alphas if a > 0} - set(standard))
    lines = [p for p in lines if GRID_PATTERN_MIN_PERIOD <= p <= GRID_PATTERN_MAX_PERIOD]
    line_best = (0.0, None, 0.0)
    for period in standard + lines:
        forms = (errors, squares) if period in standard and squares is not None else (errors,)
        ag = max(profile_agreement(phase_profiles(form, starts, period)) for form in forms)
        held = best if period in standard else line_best
        if ag <= held[0]:
            continue
        sg = profile_agreement(phase_profiles(signals, starts, period))
        if sg < GRID_PATTERN_MAX_SIGNAL_AGREEMENT:
            if period in standard:
                best = (ag, period, sg)
            else:
                line_best = (ag, period, sg)
    if best[0] < GRID_PATTERN_MIN_AGREEMENT and line_best[0] >= GRID_LINE_PATTERN_MIN_AGREEMENT:
        return line_best
    return best


def pattern_hit_at(agreement: float, period, fs: int) -> bool:
    """Whether a drop pattern's profile ``agreement`` at ``period`` is evidence: at least
    :data:`GRID_PATTERN_MIN_AGREEMENT` at a period a conversion makes, :data:`GRID_LINE_PATTERN_MIN_AGREEMENT` at
    any other."""
    if period is None:
        return False
    return agreement >= (GRID_PATTERN_MIN_AGREEMENT if period in pattern_periods(fs) else GRID_LINE_PATTERN_MIN_AGREEMENT)


# ---- the lines a conversion by picking or by interpolating between neighbours predicts
# Output sample n of a conversion from fs_in down to fs with no filter reads the input at n*fs_in/fs: picking takes
# a neighbour (which one depends on the fraction u[n] = frac(n*fs_in/fs)), linear interpolation weighs the two
# neighbours by u[n].  Whatever the rule, the error a predictor makes at n is a function of u[n] (for picking a
# jump where u wraps, a timing error growing with u between; for linear interpolation a high-frequency loss of
# 2*u*(1-u)*(1 - cos w) in power, smooth in u), times the local signal.  A function of u[n] repeats every
# P = fs/gcd samples, but its spectrum sits at the lines m*fs_in/fs mod 1 (cycles per sample) of its first few
# orders m in u: the m-th Fourier coefficient in u lands at that line (u[n] = n*a/P mod 1, a = fs_in/gcd), and a
# jump in u falls off as 1/m, the smooth loss of linear interpolation as 1/m^2.  The profile agreement spreads
# the test over all P - 1 harmonics of 1/P (319 for 44.1 -> 32 kHz, of which a handful carry a linear
# interpolation's trace); this test reads only the predicted lines, phase-locked to the absolute sample index
# over the whole file.  A line of random phase gives J*R^2 ~ Exp(1) (Rayleigh; J frames, R the mean unit phasor's
# length), so their sum over L lines is Gamma(L, 1) under no such conversion.
#: lines tested per candidate source rate: the first CONVERSION_LINES distinct orders m (own reasoning, checked on
#: the tuning corpus: a linear interpolation's trace falls as 1/m^2 and later orders add mostly noise; three lines
#: gave it one to two decades more than six, and picking stays far beyond the threshold)
CONVERSION_LINES = 3
#: a conversion's lines are evidence at a chance probability (Gamma survival, per source rate) of at most
#: 10^-CONVERSION_LINES_MIN_LOG10 (house choice, checked on the tuning corpus: its negatives reach 10^-2.6, apart
#: from steady chords periodic at the pattern, which the signal's own profiles exclude; picking reaches
#: 10^-5..10^-13, linear interpolation 10^-4.5..10^-9)
CONVERSION_LINES_MIN_LOG10 = 4.0


def conversion_lines(fs_in_hz: int, fs_hz: int, frame_len: int = GRID_FRAME) -> list:
    """Drop rates (cycles per sample, folded into 0..0.5) of the first :data:`CONVERSION_LINES` orders m of a
    conversion from ``fs_in_hz`` down to ``fs_hz`` without a filter: ``m*fs_in/fs mod 1``, orders landing at 0
    or near the pattern of a whole-number upsampling factor (:data:`GRID_UPSAMPLING_FACTORS`) or below
    :data:`GRID_MIN_ALPHA` skipped."""
    g = math.gcd(int(fs_in_hz), int(fs_hz))
    a, b = int(fs_in_hz) // g, int(fs_hz) // g
    out = []
    for m in range(1, 4 * b):
        k = (m * a) % b
        alpha = min(k, b - k) / b
        if alpha < GRID_MIN_ALPHA or alpha in out:
            continue
        if any(abs(alpha - j / lf) <= 2.0 / frame_len for lf in GRID_UPSAMPLING_FACTORS for j in range(1, lf)):
            continue
        out.append(alpha)
        if len(out) == CONVERSION_LINES:
            break
    return out


def _gamma_sf_log10(x: float, shape: int) -> float:
    """log10 of the survival function of Gamma(shape, 1) at ``x`` (whole-number shape: Poisson sum)."""
    if x <= 0:
        return 0.0
    terms = [k * math.log(x) - math.lgamma(k + 1) for k in range(shape)]
    top = max(terms)
    return (-x + top + math.log(sum(math.exp(t - top) for t in terms))) / math.log(10.0)


def conversion_line_evidence(spectra: np.ndarray, starts, fs: int, frame_len: int = GRID_FRAME):
    """The predicted-line test: ``(log10_p, source_hz, period)`` of the candidate source rate (of
    :func:`pick_sources`) whose lines (:func:`conversion_lines`) are most phase-locked to the absolute sample
    index across the frames; ``log10_p`` is the log10 chance probability of the summed Rayleigh statistic (0 and
    None when nothing was tested).  ``spectra``: rows of the error magnitude's zero-padded spectra
    (:func:`grid_frame_spectrum`), frames starting at absolute sample ``starts``."""
    best = (0.0, None, None)
    j = spectra.shape[0]
    if j < GRID_MIN_FRAMES:
        return best
    nfft = 2 * (spectra.shape[1] - 1)
    st = np.asarray(starts, dtype=float)
    for r_in, period in pick_sources(fs).items():
        alphas = conversion_lines(r_in, fs, frame_len)
        if not alphas:
            continue
        al = np.asarray(alphas)
        z = spectra[:, np.round(al * nfft).astype(np.int64)] * np.exp(-2j * math.pi * st[:, None] * al[None, :])
        u = z / np.maximum(np.abs(z), 1e-300)
        stat = float(j * np.sum(np.abs(u.mean(axis=0)) ** 2))
        lp = _gamma_sf_log10(stat, al.size)
        if lp < best[0]:
            best = (lp, int(r_in), int(period))
    return best


def signal_periodic_at(alpha: float, signals, starts) -> bool:
    """Whether the signal (per frame, channel sum) repeats every whole number of samples Q = j/alpha
    (j = 1..:data:`GRID_SIGNAL_PERIOD_MULTIPLES`, Q within 0.02 samples of a whole number, up to
    :data:`GRID_PATTERN_MAX_PERIOD`): its own profiles at Q agree across frames."""
    if not alpha or len(signals) < 2:
        return False
    for j in range(1, GRID_SIGNAL_PERIOD_MULTIPLES + 1):
        q = j / alpha
        if q > GRID_PATTERN_MAX_PERIOD:
            break
        if abs(q - round(q)) <= 0.02 * j and round(q) >= GRID_PATTERN_MIN_PERIOD:
            if profile_agreement(phase_profiles(signals, starts, int(round(q)))) >= GRID_PATTERN_MAX_SIGNAL_AGREEMENT:
                return True
    return False


def grid_coherence(spectra: np.ndarray, starts: np.ndarray, frame_len: int, steady: np.ndarray | None = None,
                   levels=None):
    """The irregular-grid test on the frames' error-magnitude spectra (rows of ``spectra``, frames
    starting at absolute sample ``starts``).  Returns ``(coherence, alpha, line_ratio)`` of the most
    coherent candidate line (coherence 0 and alpha None when there is none): ``alpha`` in cycles per
    sample, ``line_ratio`` its median level over the local median.  Lines that ``steady`` content
    (:func:`steady_lines`) explains (:func:`content_explains`) are skipped; of the coherent lines the
    one of lowest ``alpha`` is returned (the drop rate; its multiples are coherent too).  ``steady`` may be a
    callable giving those lines, called only when a candidate needs them."""
    pad = spectra.shape[1] - 1
    nfft = 2 * pad
    cand, alpha, med = grid_candidates(spectra, frame_len, levels=levels)
    st = np.asarray(starts, dtype=float)
    span = float(st.max() - st.min() + frame_len)
    # the frequency offsets searched: their number grows with the frames' spread (8 per 1/span), so the
    # phase table (offsets x frames) is made GRID_PHASE_TABLE_ELEMENTS at a time, never whole (3 h at
    # 96 kHz: 250 000 offsets, a 49 MB table); each offset's row and sum are the ones a whole table gives
    d = np.arange(-0.5 / nfft, 0.5 / nfft, 0.125 / span)
    units = []    # (candidate, its unit phasors) in candidate order
    for k in cand:
        if callable(steady):   # computed on first need
            steady = steady()
        if steady is not None and content_explains(float(alpha[k]), steady, 0.5 / frame_len, 0.02 / frame_len):
            continue
        z = spectra[:, k] * np.exp(-2j * math.pi * alpha[k] * st)
        units.append((k, z / np.maximum(np.abs(z), 1e-300)))
    # per candidate: the largest mean-phasor length over the offsets and its first offset (np.argmax's
    # choice over the whole search, NaN counting as the largest)
    top = [(-1.0, 0)] * len(units)
    rows = max(1, GRID_PHASE_TABLE_ELEMENTS // max(1, st.size))
    for lo in range(0, d.size if units else 0, rows):
        ph = np.exp(-2j * math.pi * d[lo:lo + rows, None] * (st[None, :] + frame_len / 2.0))
        for j, (_k, u) in enumerate(units):
            r = np.abs(ph @ u) / u.size
            i = int(np.argmax(r))
            v = r[i]
            if lo == 0 or (v > top[j][0] or (v != v and top[j][0] == top[j][0])):
                top[j] = (v, lo + i)
    best = (0.0, None, 0.0)
    coherent = []
    for (k, _u), (v, i) in zip(units, top):
        got = (float(v), float(alpha[k] + d[i]), float(med[k]))
        if got[0] > best[0]:
            best = got
        if got[0] >= GRID_MIN_COHERENCE:
            coherent.append(got)
    if coherent:
        return min(coherent, key=lambda g: g[1])
    return best


def grid_evidence(coherence: float, frames: int) -> bool:
    """An irregular sample grid: enough frames and a coherent drop-rate line."""
    return frames >= GRID_MIN_FRAMES and coherence >= GRID_MIN_COHERENCE


def dropped_sample_phase_step(f_hz: float, fs: float) -> float:
    """The phase step, radians in [0, 2*pi), that deleting one sample makes on a partial at ``f_hz``:
    every later sample is read one sampling period further on, ``2*pi*f/fs``."""
    return float(np.mod(2.0 * math.pi * f_hz / fs, 2.0 * math.pi))


def track_peaks(spec_a: np.ndarray, spec_b: np.ndarray, bin_hz: float, dt_s: float):
    """Partials of two short frames ``dt_s`` apart in the upper half of the band (where a
    fold at Nyquist shows): ``(freq_hz, slope_hz_per_s, power)`` arrays for every peak of
    frame a (at least :data:`TRACK_LINE_DB` above the local floor) matched to the nearest
    peak of frame b within 4 bins."""
    lo = spec_a.size // 2 - 30
    pa, pb = spec_a[lo:], spec_b[lo:]
    la = find_lines(pa, local_floor(pa) + 1e-300, TRACK_LINE_DB)
    lb = find_lines(pb, local_floor(pb) + 1e-300, TRACK_LINE_DB)
    if la.size == 0 or lb.size == 0:
        return np.zeros(0), np.zeros(0), np.zeros(0)
    fa = refine_peaks(pa, la)
    fb = refine_peaks(pb, lb)
    j = np.searchsorted(fb, fa)
    cand = np.stack([np.clip(j - 1, 0, fb.size - 1), np.clip(j, 0, fb.size - 1)])
    d = np.abs(fb[cand] - fa[None, :])
    pick = cand[np.argmin(d, axis=0), np.arange(fa.size)]
    ok = np.abs(fb[pick] - fa) <= 4.0
    # lines within 3 bins of Nyquist interfere with their own mirror image in the DFT,
    # which moves the interpolated peak from frame to frame: no slope there
    edge = pa.size - 1
    ok &= (fa > 30.0) & (fa < edge - 3.0)
    f = (fa[ok] + lo) * bin_hz
    slope = (fb[pick][ok] - fa[ok]) * bin_hz / dt_s
    return f, slope, pa[la][ok]


def find_reflections(tracks, fs: float, min_slope: float = None, position_tolerance_hz: float = None,
                     max_fall_hz: float = None):
    """Folded partial tracks: a rising partial (time t, frequency f, slope s > 0) whose
    mirrored continuation ``fs - (f + s*(t2 - t))`` appears at a later time t2 with slope
    close to ``-s``, after crossing Nyquist (``f + s*(t2 - t) > fs/2``).

    ``tracks``: list of ``(time_s, freq_hz, slope_hz_per_s)`` arrays per frame pair,
    in time order.  Returns a list of ``(t_rise, f_rise, t_fall, f_fall)``.
    """
    min_slope = MIN_TRACK_SLOPE_HZ_PER_S if min_slope is None else min_slope
    tol = REFLECT_POSITION_TOLERANCE_HZ if position_tolerance_hz is None else position_tolerance_hz
    found = []
    hits = {}
    nyq = fs / 2.0
    for i, (t1, f1, s1) in enumerate(tracks):
        up = (s1 >= min_slope) & (f1 > 0.5 * nyq)
        if not up.any():
            continue
        for t2, f2, s2 in tracks[i + 1:]:
            gap = t2 - t1
            if gap > REFLECT_MAX_GAP_S:
                break
            down = s2 <= -min_slope
            if not down.any():
                continue
            for fr, sr in zip(f1[up], s1[up]):
                ahead = fr + sr * gap
                if ahead <= nyq:
                    continue
                mirror = fs - ahead
                ok = (np.abs(f2[down] - mirror) <= tol) & \
                     (np.abs(-s2[down] - sr) <= REFLECT_SLOPE_TOLERANCE * sr)
                if ok.any():
                    hits.setdefault((i, float(fr)), []).append((float(t2), float(f2[down][ok][0])))
    for (i, fr), seen in hits.items():
        if max_fall_hz is not None and min(f for _t, f in seen) >= max_fall_hz:
            continue
        if len(seen) >= MIN_REFLECTION_SIGHTINGS:
            found.append((float(tracks[i][0]), fr, seen[0][0], seen[0][1]))
    return found


class AliasingAnalyzer(Analyzer):
    """Alias-to-harmonic ratio on tonal frames and folded partial tracks."""

    name = "aliasing"
    measurement_schema = {
        "aliasing_detected": measured(BOOLEAN_OR_NULL, NO_UNIT,
            'folded (aliased) partials found; null when not assessable'),
        "alias_to_harmonic_ratio_db": measured({
            **NUMBER_OR_NULL,
            "description": ("alias-to-harmonic energy ratio, dB: power of the alias lines found at the "
                            "predicted fold frequencies |k*f0 - m*fs| over the harmonic power, on the "
                            "frames where alias lines were found; null unless folded content was found "
                            "(on assessable clean material aliasing_detail.score_upper_bound_db gives the "
                            "floor-limited upper bound).  Called aliasing_score up to 0.1.0"),
            }, 'db', 'alias-to-harmonic energy ratio where folded content was found; null otherwise'),
        "aliasing_assessable": measured(BOOLEAN, NO_UNIT,
            'the material had tonal frames on which aliasing could be assessed'),
        "aliasing_assessable_fraction": measured({
            **NUMBER_OR_NULL,
            "description": ("share of the analysed frames (spread over the file) in which at least one note "
                            "was found with fold positions that can be tested, 0..1; null for an empty file"),
            }, 'fraction', 'share of analysed frames in which folding could be tested'),
        "aliasing_detail": measured({
            "type": "object",
            "properties": {
                "reason": {"type": ["string", "null"]},
                "tonal_frames": {"type": "integer"},
                "assessable_frames": {"type": "integer"},
                "frames_with_alias_lines": {"type": "integer"},
                "median_f0_hz": NUMBER_OR_NULL,
                "alias_lines_found": {"type": "integer"},
                "fold_positions_tested": {"type": "integer"},
                "score_upper_bound_db": {
                    **NUMBER_OR_NULL,
                    "description": ("when alias_to_harmonic_ratio_db is null on assessable material: the highest "
                                    "alias-to-harmonic ratio, dB, that alias lines escaping detection at "
                                    "every fold position tested could reach (floor-limited)"),
                },
                "polyphonic_frames": {"type": "integer"},
                "polyphonic_assessable_frames": {"type": "integer"},
                "polyphonic_fold_positions_tested": {"type": "integer"},
                "polyphonic_note_instances": {"type": "integer"},
                "polyphonic_instances_with_folds": {"type": "integer"},
                "polyphonic_instances_expected_by_chance": {"type": "number"},
                "polyphonic_rank_z": {**NUMBER_OR_NULL, "description": (
                    "how far the fold combs' ranks among their control combs, summed over the note "
                    "instances, stand above what no folding gives, in standard deviations")},
                "reflected_grid_frames": {"type": "integer", "description": (
                    "polyphonic frames holding a line grid that no harmonic series explains (lines at p + k*D, "
                    "as two-operator FM or ring modulation makes) whose reflection about half the sampling rate "
                    "could be tested")},
                "reflected_grid_frames_with_folds": {"type": "integer", "description": (
                    "of those, the frames whose reflected grid (fs - p - k*D) stands above every control position")},
                "reflected_grid_expected_by_chance": {"type": "number"},
                "reflected_grid_rank_z": {**NUMBER_OR_NULL, "description": (
                    "how far the reflected grids' ranks among their control combs, summed over the frames, stand "
                    "above what no folding gives, in standard deviations")},
                "folded_partials": {"type": "integer"},
                "step_frames": {"type": "integer"},
                "step_frames_with_sharp_steps": {"type": "integer"},
                "sharp_steps": {"type": "integer", "description": (
                    "jumps between two neighbouring samples with no band-limited transition around them "
                    "(a smooth curve plus an ideal step fits the samples either side to within "
                    "1 % of the jump)")},
                "steps_fitted": {"type": "integer"},
                "sharp_steps_on_hold_grid_hz": {**NUMBER_OR_NULL, "description": (
                    "the source rate whose sample grid the sharp jumps line up on (a held upsampling, "
                    "not folding); null otherwise")},
                "sharp_steps_period_samples": {"type": ["integer", "null"], "description": (
                    "the whole number of samples the sharp jumps repeat at, when they do (the waveform is "
                    "then exactly periodic at the sampling rate and its folds land on its harmonics); "
                    "null otherwise")},
                "grid_frames": {"type": "integer"},
                "grid_line_coherence": {"type": "number", "description": (
                    "how well the phases of the strongest line in the prediction-error magnitude agree from "
                    "frame to frame, referred to the absolute sample index (0..1; near 1 when samples were "
                    "dropped on a clock-locked pattern)")},
                "grid_drop_interval_samples": {**NUMBER_OR_NULL, "description": (
                    "the interval, in samples, of that line (the mean spacing of dropped samples when the "
                    "grid is irregular)")},
                "grid_pattern_agreement": {"type": "number", "description": (
                    "how well the frames' prediction-error profiles over the phases of a repeating drop "
                    "pattern (absolute sample index modulo its period) agree with each other: median "
                    "leave-one-out correlation, near 1 for a rate change by picking samples")},
                "grid_pattern_period_samples": {"type": ["integer", "null"], "description": (
                    "the period, in samples, of that pattern (147 for picking from 48 to 44.1 kHz); null "
                    "when no period could be tested")},
                "grid_pattern_signal_agreement": {"type": "number", "description": (
                    "the same agreement of the signal's own profiles at that period (high for content "
                    "periodic at it, which is then no evidence)")},
                "grid_binary_pattern_agreement": {"type": "number", "description": (
                    "the drop-pattern agreement at the power-of-two periods of a converter whose read position "
                    "steps by a binary fraction (a floating-point or fixed-point phase accumulator)")},
                "grid_binary_pattern_period_samples": {"type": ["integer", "null"], "description": (
                    "the power-of-two period of that agreement; null when none could be tested")},
                "grid_conversion_lines_log10_p": {"type": "number", "description": (
                    "log10 of the chance probability that the prediction error's lines at the places a "
                    "conversion down to this rate by picking or by interpolating between neighbouring samples "
                    "puts them (m * source rate / rate, modulo 1) keep their phases across the file as well as "
                    "they do, for the most evident source rate (0 when nothing could be tested)")},
                "grid_conversion_source_hz": {"type": ["integer", "null"], "description": (
                    "that source rate; null when nothing could be tested")},
                "where_s": {"type": "array", "items": {"type": "array", "items": {"type": "number"}}},
                "fold_examples": {"type": "array", "items": {"type": "object"}},
            },
            }, NO_UNIT, 'the aliasing assessment in detail'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        extra = dict(getattr(options, "extra", {}) or {}).get("aliasing", {})
        self.fs = int(info.sample_rate_hz)
        ch = info.channels
        # long frames
        self.n_long = int(round(self.fs / TONAL_BIN_HZ))
        self.bin_long = self.fs / self.n_long
        self.win_long = blackman_harris(self.n_long)
        starts = frame_starts(int(info.frames), self.n_long, int(extra.get("max_tonal_frames", MAX_TONAL_FRAMES)),
                              self.n_long // 2, seed=1)
        self.pick_long = FramePicker(starts, self.n_long, ch)
        # short frame pairs, at each track resolution: one frame of n + hop samples holds both
        self.trackers = []
        n_pairs = int(extra.get("max_track_pairs", MAX_TRACK_PAIRS))
        for j, (bin_hz, div, min_slope, tol) in enumerate(TRACK_RESOLUTIONS):
            n = int(round(self.fs / bin_hz))
            hop = max(1, n // div)
            starts = frame_starts(int(info.frames), n + hop, n_pairs, hop * 2, seed=2 + j)
            self.trackers.append({"n": n, "hop": hop, "bin_hz": self.fs / n, "min_slope": min_slope,
                                  "tolerance_hz": tol, "window": np.hanning(n + 2)[1:-1],
                                  "picker": FramePicker(starts, n + hop, ch), "tracks": []})
        self.frames = []   # per tonal long frame: (start, result dict)
        # polyphonic fold test frames
        self.n_poly = int(round(self.fs / POLY_BIN_HZ))
        self.win_poly = np.hanning(self.n_poly + 2)[1:-1]
        starts = frame_starts(int(info.frames), self.n_poly, int(extra.get("max_poly_frames", MAX_POLY_FRAMES)),
                              self.n_poly // 2, seed=4)
        self.pick_poly = FramePicker(starts, self.n_poly, ch)
        self.poly = []     # per polyphonic frame: (start, result dict or None, has signal)
        # sample-sharp step test frames
        self.n_step = max(4 * STEP_HALF_WINDOW, int(round(self.fs / STEP_FRAME_DIVISOR)))
        starts = frame_starts(int(info.frames), self.n_step, int(extra.get("max_step_frames", MAX_STEP_FRAMES)),
                              self.n_step, seed=5)
        self.pick_step = FramePicker(starts, self.n_step, ch)
        self.steps = []    # per step frame: (start, result dict)
        # irregular sample grid frames
        self.n_grid = GRID_FRAME
        starts = frame_starts(int(info.frames), self.n_grid, int(extra.get("max_grid_frames", GRID_FRAMES)),
                              self.n_grid, seed=6)
        self.pick_grid = FramePicker(starts, self.n_grid, ch)
        self.grid = []     # per grid frame with signal: (start, complex error-magnitude spectrum)
        self.grid_pattern = []   # per grid frame with signal: (error magnitude, channel-sum signal)
        self.frame_count = {"tonal": 0, "poly": 0, "step": 0, "grid": 0, **{f"track{j}": 0 for j in range(len(self.trackers))}}
        self.deferred = []   # (test, start, frame) kept for finish()
        self.first_pass_settled = False
        self._grid_memo = None
        # flat tops: per block and channel (max, runs at it, min, runs at it)
        bits = int(getattr(info, "bit_depth", 0) or 0)
        self.ceiling_lsb = 0.0 if getattr(info, "is_float", False) or bits <= 0 else 2.0 ** (1 - bits)
        self.ceiling_blocks = []
        self.ceiling_seen = None   # per channel [highest, lowest] sample so far
        self.ceiling_buffer = []   # channel rows not yet counted
        self.ceiling_buffered = 0
        self._parts_taken = False   # finish_parts() has been called (by the engine, or by finish())

    # ---- frame analyses (one frame each); every FIRST_PASS_STRIDE-th frame (spread over the file; for the
    # partial tracks every such run of TRACK_RUN consecutive pairs, which the reflection test needs)
    # is analysed as it streams past, the rest is kept and analysed in finish() unless that first third
    # already settles the verdict as clean (see :meth:`_settled_clean`)
    def _tonal(self, start, frame):
        spec = np.fft.rfft(np.asarray(frame, dtype=np.float64).T * self.win_long, axis=-1)
        power = np.sum(spec.real ** 2 + spec.imag ** 2, axis=0)
        r = analyse_tonal_frame(power, self.bin_long, self.fs, max_fold_hz=POLY_TOP_FRACTION * self.fs)
        if r is not None:
            self.frames.append((int(start), r))

    def _poly(self, start, frame):
        spec = np.fft.rfft(np.asarray(frame, dtype=np.float64).T * self.win_poly, axis=-1)
        power = np.sum(spec.real ** 2 + spec.imag ** 2, axis=0)
        has_signal = bool(np.any(frame))
        r = polyphonic_fold_frame(power, self.fs / self.n_poly, self.fs) if has_signal else None
        self.poly.append((int(start), r, has_signal))

    def _step(self, start, frame):
        if np.any(frame):
            self.steps.append((int(start), sharp_step_frame(np.asarray(frame, dtype=np.float64))))

    def _track(self, tr, start, frame):
        n, hop, win = tr["n"], tr["hop"], tr["window"]
        frame = np.asarray(frame, dtype=np.float64)
        a = np.fft.rfft(frame[:n].T * win, axis=-1)
        b = np.fft.rfft(frame[hop:hop + n].T * win, axis=-1)
        pa = np.sum(a.real ** 2 + a.imag ** 2, axis=0)
        pb = np.sum(b.real ** 2 + b.imag ** 2, axis=0)
        f, sl, _p = track_peaks(pa, pb, tr["bin_hz"], hop / self.fs)
        tr["tracks"].append(((start + hop / 2.0 + n / 2.0) / self.fs, f, sl))

    def _grid(self, start, frame):
        frame = np.asarray(frame, dtype=np.float64)
        z = grid_frame_spectrum(frame) if np.any(frame) else None
        if z is not None:
            self.grid.append((int(start), z[0], z[1]))
            self.grid_pattern.append((z[2], frame.sum(axis=1)))

    def _feed(self, key, picker, block, analyse, run: int = 1, stride: int | None = None):
        stride = FIRST_PASS_STRIDE if stride is None else stride
        for start, frame in picker.feed(block):
            i = self.frame_count[key]
            self.frame_count[key] = i + 1
            if (i // run) % stride == 0:
                analyse(start, frame)
            else:   # kept for finish(); 24-bit samples are exact in float32
                self.deferred.append((key, int(start), np.array(frame, dtype=np.float32)))

    def process(self, block) -> None:
        self._ceiling(block)
        self._feed("tonal", self.pick_long, block, self._tonal)
        self._feed("poly", self.pick_poly, block, self._poly)
        self._feed("step", self.pick_step, block, self._step)
        self._feed("grid", self.pick_grid, block, self._grid,
                   stride=GRID_FIRST_PASS_STRIDE if self.pick_grid.starts.size >= 2 * GRID_MIN_FRAMES else 1)
        for j, tr in enumerate(self.trackers):
            self._feed(f"track{j}", tr["picker"], block, lambda st, fr, _tr=tr: self._track(_tr, st, fr),
                       run=TRACK_RUN, stride=TRACK_FIRST_PASS_STRIDE)

    def _ceiling(self, block, final: bool = False) -> None:
        """Feeds the flat-top test: the stream is cut into chunks of CEILING_CHUNK samples (the same whatever the
        block size), each counted by :meth:`_ceiling_chunk`; ``final``: the rest is counted too.  A chunk whose
        highest and lowest samples over all channels lie more than q inside every channel's extremes seen so far
        cannot count (:meth:`_ceiling_chunk` would find no side to count and move no extreme), so it is passed over
        on those two whole-chunk figures, without being split into channel rows."""
        if block is not None:
            b = np.asarray(block)
            if b.ndim == 1:
                b = b[:, None]
            self.ceiling_buffer.append(b)
            self.ceiling_buffered += b.shape[0]
        if self.ceiling_buffered < CEILING_CHUNK and not (final and self.ceiling_buffered):
            if block is not None:
                self.ceiling_buffer[-1] = np.array(self.ceiling_buffer[-1])   # the engine may reuse its block
            return
        frames = np.concatenate(self.ceiling_buffer, axis=0) if len(self.ceiling_buffer) > 1 else self.ceiling_buffer[0]
        done = 0
        while frames.shape[0] - done >= CEILING_CHUNK:
            self._ceiling_frames(frames[done:done + CEILING_CHUNK])
            done += CEILING_CHUNK
        if final and frames.shape[0] > done:
            self._ceiling_frames(frames[done:])
            done = frames.shape[0]
        rest = frames[done:]
        # the part chunk is kept as a copy: the engine may reuse its block's memory
        self.ceiling_buffer = [np.array(rest)] if rest.shape[0] else []
        self.ceiling_buffered = rest.shape[0]

    def _ceiling_frames(self, chunk) -> None:
        """One chunk (frames by channels) for :meth:`_ceiling_chunk`, or passed over (see :meth:`_ceiling`)."""
        seen = self.ceiling_seen
        if seen is not None and chunk.shape[0] >= CEILING_MIN_RUN + 2:
            top, bottom = float(chunk.max()), float(chunk.min())
            # q grows with the level, so q at the extreme seen bounds q at any sample inside it
            if all(top < hi - ceiling_tolerance(hi, self.ceiling_lsb) and bottom > lo + ceiling_tolerance(lo, self.ceiling_lsb)
                   for hi, lo in seen):
                return
        self._ceiling_chunk(np.ascontiguousarray(chunk.T))   # one row per channel

    def _ceiling_chunk(self, b) -> None:
        """The flat-top test's counts on one chunk (channel rows; see :func:`ceiling_plateaus`); a side whose chunk
        extreme lies more than q inside the extreme seen so far is not counted (it cannot be within q of the
        file's)."""
        if b.shape[1] < CEILING_MIN_RUN + 2:
            return
        hi, lo = b.max(axis=1), b.min(axis=1)
        if self.ceiling_seen is None:
            self.ceiling_seen = [[-np.inf, np.inf] for _c in range(b.shape[0])]
        row = []
        for c in range(b.shape[0]):
            h, m = float(hi[c]), float(lo[c])
            seen = self.ceiling_seen[c]
            n_hi = n_lo = 0
            if h > 0:
                q = ceiling_tolerance(h, self.ceiling_lsb)
                if h >= seen[0] - q:
                    n_hi = ceiling_plateaus(b[c], h, q)
            if m < 0:
                q = ceiling_tolerance(m, self.ceiling_lsb)
                if m <= seen[1] + q:
                    n_lo = ceiling_plateaus(-b[c], -m, q)
            seen[0], seen[1] = max(seen[0], h), min(seen[1], m)
            if n_hi or n_lo:
                row.append((c, h, n_hi, m, n_lo))
        if row:
            self.ceiling_blocks.append(row)

    def _ceiling_count(self) -> int:
        """Runs at each channel's extreme values over the whole file (chunks whose own extreme lies within q of
        the file's)."""
        self._ceiling(None, final=True)
        total = 0
        for c, (h, m) in enumerate(self.ceiling_seen or []):
            rows = [r for row in self.ceiling_blocks for r in row if r[0] == c]
            if h > 0:
                q = ceiling_tolerance(h, self.ceiling_lsb)
                total += sum(r[2] for r in rows if r[1] >= h - q)
            if m < 0:
                q = ceiling_tolerance(m, self.ceiling_lsb)
                total += sum(r[4] for r in rows if r[3] <= m + q)
        return total

    def _grid_stats(self):
        """The irregular-grid, drop-pattern and predicted-line tests on the grid frames analysed so far, a dict:
        ``coherence``, ``alpha``, ``line_ratio``, ``drop_hit`` (the drop-rate line), ``pattern`` and ``binary``
        (``(agreement, period, signal_agreement)`` at the periods of conversions between trade rates, and at the
        periods of binary read positions), ``pattern_hit``, ``binary_hit``, ``conversion`` (``(log10_p,
        source_hz, period)`` of the predicted lines) and ``conversion_hit``."""
        if self._grid_memo is not None and self._grid_memo[0] == len(self.grid):
            return self._grid_memo[1]
        got = self._grid_stats_now()
        self._grid_memo = (len(self.grid), got)
        return got

    def _grid_stats_now(self):
        order = sorted(range(len(self.grid)), key=lambda i: self.grid[i][0])
        grid = [self.grid[i] for i in order]
        pattern = [self.grid_pattern[i] for i in order]
        out = {"coherence": 0.0, "alpha": None, "line_ratio": 0.0, "drop_hit": False,
               "pattern": (0.0, None, 0.0), "pattern_hit": False, "binary": (0.0, None, 0.0), "binary_hit": False,
               "conversion": (0.0, None, None), "conversion_hit": False}
        span_s = ((grid[-1][0] - grid[0][0] + self.n_grid) / self.fs) if grid else 0.0
        if len(grid) < GRID_MIN_FRAMES or span_s < GRID_PATTERN_MIN_SPAN_S:
            return out
        keep = list(range(len(grid)))
        alphas = ()
        if span_s < GRID_MIN_SPAN_S:
            # a short file: the drop-pattern and predicted-line tests alone, on frames that do not overlap (shared
            # samples would make the profiles agree by themselves)
            keep, end = [], -1
            for i, (s, _z, _p) in enumerate(grid):
                if s >= end:
                    keep.append(i)
                    end = s + self.n_grid
            if len(keep) < GRID_MIN_FRAMES:
                return out
        else:
            starts = [s for s, _z, _p in grid]
            spectra = np.stack([z for _s, z, _p in grid])
            levels = grid_median_level(spectra)
            out["coherence"], out["alpha"], out["line_ratio"] = grid_coherence(
                spectra, np.array(starts), self.n_grid, lambda: steady_lines(np.stack([p for _s, _z, p in grid])),
                levels=levels)
            out["drop_hit"] = (grid_evidence(out["coherence"], len(grid))
                               and not signal_periodic_at(out["alpha"], [x for _e, x in pattern], starts))
            cand, alpha, _med = grid_candidates(spectra, self.n_grid, 0.0, levels=levels)
            alphas = alpha[cand]
        starts = [grid[i][0] for i in keep]
        errors = [pattern[i][0] for i in keep]
        signals = [pattern[i][1] for i in keep]
        out["pattern"] = pattern_evidence(errors, signals, starts, self.fs, alphas)
        out["pattern_hit"] = pattern_hit_at(out["pattern"][0], out["pattern"][1], self.fs)
        out["binary"] = pattern_evidence(errors, signals, starts, self.fs, periods=BINARY_PHASE_PERIODS,
                                         squares=False)
        out["binary_hit"] = out["binary"][1] is not None and out["binary"][0] >= GRID_BINARY_PATTERN_MIN_AGREEMENT
        out["conversion"] = conversion_line_evidence(np.stack([grid[i][1] for i in keep]), starts, self.fs,
                                                     self.n_grid)
        out["conversion_hit"] = self._conversion_hit(out["conversion"], signals, starts)
        return out

    def _conversion_hit(self, conv, signals, starts) -> bool:
        """Whether the predicted-line test ``conv`` (of :func:`conversion_line_evidence`) is evidence: chance
        probability at most 10^-:data:`CONVERSION_LINES_MIN_LOG10`, and the signal's own profiles at the
        conversion's period do not agree (content periodic at it locks its lines to the sample clock too)."""
        lp, _src, period = conv
        if period is None or lp > -CONVERSION_LINES_MIN_LOG10 or len(signals) < 2:
            return False
        return profile_agreement(phase_profiles(signals, starts, period)) < GRID_PATTERN_MAX_SIGNAL_AGREEMENT

    def _settled_clean(self) -> bool:
        """Whether the frames analysed so far settle the verdict as clean with margin: no sample-sharp jump,
        no steady-tone frame with alias lines, no reflected partial, and the polyphonic test's evidence at
        or below chance (no note instance, or at least :data:`RANK_MIN_INSTANCES` of them with evident ones
        at most chance + 1 and rank z below :data:`SETTLED_RANK_Z`), and (when
        half the grid frames were kept back) the grid frames so far far from a drop pattern."""
        if any(r["sharp"] > 0 for _s, r in self.steps):
            return False
        if any(r["assessable"] and r["found"] > 0 for _s, r in self.frames):
            return False
        poly = [r for _s, r, _sig in self.poly if r is not None and r["instances"] > 0]
        inst = sum(r["instances"] for r in poly)
        if 0 < inst < RANK_MIN_INSTANCES:   # too few note instances to settle anything
            return False
        with_notes = [r for _s, r, _sig in self.poly if r is not None and r["f0_hz"]]
        if inst == 0 and (self.frames or with_notes):
            # notes but nothing testable: settled only when notes were rare
            if (any(r["assessable"] for _s, r in self.frames)
                    or len(with_notes) > SETTLED_NOTE_FRAME_SHARE * len(self.poly)):
                return False
        # reflected line grids: settled while their evidence stays at chance (with too few instances for the rank
        # test, only while none of them shows its reflection)
        grids = [r for _s, r, _sig in self.poly if r is not None and r["grid_instances"] > 0]
        g_inst = len(grids)
        g_ev = sum(r["grid_evident"] for r in grids)
        if g_ev > sum(r["grid_chance"] for r in grids) + 1.0 or (0 < g_inst < RANK_MIN_INSTANCES and g_ev > 0):
            return False
        g_var = sum(r["grid_rank_var"] for r in grids)
        if g_inst >= RANK_MIN_INSTANCES and g_var > 0 and \
                (sum(r["grid_rank_sum"] for r in grids) - 0.5 * g_inst) / math.sqrt(g_var) >= SETTLED_RANK_Z:
            return False
        if sum(r["evident"] for r in poly) > sum(r["chance"] for r in poly) + 1.0:
            return False
        rv = sum(r["rank_var"] for r in poly)
        if inst and rv > 0 and (sum(r["rank_sum"] for r in poly) - 0.5 * inst) / math.sqrt(rv) >= SETTLED_RANK_Z:
            return False
        for tr in self.trackers:
            if find_reflections(tr["tracks"], self.fs, tr["min_slope"], tr["tolerance_hz"]):
                return False
        if self.frame_count["grid"] >= 2 * GRID_MIN_FRAMES:
            g = self._grid_stats()
            if (g["coherence"] >= SETTLED_GRID_COHERENCE or g["pattern"][0] >= SETTLED_PATTERN_AGREEMENT
                    or g["binary"][0] >= SETTLED_PATTERN_AGREEMENT
                    or g["conversion"][0] <= -SETTLED_CONVERSION_LINES_LOG10):
                return False
        return True

    def finish_parts(self) -> list:
        """The kept frames' analyses as independent tasks, taken after the last block and before
        :meth:`finish` (the engine may run them on several threads at once): one per test, each
        analysing its own kept frames in stream order into that test's own list (the grid test's
        task also computes its statistics, which :meth:`finish` reads), so the lists are those of
        one sequential pass.  Empty when the first pass settles the verdict as clean."""
        self.first_pass_settled = bool(self.deferred) and self._settled_clean()
        deferred, self.deferred = self.deferred, []
        self._parts_taken = True
        if self.first_pass_settled:
            return []
        # the costliest first, so that two threads end together (measured on a 10-minute programme, CPU:
        # polyphonic 0.032 s, partial tracks 0.026 s, grid statistics 0.018 s, tonal 0.010 s, steps 0.006 s)
        kept: dict = {key: [] for key in ("poly", *(f"track{j}" for j in range(len(self.trackers))), "grid",
                                          "tonal", "step")}
        for key, start, frame in deferred:
            kept.setdefault(key, []).append((start, frame))
        return [functools.partial(self._analyse_kept, key, frames) for key, frames in kept.items()
                if frames or key == "grid"]

    def _analyse_kept(self, key: str, frames) -> None:
        if key.startswith("track"):
            tr = self.trackers[int(key[5:])]
            for start, frame in frames:
                self._track(tr, start, frame)
            return
        analyse = {"tonal": self._tonal, "poly": self._poly, "step": self._step, "grid": self._grid}[key]
        for start, frame in frames:
            analyse(start, frame)
        if key == "grid":
            self._grid_stats()

    def _finish_deferred(self) -> None:
        if not self._parts_taken:
            for part in self.finish_parts():
                part()
        if not self.first_pass_settled:
            self.frames.sort(key=lambda t: t[0])
            self.poly.sort(key=lambda t: t[0])
            self.steps.sort(key=lambda t: t[0])
            for tr in self.trackers:
                tr["tracks"].sort(key=lambda t: t[0])
        self.deferred = []

    def finish(self) -> AnalyzerResult:
        self._finish_deferred()
        tonal = [r for _s, r in self.frames]
        assess = [(s, r) for s, r in self.frames if r["assessable"]]
        h = sum(r["harmonic_power"] for _s, r in assess)
        evident = [(s, r) for s, r in assess if r["found"] >= max(MIN_CLEAR_FOLDS, MIN_FOUND_FRACTION * r["clear"])]
        # the steady-tone ratio is quoted only where alias lines were found, in enough of the frames
        enough = bool(evident) and len(evident) >= max(1, 0.5 * len(assess))
        score = None
        if enough:
            h_e = sum(r["harmonic_power"] for _s, r in evident)
            a_e = sum(r["alias_power"] for _s, r in evident)
            score = 10.0 * math.log10(a_e / h_e) if a_e > 0 and h_e > 0 else None
        line_hit = enough and score is not None and score >= ALIAS_SCORE_MIN_DB
        # the polyphonic test: note instances whose fold comb stands above every control comb
        poly_signal = [(s, r) for s, r, sig in self.poly if sig]
        poly_assess, instances, evident_n, chance, poly_hit, rank_hit, rank_z = pooled_evidence(poly_signal, "")
        poly_frames = [(s, r) for s, r in poly_assess if r["evident"] > 0]
        # the reflected line grids (FM, ring modulation): the same evidence rules over their instances
        grid_assess, g_inst, g_evident, g_chance, reflected_hit, g_rank_hit, g_rank_z = pooled_evidence(
            poly_signal, "grid_")
        grid_frames = [(s, r) for s, r in grid_assess if r["grid_evident"] > 0]
        if score is None and poly_hit and poly_frames:
            h_p = sum(r["harmonic_power"] for _s, r in poly_frames)
            a_p = sum(r["alias_power"] for _s, r in poly_frames)
            score = 10.0 * math.log10(a_p / h_p) if a_p > 0 and h_p > 0 else None
        if score is None and reflected_hit and grid_frames:
            h_p = sum(r["grid_power"] for _s, r in grid_frames)
            a_p = sum(r["grid_alias_power"] for _s, r in grid_frames)
            score = 10.0 * math.log10(a_p / h_p) if a_p > 0 and h_p > 0 else None
        # sample-sharp jumps
        step_frames = [(s, r) for s, r in self.steps if r["sharp"] > 0]
        step_sharp = sum(r["sharp"] for _s, r in self.steps)
        step_fitted = sum(r["fitted"] for _s, r in self.steps)
        pos_abs = (np.concatenate([s + r["positions"] for s, r in step_frames]) if step_frames
                   else np.zeros(0, dtype=np.int64))
        grid = step_grid(pos_abs, self.fs)
        step_hit = grid is None and step_evidence(step_sharp, step_fitted, len(step_frames))
        if score is None and step_hit:
            score = step_alias_ratio_db(sum(r["sharp_jump_sq"] for _s, r in step_frames),
                                        float(self.n_step * len(step_frames)),
                                        sum(r["power"] for _s, r in step_frames))
        # irregular sample grid (sample dropping)
        g = self._grid_stats()
        grid_coh, grid_alpha, drop_hit = g["coherence"], g["alpha"], g["drop_hit"]
        (pat_ag, pat_period, pat_sig), pattern_hit = g["pattern"], g["pattern_hit"]
        (bin_ag, bin_period, _bin_sig), binary_hit = g["binary"], g["binary_hit"]
        conv, conv_hit = g["conversion"], g["conversion_hit"]
        bound = None
        if score is None and assess and h > 0:
            b = sum(r["bound_power"] for _s, r in assess)
            bound = 10.0 * math.log10(b / h) if b > 0 else None
        reflections = []
        for tr in self.trackers:
            reflections += find_reflections(tr["tracks"], self.fs, tr["min_slope"], tr["tolerance_hz"],
                                            max_fall_hz=TRACK_MAX_FALL_FRACTION * self.fs)
        f0s = [r["f0_hz"] for r in tonal] or [f for _s, r in poly_assess for f in r["f0_hz"][:1]]
        n_poly = len(self.poly)
        poly_or_grid = sum(1 for _s, r in poly_signal if r is not None and (r["instances"] or r["grid_instances"]))
        fraction = (poly_or_grid / n_poly) if n_poly else None
        n_step = int(self.pick_step.starts.size)
        if n_step and step_frames and grid is None:
            fraction = max(fraction or 0.0, len(step_frames) / n_step)
        detail = {
            "reason": None,
            "tonal_frames": len(tonal),
            "assessable_frames": len(assess),
            "frames_with_alias_lines": len(evident),
            "median_f0_hz": round(float(np.median(f0s)), 3) if f0s else None,
            "alias_lines_found": int(sum(r["found"] for _s, r in assess)),
            "fold_positions_tested": int(sum(r["clear"] for _s, r in assess)),
            "score_upper_bound_db": None if bound is None else round(bound, 2),
            "polyphonic_frames": n_poly,
            "polyphonic_assessable_frames": len(poly_assess),
            "polyphonic_fold_positions_tested": int(sum(r["tested"] for _s, r in poly_assess)),
            "polyphonic_note_instances": int(instances),
            "polyphonic_instances_with_folds": int(evident_n),
            "polyphonic_instances_expected_by_chance": round(float(chance), 2),
            "polyphonic_rank_z": None if rank_z is None else round(float(rank_z), 2),
            "reflected_grid_frames": len(grid_assess),
            "reflected_grid_frames_with_folds": int(g_evident),
            "reflected_grid_expected_by_chance": round(float(g_chance), 2),
            "reflected_grid_rank_z": None if g_rank_z is None else round(float(g_rank_z), 2),
            "folded_partials": len(reflections),
            "step_frames": n_step,
            "step_frames_with_sharp_steps": len(step_frames),
            "sharp_steps": int(step_sharp),
            "steps_fitted": int(step_fitted),
            "sharp_steps_on_hold_grid_hz": grid[1] if grid and grid[0] == "hold" else None,
            "sharp_steps_period_samples": grid[1] if grid and grid[0] == "period" else None,
            "grid_frames": len(self.grid),
            "grid_line_coherence": round(grid_coh, 3),
            "grid_drop_interval_samples": (round(1.0 / grid_alpha, 3) if grid_alpha else None),
            "grid_pattern_agreement": round(pat_ag, 3),
            "grid_pattern_period_samples": pat_period,
            "grid_pattern_signal_agreement": round(pat_sig, 3),
            "grid_binary_pattern_agreement": round(bin_ag, 3),
            "grid_binary_pattern_period_samples": bin_period,
            "grid_conversion_lines_log10_p": round(conv[0], 2),
            "grid_conversion_source_hz": conv[1],
            "ceiling_flat_run_count": int(self._ceiling_count()),
            "where_s": [],
            "fold_examples": [],
        }
        # the steady-tone test assumes one harmonic series per frame: in polyphonic material other
        # notes' partials can sit at its fold positions, so its lines count only where the
        # polyphonic test also sees more hits than chance would give
        # (with no testable instance, the steady-tone lines alone must show in at least
        # MIN_LINE_ONLY_FRAMES frames: a syllable or two of speech can look like one series)
        # (with testable instances, the polyphonic test's own evidence must hold: a band-limited pulse
        # chord in the tuning corpus showed steady-tone lines with a few more evident instances than
        # chance once 128 frames were read)
        line_hit = line_hit and ((instances == 0 and len(evident) >= MIN_LINE_ONLY_FRAMES)
                                 or (instances > 0 and (fold_evidence(evident_n, instances, chance) or rank_hit)))
        reflect_hit = len(reflections) >= MIN_REFLECTED_PARTIALS
        grid_hit = drop_hit or pattern_hit or binary_hit or conv_hit
        ceiling_runs = detail["ceiling_flat_run_count"]
        ceiling_hit = ceiling_runs >= CEILING_MIN_PLATEAUS
        detected = line_hit or poly_hit or reflect_hit or step_hit or grid_hit or reflected_hit or ceiling_hit
        assessable = (bool(assess) or bool(poly_assess) or bool(reflections) or (bool(step_frames) and grid is None)
                      or grid_hit or bool(grid_assess) or ceiling_hit)
        if line_hit:
            dur = self.n_long / self.fs
            detail["where_s"] = [(s / self.fs, s / self.fs + dur) for s, _r in evident]
        if poly_hit:
            dur = self.n_poly / self.fs
            detail["where_s"] = list(detail["where_s"]) + [(s / self.fs, s / self.fs + dur) for s, _r in poly_frames]
        if reflected_hit:
            dur = self.n_poly / self.fs
            detail["where_s"] = list(detail["where_s"]) + [(s / self.fs, s / self.fs + dur) for s, _r in grid_frames]
        if step_hit:
            dur = self.n_step / self.fs
            detail["where_s"] = list(detail["where_s"]) + [(s / self.fs, s / self.fs + dur) for s, _r in step_frames]
        if grid_hit:
            dur = self.n_grid / self.fs
            detail["where_s"] = list(detail["where_s"]) + [(s / self.fs, s / self.fs + dur) for s, _z, _p in self.grid]
        if reflect_hit:
            detail["where_s"] = list(detail["where_s"]) + [(t1, t2) for t1, _f1, t2, _f2 in reflections]
            detail["fold_examples"] = [{"rising_hz": round(f1, 1), "at_s": round(t1, 3),
                                        "folded_hz": round(f2, 1), "folded_at_s": round(t2, 3)}
                                       for t1, f1, t2, f2 in reflections[:5]]
        if not assessable:
            if self.pick_long.starts.size == 0 and self.pick_poly.starts.size == 0:
                detail["reason"] = (f"not assessable: shorter than one analysis frame "
                                    f"({self.n_poly / self.fs:.2f} s)")
            elif not tonal and not any(r is not None for _s, r in poly_signal):
                detail["reason"] = "not assessable: no tonal passage (noise-like material is never judged)"
            else:
                detail["reason"] = ("not assessable: no note with fold positions that can be tested (their "
                                    "folds would land on their own harmonics, the sampling rate being a whole "
                                    "multiple of the fundamental or close to one, or under the noise floor)")
            detected = None
        elif detected:
            parts = []
            if line_hit:
                parts.append(f"alias lines at the predicted fold frequencies of partials above Nyquist, "
                             f"{score:.1f} dB relative to the harmonics")
            if poly_hit:
                parts.append(f"in {evident_n} of {instances} note instances the partials at the predicted fold "
                             f"positions stand above every control position (about {chance:.0f} expected by chance)"
                             + (f"; over all instances the fold positions rank {rank_z:.1f} standard deviations "
                                "above the control positions" if rank_hit else ""))
            if reflect_hit:
                parts.append(f"{len(reflections)} partial track(s) reflected at Nyquist (falling while "
                             "rising partials approach it)")
            if reflected_hit:
                parts.append(f"in {g_evident} of {g_inst} frames a line grid that no harmonic series explains (as "
                             "frequency or ring modulation makes) shows its reflection about half the sampling rate "
                             f"above every control position (about {g_chance:.0f} expected by chance)"
                             + (f"; over all of them the reflected positions rank {g_rank_z:.1f} standard deviations "
                                "above the control positions" if g_rank_hit else ""))
            if step_hit:
                parts.append(f"{step_sharp} of {step_fitted} jumps in the waveform are sample-sharp (no band-limited "
                             "transition around them): a waveform evaluated at the sample instants without "
                             "band-limiting, whose partials above Nyquist all fold")
            if drop_hit:
                parts.append(f"the samples lie on an irregular time grid: the prediction error jumps about every "
                             f"{1.0 / grid_alpha:.2f} samples, in step with the sample clock over the whole file "
                             f"(phase agreement {grid_coh:.2f}): samples were dropped or picked without a filter, "
                             "which folds")
            if pattern_hit and not drop_hit:
                sources = [r for r, period in pick_sources(self.fs).items() if period == pat_period]
                made_by = (f", the period of a conversion from {' or '.join(f'{r / 1000:g}' for r in sources)} kHz "
                           f"to {self.fs / 1000:g} kHz" if sources else "")
                parts.append(f"the samples lie on an irregular time grid: the prediction error repeats a drop "
                             f"pattern every {pat_period} samples{made_by}, in step with the sample clock over the "
                             f"whole file (profile agreement {pat_ag:.2f}): samples were dropped or picked without "
                             "a filter, which folds")
            if conv_hit and not (drop_hit or pattern_hit):
                parts.append(f"the samples lie on an irregular time grid: the prediction error carries the lines a "
                             f"conversion from {conv[1] / 1000:g} kHz to {self.fs / 1000:g} kHz without a filter "
                             f"leaves (at multiples of {conv[1] / 1000:g}/{self.fs / 1000:g} cycles per sample, "
                             f"modulo 1), in step with the sample clock over the whole file (chance about "
                             f"1 in 10^{-conv[0]:.0f}): samples were picked, or interpolated between neighbours, "
                             "without a filter, which folds")
            if binary_hit and not (drop_hit or pattern_hit or conv_hit):
                parts.append(f"the samples lie on an irregular time grid: the prediction error repeats a drop "
                             f"pattern every {bin_period} samples, the period of a converter whose read position "
                             f"steps by a binary fraction (a single-precision or fixed-point accumulator), in step "
                             f"with the sample clock (profile agreement {bin_ag:.2f}): samples were picked without "
                             "a filter, which folds")
            if ceiling_hit:
                parts.append(f"{ceiling_runs} runs of samples sit flat on the waveform's extreme value, entered and "
                             "left by a large step: a clipping curve evaluated at the sample instants, whose corners "
                             "fold")
            detail["reason"] = "; ".join(parts)
        else:
            if score is not None and score >= ALIAS_SCORE_MIN_DB:
                detail["reason"] = (f"alias lines at the fold frequencies in {len(evident)} steady-tone frame(s), "
                                    "not confirmed by the polyphonic test: too few to call the material aliased")
            elif score is not None:
                detail["reason"] = f"no alias lines above {ALIAS_SCORE_MIN_DB:.0f} dB at the fold frequencies"
            elif evident:
                detail["reason"] = (f"alias lines in only {len(evident)} of {len(assess)} assessable tonal "
                                    "frames: too few to call the material aliased or to quote a ratio")
            elif bound is not None:
                detail["reason"] = (f"no alias lines found above the floor at the {detail['fold_positions_tested']} "
                                    f"fold positions tested (alias-to-harmonic ratio below about {bound:.0f} dB, "
                                    "floor-limited)")
            else:
                detail["reason"] = (f"no folded partials found: in {evident_n} of {instances} note instances "
                                    f"the predicted fold positions stand out, about {chance:.0f} expected by chance")
        if ceiling_hit:
            # the flat-top test reads every sample of the file, so the whole file was assessed for it
            fraction = 1.0
            detail["reason"] += " (the flat-top test reads every sample of the file)"
        elif assessable and fraction is not None:
            detail["reason"] += (f" (folding could be tested in {100.0 * fraction:.0f} % of the frames analysed over "
                                 "the file)")
        detail["where_s"] = _merge(detail["where_s"])
        if not detected:
            score = None
        measurements = {
            "aliasing_detected": detected,
            "alias_to_harmonic_ratio_db": None if score is None else round(score, 2),
            "aliasing_assessable": assessable,
            "aliasing_assessable_fraction": None if fraction is None else round(fraction, 3),
            "aliasing_detail": detail,
        }
        settings = {"tonal_frame_samples": self.n_long, "tonal_frames_max": self.pick_long.starts.size,
                    "polyphonic_frame_samples": self.n_poly, "polyphonic_frames": int(self.pick_poly.starts.size),
                    "track_frame_samples": [tr["n"] for tr in self.trackers],
                    "track_hop_samples": [tr["hop"] for tr in self.trackers],
                    "track_pairs": [int(tr["picker"].starts.size) for tr in self.trackers],
                    "step_frame_samples": self.n_step, "step_frames": int(self.pick_step.starts.size),
                    "step_max_residual": STEP_MAX_RESIDUAL,
                    "grid_frame_samples": self.n_grid, "grid_frames": int(self.pick_grid.starts.size),
                    "grid_min_coherence": GRID_MIN_COHERENCE,
                    "first_pass_settled_clean": self.first_pass_settled,
                    "alias_score_min_db": ALIAS_SCORE_MIN_DB, "min_evident_share": MIN_EVIDENT_SHARE, "line_db": LINE_DB, "alias_line_db": ALIAS_LINE_DB}
        return AnalyzerResult(measurements=measurements, settings=settings)


def _merge(ranges, gap: float = 0.05):
    out = []
    for a, b in sorted(ranges):
        if out and a <= out[-1][1] + gap:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return [[round(a, 3), round(b, 3)] for a, b in out[:50]]
