"""Fields of financial-card tracks, the Luhn check digit, and account-number masking.

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

import re
from dataclasses import dataclass, field

from readchan.errors import ParameterError

__all__ = [
    "CardFields",
    "MASK_CHAR",
    "luhn_check_digit",
    "luhn_valid",
    "mask_pan",
    "mask_text",
    "account_region",
    "layout_errors",
    "parse_fields",
]

MASK_CHAR = "*"
#: Longest account number (ISO/IEC 7812-1, ISO/IEC 7813).
MAX_PAN_DIGITS = 19
#: Name field length on track 1 (ISO/IEC 7813).
NAME_CHARS = (2, 26)
#: Shortest account number shown with its first 6 digits; shorter ones show only the last 4.
FULL_MASK_MIN_DIGITS = 13
#: Digit runs this long are masked in text that does not follow a known layout.
LOOSE_PAN_MIN_DIGITS = 12
#: Characters the account number may be shifted by in a damaged read (a slipped bit can move
#: the text by a character), added to the end of :func:`account_region`.
REGION_SLACK = 1
#: Track 3 (ISO 4909) puts a two-digit format code before the account number.
TRACK3_PREFIX_DIGITS = 2

_LAYOUTS = {
    # format name: (layout, start, separator, has name)
    "iso-alpha": ("iso7813-track1-B", "%B", "^", True),
    "iso-bcd": ("iso7813-track2", ";", "=", False),
}


def luhn_check_digit(payload: str) -> str:
    """Luhn check digit to append to `payload` (ISO/IEC 7812-1, annex B).

    Parameters
    ----------
    payload : str
        Digits of the account number without its check digit (may be empty).

    Returns
    -------
    str
        One digit such that ``payload + digit`` passes :func:`luhn_valid`.

    Raises
    ------
    ParameterError
        If `payload` holds anything but ASCII digits.

    Examples
    --------
    >>> luhn_check_digit('7992739871')
    '3'
    """
    if not _is_digits(payload, allow_empty=True):
        raise ParameterError(
            f"account number must be ASCII digits only ({len(payload)} characters given)"
        )
    return str((10 - _luhn_sum(payload + "0")) % 10)


def luhn_valid(number: str) -> bool:
    """True if the last digit of `number` is its Luhn check digit (ISO/IEC 7812-1).

    Returns False (never raises) for an empty string or one with non-digits.

    Examples
    --------
    >>> luhn_valid('79927398713'), luhn_valid('79927398710')
    (True, False)
    """
    return _is_digits(number) and _luhn_sum(number) == 0


def mask_pan(pan: str) -> str:
    """Account number with the hidden digits replaced by ``'*'``.

    Numbers of 13 digits or more show their first 6 and last 4 digits, shorter ones only the
    last 4, and numbers of 4 digits or fewer nothing (PCI DSS v3.2.1 req. 3.3 allows at most
    the first 6 and last 4). The length is kept.

    Examples
    --------
    >>> mask_pan('9900123456789017')
    '990012******9017'
    >>> mask_pan('12345678')
    '****5678'
    """
    n = len(pan)
    if n <= 4:
        return MASK_CHAR * n
    head = 6 if n >= FULL_MASK_MIN_DIGITS else 0
    return pan[:head] + MASK_CHAR * (n - head - 4) + pan[-4:]


@dataclass(frozen=True)
class CardFields:
    """Fields of one financial-card track.

    Attributes
    ----------
    layout : {'iso7813-track1-B', 'iso7813-track2'}
        Which layout the text followed.
    pan : str
        Primary account number, in full. Use :meth:`to_dict` or :func:`mask_pan` to show it.
    name : str or None
        Cardholder name with surrounding spaces stripped (track 1 only).
    expiry_yymm : str or None
        Expiry date as ``YYMM``, None if absent.
    service_code : str or None
        Three-digit service code, None if absent.
    discretionary : str
        Discretionary data up to the end sentinel (may be empty).
    luhn_ok : bool
        Whether the account number passes the Luhn check (ISO/IEC 7812-1).
    problems : tuple of str
        Departures from the layout, e.g. ``'name longer than 26 characters'``.
    """

    layout: str
    pan: str
    name: str | None
    expiry_yymm: str | None
    service_code: str | None
    discretionary: str
    luhn_ok: bool
    problems: tuple[str, ...]
    spans: tuple[tuple[str, int, int], ...] = field(default=(), repr=False, compare=False)
    """(field name, start, stop) of every field in the parsed text (``text[start:stop]``)."""
    text: str = field(default="", repr=False, compare=False)
    """The parsed text, start sentinel through end sentinel."""
    format_name: str = field(default="", repr=False, compare=False)

    def __repr__(self) -> str:  # never print a full account number by accident
        return (
            f"CardFields(layout={self.layout!r}, pan={mask_pan(self.pan)!r}, name={self.name!r}, "
            f"expiry_yymm={self.expiry_yymm!r}, service_code={self.service_code!r}, "
            f"discretionary={self.discretionary!r}, luhn_ok={self.luhn_ok!r}, "
            f"problems={self.problems!r})"
        )

    def to_dict(self, unmask: bool = False, *, trusted: bool = False) -> dict:
        """JSON-ready fields; the account number masked unless `unmask`.

        Parameters
        ----------
        unmask : show every field as parsed.
        trusted : the text comes from a read that passed its checks, so its separators are
            where the card has them: the account number is masked by :func:`mask_pan`
            (first 6 and last 4 digits shown).  Otherwise the separators may be damage and
            any field may hold account digits: every field is cut from
            :func:`mask_text`'s untrusted masking (every digit of :func:`account_region`
            hidden).

        Returns
        -------
        dict
            Keys ``layout``, ``pan``, ``pan_length``, ``name``, ``expiry_yymm``,
            ``service_code``, ``discretionary``, ``luhn_ok`` and ``problems`` (a list).
        """
        values = {"pan": self.pan, "name": self.name, "expiry_yymm": self.expiry_yymm,
                  "service_code": self.service_code, "discretionary": self.discretionary}
        if not unmask:
            if trusted or not self.spans:
                values["pan"] = mask_pan(self.pan)
                if not trusted:         # no positions known: show no digit of any field
                    values = {k: (None if v is None else _hide_digits(v)) if k != "pan" else v
                              for k, v in values.items()}
                    values["pan"] = MASK_CHAR * len(self.pan)
            else:
                masked = mask_text(self.text, self.format_name)
                for name, a, b in self.spans:
                    piece = masked[a:b]
                    values[name] = piece.strip() if name == "name" else piece
        return {
            "layout": self.layout,
            "pan": values["pan"],
            "pan_length": len(self.pan),
            "name": values["name"],
            "expiry_yymm": values["expiry_yymm"],
            "service_code": values["service_code"],
            "discretionary": values["discretionary"],
            "luhn_ok": self.luhn_ok,
            "problems": [p if unmask or trusted else _hide_quoted(p) for p in self.problems],
        }


def parse_fields(text: str, format_name: str) -> CardFields | None:
    """Split a track's text into the fields of its ISO/IEC 7813 layout.

    Parameters
    ----------
    text : str
        Framed text, start sentinel through end sentinel (LRC excluded), as in
        :attr:`readchan.formats.iso7811.framing.Frame.text`.
    format_name : str
        ``'iso-alpha'`` (track 1, format code B) or ``'iso-bcd'`` (track 2 layout); any other
        name gives None.

    Returns
    -------
    CardFields or None
        The fields, with departures from the layout listed in ``problems``; None if the text
        does not follow the layout (another format code, no separator, no end sentinel, an
        account number with non-digits).

    Notes
    -----
    Parsing is lenient where it can be: an account number longer than 19 digits, a name
    outside 2 to 26 characters, a month outside 01..12 or a non-numeric service code is
    reported in ``problems`` rather than refused. Track 3 text (also 'iso-bcd') that happens
    to contain '=' is parsed with the track 2 layout; its Luhn check then usually fails.

    Examples
    --------
    >>> f = parse_fields(';9900123456789017=29121010000?', 'iso-bcd')
    >>> f.expiry_yymm, f.service_code, f.luhn_ok
    ('2912', '101', True)
    """
    spec = _LAYOUTS.get(format_name)
    if spec is None or not isinstance(text, str):
        return None
    layout, start, sep, has_name = spec
    if not text.startswith(start) or not text.endswith("?") or len(text) < len(start) + 2:
        return None
    body = text[len(start):-1]
    pan, found, rest = body.partition(sep)
    if not found or not _is_digits(pan):
        return None
    problems: list[str] = []
    pos = len(start)
    spans = [("pan", pos, pos + len(pan))]
    pos += len(pan) + 1
    if len(pan) > MAX_PAN_DIGITS:
        problems.append(f"account number longer than {MAX_PAN_DIGITS} digits ({len(pan)})")

    name = None
    if has_name:
        raw_name, found, rest = rest.partition(sep)
        if not found:
            return None
        spans.append(("name", pos, pos + len(raw_name)))
        pos += len(raw_name) + 1
        lo, hi = NAME_CHARS
        if len(raw_name) > hi:
            problems.append(f"name longer than {hi} characters")
        elif len(raw_name) < lo:
            problems.append(f"name shorter than {lo} characters")
        name = raw_name.strip()

    truncated = not rest.startswith(sep) and len(rest) < 4
    before = len(rest)
    expiry, rest = _take_field(rest, 4, sep)
    if expiry is not None:
        spans.append(("expiry_yymm", pos, pos + 4))
        if not _is_digits(expiry):
            problems.append(f"expiry {expiry!r} is not YYMM digits")
        elif not 1 <= int(expiry[2:]) <= 12:
            problems.append(f"expiry month {expiry[2:]} out of range")
    pos += before - len(rest)
    before = len(rest)
    service, rest = (None, rest) if truncated else _take_field(rest, 3, sep)
    if service is not None:
        spans.append(("service_code", pos, pos + 3))
        if not _is_digits(service):
            problems.append(f"service code {service!r} is not 3 digits")
    pos += before - len(rest)
    spans.append(("discretionary", pos, pos + len(rest)))

    luhn_ok = luhn_valid(pan)
    if not luhn_ok:
        problems.append("account number fails the Luhn check")
    return CardFields(layout, pan, name, expiry, service, rest, luhn_ok, tuple(problems),
                      spans=tuple(spans), text=text, format_name=format_name)


def layout_errors(text: str, format_name: str, track: int | None) -> tuple[str, ...]:
    """How a read that claims an ISO/IEC 7813 layout breaks it; empty if it claims none or
    keeps it.

    A read claims the layout when it is 'iso-alpha' text with format code B (``%B``), or
    'iso-bcd' text on track 2.  It breaks it with: no separator after the account number (or,
    on track 1, after the name); an account number that is empty, holds a non-digit or is
    longer than 19 digits; a failed Luhn check digit (ISO/IEC 7812-1); an expiry that is
    neither absent (a separator in its place, common practice) nor YYMM digits with a month
    01–12.  The name, service code and discretionary data are not judged.

    Examples
    --------
    >>> layout_errors(';9900123456789017=29121010000?', 'iso-bcd', 2)
    ()
    >>> layout_errors(';9900123456789018=29131010000?', 'iso-bcd', 2)
    ('account number fails the Luhn check', 'expiry month out of range')
    """
    if format_name == "iso-alpha" and text.startswith("%B"):
        body, sep, has_name = text[2:], "^", True
    elif format_name == "iso-bcd" and track == 2 and text.startswith(";"):
        body, sep, has_name = text[1:], "=", False
    else:
        return ()
    body = body[:-1] if body.endswith("?") else body
    pan, found, rest = body.partition(sep)
    if not found:
        return ("no field separator after the account number",)
    errors = []
    if not pan:
        errors.append("empty account number")
    elif not _is_digits(pan):
        errors.append("account number holds a non-digit")
    elif len(pan) > MAX_PAN_DIGITS:
        errors.append(f"account number longer than {MAX_PAN_DIGITS} digits")
    elif not luhn_valid(pan):
        errors.append("account number fails the Luhn check")
    if has_name:
        _, found, rest = rest.partition(sep)
        if not found:
            errors.append("no field separator after the name")
            return tuple(errors)
    if not rest.startswith(sep):
        expiry = rest[:4]
        if len(expiry) < 4 or not _is_digits(expiry):
            errors.append("expiry is not YYMM digits")
        elif not 1 <= int(expiry[2:]) <= 12:
            errors.append("expiry month out of range")
    return tuple(errors)


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
        first = len(_LAYOUTS[format_name][1])
        chars[first:first + len(fields.pan)] = mask_pan(fields.pan)
        return "".join(chars)
    if region is not None:
        lo, hi = region
        for i in range(lo, min(hi, len(chars))):
            if "0" <= chars[i] <= "9":
                chars[i] = MASK_CHAR
    masked = "".join(chars)
    return re.sub(r"[0-9]{%d,}" % LOOSE_PAN_MIN_DIGITS, lambda m: mask_pan(m.group()), masked)


# --------------------------------------------------------------------------- private helpers


def _hide_digits(text: str) -> str:
    return "".join(MASK_CHAR if "0" <= ch <= "9" else ch for ch in text)


def _hide_quoted(problem: str) -> str:
    """A problem message with the digits it quotes from the text hidden (its own numbers,
    such as "3 digits", stay)."""
    problem = re.sub(r"'[^']*'", lambda m: _hide_digits(m.group()), problem)
    return re.sub(r"month \d+", lambda m: _hide_digits(m.group()), problem)


def _is_digits(text: str, allow_empty: bool = False) -> bool:
    if not isinstance(text, str):
        return False
    return (allow_empty or bool(text)) and all("0" <= ch <= "9" for ch in text)


def _luhn_sum(number: str) -> int:
    """Luhn sum modulo 10: from the right, every second digit doubled (digits of the product
    added), all summed."""
    total = 0
    for i, ch in enumerate(reversed(number)):
        d = ord(ch) - 48
        if i % 2:
            d *= 2
            if d > 9:
                d -= 9
        total += d
    return total % 10


def _take_field(rest: str, width: int, sep: str) -> tuple[str | None, str]:
    """Take a fixed-width field, or its separator placeholder, from the front of `rest`."""
    if rest.startswith(sep):
        return None, rest[1:]
    if len(rest) < width:
        return None, rest
    return rest[:width], rest[width:]
