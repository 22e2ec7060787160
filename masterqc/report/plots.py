"""Report plots: matplotlib figures rendered to SVG text.

Every function takes display series already prepared by
:mod:`masterqc.report.view` (plain lists of numbers, ``None`` for a value that
does not exist) and returns one ``<svg>`` element as a string, ready to be
inlined in the HTML.  Nothing here measures: the series come from the
analyzers at display resolution; a series longer than :data:`MAX_POINTS` is
thinned for drawing by keeping each bucket's minimum and maximum, so peaks
are never drawn lower than measured.

Output is deterministic (fixed hash salt per plot, no date metadata), so the
same result renders byte-identical HTML.  Text stays text (``svg.fonttype:
none``), which keeps the files small and searchable.

Palette: the eight colours of Okabe & Ito's colour-blind-safe set; every
series also differs by line style or shape, so the plots read in greyscale.
"""

from __future__ import annotations

import io
import math
import re

import matplotlib

matplotlib.use("Agg", force=False)
import numpy as np  # noqa: E402
from matplotlib.backends.backend_svg import FigureCanvasSVG  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.ticker import FuncFormatter, MaxNLocator  # noqa: E402

#: colour-blind-safe palette (Okabe & Ito 2008)
BLACK = "#000000"
ORANGE = "#E69F00"
SKY = "#56B4E9"
GREEN = "#009E73"
YELLOW = "#F0E442"
BLUE = "#0072B2"
VERMILION = "#D55E00"
PURPLE = "#CC79A7"
GREY = "#6b6b6b"
LIGHT = "#d9d9d9"

#: colour and dash pattern for channel i (cycled)
CHANNEL_STYLES = [
    (BLUE, "-"), (VERMILION, (0, (5, 2))), (GREEN, (0, (1, 1.5))), (PURPLE, (0, (6, 2, 1, 2))),
    (ORANGE, (0, (3, 1, 1, 1, 1, 1))), (SKY, (0, (8, 3))), (BLACK, (0, (2, 2))), (GREY, "-"),
]

#: most points drawn per line; longer series are thinned (min and max per bucket kept)
MAX_POINTS = 1400

FIG_WIDTH_IN = 7.0
#: axes rectangle left and width shared by every plot over time, so their time axes line up
TIME_LEFT = 0.075
TIME_WIDTH = 0.835
STYLE = {
    "font.family": "DejaVu Sans",
    "font.size": 7.5,
    "axes.titlesize": 8,
    "axes.labelsize": 7.5,
    "xtick.labelsize": 7,
    "ytick.labelsize": 7,
    "legend.fontsize": 7,
    "axes.edgecolor": "#444444",
    "axes.linewidth": 0.6,
    "axes.grid": True,
    "grid.color": "#c8c8c8",
    "grid.linewidth": 0.4,
    "grid.linestyle": "-",
    "axes.spines.top": False,
    "axes.spines.right": False,
    "xtick.major.width": 0.5,
    "ytick.major.width": 0.5,
    "svg.fonttype": "none",
    "svg.image_inline": True,
    "path.simplify": True,
    "legend.frameon": False,
}


class TimeAxis:
    """How plot times are labelled.

    ``offset_s``: time of day of the file's first sample (``None`` when the
    file carries no start time: labels then count from the start of the file).
    ``fps``: frame rate for timecode labels (``None``: hundredths of a second).
    """

    def __init__(self, offset_s: float | None = None, fps: float | None = None):
        self.offset_s = offset_s
        self.fps = fps

    @property
    def label(self) -> str:
        if self.offset_s is None:
            return "time from start of file (m:ss)"
        if self.fps:
            return f"timecode (HH:MM:SS:FF at {self.fps:g} fps)"
        return "time of day from the file's start time (HH:MM:SS)"

    def tick(self, seconds: float) -> str:
        if self.offset_s is None:
            neg = seconds < 0
            s = int(round(abs(seconds)))
            h, rem = divmod(s, 3600)
            m, sec = divmod(rem, 60)
            text = f"{h}:{m:02d}:{sec:02d}" if h else f"{m}:{sec:02d}"
            return ("-" if neg else "") + text
        t = (self.offset_s + seconds) % 86400.0
        s = int(math.floor(t + 1e-9))
        h, rem = divmod(s, 3600)
        m, sec = divmod(rem, 60)
        text = f"{h:02d}:{m:02d}:{sec:02d}"
        if self.fps:
            frames = int(math.floor((t - s) * round(self.fps) + 1e-6))
            text += f":{frames:02d}"
        return text


