"""Upsampling provenance from every analyzer's evidence (a post-step of the engine).

The bandwidth analysis (:mod:`masterqc.measure.bandwidth`) names a source rate from a
converter's cliff; an upsampler without a proper filter (sample hold, linear
interpolation, zero stuffing) leaves no cliff but mirror images, which the imaging
analyzer (:mod:`masterqc.measure.imaging`) finds and attributes to a source rate.  A
file with such images *is* upsampled, so :func:`combine` lets ``upsampled_from_hz``
say so too, after every analyzer has finished.  The imaging analyzer tests source rates of
32 kHz and up only, so for a lower source it names a multiple of the rate; where the bandwidth
analysis sees the spectrum mirrored about a divisor's Nyquist (``upsampled_mirror_rate_hz``), that
divisor is the source rate.  The sample
patterns of :mod:`masterqc.measure.interpolation` (runs of held samples, straight lines,
stuffed zeros) name the rate itself and take precedence over images and cliffs: they are
exact, not statistical.  Last, where nothing else named a source, a resampler's trace (coherent images
too deep to be a defect, :func:`from_traces`) does.  Then the rates whose images are coherent correct a
cliff that fits the neighbouring standard rate as well, or an image verdict that names a multiple of the
source rate (:func:`rate_from_images`).  Pure: measurements in, measurements out.
"""

from __future__ import annotations

#: a defect's coherence this far below the strongest defect's still counts as "as strong"
#: when choosing among several candidate rates (own reasoning: the cycle frequencies of a
#: source rate r are also those of its multiples' and submultiples' candidates)
COHERENCE_TIE = 0.0
#: the confidence of a source rate named by runs of exactly repeated samples (house choice: what a sample
#: pattern at 48 dB contrast gets in :func:`from_pattern`, 0.5 + 48/120)
HELD_SAMPLES_CONFIDENCE = 0.9


def image_source(imaging) -> dict | None:
    """The imaging candidate that names the source rate: a defect read from the samples themselves (a hold's
    exactly repeated samples name its step, whole or fractional, exactly, as the sample patterns do), else
    among the "defect" verdicts the most coherent one (ties within :data:`COHERENCE_TIE`: the one with the
    louder images), or None.  A fractional hold's images are coherent about the standard rates that share its
    pattern's period (a 4.8-sample hold at 48 kHz repeats every 24 samples: 8, 16, 24 kHz), none of which is
    its rate."""
    defects = [c for c in (imaging or []) if isinstance(c, dict) and c.get("verdict") == "defect"
               and c.get("source_rate_hz")]
    if not defects:
        return None
    exact = [c for c in defects if c.get("evidence") == "samples"]
    if exact:
        return exact[0]
    top = max(float(c.get("coherence") or 0.0) for c in defects)
    near = [c for c in defects if float(c.get("coherence") or 0.0) >= top - COHERENCE_TIE]
    return max(near, key=lambda c: (float(c.get("coherence") or 0.0) >= top - 1e-9,
                                    float(c.get("image_level_db") if c.get("image_level_db") is not None else -999.0)))


def combine(m: dict) -> dict:
    """The steps below in order of how exact their evidence is: the sample pattern first, then the
    images of a defect, then a resampler's trace; last, the rates whose images are coherent correct a
    cliff's or an image's reading of the neighbouring or a multiple rate (:func:`rate_from_images`)."""
    return rate_from_images(from_traces(from_images(from_pattern(m))))


#: a cliff's edge (-6 dB point) belongs to a source rate whose Nyquist frequency it lies within this range of, as
#: a fraction of that Nyquist: bandwidth.EDGE_RATIO_RANGE, where converters put their -6 dB point (own reasoning,
#: see there).  Images move a cliff's reading to another rate only where that rate explains the edge as well
EDGE_RATIO_RANGE = (0.75, 1.04)


def coherent_rates(imaging) -> list:
    """The candidate rates whose images are coherent ("defect" or "trace" verdicts), lowest first."""
    return sorted({int(round(float(c["source_rate_hz"]))) for c in (imaging or [])
                   if isinstance(c, dict) and c.get("verdict") in ("defect", "trace") and c.get("source_rate_hz")})


