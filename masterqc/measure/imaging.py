"""Imaging: mirror images of the audio left by an upsampler without a proper filter.

A signal recorded at a rate ``r`` and converted up to the file's rate ``fs``
without a proper interpolation filter (sample hold, linear interpolation, zero
stuffing) carries copies of its baseband spectrum at ``q*r +- f``.  Such a copy
is a deterministic function of the baseband: the product ``X(f) * X(q*r - f)``
keeps its phase from frame to frame, which makes the signal cyclostationary at
the cycle frequency ``alpha = q*r`` (spectral correlation at cycle frequency
alpha, in the sense of Gardner's cyclostationary analysis; the periodic
correlations that resampling leaves, described by Popescu and Farid, are the
same property).  Natural audio has no spectral correlation at those cycle
frequencies, so the measure is a clean test:

    S(f) = sum_m X_m(f) X_m(alpha - f) exp(-j 2 pi alpha n_m / fs)
    gamma^2(f) = |S(f)|^2 / (sum_m |X_m(f)|^2  sum_m |X_m(alpha - f)|^2)

with ``X_m`` the Hann-windowed DFT of the frame starting at sample ``n_m``.
Frequencies are taken modulo ``fs`` on the two-sided DFT, so images folded at
the file's Nyquist are paired with their source automatically.  The frame
length is ``fs/25`` samples (25 Hz bins): every standard rate from 8 kHz up
(11.025 and 22.05 kHz included) is a whole number of 25 Hz, so ``q*r - f`` falls
on a bin, and short frames give many frames for the same audio, which is what the
coherence estimate needs.  Frames are placed at irregular (stratified pseudo-random) positions:
on a regular grid two unrelated components could look phase-locked.

The estimator's bias under the null (no image) is not ``1/M`` for programme
material: where a few loud frames (drum hits, syllables) carry most of a bin's
power, ``|S|^2 / (P1 P2)`` is close to 1 whatever the phases.  Each pair's null
bias is therefore taken from the frames' own powers,
``b = sum_m P_m(f) P_m(alpha - f) / (sum_m P_m(f) sum_m P_m(alpha - f))``
(the squared coherence of independent components with those frame powers; 1/M for
steady material), and the null variance from an effective count of ``1/b`` frames.
Without it, music and speech look coherent at every cycle frequency, and the
leakage of a proper resampler's transition band passed for an image.

Guards against look-alikes, reported as ``untestable`` with their reason: periodic
material whose fundamental meets the cycle frequency (its harmonics pair up exactly
like images), and material that is just as coherent at control cycle frequencies a
few bins away.  Pairs of two spectral lines whose frequencies do not sum to the cycle
frequency are left out.  The significance is then judged against the statistic's
spread at further control cycle frequencies, measured on the material itself
(:data:`NULL_SPREAD_OFFSETS_BINS`): naive synthesis, whose partials fold at the
file's Nyquist frequency, makes many pairs share a few smeared lines, and a folded
partial meeting a direct one by chance then looks significant against the model's
null; its controls show the same spread, an upsampler's images do not.  A defect
also needs images that explain the band above the candidate's Nyquist frequency
(:data:`MIN_IMAGES_EXPLAINED_FRACTION`).  On periodic material with folded partials
(:data:`FOLD_CHECK_FRAMES`) a candidate that leaves a trace its images do not
explain is reported untestable, so that chance pairs never name a source rate.  A lossy block coder is
cyclostationary at every harmonic of its period (32 samples for a 32-band critically sampled filter bank,
576 or 1024 for its frames, :data:`CODER_HOPS_SAMPLES`), and ``fs/2`` is one of them: a trace at a candidate
rate on that comb whose neighbouring harmonics are coherent too (:data:`FRAMING_Z_RELATIVE`), where an
upsampler's images are not, is the coder's framing and is reported untestable.

For each candidate source rate below the file's rate the analyzer reports

* ``coherence``: the fraction of the power in the weaker member of each
  (f, alpha - f) pair that the other member explains, power-weighted over all
  pairs, corrected for the estimator's bias, in [0, 1];
* ``image_level_db``: the image rejection, as a level: the coherent power of the
  first image (at ``r - f``) of the content between 0.3 and 0.7 of ``r/2``
  (:data:`INNER_BAND`), relative to that content, in dB (None when no coherent
  image was found).  Only content well inside the source band counts: its images
  lie beyond 1.3 of the source Nyquist frequency, past the transition band of any
  interpolating resampler, however short, which stops them by 54 dB and more;
  images of the band's top (just above the Nyquist frequency) leak through such a
  transition band and say nothing about the kind of upsampler.  Hold, linear and
  zero-stuffing upsamplers leave the inner band's images within 15, 30 and 0 dB
  of it (:func:`image_response_ratio`);
* ``verdict``: "defect" (significant coherence, at the rate itself as well as its
  multiples, with an image at or above :data:`DEFECT_IMAGE_LEVEL_DB`), "trace"
  (significant coherence with a deeper image: a resampler's trace), "none", or
  "untestable" (with a reason).  A defect also needs the images an unfiltered upsampler leaves
  (:data:`CLEAR_SUBBANDS`): where, in a sub-band with content, they are bounded below the defect
  level, the coherence comes from programme components that pair up by themselves (steady
  partials of one note whose frequencies sum to the cycle frequency), and the verdict is "trace"
  (images above the candidate's Nyquist frequency are significant) or "none";
* ``evidence``: "spectrum"; or "samples" when the run's interpolation analyzer
  (:mod:`masterqc.measure.interpolation`) found the exact sample pattern of a hold,
  linear or zero-stuffing upsampler from this rate, which makes the candidate a
  defect whatever the spectral test could tell (too few loud frames, periodic
  material), with the level predicted from the upsampler's response and the
  measured spectrum (:func:`predicted_image_level_db`); "spectrum+samples" when
  both found it.  A sample-and-hold at any step, whole or fractional, is also found
  from its exactly repeated samples (:data:`HOLD_REPEAT_SHARE`) and reported at its
  effective rate, which need not be a standard one (a rate reducer holding 4.8 samples
  at 48 kHz: 10 kHz), with evidence "samples".

Where images are judged (the definition): an image is a defect when its level relative to
the content it mirrors reaches :data:`DEFECT_IMAGE_LEVEL_DB` at a frequency more than 0.3 of
the source Nyquist frequency above it (:data:`INNER_BAND`: content at 0.7 of it or below).
0.3 is the transition the shortest proper converters need (12 taps per phase, Kaiser beta 5,
-6 dB at the source Nyquist: beyond 1.3 of it they stop images by 54 dB, inside they leak
those of content at 0.8 of it at -28 dB); inside that transition no level line separates
short designs called imaging from proper ones (DEVELOPERS.md).  A nearest-phase polyphase
converter (output instants rounded to the nearest of N phases, no interpolation between them)
is the properly interpolated signal held at ``R = N r``: its first images are the hold's, at
``R +- f`` (folded modulo ``fs``), ``(f / R)**2`` relative to the content, and the same line
judges them (those of the inner band's content), by a test of its own at the cycle frequencies
``N r`` modulo ``fs`` (:data:`NEAREST_PHASE_COUNTS`, :meth:`ImagingAnalyzer._nearest_phase`).
At small ratios (44.1 -> 48 kHz) the first images of the inner band's content fold back onto the programme
(at ``f + fs - r``); they are judged by the same line through their coherence with the content pooled over
sub-bands, against control cycle frequencies (:data:`FOLDED_SUBBAND_FRACTION`, :meth:`ImagingAnalyzer._folded_inner`).

A converter from ``r`` is coherent at every multiple ``k r``: a spectrum defect at such a multiple is that
conversion's images of a higher order, reported as a trace, where ``r``'s own images fill the band above its
Nyquist frequency (:data:`MULTIPLE_EXPLAINED_FRACTION`); the house line judges them through ``r``'s first images.

Cost: at most :data:`MAX_FRAMES` frames per file spread over it (one FFT of
``fs/25`` samples per frame and channel, and one product per pair of the candidates'
own cycle frequencies), independent of the file's length.  The frames' spectra are
kept (:data:`SPECTRA_STORE_MAX_BYTES`), so the control cycle frequencies and the
half-file sums, which only a significant candidate needs, are computed for such a
candidate alone; the numbers are the same as summing
every pair while streaming.
"""

from __future__ import annotations

import functools
import math

import numpy as np

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.levels import power_ratio_db
from masterqc.measure.base import (BOOLEAN_OR_NULL, NUMBER_OR_NULL, Analyzer, AnalyzerResult, array_of)
from masterqc.measure.frames import FramePicker, frame_starts, harmonic_fundamental, refine_peak, refine_peaks

