"""What every command of the command line shares: the typer ``app`` the commands register on, the
stdout and stderr consoles, the warning line, the JSON schema name, the choice enums, the
options of the commands that decode and the decode settings they build.

Imports nothing of the library at module level (the commands import what they need when
they run), so that ``readchan --help`` starts fast.
"""

from __future__ import annotations

from enum import Enum
from typing import Optional

import typer
from rich.console import Console
from typer.core import TyperGroup

from readchan import __version__
from readchan.errors import ParameterError

JSON_SCHEMA_VERSION = 1
"""Version of the JSON documents (the ``schema`` key: ``readchan.<command>/<version>``).  Keys
are only ever added within a version; a key renamed or removed, or a meaning changed, makes a
new version."""


class _StdoutClosed(Exception):
    """Standard output went away (the reader of a pipe quit); not an OSError, so that click
    passes it through instead of handling it its own way."""


class _Group(TyperGroup):
    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except BrokenPipeError:
            raise _StdoutClosed() from None


app = typer.Typer(cls=_Group, no_args_is_help=True, add_completion=False, pretty_exceptions_enable=False,
                  help="Decode, diagnose and synthesize magnetic read-channel captures (F2F magnetic stripe).")


class _Console(Console):
    def on_broken_pipe(self) -> None:
        """A closed pipe ends the run through :func:`main` (exit code 141), not rich's exit 1;
        what was waiting to be written is dropped."""
        del self._buffer[:]
        raise _StdoutClosed()


out = _Console()
if not out.is_terminal:
    out = _Console(width=120)
err = _Console(stderr=True, soft_wrap=True)


def warn_line(message: str) -> None:
    """One warning line on stderr: ``readchan: warning: ...``."""
    err.print(f"readchan: warning: {' '.join(str(message).split())}", highlight=False, markup=False)


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """``warnings.showwarning`` for the command line: one line, no source line.  Warnings of
    other libraries (numpy, ...) carry their category's name."""
    text = str(message)
    if not getattr(category, "__module__", "").startswith("readchan"):
        text += f" ({category.__name__})"
    warn_line(text)


def renamed(old: str, new: str, old_value, new_value, default=None):
    """The value of an option that was renamed: the new spelling's, or, when only the old
    spelling was given, the old one's with a one-line deprecation warning."""
    if old_value is None:
        return new_value
    if new_value != default:
        raise ParameterError(f"{old} is the old spelling of {new}; give only {new}")
    warn_line(f"{old} is deprecated and goes in the next release; use {new}")
    return old_value


def schema(command: str) -> str:
    """The ``schema`` value of a command's JSON document."""
    return f"readchan.{command}/{JSON_SCHEMA_VERSION}"


def _version(value: bool) -> None:
    if value:
        out.print(f"readchan {__version__}", highlight=False, markup=False)
        raise typer.Exit(0)


@app.callback()
def _app(version: bool = typer.Option(False, "--version", callback=_version, is_eager=True,
                                      help="Print the version and exit.")) -> None:
    """Decode, diagnose and synthesize magnetic read-channel captures (F2F magnetic stripe)."""


class Kind(str, Enum):
    auto = "auto"
    head = "head"
    logic = "logic"


class WriteKind(str, Enum):
    wav16 = "wav16"
    wav24 = "wav24"
    wav_float = "wav-float"
    flac = "flac"
    csv = "csv"


class Profile(str, Enum):
    constant = "constant"
    ramp = "ramp"
    swipe = "swipe"


class PulseKind(str, Enum):
    karlqvist = "karlqvist"
    lorentzian = "lorentzian"


class PreampFamily(str, Enum):
    butterworth = "butterworth"
    bessel = "bessel"


class Output(str, Enum):
    head = "head"
    flux = "flux"


