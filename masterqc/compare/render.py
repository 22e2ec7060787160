"""HTML and PDF report of a comparison, in the master report's style (``report.css``).

Rendering never measures: every number comes from the comparison result.
The plain-word summary (:func:`summary_sentences`) is shared by the report and
the command line.
"""

from __future__ import annotations

import math

import matplotlib

matplotlib.use("Agg", force=False)
import numpy as np  # noqa: E402
from markupsafe import Markup  # noqa: E402
from matplotlib.ticker import FuncFormatter  # noqa: E402

from masterqc.report import fmt, plots  # noqa: E402
from masterqc.report.view import (CAUTIONS, STATUS_COLOURS, TimeLabels, findings_view,  # noqa: E402
                                  verdict_view)

_ID = {"same": "the same programme as the master", "different_mix": "a different mix of the master's programme",
       "different_programme": "a different programme from the master"}


def _f(v, digits=1, unit=""):
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "n/a"
    return f"{v:.{digits}f}{(' ' + unit) if unit else ''}"


def _signed(v, digits=2, unit="dB"):
    if v is None:
        return "n/a"
    return f"{v:+.{digits}f} {unit}"


# ---------------------------------------------------------------- plain words

def summary_sentences(r: dict) -> list[str]:
    """What the comparison shows, one sentence per concern, as an engineer would write it."""
    out = []
    ident = r["identity"]
    corr = ident.get("correlation")
    rsr = ident.get("residual_re_signal_db")
    out.append(f"The deliverable is {_ID[ident['verdict']]} (correlation {_f(corr, 5)} in "
               f"{ident['band_hz'][0]:g} Hz to {ident['band_hz'][1] / 1000:g} kHz; what the master does not "
               f"explain lies {_f(-rsr if rsr is not None else None)} dB below the signal).")
    same = ident["verdict"] == "same"
    a = r["alignment"]
    if a.get("offset_ms") is not None:
        off = a["offset_ms"]
        where = "later than" if off > 0 else "earlier than" if off < 0 else "in step with"
        smp = a.get("offset_deliverable_samples")
        text = (f"It runs {abs(off):.3f} ms {where} the master ({smp:+.2f} deliverable samples)"
                if off else "It runs in step with the master (offset 0)")
        if a["jumps"]:
            parts = []
            for j in a["jumps"][:4]:
                kind = "missing" if j["size_ms"] < 0 else "repeated or inserted"
                parts.append(f"{abs(j['size_ms']):.1f} ms of the master {kind} at {fmt.clock(j['at_master_s'], 3)}")
            text += f"; the offset jumps {len(a['jumps'])} time(s): " + "; ".join(parts)
        else:
            text += "; it holds steady along the programme, no edits"
        if a.get("drift_ppm") is not None and abs(a["drift_ppm"]) >= 0.5:
            text += f" (drift {a['drift_ppm']:+.1f} ppm)"
        out.append(text + ".")
    else:
        out.append("No stretch of the deliverable could be aligned with the master.")
    ch = r["channels"]
    order = {"same": "in the master's order", "swapped": "swapped left for right",
             "remapped": "in another order than the master's", "ambiguous": "of an order the content cannot tell "
             "(channels too alike)"}[ch["order"]]
    inv = ch.get("polarity_inverted") or []
    pol = f"polarity inverted on {', '.join(inv)}" if inv else "no polarity inversion"
    gains = ", ".join(f"{m['deliverable_channel']} {_signed(m['gain_db'])}" for m in ch["matches"])
    out.append(f"Channels {order}; {pol}; gain {gains}.")
    if not same:
        out.append("The conversion figures below compare different content and say little about the converter.")
    t = r["transfer"]
    if t.get("passband_ripple_db") is not None:
        lo, hi = t["ripple_band_hz"]
        text = f"Response flat within {t['passband_ripple_db']:.3f} dB from {lo:g} Hz to {hi / 1000:.2f} kHz"
        if t.get("level_at_20khz_db") is not None:
            text += f", {_signed(t['level_at_20khz_db'], 3)} at 20 kHz"
        if t.get("minus_3db_hz") is not None:
            text += (f"; -3 dB at {t['minus_3db_hz'] / 1000:.2f} kHz ({t['minus_3db_re_nyquist']:.3f} of the new "
                     f"Nyquist frequency, {t['nyquist_new_hz'] / 1000:g} kHz)")
        else:
            text += "; no -3 dB point inside the shared band"
        out.append(text + ".")
    rs = r["residue"]
    if rs.get("folded_found") is not None:
        if rs["folded_found"]:
            out.append(f"Content folded down from above the new Nyquist frequency at "
                       f"{_f(rs['folded_re_signal_db'])} dB re the signal: the converter let through what its "
                       "anti-alias filter should have removed.")
        else:
            out.append(f"Nothing measurable folded down from above the new Nyquist frequency (detection floor "
                       f"{_f(rs['folded_detection_floor_db'])} dB re the signal).")
    if rs.get("above_master_band_re_signal_db") is not None:
        out.append(f"Content above the master's Nyquist frequency: {_f(rs['above_master_band_re_signal_db'])} dB "
                   "re the signal (images an upsampler left).")
    q = r["requantisation"]
    if q.get("residual_power_dbfs") is not None and same:
        text = f"Residual after alignment, gain and H: {q['residual_power_dbfs']:.1f} dBFS"
        if q.get("residual_re_tpdf_db") is not None:
            text += (f" ({q['residual_re_tpdf_db']:+.1f} dB against {r['deliverable']['bit_depth']}-bit TPDF "
                     f"dither, {q['expected_tpdf_power_dbfs']:.1f} dBFS)")
        text += f", about {q['effective_bits']:.1f} effective bits" if q.get("effective_bits") else ""
        text += {"flat": ", flat spectrum", "shaped": f", shaped spectrum ({q['spectrum_spread_db']:.1f} dB "
                 "between its bands)", "unknown": ""}[q["spectrum_shape"]]
        text += {"dithered": "; it stays level through quiet passages: dithered",
                 "signal_correlated": f"; it follows the signal in quiet passages "
                                      f"({_signed(q.get('quiet_residual_change_db'), 1)}): requantised without "
                                      "dither (truncation distortion)",
                 "unknown": f"; dither not assessed: {q.get('verdict_reason', '')}"}[q["verdict"]]
        out.append(text + ".")
    pl = r["peaks_loudness"]
    text = (f"True peak {_f(pl['master_true_peak_dbtp'])} -> {_f(pl['deliverable_true_peak_dbtp'])} dBTP "
            f"({_signed(pl['true_peak_change_db'])}); integrated loudness {_f(pl['master_integrated_lufs'])} -> "
            f"{_f(pl['deliverable_integrated_lufs'])} LUFS ({_signed(pl['loudness_change_lu'], 2, 'LU')})")
    n = pl["overs_introduced_count"]
    if n:
        first = pl["overs_introduced"][0]
        text += (f"; the conversion added {n} over(s) or clipped run(s), the first at "
                 f"{fmt.clock(first['start_s'], 3)}")
    else:
        text += "; no new overs or clipped runs"
    out.append(text + ".")
    return out