#: standard source rates that are tested when they are below the file's rate
CANDIDATE_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400)
#: analysis bin spacing: every standard rate is a whole number of 25 Hz (8000 = 320 x 25,
#: 11025 = 441 x 25), so fs/25 samples per frame puts every candidate's mirror on a bin
BIN_HZ = 25.0
#: at most this many frames per file are analysed (cost bound, independent of length).  House choice:
#: 100, about the count a 2-second file gives (99 at every rate: frames of fs/25 samples at least fs/50
#: apart), the count the thresholds here were tuned at; longer files take no more
MAX_FRAMES = 100
#: fewer frames than this and the coherence estimate is meaningless
MIN_FRAMES = 6
#: baseband bins below this are left out (DC offsets and rumble carry no image information)
LOW_EDGE_HZ = 20.0
#: pairs closer than this in frequency share the leakage of one component and are skipped
PAIR_GUARD_BINS = 3
#: z-score of the pooled coherence statistic above which the coherence is significant.
#: Own reasoning: the statistic is a sum over thousands of pairs, close to Gaussian under the
#: null (no image); 8 standard deviations keeps false alarms negligible over all candidates,
#: channels and files of a release, and covers the inflation by neighbouring-bin correlation
#: that :data:`NULL_VARIANCE_INFLATION` only approximates.
Z_SIGNIFICANT = 8.0
#: a pair of two spectral lines is an image pair only if their frequencies sum to the cycle
#: frequency: pairs whose refined line frequencies miss it by more than this are left out.
#: Own reasoning: parabolic interpolation of a Hann log-spectrum places a clean line within
#: about 0.05 bin (1 Hz at 20 Hz bins); 3 Hz leaves room for noise.  Without this check two
#: unrelated stationary lines can look phase-locked by chance over a short file, and every
#: pair of harmonics with the same order sum shares that one chance.
LINE_PAIR_TOLERANCE_HZ = 3.0
#: the image level is quoted only when the power-weighted statistic alone reaches this z
#: (own reasoning: below it the level estimate is dominated by its own noise)
Z_LEVEL = 5.0
#: pairs whose weaker member is this far below the stronger one give the image level when
#: the images fall on programme content (own reasoning: 10 dB)
ASYMMETRY_DB = 10.0
#: per-pair false-inclusion probability of the significant-pair image estimate, and the
#: number of such pairs it needs (own reasoning: with a few thousand pairs per candidate,
#: 1e-6 makes a chance inclusion a one-in-several-hundred-files event)
PAIR_P = 1e-6
MIN_SIGNIFICANT_PAIRS = 3
#: the image power seen across the file's two halves must reach this fraction of the
#: whole-file estimate (own reasoning: a true image gives 1 within noise; a pair drifting by
#: a quarter turn or more between halves gives 0 or less)
HALVES_AGREEMENT = 0.25
#: variance inflation of the null statistic: Hann-window leakage correlates adjacent bins
#: (own reasoning: the squared coherence between neighbouring Hann bins of white noise is
#: 0.25, which gives a factor of about 1.5; 2 is taken for margin)
NULL_VARIANCE_INFLATION = 2.0
#: the image level is measured on the images of source content well inside the candidate's band:
#: between these fractions of its Nyquist frequency.  Own reasoning from the filters' responses:
#: every interpolating resampler, even a short windowed sinc whose -6 dB point sits at the source
#: Nyquist frequency (12 taps per phase, Kaiser beta 5), stops the images of content below 0.7 of
#: the source Nyquist by 54 dB and more (they lie beyond 1.3 of it, past the transition band),
#: while its transition band lets through images of the top of the band (content at 0.9 of the
#: Nyquist: images at 1.1 of it, only 12-40 dB down).  A hold, linear or zero-stuffing upsampler
#: leaves the images of content between 0.3 and 0.7 of the source Nyquist at most 15 dB (hold),
#: 30 dB (linear) or 0 dB (zero stuffing) below it, at any ratio (tests derive both).
INNER_BAND = (0.3, 0.7)
#: what "imaging detected" means: the first images of the inner band's content (:data:`INNER_BAND`)
#: at or above this level relative to that content.  House choice, -50 dB.  An interpolation filter
#: that leaves images within 50 dB of the content inside its band was designed without regard to
#: them: the shortest filter a general-purpose resampler ships (12 taps per phase, Kaiser beta 5,
#: -6 dB at the source Nyquist frequency) leaves them at -60 dB on flat content (-54 dB at the
#: band's top), proper ones at -90 dB and less (tests derive both from the taps), whereas linear
#: interpolation, which the trade calls imaging, leaves -30 dB at 0.3 of the source Nyquist
#: frequency and more above.  A short windowed FIR of 32 taps whose images reach -32 dB (its stop
#: band's first side lobe) leaves its inner-band images at -36 to -44 dB: within a few dB of
#: linear interpolation's, hence a defect, 6 dB and more above the line.  (Was -42 dB, which left
#: such a FIR's inner-band images, -44 dB, a mere trace.)
DEFECT_IMAGE_LEVEL_DB = -50.0
#: source content is within this much of the mean bin power of the candidate's band; a weaker
#: pair is measured against that floor (own reasoning: the inner band of real material, even a
#: dull recording falling 12 dB per octave, lies within 25 dB of the band's mean bin power, while
#: a short filter's stop-band residue lies 50 dB and more below it)
CONTENT_FLOOR_DB = -30.0
#: control cycle frequencies, in bins from each candidate's: an upsampler's images are
#: coherent only at the exact cycle frequency, while material that is cyclostationary at
#: almost every cycle frequency (periodic material whose folded partials fill a dense comb)
#: shows the same coherence at the controls.  Own reasoning: 3 and 5 bins lie outside the
#: Hann main lobe (2 bins), so a true image is not seen at the controls.
CONTROL_OFFSETS_BINS = (-5, 3)
#: a control this significant (absolute, and relative to the candidate's z) makes the
#: candidate untestable (own reasoning)
CONTROL_Z_RELATIVE = 0.5
#: further control cycle frequencies, in bins from each candidate's (first order only): the spread of
#: the statistic at cycle frequencies no upsampler uses, on the material itself.  The pooled statistic
#: assumes pairs that are independent under the null; a few strong smeared lines (naive synthesis, its
#: partials folded at the file's Nyquist frequency) make hundreds of pairs share two components, and a
#: chance alignment then reaches z 8 where the model says 1 in 10^15.  The controls share that
#: structure, so their root-mean-square z measures the null's real spread.  Own reasoning: 6 bins and
#: more keep a true image's main lobe (2 bins) and a vibrato's smear out of them; 8 of them give the
#: spread within about 25 %
NULL_SPREAD_OFFSETS_BINS = (-17, -13, -9, -6, 6, 9, 13, 17)
#: the analysed frames' spectra are kept (complex, one-sided) up to this many bytes, so that the
#: pairs only a significant candidate needs (its control cycle frequencies and its first-half sums)
#: are computed at :meth:`ImagingAnalyzer.finish` only for such a candidate; above it (many channels
#: at a high rate) every pair is accumulated while streaming.  Both give the same numbers (house
#: choice: 32 MiB holds 100 frames of 8 channels at 96 kHz, 25 MB)
SPECTRA_STORE_MAX_BYTES = 32 * 1024 * 1024
#: sub-bands of the candidate's band (fractions of its Nyquist frequency) in which the images that an
#: unfiltered upsampler must leave are bounded from above.  Own reasoning from the responses
#: (:func:`image_response_ratio`): hold, linear and zero-stuffing upsamplers leave the first images of
#: content anywhere above 0.3 of the source Nyquist frequency within 30 dB of it, so a sub-band with
#: content whose images are bounded below :data:`DEFECT_IMAGE_LEVEL_DB` rules such an upsampler out,
#: whatever pairs of programme components elsewhere are coherent (steady notes whose partials sum to
#: the cycle frequency, as those on 110 Hz do to the 12.1 kHz fold of a 32 kHz source's images in a
#: 44.1 kHz file).  The bound is the smaller of the power at the image positions (an image cannot hold
#: more) and the coherent image power plus :data:`Z_LEVEL` standard deviations; both are tight where
#: the images fall clear of the programme (above the candidate's Nyquist frequency, or above a lower
#: true source's).  Narrow sub-bands, so a resampler's transition band or programme under part of the
#: images cannot hide their absence under the rest
CLEAR_SUBBANDS = ((0.3, 0.4), (0.4, 0.5), (0.5, 0.6), (0.6, 0.7), (0.7, 0.8), (0.8, 0.9), (0.9, 1.0))
#: a defect needs the content to explain at least this share of the power at its first images' positions
#: above the candidate's Nyquist frequency (power-weighted over the weaker members, bias-corrected squared
#: coherence).  A file converted up from the candidate holds its images there and nothing else, so its
#: images explain all of it (0.99 and more at 24 bits, from hold to a short FIR whose images lie 45 dB down);
#: partials that meet by chance (naive synthesis, its partials folded at the file's Nyquist frequency: a
#: few of them pair up, the rest of the lines above the candidate's Nyquist frequency have no partner)
#: explain 0.1 or less.  House choice: 0.3, room for a noise floor (dither, a noise bed added after the
#: conversion) at the images' positions
MIN_IMAGES_EXPLAINED_FRACTION = 0.3
#: a spectrum defect at a whole multiple ``R = k r`` (k >= 2) of a lower candidate ``r`` whose images (trace or defect)
#: explain at least this share of the band above ``r``'s Nyquist frequency is ``r``'s images of a higher order, not a
#: source at ``R`` (:meth:`ImagingAnalyzer.finish`).  Own reasoning: a file converted up from ``r`` holds above
#: ``r / 2`` that converter's images and nothing else (0.999 and more at 24 bits, whatever the filter), and ``r``'s
#: images of its own inner band's content are measured (its inner band holds content, at least CONTENT_FLOOR_DB of
#: its band's, and a level: ``r`` has content of its own; a tone at ``r / 2`` mirrors itself there and explains all
#: of it without being a source), so the inner
#: band of ``R`` (0.3-0.7 of ``R / 2``, for k = 2 more than half of it above ``r / 2``) holds no content of its own
#: and ``R``'s "images" are ``r``'s converter response at ``k r - f``, judged through ``r``'s own first images by the
#: house definition; a later stage converting up from ``R`` with leaky images (a short filter, after a proper
#: conversion from ``r``) puts its own images above ``r / 2`` too, uncoherent at ``r``, and where they reach a tenth
#: of the power there (10 dB under ``r``'s images) ``r`` explains less than 0.9 and the defect at ``R`` stands.
MULTIPLE_EXPLAINED_FRACTION = 0.9
#: a sub-band rules out only with at least this many clear pairs (own reasoning: the bound needs a
#: few hundred hertz of content)
CLEAR_MIN_PAIRS = 8
#: the images are ruled out when they are bounded below the defect level in at least this share of
#: the sub-bands with content.  Own reasoning: an upsampler's images mirror the whole band, their level
#: set by one filter response, so they are there in most sub-bands; a short FIR's stop band has nulls,
#: where one sub-band (0.1 of the Nyquist frequency wide) can dip below the line while the band as a
#: whole stands well above it; programme components that pair up by themselves fill one or two
#: sub-bands at most
CLEAR_RULE_OUT_SHARE = 0.5
#: periods of block coders (samples): a coder that quantises blocks of that many samples makes the file
#: cyclostationary at every harmonic ``k * fs / hop`` of its frame rate (the quantisation noise and the band
#: limit change from block to block), and a critically sampled filter bank of 32 bands takes one sub-band
#: sample per band every 32 samples, so its uncancelled aliasing is cyclostationary at ``k * fs / 32``.
#: Common practice, no source: the 32-band polyphase filter bank of the widespread sub-band coders, and the
#: lines per granule or frame of those and of transform coders (576 and 1152; 1024 and its pair 2048)
CODER_HOPS_SAMPLES = (32, 576, 1152, 1024, 2048)
#: a trace at a candidate rate that is itself a harmonic of a coder's frame rate (``fs/2 = 288 * fs/576``)
#: is the coder's framing, not a conversion, when the two neighbouring harmonics (``R +- fs/hop``), cycle
#: frequencies where an upsampler's images are not, are coherent too: each at least this share of the
#: candidate's own z (and significant, :data:`Z_SIGNIFICANT`).  Own reasoning: the framing harmonics next
#: to a harmonic carry comparable coherence; an upsampler's trace gives chance level (|z| of a few) there
FRAMING_Z_RELATIVE = 0.2
#: long frames checked for periodic material with folded partials (see :mod:`aliasing`): on such material
#: a candidate that leaves a trace whose images do not explain the band above its Nyquist frequency
#: (:data:`MIN_IMAGES_EXPLAINED_FRACTION`) is reported untestable, so that chance pairs of folded
#: partials never name a source rate.  The frames are kept while streaming (float32 where that holds their
#: samples exactly, as it does 24-bit PCM) and transformed and analysed only for a file with such a trace
FOLD_CHECK_FRAMES = 8
#: a sample-and-hold at any step (whole or fractional, any effective rate: rate reducers hold at steps such as
#: 4.8 samples, an effective 10 kHz that is no standard rate) repeats each held value exactly, in runs of
#: ``floor(L)`` or ``ceil(L)`` samples for a step ``L``.  Own reasoning: at 16 bits and more, programme material
#: repeats a sample value by chance only at very low levels, in runs of one or two whose lengths spread
#: geometrically; the rule needs both a share of repeated neighbours (:data:`HOLD_REPEAT_SHARE`; a step of 1.5
#: samples repeats a third of them) and runs whose lengths nearly all take the two values a fixed step allows
#: (:data:`HOLD_REGULAR_SHARE`), over at least :data:`HOLD_MIN_RUNS` runs of the analysed frames (digital
#: silence, runs at the frame's peak, a clipped top, and runs whose value one of the two runs before it had, as
#: in a steady square or pulse wave, are not counted)
HOLD_REPEAT_SHARE = 0.3
#: neighbours this close count as a repeat, so that a hold dithered afterwards at 24 bits (TPDF, +-1 LSB: a
#: difference of at most 3 LSB) is still seen; pairs and runs at or below :data:`HOLD_FLOOR` (near-silence,
#: whose samples sit within a few LSB of each other anyway) are not counted.  Own reasoning: 4 LSB at 24 bits
#: (2^-21, -126 dBFS); the floor 16 times that
HOLD_TOLERANCE = 2.0 ** -21
HOLD_FLOOR = 2.0 ** -17
HOLD_REGULAR_SHARE = 0.9
HOLD_MIN_RUNS = 500
#: the runs are counted on every this-many-th analysed frame (cost: 20 of 100 frames give a 30 s file's
#: programme at 48 kHz some 15 000 runs of a 10 kHz hold; own reasoning)
HOLD_FRAME_STEP = 5
#: a hold whose step is shorter than this (samples) is not judged from its runs: its runs mix lengths 1 and 2,
#: as any slowly varying passage does within :data:`HOLD_TOLERANCE`; such a hold (from a rate above half the
#: file's) is a standard conversion, which the sample-pattern analyzer tests exactly (own reasoning)
HOLD_MIN_STEP = 2
#: the effective rate of a hold is named as a standard rate (:data:`CANDIDATE_RATES_HZ`) within this fraction
#: of it, else rounded to the analysis bin, 25 Hz (own reasoning: the mean run length over thousands of runs is
#: good to about 1e-4, a hertz or two)
HOLD_RATE_SNAP = 0.002
#: periodic material whose fundamental divides a candidate rate is itself cyclostationary at
#: that rate; its harmonics pair up like images.  Harmonic series are recognised from spectral
#: lines this far above the local floor (own reasoning).
LINE_PROMINENCE_DB = 20.0
#: phase counts of the nearest-phase polyphase converters tested (:meth:`ImagingAnalyzer._nearest_phase`).  A
#: converter that tabulates its interpolation filter at ``N`` fractional delays and takes, for each output
#: sample, the nearest (or the preceding) one without interpolating between them, outputs the properly
#: interpolated signal ``y`` at instants rounded to a grid of ``1 / (N r)`` seconds: exactly the samples of
#: ``y`` held at the rate ``R = N r`` (a zero-order hold), taken at the file's rate.  The hold leaves images of
#: the content at ``f`` at ``k R +- f`` (every ``k``), folded modulo the file's rate ``fs``, each at
#: ``(f / (k R))**2`` relative to it (the box's response, :func:`image_response_ratio`, ``R >> f``); so they are
#: coherent with the content at the cycle frequencies ``k N r`` modulo ``fs``, not at multiples of ``r``.  Own
#: reasoning: the phase counts such banks use are powers of two; 8 to 1024 covers them (a count that is a
#: multiple of the ratio's denominator is exact and leaves no images at all)
NEAREST_PHASE_COUNTS = tuple(2 ** j for j in range(3, 11))
#: at most this many pairs per cycle frequency in the nearest-phase test (cost; own reasoning: their images lie
#: clear of the programme, above the candidate's Nyquist frequency, where a few hundred pairs give z in the
#: hundreds from 1024 phases down)
NEAREST_PHASE_MAX_PAIRS = 256
#: the fewest phases the hold model's fitted rate may imply, half the fewest tested (analytic: a bank of N phases
#: holds at N times the source rate, so its images of content below the source Nyquist frequency lie at most
#: (1 / 2N)**2 below it; a fit implying fewer is images no such bank makes, e.g. the band-limited content of an LFE
#: channel whose fit gave "about 0 phases" at +5.5 dB on a proper converter's output)
NEAREST_PHASE_MIN_FITTED = NEAREST_PHASE_COUNTS[0] / 2.0
#: the nearest-phase images of the content at ``f`` rise as ``f**2`` (the hold model), where a converter's own stop
#: band at that order (its images at ``N r +- f``, on the same cycle frequency) is flat across the audio band: the
#: level is read only where the pairs' content frequencies predict a rise of at least this ratio between the lower
#: and the upper half of them (own reasoning: 2, 3 dB), and the measured rise must reach its square root (half
#: the predicted dB)
NEAREST_PHASE_MIN_RISE = 2.0
#: the nearest-phase test runs on at most this many candidates: the lowest rates whose band above their Nyquist
#: frequency is quiet (where such a converter's output ends), and at which such a bank leaves images off the
#: ordinary image cycle frequencies (house choice, cost); of those that read as a bank, the one whose images explain
#: the largest share of the power above its Nyquist frequency names the source
NEAREST_PHASE_MAX_CANDIDATES = 4
#: a candidate's band is quiet above its Nyquist frequency when the mean bin power from just above it to 1.3 of it
#: is at most this share of that at 0.7-0.9 of it (a cliff), or :data:`NEAREST_PHASE_QUIET` of that of the whole
#: band below (own reasoning: 10 and 30 dB; a converter from that rate leaves a cliff there, programme material
#: seldom falls so fast; a bank with few phases fills the band above with its images, 30 to 50 dB under the content
#: they mirror, hence the cliff rule too)
NEAREST_PHASE_DROP = 0.1
#: see :meth:`ImagingAnalyzer._with_nearest_phase` (own reasoning: 0.3; the source's own candidate explains a share
#: of the same order as the highest, a lower one, whose band above holds programme, several times less)
NEAREST_PHASE_COVER_SHARE = 0.3
NEAREST_PHASE_QUIET = 1e-3
#: folded inner images (:meth:`ImagingAnalyzer._folded_inner`): at small ratios (44.1 -> 48, 88.2 -> 96, 22.05 -> 24 kHz)
#: the first images of the inner band's content (at ``r - f``) lie beyond the file's Nyquist frequency and fold back
#: onto the programme, at ``f + (fs - r)``: no quiet band holds them, and per pair they sit far below the programme
#: there.  The test pools the pairs' products over sub-bands of this fraction of the source Nyquist frequency before
#: squaring (own reasoning: a windowed-sinc kernel's image response ``H(r - f) / H(f)`` is real and keeps its sign
#: over one stop-band lobe, ``r / taps`` wide: a quarter of the Nyquist frequency and more for 8-16 taps, so the
#: images add in phase within a sub-band while the programme's chance products add as noise)
FOLDED_SUBBAND_FRACTION = 0.05
#: the test applies when at least this share of the inner band's first images fold below the candidate's Nyquist
#: frequency, onto the programme (own reasoning: elsewhere the clear pairs above it measure them directly)
FOLDED_MIN_SHARE = 0.5
#: control cycle frequencies of the folded test, in bins from the candidate's: the null of the sub-band statistic
#: is measured on the material itself (transients and steady notes make it heavy-tailed, which no model gives).
#: Own reasoning: 6 bins and more keep a true image's main lobe out; 36 controls up to 40 bins (1 kHz) away give
#: the null's mean and spread, and its largest value a check on its tail
FOLDED_CONTROL_OFFSETS_BINS = tuple(o for o in range(-40, 41, 2) if abs(o) >= 6)
#: the folded statistic's significance against the controls' spread (own reasoning: 8, as :data:`Z_SIGNIFICANT`), and
#: against the largest control's (own reasoning: 1.5 times it, so a heavy tail seen among the controls cannot pass)
FOLDED_Z = 8.0
FOLDED_CONTROL_RELATIVE = 1.5


