"""Reading: stream float blocks and container facts from WAV/BWF/RF64, AIFF and FLAC."""

from masterqc.audio.reader import AudioStream, StreamInfo, open_stream

__all__ = ["AudioStream", "StreamInfo", "open_stream"]
