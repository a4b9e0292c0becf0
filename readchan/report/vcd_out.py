"""What the read channel found, as a Value Change Dump (VCD, IEEE 1364 §18) to lay over the capture.

Input: one capture's :class:`readchan.results.ChannelResult` s and its time base.
Output: a VCD file, written with ``pyvcd`` (``vcd.writer.VCDWriter``; why this library:
:mod:`readchan.io.vcd`) through :func:`readchan.io.atomic.atomic_output`.

Per channel ``c``, in scope ``readchan.ch<c>``:

* ``transition`` (wire): the detected transitions as a level, 1 after a positive one and 0
  after a negative one, so a head capture's pulses give back the flux (magnetisation) pattern
  and a logic capture its own edges;
* ``cell`` (wire): toggles at the start of every bit cell (the recovered bit clock);
* ``bit`` (wire): each bit's value over its cell, ``z`` outside the reads;
* ``char`` (string): each framed character from its first bit's cell on, as ``index:character``
  (``0:%``, ``1:B``, ... ``n:LRC``: the index keeps two equal characters in a row apart, since
  a VCD records a value only when it changes), empty after the last;
* ``read`` (string): the format and verdict of each read (``iso-alpha:valid``) over its span.

Time 0 is the capture's first sample (for a VCD input: its tick 0), so the signals line up with
the capture in a waveform viewer.  Account digits stay masked unless ``unmask``
(:mod:`readchan.report.tables`): a masked character shows ``*``, its bits ``x``, and the
transition level is ``x`` across it.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from readchan.linecode.f2f import BitStream
from readchan.report.tables import bit_chars, hidden_bits, hidden_spans
from readchan.results import ChannelResult

_UNITS = (("s", 1.0), ("ms", 1e-3), ("us", 1e-6), ("ns", 1e-9), ("ps", 1e-12), ("fs", 1e-15))


def timescale_for(rate_hz: float) -> tuple[str, float]:
    """The VCD timescale (text, seconds) for a capture at ``rate_hz`` (Hz): the largest of
    1/10/100 × s…fs no longer than 1/100 of a sample period (sub-sample transition times)."""
    target = 0.01 / float(rate_hz)
    for unit, scale in _UNITS:
        for mag in (100, 10, 1):
            if mag * scale <= target * (1 + 1e-9):
                return f"{mag} {unit}", mag * scale
    return "1 fs", 1e-15


def timescale_text(timescale_s: float) -> str:
    """A tick in seconds (a VCD input's own) as VCD timescale text (``1 us``)."""
    for unit, scale in _UNITS:
        mag = timescale_s / scale
        if mag >= 1 - 1e-9 and abs(mag - round(mag)) < 1e-6 * mag:
            return f"{int(round(mag))} {unit}"
    return "1 fs"


def _channel_events(ch: ChannelResult, tick_s: float, unmask: bool, reads: list) -> list[tuple[int, int, str, object]]:
    """(tick, order, signal, value) of one channel's changes."""
    ev: list[tuple[int, int, str, object]] = []

    def at(t: float) -> int:
        return int(round(t / tick_s))

    tr = ch.transitions
    spans = np.concatenate([hidden_spans(r, unmask) for r in reads] or [np.zeros((0, 2))])
    hidden = np.zeros(len(tr), bool)
    for a, b in spans:
        hidden |= (tr.times_s >= a) & (tr.times_s <= b)
    for t, a in zip(tr.times_s[~hidden], tr.amplitude[~hidden]):
        ev.append((at(t), 0, "transition", 1 if a >= 0 else 0))
    for r in reads:
        bs, hide, chars = r.bits, hidden_bits(r, unmask), bit_chars(r)
        verdict = "valid" if r.valid else "invalid"
        ev.append((at(r.start_s), 1, "read", f"{r.format}:{verdict}"))
        end = float(bs.start_s[-1] + bs.period_s[-1]) if len(bs) else r.end_s
        ev.append((at(end), 5, "read", ""))
        text = _shown_text(r, unmask)
        last_char = -1
        for k in range(len(bs)):
            tick = at(bs.start_s[k])
            ev.append((tick, 2, "cell", k % 2 == 0))
            ev.append((tick, 3, "bit", "x" if hide[k] else int(bs.bits[k])))
            c = int(chars[k])
            if c >= 0 and c != last_char and text is not None:
                ev.append((tick, 4, "char", f"{c}:{text[c] if c < len(text) else 'LRC'}"))
            elif c < 0 <= last_char:
                ev.append((tick, 4, "char", ""))
            last_char = c
        ev.append((at(end), 5, "bit", "z"))
        ev.append((at(end), 5, "char", ""))
    for a, b in spans:                  # across a masked character: no level, then the level after it
        ev.append((at(a), 6, "transition", "x"))
        level = tr.amplitude[tr.times_s <= b]
        ev.append((at(b), 7, "transition", int(level[-1] >= 0) if level.size else "x"))
    return ev


def _shown_text(r, unmask: bool) -> str | None:
    from readchan.formats.iso7813 import mask_text

    fr = getattr(r.payload, "frame", None)
    return None if fr is None else mask_text(fr.text, fr.format, unmask, trusted=r.valid)


def write_vcd(path: str | Path, results: list[ChannelResult], *, rate_hz: float, timescale_s: float | None = None,
              unmask: bool = False, force: bool = False) -> int:
    """Write the VCD of one capture's ``results`` to ``path``; returns the number of changes.

    ``timescale_s`` is the tick (a VCD input's own); None chooses one from ``rate_hz``
    (:func:`timescale_for`)."""
    from vcd import VCDWriter

    from readchan.io.atomic import atomic_output

    ts_text, tick_s = (timescale_for(rate_hz) if timescale_s is None
                       else (timescale_text(timescale_s), float(timescale_s)))
    if not math.isfinite(tick_s) or tick_s <= 0:
        ts_text, tick_s = timescale_for(rate_hz)
    count = 0
    with atomic_output(path, force=force) as tmp:
        with open(tmp, "w", encoding="ascii") as fh:
            w = VCDWriter(fh, timescale=ts_text, date="", comment="readchan decode: transitions, cells, bits, characters",
                          version="readchan")
            events = []
            for ch in results:
                scope = f"readchan.ch{ch.channel}"
                var = {"transition": w.register_var(scope, "transition", "wire", size=1, init="z"),
                       "cell": w.register_var(scope, "cell", "wire", size=1, init=0),
                       "bit": w.register_var(scope, "bit", "wire", size=1, init="z"),
                       "char": w.register_var(scope, "char", "string", init=""),
                       "read": w.register_var(scope, "read", "string", init="")}
                reads = [r for r in ch.reads if isinstance(r.bits, BitStream) and len(r.bits)]
                events += [(t, o, var[name], v) for t, o, name, v in _channel_events(ch, tick_s, unmask, reads)]
            events.sort(key=lambda e: (e[0], e[1]))
            for t, _, v, value in events:
                w.change(v, max(t, 0), value)
            count = len(events)
            w.close()
    return count
