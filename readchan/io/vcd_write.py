"""Writing logic-analyser captures as VCD (IEEE 1364 §18): what a comparator or a reader chip
would have put on its pins.

Input: a two-level (or any) waveform and its sample rate (Hz), or bits with their strobe times.
Output: a VCD file written with ``pyvcd`` (:mod:`readchan.io.vcd` says why) through
:func:`readchan.io.atomic.atomic_output`, readable by :func:`readchan.io.vcd.load_vcd`.

Used to make the VCD fixtures and the tests' captures; a synthesized capture written so
decodes like a logic analyser's.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np


def _tick(timescale: str) -> float:
    mag, unit = timescale.split()
    return float(mag) * {"s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9, "ps": 1e-12}[unit]


def comparator_edges(samples: np.ndarray, rate_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """(times in s, level after) of a comparator at the waveform's midpoint: the sign changes of
    ``samples`` minus the midpoint of its extremes, timed by linear interpolation."""
    x = np.asarray(samples, float).ravel()
    x = x - 0.5 * (x.max() + x.min())
    high = x > 0
    k = np.flatnonzero(high[1:] != high[:-1])
    frac = x[k] / (x[k] - x[k + 1])
    return (k + frac) / float(rate_hz), high[k + 1].astype(np.uint8)


def write_comparator_vcd(path: str | Path, samples: np.ndarray, rate_hz: float, *, name: str = "comp_out",
                         scope: str = "reader", timescale: str = "1 us", force: bool = False) -> int:
    """A comparator's output on ``samples`` (:func:`comparator_edges`) as one VCD wire;
    returns the number of edges written."""
    from vcd import VCDWriter

    from readchan.io.atomic import atomic_output

    times, levels = comparator_edges(samples, rate_hz)
    x = np.asarray(samples, float).ravel()
    first = int(x[0] > 0.5 * (x.max() + x.min()))
    ticks = np.round(times / _tick(timescale)).astype(np.int64)
    with atomic_output(path, force=force) as tmp:
        with open(tmp, "w", encoding="ascii") as fh:
            w = VCDWriter(fh, timescale=timescale, date="", version="readchan")
            var = w.register_var(scope, name, "wire", size=1, init=first)
            for t, v in zip(ticks, levels):
                w.change(var, int(t), int(v))
            w.close(int(ticks[-1]) + int(round(0.01 / _tick(timescale))) if ticks.size else None)
    return int(ticks.size)


def write_strobe_vcd(path: str | Path, bits: np.ndarray, period_s: float, *, start_s: float = 0.001,
                     strobe: str = "rcp", data: str = "rdd", scope: str = "reader", active_low: bool = True,
                     timescale: str = "1 us", force: bool = False) -> None:
    """A reader chip's outputs for ``bits`` at one bit per ``period_s`` (s): the data line set
    at the cell's start (inverted when ``active_low``), a strobe pulse (active low) from 20 % to
    60 % of the cell, so the data is stable on both strobe edges."""
    from vcd import VCDWriter

    from readchan.io.atomic import atomic_output

    tick = _tick(timescale)
    b = np.asarray(bits, np.uint8)
    with atomic_output(path, force=force) as tmp:
        with open(tmp, "w", encoding="ascii") as fh:
            w = VCDWriter(fh, timescale=timescale, date="", version="readchan")
            s = w.register_var(scope, strobe, "wire", size=1, init=1)
            d = w.register_var(scope, data, "wire", size=1, init=1 if active_low else 0)
            for k, bit in enumerate(b):
                t0 = start_s + k * period_s
                w.change(d, int(round(t0 / tick)), int(bit) ^ int(active_low))
                w.change(s, int(round((t0 + 0.2 * period_s) / tick)), 0)
                w.change(s, int(round((t0 + 0.6 * period_s) / tick)), 1)
            w.close(int(round((start_s + (b.size + 1) * period_s) / tick)))
