"""The inspect report's renderings: :class:`readchan.measure.diagnose.ChannelReport` → a JSON object

Input: :class:`readchan.measure.diagnose.ChannelReport` s.
Output: JSON-ready dicts and rich text on a console.
(:func:`channel_dict`, :func:`read_dict`) and a rich text report (:func:`print_inspect`).

Rendered from the reports, not computed here; account numbers are masked unless ``unmask``.
"""

from __future__ import annotations

import math

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from readchan.measure.diagnose import ChannelReport, ReadReport
from readchan.measure.front_end import noise_source_text
from readchan.formats.iso7813 import mask_text
from readchan.report.render import track_keys, verdict_keys

TRACE_POINTS = 64
"""Points of the speed and amplitude traces in the JSON output."""

BOUNDARY_ZONE_CELL = (0.675, 0.825)
"""Normalised intervals r counted "near 0.75" in the report: where the decision margin
|r − 0.75| / 0.25 is below the verdict's 0.3 limit (0.75 ∓ 0.3·0.25;
:data:`readchan.measure.verdict.LIMITS`)."""


# ---------------------------------------------------------------------------------------------
# JSON


def _f(v, digits: int = 6):
    """A JSON number: rounded to ``digits`` significant digits; None for None, NaN and ±inf."""
    if v is None:
        return None
    v = float(v)
    if not math.isfinite(v):
        return None
    return float(f"{v:.{digits}g}")


def _trace(t: np.ndarray, y: np.ndarray, n: int = TRACE_POINTS) -> list:
    """``y(t)`` averaged into at most ``n`` equal stretches of samples."""
    if y.size == 0:
        return []
    parts = np.array_split(np.arange(y.size), min(n, y.size))
    return [[_f(t[p].mean()), _f(y[p].mean())] for p in parts]


def _char(r: ReadReport, c: int | None, unmask: bool) -> str | None:
    if c is None:
        return None
    text = mask_text(r.read.frame.text, r.read.frame.format, unmask, trusted=r.read.valid)
    return text[c] if c < len(text) else "LRC"


def channel_dict(ch: ChannelReport) -> dict:
    """Channel-wide front-end numbers as a JSON-ready dict."""
    fe = ch.front_end
    st = ch.result.status
    return {
        "source": ch.source,
        "channel": fe.channel,
        "kind": fe.kind,
        "units": fe.units,
        "rate_hz": _f(fe.rate_hz),
        "duration_s": _f(fe.duration_s),
        "transitions": fe.n_transitions,
        "reads": len(ch.reads),
        "dc_offset": _f(fe.dc_offset),
        "wander_pp": _f(fe.wander_pp),
        "noise_rms": _f(fe.noise_rms),
        **_noise_provenance(fe),
        "state": None if st is None else st.state,
        "reason": None if st is None or not st.reason else st.reason,
        "recording": None if st is None else st.recording,
        "undersampled": None if st is None else st.sampling.undersampled,
        "half_cell_samples": None if st is None else _f(st.sampling.half_cell_samples),
        "pw50_samples": None if st is None else _f(st.sampling.pw50_samples),
        "decoder_front_end": _decoder_front_end(ch.result.front_end),
    }


def _decoder_front_end(rec) -> dict | None:
    """What the decoder's front end decided for the channel (:class:`readchan.frontend.head.FrontEndRecord`):
    the hum it took out, the band limits it set, the converter step and clipping, in Hz and
    capture units."""
    if rec is None:
        return None
    return {"hum_hz": _f(rec.hum_hz), "hum_fitted": rec.hum_fitted, "band_hz": _f(rec.band_hz),
            "lowpass_hz": _f(rec.lowpass_hz), "highpass_hz": _f(rec.highpass_hz),
            "quant_step": _f(rec.quant_step), "clipped": rec.clipped, "silent": rec.silent}


def _noise_provenance(fe) -> dict:
    """Where the noise and hum figures came from (keys shared by the channel and read JSON)."""
    return {
        "noise_from": fe.noise_from,
        "quiet_s": _f(fe.quiet_s),
        "noise_used_s": _f(fe.noise_used_s),
        "noise_pulses_excluded": fe.noise_pulses_excluded,
        "noise_slow_excluded_s": _f(fe.noise_slow_excluded_s),
        "noise_floored": fe.noise_floored,
        "quant_step": _f(fe.quant_step),
        "hum_from": fe.hum_from,
        "hum_hz": _f(fe.hum_hz),
        "mains_hz": _f(fe.mains_hz),
        "hum_amplitude": _f(fe.hum_amplitude),
    }


