"""LTC synthesizer: a timecode track played back, as samples, with its ground truth.

Input: :class:`LtcSpec` (start label, rate, user bits, edits, play speed, direction, signal kind,
playback impairments, seed).
Output: :class:`LtcSynth` – samples (1-D float64), rate, and the frames the head met with the
capture times and speeds a decoder must report.

Model:

1. The tape holds consecutive frames from ``start`` (labels by :mod:`readchan.formats.ltc.word`,
   so drop-frame labels and the 24-hour wrap follow the standard's rule), each an 80-bit word
   in biphase mark (:func:`readchan.linecode.biphase.biphase_positions`), positions in bit cells.
   Edits rewrite the label sequence: ``jump`` (a frame-accurate edit: labels continue from
   ``to``, the bit clock unbroken), ``repeat`` (the previous label again), ``skip`` (``frames``
   labels left out), ``splice`` (the recording is cut ``cut_cells`` into the frame and another
   one, labelled from ``to``, joined ``into_cells`` into its frame: the bit clock breaks).
2. Play: the head's tape position is ``x0 + 80·fps·τ(t)`` cells forward, or runs back from the
   end of the recorded frames in reverse, with τ the tape time of the speed profile
   (:mod:`readchan.synth.playback`).  Transition times are found by inverting it.
3. Signal: ``line`` is the deck's square wave of ± ``amplitude`` whose 10–90 % rise time is
   ``rise_s / speed`` (an erf edge; 25 µs is the SMPTE rise time, 50 µs the EBU one, both
   from memory); ``head`` is the raw head voltage, pulses of the head model
   (:mod:`readchan.synth.head`) of alternating sign, each scaled by the play speed and shaped
   in space at the tape speed of the moment (Faraday's law: amplitude ∝ speed, width ∝ 1/speed).
4. Playback impairments (:class:`readchan.synth.playback.Playback`).

Seeded: the same spec gives the same samples.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.special import erf

from readchan.errors import ParameterError
from readchan.synth.head import LorentzianPulse, PulseModel
from readchan.linecode.biphase import biphase_positions
from readchan.formats.ltc.word import (RATES_FPS, WORD_BITS, FrameWord, Label, count_to_label, encode_word,
                                    frames_per_day, label_to_count, labels_per_second)
from readchan.synth.playback import Playback, PlaySpeed

RISE_S = {"smpte": 25e-6, "ebu": 50e-6}
"""10–90 % rise time of the LTC square wave at nominal speed (from memory)."""
USER_KINDS = ("constant", "counting", "text")
EDIT_KINDS = ("jump", "repeat", "skip", "splice")
ERF_10_90 = 2 * 1.2815515655446004 / math.sqrt(2)
"""10–90 % rise of 0.5·(1 + erf(u)) in units of u: erf(u) = ±0.8 at u = ±z₀.₉/√2 (z₀.₉ = 1.2816,
the normal distribution's 90 % point)."""


@dataclass(frozen=True)
class UserBits:
    """User-bit content per frame: ``constant`` (``value``), ``counting`` (``value`` + frame
    index, modulo 2³²) or ``text`` (4 characters of ``text`` per frame, cycling; character c
    fills groups 2c+1 (low nibble) and 2c+2 (high nibble); BGF0 set, which marks an 8-bit
    character set, from memory)."""

    kind: str = "constant"
    value: int = 0
    text: str = ""

    def __post_init__(self) -> None:
        if self.kind not in USER_KINDS:
            raise ParameterError(f"user bits kind must be one of {', '.join(USER_KINDS)}, was {self.kind!r}")
        if not 0 <= int(self.value) < 1 << 32:
            raise ParameterError(f"user bits value must be a 32-bit value, was {self.value!r}")
        if self.kind == "text" and (not self.text or any(ord(c) > 255 for c in self.text)):
            raise ParameterError("text user bits need a non-empty 8-bit text")

    def word(self, k: int) -> tuple[int, tuple[int, int, int]]:
        """(user-bit integer, binary group flags) of frame ``k``."""
        if self.kind == "counting":
            return (int(self.value) + k) % (1 << 32), (0, 0, 0)
        if self.kind == "text":
            chars = [ord(self.text[(4 * k + c) % len(self.text)]) for c in range(4)]
            return sum(ch << (8 * c) for c, ch in enumerate(chars)), (1, 0, 0)
        return int(self.value), (0, 0, 0)


@dataclass(frozen=True)
class LtcEdit:
    """An edit at tape frame ``at_frame`` (see the module docstring)."""

    at_frame: int
    kind: str
    to: str | None = None
    frames: int = 1
    cut_cells: float = 40.0
    into_cells: float = 23.5

    def __post_init__(self) -> None:
        if self.kind not in EDIT_KINDS:
            raise ParameterError(f"edit kind must be one of {', '.join(EDIT_KINDS)}, was {self.kind!r}")
        if self.at_frame < 1:
            raise ParameterError(f"an edit needs at_frame ≥ 1, was {self.at_frame!r}")
        if self.kind in ("jump", "splice") and self.to is None:
            raise ParameterError(f"a {self.kind} needs the timecode it continues with ('to')")
        if not (0 < self.cut_cells < WORD_BITS and 0 <= self.into_cells < WORD_BITS):
            raise ParameterError("cut_cells and into_cells must lie within a frame (0–80 cells)")


@dataclass(frozen=True)
class LtcSpec:
    """Everything that defines a synthetic LTC capture.

    Parameters
    ----------
    start : label of the first recorded frame, ``"HH:MM:SS:FF"`` (``;`` for drop frame).
    rate_fps : 24, 25, 29.97 or 30.
    drop_frame : drop-frame labels (29.97 only); None: as ``start`` is written.
    duration_s : capture length in seconds.
    user_bits : :class:`UserBits`.
    color_frame : the colour-frame flag on every frame.
    edits : :class:`LtcEdit` tuple, in increasing ``at_frame``.
    speed : :class:`PlaySpeed` profile.
    direction : ``"forward"`` or ``"reverse"``.
    signal : ``"line"`` or ``"head"``.
    rise : ``"smpte"``, ``"ebu"`` or a rise time in seconds (line signal).
    pulse : head pulse model (head signal); tape_speed_cm_s : nominal tape speed for it
        (19.05 cm/s = 7.5 ips, common practice).
    amplitude : line level, or the head pulse peak at nominal speed, output units.
    start_cell : cells into the first frame where the head starts (forward), or before the end
        of the last frame (reverse).
    playback : :class:`Playback` impairments.
    rate_hz : sample rate in Hz.
    seed : random seed.
    """

    start: str = "01:00:00:00"
    rate_fps: float = 25.0
    drop_frame: bool | None = None
    duration_s: float = 1.0
    user_bits: UserBits = field(default_factory=UserBits)
    color_frame: bool = False
    edits: tuple[LtcEdit, ...] = ()
    speed: PlaySpeed = field(default_factory=PlaySpeed)
    direction: str = "forward"
    signal: str = "line"
    rise: str | float = "smpte"
    pulse: PulseModel = field(default_factory=lambda: LorentzianPulse(pw50_m=30e-6))
    tape_speed_cm_s: float = 19.05
    amplitude: float = 0.5
    start_cell: float = 31.3
    playback: Playback = field(default_factory=Playback)
    rate_hz: float = 48_000.0
    seed: int = 0

    def __post_init__(self) -> None:
        if self.rate_fps not in RATES_FPS:
            raise ParameterError(f"rate_fps must be one of 24, 25, 29.97, 30, was {self.rate_fps!r}")
        if self.drop_frame and self.rate_fps != 29.97:
            raise ParameterError("drop frame exists only at 29.97 fps")
        if not math.isfinite(self.duration_s) or not 0.01 <= self.duration_s <= 3600:
            raise ParameterError(f"duration_s must be between 0.01 and 3600, was {self.duration_s!r}")
        if self.direction not in ("forward", "reverse"):
            raise ParameterError(f"direction must be 'forward' or 'reverse', was {self.direction!r}")
        if self.signal not in ("line", "head"):
            raise ParameterError(f"signal must be 'line' or 'head', was {self.signal!r}")
        if isinstance(self.rise, str) and self.rise not in RISE_S:
            raise ParameterError(f"rise must be 'smpte', 'ebu' or seconds, was {self.rise!r}")
        if not math.isfinite(self.rate_hz) or not 1_000 <= self.rate_hz <= 10e6:
            raise ParameterError(f"rate_hz must be between 1 kHz and 10 MHz, was {self.rate_hz!r}")
        if not math.isfinite(self.amplitude) or not 0 < self.amplitude <= 100:
            raise ParameterError(f"amplitude must be above 0 and at most 100, was {self.amplitude!r}")
        if not math.isfinite(self.tape_speed_cm_s) or not 0.1 <= self.tape_speed_cm_s <= 1000:
            raise ParameterError(f"tape_speed_cm_s must be between 0.1 and 1000, was {self.tape_speed_cm_s!r}")
        if not isinstance(self.rise, str) and (not math.isfinite(self.rise) or not 0 < self.rise <= 1e-3):
            raise ParameterError(f"rise must be 'smpte', 'ebu' or a time above 0 and up to 1 ms, was {self.rise!r}")
        if not 0 <= self.start_cell < WORD_BITS:
            raise ParameterError(f"start_cell must lie within a frame (0–80), was {self.start_cell!r}")

    @property
    def is_drop_frame(self) -> bool:
        return bool(self.drop_frame) if self.drop_frame is not None else ";" in self.start


@dataclass(frozen=True)
class TruthFrame:
    """A frame the head met in full: what a decoder should report for it."""

    timecode: str
    position_s: float
    speed: float
    direction: str
    user_bits: str
    drop_frame: bool
    color_frame: bool


@dataclass(frozen=True)
class LtcSynth:
    """A synthetic LTC capture and its ground truth.

    Attributes
    ----------
    samples : float64 (n,).
    rate_hz : sample rate in Hz.
    frames : :class:`TruthFrame` per complete frame met, in capture order (both its boundaries
        at least half a cell inside the capture).
    transition_times_s : true transition times in the capture, seconds.
    edit_times_s : capture time at which the head met each edit (None if it did not).
    noise_rms : RMS of the added white noise, output units.
    rate_fps : the recorded frame rate.
    """

    samples: np.ndarray
    rate_hz: float
    frames: tuple[TruthFrame, ...]
    transition_times_s: np.ndarray
    edit_times_s: tuple[float | None, ...]
    noise_rms: float
    rate_fps: float


def _tape(spec: LtcSpec, n_frames: int):
    """Transition positions (cells) of the recorded tape, the frames' (start cell, word), and
    the cell of each edit."""
    per_s = labels_per_second(spec.rate_fps)
    df = spec.is_drop_frame
    lab, _ = Label.parse(spec.start)
    count = label_to_count(lab, per_s, df)
    edits = {e.at_frame: e for e in spec.edits}
    pos_parts, frames, edit_cells = [], [], {}
    level = 0
    x = 0.0            # tape cell where the next frame begins
    k = 0
    skip_into = 0.0
    while len(frames) < n_frames:
        e = edits.get(k)
        if e is not None:
            edit_cells[e.at_frame] = x
            if e.kind == "repeat":
                count -= 1
            elif e.kind == "skip":
                count += e.frames
            elif e.kind in ("jump", "splice"):
                count = label_to_count(Label.parse(e.to)[0], per_s, df)
        ub, bgf = spec.user_bits.word(k)
        word = FrameWord(count_to_label(count, per_s, df), df, spec.color_frame, ub, bgf)
        bits = encode_word(word, spec.rate_fps)
        pos, _ = biphase_positions(bits)
        pos = pos[:-1]                               # the closing boundary opens the next frame
        nxt = edits.get(k + 1)
        if skip_into:                                # the joined recording starts mid-frame
            keep = pos >= skip_into
            p = pos[keep] - skip_into
            if int(np.count_nonzero(~keep)) % 2 != level and (p.size == 0 or p[0] > 0):
                p = np.concatenate(([0.0], p))       # the flux level differs across the join
            pos_parts.append(x + p)
            level = (level + p.size) % 2
            x += WORD_BITS - skip_into
            skip_into = 0.0
        elif nxt is not None and nxt.kind == "splice":
            p = pos[pos < nxt.cut_cells]
            pos_parts.append(x + p)
            level = (level + p.size) % 2
            x += nxt.cut_cells
            skip_into = nxt.into_cells
        else:
            frames.append((x, word))
            pos_parts.append(x + pos)
            level = (level + pos.size) % 2
            x += WORD_BITS
        count = (count + 1) % frames_per_day(per_s, df)
        k += 1
    return np.concatenate(pos_parts), frames, edit_cells, x


def synthesize_ltc(spec: LtcSpec) -> LtcSynth:
    """Render ``spec`` into samples with its ground truth (see the module docstring)."""
    rng = np.random.default_rng(spec.seed)
    cells_per_s = WORD_BITS * spec.rate_fps
    tg, tau = spec.speed.tape_grid(spec.duration_s)
    span_cells = cells_per_s * tau[-1]
    n_frames = int(math.ceil((spec.start_cell + span_cells) / WORD_BITS)) + 2
    if n_frames > 2_000_000:
        raise ParameterError("the capture would hold over two million frames; shorten it")
    pos, frames, edit_cells, tape_end = _tape(spec, n_frames)
    pos = np.concatenate((pos, [tape_end]))
    forward = spec.direction == "forward"
    # head position along the tape, in cells, on the grid; increasing in forward play
    if forward:
        head = spec.start_cell + cells_per_s * tau
        cell_time = lambda c: np.interp(c, head, tg, left=np.nan, right=np.nan)  # noqa: E731
    else:
        end = tape_end - spec.start_cell
        head = end - cells_per_s * tau
        cell_time = lambda c: np.interp(-np.asarray(c), -head, tg, left=np.nan, right=np.nan)  # noqa: E731
    tt = cell_time(pos)
    ok = np.isfinite(tt)
    times = np.sort(tt[ok])
    n = int(round(spec.duration_s * spec.rate_hz))
    t = np.arange(n) / spec.rate_hz
    speed_at = spec.speed.speed
    if spec.signal == "line":
        rise = RISE_S[spec.rise] if isinstance(spec.rise, str) else float(spec.rise)
        x = _line(t, times, rise / speed_at(times), spec.amplitude)
        peak = spec.amplitude
    else:
        x, peak = _head(t, times, speed_at(times), spec)
    samples, rms = spec.playback.apply(x, spec.rate_hz, peak, rng)
    truth = []
    for start_cell, word in frames:
        a, b = cell_time(np.array([start_cell, start_cell + WORD_BITS]))
        if not (np.isfinite(a) and np.isfinite(b)):
            continue
        # a boundary at the very edge of the capture cannot be seen: keep half a cell inside
        edge = max(4.0 / spec.rate_hz, 0.5 / (cells_per_s * float(speed_at(np.array([min(a, b)]))[0])))
        if min(a, b) < edge or max(a, b) > n / spec.rate_hz - edge:
            continue
        first, last = (a, b) if forward else (b, a)
        truth.append(TruthFrame(word.label.text(word.drop_frame), float(first),
                                float((1.0 / spec.rate_fps) / (last - first)), spec.direction,
                                word.user_hex, word.drop_frame, word.color_frame))
    truth.sort(key=lambda f: f.position_s)
    edit_times = []
    for e in spec.edits:
        c = edit_cells.get(e.at_frame)
        v = float(cell_time(np.array([c]))[0]) if c is not None else float("nan")
        edit_times.append(v if math.isfinite(v) else None)
    return LtcSynth(np.ascontiguousarray(samples), float(spec.rate_hz), tuple(truth), times,
                    tuple(edit_times), float(rms), float(spec.rate_fps))


def _line(t: np.ndarray, edges: np.ndarray, rise_s: np.ndarray, amplitude: float) -> np.ndarray:
    """Square wave ± ``amplitude`` flipping at ``edges`` (s), each edge an erf step whose 10–90 %
    rise is ``rise_s``; each sample is shaped by its nearest edge (edges lie far more than a
    rise time apart), so the whole wave is one vectorised expression."""
    if edges.size == 0:
        return np.full(t.size, -amplitude)
    j = np.searchsorted(edges, t)
    left = np.clip(j - 1, 0, edges.size - 1)
    right = np.clip(j, 0, edges.size - 1)
    near = np.where(np.abs(t - edges[left]) <= np.abs(edges[right] - t), left, right)
    before = np.where(near % 2 == 0, -1.0, 1.0)        # level before edge k: −1 for even k
    u = (t - edges[near]) / rise_s[near] * ERF_10_90
    return amplitude * before * (-erf(u))


def _head(t: np.ndarray, edges: np.ndarray, speed: np.ndarray, spec: LtcSpec) -> tuple[np.ndarray, float]:
    """Σ_k (−1)^k · A·s_k · p(v_k·(t − t_k)), v_k = s_k × the nominal tape speed, over ±30 PW50;
    returns (signal, median pulse peak)."""
    v_m_s = speed * spec.tape_speed_cm_s * 0.01
    pw50 = float(getattr(spec.pulse, "pw50_m"))
    reach = 30 * pw50 / v_m_s
    rate = spec.rate_hz
    lo = np.clip(((edges - reach) * rate).astype(np.int64), 0, t.size)
    hi = np.clip(((edges + reach) * rate).astype(np.int64) + 1, 0, t.size)
    x = np.zeros(t.size)
    for k in range(edges.size):
        a, b = lo[k], hi[k]
        if b > a:
            sign = 1.0 if k % 2 == 0 else -1.0
            x[a:b] += sign * spec.amplitude * speed[k] * spec.pulse.shape(v_m_s[k] * (t[a:b] - edges[k]))
    idx = np.clip(np.round(edges * rate).astype(np.int64), 0, t.size - 1)
    peak = float(np.median(np.abs(x[idx]))) if idx.size else spec.amplitude
    return x, peak
