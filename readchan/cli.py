"""The command line: parse, call the library, render.  Exit codes are mapped here, once.

Exit codes: 0 every read valid; 1 data found, not all valid; 2 bad input or usage;
3 no data found; 4 internal error (a bug: please report it); 141 standard output closed
early (``readchan decode ... | head``), the rest of the output dropped quietly.

Vocabulary (the same in every command): units in option names (``--rate-hz``,
``--speed-cm-s``); ``--signal`` is the kind of signal a file holds, ``--file-type`` the kind
of file written; ``--head-gap-um`` is the head's gap, ``--pause-s`` the time between swipes.
Old spellings (``--rate``, ``--kind``, ``--gap-um``, ``--gap-s``, sweep's ``snr_db``...) are
hidden options that still work for one release, with a one-line deprecation warning.
"""

from __future__ import annotations

import json
import os
import re
import sys
import warnings
from enum import Enum
from pathlib import Path
from typing import Optional

import typer
from rich.console import Console

from typer.core import TyperGroup

from readchan import __version__
from readchan.errors import EXIT_BAD_INPUT, EXIT_INTERNAL, EXIT_PIPE_CLOSED, ParameterError, ReadchanError

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
    from readchan.condition import ConditionSettings
    from readchan.decode import DecodeSettings
    from readchan.formats import parse_format

    if notch not in ("auto", "off"):
        try:
            notch_v: str | float = float(notch)
        except ValueError:
            raise ParameterError(f"--notch takes auto, off or a frequency in Hz, was {notch!r}") from None
    else:
        notch_v = notch
    cs = ConditionSettings(highpass_hz=highpass_hz or None, lowpass_hz=lowpass_hz)
    return DecodeSettings(fmt=parse_format(fmt), kind=Kind(kind).value, track=track, condition=cs, notch=notch_v,
                          field_check=field_check)


def _channels(channel: Optional[list[int]]):
    return None if not channel else list(channel)


# Options shared by the commands that decode (decode, inspect).
CAPTURES = typer.Argument(..., help="Capture files: WAV/FLAC/AIFF audio or CSV.")
FORMAT = typer.Option("auto", "--format", "-f",
                      help="Character format: auto, iso-alpha, iso-bcd, track1..3, or custom:bits=..,parity=..,...")
CHANNEL = typer.Option(None, "--channel", "-c", help="Channel(s) to read, from 0 (default all).")
SIGNAL = typer.Option(Kind.auto, "--signal", help="Signal the capture holds: head pulses, logic-level edges, "
                                                    "or auto-detect.")
SIGNAL_OLD = typer.Option(None, "--kind", hidden=True, help="Old spelling of --signal.")
TRACK = typer.Option(None, min=1, max=3, help="ISO track the channel holds (for the density).")
RATE_HZ = typer.Option(None, "--rate-hz", help="Sample rate in Hz for CSV files with no time column.")
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


@app.command()
def decode(
    captures: list[Path] = CAPTURES,
    fmt: str = FORMAT,
    channel: Optional[list[int]] = CHANNEL,
    signal: Kind = SIGNAL,
    track: Optional[int] = TRACK,
    rate_hz: Optional[float] = RATE_HZ,
    notch: str = NOTCH,
    lowpass_hz: Optional[float] = LOWPASS,
    highpass_hz: float = HIGHPASS,
    as_json: bool = JSON,
    unmask: bool = UNMASK,
    field_check: bool = FIELD_CHECK,
    kind_old: Optional[Kind] = SIGNAL_OLD,
    rate_old: Optional[float] = RATE_OLD,
) -> None:
    """Decode the tracks held in CAPTURE files: characters, parity, LRC and fields."""
    from readchan.capture import load_capture
    from readchan.decode import decode_capture
    from readchan.render import channel_dict, exit_code, print_decode, read_dict, reads_of, warning_lines

    kind = renamed("--kind", "--signal", kind_old, signal, Kind.auto)
    rate = renamed("--rate", "--rate-hz", rate_old, rate_hz)
    settings = _settings(fmt, kind, track, notch, lowpass_hz, highpass_hz, field_check)
    all_reads, all_results, channels = [], [], []
    for path in captures:
        cap = load_capture(path, rate_hz=rate)
        results = decode_capture(cap, settings, _channels(channel))
        all_reads.extend(reads_of(results))
        all_results.extend(results)
        channels.extend(channel_dict(ch, str(path)) for ch in results)
        for line in warning_lines(str(path), results):
            err.print(line, highlight=False, markup=False)
        if not as_json:
            print_decode(out, str(path), results, unmask=unmask)
    if as_json:
        print(json.dumps({"schema": schema("decode"), "reads": [read_dict(r, unmask=unmask) for r in all_reads],
                          "channels": channels}, indent=2))
    raise typer.Exit(exit_code(all_reads, all_results))