def _arr(values) -> np.ndarray:
    """List with ``None`` -> float array with NaN."""
    return np.array([np.nan if v is None else float(v) for v in values], dtype=float)


def thin(t: np.ndarray, y: np.ndarray, max_points: int = MAX_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """Thin a series for drawing: per bucket keep the minimum and the maximum, in time order.

    Series already at or below ``max_points`` come back unchanged.
    """
    n = len(y)
    if n <= max_points:
        return t, y
    buckets = max_points // 2
    edges = np.linspace(0, n, buckets + 1).astype(int)
    tt, yy = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        seg = y[a:b]
        if b <= a:
            continue
        if np.all(np.isnan(seg)):
            tt += [t[a]]
            yy += [np.nan]
            continue
        i_min = a + int(np.nanargmin(seg))
        i_max = a + int(np.nanargmax(seg))
        for i in sorted({i_min, i_max}):
            tt.append(t[i])
            yy.append(y[i])
    return np.array(tt), np.array(yy)


def merge_for_display(ranges, min_gap_s: float) -> list[tuple[float, float]]:
    """Ranges sorted and joined where the gap between them is below ``min_gap_s`` (drawing only).

    At a plot's scale, events closer than about one pixel cannot be told apart;
    joining them bounds the number of shapes drawn however many events a long
    file holds.  Counts shown in the report come from the result, not from this.
    """
    out: list[list[float]] = []
    for a, b in sorted((float(a), float(b)) for a, b in ranges):
        if out and a - out[-1][1] < min_gap_s:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return [(a, b) for a, b in out]


def over_spans(ranges, duration_s: float) -> list[tuple[float, float]]:
    """The shaded spans of a true-peak plot: every over range from the result (none dropped), merged
    where they touch or lie closer than one pixel of the plot (1/800 of its length)."""
    return merge_for_display(ranges, max(duration_s, 1e-3) / 800.0)


def _figure(height_in: float) -> Figure:
    fig = Figure(figsize=(FIG_WIDTH_IN, height_in), dpi=72)
    FigureCanvasSVG(fig)
    return fig


def _to_svg(fig: Figure, salt: str, title: str, raster_dpi: int = 72) -> str:
    """Render ``fig`` as one ``<svg>`` element (no XML prolog, no metadata block).

    ``raster_dpi``: resolution of the parts drawn as an embedded image (the spectrogram).
    """
    buf = io.StringIO()
    with matplotlib.rc_context({"svg.hashsalt": salt}):
        fig.savefig(buf, format="svg", dpi=raster_dpi,
                    metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
    text = buf.getvalue()
    text = text[text.index("<svg"):]
    text = re.sub(r"<metadata>.*?</metadata>\s*", "", text, flags=re.S)
    # Accessible name, and a class the CSS scales by.
    text = text.replace("<svg ", f'<svg class="plot" role="img" aria-label="{_attr(title)}" ', 1)
    return text.strip() + "\n"


def _attr(text: str) -> str:
    return (text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
            .replace('"', "&quot;"))


def _time_axis(ax, axis: TimeAxis, duration_s: float) -> None:
    ax.set_xlim(0.0, max(duration_s, 1e-3))
    # timecode labels are twice as long as m:ss ones: fewer ticks keep them apart
    nbins = 6 if axis.offset_s is not None else 8
    ax.xaxis.set_major_locator(MaxNLocator(nbins=nbins, steps=[1, 2, 3, 5, 6, 10]))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _pos: axis.tick(x)))
    ax.set_xlabel(axis.label)


