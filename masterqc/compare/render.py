"""HTML and PDF report of a comparison, in the master report's style (``report.css``).

Rendering never measures: every number comes from the comparison result.
The plain-word summary (:func:`summary_sentences`) is shared by the report and
the command line.
"""

from __future__ import annotations

import math
from contextlib import contextmanager

import matplotlib

matplotlib.use("Agg", force=False)
import numpy as np  # noqa: E402
from markupsafe import Markup  # noqa: E402
from matplotlib.ticker import FuncFormatter  # noqa: E402

from masterqc.report import fmt, plots  # noqa: E402
from masterqc.report.view import (CAUTIONS, STATUS_COLOURS, TimeLabels, findings_view,  # noqa: E402
                                  verdict_view)

def _f(v, digits=1, unit=""):
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "n/a"
    if round(v, digits) == 0:
        v = 0.0     # never "-0.000"
    return f"{v:.{digits}f}{(' ' + unit) if unit else ''}"


def _signed(v, digits=2, unit="dB"):
    if v is None:
        return "n/a"
    if round(v, digits) == 0:
        v = 0.0
    return f"{v:+.{digits}f} {unit}"


# ---------------------------------------------------------------- plain words

def _nz(v: float, digits: int) -> float:
    """``v``, with a value that rounds to zero at ``digits`` places made +0.0 (no "-0.00")."""
    return 0.0 if round(v, digits) == 0 else v


def _change(before, after, unit: str, digits: int, what: str) -> str:
    """"<what> falls from B to A <unit> (D lower)", rises, or stays."""
    if before is None or after is None:
        return f"{what} is not known for both files"
    d = after - before
    if round(d, digits) == 0:
        return f"{what} stays at {after:.1f} {unit}"
    verb = "falls" if d < 0 else "rises"
    du = "LU" if unit == "LUFS" else "dB"
    shown = 1 if f"{before:.1f}" != f"{after:.1f}" else digits   # never "from -19.9 to -19.9"
    return (f"{what} {verb} from {before:.{shown}f} to {after:.{shown}f} {unit} "
            f"({abs(d):.{digits}f} {du} {'lower' if d < 0 else 'higher'})")


def _khz(hz: float) -> str:
    return f"{hz / 1000:.4g} kHz" if hz >= 1000 else f"{hz:g} Hz"


#: a response that varies by less than this (dB) across the ripple band is called flat in the summary
#: (house choice; the spec's own limit judges it)
FLAT_WITHIN_DB = 0.5


