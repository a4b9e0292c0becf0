"""Rendering of the tape diagnostics: a rich report and JSON-ready dicts.

Input: :class:`readchan.measure.tape.TapeReport` s.
Output: lines and tables on a rich console (:func:`print_tape_inspect`); dicts for
``readchan inspect --json`` (:func:`tape_read_dict`, :func:`tape_channel_dict`), keys stable
with the unit in the name (``_s`` seconds, ``_db`` decibels, ``_rel`` relative to nominal play
speed, 1 = nominal; margins are dimensionless, 1 ideal; levels in the capture's ``units``).
"""

from __future__ import annotations

import math

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from readchan.measure.tape import TapeReport

TRACE_POINTS = 64
"""Speed trace and margins in the JSON: at most this many points (the least margin of each bin)."""


def _f(v, digits: int = 6):
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return None
    return round(float(v), digits)


def _points(t: np.ndarray, y: np.ndarray, *, least: bool = False) -> list:
    """``[t_s, value]`` pairs, at most :data:`TRACE_POINTS`: points picked evenly along the trace,
    or with ``least`` the least value of each of as many equal stretches."""
    if t.size <= TRACE_POINTS:
        return [[_f(a), _f(b)] for a, b in zip(t, y)]
    if not least:
        return [[_f(t[k]), _f(y[k])] for k in np.linspace(0, t.size - 1, TRACE_POINTS).round().astype(int)]
    edges = np.linspace(0, t.size, TRACE_POINTS + 1).astype(int)
    picks = [a + int(np.argmin(y[a:b])) for a, b in zip(edges[:-1], edges[1:])]
    return [[_f(t[k]), _f(y[k])] for k in picks]


def _basis_fps(read) -> float | None:
    """The frame rate a timecode read's speeds are relative to: its rate, else its first candidate."""
    if read.format != "ltc":
        return None
    p = read.payload
    return p.rate_fps if p.rate_fps is not None else p.rate_fps_candidates[0]


def tape_channel_dict(rep: TapeReport, units: str) -> dict:
    """A tape channel's entry in ``channels``: where it is and which family read it."""
    fam = "timecode" if rep.format == "ltc" else "cassette"
    return {"source": rep.source, "channel": rep.channel, "kind": rep.signal_kind, "family": fam, "units": units,
            "rate_hz": _f(rep.rate_hz), "reads": 1}


def tape_read_dict(rep: TapeReport, units: str) -> dict:
    """One tape read's diagnostics (README, *Tape synth and inspect*, for every key)."""
    r = rep.read
    w = rep.worst
    least = rep.least
    return {
        "source": rep.source, "channel": rep.channel, "format": rep.format, "signal_kind": rep.signal_kind,
        "direction": r.direction, "valid": rep.valid, "start_s": _f(r.start_s), "end_s": _f(r.end_s),
        "speed_basis_fps": _basis_fps(r),
        "speed_mean_rel": _f(rep.speed_mean), "speed_min_rel": _f(rep.speed_min), "speed_max_rel": _f(rep.speed_max),
        "speed_changes": [{"start_s": _f(c.start_s), "end_s": _f(c.end_s), "from_rel": _f(c.from_speed),
                           "to_rel": _f(c.to_speed)} for c in rep.changes],
        "speed_trace_rel": _points(rep.speed_t_s, rep.speed),
        "margin_unit": rep.unit, "margin_min": _f(rep.margin_min), "margin_p1": _f(rep.margin_p1),
        "margin_worst": None if w < 0 else {"index": w, "label": rep.unit_labels[w], "t_s": _f(rep.unit_t_s[w]),
                                            "margin": _f(rep.unit_margin[w])},
        "margins": _points(rep.unit_t_s, rep.unit_margin, least=True),
        "units": units, "level_peak": _f(rep.level_peak), "noise_rms": _f(rep.noise_rms),
        "noise_from": rep.noise_from, "snr_db": _f(rep.snr_db, 3),
        "dropouts": [{"start_s": _f(d.start_s), "end_s": _f(d.end_s), "duration_s": _f(d.duration_s),
                      "depth_db": _f(d.depth_db, 3)} for d in rep.dropouts],
        "events": [{"kind": e.kind, "position_s": _f(e.position_s), "detail": e.detail} for e in rep.events],
        "checks": [{"name": c.name, "value": _f(c.value), "limit": c.limit, "limit_kind": c.kind,
                    "headroom": _f(c.headroom, 4), "ok": c.ok} for c in rep.checks],
        "failed": [c.name for c in rep.failed] + ([] if rep.valid else ["read not valid"]),
        "least_headroom": least.name,
    }


