"""Integer PCM decoded from its bytes by masterqc's optional compiled kernel, with the values
libsndfile gives.

libsndfile scales an integer PCM sample to double (its default normalisation) as the sample's
code placed in the top bits of an int32 (16-bit codes shifted left by 16, 24-bit by 8, 32-bit
as they are) times ``1 / 0x80000000``: the product of an integer and a power of two, exact, so
the value is ``code / 2**(bits - 1)`` however it is computed.  The compiled function
``pcm_to_double`` (``masterqc/measure/_cascade.c``, built at install time, see setup.py) does
that arithmetic on the raw bytes of a block (read by libsndfile's ``sf_read_raw``, from the
positions its own decoder reads) and writes the (frames, channels) block and its (channels,
frames) copy for the analyzers that take planar blocks in the same pass (measured: 0.2 ms per
65536-frame stereo 24-bit block, against 0.53 ms for libsndfile's decode to double plus 0.1 ms
for the planar copy).

:func:`pcm_to_double_numpy` is the same arithmetic in numpy, the reference the kernel is checked
against once per process (:func:`kernel`, on codes of every byte pattern that matters: both
extremes, zero, -1, each byte set alone); where the kernel is absent, switched off
(``MASTERQC_OWN_KERNEL=0``) or fails that check, libsndfile decodes as before.  The byte order is
taken from the container (:func:`layout_of`), never guessed.
"""

from __future__ import annotations

import numpy as np

#: libsndfile subtype -> bytes per sample, for the integer encodings the kernel decodes
WIDTHS = {"PCM_16": 2, "PCM_24": 3, "PCM_32": 4}
#: container kind (masterqc.audio.container.ContainerInfo.kind) -> big-endian samples
BYTE_ORDER_BIG = {"riff": False, "rf64": False, "bw64": False, "w64": False, "aiff": True}
#: libsndfile major formats whose PCM samples sit in the byte order of :data:`BYTE_ORDER_BIG`
FORMATS = {"WAV", "WAVEX", "RF64", "W64", "AIFF"}


def layout_of(sf_format: str, subtype: str, kind: str | None):
    """``(bytes per sample, big-endian)`` of a stream whose samples the kernel can decode, or None
    (another encoding, or a container whose byte order is not fixed by its kind: RIFX, AIFF-C)."""
    width = WIDTHS.get(subtype)
    if width is None or sf_format not in FORMATS or kind not in BYTE_ORDER_BIG:
        return None
    big = BYTE_ORDER_BIG[kind]
    if big != (sf_format == "AIFF"):
        return None
    return width, big


def pcm_to_double_numpy(raw, frames: int, channels: int, width: int, big: bool) -> np.ndarray:
    """(frames, channels) float64 from ``frames * channels`` samples of ``width``-byte integer PCM
    (big-endian when ``big``): each code in the top bits of an int32, times 2**-31."""
    count = frames * channels
    b = np.frombuffer(raw, dtype=np.uint8, count=count * width).reshape(count, width)
    if big:
        b = b[:, ::-1]                     # least significant byte first, as little-endian
    u = np.zeros(count, dtype=np.uint32)
    for k in range(width):
        u |= b[:, k].astype(np.uint32) << np.uint32(8 * (4 - width + k))
    return (u.view(np.int32).astype(np.float64) * (1.0 / 2147483648.0)).reshape(frames, channels)


def _self_check(fn) -> bool:
    """True when ``fn`` gives :func:`pcm_to_double_numpy`'s bits, interleaved and planar, for every
    width and byte order, on codes with each byte set alone, both extremes, zero and -1."""
    patterns = [bytes([0] * 4), bytes([0xFF] * 4), bytes([0, 0, 0, 0x80]), bytes([0xFF, 0xFF, 0xFF, 0x7F])]
    patterns += [bytes(0x5A if j == i else 0 for j in range(4)) for i in range(4)]
    patterns += [bytes([0x81, 0x42, 0xC3, 0x24]), bytes([0x01, 0x80, 0xFE, 0x7F])]
    for width in (2, 3, 4):
        for big in (False, True):
            for channels in (1, 2, 3):
                samples = b"".join(p[:width] for p in patterns) * channels
                frames = len(samples) // (width * channels)
                raw = samples[:frames * channels * width]
                want = pcm_to_double_numpy(raw, frames, channels, width, big)
                inter = np.empty((frames, channels))
                rows = np.empty((channels, frames))
                fn(raw, inter, rows, frames, channels, width, int(big))
                alone = np.empty((frames, channels))
                fn(raw, alone, np.empty(0), frames, channels, width, int(big))
                if not (np.array_equal(inter, want) and np.array_equal(rows, want.T)
                        and np.array_equal(alone, want)):
                    return False
    return True


def raw_reading_available(soundfile_obj) -> bool:
    """True when python-soundfile exposes what :func:`read_raw` uses (libsndfile's ``sf_read_raw``
    through its cffi binding, the open file's handle and error code: internal names, so checked)."""
    import soundfile as sf
    return (hasattr(getattr(sf, "_snd", None), "sf_read_raw") and hasattr(sf, "_ffi")
            and getattr(soundfile_obj, "_file", None) is not None and hasattr(soundfile_obj, "_errorcode"))


def read_raw(soundfile_obj, ptr, nbytes: int) -> int:
    """libsndfile's ``sf_read_raw`` on an open ``soundfile.SoundFile``: up to ``nbytes`` bytes of
    sample data from its read position into the cffi buffer ``ptr``; the bytes read, or 0 when
    libsndfile reports an error."""
    import soundfile as sf
    got = sf._snd.sf_read_raw(soundfile_obj._file, ptr, nbytes)
    return int(got) if got > 0 and not soundfile_obj._errorcode else 0


def kernel():
    """The compiled ``pcm_to_double`` when it is built, switched on and passes :func:`_self_check`;
    else None (libsndfile then decodes)."""
    from masterqc.measure import iir
    return iir.checked_kernel("pcm_to_double", _self_check)
