"""Diagnostic plots of inspected reads (matplotlib, Agg canvas: no display needed).

Input: :class:`readchan.measure.diagnose.ChannelReport` s and a target path.
Output: a PNG, PDF or SVG file (through :mod:`readchan.io.atomic`).

Each read gets five panels, legible for a capture of 10,000 bits:

1. the waveform over the read, min/max-decimated to the panel's width, with the read's span,
   its transitions and its anomalies marked;
2. a zoom at the start sentinel: samples (min/max-decimated beyond :data:`ZOOM_MAX_POINTS`), detected pulses, every bit's value over its cell and
   the character boundaries with the characters (account numbers masked: a masked character
   gets neither its label nor its bits' values, which would spell it out);
3. the same zoom around the bit of least timing margin;
4. the normalised intervals r = Δ/T along the swipe with the half-cell (0.5), boundary (0.75)
   and full-cell (1.0) lines and the band where the margin is below its verdict limit;
5. swipe speed (bits and the sliding fit) and pulse amplitude along the swipe.

A channel with no framed read gets one panel: its waveform with the detected transitions.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from readchan.measure.diagnose import ChannelReport, ReadReport
from readchan.measure.verdict import LIMITS
from readchan.errors import ParameterError
from readchan.formats.iso7813 import mask_text
from readchan.linecode.f2f import BOUNDARY

ZOOM_BITS = 56
"""Bits shown in each zoomed panel."""

OVERVIEW_BINS = 2500
"""Min/max bins of the overview waveform (about two per pixel column of a 13-inch panel at 100 dpi)."""

ZOOM_MAX_POINTS = 4000
"""A zoomed panel draws every sample up to this many; beyond (a fast scope: 56 bits of track 2 at
5 MHz are about 300,000 samples) it draws the min/max envelope in :data:`ZOOM_BINS` columns,
which looks the same at the panel's size (about 600 pixel columns)."""
ZOOM_BINS = 1200

_MARGIN_LIMIT = next(lim.limit for lim in LIMITS if lim.name == "margin_min")


def plot_reports(reports: list[ChannelReport], path: str | Path, *, unmask: bool = False,
                 title: str | None = None, dpi: int = 100, force: bool = False) -> int:
    """Draw every read of ``reports`` into one figure and write it to ``path`` (PNG, PDF or SVG,
    by suffix), atomically; an existing file is replaced only with ``force``.  Returns the
    number of panels drawn."""
    fig, panels = report_figure(reports, unmask=unmask, title=title)
    _save(fig, Path(path), dpi, force)
    return panels


