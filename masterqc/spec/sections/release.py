"""``release:`` -- requirements on a release folder as a whole (album, season, batch of episodes)::

    release:
      pooled_loudness: {target_lufs: -14.0, tolerance_lu: 1.0}   # all tracks gated together
      track_loudness_spread: {max_lu: 4.0, severity: warn}        # loudest minus quietest track
      consistent_format: {sample_rate: true, bit_depth: true, channels: true}
      track_count: {min_count: 8, max_count: 20}

Judged once per release by ``masterqc check FOLDER`` (see :mod:`masterqc.batch.releases`),
never per file.  The pooled loudness is the integrated loudness of the gating
blocks of every track gated together, as ITU-R BS.1770-5 defines the loudness
of one programme (album normalisation in AES TD1008 relies on such a figure).
"""

from __future__ import annotations

from pydantic import Field

from masterqc.spec.types import Severity, SpecModel, bounds, ceiling, target


class FormatConsistency(SpecModel):
    """Which format facts must be the same for every file of a release."""

    sample_rate: bool = Field(True, description="every file has the same sample rate")
    bit_depth: bool = Field(True, description="every file has the same bit depth (and float or integer encoding)")
    channels: bool = Field(True, description="every file has the same channel count")
    severity: Severity = Field("fail", description="'fail' (default) or 'warn': what a mixed release gives")


class Section(SpecModel):
    """Release-level requirements (pooled loudness, loudness spread, format consistency, track count)."""

    pooled_loudness: target("lufs") | None = Field(
        None, description="integrated loudness of all tracks' gating blocks gated together, LUFS")
    track_loudness_spread: ceiling("lu") | None = Field(
        None, description="integrated loudness of the loudest track minus that of the quietest, LU")
    consistent_format: FormatConsistency | None = Field(
        None, description="format facts that must agree across the release")
    track_count: bounds("count") | None = Field(None, description="number of files in the release")
