"""``format:`` -- what the delivered file must be: container, encoding, rate, depth, channels.

Each key is an allowed-values list, written as a plain list (a miss fails) or
as ``{allowed: [...], severity: warn}``::

    format:
      containers: [wav, rf64]
      encodings: [pcm_24]
      sample_rates_hz: [48000]
      bit_depths: [24]
      channel_counts: [2]
      channel_layouts: [[L, R]]
"""

from __future__ import annotations

from typing import Literal

from pydantic import Field, field_validator

from masterqc.contract import NO_UNIT, Check
from masterqc.spec.types import SpecModel, allowed

_UNKNOWN = "the value is unknown for this file"

#: the allowed-values checks of this section (judged by masterqc.judge.core.judge_checks)
CHECKS = (
    Check("containers", "format.container", "format.container", NO_UNIT, "container", _UNKNOWN, kind="allowed"),
    Check("encodings", "format.encoding", "format.encoding", NO_UNIT, "encoding", _UNKNOWN, kind="allowed"),
    Check("sample_rates_hz", "format.sample_rate", "format.sample_rate_hz", "hz", "sample rate", _UNKNOWN,
          kind="allowed", show=lambda v: f"{v} Hz"),
    Check("bit_depths", "format.bit_depth", "format.bit_depth", "bits", "bit depth", _UNKNOWN, kind="allowed",
          show=lambda v: f"{v}-bit"),
    Check("channel_counts", "format.channels", "format.channels", NO_UNIT, "channel count", _UNKNOWN,
          kind="allowed"),
    Check("channel_layouts", "format.channel_layout", "format.channel_layout", NO_UNIT, "channel layout",
          "the file does not say which channel is which (no channel mask, no usual order for this count)",
          kind="allowed", show=lambda v: "[" + ", ".join(v) + "]",
          null_when=("format.channel_layout_source", "unknown")),
)

Container = Literal["wav", "rf64", "w64", "aiff", "flac", "caf"]
Encoding = Literal["pcm_8", "pcm_16", "pcm_24", "pcm_32", "float_32", "float_64"]


class Section(SpecModel):
    """Requirements on the file's format (compared with ``result["format"]``)."""

    containers: allowed(Container, "wav", "AllowedContainers") | None = Field(
        None, description="allowed containers: wav, rf64, w64, aiff, flac, caf")
    encodings: allowed(Encoding, "pcm_24", "AllowedEncodings") | None = Field(
        None, description="allowed sample encodings: pcm_8, pcm_16, pcm_24, pcm_32, float_32, float_64")
    sample_rates_hz: allowed(int, "48000") | None = Field(None, description="allowed sample rates, Hz")
    bit_depths: allowed(int, "24") | None = Field(None, description="allowed bit depths (bits per sample)")
    channel_counts: allowed(int, "2") | None = Field(None, description="allowed numbers of channels")
    channel_layouts: allowed(list[str], "[L, R]") | None = Field(
        None, description="allowed channel layouts, each a list of labels in file order, e.g. [L, R, C, LFE, Ls, Rs]")

    @field_validator("sample_rates_hz", "bit_depths", "channel_counts")
    @classmethod
    def _positive(cls, value, info):
        """A rate, depth or channel count of zero or less is a value no delivery can mean."""
        if value is not None:
            for i, v in enumerate(value.allowed):
                if v <= 0:
                    raise ValueError(f"{info.field_name}[{i}] is {v}: it must be 1 or more")
        return value

    @field_validator("channel_layouts")
    @classmethod
    def _labels(cls, value):
        """Every channel label names a channel: an empty or blank label is refused, as is an empty layout."""
        if value is not None:
            for i, layout in enumerate(value.allowed):
                if not layout:
                    raise ValueError(f"channel_layouts[{i}] is empty: list one label per channel")
                for j, label in enumerate(layout):
                    if not label.strip():
                        raise ValueError(f"channel_layouts[{i}][{j}] is an empty channel label")
        return value
