#!/usr/bin/env python
"""False-accept benchmark: decode corrupted captures of known content, count valid wrong reads.

A false accept is a read that passes every parity check and the LRC but whose text is not what
was recorded.  Each corruption below damages a synthesized swipe of random track content
(track 1 or 2, 30 cm/s, SNR 30 dB unless the corruption sets the noise); every capture is
decoded and its reads sorted into correct (valid, right text), rejected (no read or not valid)
and false accepts (valid, wrong text).

Corruptions:

* ``flips k``: k recorded bits flipped at random in the characters (the card was written or
  worn wrong).  One flip is corrected by parity and LRC together; more are caught unless they
  happen to cancel in every check.
* ``flips in one char``: two bits of one character flipped: parity misses it, the LRC must not.
* ``dropout``: the signal attenuated to 5 % over 1–3 cells in the data (a scratch).
* ``extra pulses k``: k pulse-shaped blips of random sign at random times in the data.
* ``SNR x dB``: heavy white noise.
* ``jitter 0.2``: transition jitter far beyond the ±8 % target.

Usage: python scripts/bench_false_accept.py [--trials N] [--workers W] [--seed S]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from concurrent.futures import ProcessPoolExecutor

import numpy as np
from rich.console import Console
from rich.table import Table

from readchan.decode import DecodeSettings, decode_channel
from readchan.formats import TRACKS
from readchan.synth import Impairments, SpeedProfile, SynthSpec, TrackContent, synthesize
from readchan.synth.card import track_content
from readchan.sweep import random_text

CORRUPTIONS = ("flips 2", "flips 3", "flips 4", "flips in one char", "dropout", "extra pulses 1",
               "extra pulses 3", "SNR 10 dB", "SNR 8 dB", "jitter 0.2")
SPEED_CM_S = 30.0


def trial(seed: int, ci: int, track: int, k: int) -> tuple[int, int, int]:
    """(correct, rejected, false accepts) of one corrupted capture."""
    name = CORRUPTIONS[ci]
    rng = np.random.default_rng(np.random.SeedSequence([seed, ci, track, k]))
    spec_t = TRACKS[track]
    truth = random_text(track, int(rng.integers(8, spec_t.max_chars - 3)), rng)
    tc = track_content(truth, track=track)
    bits = tc.bits.copy()
    bpc = spec_t.fmt.bits_per_char
    n_codes = (bits.size - spec_t.leading_zeros - spec_t.trailing_zeros) // bpc
    first = spec_t.leading_zeros
    if name.startswith("flips"):
        if name == "flips in one char":
            c = int(rng.integers(1, n_codes - 2))          # not a sentinel, not the LRC
            where = first + c * bpc + rng.choice(spec_t.fmt.data_bits, 2, replace=False)
        else:
            where = first + rng.choice(n_codes * bpc, int(name.split()[1]), replace=False)
        bits[where] ^= 1
    imp = Impairments(snr_db=float(name.split()[1]) if name.startswith("SNR") else 30.0,
                      jitter=0.2 if name.startswith("jitter") else 0.0)
    res = synthesize(SynthSpec(tracks=(TrackContent(bits, tc.density_bpi),), speed=SpeedProfile(SPEED_CM_S),
                               impairments=imp, seed=int(rng.integers(2**31))))
    x = res.samples[:, 0].copy()
    rate = res.rate_hz
    tt = res.transition_times_s[0]
    cells = res.cell_times_s[0][0]
    cell_s = float(np.median(np.diff(cells)))
    data = tt[(tt > cells[first]) & (tt < cells[first + n_codes * bpc])]
    if name == "dropout":
        t0 = float(rng.choice(data))
        a, b = int((t0 - 0.5 * cell_s) * rate), int((t0 + rng.uniform(1.0, 3.0) * cell_s) * rate)
        x[max(a, 0):b] *= 0.05
    elif name.startswith("extra pulses"):
        t = np.arange(x.size) / rate
        w = res.pw50_m / (SPEED_CM_S * 0.01)
        for _ in range(int(name.split()[2])):
            t0 = rng.uniform(data[0], data[-1])
            x += rng.choice([-1.0, 1.0]) * res.median_peak[0] / (1 + (2 * (t - t0) / w) ** 2)
    cr = decode_channel(x, rate, DecodeSettings(fmt=spec_t.fmt, track=track), source="<corrupt>")
    valid = [r.frame.text for r in cr.reads if r.valid]
    fa = sum(v != truth for v in valid)
    ok = int(bool(valid) and valid[0] == truth)
    return ok, int(not valid), fa


def _chunk(seed: int, jobs: list[tuple[int, int, int]]) -> list[tuple[int, tuple[int, int, int]]]:
    return [(ci, trial(seed, ci, tr, k)) for ci, tr, k in jobs]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=200, help="captures per corruption (default 200)")
    ap.add_argument("--workers", type=int, default=None, help="worker processes (default all cores)")
    ap.add_argument("--seed", type=int, default=0, help="base seed (default 0)")
    args = ap.parse_args(argv)
    if args.trials < 1:
        print("bench_false_accept: error: --trials must be ≥ 1", file=sys.stderr)
        return 2
    workers = args.workers or os.cpu_count() or 1
    jobs = [(ci, 1 + (k % 2), k) for ci in range(len(CORRUPTIONS)) for k in range(args.trials)]
    size = max(1, -(-len(jobs) // (8 * workers)))
    chunks = [jobs[a:a + size] for a in range(0, len(jobs), size)]
    tally = np.zeros((len(CORRUPTIONS), 3), int)
    t0 = time.perf_counter()
    with ProcessPoolExecutor(max_workers=workers) as pool:
        for done in pool.map(_chunk, [args.seed] * len(chunks), chunks):
            for ci, r in done:
                tally[ci] += r
    elapsed = time.perf_counter() - t0
    out = Console(width=120) if not sys.stdout.isatty() else Console()
    t = Table(title=f"corrupted captures, {args.trials} per corruption (tracks 1 and 2 alternating)")
    for col in ("corruption", "correct", "rejected", "false accepts"):
        t.add_column(col, justify="left" if col == "corruption" else "right")
    for name, (ok, rej, fa) in zip(CORRUPTIONS, tally):
        t.add_row(name, str(ok), str(rej), str(fa))
    t.add_section()
    t.add_row("all", *(str(v) for v in tally.sum(axis=0)))
    out.print(t)
    out.print(f"{elapsed:.1f} s on {workers} worker(s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
