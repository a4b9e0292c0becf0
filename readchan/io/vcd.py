"""Logic-analyser captures in the Value Change Dump format (VCD, IEEE 1364 §18, an open standard).

Input: a ``.vcd`` file (or its bytes) and the names of the signals to read.
Output: :class:`VcdComparator` (one comparator output as a two-level
:class:`readchan.io.capture.Capture`, decoded like any logic-level capture) or
:class:`VcdStrobeData` (a reader chip's strobe-and-data pair as bits with their times: the
chip has already decided the F2F cells, so the bits go straight to the framers).

The file is parsed with ``pyvcd`` (``vcd.reader.tokenize``), a maintained library on the
package registry that both reads and writes VCD (``vcd.writer.VCDWriter`` writes readchan's
own VCD output, :mod:`readchan.report.vcd_out`), streams its tokens without loading the whole
dump, and checks the syntax as it goes.  ``vcdvcd``, the other candidate, reads only (it has no
writer) and builds every signal's full history in memory.

The VCD's timescale is the clock: value-change times are integer ticks of it.  A comparator
output becomes samples at ``rate_hz`` (default :func:`default_rate_hz`) holding the level in
force at each sample time; ``x`` and ``z`` values hold the previous level.  For a pair, the data
bit of each strobe edge (``falling`` by default: reader chips commonly present data on an
active-low strobe; from memory) is the data level in force just before the edge.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from readchan.errors import CaptureError, ParameterError
from readchan.io.capture import MAX_SAMPLES, Capture, check_rate_range, display_path

__all__ = ["VcdComparator", "VcdStrobeData", "VcdSignal", "default_rate_hz", "is_vcd", "load_vcd"]

VCD_KEYWORDS = (b"$date", b"$version", b"$timescale", b"$scope", b"$var", b"$comment", b"$enddefinitions")
"""Declaration keywords a VCD file opens with (IEEE 1364 §18.2)."""

MIN_SAMPLES_PER_INTERVAL = 64
"""Samples the shortest interval between two edges spans at the default rate (a sub-percent
quantisation of any F2F interval; our choice)."""

DEFAULT_SAMPLE_BUDGET = 20_000_000
"""Most samples the default rate gives a comparator capture (160 MB as float64)."""

_STROBE = re.compile(r"(strobe|stb|clk|clock|rcp|rclk)", re.I)
_DATA = re.compile(r"(data|rdd|dat)", re.I)


@dataclass(frozen=True)
class VcdSignal:
    """A declared variable: ``name`` (scopes joined by ``.``), ``size`` in bits, its identifier code."""

    name: str
    size: int
    id_code: str

    @property
    def leaf(self) -> str:
        return self.name.rpartition(".")[2]


@dataclass(frozen=True)
class VcdComparator:
    """A comparator output read from a VCD: ``capture`` (one channel, levels 0/1, named after
    the signal), the VCD tick ``timescale_s`` (seconds) and the signal."""

    capture: Capture
    timescale_s: float
    signal: VcdSignal


@dataclass(frozen=True)
class VcdStrobeData:
    """A strobe-and-data pair read from a VCD.

    Attributes
    ----------
    source : the file as given.
    times_s : time of each strobe edge, seconds from tick 0.
    ticks : the same times in VCD ticks (int64).
    bits : uint8 data level before each edge (0/1, as on the wire).
    timescale_s : the VCD tick, seconds.
    strobe, data : the two signals.
    edge : ``falling`` or ``rising``.
    """

    source: str
    times_s: np.ndarray
    ticks: np.ndarray
    bits: np.ndarray
    timescale_s: float
    strobe: VcdSignal
    data: VcdSignal
    edge: str = "falling"

    @property
    def duration_s(self) -> float:
        """Time of the last strobe edge, seconds from tick 0."""
        return float(self.times_s[-1]) if self.times_s.size else 0.0


def is_vcd(path: str | Path, head: bytes | None = None) -> bool:
    """A ``.vcd`` name, or a file whose first word is a VCD declaration keyword."""
    if Path(path).suffix.lower() == ".vcd":
        return True
    if head is None:
        try:
            with open(path, "rb") as fh:
                head = fh.read(256)
        except OSError:
            return False
    return head.lstrip().startswith(VCD_KEYWORDS)


def _err(source: str, problem: str) -> CaptureError:
    return CaptureError(f"{display_path(source)}: {problem}")


def _header(tokens, source: str):
    """(signals, timescale_s) from the declarations, up to ``$enddefinitions``."""
    from vcd.reader import TokenKind

    scopes: list[str] = []
    signals: list[VcdSignal] = []
    timescale_s = 1e-9             # IEEE 1364 leaves it to the tool; 1 ns is the usual default
    for tok in tokens:
        if tok.kind is TokenKind.TIMESCALE:
            ts = tok.data
            timescale_s = ts.magnitude * _UNIT_S[ts.unit.value]
        elif tok.kind is TokenKind.SCOPE:
            scopes.append(tok.data.ident)
        elif tok.kind is TokenKind.UPSCOPE and scopes:
            scopes.pop()
        elif tok.kind is TokenKind.VAR:
            v = tok.data
            ref = v.reference + ("" if v.bit_index is None else f"[{v.bit_index}]")
            signals.append(VcdSignal(".".join([*scopes, ref]), int(v.size), v.id_code))
        elif tok.kind is TokenKind.ENDDEFINITIONS:
            return signals, timescale_s
    raise _err(source, "not a VCD file: no $enddefinitions (the declarations never end)")


_UNIT_S = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9, "ps": 1e-12, "fs": 1e-15, "as": 1e-18, "zs": 1e-21}


def _listing(signals: list[VcdSignal]) -> str:
    shown = ", ".join(f"{s.name}" + ("" if s.size == 1 else f" ({s.size} bits)") for s in signals[:20])
    more = f" and {len(signals) - 20} more" if len(signals) > 20 else ""
    return (shown + more) or "none"


def _pick(signals: list[VcdSignal], name: str, what: str, source: str) -> VcdSignal:
    """The one-bit signal called ``name`` (full dotted name, or the name within its scope)."""
    found = [s for s in signals if s.name == name] or [s for s in signals if s.leaf == name]
    if len(found) != 1:
        how = "no signal" if not found else f"{len(found)} signals"
        raise _err(source, f"{how} named {name!r} for {what}; the signals are: {_listing(signals if not found else found)}")
    if found[0].size != 1:
        raise _err(source, f"{what} {found[0].name} has {found[0].size} bits; a one-bit signal is needed")
    return found[0]


def _choose(signals, signal_name, strobe_name, data_name, source):
    """(comparator, strobe, data): the signals named, or the only ones that fit."""
    if signal_name is not None and (strobe_name or data_name):
        raise ParameterError("give either --signal-name (a comparator output) or --strobe-name and --data-name "
                             "(a strobe-and-data pair), not both")
    if signal_name is not None:
        return _pick(signals, signal_name, "the comparator output", source), None, None
    if strobe_name or data_name:
        if not (strobe_name and data_name):
            raise ParameterError("a strobe-and-data pair needs both --strobe-name and --data-name")
        return None, _pick(signals, strobe_name, "the strobe", source), _pick(signals, data_name, "the data", source)
    one_bit = [s for s in signals if s.size == 1]
    if len(one_bit) == 1:
        return one_bit[0], None, None
    if len(one_bit) == 2:
        strobe = [s for s in one_bit if _STROBE.search(s.leaf)]
        data = [s for s in one_bit if _DATA.search(s.leaf) and s not in strobe]
        if len(strobe) == 1 and len(data) == 1:
            return None, strobe[0], data[0]
    how = "no one-bit signal" if not one_bit else f"{len(one_bit)} one-bit signals"
    raise _err(source, f"{how} to decode; the signals are: {_listing(signals)}; name a comparator output with "
                       f"--signal-name NAME, or a pair with --strobe-name NAME --data-name NAME")


def _changes(tokens, wanted: dict[str, int], source: str) -> tuple[list[list[int]], list[list[int]], int]:
    """Per wanted signal (id code → slot): the ticks and levels (0/1) of its value changes, in
    file order, and the last tick of the dump.  ``x``/``z`` hold the level before."""
    from vcd.reader import TokenKind

    ticks: list[list[int]] = [[] for _ in range(len(set(wanted.values())))]
    levels: list[list[int]] = [[] for _ in ticks]
    now = 0
    for tok in tokens:
        kind = tok.kind
        if kind is TokenKind.CHANGE_TIME:
            now = int(tok.data)
            continue
        if kind not in (TokenKind.CHANGE_SCALAR, TokenKind.CHANGE_VECTOR):
            continue
        slot = wanted.get(tok.data.id_code)
        if slot is None:
            continue
        value = str(tok.data.value).lower()
        if value not in ("0", "1"):
            continue                      # x, z: the level before holds
        ticks[slot].append(now)
        levels[slot].append(int(value))
    return ticks, levels, now


def default_rate_hz(timescale_s: float, ticks: np.ndarray, end_tick: int) -> float:
    """Sample rate (Hz) for a comparator output: the VCD clock 1/timescale, lowered so that the
    shortest interval between edges still spans :data:`MIN_SAMPLES_PER_INTERVAL` samples and the
    capture holds at most :data:`DEFAULT_SAMPLE_BUDGET` samples."""
    clock = 1.0 / timescale_s
    gaps = np.diff(ticks)
    gaps = gaps[gaps > 0]
    rate = clock
    if gaps.size:
        rate = min(rate, MIN_SAMPLES_PER_INTERVAL * clock / float(gaps.min()))
    if end_tick > 0:
        rate = min(rate, DEFAULT_SAMPLE_BUDGET * clock / end_tick)
    return float(max(rate, 1_000.0))


def _comparator(source: str, sig: VcdSignal, ticks: list[int], levels: list[int], end_tick: int,
                timescale_s: float, rate_hz: float | None) -> VcdComparator:
    t = np.asarray(ticks, np.int64)
    v = np.asarray(levels, np.float64)
    if t.size < 2:
        raise _err(source, f"signal {sig.name} has {t.size} value change{'s' if t.size != 1 else ''}; nothing to decode")
    end_tick = max(end_tick, int(t[-1]))
    end_tick += max(int(0.05 * (end_tick - int(t[0]))), 1)        # some idle after the last edge
    rate = check_rate_range(rate_hz, "the given sample rate (rate_hz)") if rate_hz is not None \
        else default_rate_hz(timescale_s, t, end_tick)
    n = int(math.floor(end_tick * timescale_s * rate)) + 1
    if n > MAX_SAMPLES:
        raise _err(source, f"{n:,} samples at {rate:g} Hz is over the limit of {MAX_SAMPLES:,}; give a lower --rate-hz")
    k = np.searchsorted(t, np.arange(n) / (rate * timescale_s), side="right") - 1
    x = np.where(k >= 0, v[np.clip(k, 0, None)], v[0])
    cap = Capture(x, rate, source=source, units="level", channel_names=(sig.name,))
    return VcdComparator(cap, timescale_s, sig)


def _strobe_data(source, strobe, data, st, sl, dt, dl, timescale_s, edge) -> VcdStrobeData:
    st_a, sl_a = np.asarray(st, np.int64), np.asarray(sl, np.int8)
    prev = np.concatenate((sl_a[:1], sl_a[:-1]))            # the first value is the initial level, no edge
    want = 0 if edge == "falling" else 1
    edges = st_a[(sl_a == want) & (prev != want)]
    if edges.size == 0:
        raise _err(source, f"strobe {strobe.name} has no {edge} edge")
    d_t, d_l = np.asarray(dt, np.int64), np.asarray(dl, np.uint8)
    if d_t.size == 0:
        raise _err(source, f"data {data.name} never takes a 0 or 1 value")
    k = np.searchsorted(d_t, edges, side="left") - 1         # the level in force just before the edge
    bits = np.where(k >= 0, d_l[np.clip(k, 0, None)], d_l[0]).astype(np.uint8)
    return VcdStrobeData(source, edges * timescale_s, edges, bits, timescale_s, strobe, data, edge)


def load_vcd(path: str | Path, *, signal_name: str | None = None, strobe_name: str | None = None,
             data_name: str | None = None, rate_hz: float | None = None, edge: str = "falling",
             source: str | None = None) -> VcdComparator | VcdStrobeData:
    """Read a comparator output or a strobe-and-data pair from the VCD file ``path``.

    ``signal_name`` names a comparator output; ``strobe_name`` and ``data_name`` a pair; with
    none, the only one-bit signal is the comparator, or two one-bit signals whose names say
    strobe (``strobe``, ``clk``, ``rcp``...) and data (``data``, ``rdd``...) are the pair.  A
    name is the full dotted name or the name within its scope.  ``rate_hz`` (Hz) samples a
    comparator output (default :func:`default_rate_hz`); ``edge`` (``falling``/``rising``) is
    the strobe edge the data is taken on.  Every problem is one :class:`CaptureError` line
    (listing the signals when none or several fit) or a :class:`ParameterError`.
    """
    from vcd.reader import VCDParseError, tokenize

    if edge not in ("falling", "rising"):
        raise ParameterError(f"the strobe edge must be falling or rising, was {edge!r}")
    source = str(path) if source is None else source
    try:
        with open(path, "rb") as fh:
            tokens = tokenize(fh)
            signals, timescale_s = _header(tokens, source)
            comp, strobe, data = _choose(signals, signal_name, strobe_name, data_name, source)
            if comp is None and strobe.id_code == data.id_code:
                raise ParameterError("the strobe and the data are the same signal")
            chosen = [comp] if comp is not None else [strobe, data]
            wanted = {s.id_code: n for n, s in enumerate(chosen)}
            ticks, levels, end_tick = _changes(tokens, wanted, source)
    except FileNotFoundError:
        raise _err(source, "no such file") from None
    except IsADirectoryError:
        raise _err(source, "is a directory, not a capture file") from None
    except OSError as exc:
        raise _err(source, f"cannot read file ({exc.strerror or exc})") from None
    except (VCDParseError, ValueError, KeyError, IndexError) as exc:
        raise _err(source, f"not a readable VCD file ({' '.join(str(exc).split()) or type(exc).__name__})") from None
    if comp is not None:
        return _comparator(source, comp, ticks[0], levels[0], end_tick, timescale_s, rate_hz)
    return _strobe_data(source, strobe, data, ticks[0], levels[0], ticks[1], levels[1], timescale_s, edge)