@app.command()
def synth(
    output: Path = typer.Argument(..., help="File to write (.wav, .flac or .csv)."),
    track1: Optional[str] = typer.Option(None, "--track1", help="Track 1 text (alphanumeric, 210 bpi)."),
    track2: Optional[str] = typer.Option(None, "--track2", help="Track 2 text (numeric, 75 bpi)."),
    track3: Optional[str] = typer.Option(None, "--track3", help="Track 3 text (numeric, 210 bpi)."),
    bits: Optional[str] = typer.Option(None, "--bits", help="Raw bits (0/1) for one channel instead of text."),
    fmt: Optional[str] = typer.Option(None, "--format", "-f", help="Character format for --track1 text (custom formats)."),
    density_bpi: Optional[float] = typer.Option(None, "--density-bpi", help="Recording density in bpi (all tracks)."),
    speed_cm_s: float = typer.Option(30.0, "--speed-cm-s", help="Mean swipe speed in cm/s."),
    profile: Profile = typer.Option(Profile.swipe, help="Speed profile along the card (swipe and ramp take "
                                                        "--variation; with none, every profile is constant)."),
    variation: float = typer.Option(0.0, help="Speed variation along the card, fraction of the mean (ramp: ±; swipe: ±)."),
    pulse: PulseKind = typer.Option(PulseKind.karlqvist, help="Isolated-pulse model."),
    head_gap_um: float = typer.Option(12.0, "--head-gap-um", help="Karlqvist head gap g in µm."),
    spacing_um: float = typer.Option(5.0, "--spacing-um", help="Head-to-medium spacing d in µm."),
    transition_um: float = typer.Option(15.0, "--transition-um", help="Arctan transition parameter a in µm."),
    pw50_um: Optional[float] = typer.Option(None, "--pw50-um", help="Lorentzian PW50 in µm (with --pulse lorentzian)."),
    rate_hz: float = typer.Option(48000.0, "--rate-hz", help="Sample rate in Hz."),
    amplitude: float = typer.Option(0.5, help="Isolated-pulse peak at the mean speed (full scale)."),
    snr_db: Optional[float] = typer.Option(None, "--snr-db", help="White-noise SNR in dB (median |peak| / noise RMS)."),
    jitter: float = typer.Option(0.0, help="Per-transition jitter, uniform ± fraction of a bit cell."),
    density_error: float = typer.Option(0.0, "--density-error", help="Fractional density error (+0.05 = 5 % dense)."),
    hum_hz: float = typer.Option(50.0, "--hum-hz", help="Mains hum frequency in Hz."),
    hum_level: float = typer.Option(0.0, "--hum-level", help="Hum amplitude, fraction of the median peak."),
    wander_level: float = typer.Option(0.0, "--wander-level", help="2 Hz baseline wander, fraction of the median peak."),
    dc_offset: float = typer.Option(0.0, "--dc-offset", help="DC offset in full-scale units."),
    ac_coupling_hz: Optional[float] = typer.Option(None, "--ac-coupling-hz", help="First-order AC-coupling corner in Hz."),
    preamp_lowpass_hz: Optional[float] = typer.Option(None, "--preamp-lowpass-hz", help="Causal preamp low-pass corner (-3 dB) in Hz; renders oversampled."),
    preamp_order: int = typer.Option(2, "--preamp-order", min=1, max=4, help="Preamp low-pass order, 1 to 4."),
    preamp_family: PreampFamily = typer.Option(PreampFamily.butterworth, "--preamp-family", help="Preamp low-pass family."),
    antialias: bool = typer.Option(True, "--antialias/--no-antialias", help="Decimate through a linear-phase anti-alias filter (sound card) or take samples as they are (scope)."),
    quantize_bits: Optional[int] = typer.Option(None, "--quantize-bits", help="Quantise to N bits over full scale ±1."),
    scope_volts_per_div: Optional[float] = typer.Option(None, "--scope-volts-per-div", help="Quantise as an 8-bit oscilloscope at this V/div."),
    scope_offset_v: float = typer.Option(0.0, "--scope-offset-v", help="Oscilloscope screen-centre voltage."),
    scope_divisions: int = typer.Option(8, "--scope-divisions", help="Vertical divisions of the oscilloscope's 256 levels (8 or 10)."),
    clip: Optional[float] = typer.Option(None, help="Clip at this fraction of the median peak."),
    invert: bool = typer.Option(False, help="Invert the polarity."),
    reverse: bool = typer.Option(False, help="Swipe the card backwards."),
    edge_pulses: bool = typer.Option(False, "--edge-pulses", help="Stripe magnetised to the card's edges: a half-size pulse at each."),
    swipes: int = typer.Option(1, help="Number of swipes in the capture."),
    pause_s: float = typer.Option(0.25, "--pause-s", help="Quiet time between swipes in seconds."),
    signal: Output = typer.Option(Output.head, help="head: pickup voltage; flux: magnetisation square wave (coil drive)."),
    file_type: WriteKind = typer.Option(WriteKind.wav16, "--file-type", help="Type of the file written."),
    seed: int = typer.Option(0, help="Random seed."),
    force: bool = typer.Option(False, help="Overwrite OUTPUT if it exists (a regular file only), and write it even "
                               "at a sample rate that undersamples the pulses."),
    gap_um_old: Optional[float] = typer.Option(None, "--gap-um", hidden=True, help="Old spelling of --head-gap-um."),
    gap_s_old: Optional[float] = typer.Option(None, "--gap-s", hidden=True, help="Old spelling of --pause-s."),
    kind_old: Optional[WriteKind] = typer.Option(None, "--kind", hidden=True, help="Old spelling of --file-type."),
) -> None:
    """Synthesize a capture of known content and known impairments (one channel per track)."""
    from readchan.atomic import check_output_path
    from readchan.capture import display_path, write_capture
    from readchan.formats import parse_format
    from readchan.synth import SAMPLE_LIMIT, FrontEnd, Impairments, SpeedProfile, SynthSpec, synthesize
    from readchan.synth.card import parse_bits, track_content
    from readchan.synth.head import KarlqvistPulse, LorentzianPulse

    gap_um = renamed("--gap-um", "--head-gap-um", gap_um_old, head_gap_um, 12.0)
    gap_s = renamed("--gap-s", "--pause-s", gap_s_old, pause_s, 0.25)
    kind = renamed("--kind", "--file-type", kind_old, file_type, WriteKind.wav16)
    check_output_path(output, force=force)   # before the work: exists, not a regular file, no directory
    custom = parse_format(fmt) if fmt else None
    tracks = []
    for n, text in ((1, track1), (2, track2), (3, track3)):
        if text is not None:
            tracks.append(track_content(text, track=n, fmt=custom if n == 1 else None, density_bpi=density_bpi))
    if bits is not None:
        tracks.append(track_content(bits=parse_bits(bits), density_bpi=density_bpi))
    if not tracks:
        raise ParameterError("give the content: --track1, --track2, --track3 and/or --bits")
    if pulse is PulseKind.lorentzian:
        head = LorentzianPulse(pw50_m=(pw50_um if pw50_um is not None else 42.0) * 1e-6)
    else:
        if pw50_um is not None:
            raise ParameterError("--pw50-um goes with --pulse lorentzian; the Karlqvist pulse takes --head-gap-um, --spacing-um, --transition-um")
        head = KarlqvistPulse(gap_um * 1e-6, spacing_um * 1e-6, transition_um * 1e-6)
    imp = Impairments(density_error=density_error, jitter=jitter, snr_db=snr_db, hum_hz=hum_hz, hum_level=hum_level,
                      wander_level=wander_level, dc_offset=dc_offset, clip=clip,
                      invert=invert, reverse=reverse, edge_pulses=edge_pulses)
    fe = FrontEnd(ac_coupling_hz=ac_coupling_hz, preamp_lowpass_hz=preamp_lowpass_hz, preamp_order=preamp_order,
                  preamp_family=preamp_family.value, antialias=antialias, quantize_bits=quantize_bits,
                  scope_volts_per_div=scope_volts_per_div, scope_offset_v=scope_offset_v,
                  scope_divisions=scope_divisions)
    spec = SynthSpec(tracks=tuple(tracks), speed=SpeedProfile(speed_cm_s, profile.value, variation), pulse=head,
                     rate_hz=rate_hz, amplitude=amplitude, impairments=imp, swipes=swipes, gap_s=gap_s,
                     output=signal.value, seed=seed, front_end=fe)
    if not force:
        _refuse_undersampling(spec)
    res = synthesize(spec, max_samples=None if force else SAMPLE_LIMIT)
    names = [t.label.replace(" ", "") or f"ch{i}" for i, t in enumerate(tracks)]
    path = write_capture(output, res.samples, res.rate_hz, kind=kind.value, force=force, channel_names=names)
    err.print(f"wrote {display_path(path)}: {len(tracks)} channel(s), {res.duration_s:.3f} s at {res.rate_hz:g} Hz, "
              f"PW50 {res.pw50_m * 1e6:.1f} µm, {swipes} swipe(s)")