def read_dict(ch: ChannelReport, r: ReadReport, *, unmask: bool = False) -> dict:
    """One read's diagnostics as a JSON-ready dict (stable keys; units in the key names)."""
    rd, fr, tm, fe = r.read, r.read.frame, r.timing, ch.front_end
    a, n, p = r.amplitude, r.noise, r.pulse
    least = r.least
    amp_trace = [] if a is None else _trace(a.t_s, a.smooth)
    speed_trace = [] if tm.speed_fit_cm_s is None else _trace(tm.bit_t_s, tm.speed_fit_cm_s)
    return {
        "source": ch.source,
        "channel": rd.channel,
        "read": r.index,
        "track": rd.track.number if rd.track else None,
        **track_keys(rd),
        "density_bpi": _f(tm.density_bpi),
        "format": fr.format,
        "direction": fr.direction,
        **verdict_keys(rd, unmask=unmask),
        "start_s": _f(rd.start_s),
        "end_s": _f(rd.end_s),
        "bits": int(len(rd.bits)),
        "amplitude": None if a is None else _amplitude_dict(a, fe),
        "noise": None if n is None else _noise_dict(n, fe),
        "pulse": None if p is None else _pulse_dict(p),
        "timing": _timing_dict(r, unmask),
        "trace": {
            "speed_cm_s": speed_trace,
            "amplitude": amp_trace,
        },
        "anomalies": [
            {"kind": an.kind, "t_s": _f(an.t_s), "sample": an.sample, "bit": an.bit, "char_index": an.char,
             "char": _char(r, an.char, unmask)}
            for an in r.anomalies
        ],
        "checks": [
            {"name": c.limit.name, "label": c.limit.label, "value": _f(c.value), "limit": _f(c.limit.limit),
             "sense": c.limit.sense, "headroom": _f(c.headroom), "ok": c.ok, "source": c.limit.source}
            for c in r.checks
        ],
        "verdict": {
            "ok": not r.failed,
            "failed": [c.limit.name for c in r.failed],
            "least": None if least is None else least.limit.name,
            "text": r.verdict,
        },
    }


def _numbers(obj, names: tuple[str, ...]) -> dict:
    """``{name: _f(obj.name)}`` for every name, in order (a measurement's JSON numbers)."""
    return {name: _f(getattr(obj, name)) for name in names}


def _amplitude_dict(a, fe) -> dict:
    """The ``amplitude`` object of :func:`read_dict` (capture units)."""
    return {"units": fe.units, **_numbers(a, ("median_peak", "min_peak", "max_peak", "positive_median",
                                              "negative_median", "asymmetry_pct", "clipped_fraction"))}


def _noise_dict(n, fe) -> dict:
    """The ``noise`` object of :func:`read_dict` (capture units, dB)."""
    return {
        "units": fe.units,
        "noise_rms": _f(n.noise_rms),
        "snr_db": _f(n.snr_db),
        **_noise_provenance(fe),
        "hum_ratio": _f(n.hum_ratio),
        "dc_offset": _f(fe.dc_offset),
        "wander_pp": _f(fe.wander_pp),
    }


def _pulse_dict(p) -> dict:
    """The ``pulse`` object of :func:`read_dict` (seconds, cells, metres)."""
    return {**_numbers(p, ("pw50_s", "pw50_cell", "width_cell", "pw50_m")), "pulses": p.n_pulses,
            "resolution": _f(p.resolution)}


