"""``derivation:`` -- how a deliverable must relate to the master it was made from (``masterqc compare``)::

    derivation:
      identity: [same]                        # same | different_mix | different_programme
      gain: {min_db: -0.1, max_db: 0.1}       # broadband gain against the master
      polarity_inverted: {max_count: 0}       # channels found inverted
      channel_order: [same]                   # same | swapped | remapped | ambiguous
      passband_ripple: {max_db: 0.1}          # max - min of |H| from 20 Hz to min(20 kHz, 0.9 x new Nyquist)
      level_at_20khz: {min_db: -0.5}          # droop of the conversion at 20 kHz
      folded_residue: {max_db: -90.0}         # power folded from above the new Nyquist, re the signal
      image_residue: {max_db: -90.0}          # power above the master's Nyquist (upsampled deliverables)
      other_residue: {max_db: -60.0, severity: warn}
      dither_required: true                   # a requantisation whose error follows the signal fails
      loudness_change: {min_lu: -0.1, max_lu: 0.1}
      true_peak_after: {max_dbtp: -1.0}       # true peak of the deliverable; also the level of "overs"
      overs_introduced: {max_count: 0}        # clipped runs and true-peak overs the master does not have
      jumps: {max_count: 0}                   # edits: steps in the offset along the programme

Used only by ``masterqc compare``; ``check`` ignores it.  The figures above are
illustrations (own reasoning), not taken from a standard: the receiving party
sets its own.
"""

from __future__ import annotations

from typing import Literal

from pydantic import Field

from masterqc.spec.types import SpecModel, allowed, bounds, ceiling, floor


class Section(SpecModel):
    """Requirements on a deliverable measured against its master."""

    identity: allowed(Literal["same", "different_mix", "different_programme"], "same", "AllowedIdentity") | None = Field(
        None, description="allowed identity verdicts: same, different_mix, different_programme")
    gain: bounds("db") | None = Field(None, description="broadband gain of the deliverable against the master, dB")
    polarity_inverted: ceiling("count") | None = Field(None, description="most channels allowed inverted")
    channel_order: allowed(Literal["same", "swapped", "remapped", "ambiguous"], "same",
                           "AllowedChannelOrder") | None = Field(
        None, description="allowed channel orders: same, swapped, remapped, ambiguous")
    passband_ripple: ceiling("db") | None = Field(None, description="largest pass-band ripple of H(f), dB")
    level_at_20khz: floor("db") | None = Field(None, description="lowest level of H at 20 kHz re the gain, dB")
    folded_residue: ceiling("db") | None = Field(
        None, description="most power folded from above the new Nyquist frequency, re the signal, dB")
    image_residue: ceiling("db") | None = Field(
        None, description="most power above the master's Nyquist frequency, re the signal, dB")
    other_residue: ceiling("db") | None = Field(
        None, description="most residual power not explained by the master, re the signal, dB")
    dither_required: bool | None = Field(
        None, description="true: a requantisation error that follows the signal (no dither) fails")
    loudness_change: bounds("lu") | None = Field(None, description="integrated loudness change, LU")
    true_peak_after: ceiling("dbtp") | None = Field(None, description="true-peak ceiling of the deliverable, dBTP")
    overs_introduced: ceiling("count") | None = Field(
        None, description="most clipped runs and true-peak overs the conversion may add")
    jumps: ceiling("count") | None = Field(None, description="most jumps (edits) of the offset allowed")