def null_coherence_bias(starts, window) -> float:
    """Expected squared coherence of two independent noises over frames at ``starts``.

    For locally white Gaussian noise the DFT coefficients of two frames ``d`` samples
    apart correlate by rho(d) = sum w[n] w[n+d] / sum w^2 (the window's normalised
    autocorrelation), and the phase correction at the cycle frequency cancels the
    frequency-dependent phase of the pair, so E|S|^2 / (E P1 E P2) = sum_{m,m'} rho^2 / M^2.
    With non-overlapping frames this is 1/M.
    """
    s = np.asarray(starts, dtype=np.int64)
    m = s.size
    if m == 0:
        return 1.0
    w = np.asarray(window, dtype=float)
    n = w.size
    ac = np.fft.irfft(np.abs(np.fft.rfft(w, 2 * n)) ** 2, 2 * n)[:n]
    ac = ac / ac[0]
    d = np.abs(s[:, None] - s[None, :])
    rho = np.where(d < n, ac[np.minimum(d, n - 1)], 0.0)
    return float(np.sum(rho ** 2)) / (m * m)


def mirror_pairs(fs: int, rate: float, n_fft: int, rate_for_band: float | None = None, first_only: bool = False):
    """Bin pairs of the two-sided DFT linked by the images of an upsampler from ``rate``.

    Returns ``(ka, kb, alpha_bins)``: full-DFT indices (0..n_fft-1) of a baseband
    bin (``|f| < rate/2``) and of its image at ``q*rate - f`` (modulo fs), and the
    cycle frequency ``q*rate`` in bins (modulo n_fft), for every image order
    ``q`` whose images reach the band below fs (``q*rate - rate/2 < fs``).
    Conjugate duplicates and pairs closer than :data:`PAIR_GUARD_BINS` are removed.
    ``rate_for_band`` (default ``rate``) sets the baseband edge, so that control cycle
    frequencies near a candidate pair the same baseband bins.  ``first_only``: only the orders whose
    cycle frequency is the first order's (the same pairs, in the same order, as selecting those from
    the full result: the conjugate duplicates removed are always a later entry's).
    """
    bin_hz = fs / n_fft
    lo = int(math.ceil(LOW_EDGE_HZ / bin_hz))
    hi = int(math.ceil((rate if rate_for_band is None else rate_for_band) / 2.0 / bin_hz)) - 1
    base = np.arange(lo, hi + 1, dtype=np.int64)
    n = int(n_fft)
    parts_a, parts_b, parts_al = [], [], []
    q = 1
    alpha_1 = int(round(rate / bin_hz)) % n
    while q * rate - rate / 2.0 < fs:
        alpha = int(round(q * rate / bin_hz)) % n
        q += 1
        if alpha == 0 or (first_only and alpha != alpha_1):
            continue
        for sign in (1, -1):
            ka = (sign * base) % n
            parts_a.append(ka)
            parts_b.append((alpha - ka) % n)
            parts_al.append(np.full(ka.size, alpha, dtype=np.int64))
    if not parts_a:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty
    a = np.concatenate(parts_a)
    b = np.concatenate(parts_b)
    al = np.concatenate(parts_al)
    fa = np.minimum(a, n - a)
    fb = np.minimum(b, n - b)
    ok = (fb >= lo) & (np.abs(fa - fb) >= PAIR_GUARD_BINS)
    a, b, al = a[ok], b[ok], al[ok]
    # canonical key of the unordered pair and its conjugate (-a, -b, -alpha)
    na, nb, nal = (n - a) % n, (n - b) % n, (n - al) % n
    k1 = (np.minimum(a, b) * n + np.maximum(a, b)) * n + al
    k2 = (np.minimum(na, nb) * n + np.maximum(na, nb)) * n + nal
    key = np.minimum(k1, k2)
    _u, first = np.unique(key, return_index=True)
    first = np.sort(first)
    return a[first], b[first], al[first]


def spectral_lines(power: np.ndarray, prominence_db: float = LINE_PROMINENCE_DB, halfwidth: int = 25):
    """Indices of spectral lines in a power spectrum: local maxima standing at least
    ``prominence_db`` above the median of the surrounding ``2*halfwidth+1`` bins."""
    p = np.asarray(power, dtype=float)
    if p.size < 5:
        return np.zeros(0, dtype=np.int64)
    from masterqc.measure.npkernels import median_filter
    floor = median_filter(p, size=2 * halfwidth + 1, mode="nearest")
    tiny = max(float(p.max()) * 1e-30, 1e-300)
    ratio = p / np.maximum(floor, tiny)
    peak = (p[1:-1] >= p[:-2]) & (p[1:-1] >= p[2:]) & (ratio[1:-1] >= 10 ** (prominence_db / 10))
    return np.nonzero(peak)[0] + 1


def locked_order(f0: float, rate: float, fs: float, tolerance_hz: float, max_order: int | None = None):
    """Smallest K (1..max_order, default fs/f0) with K*f0 within ``tolerance_hz`` of
    ``rate`` modulo ``fs``, or None.  Periodic material at f0 is cyclostationary at every
    K*f0 (mod fs, once sampled), so at such a cycle frequency a test for images says
    nothing."""
    if not f0 or f0 <= 0:
        return None
    top = int(max_order if max_order is not None else max(1, fs // f0))
    k = np.arange(1, top + 1)
    resid = np.mod(k * f0 - rate + fs / 2.0, fs) - fs / 2.0
    hit = np.nonzero(np.abs(resid) <= tolerance_hz)[0]
    return int(k[hit[0]]) if hit.size else None


def periodic_fundamental(power: np.ndarray, bin_hz: float, lines=None):
    """Fundamental (Hz) of line-dominated periodic material in a long-term power spectrum, or None.

    Lines must hold most of the power for the material to count as periodic.  ``lines``: the
    spectrum's :func:`spectral_lines`, when already found.
    """
    lines = spectral_lines(power) if lines is None else lines
    if lines.size < 3:
        return None
    lobe = np.zeros(power.size, dtype=bool)
    for k in lines:
        lobe[max(0, k - 2):k + 3] = True
    if power[lobe].sum() < 0.5 * power.sum():
        return None
    freqs = refine_peaks(power, lines) * bin_hz
    return harmonic_fundamental(freqs, power[lines])


def _inner_khz(rate: float) -> str:
    return f"{INNER_BAND[0] * rate / 2000:.1f}-{INNER_BAND[1] * rate / 2000:.1f} kHz"


def image_response_ratio(kind: str, rate: float, fs: float, f_hz):
    """Power of the first image (at ``rate - f``) over the power of the content at ``f`` that an
    upsampler from ``rate`` to ``fs`` without an interpolation filter leaves.

    Zero stuffing replicates the spectrum unchanged: 1.  Holding each sample is a box filter: for a
    whole factor ``L = fs / rate`` its response is ``sin(pi f L / fs) / (L sin(pi f / fs))``, and
    since ``sin(pi (rate - f) L / fs) = sin(pi - pi f L / fs)`` the numerators cancel:
    ``(sin(pi f / fs) / sin(pi (rate - f) / fs))**2``.  For a fractional factor the hold is that of
    the continuous-time box of width ``1/rate``, ``sinc(f / rate)``, and the ratio is
    ``(f / (rate - f))**2``.  Linear interpolation is the box convolved with itself (the triangle):
    the hold's ratio squared.
    """
    f = np.asarray(f_hz, dtype=float)
    if kind == "zero-stuff":
        return np.ones_like(f)
    ratio = fs / rate
    if abs(ratio - round(ratio)) < 1e-9:
        hold = (np.sin(np.pi * f / fs) / np.sin(np.pi * (rate - f) / fs)) ** 2
    else:
        hold = (f / (rate - f)) ** 2
    return hold ** 2 if kind == "linear" else hold


def predicted_image_level_db(kind: str, rate: float, fs: float, power, bin_hz: float):
    """Level (dB) of the images of the inner band's content (:data:`INNER_BAND` of ``rate``'s
    Nyquist frequency) relative to that content, for an upsampler ``kind`` from ``rate``, from the
    measured power spectrum ``power`` (bins ``bin_hz`` apart); None without content there."""
    p = np.asarray(power, dtype=float)
    lo = int(math.ceil(INNER_BAND[0] * rate / 2.0 / bin_hz))
    hi = min(p.size - 1, int(math.floor(INNER_BAND[1] * rate / 2.0 / bin_hz)))
    if hi < lo:
        return None
    band = p[lo:hi + 1]
    total = float(band.sum())
    if not total > 0.0:
        return None
    r = image_response_ratio(kind, rate, fs, np.arange(lo, hi + 1) * bin_hz)
    return power_ratio_db(float(np.sum(band * r)) / total)


@functools.lru_cache(maxsize=8)
def _pair_plan(fs: int, n_fft: int, rates: tuple, offsets: tuple):
    """Per candidate rate, the cycle frequencies (first entry: the rate; then the controls offset by
    ``offsets`` bins) with their bin pairs, and the distinct pairs every candidate indexes into:
    ``(cands, all_ka, all_kb, pair_index)``.  Cached: the arrays are read-only."""
    bin_hz = fs / n_fft
    cands = []
    parts = []
    pos = 0
    for r in rates:
        cand = {"rate": r, "cycles": []}
        for off in (0,) + offsets:
            ka, kb, al = mirror_pairs(fs, r + off * bin_hz, n_fft, rate_for_band=r, first_only=bool(off))
            if off:
                # a control needs only the first order (see :meth:`ImagingAnalyzer._assess`)
                sel = al == int(round((r + off * bin_hz) / bin_hz)) % n_fft
                ka, kb, al = ka[sel], kb[sel], al[sel]
            # the baseband member's frequency as a fraction of the candidate's Nyquist frequency
            frac = np.minimum(ka, n_fft - ka) * bin_hz / (r / 2.0)
            first = al == int(round((r + off * bin_hz) / bin_hz)) % n_fft
            # the image member lies above the candidate's Nyquist frequency, clear of its main lobe:
            # where a file converted up from r holds nothing but images
            clear = np.minimum(kb, n_fft - kb) * bin_hz > r / 2.0 + 2 * bin_hz
            cycle = {"offset": off, "ka": ka, "kb": kb, "alpha": al, "frac": frac, "first": first, "clear": clear,
                     "slice": slice(pos, pos + ka.size)}
            for v in cycle.values():
                if isinstance(v, np.ndarray):
                    v.flags.writeable = False
            cand["cycles"].append(cycle)
            parts.append((ka, kb, al))
            pos += ka.size
        cands.append(cand)
    cat = (lambda i: np.concatenate([p[i] for p in parts]) if parts else np.zeros(0, dtype=np.int64))
    all_ka, all_kb = cat(0), cat(1)
    # the cycle frequencies of a rate are those of its multiples too (q * 8 kHz includes 16, 24,
    # 32 ... kHz): each distinct bin pair is multiplied once per frame, and every candidate's
    # pairs index into the distinct ones
    n = n_fft
    key = np.minimum(all_ka, all_kb) * n + np.maximum(all_ka, all_kb)
    uniq, pair_index = np.unique(key, return_inverse=True)
    all_ka, all_kb = uniq // n, uniq % n
    for v in (all_ka, all_kb, pair_index):
        v.flags.writeable = False
    return cands, all_ka, all_kb, pair_index


@functools.lru_cache(maxsize=8)
def _main_pairs(fs: int, n_fft: int, rates: tuple, offsets: tuple):
    """The distinct pairs (indices into :func:`_pair_plan`'s ``all_ka``/``all_kb``) that the candidates'
    own cycle frequencies use (not the controls), and per distinct pair its position among them (-1 for
    a pair only a control uses).  Cached, read-only."""
    cands, all_ka, _all_kb, pair_index = _pair_plan(fs, n_fft, rates, offsets)
    parts = [pair_index[c["cycles"][0]["slice"]] for c in cands]
    main = np.unique(np.concatenate(parts)) if parts else np.zeros(0, dtype=np.int64)
    pos = np.full(all_ka.size, -1, dtype=np.int64)
    pos[main] = np.arange(main.size)
    for v in (main, pos):
        v.flags.writeable = False
    return main, pos


@functools.lru_cache(maxsize=64)
def _first_order_pairs(fs: int, n_fft: int, alpha_bin: int, rate: float):
    """``(ka, kb)``: the pairs of :func:`mirror_pairs` at cycle frequency ``alpha_bin`` bins (baseband below
    ``rate / 2``) whose cycle frequency is ``alpha_bin`` itself (modulo ``n_fft``).  Cached, read-only."""
    ka, kb, al = mirror_pairs(fs, alpha_bin * (fs / n_fft), n_fft, rate_for_band=rate, first_only=True)
    sel = al == alpha_bin % n_fft
    ka, kb = ka[sel], kb[sel]
    for v in (ka, kb):
        v.flags.writeable = False
    return ka, kb


@functools.lru_cache(maxsize=256)
def _clear_pairs(fs: int, n_fft: int, alpha_bin: int, rate: float):
    """``(ka, kb)``: the pairs (two-sided bins) at cycle frequency ``alpha_bin`` whose first member is content below
    ``rate / 2`` (above :data:`LOW_EDGE_HZ`) and whose second lies above ``rate / 2`` by more than 2 bins, where a
    converter from ``rate`` leaves nothing but images.  Cached, read-only."""
    bin_hz = fs / n_fft
    lo = int(math.ceil(LOW_EDGE_HZ / bin_hz))
    hi = int(math.ceil(rate / 2.0 / bin_hz)) - 1
    base = np.arange(lo, hi + 1, dtype=np.int64)
    ka = np.concatenate([base, (n_fft - base) % n_fft])
    kb = (alpha_bin - ka) % n_fft
    fb = np.minimum(kb, n_fft - kb)
    ok = fb * bin_hz > rate / 2.0 + 2 * bin_hz
    ka, kb = ka[ok], kb[ok]
    for v in (ka, kb):
        v.flags.writeable = False
    return ka, kb


def _pooled_z(g2, bias, w, v0):
    """``(t, z_w, z_u)`` of pairs' squared coherences ``g2`` against their null bias ``bias`` and
    null variance ``v0``: the power-weighted sum ``t`` (weights ``w``) and its z (tones, strong
    images), and the unweighted z (images spread thinly over many bins), each with the null
    variance inflated by :data:`NULL_VARIANCE_INFLATION`."""
    t = float(np.sum((g2 - bias) * w))
    sd = math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0 * w * w)))
    z_w = t / sd if sd > 0 else 0.0
    z_u = float(np.sum(g2 - bias)) / math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0)))
    return t, z_w, z_u