# ---------------------------------------------------------------- plots

def _hz(x, _pos=None):
    return f"{x / 1000:g}k" if x >= 1000 else f"{x:g}"


def transfer_plot(r: dict) -> str | None:
    s = r["series"]
    f = np.asarray(s["frequency_hz"], float)
    if f.size < 2:
        return None
    h = np.array([np.nan if v is None else v for v in s["transfer_db"]], float)
    c = np.array([np.nan if v is None else v for v in s["coherence"]], float)
    t = r["transfer"]
    with matplotlib.rc_context(plots.STYLE):
        fig = plots._figure(5.6)
        ax = fig.add_axes((0.085, 0.62, 0.89, 0.31))
        ax2 = fig.add_axes((0.085, 0.07, 0.89, 0.14), sharex=ax)
        ax3 = fig.add_axes((0.085, 0.3, 0.89, 0.23))
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
        ax3.xaxis.set_major_formatter(FuncFormatter(_hz))
        ax.plot(f, h, color=plots.BLUE, lw=1.0, label="|H(f)| re the broadband gain")
        ax.axhline(-3.0, color=plots.GREY, lw=0.8, ls=(0, (4, 2)), label="-3 dB")
        ax.axvline(t["nyquist_new_hz"], color=plots.BLACK, lw=0.9, ls=(0, (1, 1.2)), label="new Nyquist")
        if t.get("minus_3db_hz"):
            ax.axvline(t["minus_3db_hz"], color=plots.VERMILION, lw=0.9, ls=(0, (6, 2, 1, 2)), label="-3 dB point")
        fin = h[np.isfinite(h)]
        lo = max(float(np.min(fin)) - 1.0, -60.0) if fin.size else -60.0
        ax.set_ylim(lo, 2.0)
        ax.set_xscale("log")
        ax.set_xlim(20.0, f[-1] * 1.05)
        ax.set_ylabel("level (dB)")
        plots._legend(ax, ncol=4)
        ax2.plot(f, c, color=plots.GREEN, lw=0.9, ls=(0, (5, 2)))
        ax2.set_ylim(0.0, 1.05)
        ax2.set_ylabel("coherence")
        ax2.set_xlabel("frequency (Hz), logarithmic")
        ax2.xaxis.set_major_formatter(FuncFormatter(_hz))
        return plots._to_svg(fig, "transfer", "Transfer function and coherence")