def loudness_plot(duration_s: float, axis: TimeAxis, momentary=None, short_term=None,
                  integrated_lufs: float | None = None, target_band=None) -> str:
    """Loudness over time.

    ``momentary``/``short_term``: ``(times_s, values_lufs)`` or None;
    ``integrated_lufs``: horizontal line; ``target_band``: ``(low_lufs, high_lufs)``
    of the spec's integrated-loudness requirement, drawn as a hatched band, or
    as one dotted limit line when a side is ``None``.
    """
    with matplotlib.rc_context(STYLE):
        fig = _figure(2.2)
        ax = fig.add_axes((TIME_LEFT, 0.19, TIME_WIDTH, 0.66))
        values = []
        if target_band is not None and None not in target_band:
            lo, hi = target_band
            ax.axhspan(lo, hi, facecolor="#f3ecc0", edgecolor=ORANGE, hatch="////", lw=0.0, alpha=0.9,
                       label=f"target band {_num(lo)} to {_num(hi)}")
            ax.axhline(lo, color="#9a6b00", lw=0.6, ls=(0, (2, 2)))
            ax.axhline(hi, color="#9a6b00", lw=0.6, ls=(0, (2, 2)))
            values += [lo, hi]
        elif target_band is not None:
            lo, hi = target_band
            limit = hi if hi is not None else lo
            sign = "\u2264" if hi is not None else "\u2265"
            ax.axhline(limit, color="#9a6b00", lw=1.3, ls=(0, (1, 1.3)),
                       label=f"spec limit {sign} {_num(limit)} LUFS")
            values.append(limit)
        if momentary is not None:
            t, y = thin(np.asarray(momentary[0], float), _arr(momentary[1]))
            ax.plot(t, y, color=SKY, lw=0.55, label="momentary (400 ms)")
            values += list(y[np.isfinite(y)])
        if short_term is not None:
            t, y = thin(np.asarray(short_term[0], float), _arr(short_term[1]))
            ax.plot(t, y, color=BLUE, lw=1.4, label="short-term (3 s)")
            values += list(y[np.isfinite(y)])
        if integrated_lufs is not None:
            ax.axhline(integrated_lufs, color=BLACK, lw=1.1, ls=(0, (6, 2)),
                       label=f"integrated {_num(integrated_lufs)} LUFS")
            values.append(integrated_lufs)
        if values:
            top = max(values) + 3.0
            bottom = max(min(values) - 3.0, top - 60.0)
            ax.set_ylim(bottom, top)
        else:
            ax.set_ylim(-60, 0)
        ax.yaxis.set_major_locator(MaxNLocator(nbins=7, steps=[1, 2, 5, 10]))
        ax.set_ylabel("loudness (LUFS)")
        _time_axis(ax, axis, duration_s)
        _legend(ax)
        return _to_svg(fig, "loudness", "Loudness over time")


def _legend(ax, ncol: int = 4) -> None:
    """Legend entries in rows above the axes (never clipped at the right edge)."""
    handles, texts = ax.get_legend_handles_labels()
    if handles:
        ax.legend(handles, texts, loc="lower left", bbox_to_anchor=(0.0, 1.01), ncol=min(len(handles), ncol),
                  borderaxespad=0.2, handlelength=2.6, columnspacing=1.6, fontsize=7)


def _num(v: float) -> str:
    return f"{v:.1f}"


def true_peak_plot(duration_s: float, axis: TimeAxis, envelopes, labels, ceiling_dbtp=None,
                   over_ranges=()) -> str:
    """True-peak envelope over time with the ceiling and the overs marked.

    ``envelopes``: list of ``(times_s, values_dbtp)``, one per channel (or one
    for all channels, label ``"all"``); ``over_ranges``: ``[(start_s, end_s)]``.
    """
    with matplotlib.rc_context(STYLE):
        fig = _figure(2.1)
        ax = fig.add_axes((TIME_LEFT, 0.2, TIME_WIDTH, 0.65))
        values = []
        for i, ((t, y), label) in enumerate(zip(envelopes, labels)):
            color, ls = CHANNEL_STYLES[i % len(CHANNEL_STYLES)]
            t, y = thin(np.asarray(t, float), _arr(y))
            ax.plot(t, y, color=color, ls=ls, lw=0.9, label=label)
            values += list(y[np.isfinite(y)])
        if ceiling_dbtp is not None:
            ax.axhline(ceiling_dbtp, color=BLACK, lw=1.0, ls=(0, (6, 2)),
                       label=f"ceiling {_num(ceiling_dbtp)} dBTP")
            values.append(ceiling_dbtp)
        top = max(values) + 1.5 if values else 0.0
        bottom = max(min(values) - 3.0, top - 48.0) if values else -48.0
        ax.set_ylim(bottom, top)
        if over_ranges:
            count = len(over_ranges)
            min_w = max(duration_s, 1e-3) / 800.0
            spans = over_spans(over_ranges, duration_s)
            alpha = 0.45 if len(spans) <= 20 else 0.3
            for a, b in spans:  # every over range, merged where they touch or lie closer than a pixel
                ax.axvspan(a, max(b, a + min_w), color=VERMILION, alpha=alpha, lw=0)
            mids = [0.5 * (a + b) for a, b in spans]
            ax.plot(mids, [top - 0.45] * len(mids), ls="none", marker="v", ms=5.5, color=VERMILION,
                    markeredgecolor=BLACK, markeredgewidth=0.5, label=f"over the ceiling ({count:,} ranges)")
        ax.yaxis.set_major_locator(MaxNLocator(nbins=6, steps=[1, 2, 3, 5, 10]))
        ax.set_ylabel("true peak (dBTP)")
        _time_axis(ax, axis, duration_s)
        _legend(ax)
        return _to_svg(fig, "truepeak", "True peak over time")


