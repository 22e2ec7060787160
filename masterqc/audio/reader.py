"""Streaming audio reader on python-soundfile.

:func:`open_stream` opens a master and returns an :class:`AudioStream` whose
:meth:`AudioStream.blocks` yields float64 arrays of shape (frames, channels) in
file order.  Memory stays flat: only one block is held at a time.

Integer PCM is scaled by libsndfile to [-1, 1) exactly (code / 2**(bits-1)), so
the integer code of every sample can be recovered by multiplication; float
files pass through unscaled, so values above full scale and non-finite values
are seen as they are.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import soundfile as sf

from masterqc.audio import layout as _layout
from masterqc.audio.container import ContainerInfo, walk
from masterqc.errors import AudioReadError

#: libsndfile major format -> masterqc container name
CONTAINERS = {
    "WAV": "wav", "WAVEX": "wav", "RF64": "rf64", "W64": "w64",
    "AIFF": "aiff", "FLAC": "flac", "CAF": "caf",
}
#: libsndfile subtype -> (masterqc encoding name, bit depth, is_float)
ENCODINGS = {
    "PCM_S8": ("pcm_8", 8, False), "PCM_U8": ("pcm_8", 8, False),
    "PCM_16": ("pcm_16", 16, False), "PCM_24": ("pcm_24", 24, False),
    "PCM_32": ("pcm_32", 32, False), "FLOAT": ("float_32", 32, True),
    "DOUBLE": ("float_64", 64, True),
}

DEFAULT_BLOCK_FRAMES = 65536
#: sample rates masterqc measures: the range its BS.1770 K-weighting is built for (masterqc.measure.kweight)
MIN_RATE_HZ = 8000
MAX_RATE_HZ = 384000


@dataclass(frozen=True)
class StreamInfo:
    """Facts about an opened stream that every analyzer is built from.

    ``channel_layout`` holds one label per channel; ``layout_source`` says where it
    came from: "channel_mask" (WAVE_FORMAT_EXTENSIBLE), "conventional" (the usual
    order for the channel count), "override" (given by the user or the spec) or
    "unknown" (labels ``ch1..chN``, every channel weighted 1.0).
    ``channel_weights`` are the BS.1770 weights G for each channel.
    """

    path: str
    container: str
    encoding: str
    sample_rate_hz: int
    bit_depth: int
    is_float: bool
    channels: int
    frames: int
    channel_layout: tuple
    layout_source: str
    channel_weights: tuple
    channel_mask: int | None = None

    @property
    def duration_s(self) -> float:
        return self.frames / self.sample_rate_hz

    def format_dict(self) -> dict:
        """The ``format`` object of the result contract."""
        return {
            "container": self.container,
            "encoding": self.encoding,
            "sample_rate_hz": self.sample_rate_hz,
            "bit_depth": self.bit_depth,
            "channels": self.channels,
            "channel_layout": list(self.channel_layout),
            "channel_layout_source": self.layout_source,
            "channel_weights": list(self.channel_weights),
            "channel_mask": self.channel_mask,
            "frames": self.frames,
            "duration_s": self.duration_s,
        }


def _resolve_layout(channels: int, mask: int | None, override, container: str = "") -> tuple[list[str], str]:
    if override:
        return list(_layout.parse_layout(override, channels)), "override"
    if mask:
        labels = _layout.labels_from_mask(mask, channels)
        if labels is not None:
            return labels, "channel_mask"
    if container == "flac" and channels in _layout.FLAC_DEFAULT_MASKS:
        return _layout.labels_from_mask(_layout.FLAC_DEFAULT_MASKS[channels], channels), "conventional"
    if channels in _layout.CONVENTIONAL:
        return list(_layout.CONVENTIONAL[channels]), "conventional"
    return _layout.unknown_labels(channels), "unknown"


class AudioStream:
    """An opened master: ``info`` (:class:`StreamInfo`), ``container`` (:class:`ContainerInfo`), ``blocks()``."""

    def __init__(self, path, channel_layout=None):
        self.path = os.fspath(path)
        # opened here, by descriptor: never blocks on a FIFO or device (refused with a reason),
        # and libsndfile's own limit on path length (about 1 KiB) and on name encoding never applies
        fd = _open_master(self.path)
        self._source = _Bw64AsRf64.open_if_bw64(fd)
        self._fd = fd if self._source is None else None  # closed by close(), never by libsndfile
        try:
            self._sf = sf.SoundFile(self._source if self._source is not None else fd, closefd=False)
        except sf.LibsndfileError as exc:
            self._close_source()
            raise _unreadable(self.path, _clean(exc)) from None
        except (RuntimeError, TypeError, ValueError, OSError) as exc:
            self._close_source()
            raise _unreadable(self.path, str(exc)) from None
        try:
            self.container: ContainerInfo = walk(self.path)
            container = CONTAINERS.get(self._sf.format)
            enc = ENCODINGS.get(self._sf.subtype)
            if container is None:
                raise AudioReadError(self.path, f"unsupported container {self._sf.format_info}")
            if enc is None:
                raise AudioReadError(self.path, f"unsupported encoding {self._sf.subtype_info} "
                                     "(masterqc reads PCM 8/16/24/32 and float 32/64)")
            if self._sf.frames <= 0:
                raise AudioReadError(self.path, "holds no audio frames")
            if self._sf.channels <= 0:
                raise AudioReadError(self.path, "declares no channels")
            if not MIN_RATE_HZ <= self._sf.samplerate <= MAX_RATE_HZ:
                raise AudioReadError(self.path, f"sample rate {self._sf.samplerate} Hz is outside what masterqc "
                                     f"measures ({MIN_RATE_HZ}..{MAX_RATE_HZ} Hz)")
            if container == "aiff" and self.container.kind == "aifc":
                container = "aifc"
            try:
                labels, source = _resolve_layout(self._sf.channels, self.container.channel_mask, channel_layout,
                                                container)
            except ValueError as exc:
                raise AudioReadError(self.path, str(exc)) from None
            self.info = StreamInfo(
                path=self.path, container=container, encoding=enc[0],
                sample_rate_hz=int(self._sf.samplerate), bit_depth=enc[1], is_float=enc[2],
                channels=int(self._sf.channels), frames=int(self._sf.frames),
                channel_layout=tuple(labels), layout_source=source,
                channel_weights=tuple(_layout.bs1770_weight(x) for x in labels),
                channel_mask=self.container.channel_mask,
            )
        except Exception:
            self._sf.close()
            self._close_source()
            raise

    def blocks(self, block_frames: int = DEFAULT_BLOCK_FRAMES):
        """Yield float64 blocks of shape (n, channels), n <= block_frames, in file order.

        Raises :class:`AudioReadError` naming the frame position when decoding fails.
        """
        if block_frames < 1:
            raise ValueError("block_frames must be >= 1")
        yield from self._decoded_from(0, block_frames)

    def _seek(self, frame: int) -> None:
        try:
            self._sf.seek(frame)
        except (RuntimeError, ValueError, OSError) as exc:  # libsndfile fails to seek in some broken files
            where = "the first frame" if frame == 0 else f"frame {frame}"
            raise AudioReadError(self.path, f"decoding failed: cannot seek to {where} ({_clean(exc)})") from None

    def _decoded_from(self, done: int, block_frames: int):
        """libsndfile's decode to float64 from frame ``done``, in blocks of ``block_frames``."""
        self._seek(done)
        while True:
            try:
                block = self._sf.read(block_frames, dtype="float64", always_2d=True)
            except (RuntimeError, ValueError, OSError) as exc:  # LibsndfileError is a RuntimeError
                raise AudioReadError(self.path, f"decoding failed after frame {done} ({_clean(exc)})") from None
            if block.shape[0] == 0:
                break
            done += block.shape[0]
            yield block
            if block.shape[0] < block_frames:
                break

    def blocks_with_rows(self, block_frames: int = DEFAULT_BLOCK_FRAMES):
        """Yield ``(block, rows)``: ``block`` exactly as :meth:`blocks` yields it, ``rows`` its
        (channels, n) C-ordered copy where the compiled PCM decoder made it in the same pass
        (:mod:`masterqc.audio.pcm`: integer PCM of a container whose byte order is known), else None.

        The decoder reads the samples' bytes with libsndfile (``sf_read_raw``, from the positions its
        own decoder reads); its first block is compared with libsndfile's decode of it, and any
        difference, short read or error hands the rest of the file to libsndfile's decode, so the
        blocks are those of :meth:`blocks` either way.
        """
        if block_frames < 1:
            raise ValueError("block_frames must be >= 1")
        from masterqc.audio import pcm
        layout = pcm.layout_of(self._sf.format, self._sf.subtype, self.container.kind)
        decode = pcm.kernel() if layout is not None and pcm.raw_reading_available(self._sf) else None
        if decode is None:
            for block in self._decoded_from(0, block_frames):
                yield block, None
            return
        width, big = layout
        channels, total = self.info.channels, self.info.frames
        frame_bytes = width * channels
        buf = bytearray(min(block_frames, total) * frame_bytes)
        ptr = sf._ffi.from_buffer(buf)
        self._seek(0)
        done = 0
        while done < total:
            want = min(block_frames, total - done)
            n = pcm.read_raw(self._sf, ptr, want * frame_bytes) // frame_bytes
            if n:
                block = np.empty((n, channels))
                rows = np.empty((channels, n))
                decode(buf, block, rows, n, channels, width, int(big))
                if done == 0:              # the first block: libsndfile's own decode of it must agree
                    self._seek(0)
                    try:
                        first = self._sf.read(n, dtype="float64", always_2d=True)
                    except (RuntimeError, ValueError, OSError):
                        first = None
                    if first is None or not np.array_equal(first, block):
                        n = 0
                    else:
                        self._seek(n)
            if n < want:                   # anything unexpected: libsndfile's decode of this block on
                for block in self._decoded_from(done, block_frames):
                    yield block, None
                return
            done += n
            yield block, rows

    def close(self):
        self._sf.close()
        self._close_source()

    def _close_source(self):
        if self._source is not None:
            self._source.close()
            self._source = None
        if self._fd is not None:
            fd, self._fd = self._fd, None
            os.close(fd)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