def report_figure(reports: list[ChannelReport], *, unmask: bool = False,
                  title: str | None = None) -> tuple[Figure, int]:
    """The figure of :func:`plot_reports` and its number of panels, unsaved.

    Without ``unmask``, masked characters (account digits, see
    :func:`readchan.formats.iso7813.mask_text`) get neither a label nor the values of their bits.
    """
    reads = [(ch, r) for ch in reports for r in ch.reads]
    empty = [ch for ch in reports if not ch.reads]
    cells = len(reads) + len(empty)
    if cells == 0:
        raise ParameterError("nothing to plot: no channels")
    ncols = 1 if cells <= 3 else 2
    nrows = math.ceil(cells / ncols)
    heights = [11.0 if i < len(reads) else 3.0 for i in range(cells)]
    row_h = [max(heights[k] for k in range(i * ncols, min(cells, (i + 1) * ncols))) for i in range(nrows)]
    fig = Figure(figsize=(13.0 * ncols, sum(row_h) + 0.6), layout="constrained")
    FigureCanvasAgg(fig)
    if title:
        fig.suptitle(title, fontsize=12, fontweight="bold")
    subs = fig.subfigures(nrows, ncols, squeeze=False, height_ratios=row_h)
    flat = [subs[i // ncols, i % ncols] for i in range(cells)]
    for sf in flat[cells:]:
        sf.set_visible(False)
    panels = 0
    for sf, (ch, r) in zip(flat, reads):
        panels += _plot_read(sf, ch, r, unmask)
    for sf, ch in zip(flat[len(reads):], empty):
        panels += _plot_empty(sf, ch)
    for k in range(cells, nrows * ncols):
        subs[k // ncols, k % ncols].set_visible(False)
    return fig, panels


def _save(fig: Figure, path: Path, dpi: int, force: bool = False) -> None:
    """Write the figure through :func:`readchan.io.atomic.atomic_output` (same rules as captures)."""
    from readchan.io.atomic import atomic_output

    with atomic_output(path, force=force) as tmp:
        fig.savefig(tmp, dpi=dpi, format=path.suffix.lstrip(".").lower() or "png")


# ---------------------------------------------------------------------------------------------


def _decimate(t0: float, rate_hz: float, y: np.ndarray, bins: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(time, min, max) of ``y`` in about ``bins`` equal stretches (vectorised)."""
    n = y.size
    step = max(1, n // bins)
    m = n // step
    if m == 0:
        return np.array([t0]), y[:1], y[:1]
    blocks = y[: m * step].reshape(m, step)
    t = t0 + (np.arange(m) * step + 0.5 * step) / rate_hz
    return t, blocks.min(axis=1), blocks.max(axis=1)


def _span(ch: ChannelReport, a_s: float, b_s: float) -> tuple[int, int]:
    rate = ch.front_end.rate_hz
    return max(0, int(a_s * rate)), min(ch.wideband.size, int(b_s * rate) + 1)


def _plot_read(sf, ch: ChannelReport, r: ReadReport, unmask: bool) -> int:
    rd, tm = r.read, r.timing
    gs = sf.add_gridspec(4, 2, height_ratios=[1.0, 1.25, 1.0, 1.0])
    ax_over = sf.add_subplot(gs[0, :])
    ax_z1 = sf.add_subplot(gs[1, 0])
    ax_z2 = sf.add_subplot(gs[1, 1])
    ax_r = sf.add_subplot(gs[2, :])
    ax_v = sf.add_subplot(gs[3, :], sharex=ax_r)
    status = "valid" if rd.valid else "INVALID"
    track = f"track {rd.track.number}" if rd.track else "track ?"
    sf.suptitle(f"channel {rd.channel}, read {r.index}: {track}, {rd.frame.format} {rd.frame.direction}, "
                f"{len(rd.bits)} bits, {status}\n{r.verdict}", fontsize=10,
                color="black" if not r.failed else "firebrick")
    text = mask_text(rd.frame.text, rd.frame.format, unmask, trusted=rd.valid)
    spans = masked_spans(r, text)
    _overview(ax_over, ch, r, spans)
    ss = rd.frame.bit_index[0]          # the start sentinel's bits (time order differs by direction)
    start = int(ss.min()) - 8 if rd.frame.direction == "forward" else int(ss.max()) + 9 - ZOOM_BITS
    _zoom(ax_z1, ch, r, max(0, start), text, spans, "at the start sentinel")
    worst = tm.margin_min_bit
    _zoom(ax_z2, ch, r, max(0, worst - ZOOM_BITS // 2), text, spans,
          f"around the least margin ({tm.margin_min:.2f}, bit {worst})", mark_bit=worst)
    _intervals(ax_r, r, spans)
    _speed_amplitude(ax_v, ch, r, spans)
    return 5


def masked_spans(r: ReadReport, text: str) -> np.ndarray:
    """Time spans (s), shape (k, 2), of the characters that ``text`` masks.

    The times of the pulses and intervals under a character spell out its bits as surely as a
    bit label does (a half-cell interval is a 1), so the plots draw neither the waveform, the
    transition markers nor the interval points inside these spans.
    """
    raw, bs = r.read.frame.text, r.read.bits
    hidden = [c for c in range(min(len(text), len(raw))) if text[c] != raw[c]]
    if not hidden or len(bs) == 0:
        return np.zeros((0, 2))
    bc = r.bit_char()
    ends = np.concatenate((bs.start_s[1:], [bs.start_s[-1] + bs.period_s[-1]]))
    spans = []
    for c in hidden:
        ks = np.flatnonzero(bc == c)
        if ks.size:
            spans.append((float(bs.start_s[ks].min()), float(ends[ks].max())))
    return np.asarray(spans, float).reshape(-1, 2)


def _inside(t: np.ndarray, spans: np.ndarray) -> np.ndarray:
    """True where a time ``t`` (s) lies in one of ``spans``."""
    t = np.asarray(t, float)
    out = np.zeros(t.shape, bool)
    for a, b in spans:
        out |= (t >= a) & (t <= b)
    return out


def _shade_masked(ax, spans: np.ndarray, label: bool = False) -> None:
    for a, b in spans:
        ax.axvspan(a, b, color="0.88", lw=0, zorder=0)
    if label and spans.size:
        ax.text(0.5 * (spans[:, 0].min() + spans[:, 1].max()), 0.0, "masked", ha="center", va="center",
                fontsize=8, color="0.45", clip_on=True)


def _overview(ax, ch: ChannelReport, r: ReadReport, spans: np.ndarray) -> None:
    rd = r.read
    fe = ch.front_end
    pad = 0.05 * (rd.end_s - rd.start_s) + 0.005
    a, b = _span(ch, rd.start_s - pad, rd.end_s + pad)
    y = ch.wideband[a:b]
    t, lo, hi = _decimate(a / fe.rate_hz, fe.rate_hz, y, OVERVIEW_BINS)
    hide = _inside(t, spans)
    ax.fill_between(t, np.where(hide, np.nan, lo), np.where(hide, np.nan, hi), color="0.35", lw=0.0, step="mid")
    ax.axvspan(rd.start_s, rd.end_s, color="tab:green", alpha=0.08, lw=0)
    _shade_masked(ax, spans)
    tr = rd.transitions
    if r.amplitude is not None and len(tr) <= 3000:
        keep = ~_inside(tr.times_s, spans)
        ax.plot(tr.times_s[keep], (r.amplitude.peak * np.sign(tr.amplitude))[keep], ".", ms=1.5, color="tab:blue")
    for an in r.anomalies[:200]:
        ax.axvline(an.t_s, color="firebrick", lw=0.8, alpha=0.7)
    ax.set_xlim(t[0], t[-1])
    ax.set_ylabel(f"signal ({fe.units})")
    ax.set_title(f"waveform ({'wide-band' if fe.kind == 'head' else 'logic level'}); read span shaded, "
                 f"{len(r.anomalies)} anomalies in red", fontsize=9, loc="left")
    ax.tick_params(labelsize=8)


def _zoom(ax, ch: ChannelReport, r: ReadReport, start: int, text: str, spans: np.ndarray, where: str,
          mark_bit: int | None = None) -> None:
    rd, bs = r.read, r.read.bits
    fe = ch.front_end
    n = len(bs)
    start = min(start, max(0, n - ZOOM_BITS))
    stop = min(n, start + ZOOM_BITS)
    if stop <= start:
        ax.set_visible(False)
        return
    t0 = float(bs.start_s[start])
    t1 = float(bs.start_s[stop]) if stop < n else float(bs.start_s[-1] + bs.period_s[-1])
    a, b = _span(ch, t0, t1)
    y = ch.wideband[a:b]
    _zoom_trace(ax, a, fe.rate_hz, y, spans)
    _shade_masked(ax, spans, label=True)
    tr = rd.transitions
    sel = (tr.times_s >= t0) & (tr.times_s <= t1) & ~_inside(tr.times_s, spans)
    if r.amplitude is not None:
        ax.plot(tr.times_s[sel], (r.amplitude.peak * np.sign(tr.amplitude))[sel], "o", ms=3,
                mfc="none", color="tab:blue")
    top = float(np.max(np.abs(y))) if y.size else 1.0
    top = top if top > 0 else 1.0
    ax.set_ylim(-1.25 * top, 1.55 * top)
    bc = r.bit_char()
    raw = rd.frame.text
    hidden = {c for c in range(len(text)) if text[c] != raw[c]}     # masked characters
    for k in range(start, stop):
        ts = float(bs.start_s[k])
        te = float(bs.start_s[k + 1]) if k + 1 < n else ts + float(bs.period_s[k])
        if int(bc[k]) not in hidden:        # a masked character's bits would spell it out
            ax.text(0.5 * (ts + te), 1.12 * top, str(int(bs.bits[k])), ha="center", va="center", fontsize=7,
                    color="tab:red" if bs.bits[k] else "tab:blue")
        ax.axvline(ts, color="0.85", lw=0.5, zorder=0)
        if k == start or bc[k] != bc[k - 1]:
            if bc[k] >= 0:
                c = int(bc[k])
                ax.axvline(ts, color="tab:purple", lw=1.0, ls="--")
                # the character's label in the middle of its bits that are in view
                ks = np.flatnonzero(bc[start:stop] == c) + start
                te_c = float(bs.start_s[ks[-1] + 1]) if ks[-1] + 1 < n else te
                label = text[c] if c < len(text) else "LRC"
                if c in hidden:
                    continue
                ax.text(0.5 * (float(bs.start_s[ks[0]]) + te_c), 1.40 * top, label, ha="center", va="center",
                        fontsize=9, fontweight="bold", color="tab:purple")
    if mark_bit is not None and start <= mark_bit < stop:
        ts = float(bs.start_s[mark_bit])
        te = float(bs.start_s[mark_bit + 1]) if mark_bit + 1 < n else ts + float(bs.period_s[mark_bit])
        ax.axvspan(ts, te, color="orange", alpha=0.25, lw=0)
    ax.set_xlim(t0, t1)
    ax.set_title(f"bits {start}–{stop - 1} {where}", fontsize=9, loc="left")
    ax.set_xlabel("time (s)", fontsize=8)
    ax.tick_params(labelsize=7)


def _zoom_trace(ax, a: int, rate_hz: float, y: np.ndarray, spans: np.ndarray) -> None:
    """The samples ``y`` (from sample ``a``) of a zoomed panel, every one up to
    :data:`ZOOM_MAX_POINTS`, else their min/max envelope; nothing inside the masked ``spans``."""
    if y.size <= ZOOM_MAX_POINTS:
        tt = (a + np.arange(y.size)) / rate_hz
        ax.plot(tt, np.where(_inside(tt, spans), np.nan, y), color="0.3", lw=0.8)
        return
    tt, lo, hi = _decimate(a / rate_hz, rate_hz, y, ZOOM_BINS)
    hide = _inside(tt, spans)
    ax.fill_between(tt, np.where(hide, np.nan, lo), np.where(hide, np.nan, hi), color="0.3", lw=0.8, step="mid")


def _intervals(ax, r: ReadReport, spans: np.ndarray) -> None:
    tm = r.timing
    keep = ~_inside(tm.ratio_t_s, spans)
    x, y = tm.ratio_t_s[keep], tm.ratio[keep]
    _shade_masked(ax, spans)
    lo_b = BOUNDARY - 0.25 * _MARGIN_LIMIT
    hi_b = BOUNDARY + 0.25 * _MARGIN_LIMIT
    ax.axhspan(lo_b, hi_b, color="firebrick", alpha=0.10, lw=0)
    for level, style, label in ((0.5, ":", "half cell"), (BOUNDARY, "-", "boundary 0.75"), (1.0, ":", "full cell")):
        ax.axhline(level, color="firebrick" if level == BOUNDARY else "0.4", ls=style, lw=1.0)
        ax.text(1.002, level, label, transform=ax.get_yaxis_transform(), fontsize=7, va="center")
    yc = np.clip(y, 0.2, 1.6)
    ms = 3.0 if y.size < 2000 else 1.2
    half = y < BOUNDARY
    ax.plot(x[half], yc[half], ".", ms=ms, color="tab:red", rasterized=True)
    ax.plot(x[~half], yc[~half], ".", ms=ms, color="tab:blue", rasterized=True)
    out = (y < 0.2) | (y > 1.6)
    if out.any():
        ax.plot(x[out], yc[out], "x", ms=5, color="black")
    ax.axvline(tm.margin_min_t_s, color="orange", lw=1.2)
    ax.set_ylim(0.2, 1.6)
    ax.set_ylabel("r = Δ / T (cells)", fontsize=8)
    ax.set_title(f"normalised intervals; shaded: margin below {_MARGIN_LIMIT:g}; worst margin "
                 f"{tm.margin_min:.2f} at {tm.margin_min_t_s:.4f} s (orange), 1st percentile {tm.margin_p1:.2f}",
                 fontsize=9, loc="left")
    ax.tick_params(labelsize=8)


def _speed_amplitude(ax, ch: ChannelReport, r: ReadReport, spans: np.ndarray) -> None:
    tm = r.timing
    # a per-bit figure under a masked character follows its bit pattern (peak shift): not drawn there
    per_bit = _inside(tm.bit_t_s, spans)
    if tm.speed_cm_s is not None:
        ax.plot(tm.bit_t_s, np.where(per_bit, np.nan, tm.speed_cm_s), color="tab:green", lw=0.6, alpha=0.5,
                label="speed per bit")
        ax.plot(tm.bit_t_s, tm.speed_fit_cm_s, color="darkgreen", lw=1.8, label="speed (sliding fit)")
        ax.set_ylabel("speed (cm/s)", fontsize=8, color="darkgreen")
        _speed_limits(ax, np.where(per_bit, np.nan, tm.speed_cm_s), tm.speed_fit_cm_s)
        title = (f"speed: mean {tm.mean_speed_cm_s:.1f} cm/s, {tm.min_speed_cm_s:.1f}–{tm.max_speed_cm_s:.1f}; "
                 f"acceleration mean {tm.mean_accel_m_s2:+.2f} m/s², max |a| {tm.max_abs_accel_m_s2:.2f} m/s²")
    else:
        ax.plot(tm.bit_t_s, np.where(per_bit, np.nan, tm.period_s * 1e6), color="tab:green", lw=0.8,
                label="bit period")
        ax.set_ylabel("bit period (µs)", fontsize=8, color="darkgreen")
        title = "bit period (no track density known for a speed)"
    ax.set_xlabel("time (s)", fontsize=8)
    ax.tick_params(labelsize=8)
    if r.amplitude is not None:
        a = r.amplitude
        ax2 = ax.twinx()
        hide = _inside(a.t_s, spans)        # per-pulse points sit at the transitions: they spell out bits
        ax2.plot(a.t_s[~hide], a.peak[~hide], ".", ms=1.5 if a.peak.size > 2000 else 2.5, color="tab:purple",
                 alpha=0.35, rasterized=True)
        ax2.plot(a.t_s, np.where(hide, np.nan, a.smooth), color="tab:purple", lw=1.2, label="|peak| (running median)")
        ax2.set_ylabel(f"|peak| ({ch.front_end.units})", fontsize=8, color="tab:purple")
        ax2.set_ylim(0, 1.15 * float(a.peak.max()) if a.peak.size else 1)
        ax2.tick_params(labelsize=8)
        title += f"; median |peak| {a.median_peak:.3g} {ch.front_end.units}"
    ax.set_title(title, fontsize=9, loc="left")
    ax.legend(loc="lower left", fontsize=7)


SPEED_MIN_SPAN = 0.05
"""The speed axis spans at least ±5 % of the mean speed: a steady swipe is drawn flat, not at the
scale of its measurement scatter under an offset label."""


def _speed_limits(ax, per_bit: np.ndarray, fit: np.ndarray) -> None:
    v = np.concatenate((np.asarray(per_bit, float), np.asarray(fit, float)))
    v = v[np.isfinite(v)]
    if v.size == 0:
        return
    top, bottom = float(v.max()), float(v.min())
    mid = 0.5 * (top + bottom)
    half = max(0.5 * (top - bottom) * 1.15, SPEED_MIN_SPAN * abs(mid))
    if half > 0:
        ax.set_ylim(mid - half, mid + half)
    ax.ticklabel_format(axis="y", useOffset=False)


def _plot_empty(sf, ch: ChannelReport) -> int:
    fe = ch.front_end
    ax = sf.add_subplot(1, 1, 1)
    y = ch.wideband
    t, lo, hi = _decimate(0.0, fe.rate_hz, y, OVERVIEW_BINS)
    ax.fill_between(t, lo, hi, color="0.35", lw=0.0, step="mid")
    tr = ch.result.transitions
    if len(tr) and len(tr) <= 5000:
        ax.plot(tr.times_s, y[np.clip(tr.index, 0, y.size - 1)], ".", ms=2, color="tab:blue")
    for sg in ch.result.segments:
        ax.axvspan(sg.start_s, sg.end_s, color="tab:orange", alpha=0.12, lw=0)
    ax.set_xlim(0, fe.duration_s)
    ax.set_xlabel("time (s)", fontsize=8)
    ax.set_ylabel(f"signal ({fe.units})", fontsize=8)
    st = ch.result.status
    why = f"\n{st.reason}" if st is not None and st.reason else ""
    ax.set_title(f"channel {fe.channel}: no framed data; {fe.n_transitions} transitions (blue), "
                 f"{len(ch.result.segments)} stretches (shaded){why}", fontsize=9, loc="left", wrap=True)
    ax.tick_params(labelsize=8)
    return 1