#: the spectrum's level axis: power per 10 Hz analysis bin relative to full scale
SPECTRUM_LEVEL_LABEL = "level per 10 Hz bin (dBFS)"
#: the spectrogram's colour bar: channel-summed power per band relative to full scale
SPECTROGRAM_LEVEL_LABEL = "dBFS per band"

#: files whose Nyquist frequency is above this get a second, linear panel of the upper band
UPPER_PANEL_MIN_NYQUIST_HZ = 24000.0
#: lower edge of that panel: below the Nyquist frequencies of the standard lower rates (16 kHz
#: for 32 kHz), so a converter cliff, the ultrasonic band and its tones are seen in full
UPPER_PANEL_FROM_HZ = 10000.0


#: vertical step between the rows of tone labels in the upper-band panel (axes fraction)
MARK_ROW_STEP = 0.13


def spectrum_plot(freqs_hz, per_channel_db, labels, sample_rate_hz: int, lines=(), marks=()) -> str:
    """Long-term spectrum per channel on a log frequency axis.

    ``lines``: ``[(freq_hz, label)]`` vertical reference lines (20 kHz, the
    file's Nyquist, each conversion target's Nyquist), drawn with distinct
    dash patterns and named in the legend.  Above a 48 kHz rate a second panel
    shows the band from :data:`UPPER_PANEL_FROM_HZ` to Nyquist on a linear axis
    (where a log axis squeezes the converter cliff and the ultrasonic band),
    with ``marks``: ``[(freq_hz, label)]`` pointed at on the spectrum (e.g. the
    stationary ultrasonic tones).
    """
    nyq = sample_rate_hz / 2.0
    upper = nyq > UPPER_PANEL_MIN_NYQUIST_HZ
    with matplotlib.rc_context(STYLE):
        fig = _figure(3.7 if upper else 2.4)
        if upper:
            ax = fig.add_axes((0.075, 0.585, 0.905, 0.32))
            ax2 = fig.add_axes((0.075, 0.1, 0.905, 0.37))
        else:
            ax = fig.add_axes((0.075, 0.17, 0.905, 0.6))
            ax2 = None
        f = np.asarray(freqs_hz, float)
        keep = f > 0
        values, curves = [], []
        for i, (db, label) in enumerate(zip(per_channel_db, labels)):
            color, ls = CHANNEL_STYLES[i % len(CHANNEL_STYLES)]
            y = _arr(db)
            curves.append(y)
            for a in (ax, ax2) if ax2 is not None else (ax,):
                a.plot(f[keep], y[keep], color=color, ls=ls, lw=0.9, label=label if a is ax else None)
            values += list(y[keep][np.isfinite(y[keep])])
        ax.set_xscale("log")
        lo = f[keep].min() if keep.any() else 10.0
        ax.set_xlim(max(lo, 10.0), nyq * 1.04)
        if values:
            top = max(values) + 6.0
            ylim = (max(min(values) - 3.0, top - 120.0), top)
            ax.set_ylim(*ylim)
        dashes = [(0, (4, 2)), "-", (0, (1, 1.2)), (0, (6, 2, 1, 2)), (0, (3, 3))]
        for j, (freq, text) in enumerate(lines):
            style = dict(color=BLACK if "Nyquist" in text and "target" not in text else GREY, lw=1.0,
                         ls=dashes[j % len(dashes)])
            ax.axvline(freq, label=text, **style)
            if ax2 is not None and freq >= UPPER_PANEL_FROM_HZ:
                ax2.axvline(freq, **style)
        ax.set_xlabel("frequency (Hz), logarithmic")
        ax.set_ylabel(SPECTRUM_LEVEL_LABEL)
        ax.xaxis.set_major_formatter(FuncFormatter(_hz_tick))
        _legend(ax, ncol=3)
        if ax2 is not None:
            ax2.set_xlim(UPPER_PANEL_FROM_HZ, nyq * 1.01)
            if values:
                ax2.set_ylim(*ylim)
            ax2.set_xlabel(f"frequency (Hz), linear: the upper band, {UPPER_PANEL_FROM_HZ / 1000:g} kHz to Nyquist")
            ax2.set_ylabel(SPECTRUM_LEVEL_LABEL)
            ax2.xaxis.set_major_formatter(FuncFormatter(_hz_tick))
            ax2.axvspan(20000.0, nyq, color=GREY, alpha=0.08, lw=0)
            # labels in rows of their own near the top of the panel, lowest tone first, each with an
            # arrow down to its tone: tones a few kHz apart would otherwise print over each other
            x_lo, x_hi = ax2.get_xlim()
            for row, (freq, text) in enumerate(sorted(marks)):
                levels = [float(np.interp(freq, f[keep], c[keep])) for c in curves if np.isfinite(c[keep]).all()]
                if not levels or not values:
                    continue
                y0 = max(levels)
                x_frac = (freq - x_lo) / (x_hi - x_lo)
                right = x_frac > 0.55
                ax2.annotate(text, xy=(freq, y0), xycoords="data",
                             xytext=(x_frac + (-0.02 if right else 0.02), 0.93 - MARK_ROW_STEP * row),
                             textcoords="axes fraction", ha="right" if right else "left",
                             va="top", fontsize=6.5, color=VERMILION,
                             bbox={"boxstyle": "square,pad=0.1", "facecolor": "white", "edgecolor": "none",
                                   "alpha": 0.85},
                             arrowprops={"arrowstyle": "-|>", "color": VERMILION, "lw": 0.8,
                                         "shrinkA": 0, "shrinkB": 1})
        return _to_svg(fig, "spectrum", "Long-term spectrum per channel")


