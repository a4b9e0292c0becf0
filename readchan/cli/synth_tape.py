"""`readchan synth-ltc` and `readchan synth-kcs`: synthetic tape captures of known content and
known impairments, written atomically (registered on the app by :mod:`readchan.cli.synth`).

Input: command-line options.  Output: a capture file (WAV, FLAC or CSV, through
:func:`readchan.io.capture.write_capture`) and, with ``--truth-out``, the ground truth as JSON.
The physics is :mod:`readchan.synth.ltc`, :mod:`readchan.synth.kcs` and
:mod:`readchan.synth.playback`; this module only turns options into their specs, checks them
(one-line :class:`readchan.errors.ParameterError`, exit code 2) and writes the files.
Imports nothing numerical at module level, so that ``readchan --help`` starts fast.
"""

from __future__ import annotations

import inspect
from enum import Enum
from pathlib import Path
from typing import Optional

import typer

from readchan.cli.common import PreampFamily, PulseKind, WriteKind, app
from readchan.errors import ParameterError
from readchan.cli.tape_options import (build_chain, build_playback, build_speed, check_limits, parse_bytes,
                                       parse_edits, write_outputs)


def _choice(name: str, *values: str) -> type[Enum]:
    """A str enum of ``values`` (the command line's choices)."""
    return Enum(name, {v: v for v in values}, type=str)


TapeProfile = _choice("TapeProfile", "constant", "ramp", "shuttle", "points")
UserBitsKind = _choice("UserBitsKind", "constant", "counting", "text")
Direction = _choice("Direction", "forward", "reverse")
LtcSignal = _choice("LtcSignal", "line", "head")
ToneShape = _choice("ToneShape", "sine", "square")


# Options both tape commands take (one definition, two commands).
OUT = typer.Argument(..., help="File to write (.wav, .flac or .csv).")
PROFILE = typer.Option(TapeProfile.constant, help="Play-speed profile: constant (--speed), ramp (--speed to "
                       "--speed-to over --ramp-s from --at-s), shuttle (--speed to --speed-to and back, held "
                       "--hold-s), points (--speed-points).")
SPEED = typer.Option(1.0, help="Play speed relative to nominal (constant; start of a ramp; base of a shuttle).")
SPEED_TO = typer.Option(1.0, "--speed-to", help="Speed a ramp ends at, or a shuttle's top speed (relative).")
RAMP_S = typer.Option(0.5, "--ramp-s", help="Duration of a ramp (each ramp of a shuttle), seconds.")
HOLD_S = typer.Option(0.5, "--hold-s", help="Time a shuttle holds its top speed, seconds.")
AT_S = typer.Option(0.0, "--at-s", help="Capture time the ramp or shuttle begins, seconds.")
POINTS = typer.Option(None, "--speed-points", help="Piecewise-linear profile 'T_S:SPEED,T_S:SPEED,...'.")
WOW = typer.Option(0.0, "--wow-depth", help="Wow: peak fractional speed variation (0.003 = 0.3 %).")
WOW_HZ = typer.Option(0.5, "--wow-hz", help="Wow frequency in Hz.")
FLUTTER = typer.Option(0.0, "--flutter-depth", help="Flutter: peak fractional speed variation.")
FLUTTER_HZ = typer.Option(8.0, "--flutter-hz", help="Flutter frequency in Hz.")
AMPLITUDE = typer.Option(0.5, help="Signal peak at nominal speed (full scale).")
SNR = typer.Option(None, "--snr-db", help="White-noise SNR in dB (signal peak / noise RMS).")
HUM_HZ = typer.Option(50.0, "--hum-hz", help="Mains hum frequency in Hz.")
HUM = typer.Option(0.0, "--hum-level", help="Hum amplitude, fraction of the signal peak.")
DC = typer.Option(0.0, "--dc-offset", help="DC offset in full-scale units.")
AC = typer.Option(None, "--ac-coupling-hz", help="First-order AC-coupling corner in Hz.")
BAND = typer.Option(None, "--band-hz", help="Playback band 'LOW,HIGH' in Hz (2nd-order band-pass).")
DROPOUT = typer.Option(None, "--dropout", help="A dropout 'START_S,DURATION_S,DEPTH_DB' (repeatable).")
INVERT = typer.Option(False, help="Invert the polarity.")
PREAMP = typer.Option(None, "--preamp-lowpass-hz", help="Causal preamp low-pass corner (-3 dB) in Hz.")
PREAMP_ORDER = typer.Option(2, "--preamp-order", help="Preamp low-pass order, 1 to 4.")
PREAMP_FAMILY = typer.Option(PreampFamily.butterworth, "--preamp-family", help="Preamp low-pass family.")
QBITS = typer.Option(None, "--quantize-bits", help="Quantise to N bits over full scale ±1.")
SCOPE = typer.Option(None, "--scope-volts-per-div", help="Quantise as an 8-bit oscilloscope at this V/div.")
RATE = typer.Option(48000.0, "--rate-hz", help="Sample rate in Hz.")
FILE_TYPE = typer.Option(WriteKind.wav16, "--file-type", help="Type of the file written.")
SEED = typer.Option(0, help="Random seed (the same options and seed give the same file).")
FORCE = typer.Option(False, help="Overwrite existing files (regular files only); write beyond the sample "
                     "limit and at a rate that undersamples the signal.")
