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

from pydantic import Field

from masterqc.spec.types import SpecModel, allowed

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