def _hz_tick(x, _pos=None) -> str:
    if x >= 1000:
        v = x / 1000.0
        return f"{v:g}k"
    return f"{x:g}"


def spectrogram_plot(times_s, freqs_hz, db_rows, axis: TimeAxis, duration_s: float,
                     sample_rate_hz: int, lines=(), floor_db: float | None = None) -> str:
    """Spectrogram: time across, frequency up (linear, to Nyquist), level as colour.

    ``db_rows``: 2-D list indexed ``[time][frequency]``; times and frequencies
    are cell centres (need not be evenly spaced).  The colour map is
    cividis (perceptually even, colour-blind safe, monotonic in greyscale).
    ``lines``: horizontal reference lines ``[(freq_hz, label)]``.
    """
    with matplotlib.rc_context(STYLE):
        fig = _figure(2.3)
        ax = fig.add_axes((TIME_LEFT, 0.2, TIME_WIDTH, 0.74))
        z = np.array([[np.nan if v is None else float(v) for v in row] for row in db_rows], dtype=float)
        t = np.asarray(times_s, float)
        f = np.asarray(freqs_hz, float)
        finite = z[np.isfinite(z)]
        vmax = float(finite.max()) if finite.size else 0.0
        vmin = max(float(finite.min()), vmax - 100.0) if finite.size else vmax - 100.0
        if floor_db is not None:
            vmin = max(vmin, floor_db)
        half_dt = 0.5 * (t[1] - t[0]) if len(t) > 1 else 0.5 * max(duration_s, 1e-3)
        extent = (float(t[0]) - half_dt if len(t) else 0.0, float(t[-1]) + half_dt if len(t) else duration_s)
        if _evenly_spaced(f):
            # one image pixel per cell, embedded at the data's own resolution (small, exact cells)
            half_df = 0.5 * (f[1] - f[0]) if len(f) > 1 else 0.5 * sample_rate_hz / 2.0
            img = ax.imshow(z.T, origin="lower", aspect="auto", cmap="cividis", vmin=vmin, vmax=vmax,
                            interpolation="none",
                            extent=(extent[0], extent[1], max(float(f[0]) - half_df, 0.0), float(f[-1]) + half_df))
        else:
            img = ax.pcolormesh(t, f, z.T, shading="nearest", cmap="cividis", vmin=vmin, vmax=vmax,
                                rasterized=True)
        x_left = max(extent[0], 0.0)
        x_span = max(duration_s, extent[1]) - x_left
        for j, (freq, text) in enumerate(sorted(lines)):
            ax.axhline(freq, color="white", lw=0.9, ls=(0, (4, 2)))
            # lines a few kHz apart (20, 22.05, 24 kHz): their labels are spread across the width
            ax.text(x_left + x_span * j / max(len(lines), 1), freq, f" {text} ", va="bottom", ha="left",
                    fontsize=6.3, color=BLACK,
                    bbox={"boxstyle": "square,pad=0.1", "facecolor": "white", "edgecolor": "none", "alpha": 0.8})
        ax.set_ylim(0, sample_rate_hz / 2.0)
        ax.yaxis.set_major_formatter(FuncFormatter(_hz_tick))
        ax.set_ylabel("frequency (Hz)")
        ax.grid(False)
        _time_axis(ax, axis, duration_s)
        ax.set_xlim(0.0, max(duration_s, extent[1] if len(t) else 0.0, 1e-3))
        cax = fig.add_axes((TIME_LEFT + TIME_WIDTH + 0.012, 0.2, 0.013, 0.74))
        bar = fig.colorbar(img, cax=cax)
        bar.ax.tick_params(labelsize=6, pad=1.5)
        # the label above the bar, inside the figure (a rotated label at the right edge is cut off)
        cax.set_title(SPECTROGRAM_LEVEL_LABEL, fontsize=6.3, loc="left", pad=3)
        return _to_svg(fig, "spectrogram", "Spectrogram", raster_dpi=110)