def summary_sentences(r: dict) -> list[str]:
    """What the comparison shows, one sentence per concern, as an engineer would write it."""
    out = []
    ident = r["identity"]
    corr = ident.get("correlation")
    rsr = ident.get("residual_re_signal_db")
    lo_i, hi_i = ident["band_hz"]
    band = f"between {_khz(lo_i)} and {_khz(hi_i)}"
    if ident["verdict"] == "same":
        text = "The deliverable is the master's programme"
        text += (f": {band}, what the master does not explain lies {-rsr:.1f} dB below the signal "
                 f"(correlation {corr:.5f})." if rsr is not None else ".")
    elif ident["verdict"] == "different_mix":
        text = (f"The deliverable is a different mix of the master's programme: {band} the two share most of "
                f"their content (correlation {corr:.3f}), but {-rsr:.1f} dB below the signal lies content the "
                "master does not hold.")
    else:
        text = ("The deliverable is not the master's programme"
                + (f" (correlation {corr:.3f} {band})." if corr is not None else ": the two share no signal."))
    out.append(text)
    same = ident["verdict"] == "same"

    a = r["alignment"]
    if a.get("offset_ms") is not None:
        smp = a.get("offset_deliverable_samples") or 0.0
        off = a["offset_ms"]
        if abs(smp) < 0.01:
            text = "It lines up with the master to within a hundredth of a sample"
        else:
            text = (f"It runs {abs(off):.3f} ms ({abs(smp):.2f} samples at the deliverable's rate) "
                    f"{'behind' if off > 0 else 'ahead of'} the master")
        if a["jumps"]:
            parts = []
            for j in a["jumps"][:4]:
                kind = "missing" if j["size_ms"] < 0 else "repeated or inserted"
                parts.append(f"{abs(j['size_ms']):.1f} ms of the master {kind} at {fmt.clock(j['at_master_s'], 3)}")
            n = len(a["jumps"])
            text += (f", but the offset jumps {({1: 'once', 2: 'twice'}).get(n, f'{n} times')} (edits): "
                     + "; ".join(parts) + ("; ..." if n > 4 else ""))
        else:
            text += " and stays there: no edits"
        if a.get("drift_ppm") is not None and abs(a["drift_ppm"]) >= 0.5:
            text += f", though its clock drifts by {a['drift_ppm']:+.1f} ppm"
        out.append(text + ".")
    else:
        out.append("No stretch of the deliverable could be aligned with the master.")

    ch = r["channels"]
    gains = [m.get("gain_db") for m in ch["matches"]]
    known = [g for g in gains if g is not None]
    if known and max(known) - min(known) < 0.01:
        g = _nz(sum(known) / len(known), 2)
        on = "both channels" if len(known) == 2 else "every channel" if len(known) > 2 else "its channel"
        level = (f"at the master's level (0.00 dB on {on})" if g == 0 else
                 f"{abs(g):.2f} dB {'quieter' if g < 0 else 'louder'} than the master on {on}")
    else:
        level = "at levels that differ by channel (" + ", ".join(
            f"{m['deliverable_channel']} {_nz(m['gain_db'], 2):+.2f} dB" for m in ch["matches"]
            if m.get("gain_db") is not None) + ")"
    order = {"same": "its channels in the master's order",
             "swapped": "left and right swapped",
             "remapped": "its channels in another order than the master's (" + ", ".join(
                 f"{m['deliverable_channel']} from {m['master_channel']}" for m in ch["matches"]) + ")",
             "ambiguous": "a channel order the content cannot tell (the channels are too alike)"}[ch["order"]]
    inv = ch.get("polarity_inverted") or []
    pol = f"polarity inverted on {', '.join(inv)}" if inv else "the master's polarity"
    out.append(f"The deliverable is {level}, with {order} and {pol}.")
    if not same:
        out.append("The conversion figures below compare different content and say little about the converter.")

    t = r["transfer"]
    if t.get("passband_ripple_db") is not None:
        lo, hi = t["ripple_band_hz"]
        rip = t["passband_ripple_db"]
        text = (f"The response is flat within {rip:.3f} dB from {lo:g} Hz to {_khz(hi)}" if rip < FLAT_WITHIN_DB
                else f"The response is not flat: it varies by {rip:.2f} dB from {lo:g} Hz to {_khz(hi)}")
        if t.get("level_at_20khz_db") is not None:
            v = _nz(t["level_at_20khz_db"], 3 if abs(t["level_at_20khz_db"]) < 0.1 else 2)
            text += (", with no loss at 20 kHz" if v == 0 else
                     f", and is {abs(v):.{3 if abs(v) < 0.1 else 2}f} dB {'down' if v < 0 else 'up'} at 20 kHz")
        if t.get("minus_3db_hz") is not None:
            text += (f"; the filter is 3 dB down at {_khz(t['minus_3db_hz'])}, {t['minus_3db_re_nyquist']:.3f} "
                     f"of the new Nyquist frequency ({_khz(t['nyquist_new_hz'])})")
        else:
            top = t["common_band_hz"][1]
            top = t["nyquist_new_hz"] if abs(top - t["nyquist_new_hz"]) <= 20.0 else top   # (the last bin)
            text += f"; nowhere below {_khz(top)} does it fall by 3 dB"
        out.append(text + ".")

    rs = r["residue"]
    nyq = _khz(t["nyquist_new_hz"])
    if rs.get("folded_found") is not None:
        if rs["folded_found"]:
            out.append(f"Content from above {nyq} folded down into the audio band at "
                       f"{_f(rs['folded_re_signal_db'])} dB against the signal: the converter let through what "
                       "its anti-alias filter should have removed.")
        else:
            est = rs.get("folded_re_signal_db")
            out.append(f"Nothing measurable folded down from above {nyq}"
                       + (f" (estimate {est:.1f} dB against the signal, under the detection floor of "
                          f"{rs['folded_detection_floor_db']:.1f} dB)." if est is not None and
                          rs.get("folded_detection_floor_db") is not None else "."))
    if rs.get("above_master_band_re_signal_db") is not None:
        out.append(f"Above {_khz(r['master']['sample_rate_hz'] / 2)}, where the master has nothing, the deliverable "
                   f"holds content at {_f(rs['above_master_band_re_signal_db'])} dB against the signal: images "
                   "the upsampler left.")

    q = r["requantisation"]
    if q.get("residual_power_dbfs") is not None and same:
        bits = r["deliverable"]["bit_depth"]
        text = f"What remains after alignment, gain and response lies at {q['residual_power_dbfs']:.1f} dBFS"
        rel = q.get("residual_re_tpdf_db")
        if rel is not None:
            rel = _nz(rel, 1)
            text += (f", {abs(rel):.1f} dB {'above' if rel > 0 else 'below'} the "
                     f"{q['expected_tpdf_power_dbfs']:.1f} dBFS that {bits}-bit TPDF dither adds" if rel else
                     f", the level {bits}-bit TPDF dither adds")
        if q.get("effective_bits"):
            text += f" (about {q['effective_bits']:.1f} effective bits)"
        change = q.get("quiet_residual_change_db")
        if q["verdict"] == "dithered":
            shape = {"flat": "its spectrum is flat and ", "shaped": "its spectrum is shaped and "}.get(
                q["spectrum_shape"], "")
            text += f"; {shape}it stays level through the fades: requantised with dither."
        elif q["verdict"] == "signal_correlated":
            how = "Truncated" if (change or 0) > 0 else "Rounded"
            text += (f"; it {'rises' if (change or 0) > 0 else 'falls'} by {abs(change or 0):.1f} dB where the "
                     f"signal drops below it. {how} to {bits} bits without dither: the error follows the signal "
                     "in the fades. Requantise with TPDF dither.")
        elif rel is not None and rel > 10.0:
            text += (": other errors (the converter, processing) hide the requantisation, so dither cannot be "
                     "assessed.")
        else:
            text += f". Dither cannot be assessed: {q.get('verdict_reason') or 'too little to go on'}."
        out.append(text)

    pl = r["peaks_loudness"]
    text = (_change(pl["master_true_peak_dbtp"], pl["deliverable_true_peak_dbtp"], "dBTP", 2, "True peak") + "; "
            + _change(pl["master_integrated_lufs"], pl["deliverable_integrated_lufs"], "LUFS", 2,
                      "integrated loudness"))
    n = pl["overs_introduced_count"]
    if n:
        first = pl["overs_introduced"][0]
        text += (f". The conversion added {n} over{'s' if n != 1 else ''} or clipped run{'s' if n != 1 else ''}, "
                 f"the first at {fmt.clock(first['start_s'], 3)}")
    else:
        text += ". The conversion added no overs or clipped runs"
    out.append(text + ".")
    return out


