"""Account-number masking of track text, for display, JSON and plots.

Input: track text (as read, valid or not), its character format's name and whether the read
is trusted (its checks passed).  Output: the text of the same length with account digits
replaced by :data:`~readchan.formats.iso7813.pan.MASK_CHAR` (:func:`mask_text`), and where
account digits can lie in a track (:func:`account_region`).
"""

from __future__ import annotations

import re

from readchan.formats.iso7813.fields import LAYOUTS, parse_fields
from readchan.formats.iso7813.pan import MASK_CHAR, MAX_PAN_DIGITS, mask_pan


#: Digit runs this long are masked in text that does not follow a known layout.
LOOSE_PAN_MIN_DIGITS = 12


#: Characters the account number may be shifted by in a damaged read (a slipped bit can move
#: the text by a character), added to the end of :func:`account_region`.
REGION_SLACK = 1


#: Track 3 (ISO 4909) puts a two-digit format code before the account number.
TRACK3_PREFIX_DIGITS = 2


def account_region(format_name: str) -> tuple[int, int] | None:
    """Character positions ``(start, stop)`` of an ISO track's text where account digits can
    lie, whatever the separators say; None for a format with no account-number layout.

    The account number (up to 19 digits, ISO/IEC 7813) follows the start sentinel on track 2,
    the start sentinel and format code on track 1, and the start sentinel and a two-digit
    format code on track 3 (ISO 4909); :data:`REGION_SLACK` characters more cover a read
    shifted by damage.  Framing keeps every character in its place unless a bit slips, so a
    damaged separator moves no account digit out of this region.
    """
    if format_name == "iso-alpha":
        return 1, 2 + MAX_PAN_DIGITS + REGION_SLACK
    if format_name == "iso-bcd":
        return 1, 1 + TRACK3_PREFIX_DIGITS + MAX_PAN_DIGITS + REGION_SLACK
    return None


def mask_text(text: str, format_name: str, unmask: bool = False, *, trusted: bool = False) -> str:
    """Track text with its account number masked, for display and JSON.

    Parameters
    ----------
    text : str
        Framed text (as read, valid or not).
    format_name : str
        Name of its character format.
    unmask : bool, optional
        Return `text` unchanged.
    trusted : bool, optional
        The text comes from a read that passed its checks (its separators are the card's).

    Returns
    -------
    str
        `text` of the same length, account digits replaced by ``'*'``.

    Notes
    -----
    Errs on the side of masking. A trusted text that follows a layout of :func:`parse_fields`
    has its account number masked by :func:`mask_pan` (first 6 and last 4 digits shown), and
    nothing else.  In
    any other 'iso-alpha' or 'iso-bcd' text, where damage can have turned a digit into a
    separator or a separator into a digit, every digit of :func:`account_region` is hidden.
    Then, in any format, every remaining run of 12 digits or more is masked by
    :func:`mask_pan`.

    Examples
    --------
    >>> mask_text(';9900123456789017=29121010000?', 'iso-bcd', trusted=True)
    ';990012******9017=29121010000?'
    >>> mask_text(';990012=456789017=29121010000?', 'iso-bcd')
    ';******=*********=*****010000?'
    """
    if unmask:
        return text
    chars = list(text)
    fields = parse_fields(text, format_name) if trusted else None
    region = account_region(format_name)
    if fields is not None:
        first = len(LAYOUTS[format_name][1])
        chars[first:first + len(fields.pan)] = mask_pan(fields.pan)
        return "".join(chars)
    if region is not None:
        lo, hi = region
        for i in range(lo, min(hi, len(chars))):
            if "0" <= chars[i] <= "9":
                chars[i] = MASK_CHAR
    masked = "".join(chars)
    return re.sub(r"[0-9]{%d,}" % LOOSE_PAN_MIN_DIGITS, lambda m: mask_pan(m.group()), masked)
