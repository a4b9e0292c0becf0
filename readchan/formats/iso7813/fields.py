"""The fields of a financial card's track text, by its ISO/IEC 7813 layout.

Input: framed track text (start sentinel through end sentinel) and its character format's name.
Output: :class:`CardFields` (account number, name, expiry, service code, discretionary data,
Luhn verdict, departures from the layout, character spans) or None (:func:`parse_fields`), and
how a read that claims the layout breaks it (:func:`layout_errors`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from readchan.formats.iso7813.pan import (MASK_CHAR, MAX_PAN_DIGITS, hide_digits, hide_quoted, is_digits, luhn_valid,
                                          mask_pan)


#: Name field length on track 1 (ISO/IEC 7813).
NAME_CHARS = (2, 26)


LAYOUTS = {
    # format name: (layout, start, separator, has name)
    "iso-alpha": ("iso7813-track1-B", "%B", "^", True),
    "iso-bcd": ("iso7813-track2", ";", "=", False),
}


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
        from readchan.formats.iso7813.masking import mask_text   # masking parses fields: import when called

        values = {"pan": self.pan, "name": self.name, "expiry_yymm": self.expiry_yymm,
                  "service_code": self.service_code, "discretionary": self.discretionary}
        if not unmask:
            if trusted or not self.spans:
                values["pan"] = mask_pan(self.pan)
                if not trusted:         # no positions known: show no digit of any field
                    values = {k: (None if v is None else hide_digits(v)) if k != "pan" else v
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
            "problems": [p if unmask or trusted else hide_quoted(p) for p in self.problems],
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
    # over 60 lines only by its docstring (layout, leniency, example); the fields are named helpers
    spec = LAYOUTS.get(format_name)
    if spec is None or not isinstance(text, str):
        return None
    layout, start, sep, has_name = spec
    if not text.startswith(start) or not text.endswith("?") or len(text) < len(start) + 2:
        return None
    body = text[len(start):-1]
    pan, found, rest = body.partition(sep)
    if not found or not is_digits(pan):
        return None
    problems: list[str] = []
    pos = len(start)
    spans = [("pan", pos, pos + len(pan))]
    pos += len(pan) + 1
    if len(pan) > MAX_PAN_DIGITS:
        problems.append(f"account number longer than {MAX_PAN_DIGITS} digits ({len(pan)})")

    name = None
    if has_name:
        taken = _take_name(rest, sep, pos, spans, problems)
        if taken is None:
            return None
        name, rest, pos = taken
    expiry, service, rest, pos = _take_expiry_and_service(rest, sep, pos, spans, problems)
    spans.append(("discretionary", pos, pos + len(rest)))

    luhn_ok = luhn_valid(pan)
    if not luhn_ok:
        problems.append("account number fails the Luhn check")
    return CardFields(layout, pan, name, expiry, service, rest, luhn_ok, tuple(problems),
                      spans=tuple(spans), text=text, format_name=format_name)


def _take_name(rest: str, sep: str, pos: int, spans: list, problems: list[str]) -> tuple[str, str, int] | None:
    """Track 1's name field from the front of `rest` (at character `pos` of the text): (name,
    what follows its separator, position after it); its span and length problems are appended
    to `spans` and `problems`.  None when no separator ends the name."""
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
    return raw_name.strip(), rest, pos


def _take_expiry_and_service(rest: str, sep: str, pos: int, spans: list,
                             problems: list[str]) -> tuple[str | None, str | None, str, int]:
    """The expiry (YYMM) and service code (3 digits) from the front of `rest` (at character
    `pos`), each absent where a separator stands in its place: (expiry, service code, the
    discretionary data left, its position); spans and problems are appended."""
    truncated = not rest.startswith(sep) and len(rest) < 4
    before = len(rest)
    expiry, rest = _take_field(rest, 4, sep)
    if expiry is not None:
        spans.append(("expiry_yymm", pos, pos + 4))
        if not is_digits(expiry):
            problems.append(f"expiry {expiry!r} is not YYMM digits")
        elif not 1 <= int(expiry[2:]) <= 12:
            problems.append(f"expiry month {expiry[2:]} out of range")
    pos += before - len(rest)
    before = len(rest)
    service, rest = (None, rest) if truncated else _take_field(rest, 3, sep)
    if service is not None:
        spans.append(("service_code", pos, pos + 3))
        if not is_digits(service):
            problems.append(f"service code {service!r} is not 3 digits")
    pos += before - len(rest)
    return expiry, service, rest, pos


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
    elif not is_digits(pan):
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
        if len(expiry) < 4 or not is_digits(expiry):
            errors.append("expiry is not YYMM digits")
        elif not 1 <= int(expiry[2:]) <= 12:
            errors.append("expiry month out of range")
    return tuple(errors)


def _take_field(rest: str, width: int, sep: str) -> tuple[str | None, str]:
    """Take a fixed-width field, or its separator placeholder, from the front of `rest`."""
    if rest.startswith(sep):
        return None, rest[1:]
    if len(rest) < width:
        return None, rest
    return rest[:width], rest[width:]