# ---------------------------------------------------------------- plots

def _hz(x, _pos=None):
    return f"{x / 1000:g}k" if x >= 1000 else f"{x:g}"


def _values(seq) -> np.ndarray:
    """A result series as floats, its nulls as NaN."""
    return np.array([np.nan if v is None else v for v in seq], float)


def _abscissa(r: dict, key: str) -> np.ndarray | None:
    """The series ``key`` of the result as floats, or None when it holds too few points to plot."""
    x = np.asarray(r["series"][key], float)
    return x if x.size >= 2 else None


@contextmanager
def _plot(height_in: float, *rects, share_first: tuple = ()):
    """The report's plot style and a figure ``height_in`` high with one axes per rectangle
    (figure fractions, created in order); axes whose index is in ``share_first`` share the
    first one's x axis.  Yields ``(figure, [axes])``."""
    with matplotlib.rc_context(plots.STYLE):
        fig = plots._figure(height_in)
        axes = []
        for i, rect in enumerate(rects):
            axes.append(fig.add_axes(rect, sharex=axes[0]) if i in share_first else fig.add_axes(rect))
        yield fig, axes


def _frequency_axis(ax, f: np.ndarray | None = None) -> None:
    """Frequency ticks as 20, 1k, 10k; with ``f``, a logarithmic axis from 20 Hz to just past its last bin."""
    if f is not None:
        ax.set_xscale("log")
        ax.set_xlim(20.0, f[-1] * 1.05)
    ax.xaxis.set_major_formatter(FuncFormatter(_hz))