def _timing_dict(r: ReadReport, unmask: bool) -> dict:
    """The ``timing`` object of :func:`read_dict`: speed, margins (with their characters,
    masked unless ``unmask``), peak shift and the interval histogram."""
    tm = r.timing
    worst_char = r.bit_char()[tm.margin_min_bit] if len(r.read.bits) else -1
    p1_char = r.bit_char()[tm.margin_p1_bit] if len(r.read.bits) else -1
    return {
        "mean_period_s": _f(float(np.mean(tm.period_s))) if tm.period_s.size else None,
        **_numbers(tm, ("mean_speed_cm_s", "min_speed_cm_s", "max_speed_cm_s", "mean_accel_m_s2",
                        "max_abs_accel_m_s2", "speed_change_per_bit", "margin_min", "margin_min_t_s")),
        "margin_min_bit": tm.margin_min_bit,
        "margin_min_char": _char(r, int(worst_char) if worst_char >= 0 else None, unmask),
        "margin_p1": _f(tm.margin_p1),
        "margin_p1_t_s": _f(tm.margin_p1_t_s),
        "margin_p1_bit": tm.margin_p1_bit,
        "margin_p1_char": _char(r, int(p1_char) if p1_char >= 0 else None, unmask),
        "peak_shift_s": _f(tm.peak_shift_s),
        "peak_shift_cell": _f(tm.peak_shift_cell),
        "interval_histogram": {
            "edges_cell": [_f(e) for e in tm.hist_edges_cell],
            "counts": [int(c) for c in tm.hist_counts],
        },
    }


# ---------------------------------------------------------------------------------------------
# rich report


def _val(v, fmt: str, unit: str = "") -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "–"
    return f"{v:{fmt}}{(' ' + unit) if unit else ''}"


def _rows(ch: ChannelReport, r: ReadReport) -> list[tuple[str, str, str]]:
    """(section, quantity, value) rows of the report table."""
    fe, a, n, p, tm = ch.front_end, r.amplitude, r.noise, r.pulse, r.timing
    u = fe.units
    rows: list[tuple[str, str, str]] = []
    if r.read.track_evidence is not None:
        rows.append(("track", "assumed", r.read.track_evidence.text()))
    if a is not None:
        rows += [
            ("amplitude", "median |peak|", _val(a.median_peak, ".4g", u)),
            ("", "min / max |peak|", f"{a.min_peak:.4g} / {a.max_peak:.4g} {u}"),
            ("", "asymmetry (P−N)/(P+N)", _val(a.asymmetry_pct, "+.1f", "%")),
            ("", "clipped samples", _val(100 * a.clipped_fraction, ".3f", "%")),
        ]
    if n is not None:
        hum = "none found" if fe.hum_hz is None else (
            f"{fe.mains_hz:.0f} Hz mains (fit {fe.hum_hz:.2f} Hz), {fe.hum_amplitude:.3g} {u} = "
            f"{100 * (n.hum_ratio or 0):.1f}% of |peak| (fitted on {fe.hum_from})")
        rows += [
            ("noise", "noise RMS", f"{n.noise_rms:.3g} {u} ({noise_source_text(fe)})"),
            ("", "SNR", _val(n.snr_db, ".1f", "dB")),
            ("", "mains hum", hum),
            ("", "DC offset / wander p-p", f"{fe.dc_offset:.3g} / {fe.wander_pp or 0:.3g} {u}"),
        ]
    if p is not None:
        pm = "" if p.pw50_m is None else f", {p.pw50_m * 1e6:.1f} µm"
        rows += [
            ("pulse", "PW50", f"{p.pw50_s * 1e6:.1f} µs = {p.pw50_cell:.3f} cell{pm} ({p.n_pulses} pulses)"),
            ("", "resolution", _val(p.resolution, ".3f")),
        ]
    if tm.mean_speed_cm_s is not None:
        rows += [
            ("timing", "speed mean (min–max)",
             f"{tm.mean_speed_cm_s:.1f} cm/s ({tm.min_speed_cm_s:.1f}–{tm.max_speed_cm_s:.1f})"),
            ("", "acceleration mean / max |a|", f"{tm.mean_accel_m_s2:+.3g} / {tm.max_abs_accel_m_s2:.3g} m/s²"),
        ]
        rows.append(("" if rows and rows[-1][0] == "" else "timing", "speed change per bit",
                     _val(100 * (tm.speed_change_per_bit or 0), ".3f", "%")))
    else:
        rows.append(("timing", "bit period mean", _val(float(np.mean(tm.period_s)) * 1e6, ".1f", "µs")))
    bc = r.bit_char()

    def where(bit: int, t: float) -> str:
        c = int(bc[bit]) if 0 <= bit < bc.size else -1
        return f"bit {bit} at {t:.4f} s" + (f", char {c}" if c >= 0 else "")

    rows += [
        ("", "timing margin worst", f"{tm.margin_min:.3f} ({where(tm.margin_min_bit, tm.margin_min_t_s)})"),
        ("", "timing margin 1st pct", f"{tm.margin_p1:.3f} ({where(tm.margin_p1_bit, tm.margin_p1_t_s)})"),
        ("", "peak shift", "–" if tm.peak_shift_s is None else
         f"{tm.peak_shift_s * 1e6:+.2f} µs = {tm.peak_shift_cell:+.4f} cell"),
        ("", "intervals r = Δ/T", _histogram_line(tm.ratio)),
    ]
    return rows


