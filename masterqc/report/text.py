"""Plain-text rendering of a result for the terminal."""

from __future__ import annotations

from masterqc.contract import unit_of_key
from masterqc.fileio import shown


def _fmt(value, unit="", digits=1):
    if value is None:
        return "n/a"
    if isinstance(value, float):
        return f"{value:.{digits}f}{(' ' + unit) if unit else ''}"
    return f"{value}{(' ' + unit) if unit else ''}"


# (key, label) shown by ``masterqc measure`` in this order when present; unit and decimals
# come from the key through the one unit table (masterqc.contract.UNITS)
TABLE_KEYS = [
    ("integrated_lufs", "Integrated loudness"),
    ("loudness_range_lu", "Loudness range"),
    ("max_momentary_lufs", "Max momentary loudness"),
    ("max_short_term_lufs", "Max short-term loudness"),
    ("true_peak_dbtp", "True peak"),
    ("sample_peak_dbfs", "Sample peak"),
]
TABLE_ROWS = [(key, label, unit_of_key(key).label, unit_of_key(key).decimals) for key, label in TABLE_KEYS]


def measurement_table(result: dict) -> str:
    """A readable table of the format and the main measurements."""
    fmt = result["format"]
    m = result["measurements"]
    lines = [
        f"File          {shown(result['file']['path'])}",
        f"Format        {fmt['container']} {fmt['encoding']}, {fmt['sample_rate_hz']} Hz, "
        f"{fmt['channels']} ch ({' '.join(fmt['channel_layout'])}"
        f"{', layout unknown: weights 1.0' if fmt.get('channel_layout_source') == 'unknown' else ''})",
        f"Duration      {fmt['duration_s']:.3f} s ({fmt['frames']} frames)",
    ]
    lines += _metadata_lines(result.get("metadata") or {})
    lines.append("")
    width = max(len(label) for _k, label, _u, _d in TABLE_ROWS)
    for key, label, unit, digits in TABLE_ROWS:
        if key in m:
            lines.append(f"{label:<{width}}  {_fmt(m[key], unit, digits)}")
    per = m.get("true_peak_dbtp_per_channel")
    if per:
        labels = fmt["channel_layout"]
        lines.append(f"{'True peak per channel':<{width}}  " +
                     ", ".join(f"{lab} {_fmt(v, '', unit_of_key('true_peak_dbtp').decimals)}"
                               for lab, v in zip(labels, per)) + " dBTP")
    return "\n".join(lines) + "\n"


def _metadata_lines(meta: dict) -> list[str]:
    """Start timecode, bext loudness fields, ISRC and container problems, when present."""
    out = []
    if meta.get("start_timecode"):
        out.append(f"Start         {meta['start_timecode']} ({meta.get('timecode_fps')} fps, from "
                   f"{meta.get('time_reference_source')}: {meta.get('time_reference_samples')} samples)")
    bx = meta.get("bext")
    if bx:
        stored = [(k, bx.get(k)) for k in ("loudness_value_lufs", "loudness_range_lu", "max_true_peak_level_dbtp")]
        units = {"loudness_value_lufs": "LUFS", "loudness_range_lu": "LU", "max_true_peak_level_dbtp": "dBTP"}
        shown = ", ".join(f"{v:.2f} {units[k]}" for k, v in stored if v is not None)
        out.append(f"bext          version {bx.get('version')}" + (f", stored loudness {shown}" if shown else ""))
    for e in meta.get("isrc") or []:
        state = e.get("display") if e.get("valid") else f"{e.get('raw')!r} malformed: {e.get('problem')}"
        out.append(f"ISRC          {state} ({e.get('source')})")
    problems = meta.get("problems") or []
    if problems:
        out.append(f"Container     {len(problems)} problem{'s' if len(problems) != 1 else ''}:")
        out += [f"  at byte {p['offset']}: {p['message']}" for p in problems[:10]]
        if len(problems) > 10:
            out.append(f"  ... and {len(problems) - 10} more (see --json)")
    return out