def _refuse_undersampling(spec) -> None:
    """A one-line error when ``spec``'s rate gives fewer than about 3 samples per half cell or
    2 per PW50 at the profile's fastest speed (:mod:`readchan.sampling`)."""
    import numpy as np

    from readchan.sampling import synth_sampling

    v_max = float(np.max(spec.speed.speed_cm_s(np.linspace(0.0, 1.0, 1001))))
    for n, t in enumerate(spec.tracks):
        cell_m = t.cell_m / (1 + spec.impairments.density_error)
        smp = synth_sampling(spec.rate_hz, cell_m, spec.pulse.pw50_m, v_max, pulses=spec.output == "head")
        if smp.undersampled:
            label = t.label or f"channel {n}"
            raise ParameterError(f"--rate-hz {spec.rate_hz:g} undersamples {label} at up to {v_max:.3g} cm/s "
                                 f"({smp.text().split(': ', 1)[1]}); raise the rate or pass --force")


def main() -> None:
    """Console entry point: run the app and map errors to one-line messages and exit codes.

    Python warnings become one line each (``readchan: warning: ...``); a closed standard
    output ends the run quietly with exit code 141.
    """
    with warnings.catch_warnings():
        warnings.showwarning = _show_warning
        try:
            code = _run()
            sys.stdout.flush()
        except (_StdoutClosed, BrokenPipeError):
            code = _stdout_closed()
    sys.exit(code)