class ImagingAnalyzer(Analyzer):
    """Spectral correlation at the cycle frequencies of every candidate source rate."""

    name = "imaging"
    measurement_schema = {
        "imaging_detected": measured(BOOLEAN_OR_NULL, NO_UNIT,
            'mirror images of an unfiltered upsampler found; null when untestable'),
        "imaging": measured(array_of({
            "type": "object",
            "properties": {
                "source_rate_hz": {"type": "number"},
                "coherence": NUMBER_OR_NULL,
                "image_level_db": NUMBER_OR_NULL,
                "z_score": NUMBER_OR_NULL,
                "null_spread_z": NUMBER_OR_NULL,
                "images_explained_fraction": NUMBER_OR_NULL,
                "verdict": {"enum": ["defect", "trace", "none", "untestable"]},
                "reason": {"type": ["string", "null"]},
                "channel": {"type": ["string", "null"]},
                "channels": {"type": "array", "items": {"type": "string"}},
                "evidence": {"enum": ["spectrum", "samples", "spectrum+samples"]},
            },
            "required": ["source_rate_hz", "coherence", "image_level_db", "verdict"],
            }), NO_UNIT,
            'the imaging test per candidate source rate'),
    }

    def __init__(self, info, options):
        super().__init__(info, options)
        extra = dict(getattr(options, "extra", {}) or {}).get("imaging", {})
        self.fs = int(info.sample_rate_hz)
        self.n_fft = int(round(self.fs / BIN_HZ))
        self.bin_hz = self.fs / self.n_fft
        rates = extra.get("candidate_rates_hz", CANDIDATE_RATES_HZ)
        self.rates = [float(r) for r in rates if r < self.fs]
        self.max_frames = int(extra.get("max_frames", MAX_FRAMES))
        self.window = np.hanning(self.n_fft + 2)[1:-1]
        starts = frame_starts(int(info.frames), self.n_fft, self.max_frames, self.n_fft // 2)
        self.null_bias = null_coherence_bias(starts, self.window)
        self.span_s = (float(starts[-1] - starts[0]) + self.n_fft) / self.fs if starts.size else 0.0
        self.picker = FramePicker(starts, self.n_fft, info.channels)
        self.frames = 0
        nb = self.n_fft // 2 + 1
        self.power = np.zeros((info.channels, nb))
        # a few long Blackman-Harris frames to recognise periodic material with folded partials
        from masterqc.measure import frames as _al
        self._al = _al
        self.n_tonal = int(round(self.fs / _al.TONAL_BIN_HZ))
        self.win_tonal = _al.blackman_harris(self.n_tonal)
        self.pick_tonal = FramePicker(frame_starts(int(info.frames), self.n_tonal, FOLD_CHECK_FRAMES,
                                                   self.n_tonal // 2, seed=3), self.n_tonal, info.channels)
        self._tonal_frames = []
        self._folded = None
        self._lines = {}
        self.n_controls = len(tuple(extra.get("control_offsets_bins", CONTROL_OFFSETS_BINS)))
        offsets = tuple(extra.get("control_offsets_bins", CONTROL_OFFSETS_BINS)) + NULL_SPREAD_OFFSETS_BINS
        # the pair plan depends only on the rate, the frame and the candidates: built once per process
        # and shared (read-only) by every file of that rate
        cands, self.all_ka, self.all_kb, self.pair_index = _pair_plan(self.fs, self.n_fft, tuple(self.rates), offsets)
        self.cands = [{"rate": c["rate"], "cycles": list(c["cycles"])} for c in cands]
        self.pairs_distinct = int(self.all_ka.size)
        # the first half of the frames separately: a true image keeps its phase over the
        # whole file, a chance alignment of two unrelated components drifts between halves
        self.half = int(self.picker.starts.size) // 2
        self.power_first = np.zeros_like(self.power)
        # which pairs are summed while streaming: with the frames' spectra kept (see
        # SPECTRA_STORE_MAX_BYTES), only the candidates' own pairs, and the rest (controls, first-half
        # sums) at finish() for the candidates that need them; else every pair, as it comes
        n_store = int(self.picker.starts.size) * info.channels * nb * 16
        self.store = None
        if 0 < n_store <= SPECTRA_STORE_MAX_BYTES:
            # (channels first: one channel's frames are contiguous, as np.take wants them)
            self.store = np.empty((info.channels, int(self.picker.starts.size), nb), dtype=complex)
            main, self._pos = _main_pairs(self.fs, self.n_fft, tuple(self.rates), offsets)
        else:
            main = np.arange(self.all_ka.size)
            self._pos = main
        self._ka, self._kb = self.all_ka[main], self.all_kb[main]
        self.S = np.zeros((info.channels, main.size), dtype=complex)
        # per pair, sum over frames of |X_m(a)|^2 |X_m(b)|^2: with it the null bias of each
        # pair's coherence follows the material's own frame-to-frame power changes
        self.Q = np.zeros((info.channels, main.size))
        self.S_first = np.zeros_like(self.S) if self.store is None else None
        self._sums = {}
        self._spectral_lines = {}
        # per channel: neighbouring sample pairs counted, of them exact repeats, and a histogram of the lengths
        # of interior runs of one value (see HOLD_REPEAT_SHARE)
        self._hold_pairs = np.zeros(info.channels, dtype=np.int64)
        self._hold_repeats = np.zeros(info.channels, dtype=np.int64)
        self._hold_runs = np.zeros((info.channels, 65), dtype=np.int64)
        self._hold_span = np.zeros((info.channels, 2), dtype=np.int64)
        self._held_frames = []

    def process(self, block) -> None:
        for _start, frame in self.pick_tonal.feed(block):
            # transformed and analysed at finish, and only when a candidate leaves a trace (see FOLD_CHECK_FRAMES)
            narrow = np.asarray(frame, dtype=np.float32)
            self._tonal_frames.append(narrow if np.array_equal(narrow, frame) else np.array(frame))
        got = list(self.picker.feed(block))
        if not got:
            return
        # the frames this block completes, transformed together (the same numbers as one by one)
        n = self.n_fft
        rolled = np.empty((len(got), self.info.channels, n))
        # the sample-and-hold runs, on every HOLD_FRAME_STEP-th frame (spread over the file)
        # (kept raw, at most MAX_FRAMES / HOLD_FRAME_STEP of them, and counted at once at finish)
        self._held_frames.extend(np.array(frame) for j, (_s, frame) in enumerate(got)
                                 if (self.frames + j) % HOLD_FRAME_STEP == 0)
        for j, (start, frame) in enumerate(got):
            # the windowed frame rotated circularly by its start (mod N): X(k) exp(-j 2 pi k n_m / N),
            # so that X(a) X(b) carries the phase correction exp(-j 2 pi alpha n_m / N) of every
            # pair at once (a + b = alpha mod N); magnitudes, hence powers, are unchanged
            # (the rotation by r = start mod N: element i moves to i + r, as numpy.roll does)
            x = frame.T * self.window
            r = int(start % n)
            rolled[j, :, r:] = x[:, :n - r]
            rolled[j, :, :r] = x[:, n - r:]
        spec = np.fft.rfft(rolled, axis=-1)
        pw = spec.real ** 2 + spec.imag ** 2
        m0 = self.frames
        if self.store is not None:
            self.store[:, m0:m0 + len(got)] = spec.transpose(1, 0, 2)
        # the block's frames' two-sided spectra at once; then sums over the frames one frame at a time, in order
        full = self._two_sided(spec) if self._ka.size else None
        for j in range(len(got)):
            first = self.frames < self.half
            self.power += pw[j]
            if first:
                self.power_first += pw[j]
            self.frames += 1
            if self._ka.size:
                # (frame by frame: the products of a frame stay in cache while they are summed)
                prod, q = self._products(None, self._ka, self._kb, full=full[j])
                self.Q += q
                self.S += prod
                if first and self.S_first is not None:
                    self.S_first += prod

    def _count_runs(self, frames) -> None:
        """Add raw frames' (frames, samples, channels) repeated neighbours and run lengths, per channel (see
        HOLD_REPEAT_SHARE): all frames and channels at once, runs never crossing a frame."""
        k, n, nch = frames.shape
        if n < 3 or k == 0:
            return
        x = np.ascontiguousarray(np.transpose(frames, (0, 2, 1))).reshape(k * nch, n)
        chan = np.tile(np.arange(nch), k)
        peak = np.max(np.abs(x), axis=1)
        same = np.abs(x[:, 1:] - x[:, :-1]) <= HOLD_TOLERANCE
        # (pairs in near-silence or at the frame's peak, a clipped top, say nothing about a hold)
        ax = np.abs(x[:, 1:])
        counted = (ax > HOLD_FLOOR) & ~(same & (ax >= peak[:, None] - HOLD_TOLERANCE))
        self._hold_pairs += np.bincount(chan, weights=np.count_nonzero(counted, axis=1), minlength=nch).astype(np.int64)
        self._hold_repeats += np.bincount(chan, weights=np.count_nonzero(same & counted, axis=1),
                                          minlength=nch).astype(np.int64)
        # the runs only of channels whose share of repeats can make a hold (native material: none, at no cost)
        rows = np.isin(chan, np.flatnonzero(self._hold_repeats >= HOLD_REPEAT_SHARE * np.maximum(self._hold_pairs, 1)))
        if not rows.any():
            return
        if not rows.all():
            x, same, chan, peak = x[rows], same[rows], chan[rows], peak[rows]
        # run boundaries: after every change and at every frame's end
        brk = np.concatenate([~same, np.ones((x.shape[0], 1), dtype=bool)], axis=1).ravel()
        edges = np.concatenate([[0], np.flatnonzero(brk) + 1])
        starts, ends = edges[:-1], edges[1:]
        # a frame's first and last runs are cut by the frame: left out
        whole = (starts % n != 0) & (ends % n != 0)
        xf = x.ravel()
        v = xf[starts]
        vals = np.abs(v)
        row = starts // n
        lengths = ends - starts
        # a run counts only with a value new to the two runs before it: a hold takes a fresh value at every
        # step, while a steady square or pulse wave alternates between two values in runs as regular
        fresh = np.ones(v.size, dtype=bool)
        fresh[1:] &= np.abs(v[1:] - v[:-1]) > HOLD_TOLERANCE
        fresh[2:] &= np.abs(v[2:] - v[:-2]) > HOLD_TOLERANCE
        audible = whole & (vals > HOLD_FLOOR)
        # (the step from every whole run above the floor; the regularity from the counted runs alone)
        ch_of = chan[row]
        self._hold_span[:, 0] += np.bincount(ch_of[audible], weights=lengths[audible], minlength=nch).astype(np.int64)
        self._hold_span[:, 1] += np.bincount(ch_of[audible], minlength=nch)
        keep = audible & (vals < peak[row] - HOLD_TOLERANCE) & fresh
        self._hold_runs += np.bincount(ch_of[keep] * 65 + np.minimum(lengths[keep], 64),
                                       minlength=nch * 65).reshape(nch, 65)

    def _hold_pattern(self):
        """``(rate_hz, channels, repeat_share)`` of a sample-and-hold found from exact repeats (see
        HOLD_REPEAT_SHARE), or None."""
        if self._held_frames:
            self._count_runs(np.stack(self._held_frames))
            self._held_frames = []
        found = []
        for ch in range(self.info.channels):
            runs = self._hold_runs[ch]
            n_runs = int(runs.sum())
            pairs = int(self._hold_pairs[ch])
            if n_runs < HOLD_MIN_RUNS or pairs == 0:
                continue
            share = self._hold_repeats[ch] / pairs
            if share < HOLD_REPEAT_SHARE:
                continue
            span, count = (int(v) for v in self._hold_span[ch])
            mean_len = span / max(count, 1)
            lo = int(math.floor(mean_len))
            regular = float(runs[lo] + (runs[lo + 1] if lo + 1 < runs.size else 0)) / n_runs
            if lo < HOLD_MIN_STEP or lo >= 64 or regular < HOLD_REGULAR_SHARE:
                continue
            found.append((self.fs / mean_len, ch, share))
        if not found:
            return None
        rate = float(np.median([f[0] for f in found]))
        std = min(CANDIDATE_RATES_HZ, key=lambda r: abs(r - rate))
        rate = float(std) if abs(std - rate) <= HOLD_RATE_SNAP * std else float(round(rate / BIN_HZ) * BIN_HZ)
        labels = list(self.info.channel_layout)
        return rate, [labels[f[1]] for f in found], max(f[2] for f in found)

    def _with_hold(self, out: list) -> list:
        """``out`` with a sample-and-hold found from its exact repeats (:meth:`_hold_pattern`) made a defect at
        its effective rate, unless that rate is already a defect."""
        hold = self._hold_pattern()
        if hold is None:
            return out
        rate, chans, share = hold
        if rate >= self.fs:
            return out
        entry = next((a for a in out if abs(a["source_rate_hz"] - rate) < 0.5), None)
        if entry is not None and entry["verdict"] == "defect":
            return out
        labels = list(self.info.channel_layout)
        power = sum(self.power[labels.index(c)] for c in chans)
        level = predicted_image_level_db("hold", rate, self.fs, power, self.bin_hz)
        if entry is None:
            entry = {"source_rate_hz": rate, "coherence": None, "image_level_db": None, "z_score": None,
                     "null_spread_z": None, "images_explained_fraction": None, "verdict": "untestable",
                     "reason": None, "channel": chans[0], "channels": []}
            out.append(entry)
        was = (entry["verdict"] if entry["verdict"] != "untestable"
               else "not tried at this rate" if entry["reason"] is None else f"untestable ({entry['reason']})")
        entry.update(verdict="defect", evidence="samples", channels=chans, channel=chans[0],
                     image_level_db=None if level is None else round(level, 2),
                     reason=(f"samples held in runs of {self.fs / rate:.2f} on average ({100 * share:.0f} % of "
                             f"neighbouring samples repeat exactly): a sample-and-hold at {rate / 1000:g} kHz, "
                             f"which leaves mirror images of the content at {_inner_khz(rate)}"
                             + ("" if level is None else f" at {level:.1f} dB relative to it (from its response)")
                             + f"; the spectral test alone: {was}"))
        return out

    def _two_sided(self, spec):
        """The two-sided spectra of real frames from their one-sided ``spec`` (..., bins): X[N-k] = conj(X[k])."""
        return np.concatenate([spec, np.conj(spec[..., (self.n_fft - 1) // 2:0:-1])], axis=-1)

    def _products(self, spec, ka, kb, full=None):
        """``X(a) X(b)`` and ``|X(a) X(b)|^2`` of one-sided spectra ``spec`` (..., bins) of real frames
        for the two-sided bin pairs ``(ka, kb)`` (``full``: their two-sided spectra, when already made)."""
        full = self._two_sided(spec) if full is None else full
        # (every index is in range: mode "clip" only skips numpy's bounds check, which costs a
        # quarter of the gather)
        prod = np.take(full, ka, axis=-1, mode="clip")
        prod *= np.take(full, kb, axis=-1, mode="clip")
        # |X(a) X(b)|^2 = P(a) P(b): the per-pair null-bias sum, from the product itself
        # (re^2 + im^2, squared on the interleaved floats: contiguous, hence quicker)
        sq = prod.view(np.float64)
        sq = sq * sq
        q = np.add(sq[..., 0::2], sq[..., 1::2])
        return prod, q

    def _pair_sums(self, c, ch: int, need_first: bool):
        """``(S, Q, S_first)`` of cycle ``c``'s pairs on channel ``ch``: the sums over the frames of
        ``X(a) X(b)`` and ``|X(a) X(b)|^2``, and the first ``half`` frames' sum of ``X(a) X(b)`` (None
        unless ``need_first``).  Pairs not summed while streaming are summed here from the kept
        spectra, frame by frame in the same order, so with the same result."""
        idx = self.pair_index[c["slice"]]
        pos = self._pos[idx]
        streamed = bool(np.all(pos >= 0))
        if streamed and (not need_first or self.S_first is not None):
            s_first = self.S_first[ch, pos] if need_first else None
            return self.S[ch, pos], self.Q[ch, pos], s_first
        key = (ch, c["slice"].start)
        if key not in self._sums:
            ka, kb = self.all_ka[idx], self.all_kb[idx]
            half = min(self.half, self.frames)
            if streamed:
                # only the first half's sums are missing
                prod = self._gather(ch, ka, half)
                prod *= self._gather(ch, kb, half)
                s = qs = None
            else:
                # every frame's products at once (frames as rows), then summed row by row: a sum along
                # the rows adds them in order, as the streamed sums do
                prod = self._gather(ch, ka)
                prod *= self._gather(ch, kb)
                sq = prod.view(np.float64)
                sq = sq * sq
                q = np.add(sq[..., 0::2], sq[..., 1::2])
                s, qs = np.sum(prod, axis=0), np.sum(q, axis=0)
            s_first = np.sum(prod[:half], axis=0) if half else np.zeros(idx.size, dtype=complex)
            self._sums[key] = (s, qs, s_first)
        s, qs, s_first = self._sums[key]
        if streamed:
            return self.S[ch, pos], self.Q[ch, pos], s_first if need_first else None
        return s, qs, s_first if need_first else None

    def _periodic_with_folds(self) -> bool:
        """Whether at least half of the long frames with tonal content hold folded partials (the aliasing
        analyzer's frame test), worked out once, at finish."""
        if self._folded is None:
            tonal = folded = 0
            for frame in self._tonal_frames:
                # (the frame's samples as they came, float64: the transform the stream would have made)
                spec = np.fft.rfft(np.asarray(frame, dtype=np.float64).T * self.win_tonal, axis=-1)
                power = np.sum(spec.real ** 2 + spec.imag ** 2, axis=0)
                r = self._al.analyse_tonal_frame(power, self.fs / self.n_tonal, self.fs)
                if r is None:
                    continue
                tonal += 1
                if r["assessable"] and r["found"] >= max(self._al.MIN_CLEAR_FOLDS,
                                                         self._al.MIN_FOUND_FRACTION * r["clear"]) \
                        and r["alias_power"] >= r["harmonic_power"] * 10 ** (self._al.ALIAS_SCORE_MIN_DB / 10):
                    folded += 1
            self._folded = bool(folded and folded >= 0.5 * tonal)
        return self._folded

    def _lines_of(self, ch: int) -> np.ndarray:
        """:func:`spectral_lines` of the channel's long-term spectrum (found once)."""
        if ch not in self._spectral_lines:
            self._spectral_lines[ch] = spectral_lines(self.power[ch])
        return self._spectral_lines[ch]

    def _line_map(self, ch: int) -> np.ndarray:
        """Per one-sided bin: the refined frequency (Hz) of the spectral line whose main lobe
        covers it, NaN elsewhere."""
        if ch in self._lines:
            return self._lines[ch]
        pw = self.power[ch]
        out = np.full(pw.size, np.nan)
        for k in self._lines_of(ch):
            f = refine_peak(pw, int(k)) * self.bin_hz
            lo, hi = max(0, k - 2), min(pw.size, k + 3)
            seg = out[lo:hi]
            seg[np.isnan(seg)] = f
        self._lines[ch] = out
        return out

    def _stats(self, c, ch: int, mean_bin_power: float = 0.0, use_inner: bool = True, drop_alpha=(),
               full: bool = True):
        """Pooled statistics of one cycle frequency on one channel (a dict), or None without pairs.
        With ``full`` False only the significance (``z_w``, ``z_u``, ``z_first``) and ``coh``, the
        same numbers as with ``full``."""
        if c["ka"].size == 0:
            return None
        pw = self.power[ch]
        ka, kb = c["ka"], c["kb"]
        ia, ib = np.minimum(ka, self.n_fft - ka), np.minimum(kb, self.n_fft - kb)
        p1, p2 = pw[ia], pw[ib]
        s_all, q_all, s_first = self._pair_sums(c, ch, need_first=full)
        g2 = np.minimum(np.abs(s_all) ** 2 / np.maximum(p1 * p2, 1e-300), 1.0)
        w = np.minimum(p1, p2)
        if self._lines_of(ch).size:
            lines = self._line_map(ch)
            la = np.where(ka > self.n_fft // 2, -lines[ia], lines[ia])
            lb = np.where(kb > self.n_fft // 2, -lines[ib], lines[ib])
            delta = np.mod(la + lb - c["alpha"] * self.bin_hz + self.fs / 2.0, self.fs) - self.fs / 2.0
            keep = ~(np.abs(delta) > LINE_PAIR_TOLERANCE_HZ)  # NaN (not two lines) is kept
        else:
            keep = np.ones(ka.size, dtype=bool)          # no spectral lines: no pair of two lines
        if len(drop_alpha):
            keep &= ~np.isin(c["alpha"], np.asarray(drop_alpha, dtype=np.int64))
        first = c["first"]
        # the first image of positive-frequency content: the pair (f, rate - f)
        lower = first & (ka <= self.n_fft // 2)
        # cross-half coherence Re(gamma_first * conj(gamma_second)): unbiased for gamma^2, and
        # near zero or negative for two components whose phase drifts over the file
        if full:
            pf = self.power_first[ch]
            ps = pw - pf
            den = np.sqrt(np.maximum(pf[ia] * pf[ib], 1e-300) * np.maximum(ps[ia] * ps[ib], 1e-300))
            with np.errstate(invalid="ignore", over="ignore"):     # non-finite input: NaN, as before
                cross = np.clip(np.real(s_first * np.conj(s_all - s_first)) / den, -1.0, 1.0)
        else:
            cross = np.zeros(g2.size)
        # null bias of each pair: sum_m P_m(a) P_m(b) / (sum_m P_m(a) sum_m P_m(b)), which is 1/M
        # for steady material and larger where a few loud frames (drum hits) carry the power;
        # scaled by the window-overlap inflation of :func:`null_coherence_bias`
        overlap = max(1.0, self.null_bias * self.frames)
        bias = np.clip(overlap * q_all / np.maximum(p1 * p2, 1e-300), self.null_bias, 0.999)
        frac = c["frac"]
        clear = c["clear"]
        if not keep.all():
            g2, w, p1, p2, cross, bias, frac, first, lower, clear = (
                g2[keep], w[keep], p1[keep], p2[keep], cross[keep], bias[keep], frac[keep], first[keep], lower[keep],
                clear[keep])
            if g2.size == 0:
                return None
        wsum = float(w.sum())
        if not wsum > 0.0:
            return None
        m_eff = 1.0 / bias
        # null variance of a squared coherence over m_eff frames (Beta(1, m_eff - 1))
        v0 = (m_eff - 1.0) / (m_eff * m_eff * (m_eff + 1.0))
        # two pooled statistics: power-weighted (tones, strong images) and unweighted
        # (images spread thinly over many bins, e.g. folded onto programme content)
        t, z_w, z_u = _pooled_z(g2, bias, w, v0)
        coh = float(np.sum((g2 - bias) / (1.0 - bias) * w)) / wsum
        # the first image order alone (cycle frequency = the rate itself): a source at this rate always
        # leaves its strongest images there, while a source at a multiple of the rate shares only the
        # higher orders' cycle frequencies with it
        if np.any(first):
            _t, z_fw, z_fu = _pooled_z(g2[first], bias[first], w[first], v0[first])
            z_first = max(z_fw, z_fu)
        else:
            z_first = 0.0
        if not full:
            return {"z_w": z_w, "z_u": z_u, "t": t, "coh": min(1.0, max(0.0, coh)), "z_first": z_first}
        # where images fall on programme content, the pairs with two strong members carry most
        # of the weight and most of the noise; the pairs whose weaker member is at least
        # ASYMMETRY_DB below the stronger one carry the image itself
        asym = w * 10 ** (ASYMMETRY_DB / 10) <= np.maximum(p1, p2)
        wa = w[asym]
        t_a = float(np.sum((g2[asym] - bias[asym]) * wa))
        sd_a = math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0[asym] * wa * wa)))
        z_a = t_a / sd_a if sd_a > 0 else 0.0
        # and pairs that are individually significant (false inclusion PAIR_P each) give a
        # lower bound of the coherent power that does not depend on the weighting
        x_q = 1.0 - PAIR_P ** (1.0 / np.maximum(m_eff - 1.0, 1.0))
        sig = g2 > x_q
        t_s = float(np.sum(g2[sig] * w[sig])) if int(sig.sum()) >= MIN_SIGNIFICANT_PAIRS else 0.0
        # the same three estimates from the cross-half coherence
        x_all = float(np.sum(cross * w))
        x_asym = float(np.sum(cross[asym] * wa))
        x_sig = float(np.sum(cross[sig] * w[sig])) if int(sig.sum()) >= MIN_SIGNIFICANT_PAIRS else 0.0
        # the reference: the stronger member, but never less than CONTENT_FLOOR_DB below the mean bin
        # power of the candidate's band (a pair of two deep images of one component, above a lower
        # source's Nyquist frequency, is coherent whatever the filter: it is not source content)
        strong = np.maximum(np.maximum(p1, p2), mean_bin_power * 10 ** (CONTENT_FLOOR_DB / 10))

        def rejection(band):
            """Coherent power of the weaker members over the stronger members' power, for the pairs
            (f, rate - f) whose baseband member f lies in ``band`` (fractions of the candidate's
            Nyquist frequency): the first image relative to the content it mirrors;
            the larger of the three estimates (all pairs, asymmetric pairs, significant pairs), each
            over its own pairs and bounded by its cross-half twin; None without a usable estimate."""
            inb = (frac >= band[0]) & (frac <= band[1]) & lower
            best = None
            for sub, need_z in ((inb, True), (inb & asym, True), (inb & sig, False)):
                ws = w[sub]
                den = float(np.sum(strong[sub]))
                if ws.size == 0 or not den > 0.0:
                    continue
                if need_z:
                    num = float(np.sum((g2[sub] - bias[sub]) * ws))
                    sd_s = math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0[sub] * ws * ws)))
                    if not (sd_s > 0 and num / sd_s >= Z_LEVEL):
                        continue
                else:
                    if int(sub.sum()) < MIN_SIGNIFICANT_PAIRS:
                        continue
                    num = float(np.sum(g2[sub] * ws))
                val = min(num, float(np.sum(cross[sub] * ws))) / den
                if val > 0 and (best is None or val > best):
                    best = val
            return best

        # without content there (at most CONTENT_FLOOR_DB of the band's power) or a usable estimate
        # (too few frames), the images of all the content below the inner band's top: still clear
        # of any resampler's transition band
        inner = rejection(INNER_BAND) if use_inner else None
        if inner is None:
            inner = rejection((0.0, INNER_BAND[1]))
        # the clear images (first order, image member above the candidate's Nyquist frequency): their
        # significance; and per sub-band with content an upper bound of the first images' power
        # relative to the content they mirror (p1: the baseband member, p2: the image position).  The
        # coherent image power of a pair is |S|^2 / P1 = g2 * p2, whatever else lies under the image
        cl = lower & clear
        wc = w[cl]
        sd_c = math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0[cl] * wc * wc)))
        z_clear = float(np.sum((g2[cl] - bias[cl]) * wc)) / sd_c if sd_c > 0 else 0.0
        # the share of the weaker members' power there that the content they mirror explains
        cover = float(np.sum((g2[cl] - bias[cl]) / (1.0 - bias[cl]) * wc)) / float(wc.sum()) \
            if wc.size and float(wc.sum()) > 0 else None
        clear_bounds = []
        for lo_f, hi_f in CLEAR_SUBBANDS:
            sub = lower & (frac >= lo_f) & (frac < hi_f)
            if int(sub.sum()) < CLEAR_MIN_PAIRS:
                continue
            src = p1[sub]
            if not float(src.mean()) >= mean_bin_power * 10 ** (CONTENT_FLOOR_DB / 10):
                continue
            ws = p2[sub]
            num = max(0.0, float(np.sum((g2[sub] - bias[sub]) * ws)))
            sd_s = math.sqrt(NULL_VARIANCE_INFLATION * float(np.sum(v0[sub] * ws * ws)))
            clear_bounds.append(min(num + Z_LEVEL * sd_s, float(ws.sum())) / float(src.sum()))
        return {"z_w": z_w, "z_u": z_u, "t": t, "coh": min(1.0, max(0.0, coh)), "t_a": t_a, "z_a": z_a,
                "t_s": t_s, "x": x_all, "x_a": x_asym, "x_s": x_sig, "inner": inner, "z_first": z_first,
                "z_clear": z_clear, "clear_bounds": clear_bounds, "cover": cover}

    def _z_at(self, ch: int, alpha_hz: float, rate: float):
        """Pooled significance (max of the power-weighted and the unweighted z, as :meth:`_stats`) of the
        first-order coherence at cycle frequency ``alpha_hz`` (any, not only on the bin grid) between the
        baseband bins below ``rate / 2`` and their partners at ``alpha_hz - f``, from the kept spectra; None
        without them.  The rotated frames carry the phase correction of the nearest bin; the rest,
        ``exp(-j 2 pi (alpha - alpha_bin) n_m / fs)``, is applied per frame, so a component's coherence at
        a cycle frequency ``d`` Hz off its own drifts by ``d`` turns per second between the frames."""
        if self.store is None or self.frames < MIN_FRAMES:
            return None
        n = self.n_fft
        al = int(round(alpha_hz / self.bin_hz))
        ka, kb = _first_order_pairs(self.fs, n, al, float(rate))
        if ka.size == 0:
            return None
        # (in place, in the same order as X(a) X(b) rot: the same numbers with fewer temporaries)
        prod = self._gather(ch, ka)
        prod *= self._gather(ch, kb)
        off_hz = alpha_hz - al * self.bin_hz
        if off_hz != 0.0:
            # (on the bin grid the residual rotation is exactly 1 and multiplying by it changes nothing)
            starts = self.picker.starts[:self.frames].astype(float)
            prod *= np.exp(-2j * np.pi * off_hz * starts / self.fs)[:, None]
        return self._pair_coherence(ch, prod, ka, kb)[0]

    def _pair_coherence(self, ch: int, prod, ka, kb):
        """``(z, g2, bias, p1, p2)`` of the pairs ``(ka, kb)`` whose per-frame products ``X(ka) X(kb)`` are
        ``prod`` (frames, pairs; overwritten): the pooled significance (max of the power-weighted and the
        unweighted z), each pair's magnitude-squared coherence, its null bias, and the long-term powers at
        ``ka`` and ``kb``."""
        n = self.n_fft
        s_all = prod.sum(axis=0)
        mag = np.abs(prod)
        q_all = np.square(mag, out=mag).sum(axis=0)
        pw = self.power[ch]
        p1, p2 = pw[np.minimum(ka, n - ka)], pw[np.minimum(kb, n - kb)]
        den = np.maximum(p1 * p2, 1e-300)
        g2 = np.minimum(np.abs(s_all) ** 2 / den, 1.0)
        overlap = max(1.0, self.null_bias * self.frames)
        bias = np.clip(overlap * q_all / den, self.null_bias, 0.999)
        m_eff = 1.0 / bias
        v0 = (m_eff - 1.0) / (m_eff * m_eff * (m_eff + 1.0))
        _t, z_w, z_u = _pooled_z(g2, bias, np.minimum(p1, p2), v0)
        return max(z_w, z_u), g2, bias, p1, p2

    def _coder_framing(self, ch: int, rate: float):
        """``(hop, z_own, z_neighbours)`` when the coherence at ``rate`` is a block coder's framing: ``rate`` is
        a harmonic of ``fs / hop`` (:data:`CODER_HOPS_SAMPLES`) and both neighbouring harmonics ``rate +- fs/hop``
        are significant, each at least :data:`FRAMING_Z_RELATIVE` of the coherence at ``rate`` itself (the
        same statistic, :meth:`_z_at`); else None."""
        own = None
        for hop in CODER_HOPS_SAMPLES:
            k = rate * hop / self.fs
            if abs(k - round(k)) > 1e-9:
                continue
            if own is None:
                own = self._z_at(ch, rate, rate)
                if own is None or own < Z_SIGNIFICANT:
                    return None
            step = self.fs / hop
            need = max(Z_SIGNIFICANT, FRAMING_Z_RELATIVE * own)
            zs = []
            for sgn in (-1, 1):
                # (the second neighbour only when the first passes: the hop needs both)
                z = self._z_at(ch, rate + sgn * step, rate)
                zs.append(z)
                if z is None or z < need:
                    break
            if len(zs) == 2 and None not in zs and min(zs) >= need:
                return hop, own, min(zs)
        return None

    def _gather(self, ch: int, k, frames: int | None = None) -> np.ndarray:
        """``X_m(k)`` of the first ``frames`` (default: all) kept frames (rows) at the two-sided bins ``k``, read
        from the one-sided store (``X(N - k) = conj X(k)`` for real frames: the same numbers as the two-sided
        spectrum, without making it; every index is in range, so mode "clip" only skips the bounds check)."""
        n = self.n_fft
        k = np.asarray(k, dtype=np.int64)
        neg = k > n // 2
        g = np.take(self.store[ch, :self.frames if frames is None else frames], np.where(neg, n - k, k), axis=-1,
                    mode="clip")
        if neg.any():
            # (the imaginary parts of the negative bins' entries times -1: exactly the conjugate)
            g.view(np.float64)[..., 1::2] *= np.where(neg, -1.0, 1.0)
        return g

    def _nearest_phase_cycles(self, rate: float) -> list:
        """``[(alpha_bin, phases)]``: the cycle frequencies (bins, folded to 0..N/2) at which a nearest-phase
        converter from ``rate`` with ``phases`` phases (:data:`NEAREST_PHASE_COUNTS`) leaves its strongest
        images, ``phases * rate`` modulo the file's rate, the smallest count per cycle frequency; those within
        8 bins of a multiple of ``rate`` (an ordinary image cycle frequency, which the main test covers) are
        left out."""
        n = self.n_fft
        ordinary = []
        q = 1
        while q * rate - rate / 2.0 < self.fs:
            a = int(round(q * rate / self.bin_hz)) % n
            ordinary.append(min(a, n - a))
            q += 1
        out = {}
        for phases in NEAREST_PHASE_COUNTS:
            a = int(round(phases * rate / self.bin_hz)) % n
            a = min(a, n - a)
            if a == 0 or a in out or min(abs(a - o) for o in ordinary) < 8:
                continue
            out[a] = phases
        return sorted(out.items(), key=lambda t: t[1])

    def _np_stats(self, ch: int, al: int, rate: float, level: bool):
        """``(z, inv_hold_rate_sq)`` of the first-order coherence at cycle frequency ``al`` bins between the
        content below ``rate / 2`` and its partners above ``rate / 2`` (where a converter from ``rate`` leaves
        nothing but images), at most :data:`NEAREST_PHASE_MAX_PAIRS` pairs spread over them; with ``level``,
        the hold model's ``1 / R**2`` fitted to the coherent image power (``sum (g2 - b) P2 / sum P1 f**2``,
        unbiased; None where it does not rise as ``f**2``, :data:`NEAREST_PHASE_MIN_RISE`) and a third value, the
        share of the power at the image positions the content explains; without ``level`` the second is None.
        None without pairs."""
        n = self.n_fft
        ka, kb = _clear_pairs(self.fs, n, int(al), float(rate))
        if ka.size == 0:
            return None
        if ka.size > NEAREST_PHASE_MAX_PAIRS:
            pick = np.linspace(0, ka.size - 1, NEAREST_PHASE_MAX_PAIRS).round().astype(np.int64)
            ka, kb = ka[pick], kb[pick]
        prod = self._gather(ch, ka)
        prod *= self._gather(ch, kb)
        z, g2, bias, p1, p2 = self._pair_coherence(ch, prod, ka, kb)
        fa = np.minimum(ka, n - ka)
        inv = None
        if level:
            f1 = fa * self.bin_hz
            den_f = float(np.sum(p1 * f1 * f1))
            coh = (g2 - bias) * p2
            inv = float(np.sum(coh)) / den_f if den_f > 0 else None
            # the hold's images rise with the content's frequency as f**2: the coherent image power relative to
            # the content, pairs below and above the median content frequency, against the rise the model
            # predicts; a converter's own stop band at that order leaves a flat ratio
            order = np.argsort(f1, kind="stable")
            lo_h, hi_h = order[:order.size // 2], order[order.size // 2:]
            r = []
            for h in (lo_h, hi_h):
                pc = float(np.sum(p1[h]))
                r.append((float(np.sum(coh[h])) / pc, float(np.sum(p1[h] * f1[h] ** 2)) / pc) if pc > 0 else (0.0, 0.0))
            (r_lo, m_lo), (r_hi, m_hi) = r
            rise_pred = m_hi / m_lo if m_lo > 0 else 1.0
            if not (rise_pred >= NEAREST_PHASE_MIN_RISE and r_lo > 0 and r_hi > 0
                    and r_hi / r_lo >= math.sqrt(rise_pred)):
                inv = None
            # the share of the power at the image positions that the content explains (a converter from ``rate``
            # leaves images and little else there; programme above ``rate / 2`` is not explained)
            cover = float(np.sum(coh)) / max(float(np.sum(p2)), 1e-300)
            return z, inv, cover
        return z, inv

    def _nearest_phase(self, ch: int, rate: float):
        """The nearest-phase test of candidate ``rate`` on channel ``ch`` (see :data:`NEAREST_PHASE_COUNTS`):
        ``(level_db, phases, z, cover)`` of the most significant cycle frequency, the level being the hold
        model's first images of the inner band's content relative to it, ``(f / R)**2`` power-weighted over
        that content with ``R`` fitted to the coherent images; None when no cycle frequency is significant or
        the material is as coherent at neighbouring cycle frequencies (controls, as the main test's)."""
        if self.store is None or self.frames < MIN_FRAMES:
            return None
        pw = self.power[ch]
        in_lo = int(math.ceil(INNER_BAND[0] * rate / 2.0 / self.bin_hz))
        in_hi = int(math.floor(INNER_BAND[1] * rate / 2.0 / self.bin_hz))
        band = pw[in_lo:in_hi + 1]
        if not float(band.sum()) > 0.0:
            return None
        f_in = np.arange(in_lo, in_hi + 1) * self.bin_hz
        mean_f2 = float(np.sum(band * f_in * f_in)) / float(band.sum())
        best = None
        for al, phases in self._nearest_phase_cycles(rate):
            got = self._np_stats(ch, al, rate, level=True)
            if got is None or got[0] < Z_SIGNIFICANT or got[1] is None or not got[1] > 0.0:
                continue
            z, inv, cover = got
            ctrl = [self._np_stats(ch, al + off, rate, level=False) for off in CONTROL_OFFSETS_BINS]
            z_ctrl = max([c[0] for c in ctrl if c is not None], default=0.0)
            if z_ctrl >= max(Z_SIGNIFICANT, CONTROL_Z_RELATIVE * z):
                continue
            level = power_ratio_db(inv * mean_f2)
            fitted = 1.0 / math.sqrt(inv) / rate
            if fitted < NEAREST_PHASE_MIN_FITTED:
                # images stronger than any bank tested here makes (the fewest phases, 8, leave those of content
                # below the source Nyquist frequency at most (1/16)**2, -24 dB): not the hold model's
                continue
            # (the level is read where the images are clearest: the most significant cycle frequency)
            if best is None or z > best[2]:
                best = (level, int(round(fitted)), z, al, cover)
        if best is None:
            return None
        if best[0] >= DEFECT_IMAGE_LEVEL_DB:
            # the null's real spread at cycle frequencies no converter uses, for a would-be defect only
            spread = [self._np_stats(ch, best[3] + off, rate, level=False) for off in NULL_SPREAD_OFFSETS_BINS]
            zs = [c[0] for c in spread if c is not None]
            spread_z = math.sqrt(sum(v * v for v in zs) / len(zs)) if zs else 0.0
            if best[2] < Z_SIGNIFICANT * max(1.0, spread_z):
                return None
        return best[:3] + best[4:]

    def _with_nearest_phase(self, out: list) -> list:
        """``out`` with the images of a nearest-phase converter (:meth:`_nearest_phase`) made a defect where
        they reach :data:`DEFECT_IMAGE_LEVEL_DB` (candidates: :data:`NEAREST_PHASE_MAX_CANDIDATES`; only those whose
        own verdict is "none" or "trace")."""
        if self.store is None or self.frames < MIN_FRAMES:
            return out
        ranked = []
        for a in out:
            rate = float(a["source_rate_hz"])
            ny = rate / 2.0 / self.bin_hz
            below = slice(int(math.ceil(0.7 * ny)), int(math.floor(0.9 * ny)) + 1)
            above = slice(int(math.ceil(ny)) + 2, min(int(math.floor(1.3 * ny)), self.n_fft // 2 - 1) + 1)
            band = slice(int(math.ceil(LOW_EDGE_HZ / self.bin_hz)), int(math.ceil(ny)))
            drop = None
            for ch in range(self.info.channels):
                pw = self.power[ch]
                if not (pw[above].size and pw[below].size and float(np.mean(pw[band])) > 0.0):
                    continue
                top = float(np.mean(pw[above]))
                edge = top / max(float(np.mean(pw[below])), 1e-300)
                if edge <= NEAREST_PHASE_DROP or top <= NEAREST_PHASE_QUIET * float(np.mean(pw[band])):
                    drop = edge if drop is None else min(drop, edge)
            if drop is not None and self._nearest_phase_cycles(rate):
                ranked.append((rate, a))
        # the lowest quiet rates first: where a converter's output ends
        # of those that read as a bank, the lowest rate whose images explain at least NEAREST_PHASE_COVER_SHARE of the
        # largest share any explains of what lies above its Nyquist frequency (a lower candidate sees the same images
        # over programme, a higher one the same images with twice the phases)
        found = []
        for rate, a in sorted(ranked, key=lambda t: t[0])[:NEAREST_PHASE_MAX_CANDIDATES]:
            if a["verdict"] in ("none", "trace"):
                got = self._nearest_phase_found(rate)
                if got is not None:
                    found.append((got, a, rate))
        if found:
            top = max(t[0][0][0][3] for t in found)
            got, a, rate = min((t for t in found if t[0][0][0][3] >= NEAREST_PHASE_COVER_SHARE * top),
                               key=lambda t: t[2])
            self._nearest_phase_verdict(a, rate, got)
        return out

    def _nearest_phase_found(self, rate: float):
        """Per channel, the bank test's result at or above the line: ``[(result, label)]`` sorted by cover,
        highest first, or None."""
        labels = list(self.info.channel_layout)
        found = []
        for ch in range(self.info.channels):
            r = self._nearest_phase(ch, rate)
            if r is not None and r[0] >= DEFECT_IMAGE_LEVEL_DB:
                found.append((r, labels[ch]))
        return sorted(found, key=lambda t: -t[0][3]) or None

    def _nearest_phase_verdict(self, quiet: dict, rate: float, found: list) -> None:
        """Make candidate entry ``quiet`` a defect: ``found`` its channels' results (:meth:`_nearest_phase_found`)."""
        (level, phases, z, _cover), chan = max(found, key=lambda t: t[0][0])
        was = quiet["verdict"]
        quiet.update(verdict="defect", evidence="spectrum", channels=[c for _r, c in found], channel=chan,
                     image_level_db=round(level, 2), z_score=round(z, 2),
                     reason=(f"images of a nearest-phase converter from {rate / 1000:g} kHz (about {phases} phases, "
                             f"no interpolation between them; coherent at {phases} x {rate / 1000:g} kHz modulo the "
                             f"file's rate, z {z:.0f}): those of the content at {_inner_khz(rate)} at {level:.1f} dB "
                             f"relative to it; the main test alone: {was}"))

    def _folded_sums(self, ch: int, al: int, ka, k_sub: int):
        """Per sub-band of ``k_sub`` consecutive pairs ``(ka, al - ka)``: ``(|S|^2, P_a, P_b)``, ``S`` the sum over the
        kept frames and the sub-band's pairs of ``X(a) X(b)`` (phase-corrected, see :meth:`process`), ``P`` the
        long-term powers summed over the sub-band."""
        n = self.n_fft
        kb = (al - ka) % n
        prod = self._gather(ch, ka)
        prod *= self._gather(ch, kb)
        j = ka.size // k_sub
        s_sub = prod[:, :j * k_sub].sum(axis=0).reshape(j, k_sub).sum(axis=1)
        pw = self.power[ch]
        pa = pw[np.minimum(ka, n - ka)][:j * k_sub].reshape(j, k_sub).sum(axis=1)
        pb = pw[np.minimum(kb, n - kb)][:j * k_sub].reshape(j, k_sub).sum(axis=1)
        return np.abs(s_sub) ** 2, pa, pb

    def _folded_inner(self, ch: int, rate: float):
        """The first images of the inner band's content where they fold onto the programme (see
        :data:`FOLDED_SUBBAND_FRACTION`): ``(level_db, z, z_control_max)`` or None (not applicable: no kept spectra,
        too few frames, or the images mostly clear of the programme).  ``S`` summed over frames and a sub-band's pairs
        is the image's transfer times the content's power plus the programme's chance products; the statistic is the
        sum over sub-bands of the squared coherence ``|S|^2 / (P_a P_b)``, judged against its values at
        :data:`FOLDED_CONTROL_OFFSETS_BINS`; the level is the coherent image power ``|S|^2 / P_a`` less its mean at the
        controls, summed over sub-bands, relative to the content ``sum P_a``: the house definition's power-weighted
        ratio of the inner band's first images to the content they mirror."""
        if self.store is None or self.frames < MIN_FRAMES:
            return None
        n = self.n_fft
        in_lo = int(math.ceil(INNER_BAND[0] * rate / 2.0 / self.bin_hz))
        in_hi = int(math.floor(INNER_BAND[1] * rate / 2.0 / self.bin_hz))
        k_sub = max(4, int(FOLDED_SUBBAND_FRACTION * rate / 2.0 / self.bin_hz))
        if in_hi - in_lo + 1 < 2 * k_sub:
            return None
        ka = np.arange(in_lo, in_hi + 1, dtype=np.int64)
        al = int(round(rate / self.bin_hz)) % n
        kb = (al - ka) % n
        on_programme = np.minimum(kb, n - kb) * self.bin_hz <= rate / 2.0 + 2 * self.bin_hz
        if float(np.mean(on_programme)) < FOLDED_MIN_SHARE:
            return None
        s2, pa, pb = self._folded_sums(ch, al, ka, k_sub)
        ok = (pa > 0) & (pb > 0)
        if not ok.any():
            return None
        g = float(np.sum(s2[ok] / (pa[ok] * pb[ok])))
        g_c, img_c = [], []
        for off in FOLDED_CONTROL_OFFSETS_BINS:
            c2, ca, cb = self._folded_sums(ch, (al + off) % n, ka, k_sub)
            okc = ok & (cb > 0)
            g_c.append(float(np.sum(c2[okc] / (ca[okc] * cb[okc]))))
            img_c.append(c2 / np.maximum(ca, 1e-300))
        g_c = np.asarray(g_c)
        mu, sd = float(g_c.mean()), float(g_c.std())
        if not sd > 0.0:
            return None
        z = (g - mu) / sd
        z_ctrl = float((g_c.max() - mu) / sd)
        img = np.maximum(s2 / np.maximum(pa, 1e-300) - np.mean(img_c, axis=0), 0.0)
        ratio = float(np.sum(img[ok])) / float(np.sum(pa[ok]))
        level = power_ratio_db(ratio) if ratio > 0.0 else None
        return level, z, z_ctrl

    def _assess(self, cand, ch: int, f0):
        m = self.frames
        rate = cand["rate"]
        base = {"source_rate_hz": rate, "coherence": None, "image_level_db": None, "z_score": None,
                "null_spread_z": None, "images_explained_fraction": None, "verdict": "untestable",
                "reason": None, "channel": self.info.channel_layout[ch]}
        if m < MIN_FRAMES:
            base["reason"] = f"too short: {m} analysis frames of {self.n_fft} samples, {MIN_FRAMES} needed"
            return base
        pw = self.power[ch]
        lo = int(math.ceil(LOW_EDGE_HZ / self.bin_hz))
        hi = int(math.ceil(rate / 2.0 / self.bin_hz)) - 1
        base_power = float(pw[lo:hi + 1].sum())
        if not base_power > 0.0:
            base["reason"] = "no signal below the candidate's Nyquist frequency"
            return base
        if f0 is not None:
            k = locked_order(f0, rate, self.fs, tolerance_hz=max(0.05, 1.0 / max(self.span_s, 1e-9)))
            if k is not None:
                base["reason"] = (f"periodic material (fundamental {f0:.3f} Hz) whose {k}th multiple "
                                  f"meets {rate:.0f} Hz modulo the sampling rate: its partials pair up "
                                  "like images")
                return base
        in_lo = int(math.ceil(INNER_BAND[0] * rate / 2.0 / self.bin_hz))
        in_hi = int(math.floor(INNER_BAND[1] * rate / 2.0 / self.bin_hz))
        inner_power = float(pw[in_lo:in_hi + 1].sum())
        # higher image orders whose cycle frequency periodic material meets are left out
        drop = []
        if f0 is not None:
            tol = max(0.05, 1.0 / max(self.span_s, 1e-9))
            for al in np.unique(cand["cycles"][0]["alpha"]):
                if locked_order(f0, float(al) * self.bin_hz, self.fs, tolerance_hz=tol) is not None:
                    drop.append(int(al))
        main_args = dict(mean_bin_power=base_power / max(1, hi + 1 - lo), drop_alpha=drop,
                         use_inner=inner_power >= base_power * 10 ** (CONTENT_FLOOR_DB / 10))
        # (read by the multiple rule in finish, then dropped: whether the candidate's inner band holds content)
        base["inner_content"] = main_args["use_inner"]
        main = self._stats(cand["cycles"][0], ch, full=False, **main_args)
        if main is None:
            base["reason"] = "no signal at the mirror frequencies"
            return base
        z_w, z_u, coh = main["z_w"], main["z_u"], main["coh"]
        z = max(z_w, z_u)
        base["coherence"] = round(coh, 4)
        base["z_score"] = round(z, 2)
        if z < Z_SIGNIFICANT:
            base["verdict"] = "none"
            return base
        if main["z_first"] < Z_SIGNIFICANT:
            base["verdict"] = "none"
            base["reason"] = ("coherent only at multiples of the rate, not at the rate itself: images of a "
                              "higher source rate")
            return base
        # the controls are first-order cycle frequencies a few bins off: compared with the first order
        controls = [self._stats(c, ch, full=False) for c in cand["cycles"][1:1 + self.n_controls]]
        z_ctrl = max([max(c["z_w"], c["z_u"]) for c in controls if c is not None], default=0.0)
        if z_ctrl >= max(Z_SIGNIFICANT, CONTROL_Z_RELATIVE * main["z_first"]):
            base["reason"] = ("the material is coherent at neighbouring cycle frequencies too (z "
                              f"{z_ctrl:.0f} against {z:.0f}): periodic or strongly modulated content, "
                              "not an upsampler's images")
            return base
        # the significant candidate's level and half-file checks (the same z and coherence as above)
        main = self._stats(cand["cycles"][0], ch, full=True, **main_args)
        full = [main["t_s"]] + ([main["t"]] if z_w >= Z_LEVEL else []) + \
            ([main["t_a"]] if main["z_a"] >= Z_LEVEL else [])
        halves = [main["x_s"]] + ([main["x"]] if z_w >= Z_LEVEL else []) + \
            ([main["x_a"]] if main["z_a"] >= Z_LEVEL else [])
        if max(full) > 0 and max(halves) < HALVES_AGREEMENT * max(full):
            base["verdict"] = "none"
            base["reason"] = ("coherence not kept between the two halves of the file: a chance "
                              "alignment of unrelated components, not an image")
            return base
        # the level that decides: images of the content well inside the candidate's band, relative
        # to that content (the images of the top of the band may be a resampler's transition band)
        level = None if main["inner"] is None else power_ratio_db(main["inner"])
        base["image_level_db"] = None if level is None else round(level, 2)
        cover = main["cover"]
        base["images_explained_fraction"] = None if cover is None else round(min(1.0, max(0.0, cover)), 4)
        bounds_db = [power_ratio_db(b) for b in main["clear_bounds"]]
        below = [b for b in bounds_db if b < DEFECT_IMAGE_LEVEL_DB]
        ruled_out = bool(below) and len(below) >= CLEAR_RULE_OUT_SHARE * len(bounds_db)
        if level is not None and level >= DEFECT_IMAGE_LEVEL_DB and ruled_out:
            # an upsampler's images mirror the whole band at a level set by one filter response; in most
            # sub-bands with content they are bounded below the defect level, so the coherence comes from
            # programme components that pair up by themselves
            bound = max(below)
            base["image_level_db"] = None
            if main["z_clear"] >= Z_SIGNIFICANT:
                base["verdict"] = "trace"
                base["reason"] = (f"coherent images above {rate / 2000:.2f} kHz, but in {len(below)} of "
                                  f"{len(bounds_db)} parts of the band at most {bound:.0f} dB relative to the content "
                                  "they mirror: a resampler's trace")
            else:
                base["verdict"] = "none"
                base["reason"] = (f"coherent at {rate / 1000:g} kHz (z {z:.1f}), but the mirror images an upsampler "
                                  f"from that rate would leave are missing in {len(below)} of {len(bounds_db)} parts "
                                  f"of the band (below {bound:.0f} dB relative to the content): programme components "
                                  "that pair up by themselves")
            return base
        if level is not None and level >= DEFECT_IMAGE_LEVEL_DB and cover is not None \
                and cover < MIN_IMAGES_EXPLAINED_FRACTION:
            # above the candidate's Nyquist frequency a file converted up from it holds the images and nothing
            # else; here the content explains little of what lies there: components that meet by chance
            base["image_level_db"] = None
            base["verdict"] = "none"
            base["reason"] = (f"coherent at {rate / 1000:g} kHz (z {z:.1f}), but the content below "
                              f"{rate / 2000:.2f} kHz explains only {100 * max(0.0, cover):.0f} % of what lies at its "
                              "mirror positions above it (an upsampler's images: all of it): components that meet by "
                              "chance, such as folded partials of naive synthesis")
            return base
        if level is not None and level >= DEFECT_IMAGE_LEVEL_DB:
            # the null's real spread, measured at cycle frequencies no upsampler uses (for a would-be defect
            # only: it can only take a defect back)
            spread = [self._stats(c, ch, full=False) for c in cand["cycles"][1 + self.n_controls:]]
            zs = [max(c["z_w"], c["z_u"]) for c in spread if c is not None]
            spread_z = math.sqrt(sum(v * v for v in zs) / len(zs)) if zs else 0.0
            base["null_spread_z"] = round(spread_z, 2)
            if main["z_first"] < Z_SIGNIFICANT * max(1.0, spread_z):
                base["verdict"] = "none"
                base["image_level_db"] = None
                base["reason"] = (f"coherent at {rate / 1000:g} kHz (z {main['z_first']:.1f}), but hardly more than "
                                  f"at cycle frequencies no upsampler uses (they spread to z {spread_z:.1f}): the "
                                  "material's own structure, such as folded partials meeting by chance, not images")
                return base
            base["verdict"] = "defect"
            base["reason"] = (f"mirror images of the content at {_inner_khz(rate)} at {level:.1f} dB relative to "
                              f"it: upsampled from {rate / 1000:g} kHz without a proper filter")
        else:
            framing = self._coder_framing(ch, rate)
            if framing is not None:
                hop, z_own, z_nb = framing
                base["image_level_db"] = None
                base["reason"] = (f"coherent at {rate / 1000:g} kHz (z {z_own:.0f}) and as much at its neighbours "
                                  f"{rate / 1000:g} kHz +- {self.fs / hop:.1f} Hz (z {z_nb:.0f}), harmonics of a block "
                                  f"coder's period (every {hop} samples) where an upsampler leaves no images: a "
                                  "lossy coder's framing or filter bank, not a conversion")
                return base
            # (only where the inner band holds content: a higher candidate, a multiple of the true source rate, sees
            # the true conversion's images in an empty inner band, coherent with nothing it could call content)
            folded = self._folded_inner(ch, rate) if main_args["use_inner"] else None
            if folded is not None and folded[0] is not None and folded[0] >= DEFECT_IMAGE_LEVEL_DB \
                    and folded[1] >= max(FOLDED_Z, FOLDED_CONTROL_RELATIVE * folded[2]):
                f_level, f_z, f_ctrl = folded
                base["verdict"] = "defect"
                base["folded"] = True
                base["image_level_db"] = round(f_level, 2)
                base["reason"] = (f"mirror images of the content at {_inner_khz(rate)} folded back onto the programme "
                                  f"(at the content's frequency + {(self.fs - rate) / 1000:g} kHz) at {f_level:.1f} dB "
                                  f"relative to it (sub-band coherence z {f_z:.1f}, controls up to z {f_ctrl:.1f}): "
                                  f"upsampled from {rate / 1000:g} kHz without a proper filter")
                return base
            base["verdict"] = "trace"
            base["reason"] = (f"coherent images {'' if level is None else f'at {level:.1f} dB '}"
                              f"of the content below {rate / 2000:.2f} kHz: a resampler's trace")
        return base

    def bind(self, peers) -> None:
        """Take the sample-pattern verdict of the run's interpolation analyzer
        (:class:`masterqc.measure.interpolation.InterpolationTraceAnalyzer`) at :meth:`finish`: a hold,
        linear or zero-stuffing upsampler found from the samples themselves leaves images whose level
        follows from its response (:func:`predicted_image_level_db`), however few frames the
        spectral test could use."""
        from masterqc.measure.interpolation import InterpolationTraceAnalyzer
        self._pattern_peer = next((p for p in peers if isinstance(p, InterpolationTraceAnalyzer)), None)

    def _with_pattern(self, out: list) -> list:
        """``out`` with the candidate named by the sample pattern (if any) made a defect."""
        peer = getattr(self, "_pattern_peer", None)
        pat = peer.pattern() if peer is not None else None
        if not pat or pat.get("interpolation_source_rate_hz") is None:
            return out
        rate = float(pat["interpolation_source_rate_hz"])
        kind = pat.get("interpolation_kind") or "hold"
        labels = list(self.info.channel_layout)
        chans = [c for c in (pat.get("interpolation_channels") or []) if c in labels] or labels
        power = sum(self.power[labels.index(c)] for c in chans)
        level = predicted_image_level_db(kind, rate, self.fs, power, self.bin_hz)
        entry = next((a for a in out if a["source_rate_hz"] == rate), None)
        if entry is None:
            entry = {"source_rate_hz": rate, "coherence": None, "image_level_db": None, "z_score": None,
                     "null_spread_z": None, "images_explained_fraction": None, "verdict": "untestable",
                     "reason": None, "channel": chans[0], "channels": []}
            out.append(entry)
        if entry["verdict"] == "defect":
            entry["evidence"] = "spectrum+samples"
            return out
        was = (entry["verdict"] if entry["verdict"] != "untestable"
               else "not tried at this rate" if entry["reason"] is None else f"untestable ({entry['reason']})")
        what = {"hold": "held", "linear": "joined by straight lines", "zero-stuff": "zero-stuffed"}.get(kind, kind)
        entry.update(verdict="defect", evidence="samples", channels=chans, channel=chans[0],
                     image_level_db=None if level is None else round(level, 2),
                     reason=(f"samples {what} at {rate / 1000:g} kHz: such an upsampler leaves mirror images of "
                             f"the content at {_inner_khz(rate)}"
                             + ("" if level is None else f" at {level:.1f} dB relative to it (from its response)")
                             + f"; the spectral test alone: {was}"))
        return out

    def finish(self) -> AnalyzerResult:
        rank = {"defect": 3, "trace": 2, "none": 1, "untestable": 0}
        out = []
        f0s = [periodic_fundamental(self.power[ch], self.bin_hz, self._lines_of(ch)) if self.frames >= MIN_FRAMES
               else None
               for ch in range(self.info.channels)]
        for cand in self.cands:
            best = None
            defects, traces = [], []
            for ch in range(self.info.channels):
                a = self._assess(cand, ch, f0s[ch])
                # (a trace whose images explain the band above the candidate's Nyquist frequency is an
                # upsampler's, whatever the material: the long frames are analysed only for the others)
                if a["verdict"] == "trace" and not ((a["images_explained_fraction"] or 0.0)
                                                    >= MIN_IMAGES_EXPLAINED_FRACTION) \
                        and self._periodic_with_folds():
                    a.update(coherence=None, image_level_db=None, z_score=None, null_spread_z=None,
                             images_explained_fraction=None, verdict="untestable",
                             reason=("periodic material with folded partials: it is cyclostationary at nearly every "
                                     "cycle frequency, so a faint trace of images cannot be told from it"))
                if a["verdict"] == "defect":
                    defects.append(a["channel"])
                elif a["verdict"] == "trace":
                    traces.append(a["channel"])
                key = (rank[a["verdict"]], a["z_score"] if a["z_score"] is not None else -1e9)
                if best is None or key > best[0]:
                    best = (key, a)
            # the channels that carry the reported verdict (defect or trace)
            best[1]["channels"] = defects if best[1]["verdict"] == "defect" else \
                traces if best[1]["verdict"] == "trace" else []
            best[1]["evidence"] = "spectrum"
            out.append(best[1])
        # a folded defect at a multiple of a lower candidate that leaves a trace or a defect is that rate's images of a
        # higher order (an upsampler from r is coherent at every k r; the second-order images of a converter from
        # 44.1 kHz in a 96 kHz file fold like the first images of an 88.2 kHz source): the lower rate explains it
        for a in out:
            if a.pop("folded", False):
                for b in out:
                    k = a["source_rate_hz"] / b["source_rate_hz"]
                    if k >= 2 - 1e-9 and abs(k - round(k)) < 1e-9 and b["verdict"] in ("trace", "defect"):
                        a.update(verdict="trace", image_level_db=None,
                                 reason=(f"coherent images folded back onto the programme, but {a['source_rate_hz'] / 1000:g} "
                                         f"kHz is a multiple of {b['source_rate_hz'] / 1000:g} kHz, whose images "
                                         f"({b['verdict']}) explain them"))
                        break
        # a defect at a multiple of a lower candidate whose images fill the band above its Nyquist frequency: that
        # rate's images of a higher order (MULTIPLE_EXPLAINED_FRACTION; the same physics as the folded rule above)
        for a in out:
            if a["verdict"] != "defect":
                continue
            for b in out:
                k = a["source_rate_hz"] / b["source_rate_hz"]
                if k >= 2 - 1e-9 and abs(k - round(k)) < 1e-9 and b["verdict"] in ("trace", "defect") \
                        and b["image_level_db"] is not None and b.get("inner_content") \
                        and (b["images_explained_fraction"] or 0.0) >= MULTIPLE_EXPLAINED_FRACTION:
                    a.update(verdict="trace",
                             reason=(f"coherent images at {a['source_rate_hz'] / 1000:g} kHz "
                                     f"({a['image_level_db']} dB of the content at {_inner_khz(a['source_rate_hz'])}), "
                                     f"but {a['source_rate_hz'] / 1000:g} kHz is a multiple of "
                                     f"{b['source_rate_hz'] / 1000:g} kHz, whose images ({b['verdict']}) explain "
                                     f"{100 * b['images_explained_fraction']:.0f} % of the band above "
                                     f"{b['source_rate_hz'] / 2000:g} kHz: that conversion's images of a higher order"),
                             image_level_db=None)
                    break
        for a in out:
            a.pop("inner_content", None)
        out = self._with_pattern(out)
        out = self._with_hold(out)
        out = self._with_nearest_phase(out)
        tested = [a for a in out if a["verdict"] != "untestable"]
        detected = None if not tested else any(a["verdict"] == "defect" for a in tested)
        settings = {"frame_samples": self.n_fft, "bin_hz": self.bin_hz, "frames_analysed": self.frames,
                    "max_frames": self.max_frames, "window": "hann",
                    "null_coherence_bias": round(self.null_bias, 5),
                    "z_significant": Z_SIGNIFICANT, "defect_image_level_db": DEFECT_IMAGE_LEVEL_DB,
                    "inner_band_fraction": list(INNER_BAND), "pairs_distinct": self.pairs_distinct}
        return AnalyzerResult(measurements={"imaging_detected": detected, "imaging": out}, settings=settings)