class _Bw64AsRf64:
    """A BW64 file (ITU-R BS.2088) shown to libsndfile as RF64.

    BW64 keeps the RF64 layout of EBU Tech 3306 (ds64 first, 0xFFFFFFFF sizes)
    under another four-byte magic, which libsndfile 1.2 does not recognise; this
    file object replaces the magic on the fly and passes every other byte through.
    """

    def __init__(self, fd: int):
        self._f = os.fdopen(fd, "rb")

    @classmethod
    def open_if_bw64(cls, fd: int):
        """A shim owning ``fd`` when the file is BW64, else None (``fd`` left open, at its start)."""
        try:
            if hasattr(os, "pread"):
                head = os.pread(fd, 12, 0)
            else:  # pragma: no cover - systems without pread
                os.lseek(fd, 0, os.SEEK_SET)
                head = os.read(fd, 12)
                os.lseek(fd, 0, os.SEEK_SET)
        except OSError:
            return None
        if head[:4] == b"BW64" and head[8:12] == b"WAVE":
            return cls(fd)
        return None

    def read(self, n=-1):
        pos = self._f.tell()
        data = self._f.read(n)
        if pos < 4 and data:
            k = min(4 - pos, len(data))
            data = b"RF64"[pos:pos + k] + data[k:]
        return data

    def seek(self, offset, whence=0):
        # called from libsndfile through a C callback, where an exception cannot travel: a seek
        # before the start (a corrupt length field) leaves the position where it was, and
        # libsndfile then reports the read as failed, which the reader turns into AudioReadError
        try:
            return self._f.seek(offset, whence)
        except (OSError, ValueError):
            return self._f.tell()

    def tell(self):
        return self._f.tell()

    def close(self):
        self._f.close()


