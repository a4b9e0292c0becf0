"""Plots of the tape diagnostics: waveform, play speed and decision margins of each tape read.

Input: (:class:`readchan.measure.tape.TapeReport`, the channel's samples) pairs and the sample rate.
Output: a PNG, PDF or SVG file written through :func:`readchan.io.atomic.atomic_output`.

matplotlib is imported here only, with the Agg canvas (no display needed); this module is
loaded when ``inspect --plot`` runs on a tape capture.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from readchan.measure.tape import LIMITS, TapeReport

BINS = 2000
"""The waveform is drawn as the min–max envelope of about this many stretches."""


def plot_tape(items: list[tuple[TapeReport, np.ndarray]], rate_hz: float, path: str | Path, *,
              title: str = "", force: bool = False, dpi: int = 110) -> int:
    """Three panels per tape read (waveform with dropouts and events, speed, margins) into
    ``path``; returns the number of panels drawn."""
    from readchan.io.atomic import atomic_output

    path = Path(path)
    n = max(1, len(items))
    fig = Figure(figsize=(11, 7.5 * n), layout="constrained")
    axes = fig.subplots(3 * n, 1, squeeze=False)[:, 0]
    if title:
        fig.suptitle(title)
    for k, (rep, x) in enumerate(items):
        _waveform(axes[3 * k], rep, x, rate_hz)
        _speed(axes[3 * k + 1], rep)
        _margins(axes[3 * k + 2], rep)
    with atomic_output(path, force=force) as tmp:
        fig.savefig(tmp, dpi=dpi, format=path.suffix.lstrip(".").lower() or "png")
    return 3 * len(items)


def _waveform(ax, rep: TapeReport, x: np.ndarray, rate_hz: float) -> None:
    step = max(1, x.size // BINS)
    m = x.size // step
    blocks = x[:m * step].reshape(m, step)
    t = (np.arange(m) + 0.5) * step / rate_hz
    ax.fill_between(t, blocks.min(axis=1), blocks.max(axis=1), color="tab:blue", lw=0, label="signal (min–max)")
    for i, d in enumerate(rep.dropouts):
        ax.axvspan(d.start_s, d.end_s, color="tab:red", alpha=0.2,
                   label="dropout (−6 dB)" if i == 0 else None)
    for i, e in enumerate(rep.events):
        ax.axvline(e.position_s, color="tab:orange", lw=1, ls="--", label="event" if i == 0 else None)
        ax.annotate(e.kind, (e.position_s, 1.0), xycoords=("data", "axes fraction"), rotation=90, fontsize=7,
                    va="top", ha="right", color="tab:orange")
    snr = "n/a" if rep.snr_db is None else f"{rep.snr_db:.1f} dB"
    ax.set_title(f"channel {rep.channel}: {rep.format} ({rep.signal_kind}), level {rep.level_peak:.3g}, SNR {snr}",
                 fontsize=9)
    ax.set_xlabel("time (s)")
    ax.set_ylabel("signal")
    ax.set_xlim(0, x.size / rate_hz)
    ax.legend(loc="lower right", fontsize=7)


SPEED_MIN_SPAN = 0.05
"""The speed panel spans at least ±5 % of the mean speed (a steady tape's scatter stays flat)."""


def _speed(ax, rep: TapeReport) -> None:
    ax.plot(rep.speed_t_s, rep.speed, ".", ms=2, color="tab:green", label="play speed")
    for i, c in enumerate(rep.changes):
        ax.axvspan(c.start_s, c.end_s, color="tab:green", alpha=0.12,
                   label="change (10–90 %)" if i == 0 else None)
    lo, hi = LIMITS[f"speed_min_{rep.format}"][0], LIMITS[f"speed_max_{rep.format}"][0]
    top, bottom = float(np.max(rep.speed)), float(np.min(rep.speed))
    if hi <= 1.5 * top:
        ax.axhline(hi, color="tab:red", lw=1, ls=":", label=f"limit {hi:g}×")
    if lo >= 0.67 * bottom:
        ax.axhline(lo, color="tab:red", lw=1, ls=":", label=f"limit {lo:g}×")
    # at least ±SPEED_MIN_SPAN around the data: a steady speed would otherwise be drawn at the
    # scale of its measurement scatter, under an offset label
    mid, half = 0.5 * (top + bottom), max(0.5 * (top - bottom) * 1.15, SPEED_MIN_SPAN * 0.5 * (top + bottom))
    ax.set_ylim(mid - half, mid + half)
    ax.ticklabel_format(axis="y", useOffset=False)
    ax.set_ylabel("speed (× nominal)")
    ax.set_xlabel("time (s)")
    ax.set_title(f"play speed: mean {rep.speed_mean:.4f}×, {bottom:.3f}–{top:.3f}×", fontsize=9)
    ax.legend(loc="best", fontsize=7)


def _margins(ax, rep: TapeReport) -> None:
    ax.plot(rep.unit_t_s, rep.unit_margin, ".", ms=3, color="tab:purple", label=f"least margin per {rep.unit}")
    limit = LIMITS["margin_min"][0]
    ax.axhline(limit, color="tab:red", lw=1, ls=":", label=f"limit {limit:g}")
    if rep.worst >= 0:
        w = rep.worst
        ax.plot([rep.unit_t_s[w]], [rep.unit_margin[w]], "o", mfc="none", mec="tab:red", ms=9,
                label=f"worst {rep.unit} {rep.unit_labels[w]}")
    ax.set_ylim(0, 1.05)
    ax.set_ylabel("decision margin")
    ax.set_xlabel("time (s)")
    ax.set_title(f"margins: least {rep.margin_min:.3f}, 1st percentile {rep.margin_p1:.3f}", fontsize=9)
    ax.legend(loc="lower right", fontsize=7)
