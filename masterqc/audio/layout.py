"""Channel layouts: labels from a WAVE_FORMAT_EXTENSIBLE channel mask or from
the conventional order for a channel count, and BS.1770 channel weights.

Weights follow ITU-R BS.1770-5, section 2 and Annex 3: L, R, C and any channel
within 30 degrees elevation and 60..120 degrees azimuth of the front is weighted
1.41 (surrounds), LFE is excluded (weight 0), every other channel 1.0.
"""

from __future__ import annotations

# Speaker position bits of WAVE_FORMAT_EXTENSIBLE dwChannelMask, in bit order,
# with masterqc's label and (azimuth_deg, elevation_deg); None for LFE.
# Azimuths are the nominal ones of ITU-R BS.2051 / BS.775 loudspeaker set-ups.
MASK_SPEAKERS = [
    (0x1, "L", (30, 0)),        # SPEAKER_FRONT_LEFT
    (0x2, "R", (-30, 0)),       # SPEAKER_FRONT_RIGHT
    (0x4, "C", (0, 0)),         # SPEAKER_FRONT_CENTER
    (0x8, "LFE", None),         # SPEAKER_LOW_FREQUENCY
    (0x10, "Lrs", (135, 0)),    # SPEAKER_BACK_LEFT
    (0x20, "Rrs", (-135, 0)),   # SPEAKER_BACK_RIGHT
    (0x40, "Lc", (15, 0)),      # SPEAKER_FRONT_LEFT_OF_CENTER
    (0x80, "Rc", (-15, 0)),     # SPEAKER_FRONT_RIGHT_OF_CENTER
    (0x100, "Cs", (180, 0)),    # SPEAKER_BACK_CENTER
    (0x200, "Ls", (110, 0)),    # SPEAKER_SIDE_LEFT
    (0x400, "Rs", (-110, 0)),   # SPEAKER_SIDE_RIGHT
    (0x800, "Tc", (0, 90)),     # SPEAKER_TOP_CENTER
    (0x1000, "Ltf", (30, 45)),  # SPEAKER_TOP_FRONT_LEFT
    (0x2000, "Ctf", (0, 45)),   # SPEAKER_TOP_FRONT_CENTER
    (0x4000, "Rtf", (-30, 45)),  # SPEAKER_TOP_FRONT_RIGHT
    (0x8000, "Ltr", (135, 45)),  # SPEAKER_TOP_BACK_LEFT
    (0x10000, "Ctr", (180, 45)),  # SPEAKER_TOP_BACK_CENTER
    (0x20000, "Rtr", (-135, 45)),  # SPEAKER_TOP_BACK_RIGHT
]

_POSITION = {label: pos for _bit, label, pos in MASK_SPEAKERS}
_POSITION["M"] = (0, 0)
_POSITION["Lss"] = (90, 0)
_POSITION["Rss"] = (-90, 0)

# Conventional order for a channel count when the file carries no mask
# (common practice, no source: SMPTE/ITU film order for 5.1 and 7.1).
CONVENTIONAL = {
    1: ["M"],
    2: ["L", "R"],
    6: ["L", "R", "C", "LFE", "Ls", "Rs"],
    8: ["L", "R", "C", "LFE", "Ls", "Rs", "Lrs", "Rrs"],
}

# FLAC defines its own channel order for 3..8 channels without a mask (FLAC
# format specification, "channel assignment"; from memory): 3 FL FR FC; 4 FL FR
# BL BR; 5 FL FR FC BL BR; 6 FL FR FC LFE BL BR; 7 FL FR FC LFE BC SL SR;
# 8 FL FR FC LFE BL BR SL SR.  As WAVE_FORMAT_EXTENSIBLE masks:
FLAC_DEFAULT_MASKS = {3: 0x7, 4: 0x33, 5: 0x37, 6: 0x3F, 7: 0x70F, 8: 0x63F}

# Rear surrounds take the label "Ls"/"Rs" when the mask has back speakers but
# no side speakers (the common 5.1 "back" mask 0x3F): the loudspeakers then sit
# at the 5.1 surround positions of ITU-R BS.775 (+-110 deg).
_BACK_AS_SURROUND = {"Lrs": "Ls", "Rrs": "Rs"}


def labels_from_mask(mask: int, channels: int) -> list[str] | None:
    """Return the channel labels a WAVE_FORMAT_EXTENSIBLE mask declares.

    Returns ``None`` when the mask is 0 or declares fewer speakers than the file
    has channels (the layout is then unknown).  Extra mask bits beyond the
    channel count are ignored, as the WAVEFORMATEXTENSIBLE definition says.
    """
    if not mask:
        return None
    labels = [label for bit, label, _ in MASK_SPEAKERS if mask & bit]
    if len(labels) < channels:
        return None
    labels = labels[:channels]
    if not ({"Ls", "Rs"} & set(labels)):
        labels = [_BACK_AS_SURROUND.get(x, x) for x in labels]
    return labels


def unknown_labels(channels: int) -> list[str]:
    """Placeholder labels ``ch1..chN`` for a layout that cannot be known."""
    return [f"ch{i + 1}" for i in range(channels)]


def bs1770_weight(label: str) -> float:
    """BS.1770 channel weight G for a channel label (ITU-R BS.1770-5, Table 3, Annex 3).

    LFE -> 0.0; a channel at |elevation| < 30 deg and 60 <= |azimuth| <= 120 deg -> 1.41;
    any other known or unknown channel -> 1.0.
    """
    if label == "LFE":
        return 0.0
    pos = _POSITION.get(label)
    if pos is None:
        return 1.0
    azimuth, elevation = pos
    if abs(elevation) < 30 and 60 <= abs(azimuth) <= 120:
        return 1.41
    return 1.0


def parse_layout(text, channels: int | None = None) -> tuple[str, ...]:
    """A user-given layout (``"L,R,C,LFE,Ls,Rs"`` or a sequence of labels) as a tuple of labels.

    ValueError for an empty label, a label given twice, or (when ``channels`` is
    given) a count that is not the file's.  The one parser of ``--layout`` and of
    the reader's override.
    """
    raw = text.split(",") if isinstance(text, str) else [str(x) for x in text]
    labels = tuple(x.strip() for x in raw)
    shown = ",".join(labels)
    for i, label in enumerate(labels, start=1):
        if not label:
            raise ValueError(f"channel label {i} is empty (give one label per channel)")
    twice = sorted({x for x in labels if labels.count(x) > 1})
    if twice:
        raise ValueError(f"channel layout {shown} names {', '.join(twice)} more than once")
    if channels is not None and len(labels) != channels:
        raise ValueError(f"channel layout {shown} names {len(labels)} channels, the file has {channels}")
    return labels
