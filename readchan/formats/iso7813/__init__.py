"""Fields of financial-card tracks, the Luhn check digit, and account-number masking.

Input: framed track text and its character format's name, or an account number.  Output:
:class:`CardFields`, layout errors, Luhn digits and verdicts, masked text.  The account number
is :mod:`.pan`'s, the layouts :mod:`.fields`' and the masking of text :mod:`.masking`'s; their
public names are all importable from here.

Layouts (ISO/IEC 7813):

* track 1, format code B: ``%B<account number, up to 19 digits>^<name, 2-26 characters>^``
  ``<expiry YYMM><service code, 3 digits><discretionary data>?``
* track 2: ``;<account number, up to 19 digits>=<expiry YYMM><service code><discretionary>?``

Where the expiry date or the service code is absent, a field separator takes its place
(common practice): ``%B...^NAME^^101...?`` or ``;...==...?``.

Account numbers are sensitive: :func:`mask_pan`, :func:`mask_text` and
:meth:`CardFields.to_dict` hide all but at most the first 6 and last 4 digits unless asked not
to (PCI DSS v3.2.1 requirement 3.3).  Only a *trusted* read (one whose checks passed) is
masked by its layout; in any other read of an account-number track the separators may be
damage, so every digit where account digits could lie is hidden (:func:`account_region`).
"""

from __future__ import annotations

from readchan.formats.iso7813.fields import NAME_CHARS, CardFields, layout_errors, parse_fields
from readchan.formats.iso7813.masking import (LOOSE_PAN_MIN_DIGITS, REGION_SLACK, TRACK3_PREFIX_DIGITS, account_region,
                                              mask_text)
from readchan.formats.iso7813.pan import FULL_MASK_MIN_DIGITS, MASK_CHAR, MAX_PAN_DIGITS, luhn_check_digit, luhn_valid, mask_pan

__all__ = [
    "CardFields",
    "FULL_MASK_MIN_DIGITS",
    "LOOSE_PAN_MIN_DIGITS",
    "MASK_CHAR",
    "MAX_PAN_DIGITS",
    "NAME_CHARS",
    "REGION_SLACK",
    "TRACK3_PREFIX_DIGITS",
    "account_region",
    "layout_errors",
    "luhn_check_digit",
    "luhn_valid",
    "mask_pan",
    "mask_text",
    "parse_fields",
]
