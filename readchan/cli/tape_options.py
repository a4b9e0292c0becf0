"""Option parsing for the tape synthesizer commands (:mod:`readchan.cli.synth_tape`).

Input: the commands' option values (a dict of them).  Output: the synthesizer objects
(:class:`readchan.synth.playback.PlaySpeed`, :class:`readchan.synth.playback.Playback`,
:class:`readchan.synth.chain.FrontEnd`, :class:`readchan.synth.ltc.LtcEdit`), the bytes of a
cassette, and the files written.  Every bad value is a one-line
:class:`readchan.errors.ParameterError` (exit code 2).  Numerical modules load when called.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

from readchan.errors import ParameterError

SAMPLE_LIMIT = 50_000_000
"""Samples a tape capture may hold without ``--force`` (400 MB per float64 array), as for cards."""
HARD_SAMPLE_LIMIT = 500_000_000
"""Samples no tape capture may hold."""
MIN_HALF_CELL_SAMPLES = 4.0
"""An LTC capture needs about 4 samples per half cell at its fastest speed (README, tape limits)."""
_EDIT = re.compile(r"^(jump|repeat|skip|splice)@(\d+)(?:=([0-9:;.]+))?((?:,\w+=[^,]+)*)$")


def _finite(name: str, value: float, lo: float, hi: float) -> float:
    v = float(value)
    if not math.isfinite(v) or not lo <= v <= hi:
        raise ParameterError(f"{name} must be between {lo:g} and {hi:g}, was {value!r}")
    return v


def build_speed(o: dict):
    """The :class:`PlaySpeed` of the profile options (``--profile``, ``--speed``, ``--speed-to``,
    ``--ramp-s``, ``--hold-s``, ``--at-s``, ``--speed-points``, wow and flutter)."""
    from readchan.synth.playback import PlaySpeed

    mod = dict(wow_depth=o["wow_depth"], wow_hz=o["wow_hz"], flutter_depth=o["flutter_depth"],
               flutter_hz=o["flutter_hz"])
    kind = o["profile"].value
    if kind != "points" and o["speed_points"] is not None:
        raise ParameterError("--speed-points goes with --profile points")
    if kind == "constant":
        return PlaySpeed.constant(o["speed"], **mod)
    if kind == "points":
        if not o["speed_points"]:
            raise ParameterError("--profile points needs --speed-points 'T_S:SPEED,...'")
        return PlaySpeed(_points(o["speed_points"]), **mod)
    ramp = _finite("--ramp-s", o["ramp_s"], 1e-3, 1e5)
    at = _finite("--at-s", o["at_s"], 0.0, 1e5)
    if kind == "ramp":
        return PlaySpeed.ramp(o["speed"], o["speed_to"], ramp, at_s=at, **mod)
    hold = _finite("--hold-s", o["hold_s"], 1e-3, 1e5)
    return PlaySpeed.shuttle(o["speed"], o["speed_to"], ramp, hold, at_s=at, **mod)


def _points(text: str) -> tuple[tuple[float, float], ...]:
    pts = []
    for part in str(text).split(","):
        t, sep, s = part.partition(":")
        try:
            if not sep:
                raise ValueError
            pts.append((float(t), float(s)))
        except ValueError:
            raise ParameterError(f"--speed-points takes 'T_S:SPEED,T_S:SPEED,...', was {text!r}") from None
    return tuple(pts)


def build_chain(o: dict):
    """The reader's analog chain of the options, or None when every stage is off."""
    from readchan.synth.chain import FrontEnd

    if o["preamp_order"] not in (1, 2, 3, 4):
        raise ParameterError(f"--preamp-order must be 1, 2, 3 or 4, was {o['preamp_order']!r}")
    if o["preamp_lowpass_hz"] is None and o["quantize_bits"] is None and o["scope_volts_per_div"] is None:
        return None
    return FrontEnd(preamp_lowpass_hz=o["preamp_lowpass_hz"], preamp_order=o["preamp_order"],
                    preamp_family=o["preamp_family"].value, quantize_bits=o["quantize_bits"],
                    scope_volts_per_div=o["scope_volts_per_div"])


def build_playback(o: dict, chain):
    """The :class:`Playback` impairments of the options."""
    from readchan.synth.playback import Playback

    band = None
    if o["band_hz"] is not None:
        lo_hi = _numbers("--band-hz", o["band_hz"], 2, "'LOW,HIGH'")
        band = (lo_hi[0], lo_hi[1])
        if band[1] >= 0.5 * o["rate_hz"]:
            raise ParameterError(f"--band-hz high corner must lie below the Nyquist frequency "
                                 f"({0.5 * o['rate_hz']:g} Hz), was {band[1]:g}")
    drops = tuple(tuple(_numbers("--dropout", d, 3, "'START_S,DURATION_S,DEPTH_DB'")) for d in o["dropout"] or [])
    return Playback(snr_db=o["snr_db"], hum_hz=o["hum_hz"], hum_level=o["hum_level"], dc_offset=o["dc_offset"],
                    highpass_hz=o["ac_coupling_hz"], band_hz=band, dropouts=drops, invert=o["invert"], chain=chain)