def transfer_plot(r: dict) -> str | None:
    f = _abscissa(r, "frequency_hz")
    if f is None:
        return None
    h = _values(r["series"]["transfer_db"])
    c = _values(r["series"]["coherence"])
    t = r["transfer"]
    with _plot(5.6, (0.085, 0.62, 0.89, 0.31), (0.085, 0.07, 0.89, 0.14), (0.085, 0.3, 0.89, 0.23),
               share_first=(1,)) as (fig, (ax, ax2, ax3)):
        # the pass band at a scale that shows the ripple, on a linear axis up to the new Nyquist frequency
        lo_r, hi_r = t["ripple_band_hz"]
        band = (f >= lo_r) & (f <= hi_r) & np.isfinite(h)
        span = max(0.02, 1.5 * float(np.max(np.abs(h[band])))) if band.any() else 1.0
        ax3.plot(f, h, color=plots.BLUE, lw=1.0)
        ax3.axvspan(lo_r, hi_r, color=plots.GREY, alpha=0.07, lw=0)
        ax3.axvline(t["nyquist_new_hz"], color=plots.BLACK, lw=0.9, ls=(0, (1, 1.2)))
        ax3.set_xlim(0.0, min(t["nyquist_new_hz"], f[-1]) * 1.01)
        ax3.set_ylim(-span, span)
        ax3.set_ylabel("pass band (dB)")
        ax3.set_xlabel("frequency (Hz), linear; shaded: the ripple band")
        _frequency_axis(ax3)
        ax.plot(f, h, color=plots.BLUE, lw=1.0, label="|H(f)| re the broadband gain")
        ax.axhline(-3.0, color=plots.GREY, lw=0.8, ls=(0, (4, 2)), label="-3 dB")
        ax.axvline(t["nyquist_new_hz"], color=plots.BLACK, lw=0.9, ls=(0, (1, 1.2)), label="new Nyquist")
        if t.get("minus_3db_hz"):
            ax.axvline(t["minus_3db_hz"], color=plots.VERMILION, lw=0.9, ls=(0, (6, 2, 1, 2)), label="-3 dB point")
        fin = h[np.isfinite(h)]
        lo = max(float(np.min(fin)) - 1.0, -60.0) if fin.size else -60.0
        ax.set_ylim(lo, 2.0)
        _frequency_axis(ax, f)  # (ax2 shares it)
        ax.set_ylabel("level (dB)")
        plots._legend(ax, ncol=4)
        ax2.plot(f, c, color=plots.GREEN, lw=0.9, ls=(0, (5, 2)))
        ax2.set_ylim(0.0, 1.05)
        ax2.set_ylabel("coherence")
        ax2.set_xlabel("frequency (Hz), logarithmic")
        return plots._to_svg(fig, "transfer", "Transfer function and coherence")


def residual_plot(r: dict) -> str | None:
    f = _abscissa(r, "frequency_hz")
    if f is None:
        return None
    s = r["series"]
    y = _values(s["residual_psd_dbfs_per_hz"])
    with _plot(2.6, (0.085, 0.17, 0.89, 0.66)) as (fig, (ax,)):
        ax.plot(f, y, color=plots.VERMILION, lw=0.9, label="residual (per channel)")
        e = s.get("expected_tpdf_psd_dbfs_per_hz")
        if e is not None:
            ax.axhline(e, color=plots.BLACK, lw=0.9, ls=(0, (4, 2)),
                       label=f"{r['deliverable']['bit_depth']}-bit TPDF dither, expected")
        lo, hi = r["transfer"]["ripple_band_hz"]
        ax.axvspan(lo, hi, color=plots.GREY, alpha=0.07, lw=0)
        _frequency_axis(ax, f)
        vals = y[np.isfinite(y)]
        if vals.size:
            top = max(float(np.percentile(vals, 99)), e if e is not None else -1e9) + 10
            ax.set_ylim(top - 90, top)
        ax.set_ylabel("level (dB re FS\u00b2/Hz)")
        ax.set_xlabel("frequency (Hz), logarithmic; shaded: the band the requantisation is measured in")
        plots._legend(ax, ncol=3)
        return plots._to_svg(fig, "residual", "Residual spectrum against the expected dither level")


