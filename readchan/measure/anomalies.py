"""The anomalies the decoder met in a read, each tagged with its time, sample, bit and character.

Input: a :class:`readchan.channel.Read` (transition and bit flags, the frame's parity, LRC
and corrections) and the sample rate in Hz.  Output: a tuple of :class:`Anomaly` in time order.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from readchan.channel import Read
from readchan.formats.iso7811.framing import missing_end
from readchan.frontend.detect import TR_EXTRA, TR_MISSING, TR_WEAK
from readchan.linecode.f2f import BIT_LONE_HALF, BIT_LONG


@dataclass(frozen=True)
class Anomaly:
    """Something the decoder met, tagged at its place in the capture.

    Attributes
    ----------
    kind : ``"polarity"`` (two transitions of the same polarity: one missing), ``"extra"``
        (a noise peak dropped), ``"weak"`` (a transition rescued below threshold),
        ``"lone-half"`` (a half cell with no second half), ``"long"`` (an interval over 1.6
        cells), ``"parity"``, ``"lrc"``, ``"no-end"`` (no end sentinel), ``"no-lrc"`` (the text ends in the
        end sentinel, the LRC character after it was not read), ``"corrected"``.
    t_s : time in seconds; sample : nearest sample index.
    bit : bit index (time order) or None; char : character index (the LRC character is
        ``len(text)``) or None.
    """

    kind: str
    t_s: float
    sample: int
    bit: int | None
    char: int | None


def bit_char(r: Read) -> np.ndarray:
    """Character index of each bit of ``r`` (time order), −1 outside the framed characters."""
    out = np.full(len(r.bits), -1, np.int64)
    for c, row in enumerate(r.frame.bit_index):
        row = row[(row >= 0) & (row < out.size)]
        out[row] = c
    return out


def find_anomalies(r: Read, rate_hz: float) -> tuple[Anomaly, ...]:
    """Every anomaly of ``r`` (detector and line-decoder flags, parity, corrections, LRC, a
    missing end), in time order; ``rate_hz`` gives each its sample index."""
    tr, bs, fr = r.transitions, r.bits, r.frame
    char_of = bit_char(r)
    out: list[Anomaly] = []

    def tag(kind, t, bit):
        ch = int(char_of[bit]) if bit is not None and 0 <= bit < char_of.size and char_of[bit] >= 0 else None
        out.append(Anomaly(kind, float(t), int(round(t * rate_hz)), bit, ch))

    for flag, kind in ((TR_MISSING, "polarity"), (TR_EXTRA, "extra"), (TR_WEAK, "weak")):
        for j in np.flatnonzero(tr.flags & flag):
            bit = int(np.searchsorted(bs.first_transition, j, side="right") - 1) if len(bs) else None
            tag(kind, tr.times_s[j], bit if bit is not None and bit >= 0 else None)
    for flag, kind in ((BIT_LONE_HALF, "lone-half"), (BIT_LONG, "long")):
        for k in np.flatnonzero(bs.flags & flag):
            tag(kind, bs.start_s[k], int(k))

    def char_at(c):
        """The character's first bit in time order."""
        return int(fr.bit_index[c].min())

    for c in np.flatnonzero(~np.asarray(fr.parity_ok, bool)):
        k = char_at(int(c))
        out.append(Anomaly("parity", float(bs.start_s[k]), int(round(bs.start_s[k] * rate_hz)), k, int(c)))
    for c in fr.corrected:
        if c < fr.bit_index.shape[0]:
            k = char_at(int(c))
            out.append(Anomaly("corrected", float(bs.start_s[k]), int(round(bs.start_s[k] * rate_hz)), k, int(c)))
    if fr.complete and not fr.lrc_ok and fr.bit_index.shape[0] > len(fr.text):
        c = len(fr.text)
        k = char_at(c)
        out.append(Anomaly("lrc", float(bs.start_s[k]), int(round(bs.start_s[k] * rate_hz)), k, c))
    if not fr.complete:
        kind = "no-lrc" if missing_end(fr) == "no LRC" else "no-end"
        out.append(Anomaly(kind, float(r.end_s), int(round(r.end_s * rate_hz)), None, None))
    out.sort(key=lambda a: a.t_s)
    return tuple(out)