def _numbers(name: str, text: str, n: int, form: str) -> list[float]:
    try:
        vals = [float(v) for v in str(text).split(",")]
    except ValueError:
        vals = []
    if len(vals) != n or not all(math.isfinite(v) for v in vals):
        raise ParameterError(f"{name} takes {form}, was {text!r}")
    return vals


def parse_edits(texts: list[str]) -> tuple:
    """``--edit`` values as :class:`readchan.synth.ltc.LtcEdit` s, in increasing frame order."""
    from readchan.synth.ltc import LtcEdit

    edits = []
    for text in texts:
        m = _EDIT.match(str(text).strip())
        if m is None:
            raise ParameterError(f"--edit takes jump@N=TC, repeat@N, skip@N[,frames=K] or "
                                 f"splice@N=TC[,cut=CELLS][,into=CELLS], was {text!r}")
        kind, at, to, extra = m.group(1), int(m.group(2)), m.group(3), m.group(4)
        kw: dict = {}
        for item in filter(None, extra.split(",")):
            key, _, val = item.partition("=")
            if key not in ("frames", "cut", "into"):
                raise ParameterError(f"--edit knows frames=, cut= and into=, not {key}= (in {text!r})")
            try:
                kw[{"cut": "cut_cells", "into": "into_cells"}.get(key, key)] = int(val) if key == "frames" else float(val)
            except ValueError:
                raise ParameterError(f"--edit {key}= takes a number, was {val!r}") from None
        if kw.get("frames", 1) < 1:
            raise ParameterError(f"--edit frames= must be at least 1, was {kw['frames']}")
        edits.append(LtcEdit(at, kind, to, **kw))
    edits.sort(key=lambda e: e.at_frame)
    if len({e.at_frame for e in edits}) < len(edits):
        raise ParameterError("two --edit at the same frame")
    return tuple(edits)


def parse_bytes(text: str | None, hex_data: str | None, data_file: Path | None) -> bytes:
    """The cassette's bytes from exactly one of ``--text``, ``--hex``, ``--data-file``."""
    given = [v is not None for v in (text, hex_data, data_file)]
    if sum(given) != 1:
        raise ParameterError("give the bytes with exactly one of --text, --hex, --data-file")
    if text is not None:
        data = text.encode("utf-8")
    elif hex_data is not None:
        try:
            data = bytes.fromhex(hex_data.strip().removeprefix("0x"))
        except ValueError:
            raise ParameterError(f"--hex takes pairs of hex digits, was {hex_data!r}") from None
    else:
        try:
            data = Path(data_file).read_bytes()
        except OSError as e:
            raise ParameterError(f"--data-file {str(data_file)!r}: {e.strerror or e}") from None
    if not data:
        raise ParameterError("the cassette needs at least one byte")
    return data


def check_limits(fmt: str, spec, *, force: bool) -> None:
    """Refuse captures beyond the sample limits, and an LTC rate under 4 samples per half cell
    at the fastest play speed, unless ``force`` (one-line errors)."""
    import numpy as np

    if fmt == "ltc":
        tg, _ = spec.speed.tape_grid(spec.duration_s)
        fastest = float(np.max(spec.speed.speed(tg)))
        n = spec.duration_s * spec.rate_hz
        per_half = spec.rate_hz / (2 * 80 * spec.rate_fps * fastest)
        if per_half < MIN_HALF_CELL_SAMPLES and not force:
            raise ParameterError(f"--rate-hz {spec.rate_hz:g} gives {per_half:.2f} samples per half cell at "
                                 f"{fastest:.3g}× (at least {MIN_HALF_CELL_SAMPLES:g} read reliably); raise the "
                                 f"rate or pass --force")
    else:
        pts = [s for _, s in spec.speed.points]
        slowest = min(pts) * (1 - spec.speed.wow_depth - spec.speed.flutter_depth)
        idle = spec.idle_bits if isinstance(spec.idle_bits, tuple) else (spec.idle_bits,)
        tape_s = 2 * spec.quiet_s + spec.leader_s + spec.trailer_s + len(spec.data) * (11 + max(idle)) / spec.baud
        n = tape_s / max(slowest, 0.05) * spec.rate_hz
    limit = HARD_SAMPLE_LIMIT if force else SAMPLE_LIMIT
    if n > limit:
        hint = "" if force else "; pass --force to write up to 500 million"
        raise ParameterError(f"the capture would hold about {n:.3g} samples, over {limit:,}{hint}")


def write_outputs(o: dict, samples, rate_hz: float, name: str, truth: dict, summary: str) -> None:
    """Write the capture (and the truth JSON) atomically and print one line on stderr."""
    from readchan.cli.common import err
    from readchan.io.atomic import atomic_output
    from readchan.io.capture import display_path, write_capture

    path = write_capture(o["output"], samples, rate_hz, kind=o["file_type"].value, force=o["force"],
                         channel_names=[name])
    if o["truth_out"] is not None:
        with atomic_output(o["truth_out"], force=o["force"]) as tmp:
            tmp.write_text(json.dumps(truth, indent=1, allow_nan=False) + "\n", encoding="utf-8")
    err.print(f"wrote {display_path(path)}: {summary}", highlight=False, markup=False)