def residual_plot(r: dict) -> str | None:
    s = r["series"]
    f = np.asarray(s["frequency_hz"], float)
    if f.size < 2:
        return None
    y = np.array([np.nan if v is None else v for v in s["residual_psd_dbfs_per_hz"]], float)
    with matplotlib.rc_context(plots.STYLE):
        fig = plots._figure(2.6)
        ax = fig.add_axes((0.085, 0.17, 0.89, 0.66))
        ax.plot(f, y, color=plots.VERMILION, lw=0.9, label="residual (per channel)")
        e = s.get("expected_tpdf_psd_dbfs_per_hz")
        if e is not None:
            ax.axhline(e, color=plots.BLACK, lw=0.9, ls=(0, (4, 2)),
                       label=f"{r['deliverable']['bit_depth']}-bit TPDF dither, expected")
        lo, hi = r["transfer"]["ripple_band_hz"]
        ax.axvspan(lo, hi, color=plots.GREY, alpha=0.07, lw=0)
        ax.set_xscale("log")
        ax.set_xlim(20.0, f[-1] * 1.05)
        vals = y[np.isfinite(y)]
        if vals.size:
            top = max(float(np.percentile(vals, 99)), e if e is not None else -1e9) + 10
            ax.set_ylim(top - 90, top)
        ax.set_ylabel("level (dB re FS\u00b2/Hz)")
        ax.set_xlabel("frequency (Hz), logarithmic; shaded: the band the requantisation is measured in")
        ax.xaxis.set_major_formatter(FuncFormatter(_hz))
        plots._legend(ax, ncol=3)
        return plots._to_svg(fig, "residual", "Residual spectrum against the expected dither level")


def offset_plot(r: dict) -> str | None:
    s = r["series"]
    t = np.asarray(s["offset_time_s"], float)
    if t.size < 2:
        return None
    o = np.array([np.nan if v is None else v for v in s["offset_ms"]], float)
    with matplotlib.rc_context(plots.STYLE):
        fig = plots._figure(2.3)
        ax = fig.add_axes((plots.TIME_LEFT, 0.2, plots.TIME_WIDTH, 0.62))
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