def _stdout_closed() -> int:
    """The reader of our standard output has gone: drop what is left, quietly.

    As the Python documentation advises (signal module, "Note on SIGPIPE"), standard output is
    pointed at the null device so that the interpreter's last flush cannot fail again."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(devnull, sys.stdout.fileno())
    except (AttributeError, OSError, ValueError):      # not a real file (embedded, tests)
        sys.stdout = open(os.devnull, "w")
    finally:
        os.close(devnull)
    return EXIT_PIPE_CLOSED


# The library's errors name its parameters; on the command line they read as the options.
_CLI_SPELLINGS = (("force=True", "--force"), ("max_samples=None", "--force"), ("rate_hz", "--rate-hz"))
_LIBRARY_NAME = re.compile(r"\b(pass|without) (" + "|".join(re.escape(a) for a, _ in _CLI_SPELLINGS) + r")(?![\w=])")


def cli_spelling(message: str) -> str:
    """``message`` with the library parameter it tells the user to pass (``pass rate_hz``,
    ``pass force=True``) spelt as the command-line option (``pass --rate-hz``)."""
    flags = dict(_CLI_SPELLINGS)
    return _LIBRARY_NAME.sub(lambda m: f"{m.group(1)} {flags[m.group(2)]}", message)


def _run() -> int:
    try:
        rv = app(standalone_mode=False)
        return rv if isinstance(rv, int) else 0
    except typer.Exit as e:
        return e.exit_code
    except _StdoutClosed:
        raise
    except ReadchanError as e:
        err.print(f"readchan: error: {cli_spelling(str(e))}", highlight=False, markup=False)
        return e.exit_code
    except KeyboardInterrupt:
        return 130
    except Exception as e:  # click usage errors and anything unforeseen
        if hasattr(e, "format_message") and hasattr(e, "exit_code"):   # click/typer usage errors
            err.print(f"readchan: error: {e.format_message()}", highlight=False, markup=False)
            return EXIT_BAD_INPUT
        if type(e).__name__ == "Abort":
            return 130
        if os.environ.get("READCHAN_DEBUG"):
            raise
        err.print(f"readchan: internal error: {type(e).__name__}: {e} (set READCHAN_DEBUG=1 for details)",
                  highlight=False, markup=False)
        return EXIT_INTERNAL


# Further commands live in their own modules and register themselves on ``app``.
from readchan import cli_inspect as _cli_inspect  # noqa: E402,F401
from readchan import cli_sweep as _cli_sweep  # noqa: E402,F401