def _num(v, fmt: str, unit: str = "") -> str:
    return "n/a" if v is None or (isinstance(v, float) and not math.isfinite(v)) else f"{v:{fmt}}{unit}"


def _rows(rep: TapeReport, units: str) -> list[tuple[str, str, str]]:
    w = rep.worst
    worst = "" if w < 0 else f"worst {rep.unit} {rep.unit_labels[w]} at {rep.unit_t_s[w]:.4f} s"
    basis = _basis_fps(rep.read)
    note = f" (of {basis:g} fps: the rate is undecided)" if basis is not None and rep.read.payload.rate_fps is None else ""
    rows = [("speed", "mean / min / max",
             f"{rep.speed_mean:.4f} / {rep.speed_min:.4f} / {rep.speed_max:.4f} × nominal{note}")]
    for c in rep.changes:
        rows.append(("", "change", f"{c.from_speed:.3f}× → {c.to_speed:.3f}× over {c.start_s:.3f}–{c.end_s:.3f} s"))
    rows += [("margin", f"least per {rep.unit}", f"{_num(rep.margin_min, '.3f')}  {worst}"),
             ("", "1st percentile", _num(rep.margin_p1, ".3f")),
             ("level", "peak", f"{rep.level_peak:.4g} {units}"),
             ("", "noise RMS", _num(rep.noise_rms, ".3g", f" {units} ({rep.noise_from})")),
             ("", "SNR", _num(rep.snr_db, ".1f", " dB"))]
    for d in rep.dropouts:
        rows.append(("dropout", f"{d.start_s:.4f}–{d.end_s:.4f} s", f"{d.duration_s * 1e3:.1f} ms, {d.depth_db:.1f} dB deep"))
    return rows


def print_tape_inspect(console: Console, source: str, reports: list[TapeReport], units: str = "FS") -> None:
    """The rich report of a capture's tape reads: a table each, events, and the verdict line."""
    console.print(Text(source, style="bold"))
    for rep in reports:
        r = rep.read
        mark = Text("valid", style="green") if rep.valid else Text("INVALID", style="bold red")
        head = Text(f"channel {rep.channel}: {rep.format} ({rep.signal_kind}) {r.direction}, "
                    f"{rep.unit_t_s.size} {rep.unit}s, {r.start_s:.3f}–{r.end_s:.3f} s, ")
        head.append(mark)
        console.print(head)
        t = Table(show_header=False, box=None, pad_edge=False, padding=(0, 2, 0, 2))
        for _ in range(3):
            t.add_column()
        for row in _rows(rep, units):
            t.add_row(*row)
        console.print(t)
        if rep.events:
            shown = rep.events[:12]
            more = f" … and {len(rep.events) - len(shown)} more" if len(rep.events) > len(shown) else ""
            console.print(Text("  events: " + "; ".join(f"{e.kind} at {e.position_s:.4f} s"
                                                        + (f" ({e.detail})" if e.detail else "") for e in shown)
                               + more, style="yellow"), soft_wrap=True)
        console.print(verdict_line(rep), soft_wrap=True)


def verdict_line(rep: TapeReport) -> Text:
    """``verdict: ok|FAIL (...); least headroom: NAME VALUE (limit L, headroom H×)``."""
    bad = [f"{c.name} {c.value:.3g}{c.unit}" for c in rep.failed] + ([] if rep.valid else ["read not valid"])
    c = rep.least
    text = (f"  verdict: {'FAIL (' + ', '.join(bad) + ')' if bad else 'ok'}; least headroom: {c.name} "
            f"{c.value:.3g}{c.unit} ({c.kind} limit {c.limit:g}{c.unit}, headroom {c.headroom:.2f}×)")
    return Text(text, style="bold red" if bad else "green")