def build_view(r: dict) -> dict:
    labels = TimeLabels({})
    findings = findings_view(r, labels)
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
            ("Frames aligned", f"{100 * a['aligned_fraction']:.1f} %"),
            ("Frames", f"{a['frame_s'] * 1000:g} ms, hop {a['hop_s'] * 1000:g} ms")],
        "jumps": jumps if jumps["rows"] else None,
        "offset_svg": Markup(offset_plot(r) or ""),
        "identity_rows": [("Verdict", r["identity"]["verdict"].replace("_", " ")),
                          ("Correlation", _f(r["identity"]["correlation"], 6)),
                          ("Residual re signal", f"{_f(r['identity']['residual_re_signal_db'])} dB"),
                          ("Thresholds", f"same >= {r['identity']['same_min_correlation']:.5f}, different mix >= "
                                         f"{r['identity']['mix_min_correlation']:.2f}")],
        "channels": chan_rows, "matrix": matrix,
        "channel_order": ch["order"],
        "transfer_rows": [
            ("Pass-band ripple", f"{_f(t['passband_ripple_db'], 4)} dB ({t['ripple_band_hz'][0]:g} Hz to "
                                 f"{t['ripple_band_hz'][1] / 1000:.2f} kHz)"),
            ("Level at 20 kHz", f"{_f(t['level_at_20khz_db'], 3)} dB"),
            ("-3 dB point", f"{_f(t['minus_3db_hz'], 0)} Hz ({_f(t['minus_3db_re_nyquist'], 4)} of the new Nyquist "
                            f"frequency {t['nyquist_new_hz']:g} Hz)"),
            ("Mean coherence", _f(t["mean_coherence"], 6))],
        "transfer_svg": Markup(transfer_plot(r) or ""),
        "residue_rows": [
            ("Folded from above the new Nyquist", f"{_f(rs['folded_re_signal_db'])} dB re signal"
                                                  + (" (found)" if rs["folded_found"] else "")),
            ("Detection floor", f"{_f(rs['folded_detection_floor_db'])} dB"),
            ("Above the master's Nyquist", f"{_f(rs['above_master_band_re_signal_db'])} dB re signal"),
            ("Other residue", f"{_f(rs['other_re_signal_db'])} dB re signal")],
        "requant_rows": [
            ("Residual power", f"{_f(q['residual_power_dbfs'], 2)} dBFS"),
            ("TPDF dither expected", f"{_f(q['expected_tpdf_power_dbfs'], 2)} dBFS"),
            ("Residual re dither", f"{_f(q['residual_re_tpdf_db'], 2)} dB"),
            ("Effective bit depth", f"{_f(q['effective_bits'], 2)} bits"),
            ("Spectrum", f"{q['spectrum_shape']} (spread {_f(q['spectrum_spread_db'], 1)} dB)"),
            ("Quiet frames", f"{q['quiet_frames']}; level change {_f(q['quiet_residual_change_db'], 2)} dB, "
                             f"correlation {_f(q['signal_correlation'], 2)}"),
            ("Verdict", q["verdict"].replace("_", " "))],
        "residual_svg": Markup(residual_plot(r) or ""),
        "peaks_rows": [
            ("True peak", f"{_f(pl['master_true_peak_dbtp'], 2)} -> {_f(pl['deliverable_true_peak_dbtp'], 2)} dBTP "
                          f"({_signed(pl['true_peak_change_db'])})"),
            ("Integrated loudness", f"{_f(pl['master_integrated_lufs'], 2)} -> "
                                    f"{_f(pl['deliverable_integrated_lufs'], 2)} LUFS "
                                    f"({_signed(pl['loudness_change_lu'], 2, 'LU')})"),
            ("Overs added", str(pl["overs_introduced_count"]))],
        "overs": overs if overs["rows"] else None,
        "settings": [(k, str(v)) for k, v in sorted(r.get("settings", {}).items())],
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