TRUTH = typer.Option(None, "--truth-out", help="Also write the ground truth as JSON to this file.")
SPEED_OPTIONS = (
    ("profile", TapeProfile, PROFILE), ("speed", float, SPEED), ("speed_to", float, SPEED_TO),
    ("ramp_s", float, RAMP_S), ("hold_s", float, HOLD_S), ("at_s", float, AT_S),
    ("speed_points", Optional[str], POINTS), ("wow_depth", float, WOW), ("wow_hz", float, WOW_HZ),
    ("flutter_depth", float, FLUTTER), ("flutter_hz", float, FLUTTER_HZ))
PLAYBACK_OPTIONS = (
    ("snr_db", Optional[float], SNR), ("hum_hz", float, HUM_HZ), ("hum_level", float, HUM),
    ("dc_offset", float, DC), ("ac_coupling_hz", Optional[float], AC), ("band_hz", Optional[str], BAND),
    ("dropout", Optional[list[str]], DROPOUT), ("invert", bool, INVERT),
    ("preamp_lowpass_hz", Optional[float], PREAMP), ("preamp_order", int, PREAMP_ORDER),
    ("preamp_family", PreampFamily, PREAMP_FAMILY), ("quantize_bits", Optional[int], QBITS),
    ("scope_volts_per_div", Optional[float], SCOPE), ("rate_hz", float, RATE), ("file_type", WriteKind, FILE_TYPE),
    ("seed", int, SEED), ("force", bool, FORCE), ("truth_out", Optional[Path], TRUTH))


def _shared(*groups):
    """Decorator: the command also takes the options of ``groups`` ((name, type, option) each),
    after its own, passed in its ``**shared``; typer reads the signature set here."""
    def wrap(func):
        sig = inspect.signature(func)
        own = [p for p in sig.parameters.values() if p.kind is not p.VAR_KEYWORD]
        extra = [inspect.Parameter(n, inspect.Parameter.KEYWORD_ONLY, default=d, annotation=a)
                 for group in groups for n, a, d in group]
        func.__signature__ = sig.replace(parameters=own + extra)
        func.__annotations__ = {**func.__annotations__, **{n: a for group in groups for n, a, _ in group}}
        return func
    return wrap


@app.command("synth-ltc")
@_shared(SPEED_OPTIONS, PLAYBACK_OPTIONS)
def synth_ltc(
    output: Path = OUT,
    start: str = typer.Option("01:00:00:00", help="Label of the first recorded frame, HH:MM:SS:FF (';' before "
                              "FF for drop frame)."),
    rate_fps: float = typer.Option(25.0, "--rate-fps", help="Frame rate: 24, 25, 29.97 or 30."),
    drop_frame: Optional[bool] = typer.Option(None, "--drop-frame/--non-drop", help="Drop-frame labels "
                                              "(29.97 only); default: as --start is written."),
    duration_s: float = typer.Option(2.0, "--duration-s", help="Capture length in seconds."),
    user_bits: UserBitsKind = typer.Option(UserBitsKind.constant, "--user-bits", help="User bits: constant "
                                           "(--user-value), counting (from --user-value) or text (--user-text)."),
    user_value: str = typer.Option("00000000", "--user-value", help="User bits as 8 hex digits, group 8 first."),
    user_text: Optional[str] = typer.Option(None, "--user-text", help="Text for --user-bits text (4 characters "
                                            "per frame, cycling)."),
    color_frame: bool = typer.Option(False, "--color-frame", help="Set the colour-frame flag."),
    edit: Optional[list[str]] = typer.Option(None, "--edit", help="An edit at a recorded frame (repeatable): "
                                             "jump@N=TC, repeat@N, skip@N[,frames=K], splice@N=TC[,cut=CELLS]"
                                             "[,into=CELLS]."),
    direction: Direction = typer.Option(Direction.forward, help="Direction of play."),
    signal: LtcSignal = typer.Option(LtcSignal.line, help="line: a deck's line output; head: the raw head."),
    rise: str = typer.Option("smpte", help="Line rise time 10-90 %: smpte (25 µs), ebu (50 µs) or microseconds."),
    pulse: PulseKind = typer.Option(PulseKind.lorentzian, help="Head pulse model (--signal head)."),
    pw50_um: float = typer.Option(30.0, "--pw50-um", help="Lorentzian PW50 in µm."),
    head_gap_um: float = typer.Option(5.0, "--head-gap-um", help="Karlqvist head gap in µm."),
    spacing_um: float = typer.Option(2.0, "--spacing-um", help="Karlqvist head-to-tape spacing in µm."),
    transition_um: float = typer.Option(10.0, "--transition-um", help="Karlqvist transition parameter in µm."),
    tape_speed_cm_s: float = typer.Option(19.05, "--tape-speed-cm-s", help="Nominal tape speed in cm/s (head)."),
    amplitude: float = AMPLITUDE,
    start_cell: float = typer.Option(31.3, "--start-cell", help="Bit cells into the first frame where the head "
                                     "starts (0-80)."),
    **shared,
) -> None:
    """Synthesize linear timecode (SMPTE ST 12-1) played back: labels, play speed, signal, impairments."""
    _run_ltc({**{k: v for k, v in locals().items() if k != "shared"}, **shared})