def _open_master(path: str) -> int:
    """A read descriptor of the master at ``path``; AudioReadError naming why it cannot be opened."""
    from masterqc.fileio import NotRegularFile, open_regular
    try:
        return open_regular(path)
    except FileNotFoundError:
        raise AudioReadError(path, "no such file") from None
    except NotRegularFile as exc:
        if exc.kind == "a directory":
            raise AudioReadError(path, "is a directory, not an audio file") from None
        raise AudioReadError(path, str(exc)) from None
    except OSError as exc:
        raise AudioReadError(path, f"cannot be opened ({exc.strerror or exc})") from None


def _unreadable(path, cause: str) -> AudioReadError:
    """The error for a file libsndfile refuses, naming the walker's first container problem and its offset."""
    info = walk(path)
    if info.problems:
        first = info.problems[0]
        return AudioReadError(path, f"not a readable audio file ({cause}); container: {first['message']}",
                              first["offset"])
    return AudioReadError(path, f"not a readable audio file ({cause})")


def _clean(exc) -> str:
    text = str(exc)
    if "Error opening" in text and ":" in text:
        text = text.split(":", 1)[-1]
    return text.strip().rstrip(".")


def open_stream(path, channel_layout=None) -> AudioStream:
    """Open ``path`` for streaming; ``channel_layout`` optionally overrides the labels.

    Raises :class:`masterqc.errors.AudioReadError` with the file and the cause on
    a missing file, a non-audio file, a truncated header, zero frames or an
    unsupported encoding.
    """
    return AudioStream(path, channel_layout=channel_layout)