def offset_plot(r: dict) -> str | None:
    t = _abscissa(r, "offset_time_s")
    if t is None:
        return None
    o = _values(r["series"]["offset_ms"])
    with _plot(2.3, (plots.TIME_LEFT, 0.2, plots.TIME_WIDTH, 0.62)) as (fig, (ax,)):
        ax.plot(t, o, ".", ms=2.0, color=plots.BLUE, label="offset per frame")
        for j in r["alignment"]["jumps"]:
            ax.axvline(j["at_master_s"], color=plots.VERMILION, lw=0.9, ls=(0, (4, 2)))
        if r["alignment"]["jumps"]:
            ax.plot([], [], color=plots.VERMILION, lw=0.9, ls=(0, (4, 2)), label="jump (edit)")
        fin = o[np.isfinite(o)]
        if fin.size:
            lo, hi = float(np.min(fin)), float(np.max(fin))
            pad = max(0.05, 0.1 * (hi - lo))
            ax.set_ylim(lo - pad, hi + pad)
        ax.set_xlim(0.0, max(float(t[-1]), 1e-3))
        axis = plots.TimeAxis()
        ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _p: axis.tick(x)))
        ax.set_xlabel(f"master {axis.label}")
        ax.set_ylabel("offset (ms)")
        plots._legend(ax, ncol=2)
        return plots._to_svg(fig, "offset", "Offset of the deliverable over time")


# ---------------------------------------------------------------- view and documents

def _file_rows(fi: dict) -> list[tuple[str, str]]:
    enc = "float" if fi["is_float"] else "PCM"
    return [("File", fi["path"]), ("Rate", f"{fi['sample_rate_hz']} Hz"),
            ("Encoding", f"{fi['bit_depth']}-bit {enc} ({fi['encoding']})"),
            ("Channels", f"{fi['channels']} ({', '.join(fi['channel_layout'])})"),
            ("Duration", fmt.clock(fi["duration_s"], 3))]


#: the findings' labels in the report (the check ids stay beside them)
CHECK_LABELS = {
    "derivation.identity": "Same programme", "derivation.gain": "Gain", "derivation.polarity_inverted": "Polarity",
    "derivation.channel_order": "Channel order", "derivation.passband_ripple": "Pass-band ripple",
    "derivation.level_at_20khz": "Level at 20 kHz", "derivation.folded_residue": "Folded content",
    "derivation.image_residue": "Images above the master's band", "derivation.other_residue": "Unexplained residue",
    "derivation.dither_required": "Dither", "derivation.loudness_change": "Loudness change",
    "derivation.true_peak_after": "True peak after conversion", "derivation.overs_introduced": "Overs added",
    "derivation.jumps": "Edits (offset jumps)"}

#: the measurement settings in words, in this order (unknown keys follow as they are)
SETTING_LABELS = {
    "frame_s": ("Frame length", "s"), "hop_s": ("Hop", "s"), "window": ("Window", ""),
    "frame_samples_master": ("Frame, master samples", ""), "frame_samples_deliverable": ("Frame, deliverable samples", ""),
    "bin_hz": ("Bin spacing", "Hz"), "frames_used": ("Frames in the statistics", ""),
    "effective_frames": ("Independent averages (Welch)", ""), "envelope_hop_s": ("Envelope hop (coarse alignment)", "s"),
    "fractional_delay": ("Fractional delay of the master", ""),
    "mirror_families": ("Mirrored bin families (folding model)", ""), "inputs_per_bin": ("Regression inputs per bin", ""),
    "identity_same_min_correlation": ("Same programme from correlation", ""),
    "identity_mix_min_correlation": ("Different mix from correlation", ""),
    "quiet_within_db": ("Quiet frames: signal below the residual plus", "dB"),
    "flat_max_spread_db": ("Flat residual spectrum: bands within", "dB"),
    "true_peak_ceiling_dbtp": ("Ceiling for true-peak overs", "dBTP"), "elapsed_s": ("Time taken", "s")}


def _settings_rows(settings: dict) -> list[tuple[str, str]]:
    rows = []
    for k in list(SETTING_LABELS) + sorted(set(settings) - set(SETTING_LABELS)):
        if k not in settings:
            continue
        label, unit = SETTING_LABELS.get(k, (k, ""))
        v = settings[k]
        if isinstance(v, float):
            v = f"{v:.2f}" if k == "elapsed_s" else f"{v:.6g}"
        rows.append((label, f"{v} {unit}".strip()))
    return rows


