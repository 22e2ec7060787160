"""Effective bandwidth, converter cliffs and upsampling from a lower rate.

Works on the channel-summed long-term average spectrum (10 Hz bins) of
:mod:`masterqc.measure.spectral`.  All functions are pure; levels in dB,
frequencies in Hz.

Method (:func:`assess`):

1. Envelope ``C``: the LTAS in dB, morphologically *closed* over
   :data:`CLOSING_HZ` (running max, then running min: gaps between the partials
   of a harmonic tone narrower than that are filled, while a step edge stays
   where it is), then smoothed over :data:`SMOOTH_HZ`.
2. Cliff search: for every edge position ``e`` (50 Hz grid) the pass level
   ``pre(e)`` is the median of ``C`` over ``[e - 1.5 kHz, e - 0.5 kHz]`` and the
   stop level ``post(e)`` the 90th percentile of ``C`` over
   ``[e + 3 kHz, e + 9 kHz]`` (the 3 kHz gap leaves room for the transition
   band of an ordinary resampler: scipy's ``resample_poly`` default falls from
   -6 dB at the old Nyquist to -55 dB about 4 kHz higher).  The 90th percentile
   ignores a few narrow tones above the edge.  The position with the largest
   ``drop = pre - post`` wins if the drop is at least :data:`CLIFF_MIN_DROP_DB`,
   the region below the edge is broadband content (within
   :data:`PASS_FLATNESS_DB` of its median over 1.5 kHz, i.e. not the skirt of a
   single tone), everything above the edge stays at least
   :data:`CLIFF_MIN_DROP_DB` below the pass level, and the fall is steep
   (average slope from -6 dB to the bottom at least :data:`CLIFF_MIN_SLOPE_DB_PER_KHZ`, and at
   least :data:`CLIFF_MIN_SLOPE_RATIO` times the slope of the spectrum 2-5 kHz below the edge:
   speech or a dull recording whose energy simply runs out into the floor falls
   almost as fast above its "edge" as below it, and is a roll-off).
   The content below the edge must also be broadband (the median 10 Hz bin
   within :data:`BROADBAND_GAP_DB` of the envelope over 0.5-5 kHz below it):
   a sparse harmonic series that simply ends is reported as tonal material,
   with its last partial as the effective bandwidth and no verdict.
3. The edge frequency is the -6 dB point relative to the pass level measured
   2-5 kHz below the edge (a windowed-sinc converter is -6 dB at its cutoff).
   A cliff whose edge lies within :data:`EDGE_RATIO_RANGE` of a standard rate's
   Nyquist (:data:`CANDIDATE_RATES_HZ`, 8 kHz and up), that is at least
   :data:`UPSAMPLED_MIN_DEPTH_DB` deep and that falls the way a converter's
   filter falls (from -6 dB to its bottom within :data:`CONVERTER_MAX_FALL_RATIO`
   of the source Nyquist, faster in dB as it goes: :data:`CONVERTER_MAX_SHAPE_RATIO`;
   no brick wall but at a standard Nyquist: :data:`BRICK_WALL_RATIO_TOLERANCE`)
   reads as upsampling from that rate; any other cliff is a band limit.  Which rate: where the fall
   reaches its stop band (within 6 dB of the stop level) names it (:data:`STOP_RATIO_RANGE`: a
   converter that rejects its images begins its stop band at the old Nyquist, however early its pass
   band ends), or, for a leaky design centred on the old Nyquist, the -6 dB point does, provided the
   fall past it is made of images (:data:`LEAKY_STOP_RATIO_RANGE`, :func:`mirror_correlation`).  A brick wall
   within :data:`BRICK_WALL_RATIO_TOLERANCE` of a standard Nyquist names that rate, and a cliff that a design
   centred on the old Nyquist explains outranks a stop-band reading of a higher rate (:data:`CENTRED_FIT`).  Sources
   of 16 and 22.05 kHz are searched at twice, 8 and 11.025 kHz at four times the
   frequency scale (:func:`scale_for`): a resampler's transition scales with its
   source rate, so the same windows and slopes apply.
4. Mirror test (:func:`mirror_correlations`, in :func:`assess`): an upsampler whose filter lets images
   through (cubic and other short interpolators) copies the spectrum's fine structure, bin for bin, to
   the mirror frequencies about the old Nyquist; where it does over broadband content
   (:data:`MIRROR_ALONE_CORRELATION`) the lowest such rate is the source, whatever a cliff says.  The mirror
   must hold in every part of the band (:data:`MIRROR_SUBBANDS`): an interpolator copies all the content below
   the old Nyquist, while a single sound centred on a Nyquist (a short burst at fs/4) is merely symmetric
   about it.
5. Without a cliff, the effective bandwidth is the highest frequency where
   ``C`` stands :data:`ABOVE_FLOOR_DB` above the format's quantisation floor and
   no more than :data:`CONTENT_MAX_BELOW_MAIN_DB` below the programme's main band
   (median of ``C`` over 1-10 kHz);
   below 0.97 x Nyquist that edge is a (natural) roll-off.

A cliff whose fall a Butterworth low-pass explains (:func:`butterworth_explains`: a straight line in dB
against ``log10(tan(pi f / fs))``, fitting a digital Butterworth of order at most 12, run once or zero-phase)
is a band limit, however near a standard Nyquist it lies.

A cliff whose fall comes in steps -- flat stretches as wide as a coder's bands, between drops of several dB
(:func:`coder_steps`) -- is a lossy coder's band limit: a coder codes or zeroes whole bands, and where its limit moves
from frame to frame the long-term spectrum holds one step per band at the share of frames that coded it, while a
converter's transition falls smoothly.

A cliff whose edge lies early (below :data:`EARLY_EDGE_RATIO` of the source Nyquist) must leave nothing above the
old Nyquist but a floor: read frame by frame on the front end's level histogram (:func:`stop_band_content`), a
mastering low-pass leaves the programme there, a fixed 50-90 dB down in every frame, and is a band limit.
The same reading decides a brick wall at a standard Nyquist: an FFT resampler zeroes every bin above the old
Nyquist and leaves the floor there, a transform coder's low-pass leaves its synthesis window's leakage.

A cliff whose fall is over well short of the old Nyquist (:func:`ends_short`) is a band limit: a converter ends its
fall at the old Nyquist, a transform coder's bandwidth setting anywhere.

A converter cliff is also wide enough: its fall from -3 dB to -30 dB spans at
least :data:`BRICK_WALL_MAX_WIDTH_RATIO` of the source Nyquist, or, down to
:data:`CONVERTER_MIN_WIDTH_RATIO`, ends at the old Nyquist as a very-high-quality
design's does (:func:`converter_width_fits`); steeper brick walls are codec or
filter band limits.  Where the next standard rate up and a lower rate both explain
a cliff and the stop band has begun by the lower rate's Nyquist, the lower rate is
named (:func:`lower_bound_rate`), and a verdict's confidence counts its fit less
the best fit of any other rate that explains the same cliff (:func:`rival_fit`).  A cliff above :data:`OWN_FILTER_RATIO`
of the file's Nyquist that matches no rate is the file's own anti-alias filter
and is not reported.

A candidate rate is untestable (listed in ``untestable_source_rates_hz``) when
its Nyquist lies above :data:`TESTABLE_MAX_RATIO` of the file's Nyquist (no
room to see a stop band below the file's own anti-alias filter), or when the
file has no content just below the candidate's Nyquist (nothing there could
show a cliff: typical of 88.2 kHz inside a 96 kHz music master, whose
content above 35 kHz is at the noise floor).
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass, field

import numpy as np
from masterqc.measure.npkernels import maximum_filter1d, median_filter, minimum_filter1d, uniform_filter1d

from masterqc.contract import NO_UNIT, measured
from masterqc.measure.base import NUMBER_OR_NULL, STRING_OR_NULL, TIME_RANGES, array_of

#: standard rates a master may have been made at (Hz)
CANDIDATE_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400, 192000)
#: closing width of the envelope (own reasoning: fills the gaps of tones with f0 up to ~1 kHz)
CLOSING_HZ = 1010.0
#: smoothing of the envelope
SMOOTH_HZ = 110.0
#: minimum pass-to-stop drop of a cliff, dB (own reasoning: "tens of dB"; natural roll-offs do not fall 20 dB in 3 kHz at these frequencies)
CLIFF_MIN_DROP_DB = 20.0
#: minimum average slope of a cliff, dB/kHz (own reasoning: a 12 dB/octave acoustic roll-off is 0.6 dB/kHz at 20 kHz; converter filters fall 10-50 dB/kHz)
CLIFF_MIN_SLOPE_DB_PER_KHZ = 5.0
#: a cliff falls at least this many times faster than the spectrum just below it (the pass window, 2-5 kHz
#: below the edge), own reasoning: a converter's or codec's pass band is flat to within ~1 dB/kHz under a cliff of
#: 10-300 dB/kHz (ratios of 100 and more on noise and music), while speech and dull recordings whose energy runs
#: out into the floor fall almost as fast above their "edge" as below it (ratios 1.3-1.6 on the demo's voice masters)
CLIFF_MIN_SLOPE_RATIO = 4.0
#: a pass band falling faster than this (dB/kHz, least-squares over 2-5 kHz below the edge) is tilted flat before
#: the edge's -1/-3/-6 dB points are read, and its cliff must reach STEEPEST_MIN_DB_PER_KHZ (own reasoning: pink
#: noise falls 0.1-0.5 dB/kHz above 6 kHz, and scipy's default resample_poly filter, whose slow transition starts
#: inside the pass window, makes noise read up to 1.4 dB/kHz, so those readings are unchanged; speech and dull
#: recordings fall 2-9 dB/kHz there)
PASS_SLOPE_TOLERANCE_DB_PER_KHZ = 2.0
#: a cliff's steepest kilohertz falls at least this far, dB/kHz (own reasoning from the issue's "tens of dB within a
#: couple of kHz": the corpus' resamplers fall 36-56 dB/kHz on average and its codec shelves 70 and more, while the
#: knee of a voice chain's low-pass and the end of speech energy fall at most about 12 dB/kHz)
STEEPEST_MIN_DB_PER_KHZ = 20.0
#: on a pass band not tilted flat, the steepest kilohertz at the -6 dB point falls at least this fraction of the
#: cliff's average slope, else the -6 dB point lies on a gently sloping pass band below the real cliff (own
#: reasoning: scipy's default resample_poly filter, the slowest converter here, gives 0.56-0.62; a -6 dB point
#: read 3 kHz below a converter's cliff on soft music gave 0.25)
EDGE_MIN_STEEPNESS_FRACTION = 0.4
#: window above a cliff (from where it comes within 6 dB of its stop level) over which the spectrum must have
#: stopped falling, Hz
AFTER_WINDOW_HZ = 3000.0
#: ... to at most this fraction of the cliff's fall (own reasoning: a converter's or codec's stop band and the
#: format's floor are flat, while past the knee of a gentle low-pass, or where speech runs out, the spectrum
#: falls on as fast as before or faster)
CLIFF_MAX_AFTER_RATIO = 0.5
#: span over which a cliff's steepest fall is read, Hz (own reasoning: a converter or codec low-pass falls tens
#: of dB within 1-4 kHz, so its steepest kilohertz holds most of the fall)
STEEPEST_SPAN_HZ = 1000.0
#: minimum depth of a cliff read as upsampling, dB (own reasoning: ordinary resamplers reach 50 dB or more of stop-band rejection; codec shelves are shallower)
UPSAMPLED_MIN_DEPTH_DB = 40.0
#: the region below an edge must stay within this many dB of its median (own reasoning)
PASS_FLATNESS_DB = 12.0
#: below an edge, the median bin must lie within this many dB of the closed envelope for the content to count as broadband (own reasoning: between the partials of a sparse harmonic series the bins sit far below the envelope)
BROADBAND_GAP_DB = 10.0
#: "clearly above the floor", dB (own reasoning)
ABOVE_FLOOR_DB = 10.0
#: the edge (-6 dB point) of a standard rate's converter lies within this fraction of its Nyquist (own reasoning
#: from resampler designs: windowed-sinc filters centred on the old Nyquist (scipy's resample_poly) are -6 dB at
#: 1.0; high-quality converters end their pass band at 0.91-0.97 and reach their stop band by 1.0, so their
#: -6 dB point lies at 0.93-0.99; low-quality converters pass 80 % of the band (at -3 dB) and cross -6 dB near 0.83;
#: 1.03 leaves room for the 10 Hz bins and the closing of the envelope)
EDGE_RATIO_RANGE = (0.75, 1.04)
#: most likely edge position relative to the source Nyquist (own reasoning: high-quality converters and FFT
#: resamplers, the commonest, put it at 0.95-1.0); where two candidates both explain an edge, the one whose
#: ratio lies nearer this wins
EDGE_RATIO_TYPICAL = 0.97
#: where a converter's stop band begins, relative to the source Nyquist (the point where the fall first comes
#: within 6 dB of the stop level): a converter that rejects its images puts the start of its stop band at the old
#: Nyquist frequency whatever its pass band (0.8-0.97) or its length, so this point is the best estimator of the
#: source rate.  Own reasoning from the designs: libsamplerate's converters reach it at 0.94-1.01 of the old Nyquist
#: as read on the envelope (the -6 dB point of its fastest converter lies at only 0.82); an elliptic low-pass whose
#: -6 dB point happens to sit at 0.8-0.9 of a standard Nyquist reaches its stop band at 0.85-0.92.
STOP_RATIO_RANGE = (0.92, 1.06)
#: most likely position of the start of the stop band (own reasoning, see STOP_RATIO_RANGE)
STOP_RATIO_TYPICAL = 0.96
#: the stop band "begins" where the fall first comes within this many dB of the stop level (own reasoning: on
#: speech and sparse material the floor above a cliff is uneven by several dB, and a closer reading wanders
#: 5-10 % of the old Nyquist above where the converter's stop band begins)
STOP_TOLERANCE_DB = 15.0
#: a short windowed-sinc design centred on the old Nyquist (scipy's resample_poly default, a short Kaiser or Hann
#: window) lets its transition run past it: -6 dB at 0.92-1.04 of the old Nyquist and the stop band reached only at
#: 1.02-1.35 of it.  Such a "leaky" fall explains a rate when its -6 dB point lies at or above LEAKY_MIN_EDGE_RATIO
#: and its stop band begins within LEAKY_STOP_RATIO_RANGE (own reasoning: scipy's default design is -6 dB at the old
#: Nyquist exactly and falls to its -54 dB side lobes 15-18 % higher, see tests/test_bandwidth.py)
LEAKY_MIN_EDGE_RATIO = 0.92
LEAKY_STOP_RATIO_RANGE = (1.02, 1.35)
#: a leaky fall is made of images: just above the old Nyquist (LEAKY_MIRROR_BAND_RATIO of it, mirrored) the
#: spectrum's fine structure repeats the content just below it, correlation at least LEAKY_MIN_MIRROR_CORRELATION
#: (own reasoning: a Butterworth or elliptic low-pass whose slow fall reaches its floor 1.1-1.3 times above a
#: standard Nyquist has independent content on either side of it, correlation about 0)
LEAKY_MIRROR_BAND_RATIO = (0.86, 0.98)
#: a design centred on the old Nyquist with a long window (-6 dB within CENTRED_EDGE_TOLERANCE of 1.0, stop band
#: by CENTRED_MAX_STOP_RATIO) leaks too little to show images above the floor, and needs none to be read as leaky
#: (own reasoning: resample_poly with a 40-zero-crossing Kaiser design reads -6 dB at 0.995 and its stop band
#: from 1.034 of the old Nyquist; libsamplerate's medium converter from 48 kHz, whose -6 dB point falls at 0.99
#: of 22.05 kHz, reaches its stop band only at 1.053-1.062 of it)
CENTRED_EDGE_TOLERANCE = 0.02
CENTRED_MAX_STOP_RATIO = 1.045
#: fit of a cliff that a design centred on the old Nyquist explains (its -6 dB point within CENTRED_EDGE_TOLERANCE
#: of it and its stop band begun by CENTRED_MAX_STOP_RATIO): the best a stop-band reading can score.  Where such a
#: cliff also reads as an early stop band of the next higher rate (a 22.05 kHz source's cliff, 0.98-1.0 of 11.025
#: kHz, is 0.90-0.92 of 12 kHz with its stop band at 0.95 of it), the two readings tie and the lower rate wins
#: (own reasoning: on the tuning corpus resample_poly's 40-zero-crossing design from 22.05 and 44.1 kHz on music
#: that rolls off below the old Nyquist read as 24 and 48 kHz; libsamplerate's medium converter from 48 kHz, the
#: nearest converter the other way, reads its stop band at 1.053-1.062 of 22.05 kHz, outside the centred window)
CENTRED_FIT = 1.0
LEAKY_MIN_MIRROR_CORRELATION = 0.4
#: a converter's transition is a windowed sinc's: its amplitude falls roughly linearly through the cutoff, so
#: in dB the fall accelerates, and it takes less span from -20 dB to -40 dB than from -6 dB to -20 dB (ratio
#: 0.6-0.8 as read on the envelope for windowed-sinc converters whose fall is wide enough to read); a Butterworth
#: low-pass falls at most a constant number of dB per octave, and even warped by the bilinear transform next to
#: the file's Nyquist it needs about as much span for the second step as for the first (1.04 analytically for
#: 8th order at 20 kHz in a 48 kHz file; 0.90-0.99 as read on the envelope of music).  Cliffs at or above this
#: ratio are low-passes, not conversions (own reasoning; libsamplerate's medium converter reads 0.57-0.86).
CONVERTER_MAX_SHAPE_RATIO = 0.9
#: ... read only where the fall from -6 to -40 dB spans at least this much of the file's own frequencies, Hz: the
#: closed and smoothed envelope (CLOSING_HZ, SMOOTH_HZ) cannot resolve the shape of a narrower fall (own reasoning:
#: Butterworth low-passes of order 10-12 at 20-21 kHz in a 48 kHz file fall from -6 to -40 dB within 0.88-1.3 kHz
#: and must be read (analytic shape ratio of the 12th-order one at 20 kHz: 1.14); narrower falls are not resolved)
SHAPE_MIN_SPAN_HZ = 850.0
#: a brick wall (narrower than BRICK_WALL_MAX_WIDTH_RATIO) counts as a converter only this close to a standard
#: Nyquist: an FFT resampler zeroes every bin above the old Nyquist exactly, while codec and filter brick walls sit
#: anywhere (own reasoning)
BRICK_WALL_RATIO_TOLERANCE = 0.015
#: a converter falls from its -6 dB point to its bottom (at most 40 dB further down) within this fraction of the
#: source Nyquist.  Own reasoning from resampler physics: a windowed-sinc converter's transition is the width of
#: its window's main lobe, which practical lengths keep within 5-25 % of the old Nyquist (scipy's default Kaiser
#: design falls from -6 to -40 dB in about 12 %); a Butterworth low-pass falls 6n dB per octave, so an 8th-order
#: one at 20 kHz needs 14 kHz (0.64 of 22.05 kHz) for the same 34 dB, and even a 12th-order one 0.4
CONVERTER_MAX_FALL_RATIO = 0.3
#: a converter's anti-image filter ends its fall at the old Nyquist frequency: its stop band begins there (to stop
#: the images) and its pass band reaches as high as its length allows, so the narrower its fall, the nearer the old
#: Nyquist its -6 dB point.  A fall that is over well short of the old Nyquist -- the gap from the start of its stop
#: band up to the old Nyquist wider than this many times the fall itself (-6 dB point to the start of the stop
#: band) -- wastes the band between, as no converter's design does; a transform coder's bandwidth setting cuts its
#: lines there, its fall only as wide as its window's main lobe.  Both spans are read on the envelope smoothed over
#: SMOOTH_HZ, so each may be out by about that much: the gap must exceed the fall by twice SMOOTH_HZ as well (in the
#: file's own hertz).  Own reasoning; tuning corpus (seed 1000): libsamplerate's fastest converter, whose pass band
#: ends earliest, reads -6 dB at 0.82 and its stop band from 0.92-1.01 of the old Nyquist (gap at most 0.82 of its
#: fall), its best converter, whose fall is narrowest, a gap of up to 0.86 of a fall of 0.02 of the old Nyquist; an
#: AC-3-like coder's bandwidth code at 14.6-14.7 kHz in a 48 kHz file reads -6 dB at 0.91-0.92 and its stop band
#: from 0.93-0.94 of 16 kHz (gap 2.3-5.7 times its fall).  The same reading tells a steep Butterworth in a 48 kHz file
#: (which the bilinear transform makes as steep as a 44.1 kHz converter next to the file's Nyquist) from a
#: conversion: a 12th-order one at 20 kHz on music reads -6 dB at 0.90 and its stop band from 0.93 of 22.05 kHz
#: (gap 2.7 times its fall), its fall met by the programme's floor more than 1 kHz short of 22.05 kHz
CONVERTER_MAX_GAP_RATIO = 1.0
#: a low candidate's pass (scale 2 or 4) searches up to this multiple of its highest Nyquist (own reasoning:
#: room for the stop window above the cliff without reaching the content of a native wide band)
LOW_PASS_TOP_RATIO = 2.6
#: a candidate whose Nyquist is above this fraction of the file's Nyquist is untestable (own reasoning: the stop band must be visible below the file's own anti-alias filter)
TESTABLE_MAX_RATIO = 0.93
#: a cliff whose edge is above this fraction of the file's Nyquist is the file's own anti-alias filter (own reasoning; converters commonly pass to 0.45 fs = 0.9 x Nyquist, common practice, no source)
OWN_FILTER_RATIO = 0.9
#: a converter's fall from -3 dB to -30 dB spans at least this fraction of the source Nyquist.  Analytic, from the
#: steepest standard design: a very-high-quality converter ends its pass band at 0.95 of the old Nyquist and begins its
#: stop band (150-200 dB) at it, a transition of 5 %; a Kaiser-windowed sinc of that transition falls from -3 to -30 dB
#: in 0.26-0.30 of it (scipy.signal.kaiserord and firwin, frequency response of the taps; see
#: tests/test_bandwidth.py), 1.3-1.5 % of the old Nyquist, and the envelope only widens it (1.7 % as read for a
#: 150 dB design from 44.1 kHz).  The brick walls of codec low-passes, which zero whole bands, are narrower still and
#: are band limits unless they sit at a standard Nyquist (BRICK_WALL_RATIO_TOLERANCE, BRICK_WALL_MAX_WIDTH_RATIO)
CONVERTER_MIN_WIDTH_RATIO = 0.012
#: a fall narrower than BRICK_WALL_MAX_WIDTH_RATIO (and no narrower than CONVERTER_MIN_WIDTH_RATIO) away from a
#: standard Nyquist's brick wall is a converter's only as a very-high-quality design makes it: a transition that
#: narrow (at most 0.02 / 0.26 = 7.7 % of the old Nyquist, see CONVERTER_MIN_WIDTH_RATIO) puts the -6 dB point, midway,
#: at 0.96 or above and the stop band at the old Nyquist.  Read on the envelope: -6 dB at STEEP_MIN_EDGE_RATIO and the
#: stop band from STEEP_MIN_STOP_RATIO of the old Nyquist at least (own reasoning from the designs; the tuning
#: corpus' 150-170 dB designs with pass bands to 0.93-0.95 read 0.96-0.98 and 0.98-1.0; a 10th-order elliptic
#: low-pass at 15 kHz in a 48 kHz file, as steep, reads 0.94 and 0.96 of 16 kHz)
STEEP_MIN_EDGE_RATIO = 0.955
STEEP_MIN_STOP_RATIO = 0.97
#: a fall narrower than this fraction of the source Nyquist (-3 to -30 dB) within BRICK_WALL_RATIO_TOLERANCE of a
#: standard Nyquist is a brick wall: an FFT resampler's, or a coder's, told apart by what lies above it
#: (:func:`_programme_above`).  Own reasoning: the envelope reads a whole-file DFT resampler's wall 1-2 % wide
BRICK_WALL_MAX_WIDTH_RATIO = 0.02
#: the content just below a candidate's Nyquist (0.84..0.88 of it) must stand this far above the format's floor for the candidate to be testable, dB (own reasoning: a cliff must be able to fall UPSAMPLED_MIN_DEPTH_DB + ABOVE_FLOOR_DB)
TESTABLE_MIN_CONTENT_DB = 50.0
#: ... and lie no further than this below the programme's main band (median of 1-10 kHz), dB (own reasoning: content that far down sits at a real master's noise floor, where no cliff can show)
TESTABLE_MAX_BELOW_MAIN_DB = 60.0
#: without a cliff, content counts towards the effective bandwidth only down to this far below the programme's
#: main band (median of 1-10 kHz), dB: the same reasoning as TESTABLE_MAX_BELOW_MAIN_DB (own reasoning: the
#: filtered tail of a voice 100 dB down is far above a 24-bit format's floor but carries nothing)
CONTENT_MAX_BELOW_MAIN_DB = TESTABLE_MAX_BELOW_MAIN_DB
#: the cliff search starts this high, Hz (on the scale of the search, see assess_power)
SEARCH_LOW_HZ = 6000.0
#: windows of the cliff search, Hz (relative to the edge position)
PRE_WINDOW_HZ = (-1500.0, -500.0)
POST_WINDOW_HZ = (3000.0, 9000.0)
PASS_WINDOW_HZ = (-5000.0, -2000.0)
#: search grid step, Hz
SEARCH_STEP_HZ = 50.0
#: edge positions tried in turn lie at least this far apart, and at most MAX_CANDIDATES are tried (own reasoning,
#: cost: neighbouring positions read the same -6 dB point; every cliff in the corpus is found within 2 tries)
CANDIDATE_SPACING_HZ = 250.0
MAX_CANDIDATES = 6
#: a time segment needs this many analysed frames to be judged on its own
SEGMENT_MIN_FRAMES = 10
#: mirror test (:func:`mirror_correlations`): the fine structure of the spectrum over this band of a candidate's
#: Nyquist is compared with its mirror image about that Nyquist (own reasoning: an upsampler whose filter lets
#: images through -- cubic or other short interpolators, short windowed sincs -- copies the spectrum below the old
#: Nyquist, bin for bin, to the mirror frequencies above it; the upper 5 % is left out, where a converter's
#: transition mixes the two)
MIRROR_BAND_RATIO = (0.55, 0.95)
#: fine structure: the level in dB less its running mean over this width, Hz (own reasoning: wider than the
#: 10 Hz bins' noise, narrower than any spectral envelope)
MIRROR_DETREND_HZ = 310.0
#: correlation of the fine structure with its mirror that names a source rate together with images or a cliff
#: (own reasoning: a copied spectrum correlates 0.9-1.0 with its mirror; native music, speech and noise stay
#: within +-0.3, a harmonic voice whose partials happen to fall symmetric about a Nyquist up to about 0.55)
MIRROR_MIN_CORRELATION = 0.8
#: ... and on its own, where the content below the old Nyquist is broadband (median bin within
#: BROADBAND_GAP_DB of the envelope: a harmonic series symmetric about a Nyquist cannot make it), house choice
MIRROR_ALONE_CORRELATION = 0.9
#: the mirror must hold across the whole band, not only next to the Nyquist: the band is also read in
#: MIRROR_SUBBANDS equal parts and the median of their correlations counts when lower than the whole band's
#: (own reasoning: an interpolator that passes images copies *all* the content below the old Nyquist, so every
#: part of the band correlates with its mirror (0.8-1.0 in every part on the tuning corpus); a single sound whose
#: own spectrum is symmetric about the Nyquist -- a short burst centred on it, whose side lobes dominate the fine
#: structure next to it -- correlates only in the part nearest the Nyquist (0.13-0.46 in the other three parts on
#: the demo's 12 kHz bursts in a 48 kHz master))
MIRROR_SUBBANDS = 4

#: a converter whose pass band ends early (its -6 dB point below EARLY_EDGE_RATIO of the old Nyquist: the cheap
#: and medium designs, which put their whole transition below the old Nyquist) leaves nothing above the old Nyquist
#: but its own floor: in the median frame the content there lies at least EARLY_MIN_DEPTH_DB below the loud frames'
#: pass band, or within STOP_CONTENT_MAX_ABOVE_FLOOR_DB of the format's floor.  A mastering low-pass (Chebyshev II,
#: elliptic, Bessel, short FIR) leaves the programme itself there, a fixed 50-90 dB down in every frame.  Own
#: reasoning; tuning corpus (median frame over 1.06-1.3 of the old Nyquist, 90th percentile of the frames over
#: 0.6-0.8 of it): converters with such an edge read 104-125 dB deep (libsamplerate's fastest and medium
#: converters), low-passes 68-87 dB with the content 33-61 dB above the floor.  Read on the front end's level
#: histogram (channel mean), so only for the whole file's sum.
EARLY_EDGE_RATIO = 0.92
EARLY_MIN_DEPTH_DB = 90.0
#: ... where the fall reaches its stop band by the old Nyquist (at most this ratio, the envelope's reading): a
#: design centred on the old Nyquist whose edge merely reads early on material that rolls off below it (a long
#: Kaiser resample_poly design on speech: stop band from 1.03 of the old Nyquist) may leave its own shallow stop
#: band there, images of the programme 50-60 dB down (own reasoning; the low-passes this rule catches on the
#: tuning corpus reach their stop band at 0.94-1.004 of the old Nyquist).  The limit of the reading: a converter
#: with so shallow a stop band on material that already rolls off below its old Nyquist, so that its stop band
#: is reached early, reads exactly like such a low-pass and is missed (resample_poly from 8 to 16 kHz with a
#: 40-zero-crossing Kaiser beta 5 design, on noise low-passed at 3 kHz: 80-88 dB deep)
EARLY_MAX_STOP_RATIO = 1.015
STOP_CONTENT_MAX_ABOVE_FLOOR_DB = 20.0

#: a cliff whose fall a Butterworth low-pass explains is a band limit, not a conversion.  The digital
#: Butterworth (bilinear transform, as every IIR design tool makes it) has exactly
#: ``|H(f)|^2 = 1 / (1 + (tan(pi f / fs) / tan(pi fc / fs))^(2N))``; run forwards and backwards (zero-phase, as
#: mastering tools often do) the attenuation in dB doubles.  Two readings of the fall decide (own reasoning):
#: (1) linearity in the warped frequency ``u = log10(tan(pi f / fs))``: far from its corner a Butterworth's
#: attenuation grows by exactly 20 N dB per decade of ``u``, so the span of ``u`` from -30 to -40 dB equals
#: that from -20 to -30 dB (analytically 0.997 for one pass, 0.958 for a zero-phase pass, whatever its order,
#: corner or rate), while a resampler's windowed-sinc transition accelerates into its stop band: the ratio must
#: reach BUTTERWORTH_MIN_LINEARITY; and (2) the fall from -1 dB to the bottom (at most 60 dB) fits a Butterworth
#: of order at most BUTTERWORTH_MAX_ORDER (one pass or zero-phase) within BUTTERWORTH_MAX_FIT_RMS_DB.
#: Tuning corpus (own measurements): Butterworths read 0.83-1.11 and fit within 0.2-1.2 dB; converters into
#: files of 88.2 kHz and up, or from 32 kHz, read 0.44-0.87.  Next to a 48 kHz file's Nyquist the bilinear
#: warping makes a zero-phase Butterworth as steep as a 44.1 kHz converter: libsamplerate's converters there
#: read 0.52-1.01 and fit within 0.64-1.97 dB, so both limits are set where no tuning converter passes them
#: (every converter with a linearity of 0.9 or more fits no better than 0.70 dB): only the Butterworths that
#: read cleanly (mostly on noise-like and speech material) are told apart there; the rest stay ambiguous.
BUTTERWORTH_MIN_LINEARITY = 0.9
BUTTERWORTH_MAX_FIT_RMS_DB = 0.6
BUTTERWORTH_MAX_ORDER = 12
#: the fit's coarse corner grid, the number of designs (order and passes) refined on the 10 Hz grid, and how far
#: either side of a design's coarse best corner the refinement looks, Hz (house choice, cost: see fit_butterworth)
FIT_COARSE_HZ = 100.0
FIT_REFINE = 6
FIT_REFINE_HZ = 200.0

#: a lossy coder's band limit comes in steps: it codes or zeroes whole bands (32 sub-bands of fs/64, or scale-factor
#: bands of 16-32 lines of 1024 at the top of the band: 345-750 Hz at 44.1 and 48 kHz), and where its limit moves
#: from frame to frame the long-term spectrum holds one flat step per band at the share of frames that coded it
#: (a band coded in half the frames stands 3 dB down, in a tenth 10 dB), with drops at the band edges.  A
#: converter's windowed-sinc transition falls smoothly and ever faster into its stop band, with no flat stretch on
#: the way.  A step (:func:`coder_steps`), read from the -1 dB point to the start of the stop band on the level of
#: the spectrum, median over STEP_MEDIAN_HZ (the noise-like body of the programme without single partials, which the
#: closed envelope would turn into steps of their own): the level stays within STEP_FLAT_DB over STEP_MIN_WIDTH_RATIO
#: of the file's rate (a coder's bands are a share of its band: fs/150 is 294 Hz at 44.1 kHz), at least
#: STEP_BELOW_PASS_DB under the pass level and STEP_ABOVE_STOP_DB over the stop level, and falls at least STEP_EDGE_DB
#: within that width into it and again out of it.  Own reasoning; on the tuning corpus no converter's fall shows
#: one, and a uniform slow fall (3-4 dB/kHz, a short Hann design's) that looks flat over 300 Hz falls only about
#: 1 dB per 300 Hz either side
STEP_MEDIAN_HZ = 250.0
STEP_MIN_WIDTH_RATIO = 1.0 / 150.0
STEP_FLAT_DB = 1.5
STEP_BELOW_PASS_DB = 2.0
STEP_ABOVE_STOP_DB = 10.0
STEP_EDGE_DB = 3.0

MEASUREMENT_SCHEMA = {
    "effective_bandwidth_hz": measured(NUMBER_OR_NULL, 'hz',
        'highest frequency with content clearly above the floor (at a cliff, its -6 dB point)'),
    "bandwidth_edge": measured({"enum": ["cliff", "rolloff", None]}, NO_UNIT,
        'shape of the top edge of the content: cliff (converter filter) or rolloff'),
    "bandwidth_edge_depth_db": measured(NUMBER_OR_NULL, 'db',
        'depth of the edge below the content under it'),
    "bandwidth_edge_slope_db_per_khz": measured(NUMBER_OR_NULL, 'db',
        'steepness of the edge, dB per kHz'),
    "upsampled_from_hz": measured({"type": ["integer", "null"]}, 'hz',
        'standard rate the master was converted up from; null when none'),
    "upsampled_confidence_fraction": measured(NUMBER_OR_NULL, 'fraction',
        'confidence of the upsampling verdict, 0..1'),
    "upsampled_channels": measured({"type": ["array", "null"], "items": {"type": "string"}}, NO_UNIT,
        'the channels the upsampling was found in'),
    "upsampled_edge_ratio": measured(NUMBER_OR_NULL, 'ratio',
        'the content edge over the source rate\'s Nyquist frequency'),
    "upsampled_evidence": measured({"enum": ["cliff", "images", "segments", "samples", None]}, NO_UNIT,
        'what showed the upsampling: a converter cliff, images, stretches of the file, or the sample pattern of an interpolating upsampler'),
    "band_limit_hz": measured(NUMBER_OR_NULL, 'hz',
        'frequency of a steep low-pass no standard rate explains; null when none'),
    "untestable_source_rates_hz": measured(array_of({"type": "integer"}), 'hz',
        'standard rates whose Nyquist cannot be tested on this material'),
    "bandwidth_note": measured(STRING_OR_NULL, NO_UNIT,
        'what the bandwidth figures counted, in words'),
    "bandwidth_segments": measured(array_of({"type": "object", "required": ["start_s", "end_s", "upsampled_from_hz"],
                                             "properties": {"start_s": {"type": "number"}, "end_s": {"type": "number"},
                                                            "upsampled_from_hz": {"type": ["integer", "null"]},
                                                            "upsampled_confidence_fraction": NUMBER_OR_NULL,
                                                            "effective_bandwidth_hz": NUMBER_OR_NULL}}), NO_UNIT,
        'the bandwidth assessment per stretch of the file'),
    "upsampled_mirror_rate_hz": measured({"type": ["integer", "null"]}, 'hz',
        'lowest standard rate whose Nyquist the spectrum is mirrored about, bin for bin (images of an upsampler '
        'without a proper filter); null when none'),
    "upsampled_where_s": measured(TIME_RANGES, 's',
        'time ranges where upsampling was found'),
}


@dataclass
class BandwidthResult:
    effective_bandwidth_hz: float | None = None
    edge: str | None = None
    depth_db: float | None = None
    slope_db_per_khz: float | None = None
    upsampled_from_hz: int | None = None
    confidence: float | None = None
    band_limit_hz: float | None = None
    untestable_hz: list = field(default_factory=list)
    note: str | None = None
    settings: dict = field(default_factory=dict)
    segments: list = field(default_factory=list)
    where_s: list = field(default_factory=list)
    channels: list | None = None
    edge_ratio: float | None = None
    evidence: str | None = None
    mirror_rate_hz: int | None = None
    #: where the cliff's fall reaches its stop band, over the source Nyquist (not reported)
    stop_ratio: float | None = None
    #: the verdict rests on a brick wall at a standard Nyquist (not reported)
    brick: bool = False
    #: the verdict names the lower of two rates that explain the cliff (:func:`lower_bound_rate`): the higher one,
    #: Hz (not reported)
    lower_bound_of: int | None = None
    #: where the fall of a cliff read as a band limit reaches its stop band, Hz (not reported; see same_band_limit)
    fall_end_hz: float | None = None

    def measurements(self) -> dict:
        return {
            "effective_bandwidth_hz": self.effective_bandwidth_hz,
            "bandwidth_edge": self.edge,
            "bandwidth_edge_depth_db": self.depth_db,
            "bandwidth_edge_slope_db_per_khz": self.slope_db_per_khz,
            "upsampled_from_hz": self.upsampled_from_hz,
            "upsampled_confidence_fraction": self.confidence,
            "upsampled_channels": None if self.channels is None else list(self.channels),
            "upsampled_edge_ratio": self.edge_ratio if self.upsampled_from_hz is not None else None,
            "upsampled_evidence": (self.evidence or "cliff") if self.upsampled_from_hz is not None else None,
            "band_limit_hz": self.band_limit_hz,
            "untestable_source_rates_hz": list(self.untestable_hz),
            "bandwidth_note": self.note,
            "bandwidth_segments": list(self.segments),
            "upsampled_mirror_rate_hz": self.mirror_rate_hz,
            "upsampled_where_s": [list(w) for w in self.where_s],
        }


def _db(p):
    return 10.0 * np.log10(np.maximum(np.asarray(p, dtype=float), 1e-30))


def format_floor_db(bit_depth: int, is_float: bool, frame_length: int) -> float:
    """Per-bin power (dB) of the format's quantisation noise in the front end's normalisation.

    Integer PCM of ``b`` bits: white noise of variance ``q**2 / 12`` with
    ``q = 2**-(b-1)``, spread over ``frame_length / 2`` bins.  Float files are
    given the floor of 24-bit PCM (own reasoning: content below it is
    inaudible and at the edge of float32 precision).
    """
    bits = 24 if is_float else max(1, int(bit_depth))
    q = 2.0 ** -(bits - 1)
    return 10.0 * math.log10((q * q / 12.0) / (frame_length / 2.0))


def testable_candidates(sample_rate_hz: float, env_db=None, bin_hz=None, floor_db=None):
    """``(testable, untestable)`` candidate source rates below ``sample_rate_hz``.

    With ``env_db`` (the envelope of :func:`envelope_db`), ``bin_hz`` and
    ``floor_db``, a candidate without content at 0.84..0.88 of its Nyquist is
    untestable too.
    """
    nyq = sample_rate_hz / 2.0
    testable, untestable = [], []
    main = None
    for r in CANDIDATE_RATES_HZ:
        if r >= sample_rate_hz:
            continue
        ok = r / 2.0 <= TESTABLE_MAX_RATIO * nyq
        if ok and env_db is not None:
            a, b = _bins(0.84 * r / 2.0, bin_hz), _bins(0.88 * r / 2.0, bin_hz)
            near = float(np.median(env_db[a:b + 1]))
            if main is None:
                main = float(np.median(env_db[_bins(1000.0, bin_hz):_bins(10000.0, bin_hz) + 1]))
            ok = near >= floor_db + TESTABLE_MIN_CONTENT_DB and near >= main - TESTABLE_MAX_BELOW_MAIN_DB
        (testable if ok else untestable).append(r)
    return testable, untestable


def envelope_db(ltas_power: np.ndarray, bin_hz: float) -> np.ndarray:
    """The closed and smoothed envelope ``C`` (dB) of a power spectrum (step 1)."""
    level = _db(ltas_power)
    w = max(3, int(round(CLOSING_HZ / bin_hz)) | 1)
    closed = minimum_filter1d(maximum_filter1d(level, w, mode="nearest"), w, mode="nearest")
    s = max(1, int(round(SMOOTH_HZ / bin_hz)))
    return uniform_filter1d(closed, s, mode="nearest")


def _bins(hz, bin_hz):
    return int(round(hz / bin_hz))


def find_cliff(env_db: np.ndarray, bin_hz: float, top_bin: int, accept=None):
    """Step 2: the best cliff as a dict, or None.

    Edge positions are tried in order of falling pass-to-stop drop; the first
    one that passes every cliff test (and ``accept(cliff)``, when given) wins,
    so the end of a natural roll-off lower down cannot hide a real cliff above it.

    Keys: ``edge_bin`` (search position), ``pass_db``, ``stop_db``, ``drop_db``,
    ``edge_hz`` (-6 dB point), ``slope_db_per_khz``, ``slope_below_db_per_khz``
    (the fall of the spectrum 2-5 kHz below the edge), ``steepest_db_per_khz``
    (the largest fall over a :data:`STEEPEST_SPAN_HZ` span that holds the -6 dB point).
    """
    lo = _bins(SEARCH_LOW_HZ, bin_hz)
    step = max(1, _bins(SEARCH_STEP_HZ, bin_hz))
    pre_a, pre_b = _bins(PRE_WINDOW_HZ[0], bin_hz), _bins(PRE_WINDOW_HZ[1], bin_hz)
    post_a, post_b = _bins(POST_WINDOW_HZ[0], bin_hz), _bins(POST_WINDOW_HZ[1], bin_hz)
    min_post = _bins(1000.0, bin_hz)
    positions = np.arange(lo, top_bin - post_a - min_post, step)
    if positions.size == 0:
        return None
    # all positions at once: windows as rows of strided views (the stop window is cut at top_bin)
    near = np.lib.stride_tricks.sliding_window_view(env_db, pre_b - pre_a)[positions + pre_a]
    pre = np.median(near, axis=1)
    flat = np.max(np.abs(near - pre[:, None]), axis=1) <= PASS_FLATNESS_DB
    post = np.empty(positions.size)
    full = positions + post_b <= top_bin
    if full.any():
        post[full] = _stop_levels(env_db[:top_bin], positions[full] + post_a, post_b - post_a,
                                  np.where(flat[full], pre[full] - CLIFF_MIN_DROP_DB, -np.inf))
    cut = np.nonzero(~full)[0]
    if cut.size:
        post[cut] = _suffix_percentile_90(env_db[:top_bin], positions[cut] + post_a)
    drop = np.where(flat, pre - post, -np.inf)
    order = np.argsort(-drop, kind="stable")
    apart = max(1, _bins(CANDIDATE_SPACING_HZ, bin_hz))
    tried = []
    for i in order[:int(np.count_nonzero(drop >= CLIFF_MIN_DROP_DB))]:
        e = int(positions[i])
        if any(abs(e - t) < apart for t in tried):
            continue          # a neighbour of an edge already tried reads the same cliff
        tried.append(e)
        cliff = _cliff_at(env_db, bin_hz, top_bin, e, float(post[i]))
        if cliff is not None and (accept is None or accept(cliff)):
            return cliff
        if len(tried) >= MAX_CANDIDATES:
            break
    return None


def _stop_levels(values: np.ndarray, starts: np.ndarray, width: int, at_most: np.ndarray) -> np.ndarray:
    """``np.percentile(values[s:s + width], 90)`` for every ``s`` in ``starts`` where it can be at or below
    ``at_most`` (the same numbers there); ``+inf`` where it cannot, so that such a position never makes
    :func:`find_cliff`'s drop (a position is tried only where its stop level lies CLIFF_MIN_DROP_DB under its pass
    level, so only those levels are ever read).

    The 90th percentile of ``width`` values is at least its lower order statistic (rank ``lo`` = floor(0.9
    (width - 1)), counted from 0), and that is at least the smallest value of any ``width - lo`` of them: at least
    that many values are not below it.  The largest minimum over the window's runs of ``width - lo`` neighbours is
    such a lower bound, found for every window at once from two sliding extrema; only the windows whose bound lies
    at or below ``at_most`` (with a margin of 1 dB for the rounding of the percentile's interpolation) are
    partitioned, for the same numbers as ``np.percentile`` over every window, at a fraction of its cost."""
    out = np.full(starts.size, np.inf)
    if starts.size == 0:
        return out
    windows = np.lib.stride_tricks.sliding_window_view(values, width)
    run = width - int(math.floor(0.9 * (width - 1)))
    run_min = np.lib.stride_tricks.sliding_window_view(values, run).min(axis=1)
    bound = np.lib.stride_tricks.sliding_window_view(run_min, width - run + 1)[starts].max(axis=1)
    need = ~(bound > at_most + 1.0)        # (NaN: computed, as np.percentile would)
    if need.any():
        out[need] = np.percentile(windows[starts[need]], 90, axis=1)
    return out


def _suffix_percentile_90(values: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """``np.percentile(values[s:], 90)`` (linear interpolation) for every ``s`` in ``starts``.

    One pass from the end with a sorted list (``bisect.insort``), instead of one
    partial sort per start.
    """
    out = np.empty(len(starts))
    want = {}
    for j, s0 in enumerate(starts):
        want.setdefault(int(s0), []).append(j)
    lowest = min(want)
    ordered: list = []
    for k in range(len(values) - 1, lowest - 1, -1):
        bisect.insort(ordered, float(values[k]))
        if k in want:
            idx = 0.9 * (len(ordered) - 1)
            lo = int(math.floor(idx))
            hi = min(lo + 1, len(ordered) - 1)
            v = ordered[lo] + (ordered[hi] - ordered[lo]) * (idx - lo)
            for j in want[k]:
                out[j] = v
    return out


def _cliff_at(env_db, bin_hz, top_bin, e, post):
    """The cliff tests and measures at search position ``e`` with stop level ``post`` (see :func:`find_cliff`)."""
    post_a = _bins(POST_WINDOW_HZ[0], bin_hz)
    # pass level further below the edge
    pa, pb = max(0, e + _bins(PASS_WINDOW_HZ[0], bin_hz)), max(1, e + _bins(PASS_WINDOW_HZ[1], bin_hz))
    pass_db = float(np.median(env_db[pa:pb]))
    rest = env_db[e + post_a:top_bin]
    if float(np.percentile(rest, 90)) > pass_db - CLIFF_MIN_DROP_DB:
        return None
    # how fast the spectrum already falls just below the edge (least-squares line over the pass window)
    f_khz = np.arange(pa, pb) * bin_hz / 1000.0
    below = -float(np.polyfit(f_khz, env_db[pa:pb], 1)[0]) if pb - pa >= 2 else 0.0
    # on a pass band that falls faster than PASS_SLOPE_TOLERANCE_DB_PER_KHZ, the -1/-3/-6 dB points are read
    # on the spectrum tilted flat (its trend added back), so they mark where it starts to fall faster than
    # before, not merely where a steady roll-off has lost 6 dB
    tilt = below if below > PASS_SLOPE_TOLERANCE_DB_PER_KHZ else 0.0
    work = env_db
    if tilt > 0.0:
        ref_khz = 0.5 * (pa + pb - 1) * bin_hz / 1000.0
        work = env_db + tilt * np.maximum(np.arange(env_db.size) * bin_hz / 1000.0 - ref_khz, 0.0)
        pass_db = float(np.median(work[pa:pb]))
    # -1, -3, -6, -30 dB points and the bottom
    start = max(0, e + _bins(PASS_WINDOW_HZ[1], bin_hz))
    depth = pass_db - post
    low = min(30.0, depth - 3.0)          # the "-30 dB" point of a shallower cliff is 3 dB above its bottom
    pts = {d: _crossing(work, start, top_bin, pass_db - (low if d == 30.0 else d), bin_hz)
           for d in (1.0, 3.0, 6.0, 30.0)}
    # -20 dB and -40 dB points (or 3 dB above the bottom of a shallower cliff) for the shape of the fall
    d20, d40 = min(20.0, depth - 3.0), min(40.0, depth - 3.0)
    f20 = _crossing(work, start, top_bin, pass_db - d20, bin_hz) if d20 > 6.0 else None
    f40 = _crossing(work, start, top_bin, pass_db - d40, bin_hz) if d40 > d20 else None
    bottom = pass_db - min(depth - 3.0, 40.0)
    fb = _crossing(env_db, start, top_bin, bottom, bin_hz)
    f6 = pts[6.0]
    if f6 is None or fb is None or any(v is None for v in pts.values()):
        return None
    width_khz = max((fb - f6) / 1000.0, bin_hz / 1000.0)
    slope = (pass_db - 6.0 - bottom) / width_khz
    # the steepest fall over any STEEPEST_SPAN_HZ that holds the -6 dB point: a cliff is steep where its edge is
    span = max(1, _bins(STEEPEST_SPAN_HZ, bin_hz))
    k6 = int(f6 / bin_hz)
    k0, k1 = max(0, k6 - span), min(top_bin - 1 - span, k6)
    if k1 >= k0:
        starts = np.arange(k0, k1 + 1)
        steepest = float(np.max(env_db[starts] - env_db[starts + span])) / (span * bin_hz / 1000.0)
    else:
        steepest = slope
    # how fast the spectrum still falls once it has reached the stop level (least-squares line over
    # AFTER_WINDOW_HZ from where it first comes within 6 dB of the stop level, or from the bottom)
    fs_ = _crossing(env_db, start, top_bin, post + 6.0, bin_hz)
    ka = int(max(fb, fs_ if fs_ is not None else fb) / bin_hz)
    kz = min(top_bin, ka + _bins(AFTER_WINDOW_HZ, bin_hz))
    after = -float(np.polyfit(np.arange(ka, kz) * bin_hz / 1000.0, env_db[ka:kz], 1)[0]) if kz - ka >= 10 else 0.0
    return {"edge_bin": e, "pass_db": pass_db, "stop_db": post, "drop_db": depth,
            "edge_hz": f6, "slope_db_per_khz": slope, "f1_hz": pts[1.0], "f3_hz": pts[3.0],
            "f30_hz": pts[30.0], "fb_hz": fb, "f20_hz": f20, "f40_hz": f40, "slope_below_db_per_khz": below, "steepest_db_per_khz": steepest,
            "tilt_db_per_khz": tilt, "slope_after_db_per_khz": after,
            "stop_start_hz": _crossing(env_db, start, top_bin, post + STOP_TOLERANCE_DB, bin_hz) or fb}


def ends_short(cliff: dict, rate_hz: float, scale: int = 1) -> bool:
    """True when a cliff's fall is over short of ``rate_hz``'s Nyquist frequency by more than
    :data:`CONVERTER_MAX_GAP_RATIO` times its own width (the -6 dB point ``edge_hz`` to the start of the stop band
    ``stop_start_hz``, on the scale of the search) and twice :data:`SMOOTH_HZ` (the file's own hertz, so ``scale``
    times that on the scale of the search): no converter from that rate ends its fall there."""
    stop, edge = cliff.get("stop_start_hz"), cliff.get("edge_hz")
    if stop is None or edge is None or stop <= edge:
        return False
    return rate_hz / 2.0 - stop > CONVERTER_MAX_GAP_RATIO * (stop - edge) + 2.0 * SMOOTH_HZ * scale


#: a channel's cliff whose -6 dB point lies within the fall the channel sum read (from the sum's -6 dB point to the
#: start of its stop band), give or take this much, is part of the same fall (own reasoning: each reading moves by
#: up to SMOOTH_HZ with the envelope's smoothing, so two readings of one edge differ by less than twice that; a
#: coder's fall comes in steps, and one channel may read its -6 dB point on a lower step than the sum: the tuning
#: sub-band coder at 72 kbit/s on stereo speech, seed 1001, reads 15.02 kHz on the sum and 15.61 kHz on R)
SAME_FALL_HZ = 2.0 * SMOOTH_HZ


def same_band_limit(mix: "BandwidthResult", channel: "BandwidthResult") -> bool:
    """True when a channel's converter-cliff verdict is a fall the channel sum read as well, at full depth, and
    judged a band limit: the sum does not hide that cliff, it explains it.

    A channel converted up beside native ones is found on its own because the native channels fill the band in
    the sum, so the sum shows no cliff there or a shallow one (its drop bounded by the native channels' share of
    the power above the edge).  Where the sum falls through the channel's -6 dB point at least
    :data:`UPSAMPLED_MIN_DEPTH_DB` deep, every channel with content there ends in that fall, and the band-limit
    rules that judged it on the sum (a Butterworth's slope, a coder's steps, a fall over short of the old
    Nyquist, no rate's converter) judge the same fall on a channel; a channel read alone (half the material, a
    noisier envelope) must not overrule them.  "The same fall": the channel's -6 dB point lies between the sum's
    -6 dB point and the start of its stop band (``fall_end_hz``), within :data:`SAME_FALL_HZ`."""
    if mix.band_limit_hz is None or mix.edge != "cliff" or mix.depth_db is None:
        return False
    if mix.depth_db < UPSAMPLED_MIN_DEPTH_DB:
        return False
    if channel.upsampled_from_hz is None or (channel.evidence or "cliff") != "cliff":
        return False
    edge = channel.effective_bandwidth_hz
    if edge is None:
        return False
    top = max(float(mix.band_limit_hz), float(mix.fall_end_hz or mix.band_limit_hz))
    return float(mix.band_limit_hz) - SAME_FALL_HZ <= float(edge) <= top + SAME_FALL_HZ


def transition_width_hz(cliff: dict) -> float:
    """A cliff's fall from -3 dB to -30 dB, Hz (compared with :data:`CONVERTER_MIN_WIDTH_RATIO`).

    On a pass band tilted flat (``cliff["tilt_db_per_khz"] > 0``) the -3 dB point
    moves with the curvature of the programme's own roll-off, so the width is
    read from the -6 dB to the -30 dB point and scaled by 1.45: in a transition
    whose amplitude falls linearly over ``W`` (a windowed-sinc converter), -3 dB
    lies 0.29 W, -6 dB 0.50 W and -30 dB 0.97 W into it (own reasoning), so
    ``f30 - f3 = 0.68 W = 1.45 (f30 - f6)``.
    """
    if cliff.get("tilt_db_per_khz", 0.0) > 0.0:
        return 1.45 * (cliff["f30_hz"] - cliff["edge_hz"])
    return cliff["f30_hz"] - cliff["f3_hz"]


def converter_width_fits(cliff: dict, rate_hz: float) -> bool:
    """Is a cliff's fall (:func:`transition_width_hz`, frequencies on the scale of ``rate_hz``) as wide as a
    converter's from ``rate_hz``?  At least :data:`BRICK_WALL_MAX_WIDTH_RATIO` of the old Nyquist, or narrower down to
    :data:`CONVERTER_MIN_WIDTH_RATIO` where it ends at the old Nyquist as a very-high-quality design's does
    (:data:`STEEP_MIN_EDGE_RATIO`, :data:`STEEP_MIN_STOP_RATIO`)."""
    nyq = rate_hz / 2.0
    width = transition_width_hz(cliff)
    if width >= BRICK_WALL_MAX_WIDTH_RATIO * nyq:
        return True
    stop = cliff.get("stop_start_hz")
    return (width >= CONVERTER_MIN_WIDTH_RATIO * nyq and cliff["edge_hz"] >= STEEP_MIN_EDGE_RATIO * nyq
            and stop is not None and stop >= STEEP_MIN_STOP_RATIO * nyq)


def steep_relative(cliff: dict) -> bool:
    """True when a cliff falls :data:`CLIFF_MIN_SLOPE_RATIO` times faster than the spectrum just below it.

    ``cliff["slope_below_db_per_khz"]`` is the fall of the least-squares line
    through the envelope 2-5 kHz below the edge (dB/kHz, positive when falling;
    a rising pass band counts as 0).  On a flat pass band the cliff's fall is
    its average slope from -6 dB to the bottom (``slope_db_per_khz``; the
    closed envelope of a steadily falling spectrum has steps that make single
    kilohertz look steeper than the fall is), and its steepest kilohertz at the
    edge must reach :data:`EDGE_MIN_STEEPNESS_FRACTION` of it; on a pass band tilted flat
    (``tilt_db_per_khz > 0``) only the steepest kilohertz counts, and it must also reach
    :data:`STEEPEST_MIN_DB_PER_KHZ`.  Above the cliff's bottom the floor must be
    a floor: the spectrum falls there (``slope_after_db_per_khz``, least squares
    over :data:`AFTER_WINDOW_HZ`) at most :data:`CLIFF_MAX_AFTER_RATIO` times as
    fast as the cliff.  A natural roll-off that merely runs into the noise floor,
    or the knee of a gentle low-pass, fails this, however deep it gets.
    """
    below = max(0.0, float(cliff.get("slope_below_db_per_khz", 0.0)))
    if cliff.get("tilt_db_per_khz", 0.0) > 0.0:
        fall = cliff["steepest_db_per_khz"]
        if fall < STEEPEST_MIN_DB_PER_KHZ:
            return False
    else:
        fall = cliff["slope_db_per_khz"]
        # (a kilohertz cannot fall more than the cliff's whole -6 dB-to-bottom height)
        height_db = min(cliff["drop_db"] - 3.0, 40.0) - 6.0
        span_khz = STEEPEST_SPAN_HZ / 1000.0
        if cliff["steepest_db_per_khz"] < EDGE_MIN_STEEPNESS_FRACTION * min(fall, height_db / span_khz):
            return False
    after = float(cliff.get("slope_after_db_per_khz", 0.0))
    return fall >= CLIFF_MIN_SLOPE_RATIO * below and after <= CLIFF_MAX_AFTER_RATIO * fall


def _crossing(env_db, start, stop, level, bin_hz):
    """First frequency at or above bin ``start`` where ``env_db`` falls below ``level`` (linear interpolation)."""
    seg = env_db[start:stop]
    below = np.nonzero(seg < level)[0]
    if below.size == 0:
        return None
    k = int(below[0]) + start
    if k == 0:
        return 0.0
    a, b = env_db[k - 1], env_db[k]
    frac = 0.0 if a == b else (a - level) / (a - b)
    return (k - 1 + float(np.clip(frac, 0.0, 1.0))) * bin_hz


def match_rate(edge_hz: float, candidates, stop_start_hz: float | None = None,
               leaks=None, fits_out: dict | None = None) -> tuple[int | None, float]:
    """The candidate rate whose Nyquist best explains an edge, and the fit score (0..1).

    Without ``stop_start_hz`` only the -6 dB point is read (:data:`EDGE_RATIO_RANGE`, nearest
    :data:`EDGE_RATIO_TYPICAL` wins).  With it (where the fall reaches the stop band, see
    :data:`STOP_RATIO_RANGE`) a candidate must explain both: either its stop band begins at the old
    Nyquist (any pass band), the fit being how near :data:`STOP_RATIO_TYPICAL`; and/or the fall is a leaky
    design's centred on the old Nyquist (:data:`LEAKY_MIN_EDGE_RATIO`, :data:`LEAKY_STOP_RATIO_RANGE`),
    the fit being how near 1.0 its -6 dB point lies, and ``leaks(rate)`` (when given) confirms images
    just above the old Nyquist; the better fit counts.

    ``fits_out`` (a dict, when given) receives every candidate's fit: where another rate explains the cliff
    nearly as well, the verdict's confidence falls (:func:`rival_fit`).
    """
    fit_of = {}
    best, score = None, 0.0
    for r in candidates:
        ratio = edge_hz / (r / 2.0)
        if not EDGE_RATIO_RANGE[0] <= ratio <= EDGE_RATIO_RANGE[1]:
            continue
        if stop_start_hz is None:
            s = max(0.0, 1.0 - abs(ratio - EDGE_RATIO_TYPICAL) / 0.15)
        else:
            stop = stop_start_hz / (r / 2.0)
            fits = []
            if STOP_RATIO_RANGE[0] <= stop <= STOP_RATIO_RANGE[1]:
                fits.append(1.0 - abs(stop - STOP_RATIO_TYPICAL) / 0.1)
            centred = abs(ratio - 1.0) <= CENTRED_EDGE_TOLERANCE and stop <= CENTRED_MAX_STOP_RATIO
            if (ratio >= LEAKY_MIN_EDGE_RATIO and LEAKY_STOP_RATIO_RANGE[0] <= stop <= LEAKY_STOP_RATIO_RANGE[1]
                    and (centred or leaks is None or leaks(r))):
                fits.append(1.0 - abs(ratio - 1.0) / 0.1)
            if centred and STOP_RATIO_RANGE[0] <= stop <= CENTRED_MAX_STOP_RATIO:
                # a design centred on the old Nyquist explains both readings within their tolerances at once:
                # it outranks a reading of the stop band alone for a higher rate (see CENTRED_FIT)
                fits.append(CENTRED_FIT)
            if not fits:
                continue
            s = max(0.05, max(fits))
        fit_of[r] = s
        if best is None or s > score:
            best, score = r, s
    if fits_out is not None:
        fits_out.update(fit_of)
    return best, score


def lower_bound_rate(fits: dict, rate, stop_start_hz, slack_hz: float = SMOOTH_HZ):
    """The lowest rate below ``rate`` among those :func:`match_rate` fitted (``fits``) whose Nyquist the stop band
    has begun by (``stop_start_hz`` within ``slack_hz``, the envelope's smoothing, above it, and no lower than
    :data:`STOP_RATIO_RANGE` allows), or None.

    A converter that rejects its images begins its stop band at the old Nyquist: such a lower rate explains the
    cliff as every such converter makes it, while ``rate`` (the next standard rate up: 24 for 22.05, 48 for 44.1, 96
    for 88.2 kHz, Nyquist frequencies 9 % apart) needs a converter that stops 8 % short of its own Nyquist.  On a
    programme that ends below the old Nyquist the two readings tie, and the content only shows that the source rate
    was at least the lower one: the lower bound is what the verdict can say."""
    if rate is None or stop_start_hz is None:
        return None
    low = [r for r in fits if r < rate and STOP_RATIO_RANGE[0] * r / 2.0 <= stop_start_hz <= r / 2.0 + slack_hz]
    return min(low) if low else None


def rival_fit(fits: dict, rate) -> float:
    """The best fit (:func:`match_rate`) of a candidate other than ``rate`` that the edge and stop band also
    explain: 0 when none.  The confidence of a cliff's verdict counts its fit less this (house choice): where the
    next standard rate explains the same cliff about as well (22.05 and 24 kHz read 0.92 of each other's Nyquist,
    so a cliff on a programme that ends below the old Nyquist fits both), the reading names a rate on weak evidence."""
    return max([f for r, f in fits.items() if r != rate], default=0.0)


def butterworth_db(f_hz, corner_hz: float, order: float, fs: float, passes: int = 1):
    """Attenuation (dB, positive) of a digital Butterworth low-pass of ``order`` with its -3 dB corner at
    ``corner_hz`` in a file of rate ``fs`` (bilinear transform), run ``passes`` times (2: zero-phase)."""
    w = np.tan(np.pi * np.minimum(np.asarray(f_hz, dtype=float), 0.49999 * fs) / fs) / math.tan(math.pi * corner_hz / fs)
    return 10.0 * passes * np.log10(1.0 + w ** (2.0 * order))


def butterworth_linearity(f20_hz: float, f30_hz: float, f40_hz: float, fs: float) -> float:
    """Span of ``u = log10(tan(pi f / fs))`` from the -30 to the -40 dB point over its span from the -20 to the
    -30 dB point (see :data:`BUTTERWORTH_MIN_LINEARITY`)."""
    u = [math.log10(math.tan(math.pi * min(f, 0.49999 * fs) / fs)) for f in (f20_hz, f30_hz, f40_hz)]
    return (u[2] - u[1]) / max(u[1] - u[0], 1e-12)


def fit_butterworth(f_hz, atten_db, fs: float, max_order: float = BUTTERWORTH_MAX_ORDER):
    """Least-squares fit of :func:`butterworth_db` (one pass or zero-phase, order 1 to ``max_order`` in
    half steps, corner on a 10 Hz grid) to a measured fall ``atten_db`` (dB below the pass level) at
    ``f_hz``; ``(rms_db, passes, order, corner_hz)``.

    Coarse to fine: every design on a 100 Hz corner grid first, then the :data:`FIT_REFINE` best designs
    (order and passes) on the 10 Hz grid within :data:`FIT_REFINE_HZ` of their coarse best corner.  For a
    given order and number of passes the misfit is a smooth function of the corner with one minimum (a
    Butterworth's attenuation rises monotonically with the corner's distance in ``log tan``), so the
    fine search finds the same grid point as a search of the whole 10 Hz grid (checked on the tuning
    corpus: the same order, passes and corner in every call) at about a tenth of the cost."""
    f = np.asarray(f_hz, dtype=float)
    a = np.asarray(atten_db, dtype=float)
    corners = np.arange(max(10.0, f[0] - 1500.0), f[-1], 10.0)
    if corners.size == 0:
        return (math.inf, 1, 1.0, float(max(10.0, f[0] - 1500.0)))
    lt = np.log10(np.maximum(np.tan(np.pi * np.minimum(f, 0.49999 * fs) / fs), 1e-300))
    orders = np.arange(1.0, max_order + 0.25, 0.5)

    def misfit(order, idx):
        """RMS misfit (rows: passes 1 and 2; columns: the corners ``corners[idx]``) of one order."""
        lw = np.maximum(lt[None, :] - np.log10(np.tan(np.pi * corners[idx] / fs))[:, None], -12.0)
        base = np.log10(1.0 + 10.0 ** np.minimum(2.0 * order * lw, 300.0))
        return np.stack([np.sqrt(np.mean((10.0 * p * base - a[None, :]) ** 2, axis=1)) for p in (1, 2)])

    step = int(round(FIT_COARSE_HZ / 10.0))
    coarse = np.arange(0, corners.size, step)
    ranked = []
    for order in orders:
        r = misfit(order, coarse)
        for pi, passes in enumerate((1, 2)):
            i = int(np.argmin(r[pi]))
            ranked.append((float(r[pi, i]), passes, float(order), int(coarse[i])))
    ranked.sort()
    best = (math.inf, 1, 1.0, float(corners[0]))
    reach = int(round(FIT_REFINE_HZ / 10.0))
    for _rms, passes, order, c0 in ranked[:FIT_REFINE]:
        idx = np.arange(max(0, c0 - reach), min(corners.size, c0 + reach + 1))
        r = misfit(order, idx)[passes - 1]
        i = int(np.argmin(r))
        if r[i] < best[0]:
            best = (float(r[i]), passes, float(order), float(corners[idx[i]]))
    return best


def butterworth_explains(env_db, bin_hz: float, scale: int, fs: float, cliff: dict):
    """Does a Butterworth low-pass explain a cliff's fall (:data:`BUTTERWORTH_MIN_LINEARITY`,
    :data:`BUTTERWORTH_MAX_FIT_RMS_DB`)?  ``cliff`` as :func:`find_cliff` returns it on the envelope
    read at frequency scale ``scale`` (bins ``bin_hz * scale`` wide); frequencies here are the file's own.
    Returns ``(explained, details)``; a fall less than 43 dB deep cannot be read (False)."""
    b = bin_hz * scale
    e = int(cliff["edge_bin"])
    pa, pb = max(0, e + _bins(PASS_WINDOW_HZ[0], b)), max(1, e + _bins(PASS_WINDOW_HZ[1], b))
    work = env_db
    tilt = float(cliff.get("tilt_db_per_khz", 0.0))
    if tilt > 0.0:
        ref_khz = 0.5 * (pa + pb - 1) * b / 1000.0
        work = env_db + tilt * np.maximum(np.arange(env_db.size) * b / 1000.0 - ref_khz, 0.0)
    depth = min(float(cliff["drop_db"]) - 3.0, 60.0)
    if depth < 40.0 or cliff.get("f1_hz") is None:
        return False, None
    k0 = max(0, int((cliff["f1_hz"] - 300.0 * scale) / b))
    k = np.arange(k0, min(env_db.size, int(0.99 * fs / 2.0 / bin_hz)))
    atten = float(cliff["pass_db"]) - work[k]
    deep = np.nonzero(atten >= depth)[0]
    if deep.size == 0:
        return False, None
    k, atten = k[:deep[0] + 1], np.maximum(atten[:deep[0] + 1], 0.0)
    f = k * bin_hz                       # the file's own frequencies (bin k at scale s is s times lower)
    pts = []
    for d in (20.0, 30.0, 40.0):
        j = int(np.nonzero(atten >= d)[0][0])
        if j == 0:
            return False, None
        frac = (d - atten[j - 1]) / max(atten[j] - atten[j - 1], 1e-9)
        pts.append(f[j - 1] + frac * (f[j] - f[j - 1]))
    lin = butterworth_linearity(*pts, fs)
    if lin < BUTTERWORTH_MIN_LINEARITY:
        # the fall accelerates as no Butterworth's does: the fit cannot change the answer
        return False, {"linearity": round(lin, 3)}
    rms, passes, order, corner = fit_butterworth(f, atten, fs)
    details = {"linearity": round(lin, 3), "fit_rms_db": round(rms, 2), "passes": passes, "order": order,
               "corner_hz": corner}
    return (lin >= BUTTERWORTH_MIN_LINEARITY and rms <= BUTTERWORTH_MAX_FIT_RMS_DB), details


def fine_structure_db(power, bin_hz: float) -> np.ndarray:
    """The level in dB less its running mean over :data:`MIRROR_DETREND_HZ` (the spectrum's fine structure)."""
    level = _db(power)
    return level - uniform_filter1d(level, max(3, int(round(MIRROR_DETREND_HZ / bin_hz)) | 1), mode="nearest")


def mirror_correlation(fine, bin_hz: float, rate_hz: float, band, limit_bin: int):
    """Correlation of ``fine`` over ``f`` in ``band`` (fractions of ``rate_hz / 2``) with ``fine(rate_hz - f)``
    (linear interpolation between bins), the mirrored bins kept below ``limit_bin``; ``(correlation, k, m0, frac)``
    or None when fewer than 20 bins remain."""
    h = rate_hz / 2.0
    lo = max(band[0] * h, rate_hz - (limit_bin - 2) * bin_hz)
    k = np.arange(int(math.ceil(lo / bin_hz)), int(band[1] * h / bin_hz))
    if k.size < 20:
        return None
    m = (rate_hz - k * bin_hz) / bin_hz
    m0 = np.floor(m).astype(np.int64)
    frac = m - m0
    a = fine[k]
    b = fine[m0] * (1.0 - frac) + fine[m0 + 1] * frac
    sa, sb = float(np.std(a)), float(np.std(b))
    if sa <= 0.0 or sb <= 0.0:
        return None
    return float(np.mean((a - a.mean()) * (b - b.mean())) / (sa * sb)), k, m0, frac


def mirror_correlations(power, bin_hz: float, fs: float, floor_db: float) -> dict:
    """``{rate: (correlation, broadband)}`` of the mirror test for every standard rate below ``fs``.

    The fine structure ``d`` of the spectrum (:func:`fine_structure_db`) over ``f`` in
    :data:`MIRROR_BAND_RATIO` of a candidate's Nyquist ``h`` (and below the file's Nyquist once
    mirrored) is correlated with ``d(2h - f)``.  An upsampler that lets images through leaves
    ``|Y(2h - f)| = |H(2h - f)| |X(f)|``: the same fine structure, so a correlation near 1;
    independent content above and below ``h`` gives about 0.  ``broadband``: the median bin below
    ``h`` lies within :data:`BROADBAND_GAP_DB` of the closed envelope.  Candidates with less than a
    fifth of a band to compare, whose bands lie at the format's floor, or whose band below ``h`` lies more
    than :data:`TESTABLE_MAX_BELOW_MAIN_DB` under the programme's main band (median of 1-10 kHz), are
    left out.
    """
    level = _db(power)
    fine = fine_structure_db(power, bin_hz)
    limit = min(level.size, _bins(0.99 * fs / 2.0, bin_hz))
    env = None
    main = None
    out = {}
    for r in CANDIDATE_RATES_HZ:
        if r >= fs:
            continue
        got = mirror_correlation(fine, bin_hz, r, MIRROR_BAND_RATIO, limit)
        if got is None or got[1].size < 0.2 * (r / 2.0) / bin_hz:
            continue
        c, k, m0, frac = got
        edges = np.linspace(MIRROR_BAND_RATIO[0], MIRROR_BAND_RATIO[1], MIRROR_SUBBANDS + 1)
        parts = [mirror_correlation(fine, bin_hz, r, (lo, hi), limit) for lo, hi in zip(edges[:-1], edges[1:])]
        parts = [p[0] for p in parts if p is not None]
        if parts:
            c = min(c, float(np.median(parts)))
        up_level = level[m0] * (1.0 - frac) + level[m0 + 1] * frac
        if float(np.median(up_level)) < floor_db + ABOVE_FLOOR_DB or float(np.median(level[k])) < floor_db + ABOVE_FLOOR_DB:
            continue
        if main is None:
            main = float(np.median(level[_bins(1000.0, bin_hz):_bins(10000.0, bin_hz) + 1]))
        if float(np.median(level[k])) < main - TESTABLE_MAX_BELOW_MAIN_DB:
            # only programme content counts: a multi-stage converter's last stage mirrors the floor left by
            # the stages before it (a 16 kHz source made 192 kHz by way of 96 kHz mirrors its floor about 48 kHz)
            continue
        if env is None:
            env = envelope_db(power, bin_hz)
        broadband = float(np.median(level[k] - env[k])) >= -BROADBAND_GAP_DB
        out[r] = (round(c, 3), broadband)
    return out


def mirror_rate(corr: dict, threshold: float, broadband_only: bool = False):
    """The lowest rate of :func:`mirror_correlations` whose correlation reaches ``threshold`` (images
    copy the spectrum about every multiple of the old Nyquist, so the lowest such rate is the source)."""
    ok = [r for r, (c, bb) in corr.items() if c >= threshold and (bb or not broadband_only)]
    return min(ok) if ok else None


def stop_band_content(fe, floor_db: float, rate_hz: float):
    """What lies above a candidate's Nyquist ``h`` frame by frame (the front end's level histogram, channel mean):
    ``(depth_db, above_floor_db)``, the loud frames' pass level (90th percentile over frames, median over
    0.6-0.8 h) less the median frame's level over 1.06-1.3 h (1.03 h up to 0.97 of the file's Nyquist where
    that leaves too little), and that median-frame level over the format's floor.  None without a histogram
    or without room above ``h``.  See :data:`EARLY_EDGE_RATIO`."""
    if fe.p50_db is None or fe.p90_db is None:
        return None
    b = fe.bin_hz
    h = rate_hz / 2.0
    top = _bins(0.97 * fe.sample_rate_hz / 2.0, b)
    a0, a1 = _bins(1.06 * h, b), min(top, _bins(1.3 * h, b))
    if a1 - a0 < 20:
        a0, a1 = _bins(1.03 * h, b), top
    if a1 - a0 < 20:
        return None
    above = float(np.median(fe.p50_db[a0:a1]))
    loud = float(np.median(fe.p90_db[_bins(0.6 * h, b):_bins(0.8 * h, b)]))
    return loud - above, above - floor_db


#: a coder's band end is gated frame by frame: at low bit rates a transform or sub-band coder codes its bands from
#: the bottom up out of each frame's bit budget and leaves the top bands under its low-pass empty in the frames the
#: budget does not reach, while a resampler's pass band passes whatever the programme holds there in every frame.
#: Read on the front end's level histogram (channel mean, per bin): the spread between the median and the 10th
#: percentile frame, median over the bins just under the edge (GATED_TOP_WINDOW, fractions of the edge), less the
#: same spread over the reference band (GATED_REF_WINDOW, where the coder codes every frame).  Own reasoning: a
#: stationary programme's per-bin spread is about 8 dB (one Hann-windowed bin's power is chi-square with two
#: degrees of freedom: p50 and p10 lie 1.6 and 9.8 dB under the mean) and the programme's own level changes move
#: both windows alike; a band emptied in at least one frame in ten pulls the 10th percentile down by most of the
#: band's level, 30-60 dB.  GATED_MIN_EXTRA_SPREAD_DB: converted-up tuning positives read up to 14 dB (held notes
#: over short noise bursts, whose top octave is itself gated by the programme: ``tl_*``, seed 1000; speech up to
#: 8 dB), the tuning coder band ends (``cbe_*``) -3 to 24 dB: the line keeps 6 dB over the largest positive, so
#: only clearly gated band ends are judged (own reasoning; figures in DEVELOPERS.md)
GATED_TOP_WINDOW = (0.88, 0.97)
GATED_REF_WINDOW = (0.5, 0.7)
GATED_MIN_EXTRA_SPREAD_DB = 20.0
#: ... and only where the reference band's 10th-percentile frame stands this far above the format's floor (own
#: reasoning: the quiet frames carry programme, so an empty top band in them is the coder's choice, not a fade
#: into the floor that reaches the quieter top band first)
GATED_REF_ABOVE_FLOOR_DB = 20.0


def frame_gated_spread_db(fe, edge_hz: float, floor_db: float):
    """The extra frame-to-frame spread (dB) just under a band's edge ``edge_hz`` over its reference band (see
    :data:`GATED_MIN_EXTRA_SPREAD_DB`), or None without the front end's level histogram, with too few bins, or
    where the reference band's quiet frames lie within :data:`GATED_REF_ABOVE_FLOOR_DB` of the format's floor."""
    if fe.p10_db is None or fe.p50_db is None or not edge_hz:
        return None
    b = fe.bin_hz
    ta, tz = _bins(GATED_TOP_WINDOW[0] * edge_hz, b), _bins(GATED_TOP_WINDOW[1] * edge_hz, b)
    ra, rz = _bins(GATED_REF_WINDOW[0] * edge_hz, b), _bins(GATED_REF_WINDOW[1] * edge_hz, b)
    if tz - ta < 5 or rz - ra < 5 or tz > len(fe.p10_db):
        return None
    if float(np.median(fe.p10_db[ra:rz])) < floor_db + GATED_REF_ABOVE_FLOOR_DB:
        return None
    top = float(np.median(fe.p50_db[ta:tz] - fe.p10_db[ta:tz]))
    ref = float(np.median(fe.p50_db[ra:rz] - fe.p10_db[ra:rz]))
    return top - ref


def _frame_gated(fe, info, out) -> bool:
    """True when a cliff verdict's band end is gated frame by frame as a coder's is (:func:`frame_gated_spread_db`
    at least :data:`GATED_MIN_EXTRA_SPREAD_DB`): a band limit, not a conversion.  Rewrites ``out`` as a band limit
    then."""
    if out.upsampled_from_hz is None or (out.evidence or "cliff") != "cliff" or out.brick:
        return False
    floor = format_floor_db(info.bit_depth, info.is_float, fe.frame_length)
    edge = out.effective_bandwidth_hz
    got = frame_gated_spread_db(fe, edge, floor)
    if got is None or got < GATED_MIN_EXTRA_SPREAD_DB:
        return False
    out.upsampled_from_hz = out.confidence = out.edge_ratio = None
    out.band_limit_hz = edge
    out.note = (f"band-limited at {edge / 1000:.1f} kHz by a lossy coder: the band under the edge is empty in many "
                f"frames (its quiet frames {got:.0f} dB further down than those of the band at half that frequency), "
                "as a coder leaves the bands its bit budget does not reach, where a converter passes the programme "
                "in every frame")
    return True


def _programme_above(fe, info, out) -> bool:
    """True when a cliff verdict has the programme going on above the old Nyquist in every frame
    (:func:`stop_band_content`) where no converter of its kind leaves anything but its floor: a low-pass, not a
    converter.  Two kinds: an early edge (below :data:`EARLY_EDGE_RATIO` of the source Nyquist, see there), and a
    brick wall at a standard Nyquist (:data:`BRICK_WALL_RATIO_TOLERANCE`), which names a rate only as an FFT
    resampler's wall: that converter zeroes every bin above the old Nyquist, so above it lies the format's floor
    (within :data:`STOP_CONTENT_MAX_ABOVE_FLOOR_DB`), while a transform coder's low-pass, which zeroes the lines
    above its cut-off frame by frame, leaves the leakage of its synthesis window there, the programme a fixed
    60-100 dB down in every frame.  Rewrites ``out`` as a band limit then."""
    if out.upsampled_from_hz is None or (out.evidence or "cliff") != "cliff" or out.edge_ratio is None:
        return False
    # (a lower bound, :func:`lower_bound_rate`, answers to the same reading: the next rate up read its edge early)
    early = ((out.edge_ratio < EARLY_EDGE_RATIO or out.lower_bound_of) and out.stop_ratio is not None
             and out.stop_ratio <= EARLY_MAX_STOP_RATIO)
    if not early and not out.brick:
        return False
    floor = format_floor_db(info.bit_depth, info.is_float, fe.frame_length)
    got = stop_band_content(fe, floor, out.upsampled_from_hz)
    if got is None or got[1] <= STOP_CONTENT_MAX_ABOVE_FLOOR_DB or (early and got[0] >= EARLY_MIN_DEPTH_DB):
        return False
    rate, depth = out.upsampled_from_hz, got[0]
    edge = out.effective_bandwidth_hz
    out.upsampled_from_hz = out.confidence = out.edge_ratio = None
    out.band_limit_hz = edge
    if early:
        out.note = (f"band-limited at {edge / 1000:.1f} kHz by a low-pass: the cliff lies at "
                    f"{edge / (rate / 2.0):.2f} of {rate / 2000:g} kHz, but above {rate / 2000:g} kHz the programme "
                    f"goes on in every frame, only {depth:.0f} dB below its loud passages; a converter whose pass "
                    "band ends that early leaves nothing there but its noise floor")
    else:
        out.note = (f"band-limited at {edge / 1000:.1f} kHz by a brick wall, as a lossy coder's low-pass cuts: above "
                    f"it the programme goes on in every frame, {depth:.0f} dB below its loud passages and "
                    f"{got[1]:.0f} dB over the format's noise floor, where a converter that zeroes every bin above "
                    f"{rate / 2000:g} kHz leaves only the floor")
    return True


def assess(fe, info) -> BandwidthResult:
    """Effective bandwidth and upsampling verdict from a :class:`FrontEndResult`.

    The channel-summed spectrum is judged first; with more than one channel each
    channel is judged on its own too (:func:`assess_power` on its own long-term
    spectrum), so a master with one channel converted up and the others native is
    found: ``upsampled_channels`` lists the channels that read as upsampled, and the
    file-level verdict takes their rate when the sum hides it (not where the sum reads the same
    fall and judged it a band limit: :func:`same_band_limit`).

    When the whole file does not read as upsampled, its time segments are judged
    (:func:`assess_segments`), so an upsampled part of a file (a spliced intro) is
    found even where the whole file's spectrum hides it; ``upsampled_where_s`` is then
    those segments' time ranges.  When every judged segment reads as upsampled from
    one rate, so does the file (the file-level and per-segment verdicts agree).
    """
    fs = float(fe.sample_rate_hz)
    out = assess_power(fe.ltas_total, fe.bin_hz, fs, fe.frame_length, info, frames=fe.frames)
    labels = list(getattr(info, "channel_layout", None) or [])
    n_ch = int(fe.ltas.shape[0])
    if len(labels) != n_ch:
        labels = [f"ch{i + 1}" for i in range(n_ch)]
    mirrored = None
    if fe.frames and np.any(fe.ltas_total > 0):
        floor = format_floor_db(info.bit_depth, info.is_float, fe.frame_length)
        corr = mirror_correlations(fe.ltas_total, fe.bin_hz, fs, floor)
        out.mirror_rate_hz = mirror_rate(corr, MIRROR_MIN_CORRELATION)
        alone = mirror_rate(corr, MIRROR_ALONE_CORRELATION, broadband_only=True)
        if alone is not None and out.upsampled_from_hz != alone:
            # images copy the spectrum bin for bin about the old Nyquist: exact where a cliff is a reading
            mirrored = alone
            c = corr[alone][0]
            out.upsampled_from_hz, out.confidence, out.evidence = int(alone), round(min(1.0, 0.5 + 0.5 * c), 2), "images"
            out.edge_ratio, out.band_limit_hz = None, None
            out.note = (f"converted up from {alone / 1000:g} kHz without a proper filter: the spectrum above "
                        f"{alone / 2000:g} kHz mirrors the content below it bin for bin (correlation {c:.2f})")
    claimed = out.upsampled_from_hz
    vetoed = claimed if (_programme_above(fe, info, out) or _frame_gated(fe, info, out)) else None
    # (a low-pass read as a lower bound is the low-pass the next rate up reads too: the channels and segments that
    # read that rate are cleared with it)
    vetoed_too = out.lower_bound_of if vetoed is not None else None
    per_channel = [out]
    if n_ch > 1 and fe.frames:
        # each channel on its own; the full analysis only where a quick look sees a drop at some candidate
        floor = format_floor_db(info.bit_depth, info.is_float, fe.frame_length)
        per_channel = []
        for c in range(n_ch):
            if drops_somewhere(fe.ltas[c], fe.bin_hz, fs, floor):
                per_channel.append(assess_power(fe.ltas[c], fe.bin_hz, fs, fe.frame_length, info, frames=fe.frames))
            else:
                quiet = BandwidthResult()
                quiet.settings = {"testable_hz": out.settings.get("testable_hz")}
                per_channel.append(quiet)

    def shows(c, rate):
        """Channel ``c`` has content just below ``rate``'s Nyquist (where a cliff could show)."""
        if n_ch == 1:
            return True
        floor = format_floor_db(info.bit_depth, info.is_float, fe.frame_length)
        env = envelope_db(fe.ltas[c], fe.bin_hz)
        return rate in testable_candidates(fs, env, fe.bin_hz, floor)[0]
    if mirrored is not None and n_ch > 1:
        # the channels that carry the mirror themselves
        floor = format_floor_db(info.bit_depth, info.is_float, fe.frame_length)
        for c in range(n_ch):
            cc = mirror_correlations(fe.ltas[c], fe.bin_hz, fs, floor).get(mirrored)
            per_channel[c].upsampled_from_hz = mirrored if cc and cc[0] >= MIRROR_MIN_CORRELATION else None
    if vetoed is not None:
        # the channels read the same low-pass on their own
        for r in per_channel:
            if r is not out and r.upsampled_from_hz in (vetoed, vetoed_too) and (r.evidence or "cliff") == "cliff":
                r.upsampled_from_hz = None
    for r in per_channel:
        if r is not out and same_band_limit(out, r):
            # the sum read the same fall and judged it a band limit (see there)
            r.upsampled_from_hz = None
    up_ch = [labels[c] for c, r in enumerate(per_channel) if r.upsampled_from_hz is not None]
    testable_any = bool(out.settings.get("testable_hz")) or any(r.settings.get("testable_hz") for r in per_channel)
    if out.upsampled_from_hz is None and up_ch:
        # the sum hides it (a native channel fills the band): the channels that show a cliff decide
        hits = [r for r in per_channel if r.upsampled_from_hz is not None]
        rates = [r.upsampled_from_hz for r in hits]
        rate = max(set(rates), key=rates.count)
        best = max((r for r in hits if r.upsampled_from_hz == rate), key=lambda r: r.confidence or 0.0)
        out.upsampled_from_hz, out.confidence = rate, best.confidence
        out.edge, out.depth_db, out.slope_db_per_khz = best.edge, best.depth_db, best.slope_db_per_khz
        out.band_limit_hz = None
        if (best.evidence or "cliff") == "cliff":
            out.evidence = best.evidence
        out.note = f"{', '.join(up_ch)}: " + (best.note or "")
    if out.upsampled_from_hz is not None and n_ch > 1 and not up_ch:
        # the sum shows the cliff, no channel alone does (each too quiet): every channel with content
        up_ch = [labels[c] for c in range(n_ch) if shows(c, out.upsampled_from_hz)]
    out.channels = up_ch if (testable_any or up_ch) else None
    segs = getattr(fe, "segment_ltas", None)
    if out.upsampled_from_hz is not None:
        # the whole file reads as upsampled: that is where
        dur = fe.segment_bounds_s[-1][1] if fe.segment_bounds_s else (fe.frame_positions - 1) * fe.hop / fe.sample_rate_hz
        out.where_s = [[0.0, round(float(dur), 3)]]
    elif segs is not None and len(segs):
        out.segments = assess_segments(fe, info)
        if vetoed is not None:
            for row in out.segments:
                if row["upsampled_from_hz"] in (vetoed, vetoed_too):
                    row["upsampled_from_hz"] = row["upsampled_confidence_fraction"] = None
        out.where_s = upsampled_ranges(out.segments)
        out.settings["segments"] = len(segs)
        judged = [s for s, n in zip(out.segments, fe.segment_frames) if n >= SEGMENT_MIN_FRAMES]
        rates = {s["upsampled_from_hz"] for s in judged}
        if judged and len(rates) == 1 and None not in rates:
            # every segment says the same source rate: so does the file
            rate = rates.pop()
            out.upsampled_from_hz = int(rate)
            out.confidence = min(s["upsampled_confidence_fraction"] for s in judged)
            out.band_limit_hz = None
            out.edge = "cliff"
            out.evidence = "segments"
            out.note = (f"every time segment ends in a converter cliff consistent with a "
                        f"{rate / 1000:g} kHz source")
            if out.channels is not None and not out.channels:
                out.channels = [labels[c] for c in range(n_ch) if shows(c, out.upsampled_from_hz)]
    return out


def assess_segments(fe, info) -> list:
    """The upsampling verdict of each time segment of the front end (see :func:`assess`).

    Only segments whose spectrum drops by at least :data:`CLIFF_MIN_DROP_DB` across
    some testable candidate's Nyquist (a quick check of two percentiles per
    candidate) get the full analysis.  Returns one dict per segment: ``start_s``, ``end_s``,
    ``upsampled_from_hz``, ``upsampled_confidence_fraction``, ``effective_bandwidth_hz``.
    """
    fs = float(fe.sample_rate_hz)
    floor = format_floor_db(info.bit_depth, info.is_float, fe.frame_length)
    out = []
    for (a, b), power, n in zip(fe.segment_bounds_s, fe.segment_ltas, fe.segment_frames):
        row = {"start_s": round(a, 3), "end_s": round(b, 3), "upsampled_from_hz": None,
               "upsampled_confidence_fraction": None, "effective_bandwidth_hz": None}
        out.append(row)
        if n < SEGMENT_MIN_FRAMES or not np.any(power > 0):
            continue
        if not drops_somewhere(power, fe.bin_hz, fs, floor):
            continue
        res = assess_power(power, fe.bin_hz, fs, fe.frame_length, info, frames=n)
        row.update(upsampled_from_hz=res.upsampled_from_hz, upsampled_confidence_fraction=res.confidence,
                   effective_bandwidth_hz=res.effective_bandwidth_hz)
    return out


def drops_somewhere(power, bin_hz: float, fs: float, floor_db: float) -> bool:
    """A quick look before the full analysis: does the spectrum fall by at least :data:`CLIFF_MIN_DROP_DB`
    across some testable candidate's Nyquist (median of 0.70-0.84 of it against the 90th percentile of a
    window above it)?  No converter cliff can be found where this is False."""
    env = envelope_db(power, bin_hz)
    testable, _u = testable_candidates(fs, env, bin_hz, floor_db)
    return _drop_at(env, bin_hz, min(len(env), _bins(0.99 * fs / 2.0, bin_hz)), testable)


def _drop_at(env, bin_hz: float, top: int, rates, small_ratio: bool = False) -> bool:
    """:func:`drops_somewhere` on an envelope, for the candidate ``rates``; ``small_ratio``: where the window above
    a candidate's Nyquist finds no room below ``top``, read it from the old Nyquist up (the low-rate passes of
    :func:`assess_power`: a 22.05 kHz source in a 24 kHz file)."""
    for r in rates:
        nyq_r = r / 2.0
        gap = min(POST_WINDOW_HZ[0], 0.25 * nyq_r)
        k0, k1 = _bins(0.70 * nyq_r, bin_hz), _bins(0.84 * nyq_r, bin_hz)
        k2 = _bins(nyq_r + gap, bin_hz)
        k3 = min(top, _bins(nyq_r + gap + min(POST_WINDOW_HZ[1] - POST_WINDOW_HZ[0], 0.5 * nyq_r), bin_hz))
        if k3 - k2 < 10 and small_ratio:
            # a small ratio (22.05 kHz in a 24 kHz file, 44.1 in 48): no room above the gap, so the stop band is read
            # from the old Nyquist up, where a converter that rejects its images has reached it
            k2, k3 = _bins(nyq_r, bin_hz), top
        if k3 - k2 < 10 or k1 <= k0:
            continue
        if _median_minus_p90(env[k0:k1], env[k2:k3]) >= CLIFF_MIN_DROP_DB:
            return True
    return False


def _median_minus_p90(below, above) -> float:
    """``float(np.median(below)) - float(np.percentile(above, 90))`` for 1-D float64 slices, the same bits by
    numpy's own rules (the middle one or the mean of the middle two; the 90th percentile's linear
    interpolation between its order statistics at floor and floor + 1 of 0.9 (n - 1), from the upper one
    where the weight is 0.5 or more) with one partition each and without numpy's per-call overhead
    (:func:`drops_somewhere` asks this of every candidate, channel and segment).  NaN goes to numpy."""
    n, m = below.size, above.size
    if n == 0 or m == 0 or np.isnan(below).any() or np.isnan(above).any():
        return float(np.median(below)) - float(np.percentile(above, 90))
    h = n // 2
    if n % 2:
        med = float(np.partition(below, h)[h])
    else:
        p = np.partition(below, (h - 1, h))
        med = float((p[h - 1] + p[h]) / 2.0)
    v = (m - 1) * 0.9
    i = int(math.floor(v))
    j = min(i + 1, m - 1)
    g = v - i
    q = np.partition(above, (i, j)) if j != i else np.partition(above, i)
    a, b = float(q[i]), float(q[j])
    d = b - a
    p90 = b - d * (1 - g) if g >= 0.5 else a + d * g
    return med - p90


def upsampled_ranges(segments) -> list:
    """``[[start_s, end_s], ...]`` of consecutive segments read as upsampled (merged)."""
    ranges = []
    for row in segments:
        if row.get("upsampled_from_hz") is None:
            continue
        if ranges and abs(ranges[-1][1] - row["start_s"]) < 1e-6:
            ranges[-1][1] = row["end_s"]
        else:
            ranges.append([row["start_s"], row["end_s"]])
    return ranges


def shape_ratio(cliff: dict, scale: int = 1) -> float:
    """Span of a cliff's fall from -20 to -40 dB over its span from -6 to -20 dB (0 when unreadable);
    see :data:`CONVERTER_MAX_SHAPE_RATIO`.  Spans shorter than one 10 Hz bin count as one bin; a fall
    narrower than :data:`SHAPE_MIN_SPAN_HZ` of the file's own frequencies is not read (0): ``cliff`` as read at
    frequency ``scale`` (its frequencies ``scale`` times the file's), where the envelope's closing and smoothing,
    set in the file's own hertz, are ``scale`` times wider in the cliff's terms."""
    f6, f20, f40 = cliff.get("edge_hz"), cliff.get("f20_hz"), cliff.get("f40_hz")
    if f6 is None or f20 is None or f40 is None or (f40 - f6) / scale < SHAPE_MIN_SPAN_HZ:
        return 0.0
    return max(f40 - f20, 10.0) / max(f20 - f6, 10.0)


#: the shape test (CONVERTER_MAX_SHAPE_RATIO) tells a converter's fall from a Butterworth's; it is read only where a
#: Butterworth could make the fall at all.  The steepest one the fit allows (order BUTTERWORTH_MAX_ORDER, zero-phase)
#: has ``20 log10(1 + w**(2N))`` dB of attenuation, ``w = tan(pi f / fs) / tan(pi fc / fs)``, so from its -6 dB point
#: to its -40 dB point ``w`` grows by exactly ``(99 / (10**0.3 - 1))**(1 / (2N))`` (1.211 for N = 12), whatever its
#: corner (analytic).  A fall from -6 to -40 dB narrower than that span at its own -6 dB point in the file is steeper
#: than any Butterworth the fit considers, and the envelope's closing and smoothing only widen a fall, so its shape
#: says nothing about a Butterworth (own reasoning); the shape test is then skipped for a fall that ends at the old
#: Nyquist as a very-high-quality converter's does (:func:`ends_at_nyquist`), since elliptic and Chebyshev
#: low-passes are that steep too and the shape test is what turns them away elsewhere.  In a 44.1 or 48 kHz file next to its Nyquist the span is
#: 0.37-0.68 kHz at 20 kHz, under SHAPE_MIN_SPAN_HZ, so nothing changes there; in a 176.4 kHz file at 42 kHz it is
#: 5.4 kHz, while a very-high-quality converter from 88.2 kHz falls from -6 to -40 dB within about 0.9 kHz: its
#: shape ratio (wider than SHAPE_MIN_SPAN_HZ, so read) depends on how the design approaches its stop band, 0.7-0.85
#: for the tuning set's Kaiser designs, near 1 for designs whose fall runs straight in dB down to the floor
BUTTERWORTH_SPAN_RATIO = (99.0 / (10.0 ** 0.3 - 1.0)) ** (1.0 / (2.0 * BUTTERWORTH_MAX_ORDER))


def butterworth_min_span_hz(edge_hz: float, fs: float) -> float:
    """The narrowest fall from -6 to -40 dB (Hz) a Butterworth low-pass of order :data:`BUTTERWORTH_MAX_ORDER`, run
    forwards and backwards (bilinear transform), makes with its -6 dB point at ``edge_hz`` in a file of rate ``fs``
    (see :data:`BUTTERWORTH_SPAN_RATIO`)."""
    x = math.tan(math.pi * min(edge_hz, 0.49999 * fs) / fs) * BUTTERWORTH_SPAN_RATIO
    return fs / math.pi * math.atan(x) - edge_hz


def ends_at_nyquist(cliff: dict, rate_hz: float) -> bool:
    """True when a cliff's -6 dB point lies at :data:`STEEP_MIN_EDGE_RATIO` of ``rate_hz``'s Nyquist or above and its
    stop band begins at :data:`STEEP_MIN_STOP_RATIO` of it or above (frequencies on the scale of ``rate_hz``): where
    a very-high-quality converter puts a narrow fall.  Only such a fall skips the shape test where no Butterworth
    could make it (:func:`butterworth_could_fall`): an elliptic or Chebyshev low-pass is as steep as that, and its
    fall slows towards its stop band (shape ratios of 1.5-2.1 for an 8th-order elliptic at 17 kHz in a 96 kHz
    file, tuning set), but it sits anywhere, and at 0.80 of 22.05 kHz there (own reasoning)."""
    stop = cliff.get("stop_start_hz")
    nyq = rate_hz / 2.0
    return cliff["edge_hz"] >= STEEP_MIN_EDGE_RATIO * nyq and stop is not None and stop >= STEEP_MIN_STOP_RATIO * nyq


def butterworth_could_fall(cliff: dict, scale: int, fs: float) -> bool:
    """False when a cliff (read at frequency ``scale``) falls from -6 to -40 dB faster than any Butterworth of
    the fit's orders can (:func:`butterworth_min_span_hz`); then its shape ratio is not a Butterworth test."""
    f6, f40 = cliff.get("edge_hz"), cliff.get("f40_hz")
    if f6 is None or f40 is None:
        return True
    return (f40 - f6) / scale >= butterworth_min_span_hz(f6 / scale, fs)


def scale_for(rate_hz: float) -> int:
    """Frequency scale at which a candidate's cliff is searched (see :func:`assess_power`): 1 for
    sources of 24 kHz and up, 2 for 16 and 22.05 kHz, 4 for 8 and 11.025 kHz."""
    nyq = rate_hz / 2.0
    return 1 if nyq >= 11500.0 else 2 if nyq >= 7500.0 else 4


def step_level_db(power, bin_hz: float) -> np.ndarray:
    """The level (dB) of a power spectrum, median over :data:`STEP_MEDIAN_HZ`: the programme's noise-like body,
    without single partials (the closed envelope would turn the partials of a slow transition into steps)."""
    return median_filter(_db(power), max(3, _bins(STEP_MEDIAN_HZ, bin_hz) | 1), mode="nearest")


def coder_steps(env_db, bin_hz: float, edge_hz: float, stop_start_hz: float, pass_db: float, stop_db: float,
                fs: float = 44100.0):
    """The first flat step (``(start_hz, level_db)``) in a cliff's fall from ``edge_hz`` (the cliff's -1 dB point) to
    the start of its stop band ``stop_start_hz``, or None (see :data:`STEP_MIN_WIDTH_RATIO`).  ``env_db`` is a level
    in dB (:func:`step_level_db`; bins ``bin_hz`` wide, the file's own frequencies) of a file of rate ``fs``;
    ``pass_db`` and ``stop_db`` are the pass and stop levels read on it."""
    w = max(2, _bins(STEP_MIN_WIDTH_RATIO * fs, bin_hz))
    k0, k1 = _bins(edge_hz, bin_hz), min(len(env_db), _bins(stop_start_hz, bin_hz))
    if k1 - k0 < w + 1 or k0 < w or k1 + w > len(env_db):
        return None
    win = np.lib.stride_tricks.sliding_window_view(env_db[k0:k1], w)
    mid = np.median(win, axis=1)
    i = np.arange(win.shape[0]) + k0
    # flanked by drops: it falls STEP_EDGE_DB within the step's width into the step and again out of it
    into = env_db[i - w] - env_db[i]
    out_of = env_db[i + w - 1] - env_db[np.minimum(i + 2 * w - 1, len(env_db) - 1)]
    flat = ((win.max(axis=1) - win.min(axis=1) <= STEP_FLAT_DB) & (mid <= pass_db - STEP_BELOW_PASS_DB)
            & (mid >= stop_db + STEP_ABOVE_STOP_DB) & (into >= STEP_EDGE_DB) & (out_of >= STEP_EDGE_DB))
    hit = np.nonzero(flat)[0]
    if hit.size == 0:
        return None
    return (k0 + int(hit[0])) * bin_hz, float(mid[hit[0]])


#: the floor under a sparse harmonic series: the spectrum morphologically *opened* over this width, Hz (running
#: min, then running max: the partials, narrower than the gaps between them, are cut away and the level between
#: them kept).  Own reasoning: the same width the envelope is closed over (CLOSING_HZ), so the partials of tones
#: with f0 up to about 1 kHz, which the closing joined into a false "broadband" envelope, are what is removed
FLOOR_OPENING_HZ = CLOSING_HZ
#: the floor between the partials must fall at least this far across the cliff (from below its edge to its stop
#: band), dB: the depth a converter cliff needs anyway (UPSAMPLED_MIN_DEPTH_DB, own reasoning).  Where broadband
#: content under the partials (noise, bursts, the tails of percussion) ends in the same cliff, the cliff is seen
#: on broadband content and is not merely the end of a harmonic series; a harmonic series that simply ends has
#: the same floor between its partials as above its last one
FLOOR_MIN_DROP_DB = UPSAMPLED_MIN_DEPTH_DB


def partial_floor_db(power, bin_hz: float) -> np.ndarray:
    """The level between the partials (dB): the power spectrum opened over :data:`FLOOR_OPENING_HZ`, then smoothed
    over :data:`SMOOTH_HZ`."""
    level = _db(power)
    w = max(3, int(round(FLOOR_OPENING_HZ / bin_hz)) | 1)
    opened = maximum_filter1d(minimum_filter1d(level, w, mode="nearest"), w, mode="nearest")
    s = max(1, int(round(SMOOTH_HZ / bin_hz)))
    return uniform_filter1d(opened, s, mode="nearest")


def floor_shares_cliff(power, bin_hz: float, cliff: dict, scale: int, top_bin: int, fmt_floor_db: float):
    """``(shares, drop_db)``: does the broadband floor between a sparse series' partials fall in the same cliff?

    ``cliff`` on the scale of the search (``scale``; ``edge_bin`` and ``stop_start_hz`` on that scale, ``top_bin``
    in real bins).  The floor (:func:`partial_floor_db`) is read below the edge over the window the tonal test reads
    (:data:`PASS_WINDOW_HZ` start to :data:`PRE_WINDOW_HZ` end, median) and above the start of the stop band over
    the cliff search's stop-window width (90th percentile, as the search reads a stop level): it must fall at least
    :data:`FLOOR_MIN_DROP_DB` there, from a level that stands :data:`CLIFF_MIN_DROP_DB` + :data:`ABOVE_FLOOR_DB`
    above the format's floor (as a cliff's pass band must, see ``_judge_cliff``)."""
    fl = partial_floor_db(power, bin_hz)
    e_hz = cliff["edge_bin"] * bin_hz            # the search position, in real hertz
    a = max(0, _bins(e_hz + PASS_WINDOW_HZ[0] / scale, bin_hz))
    z = _bins(e_hz + PRE_WINDOW_HZ[1] / scale, bin_hz)
    stop_hz = cliff.get("stop_start_hz")
    if stop_hz is None or z <= a:
        return False, None
    sa = _bins(stop_hz / scale, bin_hz)
    sz = min(top_bin, sa + _bins((POST_WINDOW_HZ[1] - POST_WINDOW_HZ[0]) / scale, bin_hz))
    if sz - sa < 10:
        return False, None
    below = float(np.median(fl[a:z]))
    above = float(np.percentile(fl[sa:sz], 90))
    drop = below - above
    ok = drop >= FLOOR_MIN_DROP_DB and below >= fmt_floor_db + CLIFF_MIN_DROP_DB + ABOVE_FLOOR_DB
    return ok, round(drop, 1)


def _judge_cliff(env, total, bin_hz, top, floor, nyq, testable, scale):
    """One cliff search at frequency scale ``scale``: ``(cliff, rate, position score, tonal)``.

    At scale ``s`` the envelope is read as if its bins were ``s`` times wider, so every window
    and slope of the search (set for the cliffs of 22-48 kHz sources) applies, in proportion,
    to a source ``s`` times lower: a resampler's transition band scales with its source rate.
    Frequencies in the returned cliff are real (divided back by ``s``).
    """
    b = bin_hz * scale
    cands = [r * scale for r in testable]
    cliff = find_cliff(env, b, top,
                       accept=lambda c: (c["slope_db_per_khz"] >= CLIFF_MIN_SLOPE_DB_PER_KHZ
                                         and c["pass_db"] >= floor + CLIFF_MIN_DROP_DB + ABOVE_FLOOR_DB
                                         and steep_relative(c)))
    if cliff is None:
        return None, None, 0.0, False
    a, z = max(0, cliff["edge_bin"] + _bins(PASS_WINDOW_HZ[0], b)), cliff["edge_bin"] + _bins(PRE_WINDOW_HZ[1], b)
    gap = _db(total[a:z]) - env[a:z]
    tonal = float(np.median(gap)) < -BROADBAND_GAP_DB if z > a else False
    if tonal:
        shares, _drop_db = floor_shares_cliff(total, bin_hz, cliff, scale, top, floor)
        if shares:
            # broadband content under the partials ends in the same cliff: judged as a cliff, not as tonal material
            tonal = False
            cliff["floor_cliff"] = True
    fine = None

    def leaks(r_scaled):
        nonlocal fine
        if fine is None:
            fine = fine_structure_db(total, bin_hz)
        got = mirror_correlation(fine, bin_hz, r_scaled / scale, LEAKY_MIRROR_BAND_RATIO, min(len(fine), top))
        return got is not None and got[0] >= LEAKY_MIN_MIRROR_CORRELATION
    fits = {}
    rate, pos = match_rate(cliff["edge_hz"], cands, cliff.get("stop_start_hz"), leaks, fits_out=fits)
    low = lower_bound_rate(fits, rate, cliff.get("stop_start_hz"), SMOOTH_HZ * scale)
    if low is not None:
        cliff["lower_bound_of"] = int(round(rate / scale))          # the next rate up, in the file's hertz
        rate, pos = low, fits[low]
    walls = [r for r in cands if abs(cliff["edge_hz"] / (r / 2.0) - 1.0) <= BRICK_WALL_RATIO_TOLERANCE
             and transition_width_hz(cliff) < BRICK_WALL_MAX_WIDTH_RATIO * r / 2.0]
    if walls:
        # a brick wall at a standard Nyquist names that rate: an FFT resampler zeroes every bin above the
        # old Nyquist exactly, so where its stop band "begins" says nothing more
        rate, pos = walls[0], 1.0
        fits = {}
    cliff["rival_fit"] = rival_fit(fits, rate)
    if rate is not None:
        ratio = cliff["edge_hz"] / (rate / 2.0)
        width = transition_width_hz(cliff)
        # a brick wall is narrow (an FFT resampler zeroes the bins above the old Nyquist); a wider fall
        # that merely sits near a standard Nyquist (a Butterworth low-pass at 16 kHz) must pass the shape test
        brick = abs(ratio - 1.0) <= BRICK_WALL_RATIO_TOLERANCE and width < BRICK_WALL_MAX_WIDTH_RATIO * rate / 2.0
        fall = cliff.get("fb_hz", cliff["edge_hz"]) - cliff["edge_hz"]
        if not brick and ends_short(cliff, rate, scale):
            cliff["ends_short"] = rate / scale
            rate = None
        elif not (cliff["drop_db"] >= UPSAMPLED_MIN_DEPTH_DB
                and (brick or converter_width_fits(cliff, rate))
                and fall <= CONVERTER_MAX_FALL_RATIO * rate / 2.0
                and (brick or shape_ratio(cliff, scale) < CONVERTER_MAX_SHAPE_RATIO
                     or (not butterworth_could_fall(cliff, scale, 2.0 * nyq) and ends_at_nyquist(cliff, rate)))):
            rate = None
        elif brick:
            cliff["brick"] = True
        elif butterworth_explains(env, bin_hz, scale, 2.0 * nyq, cliff)[0]:
            # a mastering low-pass's fall, not a resampler's transition
            rate = None
        else:
            level = step_level_db(total, bin_hz)
            f1, f_stop = cliff["f1_hz"] / scale, cliff["stop_start_hz"] / scale
            k1 = _bins(f1, bin_hz)
            ks = _bins(f_stop, bin_hz)
            pass_db = float(np.median(level[max(0, k1 - _bins(2000.0 / scale, bin_hz)):max(1, k1)]))
            stop_db = float(np.median(level[ks:max(ks + 1, min(len(level), ks + _bins(2000.0 / scale, bin_hz)))]))
            step = coder_steps(level, bin_hz, f1, f_stop, pass_db, stop_db, fs=2.0 * nyq)
            if step is not None:
                # a lossy coder's band limit, whole bands at a time, not a converter's smooth fall
                rate = None
                cliff["coder_step"] = (step[0] * scale, pass_db - step[1])
    real = dict(cliff)
    for k in ("edge_hz", "f1_hz", "f3_hz", "f30_hz", "fb_hz", "f20_hz", "f40_hz", "stop_start_hz"):
        if real.get(k) is not None:
            real[k] = real[k] / scale
    if real.get("coder_step") is not None:
        real["coder_step"] = (real["coder_step"][0] / scale, real["coder_step"][1])
    for k in ("slope_db_per_khz", "slope_below_db_per_khz", "steepest_db_per_khz", "tilt_db_per_khz",
              "slope_after_db_per_khz"):
        if k in real:
            real[k] = real[k] * scale
    return real, (None if rate is None else int(round(rate / scale))), pos, tonal


def assess_power(total, bin_hz: float, fs: float, frame_length: int, info, frames: int = 1) -> BandwidthResult:
    """Effective bandwidth and upsampling verdict of a long-term power spectrum (10 Hz bins).

    Candidates of 24 kHz and up are searched on the spectrum as it is; 16 and 22.05 kHz
    sources at twice, 8 and 11.025 kHz at four times the frequency scale (see
    :func:`_judge_cliff`), each pass over the band up to :data:`LOW_PASS_TOP_RATIO` times the
    highest candidate's Nyquist it serves.
    """
    testable, untestable = testable_candidates(fs)
    out = BandwidthResult(untestable_hz=untestable)
    floor = format_floor_db(info.bit_depth, info.is_float, frame_length)
    out.settings = {
        "candidates_hz": list(CANDIDATE_RATES_HZ), "testable_hz": testable,
        "format_floor_db_per_bin": round(floor, 2), "closing_hz": CLOSING_HZ,
        "cliff_min_drop_db": CLIFF_MIN_DROP_DB, "cliff_min_slope_db_per_khz": CLIFF_MIN_SLOPE_DB_PER_KHZ,
        "upsampled_min_depth_db": UPSAMPLED_MIN_DEPTH_DB, "above_floor_db": ABOVE_FLOOR_DB,
        "edge_ratio_range": list(EDGE_RATIO_RANGE), "converter_max_fall_ratio": CONVERTER_MAX_FALL_RATIO,
    }
    if frames == 0 or not np.any(total > 0):
        out.note = "no signal: digital silence"
        return out
    env = envelope_db(total, bin_hz)
    testable, untestable = testable_candidates(fs, env, bin_hz, floor)
    out.untestable_hz = untestable
    out.settings["testable_hz"] = testable
    nyq = fs / 2.0
    top = min(len(env), _bins(0.99 * nyq, bin_hz))
    # 22.05 kHz joins the full-scale pass as well: its Nyquist lies within 0.92 of 24 kHz's, so a
    # cliff read there can sit nearer the typical ratio of either, and only a pass that offers both
    # can choose (the scale-2 pass reads the same cliff over a wider pass window, where a slow
    # windowed-sinc transition already falls)
    cliff, rate, pos, tonal = _judge_cliff(env, total, bin_hz, top, floor, nyq,
                                           [r for r in testable if scale_for(r) == 1 or r == 22050], 1)
    for scale in (2, 4):
        # the lower sources' passes; where two passes both explain a cliff (22.05 kHz read at scale 2 and
        # 24 kHz at scale 1 see the same edge), the rate whose edge ratio is nearer the typical one wins
        low = [r for r in testable if scale_for(r) == scale]
        if not low or not _drop_at(env, bin_hz, top, low, small_ratio=True):
            continue
        top_s = min(top, _bins(LOW_PASS_TOP_RATIO * max(low) / 2.0, bin_hz))
        c2, r2, p2, t2 = _judge_cliff(env, total, bin_hz, top_s, floor, nyq, low, scale)
        if r2 is not None and not t2 and (rate is None or p2 > pos):
            if rate is not None and cliff is not None:
                # what the other pass read counts against this one's confidence (rival_fit): another rate's fit, or
                # the same rate's own rival and lower bound
                if rate != r2:
                    c2["rival_fit"] = max(float(c2.get("rival_fit", 0.0)), pos)
                else:
                    c2["rival_fit"] = max(float(c2.get("rival_fit", 0.0)), float(cliff.get("rival_fit", 0.0)))
                    c2.setdefault("lower_bound_of", cliff.get("lower_bound_of"))
            cliff, rate, pos, tonal = c2, r2, p2, t2
    if cliff is not None and tonal:
        edge = round(cliff["edge_hz"] / 10.0) * 10.0
        out.effective_bandwidth_hz = edge
        out.note = (f"tonal material: its highest partials end at {edge / 1000:.2f} kHz; "
                    "a converter cliff cannot be told from the end of a harmonic series")
        return out
    if cliff is not None and rate is None and cliff["edge_hz"] > OWN_FILTER_RATIO * nyq:
        cliff = None
    if cliff is not None:
        edge = round(cliff["edge_hz"] / 10.0) * 10.0
        out.effective_bandwidth_hz = edge
        out.edge = "cliff"
        out.depth_db = round(cliff["drop_db"], 1)
        out.slope_db_per_khz = round(cliff["slope_db_per_khz"], 1)
        out.edge_ratio = round(cliff["edge_hz"] / (rate / 2.0), 3) if rate is not None else None
        if rate is not None and cliff.get("stop_start_hz") is not None:
            out.stop_ratio = round(cliff["stop_start_hz"] / (rate / 2.0), 3)
        if rate is None and cliff.get("stop_start_hz") is not None:
            out.fall_end_hz = float(cliff["stop_start_hz"])
        if rate is not None:
            c_depth = min(1.0, (cliff["drop_db"] - 30.0) / 30.0)
            c_slope = min(1.0, cliff["slope_db_per_khz"] / 15.0)
            out.upsampled_from_hz = int(rate)
            out.brick = bool(cliff.get("brick"))
            out.lower_bound_of = None if out.brick else cliff.get("lower_bound_of")
            c_pos = max(0.0, pos - float(cliff.get("rival_fit", 0.0)))
            out.confidence = round(0.4 + 0.6 * (c_depth + c_pos + c_slope) / 3.0, 2)
            out.note = (f"converted up from {rate / 1000:g} kHz: the spectrum ends in a converter's cliff at "
                        f"{edge / 1000:.1f} kHz ({cliff['edge_hz'] / (rate / 2.0):.2f} of "
                        f"{rate / 2000:g} kHz), {out.depth_db:.0f} dB deep")
            if out.lower_bound_of:
                out.note += (f"; the cliff fits {cliff['lower_bound_of'] / 1000:g} kHz as well, but its stop band begins at "
                             f"{rate / 2000:g} kHz: the source rate was at least {rate / 1000:g} kHz")
        elif cliff.get("ends_short"):
            out.band_limit_hz = edge
            h, r = float(cliff["stop_start_hz"]), float(cliff["ends_short"])
            out.note = (f"band-limited at {edge / 1000:.1f} kHz: the fall is over by {h / 1000:.1f} kHz, short of "
                        f"{r / 2000:g} kHz by more than its own width, where a converter from {r / 1000:g} kHz ends "
                        "its fall (a lossy coder's bandwidth setting, or a low-pass)")
        elif cliff.get("coder_step") is not None:
            out.band_limit_hz = edge
            at_hz, down_db = cliff["coder_step"]
            out.note = (f"band-limited at {edge / 1000:.1f} kHz in steps of whole bands, as a lossy coder limits its "
                        f"band: the fall stops flat {down_db:.0f} dB down at {at_hz / 1000:.1f} kHz before it goes on, "
                        "where a converter's filter falls smoothly")
        else:
            out.band_limit_hz = edge
            out.note = (f"band-limited at {edge / 1000:.1f} kHz by a low-pass that no standard rate's converter "
                        "explains (a lossy or filtered source?)")
        return out
    main = float(np.median(env[_bins(1000.0, bin_hz):_bins(10000.0, bin_hz) + 1]))
    above = np.nonzero(env[:top] >= max(floor + ABOVE_FLOOR_DB, main - CONTENT_MAX_BELOW_MAIN_DB))[0]
    if above.size == 0:
        out.note = "no content above the format's noise floor"
        return out
    bw = round(float(above[-1]) * bin_hz / 10.0) * 10.0
    if above[-1] >= 0.97 * nyq / bin_hz:
        out.effective_bandwidth_hz = round(nyq / 10.0) * 10.0
        out.note = "content reaches the Nyquist frequency"
    else:
        out.effective_bandwidth_hz = bw
        out.edge = "rolloff"
        out.note = (f"rolls off gently, no converter cliff: nothing within "
                    f"{CONTENT_MAX_BELOW_MAIN_DB:g} dB of the main band above {bw / 1000:.1f} kHz"
                    if main - CONTENT_MAX_BELOW_MAIN_DB > floor + ABOVE_FLOOR_DB else
                    f"rolls off into the noise floor by {bw / 1000:.1f} kHz, no converter cliff")
    return out