def _histogram_line(ratio: np.ndarray) -> str:
    """Counts of r in the half-cell band, the boundary zone and the full-cell band."""
    if ratio.size == 0:
        return "–"
    lo, hi = BOUNDARY_ZONE_CELL
    half = int(np.sum(ratio < lo))
    zone = int(np.sum((ratio >= lo) & (ratio < hi)))
    full = int(np.sum(ratio >= hi))
    return (f"{half} half (median {np.median(ratio[ratio < 0.75]) if np.any(ratio < 0.75) else float('nan'):.3f}), "
            f"{zone} near 0.75, {full} full (median "
            f"{np.median(ratio[ratio >= 0.75]) if np.any(ratio >= 0.75) else float('nan'):.3f})")


def print_inspect(console: Console, source: str, reports: list[ChannelReport], *, unmask: bool = False) -> None:
    """The rich report of one capture."""
    console.print(Text(source, style="bold"))
    for ch in reports:
        fe = ch.front_end
        if not ch.reads:
            st = ch.result.status
            why = st.reason if st is not None else f"{fe.n_transitions} transitions"
            line = f"channel {fe.channel} ({fe.kind}): no framed data: {why}"
            if fe.noise_rms is not None:
                line += f"; noise RMS {fe.noise_rms:.3g} {fe.units}"
            if fe.hum_hz is not None:
                line += f"; hum {fe.mains_hz:.0f} Hz ({fe.hum_amplitude:.3g} {fe.units})"
            console.print(line, highlight=False)
            continue
        for r in ch.reads:
            rd = r.read
            mark = Text("valid", style="green") if rd.valid else Text("INVALID", style="bold red")
            head = Text(f"channel {rd.channel} read {r.index}: track {rd.track.number if rd.track else '?'}, "
                        f"{rd.frame.format} {rd.frame.direction}, {len(rd.bits)} bits, "
                        f"{rd.start_s:.3f}–{rd.end_s:.3f} s, ")
            head.append(mark)
            console.print(head)
            console.print("  " + mask_text(rd.frame.text, rd.frame.format, unmask, trusted=rd.valid), soft_wrap=True,
                          highlight=False, markup=False)
            if rd.rejected == "suspect":
                where = "; ".join(f"char {c}: {', '.join(k)}" for c, k in rd.damaged_chars)
                console.print(Text(f"  checks pass, but damage in more than one character: {where}", style="yellow"),
                              soft_wrap=True)
            elif rd.rejected == "fields":
                console.print(Text("  checks pass, but the ISO/IEC 7813 layout is broken: "
                                   + "; ".join(rd.field_errors), style="yellow"), soft_wrap=True)
            t = Table(show_header=False, box=None, pad_edge=False, padding=(0, 2, 0, 2))
            t.add_column(style="bold")
            t.add_column()
            t.add_column()
            for sec, q, v in _rows(ch, r):
                t.add_row(sec, q, v)
            console.print(t)
            if r.anomalies:
                shown = r.anomalies[:12]
                parts = []
                for an in shown:
                    c = _char(r, an.char, unmask)
                    parts.append(f"{an.kind} at {an.t_s:.4f} s" + (f" (char {an.char} {c!r})" if c else ""))
                more = f" … and {len(r.anomalies) - len(shown)} more" if len(r.anomalies) > len(shown) else ""
                console.print(Text("  anomalies: " + "; ".join(parts) + more, style="yellow"), soft_wrap=True)
            style = "green" if not r.failed else "bold red"
            console.print(Text(f"  verdict: {r.verdict}", style=style), soft_wrap=True)