def _evenly_spaced(f: np.ndarray) -> bool:
    """Whether cell centres ``f`` lie within a quarter step of an even grid (so one image row per cell is true)."""
    if len(f) < 2:
        return True
    step = (f[-1] - f[0]) / (len(f) - 1)
    if step <= 0:
        return False
    grid = f[0] + step * np.arange(len(f))
    return bool(np.max(np.abs(f - grid)) <= 0.25 * step)


#: marker row kind -> (colour, hatch)
MARK_STYLES = {
    "fail": (VERMILION, "xxxx"),
    "warn": (ORANGE, "////"),
    "info": (BLUE, None),
    "quiet": (GREY, "...."),
}


def markers_plot(duration_s: float, axis: TimeAxis, rows) -> str:
    """Event timeline: one lane per kind of event (clipping, silence, dropouts, overs ...).

    ``rows``: ``[(label, [(start_s, end_s), ...], kind)]`` with ``kind`` a key of
    :data:`MARK_STYLES`.  Events too short to see at this scale are drawn at a
    minimum width and marked with a triangle.
    """
    with matplotlib.rc_context(STYLE):
        n = max(len(rows), 1)
        lane_in = 0.36
        height = 0.5 + lane_in * n
        fig = _figure(height)
        bottom = 0.42 / height
        ax = fig.add_axes((TIME_LEFT, bottom, TIME_WIDTH, 1.0 - bottom - 0.02))
        min_w = max(duration_s, 1e-3) / 600.0
        for i, (label, ranges, kind) in enumerate(rows):
            color, hatch = MARK_STYLES.get(kind, MARK_STYLES["info"])
            y = n - 1 - i
            bars = [(a, max(b - a, min_w)) for a, b in merge_for_display(ranges, min_w)]
            if bars:
                ax.broken_barh(bars, (y - 0.22, 0.4), facecolors=color, edgecolors=BLACK, linewidth=0.3,
                               hatch=hatch)
                short = [a + w / 2 for a, w in bars if w <= min_w * 6]  # narrower than about 4 pixels
                if short:
                    ax.plot(short, [y + 0.3] * len(short), ls="none", marker="v", ms=3.8, color=color,
                            markeredgecolor=BLACK, markeredgewidth=0.3, clip_on=False)
            ax.text(0.004, y + 0.2, f"{label} ({len(ranges)})", transform=ax.get_yaxis_transform(),
                    va="bottom", ha="left", fontsize=6.8, color="#222222", zorder=5,
                    bbox={"boxstyle": "square,pad=0.15", "facecolor": "white", "edgecolor": "none",
                          "alpha": 0.88})
        ax.set_yticks([])
        ax.set_ylim(-0.5, n - 0.5 + 0.25)
        ax.grid(axis="y", visible=False)
        _time_axis(ax, axis, duration_s)
        return _to_svg(fig, "markers", "Event timeline")