def _settings(fmt: str, kind: Kind | str, track: Optional[int], notch: str, lowpass_hz: Optional[float],
              highpass_hz: float, field_check: bool = True):
    from readchan.frontend.condition import ConditionSettings
    from readchan.channel import DecodeSettings
    if notch not in ("auto", "off"):
        try:
            notch_v: str | float = float(notch)
        except ValueError:
            raise ParameterError(f"--notch takes auto, off or a frequency in Hz, was {notch!r}") from None
    else:
        notch_v = notch
    cs = ConditionSettings(highpass_hz=highpass_hz or None, lowpass_hz=lowpass_hz)
    char_format, name = _format_of(fmt)
    return DecodeSettings(fmt=char_format, kind=Kind(kind).value, track=track, condition=cs, notch=notch_v,
                          field_check=field_check, format=name)


def _format_of(spec: str):
    """(card character format or None, registry name) for ``--format``: a registered format by
    name (a tape format gives no character format), else a card format string
    (:func:`readchan.formats.iso7811.charset.parse_format`: track names, ``custom:...``)."""
    from readchan.errors import FormatError
    from readchan.formats.iso7811.charset import parse_format
    from readchan.formats.registry import all_formats

    named = {f.name: f for f in all_formats()}
    key = spec.strip().lower() if isinstance(spec, str) else spec
    if key in named:
        f = named[key]
        return f.char_format, ("auto" if f.char_format is not None else f.name)
    try:
        return parse_format(spec), "auto"
    except FormatError as e:
        if str(e).startswith("unknown format"):
            tape = ", ".join(n for n, f in named.items() if f.char_format is None)
            raise FormatError(f"{e}; or a registered format: {tape}") from None
        raise


def _channels(channel: Optional[list[int]]):
    return None if not channel else list(channel)


# Options shared by the commands that decode (decode, inspect).
CAPTURES = typer.Argument(..., help="Capture files: WAV/FLAC/AIFF audio or CSV.")
FORMAT = typer.Option("auto", "--format", "-f",
                      help="Format: auto (try every registered format), iso-alpha, iso-bcd, track1..3, ltc (timecode), "
                           "kcs (cassette data), or a card format custom:bits=..,parity=..,...")
CHANNEL = typer.Option(None, "--channel", "-c", help="Channel(s) to read, from 0 (default all).")
SIGNAL = typer.Option(Kind.auto, "--signal", help="Signal the capture holds: head pulses, logic-level edges, "
                                                    "or auto-detect.")
SIGNAL_OLD = typer.Option(None, "--kind", hidden=True, help="Old spelling of --signal.")
TRACK = typer.Option(None, min=1, max=3, help="ISO track the channel holds (for the density).")
RATE_HZ = typer.Option(None, "--rate-hz", help="Sample rate in Hz: for CSV files with no time column, and to "
                       "sample a VCD comparator at (default: from its timescale).")
RATE_OLD = typer.Option(None, "--rate", hidden=True, help="Old spelling of --rate-hz.")
NOTCH = typer.Option("auto", help="Mains hum removal: auto, off, or a notch frequency in Hz.")
LOWPASS = typer.Option(None, "--lowpass-hz", help="Optional low-pass corner in Hz.")
HIGHPASS = typer.Option(20.0, "--highpass-hz", help="Baseline-removal high-pass corner in Hz (0: off).")
JSON = typer.Option(False, "--json", help="Print one JSON object on stdout.")
UNMASK = typer.Option(False, "--unmask", help="Show account numbers whole (only for cards you may read).")
FIELD_CHECK = typer.Option(True, "--field-check/--no-field-check",
                           help="A read claiming an ISO/IEC 7813 layout (track 1 format B, track 2) that breaks it "
                                "(account digits, Luhn check digit, expiry) is not valid; turn off for non-financial "
                                "cards that reuse the layouts.")
QUIET = typer.Option(False, "--quiet", "-q", help="Draw no progress bar on stderr (one is drawn only when stderr is a "
                                                 "terminal and the work takes over a second).")