def _run_ltc(o: dict) -> None:
    """Build the :class:`readchan.synth.ltc.LtcSpec` of the options, check it, render and write."""
    from readchan.synth.head import KarlqvistPulse, LorentzianPulse
    from readchan.synth.ltc import LtcSpec, UserBits, synthesize_ltc

    _check_targets(o)
    ub = UserBits(o["user_bits"].value, _hex32(o["user_value"]), o["user_text"] or "")
    if o["pulse"] is PulseKind.lorentzian:
        head = LorentzianPulse(o["pw50_um"] * 1e-6)
    else:
        head = KarlqvistPulse(o["head_gap_um"] * 1e-6, o["spacing_um"] * 1e-6, o["transition_um"] * 1e-6)
    spec = LtcSpec(start=o["start"], rate_fps=_rate_fps(o["rate_fps"]), drop_frame=o["drop_frame"],
                   duration_s=o["duration_s"], user_bits=ub, color_frame=o["color_frame"],
                   edits=parse_edits(o["edit"] or []), speed=build_speed(o), direction=o["direction"].value,
                   signal=o["signal"].value, rise=_rise(o["rise"]), pulse=head, tape_speed_cm_s=o["tape_speed_cm_s"],
                   amplitude=o["amplitude"], start_cell=o["start_cell"],
                   playback=build_playback(o, build_chain(o)), rate_hz=o["rate_hz"], seed=o["seed"])
    check_limits("ltc", spec, force=o["force"])
    s = synthesize_ltc(spec)
    truth = ltc_truth(spec, s)
    first, last = (s.frames[0].timecode, s.frames[-1].timecode) if s.frames else ("-", "-")
    write_outputs(o, s.samples, s.rate_hz, "ltc", truth,
                  f"LTC {spec.rate_fps:g} fps {spec.direction}, {len(s.frames)} whole frames {first} … {last}, "
                  f"{spec.duration_s:g} s at {spec.rate_hz:g} Hz")


@app.command("synth-kcs")
@_shared(SPEED_OPTIONS, PLAYBACK_OPTIONS)
def synth_kcs(
    output: Path = OUT,
    text: Optional[str] = typer.Option(None, "--text", help="The bytes as text (UTF-8)."),
    hex_data: Optional[str] = typer.Option(None, "--hex", help="The bytes as hex digits (spaces allowed)."),
    data_file: Optional[Path] = typer.Option(None, "--data-file", help="The bytes from a file."),
    baud: int = typer.Option(300, help="Baud rate: 300 or 1200."),
    shape: ToneShape = typer.Option(ToneShape.sine, help="Tone shape: sine, or square band-limited at "
                                    "--harmonics-hz."),
    harmonics_hz: float = typer.Option(12000.0, "--harmonics-hz", help="Highest harmonic of the square tone, Hz."),
    bit_phase_deg: float = typer.Option(0.0, "--bit-phase-deg", help="Tone phase at the first bit, degrees."),
    idle_bits: str = typer.Option("0", "--idle-bits", help="Mark after each byte in bits (fractions allowed); "
                                  "a comma list cycles over the gaps."),
    leader_s: float = typer.Option(0.2, "--leader-s", help="Mark leader before the first byte, seconds."),
    trailer_s: float = typer.Option(0.02, "--trailer-s", help="Mark after the last byte, seconds."),
    quiet_s: float = typer.Option(0.02, "--quiet-s", help="Silence before the leader and after the trailer, s."),
    amplitude: float = AMPLITUDE,
    **shared,
) -> None:
    """Synthesize Kansas City standard cassette data played back: bytes, baud, tone, speed, impairments."""
    _run_kcs({**{k: v for k, v in locals().items() if k != "shared"}, **shared})


