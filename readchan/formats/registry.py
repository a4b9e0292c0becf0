"""The format registry: every format the read channel knows, registered once.

Input: :class:`Format` entries, registered by the module that implements the format (the
built-in ones on first use of the registry) or by a user (:func:`register`,
:func:`register_card_format`).
Output: the formats a decode tries (:func:`candidates`), grouped into families that share one
front end and line decoder (:func:`families`), and a read's JSON (:func:`read_json`).

A format names its line code, what it needs from the front end, its framer and interpreter
(in one channel decoder per family: :attr:`Format.decode`) and how its reads render.  Formats of
one family are decoded together: the card family's character formats share one detection and
one F2F timing pass and are told apart by their sentinels.  ``--format auto`` tries the families
in registration order (cards first, then timecode, then cassette data) and keeps the first whose
result :attr:`Format.claims` the channel; when none does, the first family's result stands.  A
family claims a channel only with evidence a capture of another family cannot give by chance (a
card read that passes parity, LRC and the physical checks; a timecode frame whose sync word,
BCD ranges and polarity bit all pass; cassette bytes framed after a mark leader), so a card read
is never reported on a tape capture nor a tape read on a card capture.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Callable

from readchan.errors import ParameterError

if TYPE_CHECKING:
    from readchan.formats.iso7811.charset import CharFormat
    from readchan.results import ChannelResult, Read


@dataclass(frozen=True)
class Format:
    """One registered format.

    Attributes
    ----------
    name : the format's name (``--format NAME``, the ``format`` key of a read).
    family : formats of one family share a front end and a line decoder (``card``,
        ``timecode``, ``cassette``, or a user's family).
    line_code : ``f2f`` (biphase mark), ``fsk`` (two tones), ...
    front_end : what the format needs from the front end, in words (for ``readchan formats``
        and the README).
    summary : one line saying what the format is, with its standard.
    decode : the family's channel decoder,
        ``decode(x, rate_hz, settings, formats, *, kind, channel, n_channels, source)`` →
        :class:`readchan.results.ChannelResult`, where ``formats`` are the family's formats to
        try and ``kind`` the signal kind asked for (``auto``, ``head`` or ``logic``).
    claims : whether a channel result holds this family's data (see the module docstring).
    render : a read of this format as a JSON-ready dict, ``render(read, unmask)``; a dotted
        ``module:function`` path is imported on first use (reports load only when rendering).
    char_format : the character format of a card format (:mod:`readchan.formats.iso7811.charset`).
    auto : tried by ``--format auto``.
    """

    name: str
    family: str
    line_code: str
    front_end: str
    summary: str
    decode: Callable[..., "ChannelResult"]
    claims: Callable[["ChannelResult"], bool]
    render: "Callable[[Read, bool], dict] | str"
    char_format: "CharFormat | None" = None
    auto: bool = True


_FORMATS: dict[str, Format] = {}
_BUILTIN = ("readchan.formats.iso7811.card", "readchan.formats.ltc.channel", "readchan.formats.kcs.channel",
            "readchan.formats.f2f_bits")
_BUILTIN_NAMES: set[str] = set()
_loaded = False


def _load_builtins() -> None:
    global _loaded
    if not _loaded:
        _loaded = True
        for module in _BUILTIN:
            importlib.import_module(module)
        _BUILTIN_NAMES.update(_FORMATS)


def register(fmt: Format, *, replace: bool = False) -> Format:
    """Add ``fmt`` to the registry (after the built-in formats); a name already registered is
    an error unless ``replace``.  Returns ``fmt``."""
    if not isinstance(fmt, Format):
        raise ParameterError(f"format must be a readchan.formats.registry.Format, was {type(fmt).__name__}")
    if fmt.name in ("auto", "custom") or not fmt.name or any(c.isspace() for c in fmt.name):
        raise ParameterError(f"format name must be a word other than auto and custom, was {fmt.name!r}")
    if fmt.name in _FORMATS and not replace and _FORMATS[fmt.name] is not fmt:
        raise ParameterError(f"format {fmt.name!r} is already registered")
    _FORMATS[fmt.name] = fmt
    return fmt


def register_card_format(char_format: "CharFormat", *, summary: str = "", auto: bool = True) -> Format:
    """Register a card character format (an F2F track with sentinels, parity and, optionally,
    an LRC; :class:`readchan.formats.iso7811.charset.CharFormat`) in the card family: decoded
    like the ISO formats, tried by ``--format auto`` when ``auto``."""
    from readchan.formats.iso7811.card import card_format

    _load_builtins()
    return register(card_format(char_format, summary=summary or f"user card format {char_format.name}", auto=auto))


def unregister(name: str) -> None:
    """Remove a user-registered format (the built-in ones stay)."""
    _load_builtins()
    fmt = _FORMATS.get(name)
    if fmt is None:
        raise ParameterError(f"format {name!r} is not registered")
    if name in _BUILTIN_NAMES:
        raise ParameterError(f"format {name!r} is built in")
    del _FORMATS[name]


def all_formats() -> tuple[Format, ...]:
    """Every registered format, in registration order."""
    _load_builtins()
    return tuple(_FORMATS.values())


def get(name: str) -> Format:
    """The format registered as ``name``."""
    _load_builtins()
    fmt = _FORMATS.get(name)
    if fmt is None:
        raise ParameterError(f"format must be auto or one of {', '.join(_FORMATS)}, was {name!r}")
    return fmt


def candidates(name: str = "auto", char_format: "CharFormat | None" = None) -> tuple[Format, ...]:
    """The formats a decode tries: the card format of ``char_format`` when one is given (a
    character format chosen by the caller, registered or not); else every ``auto`` format for
    ``"auto"``; else the one format ``name``."""
    _load_builtins()
    if char_format is not None:
        for fmt in _FORMATS.values():
            if fmt.char_format == char_format:
                return (fmt,)
        from readchan.formats.iso7811.card import card_format

        return (card_format(char_format, summary=f"card format {char_format.name}", auto=False),)
    if name == "auto":
        return tuple(f for f in _FORMATS.values() if f.auto)
    return (get(name),)


def families(formats: tuple[Format, ...]) -> list[tuple[str, tuple[Format, ...]]]:
    """``formats`` grouped by family, families in the order their first format appears."""
    out: dict[str, list[Format]] = {}
    for f in formats:
        out.setdefault(f.family, []).append(f)
    return [(k, tuple(v)) for k, v in out.items()]


def read_json(read: "Read", *, unmask: bool = False) -> dict:
    """A read as a JSON-ready dict, rendered by its format (the README's JSON contract)."""
    _load_builtins()
    fmt = _FORMATS.get(read.format)
    render: Any = fmt.render if fmt is not None else _card_render_of(read)
    if isinstance(render, str):
        module, _, func = render.partition(":")
        render = getattr(importlib.import_module(module), func)
    return render(read, unmask)


def _card_render_of(read: "Read") -> Any:
    """An unregistered card format (a custom one given for one decode) renders as a card read."""
    from readchan.formats.iso7811.card import CARD_RENDER

    return CARD_RENDER