#: the standard rates (Hz): the imaging analyzer tests every one below the file's rate
STANDARD_RATES_HZ = (8000, 11025, 16000, 22050, 24000, 32000, 44100, 48000, 88200, 96000, 176400, 192000)


def file_rate(imaging) -> int | None:
    """The file's rate as the imaging analyzer's candidate list shows it (it lists every standard rate below
    the file's rate): the next standard rate above the highest candidate, or None."""
    listed = [float(c["source_rate_hz"]) for c in (imaging or []) if isinstance(c, dict) and c.get("source_rate_hz")]
    if not listed:
        return None
    above = [r for r in STANDARD_RATES_HZ if r > max(listed)]
    return above[0] if above else None


def explained_rates(source_hz: int, fs: int | None) -> set:
    """The candidate rates at which images of a source converted up from ``source_hz`` into a file of rate
    ``fs`` are coherent (analytic: an upsampler's images of the content ``X(f)`` lie at ``k r +- f``, mirrored
    about every multiple of ``r / 2``, so they pair up at cycle frequencies ``k r``; the images beyond the
    file's Nyquist frequency fold about it, to ``fs - k r -+ f``, and pair up at ``|fs - k r|`` as well)."""
    top = max(STANDARD_RATES_HZ)
    out = {k * source_hz for k in range(1, top // source_hz + 1)}
    if fs:
        out |= {abs(fs - k * source_hz) for k in range(1, 2 * fs // source_hz + 1)}
    return out


def quiet_rates(imaging) -> set:
    """The candidate rates the imaging analyzer tested and found no coherence at (verdict "none")."""
    return {int(round(float(c["source_rate_hz"]))) for c in (imaging or [])
            if isinstance(c, dict) and c.get("verdict") == "none" and c.get("source_rate_hz")}


def skipped_multiples(rate_hz: int, coherent, quiet) -> list:
    """The multiples of ``rate_hz`` below the highest coherent rate that were tested and found quiet.

    An upsampler from ``r`` leaves images of the content at ``k r +- f`` for every ``k`` its filter passes, so its
    images are coherent at every multiple of ``r`` up to the highest order seen: a multiple in between that is
    tested and shows nothing says the coherence at ``r`` is not its own.  The candidate test at ``r`` reads the
    cycle frequencies of ``r``'s multiples, so a source at ``3 r`` (24 kHz converted up to 96 kHz by a short
    sinc) makes ``r`` (8 kHz) read coherent through its third and sixth multiples while the second (16 kHz) and
    fourth (32 kHz) stay quiet (analytic; own reasoning)."""
    top = max(coherent, default=0)
    return [k * rate_hz for k in range(2, top // rate_hz + 1) if k * rate_hz < top and k * rate_hz in quiet]


def image_rate(imaging, mirror_hz: int | None = None) -> int | None:
    """The source rate the coherent images name, or None: a coherent rate whose images explain every other
    coherent rate (:func:`explained_rates`); where more than one does (in a 48 kHz file 16 and 32 kHz explain
    each other: a multiple one way, a fold the other), the rate whose Nyquist frequency the spectrum is mirrored
    about bin for bin (``mirror_hz``, the bandwidth analysis' mirror test: an upsampler's first images mirror
    the content about the old Nyquist, a fold only shifts it), else the lowest.  A set no one rate explains
    (44.1 and 48 kHz both coherent) names none."""
    rates = coherent_rates(imaging)
    fs = file_rate(imaging)
    quiet = quiet_rates(imaging)
    ok = [d for d in rates if set(rates) <= explained_rates(d, fs) | {d} and not skipped_multiples(d, rates, quiet)]
    if not ok:
        return None
    return mirror_hz if mirror_hz in ok else ok[0]


def rate_from_images(m: dict) -> dict:
    """``m`` with a cliff's or an image's source rate corrected by the rates whose images are coherent.

    A cliff reads the source rate from where the transition lies relative to each candidate Nyquist, and a
    transition read a little low or high fits the next standard rate as well (a 22.05 kHz source's fall at
    0.94 of 11.025 kHz is 0.86 of 12 kHz; on sparse or narrow material the edge may be the end of the
    programme).  Coherent images are exact: they sit mirrored about the multiples of the true source's
    Nyquist frequency.  So when the rate the verdict names shows no coherent images, and :func:`image_rate`
    names another one (not a rate whose coherence the named rate's own images explain) whose Nyquist
    frequency puts the cliff's edge within :data:`EDGE_RATIO_RANGE` of it, that rate is the source.  An image verdict that names a multiple of a
    coherent rate (the imaging analyzer's strongest defect is the first image order it sees) takes that
    lowest rate too.  The sample pattern (exact in itself) is never overruled."""
    rate = m.get("upsampled_from_hz")
    evidence = m.get("upsampled_evidence")
    if rate is None or evidence not in ("cliff", "segments", "images"):
        return m
    rate = int(rate)
    src = image_source(m.get("imaging")) if evidence == "images" else None
    if src is not None and src.get("evidence") == "samples" and int(round(float(src["source_rate_hz"]))) == rate:
        return m                                # a hold read from its own samples: exact, like the patterns
    mirror = m.get("upsampled_mirror_rate_hz")
    mirror = int(mirror) if mirror else None
    named = image_rate(m.get("imaging"), mirror)
    if named is None or named == rate:
        return m
    coherent = coherent_rates(m.get("imaging"))
    fs = file_rate(m.get("imaging"))
    # the two rates explain each other's coherence (a multiple one way, a fold the other): the mirror decides
    mutual = named in explained_rates(rate, fs) and rate in explained_rates(named, fs) and mirror == named
    if named in explained_rates(rate, fs) and not mutual:
        # the images of a source at the verdict's rate are coherent at the named rate as well
        return m
    edge = m.get("effective_bandwidth_hz")
    if evidence == "images":
        if not ((named < rate and rate % named == 0) or mutual):
            return m
    elif rate in coherent or edge is None or not (
            EDGE_RATIO_RANGE[0] <= float(edge) / (named / 2.0) <= EDGE_RATIO_RANGE[1]):
        return m
    m["upsampled_from_hz"] = named
    m["upsampled_evidence"] = "images"
    m["upsampled_edge_ratio"] = None if edge is None or evidence == "images" else round(float(edge) / (named / 2.0), 3)
    for seg in m.get("bandwidth_segments") or []:
        if isinstance(seg, dict) and seg.get("upsampled_from_hz") == rate:
            seg["upsampled_from_hz"] = named
    how = ("the spectrum's edge fits both rates" if evidence != "images"
           else f"images about the multiples of {rate / 2000:g} kHz are images about multiples of {named / 2000:g} kHz")
    m["bandwidth_note"] = (f"converted up from {named / 1000:g} kHz: coherent mirror images of the content sit about "
                           f"the multiples of {named / 2000:g} kHz"
                           + (f" ({', '.join(f'{r / 1000:g}' for r in coherent)} kHz coherent)" if coherent else "")
                           + f", not about those of {rate / 2000:g} kHz ({how})")
    return m


def from_pattern(m: dict) -> dict:
    """``m`` with ``upsampled_from_hz`` (and its confidence, channels, evidence, note) taken from
    the sample pattern of an unfiltered upsampler, when there is one."""
    rate = m.get("interpolation_source_rate_hz")
    if "upsampled_from_hz" not in m or rate is None:
        return m
    rate = int(rate)
    kind = m.get("interpolation_kind") or "hold"
    con = m.get("interpolation_contrast_db")
    m["upsampled_from_hz"] = rate
    m["upsampled_confidence_fraction"] = round(min(1.0, 0.5 + (float(con or 0.0)) / 120.0), 2)
    m["upsampled_evidence"] = "samples"
    m["upsampled_edge_ratio"] = None
    m["upsampled_channels"] = list(m.get("interpolation_channels") or [])
    how = {"hold": "by holding each sample", "linear": "by straight lines between samples",
           "zero-stuff": "by inserting zeros"}.get(kind, "without a filter")
    m["bandwidth_note"] = (f"converted up from {rate / 1000:g} kHz {how}: the samples repeat that "
                           f"pattern at the source rate exactly (contrast {float(con or 0.0):.0f} dB)")
    m["band_limit_hz"] = None
    segs = [g for g in (m.get("bandwidth_segments") or []) if isinstance(g, dict)]
    if segs:
        # the pattern holds over the frames spread through the whole file (a part converted up
        # would dilute it below the contrast needed): the file-level verdict covers the file
        m["upsampled_where_s"] = [[float(segs[0]["start_s"]), float(segs[-1]["end_s"])]]
    return m


def from_images(m: dict) -> dict:
    """``m`` with ``upsampled_from_hz`` (and its confidence, channels, evidence, note) taken
    from the imaging verdict when the bandwidth analysis found no converter cliff."""
    if "upsampled_from_hz" not in m or m.get("upsampled_from_hz") is not None:
        return m
    src = image_source(m.get("imaging"))
    if src is None:
        return m
    rate = int(round(float(src["source_rate_hz"])))
    mirror = m.get("upsampled_mirror_rate_hz")
    if mirror and int(mirror) < rate and rate % int(mirror) == 0:
        # images mirror the spectrum about every multiple of the old Nyquist: the imaging analyzer, which
        # tests 32 kHz and up, names a multiple of a lower source rate whose own mirror the spectrum shows
        rate = int(mirror)
    coh = float(src.get("coherence") or 0.0)
    level = src.get("image_level_db")
    held = src.get("evidence") == "samples"
    m["upsampled_from_hz"] = rate
    # runs of exactly repeated samples are exact evidence, as the sample patterns are (house choice: the
    # confidence of a pattern at 48 dB contrast)
    m["upsampled_confidence_fraction"] = HELD_SAMPLES_CONFIDENCE if held else round(min(1.0, 0.5 + 0.5 * coh), 2)
    m["upsampled_evidence"] = "images"
    m["upsampled_edge_ratio"] = None
    chans = src.get("channels") or ([src["channel"]] if src.get("channel") else [])
    m["upsampled_channels"] = list(chans)
    how = (f"by holding each sample (runs of repeated samples, a sample-and-hold at an effective "
           f"{rate / 1000:g} kHz)" if held else "without a proper filter")
    m["bandwidth_note"] = (f"converted up from {rate / 1000:g} kHz {how}: mirror images of "
                           f"the content below {rate / 2000:g} kHz"
                           + (f" at {float(level):.0f} dB" if level is not None else "") + ", no converter cliff")
    m["band_limit_hz"] = None
    return m


def from_traces(m: dict) -> dict:
    """A resampler's trace names the source rate when nothing else did (the last step of :func:`combine`).

    A "trace" is significant coherence at the candidate rate itself (its first image order), not at
    the controls a few bins off, kept over both halves of the file: images of content converted up
    from that rate, only too deep to be a defect.  Natural audio shows none at any rate.  So when
    neither a converter cliff, nor the sample pattern, nor a defect named the source, the lowest rate
    with a trace does (its multiples share its cycle frequencies), with ``upsampled_evidence``
    "images".  Pure: measurements in, measurements out.
    """
    if "upsampled_from_hz" not in m or m.get("upsampled_from_hz") is not None:
        return m
    traces = [c for c in (m.get("imaging") or []) if isinstance(c, dict) and c.get("verdict") == "trace"
              and c.get("source_rate_hz")]
    if m.get("band_limit_hz") is not None:
        # the band ends in a steep low-pass that no converter explains (a lossy coder, a mastering filter): there
        # coherence alone does not name a source, only measured images of the content inside the band do.  A
        # block coder's frames repeat at a rate that divides half and a quarter of the file's rate (hops of 576,
        # 1024 or 2048 samples), so coherence at those cycle frequencies may be its framing, not images
        traces = [c for c in traces if c.get("image_level_db") is not None]
    if not traces:
        return m
    src = min(traces, key=lambda c: float(c["source_rate_hz"]))
    rate = int(round(float(src["source_rate_hz"])))
    level = src.get("image_level_db")
    m["upsampled_from_hz"] = rate
    m["upsampled_confidence_fraction"] = 0.6
    m["upsampled_evidence"] = "images"
    m["upsampled_edge_ratio"] = None
    m["upsampled_channels"] = list(src.get("channels") or ([src["channel"]] if src.get("channel") else []))
    m["bandwidth_note"] = (f"converted up from {rate / 1000:g} kHz: the content below {rate / 2000:g} kHz has "
                           "coherent mirror images, a resampler's trace"
                           + (f" ({float(level):.0f} dB)" if level is not None else "") + ", no converter cliff")
    m["band_limit_hz"] = None
    return m
