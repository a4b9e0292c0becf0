"""Card content for the synthesizer: text or raw bits per track, with clocking zeros.

Input: a track's text (or raw bits), its track number or character format, density (bpi).
Output: :class:`readchan.synth.TrackContent` (the recorded bits, clocking zeros included).
"""

from __future__ import annotations

import numpy as np

from readchan.errors import FormatError
from readchan.formats.iso7811.charset import TRACKS, CharFormat
from readchan.formats.iso7811.framing import encode_text
from readchan.synth.spec import TrackContent


def parse_bits(text: str) -> np.ndarray:
    """A string of '0'/'1' (spaces and underscores ignored) as a uint8 bit array."""
    s = text.replace(" ", "").replace("_", "")
    if not s or set(s) - {"0", "1"}:
        raise FormatError(f"raw bits must be a string of 0 and 1, was {text[:40]!r}")
    return np.frombuffer(s.encode(), dtype=np.uint8) - ord("0")


def track_content(text: str | None = None, *, track: int = 1, fmt: CharFormat | None = None,
                  bits: np.ndarray | None = None, density_bpi: float | None = None,
                  leading_zeros: int | None = None, trailing_zeros: int | None = None) -> TrackContent:
    """One track's recorded bit stream: clocking zeros, the encoded text (sentinels and LRC
    added as needed) or raw bits, clocking zeros; at the track's ISO density unless given.

    ISO/IEC 7811-2 densities: tracks 1 and 3 at 210 bpi, track 2 at 75 bpi.  The clocking
    zero counts default to the track's (see :data:`readchan.formats.iso7811.charset.TRACKS`).
    """
    spec = TRACKS[track]
    f = fmt or spec.fmt
    if (text is None) == (bits is None):
        raise FormatError("give either text or raw bits for a track")
    if text is not None:
        limit = spec.max_chars if fmt is None else None
        payload = encode_text(text, f, limit)
    else:
        payload = np.asarray(bits, dtype=np.uint8)
    lead = spec.leading_zeros if leading_zeros is None else leading_zeros
    trail = spec.trailing_zeros if trailing_zeros is None else trailing_zeros
    if lead < 4 or trail < 1 or lead > 10_000 or trail > 10_000:
        raise FormatError(f"clocking zeros must be 4..10000 leading and 1..10000 trailing, were {lead} and {trail}")
    stream = np.concatenate((np.zeros(lead, np.uint8), payload, np.zeros(trail, np.uint8)))
    density = spec.density_bpi if density_bpi is None else density_bpi    # 0 is refused, not replaced
    return TrackContent(stream, density, f"track {track}")