def _quiet_text(q: dict) -> str:
    n = q["quiet_frames"]
    change = q.get("quiet_residual_change_db")
    if not n or change is None:
        return f"{n} (too few to compare with the loud passages)" if n else "none"
    verb = "rises" if change > 0 else "falls" if change < 0 else "stays"
    text = f"{n}; there the error {verb}"
    if verb != "stays":
        text += f" by {abs(change):.2f} dB"
    if q.get("signal_correlation") is not None:
        text += f" (correlation with the signal level {q['signal_correlation']:.2f})"
    return text


def build_view(r: dict) -> dict:
    labels = TimeLabels({})
    findings = findings_view(r, labels)
    for f in findings:
        f["label"] = CHECK_LABELS.get(f["check"], f["label"])
    verdict = verdict_view({**r, "measurements": {}}, findings)
    t, rs, q, pl, a = r["transfer"], r["residue"], r["requantisation"], r["peaks_loudness"], r["alignment"]
    ch = r["channels"]
    matrix = {"columns": ["deliverable \\ master"] + r["master"]["channel_layout"],
              "rows": [[r["deliverable"]["channel_layout"][i]] + [f"{v:+.3f}" for v in row]
                       for i, row in enumerate(ch["correlation_matrix"])]}
    chan_rows = {"columns": ["Deliverable", "Master", "Correlation", "Gain", "Polarity"],
                 "rows": [[m["deliverable_channel"], m["master_channel"], f"{m['correlation']:+.5f}",
                           _signed(m["gain_db"], 3), m["polarity"]] for m in ch["matches"]]}
    jumps = {"columns": ["Master time", "Deliverable time", "Size", "Offset before", "Offset after"],
             "rows": [[fmt.clock(j["at_master_s"], 3), fmt.clock(j["at_deliverable_s"], 3),
                       f"{j['size_ms']:+.2f} ms", f"{j['offset_before_ms']:.3f} ms", f"{j['offset_after_ms']:.3f} ms"]
                      for j in a["jumps"]]}
    overs = {"columns": ["Kind", "Channel", "From", "To"],
             "rows": [[o["kind"].replace("_", " "), o["channel"] or "any", fmt.clock(o["start_s"], 3),
                       fmt.clock(o["end_s"], 3)] for o in pl["overs_introduced"][:40]]}
    spec = r.get("spec") or {}
    return {
        "title": f"{r['deliverable']['path']} against {r['master']['path']}",
        "spec_name": spec.get("name"),
        "spec_note": spec.get("note"),
        "verdict": verdict, "findings": findings, "summary": summary_sentences(r),
        "master_rows": _file_rows(r["master"]), "deliverable_rows": _file_rows(r["deliverable"]),
        "alignment_rows": [
            ("Offset (median)", f"{_f(a['offset_ms'], 4)} ms ({_f(a['offset_deliverable_samples'], 3)} samples)"),
            ("Coarse offset (envelopes)", f"{_f(a['coarse_offset_ms'], 2)} ms"),
            ("Drift", f"{_f(a['drift_ppm'], 2)} ppm"), ("Spread of the offsets", f"{_f(a['offset_spread_ms'], 5)} ms"),
            ("Frames aligned", f"{100 * a['aligned_fraction']:.1f} %" + (" (the others hold too little signal to place)" if a["aligned_fraction"] < 0.99 else "")),
            ("Frames", f"{a['frame_s'] * 1000:g} ms, hop {a['hop_s'] * 1000:g} ms")],
        "jumps": jumps if jumps["rows"] else None,
        "offset_svg": Markup(offset_plot(r) or ""),
        "identity_rows": [("Programme", {"same": "the master's", "different_mix": "a different mix of the master's",
                                         "different_programme": "not the master's"}[r["identity"]["verdict"]]),
                          ("Correlation", _f(r["identity"]["correlation"], 6)),
                          ("Not explained by the master", f"{_f(r['identity']['residual_re_signal_db'])} dB against "
                                                          "the signal"),
                          ("Thresholds", f"same programme from a correlation of "
                                         f"{r['identity']['same_min_correlation']:.5f}, a different mix from "
                                         f"{r['identity']['mix_min_correlation']:.2f}")],
        "channels": chan_rows, "matrix": matrix,
        "channel_order": {"same": "in the master's order", "swapped": "left and right swapped",
                          "remapped": "in another order than the master's",
                          "ambiguous": "order cannot be told (the channels are too alike)"}[ch["order"]],
        "transfer_rows": [
            ("Pass-band ripple", f"{_f(t['passband_ripple_db'], 4)} dB ({t['ripple_band_hz'][0]:g} Hz to "
                                 f"{t['ripple_band_hz'][1] / 1000:.2f} kHz)"),
            ("Level at 20 kHz", f"{_f(t['level_at_20khz_db'], 3)} dB"),
            ("-3 dB point", f"{_f(t['minus_3db_hz'], 0)} Hz ({_f(t['minus_3db_re_nyquist'], 4)} of the new Nyquist "
                            f"frequency {t['nyquist_new_hz']:g} Hz)"),
            ("Mean coherence", _f(t["mean_coherence"], 6))],
        "transfer_svg": Markup(transfer_plot(r) or ""),
        "residue_rows": [
            ("Folded down",
             f"{_f(rs['folded_re_signal_db'])} dB against the signal"
             + {True: " (found)", False: " (under the detection floor)", None: ""}[rs["folded_found"]]),
            ("Detection floor", f"{_f(rs['folded_detection_floor_db'])} dB against the signal"),
            ("Above the master's band", f"{_f(rs['above_master_band_re_signal_db'])} dB against the signal"
             if rs["above_master_band_re_signal_db"] is not None else "none possible (the deliverable's rate is "
                                                                      "not above the master's)"),
            ("Other residue", f"{_f(rs['other_re_signal_db'])} dB against the signal")],
        "requant_rows": [
            ("Residual power", f"{_f(q['residual_power_dbfs'], 2)} dBFS"),
            ("TPDF dither expected", f"{_f(q['expected_tpdf_power_dbfs'], 2)} dBFS"),
            ("Residual against the dither", f"{_signed(q['residual_re_tpdf_db'], 2)}"),
            ("Effective bit depth", f"{_f(q['effective_bits'], 2)} bits"),
            ("Spectrum", f"{q['spectrum_shape']} (its bands within {_f(q['spectrum_spread_db'], 1)} dB)"
             if q["spectrum_shape"] != "unknown" else "not measured"),
            ("Quiet frames", _quiet_text(q)),
            ("Dither", {"dithered": "yes: the error stays level through the fades",
                        "signal_correlated": "none: the error follows the signal",
                        "unknown": f"not assessed: {q.get('verdict_reason') or 'too little to go on'}"}[q["verdict"]])],
        "residual_svg": Markup(residual_plot(r) or ""),
        "peaks_rows": [
            ("True peak", f"master {_f(pl['master_true_peak_dbtp'], 2, 'dBTP')}, deliverable "
                          f"{_f(pl['deliverable_true_peak_dbtp'], 2, 'dBTP')} (change {_signed(pl['true_peak_change_db'])})"),
            ("Integrated loudness", f"master {_f(pl['master_integrated_lufs'], 2, 'LUFS')}, deliverable "
                                    f"{_f(pl['deliverable_integrated_lufs'], 2, 'LUFS')} "
                                    f"(change {_signed(pl['loudness_change_lu'], 2, 'LU')})"),
            ("Overs added", str(pl["overs_introduced_count"]))],
        "overs": overs if overs["rows"] else None,
        "settings": _settings_rows(r.get("settings", {})),
        "format_version": r.get("result_format_version"),
        "cautions": CAUTIONS[:1] + [
            "Listening to a folded or truncated deliverable: set your monitoring level low first; the "
            "distortion of a truncated fade is easiest to hear at high gain, which is where it is loudest."],
    }


def render_html(r: dict) -> str:
    from masterqc.report.render import _CSS, _env  # the master report's environment and stylesheet
    env = _env()
    from masterqc.report import render as base
    template = env.get_template("compare.html.j2")
    return template.render(v=build_view(r), css=Markup(base._CSS or _CSS), colours=STATUS_COLOURS,
                           tool_version=str((r.get("tool") or {}).get("version", "")))


def render_pdf(r: dict, html: str | None = None) -> bytes:
    import weasyprint

    from masterqc.report.render import inline_only_fetcher
    if html is None:
        html = render_html(r)
    return weasyprint.HTML(string=html, base_url=None, url_fetcher=inline_only_fetcher()).write_pdf()