def _run_kcs(o: dict) -> None:
    """Build the :class:`readchan.synth.kcs.KcsSpec` of the options, check it, render and write."""
    from readchan.synth.kcs import KcsSpec, synthesize_kcs

    _check_targets(o)
    data = parse_bytes(o["text"], o["hex_data"], o["data_file"])
    idle = _floats("--idle-bits", o["idle_bits"])
    spec = KcsSpec(data=data, baud=o["baud"], shape=o["shape"].value, bit_phase_deg=o["bit_phase_deg"],
                   idle_bits=idle[0] if len(idle) == 1 else tuple(idle), leader_s=o["leader_s"],
                   trailer_s=o["trailer_s"], quiet_s=o["quiet_s"], speed=build_speed(o), amplitude=o["amplitude"],
                   harmonics_hz=o["harmonics_hz"], playback=build_playback(o, build_chain(o)),
                   rate_hz=o["rate_hz"], seed=o["seed"])
    check_limits("kcs", spec, force=o["force"])
    s = synthesize_kcs(spec)
    truth = {"format": "kcs", "data_hex": s.data.hex(), "baud": s.baud,
             "byte_times_s": [round(float(v), 7) for v in s.byte_times_s], "noise_rms": s.noise_rms,
             **_playback_truth(spec, s.samples.size / s.rate_hz)}
    write_outputs(o, s.samples, s.rate_hz, "kcs", truth,
                  f"KCS {spec.baud} baud, {len(data)} bytes, {s.samples.size / s.rate_hz:.3f} s at {spec.rate_hz:g} Hz")


def ltc_truth(spec, s) -> dict:
    """The ground truth of an LTC capture as a JSON-ready dict (frames as ``decode --json`` keys)."""
    frames = [{"timecode": f.timecode, "position_s": round(f.position_s, 7), "speed": round(f.speed, 6),
               "direction": f.direction, "user_bits": f.user_bits, "drop_frame": f.drop_frame,
               "color_frame": f.color_frame} for f in s.frames]
    return {"format": "ltc", "rate_fps": s.rate_fps, "frames": frames, "edit_times_s": list(s.edit_times_s),
            "noise_rms": s.noise_rms, **_playback_truth(spec, spec.duration_s)}


def _playback_truth(spec, duration_s: float) -> dict:
    """The play speed along the capture (201 ``[t_s, speed]`` points) and the dropouts put in."""
    import numpy as np

    t = np.linspace(0.0, duration_s, 201)
    v = spec.speed.speed(t)
    return {"speed_profile": [[round(float(a), 6), round(float(b), 6)] for a, b in zip(t, v)],
            "dropouts": [{"start_s": a, "duration_s": d, "depth_db": g} for a, d, g in spec.playback.dropouts]}


def _check_targets(o: dict) -> None:
    """The output and truth files checked before any work (readchan.io.atomic's rules)."""
    from readchan.io.atomic import check_output_path

    check_output_path(o["output"], force=o["force"])
    if o["truth_out"] is not None:
        if Path(o["truth_out"]).resolve() == Path(o["output"]).resolve():
            raise ParameterError("--truth-out must name another file than the capture")
        check_output_path(o["truth_out"], force=o["force"])


def _hex32(text: str) -> int:
    t = str(text).strip().lower().removeprefix("0x")
    if not 1 <= len(t) <= 8 or any(c not in "0123456789abcdef" for c in t):
        raise ParameterError(f"--user-value must be up to 8 hex digits, was {text!r}")
    return int(t, 16)


def _rate_fps(value: float) -> float:
    for r in (24.0, 25.0, 29.97, 30.0):
        if abs(value - r) < 1e-6:
            return r
    raise ParameterError(f"--rate-fps must be 24, 25, 29.97 or 30, was {value!r}")


def _rise(text: str) -> str | float:
    t = str(text).strip().lower()
    if t in ("smpte", "ebu"):
        return t
    try:
        return float(t) * 1e-6
    except ValueError:
        raise ParameterError(f"--rise takes smpte, ebu or a time in microseconds, was {text!r}") from None


def _floats(name: str, text: str) -> list[float]:
    try:
        return [float(v) for v in str(text).split(",")]
    except ValueError:
        raise ParameterError(f"{name} takes numbers separated by commas, was {text!r}") from None
