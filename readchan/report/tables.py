"""Tables of what the read channel found: one row per bit, one row per transition (CSV).

Input: one capture's :class:`readchan.results.ChannelResult` s.
Output: rows (tuples of plain numbers and strings, cheap to send between processes) and CSV
files written atomically (:func:`readchan.io.atomic.atomic_output`).

Account numbers stay masked (PCI DSS v3.2.1 req. 3.3): unless ``unmask``, a bit of a masked
character (:func:`readchan.formats.iso7813.mask_text`) has no value, margin or flags in the
bits table, and the transitions under a masked character are left out of the transitions table
(their spacing spells out the bits: a half-cell interval is a 1), as the plots do.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from readchan.linecode.f2f import BitStream
from readchan.results import ChannelResult, Read

BITS_COLUMNS = ("source", "channel", "read", "bit", "time_s", "period_s", "margin", "flags", "value", "char")
"""Bits table: the read's number in the capture (in channel order, as the text output numbers
them), the bit's index in time order, its cell's start (s from the capture's first sample), the
bit period it was decided against (s), its decision margin (1 ideal, 0 on the boundary; empty
when a chip decided the bit), the line decoder's flags (1 lone half cell, 2 long interval), the
bit and the index of the character it belongs to in the frame (0 the start sentinel; empty for
the clocking zeros and for an ``f2f-bits`` read)."""

TRANSITIONS_COLUMNS = ("source", "channel", "transition", "time_s", "sample", "polarity", "amplitude", "flags")
"""Transitions table: the transition's index in its channel, its time (s, sub-sample), the
nearest sample (for a VCD strobe: the tick), its polarity (+1/-1), its signed amplitude
(capture units; logic: the level after, about the mid level) and the detector's flags
(1 rescued below threshold, 2 inserted, 4 missing before; :mod:`readchan.frontend.detect`)."""


def _num(v: float, digits: int = 9) -> str:
    return "" if v is None or not np.isfinite(v) else f"{float(v):.{digits}g}"


def bit_chars(read: Read) -> np.ndarray:
    """Per bit of ``read``: the index of its character in the frame, or -1 (outside it)."""
    n = len(read.bits)
    out = np.full(n, -1, np.int64)
    fr = getattr(read.payload, "frame", None)
    if fr is not None:
        for c, row in enumerate(np.asarray(fr.bit_index)):
            out[row[(row >= 0) & (row < n)]] = c
    return out


def hidden_bits(read: Read, unmask: bool = False) -> np.ndarray:
    """Per bit of ``read``: True when it belongs to a masked character."""
    from readchan.formats.iso7813 import mask_text

    n = len(read.bits)
    fr = getattr(read.payload, "frame", None)
    if unmask or fr is None:
        return np.zeros(n, bool)
    shown = mask_text(fr.text, fr.format, False, trusted=read.valid)
    masked = [c for c in range(min(len(shown), len(fr.text))) if shown[c] != fr.text[c]]
    return np.isin(bit_chars(read), masked) if masked else np.zeros(n, bool)


def hidden_spans(read: Read, unmask: bool = False) -> np.ndarray:
    """Time spans (s), shape (k, 2), of the masked bits' cells."""
    bs = read.bits
    hide = hidden_bits(read, unmask)
    if not hide.any():
        return np.zeros((0, 2))
    starts, ends = bs.start_s[hide], bs.start_s[hide] + bs.period_s[hide]
    return np.stack((starts, ends), axis=1)


def bit_reads(results: list[ChannelResult]) -> list[tuple[int, Read]]:
    """(number in the capture, read) of the reads that carry F2F bits with their timing."""
    every = [r for ch in results for r in ch.reads]
    return [(n, r) for n, r in enumerate(every) if isinstance(r.bits, BitStream)]


def bits_rows(source: str, results: list[ChannelResult], *, unmask: bool = False) -> list[tuple]:
    """The bits table's rows (:data:`BITS_COLUMNS`) of one capture."""
    rows = []
    for n, r in bit_reads(results):
        bs = r.bits
        hide, chars = hidden_bits(r, unmask), bit_chars(r)
        for k in range(len(bs)):
            h = bool(hide[k])
            rows.append((source, r.channel, n, k, _num(bs.start_s[k]), _num(bs.period_s[k], 6),
                         "" if h else _num(bs.margin[k], 6), "" if h else int(bs.flags[k]),
                         "" if h else int(bs.bits[k]), "" if chars[k] < 0 else int(chars[k])))
    return rows


def _inside(t: np.ndarray, spans: np.ndarray) -> np.ndarray:
    out = np.zeros(t.shape, bool)
    for a, b in spans:
        out |= (t >= a) & (t <= b)
    return out


def transitions_rows(source: str, results: list[ChannelResult], *, unmask: bool = False) -> list[tuple]:
    """The transitions table's rows (:data:`TRANSITIONS_COLUMNS`) of one capture: every
    channel's transitions, less those under a masked character."""
    rows = []
    for ch in results:
        tr = ch.transitions
        spans = [hidden_spans(r, unmask) for r in ch.reads if isinstance(r.bits, BitStream)]
        spans = np.concatenate(spans) if spans else np.zeros((0, 2))
        keep = ~_inside(tr.times_s, spans)
        for i in np.flatnonzero(keep):
            a = float(tr.amplitude[i])
            rows.append((source, ch.channel, int(i), _num(tr.times_s[i], 12), int(tr.index[i]), 1 if a >= 0 else -1,
                         _num(a, 6), int(tr.flags[i])))
    return rows


def write_table(path: str | Path, columns: tuple[str, ...], rows: list[tuple], *, force: bool = False) -> None:
    """``rows`` under a header of ``columns``, written atomically to ``path`` as CSV."""
    from readchan.io.atomic import atomic_output

    with atomic_output(path, force=force) as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(columns)
            w.writerows(rows)
